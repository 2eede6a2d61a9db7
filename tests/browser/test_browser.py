"""The dashboard in a real browser: Debian's chromium driven through Playwright.

One dashboard server serves a fresh demo library (conftest.py); every page opened here is
a new Streamlit session with the default case. The checks are behavioural: the map and
the caution are drawn, stepping the window's temperature slider reranks as the engine
does, a box drawn on the map fills the comparison set and widens those paths, the XLSX
download opens with its sheets and the shortlist shown, an upload is previewed and
written only on request while a bad one is refused with its one-line reason, and no
page shows a Streamlit exception. The expected values come from the engine itself (its
ranking and its import validation, run in the test on the same library) and from the
export's documented layout; the invented demo data is input only, never a check value.

Screenshots go to ``screenshots/`` (git-ignored). With ``QUIETGRADE_README_SHOTS=1`` the
page tour also writes the README images ``docs/map.png`` and ``docs/shortlist.png``.
"""

from __future__ import annotations

import csv
import os
import re
import shutil
import time
from pathlib import Path

import pytest

from dashboard import case, importing
from engine.caution import CAUTION
from engine.fits import fit_library
from engine.ranking import rank
from engine.store import Library
from tests.browser.conftest import ROOT, SHOTS

pytestmark = pytest.mark.browser

PAGES = (
    ("", "Map"),
    ("curves", "Curves"),
    ("mount", "Mount"),
    ("shortlist", "Shortlist"),
    ("library", "Library"),
)
CHARTED = ("Map", "Curves", "Mount")
STATUS = '[data-testid="stStatusWidget"]'
EXCEPTION = '[data-testid="stException"]'
MAIN = '[data-testid="stMain"]'
PLOT = '[data-testid="stPlotlyChart"] .js-plotly-plot'
TRACE = f"{PLOT} .scatterlayer .trace"
CHIPS = ".st-key-compare_pick span[data-tag]"
REASONS = '[data-testid="stExpander"] li'
SWEEP_HEADER = "material,temperature [degC],frequency [Hz],storage_modulus [MPa],loss_factor\n"
WIDTH = 1280

# Every point of every grade's path on the map, in viewport pixels, and each path's width.
MAP_POINTS_JS = """(plot) => {
  const gd = document.querySelector(plot);
  const L = gd._fullLayout;
  const r = gd.querySelector('.nsewdrag').getBoundingClientRect();
  return {
    box: {x: r.x, y: r.y, w: r.width, h: r.height},
    traces: gd.calcdata.filter(cd => cd[0].trace.legendgroup).map(cd => ({
      grade: cd[0].trace.legendgroup,
      width: cd[0].trace.line.width,
      points: cd.map(pt => [r.x + L.xaxis.c2p(pt.x), r.y + L.yaxis.c2p(pt.y)]),
    })),
  };
}"""

# Rows on screen of the first data frame under ``where`` whose columns begin with ``headers``.
TABLE_JS = """([where, headers]) => {
  for (const frame of document.querySelectorAll(where + ' [data-testid="stDataFrame"]')) {
    const shown = [...frame.querySelectorAll('thead th')].map(th => th.innerText);
    if (headers.every((h, k) => shown[k] === h)) {
      const rows = [...frame.querySelectorAll('tbody tr')]
        .map(tr => [...tr.querySelectorAll('td')].map(td => td.innerText));
      if (rows.length) return rows;
    }
  }
  return null;
}"""

CHIPS_ARE_JS = """([chips, want]) => JSON.stringify([...document.querySelectorAll(chips)]
  .map(e => e.getAttribute('aria-label')).sort()) === JSON.stringify(want)"""


# -- helpers ---------------------------------------------------------------------------------


def settle(page) -> None:
    """Wait until Streamlit has finished the run that the last action started."""
    page.wait_for_timeout(300)  # a rerun starts a moment after the browser event
    page.locator(STATUS).wait_for(state="detached", timeout=60_000)


def wait_heading(page, title: str) -> None:
    page.locator(f'{MAIN} [data-testid="stHeading"]').filter(has_text=title).first.wait_for()
    if title in CHARTED:
        page.locator(TRACE).first.wait_for()
    settle(page)


def open_page(page, url: str, path: str, title: str) -> None:
    """Load the dashboard at ``path`` (a new session) and wait until it is drawn."""
    page.goto(f"{url}/{path}")
    wait_heading(page, title)


def nav(page, title: str) -> None:
    """Go to a page by the top navigation (same session, no reload) unless already there."""
    heading = page.locator(f'{MAIN} [data-testid="stHeading"]').first
    if heading.count() and heading.inner_text().strip() == title:
        return
    page.get_by_role("link", name=title, exact=True).click()
    wait_heading(page, title)


def main_text(page) -> str:
    return " ".join(page.locator(MAIN).inner_text().split())


# Bottom of the page's content [px]: the main column's blocks and the sidebar's.
CONTENT_BOTTOM_JS = """() => {
  const parts = document.querySelectorAll(
    '[data-testid="stMainBlockContainer"], [data-testid="stSidebarUserContent"]');
  return Math.max(...[...parts].map(e => e.getBoundingClientRect().bottom));
}"""


def shot(page, path: Path) -> Path:
    """Screenshot 1280 px wide and exactly as tall as the content (Streamlit scrolls inside).

    The viewport only grows, so a later shot on the same page rarely redraws the charts;
    the picture is clipped to the content.
    """
    want = int(min(max(page.evaluate(CONTENT_BOTTOM_JS) + 24, 900), 6000))
    if want > page.viewport_size["height"]:
        page.set_viewport_size({"width": WIDTH, "height": want})
        page.wait_for_timeout(500)  # Plotly and the data grids redraw for the new size
        settle(page)
        want = int(min(max(page.evaluate(CONTENT_BOTTOM_JS) + 24, 900), want))
    path.parent.mkdir(parents=True, exist_ok=True)
    page.screenshot(path=str(path), clip={"x": 0, "y": 0, "width": WIDTH, "height": want})
    return path


def table_rows(page, *headers: str) -> list[list[str]]:
    """Rows on screen of the first main-area data frame whose columns begin with ``headers``.

    Streamlit draws data frames on a canvas; the grid keeps an accessible table of the
    cells on screen, which is what is read here (waiting until it has rows).
    """
    return page.wait_for_function(TABLE_JS, arg=[MAIN, list(headers)], timeout=20_000).json_value()


def poll(read, done, timeout: float = 20.0, every: float = 0.25):
    """Call ``read`` until ``done`` accepts its value or ``timeout`` [s] passes; the value."""
    deadline = time.monotonic() + timeout
    value = read()
    while not done(value) and time.monotonic() < deadline:
        time.sleep(every)
        value = read()
    return value


def chips(page) -> list[str]:
    return [c.get_attribute("aria-label") for c in page.locator(CHIPS).all()]


def engine_shortlist(db: Path, temp_range: tuple[float, float]) -> list[str]:
    """The engine's own shortlist for the default case with the given window."""
    lib = Library(str(db))
    state = case.default_state()
    state["c_temp"] = temp_range
    curves, errors = fit_library(lib, processes=1)
    materials = {m.id: m for m in lib.materials()}
    result = rank(curves, materials, case.criteria_from_state(state), errors)
    return [g.id for g in result.shortlist]


def grades_in(drawn: dict, x0: float, x1: float, y0: float, y1: float) -> list[str]:
    """Grades with a path point inside the pixel box (x0, x1) x (y0, y1)."""
    return sorted(
        t["grade"]
        for t in drawn["traces"]
        if any(x0 < x < x1 and y0 < y < y1 for x, y in t["points"])
    )


def clear_box(drawn: dict, margin: float = 3.0) -> tuple[float, float, float, float]:
    """A box in the upper left of the plot (the stiff, lightly damped corner) that catches
    some paths and has no path point within ``margin`` [px] of its edges."""
    box = drawn["box"]
    for dx in range(0, 60, 6):
        x0, x1 = box["x"] + 4 + dx, box["x"] + 0.45 * box["w"] + dx
        y0, y1 = box["y"] + 4, box["y"] + 0.25 * box["h"]
        small = grades_in(drawn, x0 + margin, x1 - margin, y0 + margin, y1 - margin)
        large = grades_in(drawn, x0 - margin, x1 + margin, y0 - margin, y1 + margin)
        if small and small == large:
            return x0, x1, y0, y1
    raise AssertionError("no clear box over the map's paths: the test box needs moving")


def map_grades(page) -> list[str]:
    return [t["grade"] for t in page.evaluate(MAP_POINTS_JS, PLOT)["traces"]]


def no_exception(page, where: str) -> None:
    boxes = page.locator(EXCEPTION)
    assert boxes.count() == 0, f"{where}: " + " | ".join(boxes.all_inner_texts())


@pytest.fixture(scope="module")
def map_page(app_url, context):
    """One session opened on the Map, shared by the map tests and the page tour.

    Loading the chart bundle and drawing the map take most of a test's time, so the
    tests that only look share this page and move about it by the top navigation.
    """
    url, _ = app_url
    pg = context.new_page()
    pg.set_default_timeout(60_000)
    open_page(pg, url, "", "Map")
    yield pg
    pg.close()


# -- tests -----------------------------------------------------------------------------------


def test_map_and_caution_are_drawn(map_page):
    page = map_page
    title = page.locator(f"{PLOT} .gtitle").text_content()
    lo, hi = case.DEFAULTS["c_temp"]
    assert title.startswith("Paths through the window") and f"{lo:g} to {hi:g} °C" in title
    assert CAUTION in main_text(page)
    legend = page.locator(f"{PLOT} .legendtext").all_text_contents()
    assert len(legend) == len(map_grades(page)) > 1  # one legend entry per grade drawn
    no_exception(page, "map")
    shot(page, SHOTS / "01-map.png")


def test_every_page_renders_without_an_exception(app_url, map_page):
    url, _ = app_url
    page = map_page
    readme = os.environ.get("QUIETGRADE_README_SHOTS") == "1"
    for path, title in PAGES:
        nav(page, title)
        assert page.url.split("?")[0].rstrip("/") == f"{url}/{path}".rstrip("/")
        assert CAUTION in main_text(page), f"{title}: no caution"
        no_exception(page, title)
        name = path or "map"
        saved = shot(page, SHOTS / f"06-page-{name}.png")
        if readme and name in ("map", "shortlist"):
            (ROOT / "docs").mkdir(exist_ok=True)
            shutil.copyfile(saved, ROOT / "docs" / f"{name}.png")
        no_exception(page, f"{title} after resizing")


def test_a_box_on_the_map_fills_the_comparison_set(map_page):
    page = map_page
    nav(page, "Map")
    page.locator(PLOT).scroll_into_view_if_needed()
    seeded = chips(page)
    # Read the geometry once the plot has stopped moving (layout and resizes settle).
    last = {}

    def steady(drawn):
        same, last["v"] = drawn == last.get("v"), drawn
        return same

    drawn = poll(lambda: page.evaluate(MAP_POINTS_JS, PLOT), steady, timeout=10.0, every=0.3)
    x0, x1, y0, y1 = clear_box(drawn)
    inside = grades_in(drawn, x0, x1, y0, y1)
    assert inside != sorted(seeded)

    page.mouse.move(x0, y0)
    page.mouse.down()
    page.mouse.move((x0 + x1) / 2, (y0 + y1) / 2, steps=6)
    page.mouse.move(x1, y1, steps=6)
    page.mouse.up()
    page.wait_for_function(CHIPS_ARE_JS, arg=[CHIPS, inside])
    settle(page)
    assert sorted(chips(page)) == inside
    # The table, the link and the figure follow in the same run; read them once drawn.
    table = poll(
        lambda: table_rows(page, "grade", "name", "supplier", "status"),  # "Comparison set"
        lambda rows: sorted(r[0] for r in rows) == inside,
    )
    assert sorted(r[0] for r in table) == inside
    link = poll(lambda: page.url, lambda u: f"g={'%2C'.join(chips(page))}" in u)
    assert re.search(r"[?&]g=([^&]*)", link).group(1).split("%2C") == chips(page)

    # Highlighted: the chosen paths are drawn wider than every other path.
    def widths():
        return {t["grade"]: t["width"] for t in page.evaluate(MAP_POINTS_JS, PLOT)["traces"]}

    def wider(w):
        return min(w[g] for g in inside) > max(v for g, v in w.items() if g not in inside)

    assert wider(poll(widths, wider))
    no_exception(page, "map after the box")
    shot(page, SHOTS / "03-map-box-selection.png")


def test_moving_the_temperature_slider_reranks(app_url, page):
    url, db = app_url
    open_page(page, url, "shortlist", "Shortlist")
    lo, hi = case.DEFAULTS["c_temp"]
    before = [r[1] for r in table_rows(page, "rank", "grade")]
    assert before == engine_shortlist(db, (lo, hi))
    new_lo = lo + 20.0
    expected = engine_shortlist(db, (new_lo, hi))
    assert expected != before  # the change matters for the demo library

    # The range slider's start thumb: focus it and step it up by 1 K per key press.
    page.locator(".st-key-c_temp input[type=range]").first.focus()
    for _ in range(int(new_lo - lo)):
        page.keyboard.press("ArrowRight")
    page.wait_for_url(re.compile(rf"[?&]t={new_lo:g}%2C{hi:g}(&|$)"))
    settle(page)
    # Each key press may start a run; read once the last one has drawn its ranking.
    reasons = poll(
        lambda: page.locator(REASONS).all_inner_texts(),
        lambda texts: [t.split(" ")[0] for t in texts] == expected,
    )
    assert [t.split(" ")[0] for t in reasons] == expected
    assert reasons[0].startswith(f"{expected[0]} rank 1 of {len(expected)}")
    table = poll(
        lambda: table_rows(page, "rank", "grade"), lambda rows: [r[1] for r in rows] == expected
    )
    assert [r[1] for r in table] == expected
    no_exception(page, "shortlist after the slider")


def test_xlsx_download_opens_with_its_sheets(app_url, page, tmp_path):
    openpyxl = pytest.importorskip("openpyxl")
    url, _ = app_url
    open_page(page, url, "shortlist", "Shortlist")
    shown = [r[1] for r in table_rows(page, "rank", "grade")]
    with page.expect_download() as info:
        page.get_by_role("button", name="Shortlist XLSX").click()
    download = info.value
    assert download.suggested_filename == "quietgrade-shortlist.xlsx"
    saved = tmp_path / download.suggested_filename
    download.save_as(saved)
    book = openpyxl.load_workbook(saved, read_only=True)
    # Sheets and layout as engine/workbook.py documents them.
    sheets = ["Shortlist", "Excluded", "Window properties", "Criteria", "Provenance"]
    assert book.sheetnames == sheets
    rows = list(book["Shortlist"].iter_rows(values_only=True))
    assert "Caution: " + CAUTION in str(rows[0][0])  # row 1: note and caution
    column = list(rows[1]).index("id")  # row 2: headings
    ids = [r[column] for r in rows[2:] if r[column]]
    assert ids and ids == shown  # the workbook lists the shortlist the page shows
    book.close()
    settle(page)
    no_exception(page, "shortlist after the download")
    shot(page, SHOTS / "04-shortlist.png")


def sweep_rows(grade: str) -> list[list[str]]:
    """A reduced copy of a demo grade's sweep: every 20 K at 1, 10 and 100 Hz (input only)."""
    with open(ROOT / "demo_materials" / "sweeps.csv", newline="") as fh:
        rows = [r for r in csv.reader(fh) if r and r[0] == grade]
    return [r for r in rows if float(r[1]) % 20 == 0 and r[2] in ("1", "10", "100")]


def test_library_upload_is_previewed_written_and_a_bad_file_refused(app_url, page, tmp_path):
    url, db = app_url
    lib = Library(str(db))
    grade = "BW-NR40"
    count = len(lib.datasets(grade))
    rows = sweep_rows(grade)
    assert len(rows) >= 12
    good = tmp_path / "nr40-rerun.csv"
    good.write_text(
        SWEEP_HEADER
        + "".join(f"{r[0]},{r[1]},{r[2]},{float(r[3]) * 1.02:.5g},{r[4]}\n" for r in rows)
    )
    uploader = f'{MAIN} [class*="st-key-upload_format_"] input[type=file]'

    open_page(page, url, "library", "Library")
    page.locator(uploader).set_input_files(str(good))
    page.get_by_text("All files are valid.").wait_for()
    settle(page)
    preview = table_rows(page, "grade", "file", "points")  # "Data sets to write"
    assert preview[0][:3] == [grade, good.name, str(len(rows))]
    assert len(lib.datasets(grade)) == count  # previewed only
    shot(page, SHOTS / "05-library-preview.png")

    page.get_by_role("button", name="Write to library").click()
    page.get_by_text("data set(s) added").wait_for()
    settle(page)
    assert "Written: 0 grade(s) added, 0 updated, 1 data set(s) added" in main_text(page)
    sets = lib.datasets(grade)
    assert len(sets) == count + 1
    new = [s for s in sets if s.file_name == good.name]
    assert len(new) == 1 and new[0].n_points == len(rows)
    no_exception(page, "library after writing")

    bad = tmp_path / "nr40-bad.csv"
    bad.write_text(SWEEP_HEADER + f"{grade},20,1,5.1,0.1\n{grade},20,10,-6.2,0.1\n")
    version = lib.version()
    reason = importing.try_plan(importing.plan_uploads, lib, [(bad.name, bad.read_bytes())])[1]
    # The reason names the file, the row (row 2 is the first data row) and the column.
    assert reason.startswith("nr40-bad.csv, row 3, column 'storage_modulus [MPa]'")
    page.locator(uploader).set_input_files(str(bad))
    error = page.locator(f'{MAIN} [data-testid="stAlertContentError"]').first
    error.wait_for()
    settle(page)
    shown = error.inner_text().strip()
    assert shown == reason and "\n" not in shown  # one line
    assert "Nothing was written." in main_text(page)
    assert page.get_by_role("button", name="Write to library").count() == 0
    assert lib.version() == version and len(lib.datasets(grade)) == count + 1
    no_exception(page, "library after a bad file")
    shot(page, SHOTS / "05-library-bad-file.png")
