"""The material library: opening, versions, edits with history, soft delete and the fit
cache (engine/library/store.py and engine/library/fits.py)."""

from __future__ import annotations

import re
import sqlite3

import numpy as np
import pytest

from engine.base.errors import FitError, LibraryError
from engine.library import fits
from engine.library.fits import fit_library, master_curve, options_key
from engine.library.importer import import_files
from engine.library.store import SCHEMA_VERSION, Library, default_location
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


def test_new_library_records_schema_version(tmp_path):
    path = tmp_path / "new.sqlite"
    lib = Library(str(path))
    assert lib.version() == 0 and lib.materials() == []
    with sqlite3.connect(path) as conn:
        found = conn.execute("select value from meta where key = 'schema_version'").fetchone()
    assert found == (str(SCHEMA_VERSION),)


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


def test_non_database_file_is_refused(tmp_path):
    path = tmp_path / "notes.sqlite"
    path.write_text("these are notes, not a database\n" * 40)
    with pytest.raises(LibraryError, match=r"notes\.sqlite: not a quietgrade library"):
        Library(str(path))


def test_folder_is_refused(tmp_path):
    with pytest.raises(LibraryError, match="not a quietgrade library"):
        Library(str(tmp_path))


def test_bad_url_is_refused():
    with pytest.raises(LibraryError, match="not a database location"):
        Library("nosuchdialect://host/db")


def test_default_location_honours_environment(tmp_path, monkeypatch):
    target = tmp_path / "env" / "lib.sqlite"
    monkeypatch.setenv("QUIETGRADE_DB", str(target))
    assert default_location() == str(target)
    lib = Library()
    assert lib.location == str(target) and target.exists()
    # Without it: the user's data folder (XDG Base Directory Specification).
    monkeypatch.delenv("QUIETGRADE_DB")
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "data"))
    assert default_location() == str(tmp_path / "data" / "quietgrade" / "library.sqlite")


# ---------------------------------------------------------------- edits and history


def test_update_catalog_keeps_history_and_bumps_version(tmp_path, library):
    load_grades(library, tmp_path, ("G1",))
    before = library.version()
    library.update_catalog("G1", {"density": 1150.0, "notes": "checked"}, reason="datasheet")
    m = library.material("G1")
    assert m.density == 1150.0 and m.notes == "checked"
    assert library.version() == before + 1
    history = library.history("G1")
    assert [h["reason"] for h in history] == ["datasheet"]
    assert '"density": 1100.0' in history[0]["previous"]
    library.update_catalog("G1", {"density": 1200.0})
    assert len(library.history("G1")) == 2 and library.version() == before + 2


def test_unknown_field_edit_is_refused(tmp_path, library):
    load_grades(library, tmp_path, ("G1",))
    before = library.version()
    with pytest.raises(LibraryError, match=r"cannot edit colour; editable fields: name, mode"):
        library.update_catalog("G1", {"colour": "black"})
    assert library.version() == before and library.history("G1") == []


def test_edit_of_unknown_grade_is_refused(library):
    with pytest.raises(LibraryError, match="no grade 'G9'"):
        library.update_catalog("G9", {"density": 1000.0})


def test_edit_with_invalid_mode_is_refused(tmp_path, library):
    load_grades(library, tmp_path, ("G1",))
    with pytest.raises(LibraryError, match="mode"):
        library.update_catalog("G1", {"mode": "bending"})


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
    ],
)
def test_edit_with_invalid_value_is_refused(tmp_path, library, changes, message):
    load_grades(library, tmp_path, ("G1",))
    before = library.version()
    with pytest.raises(LibraryError, match="grade 'G1'.*" + re.escape(message)):
        library.update_catalog("G1", changes)
    assert library.version() == before and library.history("G1") == []


def test_service_range_edit_is_checked_against_the_stored_end(tmp_path, library):
    load_grades(library, tmp_path, ("G1",))
    library.update_catalog("G1", {"service_min": -40.0, "service_max": 80.0})
    with pytest.raises(LibraryError, match="service_min 90 degC is not below service_max 80"):
        library.update_catalog("G1", {"service_min": 90.0})
    with pytest.raises(LibraryError, match="service_min -40 degC is not below service_max -50"):
        library.update_catalog("G1", {"service_max": -50.0})
    # Clearing one end lifts the check; the edge values of the ranges are accepted.
    library.update_catalog("G1", {"service_max": None, "service_min": 90.0})
    library.update_catalog("G1", {"mode": "Shear", "hardness": 100, "poisson_ratio": 0.5})
    m = library.material("G1")
    assert (m.service_min, m.service_max, m.mode) == (90.0, None, "shear")
    assert (m.hardness, m.poisson_ratio) == (100.0, 0.5)


def test_edit_of_deleted_grade_is_refused(tmp_path, library):
    load_grades(library, tmp_path, ("G1",))
    library.delete_material("G1")
    before = library.version()
    with pytest.raises(LibraryError, match="grade 'G1' is deleted; restore it before editing"):
        library.update_catalog("G1", {"density": 1000.0})
    assert library.version() == before


def test_delete_and_restore_are_recoverable(tmp_path, library):
    load_grades(library, tmp_path, ("G1", "G2"))
    sets_before = [d.data_hash for d in library.datasets("G1")]
    v0 = library.version()
    library.delete_material("G1")
    assert [m.id for m in library.materials()] == ["G2"]
    assert [m.id for m in library.materials(include_deleted=True)] == ["G1", "G2"]
    assert library.deleted_ids() == ["G1"]
    assert library.datasets("G1") == []
    with pytest.raises(LibraryError, match="no grade 'G1'"):
        library.material("G1")
    with pytest.raises(LibraryError, match="has no measured data"):
        library.latest_points("G1")
    assert "G1" not in library.all_latest_points()
    library.restore_material("G1")
    assert [m.id for m in library.materials()] == ["G1", "G2"]
    assert [d.data_hash for d in library.datasets("G1")] == sets_before
    assert library.deleted_ids() == []
    assert library.version() == v0 + 2


def test_delete_unknown_grade_is_refused(library):
    with pytest.raises(LibraryError, match="no grade 'G9'"):
        library.delete_material("G9")


# ---------------------------------------------------------------- fit cache


def test_master_curve_is_cached(tmp_path, library, monkeypatch):
    load_grades(library, tmp_path, ("G1",))
    dataset, _ = library.latest_points("G1")
    key = options_key()
    assert library.cached_fit(dataset.data_hash, key) is None
    first = master_curve(library, "G1")
    stored = library.cached_fit(dataset.data_hash, key)
    assert stored == first.to_dict()

    def refuse(*args, **kwargs):
        raise AssertionError("build_master_curve called although the fit is cached")

    monkeypatch.setattr(fits, "build_master_curve", refuse)
    second = master_curve(library, "G1")
    t, f = np.array([[-30.0], [20.0], [70.0]]), np.array([[0.5, 5.0, 50.0]])
    np.testing.assert_array_equal(
        second.evaluate(t, f).storage_modulus, first.evaluate(t, f).storage_modulus
    )
    # Other options are another cache entry: this one must fit again.
    with pytest.raises(AssertionError, match="although the fit is cached"):
        master_curve(library, "G1", reference_C=0.0)


def test_fit_of_unknown_grade_is_refused(library):
    with pytest.raises(LibraryError, match="no grade 'G9'"):
        master_curve(library, "G9")


def test_fit_error_is_cached_and_reported(tmp_path, library):
    load_grades(library, tmp_path, ("G1",), temperatures=np.array([20.0]))
    # One point only: the importer refuses such a data set, so write it to the store by
    # hand, as an older library or another tool might have.
    catalog = tmp_path / "cat2.csv"
    synthetic.write_catalog(catalog, ids=("G2",))
    import_files(library, [catalog])
    point = np.array([[20.0, 1.0, 5e6, 0.1]])
    library.write_import(
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
    curves, errors = fit_library(library, processes=1)
    assert list(curves) == ["G1"] and "at least two measured points" in errors["G2"]
    dataset, _ = library.latest_points("G2")
    assert library.cached_fit(dataset.data_hash, options_key()) == {"error": errors["G2"]}
    again_curves, again_errors = fit_library(library, processes=1)
    assert again_errors == errors and list(again_curves) == ["G1"]
    with pytest.raises(FitError, match="at least two measured points"):
        master_curve(library, "G2")


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
