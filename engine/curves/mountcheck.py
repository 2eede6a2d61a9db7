"""Mount check of every grade over the window's temperatures, in one vectorised pass.

Composes the pad mechanics of :mod:`engine.physics.mount` with the stacked master curves of
:mod:`engine.curves.bank`: N identical pads share the supported mass; each pad is a shear pad
(k' = G'A/h) or a compression pad (k' = Ec,eff A/h, Ec = E'(1 + 2kS^2) in series with the
bulk modulus); stiffness and loss factor follow the master curve in frequency and
temperature, static deflection and sag the creep compliance. Each grade gets a verdict
against the limits of :func:`check_mounts`.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import asdict, dataclass
from functools import cached_property

import numpy as np

from engine.base.blocks import in_blocks, per_worker
from engine.base.errors import CriteriaError, reject_unknown
from engine.curves.amplitude import amplitude_corrections
from engine.curves.bank import CurveBank
from engine.curves.window import poisson_or_default
from engine.physics import mount

LAYOUTS = ("shear", "compression")
SHAPES = ("disc", "square")
STATIC_LOAD_TIME_S = 10.0  # time over which the static load is applied (common practice)
DEFAULT_SERVICE_LIFE_H = 1000.0
DEFAULT_SIZING_TEMP_C = 23.0  # laboratory standard atmosphere, ISO 23529
SLENDER_SHAPE_FACTOR = 0.5  # below this a compression pad may buckle (common practice)
THICK_SHEAR_PAD = 0.25  # rubber thickness over pad width beyond which shear pads bend
MAX_STATIC_STRAIN = 1.0  # a static strain beyond this: the pad cannot carry the load
MIN_FN_HZ = 0.1  # a natural frequency below this is no mount (static deflection ~25 m)
MIN_PAD_AREA_MM2 = 10.0  # a sized pad smaller than this: too stiff for the load and size
MIN_SIZED_AREA_FRACTION = 0.01  # ... or smaller than this share of the given area
# The isolation-mount case's default pads: each sized for fn = 10 Hz at the sizing
# temperature, well below the default disturbance of 24.7 Hz (f/fn = 2.5: about 80 %
# isolation where it holds, common practice), with 25 mm of rubber so that the static
# strain of such a soft pad stays near the compression limit.
DEFAULT_TARGET_FN_HZ = 10.0
DEFAULT_THICKNESS_MM = 25.0
MAX_HARMONIC = 20  # highest harmonic order accepted
MAX_WORKING_STRAIN = 1.0  # a dynamic strain amplitude above 100 % is no mount's working range
FALLBACK_K_FACTOR = 0.73  # Gent & Lindley table at 50 Shore A, used when hardness is unknown


@dataclass(frozen=True)
class MountDesign:
    """Inputs of a mount check. ``mass_kg`` is the total mass shared by ``mounts`` pads.

    Geometry is per pad: loaded area [mm2] and rubber thickness [mm]. For a compression
    pad the shape factor is ``shape_factor`` when given, else that of a ``shape`` ("disc"
    or "square") of the given area. ``target_fn_Hz`` switches on sizing: each grade's pad
    area is chosen to put fn at the target at ``sizing_temp_C``.

    Parameters
    ----------
    layout : str
        "compression" or "shear".
    mass_kg, mounts : float, int
        Total supported mass [kg] and the number of identical pads sharing it.
    area_mm2, thickness_mm : float
        Loaded area and rubber thickness of one pad.
    shape, shape_factor, k_factor : str, float, float
        Pad outline, or the shape factor and Gent-Lindley k directly.
    disturbance_Hz : tuple of float
        Frequencies of the disturbance the mount must isolate [Hz].
    disturbance_rpm : tuple of float
        Shaft speeds of the disturbance [rev/min]; each runs at speed / 60 Hz.
    harmonics : tuple of int
        Orders of each disturbance checked (1 the fundamental, 2 twice its frequency...).
        The frequencies checked are every disturbance (Hz and rpm) times every order.
    working_strain : float
        Dynamic strain amplitude of the pad in service [-] (0.05 for 5 %); with a
        grade's strain-amplitude sweep the check uses its stiffness and loss factor at
        this amplitude. None: the small-strain (DMA) values.
    target_fn_Hz, sizing_temp_C : float
        Size the pad area for this fn at this temperature (None: the pad area as given;
        the isolation-mount case's default pads, :func:`default_mount`, are sized).
    service_life_h : float
        Time under load for the long-term sag.

    Examples
    --------
    >>> from dataclasses import replace
    >>> skid = MountDesign(mass_kg=180.0, mounts=4, disturbance_Hz=(24.7, 49.4))
    >>> skid.mass_per_pad
    45.0
    >>> pump = MountDesign(disturbance_Hz=(), disturbance_rpm=(1480.0,), harmonics=(1, 2))
    >>> [round(f, 2) for f in pump.frequencies]
    [24.67, 49.33]
    >>> pump.disturbance_labels()
    ['24.7 Hz (1480 rpm)', '49.3 Hz (2 x 1480 rpm)']
    >>> replace(skid, mounts=0)
    Traceback (most recent call last):
    ...
    engine.base.errors.CriteriaError: number of mounts must be a whole number >= 1, not 0
    """

    layout: str = "compression"
    mass_kg: float = 180.0
    mounts: int = 4
    area_mm2: float = 2000.0
    thickness_mm: float = 10.0
    shape: str = "disc"
    shape_factor: float | None = None
    k_factor: float | None = None
    disturbance_Hz: tuple[float, ...] = (24.7,)
    disturbance_rpm: tuple[float, ...] = ()
    harmonics: tuple[int, ...] = (1,)
    working_strain: float | None = None
    target_fn_Hz: float | None = None
    sizing_temp_C: float = DEFAULT_SIZING_TEMP_C
    service_life_h: float = DEFAULT_SERVICE_LIFE_H

    def __post_init__(self) -> None:
        if self.layout not in LAYOUTS:
            raise CriteriaError(f"layout '{self.layout}' is not one of {', '.join(LAYOUTS)}")
        if self.shape not in SHAPES:
            raise CriteriaError(f"pad shape '{self.shape}' is not one of {', '.join(SHAPES)}")
        checks = {
            "mass_kg": self.mass_kg,
            "area_mm2": self.area_mm2,
            "thickness_mm": self.thickness_mm,
            "service_life_h": self.service_life_h,
        }
        for name, value in checks.items():
            if not (np.isfinite(value) and value > 0):
                raise CriteriaError(f"mount {name} must be a positive number, not {value}")
        if int(self.mounts) != self.mounts or self.mounts < 1:
            raise CriteriaError(f"number of mounts must be a whole number >= 1, not {self.mounts}")
        given = (*self.disturbance_Hz, *self.disturbance_rpm)
        if not given or not all(np.isfinite(f) and f > 0 for f in given):
            raise CriteriaError(
                "give at least one disturbance, as a positive frequency [Hz] or speed [rpm]"
            )
        if not self.harmonics or any(
            int(n) != n or not 1 <= n <= MAX_HARMONIC for n in self.harmonics
        ):
            raise CriteriaError(
                f"harmonic orders must be whole numbers from 1 to {MAX_HARMONIC}, "
                f"not {', '.join(f'{n:g}' for n in self.harmonics) or 'none'}"
            )
        if self.working_strain is not None and not (
            np.isfinite(self.working_strain) and 0 < self.working_strain <= MAX_WORKING_STRAIN
        ):
            raise CriteriaError(
                f"working strain amplitude must be above 0 and at most {MAX_WORKING_STRAIN:g} "
                f"(a fraction: 0.05 for 5 %), not {self.working_strain}"
            )
        if self.shape_factor is not None and self.shape_factor <= 0:
            raise CriteriaError("shape factor must be positive")
        if self.k_factor is not None and self.k_factor <= 0:
            raise CriteriaError("k factor must be positive")
        if self.target_fn_Hz is not None and self.target_fn_Hz <= 0:
            raise CriteriaError("target natural frequency must be positive")

    def to_dict(self) -> dict:
        d = asdict(self)
        for key in ("disturbance_Hz", "disturbance_rpm", "harmonics"):
            d[key] = list(d[key])
        return d

    def _sources(self) -> list[tuple[float, str, int]]:
        """(frequency [Hz], what it is, order) of every disturbance checked."""
        out = []
        for n in self.harmonics:
            order = int(n)
            for f in self.disturbance_Hz:
                text = f"{f:g} Hz" if order == 1 else f"{order} x {f:g} Hz"
                out.append((order * float(f), text, order))
            for r in self.disturbance_rpm:
                text = f"{r:g} rpm" if order == 1 else f"{order} x {r:g} rpm"
                out.append((order * float(r) / 60.0, text, order))
        return out

    @property
    def frequencies(self) -> tuple[float, ...]:
        """Every disturbance frequency checked [Hz], ascending, each once."""
        return tuple(sorted({f for f, _, _ in self._sources()}))

    def disturbance_labels(self) -> list[str]:
        """One label per entry of :attr:`frequencies`: the frequency and, when it is a
        harmonic or comes from a speed, what it is."""
        labels: dict[float, str] = {}
        for f, text, order in self._sources():
            if f not in labels:
                plain = order == 1 and text.endswith(" Hz")
                labels[f] = f"{f:.3g} Hz" if plain else f"{f:.3g} Hz ({text})"
        return [labels[f] for f in self.frequencies]

    @classmethod
    def from_dict(cls, data: dict) -> MountDesign:
        if not isinstance(data, dict):
            raise CriteriaError(f"mount design must be a mapping of settings, not {data!r}")
        known = set(cls.__dataclass_fields__)
        reject_unknown(data, known, "mount setting(s)")
        data = dict(data)

        def number(value) -> float:
            if isinstance(value, bool) or not isinstance(value, int | float | np.number):
                raise ValueError(f"{value!r} is not a number")
            if not np.isfinite(value):
                raise ValueError(f"{value!r} is not a finite number")
            return float(value)

        optional = ("shape_factor", "k_factor", "target_fn_Hz", "working_strain")
        if "disturbance_rpm" in data and "disturbance_Hz" not in data:
            data["disturbance_Hz"] = []  # speeds alone replace the default frequency
        for key, value in list(data.items()):
            try:
                if key in ("disturbance_Hz", "disturbance_rpm", "harmonics"):
                    values = value if isinstance(value, list | tuple) else [value]
                    data[key] = tuple(number(v) for v in values)
                    if key == "harmonics" and any(v != int(v) for v in data[key]):
                        raise ValueError(f"{value!r} are not whole numbers")
                    if key == "harmonics":
                        data[key] = tuple(int(v) for v in data[key])
                elif key == "mounts":
                    if number(value) != int(value):
                        raise ValueError(f"{value!r} is not a whole number")
                    data[key] = int(value)
                elif key in ("layout", "shape"):
                    if not isinstance(value, str):
                        raise ValueError(f"{value!r} is not text")
                elif value is not None or key not in optional:
                    data[key] = number(value)
            except ValueError as exc:
                raise CriteriaError(f"bad mount setting {key}: {exc}") from None
        return cls(**data)

    @property
    def mass_per_pad(self) -> float:
        return self.mass_kg / self.mounts


def default_mount() -> MountDesign:
    """The pads an isolation-mount case checks when it names none: 4 compression discs
    under 180 kg, 25 mm of rubber, each sized for fn = 10 Hz at 23 °C, disturbance
    24.7 Hz (the user sees them and can change each)."""
    return MountDesign(thickness_mm=DEFAULT_THICKNESS_MM, target_fn_Hz=DEFAULT_TARGET_FN_HZ)


# The words each check of the verdict (a key of MountResult.failing) names its failure
# with, the same for every grade; its reason adds the grade's figures.
CHECK_WORDS = {
    "too_stiff": "too stiff for this load and size",
    "cannot_carry": "cannot carry the load",
    "no_fn": "no natural frequency",
    "too_soft": "too soft for this load",
    "strain": "static strain",
    "stress": "compressive stress",
    "buckling": "pad would buckle",
    "isolation": "does not isolate",
}


@dataclass
class MountResult:
    """Per grade (rows) and window temperature (columns) unless said otherwise. SI units.

    The verdict of each grade (:attr:`verdict`, :meth:`reasons`) is worked out from these
    figures when first asked for, against the limits named in :func:`check_mounts`.
    """

    ids: list[str]
    temperatures: np.ndarray  # [degC]
    disturbance: np.ndarray  # [Hz]
    area: np.ndarray  # (grades,) [m2], sized or as given
    shape_factor: np.ndarray  # (grades,)
    k_factor: np.ndarray  # (grades,), NaN for shear pads (no compression modulus)
    natural_frequency: np.ndarray  # [Hz]
    converged: np.ndarray
    transmissibility: np.ndarray  # (grades, temperatures, disturbances)
    amplification: np.ndarray  # transmissibility at fn
    loss_factor_at_resonance: np.ndarray
    isolation_onset: np.ndarray  # [Hz], sqrt(2) fn (hysteretic theory)
    static_deflection: np.ndarray  # [m], after STATIC_LOAD_TIME_S under the load
    static_strain: np.ndarray  # [-]
    sag: np.ndarray  # (grades,) [m] deflection after the service life at the hottest T
    sag_strain: np.ndarray  # (grades,)
    strain_limit: float
    extrapolated: np.ndarray  # any property used at this temperature was extrapolated
    notes: dict  # grade id -> list of notes
    dynamic_to_static_ratio: np.ndarray | None = None  # k'(fn) over the static stiffness
    static_stress: np.ndarray | None = None  # (grades,) [Pa] supported weight / loaded area
    stress_limit: float | None = None  # [Pa] compressive stress limit (compression pads)
    bulk_modulus: np.ndarray | None = None  # (grades,) [Pa]; NaN from nu or in shear
    bulk_source: np.ndarray | None = None  # (grades,) mount.BULK_* tag, "" in shear
    critical_load: np.ndarray | None = None  # (grades,) [N] buckling load of one pad
    design: MountDesign | None = None

    @cached_property
    def failing(self) -> dict[str, np.ndarray]:
        """Per check of the verdict (in the order reasons are given), the grades that fail
        it: "too_stiff", "cannot_carry", "no_fn", "too_soft", "strain", "stress",
        "buckling", "isolation"."""
        n = len(self.ids)
        no = np.zeros(n, dtype=bool)
        design = self.design
        compression = design is not None and design.layout == "compression"
        with np.errstate(invalid="ignore"):
            too_stiff = no
            if design is not None and design.target_fn_Hz is not None:
                area_mm2 = self.area * 1e6
                too_stiff = (area_mm2 < MIN_PAD_AREA_MM2) | (
                    area_mm2 < MIN_SIZED_AREA_FRACTION * design.area_mm2
                )
            # An absurd sized pad fails for that alone: its strains and stresses follow.
            static = np.fmax.reduce(self.static_strain, axis=1, initial=-np.inf)
            worst = np.fmax(static, self.sag_strain)
            cannot = ~too_stiff & ~(worst <= MAX_STATIC_STRAIN)  # NaN: no stiffness
            carried = ~too_stiff & ~cannot
            fn_low = np.fmin.reduce(self.natural_frequency, axis=1, initial=np.inf)
            trans = np.where(self.converged[:, :, None], self.transmissibility, np.nan)
            t_high = np.fmax.reduce(trans.reshape(n, -1), axis=1, initial=-np.inf)
            stress = no
            if compression and self.static_stress is not None and self.stress_limit is not None:
                stress = carried & (self.static_stress > self.stress_limit)
            buckling = no
            if compression and design is not None and self.critical_load is not None:
                load = design.mass_per_pad * mount.STANDARD_GRAVITY
                buckling = carried & (load > mount.BUCKLING_LOAD_SHARE * self.critical_load)
            return {
                "too_stiff": too_stiff,
                "cannot_carry": cannot,
                "no_fn": carried & ~self.converged.all(axis=1),
                "too_soft": carried & (fn_low < MIN_FN_HZ),
                "strain": carried & (worst > self.strain_limit),
                "stress": stress,
                "buckling": buckling,
                "isolation": carried & (t_high >= 1.0),
            }

    @property
    def passes(self) -> np.ndarray:
        """True for each grade that meets every limit of the verdict."""
        failing = np.zeros(len(self.ids), dtype=bool)
        for mask in self.failing.values():
            failing |= mask
        return ~failing

    @property
    def verdict(self) -> list[str]:
        """ "passes" or "fails", per grade."""
        return ["passes" if ok else "fails" for ok in self.passes]

    @property
    def verdict_reasons(self) -> list[list[str]]:
        """The plain reasons of each grade's verdict (empty lists for the grades that pass)."""
        return [self.reasons(k) for k in range(len(self.ids))]

    def reasons(self, k: int) -> list[str]:
        """Why grade k fails, in plain words, one reason per limit it breaks."""
        fails = [name for name, mask in self.failing.items() if mask[k]]
        return [self.reason(name, k) for name in fails]

    @cached_property
    def _largest_static(self) -> np.ndarray:
        """Per grade, the column of its largest static strain (NaN aside; 0 for a grade
        without a finite one), as ``numpy.nanargmax`` row by row."""
        static = self.static_strain
        if static.shape[1] == 0:
            return np.zeros(len(static), dtype=np.intp)
        largest = np.argmax(np.where(np.isnan(static), -np.inf, static), axis=1)  # nanargmax
        return np.where(np.isfinite(static).any(axis=1), largest, 0)

    def strain_text(self, k: int, bound: float | None = None) -> str:
        """Grade k's static strain that breaks ``bound`` (default: the layout's limit)
        and where: under the load at a window temperature if that breaks it already,
        else the long-term sag after the service life."""
        bound = self.strain_limit if bound is None else bound
        strain_word = "static strain"
        if self.design is not None and self.design.layout == "shear":
            strain_word = "static shear strain"
        j = int(self._largest_static[k])
        value = float(self.static_strain[k, j])
        if not value <= bound:  # the strain under the load itself (NaN included)
            return f"{strain_word} {value:.3g} at {self.temperatures[j]:g} °C"
        life = DEFAULT_SERVICE_LIFE_H if self.design is None else self.design.service_life_h
        return (
            f"long-term sag strain {self.sag_strain[k]:.3g} after {life:g} h at "
            f"{self.temperatures.max():g} °C"
        )

    def reason(self, name: str, k: int) -> str:
        """The plain reason of check ``name`` (a key of :attr:`failing`) for grade k: its
        words (:data:`CHECK_WORDS`), then grade k's figures."""
        temps = self.temperatures
        limit = self.strain_limit
        words = CHECK_WORDS[name]
        if name == "too_stiff":
            return f"{words}: the pad would be {self.area[k] * 1e6:.2g} mm2"
        if name == "cannot_carry":
            return f"{words}: {self.strain_text(k, MAX_STATIC_STRAIN)}"
        if name == "strain":  # the strain's own words: static, shear or long-term sag
            return f"{self.strain_text(k)} above the {limit:g} limit"
        if name == "no_fn":
            missing = ", ".join(f"{t:g}" for t in temps[~self.converged[k]])
            return f"{words} between 1 mHz and 100 kHz at {missing} °C"
        if name == "too_soft":
            i = int(np.nanargmin(self.natural_frequency[k]))
            return (
                f"{words}: fn {self.natural_frequency[k, i]:.2g} Hz at "
                f"{temps[i]:g} °C, below {MIN_FN_HZ:g} Hz"
            )
        if name == "stress":
            assert self.static_stress is not None and self.stress_limit is not None
            return (
                f"{words} {self.static_stress[k] / 1e6:.2g} MPa above the "
                f"{self.stress_limit / 1e6:g} MPa limit"
            )
        if name == "buckling":
            assert self.design is not None and self.critical_load is not None
            load = self.design.mass_per_pad * mount.STANDARD_GRAVITY
            return (
                f"{words}: {load:.3g} N on a pad that buckles at "
                f"{self.critical_load[k]:.3g} N (shape factor {self.shape_factor[k]:.2f}; "
                f"needs a safety factor of {1.0 / mount.BUCKLING_LOAD_SHARE:g})"
            )
        trans = np.where(self.converged[k][:, None], self.transmissibility[k], np.nan)
        at_t, at_f = (int(v) for v in np.unravel_index(int(np.nanargmax(trans)), trans.shape))
        if self.design is not None:
            where = self.design.disturbance_labels()[at_f]
        else:
            where = f"{self.disturbance[at_f]:g} Hz"
        return f"{words}: T = {trans[at_t, at_f]:.2f} at {where}, {temps[at_t]:g} °C"

    def grade(self, k: int) -> dict:
        """JSON-ready figures of grade k (mm, Hz, MPa)."""

        def listed(values):
            return None if values is None else values[k].tolist()

        def one(values, scale=1.0):
            value = None if values is None else float(values[k] * scale)
            return value if value is not None and np.isfinite(value) else None

        ok = bool(self.passes[k])
        return {
            "id": self.ids[k],
            "verdict": "passes" if ok else "fails",
            "verdict_reasons": [] if ok else self.reasons(k),
            "area_mm2": float(self.area[k] * 1e6),
            "shape_factor": float(self.shape_factor[k]),
            "k_factor": float(self.k_factor[k]),
            "temperatures_C": self.temperatures.tolist(),
            "natural_frequency_Hz": self.natural_frequency[k].tolist(),
            "transmissibility": self.transmissibility[k].tolist(),
            "amplification_at_resonance": self.amplification[k].tolist(),
            "loss_factor_at_resonance": self.loss_factor_at_resonance[k].tolist(),
            "isolation_onset_Hz": self.isolation_onset[k].tolist(),
            "static_deflection_mm": (self.static_deflection[k] * 1e3).tolist(),
            "static_strain": self.static_strain[k].tolist(),
            "dynamic_to_static_ratio": listed(self.dynamic_to_static_ratio),
            "sag_mm": float(self.sag[k] * 1e3),
            "sag_strain": float(self.sag_strain[k]),
            "strain_limit": self.strain_limit,
            "static_stress_MPa": one(self.static_stress, 1e-6),
            "stress_limit_MPa": None if self.stress_limit is None else self.stress_limit * 1e-6,
            "bulk_modulus_MPa": one(self.bulk_modulus, 1e-6),
            "bulk_modulus_source": None
            if self.bulk_source is None
            else str(self.bulk_source[k]) or None,
            "critical_load_N": one(self.critical_load),
            "extrapolated": self.extrapolated[k].tolist(),
            "notes": self.notes.get(self.ids[k], []),
        }


# A durometer is read at 23 degC after a few seconds (ISO 7619-1: 3 s for Shore A); the
# grade's modulus at that temperature and at 1 / (2 pi 3 s) stands for what it reads
# (time-frequency equivalence, common practice).
HARDNESS_READ_TEMP_C = 23.0
HARDNESS_READ_FREQ_HZ = 1.0 / (2.0 * np.pi * 3.0)
# A catalog hardness this many points from what the modulus reads gets a note.
HARDNESS_MISMATCH_POINTS = 15.0


def grade_k_factors(
    hardness: np.ndarray,
    given: float | None,
    ids: list[str],
    notes: dict,
    read_modulus: Callable[[], np.ndarray] | None = None,
) -> np.ndarray:
    """The Gent-Lindley k of each grade: the design's, else from the catalog hardness,
    else from the hardness the grade's own Young's modulus reads as (Gent 1958), so that
    k and the modulus it multiplies describe the same compound; 0.73 where neither is
    known. ``read_modulus`` gives Young's modulus [Pa] per grade at the durometer's
    reading condition (called only when needed)."""
    if given is not None:
        return np.full(hardness.shape, float(given))
    lo, hi = 30.0, 75.0  # range of the Gent & Lindley table in engine.physics.mount
    hardness = np.array(hardness, dtype=float)
    unknown = np.isnan(hardness)
    read = np.full(hardness.shape, np.nan)
    if read_modulus is not None:
        e = np.asarray(read_modulus(), dtype=float)
        fine = np.isfinite(e) & (e > 0.0)
        read[fine] = np.clip(mount.hardness_from_youngs_modulus(e[fine]), 0.0, 99.0)
    out = np.full(hardness.shape, FALLBACK_K_FACTOR)
    known = ~unknown
    out[known] = mount.k_factor_from_hardness(np.clip(hardness[known], lo, hi))
    inferred = unknown & np.isfinite(read)
    out[inferred] = mount.k_factor_from_hardness(np.clip(read[inferred], lo, hi))
    where = f"E at {HARDNESS_READ_TEMP_C:g} °C"
    for k in np.flatnonzero(inferred):
        notes.setdefault(ids[k], []).append(
            f"hardness not in the catalog: k = {out[k]:.2f} from the {read[k]:.0f} Shore A "
            f"its {where} reads as (Gent 1958)"
        )
    for k in np.flatnonzero(unknown & ~inferred):
        notes.setdefault(ids[k], []).append(
            f"hardness unknown: k = {FALLBACK_K_FACTOR} assumed for the compression modulus"
        )
    for k in np.flatnonzero(known & ((hardness < lo) | (hardness > hi))):
        notes.setdefault(ids[k], []).append(
            f"hardness {hardness[k]:g} Shore A outside the k-factor table ({lo:g}-{hi:g}): "
            "nearest table value used"
        )
    mismatch = known & np.isfinite(read) & (np.abs(read - hardness) > HARDNESS_MISMATCH_POINTS)
    for k in np.flatnonzero(mismatch):
        notes.setdefault(ids[k], []).append(
            f"catalog hardness {hardness[k]:g} Shore A, but its {where} reads as "
            f"{read[k]:.0f} Shore A: k taken from the catalog hardness"
        )
    return out


def _bulk(bulk_modulus, poisson, per_own, ids, notes):
    """Bulk modulus of each grade for a compression pad and its note.

    Returns (K [Pa] or, for a grade whose K comes from its Poisson's ratio, K per unit of
    its own modulus (K = E / (3 (1 - 2 nu)) scales with E), the source tags)."""
    found = mount.bulk_modulus_for_grade(bulk_modulus, poisson, per_own)
    default_mpa = mount.DEFAULT_BULK_MODULUS_PA * 1e-6
    assumed = f"bulk modulus not in the catalog: K = {default_mpa:g} MPa assumed (common practice)"
    for k in np.flatnonzero(found.source == mount.BULK_DEFAULT):
        notes.setdefault(ids[k], []).append(assumed)
    from_nu = np.flatnonzero(found.source == mount.BULK_FROM_POISSON)
    texts: dict[float, str] = {}  # one text per catalog nu (a library holds few values)
    for k, nu in zip(from_nu, poisson[from_nu].tolist(), strict=True):
        if nu not in texts:
            ratio = 1.0 / (3.0 * (1.0 - 2.0 * nu))
            texts[nu] = (
                f"bulk modulus from Poisson's ratio {nu:g}: K = E/(3(1 - 2ν)) = {ratio:.3g} E"
            )
        notes.setdefault(ids[k], []).append(texts[nu])
    return found.value, found.source


# Shore A hardness from which a compound is taken as filled (gum vulcanisates rarely
# reach it; common practice): its small-strain stiffness overstates the working one.
FILLED_HARDNESS = 50.0


def _amplitude(design, sweeps, bank, hardness, notes) -> tuple[np.ndarray, np.ndarray]:
    """Per grade, the factors that carry the small-strain storage modulus and loss factor
    to the design's working strain amplitude (ones without a usable sweep), with notes."""
    ids = list(bank.ids)
    storage, loss = np.ones(len(ids)), np.ones(len(ids))
    corrected = np.zeros(len(ids), dtype=bool)
    if design.working_strain is not None and sweeps:
        mine = {gid: sweeps[gid] for gid in ids if gid in sweeps}
        modes = dict(zip(ids, np.asarray(bank.modes).tolist(), strict=True))
        found, said = amplitude_corrections(mine, design.working_strain, modes)
        for k, gid in enumerate(ids):
            notes_k = said.get(gid, [])
            if gid in found:
                c = found[gid]
                storage[k], loss[k], corrected[k] = c.storage_factor, c.loss_factor_factor, True
                notes_k = [f"at the working strain: {c.source}", *notes_k]
            if notes_k:
                notes.setdefault(gid, []).extend(notes_k)
    filled = np.asarray(hardness, dtype=float) >= FILLED_HARDNESS
    if design.working_strain is None:
        why = "checked at small strain"
        fix = "give a working strain and an amplitude sweep"
    else:
        why = f"no usable amplitude sweep for the working strain {design.working_strain:g}"
        fix = "import one"
    for k in np.flatnonzero(filled & ~corrected).tolist():
        notes.setdefault(ids[k], []).append(
            f"filled compound ({float(hardness[k]):g} Shore A) {why}: the small-strain DMA "
            f"stiffness overstates it at large amplitudes ({fix})"
        )
    return storage, loss


def check_mounts(
    bank: CurveBank,
    design: MountDesign,
    temperatures: np.ndarray,
    poisson: np.ndarray,
    hardness: np.ndarray,
    bulk_modulus: np.ndarray | None = None,
    amplitude_sweeps: Mapping[str, np.ndarray] | None = None,
    shift: np.ndarray | None = None,
) -> MountResult:
    """Mount check of every grade in ``bank`` at ``temperatures`` [degC].

    Parameters
    ----------
    bank : CurveBank
        The grades' master curves.
    design : MountDesign
        Pads, load and disturbance.
    temperatures : array [degC]
        Window temperatures.
    poisson, hardness : array, one entry per grade
        Catalog Poisson's ratio [-] and Shore A hardness; NaN where blank.
    bulk_modulus : array [MPa], one entry per grade, optional
        Catalog bulk modulus; NaN where blank. Omitted: blank for every grade.
    amplitude_sweeps : mapping of grade id to array, optional
        Strain-amplitude sweeps (``Library.amplitude_sweeps``). With a design
        ``working_strain``, a grade's sweep, fitted with the Kraus model
        (:mod:`engine.curves.amplitude`), scales its dynamic storage modulus and loss
        factor to the working amplitude (fn, transmissibility, amplification and the
        sizing; the static figures stay on the creep compliance). A grade of
        `FILLED_HARDNESS` Shore A or more without a usable sweep gets a note.
    shift : array, optional
        ``bank.shift_rows`` at ``temperatures`` (grades x temperatures), when the caller
        has it already (:func:`engine.selection.evaluation.evaluate_grades`).

    Returns
    -------
    MountResult
        Figures per grade and temperature, notes, and the verdict of each grade.

    Notes
    -----
    Pad stiffness: a shear pad k' = G' A / h; a compression pad k' = Ec,eff A / h with
    Ec = E' (1 + 2 k S^2) (Gent & Lindley 1959) in series with the bulk modulus K,
    1 / Ec,eff = 1 / Ec + 1 / K (Gent 2012). K is the catalog value, else
    E / (3 (1 - 2 nu)) from a catalog nu < 0.5, else 2000 MPa (common practice), each
    with a note; shape factors above 10 carry a note, the stiffness then leaning on K.
    Natural frequency: the root of fn = (1/2 pi) sqrt(k'(fn)/m), solved in reduced
    frequency on each grade's table (:func:`engine.physics.mount.natural_frequency_tabulated`,
    the exact root of :func:`engine.physics.mount.natural_frequency_reduced`'s equation).
    Transmissibility: T = |k*| / |k* - m (2 pi f)^2|, k* = k'(f)(1 + i eta(f)).
    Static deflection: delta = m g / k_s with k_s the pad stiffness at the static
    modulus 1 / J(t), J the creep compliance of the grade's relaxation spectrum (exact
    interconversion, Ferry 1980, ch. 3; Tschoegl 1989) at the reduced time t / aT,
    t = STATIC_LOAD_TIME_S (10 s) at each window temperature; the sag: the same after
    the service life at the hottest window temperature. The dynamic-to-static ratio is
    k'(fn) / k_s at each temperature (NaN where no fn was found).

    Verdict: a grade fails, with one plain reason each, when
    sizing gives a pad below `MIN_PAD_AREA_MM2` (10 mm2) or below
    `MIN_SIZED_AREA_FRACTION` (1 %) of the given area ("too stiff for this load and
    size"); the static or sag strain exceeds `MAX_STATIC_STRAIN` (1: "cannot carry the
    load"), else exceeds the layout's limit (compression 0.15, shear 0.5; common
    practice); no natural frequency is found, or one lies below `MIN_FN_HZ` (0.1 Hz);
    the compressive stress m g / A exceeds
    :data:`engine.physics.mount.STATIC_COMPRESSIVE_STRESS_LIMIT` (1 MPa, common
    practice); a compression pad's load exceeds half its buckling load
    (:func:`engine.physics.mount.buckling_load` with the long-term Young's modulus 1 / J
    after the service life at the hottest window temperature: Haringx 1948, Gent 1964;
    the safety factor of 2 is common practice); or the
    transmissibility reaches 1 at some window temperature and disturbance (the pad
    does not isolate; Snowdon 1968). A pad too stiff for its size, or one that cannot
    carry the load, gets that reason alone: the rest follows from it.

    References
    ----------
    Gent, A. N. and Lindley, P. B. (1959). Proc. Inst. Mech. Eng. 173, 111-122.
    Gent, A. N. (ed.) (2012). Engineering with Rubber, 3rd ed. Hanser.
    Ferry, J. D. (1980). Viscoelastic Properties of Polymers, 3rd ed. Wiley.
    Tschoegl, N. W. (1989). The Phenomenological Theory of Linear Viscoelastic
    Behavior. Springer.
    Snowdon, J. C. (1968). Vibration and Shock in Damped Mechanical Systems. Wiley.
    """
    ids = list(bank.ids)
    n = len(ids)
    t = np.asarray(temperatures, dtype=float)
    notes: dict[str, list[str]] = {}
    nu = poisson_or_default(poisson)
    own_is_shear = bank.modes == "shear"
    compression = design.layout == "compression"
    if compression:
        to_layout = np.where(own_is_shear, 2.0 * (1.0 + nu), 1.0)
    else:
        to_layout = np.where(own_is_shear, 1.0, 1.0 / (2.0 * (1.0 + nu)))
    h = design.thickness_mm * 1e-3
    m = design.mass_per_pad
    if compression:

        def read_modulus() -> np.ndarray:
            at = np.array([HARDNESS_READ_TEMP_C]), np.array([HARDNESS_READ_FREQ_HZ])
            own, _, _ = bank.evaluate(*at, loss=False)
            return own[:, 0] * to_layout  # to_layout is the tensile basis here

        k_fac = grade_k_factors(hardness, design.k_factor, ids, notes, read_modulus)
        blank = np.full(n, np.nan) if bulk_modulus is None else np.asarray(bulk_modulus, float)
        bulk, bulk_source = _bulk(blank, np.asarray(poisson, float), to_layout, ids, notes)
        scales = bulk_source == mount.BULK_FROM_POISSON  # K per unit own modulus
    else:
        k_fac = np.full(n, np.nan)  # a shear pad needs no compression modulus
        bulk, bulk_source = np.full(n, np.nan), np.full(n, "")
        scales = np.zeros(n, dtype=bool)

    def shape_factor(area):
        if not compression:
            return np.zeros_like(area)
        if design.shape_factor is not None:
            return np.full_like(area, design.shape_factor)
        if design.shape == "disc":
            return mount.shape_factor_disc(np.sqrt(4.0 * area / np.pi), h)
        side = np.sqrt(area)
        return mount.shape_factor_block(side, side, h)

    amp_storage, amp_loss = _amplitude(design, amplitude_sweeps, bank, hardness, notes)
    area = np.full(n, design.area_mm2 * 1e-6)
    if design.target_fn_Hz is not None:
        ft = design.target_fn_Hz
        st, _, _ = bank.evaluate(np.array([design.sizing_temp_C]), np.array([ft]))
        own = st[:, 0] * amp_storage  # sized on the stiffness at the working amplitude
        e_layout = own * to_layout
        if not compression:
            area = mount.size_pad_area(ft, m, h, e_layout)
        else:
            k_target = np.where(scales, bulk * own, bulk)
            if design.shape_factor is not None:
                ec = mount.compression_modulus(e_layout, design.shape_factor, k_fac)
                ec = mount.bulk_limited_compression_modulus(ec, k_target)
                area = mount.size_pad_area(ft, m, h, ec)
            else:
                area = mount.size_compression_pad_area(
                    ft, m, h, e_layout, k_fac, design.shape, bulk_modulus=k_target
                )
    s_factor = shape_factor(area)
    # Pad stiffness from the grade's own modulus M: k' = P M / (1 + beta M). A shear pad
    # and a pad whose K scales with E (from nu) have beta = 0: k' is proportional to M.
    if compression:
        layout_factor = mount.compression_modulus(to_layout, s_factor, k_fac)  # Ec / M
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = np.where(scales, layout_factor / bulk, 0.0)  # Ec / K, constant
            beta = np.where(scales, 0.0, layout_factor / bulk)  # Ec / (K M)
        per_modulus = layout_factor * area / h / (1.0 + ratio)
    else:
        per_modulus = to_layout * area / h
        beta = np.zeros(n)
    soften = bool(beta.any())

    def pad_stiffness(storage):
        """Storage stiffness [N/m] of one pad from the grade's own modulus, rows = grades."""
        rows = (-1,) + (1,) * (storage.ndim - 1)
        k = storage * per_modulus.reshape(rows)
        if soften:
            k /= 1.0 + storage * beta.reshape(rows)
        return k

    t_rows = np.broadcast_to(t[None, :], (n, t.size))
    # log10 aT once, for every evaluation below
    shift_rows = bank.shift_rows(t_rows) if shift is None else np.asarray(shift)
    extrap = np.zeros((n, t.size), dtype=bool)
    vertical = bank.vertical_factor(np.arange(n)[:, None], t_rows)
    with np.errstate(divide="ignore", invalid="ignore"):
        log_k = np.log10(per_modulus[:, None] * vertical * amp_storage[:, None])
    softening = beta[:, None] * vertical * amp_storage[:, None]
    # The static figures need no natural frequency: they come first, so that their
    # Python runs while the window's evaluation (beside, in the ranking) keeps the
    # workers busy, and the work after the solve is array work in blocks.
    # Static and long-term stiffness from the creep compliance J(t / aT).
    j_s, x_s = bank.compliance_rows(t_rows, STATIC_LOAD_TIME_S, shift=shift_rows)
    extrap |= x_s
    k_static = pad_stiffness(1.0 / j_s)
    deflection = mount.static_deflection(m, k_static)
    t_hot = float(t.max())
    life_s = design.service_life_h * 3600.0
    j_l, x_l = bank.compliance_rows(np.full((n, 1), t_hot), life_s)
    sag = mount.static_deflection(m, pad_stiffness(1.0 / j_l))[:, 0]
    sag_note = (
        f"long-term sag after {design.service_life_h:g} h at {t_hot:g} °C extrapolates "
        "the master curve"
    )
    for row in np.flatnonzero(x_l[:, 0]).tolist():
        notes.setdefault(ids[row], []).append(sag_note)
    critical = None
    if compression:
        with np.errstate(divide="ignore", invalid="ignore"):
            e_long = np.where(j_l[:, 0] > 0, to_layout / j_l[:, 0], np.nan)  # E after the life
        usable = np.isfinite(e_long) & (e_long > 0)
        critical = np.full(n, np.nan)
        second_moment = 1.0 / (4.0 * np.pi) if design.shape == "disc" else 1.0 / 12.0
        critical[usable] = mount.buckling_load(
            e_long[usable],
            area[usable],
            h,
            s_factor[usable],
            k_fac[usable],
            second_moment_ratio=second_moment,
            poisson_ratio=nu[usable],
        )
        slender = np.flatnonzero(s_factor < SLENDER_SHAPE_FACTOR)
        for row, value in zip(slender.tolist(), s_factor[slender].tolist(), strict=True):
            notes.setdefault(ids[row], []).append(
                f"shape factor {value:.2f}: a tall, slender pad; check it against "
                "buckling or use a wider, thinner pad"
            )
        for k in np.flatnonzero(mount.is_high_shape_factor(s_factor)):
            k_text = f"K = {bulk[k] * 1e-6:g} MPa" if not scales[k] else "K from Poisson's ratio"
            notes.setdefault(ids[k], []).append(
                f"shape factor {s_factor[k]:.1f} above {mount.HIGH_SHAPE_FACTOR:g}: the pad's "
                f"stiffness leans on the bulk modulus ({k_text}) and on an exact shape factor"
            )
    else:
        width = np.sqrt(4.0 * area / np.pi) if design.shape == "disc" else np.sqrt(area)
        for k in np.flatnonzero(h > THICK_SHEAR_PAD * width):
            notes.setdefault(ids[k], []).append(
                f"rubber thickness {design.thickness_mm:g} mm above a quarter of the pad's "
                f"width ({width[k] * 1e3:.0f} mm): bending adds to the shear deflection, so "
                "k' = G'A/h overstates the stiffness"
            )
    fn = np.empty((n, t.size))
    ok = np.empty((n, t.size), dtype=bool)

    def solve(a: int, b: int) -> None:
        # Each grade's own table, read as CurveBank.log_storage_at reads it.
        nat = mount.natural_frequency_tabulated(
            bank.start,
            bank.step,
            bank.log_storage,
            bank.n_nodes,
            np.arange(a, b)[:, None],
            shift_rows[a:b],
            log_k[a:b],
            m,
            bulk_softening=softening[a:b],
        )
        fn[a:b], ok[a:b] = nat

    if n:
        in_blocks(n, solve, per_worker(n))
    fn_safe = np.where(ok, fn, 1.0)
    st_fn, ls_fn, x_fn = bank.evaluate_rows(t_rows, fn_safe, shift=shift_rows)
    eta_fn = np.where(ok, ls_fn / st_fn, np.nan) * amp_loss[:, None]
    extrap |= x_fn
    k_fn = pad_stiffness(st_fn * amp_storage[:, None])
    amplification = np.where(ok, mount.transmissibility(fn_safe, k_fn, eta_fn, m), np.nan)
    dist = np.asarray(design.frequencies, dtype=float)
    f3 = np.broadcast_to(dist[None, None, :], (n, t.size, dist.size))
    st_d, ls_d, x_d = bank.evaluate_rows(t[None, :, None], f3, shift=shift_rows[:, :, None])
    extrap |= x_d.any(axis=2)
    k_d = pad_stiffness(st_d * amp_storage[:, None, None])
    trans = mount.transmissibility(f3, k_d, ls_d / st_d * amp_loss[:, None, None], m)

    for k in np.flatnonzero(~ok.all(axis=1)):
        notes.setdefault(ids[k], []).append("natural frequency not found at some temperatures")
    limit = (
        mount.STATIC_COMPRESSIVE_STRAIN_LIMIT if compression else mount.STATIC_SHEAR_STRAIN_LIMIT
    )
    with np.errstate(invalid="ignore"):
        ratio_ds = np.where(ok, k_fn / k_static, np.nan)
    return MountResult(
        ids=ids,
        temperatures=t,
        disturbance=dist,
        area=area,
        shape_factor=s_factor,
        k_factor=k_fac,
        natural_frequency=np.where(ok, fn, np.nan),
        converged=ok,
        transmissibility=trans,
        amplification=amplification,
        loss_factor_at_resonance=eta_fn,
        isolation_onset=np.where(ok, mount.isolation_onset_frequency(fn_safe), np.nan),
        static_deflection=deflection,
        static_strain=deflection / h,
        sag=sag,
        sag_strain=sag / h,
        strain_limit=limit,
        extrapolated=extrap,
        notes=notes,
        dynamic_to_static_ratio=ratio_ds,
        static_stress=m * mount.STANDARD_GRAVITY / area,
        stress_limit=mount.STATIC_COMPRESSIVE_STRESS_LIMIT if compression else None,
        bulk_modulus=np.where(scales, np.nan, bulk),
        bulk_source=bulk_source,
        critical_load=critical,
        design=design,
    )
