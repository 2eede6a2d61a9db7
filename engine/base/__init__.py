"""Layer 0, the floor: errors, units, thread blocks, the caution text, the catalog field
table and the defaults every front end shares. Imports nothing else from the engine.
"""
