"""quietgrade dashboard: ``streamlit run dashboard/app.py``.

The entry script draws what every page shares (the design case in the sidebar, the
caution, the comparison set), ranks the library and then runs the chosen page from
``dashboard/views/``. The library is ``QUIETGRADE_DB`` or the user's default location.
"""

from __future__ import annotations

from pathlib import Path

import streamlit as st

from dashboard import case, data, sidebar
from dashboard.common import CONTEXT_KEY, Context, plain
from engine.base.caution import CAUTION
from engine.base.errors import LibraryError, QuietgradeError
from engine.library.fits import one_line
from engine.library.store import default_location
from engine.output.palette import grade_colours

VIEWS = Path(__file__).resolve().parent / "views"
PAGES = (
    ("map.py", "Map", "map"),
    ("curves.py", "Curves", "curves"),
    ("mount.py", "Mount", "mount"),
    ("system.py", "Machine", "machine"),
    ("shortlist.py", "Shortlist", "shortlist"),
    ("library.py", "Library", "library"),
)


def _take_compare_pick() -> None:
    st.session_state["compare"] = list(st.session_state.get("compare_pick", []))


def _comparison_set(ids: list[str], shortlist: list[str]) -> list[str]:
    """The comparison set widget above every page; returns the current set."""
    if "compare" not in st.session_state or not st.session_state.get("_compare_seeded"):
        st.session_state["_compare_seeded"] = True
        if not st.session_state.get("compare"):
            st.session_state["compare"] = shortlist[:3]
    current = [g for g in st.session_state.get("compare", []) if g in ids]
    st.session_state["compare"] = current
    st.session_state["compare_pick"] = current
    st.multiselect(
        "Comparison set",
        options=ids,
        key="compare_pick",
        on_change=_take_compare_pick,
        placeholder="choose grades, or draw a box or lasso on the map",
        help="Highlighted on every chart; the Curves and Mount pages show these grades.",
    )
    return current


def _failure(what: str, exc: Exception) -> str:
    """A failure of the fit or ranking step as one line: the engine's reason, or what
    failed and its message."""
    if isinstance(exc, QuietgradeError):
        return one_line(f"{what}: {exc}")
    return one_line(f"{what}: an unexpected {type(exc).__name__} ({one_line(str(exc), 160)})")


def main() -> None:
    st.set_page_config(page_title="quietgrade", layout="wide", initial_sidebar_state=340)
    location = default_location()
    try:
        library = data.library_at(location)
        if data.load_demo_if_empty(library):
            st.session_state["_demo_loaded"] = True
    except (LibraryError, QuietgradeError) as exc:
        st.error(f"cannot open the library: {plain(exc)}")
        st.caption(CAUTION)
        st.stop()
    fit_problem = None
    try:
        curves, fit_errors = data.fits(library)
    except Exception as exc:  # noqa: BLE001 - the Library page must stay open to mend it
        curves, fit_errors = {}, {}
        fit_problem = _failure("the master curves could not be fitted", exc)

    sidebar.init_state()
    criteria, problem = sidebar.render()

    navigation = st.navigation(
        [
            st.Page(str(VIEWS / file), title=title, url_path=path, default=path == "map")
            for file, title, path in PAGES
        ],
        position="top",
    )
    with st.container(border=True):
        st.caption("**Caution.** " + CAUTION)
    if st.session_state.get("_demo_loaded"):
        st.info(
            f"The library at {plain(library.location)} was empty: the invented demo grades "
            "(demo_materials/) were loaded. They are no real products."
        )
    for note in st.session_state.get("_link_notes", []):
        st.warning(f"link parameter ignored: {plain(note)}")

    result, result_key = None, None
    if fit_problem is not None:
        problem = fit_problem
    elif criteria is not None and curves:
        try:
            result = data.ranked(library, criteria)
            result_key = data.ranking_key(library, criteria)
        except QuietgradeError as exc:
            problem = str(exc)
        except Exception as exc:  # noqa: BLE001 - every page but the ranking's keeps working
            problem = _failure("no ranking", exc)
    elif criteria is not None:
        problem = "the library holds no fitted grade: import data on the Library page"

    ids = sorted(result.window_props.ids) if result is not None else sorted(curves)
    shortlist = [g.id for g in result.shortlist] if result is not None else []
    compare = (
        _comparison_set(ids, shortlist)
        if navigation.url_path != "library"
        else [g for g in st.session_state.get("compare", []) if g in ids]
    )
    if problem:
        st.error(plain(problem))

    st.session_state[CONTEXT_KEY] = Context(
        library=library,
        curves=curves,
        fit_errors=fit_errors,
        criteria=criteria,
        result=result,
        result_key=result_key,
        problem=problem,
        compare=compare,
        # The ranked grades' colours, as the HTML report gives them (engine.output.palette).
        colours=grade_colours(curves),
    )
    try:
        query = case.to_query({**st.session_state.to_dict(), "compare": compare})
    except QuietgradeError:
        query = None
    if query is not None and st.query_params.to_dict() != query:
        st.query_params.from_dict(query)
    navigation.run()


main()
