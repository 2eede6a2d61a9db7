"""Strain-amplitude sweep files (docs/amplitude_sweeps.md): import, validation, storage,
the schema migration that adds their table, and the demo's sweeps.

Unit factors: the SI prefixes (kPa, MPa, GPa) and 1 % = 0.01. Every bad file gets one
line naming file, row and column, and the library stays as it was.
"""

from __future__ import annotations

import importlib.util
import sqlite3
from contextlib import closing
from pathlib import Path

import numpy as np
import pytest
import sqlalchemy as sa

from engine.base.errors import InputError
from engine.library import store
from engine.library.demo import DEMO_DIR, load_demo
from engine.library.importer import (
    import_files,
    looks_like_amplitude,
    looks_like_catalog,
    plan_import,
    read_table,
)
from engine.library.store import SCHEMA_VERSION, Library
from tests.helpers import DEMO, ROOT

CATALOG = "id,name,mode,hardness [Shore A]\nA1,Filled one,tensile,60\nS1,Filled shear,shear,55\n"
HEADER = (
    "material,temperature [degC],frequency [Hz],strain_amplitude [-],"
    "storage_modulus [MPa],loss_factor\n"
)
STRAINS = ("0.0001", "0.0003", "0.001", "0.003", "0.01", "0.03", "0.1")
STORAGE = ("6.0", "5.95", "5.7", "5.0", "3.9", "3.0", "2.5")
LOSS = ("0.08", "0.085", "0.10", "0.14", "0.19", "0.19", "0.15")


def rows(grade="A1", temp="23", freq="10", strains=STRAINS, storage=STORAGE, loss=LOSS):
    return "".join(
        f"{grade},{temp},{freq},{g},{e},{n}\n"
        for g, e, n in zip(strains, storage, loss, strict=True)
    )


GOOD = HEADER + rows() + rows("S1", temp="40", freq="1")


def write(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.write_text(text, encoding="utf-8")
    return path


def snapshot(lib: Library):
    """Everything an import could change."""
    return (
        [m.as_row() for m in lib.materials(include_deleted=True)],
        [(d.material_id, d.data_hash) for d in lib.datasets()],
        {k: v.tobytes() for k, v in lib.amplitude_sweeps().items()},
        len(lib.imports()),
        lib.version(),
    )


# ---------------------------------------------------------------- a good file


def test_good_file_is_stored_in_internal_units(tmp_path, any_library):
    cat = write(tmp_path, "cat.csv", CATALOG)
    amp = write(tmp_path, "amp.csv", GOOD)
    summary = import_files(any_library, [cat], [amp])  # recognised among the sweep files
    assert summary.amplitude_sweeps_added == [("A1", 7), ("S1", 7)]
    assert summary.datasets_added == []
    assert summary.to_dict()["amplitude_sweeps_added"] == [
        {"material": "A1", "points": 7},
        {"material": "S1", "points": 7},
    ]
    sweeps = any_library.amplitude_sweeps()
    assert sorted(sweeps) == ["A1", "S1"]
    a1 = sweeps["A1"]
    assert a1.shape == (7, 5)
    np.testing.assert_allclose(a1[:, 0], [float(g) for g in STRAINS])
    np.testing.assert_allclose(a1[:, 1], [float(e) * 1e6 for e in STORAGE])  # MPa -> Pa
    np.testing.assert_allclose(a1[:, 2], [float(n) for n in LOSS])
    assert set(a1[:, 3]) == {23.0} and set(a1[:, 4]) == {10.0}
    assert set(sweeps["S1"][:, 3]) == {40.0} and set(sweeps["S1"][:, 4]) == {1.0}
    assert any_library.amplitude_sweeps(["S1", "NOPE"]).keys() == {"S1"}
    assert [i["kind"] for i in any_library.imports()] == ["catalog", "amplitude"]


def test_file_is_recognised_by_its_header(tmp_path):
    amp = read_table(write(tmp_path, "amp.csv", GOOD))
    spaced = read_table(
        write(tmp_path, "b.csv", GOOD.replace("strain_amplitude", "Strain amplitude"))
    )
    sweep = read_table(write(tmp_path, "c.csv", "material,temperature [degC]\nA1,20\n"))
    assert looks_like_amplitude(amp) and looks_like_amplitude(spaced)
    assert not looks_like_amplitude(sweep) and not looks_like_catalog(amp)


def test_the_load_command_imports_it_without_being_told(run_cli, tmp_path, library_url):
    db = library_url
    cat = write(tmp_path, "cat.csv", CATALOG)
    amp = write(tmp_path, "amp.csv", GOOD)
    run = run_cli(db, "load", cat, amp, "--json")
    assert run.returncode == 0, run.stderr
    assert run.json()["amplitude_sweeps_added"] == [
        {"material": "A1", "points": 7},
        {"material": "S1", "points": 7},
    ]
    assert sorted(Library(str(db)).amplitude_sweeps()) == ["A1", "S1"]
    again = run_cli(db, "load", cat, amp, "--json")
    assert again.returncode == 0 and again.json()["amplitude_sweeps_added"] == []
    assert len(again.json()["files_skipped"]) == 2


def test_percent_and_other_units_are_converted(tmp_path, any_library):
    import_files(any_library, [write(tmp_path, "cat.csv", CATALOG)])
    text = (
        "material,temperature [K],frequency [rad/s],Strain Amplitude [%],"
        "storage modulus [kPa],loss modulus [GPa]\n"
        + "".join(
            f"A1,296.15,62.83185307179586,{p},{e},{l}\n"
            for p, e, l in [
                ("0.01", "6000", "0.0006"),
                ("0.05", "5900", "0.00065"),
                ("0.2", "5500", "0.0008"),
                ("1", "4500", "0.0009"),
                ("5", "3000", "0.0006"),
                ("20", "2400", "0.0004"),
            ]
        )
    )
    import_files(any_library, [], [], [write(tmp_path, "pct.csv", text)])
    a1 = any_library.amplitude_sweeps()["A1"]
    np.testing.assert_allclose(a1[:, 0], [1e-4, 5e-4, 2e-3, 1e-2, 5e-2, 0.2])  # 1 % = 0.01
    np.testing.assert_allclose(a1[:, 1], [6.0e6, 5.9e6, 5.5e6, 4.5e6, 3.0e6, 2.4e6])  # kPa
    np.testing.assert_allclose(a1[:, 2], np.array([0.6, 0.65, 0.8, 0.9, 0.6, 0.4]) * 1e6 / a1[:, 1])
    np.testing.assert_allclose(a1[:, 3], 23.0)  # 296.15 K
    np.testing.assert_allclose(a1[:, 4], 10.0)  # 62.83 rad/s / 2 pi


def test_newest_import_of_a_grade_wins(tmp_path, any_library):
    import_files(
        any_library, [write(tmp_path, "cat.csv", CATALOG)], [write(tmp_path, "a.csv", GOOD)]
    )
    first = any_library.amplitude_sweeps()["A1"]
    newer = HEADER + rows(storage=tuple(f"{float(e) * 1.1:.4g}" for e in STORAGE))
    summary = import_files(any_library, [], [write(tmp_path, "b.csv", newer)])
    assert summary.amplitude_sweeps_added == [("A1", 7)]
    np.testing.assert_allclose(any_library.amplitude_sweeps()["A1"][:, 1], first[:, 1] * 1.1)
    # The first data again, from a file of other bytes: back in use.
    again = HEADER.replace("\n", "\r\n") + rows().replace("\n", "\r\n")
    summary = import_files(any_library, [], [write(tmp_path, "c.csv", again)])
    assert summary.amplitude_sweeps_added == [("A1", 7)]
    np.testing.assert_array_equal(any_library.amplitude_sweeps()["A1"], first)
    # The same points as the grade's newest sweep add nothing.
    same = HEADER + rows() + "\n"
    assert (
        import_files(any_library, [], [write(tmp_path, "d.csv", same)]).amplitude_sweeps_added == []
    )
    with any_library.engine.connect() as conn:
        count = conn.execute(sa.select(sa.func.count()).select_from(store.amplitude_table))
        assert count.scalar() == 4  # A1 three times, S1 once


def test_deleted_grades_are_left_out(tmp_path, any_library):
    import_files(
        any_library, [write(tmp_path, "cat.csv", CATALOG)], [write(tmp_path, "a.csv", GOOD)]
    )
    any_library.delete_material("S1")
    assert sorted(any_library.amplitude_sweeps()) == ["A1"]
    any_library.restore_material("S1")
    assert sorted(any_library.amplitude_sweeps()) == ["A1", "S1"]


def test_documented_example_imports(tmp_path, any_library):
    text = (ROOT / "docs" / "amplitude_sweeps.md").read_text(encoding="utf-8")
    example = text.split("### Example", 1)[1].split("```", 2)[1].strip() + "\n"
    import_files(any_library, [write(tmp_path, "cat.csv", "id,name,mode\nNR-60,Example,tensile\n")])
    summary = import_files(any_library, [], [], [write(tmp_path, "example.csv", example)])
    assert summary.amplitude_sweeps_added == [("NR-60", 7)]
    assert any_library.amplitude_sweeps()["NR-60"][0, 0] == pytest.approx(1e-4)  # 0.01 %


# ---------------------------------------------------------------- bad files

BAD_CASES = [
    # (what to change in GOOD, row, column, reason)
    (
        ("A1,23,10,0.003,5.0,", "A1,23,10,0.003,abc,"),
        5,
        "storage_modulus [MPa]",
        "'abc' is not a number",
    ),
    (
        ("A1,23,10,0.003,5.0,", "A1,23,10,0.003,,"),
        5,
        "storage_modulus [MPa]",
        "blank cell; a value is required",
    ),
    (("A1,23,10,0.003,5.0,", "A1,23,10,0.003,inf,"), 5, "storage_modulus [MPa]", "infinite value"),
    (
        ("A1,23,10,0.003,5.0,", "A1,23,10,0.003,nan,"),
        5,
        "storage_modulus [MPa]",
        "'nan' is not a number",
    ),
    (
        ("A1,23,10,0.003,5.0,", "A1,23,10,0.003,0,"),
        5,
        "storage_modulus [MPa]",
        "0 is not positive; moduli must be positive",
    ),
    (
        ("A1,23,10,0.003,", "A1,23,10,-0.003,"),
        5,
        "strain_amplitude [-]",
        "-0.003 is not positive; strain amplitudes must be positive",
    ),
    (
        ("A1,23,10,0.003,5.0,0.14\n", "A1,23,10,0.003,5.0,0\n"),
        5,
        "loss_factor",
        "0 is not positive; loss factors of an amplitude sweep must be positive",
    ),
    (
        ("A1,23,10,0.003,", "A1,23,10,3,"),
        5,
        "strain_amplitude [-]",
        "3 is a strain amplitude above 100 %; is the column in percent? "
        "then write 'strain_amplitude [%]'",
    ),
    (
        ("A1,23,10,0.003,", "B9,23,10,0.003,"),
        5,
        "material",
        "unknown grade id 'B9': not in the catalog or the library",
    ),
    (("A1,23,10,0.003,", ",23,10,0.003,"), 5, "material", "blank cell; a value is required"),
    (
        ("A1,23,10,0.003,", "A1,25,10,0.003,"),
        5,
        "temperature [degC]",
        "grade 'A1' has more than one temperature in the amplitude sweep (23 and 25 degC); "
        "an amplitude sweep is taken at one temperature and one frequency",
    ),
    (
        ("A1,23,10,0.003,", "A1,23,11,0.003,"),
        5,
        "frequency [Hz]",
        "grade 'A1' has more than one frequency in the amplitude sweep (10 and 11 Hz)",
    ),
    (
        ("A1,23,10,0.003,", "A1,-300,10,0.003,"),
        5,
        "temperature [degC]",
        "-300 degC is below absolute zero",
    ),
]


@pytest.mark.parametrize(("change", "row", "column", "reason"), BAD_CASES)
def test_bad_cell_is_refused_with_file_row_and_column(
    tmp_path, any_library, change, row, column, reason
):
    import_files(any_library, [write(tmp_path, "first.csv", CATALOG)])
    before = snapshot(any_library)
    old, new = change
    assert GOOD.count(old) == 1
    bad = write(tmp_path, "bad.csv", GOOD.replace(old, new))
    cat = write(tmp_path, "cat2.csv", "id,name,mode\nZ9,Not written,tensile\n")
    with pytest.raises(InputError) as caught:
        import_files(any_library, [cat], [bad])
    line = str(caught.value)
    assert "\n" not in line
    assert line.startswith(f"{bad}, row {row}, column '{column}': {reason}")
    assert snapshot(any_library) == before  # the catalog of the same import was not written


@pytest.mark.parametrize(
    ("text", "column", "reason"),
    [
        (
            GOOD.replace("strain_amplitude [-]", "strain_amplitude"),
            "strain_amplitude",
            "no unit for the strain amplitude; write 'strain_amplitude [-]' for a fraction",
        ),
        (
            GOOD.replace("strain_amplitude [-]", "strain_amplitude [mm]"),
            "strain_amplitude [mm]",
            "unit 'mm' for the strain amplitude",
        ),
        (
            GOOD.replace("storage_modulus [MPa]", "storage_modulus [bar]"),
            "storage_modulus [bar]",
            "unknown unit 'bar'; accepted: Pa, kPa, MPa, GPa, psi",
        ),
        (
            GOOD.replace("loss_factor", "loss_factor [%]"),
            "loss_factor [%]",
            "unit '%' for the loss factor; it has none",
        ),
        (
            GOOD.replace("loss_factor\n", "loss_factor,strain amplitude [%]\n"),
            "strain amplitude [%]",
            "column 'strain_amplitude' appears twice "
            "(as 'strain_amplitude [-]' and 'strain amplitude [%]')",
        ),
    ],
)
def test_bad_header_is_refused_with_file_and_column(tmp_path, any_library, text, column, reason):
    import_files(any_library, [write(tmp_path, "first.csv", CATALOG)])
    before = snapshot(any_library)
    bad = write(tmp_path, "bad.csv", text)
    with pytest.raises(InputError) as caught:
        import_files(any_library, [], [], [bad])
    assert str(caught.value).startswith(f"{bad}, column '{column}': {reason}")
    assert snapshot(any_library) == before


def test_missing_columns_are_named(tmp_path, any_library):
    import_files(any_library, [write(tmp_path, "first.csv", CATALOG)])
    text = GOOD.replace(",frequency [Hz]", "").replace(",10,", ",").replace(",1,", ",")
    bad = write(tmp_path, "nofreq.csv", text)
    with pytest.raises(InputError, match=r"nofreq\.csv: missing required column 'frequency'"):
        import_files(any_library, [], [bad])
    text = HEADER.replace(",loss_factor", "") + "A1,23,10,0.001,5\n"
    bad = write(tmp_path, "noloss.csv", text)
    with pytest.raises(InputError, match="one of 'loss_factor' or 'loss_modulus"):
        import_files(any_library, [], [], [bad])


def test_too_few_points_and_a_narrow_sweep_are_refused(tmp_path, any_library):
    import_files(any_library, [write(tmp_path, "first.csv", CATALOG)])
    before = snapshot(any_library)
    few = write(
        tmp_path,
        "few.csv",
        HEADER + rows() + rows("S1", strains=STRAINS[:4], storage=STORAGE[:4], loss=LOSS[:4]),
    )
    with pytest.raises(InputError) as caught:
        import_files(any_library, [], [few])
    assert str(caught.value) == (
        f"{few}, row 9, column 'material': grade 'S1' has 4 point(s) in the amplitude sweep; "
        "the Kraus fit needs at least 5"
    )
    narrow = tuple(f"{0.01 + 0.01 * k:g}" for k in range(7))  # 0.01 to 0.07
    bad = write(tmp_path, "narrow.csv", HEADER + rows(strains=narrow))
    with pytest.raises(InputError) as caught:
        import_files(any_library, [], [bad])
    assert str(caught.value) == (
        f"{bad}, row 8, column 'strain_amplitude [-]': grade 'A1': the amplitude sweep spans "
        "strains 0.01 to 0.07, less than one decade; the Kraus fit needs at least one decade"
    )
    assert snapshot(any_library) == before


def test_a_bad_amplitude_file_stops_the_whole_import(tmp_path, any_library):
    before = snapshot(any_library)
    cat = write(tmp_path, "cat.csv", CATALOG)
    sweep = write(
        tmp_path,
        "sweep.csv",
        "material,temperature [degC],frequency [Hz],storage_modulus [MPa],loss_factor\n"
        "A1,20,1,5.0,0.1\nA1,20,10,6.0,0.12\n",
    )
    bad = write(tmp_path, "bad.csv", GOOD.replace("A1,23,10,0.1,", "A1,23,10,x,"))
    with pytest.raises(InputError, match=r"bad\.csv, row 8, column 'strain_amplitude \[-\]'"):
        import_files(any_library, [cat], [sweep, bad])
    assert snapshot(any_library) == before and any_library.materials() == []


def test_plan_carries_the_sweeps_for_a_later_write(tmp_path, any_library):
    # The dashboard validates first and writes the plan later: the plan's file entries
    # carry the amplitude sweeps, so write_import of (files, materials, datasets) stores them.
    plan = plan_import(
        any_library,
        [read_table(write(tmp_path, "cat.csv", CATALOG))],
        [read_table(write(tmp_path, "amp.csv", GOOD))],
    )
    assert [s["material_id"] for s in plan.amplitude_sweeps] == ["A1", "S1"]
    assert any_library.amplitude_sweeps() == {}
    summary = any_library.write_import(plan.files, plan.materials, plan.datasets)
    assert [m for m, _ in summary.amplitude_sweeps_added] == ["A1", "S1"]
    assert sorted(any_library.amplitude_sweeps()) == ["A1", "S1"]


# ---------------------------------------------------------------- migration

V1_FIXTURE = Path(__file__).resolve().parent / "data" / "library_v1.sql"
# The migration tests are sqlite_only: they build old libraries with sqlite3 and compare
# the file's tables and its backup copy (the server upgrade: tests/test_migrations.py).


def sqlite_tables(path: Path) -> dict[str, list[tuple]]:
    with closing(sqlite3.connect(path)) as conn:
        names = [r[0] for r in conn.execute("select name from sqlite_master where type='table'")]
        return {
            n: list(conn.execute(f'select * from "{n}" order by rowid'))
            for n in names
            if not n.startswith("sqlite_")
        }


def columns(engine) -> dict[str, dict[str, tuple[str, bool]]]:
    """Table -> column -> (type, nullable), as the database reports them."""
    inspector = sa.inspect(engine)
    return {
        t: {c["name"]: (str(c["type"]), c["nullable"]) for c in inspector.get_columns(t)}
        for t in inspector.get_table_names()
    }


def test_migration_3_adds_the_table_and_the_schema_is_at_least_that():
    by_number = {m.number: m.description for m in store.migrations.MIGRATIONS}
    assert by_number[3] == "add the amplitude_sweeps table"
    assert SCHEMA_VERSION >= 3
    assert SCHEMA_VERSION == max(by_number)


@pytest.mark.sqlite_only
def test_version_1_library_gets_the_table_and_keeps_its_data(tmp_path):
    path = tmp_path / "v1.sqlite"
    with closing(sqlite3.connect(path)) as conn:
        conn.executescript(V1_FIXTURE.read_text(encoding="utf-8"))
    before = sqlite_tables(path)
    assert "amplitude_sweeps" not in before
    lib = Library(str(path))
    after = sqlite_tables(path)
    assert after["amplitude_sweeps"] == []
    for name in ("datasets", "imports", "fits", "material_history"):
        assert after[name] == before[name], name
    assert lib.amplitude_sweeps() == {}
    fresh = Library(str(tmp_path / "fresh.sqlite"))
    assert columns(lib.engine) == columns(fresh.engine)


@pytest.mark.sqlite_only
def test_version_2_library_is_upgraded_with_nothing_lost(tmp_path):
    # A library as schema version 2 left it: today's tables without amplitude_sweeps.
    path = tmp_path / "v2.sqlite"
    lib = Library(str(path))
    import_files(
        lib,
        [write(tmp_path, "cat.csv", CATALOG)],
        [
            write(
                tmp_path,
                "sweep.csv",
                "material,temperature [degC],frequency [Hz],storage_modulus [MPa],loss_factor\n"
                "A1,20,1,5.0,0.1\nA1,20,10,6.0,0.12\nA1,30,1,4.5,0.09\n",
            )
        ],
    )
    lib.update_catalog("A1", {"bulk_modulus": 1900.0})
    lib.engine.dispose()
    with closing(sqlite3.connect(path)) as conn, conn:
        conn.execute("DROP TABLE amplitude_sweeps")
        conn.execute("UPDATE meta SET value = '2' WHERE key = 'schema_version'")
    before = sqlite_tables(path)
    assert "amplitude_sweeps" not in before

    upgraded = Library(str(path))

    assert upgraded.backup == tmp_path / "v2.sqlite.v2.bak"
    assert sqlite_tables(upgraded.backup) == before
    after = sqlite_tables(path)
    assert after["amplitude_sweeps"] == []
    for name in ("materials", "datasets", "imports", "fits", "material_history"):
        assert after[name] == before[name], name
    meta = dict(after["meta"])
    assert meta["schema_version"] == str(SCHEMA_VERSION)
    assert int(meta["library_version"]) == int(dict(before["meta"])["library_version"]) + 1
    assert upgraded.material("A1").bulk_modulus == 1900.0
    assert upgraded.latest_points("A1")[1].shape == (3, 4)
    fresh = Library(str(tmp_path / "fresh.sqlite"))
    assert columns(upgraded.engine) == columns(fresh.engine)
    with upgraded.engine.connect() as conn:
        indexes = sa.inspect(conn).get_indexes("amplitude_sweeps")
    assert [i["column_names"] for i in indexes] == [["material_id"]]
    # The upgraded library takes amplitude sweeps.
    import_files(upgraded, [], [write(tmp_path, "amp.csv", GOOD)])
    assert sorted(upgraded.amplitude_sweeps()) == ["A1", "S1"]


# ---------------------------------------------------------------- the demo


def test_demo_loads_its_amplitude_sweeps(any_library):
    lib = any_library
    summary = load_demo(lib)
    assert [m for m, _ in summary.amplitude_sweeps_added] == [
        "LAB-NR55",
        "FP-IIR50",
        "BW-NBR65",
        "QC-EPDM60",
    ]
    sweeps = lib.amplitude_sweeps()
    grades = {m.id: m for m in lib.materials()}
    for mid, points in sweeps.items():
        assert points.shape == (14, 5)
        assert points[0, 0] == pytest.approx(1e-4) and points[-1, 0] == pytest.approx(0.3)
        assert grades[mid].hardness >= 50  # the filled, harder grades (demo_materials/README.md)
    assert load_demo(lib).amplitude_sweeps_added == []  # a second load changes nothing
    assert DEMO_DIR == DEMO


def test_demo_amplitude_file_is_what_its_generator_writes():
    spec = importlib.util.spec_from_file_location(
        "generate_amplitude", DEMO / "generate_amplitude.py"
    )
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    text = module.amplitude_text()
    assert (DEMO / "amplitude.csv").read_bytes() == text.encode("utf-8")
    assert module.main(["--check"]) == 0
    assert 12 <= module.STRAINS.size <= 16
