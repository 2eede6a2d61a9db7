"""Reading and validating catalog and sweep files (the import format of DESIGN.md).

Every problem is an :class:`~engine.base.errors.InputError` naming file, row and column.
Rows are counted as a spreadsheet shows them: the header is row 1, the first data row
is row 2. Nothing here writes to the library; :func:`import_files` validates everything
first and then hands one transaction to :class:`~engine.library.store.Library`.
"""

from __future__ import annotations

import csv
import hashlib
import io
import re
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from engine.base.errors import InputError
from engine.base.fields import CATALOG, FIELDS, MODES
from engine.base.units import (
    ABSOLUTE_ZERO_C,
    FREQUENCY_UNITS,
    MODULUS_UNITS,
    TEMPERATURE_UNITS,
    canonical_unit,
    frequency_to_hz,
    modulus_to_pa,
    split_header,
    temperature_to_c,
)
from engine.library.store import Library, Material

CATALOG_REQUIRED = ("id", *(f.name for f in CATALOG if f.required))
# Optional catalog columns: name -> (expected unit or None, kind), from the field table
CATALOG_OPTIONAL = {f.name: (f.header_unit, f.kind) for f in CATALOG if not f.required}
SWEEP_REQUIRED = ("material", "temperature", "frequency", "storage_modulus")


@dataclass
class RawTable:
    """A file read as text cells: headers as written, rows of strings."""

    file: str
    headers: list[str]
    frame: pd.DataFrame  # all cells as str, blank as ""
    sha256: str
    size_bytes: int


def _decode(raw: bytes, file: str) -> str:
    if not raw.strip():
        raise InputError("the file is empty", file=file)
    if b"\x00" in raw[:4096]:
        raise InputError("this is a binary file, not CSV text or XLSX", file=file)
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        try:
            text = raw.decode("cp1252")
        except UnicodeDecodeError:
            raise InputError("the file is neither UTF-8 nor Windows-1252 text", file=file) from None
        return text


def _delimiter(text: str) -> str:
    first = text.splitlines()[0] if text else ""
    counts = {d: first.count(d) for d in (",", ";", "\t")}
    best = max(counts, key=counts.__getitem__)
    return best if counts[best] else ","


def read_table(source: str | Path | bytes, name: str | None = None) -> RawTable:
    """Read a CSV or XLSX file into text cells.

    ``source`` is a path, or the file's bytes with ``name`` for messages (uploads).
    Comma, semicolon and tab delimiters are recognised from the header line; UTF-8 with or
    without BOM (Windows-1252 as a fallback). XLSX files are recognised by content.
    """
    if isinstance(source, bytes):
        raw, file = source, name or "upload"
    else:
        file = name or str(source)
        path = Path(source)
        if not path.exists():
            raise InputError("file not found", file=file)
        if path.is_dir():
            raise InputError("this is a folder, not a file", file=file)
        raw = path.read_bytes()
    sha = hashlib.sha256(raw).hexdigest()
    if raw[:4] == b"PK\x03\x04":
        try:
            frame = pd.read_excel(io.BytesIO(raw), dtype=str, header=0, engine="openpyxl")
        except Exception as exc:  # openpyxl raises many kinds for a damaged workbook
            raise InputError(f"cannot read this XLSX workbook ({exc})", file=file) from None
        frame = frame.fillna("")
        headers = [str(h) for h in frame.columns]
        _check_duplicate_headers(headers, file)
    else:
        text = _decode(raw, file)
        delim = _delimiter(text)
        first = next(csv.reader(io.StringIO(text.split("\n", 1)[0]), delimiter=delim), [])
        headers = [h.strip() for h in first]
        if not any(headers):
            raise InputError("the file is empty", file=file)
        _check_duplicate_headers(headers, file)
        try:
            frame = pd.read_csv(
                io.StringIO(text),
                sep=delim,
                dtype=str,
                keep_default_na=False,
                skip_blank_lines=True,
                header=None,
                skiprows=1,
                index_col=False,
                engine="c",
            )
        except pd.errors.ParserError as exc:
            match = re.search(r"line (\d+), saw (\d+)", str(exc))
            if match:
                raise InputError(
                    f"{match.group(2)} cells but the header has {len(headers)} columns",
                    file=file,
                    row=int(match.group(1)),
                ) from None
            raise InputError(f"cannot read this file as CSV ({exc})", file=file) from None
        except pd.errors.EmptyDataError:
            frame = pd.DataFrame(columns=range(len(headers)), dtype=str)
        width = len(headers)
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
        frame.columns = headers
        if delim == ";":
            # Semicolon files come from locales that write decimal commas.
            frame = frame.apply(lambda col: col.str.replace(",", ".", regex=False))
    if frame.shape[0] == 0:
        raise InputError("the file has a header but no data rows", file=file)
    frame = frame.apply(lambda col: col.astype(str).str.strip())
    return RawTable(file, headers, frame, sha, len(raw))


def _check_duplicate_headers(headers: list[str], file: str) -> None:
    seen = set()
    for h in headers:
        key = split_header(h)[0]
        if key in seen:
            raise InputError(f"column '{key}' appears twice", file=file, column=h)
        seen.add(key)


def _columns(table: RawTable) -> dict[str, tuple[str, str | None]]:
    """name -> (header as written, unit as written)."""
    out = {}
    for h in table.headers:
        name, unit = split_header(h)
        out[name] = (h, unit)
    return out


def _numbers(table: RawTable, header: str, *, required: bool) -> np.ndarray:
    """Cells of one column as floats; NaN for blanks when not required."""
    cells = table.frame[header]
    values = pd.to_numeric(cells.where(cells != "", None), errors="coerce").to_numpy(float)
    bad = np.isnan(values) & (cells != "").to_numpy()
    if bad.any():
        i = int(np.argmax(bad))
        raise InputError(
            f"'{cells.iloc[i]}' is not a number", file=table.file, row=i + 2, column=header
        )
    if required and np.isnan(values).any():
        i = int(np.argmax(np.isnan(values)))
        raise InputError(
            "blank cell; a value is required", file=table.file, row=i + 2, column=header
        )
    if np.isinf(values).any():
        i = int(np.argmax(np.isinf(values)))
        raise InputError("infinite value", file=table.file, row=i + 2, column=header)
    return values


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
            f"unknown unit '{unit}'; accepted: {', '.join(allowed)}", file=table.file, column=header
        )
    return canon


def _first(mask: np.ndarray) -> int:
    return int(np.argmax(mask)) + 2


def parse_catalog(table: RawTable) -> list[Material]:
    """Validate a catalog table and return its grades."""
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
    dup = text["id"].duplicated().to_numpy()
    if dup.any():
        row = _first(dup)
        raise InputError(
            f"duplicate id '{text['id'].iloc[row - 2]}'",
            file=table.file,
            row=row,
            column=cols["id"][0],
        )
    modes = text["mode"].str.lower()
    bad_mode = ~modes.isin(MODES).to_numpy()
    if bad_mode.any():
        row = _first(bad_mode)
        raise InputError(
            f"mode '{text['mode'].iloc[row - 2]}' is not one of {', '.join(MODES)}",
            file=table.file,
            row=row,
            column=cols["mode"][0],
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
        numbers[name] = values
    for name, values in numbers.items():
        bad = ~FIELDS[name].accepts(values)
        if bad.any():
            row = _first(bad)
            raise InputError(
                f"{table.frame[cols[name][0]].iloc[row - 2]}: {FIELDS[name].rule}",
                file=table.file,
                row=row,
                column=cols[name][0],
            )
    if "service_min" in numbers and "service_max" in numbers:
        inverted = numbers["service_min"] >= numbers["service_max"]
        if inverted.any():
            row = _first(inverted)
            raise InputError(
                "service_min is not below service_max",
                file=table.file,
                row=row,
                column=cols["service_min"][0],
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


def parse_sweeps(table: RawTable, known_ids: set[str]) -> SweepData:
    """Validate a sweep table (long format) against the grades in ``known_ids``."""
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
    unknown = ~ids.isin(known_ids).to_numpy()
    if unknown.any():
        row = _first(unknown)
        raise InputError(
            f"unknown grade id '{ids.iloc[row - 2]}': not in the catalog or the library",
            file=f,
            row=row,
            column=cols["material"][0],
        )
    h_t, u_t = cols["temperature"]
    h_f, u_f = cols["frequency"]
    h_s, u_s = cols["storage_modulus"]
    t_unit = _unit(table, "temperature", h_t, u_t, TEMPERATURE_UNITS)
    f_unit = _unit(table, "frequency", h_f, u_f, FREQUENCY_UNITS)
    s_unit = _unit(table, "storage_modulus", h_s, u_s, tuple(MODULUS_UNITS))
    temperature = temperature_to_c(_numbers(table, h_t, required=True), t_unit)
    below = temperature < ABSOLUTE_ZERO_C
    if below.any():
        row = _first(below)
        raise InputError(
            f"{table.frame[h_t].iloc[row - 2]} {t_unit} is below absolute zero",
            file=f,
            row=row,
            column=h_t,
        )
    frequency = frequency_to_hz(_numbers(table, h_f, required=True), f_unit)
    _positive(table, h_f, frequency, "frequencies must be positive")
    storage = modulus_to_pa(_numbers(table, h_s, required=True), s_unit)
    _positive(table, h_s, storage, "moduli must be positive")
    if "loss_factor" in cols:
        h_e = cols["loss_factor"][0]
        eta = _numbers(table, h_e, required=True)
        neg = eta < 0
        if neg.any():
            row = _first(neg)
            raise InputError(
                f"{table.frame[h_e].iloc[row - 2]} is negative; loss factors must be >= 0",
                file=f,
                row=row,
                column=h_e,
            )
    else:
        h_l, u_l = cols["loss_modulus"]
        l_unit = _unit(table, "loss_modulus", h_l, u_l, tuple(MODULUS_UNITS))
        loss = modulus_to_pa(_numbers(table, h_l, required=True), l_unit)
        neg = loss < 0
        if neg.any():
            row = _first(neg)
            raise InputError(
                f"{table.frame[h_l].iloc[row - 2]} is negative; moduli must be >= 0",
                file=f,
                row=row,
                column=h_l,
            )
        eta = loss / storage
    points = np.column_stack([temperature, frequency, storage, eta])
    codes, uniques = pd.factorize(ids)
    counts = np.bincount(codes, minlength=len(uniques))
    if (counts < 2).any():
        k = int(np.argmax(counts < 2))
        raise InputError(
            f"grade '{uniques[k]}' has a single measured point; a data set needs at least "
            "two (a sweep over frequency or temperature)",
            file=f,
            row=int(np.argmax(codes == k)) + 2,
            column=cols["material"][0],
        )
    by_material = {}
    for k, mid in enumerate(uniques):
        sel = points[codes == k]
        order = np.lexsort((sel[:, 1], sel[:, 0]))
        by_material[str(mid)] = sel[order]
    return SweepData(f, by_material, table.frame.shape[0])


def _positive(table: RawTable, header: str, values: np.ndarray, reason: str) -> None:
    bad = values <= 0
    if bad.any():
        row = _first(bad)
        raise InputError(
            f"{table.frame[header].iloc[row - 2]} is not positive; {reason}",
            file=table.file,
            row=row,
            column=header,
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


def plan_import(
    library: Library,
    catalogs: list[RawTable],
    sweeps: list[RawTable],
) -> ImportPlan:
    """Validate catalogs and sweeps against each other and the library; write nothing."""
    known_sha = library.known_sha256()
    ids = library.existing_ids()
    files: list[dict] = []
    materials: list[Material] = []
    datasets: list[dict] = []
    skipped: list[str] = []
    seen_catalog: dict[str, str] = {}
    for table in catalogs:
        rows = parse_catalog(table)
        for m in rows:
            if m.id in seen_catalog:
                raise InputError(
                    f"grade id '{m.id}' is also in {seen_catalog[m.id]}",
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
    return ImportPlan(files, materials, datasets, skipped)


def import_files(
    library: Library,
    catalogs: Sequence[str | Path | RawTable] = (),
    sweeps: Sequence[str | Path | RawTable] = (),
):
    """Validate and import files into ``library`` in one transaction (all or nothing)."""
    cat = [c if isinstance(c, RawTable) else read_table(c) for c in catalogs]
    swp = [s if isinstance(s, RawTable) else read_table(s) for s in sweeps]
    plan = plan_import(library, cat, swp)
    summary = library.write_import(plan.files, plan.materials, plan.datasets)
    summary.files_skipped.extend(plan.skipped)
    return summary


def looks_like_catalog(table: RawTable) -> bool:
    """True when a table has the catalog's required columns and no sweep columns."""
    names = set(_columns(table))
    return set(CATALOG_REQUIRED) <= names and "storage_modulus" not in names


# -- arbitrary instrument exports ---------------------------------------------------------

SWEEP_TARGETS = ("temperature", "frequency", "storage_modulus", "loss_factor", "loss_modulus")


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
    return RawTable(table.file, list(frame.columns), frame, table.sha256, table.size_bytes)
