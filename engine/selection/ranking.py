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
import json
import math
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from engine import __version__
from engine.base.blocks import collector_paused, in_blocks, per_block
from engine.base.errors import CriteriaError, reject_unknown
from engine.curves.bank import CurveBank
from engine.curves.mastercurve import MasterCurve
from engine.curves.mountcheck import MountDesign, MountResult, check_mounts
from engine.curves.window import OperatingWindow, WindowProps, evaluate_window
from engine.library.store import Material
from engine.physics.indices import (
    AGGREGATES,
    BUILT_IN,
    IndexSpec,
    aggregate,
    custom_index,
    damping_span,
    resolve,
)

if TYPE_CHECKING:  # engine.selection.spread builds on this module
    from engine.selection.spread import GradeSpread, RankSpread

DESIGN_TYPES = ("isolation_mount", "damping_layer", "general")
DEFAULT_INDICES = {
    "isolation_mount": [("loss_factor", 1.0, "worst"), ("frequency_drift", 1.0, "worst")],
    "damping_layer": [("loss_modulus", 1.0, "worst"), ("damping_span", 1.0, "worst")],
    "general": [("loss_factor", 1.0, "mean"), ("stiffness_drift", 1.0, "worst")],
}
MOUNT_EXTRAPOLATION = "the mount check leaves the measured data"
UNCERTAIN = "within the data's uncertainty"  # of neighbours the draws cannot order (spread)
LOG_FLOOR = 1e-12  # values at or below zero are scored as this (a damping span of 0 K)


def _number(value, setting: str) -> float:
    """``value`` as a float if it is a finite number (not text, not a boolean)."""
    if isinstance(value, bool | np.bool_) or not isinstance(value, int | float | np.number):
        raise CriteriaError(f"{setting} must be a number, not {value!r}")
    if not math.isfinite(value):
        raise CriteriaError(f"{setting} must be a finite number, not {value!r}")
    return float(value)


def _optional_number(value, setting: str) -> float | None:
    return None if value is None else _number(value, setting)


def _boolean(value, setting: str) -> bool:
    """``value`` if it is a boolean (true/false in JSON or TOML); text is refused."""
    if not isinstance(value, bool | np.bool_):
        raise CriteriaError(f"{setting} must be true or false, not {value!r}")
    return bool(value)


def _range(value, setting: str) -> tuple[float, float] | None:
    """``value`` as a (low, high) pair of finite numbers, or None."""
    if value is None:
        return None
    if not isinstance(value, list | tuple) or len(value) != 2:
        raise CriteriaError(f"{setting} must be two numbers [low, high], not {value!r}")
    lo, hi = (_number(v, setting) for v in value)
    if lo > hi:
        raise CriteriaError(f"{setting} {lo:g} to {hi:g} is inverted")
    return lo, hi


@dataclass(frozen=True)
class IndexChoice:
    name: str
    weight: float = 1.0
    aggregate: str = "worst"
    formula: str | None = None  # custom index when given
    higher_is_better: bool = True

    def __post_init__(self) -> None:
        if not isinstance(self.name, str) or not self.name.strip():
            raise CriteriaError(f"index name must be non-blank text, not {self.name!r}")
        _number(self.weight, f"index '{self.name}': weight")
        if not isinstance(self.aggregate, str):
            raise CriteriaError(
                f"index '{self.name}': aggregation must be one of {', '.join(AGGREGATES)}, "
                f"not {self.aggregate!r}"
            )
        if self.formula is not None and not isinstance(self.formula, str):
            raise CriteriaError(f"index '{self.name}': formula must be text, not {self.formula!r}")
        _boolean(self.higher_is_better, f"index '{self.name}': higher_is_better")

    def spec(self) -> IndexSpec:
        if self.formula is not None:
            return custom_index(self.name, self.formula, self.higher_is_better)
        return resolve(self.name)


@dataclass(frozen=True)
class Constraints:
    """Limits a grade must meet; None switches a limit off. Units: degC, MPa, Hz, -."""

    service_covers_window: bool = True
    hardness_range: tuple[float, float] | None = None
    max_price: float | None = None
    min_loss_factor: float | None = None  # worst case over the window
    max_transmissibility: float | None = None  # at the disturbance, worst case
    fn_range_Hz: tuple[float, float] | None = None
    max_static_strain: float | None = None  # None: the layout's common-practice limit
    allow_extrapolation: bool = False

    def to_dict(self) -> dict:
        return {k: (list(v) if isinstance(v, tuple) else v) for k, v in self.__dict__.items()}

    @classmethod
    def from_dict(cls, data: dict) -> Constraints:
        if not isinstance(data, dict):
            raise CriteriaError(f"constraints must be a mapping of settings, not {data!r}")
        known = set(cls.__dataclass_fields__)
        reject_unknown(data, known, "constraint(s)")
        d = dict(data)
        for key in ("service_covers_window", "allow_extrapolation"):
            if key in d:
                d[key] = _boolean(d[key], key)
        for key in ("hardness_range", "fn_range_Hz"):
            d[key] = _range(d.get(key), key)
        for key in ("max_price", "min_loss_factor", "max_transmissibility", "max_static_strain"):
            d[key] = _optional_number(d.get(key), key)
        return cls(**d)


@dataclass(frozen=True)
class Criteria:
    """Everything a ranking depends on; saved and loaded as the criteria file."""

    window: OperatingWindow = field(default_factory=OperatingWindow)
    design: str = "isolation_mount"
    indices: tuple[IndexChoice, ...] = ()
    constraints: Constraints = field(default_factory=Constraints)
    mount: MountDesign | None = None
    pareto: tuple[str, str] | None = None
    eta_threshold: float = 0.2  # for the damping temperature span

    def __post_init__(self) -> None:
        if self.design not in DESIGN_TYPES:
            raise CriteriaError(
                f"design type '{self.design}' is not one of {', '.join(DESIGN_TYPES)}"
            )
        if not self.indices:
            object.__setattr__(
                self,
                "indices",
                tuple(IndexChoice(n, w, a) for n, w, a in DEFAULT_INDICES[self.design]),
            )
        names = [c.name for c in self.indices]
        if len(set(names)) != len(names):
            raise CriteriaError("an index is chosen twice")
        for c in self.indices:
            if c.aggregate not in AGGREGATES:
                raise CriteriaError(
                    f"index '{c.name}': unknown aggregation '{c.aggregate}'; use one of "
                    + ", ".join(AGGREGATES)
                )
            if not (math.isfinite(c.weight) and c.weight >= 0):
                raise CriteriaError(f"index '{c.name}': weight must be a number >= 0")
            c.spec()  # unknown names and bad formulas fail here
            if c.aggregate == "weighted" and not self.window.duty_points:
                raise CriteriaError(
                    f"index '{c.name}': the 'weighted' aggregation needs duty points"
                )
        if sum(c.weight for c in self.indices) <= 0:
            raise CriteriaError("at least one index needs a weight above zero")
        if self.pareto is not None:
            for p in self.pareto:
                if p not in names:
                    raise CriteriaError(f"Pareto index '{p}' is not among the chosen indices")
            if len(self.pareto) != 2 or self.pareto[0] == self.pareto[1]:
                raise CriteriaError(
                    "the Pareto front needs exactly two different chosen indices, not "
                    + (", ".join(f"'{p}'" for p in self.pareto) or "none")
                )
        if not (math.isfinite(self.eta_threshold) and self.eta_threshold > 0):
            raise CriteriaError("loss-factor threshold must be positive")
        if self.mount is None and (
            self.constraints.max_transmissibility is not None
            or self.constraints.fn_range_Hz is not None
        ):
            raise CriteriaError("transmissibility and fn limits need a mount design")

    def to_dict(self) -> dict:
        return {
            "window": self.window.to_dict(),
            "design": self.design,
            "indices": [
                {
                    "name": c.name,
                    "weight": c.weight,
                    "aggregate": c.aggregate,
                    **(
                        {"formula": c.formula, "higher_is_better": c.higher_is_better}
                        if c.formula is not None
                        else {}
                    ),
                }
                for c in self.indices
            ],
            "constraints": self.constraints.to_dict(),
            "mount": None if self.mount is None else self.mount.to_dict(),
            "pareto": None if self.pareto is None else list(self.pareto),
            "eta_threshold": self.eta_threshold,
        }

    @classmethod
    def from_dict(cls, data: dict) -> Criteria:
        if not isinstance(data, dict):
            raise CriteriaError("criteria must be a mapping of settings")
        known = {"window", "design", "indices", "constraints", "mount", "pareto", "eta_threshold"}
        reject_unknown(data, known, "criteria setting(s)")
        entries = data.get("indices", [])
        if not isinstance(entries, list | tuple):
            raise CriteriaError(f"indices must be a list of index entries, not {entries!r}")
        index_keys = {"name", "weight", "aggregate", "formula", "higher_is_better"}
        indices = []
        for k, c in enumerate(entries, start=1):
            if not isinstance(c, dict) or "name" not in c:
                raise CriteriaError(f"bad index entry {k}: needs a mapping with a 'name'")
            reject_unknown(c, index_keys, f"setting(s) in index entry {k}:")
            indices.append(
                IndexChoice(
                    name=c["name"],
                    weight=c.get("weight", 1.0),
                    aggregate=c.get("aggregate", "worst"),
                    formula=c.get("formula"),
                    higher_is_better=c.get("higher_is_better", True),
                )
            )
        window = data.get("window", {})
        if not isinstance(window, dict):
            raise CriteriaError(f"window must be a mapping of settings, not {window!r}")
        mount = data.get("mount")
        pareto = data.get("pareto")
        if pareto is not None and (
            not isinstance(pareto, list | tuple) or not all(isinstance(p, str) for p in pareto)
        ):
            raise CriteriaError(f"pareto must be a list of two index names, not {pareto!r}")
        return cls(
            window=OperatingWindow.from_dict(window),
            design=str(data.get("design", "isolation_mount")),
            indices=tuple(indices),
            constraints=Constraints.from_dict(data.get("constraints", {})),
            mount=None if mount is None else MountDesign.from_dict(mount),
            pareto=None if pareto is None else tuple(pareto),
            eta_threshold=_number(data.get("eta_threshold", 0.2), "eta_threshold"),
        )

    def save(self, path: str | Path) -> None:
        Path(path).write_text(json.dumps(self.to_dict(), indent=1))

    @classmethod
    def load(cls, path: str | Path) -> Criteria:
        p = Path(path)
        if not p.exists():
            raise CriteriaError(f"{p}: file not found")
        text = p.read_text(encoding="utf-8-sig")
        try:
            data = tomllib.loads(text) if p.suffix.lower() == ".toml" else json.loads(text)
        except (json.JSONDecodeError, tomllib.TOMLDecodeError) as exc:
            raise CriteriaError(
                f"{p}: not valid {'TOML' if p.suffix == '.toml' else 'JSON'}: {exc}"
            ) from None
        try:
            return cls.from_dict(data)
        except CriteriaError as exc:
            raise CriteriaError(f"{p}: {exc}") from None


@dataclass
class Failure:
    """A failed constraint: what, the value found, the limit; ``topic`` groups them
    ("catalog", "window" or "mount")."""

    constraint: str
    value: float | str
    limit: str
    topic: str = "window"

    def text(self) -> str:
        return f"{self.constraint} {self.value} (needs {self.limit})"


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
    reason: str = ""
    mount_result: MountResult | None = field(default=None, repr=False)
    mount_index: int | None = None
    notes: list[str] = field(default_factory=list)
    spread: GradeSpread | None = field(default=None, repr=False)  # see engine.selection.spread

    @property
    def mount(self) -> dict | None:
        """JSON-ready mount figures of this grade (MountResult.grade), made on demand;
        with the ``_low``/``_high`` companions of :mod:`engine.selection.spread` when it has
        them."""
        if self.mount_result is None:
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

    @property
    def shortlist(self) -> list[GradeResult]:
        return [g for g in self.grades if g.passed]

    @property
    def excluded(self) -> list[GradeResult]:
        return [g for g in self.grades if not g.passed]


class _Quantities(Mapping):
    """Named quantities of engine.physics.indices for the grades ``rows`` at the window grid or
    the duty points, each computed when an index first asks for it.

    Arrays have shape (grades, points), catalog columns (grades, 1); moduli in MPa (see
    engine.physics.indices).
    """

    def __init__(self, props: WindowProps, catalog: dict[str, np.ndarray], duty: bool, rows):
        if duty:
            storage, loss = props.duty_storage[rows], props.duty_loss[rows]
            temps, freqs = props.duty_temperatures, props.duty_frequencies
        else:
            storage, loss = props.storage[rows], props.loss[rows]
            storage, loss = storage.reshape(storage.shape[0], -1), loss.reshape(loss.shape[0], -1)
            tt, ff = np.meshgrid(props.temperatures, props.frequencies, indexing="ij")
            temps, freqs = tt.ravel(), ff.ravel()
        self.shape = storage.shape
        to_shear = props.to_shear[rows, None]
        self._make = {
            "loss_factor": lambda: loss / storage,
            "storage_modulus": lambda: storage * 1e-6,
            "loss_modulus": lambda: loss * 1e-6,
            "shear_modulus": lambda: storage * (to_shear * 1e-6),
            "density": lambda: catalog["density"][rows, None],
            "price": lambda: catalog["price"][rows, None],
            "hardness": lambda: catalog["hardness"][rows, None],
            "temperature": lambda: np.broadcast_to(temps, self.shape),
            "frequency": lambda: np.broadcast_to(freqs, self.shape),
        }
        self._made: dict[str, np.ndarray] = {}

    def __getitem__(self, name: str) -> np.ndarray:
        if name not in self._made:
            self._made[name] = self._make[name]()
        return self._made[name]

    def __iter__(self):
        return iter(self._make)

    def __len__(self) -> int:
        return len(self._make)


def _point_indices(
    props: WindowProps,
    catalog: dict[str, np.ndarray],
    choices: list[IndexChoice],
    specs: dict[str, IndexSpec],
) -> tuple[dict[str, np.ndarray], np.ndarray]:
    """Aggregated point indices of every grade and its worst loss factor on the grid.

    With duty points the point indices are taken at the duty points, else on the grid.
    Worked out in blocks of grades (engine.base.blocks), so that no quantity is ever held for
    the whole library at once.
    """
    n = len(props.ids)
    duty = props.duty_storage is not None
    values = {c.name: np.empty(n) for c in choices}
    eta_worst = np.empty(n)

    def work(a: int, b: int) -> None:
        rows = slice(a, b)
        q = _Quantities(props, catalog, duty, rows)
        with np.errstate(all="ignore"):
            for c in choices:
                spec = specs[c.name]
                v = np.broadcast_to(np.asarray(spec.point(q), dtype=float), q.shape)
                values[c.name][rows] = aggregate(
                    v, c.aggregate, spec.higher_is_better, props.duty_share
                )
            grid = q if not duty else _Quantities(props, catalog, False, rows)
            eta_worst[rows] = grid["loss_factor"].min(axis=1)

    points = props.storage[0].size if n else 1
    in_blocks(n, work, per_block(points))
    return values, eta_worst


CATALOG_NUMBERS = ("density", "price", "hardness", "service_min", "service_max", "poisson_ratio")


def _catalog_columns(materials: list[Material]) -> dict[str, np.ndarray]:
    """The numeric catalog fields of ``materials`` as arrays (NaN where unknown)."""
    rows = [tuple(getattr(m, name) for name in CATALOG_NUMBERS) for m in materials]
    table = np.array(rows, dtype=float).reshape(len(materials), len(CATALOG_NUMBERS))
    return dict(zip(CATALOG_NUMBERS, table.T, strict=True))


def _row_max(values: np.ndarray) -> np.ndarray:
    """Largest finite-or-infinite value of each row, NaN ignored (NaN if all are)."""
    return np.fmax.reduce(values.reshape(values.shape[0], -1), axis=1)


def _failures(
    criteria: Criteria,
    specs: dict[str, IndexSpec],
    values: dict[str, np.ndarray],
    catalog: dict[str, np.ndarray],
    eta_worst: np.ndarray,
    extrap_any: np.ndarray,
    mres: MountResult | None,
) -> list[list[Failure]]:
    """Every failed constraint of every grade, in a fixed order per grade.

    Each constraint is tested on all grades at once; a Failure is made only for the
    grades that fail it.
    """
    n = eta_worst.size
    out: list[list[Failure]] = [[] for _ in range(n)]
    con = criteria.constraints
    lo_t, hi_t = criteria.window.temp_range

    def add(mask, make, topic: str = "window") -> None:
        for k in np.flatnonzero(mask).tolist():
            failure = make(k)
            failure.topic = topic
            out[k].append(failure)

    if con.service_covers_window:
        smin, smax = catalog["service_min"], catalog["service_max"]
        unknown = np.isnan(smin) | np.isnan(smax)
        needs = f"to cover {lo_t:g} to {hi_t:g} °C"
        with np.errstate(invalid="ignore"):
            short = ~unknown & ((smin > lo_t) | (smax < hi_t))
        add(unknown, lambda k: Failure("service range", "unknown", needs), "catalog")
        add(
            short,
            lambda k: Failure("service range", f"{smin[k]:g} to {smax[k]:g} °C", needs),
            "catalog",
        )
    if con.hardness_range is not None:
        a, b = con.hardness_range
        h = catalog["hardness"]
        limit = f"{a:g}-{b:g} Shore A"
        add(np.isnan(h), lambda k: Failure("hardness", "unknown", limit), "catalog")
        with np.errstate(invalid="ignore"):
            outside = (h < a) | (h > b)
        add(outside, lambda k: Failure("hardness", f"{h[k]:g} Shore A", limit), "catalog")
    if con.max_price is not None:
        price = catalog["price"]
        limit = f"<= {con.max_price:g} per kg"
        add(np.isnan(price), lambda k: Failure("price", "unknown", limit), "catalog")
        with np.errstate(invalid="ignore"):
            dear = price > con.max_price
        add(dear, lambda k: Failure("price", f"{price[k]:g} per kg", limit), "catalog")
    if con.min_loss_factor is not None:
        add(
            eta_worst < con.min_loss_factor,
            lambda k: Failure(
                "worst-case loss factor", _fmt(eta_worst[k]), f">= {con.min_loss_factor:g}"
            ),
        )
    if not con.allow_extrapolation:
        add(
            extrap_any,
            lambda k: Failure(
                "extrapolation", "the window reaches beyond the measured data", "not allowed"
            ),
        )
    for name, spec in specs.items():
        missing = np.zeros(n, dtype=bool)
        for field_name in spec.needs:
            missing |= np.isnan(catalog[field_name])

        def unknown_index(k, name=name, spec=spec):
            absent = [f for f in spec.needs if np.isnan(catalog[f][k])]
            return Failure(f"index {name}", "unknown", "needs " + (", ".join(absent) or "data"))

        add(missing | ~np.isfinite(values[name]), unknown_index)
    if mres is None:
        return out
    fn = mres.natural_frequency
    found = np.isfinite(fn)
    add(
        ~found.all(axis=1),
        lambda k: Failure("natural frequency", "not found", "a root in 1 mHz-100 kHz"),
        "mount",
    )
    if con.fn_range_Hz is not None:
        a, b = con.fn_range_Hz
        fn_lo = np.where(found, fn, np.inf).min(axis=1)
        fn_hi = np.where(found, fn, -np.inf).max(axis=1)
        add(
            found.any(axis=1) & ((fn_lo < a) | (fn_hi > b)),
            lambda k: Failure(
                "natural frequency", f"{fn_lo[k]:.3g} to {fn_hi[k]:.3g} Hz", f"{a:g} to {b:g} Hz"
            ),
            "mount",
        )
    if con.max_transmissibility is not None:
        worst_t = _row_max(mres.transmissibility)
        with np.errstate(invalid="ignore"):
            high = worst_t > con.max_transmissibility
        add(
            high,
            lambda k: Failure(
                "transmissibility at the disturbance",
                _fmt(worst_t[k]),
                f"<= {con.max_transmissibility:g}",
            ),
            "mount",
        )
    limit = con.max_static_strain if con.max_static_strain is not None else mres.strain_limit
    static = _row_max(mres.static_strain)
    strain = np.where(np.isnan(static), np.nan, np.fmax(static, mres.sag_strain))
    with np.errstate(invalid="ignore"):
        strained = ~(strain <= limit)

    def strain_failure(k):
        needs = f"<= {limit:g}"
        if strain[k] > 1.0:
            needs += "; above 1 the pad cannot carry the load at all"
        return Failure("static strain incl. long-term sag", _fmt(strain[k]), needs)

    add(strained, strain_failure, "mount")
    if not con.allow_extrapolation:
        # Reported once: a window that already needs extrapolation says so above.
        add(
            mres.extrapolated.any(axis=1) & ~extrap_any,
            lambda k: Failure("extrapolation", MOUNT_EXTRAPOLATION, "not allowed"),
            "mount",
        )
    return out


def _fmt(v: float) -> str:
    if v is None or not np.isfinite(v):
        return "unknown"
    a = abs(v)
    if a != 0 and (a >= 1e4 or a < 1e-2):
        return f"{v:.3g}"
    return f"{v:.3g}" if a < 100 else f"{v:.0f}"


def rank(
    curves: dict[str, MasterCurve],
    materials: dict[str, Material],
    criteria: Criteria,
    fit_errors: dict[str, str] | None = None,
    bank: CurveBank | None = None,
) -> RankResult:
    """Evaluate, constrain, score and order every grade with a master curve.

    ``bank`` may be given to reuse stacked curves (it must hold ``curves`` in order).
    The rank intervals from the draws of the fits are a further step,
    :func:`engine.selection.spread.rank_spread`.
    """
    with collector_paused():
        return _rank(curves, materials, criteria, fit_errors, bank)


@dataclass
class Evaluation:
    """What a ranking computes for each grade before its constraints and scores.

    Arrays have one row per grade of ``ids``; index values in display units (see
    :class:`engine.physics.indices.IndexSpec`).
    """

    ids: list[str]
    catalog: dict[str, np.ndarray]  # numeric catalog fields, NaN where unknown
    props: WindowProps
    specs: dict[str, IndexSpec]
    values: dict[str, np.ndarray]  # aggregated index values
    eta_worst: np.ndarray  # worst loss factor over the window grid
    extrapolated: np.ndarray  # any window point (or duty point) leaves the data
    mount: MountResult | None


def evaluate_grades(bank: CurveBank, materials: list[Material], criteria: Criteria) -> Evaluation:
    """Window properties, index values and the mount check of every grade in ``bank``.

    ``materials`` are the catalog rows of the bank's grades, in its order (an id may
    appear more than once: only the catalog fields are read). Every figure of a grade
    depends on that grade alone.
    """
    n = len(bank.ids)
    window = criteria.window
    catalog = _catalog_columns(materials)
    props = evaluate_window(bank, window, catalog["poisson_ratio"])
    specs = {c.name: c.spec() for c in criteria.indices}
    point = [c for c in criteria.indices if specs[c.name].kind == "point"]
    values, eta_worst = _point_indices(props, catalog, point, specs)
    for c in criteria.indices:
        if c.name in ("stiffness_drift", "frequency_drift"):
            e = props.storage.reshape(n, -1)
            drift = e.max(axis=1) / e.min(axis=1)
            values[c.name] = drift if c.name == "stiffness_drift" else np.sqrt(drift)
        elif c.name == "damping_span":
            values[c.name] = damping_span(
                props.path_temperatures, props.path_loss_factor, criteria.eta_threshold
            )
        elif c.name not in values:  # pragma: no cover - every window index is handled above
            raise CriteriaError(f"index '{c.name}' has no evaluation")
    extrap_any = props.extrapolated.reshape(n, -1).any(axis=1)
    if window.duty_points:
        extrap_any |= props.duty_extrapolated.any(axis=1)
    mres = None
    if criteria.mount is not None:
        mres = check_mounts(
            bank,
            criteria.mount,
            window.temperatures,
            catalog["poisson_ratio"],
            catalog["hardness"],
        )
    return Evaluation(list(bank.ids), catalog, props, specs, values, eta_worst, extrap_any, mres)


def raw_scores(values: dict[str, np.ndarray], criteria: Criteria) -> np.ndarray:
    """Score before the 0-100 mapping: sum_i w_i s_i log10(v_i) / sum_i w_i (module notes).

    ``values`` maps each chosen index to its values (any shape, the same for all); a
    missing value or one at or below zero counts as LOG_FLOOR.
    """
    specs = {c.name: c.spec() for c in criteria.indices}
    total_w = sum(c.weight for c in criteria.indices)
    raw = sum(
        c.weight
        * (1 if specs[c.name].higher_is_better else -1)
        * np.log10(np.maximum(np.nan_to_num(values[c.name], nan=LOG_FLOOR), LOG_FLOOR))
        for c in criteria.indices
    )
    return np.asarray(raw, dtype=float) / total_w


def write_reasons(result: RankResult) -> None:
    """Set the one-line reason of every grade of ``result`` (passing ones in rank order)."""
    passing = result.shortlist
    weights = {c.name: c.weight for c in result.criteria.indices}
    reasons = _Reasons(passing, result.specs, weights)
    for r in passing:
        r.reason = reasons.line(r)
    for r in result.excluded:
        r.reason = "excluded: " + "; ".join(f.text() for f in r.failures)


def _rank(curves, materials, criteria, fit_errors, bank) -> RankResult:
    ids = [i for i in curves if i in materials]
    if bank is None or bank.ids != ids:
        bank = CurveBank.from_curves({i: curves[i] for i in ids})
    mats = [materials[i] for i in ids]
    n = len(ids)
    ev = evaluate_grades(bank, mats, criteria)
    specs, values, mres = ev.specs, ev.values, ev.mount

    # -- constraints -----------------------------------------------------------------
    failures = _failures(criteria, specs, values, ev.catalog, ev.eta_worst, ev.extrapolated, mres)
    index_values = {name: values[name].tolist() for name in specs}
    eta_list = ev.eta_worst.tolist()
    extrap_list = ev.extrapolated.tolist()
    results: list[GradeResult] = []
    for k, m in enumerate(mats):
        notes = list(curves[m.id].notes)
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

    def order_key(r: GradeResult):
        v = r.indices[first] * (1 if specs[first].higher_is_better else -1)
        return (-r.raw_score, -v, r.price if r.price is not None else math.inf, r.id)

    passing.sort(key=order_key)
    if passing:
        hi_s = passing[0].raw_score
        lo_s = passing[-1].raw_score
        for i, r in enumerate(passing, start=1):
            r.rank = i
            share = 1.0 if hi_s == lo_s else (r.raw_score - lo_s) / (hi_s - lo_s)
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
    )
    write_reasons(result)
    return result


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


class _Reasons:
    """One line per passing grade: where it stands and which index carried it."""

    def __init__(self, passing: list[GradeResult], specs: dict[str, IndexSpec], weights: dict):
        self.n = len(passing)
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
                f"{self.specs[n].label} {_fmt(r.indices[n])}{self.units[n]}" for n in self.shown
            )
        )
        if r.spread is not None and r.spread.alongside:
            parts.append(f"{UNCERTAIN} of {' and '.join(r.spread.alongside)}")
        if r.pareto:
            parts.append("Pareto-optimal")
        if r.extrapolated:
            parts.append("uses extrapolated data")
        return f"rank {r.rank} of {self.n}: " + "; ".join(parts) + "; meets every constraint"


def built_in_indices() -> dict[str, IndexSpec]:
    return dict(BUILT_IN)
