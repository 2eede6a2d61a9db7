"""What a ranking depends on: the operating window, the design type, the merit indices
chosen with their weights and aggregations, the constraints and the mount design.

Criteria are frozen dataclasses: change one with :func:`dataclasses.replace`. The
criteria file (JSON, or TOML to read) is their ``to_dict`` form.

Examples
--------
>>> from dataclasses import replace
>>> c = Criteria()
>>> [i.name for i in c.indices]
['loss_factor', 'frequency_drift', 'worst_transmissibility', 'isolation_efficiency']
>>> c.mount is not None, Criteria(screening_only=True).mount
(True, None)
>>> replace(c, constraints=replace(c.constraints, max_price=12.0)).constraints.max_price
12.0
"""

from __future__ import annotations

import json
import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from engine.base.errors import CriteriaError, reject_unknown
from engine.curves.mountcheck import MountDesign, default_mount
from engine.curves.system import MountSystem
from engine.curves.window import OperatingWindow
from engine.physics.indices import AGGREGATES, IndexSpec, custom_index, resolve

DESIGN_TYPES = ("isolation_mount", "damping_layer", "general")
DEFAULT_INDICES = {
    # The mount's own figures carry half the isolation score: its worst transmissibility
    # and isolation efficiency over the window, beside damping and the drift of fn.
    "isolation_mount": [
        ("loss_factor", 1.0, "worst"),
        ("frequency_drift", 1.0, "worst"),
        ("worst_transmissibility", 1.0, "worst"),
        ("isolation_efficiency", 1.0, "worst"),
    ],
    "damping_layer": [("loss_modulus", 1.0, "worst"), ("damping_span", 1.0, "worst")],
    "general": [("loss_factor", 1.0, "mean"), ("stiffness_drift", 1.0, "worst")],
}
# An isolation design checked as a whole mount system (six degrees of freedom).
SYSTEM_INDICES = [
    ("loss_factor", 1.0, "worst"),
    ("system_mode_drift", 1.0, "worst"),
    ("system_worst_transmissibility", 1.0, "worst"),
]
# An isolation design without a mount is a material screening: no mount figures.
SCREENING_INDICES = [("loss_factor", 1.0, "worst"), ("stiffness_drift", 1.0, "worst")]
SCREENING_NOTE = "material screening only: no mount was checked, so isolation is not shown"
ISOLATION_RATIO = math.sqrt(2.0)  # f/fn above which any mount isolates (Snowdon 1968)


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
    # Mount limits, at every window temperature and disturbance (with a mount design):
    max_transmissibility: float | None = 1.0  # below 1 the mount isolates
    min_isolation_efficiency: float | None = None  # 1 - T, e.g. 0.8 for 80 %
    min_frequency_ratio: float | None = ISOLATION_RATIO  # f/fn; raise it for a margin
    max_amplification: float | None = None  # T at resonance, met on every run-up
    fn_range_Hz: tuple[float, float] | None = None
    max_static_strain: float | None = None  # None: the layout's common-practice limit
    allow_extrapolation: bool = False

    def __post_init__(self) -> None:
        # Checked here, so that a changed copy (dataclasses.replace) is checked too.
        for key in ("service_covers_window", "allow_extrapolation"):
            object.__setattr__(self, key, _boolean(getattr(self, key), key))
        for key in ("hardness_range", "fn_range_Hz"):
            object.__setattr__(self, key, _range(getattr(self, key), key))
        for key in (
            "max_price",
            "min_loss_factor",
            "max_transmissibility",
            "min_isolation_efficiency",
            "min_frequency_ratio",
            "max_amplification",
            "max_static_strain",
        ):
            object.__setattr__(self, key, _optional_number(getattr(self, key), key))
        efficiency = self.min_isolation_efficiency
        if efficiency is not None and not 0.0 <= efficiency < 1.0:
            raise CriteriaError(
                f"min_isolation_efficiency {efficiency:g} must lie in [0, 1), e.g. 0.8 for 80 %"
            )

    @property
    def transmissibility_limit(self) -> float | None:
        """The tighter of the transmissibility limit and 1 - the isolation efficiency."""
        limits = [self.max_transmissibility]
        if self.min_isolation_efficiency is not None:
            limits.append(1.0 - self.min_isolation_efficiency)
        known = [v for v in limits if v is not None]
        return min(known) if known else None

    def to_dict(self) -> dict:
        return {k: (list(v) if isinstance(v, tuple) else v) for k, v in self.__dict__.items()}

    @classmethod
    def from_dict(cls, data: dict) -> Constraints:
        if not isinstance(data, dict):
            raise CriteriaError(f"constraints must be a mapping of settings, not {data!r}")
        reject_unknown(data, set(cls.__dataclass_fields__), "constraint(s)")
        return cls(**data)


@dataclass(frozen=True)
class Criteria:
    """Everything a ranking depends on; saved and loaded as the criteria file.

    Parameters
    ----------
    window : OperatingWindow
        Temperatures and frequencies (or duty points) the grades are judged over.
    design : str
        "isolation_mount", "damping_layer" or "general"; picks the default indices.
    indices : tuple of IndexChoice
        Merit indices with weights and aggregations; empty means the design's defaults.
    constraints : Constraints
        Limits a grade must meet.
    mount : MountDesign, optional
        The mount checked at every window temperature.
    system : MountSystem, optional
        A machine on N mounts checked in six degrees of freedom (isolation mounts
        only); it takes the place of the one-pad default mount.
    pareto : (str, str), optional
        Two chosen indices whose Pareto front is flagged.
    eta_threshold : float
        Loss factor that bounds the damping temperature span.

    Examples
    --------
    >>> from dataclasses import replace
    >>> layer = Criteria(design="damping_layer")
    >>> [(c.name, c.aggregate) for c in layer.indices]
    [('loss_modulus', 'worst'), ('damping_span', 'worst')]
    >>> replace(layer, eta_threshold=0.0)
    Traceback (most recent call last):
    ...
    engine.base.errors.CriteriaError: loss-factor threshold must be positive
    >>> Criteria.from_dict(layer.to_dict()) == layer
    True
    """

    window: OperatingWindow = field(default_factory=OperatingWindow)
    design: str = "isolation_mount"
    indices: tuple[IndexChoice, ...] = ()
    constraints: Constraints = field(default_factory=Constraints)
    mount: MountDesign | None = None
    pareto: tuple[str, str] | None = None
    eta_threshold: float = 0.2  # for the damping temperature span
    screening_only: bool = False  # an isolation design ranked without a mount
    system: MountSystem | None = None

    def __post_init__(self) -> None:
        if self.design not in DESIGN_TYPES:
            raise CriteriaError(
                f"design type '{self.design}' is not one of {', '.join(DESIGN_TYPES)}"
            )
        _boolean(self.screening_only, "screening_only")
        if self.screening_only:
            if self.design != "isolation_mount":
                raise CriteriaError("screening_only applies to the isolation-mount design")
            object.__setattr__(self, "mount", None)
            object.__setattr__(self, "system", None)
        elif self.system is not None:
            if self.design != "isolation_mount":
                raise CriteriaError("a mount system applies to the isolation-mount design")
        elif self.design == "isolation_mount" and self.mount is None:
            object.__setattr__(self, "mount", default_mount())  # a mount is part of the case
        if not self.indices:
            defaults = SCREENING_INDICES if self.screening_only else DEFAULT_INDICES[self.design]
            if self.system is not None and self.mount is None:
                defaults = SYSTEM_INDICES
            object.__setattr__(self, "indices", tuple(IndexChoice(n, w, a) for n, w, a in defaults))
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
            spec = c.spec()  # unknown names and bad formulas fail here
            if spec.needs_mount and self.mount is None:
                raise CriteriaError(f"index '{c.name}' needs a mount design")
            if spec.needs_system and self.system is None:
                raise CriteriaError(f"index '{c.name}' needs a mount system")
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
        if self.mount is None and self.constraints.fn_range_Hz is not None:
            raise CriteriaError("an fn limit needs a mount design")

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
            "screening_only": self.screening_only,
            "system": None if self.system is None else self.system.to_dict(),
        }

    @classmethod
    def from_dict(cls, data: dict) -> Criteria:
        if not isinstance(data, dict):
            raise CriteriaError("criteria must be a mapping of settings")
        known = {
            "window",
            "design",
            "indices",
            "constraints",
            "mount",
            "pareto",
            "eta_threshold",
            "screening_only",
            "system",
        }
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
            indices.append(IndexChoice(**c))  # settings left out: the class defaults
        window = data.get("window", {})
        if not isinstance(window, dict):
            raise CriteriaError(f"window must be a mapping of settings, not {window!r}")
        mount = data.get("mount")
        pareto = data.get("pareto")
        if pareto is not None and (
            not isinstance(pareto, list | tuple) or not all(isinstance(p, str) for p in pareto)
        ):
            raise CriteriaError(f"pareto must be a list of two index names, not {pareto!r}")
        given: dict = {}
        if "design" in data:
            given["design"] = str(data["design"])
        if "eta_threshold" in data:
            given["eta_threshold"] = _number(data["eta_threshold"], "eta_threshold")
        if "screening_only" in data:
            given["screening_only"] = data["screening_only"]
        if data.get("system") is not None:
            given["system"] = MountSystem.from_dict(data["system"])
        return cls(
            window=OperatingWindow.from_dict(window),
            indices=tuple(indices),
            constraints=Constraints.from_dict(data.get("constraints", {})),
            mount=None if mount is None else MountDesign.from_dict(mount),
            pareto=None if pareto is None else tuple(pareto),
            **given,  # the rest: the class defaults
        )

    def save(self, path: str | Path) -> None:
        Path(path).write_text(json.dumps(self.to_dict(), indent=1))

    @classmethod
    def load(cls, path: str | Path) -> Criteria:
        p = Path(path)
        if not p.exists():
            raise CriteriaError(f"{p}: file not found")
        try:
            text = p.read_bytes().decode("utf-8-sig")
        except UnicodeDecodeError as exc:
            raise CriteriaError(
                f"{p}: not UTF-8 text (byte {exc.start + 1} cannot be read); save the "
                "criteria file as UTF-8"
            ) from None
        except OSError as exc:
            raise CriteriaError(f"{p}: cannot read the file ({exc.strerror or exc})") from None
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
