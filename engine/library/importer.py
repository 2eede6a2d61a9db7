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
AMPLITUDE_REQUIRED = ("material", "temperature", "frequency", "strain_amplitude", "storage_modulus")
STRAIN_UNITS = {"-": 1.0, "%": 0.01}  # strain amplitude as a fraction, or in percent
AMPLITUDE_MIN_POINTS = 5  # fewest points of a grade's amplitude sweep (six-parameter fit)
MAX_STRAIN_AMPLITUDE = 1.0  # 100 %: above it a value is taken for a unit mistake
# Points of one grade's amplitude sweep count as one temperature within this band [K]
# (the default isotherm tolerance of the master-curve fit) and as one frequency within
# this relative band.
AMPLITUDE_TEMPERATURE_BAND = 1.0
AMPLITUDE_FREQUENCY_BAND = 0.01


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

    @property
    def amplitude_sweeps(self) -> list[dict]:
        """The amplitude sweeps the plan would write (carried by their files' entries)."""
        return [s for f in self.files if f["kind"] == "amplitude" for s in f["sweeps"]]


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
    return ImportPlan(files, materials, datasets, skipped)


def import_files(
    library: Library,
    catalogs: Sequence[str | Path | RawTable] = (),
    sweeps: Sequence[str | Path | RawTable] = (),
    amplitude: Sequence[str | Path | RawTable] = (),
):
    """Validate and import files into ``library`` in one transaction (all or nothing).

    Amplitude sweeps may be given in ``amplitude`` or among ``sweeps``, where they are
    recognised by their ``strain_amplitude`` column.
    """
    cat = [c if isinstance(c, RawTable) else read_table(c) for c in catalogs]
    swp = [s if isinstance(s, RawTable) else read_table(s) for s in sweeps]
    amp = [a if isinstance(a, RawTable) else read_table(a) for a in amplitude]
    plan = plan_import(library, cat, swp, amp)
    summary = library.write_import(plan.files, plan.materials, plan.datasets)
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
    unknown = ~ids.isin(known_ids).to_numpy()
    if unknown.any():
        row = _first(unknown)
        raise InputError(
            f"unknown grade id '{ids.iloc[row - 2]}': not in the catalog or the library",
            file=f,
            row=row,
            column=h_id,
        )
    h_t, u_t = cols["temperature"]
    h_f, u_f = cols["frequency"]
    h_g, u_g = cols["strain_amplitude"]
    h_s, u_s = cols["storage_modulus"]
    t_unit = _unit(table, "temperature", h_t, u_t, TEMPERATURE_UNITS)
    f_unit = _unit(table, "frequency", h_f, u_f, FREQUENCY_UNITS)
    g_factor = _strain_unit(table, h_g, u_g)
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
    strain = _numbers(table, h_g, required=True) * g_factor
    _positive(table, h_g, strain, "strain amplitudes must be positive")
    large = strain > MAX_STRAIN_AMPLITUDE
    if large.any():
        row = _first(large)
        raise InputError(
            f"{table.frame[h_g].iloc[row - 2]} is a strain amplitude above 100 %; "
            f"is the column in percent? then write '{split_header(h_g)[0]} [%]'",
            file=f,
            row=row,
            column=h_g,
        )
    storage = modulus_to_pa(_numbers(table, h_s, required=True), s_unit)
    _positive(table, h_s, storage, "moduli must be positive")
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
    else:
        h_l, u_l = cols["loss_modulus"]
        l_unit = _unit(table, "loss_modulus", h_l, u_l, tuple(MODULUS_UNITS))
        loss = modulus_to_pa(_numbers(table, h_l, required=True), l_unit)
        _positive(table, h_l, loss, "loss moduli of an amplitude sweep must be positive")
        eta = loss / storage
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
