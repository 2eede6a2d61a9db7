"""Ranking: constraints, scores, Pareto flags and one-line reasons for every grade.

The score of a passing grade is a weighted sum of log10 index values, each signed by its
direction of merit: score = sum_i w_i s_i log10(v_i) / sum_i w_i with s_i = +1 where
higher is better and -1 where lower is better. On log scales the order does not depend
on the units or on which other grades are present, so adding a grade never reorders the
others, and raising a weight never lowers the grade that is best on that index. For
display the score is mapped to 0-100 over the passing grades.
"""

from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Mapping

import numpy as np

from engine.base.blocks import collector_paused
from engine.curves.bank import CurveBank
from engine.curves.mastercurve import MasterCurve
from engine.library.store import Library, Material
from engine.physics.indices import BUILT_IN, IndexSpec
from engine.selection.constraints import MOUNT_EXTRAPOLATION
from engine.selection.constraints import failures as constraint_failures
from engine.selection.criteria import (
    DEFAULT_INDICES,
    DESIGN_TYPES,
    Constraints,
    Criteria,
    IndexChoice,
)
from engine.selection.evaluation import LOG_FLOOR, Evaluation, evaluate_grades, raw_scores
from engine.selection.pareto import pareto_optimal
from engine.selection.reasons import UNCERTAIN, write_reasons
from engine.selection.results import Failure, GradeResult, RankResult

# The names callers use, kept here beside rank() (each is defined once, in its module).
__all__ = [
    "DEFAULT_INDICES",
    "DESIGN_TYPES",
    "LOG_FLOOR",
    "MOUNT_EXTRAPOLATION",
    "UNCERTAIN",
    "Constraints",
    "Criteria",
    "Evaluation",
    "Failure",
    "GradeResult",
    "IndexChoice",
    "RankResult",
    "built_in_indices",
    "evaluate_grades",
    "pareto_optimal",
    "rank",
    "raw_scores",
    "working_sweeps",
]


def rank(
    curves: Mapping[str, MasterCurve],
    materials: dict[str, Material],
    criteria: Criteria,
    fit_errors: dict[str, str] | None = None,
    bank: CurveBank | None = None,
    amplitude_sweeps: dict[str, np.ndarray] | None = None,
) -> RankResult:
    """Evaluate, constrain, score and order every grade with a master curve.

    ``bank`` may be given to reuse stacked curves: one holding the ranked grades (those of
    ``curves`` with a catalog row), in any order and perhaps others besides, is used
    as it is; then ``curves`` is read only for the grades it lacks (a lazy mapping, such
    as :class:`engine.library.fits.FittedCurves`, decodes nothing).
    ``amplitude_sweeps`` (``Library.amplitude_sweeps``) carry the mount check to the
    mount design's working strain amplitude; they are kept on the result.
    The rank intervals from the draws of the fits are a further step,
    :func:`engine.selection.spread.rank_spread`.
    """
    with collector_paused():
        return _rank(curves, materials, criteria, fit_errors, bank, amplitude_sweeps or {})


def _bank_of(ids: list[str], curves, bank: CurveBank | None) -> CurveBank:
    """A bank of exactly ``ids`` in that order: ``bank`` itself, its rows, or stacked."""
    if bank is not None and bank.ids == ids:
        return bank
    if bank is not None:
        position = {gid: k for k, gid in enumerate(bank.ids)}
        if all(gid in position for gid in ids):
            return bank.take([position[gid] for gid in ids])
    return CurveBank.from_curves({i: curves[i] for i in ids})


def _rank(curves, materials, criteria, fit_errors, bank, sweeps) -> RankResult:
    ids = [i for i in curves if i in materials]
    bank = _bank_of(ids, curves, bank)
    mats = [materials[i] for i in ids]
    n = len(ids)
    ev = evaluate_grades(bank, mats, criteria, sweeps)
    specs, values, mres = ev.specs, ev.values, ev.mount

    # -- constraints -----------------------------------------------------------------
    failures = constraint_failures(criteria, ev)
    index_values = {name: values[name].tolist() for name in specs}
    eta_list = ev.eta_worst.tolist()
    extrap_list = ev.extrapolated.tolist()
    results: list[GradeResult] = []
    fit_notes = bank.notes
    for k, m in enumerate(mats):
        notes = list(fit_notes[k] if fit_notes is not None else curves[m.id].notes)
        if mres is not None:
            notes += mres.notes.get(m.id, [])
        results.append(
            GradeResult(
                id=m.id,
                name=m.name,
                supplier=m.supplier,
                family=m.family,
                price=m.price,
                density=m.density,
                passed=not failures[k],
                failures=failures[k],
                indices={name: index_values[name][k] for name in specs},
                extrapolated=extrap_list[k],
                worst_loss_factor=eta_list[k],
                mount_result=mres,
                mount_index=k if mres is not None else None,
                notes=notes,
            )
        )

    # -- scores, order, Pareto, reasons -------------------------------------------------
    raw = raw_scores(values, criteria).tolist() if n else []
    passing = [r for r in results if r.passed]
    for k, r in enumerate(results):
        if r.passed:
            r.raw_score = raw[k]
    first = criteria.indices[0].name

    def scored(r: GradeResult) -> float:
        assert r.raw_score is not None  # every passing grade has one (set above)
        return r.raw_score

    def order_key(r: GradeResult):
        v = r.indices[first] * (1 if specs[first].higher_is_better else -1)
        return (-scored(r), -v, r.price if r.price is not None else math.inf, r.id)

    passing.sort(key=order_key)
    if passing:
        hi_s = scored(passing[0])
        lo_s = scored(passing[-1])
        for i, r in enumerate(passing, start=1):
            r.rank = i
            share = 1.0 if hi_s == lo_s else (scored(r) - lo_s) / (hi_s - lo_s)
            r.score = min(max(100.0 * share, 0.0), 100.0)
    if criteria.pareto is not None and passing:
        a, b = criteria.pareto
        sa = 1 if specs[a].higher_is_better else -1
        sb = 1 if specs[b].higher_is_better else -1
        flags = pareto_optimal(
            np.array([sa * r.indices[a] for r in passing]),
            np.array([sb * r.indices[b] for r in passing]),
        )
        for r, flag in zip(passing, flags.tolist(), strict=True):
            r.pareto = flag
    excluded = sorted((r for r in results if not r.passed), key=lambda r: r.id)
    result = RankResult(
        criteria=criteria,
        grades=passing + excluded,
        specs=specs,
        window_props=ev.props,
        mount=mres,
        created_at=_dt.datetime.now(_dt.UTC).isoformat(timespec="seconds"),
        fit_errors=dict(fit_errors or {}),
        amplitude_sweeps=sweeps,
    )
    write_reasons(result)
    return result


def working_sweeps(library: Library, criteria: Criteria, ids=None) -> dict | None:
    """The library's strain-amplitude sweeps (of ``ids``, default all) when the case's
    mount works at a given strain amplitude; None otherwise (nothing is read)."""
    if criteria.mount is None or criteria.mount.working_strain is None:
        return None
    return library.amplitude_sweeps(ids)


def built_in_indices() -> dict[str, IndexSpec]:
    return dict(BUILT_IN)
