"""The outcome of a ranking: each grade's failures, index values, score, rank and reason."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from engine.base.version import __version__
from engine.curves.mountcheck import MountResult
from engine.curves.window import WindowProps
from engine.physics.indices import IndexSpec
from engine.selection.criteria import Criteria

if TYPE_CHECKING:  # engine.selection.spread builds on this module
    from engine.selection.spread import GradeSpread, RankSpread


@dataclass(slots=True)
class Failure:
    """A failed constraint: what, the value found, the limit; ``topic`` groups them
    ("catalog", "window" or "mount"). ``kind`` names what failed without the grade's
    figures where ``constraint`` is a whole sentence that carries them (the mount
    check's plain reasons); blank, the constraint names it."""

    constraint: str
    value: float | str
    limit: str
    topic: str = "window"
    kind: str = ""

    @property
    def about(self) -> str:
        """What failed, the same words for every grade that fails it (for counting)."""
        return self.kind or self.constraint

    def text(self) -> str:
        """The failure as a reason reads: what, the value found, what was needed (a
        blank value or limit is left out)."""
        found = f" {self.value}" if self.value != "" else ""
        if found and not self.limit:  # a statement, not a figure against a limit
            found = f":{found}"
        needs = f" (needs {self.limit})" if self.limit else ""
        return f"{self.constraint}{found}{needs}"


class DeferredFailure(Failure):
    """A failure whose sentence (its ``constraint``) is written when first read, by
    ``write()``: a ranking of 10,000 grades fails thousands of the mount check's plain
    limits, each sentence with the grade's figures, and a page shows a few of them."""

    __slots__ = ("_write",)

    def __init__(
        self, write: Callable[[], str], value: float | str, limit: str, kind: str = ""
    ) -> None:
        self._write = write
        self.value, self.limit, self.topic, self.kind = value, limit, "window", kind

    @property  # the base's field, filled on first reading
    def constraint(self) -> str:  # type: ignore[override]
        try:
            return _SENTENCE.__get__(self)
        except AttributeError:
            _SENTENCE.__set__(self, self._write())
            return _SENTENCE.__get__(self)


_SENTENCE = Failure.__dict__["constraint"]  # the slot behind Failure.constraint


@dataclass
class GradeResult:
    id: str
    name: str
    supplier: str | None
    family: str | None
    price: float | None
    density: float | None
    passed: bool
    failures: list[Failure]
    indices: dict[str, float]  # aggregated index values (display units, see IndexSpec)
    score: float | None = None  # 0-100 over the passing grades
    raw_score: float | None = None
    rank: int | None = None
    pareto: bool = False
    extrapolated: bool = False
    worst_loss_factor: float | None = None  # over the window grid
    # The one-line reason, written on first read by ``reason_writer`` (see
    # engine.selection.reasons): most grades of a large ranking are never shown.
    written_reason: str | None = field(default=None, repr=False)
    reason_writer: Callable[[GradeResult], str] | None = field(
        default=None, repr=False, compare=False
    )
    mount_result: MountResult | None = field(default=None, repr=False)
    mount_index: int | None = None
    notes: list[str] = field(default_factory=list)
    spread: GradeSpread | None = field(default=None, repr=False)  # see engine.selection.spread

    @property
    def reason(self) -> str:
        """Where the grade stands and why, in one line (written when first read)."""
        if self.written_reason is None:
            if self.reason_writer is None:
                return ""
            self.written_reason = self.reason_writer(self)
        return self.written_reason

    @property
    def mount(self) -> dict | None:
        """JSON-ready mount figures of this grade (MountResult.grade), made on demand;
        with the ``_low``/``_high`` companions of :mod:`engine.selection.spread` when it has
        them."""
        if self.mount_result is None or self.mount_index is None:
            return None
        figures = self.mount_result.grade(self.mount_index)
        if self.spread is not None:
            figures.update(self.spread.mount_companions())
        return figures

    def index_interval(self, name: str) -> tuple[float | None, float | None]:
        """(low, high) 95 % interval of index ``name`` over the draws of the fits
        (engine.selection.spread), or (None, None) where none was computed."""
        if self.spread is None or name not in self.spread.indices:
            return None, None
        return self.spread.indices[name]

    @property
    def rank_interval(self) -> list[int] | None:
        """[best, worst] rank over the draws of the fits (engine.selection.spread), else None."""
        return None if self.spread is None else list(self.spread.rank_interval)


@dataclass
class RankResult:
    criteria: Criteria
    grades: list[GradeResult]  # passing in rank order, then excluded by id
    specs: dict[str, IndexSpec]
    window_props: WindowProps
    mount: MountResult | None
    created_at: str
    engine_version: str = __version__
    fit_errors: dict[str, str] = field(default_factory=dict)
    spread: RankSpread | None = None  # how the intervals were made (engine.selection.spread)
    # The strain-amplitude sweeps the mount check used (grade id -> array), if any.
    amplitude_sweeps: dict = field(default_factory=dict)

    @property
    def shortlist(self) -> list[GradeResult]:
        return [g for g in self.grades if g.passed]

    @property
    def excluded(self) -> list[GradeResult]:
        return [g for g in self.grades if not g.passed]


def short_number(v: float) -> str:
    if v is None or not np.isfinite(v):
        return "unknown"
    a = abs(v)
    if a != 0 and (a >= 1e4 or a < 1e-2):
        return f"{v:.3g}"
    return f"{v:.3g}" if a < 100 else f"{v:.0f}"
