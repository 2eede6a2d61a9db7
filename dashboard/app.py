"""quietgrade dashboard: ``streamlit run dashboard/app.py``.

The entry script draws what every page shares (the design case in the sidebar, the
caution, the comparison set), ranks the library and then runs the chosen page from
``dashboard/views/``. The library is ``QUIETGRADE_DB`` or the user's default location.
"""

from __future__ import annotations

import runpy
from pathlib import Path

import streamlit as st

from dashboard import case, data, sidebar
from dashboard.common import CONTEXT_KEY, Context, plain
from engine.base.caution import CAUTION, CAUTION_LINE
from engine.base.errors import LibraryError, QuietgradeError
from engine.base.memory import arrange_memory
from engine.library.fits import one_line
from engine.library.store import default_location
from engine.output.palette import grade_colours, with_set_colours

# The caution's one line, above every page; the expander under it holds the whole text.

# Less empty space above the page's first line, so its chart starts higher. Below
# SIDEBAR_OVERLAY_PX the sidebar floats over the page instead of narrowing it (Streamlit
# folds it away on its own only below its smaller breakpoint): the page keeps the
# window's whole width and the sidebar's own button folds it.
SIDEBAR_OVERLAY_PX = 1000
COMPACT_STYLE = """<style>
[data-testid="stMainBlockContainer"] { padding-top: 3.6rem; padding-bottom: 2rem; }
[data-testid="stMainBlockContainer"] h2 { padding-top: 0.2rem; padding-bottom: 0.3rem; }
[data-testid="stElementContainer"]:has(script[data-fold]) { display: none; }
@media (max-width: OVERLAY_PXpx) {
  section[data-testid="stSidebar"] {
    position: fixed !important; top: 0; left: 0; height: 100vh; z-index: 999990;
    box-shadow: 0 0 18px rgba(35, 41, 46, 0.25);
  }
  [data-testid="stMainBlockContainer"] { padding-left: 1.5rem; padding-right: 1.5rem; }
}
</style>""".replace("OVERLAY_PX", str(SIDEBAR_OVERLAY_PX))
# On a window that narrow the sidebar starts folded, once per browser tab (its own button
# opens it again, and then it stays open).
FOLD_NARROW = """<script data-fold="narrow">
(function () {
  if (window.innerWidth > OVERLAY_PX || sessionStorage.getItem("quietgrade-folded")) return;
  sessionStorage.setItem("quietgrade-folded", "1");
  function fold(tries) {
    const side = document.querySelector('section[data-testid="stSidebar"]');
    const button = document.querySelector('[data-testid="stSidebarCollapseButton"] button');
    if (side && button && side.dataset.collapsed === "false") button.click();
    else if (tries > 0) setTimeout(function () { fold(tries - 1); }, 100);
  }
  fold(100);
})();
</script>""".replace("OVERLAY_PX", str(SIDEBAR_OVERLAY_PX))
VIEWS = Path(__file__).resolve().parent / "views"
PAGES = (
    ("map.py", "Map", "grades-map"),  # served at / (and /map, below)
    ("curves.py", "Curves", "curves"),
    ("mount.py", "Mount", "mount"),
    ("system.py", "Machine", "machine"),
    ("shortlist.py", "Shortlist", "shortlist"),
    ("library.py", "Library", "library"),
)


def _map_at_its_name() -> None:
    """The Map page at ``/map`` as well as at ``/`` (the default page has no name of its
    own in the address; a hidden page runs the same script under the name)."""
    runpy.run_path(str(VIEWS / "map.py"), run_name="__page__")


def _take_compare_pick() -> None:
    st.session_state["compare"] = list(st.session_state.get("compare_pick", []))


def _comparison_set(ids: list[str], shortlist: list[str], where) -> list[str]:
    """The comparison set widget above every page (one line, in ``where``); returns the
    current set."""
    if "compare" not in st.session_state or not st.session_state.get("_compare_seeded"):
        st.session_state["_compare_seeded"] = True
        if not st.session_state.get("compare"):
            st.session_state["compare"] = shortlist[:3]
    current = [g for g in st.session_state.get("compare", []) if g in ids]
    st.session_state["compare"] = current
    st.session_state["compare_pick"] = current
    where.multiselect(
        "Comparison set",
        options=ids,
        key="compare_pick",
        on_change=_take_compare_pick,
        placeholder="comparison set: choose grades, or draw a box or lasso on the map",
        help="The comparison set: highlighted on every chart; the Curves and Mount pages "
        "show these grades.",
        label_visibility="collapsed",
    )
    return current


def _failure(what: str, exc: Exception) -> str:
    """A failure of the fit or ranking step as one line: the engine's reason, or what
    failed and its message."""
    if isinstance(exc, QuietgradeError):
        return one_line(f"{what}: {exc}")
    return one_line(f"{what}: an unexpected {type(exc).__name__} ({one_line(str(exc), 160)})")


def main() -> None:
    arrange_memory()  # freed arrays reused, new ones on ordinary pages (once per process)
    data.note_server_memory()  # a log line if the server has more than one arena
    # "auto": open on a wide window, folded away on a narrow one (a phone, half a screen).
    st.set_page_config(page_title="quietgrade", layout="wide", initial_sidebar_state="auto")
    st.html(COMPACT_STYLE)
    st.html(FOLD_NARROW, unsafe_allow_javascript=True)
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
            st.Page(str(VIEWS / file), title=title, url_path=path, default=path == "grades-map")
            for file, title, path in PAGES
        ]
        + [st.Page(_map_at_its_name, title="Map", url_path="map", visibility="hidden")],
        position="top",
    )
    # One line above every page: the comparison set and the caution, its full text one
    # click away (the README and every exported file carry it whole).
    pick, warn = st.columns([5, 4], vertical_alignment="top")
    with warn.expander(CAUTION_LINE):
        st.caption("**Caution.** " + CAUTION)
    if st.session_state.get("_demo_loaded"):
        st.info(
            f"The library at {plain(library.display_location)} was empty: the invented demo grades "
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
        _comparison_set(ids, shortlist, pick)
        if navigation.url_path != "library"
        else [g for g in st.session_state.get("compare", []) if g in ids]
    )
    if problem:
        st.error(plain(problem))

    st.session_state[CONTEXT_KEY] = ctx = Context(
        library=library,
        curves=curves,
        fit_errors=fit_errors,
        criteria=criteria,
        result=result,
        result_key=result_key,
        problem=problem,
        compare=compare,
        # The ranked grades' colours, as the HTML report gives them, and the comparison
        # set's own colour-blind-safe ones (engine.output.palette).
        colours=with_set_colours(grade_colours(curves), compare),
    )
    try:
        query = case.to_query({**st.session_state.to_dict(), "compare": compare})
    except QuietgradeError:
        query = None
    if query is not None and st.query_params.to_dict() != query:
        st.query_params.from_dict(query)
    try:
        navigation.run()
    finally:
        ctx.let_go()


main()
