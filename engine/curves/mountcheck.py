"""Mount check of every grade over the window's temperatures, in one vectorised pass.

Composes the pad mechanics of :mod:`engine.physics.mount` with the stacked master curves of
:mod:`engine.curves.bank`: N identical pads share the supported mass; each pad is a shear pad
(k' = G'A/h) or a compression pad (k' = Ec A/h, Ec = E'(1 + 2kS^2)); stiffness and loss
factor follow the master curve in frequency and temperature.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np

from engine.base.blocks import in_blocks, per_worker
from engine.base.errors import CriteriaError, reject_unknown
from engine.curves.bank import CurveBank
from engine.curves.window import poisson_or_default
from engine.physics import mount

LAYOUTS = ("shear", "compression")
SHAPES = ("disc", "square")
STATIC_LOAD_TIME_S = 10.0  # time over which the static load is applied (common practice)
DEFAULT_SERVICE_LIFE_H = 1000.0
DEFAULT_SIZING_TEMP_C = 23.0  # laboratory standard atmosphere, ISO 23529
SLENDER_SHAPE_FACTOR = 0.5  # below this a compression pad may buckle (common practice)
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
        Frequencies of the disturbance the mount must isolate.
    target_fn_Hz, sizing_temp_C : float
        Size the pad area for this fn at this temperature (sizing is off without a target).
    service_life_h : float
        Time under load for the long-term sag.

    Examples
    --------
    >>> from dataclasses import replace
    >>> skid = MountDesign(mass_kg=180.0, mounts=4, disturbance_Hz=(24.7, 49.4))
    >>> skid.mass_per_pad
    45.0
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
        if not self.disturbance_Hz or any(f <= 0 for f in self.disturbance_Hz):
            raise CriteriaError("give at least one positive disturbance frequency")
        if self.shape_factor is not None and self.shape_factor <= 0:
            raise CriteriaError("shape factor must be positive")
        if self.k_factor is not None and self.k_factor <= 0:
            raise CriteriaError("k factor must be positive")
        if self.target_fn_Hz is not None and self.target_fn_Hz <= 0:
            raise CriteriaError("target natural frequency must be positive")

    def to_dict(self) -> dict:
        d = asdict(self)
        d["disturbance_Hz"] = list(self.disturbance_Hz)
        return d

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

        optional = ("shape_factor", "k_factor", "target_fn_Hz")
        for key, value in list(data.items()):
            try:
                if key == "disturbance_Hz":
                    values = value if isinstance(value, list | tuple) else [value]
                    data[key] = tuple(number(v) for v in values)
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


@dataclass
class MountResult:
    """Per grade (rows) and window temperature (columns) unless said otherwise. SI units."""

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
    static_deflection: np.ndarray  # [m]
    static_strain: np.ndarray  # [-]
    sag: np.ndarray  # (grades,) [m] deflection after the service life at the hottest T
    sag_strain: np.ndarray  # (grades,)
    strain_limit: float
    extrapolated: np.ndarray  # any property used at this temperature was extrapolated
    notes: dict  # grade id -> list of notes

    def grade(self, k: int) -> dict:
        """JSON-ready figures of grade k (mm, Hz)."""
        return {
            "id": self.ids[k],
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
            "sag_mm": float(self.sag[k] * 1e3),
            "sag_strain": float(self.sag_strain[k]),
            "strain_limit": self.strain_limit,
            "extrapolated": self.extrapolated[k].tolist(),
            "notes": self.notes.get(self.ids[k], []),
        }


def _k_factors(hardness: np.ndarray, given: float | None, ids: list[str], notes: dict):
    if given is not None:
        return np.full(hardness.shape, float(given))
    lo, hi = 30.0, 75.0  # range of the Gent & Lindley table in engine.physics.mount
    unknown = np.isnan(hardness)
    out = np.full(hardness.shape, FALLBACK_K_FACTOR)
    known = ~unknown
    out[known] = mount.k_factor_from_hardness(np.clip(hardness[known], lo, hi))
    for k in np.flatnonzero(unknown):
        notes.setdefault(ids[k], []).append(
            f"hardness unknown: k = {FALLBACK_K_FACTOR} assumed for the compression modulus"
        )
    for k in np.flatnonzero(known & ((hardness < lo) | (hardness > hi))):
        notes.setdefault(ids[k], []).append(
            f"hardness {hardness[k]:g} Shore A outside the k-factor table ({lo:g}-{hi:g}): "
            "nearest table value used"
        )
    return out


def check_mounts(
    bank: CurveBank,
    design: MountDesign,
    temperatures: np.ndarray,
    poisson: np.ndarray,
    hardness: np.ndarray,
) -> MountResult:
    """Mount check of every grade in ``bank`` at ``temperatures`` [degC].

    Notes
    -----
    Natural frequency: the root of fn = (1/2 pi) sqrt(k'(fn)/m) by
    scipy.optimize.elementwise.find_root (via :func:`engine.physics.mount.natural_frequency`).
    Transmissibility: T = |k*| / |k* - m (2 pi f)^2|, k* = k'(f)(1 + i eta(f)).
    Static and long-term deflection use the relaxation modulus approximated by the
    storage modulus at omega = 1/t (Schwarzl & Staverman; Ferry 1980, ch. 4) at
    t = 10 s and at the service life, the latter at the hottest window temperature.
    """
    ids = list(bank.ids)
    n = len(ids)
    t = np.asarray(temperatures, dtype=float)
    notes: dict[str, list[str]] = {}
    nu = poisson_or_default(poisson)
    own_is_shear = bank.modes == "shear"
    if design.layout == "shear":
        to_layout = np.where(own_is_shear, 1.0, 1.0 / (2.0 * (1.0 + nu)))
    else:
        to_layout = np.where(own_is_shear, 2.0 * (1.0 + nu), 1.0)
    h = design.thickness_mm * 1e-3
    m = design.mass_per_pad
    if design.layout == "shear":
        k_fac = np.full(n, np.nan)  # a shear pad needs no compression modulus
    else:
        k_fac = _k_factors(hardness, design.k_factor, ids, notes)

    def shape_factor(area):
        if design.layout == "shear":
            return np.zeros_like(area)
        if design.shape_factor is not None:
            return np.full_like(area, design.shape_factor)
        if design.shape == "disc":
            return mount.shape_factor_disc(np.sqrt(4.0 * area / np.pi), h)
        side = np.sqrt(area)
        return mount.shape_factor_block(side, side, h)

    area = np.full(n, design.area_mm2 * 1e-6)
    if design.target_fn_Hz is not None:
        ft = design.target_fn_Hz
        st, _, _ = bank.evaluate(np.array([design.sizing_temp_C]), np.array([ft]))
        own = st[:, 0]
        if design.layout == "shear":
            area = mount.size_pad_area(ft, m, h, own * to_layout)
        elif design.shape_factor is not None:
            ec = mount.compression_modulus(own * to_layout, design.shape_factor, k_fac)
            area = mount.size_pad_area(ft, m, h, ec)
        else:
            area = mount.size_compression_pad_area(ft, m, h, own * to_layout, k_fac, design.shape)
    s_factor = shape_factor(area)
    # The layout modulus (G' = own x to_layout, or Ec = E'(1 + 2kS^2)) is the grade's own
    # modulus times a constant per grade, so the pad stiffness is too: k' = M A / h.
    if design.layout == "shear":
        layout_factor = to_layout
    else:
        layout_factor = mount.compression_modulus(to_layout, s_factor, k_fac)
    per_modulus = layout_factor * area / h

    def pad_stiffness(storage):
        """Storage stiffness [N/m] of one pad from the grade's own modulus, rows = grades."""
        return storage * per_modulus.reshape((-1,) + (1,) * (storage.ndim - 1))

    t_rows = np.broadcast_to(t[None, :], (n, t.size))
    shift_rows = bank.shift_rows(t_rows)  # log10 aT once, for every evaluation below
    extrap = np.zeros((n, t.size), dtype=bool)
    with np.errstate(divide="ignore", invalid="ignore"):
        log_k = np.log10(per_modulus[:, None] * bank.vertical_factor(np.arange(n)[:, None], t_rows))
    fn = np.empty((n, t.size))
    ok = np.empty((n, t.size), dtype=bool)

    def solve(a: int, b: int) -> None:
        # One solver call per block of grades; entry (k, j) belongs to grade a + k.
        grade_of = np.repeat(np.arange(a, b), t.size)
        nat = mount.natural_frequency_reduced(
            lambda x, idx: bank.log_storage_at(grade_of[idx], x),
            shift_rows[a:b],
            log_k[a:b],
            m,
        )
        fn[a:b], ok[a:b] = nat

    in_blocks(n, solve, per_worker(n))
    fn_safe = np.where(ok, fn, 1.0)
    st_fn, ls_fn, x_fn = bank.evaluate_rows(t_rows, fn_safe, shift=shift_rows)
    eta_fn = np.where(ok, ls_fn / st_fn, np.nan)
    extrap |= x_fn
    k_fn = pad_stiffness(st_fn)
    amplification = np.where(ok, mount.transmissibility(fn_safe, k_fn, eta_fn, m), np.nan)
    dist = np.asarray(design.disturbance_Hz, dtype=float)
    f3 = np.broadcast_to(dist[None, None, :], (n, t.size, dist.size))
    st_d, ls_d, x_d = bank.evaluate_rows(t[None, :, None], f3, shift=shift_rows[:, :, None])
    extrap |= x_d.any(axis=2)
    k_d = pad_stiffness(st_d)
    trans = mount.transmissibility(f3, k_d, ls_d / st_d, m)

    f_static = 1.0 / (2.0 * np.pi * STATIC_LOAD_TIME_S)
    st_s, _, x_s = bank.evaluate_rows(t_rows, f_static, loss=False, shift=shift_rows)
    extrap |= x_s
    k_static = pad_stiffness(st_s)
    deflection = mount.static_deflection(m, k_static)
    t_hot = float(t.max())
    f_life = 1.0 / (2.0 * np.pi * design.service_life_h * 3600.0)
    st_l, _, x_l = bank.evaluate_rows(np.full((n, 1), t_hot), np.full((n, 1), f_life))
    k_life = pad_stiffness(st_l)
    sag = mount.static_deflection(m, k_life)[:, 0]
    for k in np.flatnonzero(x_l[:, 0]):
        notes.setdefault(ids[k], []).append(
            f"long-term sag after {design.service_life_h:g} h at {t_hot:g} °C extrapolates "
            "the master curve"
        )
    if design.layout == "compression":
        for k in np.flatnonzero(s_factor < SLENDER_SHAPE_FACTOR):
            notes.setdefault(ids[k], []).append(
                f"shape factor {s_factor[k]:.2f}: a tall, slender pad; check it against "
                "buckling or use a wider, thinner pad"
            )
    for k in np.flatnonzero(~ok.all(axis=1)):
        notes.setdefault(ids[k], []).append("natural frequency not found at some temperatures")
    limit = (
        mount.STATIC_SHEAR_STRAIN_LIMIT
        if design.layout == "shear"
        else mount.STATIC_COMPRESSIVE_STRAIN_LIMIT
    )
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
    )
