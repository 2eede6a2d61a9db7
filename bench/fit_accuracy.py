"""Accuracy of the master-curve fit on realistic synthetic exports:
``python -m bench.fit_accuracy [--family N] [--only CASE...]``.

Each case samples a known grade (:mod:`tests.synthetic`) the way an instrument exports it
(tidy grid, logged temperatures with jitter, ramps, a short sheet, a sweep with a gap, a
grade with a secondary relaxation, a generated family), fits it with
:func:`engine.curves.mastercurve.build_master_curve` in tensile mode, and compares the fit with
the truth at conditions that were NOT measured but lie inside the measured range:
temperatures midway between set-points (a 5 K grid offset by 2.5 K for ramps) and
frequencies at the geometric middle of neighbouring measured ones.

Printed per case: fits and failures, median and 90th percentile of the relative error of
E' and of the loss factor, the share of test points the curve flags as extrapolated, the
median fit time, and, when the curve offers ``interval(temperature, frequency)``, the
share of test points whose truth lies inside the interval and the median relative
half-width of the interval. Failure messages are listed under the table. Nothing is
written anywhere.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
import warnings
from collections import Counter
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from engine.curves.mastercurve import build_master_curve
from tests import synthetic

MODE = "tensile"
BAND_ATTRIBUTES = ("storage_low", "storage_high", "loss_factor_low", "loss_factor_high")


@dataclass(frozen=True)
class Sample:
    """One data set to fit, its truth and the unmeasured test conditions."""

    points: np.ndarray  # (n, 4): degC, Hz, Pa, loss factor
    truth: Callable  # (temperature, frequency) -> (E' [Pa], loss factor)
    test_temperatures: np.ndarray  # [degC]
    test_frequencies: np.ndarray  # [Hz]


@dataclass
class Outcome:
    """Pooled results of one case."""

    fitted: int = 0
    failures: Counter = field(default_factory=Counter)
    err_storage: list = field(default_factory=list)
    err_eta: list = field(default_factory=list)
    extrapolated: list = field(default_factory=list)
    seconds: list = field(default_factory=list)
    warnings: int = 0
    inside_storage: list = field(default_factory=list)
    inside_eta: list = field(default_factory=list)
    width_storage: list = field(default_factory=list)
    width_eta: list = field(default_factory=list)


def midpoints(values) -> np.ndarray:
    """Arithmetic middles of neighbouring sorted unique values."""
    v = np.unique(np.asarray(values, float))
    return 0.5 * (v[1:] + v[:-1])


def log_midpoints(values) -> np.ndarray:
    """Geometric middles of neighbouring sorted unique values."""
    v = np.unique(np.asarray(values, float))
    return np.sqrt(v[1:] * v[:-1])


def stepped(points, truth, set_points=None) -> Sample:
    """A stepped sweep: test at the middles of its set-points and frequencies."""
    temps = points[:, 0] if set_points is None else set_points
    return Sample(points, truth, midpoints(np.round(temps)), log_midpoints(points[:, 1]))


def ramp(points, truth) -> Sample:
    lo, hi = np.sort(points[[0, -1], 0])
    temps = np.arange(np.ceil(lo / 5.0) * 5.0 + 2.5, hi, 5.0)
    return Sample(points, truth, temps, log_midpoints(points[:, 1]))


def cases(family_size: int) -> dict[str, Callable[[], list[Sample]]]:
    """Case name -> a function building its samples (built lazily, in order)."""
    ref = synthetic.REFERENCE
    grid = synthetic.TEMPERATURES
    return {
        "dense tidy": lambda: [stepped(synthetic.sweep(), ref)],
        "dense +-0.1 K, 2 %": lambda: [
            stepped(synthetic.logged_sweep(jitter_K=0.1, noise=0.02), ref, grid)
        ],
        "dense +-0.3 K, 3 %": lambda: [
            stepped(synthetic.logged_sweep(jitter_K=0.3, noise=0.03), ref, grid)
        ],
        "dense +-0.3 K normal+0.3 K drift, 2 %": lambda: [
            stepped(
                synthetic.logged_sweep(
                    jitter_K=0.3, noise=0.02, distribution="normal", drift_K=0.3
                ),
                ref,
                grid,
            )
        ],
        "ramp 2 K/min, 1-3-10 Hz": lambda: [
            ramp(synthetic.ramp_sweep(frequencies=(1.0, 3.0, 10.0)), ref)
        ],
        "ramp 2 K/min, 1-3-10-30 Hz": lambda: [ramp(synthetic.ramp_sweep(), ref)],
        "sparse 1-10-100 Hz, 10 K, 2 %": lambda: [stepped(synthetic.sparse_sheet(), ref)],
        "gapped -10..5 degC missing": lambda: [stepped(synthetic.gapped_sweep(), ref, grid)],
        "two-process (beta 10 %)": lambda: [
            stepped(synthetic.two_process_sweep(), synthetic.TWO_PROCESS)
        ],
        f"family of {family_size}": lambda: [
            stepped(points, truth) for points, truth in synthetic.family(family_size)
        ],
    }


def measure(samples: list[Sample]) -> Outcome:
    """Fit every sample and pool the errors at its test conditions."""
    out = Outcome()
    for s in samples:
        t, f = np.meshgrid(s.test_temperatures, s.test_frequencies, indexing="ij")
        t, f = t.ravel(), f.ravel()
        true_storage, true_eta = s.truth(t, f)
        start = time.perf_counter()
        try:
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                curve = build_master_curve(s.points, MODE)
        except Exception as exc:  # every failure is counted and reported
            out.failures[f"{type(exc).__name__}: {str(exc)[:90]}"] += 1
            continue
        out.seconds.append(time.perf_counter() - start)
        out.warnings += len(caught)
        out.fitted += 1
        props = curve.evaluate(t, f)
        out.err_storage.append(np.abs(props.storage_modulus / true_storage - 1.0))
        out.err_eta.append(np.abs(props.loss_factor / true_eta - 1.0))
        out.extrapolated.append(np.asarray(props.extrapolated, bool))
        band = curve.interval(t, f) if hasattr(curve, "interval") else None
        if band is not None and all(hasattr(band, a) for a in BAND_ATTRIBUTES):
            s_lo, s_hi = band.storage_low, band.storage_high
            e_lo, e_hi = band.loss_factor_low, band.loss_factor_high
            out.inside_storage.append((s_lo <= true_storage) & (true_storage <= s_hi))
            out.inside_eta.append((e_lo <= true_eta) & (true_eta <= e_hi))
            out.width_storage.append(0.5 * (s_hi - s_lo) / props.storage_modulus)
            out.width_eta.append(0.5 * (e_hi - e_lo) / props.loss_factor)
    return out


def _pct(parts: list, q: float) -> str:
    if not parts:
        return "-"
    return f"{np.percentile(np.concatenate(parts), q) * 100:.3g}"


def _share(parts: list) -> str:
    if not parts:
        return "-"
    return f"{np.mean(np.concatenate(parts)) * 100:.1f}"


COLUMNS = (
    ("case", 38),
    ("fit/n", 7),
    ("E' med%", 8),
    ("E' p90%", 8),
    ("eta med%", 9),
    ("eta p90%", 9),
    ("extrap%", 8),
    ("t med s", 8),
    ("warn", 5),
    ("cov E'%", 8),
    ("cov eta%", 9),
    ("hw E'%", 7),
    ("hw eta%", 8),
)


def row(name: str, out: Outcome) -> str:
    total = out.fitted + sum(out.failures.values())
    cells = (
        name,
        f"{out.fitted}/{total}",
        _pct(out.err_storage, 50),
        _pct(out.err_storage, 90),
        _pct(out.err_eta, 50),
        _pct(out.err_eta, 90),
        _share(out.extrapolated),
        f"{statistics.median(out.seconds):.3g}" if out.seconds else "-",
        str(out.warnings),
        _share(out.inside_storage),
        _share(out.inside_eta),
        _pct(out.width_storage, 50),
        _pct(out.width_eta, 50),
    )
    return "  ".join(
        f"{c:<{w}}" if i == 0 else f"{c:>{w}}"
        for i, (c, (_, w)) in enumerate(zip(cells, COLUMNS, strict=True))
    )


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m bench.fit_accuracy", description=__doc__)
    parser.add_argument("--family", type=int, default=200, help="grades in the family case")
    parser.add_argument("--only", nargs="+", metavar="WORD", help="cases whose name has WORD")
    args = parser.parse_args(argv)
    table = cases(args.family)
    names = [n for n in table if not args.only or any(w in n for w in args.only)]
    header = "  ".join(f"{h:<{w}}" if i == 0 else f"{h:>{w}}" for i, (h, w) in enumerate(COLUMNS))
    lines = [header, "-" * len(header)]
    failures = []
    for name in names:
        sys.stderr.write(f"{name} ...\n")
        out = measure(table[name]())
        lines.append(row(name, out))
        failures += [f"  {name}: {n} x {msg}" for msg, n in out.failures.most_common()]
    print("\n".join(lines))
    print(
        "errors |fit/truth - 1| at unmeasured (T, f) inside the measured range; "
        "cov: truth inside interval; hw: median half-width / value"
    )
    if failures:
        print("failures:")
        print("\n".join(failures))
    return 0


if __name__ == "__main__":
    sys.exit(main())
