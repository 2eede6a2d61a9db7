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
HTML parser reads it, and the report's SVG charts as the standard library's XML parser
reads them; Plotly's hover templates (the dashboard's map figure), where ``%{...}`` is a
placeholder and labels are read as a subset of HTML (plotly.js reference,
``hovertemplate``).
"""

import csv
import dataclasses
import io
import re
import xml.etree.ElementTree as ET
import zipfile
from html.parser import HTMLParser
from pathlib import Path

import openpyxl
import pandas as pd
import pytest

from engine.base.caution import CAUTION, CAUTION_LINE
from engine.curves.mountcheck import MountDesign
from engine.curves.window import OperatingWindow
from engine.library.fits import fit_library
from engine.library.importer import import_files
from engine.library.store import Library
from engine.output.export import shortlist_csv, shortlist_header, shortlist_rows, write_shortlist
from engine.output.mapfigure import map_figure, plot_text
from engine.output.report import curves_svg, map_svg, report_html
from engine.output.workbook import shortlist_xlsx
from engine.selection.ranking import Constraints, Criteria, rank
from engine.selection.spread import rank_spread
from tests.helpers import CHROMIUM, CHROMIUM_ARGS, DEMO, SVG_ELEMENTS
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
# The placeholders the map figure's own hover templates use; no other may appear.
OWN_PLACEHOLDERS = {"%{customdata[1]:.0f}", "%{customdata[2]}", "%{x:.3g}", "%{y:.3g}"}
SVG = "{http://www.w3.org/2000/svg}"


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
    if delimiter == ",":
        # The header and one record per grade, nothing after them; every record as wide
        # as the header, its caution and provenance in the last two fields.
        assert len(records) == 1 + len(dressed.grades)
        assert {len(r) for r in records} == {len(records[0])}
        assert records[0][-2:] == ["caution", "provenance"]
        assert all(r[-2].startswith(CAUTION_LINE) for r in records[1:])
    else:  # line breaks inside text cells start new records here
        assert len(records) >= 1 + len(dressed.grades)
    fields = [f for record in records for f in record]
    live = [f for f in fields if _live(f)]
    assert live == []


def test_csv_defuses_hostile_text_and_reads_back_to_the_grade_rows(dressed):
    data = shortlist_csv(dressed)
    df = pd.read_csv(io.BytesIO(data), encoding="utf-8-sig")
    assert len(df) == len(dressed.grades)
    assert list(df.columns) == [*shortlist_header(dressed), "caution", "provenance"]
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
    df = pd.read_csv(io.BytesIO(data), encoding="utf-8-sig")
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


def test_csv_note_columns_are_one_line_and_defused(dressed, hostile):
    lib = hostile[0]
    df = pd.read_csv(io.BytesIO(shortlist_csv(dressed, lib)), encoding="utf-8-sig")
    assert len(df) == len(dressed.grades)  # the notes are columns, not rows
    assert set(df["caution"]) == {f"{CAUTION_LINE}. {CAUTION}"}
    (provenance,) = set(df["provenance"])
    assert "\n" not in provenance and "\r" not in provenance
    assert f"library {lib.display_location} | written " in provenance
    # Hostile text inside it gets the quote wherever a spreadsheet that splits at
    # semicolons would start a new cell; the rest is as written.
    assert "not ranked, master curve failed: x,=2+3: bad;'@SUM(1), \"quoted, -1+1" in provenance
    assert 'not ranked, master curve failed: =HYPERLINK("http://x","y"): line break =1' in (
        provenance
    )
    assert "Without draws (taken as exact): =2+3, a, @b." in provenance
    # However a spreadsheet splits the cell, no part of it is live (OWASP CSV
    # Injection, from memory).
    cell = shortlist_csv(dressed, lib).decode("utf-8-sig").splitlines()[1]
    for delimiter in (",", ";", "\t", "|"):
        for trim in (False, True):
            for row in csv.reader(io.StringIO(cell), delimiter=delimiter, skipinitialspace=trim):
                assert not [f for f in row if _live(f)], (delimiter, trim)


def test_csv_note_columns_keep_their_own_text(hostile):
    # The defusing changes only parts that would start a formula: the file's own notes
    # (caution, intervals) are written as they are.
    result = hostile[3]
    df = pd.read_csv(io.BytesIO(shortlist_csv(result)), encoding="utf-8-sig")
    assert (df["caution"] == f"{CAUTION_LINE}. {CAUTION}").all()
    assert df["provenance"].str.contains(result.spread.describe(), regex=False).all()


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
    # No script at all, so none that data could close or open; the charts are SVG.
    assert "script" not in tags
    assert tags.count("svg") == 2
    markup = [s for pair in RENAMED.values() for s in pair if "<" in s]
    assert len(markup) == 3 and not [s for s in markup if s in text]  # not even in the charts
    # Every hostile text is on the page as text, as written (markdown is not rendered).
    shown = "".join(page.text)
    for gid, name in RENAMED.values():
        assert gid in shown
        assert " ".join(name.split()) in " ".join(shown.split())
    for value in (*CATALOG_TEXT.values(), " =1+1", *FIT_ERRORS):
        assert value in shown
    assert "**bold** [link](http://x)" in shown


def test_report_charts_show_hostile_text_as_text(dressed):
    # The report's charts are SVG read as XML: names reach them escaped, only drawing
    # elements appear (nothing that links, loads or runs) and no attribute is an event
    # handler; every name reads back as written, on one line.
    for svg in (map_svg(dressed), curves_svg(dressed)):
        root = ET.fromstring(svg)
        tags = {e.tag.removeprefix(SVG) for e in root.iter()}
        assert tags <= SVG_ELEMENTS, tags - SVG_ELEMENTS
        assert not [k for e in root.iter() for k in e.attrib if k.lower().startswith("on")]
        assert not [v for e in root.iter() for v in e.attrib.values() if "http://x" in v]
    root = ET.fromstring(map_svg(dressed))
    shown = " ".join(t for e in root.iter() for t in (e.text, e.tail) if t)
    for gid, name in RENAMED.values():
        assert gid in shown  # in the legend and the tooltips
        assert " ".join(name.split()) in shown  # in the tooltips
    assert "%{x} and %{customdata[0]} at $5" in shown  # no template: shown as written
    assert "\n" not in shown
    curves = ET.fromstring(curves_svg(dressed))
    tips = [t.text for t in curves.iter(f"{SVG}title")]
    rank = next(g.rank for g in dressed.shortlist if g.id == "=2+3")
    assert f"{rank}. %{{x}} and %{{customdata[0]}} at $5 (=2+3)" in tips


def test_map_figure_labels_escape_markup_and_template_markers(dressed):
    # The dashboard's map figure (Plotly): in a hover template "%{...}" is a placeholder
    # and labels are a subset of HTML (plotly.js reference, hovertemplate): names reach
    # them only escaped.
    result = dressed
    traces = list(map_figure(result).data)
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


# What the browser shows of the report: the charts' texts (legend, labels) and tooltips,
# the elements the page is made of, and its scripts.
PAGE_JS = """() => {
  const svgs = [...document.querySelectorAll('svg')];
  return {
    legend: svgs[0].textContent,
    tips: [...svgs[0].querySelectorAll('title')].map(t => t.textContent),
    curves: svgs[1].textContent,
    tags: [...new Set([...document.querySelectorAll('*')].map(e => e.tagName.toLowerCase()))],
    scripts: document.scripts.length,
    handlers: [...document.querySelectorAll('*')].flatMap(
      e => [...e.attributes].map(a => a.name)).filter(n => n.startsWith('on')),
  };
}"""


@pytest.mark.browser
def test_report_charts_show_names_as_written_in_a_browser(dressed, hostile, tmp_path):
    sync_api = _browser_ready()
    path = write_shortlist(dressed, tmp_path / "report.html", hostile[0], hostile[1])
    dialogs, requests = [], []

    def drive():
        with sync_api.sync_playwright() as p:
            browser = p.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
            try:
                page = browser.new_page()
                page.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))
                page.on("request", lambda r: requests.append(r.url))
                page.goto(path.as_uri())
                page.wait_for_load_state("load")
                seen = page.evaluate(PAGE_JS)
            finally:
                browser.close()
        return seen

    seen = off_the_event_loop(drive)
    assert seen["scripts"] == 0 and seen["handlers"] == []
    assert not set(seen["tags"]) & {"a", "img", "image", "foreignobject", "iframe", "script"}
    # The names show literally: markup as text, template markers as written.
    assert "<img src=x onerror=alert(1)>" in seen["legend"]  # the id, as the legend lists it
    tips = " ".join(seen["tips"])
    assert "%{x} and %{customdata[0]} at $5" in tips
    assert '<b>bold</b> & <a href="http://x">link</a>' in tips
    assert "<img src=x onerror=alert(2)>" in tips
    assert "line one line two" in tips
    assert "%{x} and %{customdata[0]} at $5" in seen["curves"]
    assert dialogs == []  # no script from data ran
    assert requests == [path.as_uri()]  # nothing fetched: no image, no link followed
