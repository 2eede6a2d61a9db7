"""A machine on N rubber mounts in six degrees of freedom, for one grade at a time.

The case (:class:`MountSystem`) is the body (mass, inertia tensor about its centre of
gravity, centre-of-gravity position), its mounts (position, compression axis, pad area
and rubber thickness, optional shape factor and k) and the disturbances (a force and/or
moment at a point, at Hz or rpm with harmonic orders). :func:`solve_system` reads each
mount's three principal stiffnesses from the grade's master curve at every window
temperature, each mode at its own frequency, and reports the six modes, their
kinetic-energy fractions, the force through each mount under each disturbance and a
verdict.

Each mount: compression along its axis with Ec = E'(1 + 2 k S^2) (Gent & Lindley 1959)
in series with the bulk modulus, 1/Ec,eff = 1/Ec + 1/K (the same K as the one-pad mount
check, :mod:`engine.curves.mountcheck`), shear across it with G'; complex,
k* = k'(1 + i eta) with the rubber's loss factor, as the one-pad check takes them.

Axes: x, y in the mount plane, z up; roll is rotation about x, pitch about y, yaw about
z (the naming used in the reasons).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from engine.base.errors import CriteriaError, reject_unknown
from engine.curves.bank import CurveBank
from engine.curves.mastercurve import MasterCurve
from engine.curves.mountcheck import (
    DEFAULT_SIZING_TEMP_C,
    MAX_HARMONIC,
    SHAPES,
    grade_k_factors,
)
from engine.curves.window import poisson_or_default
from engine.physics import mount
from engine.physics import rigidbody as rb

__all__ = [
    "DEFAULT_SYSTEM_DISTURBANCE_HZ",
    "EXAMPLE_CASE",
    "MODE_NAMES",
    "Disturbance",
    "SystemMount",
    "MountSystem",
    "SystemResult",
    "solve_system",
]

DEFAULT_SYSTEM_DISTURBANCE_HZ = 24.7  # as the one-pad mount check's default disturbance
MODE_NAMES = {"x": "lateral x", "y": "lateral y", "z": "bounce", "rx": "roll", "ry": "pitch"}
MODE_NAMES["rz"] = "yaw"
# A mode is named after each axis holding at least this share of its kinetic energy.
COUPLED_SHARE = 0.2
MAX_ITERATIONS = 50
FREQUENCY_TOLERANCE = 1e-7  # relative change of every mode's frequency between passes
MAX_MOUNTS = 64
MODES_NAMED = 2  # modes named in a failing system's reasons, the closest first


# An example case: a 180 kg skid, centre of gravity 250 mm above four pads at its corners,
# excited by an out-of-balance force at its shaft, 1480 rpm and twice that.
EXAMPLE_CASE = {
    "mass_kg": 180.0,
    "inertia_kgm2": [[12.0, 0.0, 0.0], [0.0, 18.0, 0.0], [0.0, 0.0, 25.0]],
    "cg_m": [0.0, 0.0, 0.25],
    "mounts": [
        {"position_m": [x, y, 0.0], "area_mm2": 600.0, "thickness_mm": 25.0}
        for x in (-0.4, 0.4)
        for y in (-0.3, 0.3)
    ],
    "disturbances": [
        {
            "force_N": [0.0, 0.0, 100.0],
            "point_m": [0.1, 0.0, 0.3],
            "rpm": [1480.0],
            "harmonics": [1, 2],
        }
    ],
}


def _vector(value, name: str, size: int = 3) -> tuple[float, ...]:
    if not isinstance(value, list | tuple) or len(value) != size:
        raise CriteriaError(f"{name} must be a list of {size} numbers, not {value!r}")
    out = []
    for v in value:
        if isinstance(v, bool) or not isinstance(v, int | float) or not np.isfinite(v):
            raise CriteriaError(f"{name} must be a list of {size} finite numbers, not {value!r}")
        out.append(float(v))
    return tuple(out)


def _positive(value, name: str) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise CriteriaError(f"{name} must be a positive number, not {value!r}")
    if not (np.isfinite(value) and value > 0):
        raise CriteriaError(f"{name} must be a positive number, not {value!r}")
    return float(value)


@dataclass(frozen=True)
class SystemMount:
    """One mount: position [m] (in the case's axes), compression axis, pad area [mm2] and
    rubber thickness [mm]; shape factor and Gent-Lindley k from the pad and the hardness
    unless given."""

    position_m: tuple[float, float, float]
    area_mm2: float
    thickness_mm: float
    axis: tuple[float, float, float] = (0.0, 0.0, 1.0)
    shape: str = "disc"
    shape_factor: float | None = None
    k_factor: float | None = None

    @classmethod
    def from_dict(cls, data, where: str) -> SystemMount:
        if not isinstance(data, dict):
            raise CriteriaError(f"{where} must be a mapping of mount settings, not {data!r}")
        known = {"position_m", "axis", "area_mm2", "thickness_mm", "shape"}
        reject_unknown(data, known | {"shape_factor", "k_factor"}, f"{where} setting(s)")
        for key in ("position_m", "area_mm2", "thickness_mm"):
            if key not in data:
                raise CriteriaError(f"{where} needs {key}")
        axis = _vector(data.get("axis", [0.0, 0.0, 1.0]), f"{where} axis")
        if np.linalg.norm(axis) == 0:
            raise CriteriaError(f"{where} axis must not be zero")
        shape = data.get("shape", "disc")
        if shape not in SHAPES:
            raise CriteriaError(f"{where} shape '{shape}' is not one of {', '.join(SHAPES)}")
        optional = {
            k: _positive(data[k], f"{where} {k}") if data.get(k) is not None else None
            for k in ("shape_factor", "k_factor")
        }
        return cls(
            position_m=_vector(data["position_m"], f"{where} position_m"),  # type: ignore[arg-type]
            area_mm2=_positive(data["area_mm2"], f"{where} area_mm2"),
            thickness_mm=_positive(data["thickness_mm"], f"{where} thickness_mm"),
            axis=axis,  # type: ignore[arg-type]
            shape=shape,
            **optional,
        )

    def pad_shape_factor(self) -> float:
        if self.shape_factor is not None:
            return self.shape_factor
        h = self.thickness_mm * 1e-3
        area = self.area_mm2 * 1e-6
        if self.shape == "disc":
            return float(mount.shape_factor_disc(np.sqrt(4.0 * area / np.pi), h))
        side = np.sqrt(area)
        return float(mount.shape_factor_block(side, side, h))


@dataclass(frozen=True)
class Disturbance:
    """A harmonic force [N] and/or moment [N m] applied at ``point_m`` (the centre of
    gravity when None), at each frequency [Hz] and each speed [rpm] times each order."""

    force_N: tuple[float, float, float] = (0.0, 0.0, 1.0)
    moment_Nm: tuple[float, float, float] = (0.0, 0.0, 0.0)
    point_m: tuple[float, float, float] | None = None
    frequency_Hz: tuple[float, ...] = (DEFAULT_SYSTEM_DISTURBANCE_HZ,)
    rpm: tuple[float, ...] = ()
    harmonics: tuple[int, ...] = (1,)

    @classmethod
    def from_dict(cls, data, where: str) -> Disturbance:
        if not isinstance(data, dict):
            raise CriteriaError(f"{where} must be a mapping, not {data!r}")
        known = {"force_N", "moment_Nm", "point_m", "frequency_Hz", "rpm", "harmonics"}
        reject_unknown(data, known, f"{where} setting(s)")
        out: dict = {}
        if "force_N" in data or "moment_Nm" in data:
            out["force_N"] = _vector(data.get("force_N", [0, 0, 0]), f"{where} force_N")
            out["moment_Nm"] = _vector(data.get("moment_Nm", [0, 0, 0]), f"{where} moment_Nm")
        if data.get("point_m") is not None:
            out["point_m"] = _vector(data["point_m"], f"{where} point_m")
        for key in ("frequency_Hz", "rpm"):
            if key in data:
                values = data[key] if isinstance(data[key], list | tuple) else [data[key]]
                out[key] = tuple(_positive(v, f"{where} {key}") for v in values)
        if out.get("rpm") and "frequency_Hz" not in out:
            out["frequency_Hz"] = ()
        if "harmonics" in data:
            orders = (
                data["harmonics"] if isinstance(data["harmonics"], list) else [data["harmonics"]]
            )
            bad = [h for h in orders if isinstance(h, bool) or not isinstance(h, int)]
            if bad or not orders or any(not 1 <= h <= MAX_HARMONIC for h in orders):
                raise CriteriaError(
                    f"{where} harmonics must be whole numbers from 1 to {MAX_HARMONIC}, "
                    f"not {data['harmonics']!r}"
                )
            out["harmonics"] = tuple(orders)
        found = cls(**out)
        if not found.frequencies:
            raise CriteriaError(f"{where} needs a frequency_Hz or an rpm")
        if not (np.any(found.force_N) or np.any(found.moment_Nm)):
            raise CriteriaError(f"{where} needs a non-zero force_N or moment_Nm")
        return found

    @property
    def frequencies(self) -> tuple[float, ...]:
        """Every frequency checked [Hz]: each Hz and rpm/60 times each order, sorted."""
        base = [*self.frequency_Hz, *(r / 60.0 for r in self.rpm)]
        return tuple(sorted({b * h for b in base for h in self.harmonics}))


@dataclass(frozen=True)
class MountSystem:
    """A rigid body on N mounts (see the module notes). Lengths [m], masses [kg]."""

    mass_kg: float
    inertia_kgm2: tuple[tuple[float, float, float], ...]
    cg_m: tuple[float, float, float]
    mounts: tuple[SystemMount, ...]
    disturbances: tuple[Disturbance, ...] = (Disturbance(),)
    min_frequency_ratio: float = float(np.sqrt(2.0))

    def __post_init__(self) -> None:
        if not self.mounts:
            raise CriteriaError("a mount system needs at least one mount")
        if len(self.mounts) > MAX_MOUNTS:
            raise CriteriaError(f"a mount system has at most {MAX_MOUNTS} mounts")
        try:
            rb.mass_matrix(self.mass_kg, self.inertia_kgm2)
        except ValueError as exc:
            raise CriteriaError(f"mount system: {exc}") from None

    @classmethod
    def from_dict(cls, data) -> MountSystem:
        if not isinstance(data, dict):
            raise CriteriaError(f"a mount-system case must be a mapping, not {data!r}")
        known = {"mass_kg", "inertia_kgm2", "cg_m", "mounts", "disturbances"}
        reject_unknown(data, known | {"min_frequency_ratio"}, "mount-system setting(s)")
        for key in ("mass_kg", "inertia_kgm2", "cg_m", "mounts"):
            if key not in data:
                raise CriteriaError(f"the mount-system case needs {key}")
        rows = data["inertia_kgm2"]
        if not isinstance(rows, list | tuple) or len(rows) != 3:
            raise CriteriaError("inertia_kgm2 must be 3 rows of 3 numbers [kg m2]")
        inertia = tuple(_vector(r, f"inertia_kgm2 row {i + 1}") for i, r in enumerate(rows))
        mounts = data["mounts"]
        if not isinstance(mounts, list) or not mounts:
            raise CriteriaError("mounts must be a non-empty list")
        if len(mounts) > MAX_MOUNTS:
            raise CriteriaError(f"a mount system has at most {MAX_MOUNTS} mounts")
        found = tuple(SystemMount.from_dict(m, f"mount {i + 1}") for i, m in enumerate(mounts))
        extra: dict = {}
        if data.get("disturbances") is not None:
            dist = data["disturbances"]
            if not isinstance(dist, list) or not dist:
                raise CriteriaError("disturbances must be a non-empty list")
            extra["disturbances"] = tuple(
                Disturbance.from_dict(d, f"disturbance {i + 1}") for i, d in enumerate(dist)
            )
        if data.get("min_frequency_ratio") is not None:
            extra["min_frequency_ratio"] = _positive(
                data["min_frequency_ratio"], "min_frequency_ratio"
            )
        return cls(
            mass_kg=_positive(data["mass_kg"], "mass_kg"),
            inertia_kgm2=inertia,  # type: ignore[arg-type]
            cg_m=_vector(data["cg_m"], "cg_m"),  # type: ignore[arg-type]
            mounts=found,
            **extra,
        )

    def to_dict(self) -> dict:
        """The case-file form (:meth:`from_dict` reads it back)."""

        def mount_entry(m: SystemMount) -> dict:
            entry = {
                "position_m": list(m.position_m),
                "axis": list(m.axis),
                "area_mm2": m.area_mm2,
                "thickness_mm": m.thickness_mm,
                "shape": m.shape,
            }
            entry.update(
                {
                    k: getattr(m, k)
                    for k in ("shape_factor", "k_factor")
                    if getattr(m, k) is not None
                }
            )
            return entry

        def dist_entry(d: Disturbance) -> dict:
            entry = {
                "force_N": list(d.force_N),
                "moment_Nm": list(d.moment_Nm),
                "frequency_Hz": list(d.frequency_Hz),
                "rpm": list(d.rpm),
                "harmonics": list(d.harmonics),
            }
            if d.point_m is not None:
                entry["point_m"] = list(d.point_m)
            return entry

        return {
            "mass_kg": self.mass_kg,
            "inertia_kgm2": [list(r) for r in self.inertia_kgm2],
            "cg_m": list(self.cg_m),
            "mounts": [mount_entry(m) for m in self.mounts],
            "disturbances": [dist_entry(d) for d in self.disturbances],
            "min_frequency_ratio": self.min_frequency_ratio,
        }

    @property
    def mass_matrix(self) -> np.ndarray:
        return rb.mass_matrix(self.mass_kg, self.inertia_kgm2)

    @property
    def positions(self) -> np.ndarray:
        """Mount positions from the centre of gravity [m], (N, 3)."""
        return np.array([m.position_m for m in self.mounts]) - np.asarray(self.cg_m)

    @property
    def axes(self) -> np.ndarray:
        return np.array([m.axis for m in self.mounts], dtype=float)

    def load(self, d: Disturbance) -> np.ndarray:
        """The disturbance as (Fx, Fy, Fz, Mx, My, Mz) about the centre of gravity."""
        force = np.asarray(d.force_N, dtype=float)
        moment = np.asarray(d.moment_Nm, dtype=float)
        if d.point_m is not None:
            moment = moment + np.cross(np.asarray(d.point_m) - np.asarray(self.cg_m), force)
        return np.concatenate([force, moment])


def mode_name(fractions: np.ndarray) -> str:
    """'bounce', 'roll', or 'lateral x + pitch' for a coupled mode: each axis with at least
    `COUPLED_SHARE` of the mode's kinetic energy, largest first."""
    order = np.argsort(-fractions)
    parts = [MODE_NAMES[rb.DOF_NAMES[i]] for i in order if fractions[i] >= COUPLED_SHARE]
    return " + ".join(parts[:2]) if parts else MODE_NAMES[rb.DOF_NAMES[int(order[0])]]


def _mac(a: np.ndarray, b: np.ndarray, mass: np.ndarray) -> np.ndarray:
    """Mass-weighted modal assurance criterion between the columns of a and b."""
    cross = a.T @ mass @ b
    return cross**2 / np.outer(np.diag(a.T @ mass @ a), np.diag(b.T @ mass @ b))


@dataclass
class SystemResult:
    """Per window temperature (first axis) unless said otherwise."""

    temperatures: np.ndarray  # [degC]
    frequencies: np.ndarray  # (T, 6) [Hz], ascending at each temperature
    shapes: np.ndarray  # (T, 6 dof, 6 modes), mass-normalised, columns in that order
    energy: np.ndarray  # (T, 6 modes, 6 dof) kinetic-energy fractions
    names: list[list[str]]  # (T, 6) mode names
    track: np.ndarray  # (T, 6): column of each tracked mode (tracked from the first T)
    disturbance_frequencies: list[np.ndarray]  # per disturbance [Hz]
    mount_forces: list[np.ndarray]  # per disturbance: (T, F, N mounts) amplitude [N]
    transmissibility: list[np.ndarray]  # per disturbance: (T, F)
    extrapolated: np.ndarray  # (T,)
    elastic_centres: np.ndarray | None = None  # (T, 3) [m], in the case's axes
    notes: list[str] = field(default_factory=list)
    min_frequency_ratio: float = float(np.sqrt(2.0))

    @property
    def highest_mode(self) -> float:
        return float(np.nanmax(self.frequencies))

    @property
    def worst_transmissibility(self) -> float:
        values = [np.nanmax(t) for t in self.transmissibility if t.size]
        return float(max(values)) if values else float("nan")

    def mode_drift(self) -> np.ndarray:
        """max f / min f of each tracked mode over the temperatures, (6,)."""
        rows = np.take_along_axis(self.frequencies, self.track, axis=1)
        return np.nanmax(rows, axis=0) / np.nanmin(rows, axis=0)

    def failures(self) -> list[str]:
        """Plain reasons: each mode within the frequency ratio of a disturbance (the worst
        place per mode) and a transmissibility of 1 or more."""
        out = []
        ratio = self.min_frequency_ratio
        ratio_text = "√2" if abs(ratio - np.sqrt(2.0)) < 1e-9 else f"{ratio:g}x"
        f_all = np.unique(np.concatenate(self.disturbance_frequencies))
        n_t = len(self.temperatures)
        found: list[tuple[float, str]] = []
        for j in range(6):
            col = self.track[:, j]
            fm = self.frequencies[np.arange(n_t), col]
            with np.errstate(divide="ignore", invalid="ignore"):
                r = f_all[None, :] / fm[:, None]  # disturbance over mode frequency
            if not (r < ratio).any():
                continue
            i, k = np.unravel_index(int(np.nanargmin(r)), r.shape)  # the worst place
            name = self.names[i][col[i]]
            if r[i, k] >= 1.0:
                where = f"within {ratio_text} of {f_all[k]:.3g} Hz"
            else:
                where = f"above the disturbance at {f_all[k]:.3g} Hz"
            found.append(
                (
                    abs(np.log(r[i, k])),
                    f"{name} mode {fm[i]:.3g} Hz at {self.temperatures[i]:g} °C, {where} "
                    f"(f/fn = {r[i, k]:.2f})",
                )
            )
        out = [text for _, text in sorted(found)]
        if len(out) > MODES_NAMED:
            out = out[:MODES_NAMED] + [
                f"{len(out) - MODES_NAMED} more mode(s) too close or too stiff"
            ]
        worst = self.worst_transmissibility
        if np.isfinite(worst) and worst >= 1.0:
            for d, t in enumerate(self.transmissibility):
                if t.size and np.nanmax(t) == worst:
                    i, k = np.unravel_index(int(np.nanargmax(t)), t.shape)
                    f = self.disturbance_frequencies[d][k]
                    out.append(
                        f"amplifies disturbance {d + 1}: T = {worst:.2f} at {f:.3g} Hz, "
                        f"{self.temperatures[i]:g} °C"
                    )
                    break
        return out

    @property
    def passes(self) -> bool:
        return not self.failures()

    def to_dict(self) -> dict:
        results = []
        for i, t in enumerate(self.temperatures):
            modes = [
                {
                    "frequency_Hz": float(self.frequencies[i, j]),
                    "name": self.names[i][j],
                    "energy_fractions": {
                        n: float(self.energy[i, j, d]) for d, n in enumerate(rb.DOF_NAMES)
                    },
                    "shape": [float(v) for v in self.shapes[i, :, j]],
                }
                for j in range(6)
            ]
            forced = [
                {
                    "frequency_Hz": [float(f) for f in self.disturbance_frequencies[d]],
                    "transmissibility": [float(v) for v in self.transmissibility[d][i]],
                    "mount_forces_N": [[float(v) for v in row] for row in self.mount_forces[d][i]],
                }
                for d in range(len(self.transmissibility))
            ]
            results.append(
                {
                    "temp_C": float(t),
                    "natural_frequencies_Hz": [float(f) for f in self.frequencies[i]],
                    "modes": modes,
                    "disturbances": forced,
                    "extrapolated": bool(self.extrapolated[i]),
                }
            )
        return {
            "results": results,
            "verdict": "passes" if self.passes else "fails",
            "reasons": self.failures(),
            "highest_mode_Hz": self.highest_mode,
            "worst_transmissibility": self.worst_transmissibility,
            "mode_drift": [float(v) for v in self.mode_drift()],
            "notes": list(self.notes),
        }


class _Pads:
    """Each mount's complex axial and shear stiffness from the grade's moduli."""

    def __init__(self, system: MountSystem, curve: MasterCurve, catalog: Mapping, notes: list):
        self.curve = curve
        nu = catalog.get("poisson_ratio")
        self.nu = float(poisson_or_default(np.nan if nu is None else nu))
        self.to_tensile = 2.0 * (1.0 + self.nu) if curve.mode == "shear" else 1.0
        mounts = system.mounts
        self.area = np.array([m.area_mm2 for m in mounts]) * 1e-6
        self.h = np.array([m.thickness_mm for m in mounts]) * 1e-3
        self.s = np.array([m.pad_shape_factor() for m in mounts])
        hardness = catalog.get("hardness")
        hard = np.array([np.nan if hardness is None else float(hardness)])
        said: dict[str, list[str]] = {}

        def read_modulus() -> np.ndarray:
            f = 1.0 / (2.0 * np.pi * 3.0)  # a durometer read after 3 s (ISO 7619-1)
            return np.array([float(curve.evaluate(DEFAULT_SIZING_TEMP_C, f).storage_modulus)])

        k_grade = float(grade_k_factors(hard, None, ["grade"], said, read_modulus)[0])
        notes.extend(said.get("grade", []))
        self.k = np.array([k_grade if m.k_factor is None else m.k_factor for m in mounts])
        bulk = catalog.get("bulk_modulus")
        self.bulk_mpa = np.nan if bulk is None else float(bulk)
        if self.bulk_mpa != self.bulk_mpa and not self.nu < 0.5:
            notes.append(
                f"bulk modulus not in the catalog: K = {mount.DEFAULT_BULK_MODULUS_PA * 1e-6:g} "
                "MPa assumed (common practice)"
            )

    def stiffness(self, temp: float, freqs: np.ndarray):
        """(axial, shear) complex stiffness [N/m], each (len(freqs), N mounts), and
        whether any modulus read was extrapolated."""
        p = self.curve.evaluate(np.full(freqs.shape, temp), freqs)
        own = np.asarray(p.storage_modulus, dtype=float)[:, None]
        eta = np.asarray(p.loss_factor, dtype=float)[:, None]
        e = own * self.to_tensile
        g = e / (2.0 * (1.0 + self.nu))
        ec = e * (1.0 + 2.0 * self.k * self.s**2)
        k_bulk = mount.bulk_modulus_for_grade(self.bulk_mpa, self.nu, e).value
        ec_eff = ec / (1.0 + ec / k_bulk)  # as the one-pad mount check takes it
        axial = ec_eff * (1.0 + 1j * eta) * self.area / self.h
        shear = g * (1.0 + 1j * eta) * self.area / self.h
        return axial, shear, bool(np.any(p.extrapolated))


def solve_system(
    curve: MasterCurve,
    catalog: Mapping,
    system: MountSystem,
    temperatures,
) -> SystemResult:
    """The six modes and the forced response of ``system`` on pads of one grade.

    Parameters
    ----------
    curve : MasterCurve
        The grade's master curve (E' or G' in its own mode).
    catalog : mapping
        The grade's ``poisson_ratio``, ``hardness`` [Shore A] and ``bulk_modulus`` [MPa]
        (None where blank).
    system : MountSystem
        Body, mounts and disturbances.
    temperatures : array [degC]
        Window temperatures.

    Notes
    -----
    At each temperature every mode's frequency is iterated with the stiffness taken at
    that mode's own frequency: the eigenproblem (scipy.linalg.eigh) of K'(f_j) gives
    the mode j that matches the previous shape best (mass-weighted MAC), until no
    frequency changes by more than `FREQUENCY_TOLERANCE`. Modes are tracked across
    temperatures by shape in the same way. The forced response at each disturbance
    frequency f uses K*(f) for every mount: ``(K* - (2 pi f)^2 M) q = F``; the force
    through mount i is ``|K*_i A_i q|``, the transmissibility the resultant force on the
    ground over the applied force (or the resultant moment about the centre of gravity
    over the applied moment when only a moment is applied). Harris & Piersol (2002).
    """
    temps = np.atleast_1d(np.asarray(temperatures, dtype=float))
    notes: list[str] = []
    pads = _Pads(system, curve, catalog, notes)
    mass = system.mass_matrix
    pos, axes = system.positions, system.axes
    n_t = temps.size
    freqs = np.zeros((n_t, 6))
    shapes = np.zeros((n_t, 6, 6))
    energy = np.zeros((n_t, 6, 6))
    names: list[list[str]] = []
    track = np.zeros((n_t, 6), dtype=int)
    extrap = np.zeros(n_t, dtype=bool)
    reference: np.ndarray | None = None
    unconverged = []
    centres = np.zeros((n_t, 3))

    bases = rb.mount_bases(pos, axes)

    def modes_at(temp: float, f: np.ndarray):
        axial, shear, x = pads.stiffness(temp, f)
        stack = rb.solve_modes(rb.stiffness_matrix(pos, axes, axial, shear, bases), mass)
        found = [rb.Modes(f, v) for f, v in zip(stack.frequencies, stack.shapes, strict=True)]
        return [_canonical(m, mass) for m in found], x

    for i, temp in enumerate(temps):
        (start,), x0 = modes_at(temp, np.array([10.0]))
        guess_f = np.where(start.frequencies > 0, start.frequencies, 1.0)
        guess_shapes = start.shapes
        converged = False
        for _ in range(MAX_ITERATIONS):
            solved, x = modes_at(temp, guess_f)
            new_f, new_shapes = np.empty(6), np.empty((6, 6))
            for j, found in enumerate(solved):
                mac = _mac(guess_shapes[:, [j]], found.shapes, mass)[0]
                k = int(np.argmax(mac))
                new_f[j] = found.frequencies[k]
                shape = found.shapes[:, k]
                new_shapes[:, j] = shape if shape @ mass @ guess_shapes[:, j] >= 0 else -shape
            change = np.max(np.abs(new_f - guess_f) / np.maximum(guess_f, 1e-12))
            guess_f, guess_shapes = np.where(new_f > 0, new_f, 1e-6), new_shapes
            if change < FREQUENCY_TOLERANCE:
                converged = True
                break
        if not converged:
            unconverged.append(temp)
        extrap[i] = x0 or x
        # the mounts' elastic centre at this temperature, the storage stiffness taken at
        # the mean mode frequency
        a_c, s_c, _ = pads.stiffness(temp, np.array([float(np.mean(guess_f))]))
        centres[i] = rb.elastic_centre(pos, axes, a_c[0].real, s_c[0].real) + system.cg_m
        order = np.argsort(guess_f)
        freqs[i] = guess_f[order]
        shapes[i] = guess_shapes[:, order]
        energy[i] = np.array([rb.energy_fractions(shapes[i][:, j], mass) for j in range(6)])
        names.append([mode_name(energy[i, j]) for j in range(6)])
        if reference is None:
            track[i] = np.arange(6)
        else:
            mac = _mac(reference, shapes[i], mass)
            track[i] = _assign(mac)
        reference = shapes[i][:, track[i]]
    if unconverged:
        notes.append(
            "mode frequencies did not settle within "
            f"{MAX_ITERATIONS} passes at {', '.join(f'{t:g}' for t in unconverged)} °C"
        )
    forces, trans, dist_f = [], [], []
    for d in system.disturbances:
        f = np.asarray(d.frequencies, dtype=float)
        load = system.load(d)
        by_force = bool(np.any(d.force_N))
        applied = np.linalg.norm(load[:3] if by_force else load[3:])
        fm = np.zeros((n_t, f.size, len(system.mounts)))
        tm = np.zeros((n_t, f.size))
        for i, temp in enumerate(temps):
            axial, shear, x = pads.stiffness(temp, f)
            extrap[i] |= x
            stack = rb.stiffness_matrix(pos, axes, axial, shear, bases)
            for k in range(f.size):
                kk = stack[k]
                q = rb.forced_response(kk, mass, f[k], load)
                total = np.zeros(6, dtype=complex)
                for m, (r, a) in enumerate(zip(pos, axes, strict=True)):
                    k3 = rb.mount_stiffness_3x3(a, axial[k, m], shear[k, m])
                    force = k3 @ (rb.motion_matrix(r) @ q)
                    fm[i, k, m] = float(np.linalg.norm(np.abs(force)))
                    total[:3] += force
                    total[3:] += np.cross(r, force)
                tm[i, k] = float(
                    np.linalg.norm(np.abs(total[:3] if by_force else total[3:])) / applied
                )
        forces.append(fm)
        trans.append(tm)
        dist_f.append(f)
    return SystemResult(
        temperatures=temps,
        frequencies=freqs,
        shapes=shapes,
        energy=energy,
        names=names,
        track=track,
        disturbance_frequencies=dist_f,
        mount_forces=forces,
        transmissibility=trans,
        extrapolated=extrap,
        elastic_centres=centres,
        notes=notes,
        min_frequency_ratio=system.min_frequency_ratio,
    )


def _assign(mac: np.ndarray) -> np.ndarray:
    """For each reference mode (row), the column of the best-matching new mode, each
    column used once (scipy's linear-sum assignment on the MAC)."""
    from scipy.optimize import linear_sum_assignment

    rows, cols = linear_sum_assignment(-mac)
    out = np.empty(mac.shape[0], dtype=int)
    out[rows] = cols
    return out


# Modes whose frequencies agree to this relative tolerance are one degenerate set.
DEGENERATE = 1e-6


def _canonical(modes: rb.Modes, mass: np.ndarray) -> rb.Modes:
    """The same modes, with each set of equal frequencies (a symmetric layout's twin
    lateral modes, say) turned within its subspace to lie as close to single axes as it
    can (any basis of such a subspace is a valid set of mode shapes)."""
    f, v = modes.frequencies, modes.shapes.copy()
    j = 0
    while j < 6:
        end = j + 1
        while end < 6 and abs(f[end] - f[j]) <= DEGENERATE * max(f[j], 1e-12):
            end += 1
        if end - j > 1:
            block = v[:, j:end]
            weight = np.sum(block * (mass @ block), axis=1)  # each dof's share
            dofs = np.sort(np.argsort(-weight)[: end - j])
            target = np.eye(6)[:, dofs]
            u, _, wt = np.linalg.svd(block.T @ mass @ target)
            v[:, j:end] = block @ (u @ wt)
        j = end
    return rb.Modes(f, v)


class _GradeProps:
    def __init__(self, storage, loss, extrapolated):
        self.storage_modulus = storage
        self.loss_factor = loss / storage
        self.extrapolated = extrapolated


class BankGrade:
    """One grade of a curve bank read like a master curve (``mode``, ``evaluate``)."""

    def __init__(self, bank: CurveBank, k: int):
        self.bank, self.k = bank, k
        self.mode = str(bank.modes[k])

    def evaluate(self, temperature, frequency) -> _GradeProps:
        t, f = np.broadcast_arrays(
            np.asarray(temperature, dtype=float), np.asarray(frequency, dtype=float)
        )
        shape = t.shape
        t, f = t.reshape(1, -1), f.reshape(1, -1)  # the bank works on (grades, points)
        g = np.full(t.shape, self.k)
        storage, loss = np.empty(t.shape), np.empty(t.shape)
        extrap = np.empty(t.shape, dtype=bool)
        shift = self.bank.shift_at(g, t)
        self.bank._evaluate_into(g, t, f, shift, storage, loss, extrap)
        return _GradeProps(storage.reshape(shape), loss.reshape(shape), extrap.reshape(shape))


def solve_systems(
    bank: CurveBank, catalog: Mapping[str, np.ndarray], system: MountSystem, temperatures
) -> list[SystemResult | str]:
    """:func:`solve_system` for every grade of ``bank`` (catalog columns ``poisson_ratio``,
    ``hardness``, ``bulk_modulus`` with one entry per grade, NaN where blank). A grade
    whose system cannot be solved gets the plain reason instead of a result."""
    out: list[SystemResult | str] = []
    for k in range(len(bank)):
        row = {
            name: (None if np.isnan(v) else float(v))
            for name in ("poisson_ratio", "hardness", "bulk_modulus")
            for v in [float(catalog[name][k])]
        }
        try:
            out.append(solve_system(BankGrade(bank, k), row, system, temperatures))  # type: ignore[arg-type]
        except (ValueError, np.linalg.LinAlgError) as exc:
            out.append(f"mount system not solved: {exc}")
    return out
