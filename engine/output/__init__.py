"""Layer 5, files for people and programs: shortlist rows, CSV, XLSX, HTML report, its
figures and palette, and the fitted model file. Imports the layers below.
"""
