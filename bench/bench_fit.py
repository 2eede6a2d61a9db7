"""One grade: a full master-curve fit and a large batch evaluation."""

from __future__ import annotations

import numpy as np

from bench import Figure, median_time
from engine.curves.mastercurve import build_master_curve
from tests import synthetic

FIT_TARGET_S = 0.050  # 30 isotherms x 7 frequencies, median of 20 fits
EVALUATE_TARGET_S = 0.050  # 100,000 (T, f) points of one grade
EVALUATE_POINTS = 100_000


def sweep_30x7() -> np.ndarray:
    """30 isotherms (-60 to 85 degC) x 7 frequencies (0.1 to 100 Hz) of the known model."""
    return synthetic.sweep(noise=0.01)


def main(quick: bool = True) -> list[Figure]:
    points = sweep_30x7()
    fit = median_time(lambda: build_master_curve(points, "tensile", intervals=False), repeats=20)
    with_interval = median_time(lambda: build_master_curve(points, "tensile"), repeats=20)
    curve = build_master_curve(points, "tensile")
    rng = np.random.default_rng(1)
    temperature = rng.uniform(-60.0, 85.0, EVALUATE_POINTS)
    frequency = 10.0 ** rng.uniform(-1.0, 2.0, EVALUATE_POINTS)
    evaluate = median_time(lambda: curve.evaluate(temperature, frequency), repeats=10)
    return [
        Figure(
            "master-curve fit, 30 isotherms x 7 frequencies (median of 20)",
            fit * 1e3,
            "ms",
            FIT_TARGET_S * 1e3,
        ),
        Figure(
            "the same fit with the posterior draws behind the 95 % intervals (median of 20)",
            with_interval * 1e3,
            "ms",
            None,
            f"the interval costs {(with_interval - fit) * 1e3:.0f} ms more",
        ),
        Figure(
            f"evaluate {EVALUATE_POINTS:,} (T, f) points of one grade (median of 10)",
            evaluate * 1e3,
            "ms",
            EVALUATE_TARGET_S * 1e3,
            f"{curve.prony.tau.size} Prony terms",
        ),
    ]
