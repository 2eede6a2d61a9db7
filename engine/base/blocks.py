"""Work on many grades cut into blocks and shared among threads.

numpy releases the interpreter lock inside its array loops, so blocks of array work run
on separate cores when handed to threads. Blocks of a few hundred thousand points also
keep each temporary array small enough to stay in the processor's cache.
"""

from __future__ import annotations

import gc
import os
import threading
from collections.abc import Callable, Iterator
from concurrent.futures import Future, ThreadPoolExecutor
from contextlib import contextmanager
from typing import TypeVar

T = TypeVar("T")

BLOCK_POINTS = 1 << 17  # points per block of array work: a 1 MiB float64 temporary
WORKERS = max(1, min(os.cpu_count() or 1, 4))

_THREAD_PREFIX = "quietgrade-block"
_pool: ThreadPoolExecutor | None = None
_side_pool: ThreadPoolExecutor | None = None


def _executor() -> ThreadPoolExecutor:
    global _pool
    if _pool is None:
        _pool = ThreadPoolExecutor(WORKERS, thread_name_prefix=_THREAD_PREFIX)
    return _pool


def _forget_pool() -> None:
    # A forked child (engine.library.fits fits in worker processes) has none of the parent's
    # threads: it starts a pool of its own if it needs one.
    global _pool, _side_pool
    _pool = _side_pool = None


os.register_at_fork(after_in_child=_forget_pool)


def in_blocks(n: int, work: Callable[[int, int], None], grades_per_block: int) -> None:
    """Call ``work(a, b)`` on consecutive ranges of ``range(n)`` of at most
    ``grades_per_block`` grades, on :data:`WORKERS` threads when there is more than one
    block. An exception raised in a block is raised here."""
    size = max(1, int(grades_per_block))
    bounds = [(a, min(a + size, n)) for a in range(0, n, size)]
    # Work handed out from inside a block runs in that block's thread: a worker that
    # waited on the pool it belongs to could wait for ever.
    nested = threading.current_thread().name.startswith(_THREAD_PREFIX)
    if len(bounds) <= 1 or WORKERS == 1 or nested:
        for a, b in bounds:
            work(a, b)
        return
    for future in [_executor().submit(work, a, b) for a, b in bounds]:
        future.result()


def beside(work: Callable[[], T]) -> Future[T]:
    """Start ``work()`` on a thread of its own and return its future.

    For two independent parts of one computation: while the caller does one, the other
    runs beside it, and the Python between their array passes overlaps the other's
    array work. The thread is not a block thread, so the work may hand out blocks
    (:func:`in_blocks`) to the shared workers itself. With one worker it runs at once,
    in the caller's thread.
    """
    global _side_pool
    if WORKERS == 1:
        done: Future[T] = Future()
        try:
            done.set_result(work())
        except BaseException as exc:  # noqa: BLE001 - raised again by result()
            done.set_exception(exc)
        return done
    if _side_pool is None:
        _side_pool = ThreadPoolExecutor(1, thread_name_prefix="quietgrade-beside")
    return _side_pool.submit(work)


def per_block(points_per_grade: int) -> int:
    """Grades per block for work of ``points_per_grade`` points per grade."""
    return max(1, BLOCK_POINTS // max(int(points_per_grade), 1))


def per_worker(n: int) -> int:
    """Grades per block that give each worker one block (for work with a large fixed
    cost per call)."""
    return max(1, -(-n // WORKERS))


@contextmanager
def collector_paused() -> Iterator[None]:
    """Python's cyclic garbage collector off while many small objects are made.

    Stacking or ranking a large library makes a few objects per grade; with the
    library's master curves in memory each automatic collection would walk all of
    them. Nothing made inside holds a reference cycle, so pausing loses nothing.
    """
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()
