"""Shortlist export: CSV, XLSX and HTML read back, escaping, dispatch and the CLI.

Most checks compare an export with the ranking it came from (no outside value applies to
a file layout); property values are checked against the master curve itself.
"""

import dataclasses
import html
import io
import json
import re
import time
import xml.etree.ElementTree as ET
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import plotly.colors
import pytest

import engine.output.rows as rows_module
from engine.base.caution import CAUTION, CAUTION_LINE
from engine.base.errors import CriteriaError, InputError
from engine.curves.mountcheck import MountDesign
from engine.curves.window import OperatingWindow, tensile_factor
from engine.library.fits import fit_library
from engine.output.export import (
    CSV_NOTE_COLUMNS,
    EXTENSIONS,
    RANK_INTERVAL_COLUMNS,
    interval_columns,
    shortlist_csv,
    shortlist_rows,
    window_properties,
    write_shortlist,
)
from engine.output.mapfigure import PATH_MODE, map_figure
from engine.output.palette import GRADE_COLOURS, faded, grade_colours
from engine.output.report import curves_svg, map_svg, report_html
from engine.output.workbook import shortlist_xlsx
from engine.selection.ranking import Constraints, Criteria, rank
from engine.selection.spread import rank_spread

ROOT = Path(__file__).resolve().parent.parent
SHEETS = ["Shortlist", "Excluded", "Window properties", "Criteria", "Provenance"]
MARKUP = "<script>alert(1)</script> & co"
SVG = "{http://www.w3.org/2000/svg}"


@pytest.fixture(scope="module")
def demo(demo_library):
    curves, errors = fit_library(demo_library, processes=1)
    assert not errors
    materials = {m.id: m for m in demo_library.materials()}
    return demo_library, curves, materials


def _criteria(**window):
    return Criteria(
        window=OperatingWindow(temp_range=(-20.0, 45.0), freq_range=(10.0, 100.0), **window),
        mount=MountDesign(thickness_mm=25, target_fn_Hz=10.0),
        constraints=Constraints(max_transmissibility=1.0, allow_extrapolation=True),
        pareto=("loss_factor", "frequency_drift"),
    )


@pytest.fixture(scope="module")
def ranked(demo):
    lib, curves, materials = demo
    result = rank_spread(rank(curves, materials, _criteria()), curves, materials)
    # The criteria are chosen so that both tables of the export have rows.
    assert len(result.shortlist) >= 2 and len(result.excluded) >= 2
    return result


def _with_markup(result):
    """The same result with markup in a passing and an excluded grade's texts."""
    grades = list(result.grades)
    first = result.grades.index(result.shortlist[0])
    last = result.grades.index(result.excluded[-1])
    grades[first] = dataclasses.replace(grades[first], name=MARKUP, supplier="<b>Acme</b>")
    grades[last] = dataclasses.replace(grades[last], name=MARKUP, notes=["<i>note</i>"])
    return dataclasses.replace(result, grades=grades)


# -- rows ----------------------------------------------------------------------------------
def test_rows_one_per_grade_in_rank_order(ranked):
    rows = shortlist_rows(ranked)
    assert [r["id"] for r in rows] == [g.id for g in ranked.grades]
    n = len(ranked.shortlist)
    assert [r["rank"] for r in rows[:n]] == list(range(1, n + 1))
    assert all(r["passed"] == "pass" for r in rows[:n])
    assert all(r["passed"] == "fail" and r["rank"] is None for r in rows[n:])
    assert all(r["failed constraints"] for r in rows[n:])
    for name in ("loss_factor (worst) [-]", "frequency_drift (window) [-]", "fn min [Hz]"):
        assert name in rows[0]
    scores = [r["score"] for r in rows[:n]]
    assert scores == sorted(scores, reverse=True) and scores[0] == 100.0


def test_mount_columns_follow_the_mount_check(ranked):
    # Consistency with the mount check's own arrays: fn range over the window
    # temperatures, worst transmissibility over temperatures and disturbances.
    m = ranked.mount
    for row in shortlist_rows(ranked):
        k = m.ids.index(row["id"])
        fn = m.natural_frequency[k]
        assert row["fn min [Hz]"] == pytest.approx(np.nanmin(fn), rel=1e-12)
        assert row["fn max [Hz]"] == pytest.approx(np.nanmax(fn), rel=1e-12)
        worst = np.nanmax(m.transmissibility[k])
        assert row["worst transmissibility [-]"] == pytest.approx(worst, rel=1e-12)
        assert row["max static strain [-]"] == pytest.approx(np.nanmax(m.static_strain[k]))
        assert row["long-term sag [mm]"] == pytest.approx(m.sag[k] * 1e3, rel=1e-12)
        assert row["pad area [mm2]"] == pytest.approx(m.area[k] * 1e6, rel=1e-12)


def test_no_mount_columns_without_a_mount(demo):
    lib, curves, materials = demo
    screening = Criteria(constraints=Constraints(allow_extrapolation=True), screening_only=True)
    result = rank(curves, materials, screening)
    assert result.mount is None and result.shortlist
    row = shortlist_rows(result)[0]
    assert "pad area [mm2]" not in row and "fn min [Hz]" not in row
    assert row["pareto"] is None  # no Pareto pair chosen


# -- CSV -----------------------------------------------------------------------------------
def test_csv_reads_back_with_pandas(ranked):
    data = shortlist_csv(ranked)
    assert data.startswith(b"\xef\xbb\xbf")  # UTF-8 byte-order mark
    df = pd.read_csv(io.BytesIO(data), encoding="utf-8-sig")
    rows = shortlist_rows(ranked)
    assert list(df.columns) == [*rows[0], *CSV_NOTE_COLUMNS]
    assert len(df) == len(ranked.grades)
    assert list(df["id"]) == [g.id for g in ranked.grades]
    n = len(ranked.shortlist)
    assert list(df["rank"][:n].astype(int)) == list(range(1, n + 1))
    assert df["rank"][n:].isna().all()
    # Numbers are written to 6 significant figures.
    np.testing.assert_allclose(df["score"][:n], [g.score for g in ranked.shortlist], rtol=5e-6)
    # The caution and the provenance in every row, each on one line.
    assert set(df["caution"]) == {f"{CAUTION_LINE}. {CAUTION}"}
    assert df["provenance"].nunique() == 1
    provenance = df["provenance"][0]
    assert "\n" not in provenance
    assert provenance.startswith(f"quietgrade {ranked.engine_version} | library not given | ")
    assert ranked.spread.describe() in provenance
    assert "window -20 to 45 °C, 10 to 100 Hz, design frequency 31.62 Hz" in provenance


def test_demo_shortlist_csv_reads_with_plain_pandas(ranked, demo, tmp_path):
    # A plain pandas.read_csv(path), no options: exactly one row per grade, in the
    # ranking's order, each carrying the caution and the library's location.
    lib = demo[0]
    path = write_shortlist(ranked, tmp_path / "shortlist.csv", lib)
    df = pd.read_csv(path)
    assert df.columns[0] == "rank"  # the byte-order mark is not part of the heading
    assert list(df["id"]) == [g.id for g in ranked.grades]
    assert len(df) == len(ranked.grades)
    assert df["caution"].str.contains(CAUTION, regex=False).all()
    assert df["caution"].str.startswith(CAUTION_LINE).all()
    assert df["provenance"].str.contains(f"library {lib.display_location} |", regex=False).all()


def test_csv_stamp_is_the_time_of_the_export(ranked, monkeypatch):
    # The ranking was made earlier (created_at); the file says when it was written.
    later = datetime(2031, 1, 2, 3, 4, 5, tzinfo=UTC)  # long after the ranking

    class Clock(datetime):
        @classmethod
        def now(cls, tz=None):
            return later if tz is None else later.astimezone(tz)

    monkeypatch.setattr(rows_module, "datetime", Clock)
    df = pd.read_csv(io.BytesIO(shortlist_csv(ranked)))
    stamp = later.strftime("%Y-%m-%dT%H:%M:%S")
    assert stamp != ranked.created_at[:19]
    assert set(df["provenance"].str.extract(r"written (\S+) \(UTC\)")[0]) == {stamp}
    assert f"ranked {ranked.created_at} (UTC)" in df["provenance"][0]
    monkeypatch.undo()
    # With the real clock: a second export a second later has a later stamp.
    first = pd.read_csv(io.BytesIO(shortlist_csv(ranked)))["provenance"][0]
    time.sleep(1.05)
    second = pd.read_csv(io.BytesIO(shortlist_csv(ranked)))["provenance"][0]
    written = [re.search(r"written (\S+) \(UTC\)", p)[1] for p in (first, second)]
    assert written[0] < written[1]


def test_csv_keeps_hash_signs_and_defuses_formulas(ranked):
    grades = list(ranked.grades)
    grades[0] = dataclasses.replace(
        grades[0], name='Batch #7, "soft"', supplier="=HYPERLINK(1)", family="-x"
    )
    result = dataclasses.replace(ranked, grades=grades)
    df = pd.read_csv(io.BytesIO(shortlist_csv(result)), encoding="utf-8-sig")
    assert len(df) == len(ranked.grades)
    assert df["name"][0] == 'Batch #7, "soft"'
    # A leading quote keeps a spreadsheet from running the cell (common practice).
    assert df["supplier"][0] == "'=HYPERLINK(1)" and df["family"][0] == "'-x"
    # In the workbook the text is stored as text, unchanged.
    wb = openpyxl.load_workbook(io.BytesIO(shortlist_xlsx(result)))
    header = [c.value for c in wb["Shortlist"][2]]
    cell = wb["Shortlist"].cell(row=3, column=header.index("supplier") + 1)
    assert cell.value == "=HYPERLINK(1)" and cell.data_type == "s"


def test_csv_lists_grades_that_could_not_be_ranked(ranked):
    result = dataclasses.replace(ranked, fit_errors={"XX-1": "too few\npoints"})
    df = pd.read_csv(io.BytesIO(shortlist_csv(result)))
    assert len(df) == len(ranked.grades)  # not a row of its own
    assert (
        df["provenance"]
        .str.endswith(" | not ranked, master curve failed: XX-1: too few points")
        .all()
    )


# -- XLSX ----------------------------------------------------------------------------------
def test_xlsx_sheets_layout_and_caution(ranked, demo):
    wb = openpyxl.load_workbook(io.BytesIO(shortlist_xlsx(ranked, demo[0])))
    assert wb.sheetnames == SHEETS
    for name in SHEETS:
        ws = wb[name]
        assert ws.freeze_panes == "A3"
        assert ws["A2"].font.bold
        assert ws.column_dimensions["A"].width >= 9
    assert CAUTION in wb["Shortlist"]["A1"].value
    assert CAUTION in wb["Criteria"]["A1"].value


def test_xlsx_reads_back_with_pandas(ranked, demo):
    lib = demo[0]
    data = shortlist_xlsx(ranked, lib)
    sheets = pd.read_excel(io.BytesIO(data), sheet_name=None, header=1)
    short = sheets["Shortlist"]
    assert list(short["id"]) == [g.id for g in ranked.shortlist]
    assert list(short["rank"]) == list(range(1, len(ranked.shortlist) + 1))
    excluded = sheets["Excluded"]
    assert len(excluded) == sum(len(g.failures) for g in ranked.excluded)
    first = ranked.excluded[0].failures[0]
    assert excluded["constraint"][0] == first.constraint
    assert excluded["limit needed"][0] == first.limit
    window = sheets["Window properties"]
    assert len(window) == len(ranked.grades) * len(ranked.window_props.temperatures)
    crit = sheets["Criteria"].set_index("setting")["value"]
    assert float(crit["highest temperature [degC]"]) == 45.0
    assert float(crit["lowest frequency [Hz]"]) == 10.0
    assert crit["design type"] == "isolation_mount"
    assert crit["quietgrade version"] == ranked.engine_version
    prov = sheets["Provenance"]
    imports = prov[prov["record"] == "library import"]
    assert list(imports["sha256"]) == [i["sha256"] for i in lib.imports()]
    assert list(imports["size [bytes]"]) == [i["size_bytes"] for i in lib.imports()]
    used = prov[prov["record"] == "data set used"].set_index("grade id")
    assert list(used.index) == [g.id for g in ranked.grades]
    for g in ranked.grades:
        newest = lib.datasets(g.id)[-1]
        assert used.loc[g.id, "sha256"] == newest.sha256
        assert used.loc[g.id, "points"] == newest.n_points


def test_xlsx_without_library_says_so(ranked):
    wb = openpyxl.load_workbook(io.BytesIO(shortlist_xlsx(ranked)))
    ws = wb["Provenance"]
    assert "No library was given" in ws["A1"].value
    assert ws.max_row == 2  # note and header only


def _is_number_text(value) -> bool:
    if not isinstance(value, str):
        return False
    try:
        float(value)
    except ValueError:
        return False
    return True


# The columns of each sheet that hold numbers (the value columns of Excluded and Criteria
# hold numbers where the ranking has one, and text beside them).
NUMERIC = {
    "Shortlist": ("rank", "price [per kg]", "density [kg/m3]", "score", "fn min [Hz]"),
    "Excluded": ("price [per kg]", "value"),
    "Window properties": (
        "temperature [degC]",
        "frequency [Hz]",
        "storage modulus E' [MPa]",
        "loss modulus E'' [MPa]",
        "loss factor [-]",
    ),
    "Criteria": ("value",),
    "Provenance": ("size [bytes]", "rows", "points"),
}


def test_xlsx_stores_every_number_as_a_number(ranked, demo):
    # Office Open XML: a number cell has type n, a text cell a shared string s
    # (ECMA-376 Part 1, 18.18.11 ST_CellType, from memory); openpyxl reads it as data_type.
    data = shortlist_xlsx(ranked, demo[0])
    wb = openpyxl.load_workbook(io.BytesIO(data))
    counted = {}
    for ws in wb.worksheets:
        header = [c.value for c in ws[2]]
        assert set(NUMERIC[ws.title]) <= set(header), ws.title
        numbers = 0
        for row in ws.iter_rows(min_row=3):
            for heading, cell in zip(header, row, strict=False):
                if cell.value is None:
                    continue
                # No number anywhere written as text.
                assert not _is_number_text(cell.value), (ws.title, cell.coordinate, cell.value)
                if heading in NUMERIC[ws.title] and not isinstance(cell.value, str):
                    assert cell.data_type == "n", (ws.title, cell.coordinate)
                    numbers += 1
                elif isinstance(cell.value, str):
                    assert cell.data_type == "s", (ws.title, cell.coordinate)
        counted[ws.title] = numbers
    assert all(counted.values()), counted
    # Every number of the rows behind a sheet is a number cell with that value.
    short = wb["Shortlist"]
    header = [c.value for c in short[2]]
    for i, row in enumerate(r for r in shortlist_rows(ranked) if r["passed"] == "pass"):
        for heading, value in row.items():
            if isinstance(value, int | float) and not isinstance(value, bool) and heading in header:
                cell = short.cell(row=3 + i, column=header.index(heading) + 1)
                assert cell.data_type == "n" and cell.value == pytest.approx(value, rel=1e-12)
    crit = {r[1].value: r[2] for r in wb["Criteria"].iter_rows(min_row=3)}
    assert crit["disturbance frequencies [Hz]"].data_type == "n"  # a list of one number
    assert crit["design frequency [Hz]"].value == pytest.approx(np.sqrt(10.0 * 100.0))


def _check_against_master_curves(result, demo, freq, storage, loss, atol_rel):
    _, curves, materials = demo
    temps = result.window_props.temperatures
    for k, gid in enumerate(result.window_props.ids):
        curve, m = curves[gid], materials[gid]
        nu = np.array([np.nan if m.poisson_ratio is None else m.poisson_ratio])
        to_e = tensile_factor(np.array([curve.mode]), nu)[0]
        p = curve.evaluate(temps, freq)
        np.testing.assert_allclose(storage[k], p.storage_modulus * to_e, rtol=atol_rel)
        np.testing.assert_allclose(loss[k] / storage[k], p.loss_factor, rtol=atol_rel)


@pytest.mark.parametrize("step", [5.0, 2.5])
def test_window_properties_match_the_master_curves(ranked, demo, step):
    # Integer steps lie on the 1 K path, 2.5 K steps are read from the window grid
    # (the default design frequency is the middle band point). Both agree with
    # MasterCurve.evaluate to the bank's tabulation (0.05-decade steps, ~1e-3).
    lib, curves, materials = demo
    result = ranked if step == 5.0 else rank(curves, materials, _criteria(temp_step=step))
    freq, storage, loss, extrap, note = window_properties(result)
    assert freq == pytest.approx(np.sqrt(10.0 * 100.0), rel=1e-12)
    assert ("temperature path" if step == 5.0 else "window grid") in note
    assert storage.shape == (len(result.grades), len(result.window_props.temperatures))
    _check_against_master_curves(result, demo, freq, storage, loss, 3e-3)


def test_window_properties_interpolate_between_path_points(demo):
    # Design frequency off the band and temperatures off the 1 K path: linear
    # interpolation in log10 modulus, so a midpoint is the geometric mean.
    lib, curves, materials = demo
    result = rank(curves, materials, _criteria(temp_step=2.5, design_frequency_Hz=30.0))
    freq, storage, loss, extrap, note = window_properties(result)
    assert freq == 30.0 and "interpolated" in note
    props = result.window_props
    i = int(np.flatnonzero(props.temperatures == -17.5)[0])
    j = int(np.flatnonzero(props.path_temperatures == -18.0)[0])
    neighbours = props.path_storage[:, j : j + 2]
    np.testing.assert_allclose(storage[:, i], np.sqrt(neighbours.prod(axis=1)), rtol=1e-12)
    either = props.path_extrapolated[:, j] | props.path_extrapolated[:, j + 1]
    np.testing.assert_array_equal(extrap[:, i], either)


def test_window_properties_without_a_path_use_the_nearest_band_frequency(ranked):
    props = dataclasses.replace(ranked.window_props, path_storage=None, path_loss=None)
    window = dataclasses.replace(ranked.criteria.window, design_frequency_Hz=30.0)
    criteria = dataclasses.replace(ranked.criteria, window=window)
    result = dataclasses.replace(ranked, window_props=props, criteria=criteria)
    freq, storage, _, _, note = window_properties(result)
    bands = props.frequencies
    assert freq == bands[np.argmin(np.abs(np.log10(bands / 30.0)))]
    assert "nearest the design frequency" in note
    j = int(np.flatnonzero(bands == freq)[0])
    np.testing.assert_array_equal(storage, props.storage[:, :, j])


# -- HTML ----------------------------------------------------------------------------------
def test_html_is_self_contained_with_the_caution(ranked, demo):
    text = report_html(ranked, demo[0], demo[1])
    assert "<title>quietgrade shortlist</title>" in text
    assert html.escape(CAUTION) in text and 'class="caution"' in text
    assert not re.search(r"<script[^>]*\bsrc\s*=", text, re.IGNORECASE)
    assert not re.search(r"<link[^>]*\bhref\s*=\s*[\"']?https?:", text, re.IGNORECASE)
    # No script at all; the two charts (map and curves) as inline SVG.
    assert not re.search(r"<\s*script", text, re.IGNORECASE)
    assert text.count("<svg ") == 2
    for g in ranked.shortlist:
        assert html.escape(g.reason) in text
    for g in ranked.excluded:
        for f in g.failures:
            shown = html.escape(f.constraint)
            if f.value != "":
                shown += f": {html.escape(str(f.value))}"
            assert f"<li>{shown}" in text
            if f.limit:
                assert f"<small>(needs {html.escape(f.limit)})</small>" in text
    assert "(needs )" not in text  # a statement without a limit shows none
    assert "Provenance" in text and demo[0].imports()[0]["sha256"] in text


def test_html_escapes_text_from_data(ranked, demo):
    result = _with_markup(ranked)
    text = report_html(result, demo[0], demo[1])
    assert MARKUP not in text and "<script>alert" not in text
    assert html.escape(MARKUP) in text
    assert "<b>Acme</b>" not in text and "&lt;b&gt;Acme&lt;/b&gt;" in text
    assert "<i>note</i>" not in text
    # The charts carry the escaped form too: legend and tooltip texts read back (through
    # an XML parser) as written, and the raw markup is nowhere in the drawing.
    escaped = "&lt;script&gt;alert(1)&lt;/script&gt; &amp; co"
    for svg in (map_svg(result), curves_svg(result)):
        assert MARKUP not in svg and "<script" not in svg and escaped in svg
        root = ET.fromstring(svg)
        assert not root.findall(f".//{SVG}script")
        shown = [t.text or "" for t in root.iter() if t.tag in (f"{SVG}title", f"{SVG}tspan")]
        assert any(MARKUP in t for t in shown)


def test_palette_is_our_own_and_the_report_takes_it(ranked):
    assert len(GRADE_COLOURS) == 16 and len({c.lower() for c in GRADE_COLOURS}) == 16
    defaults = (
        plotly.colors.qualitative.Plotly
        + plotly.colors.qualitative.D3
        + plotly.colors.qualitative.T10
        + plotly.colors.qualitative.G10
    )
    assert not {c.lower() for c in GRADE_COLOURS} & {c.lower() for c in defaults}
    # One colour per ranked grade (the dashboard gives the same library's grades these).
    colours = grade_colours(ranked.window_props.ids)
    paths = {t.legendgroup: t for t in map_figure(ranked).data if t.mode == PATH_MODE}
    assert set(paths) == set(ranked.window_props.ids)
    for g in ranked.shortlist:
        assert paths[g.id].line.color == faded(colours[g.id], 1.0)
        assert paths[g.id].line.dash == "solid" and paths[g.id].name == g.id
    for g in ranked.excluded:  # dotted and faded, in the grade's own colour
        assert paths[g.id].line.dash == "dot"
        assert paths[g.id].line.color == faded(colours[g.id], 0.38)
    # The legend: the passing grades in rank order, then the excluded ones.
    order = sorted(paths.values(), key=lambda t: t.legendrank)
    assert [t.legendgroup for t in order] == [g.id for g in ranked.shortlist + ranked.excluded]
    # The report's charts draw each grade in the same colour (the first shortlisted
    # grade's lines on the curves, every grade's path on the map).
    first = ranked.shortlist[0]
    root = ET.fromstring(curves_svg(ranked))
    mine = [
        line.get("stroke")
        for g in root.iter(f"{SVG}g")
        if g.findtext(f"{SVG}title") == f"{first.rank}. {first.name} ({first.id})"
        for line in g.iter(f"{SVG}polyline")
    ]
    assert mine and set(mine) == {colours[first.id]}
    drawn = ET.fromstring(map_svg(ranked))
    for g in drawn.iter(f"{SVG}g"):
        tip = g.findtext(f"{SVG}title") or ""
        gid = tip.split(" ", 1)[0]
        if gid in colours and g.find(f"{SVG}polyline") is not None:
            assert {p.get("stroke") for p in g.iter(f"{SVG}polyline")} == {colours[gid]}


# -- units in text ---------------------------------------------------------------------------
def test_text_writes_degrees_celsius_and_headings_keep_the_unit_name(ranked, demo):
    # Sentences (failure texts, sheet notes, the report) write °C; column headings and
    # setting names keep the import format's unit name [degC]. The files carry the sign
    # through UTF-8 (CSV with BOM) and the workbook's shared strings.
    limit = "to cover -20 to 45 °C"
    service = [f for g in ranked.excluded for f in g.failures if f.constraint == "service range"]
    assert service and all(f.limit == limit for f in service)
    df = pd.read_csv(io.BytesIO(shortlist_csv(ranked)), encoding="utf-8-sig")
    failed = df["failed constraints"].dropna()
    assert sum(limit in s for s in failed) == len(service)
    wb = openpyxl.load_workbook(io.BytesIO(shortlist_xlsx(ranked)))
    assert "Window -20 to 45 °C, 10 to 100 Hz" in wb["Shortlist"]["A1"].value
    sheets = pd.read_excel(io.BytesIO(shortlist_xlsx(ranked)), sheet_name=None, header=1)
    assert list(sheets["Excluded"]["limit needed"]).count(limit) == len(service)
    assert "temperature [degC]" in sheets["Window properties"].columns
    assert "highest temperature [degC]" in set(sheets["Criteria"]["setting"])
    text = report_html(ranked, demo[0], demo[1])
    assert "constraint over -20 to 45 °C and 10 to 100 Hz" in text
    assert f"<small>(needs {limit})</small>" in text
    assert "<td>highest temperature [°C]</td>" in text
    hovers = [t.hovertemplate for t in map_figure(ranked).data if t.mode == PATH_MODE]
    assert hovers and all(" °C" in h and "degC" not in h for h in hovers)
    # The whole page, the master-curve table with the fits' own notes included, shows
    # no "degC" at all.
    assert "<h2>Master curves behind the figures</h2>" in text and "degC" not in text


# -- files ---------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("name", "magic"),
    [("list.csv", b"\xef\xbb\xbf"), ("list.XLSX", b"PK"), ("list.Html", b"<!DOCTYPE html>")],
)
def test_write_shortlist_dispatches_on_the_extension(ranked, demo, tmp_path, name, magic):
    target = tmp_path / "new" / "folder" / name
    out = write_shortlist(ranked, target, demo[0])
    assert out == target and target.read_bytes().startswith(magic)


@pytest.mark.parametrize(
    ("name", "shown"), [("list.pdf", r"'\.pdf'"), ("list", "no extension"), ("a.csv.txt", "txt")]
)
def test_write_shortlist_rejects_other_extensions(ranked, tmp_path, name, shown):
    assert EXTENSIONS == (".csv", ".xlsx", ".html")
    with pytest.raises(
        CriteriaError, match=shown + r".*accepted extensions: \.csv, \.xlsx, \.html"
    ):
        write_shortlist(ranked, tmp_path / "sub" / name)
    assert not (tmp_path / "sub").exists()


@pytest.mark.parametrize("blocked", ["file in the folder's place", "folder in the file's place"])
def test_write_shortlist_to_a_path_that_cannot_be_written(ranked, tmp_path, blocked):
    if blocked.startswith("file"):
        (tmp_path / "taken").write_text("not a folder")
        target, reason = tmp_path / "taken" / "list.csv", "File exists|Not a directory"
    else:
        (tmp_path / "list.csv").mkdir()
        target, reason = tmp_path / "list.csv", "Is a directory"
    match = rf"list\.csv: cannot write the shortlist here: ({reason})$"
    with pytest.raises(InputError, match=match) as caught:
        write_shortlist(ranked, target)
    assert "\n" not in str(caught.value)  # one line
    assert caught.value.file == str(target)


# -- rank intervals ------------------------------------------------------------------------
def test_rank_intervals_read_back_from_csv_and_xlsx(ranked):
    best, worst = RANK_INTERVAL_COLUMNS
    n = len(ranked.shortlist)
    csv = pd.read_csv(io.BytesIO(shortlist_csv(ranked)), encoding="utf-8-sig")
    xlsx = pd.read_excel(io.BytesIO(shortlist_xlsx(ranked)), sheet_name="Shortlist", header=1)
    for table in (csv[:n], xlsx):
        assert list(table[best]) == [g.rank_interval[0] for g in ranked.shortlist]
        assert list(table[worst]) == [g.rank_interval[1] for g in ranked.shortlist]
        assert (table[best] <= table["rank"]).all() and (table["rank"] <= table[worst]).all()
    assert csv[best][n:].isna().all() and csv[worst][n:].isna().all()
    # Each column with an interval is followed by its low and high.
    header = list(csv.columns)
    for heading, (low, high) in interval_columns(ranked).items():
        k = header.index(heading)
        assert header[k + 1 : k + 3] == [low, high]
        inside = csv[:n].dropna(subset=[heading, low, high])
        # Rounding to 6 figures keeps the order of low, value and high.
        assert ((inside[low] <= inside[heading]) & (inside[heading] <= inside[high])).all()
    assert header.index(best) == header.index("rank") + 1


def test_export_without_intervals_keeps_its_columns_and_says_so(demo):
    lib, curves, materials = demo
    plain = rank(curves, materials, _criteria())
    df = pd.read_csv(io.BytesIO(shortlist_csv(plain)))
    note = "Rank intervals and low/high values were not computed for this ranking."
    assert df["provenance"].str.contains(note, regex=False).all()
    assert df[RANK_INTERVAL_COLUMNS[0]].isna().all()
    assert df["fn min low [Hz]"].isna().all()
    assert "not computed" in report_html(plain)


# -- command line --------------------------------------------------------------------------
def test_cli_rank_writes_a_workbook(tmp_path, run_cli):
    db = tmp_path / "lib.sqlite"
    assert "demo library loaded" in run_cli(db, "demo").stdout
    mount = tmp_path / "mount.json"
    mount.write_text(json.dumps({"thickness_mm": 25, "target_fn_Hz": 10.0}))
    out = tmp_path / "out" / "shortlist.xlsx"
    ranked = run_cli(
        db,
        "rank",
        "--temp-range",
        "-20",
        "45",
        "--freq-range",
        "10",
        "100",
        "--allow-extrapolation",
        "--mount",
        str(mount),
        "--max-transmissibility",
        "1",
        "--json",
        "--out",
        str(out),
    )
    assert ranked.returncode == 0, ranked.stderr
    data = json.loads(ranked.stdout)
    wb = openpyxl.load_workbook(out)
    assert wb.sheetnames == SHEETS
    short = pd.read_excel(out, sheet_name="Shortlist", header=1)
    assert list(short["id"]) == [r["id"] for r in data["shortlist"]]
    assert "pad area [mm2]" in short.columns
    excluded = pd.read_excel(out, sheet_name="Excluded", header=1)
    assert len(excluded) == sum(len(r["failures"]) for r in data["excluded"])
