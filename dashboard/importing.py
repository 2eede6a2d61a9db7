"""Uploaded files -> a validated, previewed import; the library is written only on request.

Plain functions over bytes (no Streamlit), so the Library page and the tests share them.
Every problem is an :class:`engine.base.errors.InputError` whose one-line text names file, row
and column; nothing here writes unless :func:`write` is called.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import ParamSpec, TypeVar

import numpy as np
import pandas as pd

from engine.base.errors import InputError, QuietgradeError
from engine.base.units import (
    FREQUENCY_UNITS,
    MODULUS_UNITS,
    TEMPERATURE_UNITS,
    canonical_unit,
    split_header,
)
from engine.library.fits import master_curve
from engine.library.importer import (
    ImportPlan,
    RawTable,
    looks_like_catalog,
    map_columns,
    plan_import,
    read_table,
)
from engine.library.store import ImportSummary, Library

P = ParamSpec("P")  # the arguments of a function run by try_plan
T = TypeVar("T")  # what it returns

# Targets of the column-mapping step, with the units each accepts.
MAPPING_TARGETS = {
    "temperature": TEMPERATURE_UNITS,
    "frequency": FREQUENCY_UNITS,
    "storage_modulus": tuple(MODULUS_UNITS),
    "loss_factor": (),
    "loss_modulus": tuple(MODULUS_UNITS),
}
_HINTS = {
    "temperature": ("temp", "°c", "degc"),
    "frequency": ("freq", "hz", "rad/s"),
    "storage_modulus": ("storage", "e'", "g'", "e1", "g1"),
    "loss_factor": ("tan", "loss factor", "loss_factor", "damping factor"),
    "loss_modulus": ("loss modulus", "loss_modulus", "e''", "g''", "e2", "g2"),
    "material": ("material", "grade", "sample", "specimen"),
}


@dataclass
class Preview:
    """A validated import and the tables the page shows before anything is written."""

    plan: ImportPlan
    files: pd.DataFrame
    grades: pd.DataFrame
    datasets: pd.DataFrame

    @property
    def empty(self) -> bool:
        return not (self.plan.materials or self.plan.datasets)


# The files an upload slot takes (the slots accept any file so that a refused one gets a
# reason in words, not only a mark).
ACCEPTED_SUFFIXES = (".csv", ".xlsx", ".txt")
ACCEPTED_TEXT = "CSV, XLSX or TXT"
# A column of any of these makes an uploaded table a sweep; a table with none of them is
# read as a catalog, and its own missing columns are then reported as a catalog's.
SWEEP_COLUMNS = frozenset(
    {"material", "temperature", "frequency", "storage_modulus", "loss_factor", "loss_modulus"}
)


def check_type(name: str, slot: str) -> None:
    """Refuse a file the upload slot ``slot`` does not take, with a one-line reason."""
    suffix = "." + name.rsplit(".", 1)[-1].lower() if "." in name else ""
    if suffix not in ACCEPTED_SUFFIXES:
        what = f"a {suffix} file" if suffix else "a file without an extension"
        raise InputError(f"{what} is not accepted as {slot}: give {ACCEPTED_TEXT}", file=name)


def table_kind(table: RawTable) -> str:
    """``"catalog"`` or ``"sweep"``: what an uploaded table was meant to be, from its
    columns (a sweep column makes it a sweep, even with a catalog's columns missing)."""
    if looks_like_catalog(table):
        return "catalog"
    names = {split_header(h)[0].strip().lower().replace(" ", "_") for h in table.headers}
    return "sweep" if names & SWEEP_COLUMNS else "catalog"


def read_uploads(files: list[tuple[str, bytes]]) -> tuple[list[RawTable], list[RawTable]]:
    """Read uploaded (name, bytes) pairs and sort them into catalogs and sweeps."""
    if not files:
        raise InputError("no file uploaded")
    catalogs: list[RawTable] = []
    sweeps: list[RawTable] = []
    for name, data in files:
        check_type(name, "a catalog or sweep file")
        table = read_table(bytes(data), name)
        (catalogs if table_kind(table) == "catalog" else sweeps).append(table)
    return catalogs, sweeps


def _preview(library: Library, plan: ImportPlan) -> Preview:
    existing = library.existing_ids()
    files = pd.DataFrame(
        [
            {"file": f["file_name"], "kind": f["kind"], "rows": f["rows"], "status": "new"}
            for f in plan.files
        ]
        + [
            {"file": s, "kind": "", "rows": None, "status": "already imported: skipped"}
            for s in plan.skipped
        ]
    )
    grades = pd.DataFrame(
        [
            {
                "id": m.id,
                "name": m.name,
                "mode": m.mode,
                "supplier": m.supplier,
                "family": m.family,
                "price [per kg]": m.price,
                "hardness [Shore A]": m.hardness,
                "service [degC]": (
                    None
                    if m.service_min is None or m.service_max is None
                    else f"{m.service_min:g} to {m.service_max:g}"
                ),
                "change": "updates the library row" if m.id in existing else "new grade",
            }
            for m in plan.materials
        ]
    )
    names = {f["key"]: f["file_name"] for f in plan.files}
    datasets = pd.DataFrame(
        [
            {
                "grade": d["material_id"],
                "file": names.get(d["file_key"], ""),
                "points": int(d["points"].shape[0]),
                "temperatures": int(np.unique(np.round(d["points"][:, 0], 1)).size),
                "T from [degC]": float(d["points"][:, 0].min()),
                "T to [degC]": float(d["points"][:, 0].max()),
                "f from [Hz]": float(d["points"][:, 1].min()),
                "f to [Hz]": float(d["points"][:, 1].max()),
            }
            for d in plan.datasets
        ]
    )
    return Preview(plan, files, grades, datasets)


def plan_uploads(library: Library, files: list[tuple[str, bytes]]) -> Preview:
    """Validate catalog and sweep files in the import format; write nothing."""
    catalogs, sweeps = read_uploads(files)
    return _preview(library, plan_import(library, catalogs, sweeps))


def read_export(name: str, data: bytes) -> RawTable:
    """Read one instrument export (any columns) for the mapping step."""
    check_type(name, "an instrument export")
    return read_table(bytes(data), name)


def guess_mapping(headers: list[str]) -> dict[str, str | None]:
    """A first guess of which header holds which quantity (the user confirms it)."""
    out: dict[str, str | None] = {}
    taken: set[str] = set()
    for target in (
        "loss_modulus",
        "loss_factor",
        "storage_modulus",
        "temperature",
        "frequency",
        "material",
    ):
        found = None
        for h in headers:
            low = h.lower()
            if h not in taken and any(hint in low for hint in _HINTS[target]):
                found = h
                break
        out[target] = found
        if found:
            taken.add(found)
    return out


def guess_unit(header: str | None, target: str) -> str | None:
    """The unit written in a header's brackets, when it is one the target accepts."""
    allowed = MAPPING_TARGETS.get(target, ())
    if not header or not allowed:
        return None
    _, unit = split_header(header)
    if unit is None:  # exports often write the unit in parentheses: "E' (MPa)"
        found = re.search(r"\(([^()]*)\)\s*$", header)
        unit = found.group(1) if found else None
    if unit is None:
        return None
    canon = canonical_unit(unit)
    return canon if canon in allowed else None


def plan_mapped(
    library: Library,
    export: tuple[str, bytes],
    mapping: dict[str, str],
    units: dict[str, str],
    material_id: str | None = None,
    catalogs: Sequence[tuple[str, bytes]] = (),
) -> Preview:
    """Map an instrument export onto the import format and validate it; write nothing.

    ``catalogs`` may hold catalog files for grades not yet in the library.
    """
    table = read_export(*export)
    mapped = map_columns(table, mapping, units, material_id)
    for name, _ in catalogs:
        check_type(name, "a catalog")
    cats = [read_table(bytes(data), name) for name, data in catalogs]
    for c in cats:
        if not looks_like_catalog(c):
            missing = [
                col
                for col in ("id", "name", "mode")
                if col not in {split_header(h)[0].strip().lower() for h in c.headers}
            ]
            raise InputError(
                "this is not a catalog: it lacks the column(s) "
                + ", ".join(repr(m) for m in missing or ["id", "name", "mode"])
                + " (a catalog needs id, name and mode)",
                file=c.file,
            )
    return _preview(library, plan_import(library, cats, [mapped]))


def write(library: Library, preview: Preview) -> ImportSummary:
    """Write a validated import in one transaction."""
    plan = preview.plan
    summary = library.write_import(plan.files, plan.materials, plan.datasets)
    summary.files_skipped.extend(plan.skipped)
    return summary


def fit_notes(library: Library, ids: Sequence[str]) -> dict[str, list[str]]:
    """The fit's warnings and notes of each grade in ``ids`` (its master curve's notes,
    or the one-line reason its fit failed), for the page to show after a write."""
    out: dict[str, list[str]] = {}
    for gid in dict.fromkeys(ids):
        try:
            out[gid] = list(master_curve(library, gid).notes)
        except QuietgradeError as exc:
            out[gid] = [f"no master curve: {exc}"]
    return out


def try_plan(fn: Callable[P, T], *args: P.args, **kwargs: P.kwargs) -> tuple[T | None, str | None]:
    """Run a planning function; (its result, None) or (None, the one-line reason)."""
    try:
        return fn(*args, **kwargs), None
    except InputError as exc:
        return None, str(exc)
