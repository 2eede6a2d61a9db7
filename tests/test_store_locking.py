"""A SQLite library under concurrent use: first use by several processes at once, WAL,
the busy timeout, atomic counters, idempotent fit-cache writes and text limits.

SQLite's locking and write-ahead log behave as its documentation describes
(sqlite.org/lockingv3.html, sqlite.org/wal.html, "PRAGMA busy_timeout"); the tests check
that the library relies on them as intended.
"""

from __future__ import annotations

import sqlite3
import time
from contextlib import closing

import pytest

from engine.base.errors import LibraryError
from engine.library import store
from engine.library.store import Library, Material, ReadOnlyLibraryError
from tests.concurrency import (
    PROCESSES,
    bump_many,
    catalog_file,
    open_at_once,
    store_same_fits,
    together,
)

ROUNDS = 10


def open_concurrently(location: str, n: int = PROCESSES) -> list[str]:
    """``n`` processes open ``location`` at the same moment; what each one got."""
    return together(open_at_once, [(location,)] * n)


def test_concurrent_creation_of_a_new_library(tmp_path):
    failures = []
    for k in range(ROUNDS):
        path = tmp_path / f"new-{k}.sqlite"
        results = open_concurrently(str(path))
        failures += [r for r in results if r != "ok"]
        assert Library(str(path)).version() == 0  # created once: the counter is not reset
    assert failures == []  # 4 processes x 10 rounds


def test_library_uses_write_ahead_logging(tmp_path):
    path = tmp_path / "lib.sqlite"
    Library(str(path)).engine.dispose()
    with closing(sqlite3.connect(path)) as conn:
        assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"


def test_held_write_lock_means_a_wait_then_a_plain_message(tmp_path):
    path = tmp_path / "lib.sqlite"
    lib = Library(str(path), busy_timeout=0.5)
    lib.write_import([catalog_file()], [Material("M1", "one", "shear")], [])
    before = lib.version()
    other = sqlite3.connect(path, isolation_level=None)
    other.execute("BEGIN IMMEDIATE")  # another program takes the write lock and keeps it
    try:
        start = time.perf_counter()
        with pytest.raises(LibraryError) as caught:
            lib.update_catalog("M1", {"notes": "changed"})
        waited = time.perf_counter() - start
        message = str(caught.value)
        assert message == (
            f"the library {path} is busy: another program holds its write lock "
            "(waited 0.5 s); try again when it is done"
        )
        assert "\n" not in message and waited >= 0.45
        # Readers do not wait for a writer in WAL mode.
        assert [m.id for m in lib.materials()] == ["M1"]
        # Opening the library meanwhile is no write: it succeeds.
        Library(str(path), busy_timeout=0.5).engine.dispose()
    finally:
        other.execute("ROLLBACK")
        other.close()
    lib.update_catalog("M1", {"notes": "changed"})
    assert lib.material("M1").notes == "changed" and lib.version() == before + 1


def test_busy_timeout_comes_from_the_environment(tmp_path, monkeypatch):
    monkeypatch.setenv("QUIETGRADE_BUSY_TIMEOUT", "0.25")
    assert Library(str(tmp_path / "lib.sqlite")).busy_timeout == 0.25
    monkeypatch.delenv("QUIETGRADE_BUSY_TIMEOUT")
    assert Library(str(tmp_path / "lib.sqlite")).busy_timeout == store.BUSY_TIMEOUT_S


def test_version_counter_loses_no_update(tmp_path):
    path = str(tmp_path / "lib.sqlite")
    lib = Library(path)
    lib.write_import(
        [catalog_file()], [Material("A", "a", "shear"), Material("B", "b", "shear")], []
    )
    before = lib.version()
    results = together(bump_many, [(path, "A", 25), (path, "B", 25)])
    assert results == ["ok", "ok"]
    assert lib.version() == before + 2 * 2 * 25  # each delete and restore counts once


def test_concurrent_fit_cache_writes_all_succeed(tmp_path):
    path = str(tmp_path / "lib.sqlite")
    Library(path).engine.dispose()
    results = together(store_same_fits, [(path,)] * PROCESSES)
    assert results == ["ok"] * PROCESSES
    cached = Library(path).cached_fits([f"{j:064d}" for j in range(20)], "opts")
    assert sorted(cached) == [f"{j:064d}" for j in range(20)]
    assert {v["round"] for v in cached.values()} == {9}  # the last write of a key wins


@pytest.mark.parametrize(
    ("material", "message"),
    [
        (Material("X" * 201, "long", "shear"), r"grade id 'X{40}\.\.\.' is 201 characters long"),
        (Material("A\x00B", "nul", "shear"), r"grade id 'A\\x00B' contains a NUL character"),
        (Material("OK", "na\x00me", "shear"), r"grade 'OK', field 'name': .* NUL character"),
    ],
)
def test_text_the_server_could_not_store_is_refused_plainly(library, material, message):
    before = (library.version(), library.imports())
    with pytest.raises(LibraryError, match=message):
        library.write_import([catalog_file()], [material], [])
    assert (library.version(), library.imports()) == before  # nothing written


def test_lookups_with_unstorable_ids_are_refused_plainly(library):
    for call in (library.material, library.history, library.delete_material):
        with pytest.raises(LibraryError, match="NUL character"):
            call("A\x00")
    with pytest.raises(LibraryError, match="at most 200 are accepted"):
        library.update_catalog("Y" * 300, {"notes": "x"})
    library.write_import([catalog_file()], [Material("Z" * 200, "longest", "shear")], [])
    assert library.material("Z" * 200).name == "longest"  # 200 characters is the limit


def test_read_only_file_browses_and_refuses_changes(tmp_path, monkeypatch, caplog):
    path = tmp_path / "lib.sqlite"
    Library(str(path)).write_import([catalog_file()], [Material("M1", "one", "shear")], [])
    # The library as a user without write permission sees it (root would bypass a chmod).
    monkeypatch.setattr(store.os, "access", lambda target, mode: False)
    lib = Library(str(path))
    assert lib.can_write is False and lib.role
    assert [m.id for m in lib.materials()] == ["M1"]
    for change in (
        lambda: lib.write_import([catalog_file()], [Material("M2", "two", "shear")], []),
        lambda: lib.update_catalog("M1", {"notes": "x"}),
        lambda: lib.delete_material("M1"),
    ):
        with pytest.raises(ReadOnlyLibraryError, match=rf"the library {path} is read-only for"):
            change()
    with caplog.at_level("INFO", logger="engine.library.store"):
        lib.store_fits({"h" * 64: {"fit": 1}}, "opts")
    assert "1 fit(s) not kept in the cache" in caplog.text
    assert lib.cached_fits(["h" * 64], "opts") == {}


def test_new_library_in_a_read_only_folder_is_refused_plainly(tmp_path, monkeypatch):
    monkeypatch.setattr(store.os, "access", lambda target, mode: False)
    with pytest.raises(ReadOnlyLibraryError, match=r"is empty and is read-only for role"):
        Library(str(tmp_path / "new.sqlite"))
