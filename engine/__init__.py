"""quietgrade engine: records, physics, ranking and export for damping-polymer selection.

Nothing in this package imports Streamlit; the dashboard calls it.
"""

__version__ = "0.3.0"
