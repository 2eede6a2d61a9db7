"""quietgrade engine: records, physics, ranking and export for damping-polymer selection.

The names of :mod:`engine.api` (``Library``, ``Criteria``, ``OperatingWindow``,
``MountDesign``, ``fit_library``, ``fitted_library``, ``rank_library``,
``write_shortlist``) are loaded on
first use, so that ``import engine`` and a command line that needs none of them stay
quick. Nothing in this package imports Streamlit; the dashboard calls it.
"""

from engine.base.version import __version__

__all__ = [
    "Criteria",
    "Library",
    "MountDesign",
    "OperatingWindow",
    "__version__",
    "fit_library",
    "fitted_library",
    "rank_library",
    "write_shortlist",
]


def __getattr__(name: str):
    if name in __all__:
        from engine import api

        return getattr(api, name)
    raise AttributeError(f"module 'engine' has no attribute {name!r}")
