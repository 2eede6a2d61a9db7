"""The Map page's callbacks: a box, a lasso or the search into the comparison set.

They live in a module of their own, not in the page's script: a callback is kept with
its widget for as long as the session is, and a function defined in a page script keeps
that script's whole namespace alive with it (the ranking, the figure, the plan), one
per session, a closed page's too, while Streamlit keeps it (about 120 MB at 10,000
grades each).
"""

import streamlit as st

from dashboard.charts.map import find_grades, selected_grades
from dashboard.common import context


def _into_set(picked: list[str]) -> None:
    """``picked`` becomes the comparison set, or joins it when "Adds to set" is on."""
    if not picked:
        return
    before = list(st.session_state.get("compare", []))
    if st.session_state.get("map_adds"):
        picked = before + [g for g in picked if g not in before]
    st.session_state["compare"] = picked


def take_selection() -> None:
    """A box or lasso on the map -> the comparison set (every grade shown with a path
    point inside, drawn or not), read from the ranking the map was drawn from."""
    event = st.session_state.get("map_chart")
    result = context().ranking()
    if not event or result is None:
        return
    show_excluded = bool(st.session_state.get("map_show_excluded", True))
    _into_set(selected_grades(result, event.get("selection") or {}, show_excluded))


def take_found() -> None:
    """The grades the search finds join the comparison set."""
    result = context().ranking()
    if result is None:
        return
    found, _ = find_grades(result, st.session_state.get("map_find", ""))
    before = list(st.session_state.get("compare", []))
    st.session_state["compare"] = before + [g for g in found if g not in before]
