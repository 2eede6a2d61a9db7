"""Run every bench and print a table of figures: ``python -m bench.run_all [--full]``.

A bench is a module with ``main(quick: bool) -> list[bench.Figure]``; add its dotted
name to :data:`BENCHES` (ranking and dashboard benches go there as they are written).
Quick mode (the default) keeps the run to a minute or two; ``--full`` runs the large
sizes (10,000 grades). Nothing is written into the repository.
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys
import time

from bench import Figure

BENCHES = [
    "bench.bench_fit",
    "bench.bench_library",
    "bench.bench_rank",
    "bench.bench_cold",
    "bench.bench_dashboard",
    "bench.fuzz_import",
]


def run(names: list[str], quick: bool) -> list[Figure]:
    """Import each bench module and collect the figures of its ``main(quick)``."""
    figures: list[Figure] = []
    for name in names:
        module = importlib.import_module(name)
        sys.stderr.write(f"running {name} ({'quick' if quick else 'full'})\n")
        start = time.perf_counter()
        figures.extend(module.main(quick))
        sys.stderr.write(f"  done in {time.perf_counter() - start:.1f} s\n")
    return figures


def table(figures: list[Figure]) -> str:
    """The figures as a plain-text table: name, value, target, verdict, note."""
    width = max(len(f.name) for f in figures)
    lines = [f"{'figure':<{width}}  {'measured':>12}  {'target':>12}  verdict  note"]
    lines.append("-" * len(lines[0]))
    for f in figures:
        value = f"{f.value:.3g} {f.unit}"
        target = f"<= {f.target:g} {f.unit}" if f.target is not None else "-"
        lines.append(f"{f.name:<{width}}  {value:>12}  {target:>12}  {f.verdict:<7}  {f.note}")
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m bench.run_all", description=__doc__)
    parser.add_argument("--full", action="store_true", help="large sizes (10,000 grades)")
    parser.add_argument(
        "--only", nargs="+", metavar="MODULE", help=f"run only these of {', '.join(BENCHES)}"
    )
    args = parser.parse_args(argv)
    names = BENCHES
    if args.only:
        unknown = [n for n in args.only if n not in BENCHES and f"bench.{n}" not in BENCHES]
        if unknown:
            parser.error(f"unknown bench {', '.join(unknown)}; known: {', '.join(BENCHES)}")
        names = [n if n in BENCHES else f"bench.{n}" for n in args.only]
    before = os.getloadavg()[0]
    figures = run(names, quick=not args.full)
    print(table(figures))
    # Wall-clock figures: other work on the machine inflates them.
    print(
        f"{os.cpu_count()} CPU(s); load average {before:.1f} at start, "
        f"{os.getloadavg()[0]:.1f} at end"
    )
    return 0


if __name__ == "__main__":
    sys.exit(main())
