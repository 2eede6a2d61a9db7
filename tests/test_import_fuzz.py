"""Import fuzzing: valid catalog and sweep files, mutated (bytes flipped, truncation,
random and extreme cells, NaN/inf text, changed units, encodings, delimiters, line ends,
duplicated headers and rows, extra and missing columns, XLSX), then imported.

Each import either succeeds with finite, physical values stored, or raises InputError
with a one-line message and leaves the library unchanged table for table; no other
exception and no warning. The suite runs a bounded number of examples;
``python -m bench.fuzz_import`` runs the same trial on 10,000 or more.

"Physical" here is the importer's own documented ranges (engine/library/importer.py)
plus the catalog field table; a stored value outside them counts as insane.
"""

from __future__ import annotations

import csv
import io
import shutil
import sqlite3
import tempfile
import warnings
from collections import Counter
from contextlib import closing
from pathlib import Path

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from engine.base.errors import InputError
from engine.base.fields import FIELDS
from engine.library import importer
from engine.library.importer import import_files
from engine.library.store import Library

CATALOG = [
    [
        "id",
        "name",
        "mode",
        "supplier",
        "density [kg/m3]",
        "price [per kg]",
        "hardness [Shore A]",
        "service_min [degC]",
        "service_max [degC]",
        "poisson_ratio",
        "bulk_modulus [MPa]",
        "notes",
    ],
    ["G1", "Grade one", "tensile", "Firm A", "1100", "4.5", "60", "-40", "80", "0.49", "2000", "x"],
    ["G2", "Name, with comma", "shear", "", "1250", "", "", "", "", "", "", ""],
]
SWEEP = [
    ["material", "temperature [degC]", "frequency [Hz]", "storage_modulus [MPa]", "loss_factor"],
    *[
        [g, str(t), str(f), f"{e * (1 + 0.1 * k):.3f}", f"{0.1 + 0.01 * k:.3f}"]
        for g, e in (("G1", 5.0), ("G2", 2.0), ("G0", 9.0))
        for k, (t, f) in enumerate((t, f) for t in (-20, 20, 60) for f in (1, 10))
    ],
]
CELLS = [
    "1e305",
    "-1e305",
    "1e400",
    "1e-320",
    "4.9e-324",
    "1e-30",
    "0",
    "-0",
    "-1",
    "nan",
    "NaN",
    "inf",
    "-inf",
    "Infinity",
    "",
    " ",
    "abc",
    "1,5",
    "1.5.5",
    '"',
    'a"b',
    "\n",
    "a\nb",
    "=1+2",
    "G1",
    "G9",
    "tensile",
    "x" * 20_000,
    "99999999999999999999999999",
    "0x10",
    "1_000",
    "١٢",
    "\x00",
    "\ufeff",
]
UNITS = [
    "GPa",
    "Pa",
    "psi",
    "K",
    "degF",
    "rad/s",
    "g/cm3",
    "lb/ft3",
    "per tonne",
    "per lb",
    "Shore D",
    "bar",
    "",
    "%",
    "-",
    "°C",
    "kg/m3",
]
ENCODINGS = ["utf-8", "utf-8-sig", "cp1252", "latin-1", "utf-16", "shift_jis"]


def _op():
    row, col = st.integers(0, 40), st.integers(0, 15)
    return st.one_of(
        st.tuples(
            st.just("cell"), row, col, st.one_of(st.sampled_from(CELLS), st.text(max_size=12))
        ),
        st.tuples(st.just("number"), row, col, st.floats(allow_nan=True, allow_infinity=True)),
        st.tuples(st.just("unit"), col, st.sampled_from(UNITS)),
        st.tuples(st.just("dup_header"), col),
        st.tuples(st.just("header"), col, st.text(max_size=20)),
        st.tuples(st.just("extra_col"), col, st.sampled_from(["extra", "", "id", "notes [x]"])),
        st.tuples(st.just("drop_col"), col),
        st.tuples(st.just("dup_row"), row, st.floats(0.5, 4.0)),
        st.tuples(st.just("drop_row"), row),
        st.tuples(st.just("short_row"), row),
    )


def _byte_op():
    return st.one_of(
        st.tuples(st.just("flip"), st.floats(0, 1), st.integers(0, 255)),
        st.tuples(st.just("truncate"), st.floats(0, 1)),
        st.tuples(
            st.just("insert"), st.floats(0, 1), st.sampled_from([b'"', b"\r", b"\x00", b";", b"\n"])
        ),
    )


def file_spec():
    """How one file is mutated: table edits, then format, then byte edits."""
    return st.fixed_dictionaries(
        {
            "ops": st.lists(_op(), max_size=3),
            "format": st.sampled_from(["csv", "csv", "csv", "quoted", "raw", "xlsx"]),
            "delimiter": st.sampled_from([",", ",", ";", "\t", "|"]),
            "line_end": st.sampled_from(["\n", "\n", "\r\n", "\r", "\n\n"]),
            "encoding": st.sampled_from(ENCODINGS),
            "bytes": st.lists(_byte_op(), max_size=2),
        }
    )


def mutate(table: list[list[str]], spec: dict) -> bytes:
    """A mutated file's bytes from a valid table and a :func:`file_spec`."""
    rows = [list(r) for r in table]
    for op in spec["ops"]:
        kind = op[0]
        if kind in ("cell", "number"):
            r = op[1] % len(rows)
            if rows[r]:
                value = op[3] if kind == "cell" else repr(op[3])
                rows[r][op[2] % len(rows[r])] = value
        elif kind == "unit":
            c = op[1] % len(rows[0])
            name = rows[0][c].split("[")[0].strip()
            rows[0][c] = f"{name} [{op[2]}]" if op[2] else name
        elif kind == "dup_header":
            c = op[1] % len(rows[0])
            for r in rows:
                r.append(r[c] if c < len(r) else "")
        elif kind == "header":
            rows[0][op[1] % len(rows[0])] = op[2]
        elif kind == "extra_col":
            c = op[1] % (len(rows[0]) + 1)
            for k, r in enumerate(rows):
                r.insert(c, op[2] if k == 0 else str(k))
        elif kind == "drop_col" and len(rows[0]) > 1:
            c = op[1] % len(rows[0])
            for r in rows:
                if c < len(r):
                    del r[c]
        elif kind == "dup_row" and len(rows) > 1:
            r = 1 + op[1] % (len(rows) - 1)
            copy = list(rows[r])
            for c, cell in enumerate(copy):
                try:
                    copy[c] = repr(float(cell) * op[2]) if "storage" in rows[0][c] else cell
                except (ValueError, IndexError):
                    pass
            rows.insert(r + 1, copy)
        elif kind == "drop_row" and len(rows) > 2:
            del rows[1 + op[1] % (len(rows) - 1)]
        elif kind == "short_row" and len(rows) > 1:
            r = 1 + op[1] % (len(rows) - 1)
            rows[r] = rows[r][: max(1, len(rows[r]) // 2)]
    if spec["format"] == "xlsx":
        data = _xlsx(rows)
    else:
        buf = io.StringIO()
        if spec["format"] == "raw":  # no quoting at all: a comma in a name splits it
            buf.write("".join(spec["delimiter"].join(r) + spec["line_end"] for r in rows))
        else:
            quoting = csv.QUOTE_ALL if spec["format"] == "quoted" else csv.QUOTE_MINIMAL
            writer = csv.writer(
                buf, delimiter=spec["delimiter"], lineterminator=spec["line_end"], quoting=quoting
            )
            writer.writerows(rows)
        data = buf.getvalue().encode(spec["encoding"], errors="replace")
    for op in spec["bytes"]:
        at = int(op[1] * len(data))
        if op[0] == "flip" and data:
            at = min(at, len(data) - 1)
            data = data[:at] + bytes([op[2]]) + data[at + 1 :]
        elif op[0] == "truncate":
            data = data[:at]
        elif op[0] == "insert":
            data = data[:at] + op[2] + data[at:]
    return data


def _xlsx(rows: list[list[str]]) -> bytes:
    import openpyxl

    wb = openpyxl.Workbook()
    ws = wb.active
    for r in rows:
        cells: list[object] = []
        for cell in r:
            try:
                number = float(cell)
                cells.append(number if np.isfinite(number) else cell)
            except ValueError:
                # XML cannot hold most control characters: openpyxl refuses them
                cells.append("".join(ch for ch in cell if ch >= " " or ch in "\t\n\r"))
        ws.append(cells)
    out = io.BytesIO()
    wb.save(out)
    return out.getvalue()


def dump(path: str) -> list[str]:
    with closing(sqlite3.connect(path)) as c:
        return list(c.iterdump())


def insane(lib: Library) -> list[str]:
    """Stored values that are not finite and physical."""
    found = []
    for m in lib.materials(include_deleted=True):
        for name, f in FIELDS.items():
            v = getattr(m, name, None)
            if f.kind == "number" and v is not None:
                if not (np.isfinite(v) and f.accepts([v])[0]):
                    found.append(f"{m.id}.{name}={v}")
        if m.density is not None and not (
            importer.MIN_DENSITY <= m.density <= importer.MAX_DENSITY
        ):
            found.append(f"{m.id}.density={m.density}")
    for mid, (_, pts) in lib.all_latest_points().items():
        t, f, e, eta = pts.T
        ok = (
            np.isfinite(pts).all()
            and (t >= importer.ABSOLUTE_ZERO_C).all()
            and (t <= importer.MAX_TEMPERATURE_C).all()
            and ((f >= importer.MIN_FREQUENCY_HZ) & (f <= importer.MAX_FREQUENCY_HZ)).all()
            and ((e >= importer.MIN_MODULUS_PA) & (e <= importer.MAX_MODULUS_PA)).all()
            and ((eta >= 0) & (eta <= importer.MAX_LOSS_FACTOR)).all()
            and pts.shape[0] >= 2
        )
        if not ok:
            found.append(f"{mid}: points out of range")
    return found


class Trial:
    """One library with grade G0 in it, copied afresh for every import."""

    def __init__(self, folder: Path) -> None:
        self.folder = folder
        self.base = str(folder / "base.sqlite")
        base = Library(self.base)
        cat = folder / "g0.csv"
        cat.write_text("id,name,mode\nG0,Grade zero,tensile\n", encoding="utf-8")
        import_files(base, [cat])
        base.engine.dispose()
        self.baseline = dump(self.base)
        self.count = 0

    def run(self, catalog: bytes | None, sweep: bytes | None, xlsx: tuple[bool, bool]) -> str:
        """'accepted', 'refused', or what went wrong: 'traceback: ...', 'changed on
        refusal', 'insane: ...', 'several lines: ...', 'warning: ...'."""
        self.count += 1
        path = str(self.folder / f"lib{self.count % 2}.sqlite")
        shutil.copyfile(self.base, path)
        names = []
        for k, (data, ext) in enumerate(
            ((catalog, "xlsx" if xlsx[0] else "csv"), (sweep, "xlsx" if xlsx[1] else "csv"))
        ):
            if data is None:
                names.append(None)
                continue
            p = self.folder / f"f{k}.{ext}"
            p.write_bytes(data)
            names.append(p)
        lib = Library(path)
        try:
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                try:
                    import_files(lib, [n for n in names[:1] if n], [n for n in names[1:] if n])
                    outcome = "accepted"
                except InputError as exc:
                    outcome = "refused"
                    if len(str(exc).splitlines()) != 1:
                        return f"several lines: {str(exc)[:200]!r}"
                except Exception as exc:  # what the fuzzer hunts for
                    return f"traceback: {type(exc).__name__}: {str(exc)[:200]}"
            if caught:
                return f"warning: {caught[0].category.__name__}: {str(caught[0].message)[:200]}"
            if outcome == "refused":
                lib.engine.dispose()
                if dump(path) != self.baseline:
                    return "changed on refusal"
                return outcome
            bad = insane(lib)
            return f"insane: {bad[:3]}" if bad else outcome
        finally:
            lib.engine.dispose()


def pair():
    return st.tuples(st.one_of(st.none(), file_spec()), st.one_of(st.none(), file_spec())).filter(
        lambda p: p != (None, None)
    )


def one_pair(trial: Trial, specs) -> str:
    cat_spec, sweep_spec = specs
    catalog = None if cat_spec is None else mutate(CATALOG, cat_spec)
    sweep = None if sweep_spec is None else mutate(SWEEP, sweep_spec)
    xlsx = (
        cat_spec is not None and cat_spec["format"] == "xlsx",
        sweep_spec is not None and sweep_spec["format"] == "xlsx",
    )
    return trial.run(catalog, sweep, xlsx)


def test_unmutated_files_import():
    with tempfile.TemporaryDirectory() as folder:
        spec = {"ops": [], "format": "csv", "delimiter": ",", "line_end": "\n"}
        spec |= {"encoding": "utf-8", "bytes": []}
        assert one_pair(Trial(Path(folder)), (spec, spec)) == "accepted"
        xl = spec | {"format": "xlsx"}
        assert one_pair(Trial(Path(folder)), (xl, xl)) == "accepted"


def test_the_checker_sees_a_changed_library_and_an_insane_value(tmp_path):
    # The trial can fail: a value out of range and a library changed on refusal are seen.
    trial = Trial(tmp_path)
    lib = Library(trial.base)
    lib.update_catalog("G0", {"density": 1e-9})
    assert insane(lib) == ["G0.density=1e-09"]
    lib.engine.dispose()
    assert dump(trial.base) != trial.baseline


FUZZ_COUNTS: Counter = Counter()


@settings(
    max_examples=150,
    deadline=None,
    database=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much],
)
@given(specs=pair())
def test_mutated_files_are_imported_or_refused_in_one_line(specs):
    with tempfile.TemporaryDirectory() as folder:
        outcome = one_pair(Trial(Path(folder)), specs)
    FUZZ_COUNTS[outcome] += 1
    assert outcome in ("accepted", "refused"), outcome
