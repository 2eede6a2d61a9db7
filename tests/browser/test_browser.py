"""The dashboard in a real browser: Debian's chromium driven through Playwright.

One dashboard server serves a fresh demo library (conftest.py); every page opened here is
a new Streamlit session with the default case, or the case of its link (the shortlist
tests, as the default mount isolates no demo grade). The upload test, which writes to its
library, has a server and a copy of the library of its own, so the tests run in any
order. The checks are behavioural: the map and
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
import urllib.parse
from pathlib import Path

import pytest

from dashboard import case, importing
from engine.base.caution import CAUTION, CAUTION_LINE
from engine.library.store import Library
from tests.browser.driving import (
    MAIN,
    MAP_POINTS_JS,
    PLOT,
    box_select,
    chips,
    clear_box,
    engine_result,
    grades_in,
    main_text,
    map_grades,
    map_session,
    nav,
    no_exception,
    open_page,
    poll,
    settle,
    shot,
    steady,
    table_rows,
)
from tests.crowd import SWEEP_HEADER
from tests.helpers import ROOT, SHOTS

pytestmark = pytest.mark.browser

PAGES = (
    ("", "Map"),
    ("curves", "Curves"),
    ("mount", "Mount"),
    ("shortlist", "Shortlist"),
    ("library", "Library"),
)
REASONS = '[data-testid="stExpander"] li'
# The default mount isolates no demo grade over the default window. The shortlist tests
# open this case by its link: 25 mm pads sized for 10 Hz, -20 to 45 °C and 10 to 100 Hz.
ISOLATING = {"t": "-20,45", "f": "10,100", "mh": "25", "mt": "10"}
SHORTLIST = "shortlist?" + urllib.parse.urlencode(ISOLATING)


def engine_shortlist(db: Path, temp_range: tuple[float, float]) -> list[str]:
    """The engine's own shortlist for the case of ISOLATING with the given window."""
    state, notes = case.from_query(ISOLATING)
    assert notes == []
    return [g.id for g in engine_result(db, **{**state, "c_temp": temp_range}).shortlist]


@pytest.fixture(scope="module")
def map_page(app_url, context):
    """One session opened on the Map, shared by the map tests and the page tour.

    Loading the chart bundle and drawing the map take most of a test's time, so the
    tests that only look share this page and move about it by the top navigation.
    """
    url, _ = app_url
    with map_session(context, url) as pg:
        yield pg


# -- tests -----------------------------------------------------------------------------------


def test_map_and_caution_are_drawn(map_page):
    page = map_page
    nav(page, "Map")
    title = page.locator(f"{PLOT} .gtitle").text_content()
    lo, hi = case.DEFAULTS["c_temp"]
    assert title.startswith("Paths through the window") and f"{lo:g} to {hi:g} °C" in title
    # the caution: one line on every page, its whole text a click away (test_screens.py)
    assert CAUTION_LINE in main_text(page)
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
        assert CAUTION_LINE in main_text(page), f"{title}: no caution"
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
    drawn = steady(page, MAP_POINTS_JS)
    box = clear_box(drawn)
    inside = grades_in(drawn, *box)
    assert inside != sorted(seeded)

    assert box_select(page, box, inside) == inside
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
    open_page(page, url, SHORTLIST, "Shortlist")
    lo, hi = (float(v) for v in ISOLATING["t"].split(","))
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
    open_page(page, url, SHORTLIST, "Shortlist")
    shown = [r[1] for r in table_rows(page, "rank", "grade")]
    with page.expect_download() as info:
        page.get_by_role("button", name="Shortlist XLSX").click()
    download = info.value
    assert download.suggested_filename == "quietgrade-shortlist.xlsx"
    saved = tmp_path / download.suggested_filename
    download.save_as(saved)
    book = openpyxl.load_workbook(saved, read_only=True)
    # Sheets and layout as engine/output/workbook.py documents them.
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


def test_library_upload_is_previewed_written_and_a_bad_file_refused(own_app_url, page, tmp_path):
    url, db = own_app_url
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
