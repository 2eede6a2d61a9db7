"""Performance figures of quietgrade against its targets: ``python -m bench.run_all``.

Each bench module has ``main(quick: bool) -> list[Figure]``; :mod:`bench.run_all` runs
the modules listed in its ``BENCHES`` and prints one table. Benches work in temporary
folders and write nothing into the repository.
"""

from __future__ import annotations

import statistics
import sys
import time
from collections.abc import Callable
from dataclasses import dataclass


@dataclass(frozen=True)
class Figure:
    """One measured figure and its target (both in ``unit``; lower is better)."""

    name: str
    value: float
    unit: str
    target: float | None = None
    note: str = ""

    @property
    def verdict(self) -> str:
        if self.target is None:
            return "-"
        return "PASS" if self.value <= self.target else "OVER"


def median_time(function: Callable[[], object], repeats: int, warmup: int = 1) -> float:
    """Median wall time of ``function()`` over ``repeats`` runs [s], after ``warmup`` runs."""
    for _ in range(warmup):
        function()
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        function()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def progress_line(label: str) -> Callable[[int, int], None]:
    """A ``progress(done, total)`` callback that redraws one line on stderr."""

    def show(done: int, total: int) -> None:
        end = "\n" if done >= total else ""
        sys.stderr.write(f"\r  {label}: {done}/{total}{end}")
        sys.stderr.flush()

    return show
