"""Merit indices: built-in ones with their derivations, custom formulas, aggregation.

A *point* index has a value at every window point and is aggregated over the window
(worst case, mean, time-weighted mean over duty points, best). A *window* index is one
number per grade for the whole window (stiffness drift, damping temperature span).
Quantities offered to indices and formulas (units as named):

=================  ==========================================================
loss_factor        tan delta [-]
storage_modulus    tensile-equivalent E' [MPa]
loss_modulus       tensile-equivalent E'' [MPa]
shear_modulus      G' [MPa]
density            [kg/m3]
price              [per kg]
hardness           [Shore A]
temperature        [degC]
frequency          [Hz]
=================  ==========================================================
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np

from engine.base.errors import CriteriaError
from engine.physics.formula import Formula, parse_formula

QUANTITIES = (
    "loss_factor",
    "storage_modulus",
    "loss_modulus",
    "shear_modulus",
    "density",
    "price",
    "hardness",
    "temperature",
    "frequency",
)
# What a window index reads: storage modulus [Pa], shape (grades, window points); the
# temperature path [degC] at the design frequency (1 K steps) with the storage modulus
# [Pa] and loss factor along it, shape (grades, temperatures); the loss-factor threshold
# of the damping span; and with a mount design, the mount's natural frequency [Hz],
# shape (grades, window temperatures), and transmissibility, shape (grades, window
# temperatures, disturbances).
WINDOW_QUANTITIES = (
    "storage_modulus",
    "path_temperatures",
    "path_storage",
    "path_loss_factor",
    "eta_threshold",
    "natural_frequency",
    "transmissibility",
    "system_highest_mode",
    "system_worst_transmissibility",
    "system_mode_drift",
)
AGGREGATES = ("worst", "mean", "weighted", "best")


@dataclass(frozen=True)
class IndexSpec:
    """One merit index.

    ``kind`` is "point" or "window"; ``higher_is_better`` sets the direction of merit;
    ``needs`` lists catalog fields without which the index is unknown for a grade.

    A point index gives ``point(q)``: its value at every window point from the named
    quantities ``q`` (QUANTITIES, arrays of shape (grades, points)), aggregated later. A
    window index gives ``window(w)``: one value per grade from the window quantities
    ``w`` (WINDOW_QUANTITIES).
    """

    name: str
    label: str
    unit: str
    higher_is_better: bool
    kind: str
    needs: tuple[str, ...]
    doc: str
    point: Callable[[Mapping], np.ndarray] | None = None
    formula: Formula | None = None
    window: Callable[[Mapping], np.ndarray] | None = None
    needs_mount: bool = False  # a window index of the checked mount
    needs_system: bool = False  # a window index of the checked mount system (6 dof)


def _q(q, name):
    return q[name]


def _drift(values: np.ndarray) -> np.ndarray:
    """Largest over smallest value of each grade (row), NaN where one is unknown."""
    v = values.reshape(values.shape[0], -1)
    return v.max(axis=1) / v.min(axis=1)


def _row_max(values: np.ndarray) -> np.ndarray:
    """Largest value of each grade (row) over all its other axes."""
    return values.reshape(values.shape[0], -1).max(axis=1)


def _beam(q):
    return np.sqrt(q["loss_factor"] * q["storage_modulus"]) / q["density"]


def _plate(q):
    return np.cbrt(q["loss_factor"] * q["storage_modulus"]) / q["density"]


BUILT_IN: dict[str, IndexSpec] = {}


def _register(spec: IndexSpec) -> None:
    BUILT_IN[spec.name] = spec


_register(
    IndexSpec(
        "loss_factor",
        "loss factor",
        "-",
        True,
        "point",
        (),
        "tan delta = E''/E'. The share of energy a part dissipates per cycle: "
        "Delta W / U = 2 pi eta. Higher is better for damping.",
        point=lambda q: q["loss_factor"],
    )
)
_register(
    IndexSpec(
        "loss_modulus",
        "loss modulus E''",
        "MPa",
        True,
        "point",
        (),
        "E'' = eta E'. For a free (unconstrained) damping layer on a stiff beam the "
        "composite loss factor is proportional to E2'' for thin layers (Oberst; ASTM E756).",
        point=lambda q: q["loss_modulus"],
    )
)
_register(
    IndexSpec(
        "stiffness_drift",
        "stiffness drift over temperature",
        "-",
        False,
        "window",
        (),
        "Material only: the largest over the smallest E' along the window's temperatures "
        "at the design frequency (1 K steps). A mount of the grade changes its stiffness by "
        "this factor over the service temperatures; frequency dependence is left out.",
        window=lambda w: _drift(w["path_storage"]),
    )
)
_register(
    IndexSpec(
        "frequency_drift",
        "natural-frequency drift",
        "-",
        False,
        "window",
        (),
        "max fn / min fn of the checked mount over the window's temperatures, each fn the "
        "root of fn = (1/2 pi) sqrt(k'(fn)/m) at its temperature: the mount's own drift.",
        window=lambda w: _drift(w["natural_frequency"]),
        needs_mount=True,
    )
)
_register(
    IndexSpec(
        "worst_transmissibility",
        "worst transmissibility",
        "-",
        False,
        "window",
        (),
        "The largest force transmissibility T = |k*| / |k* - m (2 pi f)^2| of the checked "
        "mount over the window's temperatures and the disturbance frequencies (Snowdon "
        "1968). Below 1 the mount isolates.",
        window=lambda w: _row_max(w["transmissibility"]),
        needs_mount=True,
    )
)
_register(
    IndexSpec(
        "isolation_efficiency",
        "worst isolation efficiency",
        "-",
        True,
        "window",
        (),
        "1 - T at the worst window temperature and disturbance: the share of the "
        "disturbing force the mount keeps from the structure (common practice).",
        window=lambda w: 1.0 - _row_max(w["transmissibility"]),
        needs_mount=True,
    )
)
_register(
    IndexSpec(
        "system_highest_mode",
        "highest system mode",
        "Hz",
        False,
        "window",
        (),
        "The highest of the six rigid-body modes of the mount system over the window's "
        "temperatures: isolation starts at sqrt(2) times it (Harris & Piersol 2002).",
        window=lambda w: w["system_highest_mode"],
        needs_system=True,
    )
)
_register(
    IndexSpec(
        "system_worst_transmissibility",
        "worst system transmissibility",
        "-",
        False,
        "window",
        (),
        "The largest ratio of the force the mounts pass to the ground to the disturbing "
        "force, over the window's temperatures and the disturbances, from the six-degree-"
        "of-freedom forced response (Harris & Piersol 2002).",
        window=lambda w: w["system_worst_transmissibility"],
        needs_system=True,
    )
)
_register(
    IndexSpec(
        "system_mode_drift",
        "system mode drift",
        "-",
        False,
        "window",
        (),
        "The largest, over the six modes tracked by shape, of max f / min f over the "
        "window's temperatures: how far the system's modes wander with temperature.",
        window=lambda w: w["system_mode_drift"],
        needs_system=True,
    )
)
_register(
    IndexSpec(
        "damping_span",
        "damping temperature span",
        "K",
        True,
        "window",
        (),
        "Width of the temperature range inside the window where eta >= the chosen "
        "threshold at the design frequency (1 K resolution).",
        window=lambda w: damping_span(
            w["path_temperatures"], w["path_loss_factor"], w["eta_threshold"]
        ),
    )
)
_register(
    IndexSpec(
        "beam_damping",
        "beam damping index (eta E)^1/2 / rho",
        "MPa^0.5 m3/kg",
        True,
        "point",
        ("density",),
        "A beam of given length and mass driven at resonance vibrates with amplitude "
        "~ F / (eta k); k ~ E I / L^3 ~ E A^2 and A = m / (rho L), so the amplitude "
        "~ rho^2 / (eta E): minimised by maximising (eta E)^(1/2) / rho. Same scaling as "
        "the stiffness index E^(1/2)/rho of Ashby (2005), with E replaced by eta E.",
        point=_beam,
    )
)
_register(
    IndexSpec(
        "plate_damping",
        "plate damping index (eta E)^1/3 / rho",
        "MPa^(1/3) m3/kg",
        True,
        "point",
        ("density",),
        "A panel of given area and mass: k ~ E t^3 with t = m / (rho area), so the "
        "resonant amplitude ~ rho^3 / (eta E): maximise (eta E)^(1/3) / rho (Ashby 2005 "
        "scaling, with E replaced by eta E).",
        point=_plate,
    )
)
_register(
    IndexSpec(
        "beam_damping_per_cost",
        "beam damping per cost (eta E)^1/2 / (rho price)",
        "MPa^0.5 m3/currency",
        True,
        "point",
        ("density", "price"),
        "The beam damping index per unit material cost: cost of the beam = m * price.",
        point=lambda q: _beam(q) / q["price"],
    )
)
_register(
    IndexSpec(
        "plate_damping_per_cost",
        "plate damping per cost (eta E)^1/3 / (rho price)",
        "MPa^(1/3) m3/currency",
        True,
        "point",
        ("density", "price"),
        "The plate damping index per unit material cost.",
        point=lambda q: _plate(q) / q["price"],
    )
)


def custom_index(
    name: str, formula_text: str, higher_is_better: bool = True, label: str | None = None
) -> IndexSpec:
    """A point index from a formula over :data:`QUANTITIES` (see :mod:`engine.physics.formula`)."""
    if not name or not name.replace("_", "").isalnum():
        raise CriteriaError(f"custom index name '{name}' must be letters, digits and '_'")
    if name in BUILT_IN:
        raise CriteriaError(f"'{name}' is a built-in index; give the custom index another name")
    formula = parse_formula(formula_text, QUANTITIES)
    needs = tuple(n for n in ("density", "price", "hardness") if n in formula.names)
    return IndexSpec(
        name,
        label or name,
        "",
        higher_is_better,
        "point",
        needs,
        f"custom formula: {formula_text}",
        point=formula.evaluate,
        formula=formula,
    )


def resolve(name: str) -> IndexSpec:
    try:
        return BUILT_IN[name]
    except KeyError:
        raise CriteriaError(
            f"unknown merit index '{name}'; built-in indices: {', '.join(BUILT_IN)}"
        ) from None


def aggregate(values: np.ndarray, how: str, higher_is_better: bool, share=None) -> np.ndarray:
    """Reduce (grades, points) values over the points axis.

    ``worst`` is the minimum for a higher-is-better index and the maximum otherwise;
    ``best`` the reverse; ``weighted`` uses the duty-point shares.
    """
    if how not in AGGREGATES:
        raise CriteriaError(f"unknown aggregation '{how}'; use one of {', '.join(AGGREGATES)}")
    with np.errstate(invalid="ignore"):
        if how == "mean":
            return np.mean(values, axis=1)
        if how == "weighted":
            if share is None:
                raise CriteriaError("the 'weighted' aggregation needs duty points in the window")
            return values @ share
        low = how == "worst" if higher_is_better else how == "best"
        return np.min(values, axis=1) if low else np.max(values, axis=1)


def damping_span(path_temperatures, path_loss_factor, threshold: float) -> np.ndarray:
    """Width [K] of the temperature range where eta >= ``threshold`` (per grade).

    ``path_loss_factor`` has shape (grades, temperatures) on a uniform grid.
    """
    t = np.asarray(path_temperatures, dtype=float)
    if t.size < 2:
        return np.zeros(path_loss_factor.shape[0])
    step = t[1] - t[0]
    return np.sum(path_loss_factor >= threshold, axis=1) * step
