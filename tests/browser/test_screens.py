"""The answer first, in a real browser at 1280 x 900: on each page the chart or table that
answers it starts on the first screen; the caution is one line whose expander holds the
whole text; the Map is served at / and at /map. Skipped where chromium is absent."""

from __future__ import annotations

import time

import numpy as np
import pytest

from engine.base.caution import CAUTION
from tests.browser.driving import STATUS, steady

ANSWER = (
    '[data-testid="stMain"] [data-testid="stPlotlyChart"], '
    '[data-testid="stMain"] [data-testid="stDataFrame"]'
)
PAGES = ("", "map", "mount", "shortlist", "curves", "machine")

pytestmark = pytest.mark.browser  # the shared browser and dashboard of tests/browser


@pytest.fixture
def url(app_url):
    """The shared dashboard of tests/browser serving the demo library (conftest)."""
    return app_url[0]


@pytest.mark.parametrize("path", PAGES)
def test_the_answer_starts_on_the_first_screen(browser, url, path):
    page = browser.new_page(viewport={"width": 1280, "height": 900})
    try:
        page.goto(f"{url}/{path}", timeout=120_000)
        page.wait_for_selector(ANSWER, timeout=120_000)
        # The page as it stands once its run is over and its layout has stopped moving
        # (on a first visit the page above the chart is still being laid out).
        page.locator(STATUS).wait_for(state="detached", timeout=120_000)
        top = steady(
            page,
            f"() => document.querySelector('{ANSWER.split(', ')[0]}')"
            f" ?.getBoundingClientRect().top ?? document.querySelector("
            f"'{ANSWER.split(', ')[1]}').getBoundingClientRect().top",
        )
        assert 0 < top < 900 - 150, f"/{path}: the answer starts at y = {top:.0f} px"
        assert not page.query_selector('[data-testid="stException"]')
        assert "Page not found" not in page.inner_text("body")
        # The caution: one line, its whole text on expanding.
        fold = page.locator('[data-testid="stExpander"] summary', has_text="Caution")
        assert fold.bounding_box()["height"] < 60
        fold.click()
        page.wait_for_timeout(500)
        assert " ".join(CAUTION.split()[:12]) in " ".join(page.inner_text("body").split())
    finally:
        page.close()


# -- the command line ----------------------------------------------------------------------
def _actions(parser):
    import argparse

    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            for name, sub in action.choices.items():
                yield from ((f"{name} {a}", h) for a, h in _actions(sub))
        else:
            yield "/".join(action.option_strings) or action.dest, action.help


def test_every_command_line_option_has_help():
    from engine.cli import build_parser

    missing = [name for name, help_text in _actions(build_parser()) if not help_text]
    assert missing == []


def test_index_help_lists_the_names():
    from engine.cli import build_parser
    from engine.physics.indices import BUILT_IN

    text = " ".join(
        build_parser()._subparsers._group_actions[0].choices["rank"].format_help().split()
    )
    for name in BUILT_IN:
        assert name in text.replace("- ", "-").replace(" ,", ","), name


def test_ids_are_matched_without_case_and_a_miss_suggests(tmp_path, capsys):
    from engine.cli import main

    db = str(tmp_path / "demo.db")
    assert main(["demo", "--db", db]) == 0
    capsys.readouterr()
    assert main(["fit", "bw-nr40", "--db", db, "--json"]) == 0
    assert '"id": "BW-NR40"' in capsys.readouterr().out
    assert main(["fit", "BW-NR4", "--db", db]) == 2
    assert "did you mean 'BW-NR40'" in capsys.readouterr().err


# -- the map's look and one basis of moduli ------------------------------------------------
@pytest.fixture(scope="module")
def demo_ranked(tmp_path_factory):
    from engine.curves.mountcheck import default_mount
    from engine.library.demo import DEMO_DIR
    from engine.library.fits import fit_library
    from engine.library.importer import import_files
    from engine.library.store import Library
    from engine.selection.ranking import Criteria, rank

    lib = Library(str(tmp_path_factory.mktemp("look") / "demo.db"))
    import_files(lib, [DEMO_DIR / "catalog.csv"], [DEMO_DIR / "sweeps.csv"])
    curves, errors = fit_library(lib, processes=1)
    result = rank(
        curves, {m.id: m for m in lib.materials()}, Criteria(mount=default_mount()), errors
    )
    return result, curves, lib


@pytest.mark.parametrize("style", ["ticks", "field", "none"])
def test_map_has_no_dotted_diagonals_and_a_legend_below(demo_ranked, style):
    from dashboard.charts.map import map_figure
    from engine.output.palette import GUIDE, grade_colours

    result, curves, _ = demo_ranked
    fig = map_figure(result, grade_colours(curves), [], guides=style)
    assert not [t for t in fig.data if t.type == "scatter" and t.line.color == GUIDE]
    assert not [a for a in fig.layout.annotations if str(a.text).startswith("E'' =")]
    heat = [t for t in fig.data if t.type == "heatmap"]
    ticks = [a for a in fig.layout.annotations if a.showarrow]
    assert (len(heat) == 1) == (style == "field") and bool(ticks) == (style == "ticks")
    if heat:  # the field is log10 E'' = log10 eta + log10 E' (E'' = eta E', definition)
        z, x, y = (np.asarray(v, dtype=float) for v in (heat[0].z, heat[0].x, heat[0].y))
        np.testing.assert_allclose(z[3, 5], np.log10(x[5]) + np.log10(y[3]), rtol=1e-9)
    assert fig.layout.legend.orientation == "h" and fig.layout.legend.y < 0


def test_comparison_set_takes_the_okabe_ito_colours():
    from engine.output.palette import SET_COLOURS, with_set_colours

    # Okabe & Ito (2008), Color Universal Design: blue, vermillion, bluish green.
    assert SET_COLOURS[:3] == ("#0072B2", "#D55E00", "#009E73")
    out = with_set_colours({"a": "#111111", "b": "#222222", "c": "#333333"}, ["c", "a"])
    assert out == {"a": "#D55E00", "b": "#222222", "c": "#0072B2"}


def test_curves_chart_converts_shear_grades_like_the_map(demo_ranked):
    from dashboard.charts.curves import temperature_figure

    result, curves, _ = demo_ranked
    gid = result.shortlist[0].id
    args = ([gid], curves, {gid: None}, [10.0], (-20.0, 60.0), {})
    own = temperature_figure(*args)
    factor = 2.0 * (1.0 + 0.5)  # E = 2(1 + nu) G with nu = 0.5 (common practice for rubber)
    tensile = temperature_figure(*args, tensile={gid: factor})
    y_own = np.asarray(own.data[2].y, dtype=float)  # the first drawn line (E' row, in data)
    y_ten = np.asarray(tensile.data[2].y, dtype=float)
    ok = np.isfinite(y_own)
    np.testing.assert_allclose(y_ten[ok], factor * y_own[ok], rtol=1e-12)
    assert "tensile equivalent" in tensile.layout.yaxis.title.text
    assert "own mode" in own.layout.yaxis.title.text


# -- a narrow window ---------------------------------------------------------------------
PLOT = '[data-testid="stMain"] [data-testid="stPlotlyChart"]'


def _plot_width(page) -> float:
    return page.evaluate(f"() => document.querySelector('{PLOT}').getBoundingClientRect().width")


def _width_once_sidebar(page, collapsed: str) -> float:
    """The plot's width once the sidebar's ``data-collapsed`` reads ``collapsed``."""
    page.wait_for_function(
        "(want) => document.querySelector('section[data-testid=\"stSidebar\"]')"
        "?.dataset.collapsed === want",
        arg=collapsed,
        timeout=30_000,
    )
    time.sleep(1.0)
    return _plot_width(page)


def test_the_sidebar_does_not_squeeze_the_map_in_a_narrow_window(browser, url):
    """At 800 x 900 the Map's plot keeps at least 600 px: the sidebar starts folded and,
    opened, floats over the page instead of narrowing it (the 600 px: common practice for
    a chart read at a glance on a half-screen window)."""
    page = browser.new_page(viewport={"width": 800, "height": 900})
    try:
        page.goto(url, timeout=120_000)
        page.wait_for_selector(PLOT, timeout=120_000)
        folded = _width_once_sidebar(page, "true")
        assert folded >= 600, f"the plot is {folded:.0f} px wide with the sidebar folded"
        page.locator('[data-testid="stExpandSidebarButton"]').click()
        opened = _width_once_sidebar(page, "false")
        assert opened >= 600, f"the plot is {opened:.0f} px wide with the sidebar open"
        side = page.locator('section[data-testid="stSidebar"]').bounding_box()
        assert side is not None and side["width"] > 200  # open, over the page
    finally:
        page.close()
