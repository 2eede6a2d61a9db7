"""Rank intervals: how far the data's uncertainty moves the leading grades of a ranking.

Every fitted master curve carries posterior draws of its model
(:meth:`engine.curves.mastercurve.MasterCurve.draw_curves`: plausible shift laws, isotherm
shifts and spectra given the measured points). For the leading grades of a ranking the
whole chain of :mod:`engine.selection.ranking` (window, merit indices, mount check, score) is run
again with the k-th draw of every leading grade, for each draw k; the spread of the
results over the draws is the data's uncertainty in them.

- Index values and mount figures (natural frequency, transmissibility, static
  deflection, and the summary figures the shortlist files show): the 95 % interval is
  the 2.5 and 97.5 percentiles over the draws (linear between order statistics), widened
  where needed to hold the fitted value.
- ``rank_interval`` [best, worst]: the 2.5 and 97.5 percentiles of the grade's rank among
  the leading grades over the draws, rounded to whole ranks and widened to hold the
  fitted rank. Ranks are counted among the leading grades only (a grade beyond them
  never enters a draw's order); in a draw, equal scores keep the fitted order.
- Neighbours that cannot be told apart: two grades next to each other in the shortlist
  whose score difference changes sign in more than ``SWAP_SHARE`` of the draws. Each then
  says "within the data's uncertainty of <the other's id>" in its reason. (With 32
  draws: two draws or more. The same share decides the rank interval: a rank seen in a
  single draw of 32 rounds away.)
- Constraints are tested in every draw as well; a leading grade that meets all of them
  in fewer than ``1 - SWAP_SHARE`` of the draws gets a note saying in how many it does.
  Its place in the draws is by score alone.

Leading grades are the first ``LEADING_GRADES`` of the shortlist (all of it when it is
shorter). Grades beyond them and excluded grades get no intervals (None; null in JSON,
empty cells in the files): the choice is made among the leading grades, and the cost
grows with grades x draws. A curve without draws (fitted before draws were stored) is
taken as its fitted curve in every draw, so its own figures get no spread; a note says
so. When no leading curve carries draws, nothing is computed and
:meth:`RankSpread.describe` says so.

All draws of all leading grades are stacked in one bank and evaluated in one vectorised
pass. Every figure of a grade depends on that grade alone
(:func:`engine.selection.ranking.evaluate_grades`), so this is the same as one bank per draw.

The fits of different grades are independent and so are their draws: each data set
draws from a random stream of its own (seeded by a hash of its points in
:func:`engine.curves.mastercurve.build_master_curve`), so the k-th draws of two grades do not
lean the same way.

References
----------
Hyndman, R. J. and Fan, Y. (1996). Sample quantiles in statistical packages. The
American Statistician 50(4), 361-365 (definition 7, numpy's "linear" percentiles).
"""

from __future__ import annotations

import dataclasses
import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np

from engine.base.errors import LibraryError
from engine.curves.bank import CurveBank
from engine.curves.mastercurve import MasterCurve
from engine.library.store import Material
from engine.selection.constraints import failures as constraint_failures
from engine.selection.evaluation import evaluate_grades, raw_scores
from engine.selection.reasons import UNCERTAIN, write_reasons
from engine.selection.results import RankResult

LEADING_GRADES = 20  # grades of the shortlist that get intervals
PERCENTILES = (2.5, 97.5)  # of the 95 % intervals
SWAP_SHARE = 0.05  # neighbours whose order flips in more draws than this are not told apart
MOUNT_SERIES = ("natural_frequency_Hz", "transmissibility", "static_deflection_mm")
MOUNT_SUMMARY = ("fn_min_Hz", "fn_max_Hz", "worst_transmissibility", "max_static_deflection_mm")
NO_DRAWS_NOTE = "its fit carries no posterior draws: its own figures get no interval"


@dataclass(frozen=True)
class GradeSpread:
    """Intervals of one leading grade over the draws of the fits (units as the JSON).

    ``indices`` maps each chosen index to its (low, high); ``mount`` maps each name of
    ``MOUNT_SERIES`` to (low, high) arrays shaped as the grade's mount figures (per window
    temperature; transmissibility per temperature and disturbance); ``mount_summary``
    maps each name of ``MOUNT_SUMMARY`` to (low, high). ``alongside`` lists the
    neighbours it cannot be told apart from; ``flips`` the share of draws in which its
    order with each neighbour is reversed.
    """

    rank_interval: tuple[int, int]
    indices: dict[str, tuple[float, float]]
    draws: int
    pass_share: float  # share of the draws in which it meets every constraint
    alongside: tuple[str, ...] = ()
    flips: dict[str, float] = field(default_factory=dict)
    mount: dict[str, tuple[np.ndarray, np.ndarray]] | None = None
    mount_summary: dict[str, tuple[float, float]] | None = None
    exact: bool = False  # the fit has no draws: its fitted curve stood for all of them

    def mount_companions(self) -> dict:
        """``<figure>_low`` and ``<figure>_high`` of each mount series, JSON-ready."""
        if self.mount is None:
            return {}
        out = {}
        for name, (low, high) in self.mount.items():
            out[f"{name}_low"] = low.tolist()
            out[f"{name}_high"] = high.tolist()
        return out


@dataclass(frozen=True)
class RankSpread:
    """How the intervals of a ranking were made."""

    draws: int  # draws per fit (0: none of the leading fits carries draws)
    leading: tuple[str, ...]  # ids of the grades with intervals, in rank order
    without_draws: tuple[str, ...] = ()

    def describe(self) -> str:
        """One sentence for the files and the dashboard."""
        if not self.leading:
            return "No grade meets every constraint: no rank intervals."
        if self.draws == 0:
            return (
                "No master curve of the leading grades carries posterior draws: intervals "
                "are not computed."
            )
        low, high = PERCENTILES
        text = (
            f"Intervals: {low:g} to {high:g} percentiles over {self.draws} posterior draws "
            f"of each master-curve fit, for the leading {len(self.leading)} grade(s); rank "
            "intervals count ranks among those grades. Neighbours whose order changes in "
            f"more than {SWAP_SHARE * 100:g} % of the draws are marked "
            f'"{UNCERTAIN}".'
        )
        if self.without_draws:
            text += " Without draws (taken as exact): " + ", ".join(self.without_draws) + "."
        return text


def nan_percentiles(samples: np.ndarray, q: Sequence[float]) -> list[np.ndarray]:
    """``numpy.nanpercentile(samples, q, axis=0)`` (its default linear method) for every
    column at once: NaN ignored, NaN where a column holds nothing else.

    numpy's own routine takes a column at a time once any NaN is present (about 0.1 ms
    each, a quarter of a second over the leading grades' mount figures); here the
    columns are sorted together (NaN last) and each percentile interpolated between
    the two order statistics around ``q / 100 * (n - 1)``, as numpy does.
    """
    data = np.sort(np.asarray(samples, dtype=float), axis=0)
    count = np.count_nonzero(~np.isnan(data), axis=0)
    last = np.maximum(count - 1, 0)
    out = []
    for p in q:
        position = p / 100.0 * last
        below = np.floor(position).astype(np.intp)
        above = np.minimum(below + 1, last)
        t = position - below
        a = np.take_along_axis(data, below[None, ...], axis=0)[0]
        b = np.take_along_axis(data, above[None, ...], axis=0)[0]
        with np.errstate(invalid="ignore"):  # inf - inf in a column of infinities
            diff = b - a
            value = np.where(t >= 0.5, b - diff * (1.0 - t), a + diff * t)
        out.append(np.where(count > 0, value, np.nan))
    return out


def _interval(samples: np.ndarray, fitted) -> tuple[np.ndarray, np.ndarray]:
    """Percentile interval over axis 0 of ``samples``, widened to hold ``fitted``; NaN
    where every draw is NaN."""
    low, high = nan_percentiles(samples, PERCENTILES)
    fitted = np.asarray(fitted, dtype=float)
    return np.fmin(low, fitted), np.fmax(high, fitted)


def _draw_ranks(raw: np.ndarray) -> np.ndarray:
    """Rank (1 = best) of each column among the columns of each row of ``raw`` (draws x
    grades in fitted rank order); equal scores keep the fitted order."""
    k, n = raw.shape
    fitted = np.broadcast_to(np.arange(n), (k, n))
    order = np.lexsort((fitted, -raw), axis=-1)
    ranks = np.empty((k, n), dtype=np.intp)
    np.put_along_axis(ranks, order, np.broadcast_to(np.arange(1, n + 1), (k, n)), axis=-1)
    return ranks


def _summary(natural, transmissibility, deflection_mm) -> dict[str, np.ndarray]:
    """The mount figures the shortlist files show, from arrays with the window
    temperatures on the axis after the grade axis (NaN ignored)."""
    t_axis = natural.ndim - 1
    worst_t = transmissibility.reshape(*transmissibility.shape[:t_axis], -1)
    return {
        "fn_min_Hz": np.fmin.reduce(natural, axis=t_axis),
        "fn_max_Hz": np.fmax.reduce(natural, axis=t_axis),
        "worst_transmissibility": np.fmax.reduce(worst_t, axis=t_axis),
        "max_static_deflection_mm": np.fmax.reduce(deflection_mm, axis=t_axis),
    }


def rank_spread(
    result: RankResult,
    curves: Mapping[str, MasterCurve],
    materials: dict[str, Material],
    leading: int = LEADING_GRADES,
) -> RankResult:
    """``result`` with intervals from the draws of the fits for its leading grades.

    Parameters
    ----------
    result : RankResult
        A ranking of ``curves`` (:func:`engine.selection.ranking.rank`); it is not changed.
    curves : dict
        The fitted master curves the ranking used, by grade id.
    materials : dict
        Catalog rows by grade id.
    leading : int
        How many grades of the shortlist get intervals (all when it is shorter).

    Returns
    -------
    RankResult
        A copy with ``spread`` set (:class:`RankSpread`), a :class:`GradeSpread` on each
        leading grade and its reason saying which neighbours the data cannot order.

    Raises
    ------
    LibraryError
        A leading grade has no curve in ``curves`` or no row in ``materials``.

    Notes
    -----
    See the module notes: 2.5 and 97.5 percentiles over the draws, rank intervals among
    the leading grades, order flips in more than SWAP_SHARE of the draws.
    """
    # The leading grades are new objects with notes of their own (their spread, notes
    # and reasons are written below); the others, which nothing here changes, are shared.
    leading_ids = {g.id for g in result.shortlist[:leading]}
    grades = [
        dataclasses.replace(g, notes=list(g.notes)) if g.id in leading_ids else g
        for g in result.grades
    ]
    out = dataclasses.replace(result, grades=grades)
    lead = out.shortlist[:leading]
    ids = tuple(g.id for g in lead)
    missing = [gid for gid in ids if gid not in curves or gid not in materials]
    if missing:
        raise LibraryError(
            f"no master curve or catalog row for {', '.join(missing)}: the intervals need "
            "the curves and catalog the ranking was made from"
        )
    draw_lists = [curves[gid].draw_curves() for gid in ids]
    k_draws = max((len(d) for d in draw_lists), default=0)
    bare = tuple(gid for gid, d in zip(ids, draw_lists, strict=True) if not d)
    out.spread = RankSpread(k_draws, ids, bare if k_draws else ())
    if not lead or k_draws == 0:
        return out
    n = len(lead)
    stacked, rows, sweeps = {}, [], {}
    for k in range(k_draws):
        for gid, draws in zip(ids, draw_lists, strict=True):
            stacked[f"{k}:{gid}"] = draws[k % len(draws)] if draws else curves[gid]
            rows.append(materials[gid])
            if gid in result.amplitude_sweeps:
                sweeps[f"{k}:{gid}"] = result.amplitude_sweeps[gid]
    criteria = out.criteria
    ev = evaluate_grades(CurveBank.from_curves(stacked), rows, criteria, sweeps)
    raw = raw_scores(ev.values, criteria).reshape(k_draws, n)
    failures = constraint_failures(criteria, ev)
    passes = np.array([not f for f in failures]).reshape(k_draws, n)

    fitted_rank = np.array([g.rank for g in lead])
    ranks = _draw_ranks(raw)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        best, worst = np.percentile(ranks, PERCENTILES, axis=0)
    best = np.minimum(np.rint(best).astype(int), fitted_rank)
    worst = np.maximum(np.rint(worst).astype(int), fitted_rank)
    fitted_raw = np.array([g.raw_score for g in lead])
    flips = np.mean(
        np.sign(raw[:, :-1] - raw[:, 1:]) != np.sign(fitted_raw[:-1] - fitted_raw[1:]), axis=0
    )
    indices = {
        name: _interval(ev.values[name].reshape(k_draws, n), [g.indices[name] for g in lead])
        for name in ev.specs
    }
    mount = summary = None
    if ev.mount is not None and out.mount is not None:
        m = ev.mount
        rows_m = [i for g in lead if (i := g.mount_index) is not None]  # all, with a mount
        t = m.temperatures.size
        draws_m = {
            "natural_frequency_Hz": m.natural_frequency.reshape(k_draws, n, t),
            "transmissibility": m.transmissibility.reshape(k_draws, n, t, -1),
            "static_deflection_mm": m.static_deflection.reshape(k_draws, n, t) * 1e3,
        }
        fitted_m = {
            "natural_frequency_Hz": out.mount.natural_frequency[rows_m],
            "transmissibility": out.mount.transmissibility[rows_m],
            "static_deflection_mm": out.mount.static_deflection[rows_m] * 1e3,
        }
        mount = {name: _interval(draws_m[name], fitted_m[name]) for name in MOUNT_SERIES}
        in_draws = _summary(*(draws_m[name] for name in MOUNT_SERIES))
        at_fit = _summary(*(fitted_m[name] for name in MOUNT_SERIES))
        summary = {name: _interval(in_draws[name], at_fit[name]) for name in MOUNT_SUMMARY}

    for j, g in enumerate(lead):
        neighbours = {}
        if j > 0:
            neighbours[lead[j - 1].id] = float(flips[j - 1])
        if j < n - 1:
            neighbours[lead[j + 1].id] = float(flips[j])
        g.spread = GradeSpread(
            rank_interval=(int(best[j]), int(worst[j])),
            indices={name: (float(lo[j]), float(hi[j])) for name, (lo, hi) in indices.items()},
            draws=k_draws,
            pass_share=float(passes[:, j].mean()),
            alongside=tuple(other for other, share in neighbours.items() if share > SWAP_SHARE),
            flips=neighbours,
            mount=None
            if mount is None
            else {name: (lo[j], hi[j]) for name, (lo, hi) in mount.items()},
            mount_summary=None
            if summary is None
            else {name: (float(lo[j]), float(hi[j])) for name, (lo, hi) in summary.items()},
            exact=g.id in bare,
        )
        passing = int(passes[:, j].sum())
        notes = [NO_DRAWS_NOTE] if g.id in bare else []
        if passing < (1.0 - SWAP_SHARE) * k_draws:
            notes.append(
                f"meets every constraint in {passing} of {k_draws} draws of the fits: "
                f"near a limit, {UNCERTAIN}"
            )
        g.notes += [note for note in notes if note not in g.notes]  # once, if run again
    write_reasons(out, only=leading_ids)
    return out


__all__ = [
    "LEADING_GRADES",
    "MOUNT_SERIES",
    "MOUNT_SUMMARY",
    "PERCENTILES",
    "SWAP_SHARE",
    "GradeSpread",
    "RankSpread",
    "rank_spread",
]
