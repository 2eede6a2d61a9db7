"""A large fitted library as its users meet it: new processes and the stored curve bank.

A library of cloned grades whose fits are already in its cache
(:func:`bench.big_library.write_library`; 10,000 grades with ``--full``, 2,000 in quick
mode) is written into a temporary folder. Timed, each against its target where the
project has one:

(a) the first use after fitting: :func:`engine.library.fits.fitted_library` decodes every
    cached fit, stacks the bank and writes its binary record (once per library version);
(b) in one process, from the record: ``fitted_library`` (one read) + ``rank`` over the
    41 x 13 window and sized mount of :mod:`bench.bench_rank`, the first call in the
    process; then steady state, the bank held for the library's version as the
    dashboard holds it (a version query + ``rank``), the median of the calls; the
    record read again on its own; the rank intervals (``rank_spread``, the draws of the
    leading grades) after each ranking, the first call (which decodes and stacks the
    draws) and the median of the calls after it; one grade's data changed, then the
    call that restacks it alone;
(c) whole processes (new interpreter each run; the median of five, peak resident memory
    of the child from a small launcher's ``getrusage``): ``quietgrade rank``, ``list``,
    ``props`` and ``fit`` of one grade on the same library, beside ``python -c pass``
    (the interpreter's own start, which the targets of ``list``, ``props`` and ``fit``
    exclude), with the project's modules compiled to bytecode as in an installed
    package.

The plain per-point loop the ranking is compared with is :mod:`bench.bench_rank`'s (run
beside this one by ``python -m bench.run_all``): its ratio is the figure that holds on a
loaded machine; these are wall-clock figures and move with the load.

Run: ``python -m bench.bench_cold [--full]`` or through ``python -m bench.run_all``.
"""

from __future__ import annotations

import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from bench import Figure, bench_rank
from bench.bench_library import bench_file
from bench.big_library import write_library
from engine.base.memory import arrange_memory
from engine.library.fits import fitted_library
from engine.library.store import Library
from engine.selection.ranking import rank
from engine.selection.spread import rank_spread

FULL_GRADES = 10_000
QUICK_GRADES = 2_000
REPEATS = 5
COLD_RANK_TARGET_S = 2.0  # at 10,000 grades
COLD_RANK_MEMORY_MIB = 600.0
COLD_COMMAND_TARGET_S = 0.5  # list, props, fit of one grade, beyond the interpreter's start
FIRST_TARGET_S = 0.8  # bank + rank, first call in a process
STEADY_TARGET_S = 0.5  # bank + rank, steady state


def _timed(function) -> float:
    start = time.perf_counter()
    function()
    return time.perf_counter() - start


def in_process(library: Library, crit) -> list[Figure]:
    """Figures (b): bank from the record + rank, spread, an incremental restack.

    The process arranges its memory as the command line and the dashboard do
    (:func:`engine.base.memory.arrange_memory`). Steady state is a running process
    that holds the fitted library for the library's version, as the dashboard does
    (``dashboard.data.fitted``): each ranking asks the library for its version and
    ranks on the bank it holds. Reading the record again (what a new version or a new
    process pays) is a figure of its own.
    """
    arrange_memory()
    materials = {m.id: m for m in library.materials()}
    start = time.perf_counter()
    fitted = fitted_library(library)
    first_load = time.perf_counter() - start
    result = rank(fitted.curves, materials, crit, fitted.errors, bank=fitted.bank)
    first_rank = time.perf_counter() - start - first_load
    held = {library.version(): fitted}
    timings, spreads, reads = [], [], []
    for _ in range(REPEATS):
        start = time.perf_counter()
        found = held.get(library.version()) or fitted_library(library)
        result = rank(found.curves, materials, crit, found.errors, bank=found.bank)
        ranked = time.perf_counter()
        timings.append(ranked - start)
        rank_spread(result, found.curves, materials)
        spreads.append(time.perf_counter() - ranked)
    first_spread = spreads.pop(0)  # the first call decodes and stacks the draws
    for _ in range(REPEATS):
        reads.append(_timed(lambda: fitted_library(library)))
    steady = statistics.median(timings)
    n = len(fitted.bank)
    spread_steady = statistics.median(spreads)

    # One grade's data changed: the next call restacks that grade alone.
    gid = fitted.bank.ids[0]
    dataset, points = library.latest_points(gid)
    changed = points.copy()
    changed[:, 2] *= 1.1
    library.write_import(
        bench_file(len(changed), "rerun.csv", "1" * 64),
        [],
        [{"material_id": gid, "file_key": "f", "data_hash": "x" * 64, "points": changed}],
    )
    start = time.perf_counter()
    again = fitted_library(library, processes=1)
    restack = time.perf_counter() - start
    return [
        Figure(
            f"bank from its record + rank, {n:,} grades, first call in the process",
            first_load + first_rank,
            "s",
            FIRST_TARGET_S,
            f"record read {first_load:.2f} s, rank {first_rank:.2f} s",
        ),
        Figure(
            f"bank + rank, {n:,} grades, steady (bank held for the library's version)",
            steady,
            "s",
            STEADY_TARGET_S,
            f"median of {REPEATS}; version query + rank",
        ),
        Figure(
            f"  the record read again ({n:,} grades; a new version or process)",
            statistics.median(reads),
            "s",
            None,
            f"median of {REPEATS}",
        ),
        Figure(
            f"rank intervals after it ({len(result.shortlist[:20])} leading grades' draws)",
            spread_steady,
            "s",
            steady,
            f"median of {REPEATS - 1} after the first call ({first_spread:.2f} s, draws "
            "decoded and stacked); target: as much again as bank + rank",
        ),
        Figure(
            "one grade's data changed: refit it and restack it alone",
            restack,
            "s",
            None,
            f"{again.restacked} grade restacked, {len(again.bank) - again.restacked:,} "
            "rows kept from the record",
        ),
    ]


# Run in a small interpreter of its own: a child forked from this (large) process would
# report this process's resident memory as its own peak.
_LAUNCHER = """
import json, os, resource, subprocess, sys, time
start = time.perf_counter()
done = subprocess.run(sys.argv[1:], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
wall = time.perf_counter() - start
peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024.0
print(json.dumps([wall, peak, done.returncode, done.stderr.decode()[-500:]]))
"""


def _child(args: list[str], env: dict) -> tuple[float, float]:
    """(wall seconds, peak resident MiB) of one child process."""
    out = subprocess.run(
        [sys.executable, "-c", _LAUNCHER, *args], env=env, capture_output=True, text=True
    )
    wall, peak, code, err = json.loads(out.stdout)
    if code != 0:
        raise RuntimeError(f"{' '.join(args)} failed: {err.strip()}")
    return wall, peak  # MiB (Linux reports kB)


def processes(location: str, n: int, bytecode: str) -> list[Figure]:
    """Figures (c): whole commands in new processes.

    The children may write and read compiled bytecode, in the folder ``bytecode`` (out
    of the repository), as an installed package has its modules compiled: with
    ``PYTHONDONTWRITEBYTECODE`` set each new process would compile the project's
    modules from source again (about 0.06 s). Each warm-up run writes them.
    """
    env = dict(os.environ, QUIETGRADE_DB=location, PYTHONPYCACHEPREFIX=bytecode)
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    python = sys.executable
    gid = "RANK-00000"
    commands = {
        "rank": [python, "-m", "engine", "rank"],
        "list": [python, "-m", "engine", "list"],
        "props": [python, "-m", "engine", "props", gid, "--temp", "23", "--freq", "10"],
        "fit": [python, "-m", "engine", "fit", gid, "--json"],
        "python -c pass": [python, "-c", "pass"],
    }
    runs: dict[str, list[tuple[float, float]]] = {name: [] for name in commands}
    for name, args in commands.items():
        _child(args, env)  # warm-up: the file cache, the record written
        for _ in range(REPEATS):
            runs[name].append(_child(args, env))
    wall = {name: statistics.median(w for w, _ in r) for name, r in runs.items()}
    peak = {name: max(m for _, m in r) for name, r in runs.items()}
    start = wall["python -c pass"]
    target = COLD_RANK_TARGET_S if n == FULL_GRADES else None
    figures = [
        Figure(
            f"`quietgrade rank`, {n:,} grades, new process",
            wall["rank"],
            "s",
            target,
            f"median of {REPEATS}; default window and mount",
        ),
        Figure(
            f"  peak memory of that process ({n:,} grades)",
            peak["rank"],
            "MiB",
            COLD_RANK_MEMORY_MIB if n == FULL_GRADES else None,
            "largest resident set over the runs",
        ),
        Figure("interpreter start (`python -c pass`)", start, "s", None, "for reference"),
    ]
    for name in ("list", "props", "fit"):
        figures.append(
            Figure(
                f"`quietgrade {name}` ({n:,}-grade library) beyond the interpreter start",
                wall[name] - start,
                "s",
                COLD_COMMAND_TARGET_S,
                f"median {wall[name]:.2f} s whole process, peak {peak[name]:.0f} MiB",
            )
        )
    return figures


def main(quick: bool = True) -> list[Figure]:
    n = QUICK_GRADES if quick else FULL_GRADES
    crit = bench_rank.criteria()
    with tempfile.TemporaryDirectory(prefix="quietgrade-bench-") as tmp:
        location = str(Path(tmp) / "big.sqlite")
        sys.stderr.write(f"  writing a library of {n:,} fitted grades\n")
        library = write_library(location, n)
        first = _timed(lambda: fitted_library(library))
        figures = [
            Figure(
                f"first use after fitting: decode, stack and store the bank ({n:,} grades)",
                first,
                "s",
                None,
                "once per library version",
            )
        ]
        figures += processes(location, n, str(Path(tmp) / "bytecode"))
        figures += in_process(library, crit)
        library.engine.dispose()
    return figures


if __name__ == "__main__":
    from bench.run_all import table

    sys.stdout.write(table(main(quick="--full" not in sys.argv[1:])) + "\n")
