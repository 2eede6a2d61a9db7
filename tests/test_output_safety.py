"""Hostile text in the shortlist files: nothing from data runs as a formula or as markup.

The grades come through the real path (a catalog and sweeps written as files, imported,
fitted and ranked), with ids and names an attacker might choose. The rules checked are
outside ones: the formula-injection defence of CWE-1236 and of the OWASP Application
Security Verification Standard 5.0, requirement 1.2.10 (a field whose first character
is =, +, -, @, a tab or a NUL gets a leading single quote); the carriage return, white
space before the character and a separator inside a text that starts a new cell, from
the OWASP CSV Injection page (from memory); the Office Open XML
spreadsheet format (ECMA-376 Part 1: a cell, 18.3.1.4, holds a formula only in an
``<f>`` element, 18.3.1.40; section numbers from memory); HTML escaping as the standard library's
HTML parser reads it; Plotly's hover templates, where ``%{...}`` is a placeholder and
labels are read as a subset of HTML (plotly.js reference, ``hovertemplate``).
"""

import csv
import dataclasses
import io
import re
import zipfile
from html.parser import HTMLParser
from pathlib import Path

import openpyxl
import pandas as pd
import pytest

from engine.base.caution import CAUTION
from engine.curves.mountcheck import MountDesign
from engine.curves.window import OperatingWindow
from engine.library.fits import fit_library
from engine.library.importer import import_files
from engine.library.store import Library
from engine.output.export import shortlist_csv, shortlist_header, shortlist_rows, write_shortlist
from engine.output.mapfigure import map_figure, plot_text
from engine.output.report import curves_figure, report_html
from engine.output.workbook import shortlist_xlsx
from engine.selection.ranking import Constraints, Criteria, rank
from engine.selection.spread import rank_spread
from tests.helpers import DEMO
from tests.offloop import off_the_event_loop

# Demo grade -> (hostile id, hostile name). The first three pass the criteria below,
# the others are excluded, so both tables and both charts carry hostile text.
RENAMED = {
    "BW-NR40": ("=2+3", "%{x} and %{customdata[0]} at $5"),
    "BW-VMQ50": ("<img src=x onerror=alert(1)>", "**bold** [link](http://x)"),
    "QC-EPDM60": ('=HYPERLINK("http://x","y")', '<b>bold</b> & <a href="http://x">link</a>'),
    "LAB-NR55": ("+cmd|' /C calc'!A0", "=1+1"),
    "FP-IIR50": ("@SUM(1)", "line one\nline two"),
    "QC-IIR55": ("-1+1", "<img src=x onerror=alert(2)>"),
}
KEPT = "BW-CR60"  # excluded; its texts are changed after the ranking
PASSING = ("=2+3", "<img src=x onerror=alert(1)>", '=HYPERLINK("http://x","y")')
CATALOG_TEXT = {"supplier": "@SUM(9)", "family": "+family; =1+1"}
FIT_ERRORS = {
    "x,=2+3": 'bad;@SUM(1), "quoted, -1+1',
    '=HYPERLINK("http://x","y")': "line\nbreak\r=1",
}
# Cells a spreadsheet would run: text that begins, at once or after spaces, with one
# of these and does not read as a number (CWE-1236; ASVS 5.0, 1.2.10; OWASP CSV
# Injection, from memory).
LIVE = ("=", "+", "-", "@", "\t", "\r", "\0")
# The placeholders the export's own hover templates use; no other may appear.
OWN_PLACEHOLDERS = {
    "%{customdata[1]:.0f}",
    "%{customdata[2]}",
    "%{x:.3g}",
    "%{y:.3g}",
    "%{x:.4~g}",
    "%{y:.4~g}",
    "%{y:.3~g}",
    "%{text}",
}
CHROMIUM = "/usr/bin/chromium"


def _write_rows(path: Path, rows: list[dict]) -> None:
    with path.open("w", newline="", encoding="utf-8") as f:
        writer = csv.DictWriter(f, fieldnames=list(rows[0]))
        writer.writeheader()
        writer.writerows(rows)


def _read_rows(path: Path) -> list[dict]:
    with path.open(newline="", encoding="utf-8") as f:
        return list(csv.DictReader(f))


@pytest.fixture(scope="module")
def hostile(tmp_path_factory):
    """Library, curves and ranking (with intervals) of seven demo grades, six renamed."""
    folder = tmp_path_factory.mktemp("hostile")
    keep = {*RENAMED, KEPT}
    catalog = [r for r in _read_rows(DEMO / "catalog.csv") if r["id"] in keep]
    for row in catalog:
        if row["id"] == "BW-NR40":
            row.update(CATALOG_TEXT)
        row["id"], row["name"] = RENAMED.get(row["id"], (row["id"], row["name"]))
    sweeps = [r for r in _read_rows(DEMO / "sweeps.csv") if r["material"] in keep]
    for row in sweeps:
        row["material"] = RENAMED.get(row["material"], (row["material"],))[0]
    _write_rows(folder / "catalog.csv", catalog)
    _write_rows(folder / "sweeps.csv", sweeps)
    lib = Library(str(folder / "lib.sqlite"))
    import_files(lib, [folder / "catalog.csv"], [folder / "sweeps.csv"])
    curves, errors = fit_library(lib, processes=1)
    assert not errors
    materials = {m.id: m for m in lib.materials()}
    criteria = Criteria(
        window=OperatingWindow(temp_range=(-20.0, 45.0), freq_range=(10.0, 100.0)),
        mount=MountDesign(thickness_mm=25, target_fn_Hz=10.0),
        constraints=Constraints(max_transmissibility=1.0, allow_extrapolation=True),
        pareto=("loss_factor", "frequency_drift"),
    )
    result = rank_spread(rank(curves, materials, criteria), curves, materials)
    assert {g.id for g in result.shortlist} == set(PASSING)
    assert {g.id for g in result.excluded} == {*(i for i, _ in RENAMED.values()), KEPT} - set(
        PASSING
    )
    return lib, curves, materials, result


@pytest.fixture(scope="module")
def dressed(hostile):
    """The ranking with more hostile texts where no key depends on them: white space
    before a formula, a semicolon, a tab or a line break inside a text, a text that is a
    number, a genuine negative number, grades not ranked, draws missing."""
    result = hostile[3]
    grades = list(result.grades)
    k = next(i for i, g in enumerate(grades) if g.id == KEPT)
    grades[k] = dataclasses.replace(
        grades[k],
        supplier=" =1+1",
        family="-20",
        price=-1.5e-3,
        notes=["\t=cmd", "x;=1+1;y", "line\n=2", "a\t@b"],
    )
    spread = dataclasses.replace(result.spread, without_draws=("=2+3", "a, @b"))
    return dataclasses.replace(result, grades=grades, fit_errors=FIT_ERRORS, spread=spread)


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _live(field: str) -> bool:
    starts = field.startswith(LIVE) or field.lstrip(" ").startswith(LIVE)
    return starts and not _is_number(field)


def _grade_row(df: pd.DataFrame, gid: str) -> pd.Series:
    """The row of grade ``gid`` in a read-back table (ids read back with their quote)."""
    shown = "'" + gid if _live(gid) else gid
    rows = df[df["id"] == shown]
    assert len(rows) == 1, gid
    return rows.iloc[0]


# -- CSV -----------------------------------------------------------------------------------
@pytest.mark.parametrize("delimiter", [",", ";", "\t"])
@pytest.mark.parametrize("trim", [False, True])
def test_csv_has_no_live_cell_however_a_spreadsheet_splits_it(dressed, delimiter, trim):
    # A comma file opened by a spreadsheet set to semicolons or tabs reads the quotes of a
    # text cell as text and starts a new cell at each separator or line break inside it;
    # "trim" is the option of dropping the spaces before a field. No cell so read may
    # begin a formula (CWE-1236; ASVS 5.0, 1.2.10; OWASP CSV Injection, from memory).
    text = shortlist_csv(dressed).decode("utf-8-sig")
    records = list(csv.reader(io.StringIO(text), delimiter=delimiter, skipinitialspace=trim))
    assert len(records) >= 1 + len(dressed.grades) + 5  # header, grades, "#" lines
    fields = [f for record in records for f in record]
    live = [f for f in fields if _live(f)]
    assert live == []


def test_csv_defuses_hostile_text_and_reads_back_to_the_grade_rows(dressed):
    data = shortlist_csv(dressed)
    df = pd.read_csv(io.BytesIO(data), comment="#", encoding="utf-8-sig")
    assert len(df) == len(dressed.grades) and list(df.columns) == shortlist_header(dressed)
    # Each hostile id and name reads back with one leading quote (common practice, as
    # above); text that begins no formula reads back exactly, line breaks included.
    expected_ids = [
        "'=2+3",
        "<img src=x onerror=alert(1)>",
        '\'=HYPERLINK("http://x","y")',
        "'+cmd|' /C calc'!A0",
        "'@SUM(1)",
        "'-1+1",
    ]
    assert set(expected_ids) <= set(df["id"])
    names = dict(zip(df["id"], df["name"], strict=True))
    assert names["'=2+3"] == "%{x} and %{customdata[0]} at $5"
    assert names["'@SUM(1)"] == "line one\nline two"
    assert names["'+cmd|' /C calc'!A0"] == "'=1+1"
    assert names["<img src=x onerror=alert(1)>"] == "**bold** [link](http://x)"
    first = _grade_row(df, "=2+3")
    assert first["supplier"] == "'@SUM(9)"
    assert first["family"] == "'+family; '=1+1"  # and after the semicolon inside
    kept = _grade_row(df, KEPT)
    assert kept["supplier"] == "' =1+1"  # white space before the formula
    assert kept["family"] == "-20"  # a number stays as written
    assert kept["notes"] == "'\t'=cmd; x;'=1+1;y; line\n'=2; a\t'@b"


def test_csv_numbers_stay_numbers(dressed):
    # Genuine numbers are never quoted or prefixed, negative ones included (common
    # practice: only text is defused); every numeric column reads back as numbers.
    data = shortlist_csv(dressed)
    df = pd.read_csv(io.BytesIO(data), comment="#", encoding="utf-8-sig")
    rows = shortlist_rows(dressed)
    numeric = [
        h
        for h in shortlist_header(dressed)
        if all(r[h] is None or isinstance(r[h], int | float) for r in rows)
        and any(r[h] is not None for r in rows)
    ]
    for heading in ("rank", "price [per kg]", "density [kg/m3]", "score", "fn min [Hz]"):
        assert heading in numeric
    for heading in numeric:
        assert pd.api.types.is_numeric_dtype(df[heading]), heading
        for row, value in zip(rows, df[heading], strict=True):
            if row[heading] is None:
                assert pd.isna(value)
            else:
                assert value == pytest.approx(row[heading], rel=5e-6)  # 6 figures
    assert _grade_row(df, KEPT)["price [per kg]"] == -1.5e-3
    line = next(s for s in data.decode("utf-8-sig").splitlines() if f'"{KEPT}"' in s)
    assert ",-0.0015," in line


def test_csv_comment_lines_are_one_line_each_and_defused(dressed):
    text = shortlist_csv(dressed).decode("utf-8-sig")
    lines = text.split("\r\n")
    assert lines[-1] == ""
    trailer = [s for s in lines if s.startswith("#")]
    # The lines after the table: version, intervals, two grades not ranked, the caution.
    assert len(trailer) == 5 and lines[-2] == f"# caution: {CAUTION}"
    assert lines[-len(trailer) - 1 : -1] == trailer  # all at the end, nothing between
    # Each field after a comma or a semicolon that would begin a formula or a quoted
    # field gets the quote; the others are as written.
    assert "# not ranked, master curve failed: x,'=2+3: bad;'@SUM(1), '\"quoted, '-1+1" in trailer
    assert (
        '# not ranked, master curve failed: =HYPERLINK("http://x",\'"y"): line break =1' in trailer
    )
    assert "Without draws (taken as exact): =2+3, a, '@b." in trailer[1]
    # However a spreadsheet splits them, each stays one row starting "#", no cell live and
    # no quoted field swallowing the caution (OWASP CSV Injection, from memory).
    block = "\r\n".join(trailer) + "\r\n"
    for delimiter in (",", ";"):
        for trim in (False, True):
            rows = list(csv.reader(io.StringIO(block), delimiter=delimiter, skipinitialspace=trim))
            assert len(rows) == len(trailer)
            assert all(r[0].startswith("#") for r in rows)
            assert not [f for r in rows for f in r if _live(f)]
    # pandas still reads exactly the grade rows.
    df = pd.read_csv(io.StringIO(text), comment="#")
    assert len(df) == len(dressed.grades)


def test_csv_comment_lines_keep_their_own_text(hostile):
    # The defusing changes only fields that would start a formula: the file's own lines
    # (intervals, caution) are written as they are.
    result = hostile[3]
    lines = shortlist_csv(result).decode("utf-8-sig").splitlines()
    assert lines[-1] == f"# caution: {CAUTION}"
    assert lines[-2] == f"# {result.spread.describe()}"


# -- XLSX ----------------------------------------------------------------------------------
def test_xlsx_stores_every_text_as_text_on_every_sheet(dressed, hostile):
    data = shortlist_xlsx(dressed, hostile[0])
    # No formula anywhere: a worksheet cell's formula is its <f> element (ECMA-376
    # Part 1, 18.3.1.40, from memory).
    with zipfile.ZipFile(io.BytesIO(data)) as z:
        sheets = [n for n in z.namelist() if n.startswith("xl/worksheets/sheet")]
        assert len(sheets) == 5
        for name in sheets:
            assert not re.search(r"<f[ >]", z.read(name).decode("utf-8")), name
    wb = openpyxl.load_workbook(io.BytesIO(data))
    texts = 0
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for cell in row:
                if isinstance(cell.value, str):
                    texts += 1
                    assert cell.data_type == "s", (ws.title, cell.coordinate)
                    # Text a spreadsheet would run is also marked as typed after a quote.
                    if _live(cell.value):
                        assert cell.quotePrefix, (ws.title, cell.coordinate, cell.value)
    assert texts > 100
    # The workbook keeps the text exactly, without a quote.
    short = pd.read_excel(io.BytesIO(data), sheet_name="Shortlist", header=1)
    assert set(short["id"]) == set(PASSING)
    assert "%{x} and %{customdata[0]} at $5" in set(short["name"])
    excluded = pd.read_excel(io.BytesIO(data), sheet_name="Excluded", header=1)
    assert {"+cmd|' /C calc'!A0", "@SUM(1)", "-1+1"} <= set(excluded["id"])
    assert "line one\nline two" in set(excluded["name"])
    for sheet in ("Window properties", "Provenance"):
        table = pd.read_excel(io.BytesIO(data), sheet_name=sheet, header=1)
        ids = table["id" if sheet == "Window properties" else "grade id"]
        assert "=2+3" in set(ids) and "-1+1" in set(ids)
    crit = pd.read_excel(io.BytesIO(data), sheet_name="Criteria", header=1)
    assert "not ranked: x,=2+3" in set(crit["setting"])


def test_xlsx_excluded_sheet_writes_numbers_as_numbers(hostile):
    lib, curves, materials, _ = hostile
    criteria = Criteria(
        window=OperatingWindow(temp_range=(-20.0, 45.0), freq_range=(10.0, 100.0)),
        constraints=Constraints(min_loss_factor=0.3, allow_extrapolation=True),
        screening_only=True,
    )
    result = rank(curves, materials, criteria)
    failures = [
        (g, f)
        for g in result.excluded
        for f in g.failures
        if f.constraint == "worst-case loss factor"
    ]
    assert len(failures) >= 3 and all(_is_number(f.value) for _, f in failures)
    wb = openpyxl.load_workbook(io.BytesIO(shortlist_xlsx(result)))
    ws = wb["Excluded"]
    header = [c.value for c in ws[2]]
    seen = {}
    for row in ws.iter_rows(min_row=3):
        cells = dict(zip(header, row, strict=False))
        if cells["constraint"].value == "worst-case loss factor":
            seen[cells["id"].value] = cells["value"]
    assert len(seen) == len(failures)
    for g, f in failures:
        cell = seen[g.id]
        assert cell.data_type == "n" and cell.value == pytest.approx(float(f.value), rel=1e-12)
        # The value read is the ranking's own worst-case loss factor to three figures.
        assert cell.value == pytest.approx(g.worst_loss_factor, rel=5e-3)
    table = pd.read_excel(io.BytesIO(shortlist_xlsx(result)), sheet_name="Excluded", header=1)
    values = table[table["constraint"] == "worst-case loss factor"]["value"]
    assert all(isinstance(v, float) for v in values)


# -- HTML ----------------------------------------------------------------------------------
class _Page(HTMLParser):
    """What a browser builds from the page: elements, and the text outside scripts."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict]] = []
        self.text: list[str] = []
        self._script = 0

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))
        self._script += tag in ("script", "style")

    def handle_endtag(self, tag):
        self._script -= tag in ("script", "style")

    def handle_data(self, data):
        if not self._script:
            self.text.append(data)


def test_report_shows_hostile_text_as_text(dressed, hostile):
    lib, curves = hostile[0], hostile[1]
    text = report_html(dressed, lib, curves)
    page = _Page()
    page.feed(text)
    # No element from data: the page's own tags only, no image, no link, no bold (its
    # own bold is the "Caution." of the two cautions).
    tags = [t for t, _ in page.tags]
    assert not set(tags) & {"img", "a", "b", "i", "em", "iframe"}
    assert tags.count("strong") == 2
    assert not [a for _, a in page.tags if any("onerror" in k for k in a)]
    assert not any("http://x" in v for _, a in page.tags for v in a.values() if v)
    # Scripts: Plotly's set-up and its (packed) library, and one per figure; data never
    # closes one.
    scripts = [t for t, _ in page.tags if t == "script"]
    figures = [
        a for t, a in page.tags if t == "div" and "plotly-graph-div" in (a.get("class") or "")
    ]
    assert figures and len(scripts) == 2 + len(figures)
    markup = [s for pair in RENAMED.values() for s in pair if "<" in s]
    assert len(markup) == 3 and not [s for s in markup if s in text]  # not even in scripts
    # Every hostile text is on the page as text, as written (markdown is not rendered).
    shown = "".join(page.text)
    for gid, name in RENAMED.values():
        assert gid in shown
        assert " ".join(name.split()) in " ".join(shown.split())
    for value in (*CATALOG_TEXT.values(), " =1+1", *FIT_ERRORS):
        assert value in shown
    assert "**bold** [link](http://x)" in shown


def test_chart_labels_escape_markup_and_template_markers(dressed):
    # In a hover template "%{...}" is a placeholder and labels are a subset of HTML
    # (plotly.js reference, hovertemplate): names reach them only escaped.
    result = dressed
    traces = [t for fig in (map_figure(result), curves_figure(result)) for t in fig.data]
    named = [t for t in traces if t.hovertemplate and t.legendgroup]
    assert len(named) >= len(result.grades)
    for t in named:
        placeholders = set(re.findall(r"%\{[^}]*\}", t.hovertemplate))
        assert placeholders <= OWN_PLACEHOLDERS, placeholders - OWN_PLACEHOLDERS
        for label in (t.hovertemplate, t.name):
            assert "\n" not in label and "$" not in label
            assert not re.search(r"<(?!/?(b|br|extra)>)", label), label
    hovers = " ".join(t.hovertemplate for t in named)
    assert "&#37;{x} and &#37;{customdata[0]} at &#36;5" in hovers
    assert "&lt;img src=x onerror=alert(2)&gt;" in hovers
    assert "&lt;b&gt;bold&lt;/b&gt; &amp; &lt;a href=&#34;http://x&#34;&gt;link" in hovers
    assert "line one line two" in hovers
    assert plot_text("a\r\n\tb  c") == "a b c"
    assert plot_text(None) == ""


def _browser_ready():
    if not Path(CHROMIUM).exists():
        pytest.skip(f"chromium not found at {CHROMIUM}")
    return pytest.importorskip("playwright.sync_api")


# Hover the first point of a grade's trace in figure ``fig`` (0 the map, 1 the curves) and
# read the hover label: its text and the elements it is made of.
HOVER_JS = """async ([fig, gid]) => {
  const gd = document.querySelectorAll('.js-plotly-plot')[fig];
  const k = gd.data.findIndex(t => t.legendgroup === gid && t.hovertemplate);
  Plotly.Fx.hover(gd, [{curveNumber: k, pointNumber: 0}]);
  const layer = gd.querySelector('.hoverlayer');
  for (let i = 0; i < 50 && !layer.textContent; i++) await new Promise(r => setTimeout(r, 20));
  const out = {text: layer.textContent,
               tags: [...layer.querySelectorAll('*')].map(e => e.tagName.toLowerCase())};
  Plotly.Fx.unhover(gd);
  return out;
}"""


@pytest.mark.browser
def test_report_hover_labels_show_names_as_written_in_a_browser(dressed, hostile, tmp_path):
    sync_api = _browser_ready()
    path = write_shortlist(dressed, tmp_path / "report.html", hostile[0], hostile[1])
    dialogs, requests = [], []

    def drive():
        with sync_api.sync_playwright() as p:
            browser = p.chromium.launch(
                executable_path=CHROMIUM, args=["--headless", "--no-sandbox", "--disable-gpu"]
            )
            try:
                page = browser.new_page()
                page.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))
                page.on("request", lambda r: requests.append(r.url))
                page.goto(path.as_uri())
                page.wait_for_function(
                    "document.querySelectorAll('.js-plotly-plot .hoverlayer').length === 2"
                )
                seen = {
                    (fig, gid): page.evaluate(HOVER_JS, [fig, gid])
                    for fig, gid in [
                        (0, "=2+3"),
                        (1, "=2+3"),
                        (0, '=HYPERLINK("http://x","y")'),
                        (0, "-1+1"),
                        (0, "@SUM(1)"),
                    ]
                }
                legend = page.evaluate(
                    "document.querySelectorAll('.js-plotly-plot')[0].querySelector('.legend')"
                    ".textContent"
                )
                links = page.evaluate(
                    "[...document.querySelectorAll('a[href*=\"http://x\"]')].length"
                )
                images = page.evaluate("document.querySelectorAll('img, image').length")
            finally:
                browser.close()
        return seen, legend, links, images

    seen, legend, links, images = off_the_event_loop(drive)
    for out in seen.values():
        assert out["text"], "no hover label"
        assert not set(out["tags"]) & {"a", "img", "image", "foreignobject"}
    # The placeholder markers in a name show literally, on both charts.
    assert "%{x} and %{customdata[0]} at $5" in seen[0, "=2+3"]["text"]
    assert "%{x} and %{customdata[0]} at $5" in seen[1, "=2+3"]["text"]
    assert (
        '<b>bold</b> & <a href="http://x">link</a>' in seen[0, '=HYPERLINK("http://x","y")']["text"]
    )
    assert "<img src=x onerror=alert(2)>" in seen[0, "-1+1"]["text"]
    assert "line one line two" in seen[0, "@SUM(1)"]["text"]
    assert "<img src=x onerror=alert(1)>" in legend  # the id, as the legend lists it
    assert links == 0 and images == 0
    assert dialogs == []  # no script from data ran
    assert requests == [path.as_uri()]  # nothing fetched: no image, no link followed
