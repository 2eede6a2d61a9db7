"""The library, its master curves and the ranking, cached for the dashboard.

Caches are keyed on the library location and :meth:`engine.library.store.Library.version`, so
any change to the library (an import, an edit, a deletion) refits and reranks. Results
hold numpy arrays, dataclasses and formula callables, so they are kept as resources
(shared, never pickled) and must be treated as read-only; so are the map figures kept
here, which Streamlit only reads when it sends them.
"""

from __future__ import annotations

import gc
import json
import logging
import threading
from collections import OrderedDict
from collections.abc import Callable, Mapping

import numpy as np
import plotly.graph_objects as go
import streamlit as st

from dashboard.charts.map import CrowdPlan, crowd_plan
from dashboard.charts.map import map_figure as draw_map
from engine.base.memory import ARENA_SWITCH, SERVER_ARENAS, one_arena
from engine.curves.mastercurve import MasterCurve
from engine.library.childfit import CHILD_FROM_GRADES, fit_in_child
from engine.library.demo import DEMO_DIR
from engine.library.fits import FittedLibrary, fitted_library, master_curve, plan_fits
from engine.library.importer import import_files
from engine.library.store import Library, Material
from engine.output.mapfigure import shown_rows
from engine.selection.ranking import Criteria, RankResult, rank, working_sweeps

log = logging.getLogger(__name__)


@st.cache_resource(show_spinner=False)
def note_server_memory() -> bool:
    """Say once in the server's log when it was started without one allocator arena
    (``make run`` starts it with one: engine.base.memory.server_environment); True
    when it has one."""
    if one_arena():
        return True
    log.warning(
        "started without %s=%s: a server with a large library reranks slower and keeps "
        "more memory (start it with `make run`, or set %s=%s before `streamlit run`)",
        ARENA_SWITCH, SERVER_ARENAS, ARENA_SWITCH, SERVER_ARENAS,
    )  # fmt: skip
    return False


@st.cache_resource(show_spinner=False)
def library_at(location: str) -> Library:
    """One :class:`Library` object per location, shared by all sessions."""
    return Library(location)


def load_demo_if_empty(library: Library) -> bool:
    """Import the invented demo grades into a library that has never held anything."""
    if not library.never_used():
        return False
    import_files(
        library,
        [DEMO_DIR / "catalog.csv"],
        [DEMO_DIR / "sweeps.csv"],
        [DEMO_DIR / "amplitude.csv"],
    )
    return True


@st.cache_resource(show_spinner=False)
def _fit_store() -> dict:
    return {}


def fits(library: Library) -> tuple[Mapping[str, MasterCurve], dict[str, str]]:
    """Master curves (decoded on first use) and fit errors of every grade; shows a
    progress bar while fitting."""
    found = fitted(library)
    return found.curves, found.errors


def fitted(library: Library) -> FittedLibrary:
    """The library's fits with their curve bank (:func:`engine.library.fits.fitted_library`),
    kept per library version."""
    key = (library.location, library.version())
    store = _fit_store()
    if key in store:
        return store[key]
    bar = st.progress(0.0, text="Fitting master curves")

    def progress(done: int, total: int) -> None:
        bar.progress(
            done / total if total else 1.0, text=f"Fitting master curves: {done} of {total}"
        )

    try:
        plan = plan_fits(library)
        if plan.to_stack > CHILD_FROM_GRADES:
            # Thousands of grades to stack: in a child process, which stores the bank
            # record (engine.library.childfit), so that this long-lived process reads
            # the record and does not keep what stacking took.
            why = fit_in_child(library, progress=progress)
            if why is not None:
                log.info("%s: stacking the curve bank here instead", why)
            plan = plan_fits(library)  # the record as the child left it
        result = fitted_library(library, progress=progress, plan=plan)
    finally:
        bar.empty()
    for old in [k for k in store if k[0] == library.location]:
        del store[old]
    store[key] = result
    _set_aside_from_collections()
    return result


def _set_aside_from_collections() -> None:
    """Keep the objects alive now out of Python's cyclic garbage collections.

    The fits of a large library are long-lived and many (at 10,000 grades, once every
    curve is decoded, about 500,000 objects, none in a reference cycle): every full
    collection would walk them, 0.2 s each. Frozen, they are left alone; frozen
    objects are still freed when their last reference goes. Called when a library's
    fits are (re)loaded: what was frozen before is thawed and collected first, so that
    garbage frozen by the last call cannot stay for good.
    """
    gc.unfreeze()
    gc.collect()
    gc.freeze()


@st.cache_resource(max_entries=4, show_spinner=False)
def catalog(location: str, version: int) -> dict[str, Material]:
    """The catalog rows of the library's grades by id, read once per library version
    (a new window reranks without reading them again)."""
    return {m.id: m for m in library_at(location).materials()}


# Rankings kept for going back to a window seen before: as many as hold this many
# grades in all (a ranking of 10,000 grades keeps about 120 MB at the default window,
# 260 MB at 41 x 13), at most RANKINGS_KEPT of any size.
RANKINGS_KEPT_GRADES = 40_000
RANKINGS_KEPT = 32
# A full garbage collection with a large library in memory takes 0.1-0.2 s; it is run
# this long after the last ranking, when the page has been drawn, instead of at a
# moment of the interpreter's choosing inside the next rerun.
IDLE_COLLECT_S = 2.0


class _Rankings:
    """The kept rankings, newest last, within :data:`RANKINGS_KEPT_GRADES` grades."""

    def __init__(self) -> None:
        self.lock = threading.Lock()
        self.kept: OrderedDict[tuple, RankResult] = OrderedDict()
        self.collector: threading.Timer | None = None

    def get(self, key: tuple) -> RankResult | None:
        with self.lock:
            found = self.kept.get(key)
            if found is not None:
                self.kept.move_to_end(key)
            return found

    def make_room(self, key: tuple, grades: int) -> None:
        """Let go of the oldest rankings (and those of another version of the same
        library) that a new ranking of ``grades`` grades under ``key`` would push out,
        before it is made: the memory they free is there for its arrays, instead of
        pages the process has never touched (engine.base.memory)."""
        with self.lock:
            self._drop_other_versions(key)
            self._keep_within(extra=1, extra_grades=grades)

    def put(self, key: tuple, result: RankResult) -> None:
        with self.lock:
            self._drop_other_versions(key)
            self.kept[key] = result
            self.kept.move_to_end(key)
            self._keep_within(extra=0, extra_grades=0)

    def _drop_other_versions(self, key: tuple) -> None:
        for old in [k for k in self.kept if k[0] == key[0] and k[1] != key[1]]:
            del self.kept[old]

    def _keep_within(self, extra: int, extra_grades: int) -> None:
        """Drop the oldest until ``extra`` more rankings of ``extra_grades`` grades fit
        the budgets; the newest kept one stays (a ranking over the budget alone too)."""
        while len(self.kept) > 1 - extra and (
            len(self.kept) + extra > RANKINGS_KEPT
            or sum(len(r.grades) for r in self.kept.values()) + extra_grades > RANKINGS_KEPT_GRADES
        ):
            self.kept.popitem(last=False)

    def clear(self) -> None:
        with self.lock:
            self.kept.clear()

    def collect_when_idle(self) -> None:
        """A full collection :data:`IDLE_COLLECT_S` after the last call (a new call
        puts it off again)."""
        with self.lock:
            if self.collector is not None:
                self.collector.cancel()
            self.collector = threading.Timer(IDLE_COLLECT_S, gc.collect)
            self.collector.daemon = True
            self.collector.start()


@st.cache_resource(show_spinner=False)
def _rankings() -> _Rankings:
    return _Rankings()


def _ranked(location: str, version: int, criteria_key: str, criteria: Criteria) -> RankResult:
    """The ranking under ``criteria``, kept per ``criteria_key`` (their file form)."""
    store = _rankings()
    key = (location, version, criteria_key)
    found = store.get(key)
    if found is not None:
        return found
    library = library_at(location)
    fitted_now = _fit_store().get((location, version)) or fitted_library(library)
    materials = catalog(location, version)
    sweeps = working_sweeps(library, criteria)
    store.make_room(key, len(materials))  # a result per catalog grade
    result = rank(
        fitted_now.curves,
        materials,
        criteria,
        fitted_now.errors,
        bank=fitted_now.bank,
        amplitude_sweeps=sweeps,
    )
    store.put(key, result)
    store.collect_when_idle()
    return result


def ranking_key(library: Library, criteria: Criteria) -> str:
    """A name for the ranking of ``library`` as it is now under ``criteria``."""
    return json.dumps([library.location, library.version(), criteria.to_dict()], sort_keys=True)


def ranked(library: Library, criteria: Criteria) -> RankResult:
    """The ranking of the library's fitted grades under ``criteria`` (cached)."""
    fits(library)
    key = json.dumps(criteria.to_dict(), sort_keys=True)
    return _ranked(library.location, library.version(), key, criteria)


@st.cache_resource(max_entries=16, show_spinner=False)
def map_figure(
    result_key: str,
    chosen: tuple[str, ...],
    show_excluded: bool,
    _result: RankResult,
    _colours: dict[str, str],
    banded: tuple[str, ...] = (),
    _curves: Mapping[str, MasterCurve] | None = None,
    guides: str = "ticks",
) -> tuple[go.Figure, CrowdPlan]:
    """The map of a ranking (:func:`dashboard.charts.map.map_figure`) and the plan of
    which grades it draws (:func:`dashboard.charts.map.crowd_plan`), kept per view.

    ``result_key`` (from :func:`ranking_key`) stands for the ranking and for the grade
    colours, which follow from the same library version; both are passed unhashed, and
    so are the master curves (of the same version) whose 95 % intervals are drawn for
    the grades ``banded``. Going back to a window seen before then redraws nothing.
    """
    curves = _curves or {}
    plan = crowd_plan(_result, shown_rows(_result, show_excluded), chosen)
    figure = draw_map(
        _result,
        _colours,
        list(chosen),
        show_excluded=show_excluded,
        bands={g: curves[g] for g in banded if g in curves},
        guides=guides,
        plan=plan,
    )
    return figure, plan


@st.cache_resource(max_entries=64, show_spinner=False)
def curve_at_reference(location: str, version: int, material_id: str, reference_C: float):
    """The master curve of a grade refitted at ``reference_C`` [degC] (kept per version).

    The fit is cached in the library as well (:func:`engine.library.fits.master_curve`), so a
    reference chosen before costs one read after a restart.
    """
    return master_curve(library_at(location), material_id, reference_C)


@st.cache_resource(max_entries=48, show_spinner=False)
def kept_figure(view: str, _draw: Callable[[], go.Figure]) -> go.Figure:
    """A figure drawn once per ``view``, a name for everything it is drawn from.

    For the Curves page, whose figures evaluate the 95 % intervals (a pass over every
    posterior draw of each grade): a rerun that changes nothing they show reuses them.
    """
    return _draw()


@st.cache_data(max_entries=256, show_spinner=False)
def measured_points(location: str, version: int, material_id: str) -> np.ndarray:
    """The newest measured points of a grade: degC, Hz, Pa, loss factor (n x 4)."""
    return library_at(location).latest_points(material_id)[1]
