"""The concurrency trials of the store, shared by the SQLite (tests/test_store_locking.py)
and the PostgreSQL (tests/test_postgres.py) suites: each worker runs in a process of its
own, waits at a barrier so that all start together, and returns "ok" or what it got."""

from __future__ import annotations

import multiprocessing

from engine.library.store import Library

CTX = multiprocessing.get_context("fork")
PROCESSES = 4


def catalog_file(key: str = "k") -> dict:
    """An import-file record for Library.write_import."""
    return {
        "key": key,
        "file_name": "c.csv",
        "sha256": "c" * 64,
        "size_bytes": 1,
        "rows": 1,
        "kind": "catalog",
    }


def _failed(exc: Exception) -> str:
    return f"{type(exc).__name__}: {exc}"


def open_at_once(args) -> str:
    location, barrier = args
    barrier.wait()
    try:
        Library(location).engine.dispose()
        return "ok"
    except Exception as exc:  # noqa: BLE001 - every failure is counted and shown
        return _failed(exc)


def bump_many(args) -> str:
    """Delete and restore one grade ``rounds`` times: two version bumps a round."""
    location, material_id, rounds, barrier = args
    lib = Library(location)
    barrier.wait()
    try:
        for _ in range(rounds):
            lib.delete_material(material_id)
            lib.restore_material(material_id)
        return "ok"
    except Exception as exc:  # noqa: BLE001
        return _failed(exc)
    finally:
        lib.engine.dispose()


def store_same_fits(args) -> str:
    """Write the same 20 fit-cache keys ten times (round k holds ``{"round": k}``)."""
    location, barrier = args
    lib = Library(location)
    barrier.wait()
    try:
        for k in range(10):
            lib.store_fits({f"{j:064d}": {"round": k, "fit": j} for j in range(20)}, "opts")
        return "ok"
    except Exception as exc:  # noqa: BLE001
        return _failed(exc)
    finally:
        lib.engine.dispose()


def together(worker, argument_lists: list[tuple]) -> list[str]:
    """Run ``worker`` on each argument tuple in a process of its own, all at once (the
    barrier is appended to each tuple); what each got."""
    barrier = CTX.Manager().Barrier(len(argument_lists))
    with CTX.Pool(len(argument_lists)) as pool:
        return pool.map(worker, [(*a, barrier) for a in argument_lists])
