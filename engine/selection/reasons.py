"""The one-line reason of every grade: where it stands and which index carried it."""

from __future__ import annotations

import numpy as np

from engine.physics.indices import IndexSpec
from engine.selection.criteria import SCREENING_NOTE
from engine.selection.results import GradeResult, RankResult, short_number

UNCERTAIN = "within the data's uncertainty"  # of neighbours the draws cannot order (spread)


def write_reasons(result: RankResult, only: set[str] | None = None) -> None:
    """Give every grade of ``result`` (or the grades whose ids are in ``only``) its
    one-line reason: written when first read (``GradeResult.reason``), from the ranking
    as it stands now, so a grade never shown costs nothing."""
    passing = result.shortlist
    weights = {c.name: c.weight for c in result.criteria.indices}
    reasons = _Reasons(passing, result.specs, weights, result.criteria.screening_only)
    for r in result.grades:
        if only is None or r.id in only:
            r.written_reason = None
            r.reason_writer = reasons.of


class _Reasons:
    """One line per passing grade: where it stands and which index carried it."""

    def __init__(
        self,
        passing: list[GradeResult],
        specs: dict[str, IndexSpec],
        weights: dict,
        screening: bool = False,
    ):
        self.n = len(passing)
        self.screening = screening
        self.specs = specs
        self.best = {}
        for name, spec in specs.items():
            vals = [p.indices[name] for p in passing]
            if vals:
                self.best[name] = max(vals) if spec.higher_is_better else min(vals)
        self.shown = sorted(specs, key=lambda n: -weights[n])[:2]
        self.units = {
            n: "" if spec.unit in ("-", "") else " " + spec.unit for n, spec in specs.items()
        }

    def of(self, r: GradeResult) -> str:
        """The reason of ``r``: its place and what carried it, or why it is excluded."""
        if r.passed:
            return self.line(r)
        return "excluded: " + "; ".join(f.text() for f in r.failures)

    def line(self, r: GradeResult) -> str:
        parts = []
        best_on = [
            spec.label
            for name, spec in self.specs.items()
            if self.n > 1 and r.indices[name] == self.best.get(name)
        ]
        if best_on:
            parts.append("best " + " and ".join(best_on))
        parts.append(
            ", ".join(
                f"{self.specs[n].label} {short_number(r.indices[n])}{self.units[n]}"
                for n in self.shown
            )
        )
        if r.spread is not None and r.spread.alongside:
            parts.append(f"{UNCERTAIN} of {' and '.join(r.spread.alongside)}")
        if r.mount_result is not None and r.mount_index is not None:
            worst = float(np.nanmax(r.mount_result.transmissibility[r.mount_index]))
            if np.isfinite(worst) and "worst_transmissibility" not in self.shown:
                effect = f"isolates {1.0 - worst:.0%}" if worst < 1.0 else "amplifies"
                parts.append(f"worst T {short_number(worst)} ({effect})")
            peak = r.mount_result.amplification[r.mount_index]
            if np.isfinite(peak).any():
                parts.append(f"run-up through resonance x{short_number(float(np.nanmax(peak)))}")
        if r.pareto:
            parts.append("Pareto-optimal")
        if r.extrapolated:
            parts.append("uses extrapolated data")
        if self.screening:
            parts.append(SCREENING_NOTE)
        return f"rank {r.rank} of {self.n}: " + "; ".join(parts) + "; meets every constraint"
