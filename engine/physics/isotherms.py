"""Isotherms found in the logged temperatures of a sweep.

An instrument logs each point at the temperature it measured, a few tenths of a kelvin
off the set-point; a temperature ramp logs no two points at the same temperature. The
fit needs groups of points at (nearly) one temperature: this module finds them from the
data and says how.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

DEFAULT_TOLERANCE_K = 1.0  # a new isotherm starts after a gap wider than this
RAMP_BIN_K = 2.0  # width of the temperature bins a ramp is cut into
# A group of points wider than this many tolerances is a ramp, not an isotherm
# (common practice of this project: DMA set-points hold within a few tenths of a kelvin).
RAMP_SPREAD_FACTOR = 3.0


@dataclass(frozen=True)
class Grouping:
    """How measured points were grouped into isotherms.

    ``labels[j]`` is the isotherm of point j (0 = coldest); ``temperatures`` the mean
    logged temperature of each isotherm [degC]; ``method`` "set-points" (each point at
    its isotherm's temperature exactly), "logged" (clusters of logged temperatures) or
    "ramp" (bins of a continuous ramp); ``spread_K`` the largest spread of one isotherm.
    """

    labels: np.ndarray
    temperatures: np.ndarray
    method: str
    tolerance_K: float
    spread_K: float

    def describe(self) -> str:
        n = self.temperatures.size
        if self.method == "set-points":
            return f"{n} isotherms at their set-point temperatures"
        if self.method == "logged":
            return (
                f"{n} isotherms from the logged temperatures (gaps over {self.tolerance_K:g} K "
                f"start a new one; widest spread {self.spread_K:.2f} K, each point's own "
                "temperature corrected through the shift law)"
            )
        return (
            f"temperature ramp cut into {n} bins of {RAMP_BIN_K:g} K, each point's own "
            "temperature corrected through the shift law"
        )

    def to_dict(self) -> dict:
        return {
            "method": self.method,
            "isotherms": int(self.temperatures.size),
            "tolerance_K": self.tolerance_K,
            "widest_spread_K": round(self.spread_K, 3),
            "description": self.describe(),
        }


def group_temperatures(temperature, tolerance_K: float = DEFAULT_TOLERANCE_K) -> Grouping:
    """Group logged temperatures into isotherms, or a ramp into temperature bins.

    Parameters
    ----------
    temperature : array [degC]
        The logged temperature of every point.
    tolerance_K : float
        Sorted temperatures further apart than this start a new isotherm.

    Returns
    -------
    Grouping

    Notes
    -----
    Single-linkage clustering on the sorted temperatures (a gap wider than the tolerance
    separates two isotherms). Where a cluster spreads over more than
    ``RAMP_SPREAD_FACTOR`` tolerances, the points were taken on a ramp; that cluster is cut
    into bins of ``RAMP_BIN_K``. Each group's temperature is the mean of its points.
    """
    t = np.asarray(temperature, dtype=float).reshape(-1)
    if not np.isfinite(tolerance_K) or tolerance_K <= 0:
        raise ValueError(f"temperature tolerance must be positive, got {tolerance_K!r} K")
    order = np.argsort(t, kind="stable")
    ts = t[order]
    cluster = np.concatenate([[0], np.cumsum(np.diff(ts) > tolerance_K)])
    labels_sorted = np.empty(t.size, dtype=np.intp)
    method = "set-points"
    next_label = 0
    for c in range(int(cluster[-1]) + 1 if t.size else 0):
        sel = np.flatnonzero(cluster == c)
        lo, hi = ts[sel[0]], ts[sel[-1]]
        if hi - lo > RAMP_SPREAD_FACTOR * tolerance_K:
            method = "ramp"
            n_bins = max(int(np.ceil((hi - lo) / RAMP_BIN_K)), 1)
            bins = np.minimum(((ts[sel] - lo) / (hi - lo) * n_bins).astype(np.intp), n_bins - 1)
            _, dense = np.unique(bins, return_inverse=True)
            labels_sorted[sel] = next_label + dense
            next_label += int(dense.max()) + 1
        else:
            if hi > lo and method == "set-points":
                method = "logged"
            labels_sorted[sel] = next_label
            next_label += 1
    labels = np.empty_like(labels_sorted)
    labels[order] = labels_sorted
    counts = np.bincount(labels, minlength=next_label)
    means = np.bincount(labels, t, minlength=next_label) / np.maximum(counts, 1)
    spread = np.zeros(next_label)
    np.maximum.at(spread, labels, np.abs(t - means[labels]) * 2)
    return Grouping(labels, means, method, float(tolerance_K), float(spread.max(initial=0.0)))
