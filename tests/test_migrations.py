"""Schema migrations of the library (engine/library/migrations.py and the opening of a
library in engine/library/store.py).

tests/data/library_v1.sql is a library written by the schema-version-1 store (three
grades, one edited and one deleted, two data sets from one import, a cached fit) and
dumped with sqlite3's iterdump; the tests load it into a fresh file and open it.
"""

from __future__ import annotations

import doctest
import json
import os
import sqlite3
from contextlib import closing
from pathlib import Path

import numpy as np
import pytest
import sqlalchemy as sa
from sqlalchemy.dialects import postgresql as sa_postgresql
from sqlalchemy.dialects import sqlite as sa_sqlite

from engine.base.errors import LibraryError
from engine.base.fields import FIELD_NAMES
from engine.library import migrations, store
from engine.library.migrations import MIGRATIONS, Migration, add_column_ddl, pending
from engine.library.store import SCHEMA_VERSION, Library

FIXTURE = Path(__file__).resolve().parent / "data" / "library_v1.sql"
V1_FIELDS = tuple(f for f in FIELD_NAMES if f != "bulk_modulus")


def v1_library(path: Path) -> Path:
    """A fresh SQLite file holding the version-1 fixture."""
    with closing(sqlite3.connect(path)) as conn:
        conn.executescript(FIXTURE.read_text(encoding="utf-8"))
    return path


def tables(path: Path) -> dict[str, list[dict]]:
    """Every row of every table of a SQLite file, read without the library code."""
    with closing(sqlite3.connect(path)) as conn:
        conn.row_factory = sqlite3.Row
        names = [
            r[0]
            for r in conn.execute("select name from sqlite_master where type = 'table'")
            if not r[0].startswith("sqlite_")
        ]
        return {
            n: [dict(r) for r in conn.execute(f'select * from "{n}" order by rowid')]
            for n in sorted(names)
        }


def columns(engine_or_url) -> dict[str, dict[str, tuple[str, bool]]]:
    """Table -> column -> (type, nullable), as the database reports them."""
    own = isinstance(engine_or_url, str)
    engine = sa.create_engine(engine_or_url) if own else engine_or_url
    inspector = sa.inspect(engine)
    out = {
        t: {c["name"]: (str(c["type"]), c["nullable"]) for c in inspector.get_columns(t)}
        for t in inspector.get_table_names()
    }
    if own:
        engine.dispose()
    return out


def meta(path: Path) -> dict[str, str]:
    return {r["key"]: r["value"] for r in tables(path)["meta"]}


# ---------------------------------------------------------------- the list of migrations


def test_migrations_form_one_chain_up_to_the_schema_version():
    numbers = [m.number for m in MIGRATIONS]
    assert numbers == list(range(2, SCHEMA_VERSION + 1))
    assert all(m.description and callable(m.apply) for m in MIGRATIONS)
    assert [m.number for m in pending(1, SCHEMA_VERSION)] == numbers
    assert pending(SCHEMA_VERSION, SCHEMA_VERSION) == []
    gap = (Migration(2, "two", print), Migration(4, "four", print))
    with pytest.raises(ValueError, match="from version 1 to 4"):
        pending(1, 4, gap)
    assert [m.number for m in pending(3, 4, (*gap, Migration(3, "three", print)))] == [4]


def test_migration_module_examples_run():
    found = doctest.testmod(migrations, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert found.attempted >= 2 and found.failed == 0


@pytest.mark.parametrize("dialect", ["sqlite", "postgresql"])
def test_added_column_statement_is_one_both_databases_accept(dialect):
    # ALTER TABLE t ADD COLUMN c type: the grammar of both the SQLite and the
    # PostgreSQL manuals (ALTER TABLE); FLOAT is a type name both accept.
    engine_dialect = {"sqlite": sa_sqlite, "postgresql": sa_postgresql}[dialect].dialect()
    text = add_column_ddl(engine_dialect, "materials", sa.Column("bulk_modulus", sa.Float))
    assert text == "ALTER TABLE materials ADD COLUMN bulk_modulus FLOAT"
    quoted = add_column_ddl(engine_dialect, "order", sa.Column("select", sa.Text))
    assert quoted == 'ALTER TABLE "order" ADD COLUMN "select" TEXT'


# ---------------------------------------------------------------- upgrading a v1 library


def test_version_1_library_is_upgraded_without_loss(tmp_path):
    path = v1_library(tmp_path / "lib.sqlite")
    before = tables(path)
    assert meta(path)["schema_version"] == "1"
    assert "bulk_modulus" not in before["materials"][0]

    lib = Library(str(path))

    backup = tmp_path / "lib.sqlite.v1.bak"
    assert lib.backup == backup and backup.is_file()
    assert tables(backup) == before  # the copy is the version-1 library as it was
    after = tables(path)
    assert meta(path) == {
        "schema_version": str(SCHEMA_VERSION),
        "library_version": str(int(before["meta"][1]["value"]) + 1),
    }
    for name in ("datasets", "fits", "imports", "material_history"):
        assert after[name] == before[name], name
    assert after["materials"] == [{**row, "bulk_modulus": None} for row in before["materials"]]
    # The migrated schema is the one a new library gets.
    fresh = Library(str(tmp_path / "fresh" / "new.sqlite"))
    assert columns(lib.engine) == columns(fresh.engine)

    # Every catalog field, through the library's own reading.
    grades = {m.id: m for m in lib.materials(include_deleted=True)}
    assert sorted(grades) == [r["id"] for r in before["materials"]]
    for row in before["materials"]:
        m = grades[row["id"]]
        assert {f: getattr(m, f) for f in V1_FIELDS} == {f: row[f] for f in V1_FIELDS}
        assert m.extra == json.loads(row["extra"]) and m.bulk_modulus is None
    assert grades["QA-101"].extra == {"colour": "grey"} and grades["QA-101"].price == 8.0
    assert [m.id for m in lib.materials()] == ["QA-101", "QB-202"]
    assert lib.deleted_ids() == ["QC-303"]

    # Data sets and their points, imports, history.
    sets = lib.datasets()
    assert [(d.material_id, d.n_points) for d in sets] == [("QA-101", 6), ("QB-202", 1)]
    for row in before["datasets"]:
        _, points = lib.latest_points(row["material_id"])
        np.testing.assert_array_equal(points, store.blob_to_points(row["points"]))
    assert lib.latest_points("QA-101")[1].shape == (6, 4)
    assert lib.imports() == before["imports"]
    assert lib.history("QA-101") == before["material_history"]
    assert json.loads(lib.history("QA-101")[0]["previous"])["price"] == 7.5
    fit = before["fits"][0]
    assert json.loads(fit["result"]) == {
        "error": "a master curve needs at least two measured points"
    }

    # A second open changes nothing and copies nothing.
    lib.engine.dispose()
    files = sorted(tmp_path.iterdir())
    data = path.read_bytes()
    again = Library(str(path))
    assert again.backup is None
    assert path.read_bytes() == data and sorted(tmp_path.iterdir()) == files

    # The upgraded library takes the new field like any other.
    again.update_catalog("QB-202", {"bulk_modulus": 1950.0}, reason="datasheet")
    assert again.material("QB-202").bulk_modulus == 1950.0
    assert '"bulk_modulus": null' in again.history("QB-202")[0]["previous"]


def test_upgrade_through_a_database_url(tmp_path):
    path = v1_library(tmp_path / "url.sqlite")
    before = tables(path)
    lib = Library(f"sqlite:///{path}")
    assert lib.backup == tmp_path / "url.sqlite.v1.bak" and lib.backup.is_file()
    assert meta(path)["schema_version"] == str(SCHEMA_VERSION)
    assert len(lib.materials(include_deleted=True)) == len(before["materials"])


def test_existing_backup_is_never_overwritten(tmp_path):
    path = v1_library(tmp_path / "lib.sqlite")
    older = tmp_path / "lib.sqlite.v1.bak"
    older.write_bytes(b"an older copy")
    lib = Library(str(path))
    assert older.read_bytes() == b"an older copy"
    assert lib.backup == tmp_path / "lib.sqlite.v1.2.bak"
    assert meta(lib.backup)["schema_version"] == "1"


# ---------------------------------------------------------------- failures leave it as it was


def _fail_python(conn):
    raise RuntimeError("the step broke")


def _fail_sql(conn):
    conn.execute(sa.text("ALTER TABLE no_such_table ADD COLUMN x FLOAT"))


def _change_then_fail(conn):
    conn.execute(sa.text("UPDATE materials SET notes = 'changed'"))
    conn.execute(sa.text("ALTER TABLE materials ADD COLUMN later FLOAT"))
    raise RuntimeError("the step broke")


@pytest.mark.parametrize(
    ("third", "reason"),
    [
        (_fail_python, "RuntimeError: the step broke"),
        (_fail_sql, "OperationalError: no such table: no_such_table"),
        (_change_then_fail, "RuntimeError: the step broke"),
    ],
)
def test_failed_migration_leaves_the_library_as_it_was(tmp_path, monkeypatch, third, reason):
    path = v1_library(tmp_path / "lib.sqlite")
    data = path.read_bytes()
    before = tables(path)
    # Migrations 2 and 3 (a column, a table) run and then the next one fails: all are
    # undone.
    failing = store.SCHEMA_VERSION + 1
    monkeypatch.setattr(store, "SCHEMA_VERSION", failing)
    monkeypatch.setattr(
        migrations, "MIGRATIONS", (*MIGRATIONS, Migration(failing, "a step that fails", third))
    )
    with pytest.raises(LibraryError) as caught:
        Library(str(path))
    message = str(caught.value)
    assert message.startswith(f"{path}: migration {failing} (a step that fails) failed")
    assert "left at schema version 1" in message and message.endswith(reason)
    assert path.read_bytes() == data and tables(path) == before
    assert sorted(tmp_path.iterdir()) == [path]  # no copy left behind, no journal
    # Back to the real migrations, the same file upgrades.
    monkeypatch.undo()
    assert Library(str(path)).material("QA-101").bulk_modulus is None
    assert meta(path)["schema_version"] == str(SCHEMA_VERSION)


def test_missing_migration_is_refused(tmp_path, monkeypatch):
    path = v1_library(tmp_path / "lib.sqlite")
    data = path.read_bytes()
    monkeypatch.setattr(migrations, "MIGRATIONS", ())
    with pytest.raises(LibraryError, match="cannot update the library: no complete chain"):
        Library(str(path))
    assert path.read_bytes() == data and sorted(tmp_path.iterdir()) == [path]


def test_upgrade_is_refused_when_the_copy_cannot_be_written(tmp_path, monkeypatch):
    path = v1_library(tmp_path / "lib.sqlite")
    data = path.read_bytes()
    real_connect = sqlite3.connect

    def connect(target, *args, **kwargs):
        if str(target).endswith(".bak"):
            raise sqlite3.OperationalError("unable to open database file")
        return real_connect(target, *args, **kwargs)

    monkeypatch.setattr(store.sqlite3, "connect", connect)
    with pytest.raises(LibraryError, match=r"lib\.sqlite\.v1\.bak could not be written first"):
        Library(str(path))
    assert path.read_bytes() == data and sorted(tmp_path.iterdir()) == [path]


def test_newer_schema_is_refused(tmp_path):
    path = v1_library(tmp_path / "lib.sqlite")
    with closing(sqlite3.connect(path)) as conn, conn:
        conn.execute(
            "UPDATE meta SET value = ? WHERE key = 'schema_version'", (str(SCHEMA_VERSION + 1),)
        )
    data = path.read_bytes()
    with pytest.raises(
        LibraryError,
        match=rf"lib\.sqlite: library schema version {SCHEMA_VERSION + 1}, this quietgrade reads "
        rf"version {SCHEMA_VERSION}; it was written by a newer quietgrade",
    ):
        Library(str(path))
    assert path.read_bytes() == data and sorted(tmp_path.iterdir()) == [path]


# ---------------------------------------------------------------- any SQLAlchemy database

# QUIETGRADE_TEST_DATABASE_URL names an empty server database to run the same upgrade on
# (postgresql+psycopg://user@host/db); its tables are dropped first.
SERVER_URL = os.environ.get("QUIETGRADE_TEST_DATABASE_URL")


@pytest.mark.parametrize(
    "backend",
    [
        "sqlite",
        pytest.param(
            "server",
            marks=pytest.mark.skipif(
                not SERVER_URL, reason="QUIETGRADE_TEST_DATABASE_URL is not set"
            ),
        ),
    ],
)
def test_upgrade_on_any_database(tmp_path, monkeypatch, backend):
    url = f"sqlite:///{tmp_path / 'lib.sqlite'}" if backend == "sqlite" else str(SERVER_URL)
    engine = sa.create_engine(url)
    with engine.begin() as conn:
        store._metadata.drop_all(conn)
    lib = Library(url)
    lib.write_import(
        [
            {
                "key": "k",
                "file_name": "c.csv",
                "sha256": "e" * 64,
                "size_bytes": 1,
                "rows": 1,
                "kind": "catalog",
            }
        ],
        [store.Material("M1", "one", "shear", density=1100.0, notes="kept")],
        [],
    )
    lib.engine.dispose()
    # Back to version 1: the column migration 2 adds is dropped (DROP COLUMN: SQLite 3.35
    # and later, PostgreSQL).
    with engine.begin() as conn:
        conn.execute(sa.text("ALTER TABLE materials DROP COLUMN bulk_modulus"))
        conn.execute(sa.text("UPDATE meta SET value = '1' WHERE key = 'schema_version'"))
    assert "bulk_modulus" not in columns(engine)["materials"]

    # A failing later step undoes migration 2's DDL as well (one transaction).
    with monkeypatch.context() as patch:
        failing = store.SCHEMA_VERSION + 1
        patch.setattr(store, "SCHEMA_VERSION", failing)
        patch.setattr(
            migrations, "MIGRATIONS", (*MIGRATIONS, Migration(failing, "fails", _fail_sql))
        )
        with pytest.raises(LibraryError, match=rf"migration {failing} \(fails\) failed"):
            Library(url)
    assert "bulk_modulus" not in columns(engine)["materials"]
    files = [p.name for p in tmp_path.iterdir() if not p.name.endswith(("-wal", "-shm"))]
    assert files == (["lib.sqlite"] if backend == "sqlite" else [])  # no copy is left

    upgraded = Library(url)
    m = upgraded.material("M1")
    assert (m.density, m.notes, m.bulk_modulus) == (1100.0, "kept", None)
    assert "bulk_modulus" in columns(engine)["materials"]
    assert upgraded.version() == 2  # the import, then the upgrade
    assert (upgraded.backup is None) == (backend == "server")
    upgraded.update_catalog("M1", {"bulk_modulus": 2100.0})
    assert Library(url).material("M1").bulk_modulus == 2100.0
    upgraded.engine.dispose()
    if backend == "server":
        with engine.begin() as conn:
            store._metadata.drop_all(conn)
    engine.dispose()
