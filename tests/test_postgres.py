"""The team library on a PostgreSQL server.

Run when QUIETGRADE_TEST_DATABASE_URL names an empty database the role may create tables
in (``.ci/run`` starts a server and sets it), with QUIETGRADE_TEST_READONLY_URL naming a
second role of the same database for the read-only checks; the library's tables are
dropped before and after each test. PostgreSQL's advisory locks, privileges and
ON CONFLICT behave as its manual describes (chapters "Explicit Locking", "Privileges",
"INSERT"); the tests check that the library relies on them as intended.
"""

from __future__ import annotations

import logging
import os

import pytest
import sqlalchemy as sa

from engine.base.errors import LibraryError
from engine.library.store import Library, Material, ReadOnlyLibraryError, masked
from tests import synthetic
from tests.concurrency import (
    PROCESSES,
    bump_many,
    catalog_file,
    open_at_once,
    store_same_fits,
    together,
)
from tests.helpers import drop_library

SERVER_URL = os.environ.get("QUIETGRADE_TEST_DATABASE_URL")
READONLY_URL = os.environ.get("QUIETGRADE_TEST_READONLY_URL")
pytestmark = pytest.mark.skipif(
    not SERVER_URL, reason="QUIETGRADE_TEST_DATABASE_URL is not set: no PostgreSQL server"
)
ROUNDS = 20


@pytest.fixture
def server():
    assert SERVER_URL is not None
    drop_library(SERVER_URL)
    yield SERVER_URL
    drop_library(SERVER_URL)


def test_store_basics_on_the_server(server):
    lib = Library(server)
    assert lib.engine.dialect.driver == "psycopg" and lib.version() == 0
    lib.write_import(
        [catalog_file()],
        [Material("M1", "one", "shear", density=1100.0, notes="first")],
        [{"material_id": "M1", "file_key": "k", "data_hash": "a" * 64, "points": POINTS}],
    )
    again = Library(server)
    m = again.material("M1")
    assert (m.name, m.density, m.notes) == ("one", 1100.0, "first")
    _, points = again.latest_points("M1")
    assert points.tolist() == POINTS.tolist()
    again.update_catalog("M1", {"notes": "second"})
    assert [h["reason"] for h in again.history("M1")] == ["edited"]
    again.store_fits({"a" * 64: {"fit": 1}}, "opts")
    again.store_fits({"a" * 64: {"fit": 2}}, "opts")  # a second write replaces the first
    assert lib.cached_fits(["a" * 64], "opts") == {"a" * 64: {"fit": 2}}
    lib.delete_material("M1")
    assert lib.materials() == [] and lib.deleted_ids() == ["M1"]
    lib.restore_material("M1")
    assert [x.id for x in lib.materials()] == ["M1"]
    assert lib.version() == 4  # import, edit, delete, restore


POINTS = synthetic.sweep(temperatures=(-20.0, 0.0, 20.0), noise=0.0, seed=1)[:12]


def test_concurrent_first_use_of_an_empty_database(server):
    failures = []
    for _ in range(ROUNDS):
        drop_library(server)
        results = together(open_at_once, [(server,)] * PROCESSES)
        failures += [r for r in results if r != "ok"]
        lib = Library(server)
        assert lib.version() == 0  # one set of version rows, never reset
        with lib.engine.connect() as conn:
            assert conn.execute(sa.text("SELECT count(*) FROM meta")).scalar() == 2
        lib.engine.dispose()
    assert failures == []  # 20 rounds x 4 processes


def test_concurrent_fit_cache_writes_all_succeed(server):
    Library(server).engine.dispose()
    results = together(store_same_fits, [(server,)] * PROCESSES)
    assert results == ["ok"] * PROCESSES
    cached = Library(server).cached_fits([f"{j:064d}" for j in range(20)], "opts")
    assert len(cached) == 20 and {v["round"] for v in cached.values()} == {9}


def test_version_counter_loses_no_update(server):
    lib = Library(server)
    lib.write_import(
        [catalog_file()], [Material("A", "a", "shear"), Material("B", "b", "shear")], []
    )
    before = lib.version()
    results = together(bump_many, [(server, "A", 25), (server, "B", 25)])
    assert results == ["ok", "ok"]
    assert lib.version() == before + 100  # 2 writers x 25 x (delete + restore)


@pytest.mark.parametrize(
    ("material", "message"),
    [
        (Material("X" * 201, "long", "shear"), r"is 201 characters long; at most 200"),
        (Material("A\x00B", "nul", "shear"), r"grade id 'A\\x00B' contains a NUL character"),
        (Material("OK", "n\x00", "shear"), r"field 'name': .* contains a NUL character"),
    ],
)
def test_text_limits_are_those_of_sqlite(server, material, message):
    lib = Library(server)
    with pytest.raises(LibraryError, match=message):
        lib.write_import([catalog_file()], [material], [])
    with pytest.raises(LibraryError, match="NUL character"):
        lib.material("A\x00")
    assert lib.version() == 0 and lib.imports() == []


def test_password_is_never_shown(server):
    url = sa.make_url(server)
    if not url.password:
        pytest.skip("the test URL has no password to hide")
    lib = Library(server)
    assert url.password not in lib.display_location and "***" in lib.display_location
    assert url.password not in repr(lib) and lib.location == server
    with pytest.raises(LibraryError) as caught:
        lib.material("NOPE")
    assert url.password not in str(caught.value) and "***" in str(caught.value)
    wrong = url.set(password="not-the-password").render_as_string(hide_password=False)
    with pytest.raises(LibraryError) as caught:
        Library(wrong)
    assert "not-the-password" not in str(caught.value)
    assert str(caught.value).startswith(f"cannot open the library {masked(wrong)} (")


def test_unreachable_server_is_named_plainly():
    with pytest.raises(LibraryError) as caught:
        Library("postgresql://someone:pw@127.0.0.1:1/nothing")
    message = str(caught.value)
    assert message.startswith("cannot reach the database server at 127.0.0.1:1 (")
    assert "\n" not in message and "pw@" not in message


@pytest.fixture
def reader(server):
    if not READONLY_URL:
        pytest.skip("QUIETGRADE_TEST_READONLY_URL is not set")
    return READONLY_URL


def test_read_only_role_on_an_empty_database_is_refused_plainly(reader):
    with pytest.raises(ReadOnlyLibraryError, match=r"is empty and is read-only for role"):
        Library(reader)


def test_read_only_role_browses_ranks_and_exports(server, reader, tmp_path, caplog):
    from engine.api import rank_library
    from engine.library.importer import import_files
    from engine.output.export import write_shortlist

    owner = Library(server)
    ids = ("RO-1", "RO-2")
    catalog = tmp_path / "catalog.csv"
    synthetic.write_catalog(catalog, ids=ids)
    sweeps = []
    for k, mid in enumerate(ids):
        path = tmp_path / f"sweep-{mid}.csv"
        synthetic.write_csv(path, synthetic.sweep(noise=0.01, seed=k), mid)
        sweeps.append(path)
    import_files(owner, [catalog], sweeps)
    role = sa.make_url(reader).username
    with owner.engine.begin() as conn:
        conn.execute(sa.text(f'GRANT SELECT ON ALL TABLES IN SCHEMA public TO "{role}"'))
    before = owner.version()

    lib = Library(reader)
    assert (lib.role, lib.can_write) == (role, False)
    assert owner.can_write is True
    assert [m.id for m in lib.materials()] == list(ids)
    with caplog.at_level(logging.INFO, logger="engine.library.store"):
        result = rank_library(lib, intervals=False, processes=1)
    assert "fit(s) not kept in the cache" in caplog.text
    assert owner.cached_fits([d.data_hash for d in owner.datasets()], "any") == {}
    out = write_shortlist(result, tmp_path / "shortlist.csv", lib)
    assert out.is_file() and "RO-1" in out.read_text()

    for change in (
        lambda: import_files(lib, [catalog], sweeps),
        lambda: lib.update_catalog("RO-1", {"notes": "x"}),
        lambda: lib.delete_material("RO-1"),
    ):
        with pytest.raises(LibraryError, match=rf"is read-only for role {role}; .* is refused"):
            change()
    assert owner.version() == before
