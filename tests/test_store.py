"""The material library: opening, versions, edits with history, soft delete and the fit
cache (engine/library/store.py and engine/library/fits.py), and the data folder
(engine/base/paths.py). Schema migrations: tests/test_migrations.py."""

from __future__ import annotations

import dataclasses
import logging
import re
import sqlite3
import sys
from pathlib import Path

import numpy as np
import pytest
import sqlalchemy as sa

from engine.base import fields
from engine.base.errors import FitError, LibraryError
from engine.base.paths import user_data_dir
from engine.library import fits, store
from engine.library.fits import fit_library, master_curve, options_key
from engine.library.importer import import_files
from engine.library.store import SCHEMA_VERSION, Library, Material, default_location
from tests import synthetic


def load_grades(library: Library, folder, ids, temperatures=synthetic.TEMPERATURES) -> None:
    """Import synthetic grades (one sweep file each) into ``library``."""
    catalog = folder / "catalog.csv"
    synthetic.write_catalog(catalog, ids=ids)
    sweeps = []
    for k, mid in enumerate(ids):
        path = folder / f"sweep-{mid}.csv"
        synthetic.write_csv(
            path, synthetic.sweep(temperatures=temperatures, noise=0.01, seed=k), mid
        )
        sweeps.append(path)
    import_files(library, [catalog], sweeps)


# ---------------------------------------------------------------- opening a library
#
# The tests marked sqlite_only read or write the library's file itself (sqlite3, its
# bytes, the data folder); every test taking ``any_library`` or ``library_url`` runs on
# SQLite and on the PostgreSQL server of QUIETGRADE_TEST_DATABASE_URL (tests/conftest.py).


@pytest.mark.sqlite_only
def test_new_library_records_schema_version(tmp_path):
    path = tmp_path / "new.sqlite"
    lib = Library(str(path))
    assert lib.version() == 0 and lib.materials() == []
    with sqlite3.connect(path) as conn:
        found = conn.execute("select value from meta where key = 'schema_version'").fetchone()
    assert found == (str(SCHEMA_VERSION),)


@pytest.mark.sqlite_only
def test_other_schema_version_is_refused(tmp_path):
    path = tmp_path / "old.sqlite"
    Library(str(path))
    with sqlite3.connect(path) as conn:
        conn.execute("update meta set value = '99' where key = 'schema_version'")
    with pytest.raises(
        LibraryError,
        match=rf"schema version 99, this quietgrade reads version "
        rf"{SCHEMA_VERSION}",
    ):
        Library(str(path))


@pytest.mark.sqlite_only
def test_non_database_file_is_refused(tmp_path):
    path = tmp_path / "notes.sqlite"
    path.write_text("these are notes, not a database\n" * 40)
    with pytest.raises(LibraryError, match=r"notes\.sqlite: not a quietgrade library"):
        Library(str(path))


@pytest.mark.sqlite_only
def test_folder_is_refused(tmp_path):
    with pytest.raises(LibraryError, match="not a quietgrade library"):
        Library(str(tmp_path))


def test_bad_url_is_refused():
    with pytest.raises(LibraryError, match="not a database location"):
        Library("nosuchdialect://host/db")


@pytest.mark.sqlite_only
def test_newer_schema_version_is_refused_with_a_reason(tmp_path):
    path = tmp_path / "newer.sqlite"
    Library(str(path))
    with sqlite3.connect(path) as conn:
        conn.execute(
            "update meta set value = ? where key = 'schema_version'", (str(SCHEMA_VERSION + 1),)
        )
    before = path.read_bytes()
    with pytest.raises(LibraryError, match="it was written by a newer quietgrade"):
        Library(str(path))
    assert path.read_bytes() == before
    # no backup copy: nothing was changed (SQLite's own -wal/-shm files of a connection the
    # test holds open are not copies)
    left = [p for p in tmp_path.iterdir() if not p.name.endswith(("-wal", "-shm"))]
    assert left == [path]


@pytest.mark.sqlite_only
def test_schema_version_that_is_not_a_number_is_refused(tmp_path):
    path = tmp_path / "odd.sqlite"
    Library(str(path))
    with sqlite3.connect(path) as conn:
        conn.execute("update meta set value = 'two' where key = 'schema_version'")
    with pytest.raises(LibraryError, match=r"odd\.sqlite: library schema version 'two' is not"):
        Library(str(path))


@pytest.mark.sqlite_only
def test_default_location_honours_environment(tmp_path, monkeypatch):
    target = tmp_path / "env" / "lib.sqlite"
    monkeypatch.setenv("QUIETGRADE_DB", str(target))
    assert default_location() == str(target)
    lib = Library()
    assert lib.location == str(target) and target.exists()
    # Without it: the user's data folder (XDG Base Directory Specification on Linux).
    monkeypatch.delenv("QUIETGRADE_DB")
    monkeypatch.setattr(sys, "platform", "linux")
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "data"))
    assert default_location() == str(tmp_path / "data" / "quietgrade" / "library.sqlite")


# ---------------------------------------------------------------- the data folder


@pytest.mark.parametrize(
    ("platform", "env", "expected"),
    [
        # XDG Base Directory Specification: $XDG_DATA_HOME, default ~/.local/share; a
        # relative value is ignored.
        ("linux", {"XDG_DATA_HOME": "{tmp}/xdg"}, "{tmp}/xdg/quietgrade"),
        ("linux", {}, "{home}/.local/share/quietgrade"),
        ("linux", {"XDG_DATA_HOME": ""}, "{home}/.local/share/quietgrade"),
        ("linux", {"XDG_DATA_HOME": "relative/data"}, "{home}/.local/share/quietgrade"),
        ("freebsd14", {"XDG_DATA_HOME": "{tmp}/xdg"}, "{tmp}/xdg/quietgrade"),
        # Apple's File System Programming Guide: ~/Library/Application Support.
        ("darwin", {"XDG_DATA_HOME": "{tmp}/xdg"}, "{home}/Library/Application Support/quietgrade"),
        # Windows' known folder LocalAppData, named by %LOCALAPPDATA%.
        ("win32", {"LOCALAPPDATA": "{tmp}/local"}, "{tmp}/local/quietgrade"),
        ("win32", {}, "{home}/AppData/Local/quietgrade"),
        ("cygwin", {"LOCALAPPDATA": "{tmp}/local"}, "{tmp}/local/quietgrade"),
    ],
)
def test_user_data_dir_per_platform(tmp_path, monkeypatch, platform, env, expected):
    home = tmp_path / "home"
    monkeypatch.setattr(Path, "home", classmethod(lambda cls: home))
    monkeypatch.setattr(sys, "platform", platform)
    for name in ("XDG_DATA_HOME", "LOCALAPPDATA", "QUIETGRADE_DB"):
        monkeypatch.delenv(name, raising=False)
    for name, value in env.items():
        monkeypatch.setenv(name, value.format(tmp=tmp_path))
    want = Path(expected.format(tmp=tmp_path, home=home))
    assert user_data_dir() == want
    assert default_location() == str(want / "library.sqlite")
    assert not tmp_path.joinpath("home").exists()  # asking creates nothing


@pytest.mark.sqlite_only
def test_data_folder_is_created_only_when_a_library_is_opened(tmp_path, monkeypatch):
    monkeypatch.delenv("QUIETGRADE_DB", raising=False)
    monkeypatch.setattr(sys, "platform", "darwin")
    monkeypatch.setattr(Path, "home", classmethod(lambda cls: tmp_path / "home"))
    folder = tmp_path / "home" / "Library" / "Application Support" / "quietgrade"
    location = default_location()
    assert not folder.exists()
    lib = Library()
    assert lib.location == location == str(folder / "library.sqlite")
    assert folder.is_dir() and (folder / "library.sqlite").is_file()


def test_environment_location_wins_over_the_platform_folder(tmp_path, monkeypatch):
    monkeypatch.setattr(sys, "platform", "win32")
    monkeypatch.setenv("LOCALAPPDATA", str(tmp_path / "local"))
    monkeypatch.setenv("QUIETGRADE_DB", "postgresql://db.invalid/lib")
    assert default_location() == "postgresql://db.invalid/lib"
    assert not (tmp_path / "local").exists()


# ---------------------------------------------------------------- the catalog table


def test_material_and_table_follow_the_field_table():
    assert store.CATALOG_FIELDS == fields.FIELD_NAMES
    assert tuple(f.name for f in dataclasses.fields(Material)) == (
        "id",
        *fields.FIELD_NAMES,
        "extra",
    )
    columns = store.materials_table.columns
    assert tuple(c.name for c in columns) == (
        "id",
        *fields.FIELD_NAMES,
        "extra",
        "deleted_at",
        "updated_at",
    )
    for f in fields.CATALOG:
        column = columns[f.name]
        assert column.nullable == (not f.required), f.name
        if f.kind == "number":
            assert isinstance(column.type, sa.Float), f.name
        else:
            assert isinstance(column.type, sa.Text | sa.String), f.name
    assert isinstance(columns["notes"].type, sa.Text)


def test_bulk_modulus_is_stored_and_edited(tmp_path, any_library):
    load_grades(any_library, tmp_path, ("G1",))
    assert any_library.material("G1").bulk_modulus is None
    any_library.update_catalog("G1", {"bulk_modulus": 1900})
    m = any_library.material("G1")
    assert m.bulk_modulus == 1900.0 and isinstance(m.bulk_modulus, float)
    assert '"bulk_modulus": null' in any_library.history("G1")[0]["previous"]
    any_library.update_catalog("G1", {"bulk_modulus": None})
    assert any_library.material("G1").bulk_modulus is None


# ---------------------------------------------------------------- edits and history


def test_update_catalog_keeps_history_and_bumps_version(tmp_path, any_library):
    load_grades(any_library, tmp_path, ("G1",))
    before = any_library.version()
    any_library.update_catalog("G1", {"density": 1150.0, "notes": "checked"}, reason="datasheet")
    m = any_library.material("G1")
    assert m.density == 1150.0 and m.notes == "checked"
    assert any_library.version() == before + 1
    history = any_library.history("G1")
    assert [h["reason"] for h in history] == ["datasheet"]
    assert '"density": 1100.0' in history[0]["previous"]
    any_library.update_catalog("G1", {"density": 1200.0})
    assert len(any_library.history("G1")) == 2 and any_library.version() == before + 2


def test_unknown_field_edit_is_refused(tmp_path, any_library):
    load_grades(any_library, tmp_path, ("G1",))
    before = any_library.version()
    with pytest.raises(LibraryError, match=r"cannot edit colour; editable fields: name, mode"):
        any_library.update_catalog("G1", {"colour": "black"})
    assert any_library.version() == before and any_library.history("G1") == []


def test_edit_of_unknown_grade_is_refused(any_library):
    with pytest.raises(LibraryError, match="no grade 'G9'"):
        any_library.update_catalog("G9", {"density": 1000.0})


def test_edit_with_invalid_mode_is_refused(tmp_path, any_library):
    load_grades(any_library, tmp_path, ("G1",))
    with pytest.raises(LibraryError, match="mode"):
        any_library.update_catalog("G1", {"mode": "bending"})


@pytest.mark.parametrize(
    ("changes", "message"),
    [
        ({"mode": "bending"}, "field 'mode': mode 'bending' is not one of tensile, shear"),
        ({"mode": None}, "field 'mode': None is not accepted; give non-blank text"),
        ({"name": "  "}, "field 'name': '  ' is not accepted; give non-blank text"),
        ({"density": -5.0}, "field 'density': -5.0 is not accepted; give a positive density"),
        ({"density": 0}, "field 'density': 0 is not accepted; give a positive density"),
        ({"density": "heavy"}, "field 'density': 'heavy' is not accepted"),
        ({"density": float("nan")}, "field 'density': nan is not accepted"),
        ({"price": -0.5}, "field 'price': -0.5 is not accepted; give a price of zero or more"),
        ({"price": float("inf")}, "field 'price': inf is not accepted"),
        ({"price": True}, "field 'price': True is not accepted"),
        ({"hardness": 300.0}, "give a Shore A hardness between 0 and 100"),
        ({"hardness": -1.0}, "give a Shore A hardness between 0 and 100"),
        # Poisson's ratio of an isotropic solid lies in (-1, 0.5] (Timoshenko & Goodier 1970).
        ({"poisson_ratio": 0.6}, "give a Poisson's ratio in (-1, 0.5]"),
        ({"poisson_ratio": -1.0}, "give a Poisson's ratio in (-1, 0.5]"),
        ({"service_min": -300.0}, "give a temperature above absolute zero"),
        ({"service_min": 80.0, "service_max": 20.0}, "service_min 80 degC is not below"),
        ({"supplier": 12}, "field 'supplier': 12 is not accepted; give text or None"),
        ({"notes": 1.5}, "field 'notes': 1.5 is not accepted; give text or None"),
        ({"name": 7}, "field 'name': 7 is not accepted; give non-blank text"),
        ({"mode": 3}, "field 'mode': 3 is not accepted; give non-blank text"),
        ({"bulk_modulus": 0.0}, "field 'bulk_modulus': 0.0 is not accepted; give a positive bulk"),
        ({"bulk_modulus": -2000.0}, "give a positive bulk modulus [MPa] or None"),
    ],
)
def test_edit_with_invalid_value_is_refused(tmp_path, any_library, changes, message):
    load_grades(any_library, tmp_path, ("G1",))
    before = any_library.version()
    with pytest.raises(LibraryError, match="grade 'G1'.*" + re.escape(message)):
        any_library.update_catalog("G1", changes)
    assert any_library.version() == before and any_library.history("G1") == []


def test_service_range_edit_is_checked_against_the_stored_end(tmp_path, any_library):
    load_grades(any_library, tmp_path, ("G1",))
    any_library.update_catalog("G1", {"service_min": -40.0, "service_max": 80.0})
    with pytest.raises(LibraryError, match="service_min 90 degC is not below service_max 80"):
        any_library.update_catalog("G1", {"service_min": 90.0})
    with pytest.raises(LibraryError, match="service_min -40 degC is not below service_max -50"):
        any_library.update_catalog("G1", {"service_max": -50.0})
    # Clearing one end lifts the check; the edge values of the ranges are accepted.
    any_library.update_catalog("G1", {"service_max": None, "service_min": 90.0})
    any_library.update_catalog("G1", {"mode": "Shear", "hardness": 100, "poisson_ratio": 0.5})
    m = any_library.material("G1")
    assert (m.service_min, m.service_max, m.mode) == (90.0, None, "shear")
    assert (m.hardness, m.poisson_ratio) == (100.0, 0.5)


def test_edit_of_deleted_grade_is_refused(tmp_path, any_library):
    load_grades(any_library, tmp_path, ("G1",))
    any_library.delete_material("G1")
    before = any_library.version()
    with pytest.raises(LibraryError, match="grade 'G1' is deleted; restore it before editing"):
        any_library.update_catalog("G1", {"density": 1000.0})
    assert any_library.version() == before


def test_delete_and_restore_are_recoverable(tmp_path, any_library):
    load_grades(any_library, tmp_path, ("G1", "G2"))
    sets_before = [d.data_hash for d in any_library.datasets("G1")]
    v0 = any_library.version()
    any_library.delete_material("G1")
    assert [m.id for m in any_library.materials()] == ["G2"]
    assert [m.id for m in any_library.materials(include_deleted=True)] == ["G1", "G2"]
    assert any_library.deleted_ids() == ["G1"]
    assert any_library.datasets("G1") == []
    with pytest.raises(LibraryError, match="no grade 'G1'"):
        any_library.material("G1")
    with pytest.raises(LibraryError, match="has no measured data"):
        any_library.latest_points("G1")
    assert "G1" not in any_library.all_latest_points()
    any_library.restore_material("G1")
    assert [m.id for m in any_library.materials()] == ["G1", "G2"]
    assert [d.data_hash for d in any_library.datasets("G1")] == sets_before
    assert any_library.deleted_ids() == []
    assert any_library.version() == v0 + 2


def test_delete_unknown_grade_is_refused(any_library):
    with pytest.raises(LibraryError, match="no grade 'G9'"):
        any_library.delete_material("G9")


# ---------------------------------------------------------------- fit cache


def test_master_curve_is_cached(tmp_path, any_library, monkeypatch):
    load_grades(any_library, tmp_path, ("G1",))
    dataset, _ = any_library.latest_points("G1")
    key = options_key()
    assert any_library.cached_fit(dataset.data_hash, key) is None
    first = master_curve(any_library, "G1")
    stored = any_library.cached_fit(dataset.data_hash, key)
    assert stored == first.to_dict()

    def refuse(*args, **kwargs):
        raise AssertionError("build_master_curve called although the fit is cached")

    monkeypatch.setattr(fits, "build_master_curve", refuse)
    second = master_curve(any_library, "G1")
    t, f = np.array([[-30.0], [20.0], [70.0]]), np.array([[0.5, 5.0, 50.0]])
    np.testing.assert_array_equal(
        second.evaluate(t, f).storage_modulus, first.evaluate(t, f).storage_modulus
    )
    # Other options are another cache entry: this one must fit again.
    with pytest.raises(AssertionError, match="although the fit is cached"):
        master_curve(any_library, "G1", reference_C=0.0)


def test_fit_of_unknown_grade_is_refused(any_library):
    with pytest.raises(LibraryError, match="no grade 'G9'"):
        master_curve(any_library, "G9")


def test_fit_error_is_cached_and_reported(tmp_path, any_library):
    load_grades(any_library, tmp_path, ("G1",), temperatures=np.array([20.0]))
    # One point only: the importer refuses such a data set, so write it to the store by
    # hand, as an older library or another tool might have.
    catalog = tmp_path / "cat2.csv"
    synthetic.write_catalog(catalog, ids=("G2",))
    import_files(any_library, [catalog])
    point = np.array([[20.0, 1.0, 5e6, 0.1]])
    any_library.write_import(
        [
            {
                "key": "k",
                "file_name": "one.csv",
                "sha256": "0" * 64,
                "size_bytes": 1,
                "rows": 1,
                "kind": "sweep",
            }
        ],
        [],
        [{"material_id": "G2", "file_key": "k", "data_hash": "1" * 64, "points": point}],
    )
    curves, errors = fit_library(any_library, processes=1)
    assert list(curves) == ["G1"] and "at least two measured points" in errors["G2"]
    dataset, _ = any_library.latest_points("G2")
    assert any_library.cached_fit(dataset.data_hash, options_key()) == {"error": errors["G2"]}
    again_curves, again_errors = fit_library(any_library, processes=1)
    assert again_errors == errors and list(again_curves) == ["G1"]
    with pytest.raises(FitError, match="at least two measured points"):
        master_curve(any_library, "G2")


# SQLite only: it needs two libraries side by side (the server case has one database),
# and it is this file's slowest test (a 12-grade fit, twice).
@pytest.mark.sqlite_only
def test_fit_library_in_parallel_matches_serial(tmp_path):
    ids = tuple(f"SYN-{k:02d}" for k in range(12))
    libs = {}
    for n in (1, 2):
        folder = tmp_path / f"p{n}"
        folder.mkdir()
        libs[n] = Library(str(folder / "lib.sqlite"))
        load_grades(libs[n], folder, ids, temperatures=np.arange(-40.0, 61.0, 5.0))
    calls = {1: [], 2: []}
    results = {
        n: fit_library(libs[n], processes=n, progress=lambda d, t, n=n: calls[n].append((d, t)))
        for n in (1, 2)
    }
    (serial, serial_errors), (parallel, parallel_errors) = results[1], results[2]
    assert serial_errors == parallel_errors == {}
    assert sorted(serial) == sorted(parallel) == list(ids)
    for mid in ids:
        assert parallel[mid].to_dict() == serial[mid].to_dict()
    for n in (1, 2):
        assert calls[n][0] == (0, 12) and calls[n][-1] == (12, 12)
    # Second pass: everything comes from the cache.
    calls[2].clear()
    cached, _ = fit_library(libs[2], processes=2, progress=lambda d, t: calls[2].append((d, t)))
    assert calls[2] == [(12, 12)]
    assert cached["SYN-00"].to_dict() == serial["SYN-00"].to_dict()


def test_fit_library_logs_cache_hits_and_misses(tmp_path, any_library, caplog):
    load_grades(any_library, tmp_path, ("G1", "G2"))
    caplog.set_level(logging.DEBUG, logger="engine.library.fits")
    fit_library(any_library, processes=1)
    first = [r.getMessage() for r in caplog.records if r.name == "engine.library.fits"]
    assert "fit_library: 2 grade(s) with data, 0 cache hit(s), 2 cache miss(es)" in first
    assert any(re.fullmatch(r"fit_library: G1 fitted in \d+\.\d{3} s", m) for m in first)
    assert any(
        re.fullmatch(r"fit_library: 2 fit\(s\) in \d+\.\d\d s \(serial\), 0 failed", m)
        for m in first
    )
    caplog.clear()
    fit_library(any_library, processes=1)
    second = [r.getMessage() for r in caplog.records if r.name == "engine.library.fits"]
    assert second == ["fit_library: 2 grade(s) with data, 2 cache hit(s), 0 cache miss(es)"]
    assert [r.levelno for r in caplog.records] == [logging.INFO]


def test_fits_print_nothing(tmp_path, any_library, capsys):
    load_grades(any_library, tmp_path, ("G1",))
    fit_library(any_library, processes=1)
    master_curve(any_library, "G1", reference_C=0.0)
    assert capsys.readouterr() == ("", "")


def test_a_library_is_never_used_until_it_holds_a_grade_and_stays_used(tmp_path, any_library):
    # What the dashboard reads before loading the demo grades into a new library
    # (common practice: never load demo data over a user's own, even deleted, grades).
    assert any_library.never_used()
    load_grades(any_library, tmp_path, ("G1",))
    assert not any_library.never_used()
    any_library.delete_material("G1")
    assert not any_library.never_used()


def test_data_set_rows_are_read_in_the_order_of_the_data_set_fields():
    # Library.datasets builds each DataSet from a positional row: the query's columns
    # must be the dataclass's fields in its order.
    columns = [c.name for c in store._dataset_query().selected_columns]
    assert columns == [f.name for f in dataclasses.fields(store.DataSet)]
