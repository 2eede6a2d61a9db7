"""Reading and validating catalog, sweep and amplitude-sweep files.

The catalog and sweep formats are those of DESIGN.md; the strain-amplitude sweep format
is in docs/amplitude_sweeps.md. A file with a ``strain_amplitude`` column given among
the sweep files is read as an amplitude sweep.

Every problem is an :class:`~engine.base.errors.InputError` naming file, row and column.
Rows are counted as a spreadsheet shows them: the header is row 1, the first data row
is row 2. Nothing here writes to the library; :func:`import_files` validates everything
first and then hands one transaction to :class:`~engine.library.store.Library`.
"""

from __future__ import annotations

import csv
import functools
import hashlib
import io
import re
import warnings
import zipfile
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, ParamSpec, TypeVar

import numpy as np
import pandas as pd

from engine.base.errors import InputError
from engine.base.fields import CATALOG, FIELDS, MODES
from engine.base.units import (
    ABSOLUTE_ZERO_C,
    DENSITY_UNITS,
    FREQUENCY_UNITS,
    HARDNESS_UNITS,
    MODULUS_UNITS,
    PRICE_UNITS,
    TEMPERATURE_UNITS,
    canonical_unit,
    density_unit,
    frequency_to_hz,
    hardness_unit,
    modulus_to_pa,
    price_unit,
    split_header,
    temperature_to_c,
)
from engine.library.store import Library, Material

CATALOG_REQUIRED = ("id", *(f.name for f in CATALOG if f.required))
# Optional catalog columns: name -> (expected unit or None, kind), from the field table
CATALOG_OPTIONAL = {f.name: (f.header_unit, f.kind) for f in CATALOG if not f.required}
SWEEP_REQUIRED = ("material", "temperature", "frequency", "storage_modulus")
AMPLITUDE_REQUIRED = ("material", "temperature", "frequency", "strain_amplitude", "storage_modulus")
STRAIN_UNITS = {"-": 1.0, "%": 0.01}  # strain amplitude as a fraction, or in percent
AMPLITUDE_MIN_POINTS = 5  # fewest points of a grade's amplitude sweep (six-parameter fit)
MAX_STRAIN_AMPLITUDE = 1.0  # 100 %: above it a value is taken for a unit mistake
MIN_STRAIN = 1e-9  # strain amplitudes of dynamic tests start near 1e-6 (common practice)
# Points of one grade's amplitude sweep count as one temperature within this band [K]
# (the default isotherm tolerance of the master-curve fit) and as one frequency within
# this relative band.
AMPLITUDE_TEMPERATURE_BAND = 1.0
AMPLITUDE_FREQUENCY_BAND = 0.01


# Limits on what a file may hold; each refusal names its limit.
MAX_FILE_BYTES = 200_000_000  # 200 MB per file
MAX_XLSX_UNPACKED_BYTES = 1024 * 1024 * 1024  # 1 GiB of XML inside one workbook
MAX_CELL_CHARS = 10_000  # characters in one cell, header cells included
MAX_ROWS = 5_000_000  # data rows (points) in one file
MAX_ID_CHARS = 200  # characters in a grade id
# Physical ranges of stored values, after unit conversion. Values outside them are unit
# mistakes or damaged files; none is a measurement of a solid polymer.
MAX_TEMPERATURE_C = 4000.0  # above the melting point of every solid (about 4000 degC, from memory)
MIN_FREQUENCY_HZ = 1e-9
MAX_FREQUENCY_HZ = 1e9  # dynamic tests span about 1e-5 to 1e7 Hz (common practice)
MIN_MODULUS_PA = 1e-3
MAX_MODULUS_PA = 1e12  # above diamond, the stiffest solid (about 1.1e12 Pa, from memory)
MAX_LOSS_FACTOR = 1e4  # tan delta of a solid's data; beyond it E' is lost in noise
MIN_DENSITY = 5.0  # kg/m3; the lightest polymer foams are about 10 kg/m3 (common practice)
MAX_DENSITY = 25_000.0  # kg/m3; osmium, the densest element, is 22,590 (from memory)
MAX_BULK_MODULUS_MPA = 1e6  # 1e12 Pa, as MAX_MODULUS_PA
DUPLICATE_TOLERANCE = 0.10  # repeated points (same grade, T, f) agreeing within 10 %

# Characters that end a line for str.splitlines, shown escaped in messages
_LINE_BREAKS = {ord(c): repr(c)[1:-1] for c in "\n\r\x0b\x0c\x1c\x1d\x1e\x85\u2028\u2029"}
_SHOW_CHARS = 60  # a cell quoted in a message is cut to this length


def _show(value: object, limit: int = _SHOW_CHARS) -> str:
    """A cell as a message quotes it: on one line, line breaks escaped, long text cut."""
    text = str(value).translate(_LINE_BREAKS)
    if len(text) > limit:
        text = f"{text[: limit - 1]}… ({len(str(value)):,} characters)"
    return text


_P = ParamSpec("_P")
_R = TypeVar("_R")


def _one_line(func: Callable[_P, _R]) -> Callable[_P, _R]:
    """Run ``func`` with numpy's floating-point warnings off (every result is checked for
    finite, physical values instead) and make any InputError it raises one line: line
    breaks in a file name, a column header or a quoted cell are escaped, long ones cut."""

    @functools.wraps(func)
    def wrapper(*args: _P.args, **kwargs: _P.kwargs) -> _R:
        try:
            with np.errstate(all="ignore"):
                return func(*args, **kwargs)
        except InputError as exc:
            parts = (exc.reason, exc.file, exc.column)
            if all(p is None or (_show(p, 400) == p) for p in parts):
                raise
            raise InputError(
                _show(exc.reason, 400),
                file=None if exc.file is None else _show(exc.file, 200),
                row=exc.row,
                column=None if exc.column is None else _show(exc.column),
            ) from None

    return wrapper


@dataclass
class RawTable:
    """A file read as text cells: headers as written, rows of strings.

    ``decimal_comma`` says the numbers of the file are written with decimal commas
    (semicolon-separated files); only numeric columns are read so, text stays as written.
    """

    file: str
    headers: list[str]
    frame: pd.DataFrame  # all cells as str, blank as ""
    sha256: str
    size_bytes: int
    decimal_comma: bool = False


def _decode(raw: bytes, file: str) -> str:
    if not raw.strip():
        raise InputError("the file is empty", file=file)
    nul = raw.find(b"\x00")
    if 0 <= nul < 4096:
        raise InputError("this is a binary file, not CSV text or XLSX", file=file)
    if nul >= 0:
        raise InputError(
            "a NUL character in the file: it is damaged or not CSV text",
            file=file,
            row=raw.count(b"\n", 0, nul) + 1,
        )
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        try:
            text = raw.decode("cp1252")
        except UnicodeDecodeError:
            raise InputError("the file is neither UTF-8 nor Windows-1252 text", file=file) from None
        return text


def _delimiter(first_line: str) -> str:
    counts = {d: first_line.count(d) for d in (",", ";", "\t")}
    best = max(counts, key=counts.__getitem__)
    return best if counts[best] else ","


def _too_big(size: int, file: str) -> None:
    if size > MAX_FILE_BYTES:
        raise InputError(
            f"the file is {size / 1e6:,.0f} MB; the limit is {MAX_FILE_BYTES / 1e6:,.0f} MB "
            "per file (split it into several files)",
            file=file,
        )


@_one_line
def read_table(source: str | Path | bytes, name: str | None = None) -> RawTable:
    """Read a CSV or XLSX file into text cells.

    ``source`` is a path, or the file's bytes with ``name`` for messages (uploads).
    Comma, semicolon and tab delimiters are recognised from the header line; UTF-8 with or
    without BOM (Windows-1252 as a fallback); line ends LF, CRLF or CR. XLSX files are
    recognised by content. A file over :data:`MAX_FILE_BYTES`, with more than
    :data:`MAX_ROWS` data rows or a cell over :data:`MAX_CELL_CHARS` characters is refused;
    so are two columns of one name, a blank header over filled cells and a quote mark
    that swallows the rows after it.
    """
    if isinstance(source, bytes):
        raw, file = source, name or "upload"
        _too_big(len(raw), file)
    else:
        file = name or str(source)
        path = Path(source)
        try:
            if not path.exists():
                raise InputError("file not found", file=file)
            if path.is_dir():
                raise InputError("this is a folder, not a file", file=file)
            _too_big(path.stat().st_size, file)
            raw = path.read_bytes()
        except OSError as exc:
            raise InputError(f"cannot read the file ({exc.strerror or exc})", file=file) from None
    sha = hashlib.sha256(raw).hexdigest()
    decimal_comma = False
    if raw[:4] == b"PK\x03\x04":
        headers, frame = _read_xlsx(raw, file)
    else:
        headers, frame, delim = _read_csv(raw, file)
        decimal_comma = delim == ";"  # semicolon files come from decimal-comma locales
    keep = [k for k, h in enumerate(headers) if h]
    for k, h in enumerate(headers):
        if not h:
            filled = (frame[k] != "").to_numpy()
            if filled.any():
                raise InputError(
                    f"a value under a blank header (column {k + 1}); name the column or "
                    "remove its cells",
                    file=file,
                    row=_first(filled),
                )
    if len(keep) < len(headers):
        frame = frame[keep]
        headers = [headers[k] for k in keep]
    if not headers:
        raise InputError("the file is empty", file=file)
    _check_duplicate_headers(headers, file)
    if frame.shape[0] == 0:
        raise InputError("the file has a header but no data rows", file=file)
    _check_rows(frame.shape[0], file)
    frame.columns = headers
    frame = frame.apply(lambda col: col.astype(str).str.strip())
    for h in headers:
        long = (frame[h].str.len() > MAX_CELL_CHARS).to_numpy()
        if long.any():
            raise InputError(
                f"a cell of {len(frame[h].iloc[_first(long) - 2]):,} characters; the limit "
                f"is {MAX_CELL_CHARS:,} per cell",
                file=file,
                row=_first(long),
                column=h,
            )
    return RawTable(file, headers, frame, sha, len(raw), decimal_comma)


def _check_rows(n: int, file: str) -> None:
    if n > MAX_ROWS:
        raise InputError(
            f"more than {MAX_ROWS:,} data rows; the limit is {MAX_ROWS:,} points per file "
            "(split it into several files)",
            file=file,
        )


def _header_cells(cells: list[str], file: str) -> list[str]:
    for k, h in enumerate(cells):
        if len(h) > MAX_CELL_CHARS:
            raise InputError(
                f"header cell {k + 1} has {len(h):,} characters; the limit is "
                f"{MAX_CELL_CHARS:,} per cell",
                file=file,
                row=1,
            )
    return [h.strip() for h in cells]


def _read_xlsx(raw: bytes, file: str) -> tuple[list[str], pd.DataFrame]:
    try:
        with zipfile.ZipFile(io.BytesIO(raw)) as archive:
            unpacked = sum(info.file_size for info in archive.infolist())
    except (zipfile.BadZipFile, zipfile.LargeZipFile, ValueError, OSError) as exc:
        raise InputError(f"cannot read this XLSX workbook ({exc})", file=file) from None
    if unpacked > MAX_XLSX_UNPACKED_BYTES:
        raise InputError(
            f"the workbook unpacks to {unpacked / 1e6:,.0f} MB; the limit is "
            f"{MAX_XLSX_UNPACKED_BYTES / 1e6:,.0f} MB",
            file=file,
        )
    try:
        with warnings.catch_warnings():  # openpyxl warns about styles it does not read
            warnings.simplefilter("ignore")
            frame = pd.read_excel(io.BytesIO(raw), dtype=str, header=None, engine="openpyxl")
    except Exception as exc:  # openpyxl raises many kinds for a damaged workbook
        raise InputError(f"cannot read this XLSX workbook ({exc})", file=file) from None
    if frame.shape[0] == 0:
        raise InputError("the file is empty", file=file)
    frame = frame.fillna("")
    headers = _header_cells([str(h) for h in frame.iloc[0]], file)
    frame = frame.iloc[1:].reset_index(drop=True)
    frame.columns = range(len(headers))
    return headers, frame


def _read_csv(raw: bytes, file: str) -> tuple[list[str], pd.DataFrame, str]:
    text = _decode(raw, file)
    if "\r" in text:
        text = text.replace("\r\n", "\n").replace("\r", "\n")
    if text.count("\n") > MAX_ROWS + 1:
        _check_rows(text.count("\n") - 1, file)
    first_line, _, body = text.partition("\n")
    delim = _delimiter(first_line)
    if first_line.count('"') % 2:
        raise InputError('the header line has an unmatched quote mark (")', file=file, row=1)
    try:
        first = next(csv.reader([first_line], delimiter=delim), [])
    except csv.Error as exc:
        if "field larger" in str(exc):
            raise InputError(
                f"a header cell over {MAX_CELL_CHARS:,} characters; the limit is "
                f"{MAX_CELL_CHARS:,} per cell",
                file=file,
                row=1,
            ) from None
        raise InputError(f"cannot read the header line ({exc})", file=file, row=1) from None
    headers = _header_cells(first, file)
    if not any(headers):
        raise InputError("the file is empty", file=file)
    width = len(headers)
    try:
        frame = pd.read_csv(
            io.StringIO(body),
            sep=delim,
            dtype=str,
            keep_default_na=False,
            skip_blank_lines=True,
            header=None,
            index_col=False,
            quotechar='"',
            engine="c",
        )
    except pd.errors.ParserError as exc:
        message = str(exc)
        match = re.search(r"line (\d+), saw (\d+)", message)
        if match:
            raise InputError(
                f"{match.group(2)} cells but the header has {width} columns",
                file=file,
                row=int(match.group(1)) + 1,
            ) from None
        match = re.search(r"EOF inside string starting at row (\d+)", message)
        if match:
            raise InputError(
                'a quote mark (") opens a cell that is never closed: every row after it '
                "would be read into that one cell",
                file=file,
                row=int(match.group(1)) + 2,
            ) from None
        raise InputError(f"cannot read this file as CSV ({message})", file=file) from None
    except pd.errors.EmptyDataError:
        frame = pd.DataFrame(columns=range(width), dtype=str)
    except (ValueError, OverflowError, MemoryError) as exc:
        raise InputError(f"cannot read this file as CSV ({exc})", file=file) from None
    if frame.shape[1] > width:
        extra = frame.iloc[:, width:].apply(lambda col: col.str.strip() != "").any(axis=1)
        extra = extra.to_numpy()
        if extra.any():
            i = int(np.argmax(extra))
            n_cells = width + int(
                frame.iloc[i, width:].str.strip().ne("").to_numpy().nonzero()[0].max() + 1
            )
            raise InputError(
                f"{n_cells} cells but the header has {width} columns", file=file, row=i + 2
            )
        frame = frame.iloc[:, :width]
    elif frame.shape[1] < width:
        for k in range(frame.shape[1], width):
            frame[k] = ""
    frame = frame.fillna("")
    frame.columns = range(width)
    _check_swallowed(frame, headers, delim, file)
    return headers, frame, delim


def _check_swallowed(frame: pd.DataFrame, headers: list[str], delim: str, file: str) -> None:
    """Refuse a quoted cell whose lines look like rows: a closing quote is missing."""
    need = max(1, len(headers) - 1)
    for k in range(frame.shape[1]):
        col = frame[k]
        broken = col.str.contains("\n", regex=False).to_numpy()
        for i in np.nonzero(broken)[0]:
            lines = str(col.iloc[i]).split("\n")
            rows = sum(1 for line in lines[1:] if line.count(delim) >= need)
            if rows:
                raise InputError(
                    f"a quoted cell runs over {len(lines)} lines, {rows} of them like rows of "
                    'this file: is a closing quote mark (") missing?',
                    file=file,
                    row=int(i) + 2,
                    column=headers[k] or f"column {k + 1}",
                )


def _check_duplicate_headers(headers: list[str], file: str) -> None:
    seen: dict[str, str] = {}
    for h in headers:
        key = split_header(h)[0]
        if key in seen:
            detail = f" (as '{seen[key]}' and '{h}')" if seen[key] != h else ""
            raise InputError(f"column '{key}' appears twice{detail}", file=file, column=h)
        seen[key] = h


def _columns(table: RawTable) -> dict[str, tuple[str, str | None]]:
    """name -> (header as written, unit as written)."""
    out = {}
    for h in table.headers:
        name, unit = split_header(h)
        out[name] = (h, unit)
    return out


def _numbers(table: RawTable, header: str, *, required: bool) -> np.ndarray:
    """Cells of one column as floats; NaN for blanks when not required.

    Decimal commas are read in files that use them (:attr:`RawTable.decimal_comma`).
    """
    cells = table.frame[header]
    parsed = cells.str.replace(",", ".", regex=False) if table.decimal_comma else cells
    values = pd.to_numeric(parsed.where(parsed != "", None), errors="coerce")
    values = np.asarray(values, dtype=float)
    bad = np.isnan(values) & (cells != "").to_numpy()
    if bad.any():
        i = int(np.argmax(bad))
        raise InputError(
            f"'{_show(cells.iloc[i])}' is not a number",
            file=table.file,
            row=i + 2,
            column=header,
        )
    if required and np.isnan(values).any():
        i = int(np.argmax(np.isnan(values)))
        raise InputError(
            "blank cell; a value is required", file=table.file, row=i + 2, column=header
        )
    if np.isinf(values).any():
        i = int(np.argmax(np.isinf(values)))
        raise InputError(
            f"infinite value '{_show(cells.iloc[i])}' (or beyond the range of numbers)",
            file=table.file,
            row=i + 2,
            column=header,
        )
    return values


def _in_range(
    table: RawTable,
    header: str,
    values: np.ndarray,
    low: float,
    high: float,
    what: str,
    unit: str = "",
) -> None:
    """Refuse a value (after unit conversion) that is not finite or lies outside
    [low, high]; NaN (a blank optional cell) passes."""
    bad = ~np.isnan(values) & ~((values >= low) & (values <= high))
    if bad.any():
        row = _first(bad)
        converted, cell = values[row - 2], table.frame[header].iloc[row - 2]
        try:
            same = float(cell.replace(",", ".")) == converted
        except ValueError:
            same = False
        shown = f" ({converted:.4g} {unit} once converted)" if unit and not same else ""
        span = f"below {low:g}" if np.isinf(high) else f"outside {low:g} to {high:g}"
        raise InputError(
            f"{_show(cell)}{shown} is {span} {unit}".rstrip() + f"; {what}",
            file=table.file,
            row=row,
            column=header,
        )


def _unit(table: RawTable, name: str, header: str, unit: str | None, allowed) -> str:
    if unit is None:
        raise InputError(
            f"column '{name}' needs its unit in brackets, e.g. '{name} [{allowed[0]}]'",
            file=table.file,
            column=header,
        )
    canon = canonical_unit(unit)
    if canon is None or canon not in allowed:
        raise InputError(
            f"unknown unit '{_show(unit)}'; accepted: {', '.join(allowed)}",
            file=table.file,
            column=header,
        )
    return canon


def _first(mask: np.ndarray) -> int:
    return int(np.argmax(mask)) + 2


def _refuse_first(file: str, mask, column: str, say: Callable[[int], str]) -> None:
    """Refuse the first row where ``mask`` holds, naming ``file``, that row (as a
    spreadsheet counts it) and ``column``: InputError(``say(i)``), ``i`` the row's index
    among the data rows. Nothing where the mask holds nowhere."""
    mask = np.asarray(mask, dtype=bool)
    if mask.any():
        row = _first(mask)
        raise InputError(say(row - 2), file=file, row=row, column=column)


def _known_grades(file: str, ids: pd.Series, known_ids: set[str], column: str) -> None:
    """Every grade id of a sweep file names a grade of the catalog or the library."""
    _refuse_first(
        file,
        ~ids.isin(known_ids).to_numpy(),
        column,
        lambda i: f"unknown grade id '{_show(ids.iloc[i])}': not in the catalog or the library",
    )


def _catalog_factor(
    table: RawTable, name: str, header: str, unit: str | None, expected: str | None
) -> float:
    """The factor from a catalog column's unit to the unit stored (density, price,
    hardness, plain numbers); a unit the field cannot take is refused, named."""
    if unit is None:
        return 1.0
    if expected == "kg/m3":
        canon = density_unit(unit)
        if canon is None:
            raise InputError(
                f"unknown unit '{_show(unit)}'; accepted: {', '.join(DENSITY_UNITS)}",
                file=table.file,
                column=header,
            )
        return DENSITY_UNITS[canon]
    if expected == "per kg":
        canon = price_unit(unit)
        if canon is None:
            raise InputError(
                f"unknown price basis '{_show(unit)}'; accepted: {', '.join(PRICE_UNITS)} "
                "(a currency may come first, e.g. 'EUR/kg')",
                file=table.file,
                column=header,
            )
        return PRICE_UNITS[canon]
    if expected == "Shore A":
        if hardness_unit(unit) is None:
            raise InputError(
                f"hardness scale '{_show(unit)}' is not taken: the library holds "
                f"{', '.join(HARDNESS_UNITS)}, and other scales (Shore D, IRHD...) have no "
                "exact relation to it; give Shore A values in 'hardness [Shore A]'",
                file=table.file,
                column=header,
            )
        return 1.0
    if expected is None and unit.strip() not in ("", "-"):
        raise InputError(
            f"unit '{_show(unit)}' for '{name}', which has none: write '{name}' or '{name} [-]'",
            file=table.file,
            column=header,
        )
    return 1.0


def _check_ids(table: RawTable, ids: pd.Series, header: str) -> None:
    """Grade ids are one line of at most :data:`MAX_ID_CHARS` characters."""
    broken = ids.str.contains(r"[\r\n\x0b\x0c\x1c-\x1e\x85\u2028\u2029]", regex=True)
    broken = broken.to_numpy(dtype=bool)
    _refuse_first(
        table.file,
        broken,
        header,
        lambda i: f"grade id '{_show(ids.iloc[i])}' holds a line break; an id is one line",
    )
    long = (ids.str.len() > MAX_ID_CHARS).to_numpy()
    _refuse_first(
        table.file,
        long,
        header,
        lambda i: f"grade id '{_show(ids.iloc[i])}' is longer than {MAX_ID_CHARS} characters",
    )


@_one_line
def parse_catalog(table: RawTable) -> list[Material]:
    """Validate a catalog table and return its grades.

    Catalog units are converted to those stored: density from kg/m3, g/cm3 or lb/ft3,
    price from per kg, per tonne or per lb (a currency before the basis is allowed,
    ``EUR/kg``); hardness is taken in Shore A only (other scales have no exact relation
    to it and are refused, the scale named). A column without a unit is read in the
    stored unit. Every converted value must be finite and physical (:data:`MIN_DENSITY`
    to :data:`MAX_DENSITY`, and so on).
    """
    cols = _columns(table)
    for name in CATALOG_REQUIRED:
        if name not in cols:
            raise InputError(
                f"missing required column '{name}' (required: {', '.join(CATALOG_REQUIRED)})",
                file=table.file,
            )
    text = {name: table.frame[cols[name][0]] for name in CATALOG_REQUIRED}
    for name in CATALOG_REQUIRED:
        blank = (text[name] == "").to_numpy()
        if blank.any():
            raise InputError(
                "blank cell; a value is required",
                file=table.file,
                row=_first(blank),
                column=cols[name][0],
            )
    _check_ids(table, text["id"], cols["id"][0])
    dup = text["id"].duplicated().to_numpy()
    _refuse_first(
        table.file, dup, cols["id"][0], lambda i: f"duplicate id '{_show(text['id'].iloc[i])}'"
    )
    modes = text["mode"].str.lower()
    bad_mode = ~modes.isin(MODES).to_numpy()
    _refuse_first(
        table.file,
        bad_mode,
        cols["mode"][0],
        lambda i: f"mode '{_show(text['mode'].iloc[i])}' is not one of {', '.join(MODES)}",
    )
    numbers: dict[str, np.ndarray] = {}
    for name, (expected, kind) in CATALOG_OPTIONAL.items():
        if name not in cols or kind != "number":
            continue
        header, unit = cols[name]
        values = _numbers(table, header, required=False)
        if expected == "temperature":
            canon = _unit(table, name, header, unit, TEMPERATURE_UNITS) if unit else "degC"
            values = temperature_to_c(values, canon)
        elif expected in MODULUS_UNITS:  # a modulus, stored in the field's unit (MPa)
            canon = _unit(table, name, header, unit, tuple(MODULUS_UNITS)) if unit else expected
            values = modulus_to_pa(values, canon) / MODULUS_UNITS[expected]
        else:
            values = values * _catalog_factor(table, name, header, unit, expected)
        numbers[name] = values
    for name, values in numbers.items():
        header = cols[name][0]
        cells, field = table.frame[header], FIELDS[name]

        def beyond(i: int, cells: pd.Series = cells, unit: str | None = field.unit) -> str:
            return f"{_show(cells.iloc[i])} is beyond the range of numbers once converted to {unit}"

        def refused(i: int, cells: pd.Series = cells, rule: str = field.rule) -> str:
            return f"{_show(cells.iloc[i])}: {rule}"

        # blanks (NaN) pass; an overflow in the conversion does not
        _refuse_first(table.file, np.isinf(values), header, beyond)
        _refuse_first(table.file, ~field.accepts(values), header, refused)
        if name == "density":
            _in_range(
                table,
                header,
                values,
                MIN_DENSITY,
                MAX_DENSITY,
                "no solid polymer has this density; is the unit right (e.g. 'density [g/cm3]')?",
                "kg/m3",
            )
        elif name == "bulk_modulus":
            _in_range(
                table, header, values, 0.0, MAX_BULK_MODULUS_MPA, "no solid is this stiff", "MPa"
            )
        elif FIELDS[name].header_unit == "temperature":
            _in_range(
                table,
                header,
                values,
                ABSOLUTE_ZERO_C,
                MAX_TEMPERATURE_C,
                "no solid exists there",
                "degC",
            )
    if "service_min" in numbers and "service_max" in numbers:
        inverted = numbers["service_min"] >= numbers["service_max"]
        _refuse_first(
            table.file,
            inverted,
            cols["service_min"][0],
            lambda i: "service_min is not below service_max",
        )
    known = set(CATALOG_REQUIRED) | set(CATALOG_OPTIONAL)
    extra_headers = [cols[n][0] for n in cols if n not in known]
    out = []
    for i in range(table.frame.shape[0]):
        fields: dict[str, Any] = {}  # value types by field, as CATALOG_OPTIONAL gives them
        for name, (_, kind) in CATALOG_OPTIONAL.items():
            if name not in cols:
                continue
            if kind == "number":
                v = numbers[name][i]
                fields[name] = None if np.isnan(v) else float(v)
            else:
                cell = table.frame[cols[name][0]].iloc[i]
                fields[name] = cell or None
        extra = {h: table.frame[h].iloc[i] for h in extra_headers if table.frame[h].iloc[i]}
        out.append(
            Material(
                id=text["id"].iloc[i],
                name=text["name"].iloc[i],
                mode=modes.iloc[i],
                extra=extra,
                **fields,
            )
        )
    return out


@dataclass
class SweepData:
    """Validated points of one sweep file, in internal units, by grade."""

    file: str
    by_material: dict[str, np.ndarray]  # id -> n x 4 (degC, Hz, Pa, loss factor)
    rows: int
    notes: list[str] = field(default_factory=list)  # repeated points averaged


@_one_line
def parse_sweeps(table: RawTable, known_ids: set[str]) -> SweepData:
    """Validate a sweep table (long format) against the grades in ``known_ids``.

    Every value must be finite and physical once converted: temperatures from absolute
    zero to :data:`MAX_TEMPERATURE_C`, frequencies from :data:`MIN_FREQUENCY_HZ` to
    :data:`MAX_FREQUENCY_HZ`, moduli from :data:`MIN_MODULUS_PA` to
    :data:`MAX_MODULUS_PA`, loss factors (given, or loss over storage modulus) from 0 to
    :data:`MAX_LOSS_FACTOR`.

    Repeated points: rows of one grade at the same temperature and frequency (equal once
    converted) whose storage moduli and loss factors agree within
    :data:`DUPLICATE_TOLERANCE` (10 % of the larger) are averaged into one point (mean
    storage and mean loss modulus), with a note in :attr:`SweepData.notes`; rows that
    differ by more are refused, both rows named.
    """
    cols = _columns(table)
    for name in SWEEP_REQUIRED:
        if name not in cols:
            raise InputError(
                f"missing required column '{name}' (required: {', '.join(SWEEP_REQUIRED)}, "
                "and loss_factor or loss_modulus)",
                file=table.file,
            )
    if "loss_factor" not in cols and "loss_modulus" not in cols:
        raise InputError(
            "missing column: one of 'loss_factor' or 'loss_modulus [unit]' is required",
            file=table.file,
        )
    f = table.file
    ids = table.frame[cols["material"][0]]
    blank = (ids == "").to_numpy()
    if blank.any():
        raise InputError(
            "blank cell; a value is required", file=f, row=_first(blank), column=cols["material"][0]
        )
    _known_grades(f, ids, known_ids, cols["material"][0])
    h_t, u_t = cols["temperature"]
    h_f, u_f = cols["frequency"]
    h_s, u_s = cols["storage_modulus"]
    t_unit = _unit(table, "temperature", h_t, u_t, TEMPERATURE_UNITS)
    f_unit = _unit(table, "frequency", h_f, u_f, FREQUENCY_UNITS)
    s_unit = _unit(table, "storage_modulus", h_s, u_s, tuple(MODULUS_UNITS))
    temperature = _temperatures(table, h_t, t_unit)
    frequency = _frequencies(table, h_f, f_unit)
    storage = modulus_to_pa(_numbers(table, h_s, required=True), s_unit)
    _positive(table, h_s, storage, "moduli must be positive")
    _in_range(table, h_s, storage, MIN_MODULUS_PA, MAX_MODULUS_PA, MODULUS_WHY, "Pa")
    if "loss_factor" in cols:
        h_e = cols["loss_factor"][0]
        eta = _numbers(table, h_e, required=True)
        neg = eta < 0
        _refuse_first(
            f,
            neg,
            h_e,
            lambda i: f"{_show(table.frame[h_e].iloc[i])} is negative; loss factors must be >= 0",
        )
        _in_range(table, h_e, eta, 0.0, MAX_LOSS_FACTOR, LOSS_FACTOR_WHY)
    else:
        h_l, u_l = cols["loss_modulus"]
        l_unit = _unit(table, "loss_modulus", h_l, u_l, tuple(MODULUS_UNITS))
        loss = modulus_to_pa(_numbers(table, h_l, required=True), l_unit)
        neg = loss < 0
        _refuse_first(
            f,
            neg,
            h_l,
            lambda i: f"{_show(table.frame[h_l].iloc[i])} is negative; moduli must be >= 0",
        )
        _in_range(table, h_l, loss, 0.0, MAX_MODULUS_PA, MODULUS_WHY, "Pa")
        eta = loss / storage
        _derived_loss_factor(table, h_l, eta)
    points = np.column_stack([temperature, frequency, storage, eta])
    codes, uniques = pd.factorize(ids)
    points, codes, rows, notes = _merge_repeats(table, points, codes, uniques, (h_s, h_t))
    counts = np.bincount(codes, minlength=len(uniques))
    if (counts < 2).any():
        k = int(np.argmax(counts < 2))
        raise InputError(
            f"grade '{_show(uniques[k])}' has a single measured point; a data set needs at "
            "least two (a sweep over frequency or temperature)",
            file=f,
            row=int(rows[np.argmax(codes == k)]) + 2,
            column=cols["material"][0],
        )
    by_material = {}
    for k, mid in enumerate(uniques):
        sel = points[codes == k]
        order = np.lexsort((sel[:, 1], sel[:, 0]))
        by_material[str(mid)] = sel[order]
    return SweepData(f, by_material, table.frame.shape[0], notes)


MODULUS_WHY = "no solid's modulus lies outside it; is the unit right?"
LOSS_FACTOR_WHY = "a loss factor beyond it is not a solid's measurement"


def _temperatures(table: RawTable, header: str, unit: str) -> np.ndarray:
    """A temperature column in degC, checked against absolute zero and the upper limit."""
    temperature = temperature_to_c(_numbers(table, header, required=True), unit)
    below = temperature < ABSOLUTE_ZERO_C
    _refuse_first(
        table.file,
        below,
        header,
        lambda i: f"{_show(table.frame[header].iloc[i])} {unit} is below absolute zero",
    )
    _in_range(
        table,
        header,
        temperature,
        ABSOLUTE_ZERO_C,
        MAX_TEMPERATURE_C,
        "no solid exists there; is the unit right?",
        "degC",
    )
    return temperature


def _frequencies(table: RawTable, header: str, unit: str) -> np.ndarray:
    """A frequency column in Hz, positive and within the physical range."""
    frequency = frequency_to_hz(_numbers(table, header, required=True), unit)
    _positive(table, header, frequency, "frequencies must be positive")
    _in_range(
        table,
        header,
        frequency,
        MIN_FREQUENCY_HZ,
        MAX_FREQUENCY_HZ,
        "dynamic tests are not made there; is the unit right?",
        "Hz",
    )
    return frequency


def _derived_loss_factor(table: RawTable, header: str, eta: np.ndarray) -> None:
    """The loss factor E''/E' computed from two moduli must be finite and physical."""
    bad = ~((eta >= 0) & (eta <= MAX_LOSS_FACTOR))
    _refuse_first(
        table.file,
        bad,
        header,
        lambda i: (
            f"loss modulus / storage modulus = {eta[i]:.4g}, outside 0 to "
            f"{MAX_LOSS_FACTOR:g}; {LOSS_FACTOR_WHY}"
        ),
    )


def _merge_repeats(
    table: RawTable,
    points: np.ndarray,
    codes: np.ndarray,
    uniques,
    headers: tuple[str, str],
) -> tuple[np.ndarray, np.ndarray, np.ndarray, list[str]]:
    """Average repeated points of a grade (same T and f) that agree within
    :data:`DUPLICATE_TOLERANCE`; refuse those that do not, naming both rows.

    Returns the points, their grade codes and their 0-based data rows (the first row of
    each averaged group), and the notes to show.
    """
    rows = np.arange(points.shape[0])
    key = pd.DataFrame({"g": codes, "t": points[:, 0], "f": points[:, 1]})
    repeated = key.duplicated(keep=False).to_numpy()
    if not repeated.any():
        return points, codes, rows, []
    sub = np.nonzero(repeated)[0]
    group = key.iloc[sub].groupby(["g", "t", "f"], sort=False).ngroup().to_numpy()
    storage, loss = points[sub, 2], points[sub, 2] * points[sub, 3]
    frame = pd.DataFrame({"group": group, "s": storage, "eta": points[sub, 3], "loss": loss})
    stats = frame.groupby("group").agg(
        s_min=("s", "min"), s_max=("s", "max"), e_min=("eta", "min"), e_max=("eta", "max")
    )
    conflict = (stats.s_max - stats.s_min > DUPLICATE_TOLERANCE * stats.s_max) | (
        stats.e_max - stats.e_min > DUPLICATE_TOLERANCE * stats.e_max + 1e-12
    )
    if conflict.any():
        g = int(conflict.to_numpy().nonzero()[0][0])
        members = sub[group == g]
        first = members[0]
        spread = np.maximum(
            np.abs(np.log(points[members, 2] / points[first, 2])),
            np.abs(points[members, 3] - points[first, 3]) / max(points[members, 3].max(), 1e-300),
        )
        other = members[int(np.argmax(spread))]
        t, fr = points[first, 0], points[first, 1]
        raise InputError(
            f"rows {first + 2} and {other + 2} give grade '{_show(uniques[codes[first]])}' two "
            f"different points at {t:g} degC and {fr:g} Hz (storage modulus "
            f"{points[first, 2] / 1e6:.4g} and {points[other, 2] / 1e6:.4g} MPa, loss factor "
            f"{points[first, 3]:.4g} and {points[other, 3]:.4g}); a repeated point must agree "
            f"within {DUPLICATE_TOLERANCE:.0%}: remove one of them",
            file=table.file,
            row=int(other) + 2,
            column=headers[0],
        )
    means = frame.groupby("group").agg(s=("s", "mean"), loss=("loss", "mean"))
    keep = np.ones(points.shape[0], dtype=bool)
    firsts = np.full(len(means), -1)
    for position, g in zip(sub, group, strict=True):  # the first row of each group stays
        if firsts[g] < 0:
            firsts[g] = position
        else:
            keep[position] = False
    points = points.copy()
    points[firsts, 2] = means.s.to_numpy()
    points[firsts, 3] = means.loss.to_numpy() / means.s.to_numpy()
    notes = [
        f"{table.file}: {len(sub) - len(means)} repeated point(s) (same grade, temperature "
        f"and frequency, agreeing within {DUPLICATE_TOLERANCE:.0%}) averaged into "
        f"{len(means)}, first at row {firsts.min() + 2}"
    ]
    return points[keep], codes[keep], rows[keep], notes


def _positive(table: RawTable, header: str, values: np.ndarray, reason: str) -> None:
    bad = values <= 0
    _refuse_first(
        table.file,
        bad,
        header,
        lambda i: f"{_show(table.frame[header].iloc[i])} is not positive; {reason}",
    )


def data_hash(points: np.ndarray) -> str:
    """sha256 of a data set's points in internal units (order as stored)."""
    return hashlib.sha256(np.ascontiguousarray(points, dtype="<f8").tobytes()).hexdigest()


@dataclass
class ImportPlan:
    """Everything an import would write, validated, before it is written."""

    files: list[dict]
    materials: list[Material]
    datasets: list[dict]
    skipped: list[str]
    notes: list[str] = field(default_factory=list)  # e.g. repeated points averaged

    @property
    def amplitude_sweeps(self) -> list[dict]:
        """The amplitude sweeps the plan would write (carried by their files' entries)."""
        return [s for f in self.files if f["kind"] == "amplitude" for s in f["sweeps"]]


@_one_line
def plan_import(
    library: Library,
    catalogs: list[RawTable],
    sweeps: list[RawTable],
    amplitude: Sequence[RawTable] = (),
) -> ImportPlan:
    """Validate catalogs and sweeps against each other and the library; write nothing.

    Tables among ``sweeps`` that :func:`looks_like_amplitude` are read as amplitude
    sweeps, as are those of ``amplitude``; each amplitude file's entry in
    ``ImportPlan.files`` carries its validated sweeps (``"sweeps"``).
    """
    amplitude = [*amplitude, *(t for t in sweeps if looks_like_amplitude(t))]
    sweeps = [t for t in sweeps if not looks_like_amplitude(t)]
    known_sha = library.known_sha256()
    ids = library.existing_ids()
    files: list[dict] = []
    materials: list[Material] = []
    datasets: list[dict] = []
    skipped: list[str] = []
    notes: list[str] = []
    seen_catalog: dict[str, str] = {}
    for table in catalogs:
        rows = parse_catalog(table)
        for m in rows:
            if m.id in seen_catalog:
                raise InputError(
                    f"grade id '{_show(m.id)}' is also in {seen_catalog[m.id]}",
                    file=table.file,
                    column="id",
                )
            seen_catalog[m.id] = table.file
        ids |= {m.id for m in rows}
        if table.sha256 in known_sha:
            skipped.append(table.file)
            continue
        key = f"catalog:{len(files)}"
        files.append(
            {
                "key": key,
                "file_name": Path(table.file).name,
                "sha256": table.sha256,
                "size_bytes": table.size_bytes,
                "rows": len(rows),
                "kind": "catalog",
            }
        )
        materials.extend(rows)
    for table in sweeps:
        sweep = parse_sweeps(table, ids)
        if table.sha256 in known_sha:
            skipped.append(table.file)
            continue
        notes.extend(sweep.notes)
        key = f"sweep:{len(files)}"
        files.append(
            {
                "key": key,
                "file_name": Path(table.file).name,
                "sha256": table.sha256,
                "size_bytes": table.size_bytes,
                "rows": sweep.rows,
                "kind": "sweep",
            }
        )
        for mid, pts in sweep.by_material.items():
            datasets.append(
                {"material_id": mid, "file_key": key, "data_hash": data_hash(pts), "points": pts}
            )
    for table in amplitude:
        amp = parse_amplitude(table, ids)
        if table.sha256 in known_sha:
            skipped.append(table.file)
            continue
        files.append(
            {
                "key": f"amplitude:{len(files)}",
                "file_name": Path(table.file).name,
                "sha256": table.sha256,
                "size_bytes": table.size_bytes,
                "rows": amp.rows,
                "kind": "amplitude",
                "sweeps": [
                    {"material_id": mid, "data_hash": data_hash(pts), "points": pts}
                    for mid, pts in amp.by_material.items()
                ],
            }
        )
    return ImportPlan(files, materials, datasets, skipped, notes)


@_one_line
def import_files(
    library: Library,
    catalogs: Sequence[str | Path | RawTable] = (),
    sweeps: Sequence[str | Path | RawTable] = (),
    amplitude: Sequence[str | Path | RawTable] = (),
):
    """Validate and import files into ``library`` in one transaction (all or nothing).

    Amplitude sweeps may be given in ``amplitude`` or among ``sweeps``, where they are
    recognised by their ``strain_amplitude`` column. Every refusal is an InputError of
    one line; nothing is written then.
    """
    cat = [c if isinstance(c, RawTable) else read_table(c) for c in catalogs]
    swp = [s if isinstance(s, RawTable) else read_table(s) for s in sweeps]
    amp = [a if isinstance(a, RawTable) else read_table(a) for a in amplitude]
    plan = plan_import(library, cat, swp, amp)
    summary = library.write_import(plan.files, plan.materials, plan.datasets)
    summary.notes = list(plan.notes)
    summary.files_skipped.extend(plan.skipped)
    return summary


def looks_like_catalog(table: RawTable) -> bool:
    """True when a table has the catalog's required columns and no sweep columns."""
    names = set(_columns(table))
    return set(CATALOG_REQUIRED) <= names and "storage_modulus" not in names


def looks_like_amplitude(table: RawTable) -> bool:
    """True when a table has a ``strain_amplitude`` column (``strain amplitude`` too)."""
    return "strain_amplitude" in _amplitude_columns(table, check=False)


# -- strain-amplitude sweeps (docs/amplitude_sweeps.md) -----------------------------------


def _amplitude_columns(table: RawTable, check: bool = True) -> dict[str, tuple[str, str | None]]:
    """Like :func:`_columns`, with spaces in names read as underscores."""
    out: dict[str, tuple[str, str | None]] = {}
    for h in table.headers:
        name, unit = split_header(h)
        key = "_".join(name.split())
        if check and key in out:
            raise InputError(
                f"column '{key}' appears twice (as '{out[key][0]}' and '{h}')",
                file=table.file,
                column=h,
            )
        out[key] = (h, unit)
    return out


@dataclass
class AmplitudeData:
    """Validated points of one amplitude-sweep file, in internal units, by grade."""

    file: str
    # id -> n x 5 (strain [-], storage [Pa], loss factor [-], degC, Hz), by strain
    by_material: dict[str, np.ndarray]
    rows: int


def _strain_unit(table: RawTable, header: str, unit: str | None) -> float:
    """The factor that turns the strain column into a fraction."""
    if unit is None or unit.strip() not in STRAIN_UNITS:
        given = "no unit" if unit is None else f"unit '{unit}'"
        raise InputError(
            f"{given} for the strain amplitude; write 'strain_amplitude [-]' for a fraction "
            "(0.01 for 1 %) or 'strain_amplitude [%]'",
            file=table.file,
            column=header,
        )
    return STRAIN_UNITS[unit.strip()]


@_one_line
def parse_amplitude(table: RawTable, known_ids: set[str]) -> AmplitudeData:
    """Validate a strain-amplitude sweep table against the grades in ``known_ids``.

    One row per point: ``material``, ``temperature [unit]``, ``frequency [unit]``,
    ``strain_amplitude [-]`` or ``[%]``, ``storage_modulus [unit]`` and one of
    ``loss_factor`` or ``loss_modulus [unit]`` (docs/amplitude_sweeps.md). Each grade
    needs at least :data:`AMPLITUDE_MIN_POINTS` points at one temperature and one
    frequency, spanning at least one decade of strain.
    """
    cols = _amplitude_columns(table)
    f = table.file
    for name in AMPLITUDE_REQUIRED:
        if name not in cols:
            raise InputError(
                f"missing required column '{name}' (an amplitude sweep needs: "
                f"{', '.join(AMPLITUDE_REQUIRED)}, and loss_factor or loss_modulus)",
                file=f,
            )
    if "loss_factor" not in cols and "loss_modulus" not in cols:
        raise InputError(
            "missing column: one of 'loss_factor' or 'loss_modulus [unit]' is required",
            file=f,
        )
    h_id = cols["material"][0]
    ids = table.frame[h_id]
    blank = (ids == "").to_numpy()
    if blank.any():
        raise InputError("blank cell; a value is required", file=f, row=_first(blank), column=h_id)
    _known_grades(f, ids, known_ids, h_id)
    h_t, u_t = cols["temperature"]
    h_f, u_f = cols["frequency"]
    h_g, u_g = cols["strain_amplitude"]
    h_s, u_s = cols["storage_modulus"]
    t_unit = _unit(table, "temperature", h_t, u_t, TEMPERATURE_UNITS)
    f_unit = _unit(table, "frequency", h_f, u_f, FREQUENCY_UNITS)
    g_factor = _strain_unit(table, h_g, u_g)
    s_unit = _unit(table, "storage_modulus", h_s, u_s, tuple(MODULUS_UNITS))
    temperature = _temperatures(table, h_t, t_unit)
    frequency = _frequencies(table, h_f, f_unit)
    strain = _numbers(table, h_g, required=True) * g_factor
    _positive(table, h_g, strain, "strain amplitudes must be positive")
    _in_range(table, h_g, strain, MIN_STRAIN, np.inf, "no instrument resolves a smaller strain")
    large = strain > MAX_STRAIN_AMPLITUDE
    _refuse_first(
        f,
        large,
        h_g,
        lambda i: (
            f"{_show(table.frame[h_g].iloc[i])} is a strain amplitude above 100 %; "
            f"is the column in percent? then write '{split_header(h_g)[0]} [%]'"
        ),
    )
    storage = modulus_to_pa(_numbers(table, h_s, required=True), s_unit)
    _positive(table, h_s, storage, "moduli must be positive")
    _in_range(table, h_s, storage, MIN_MODULUS_PA, MAX_MODULUS_PA, MODULUS_WHY, "Pa")
    if "loss_factor" in cols:
        h_e, u_e = cols["loss_factor"]
        if u_e is not None and u_e.strip() not in ("-", ""):
            raise InputError(
                f"unit '{u_e}' for the loss factor; it has none: write 'loss_factor' or "
                "'loss_factor [-]'",
                file=f,
                column=h_e,
            )
        eta = _numbers(table, h_e, required=True)
        _positive(table, h_e, eta, "loss factors of an amplitude sweep must be positive")
        _in_range(table, h_e, eta, 0.0, MAX_LOSS_FACTOR, LOSS_FACTOR_WHY)
    else:
        h_l, u_l = cols["loss_modulus"]
        l_unit = _unit(table, "loss_modulus", h_l, u_l, tuple(MODULUS_UNITS))
        loss = modulus_to_pa(_numbers(table, h_l, required=True), l_unit)
        _positive(table, h_l, loss, "loss moduli of an amplitude sweep must be positive")
        _in_range(table, h_l, loss, 0.0, MAX_MODULUS_PA, MODULUS_WHY, "Pa")
        eta = loss / storage
        _derived_loss_factor(table, h_l, eta)
    points = np.column_stack([strain, storage, eta, temperature, frequency])
    codes, uniques = pd.factorize(ids)
    by_material = {}
    for k, mid in enumerate(uniques):
        rows = np.nonzero(codes == k)[0]
        first_row = int(rows[0]) + 2
        if rows.size < AMPLITUDE_MIN_POINTS:
            raise InputError(
                f"grade '{mid}' has {rows.size} point(s) in the amplitude sweep; the Kraus "
                f"fit needs at least {AMPLITUDE_MIN_POINTS}",
                file=f,
                row=first_row,
                column=h_id,
            )
        sel = points[rows]
        t0, f0 = sel[0, 3], sel[0, 4]
        for col, header, off, what, unit in (
            (3, h_t, np.abs(sel[:, 3] - t0) > AMPLITUDE_TEMPERATURE_BAND, "temperature", "degC"),
            (4, h_f, np.abs(sel[:, 4] / f0 - 1) > AMPLITUDE_FREQUENCY_BAND, "frequency", "Hz"),
        ):
            if off.any():
                i = int(rows[int(np.argmax(off))])
                raise InputError(
                    f"grade '{mid}' has more than one {what} in the amplitude sweep "
                    f"({sel[0, col]:g} and {points[i, col]:g} {unit}); an amplitude sweep is "
                    f"taken at one temperature and one frequency",
                    file=f,
                    row=i + 2,
                    column=header,
                )
        lo, hi = sel[:, 0].min(), sel[:, 0].max()
        if hi < 10.0 * lo:
            i = int(rows[int(np.argmax(sel[:, 0]))])
            raise InputError(
                f"grade '{mid}': the amplitude sweep spans strains {lo:g} to {hi:g}, less "
                "than one decade; the Kraus fit needs at least one decade",
                file=f,
                row=i + 2,
                column=h_g,
            )
        by_material[str(mid)] = sel[np.argsort(sel[:, 0], kind="stable")]
    return AmplitudeData(f, by_material, table.frame.shape[0])


# -- arbitrary instrument exports ---------------------------------------------------------

SWEEP_TARGETS = ("temperature", "frequency", "storage_modulus", "loss_factor", "loss_modulus")


@_one_line
def map_columns(
    table: RawTable,
    mapping: dict[str, str],
    units: dict[str, str],
    material_id: str | None = None,
) -> RawTable:
    """Turn an instrument export into a sweep table of the import format.

    Parameters
    ----------
    table : RawTable
        The export as read by :func:`read_table`.
    mapping : dict
        Target name (one of :data:`SWEEP_TARGETS` or ``"material"``) -> header in the
        export. Temperature, frequency, storage modulus and one of loss factor or loss
        modulus are needed.
    units : dict
        Target name -> unit of that column (``loss_factor`` needs none).
    material_id : str, optional
        Grade id for every row when the export has no material column.

    Returns
    -------
    RawTable with canonical headers such as ``temperature [degC]``; validate it with
    :func:`parse_sweeps` as any sweep file.
    """
    headers = set(table.headers)
    for target, header in mapping.items():
        if target not in (*SWEEP_TARGETS, "material"):
            raise InputError(f"unknown target '{target}'", file=table.file)
        if header not in headers:
            raise InputError(f"no column '{header}' in the file", file=table.file)
    if "material" not in mapping and not material_id:
        raise InputError("choose the material column or give a grade id", file=table.file)
    columns = {}
    if "material" in mapping:
        columns["material"] = table.frame[mapping["material"]]
    else:
        columns["material"] = pd.Series([material_id] * table.frame.shape[0], dtype=str)
    for target in SWEEP_TARGETS:
        if target not in mapping:
            continue
        head = target if target == "loss_factor" else f"{target} [{units.get(target, '')}]"
        columns[head] = table.frame[mapping[target]].reset_index(drop=True)
    columns["material"] = columns["material"].reset_index(drop=True)
    frame = pd.DataFrame(columns)
    return RawTable(
        table.file,
        list(frame.columns),
        frame,
        table.sha256,
        table.size_bytes,
        table.decimal_comma,
    )
