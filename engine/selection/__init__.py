"""Layer 4, choosing: criteria, constraints, scores, Pareto flags, reasons and rank
intervals. Imports the layers below.
"""
