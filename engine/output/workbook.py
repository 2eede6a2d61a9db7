"""The shortlist as an XLSX workbook, one table a sheet.

Built on the rows of :mod:`engine.output.export` (see its notes for the layers of the export);
:func:`engine.output.export.write_shortlist` calls :func:`shortlist_xlsx` for ``.xlsx`` files.

Layout: on every sheet row 1 holds the sheet note and the caution, row 2 the bold frozen
headers and the data start in row 3 (``pandas.read_excel(path, sheet, header=1)``).
Numbers stay numbers on every sheet (stored as numbers, ``Excluded`` values and the
criteria included; a missing or non-finite one leaves its cell empty), shown to about
three significant figures; text is always stored
as text, never as a formula, on every sheet: a text that a spreadsheet would read as a
formula (:func:`engine.output.rows.formula_safe`) is also marked with the cell style's
quote prefix, so that editing the cell keeps it text.
"""

from __future__ import annotations

import io
import math

import numpy as np
from openpyxl import Workbook
from openpyxl.cell.cell import ILLEGAL_CHARACTERS_RE
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils import get_column_letter

from engine.base.caution import CAUTION
from engine.library.store import Library
from engine.output.rows import (
    PROVENANCE_COLUMNS,
    WINDOW_COLUMNS,
    criteria_rows,
    finite,
    formula_safe,
    intervals_note,
    provenance_rows,
    shortlist_header,
    shortlist_rows,
    window_rows,
    yes_no,
)
from engine.selection.ranking import RankResult

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
    first = _put(ws, 1, 1, preface)
    first.alignment = Alignment(wrap_text=True, vertical="top")
    first.font = _NOTE_FONT
    ws.merge_cells(start_row=1, start_column=1, end_row=1, end_column=span)
    per_line = max(40.0, 1.1 * sum(widths[:span]))
    lines = sum(math.ceil(max(len(part), 1) / per_line) for part in preface.split("\n"))
    ws.row_dimensions[1].height = 15.0 * lines + 4
    for j, h in enumerate(header, start=1):
        cell = _put(ws, 2, j, h)
        cell.font = _HEAD_FONT
        cell.fill = _HEAD_FILL
        cell.alignment = Alignment(wrap_text=True, vertical="bottom")
    for i, row in enumerate(rows, start=3):
        for j, h in enumerate(header, start=1):
            _put(ws, i, j, row.get(h), wrap=h in _WRAP_COLUMNS)
    ws.freeze_panes = "A3"


def _text(value) -> str:
    return ILLEGAL_CHARACTERS_RE.sub(" ", str(value))


def _put(ws, row: int, col: int, value, wrap: bool = False):
    """Write one cell (nothing for None): a number as a number, anything else as text,
    never as a formula. Returns the cell, or None."""
    if value is None:
        return None
    if isinstance(value, bool | np.bool_):
        value = yes_no(bool(value))
    if isinstance(value, int | float | np.integer | np.floating):
        value = value.item() if isinstance(value, np.generic) else value
        if isinstance(value, float) and not math.isfinite(value):
            return None  # no number to store (a workbook holds no NaN or infinity)
        cell = ws.cell(row=row, column=col, value=value)
        if isinstance(value, float):
            cell.number_format = _number_format(value)
    else:
        text = _text(value)
        cell = ws.cell(row=row, column=col, value=text)
        cell.data_type = "s"  # text stays text, even when it begins with "="
        if formula_safe(text)[:1] == "'" != text[:1]:  # text that begins a formula
            cell.quotePrefix = True  # as a spreadsheet marks text typed after a "'"
    if wrap:
        cell.alignment = Alignment(wrap_text=True, vertical="top")
    return cell


def _number_or_text(value):
    """A failure's value: a number where it is one, its text written as a number
    ("0.0512"), else the text ("T = 1.4 at 20 °C")."""
    if not isinstance(value, str):
        return finite(value)
    try:
        number = float(value)
    except ValueError:
        return value
    return number if math.isfinite(number) else value


def shortlist_xlsx(result: RankResult, library: Library | None = None) -> bytes:
    """The shortlist workbook: Shortlist, Excluded, Window properties, Criteria, Provenance.

    ``library`` supplies the provenance (imported files and the data set of each grade);
    without it the Provenance sheet says that none was recorded.
    """
    wb = Workbook()
    wb.remove(wb.active)
    rows = shortlist_rows(result)
    header = shortlist_header(result)
    short_header = [h for h in header if h not in ("passed", "failed constraints")]
    w = result.criteria.window
    _sheet(
        wb,
        "Shortlist",
        short_header,
        [r for r in rows if r["passed"] == "pass"],
        f"Grades that meet every constraint, best first. Window {w.temp_range[0]:g} to "
        f"{w.temp_range[1]:g} °C, {w.freq_range[0]:g} to {w.freq_range[1]:g} Hz; ranked "
        f"{result.created_at} (UTC) "
        f"with quietgrade {result.engine_version}. {intervals_note(result)}",
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
                    "price [per kg]": finite(g.price),
                    "constraint": f.constraint,
                    "value": _number_or_text(f.value),
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


__all__ = ["shortlist_xlsx"]
