"""Layer 3, records: the material library (all SQL), its migrations, the importer, cached
fits, the demo data. Imports the layers below.
"""
