"""Import fuzzing soak: ``python -m bench.fuzz_import [--examples N]`` (10,000 by default).

The trial of ``tests/test_import_fuzz.py`` on many more mutated catalog and sweep files:
each import must succeed with finite, physical values stored or be refused in one line
with the library unchanged table for table. Prints the counts (files, pairs, accepted,
refused, tracebacks, library changes on refusal, insane values accepted, messages over
several lines, warnings) and the first cases of each failure. Works in a temporary folder.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from collections import Counter
from pathlib import Path

from hypothesis import HealthCheck, Phase, given, settings

from bench import Figure
from tests.test_import_fuzz import Trial, one_pair, pair

FAILURES = ("traceback", "changed on refusal", "insane", "several lines", "warning")


def soak(examples: int, seed: int = 0) -> tuple[Counter, dict[str, list[str]], int]:
    """Run ``examples`` mutated pairs; the outcome counts, the first cases of each
    failure kind and the number of files imported."""
    counts: Counter = Counter()
    cases: dict[str, list[str]] = {}
    files = 0
    with tempfile.TemporaryDirectory() as folder:
        trial = Trial(Path(folder))

        @settings(
            max_examples=examples,
            deadline=None,
            database=None,
            phases=[Phase.generate],
            suppress_health_check=list(HealthCheck),
            derandomize=seed == 0,
        )
        @given(specs=pair())
        def run(specs) -> None:
            nonlocal files
            files += sum(s is not None for s in specs)
            outcome = one_pair(trial, specs)
            kind = next((f for f in FAILURES if outcome.startswith(f)), outcome)
            counts[kind] += 1
            if kind in FAILURES and len(cases.setdefault(kind, [])) < 5:
                cases[kind].append(f"{outcome}  <- {specs!r}"[:600])

        run()
    return counts, cases, files


def report(counts: Counter, cases: dict[str, list[str]], files: int, seconds: float) -> str:
    pairs = sum(counts.values())
    lines = [
        f"pairs imported:            {pairs:,} ({files:,} files) in {seconds:.0f} s",
        f"accepted:                  {counts['accepted']:,}",
        f"refused in one line:       {counts['refused']:,}",
        f"tracebacks:                {counts['traceback']:,}",
        f"library changed on refusal:{counts['changed on refusal']:>6,}",
        f"insane values accepted:    {counts['insane']:,}",
        f"messages over lines:       {counts['several lines']:,}",
        f"warnings reaching stderr:  {counts['warning']:,}",
    ]
    for kind, found in cases.items():
        lines.append(f"first cases of {kind}:")
        lines += [f"  {c}" for c in found]
    return "\n".join(lines)


def main(quick: bool) -> list[Figure]:
    """For ``bench.run_all``: 500 pairs quick, 10,000 full; failures count as figures."""
    examples = 500 if quick else 10_000
    start = time.perf_counter()
    counts, cases, files = soak(examples)
    seconds = time.perf_counter() - start
    sys.stderr.write(report(counts, cases, files, seconds) + "\n")
    failures = sum(counts[k] for k in FAILURES)
    return [
        Figure(
            "import fuzz: failures",
            failures,
            "cases",
            0,
            f"{sum(counts.values()):,} mutated pairs, {files:,} files",
        ),
        Figure("import fuzz: time per pair", seconds / max(1, sum(counts.values())) * 1e3, "ms"),
    ]


if __name__ == "__main__":
    parser = argparse.ArgumentParser(prog="python -m bench.fuzz_import", description=__doc__)
    parser.add_argument("--examples", type=int, default=10_000, help="mutated pairs to import")
    parser.add_argument("--seed", type=int, default=0, help="0: the fixed sequence; else random")
    args = parser.parse_args()
    begin = time.perf_counter()
    result = soak(args.examples, args.seed)
    print(report(*result, time.perf_counter() - begin))
    sys.exit(1 if any(result[0][k] for k in FAILURES) else 0)
