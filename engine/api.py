"""The engine for scripts: open a library, fit it, rank it, write the shortlist.

``import engine`` gives these names (and the installed package the same): ``Library``,
``Criteria``, ``OperatingWindow``, ``MountDesign``, ``fit_library``, ``fitted_library``,
``rank_library`` and ``write_shortlist``. The command line (``quietgrade``,
``python -m engine``) is built on them.

Examples
--------
A whole selection, from the demo data to a shortlist file:

>>> import tempfile
>>> from pathlib import Path
>>> from engine import Criteria, Library, MountDesign, OperatingWindow, rank_library
>>> from engine import write_shortlist
>>> from engine.library.demo import load_demo
>>> folder = Path(tempfile.mkdtemp())
>>> library = Library(str(folder / "library.sqlite"))
>>> len(load_demo(library).materials_added)
14
>>> window = OperatingWindow(temp_range=(-20.0, 45.0), freq_range=(10.0, 100.0))
>>> pads = MountDesign(mass_kg=180.0, mounts=4, thickness_mm=25.0, target_fn_Hz=10.0)
>>> result = rank_library(library, Criteria(window=window, mount=pads))
>>> len(result.grades)
14
>>> best = result.shortlist[0]
>>> best.rank, best.indices["worst_transmissibility"] < 1.0
(1, True)
>>> write_shortlist(result, folder / "shortlist.csv", library).name
'shortlist.csv'
"""

from __future__ import annotations

from engine.base.errors import FitError
from engine.curves.mountcheck import MountDesign
from engine.curves.window import OperatingWindow
from engine.library.fits import fit_library, fitted_library
from engine.library.store import Library
from engine.output.export import write_shortlist
from engine.selection.criteria import Criteria
from engine.selection.ranking import rank, working_sweeps
from engine.selection.results import RankResult
from engine.selection.spread import rank_spread

__all__ = [
    "Criteria",
    "Library",
    "MountDesign",
    "OperatingWindow",
    "fit_library",
    "fitted_library",
    "rank_library",
    "write_shortlist",
]


def rank_library(
    library: Library,
    criteria: Criteria | None = None,
    *,
    intervals: bool = True,
    processes: int | None = None,
) -> RankResult:
    """Fit every grade of ``library`` (cached fits are reused) and rank them.

    Parameters
    ----------
    library : Library
        The material library to rank.
    criteria : Criteria, optional
        Window, indices, constraints and mount design; ``Criteria()`` by default.
    intervals : bool, default True
        Add rank and index intervals from the posterior draws of the fits to the
        leading grades (:func:`engine.selection.spread.rank_spread`), as the command
        line's ``rank`` does.
    processes : int, optional
        Worker processes for fits missing from the cache (both cores by default).

    Returns
    -------
    RankResult
        Passing grades in rank order, then the excluded ones, each with its reason;
        grades whose fit failed are in ``fit_errors``.

    Raises
    ------
    FitError
        When no grade of the library has a master curve.

    Examples
    --------
    >>> import tempfile
    >>> from pathlib import Path
    >>> from engine import Library, rank_library
    >>> from engine.base.errors import FitError
    >>> empty = Library(str(Path(tempfile.mkdtemp()) / "empty.sqlite"))
    >>> try:
    ...     rank_library(empty)
    ... except FitError as exc:
    ...     print(exc)
    no fitted grades in the library ...empty.sqlite
    """
    criteria = Criteria() if criteria is None else criteria
    fitted = fitted_library(library, processes=processes)
    curves, errors = fitted.curves, fitted.errors
    if not curves:
        raise FitError(f"no fitted grades in the library {library.display_location}")
    materials = {m.id: m for m in library.materials()}
    sweeps = working_sweeps(library, criteria)
    result = rank(curves, materials, criteria, errors, bank=fitted.bank, amplitude_sweeps=sweeps)
    return rank_spread(result, curves, materials) if intervals else result
