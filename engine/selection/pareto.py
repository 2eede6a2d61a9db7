"""Pareto flags of two merit indices."""

from __future__ import annotations

import numpy as np


def pareto_optimal(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """True where no other point is at least as good on both ``a`` and ``b`` (higher is
    better on both) and better on one.

    Notes
    -----
    Sort by ``a`` then ``b``, both descending; a point is dominated exactly when a point
    before it with a larger ``a`` has a ``b`` at least as large, or a point with the same
    ``a`` has a larger ``b`` (the 2-D maxima problem; Kung, Luccio & Preparata, J. ACM
    22, 1975). O(n log n).
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    if a.size == 0:
        return np.zeros(0, dtype=bool)
    order = np.lexsort((-b, -a))
    sa, sb = a[order], b[order]
    new_group = np.r_[True, sa[1:] != sa[:-1]]
    group = np.cumsum(new_group) - 1
    starts = np.flatnonzero(new_group)
    group_best = sb[starts]  # b descending inside a group: its first is its largest
    # Largest b among the groups of strictly larger a.
    before = np.r_[-np.inf, np.maximum.accumulate(group_best)[:-1]]
    dominated = (before[group] >= sb) | (group_best[group] > sb)
    out = np.empty(a.size, dtype=bool)
    out[order] = ~dominated
    return out
