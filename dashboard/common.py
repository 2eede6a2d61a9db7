"""What the entry script hands to every page: library, curves, ranking, comparison set."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import streamlit as st

from dashboard import data
from engine.base.errors import LibraryError
from engine.curves.mastercurve import MasterCurve
from engine.library.store import Library
from engine.selection.ranking import Criteria, RankResult

CONTEXT_KEY = "_context"
MISSING = "–"  # shown in tables where a value is unknown or not computed
SHOWN_LIMIT = 8  # grades of the comparison set drawn on the Curves and Mount pages
SCREENING_CAPTION = (
    "**Material screening only.** No mount is checked, so this ranking says nothing about "
    "isolation (transmissibility, resonance, the drift of the natural frequency). Switch on "
    "'Check a mount' in the sidebar (Mount) to rank the grades as mounts."
)


@dataclass
class Context:
    library: Library
    curves: dict[str, MasterCurve]
    fit_errors: dict[str, str]
    criteria: Criteria | None
    result: RankResult | None
    problem: str | None
    compare: list[str]
    colours: dict[str, str]
    result_key: str | None = None  # names the ranking for the figure caches (data.py)
    notes: list[str] = field(default_factory=list)

    def ranking_name(self) -> str:
        """``result_key``, set whenever ``result`` is (the entry script names each ranking)."""
        if self.result_key is None:
            raise RuntimeError("the ranking has no name for the figure caches")
        return self.result_key

    def points(self, material_id: str) -> np.ndarray | None:
        """Measured points of a grade (degC, Hz, Pa, loss factor), or None."""
        try:
            return data.measured_points(self.library.location, self.library.version(), material_id)
        except LibraryError:  # a grade without data: the charts show the model only
            return None


def take_map_selection() -> None:
    """Box or lasso selection on the map -> the comparison set."""
    event = st.session_state.get("map_chart")
    if not event:
        return
    picked: list[str] = []
    for point in event.get("selection", {}).get("points", []):
        custom = point.get("customdata")
        gid = custom[0] if isinstance(custom, list | tuple) and custom else None
        if gid and gid not in picked:
            picked.append(gid)
    if not picked:
        return
    if st.session_state.get("map_adds"):
        picked = list(st.session_state.get("compare", [])) + [
            g for g in picked if g not in st.session_state.get("compare", [])
        ]
    st.session_state["compare"] = picked


def context() -> Context:
    return st.session_state[CONTEXT_KEY]


def need_result(ctx: Context) -> RankResult | None:
    """The ranking, or a message saying why there is none (and None)."""
    if ctx.result is None:
        st.error(ctx.problem or "no ranking: the library holds no fitted grade")
        return None
    return ctx.result


def screening_caption(result: RankResult) -> None:
    """Say so above a ranking of an isolation mount made without a mount check."""
    if result.criteria.screening_only:
        st.caption(SCREENING_CAPTION)
