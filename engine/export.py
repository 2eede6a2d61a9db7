"""Shortlist export: the ranked grades as CSV, XLSX and a self-contained HTML report.

Every file carries the caution of :mod:`engine.caution`. Units at this edge: moduli in
MPa, temperatures in degC, frequencies in Hz, pad area in mm2, sag in mm.

CSV layout: UTF-8 with a byte-order mark (spreadsheets then read the text correctly), one
header row, one row per grade (passing grades in rank order, then the excluded ones),
text cells always quoted, and after the data a few lines that start with ``#``: the
quietgrade version and date, grades that could not be ranked, and last the caution.
``pandas.read_csv(path, comment="#")`` reads the file back to exactly the grade rows; a
spreadsheet shows the ``#`` lines below the table. Text cells that begin with ``=``,
``+``, ``-``, ``@``, a tab or a carriage return get a leading ``'`` so that no
spreadsheet runs them as a formula (common practice).

XLSX layout: on every sheet row 1 holds the sheet note and the caution, row 2 the bold
frozen headers and the data start in row 3 (``pandas.read_excel(path, sheet, header=1)``).
Text is always stored as text, never as a formula.
"""

from __future__ import annotations

import html
import io
import math
from pathlib import Path

import numpy as np
import plotly.graph_objects as go
import plotly.io as pio
from openpyxl import Workbook
from openpyxl.cell.cell import ILLEGAL_CHARACTERS_RE
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter
from plotly.subplots import make_subplots
from scipy.interpolate import make_interp_spline

from engine.caution import CAUTION
from engine.errors import CriteriaError
from engine.mastercurve import MasterCurve
from engine.ranking import RankResult
from engine.store import Library

EXTENSIONS = (".csv", ".xlsx", ".html")

# Twelve muted colours of this project's own, in the order shortlisted grades take them.
PALETTE = (
    "#3d6b8c",  # slate blue
    "#b3603f",  # terracotta
    "#5b8748",  # moss
    "#875987",  # plum
    "#bf9533",  # ochre
    "#3f8c87",  # sea teal
    "#9a4257",  # wine
    "#6b6a3a",  # olive
    "#5b6cb0",  # dusk indigo
    "#9c7650",  # saddle tan
    "#2f7357",  # pine
    "#b35c85",  # heather rose
)
EXCLUDED_COLOUR = "#a8a8a8"
FONT_STACK = '"Source Sans 3", "Noto Sans", "DejaVu Sans", "Segoe UI", Arial, sans-serif'
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


# -- rows --------------------------------------------------------------------------------
def _finite(value) -> float | None:
    """A float, or None where the value is missing or not finite."""
    if value is None:
        return None
    v = float(value)
    return v if math.isfinite(v) else None


def _finite_max(values) -> float | None:
    a = np.asarray(values, dtype=float)
    a = a[np.isfinite(a)]
    return float(a.max()) if a.size else None


def _finite_min(values) -> float | None:
    a = np.asarray(values, dtype=float)
    a = a[np.isfinite(a)]
    return float(a.min()) if a.size else None


def _yes(flag: bool) -> str:
    return "yes" if flag else "no"


def index_columns(result: RankResult) -> dict[str, str]:
    """Column heading of every chosen index, e.g. ``"loss_factor (worst) [-]"``.

    Point indices name their aggregation over the window; window indices (one number per
    grade for the whole window) say ``window``.
    """
    out = {}
    for choice in result.criteria.indices:
        spec = result.specs[choice.name]
        how = choice.aggregate if spec.kind == "point" else "window"
        unit = f" [{spec.unit}]" if spec.unit else ""
        out[choice.name] = f"{choice.name} ({how}){unit}"
    return out


MOUNT_COLUMNS = (
    "pad area [mm2]",
    "fn min [Hz]",
    "fn max [Hz]",
    "worst transmissibility [-]",
    "max static strain [-]",
    "long-term sag [mm]",
)


def _mount_figures(figs: dict | None) -> dict:
    """Key mount figures of one grade from :meth:`MountResult.grade`.

    The natural-frequency range is over the window temperatures; the worst
    transmissibility is the largest over the window temperatures and the disturbances.
    """
    if figs is None:
        return dict.fromkeys(MOUNT_COLUMNS)
    return {
        "pad area [mm2]": _finite(figs["area_mm2"]),
        "fn min [Hz]": _finite_min(figs["natural_frequency_Hz"]),
        "fn max [Hz]": _finite_max(figs["natural_frequency_Hz"]),
        "worst transmissibility [-]": _finite_max(figs["transmissibility"]),
        "max static strain [-]": _finite_max(figs["static_strain"]),
        "long-term sag [mm]": _finite(figs["sag_mm"]),
    }


def shortlist_rows(result: RankResult) -> list[dict]:
    """One row per grade: passing grades in rank order, then the excluded ones.

    Values are numbers (None where unknown) or short texts; the keys are the column
    headings of the exports. Mount columns appear when the ranking checked a mount.
    """
    columns = index_columns(result)
    pareto_on = result.criteria.pareto is not None
    rows = []
    for g in result.grades:
        row = {
            "rank": g.rank,
            "id": g.id,
            "name": g.name,
            "supplier": g.supplier,
            "family": g.family,
            "price [per kg]": _finite(g.price),
            "density [kg/m3]": _finite(g.density),
        }
        for name, heading in columns.items():
            row[heading] = _finite(g.indices.get(name))
        row["score"] = _finite(g.score)
        row["pareto"] = _yes(g.pareto) if pareto_on and g.passed else None
        row["passed"] = "pass" if g.passed else "fail"
        row["reason"] = g.reason
        row["failed constraints"] = "; ".join(f.text() for f in g.failures) or None
        row["extrapolated"] = _yes(g.extrapolated)
        if result.mount is not None:
            row.update(_mount_figures(g.mount))
        row["notes"] = "; ".join(g.notes) or None
        rows.append(row)
    return rows


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


def _trailer_lines(result: RankResult) -> list[str]:
    """Lines after the table: version and date, grades not ranked, the caution last."""
    lines = [f"quietgrade {result.engine_version}, ranked {result.created_at} (UTC)"]
    for gid, msg in sorted(result.fit_errors.items()):
        lines.append(f"not ranked, master curve failed: {_one_line(gid)}: {_one_line(msg)}")
    lines.append(f"caution: {CAUTION}")
    return lines


# -- CSV -----------------------------------------------------------------------------------
def _csv_cell(value) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return _yes(value)
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return "" if not math.isfinite(value) else f"{value:.6g}"
    text = str(value)
    if text.startswith(_FORMULA_START):
        text = "'" + text
    return '"' + text.replace('"', '""') + '"'


def shortlist_csv(result: RankResult) -> bytes:
    """The shortlist as CSV bytes (UTF-8 with BOM); see the module notes for the layout."""
    rows = shortlist_rows(result)
    header = list(rows[0]) if rows else list(_empty_header(result))
    out = io.StringIO()
    out.write(",".join(_csv_cell(h) for h in header) + "\r\n")
    for row in rows:
        out.write(",".join(_csv_cell(row[h]) for h in header) + "\r\n")
    for line in _trailer_lines(result):
        out.write(f"# {line}\r\n")
    return ("\ufeff" + out.getvalue()).encode("utf-8")


def _empty_header(result: RankResult) -> list[str]:
    head = ["rank", "id", "name", "supplier", "family", "price [per kg]", "density [kg/m3]"]
    head += list(index_columns(result).values())
    head += ["score", "pareto", "passed", "reason", "failed constraints", "extrapolated"]
    if result.mount is not None:
        head += list(MOUNT_COLUMNS)
    return [*head, "notes"]


# -- criteria, window properties, provenance ---------------------------------------------------
_CONSTRAINT_LABELS = {
    "service_covers_window": "service range must cover the window",
    "hardness_range": "hardness range [Shore A]",
    "max_price": "highest price [per kg]",
    "min_loss_factor": "lowest worst-case loss factor [-]",
    "max_transmissibility": "highest transmissibility at the disturbance [-]",
    "fn_range_Hz": "natural-frequency range [Hz]",
    "max_static_strain": "highest static strain incl. long-term sag [-]",
    "allow_extrapolation": "extrapolation allowed",
}
_MOUNT_LABELS = {
    "layout": ("pad layout", None),
    "mass_kg": ("total supported mass [kg]", None),
    "mounts": ("pads sharing the mass", None),
    "area_mm2": ("loaded area of one pad [mm2]", None),
    "thickness_mm": ("rubber thickness [mm]", None),
    "shape": ("pad shape", None),
    "shape_factor": ("shape factor [-]", "from the pad shape"),
    "k_factor": ("compression coefficient k [-]", "from the hardness"),
    "disturbance_Hz": ("disturbance frequencies [Hz]", None),
    "target_fn_Hz": ("target natural frequency [Hz]", "off: pad area as given"),
    "sizing_temp_C": ("sizing temperature [degC]", None),
    "service_life_h": ("service life for the sag [h]", None),
}


def _setting(value):
    """A criteria value as a spreadsheet cell: numbers stay numbers."""
    if isinstance(value, bool):
        return _yes(value)
    if isinstance(value, int | float):
        return value
    if isinstance(value, list | tuple):
        if len(value) == 2 and all(isinstance(v, int | float) for v in value):
            return f"{value[0]:g} to {value[1]:g}"
        return ", ".join(f"{v:g}" if isinstance(v, int | float) else str(v) for v in value)
    return str(value)


def criteria_rows(result: RankResult) -> list[tuple[str, str, object]]:
    """(section, setting, value) rows that describe everything the ranking used."""
    c = result.criteria
    w = c.window
    rows: list[tuple[str, str, object]] = [
        ("report", "ranked at (UTC)", result.created_at),
        ("report", "quietgrade version", result.engine_version),
        ("report", "grades ranked", len(result.grades)),
        ("report", "grades passing", len(result.shortlist)),
        ("report", "grades excluded", len(result.excluded)),
    ]
    for gid, msg in sorted(result.fit_errors.items()):
        rows.append(("report", f"not ranked: {gid}", f"master curve failed: {msg}"))
    rows += [
        ("window", "lowest temperature [degC]", w.temp_range[0]),
        ("window", "highest temperature [degC]", w.temp_range[1]),
        ("window", "temperature step [K]", w.temp_step),
        ("window", "lowest frequency [Hz]", w.freq_range[0]),
        ("window", "highest frequency [Hz]", w.freq_range[1]),
        ("window", "frequencies in the band", w.freq_points),
        ("window", "design frequency [Hz]", w.design_frequency),
    ]
    for k, p in enumerate(w.duty_points, start=1):
        rows.append(
            (
                "window",
                f"duty point {k}",
                f"{p.temperature_C:g} degC, {p.frequency_Hz:g} Hz, share {p.share:g}",
            )
        )
    rows.append(("design", "design type", c.design))
    rows.append(("design", "loss-factor threshold of the damping span [-]", c.eta_threshold))
    for choice in c.indices:
        spec = result.specs[choice.name]
        section = f"index {choice.name}"
        rows += [
            (section, "label", spec.label),
            (section, "unit", spec.unit or "-"),
            (section, "weight", choice.weight),
            (
                section,
                "aggregation",
                choice.aggregate if spec.kind == "point" else "one value for the window",
            ),
            (
                section,
                "direction",
                "higher is better" if spec.higher_is_better else "lower is better",
            ),
        ]
        if choice.formula is not None:
            rows.append((section, "formula", choice.formula))
    rows.append(("ranking", "Pareto pair", "off" if c.pareto is None else ", ".join(c.pareto)))
    for key, value in c.constraints.to_dict().items():
        label = _CONSTRAINT_LABELS.get(key, key)
        if value is None and key == "max_static_strain" and result.mount is not None:
            value = f"{result.mount.strain_limit:g} (the layout's common-practice limit)"
        rows.append(("constraint", label, "off" if value is None else _setting(value)))
    if c.mount is not None:
        for key, value in c.mount.to_dict().items():
            label, when_none = _MOUNT_LABELS.get(key, (key, None))
            shown = (when_none or "off") if value is None else _setting(value)
            rows.append(("mount", label, shown))
        rows.append(("mount", "mass per pad [kg]", c.mount.mass_per_pad))
    return rows


WINDOW_COLUMNS = (
    "rank",
    "id",
    "name",
    "passed",
    "temperature [degC]",
    "frequency [Hz]",
    "storage modulus E' [MPa]",
    "loss modulus E'' [MPa]",
    "loss factor [-]",
    "extrapolated",
)


def window_properties(result: RankResult):
    """E', E'', flags of every grade at the window temperatures and the design frequency.

    Returns (frequency [Hz], storage (grades, T) [Pa], loss [Pa], extrapolated, note)
    with rows in the order of ``result.window_props.ids``.

    Notes
    -----
    Sources, in order of preference (the note says which one was used):
    the temperature path the ranking evaluated at the design frequency (``path_*``,
    1 K steps) when every window temperature lies on it; else the window grid when the
    design frequency is one of the band frequencies (the default design frequency, the
    geometric mean of the band, is the middle one of an odd number of points); else the
    path interpolated linearly in log10 modulus between its two neighbouring points,
    flagged as extrapolated where either neighbour is; else, without a path, the grid at
    the band frequency nearest the design frequency.
    """
    props = result.window_props
    temps = np.asarray(props.temperatures, dtype=float)
    design_f = result.criteria.window.design_frequency
    tensile = "moduli are tensile-equivalent (shear data converted with E = 2(1 + nu) G)"
    at_design = f"At the design frequency {design_f:.4g} Hz"
    has_path = props.path_storage is not None
    if has_path:
        pt = np.asarray(props.path_temperatures, dtype=float)
        on_path = np.isclose(pt[:, None], temps[None, :], atol=1e-9, rtol=0)
        if on_path.any(axis=0).all():
            idx = on_path.argmax(axis=0)
            note = f"{at_design}, from the temperature path of the ranking; {tensile}."
            return (
                design_f,
                props.path_storage[:, idx],
                props.path_loss[:, idx],
                props.path_extrapolated[:, idx],
                note,
            )
    on_band = np.isclose(props.frequencies, design_f, rtol=1e-9, atol=0)
    if on_band.any() or not has_path:
        j = (
            int(np.argmax(on_band))
            if on_band.any()
            else int(np.argmin(np.abs(np.log10(props.frequencies / design_f))))
        )
        f_used = float(props.frequencies[j])
        if on_band.any():
            note = f"{at_design}, from the window grid of the ranking; {tensile}."
        else:
            note = (
                f"At {f_used:.4g} Hz, the band frequency nearest the design frequency "
                f"{design_f:.4g} Hz, from the window grid of the ranking; {tensile}."
            )
        return (
            f_used,
            props.storage[:, :, j],
            props.loss[:, :, j],
            props.extrapolated[:, :, j],
            note,
        )
    log_s = make_interp_spline(pt, np.log10(props.path_storage), k=1, axis=1)(temps)
    log_l = make_interp_spline(pt, np.log10(props.path_loss), k=1, axis=1)(temps)
    right = np.clip(np.searchsorted(pt, temps), 0, pt.size - 1)
    left = np.clip(np.searchsorted(pt, temps, side="right") - 1, 0, pt.size - 1)
    extrap = props.path_extrapolated[:, left] | props.path_extrapolated[:, right]
    note = (
        f"{at_design}, from the temperature path of the ranking (1 K steps), interpolated "
        f"linearly in log modulus at window temperatures between path points; {tensile}."
    )
    return design_f, 10.0**log_s, 10.0**log_l, extrap, note


def window_rows(result: RankResult) -> tuple[list[dict], str]:
    """Rows of the window-properties table (grades in result order) and its note."""
    freq, storage, loss, extrap, note = window_properties(result)
    where = {gid: k for k, gid in enumerate(result.window_props.ids)}
    temps = result.window_props.temperatures
    rows = []
    for g in result.grades:
        k = where[g.id]
        for i, t in enumerate(temps):
            rows.append(
                {
                    "rank": g.rank,
                    "id": g.id,
                    "name": g.name,
                    "passed": "pass" if g.passed else "fail",
                    "temperature [degC]": float(t),
                    "frequency [Hz]": float(freq),
                    "storage modulus E' [MPa]": _finite(storage[k, i] / 1e6),
                    "loss modulus E'' [MPa]": _finite(loss[k, i] / 1e6),
                    "loss factor [-]": _finite(loss[k, i] / storage[k, i]),
                    "extrapolated": _yes(bool(extrap[k, i])),
                }
            )
    return rows, note


PROVENANCE_COLUMNS = (
    "record",
    "grade id",
    "file name",
    "file kind",
    "sha256",
    "size [bytes]",
    "rows",
    "points",
    "data hash",
    "imported at",
)


def provenance_rows(result: RankResult, library: Library | None) -> list[dict]:
    """Library imports, then the data set each ranked grade's master curve was fitted to.

    The data set used is the newest one of the grade (as :func:`engine.fits.fit_library`
    takes it).
    """
    if library is None:
        return []
    rows = []
    for imp in library.imports():
        rows.append(
            {
                "record": "library import",
                "grade id": None,
                "file name": imp["file_name"],
                "file kind": imp["kind"],
                "sha256": imp["sha256"],
                "size [bytes]": imp["size_bytes"],
                "rows": imp["rows"],
                "points": None,
                "data hash": None,
                "imported at": imp["imported_at"],
            }
        )
    newest = {}
    for ds in library.datasets():
        newest[ds.material_id] = ds  # ordered by data set id within a grade
    for g in result.grades:
        ds = newest.get(g.id)
        rows.append(
            {
                "record": "data set used",
                "grade id": g.id,
                "file name": ds.file_name if ds else "not in this library",
                "file kind": "sweep" if ds else None,
                "sha256": ds.sha256 if ds else None,
                "size [bytes]": None,
                "rows": None,
                "points": ds.n_points if ds else None,
                "data hash": ds.data_hash if ds else None,
                "imported at": ds.imported_at if ds else None,
            }
        )
    return rows


# -- XLSX ------------------------------------------------------------------------------------
_HEAD_FONT = Font(bold=True)
_HEAD_FILL = PatternFill("solid", fgColor="E4E9E4")
_NOTE_FONT = Font(italic=True, color="5A3A28")
_WRAP_COLUMNS = {"reason", "failed constraints", "notes", "value", "limit needed"}


def _number_format(value: float) -> str:
    """A display format with about three significant figures (the stored value is exact)."""
    a = abs(value)
    if a == 0:
        return "0"
    if a >= 1e6 or a < 1e-3:
        return "0.00E+00"
    decimals = max(0, 2 - math.floor(math.log10(a)))
    return "#,##0" if decimals == 0 else "0." + "0" * decimals


def _sheet(wb: Workbook, title: str, header: list[str], rows: list[dict], note: str) -> None:
    """One table sheet: note and caution in row 1, bold frozen headers in row 2."""
    ws = wb.create_sheet(title)
    ncol = max(len(header), 1)
    preface = (note + "\n" if note else "") + "Caution: " + CAUTION
    widths = []
    for j, h in enumerate(header, start=1):
        cells = [h] + ["" if r.get(h) is None else str(r.get(h)) for r in rows]
        wide = max(len(s) for s in cells)
        widths.append(min(60 if h in _WRAP_COLUMNS else 44, max(9, wide + 2)))
        ws.column_dimensions[get_column_letter(j)].width = widths[-1]
    span = max(ncol, 6)
    for j in range(ncol + 1, span + 1):
        ws.column_dimensions[get_column_letter(j)].width = 14
        widths.append(14)
    first = ws.cell(row=1, column=1, value=_text(preface))
    first.data_type = "s"
    first.alignment = Alignment(wrap_text=True, vertical="top")
    first.font = _NOTE_FONT
    ws.merge_cells(start_row=1, start_column=1, end_row=1, end_column=span)
    per_line = max(40.0, 1.1 * sum(widths[:span]))
    lines = sum(math.ceil(max(len(part), 1) / per_line) for part in preface.split("\n"))
    ws.row_dimensions[1].height = 15.0 * lines + 4
    for j, h in enumerate(header, start=1):
        cell = ws.cell(row=2, column=j, value=_text(h))
        cell.data_type = "s"
        cell.font = _HEAD_FONT
        cell.fill = _HEAD_FILL
        cell.alignment = Alignment(wrap_text=True, vertical="bottom")
    for i, row in enumerate(rows, start=3):
        for j, h in enumerate(header, start=1):
            _put(ws, i, j, row.get(h), wrap=h in _WRAP_COLUMNS)
    ws.freeze_panes = "A3"


def _text(value) -> str:
    return ILLEGAL_CHARACTERS_RE.sub(" ", str(value))


def _put(ws, row: int, col: int, value, wrap: bool = False) -> None:
    if value is None:
        return
    if isinstance(value, bool):
        value = _yes(value)
    if isinstance(value, int | float):
        cell = ws.cell(row=row, column=col, value=value)
        if isinstance(value, float) and math.isfinite(value):
            cell.number_format = _number_format(value)
    else:
        cell = ws.cell(row=row, column=col, value=_text(value))
        cell.data_type = "s"  # text stays text, even when it begins with "="
    if wrap:
        cell.alignment = Alignment(wrap_text=True, vertical="top")


def shortlist_xlsx(result: RankResult, library: Library | None = None) -> bytes:
    """The shortlist workbook: Shortlist, Excluded, Window properties, Criteria, Provenance.

    ``library`` supplies the provenance (imported files and the data set of each grade);
    without it the Provenance sheet says that none was recorded.
    """
    wb = Workbook()
    wb.remove(wb.active)
    rows = shortlist_rows(result)
    header = list(rows[0]) if rows else _empty_header(result)
    short_header = [h for h in header if h not in ("passed", "failed constraints")]
    _sheet(
        wb,
        "Shortlist",
        short_header,
        [r for r in rows if r["passed"] == "pass"],
        f"Grades that meet every constraint, best first. Window "
        f"{result.criteria.window.temp_range[0]:g} to {result.criteria.window.temp_range[1]:g}"
        f" degC, {result.criteria.window.freq_range[0]:g} to "
        f"{result.criteria.window.freq_range[1]:g} Hz; ranked {result.created_at} (UTC) "
        f"with quietgrade {result.engine_version}.",
    )
    excluded = []
    for g in result.excluded:
        for f in g.failures:
            excluded.append(
                {
                    "id": g.id,
                    "name": g.name,
                    "supplier": g.supplier,
                    "family": g.family,
                    "price [per kg]": _finite(g.price),
                    "constraint": f.constraint,
                    "value": f.value if isinstance(f.value, str) else _finite(f.value),
                    "limit needed": f.limit,
                }
            )
    _sheet(
        wb,
        "Excluded",
        [
            "id",
            "name",
            "supplier",
            "family",
            "price [per kg]",
            "constraint",
            "value",
            "limit needed",
        ],
        excluded,
        "One row per constraint an excluded grade failed: the value found and the limit.",
    )
    wrows, wnote = window_rows(result)
    _sheet(wb, "Window properties", list(WINDOW_COLUMNS), wrows, wnote)
    crit = [{"section": s, "setting": k, "value": v} for s, k, v in criteria_rows(result)]
    _sheet(
        wb,
        "Criteria",
        ["section", "setting", "value"],
        crit,
        "Everything the ranking depended on.",
    )
    prov = provenance_rows(result, library)
    _sheet(
        wb,
        "Provenance",
        list(PROVENANCE_COLUMNS),
        prov,
        "Files imported into the library and the data set each grade's master curve was fitted to."
        if library is not None
        else "No library was given to the export: file provenance is not recorded.",
    )
    out = io.BytesIO()
    wb.save(out)
    return out.getvalue()


# -- HTML ------------------------------------------------------------------------------------
_CSS = """
:root { --ink: #23282b; --muted: #5d666b; --rule: #d5dad3; --head: #e8ece6;
        --warn: #b3603f; --warn-bg: #fbf1e9; }
body { font-family: $font; color: var(--ink); background: #ffffff; margin: 0;
       line-height: 1.45; font-size: 15px; }
main { max-width: 1180px; margin: 0 auto; padding: 24px 28px 48px; }
h1 { font-size: 26px; margin: 0 0 4px; font-weight: 600; letter-spacing: 0.01em; }
h2 { font-size: 19px; margin: 34px 0 10px; font-weight: 600;
     border-bottom: 2px solid var(--rule); padding-bottom: 4px; }
p.meta, p.hint { color: var(--muted); margin: 4px 0 10px; }
.caution { border-left: 6px solid var(--warn); background: var(--warn-bg);
           padding: 12px 16px; margin: 18px 0; border-radius: 3px; }
.caution strong { color: var(--warn); }
.scroll { overflow-x: auto; }
table { border-collapse: collapse; font-size: 13.5px; margin: 6px 0 4px; }
th, td { border-bottom: 1px solid var(--rule); padding: 5px 9px; text-align: left;
         vertical-align: top; }
th { background: var(--head); font-weight: 600; white-space: nowrap; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
td.reason { min-width: 300px; }
td.grade { min-width: 170px; }
td.notes { min-width: 240px; font-size: 12.5px; color: var(--muted); }
td small, li small { color: var(--muted); }
tr.excluded td { color: var(--muted); }
ul.fails { margin: 0; padding-left: 18px; }
.swatch { display: inline-block; width: 10px; height: 10px; border-radius: 2px;
          margin-right: 6px; vertical-align: baseline; }
.figure { border: 1px solid var(--rule); border-radius: 4px; padding: 6px; margin: 8px 0; }
code { font-size: 12.5px; }
""".replace("$font", FONT_STACK)


def _e(value) -> str:
    """Text from data, escaped for HTML (and for Plotly's HTML-like labels)."""
    return html.escape("" if value is None else str(value), quote=True)


def _num(value, digits: int = 3) -> str:
    """A number for a table cell: about ``digits`` significant figures."""
    if isinstance(value, str):
        return _e(value)
    if isinstance(value, int) and not isinstance(value, bool):
        return str(value)
    v = _finite(value)
    if v is None:
        return "&ndash;"
    a = abs(v)
    if a != 0 and (a >= 1e5 or a < 1e-3):
        return f"{v:.{digits - 1}e}"
    if a >= 100:
        return f"{v:.0f}"
    return f"{v:.{digits}g}"


def _cell(value) -> str:
    if isinstance(value, int | float) and not isinstance(value, bool):
        return f'<td class="num">{_num(value)}</td>'
    return f"<td>{'&ndash;' if value is None else _e(value)}</td>"


def _colours(result: RankResult) -> dict[str, str]:
    return {g.id: PALETTE[k % len(PALETTE)] for k, g in enumerate(result.shortlist)}


def _style(fig, height: int) -> None:
    axis = {
        "showline": True,
        "linecolor": "#8c958f",
        "gridcolor": "#e6e9e3",
        "zeroline": False,
        "ticks": "outside",
        "tickcolor": "#8c958f",
    }
    fig.update_layout(
        template="none",
        height=height,
        font={"family": FONT_STACK, "size": 13, "color": "#23282b"},
        paper_bgcolor="#ffffff",
        plot_bgcolor="#fbfbf8",
        margin={"l": 70, "r": 20, "t": 30, "b": 60},
        legend={"bgcolor": "rgba(255,255,255,0.85)", "bordercolor": "#d5dad3", "borderwidth": 1},
        hoverlabel={"font": {"family": FONT_STACK, "size": 12}},
        hovermode="closest",
    )
    fig.update_xaxes(**axis)
    fig.update_yaxes(**axis)


def _split(y: np.ndarray, flag: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(measured, extrapolated) copies of ``y`` with NaN gaps; the dotted part keeps the
    neighbouring points so that the two lines join."""
    flag = np.asarray(flag, dtype=bool)
    near = flag.copy()
    near[1:] |= flag[:-1]
    near[:-1] |= flag[1:]
    return np.where(flag, np.nan, y), np.where(near, y, np.nan)


def _label(g) -> str:
    """Escaped "name (id)" of a grade, safe inside a Plotly hover template too."""
    return f"{_e(g.name)} ({_e(g.id)})".replace("%", "&#37;")


def _flags(extrap: np.ndarray) -> list[str]:
    return ["<br>extrapolated" if x else "" for x in extrap]


def map_figure(result: RankResult):
    """Modulus-loss map: E' [MPa] against loss factor (log-log), each grade's path
    across the window temperatures at the design frequency."""
    props = result.window_props
    colours = _colours(result)
    where = {gid: k for k, gid in enumerate(props.ids)}
    temps = np.asarray(props.path_temperatures, dtype=float)
    window_t = np.asarray(props.temperatures, dtype=float)
    at_window = np.isclose(temps[:, None], window_t[None, :], atol=1e-9, rtol=0).any(axis=1)
    sizes = np.where(at_window, 6, 0)
    sizes[0] = 11  # the coldest end
    fig = go.Figure()
    shown_excluded = False
    for g in [*result.excluded, *result.shortlist]:
        k = where[g.id]
        storage = props.path_storage[k] / 1e6
        eta = props.path_loss[k] / props.path_storage[k]
        extrap = props.path_extrapolated[k]
        solid, dotted = _split(storage, extrap)
        status = f"rank {g.rank}" if g.passed else "excluded"
        hover = (
            f"{_label(g)}<br>{status}<br>%{{customdata:.4~g}} degC<br>E' %{{y:.4~g}} MPa, "
            "loss factor %{x:.3~g}%{text}<extra></extra>"
        )
        if g.passed:
            colour, opacity, group = colours[g.id], 1.0, g.id
            name, show = f"{g.rank}. {_label(g)}", True
        else:
            colour, opacity, group = EXCLUDED_COLOUR, 0.5, "excluded"
            name, show = "excluded grades", not shown_excluded
            shown_excluded = True
        for y, dash, legend in ((solid, "solid", show), (dotted, "dot", False)):
            fig.add_trace(
                go.Scatter(
                    x=eta,
                    y=y,
                    mode="lines+markers",
                    line={"color": colour, "width": 2.2 if g.passed else 1.4, "dash": dash},
                    marker={"size": sizes, "color": colour},
                    opacity=opacity,
                    name=name,
                    legendgroup=group,
                    showlegend=legend,
                    customdata=temps,
                    text=_flags(extrap),
                    hovertemplate=hover,
                )
            )
    _style(fig, 560)
    decades = {"type": "log", "dtick": 1, "exponentformat": "none", "minor": {"showgrid": True}}
    fig.update_xaxes(title_text="loss factor tan δ [-]", **decades)
    fig.update_yaxes(title_text="storage modulus E' [MPa]", **decades)
    return fig


def curves_figure(result: RankResult):
    """E' and loss factor against temperature at the design frequency, shortlist only."""
    props = result.window_props
    colours = _colours(result)
    where = {gid: k for k, gid in enumerate(props.ids)}
    temps = np.asarray(props.path_temperatures, dtype=float)
    fig = make_subplots(rows=2, cols=1, shared_xaxes=True, vertical_spacing=0.07)
    for g in result.shortlist:
        k = where[g.id]
        storage = props.path_storage[k] / 1e6
        eta = props.path_loss[k] / props.path_storage[k]
        extrap = props.path_extrapolated[k]
        name = f"{g.rank}. {_label(g)}"
        for row, values, shown in (
            (1, storage, "E' %{y:.4~g} MPa"),
            (2, eta, "loss factor %{y:.3~g}"),
        ):
            solid, dotted = _split(values, extrap)
            hover = f"{_label(g)}<br>%{{x:.4~g}} degC: {shown}%{{text}}<extra></extra>"
            for y, dash, legend in ((solid, "solid", row == 1), (dotted, "dot", False)):
                fig.add_trace(
                    go.Scatter(
                        x=temps,
                        y=y,
                        mode="lines",
                        line={"color": colours[g.id], "width": 2.2, "dash": dash},
                        name=name,
                        legendgroup=g.id,
                        showlegend=legend,
                        text=_flags(extrap),
                        hovertemplate=hover,
                    ),
                    row=row,
                    col=1,
                )
    _style(fig, 640)
    fig.update_yaxes(type="log", title_text="storage modulus E' [MPa]", row=1, col=1)
    fig.update_yaxes(title_text="loss factor tan δ [-]", row=2, col=1)
    fig.update_xaxes(title_text="temperature [°C]", row=2, col=1)
    return fig


def _figure_html(fig, first: bool) -> str:
    return pio.to_html(
        fig,
        include_plotlyjs=bool(first),
        full_html=False,
        default_height=f"{fig.layout.height}px",
        config={"displaylogo": False, "responsive": True},
    )


def _table(header: list[str], rows: list[list[str]], row_class: str = "") -> str:
    head = "".join(f"<th>{_e(h)}</th>" for h in header)
    cls = f' class="{row_class}"' if row_class else ""
    body = "".join(f"<tr{cls}>" + "".join(r) + "</tr>" for r in rows)
    return (
        f'<div class="scroll"><table><thead><tr>{head}</tr></thead>'
        f"<tbody>{body}</tbody></table></div>"
    )


def _criteria_html(result: RankResult) -> str:
    rows = [
        [f"<td>{_e(s)}</td>", f"<td>{_e(k)}</td>", _cell(v)] for s, k, v in criteria_rows(result)
    ]
    return _table(["section", "setting", "value"], rows)


def _ranked_html(result: RankResult) -> str:
    rows = shortlist_rows(result)
    passing = [r for r in rows if r["passed"] == "pass"]
    if not passing:
        return '<p class="hint">No grade meets every constraint.</p>'
    colours = _colours(result)
    skip = {"rank", "id", "name", "passed", "failed constraints", "reason", "notes"}
    if result.criteria.pareto is None:
        skip.add("pareto")
    middle = [h for h in passing[0] if h not in skip]
    header = ["rank", "grade", *middle, "reason", "notes"]
    body = []
    for r in passing:
        swatch = f'<span class="swatch" style="background:{colours[r["id"]]}"></span>'
        body.append(
            [
                f'<td class="num">{r["rank"]}</td>',
                f'<td class="grade">{swatch}{_e(r["name"])}<br><small>{_e(r["id"])}</small></td>',
                *[_cell(r[h]) for h in middle],
                f'<td class="reason">{_e(r["reason"])}</td>',
                f'<td class="notes">{_e(r["notes"] or "")}</td>',
            ]
        )
    return _table(header, body)


def _excluded_html(result: RankResult) -> str:
    if not result.excluded:
        return '<p class="hint">Every grade meets every constraint.</p>'
    body = []
    for g in result.excluded:
        fails = "".join(
            f"<li>{_e(f.constraint)}: {_e(f.value)} <small>(needs {_e(f.limit)})</small></li>"
            for f in g.failures
        )
        body.append(
            [
                f'<td class="grade">{_e(g.name)}<br><small>{_e(g.id)}</small></td>',
                _cell(g.supplier),
                _cell(g.family),
                _cell(_finite(g.price)),
                f'<td><ul class="fails">{fails}</ul></td>',
            ]
        )
    return _table(
        ["grade", "supplier", "family", "price [per kg]", "why excluded"], body, "excluded"
    )


def _curves_html(result: RankResult, curves: dict[str, MasterCurve]) -> str:
    body = []
    for g in result.grades:
        c = curves.get(g.id)
        if c is None:
            continue
        tg = next((t for t in c.tg if t.get("method") == "loss_factor_peak"), None)
        if tg is None:
            tg_text = "&ndash;"
        elif tg.get("reached"):
            tg_text = f"{tg['temperature_C']:.1f} degC at {tg['frequency_Hz']:g} Hz"
        else:
            tg_text = _e(tg.get("note", "not reached"))
        lo, hi = c.temperature_range
        body.append(
            [
                f'<td class="grade">{_e(g.name)}<br><small>{_e(g.id)}</small></td>',
                _cell(c.mode),
                f'<td class="num">{c.reference_C:.1f}</td>',
                _cell(c.shift.law.kind),
                f"<td>{tg_text}</td>",
                f"<td>{lo:g} to {hi:g}</td>",
                f"<td>{10 ** c.log_fr_range[0]:.3g} to {10 ** c.log_fr_range[1]:.3g}</td>",
            ]
        )
    if not body:
        return ""
    return "<h2>Master curves behind the figures</h2>" + _table(
        [
            "grade",
            "mode",
            "reference [degC]",
            "shift law",
            "Tg, loss-factor peak",
            "measured [degC]",
            "reduced frequency covered [Hz]",
        ],
        body,
    )


def _provenance_html(result: RankResult, library: Library | None) -> str:
    if library is None:
        return ""
    body = []
    for r in provenance_rows(result, library):
        body.append(
            [
                _cell(r["record"]),
                _cell(r["grade id"]),
                _cell(r["file name"]),
                f"<td><code>{_e(r['sha256'] or '')}</code></td>",
                _cell(r["size [bytes]"] if r["size [bytes]"] is None else int(r["size [bytes]"])),
                _cell(r["points"] if r["points"] is not None else r["rows"]),
                _cell(r["imported at"]),
            ]
        )
    return "<h2>Provenance</h2>" + _table(
        ["record", "grade", "file", "sha256", "size [bytes]", "rows / points", "imported at"],
        body,
    )


def report_html(
    result: RankResult,
    library: Library | None = None,
    curves: dict[str, MasterCurve] | None = None,
) -> str:
    """A self-contained HTML report (Plotly's script inline, so it opens offline).

    Sections: caution, criteria, ranked shortlist, excluded grades with reasons, the
    modulus-loss map, E' and loss factor against temperature for the shortlist, and,
    when given, the master-curve summary (``curves``) and provenance (``library``).
    Every text that comes from data is HTML-escaped, in tables and in chart labels.
    """
    w = result.criteria.window
    f_design = w.design_frequency
    lo, hi = w.temp_range
    caution = (
        f'<section class="caution" role="note"><strong>Caution.</strong> {_e(CAUTION)}</section>'
    )
    fit_errors = ""
    if result.fit_errors:
        items = "".join(
            f"<li>{_e(gid)}: {_e(msg)}</li>" for gid, msg in sorted(result.fit_errors.items())
        )
        fit_errors = f"<h2>Not ranked</h2><p>No master curve could be built:</p><ul>{items}</ul>"
    map_fig = _figure_html(map_figure(result), first=True)
    if result.shortlist:
        curves_fig = f'<div class="figure">{_figure_html(curves_figure(result), first=False)}</div>'
    else:
        curves_fig = '<p class="hint">No grade meets every constraint.</p>'
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        "<title>quietgrade shortlist</title>",
        f"<style>{_CSS}</style></head><body><main>",
        "<h1>quietgrade shortlist</h1>",
        f'<p class="meta">{len(result.shortlist)} of {len(result.grades)} grade(s) meet every '
        f"constraint over {lo:g} to {hi:g} degC and {w.freq_range[0]:g} to "
        f"{w.freq_range[1]:g} Hz. Ranked {_e(result.created_at)} (UTC) with quietgrade "
        f"{_e(result.engine_version)}.</p>",
        caution,
        "<h2>Ranked shortlist</h2>",
        _ranked_html(result),
        "<h2>Excluded grades</h2>",
        _excluded_html(result),
        fit_errors,
        "<h2>Stiffness and damping across the window</h2>",
        f'<p class="hint">Each line is one grade from {lo:g} degC (large marker) to {hi:g} '
        f"degC at the design frequency {f_design:.4g} Hz; small markers at the window "
        "temperatures; dotted where the master curve is extrapolated. Shortlisted grades in "
        "colour, excluded grades in grey. Moduli are tensile-equivalent.</p>",
        f'<div class="figure">{map_fig}</div>',
        "<h2>Shortlisted grades against temperature</h2>",
        f'<p class="hint">Storage modulus and loss factor at {f_design:.4g} Hz; dotted where '
        "extrapolated.</p>",
        curves_fig,
        _curves_html(result, curves) if curves else "",
        "<h2>Criteria</h2>",
        _criteria_html(result),
        _provenance_html(result, library),
        caution,
        "</main></body></html>",
    ]
    return "\n".join(p for p in parts if p)


# -- files -----------------------------------------------------------------------------------
def write_shortlist(
    result: RankResult,
    path: str | Path,
    library: Library | None = None,
    curves: dict[str, MasterCurve] | None = None,
) -> Path:
    """Write the shortlist to ``path``; the extension (.csv, .xlsx, .html) picks the format.

    The parent folder is created when missing. Returns the path written.
    """
    p = Path(path)
    suffix = p.suffix.lower()
    if suffix not in EXTENSIONS:
        shown = f"'{p.suffix}'" if p.suffix else "no extension"
        raise CriteriaError(
            f"shortlist file {p.name}: {shown} is not a shortlist format; accepted "
            f"extensions: {', '.join(EXTENSIONS)}"
        )
    if suffix == ".csv":
        data = shortlist_csv(result)
    elif suffix == ".xlsx":
        data = shortlist_xlsx(result, library)
    else:
        data = report_html(result, library, curves).encode("utf-8")
    p.parent.mkdir(parents=True, exist_ok=True)
    p.write_bytes(data)
    return p


__all__ = [
    "EXTENSIONS",
    "PALETTE",
    "criteria_rows",
    "curves_figure",
    "index_columns",
    "map_figure",
    "provenance_rows",
    "report_html",
    "shortlist_csv",
    "shortlist_rows",
    "shortlist_xlsx",
    "window_properties",
    "window_rows",
    "write_shortlist",
]
