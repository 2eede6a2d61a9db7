"""Master curve of one grade: shifting, shift law, relaxation spectrum and quality.

:func:`build_master_curve` composes :mod:`engine.physics.shift`, :mod:`engine.physics.prony` and
:mod:`engine.physics.transitions` on one data set; :class:`MasterCurve` evaluates the stiffness
and damping of the grade at any temperature and frequency, flagging extrapolation.
"""

from __future__ import annotations

import base64
import hashlib
from dataclasses import dataclass, field

import numpy as np

from engine.base.errors import FitError
from engine.base.units import ABSOLUTE_ZERO_C, c_to_k
from engine.physics.isotherms import DEFAULT_TOLERANCE_K, group_temperatures
from engine.physics.jointfit import N_DRAWS, LawTemplate, fit_jointly, robust_variance
from engine.physics.prony import PronySeries, fit_prony, tau_grid
from engine.physics.shift import (
    WLF_UNIVERSAL_C1,
    WLF_UNIVERSAL_C2,
    ShiftLaw,
    ShiftResult,
    shift_isotherms,
    split_isotherms,
    wlf_change_reference,
)
from engine.physics.transitions import TG_METHODS, glass_transition, regions, secondary_transition

LN10 = np.log(10.0)

# Candidate glass transitions dividing the WLF and Arrhenius regions; the one whose law
# fits the pairwise shifts best is used (the storage onset lies nearest the calorimetric
# Tg the WLF constants refer to, the loss peaks above it: common practice).
SPLIT_METHODS = ("storage_onset", "loss_modulus_peak", "loss_factor_peak")
GLASSY_MODULUS = {"tensile": 300e6, "shear": 100e6}  # [Pa], common practice
DEFAULT_REFERENCE_FALLBACK_C = 20.0
PRONY_PER_DECADE = 2.0
PRONY_SMOOTHING = 0.3  # light second-difference penalty on the spectrum
GAP_DECADES = 1.0  # an empty stretch of reduced frequency wider than this is a gap
TABLE_STEP = 0.05  # decades, spacing of the tabulated master curve for batch ranking
FINE_TABLE_STEP = 0.01  # decades, spacing used by MasterCurve.evaluate
TABLE_MARGIN = 6.0  # decades tabulated beyond the covered range
TOLERANCE_C = 0.5  # a temperature this close to the measured range is not extrapolated
ETA_COLLAPSE_LIMIT = 0.05  # scatter of log10 eta about its curve against log10 E'
MIN_WINDOW_SPREAD = 0.05  # decades of log10 E' a window needs to be informative
NOISE_LOG_STORAGE = 0.0043  # 1 % in E', decades
NOISE_LOG_ETA = 0.0086  # 2 % in tan delta, decades
ISOTHERM_RESIDUAL_LIMIT = 0.1  # rms decades per isotherm about the master curve
# Residuals of E'' that run along the isotherms (pooled lag-1 correlation above this)
# mean the isotherms do not superpose. The loss modulus shows the shape of the spectrum
# most directly, which a second process changes; white noise gives about zero, the
# smoothing of sparse 5-frequency sheets up to about 0.3, the two-process grade of
# tests/synthetic.py 0.43-0.53 (a project value, set on those round trips). E' runs
# longer on sparse sheets from the smoothing alone, so it is reported, not judged.
SERIAL_CORRELATION_LIMIT = 0.35
# Added to the interval per decade of fR beyond the data (or per 10 K beyond the
# measured temperatures), in ln units, for (E', E'' and tan delta): where nothing was
# measured the spectrum alone says nothing reliable, and the loss factor can change far
# faster than the storage modulus (a project choice, set on the synthetic round trips).
EXTRAPOLATION_SD = (0.3, 1.5)
MAX_FREQUENCY_DECADES = 12  # wider than any DMA or resonance instrument covers
# Physical range of a measured point, checked before the fit (common practice: dynamic
# tests of solids span about 1e-5 to 1e7 Hz; no solid polymer is measured above
# 4000 degC, above the melting point of every solid). The importer refuses the same.
MIN_SWEEP_FREQUENCY_HZ = 1e-9
MAX_SWEEP_FREQUENCY_HZ = 1e9
MAX_SWEEP_TEMPERATURE_C = 4000.0
LOG_SHIFT_LIMIT = 30.0  # decades: a law followed far outside its range is held here
Z95 = 1.959964  # two-sided 95 % point of the normal distribution (scipy.stats.norm.ppf)
# (the three limits are common practice values of this project, a few times the 1-2 %
# scatter of a good DMA measurement)


@dataclass(frozen=True)
class Props:
    """Properties at (temperature, frequency); arrays of the broadcast shape."""

    storage_modulus: np.ndarray  # [Pa], E' or G' in the grade's mode
    loss_modulus: np.ndarray  # [Pa]
    loss_factor: np.ndarray  # [-]
    reduced_frequency: np.ndarray  # [Hz]
    extrapolated: np.ndarray  # bool


def hold_log_shift(log_shift, temperature, reference_C):
    """log10 aT held within +-LOG_SHIFT_LIMIT; non-finite values (below a WLF
    divergence) are held at the bound on their side of the reference."""
    side = np.where(np.asarray(temperature) < reference_C, 1.0, -1.0) * LOG_SHIFT_LIMIT
    return np.clip(
        np.where(np.isfinite(log_shift), log_shift, side), -LOG_SHIFT_LIMIT, LOG_SHIFT_LIMIT
    )


@dataclass(frozen=True)
class PropsBand:
    """95 % intervals of the properties at (temperature, frequency), broadcast shape."""

    storage_low: np.ndarray  # [Pa]
    storage_high: np.ndarray  # [Pa]
    loss_low: np.ndarray  # [Pa]
    loss_high: np.ndarray  # [Pa]
    loss_factor_low: np.ndarray  # [-]
    loss_factor_high: np.ndarray  # [-]


@dataclass
class MasterCurve:
    """A fitted master curve. Moduli are in the grade's own mode (E' or G')."""

    mode: str
    reference_C: float
    shift: ShiftResult
    prony: PronySeries
    log_fr_range: tuple[float, float]  # covered log10 reduced frequency [log10 Hz]
    temperature_range: tuple[float, float]  # measured [degC]
    frequency_range: tuple[float, float]  # measured [Hz]
    vertical_shift: bool
    tg: list[dict] = field(default_factory=list)  # Tg by each method at 1 Hz
    secondary_C: float | None = None
    regions: list[dict] = field(default_factory=list)
    quality: dict = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)
    gaps: list = field(default_factory=list)  # uncovered log10 fR intervals inside the range
    grouping: dict = field(default_factory=dict)  # how the points were grouped (isotherms)
    draws: dict | None = None  # encoded posterior draws of the model (see draw_curves)
    _tables: dict = field(default_factory=dict, repr=False, compare=False)

    # -- evaluation -----------------------------------------------------------------
    def log_shift(self, temperature):
        """log10 aT at ``temperature`` [degC].

        Inside the measured temperatures the shift follows the measured shift factors
        (linear between isotherms, bridged ones taken from the law); outside them the
        fitted law carries on from the nearest end isotherm, so the curve is continuous.
        """
        t = np.asarray(temperature, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            raw = self.shift.law.log_shift(t) + self.shift_correction(t)
        # WLF diverges C2 below its reference: far outside the data the law is held at
        # a bound (such values are flagged as extrapolated anyway).
        return hold_log_shift(raw, t, self.reference_C)

    def shift_correction(self, temperature):
        """Measured minus fitted log10 aT, interpolated in temperature (held at the ends)."""
        temps = self.shift.temperatures
        if temps.size < 2:
            return np.zeros_like(np.asarray(temperature, dtype=float))
        corr = self.shift.log_shift - self.shift.law.log_shift(temps)
        return np.interp(np.asarray(temperature, dtype=float), temps, corr)

    def _vertical(self, temperature):
        if not self.vertical_shift:
            return 1.0
        # Modulus at T is (T / T0) times the reduced modulus (Ferry 1980, eq. 11-1,
        # density taken constant).
        return c_to_k(temperature) / c_to_k(self.reference_C)

    def single_isotherm(self) -> bool:
        return self.shift.law.kind == "none"

    def extrapolated(self, temperature, log_reduced_frequency):
        t = np.asarray(temperature, dtype=float)
        lo, hi = self.log_fr_range
        out = (log_reduced_frequency < lo - 1e-9) | (log_reduced_frequency > hi + 1e-9)
        for g_lo, g_hi in self.gaps:
            out = out | ((log_reduced_frequency > g_lo) & (log_reduced_frequency < g_hi))
        if self.single_isotherm():
            return out | (np.abs(t - self.reference_C) > TOLERANCE_C)
        t_lo, t_hi = self.temperature_range
        return out | (t < t_lo - TOLERANCE_C) | (t > t_hi + TOLERANCE_C)

    def evaluate(self, temperature, frequency) -> Props:
        """E', E'', loss factor at ``temperature`` [degC] and ``frequency`` [Hz] (broadcast).

        Notes
        -----
        fR = f aT(T) (:meth:`log_shift`); E'(fR), E''(fR) from the Prony series
        (generalized Maxwell model) at the reference temperature, read from a table of
        the series at 0.01-decade steps with linear interpolation in log-log (within
        1e-4 of the series itself); ``extrapolated`` where fR lies outside the
        reduced-frequency range the data cover, or T outside the measured temperatures.
        """
        return self._evaluate(temperature, frequency, FINE_TABLE_STEP)

    def _evaluate(self, temperature, frequency, table_step: float) -> Props:
        t = np.asarray(temperature, dtype=float)
        f = np.asarray(frequency, dtype=float)
        log_fr = np.log10(f) + self.log_shift(t)
        start, step, ls, ll = self.table(table_step)
        pos = (log_fr - start) / step
        i0 = np.clip(np.floor(pos).astype(np.intp), 0, ls.size - 2)
        w = pos - i0
        scale = self._vertical(t)
        storage = 10.0 ** (ls[i0] * (1 - w) + ls[i0 + 1] * w) * scale
        loss = 10.0 ** (ll[i0] * (1 - w) + ll[i0 + 1] * w) * scale
        return Props(storage, loss, loss / storage, 10.0**log_fr, self.extrapolated(t, log_fr))

    def draw_curves(self) -> list[MasterCurve]:
        """The fit's posterior draws, each a master curve of its own (empty without draws).

        Each draw is one plausible set of shift-law constants, isotherm shifts and
        relaxation spectrum given the data (:func:`engine.physics.jointfit.fit_jointly`); the
        spread of anything computed from them is the data's uncertainty in it.
        """
        cached = self._tables.get("draws")
        if cached is not None:
            return cached
        out = []
        if self.draws:
            d = {k: _decode_array(v) for k, v in self.draws.items() if k != "shape"}
            k_draws = d["equilibrium"].size
            weights = d["weights"].reshape(k_draws, -1)
            shifts = d["log_shift"].reshape(k_draws, -1)
            for k in range(k_draws):
                law = ShiftLaw(
                    **{
                        **self.shift.law.to_dict(),
                        "wlf_c1": _none_if_nan(d["wlf_c1"][k]),
                        "wlf_c2": _none_if_nan(d["wlf_c2"][k]),
                        "activation_J_per_mol": _none_if_nan(d["activation"][k]),
                        "notes": (),
                    }
                )
                shift = ShiftResult(self.shift.temperatures, shifts[k], self.shift.bridged, law)
                prony = PronySeries(self.prony.tau, weights[k], float(d["equilibrium"][k]))
                out.append(
                    MasterCurve(
                        mode=self.mode,
                        reference_C=self.reference_C,
                        shift=shift,
                        prony=prony,
                        log_fr_range=self.log_fr_range,
                        temperature_range=self.temperature_range,
                        frequency_range=self.frequency_range,
                        vertical_shift=self.vertical_shift,
                        gaps=self.gaps,
                    )
                )
        self._tables["draws"] = out
        return out

    def extrapolation_decades(self, temperature, log_reduced_frequency):
        """How far (decades of fR, or per 10 K beyond the measured temperatures) a point
        lies outside the data; zero inside."""
        t = np.asarray(temperature, dtype=float)
        lo, hi = self.log_fr_range
        x = np.asarray(log_reduced_frequency, dtype=float)
        out = np.maximum(lo - x, 0.0) + np.maximum(x - hi, 0.0)
        for g_lo, g_hi in self.gaps:
            inside = (x > g_lo) & (x < g_hi)
            out = np.where(inside, np.maximum(out, np.minimum(x - g_lo, g_hi - x)), out)
        t_lo, t_hi = self.temperature_range
        beyond = np.maximum(t_lo - t, 0.0) + np.maximum(t - t_hi, 0.0)
        return out + beyond / 10.0

    def interval(self, temperature, frequency) -> PropsBand:
        """95 % intervals of E', E'' and the loss factor at ``temperature`` [degC] and
        ``frequency`` [Hz] (broadcast).

        Notes
        -----
        The spread (robust standard deviation in log, :func:`robust_variance`) of the
        posterior draws of the fit (:meth:`draw_curves`) about the fitted value, times
        1.96; outside the data and
        in gaps an extra EXTRAPOLATION_SD per decade (a project choice: the
        draws cannot know how the material behaves where it was not measured). Without
        draws (a curve stored before intervals existed) only the extrapolation term is
        used.
        """
        t = np.asarray(temperature, dtype=float)
        f = np.asarray(frequency, dtype=float)
        centre = self._evaluate(t, f, TABLE_STEP)
        ln_s, ln_l = np.log(centre.storage_modulus), np.log(centre.loss_modulus)
        var_s = np.zeros(np.broadcast(t, f).shape)
        var_l = np.zeros_like(var_s)
        var_e = np.zeros_like(var_s)
        draws = self.draw_curves()
        if draws:
            ds = np.empty((len(draws), *var_s.shape))
            dl = np.empty_like(ds)
            for k, d in enumerate(draws):
                p = d._evaluate(t, f, TABLE_STEP)
                ds[k], dl[k] = np.log(p.storage_modulus), np.log(p.loss_modulus)
            var_s = robust_variance(ds - ln_s)
            var_l = robust_variance(dl - ln_l)
            var_e = robust_variance((dl - ds) - (ln_l - ln_s))
        log_fr = np.log10(centre.reduced_frequency)
        distance = self.extrapolation_decades(t, log_fr)
        extra_s = (EXTRAPOLATION_SD[0] * distance) ** 2
        extra_l = (EXTRAPOLATION_SD[1] * distance) ** 2
        fine = self.evaluate(t, f)
        hs = Z95 * np.sqrt(var_s + extra_s)
        hl = Z95 * np.sqrt(var_l + extra_l)
        he = Z95 * np.sqrt(var_e + extra_l)
        return PropsBand(
            fine.storage_modulus * np.exp(-hs),
            fine.storage_modulus * np.exp(hs),
            fine.loss_modulus * np.exp(-hl),
            fine.loss_modulus * np.exp(hl),
            fine.loss_factor * np.exp(-he),
            fine.loss_factor * np.exp(he),
        )

    def log_shift_interval(self, temperature):
        """95 % interval (low, high) of log10 aT at ``temperature`` [degC]."""
        t = np.asarray(temperature, dtype=float)
        centre = self.log_shift(t)
        draws = self.draw_curves()
        var = np.zeros_like(centre)
        if draws:
            var = robust_variance([d.log_shift(t) - centre for d in draws])
        t_lo, t_hi = self.temperature_range
        beyond = np.maximum(t_lo - t, 0.0) + np.maximum(t - t_hi, 0.0)
        half = Z95 * np.sqrt(var + (EXTRAPOLATION_SD[0] * beyond / 10.0) ** 2)
        return centre - half, centre + half

    def relaxation_modulus(self, time, temperature):
        """E(t) [Pa] at ``time`` [s] and ``temperature`` [degC]: E(t/aT) at the reference."""
        t = np.asarray(temperature, dtype=float)
        reduced_time = np.asarray(time, dtype=float) / 10.0 ** self.log_shift(t)
        return self.prony.relaxation(reduced_time) * self._vertical(t)

    def table(self, step: float = TABLE_STEP):
        """The master curve tabulated on a uniform log10 fR grid (cached per step).

        Returns (log_fr_start, step, log10 E', log10 E''): linear interpolation in log-log
        between nodes and linear extension beyond the ends, which lie far outside the
        covered range.
        """
        cached = self._tables.get(step)
        if cached is not None:
            return cached
        lo, hi = self.log_fr_range
        start = np.floor((lo - TABLE_MARGIN) / step) * step
        grid = np.arange(start, hi + TABLE_MARGIN + step, step)
        omega = 2.0 * np.pi * 10.0**grid
        with np.errstate(over="ignore", under="ignore", invalid="ignore", divide="ignore"):
            out = (
                float(start),
                step,
                np.log10(self.prony.storage(omega)),
                np.log10(np.maximum(self.prony.loss(omega), 1e-30)),
            )
        self._tables[step] = out
        return out

    # -- persistence ----------------------------------------------------------------
    def to_dict(self) -> dict:
        return {
            "mode": self.mode,
            "reference_C": self.reference_C,
            "shift": self.shift.to_dict(),
            "prony": self.prony.to_dict(),
            "log_fr_range": list(self.log_fr_range),
            "gaps": [list(g) for g in self.gaps],
            "temperature_range": list(self.temperature_range),
            "frequency_range": list(self.frequency_range),
            "vertical_shift": self.vertical_shift,
            "tg": self.tg,
            "secondary_C": self.secondary_C,
            "regions": self.regions,
            "quality": self.quality,
            "notes": self.notes,
            "grouping": self.grouping,
            "draws": self.draws,
            "table": {**_encode_table(self.table()), "series": _series_key(self)},
        }

    @classmethod
    def from_dict(cls, data: dict) -> MasterCurve:
        curve = cls._from_dict(data)
        table = data.get("table")
        # The stored table is used only while it belongs to the same series and range.
        if table is not None and table.get("series") == _series_key(curve):
            curve._tables[TABLE_STEP] = _decode_table(table)
        return curve

    @classmethod
    def _from_dict(cls, data: dict) -> MasterCurve:
        return cls(
            mode=data["mode"],
            reference_C=data["reference_C"],
            shift=ShiftResult.from_dict(data["shift"]),
            prony=PronySeries.from_dict(data["prony"]),
            log_fr_range=tuple(data["log_fr_range"]),
            gaps=[tuple(g) for g in data.get("gaps", [])],
            temperature_range=tuple(data["temperature_range"]),
            frequency_range=tuple(data["frequency_range"]),
            vertical_shift=data["vertical_shift"],
            tg=data["tg"],
            secondary_C=data["secondary_C"],
            regions=data["regions"],
            quality=data["quality"],
            notes=data["notes"],
            grouping=data.get("grouping", {}),
            draws=data.get("draws"),
        )


def _none_if_nan(value) -> float | None:
    return None if not np.isfinite(value) else float(value)


def _encode_array(values) -> str:
    return base64.b64encode(np.asarray(values, dtype="<f8").tobytes()).decode("ascii")


def _decode_array(text: str) -> np.ndarray:
    return np.frombuffer(base64.b64decode(text), dtype="<f8").copy()


def _encode_draws(draws) -> dict:
    """Draws of (law, log_shift per isotherm, series) as base64 float arrays."""

    def num(x):
        return np.nan if x is None else float(x)

    return {
        "wlf_c1": _encode_array([num(law.wlf_c1) for law, _, _ in draws]),
        "wlf_c2": _encode_array([num(law.wlf_c2) for law, _, _ in draws]),
        "activation": _encode_array([num(law.activation_J_per_mol) for law, _, _ in draws]),
        "log_shift": _encode_array(np.concatenate([s for _, s, _ in draws])),
        "weights": _encode_array(np.concatenate([p.weights for _, _, p in draws])),
        "equilibrium": _encode_array([p.equilibrium for _, _, p in draws]),
    }


def _series_key(curve: MasterCurve) -> str:
    """Fingerprint of what a tabulated curve depends on: the series and covered range."""
    h = hashlib.sha256()
    for a in (curve.prony.tau, curve.prony.weights, [curve.prony.equilibrium], curve.log_fr_range):
        h.update(np.asarray(a, dtype="<f8").tobytes())
    return h.hexdigest()[:16]


def _encode_table(table) -> dict:
    start, step, ls, ll = table
    return {
        "start": start,
        "step": step,
        "log_storage": _encode_array(ls),
        "log_loss": _encode_array(ll),
    }


def _decode_table(data: dict):
    return (
        float(data["start"]),
        float(data["step"]),
        _decode_array(data["log_storage"]),
        _decode_array(data["log_loss"]),
    )


def isochrone(isotherms, frequency: float = 1.0):
    """Temperature sweep at ``frequency`` [Hz] read off the measured isotherms.

    Each isotherm that spans ``frequency`` is interpolated linearly in log-log; the others
    are left out. Returns (temperature [degC], E' [Pa], loss factor [-]).
    """
    x = np.log10(frequency)
    temps, storage, eta = [], [], []
    for iso in isotherms:
        lf = iso.log_frequency
        if lf[0] - 1e-9 <= x <= lf[-1] + 1e-9:
            temps.append(iso.temperature)
            storage.append(10.0 ** np.interp(x, lf, iso.log_storage))
            eta.append(10.0 ** np.interp(x, lf, iso.log_loss_factor))
    return np.array(temps), np.array(storage), np.array(eta)


def _nearest_measured_frequency(isotherms, frequency: float) -> float:
    logs = np.concatenate([iso.log_frequency for iso in isotherms])
    return float(10.0 ** logs[np.argmin(np.abs(logs - np.log10(frequency)))])


def transitions_at(temperature, storage, eta, frequency: float) -> list[dict]:
    """Tg by every method of :data:`engine.physics.transitions.TG_METHODS` at one frequency."""
    out = []
    for method in TG_METHODS:
        if temperature.size < 3:
            out.append(
                {
                    "method": method,
                    "frequency_Hz": frequency,
                    "temperature_C": None,
                    "reached": False,
                    "note": "fewer than three temperatures at this frequency",
                }
            )
            continue
        r = glass_transition(method, temperature, storage, eta, frequency)
        out.append(
            {
                "method": r.method,
                "frequency_Hz": r.frequency_Hz,
                "temperature_C": r.temperature_C,
                "reached": r.reached,
                "note": r.note,
            }
        )
    return out


def _eta_collapse(log_storage: np.ndarray, log_eta: np.ndarray, window: int = 9) -> float:
    """Scatter of log10 eta about its curve against log10 E' (a check that needs no shifts).

    For a thermorheologically simple material the loss factor is a single-valued function
    of the storage modulus, whatever the temperature and frequency (the basis of the
    reduced-frequency nomogram, ISO 10112). Points are sorted by log10 E'; each is
    compared with a straight line fitted by least squares to its ``window`` neighbours,
    and the scatter is the robust standard deviation (1.4826 x median absolute residual).
    """
    n = log_storage.size
    if n < window + 2 or np.ptp(log_storage) < 1e-6:
        return float("nan")
    order = np.argsort(log_storage, kind="stable")
    x = np.lib.stride_tricks.sliding_window_view(log_storage[order], window)
    y = np.lib.stride_tricks.sliding_window_view(log_eta[order], window)
    xm, ym = x.mean(axis=1, keepdims=True), y.mean(axis=1, keepdims=True)
    sxx = np.sum((x - xm) ** 2, axis=1)
    slope = np.where(sxx > 0, np.sum((x - xm) * (y - ym), axis=1) / np.maximum(sxx, 1e-300), 0.0)
    mid = window // 2
    resid = y[:, mid] - (ym[:, 0] + slope * (x[:, mid] - xm[:, 0]))
    # Where eta is steep against log E', scatter in E' alone moves points off the line:
    # scale the residual by the combined noise (errors in both variables, with 1 % on E'
    # and 2 % on tan delta as typical DMA scatter; common practice).
    resid = resid / np.sqrt(1.0 + (slope * NOISE_LOG_STORAGE / NOISE_LOG_ETA) ** 2)
    # Where E' is flat (glassy or rubbery plateau) measurement noise alone reorders the
    # points; such windows say nothing about superposition and are left out.
    informative = np.ptp(x, axis=1) >= MIN_WINDOW_SPREAD
    if not informative.any():
        return float("nan")
    return float(1.4826 * np.median(np.abs(resid[informative])))


def _start_law(temps, reference, split, glassy) -> ShiftLaw:
    """A shift law to start the joint fit from when the pairwise shifts cannot give one.

    WLF with the universal constants at Tg (Williams, Landel & Ferry 1955) above the
    glass transition, Arrhenius with 200 kJ/mol (common practice start for a glassy
    polymer) below it; the joint fit then finds the grade's own constants.
    """
    ea = 200e3
    if split is None:
        if glassy:
            return ShiftLaw("Arrhenius", reference, activation_J_per_mol=ea)
        # No transition seen: the data lie well above Tg; universal constants moved
        # 50 K up (C1 = 8.86, C2 = 101.6 K), referred to the reference.
        c1, c2 = wlf_change_reference(WLF_UNIVERSAL_C1, WLF_UNIVERSAL_C2, 0.0, 50.0)
        return ShiftLaw("WLF", reference, c1, c2, reference)
    if np.all(temps >= split - 1e-9):
        return ShiftLaw("WLF", reference, WLF_UNIVERSAL_C1, WLF_UNIVERSAL_C2, split)
    if np.all(temps <= split + 1e-9):
        return ShiftLaw("Arrhenius", reference, activation_J_per_mol=ea)
    return ShiftLaw(
        "WLF+Arrhenius", reference, WLF_UNIVERSAL_C1, WLF_UNIVERSAL_C2, split, ea, split
    )


def _template(law: ShiftLaw, temps: np.ndarray) -> LawTemplate:
    c2_min = 0.0
    if law.kind in ("WLF", "WLF+Arrhenius"):
        t_min = float(temps.min())
        if law.kind == "WLF+Arrhenius":
            assert law.split_C is not None  # a WLF+Arrhenius law has its split
            t_min = max(t_min, float(law.split_C))
        assert law.wlf_reference_C is not None  # a law with a WLF branch has its reference
        c2_min = max(5.0, float(law.wlf_reference_C) - t_min + 1.0)
    return LawTemplate(law.kind, law.reference_C, law.wlf_reference_C, law.split_C, c2_min)


def residual_correlation(labels, log_frequency, residual) -> float:
    """Lag-1 correlation of fit residuals along frequency within each isotherm, pooled.

    Notes
    -----
    Residuals about a master curve that superposes the data are measurement noise:
    neighbouring frequencies of one isotherm are uncorrelated, so the pooled lag-1
    correlation is near zero (its standard error is about 1/sqrt(pairs)). Where a second
    process changes the shape of the curves with temperature, no single curve passes
    through all isotherms and each isotherm's residuals run in long stretches of one sign
    (the runs idea of Wald & Wolfowitz 1940, as a serial correlation; Draper & Smith 1998,
    ch. 7).

    References
    ----------
    Draper, N. R. and Smith, H. (1998). Applied Regression Analysis, 3rd ed. Wiley.
    """
    order = np.lexsort((log_frequency, labels))
    lab, r = labels[order], residual[order]
    same = lab[1:] == lab[:-1]
    if same.sum() < 10:
        return float("nan")
    num = np.sum((r[1:] * r[:-1])[same])
    den = np.sum(r * r)
    return float(num / den) if den > 0 else float("nan")


def _model_tg(curve: MasterCurve, frequency: float) -> list[dict]:
    """Tg by each method on the fitted curve's isochrone at ``frequency`` [Hz], with the
    95 % interval from the draws (``low_C``, ``high_C``)."""
    t_lo, t_hi = curve.temperature_range
    grid = np.arange(t_lo, t_hi + 0.25, 0.5)
    if grid.size < 3:
        return []

    def tgs(c: MasterCurve):
        p = c._evaluate(grid, frequency, TABLE_STEP)
        return transitions_at(grid, p.storage_modulus, p.loss_factor, frequency)

    best = tgs(curve)
    draws = [tgs(d) for d in curve.draw_curves()]
    for k, r in enumerate(best):
        values = [d[k]["temperature_C"] for d in draws if d[k]["reached"]]
        if r["reached"] and len(values) >= 3:
            sd = float(np.sqrt(robust_variance(np.array(values) - r["temperature_C"])))
            r["low_C"] = r["temperature_C"] - Z95 * sd
            r["high_C"] = r["temperature_C"] + Z95 * sd
        else:
            r["low_C"] = r["high_C"] = None
    return best


def check_points(points: np.ndarray) -> np.ndarray:
    """``points`` as a float (n, 4) array, refused with a plain reason where a master curve
    cannot be fitted to them (raises FitError).

    Every value finite; frequencies spanning at most :data:`MAX_FREQUENCY_DECADES` and
    within :data:`MIN_SWEEP_FREQUENCY_HZ` to :data:`MAX_SWEEP_FREQUENCY_HZ`;
    temperatures from absolute zero to :data:`MAX_SWEEP_TEMPERATURE_C`; storage moduli
    positive.
    """
    points = np.asarray(points, dtype=float)
    if points.ndim != 2 or points.shape[1] != 4 or points.shape[0] < 2:
        raise FitError("a master curve needs at least two measured points")
    if not np.all(np.isfinite(points)):
        raise FitError("a master curve needs finite values in every point")
    temperature, frequency, storage = points[:, 0], points[:, 1], points[:, 2]
    if np.any(temperature < ABSOLUTE_ZERO_C):
        raise FitError(
            f"a temperature of {temperature.min():g} degC lies below absolute zero "
            f"({ABSOLUTE_ZERO_C:g} degC): check the temperature column and its unit"
        )
    if np.any(temperature > MAX_SWEEP_TEMPERATURE_C):
        raise FitError(
            f"a temperature of {temperature.max():g} degC lies above "
            f"{MAX_SWEEP_TEMPERATURE_C:g} degC, where no solid is measured: check the "
            "temperature column and its unit"
        )
    if np.any(frequency <= 0) or np.any(storage <= 0):
        raise FitError("frequencies and storage moduli must be positive")
    f_lo, f_hi = float(frequency.min()), float(frequency.max())
    span = float(np.log10(f_hi) - np.log10(f_lo))  # no overflow, subnormal values too
    if span > MAX_FREQUENCY_DECADES:
        raise FitError(
            f"the frequencies span {span:.0f} decades ({f_lo:.3g} to {f_hi:.3g} Hz); a "
            f"dynamic mechanical sweep spans at most {MAX_FREQUENCY_DECADES} — check the "
            "frequency column and its unit"
        )
    if f_lo < MIN_SWEEP_FREQUENCY_HZ or f_hi > MAX_SWEEP_FREQUENCY_HZ:
        bad = f_lo if f_lo < MIN_SWEEP_FREQUENCY_HZ else f_hi
        raise FitError(
            f"a frequency of {bad:.3g} Hz lies outside {MIN_SWEEP_FREQUENCY_HZ:g} to "
            f"{MAX_SWEEP_FREQUENCY_HZ:g} Hz, where dynamic tests are made: check the "
            "frequency column and its unit"
        )
    return points


def check_curve(curve: MasterCurve) -> None:
    """Refuse a master curve that cannot be evaluated (raises FitError naming what).

    A usable curve has finite, positive relaxation times, finite non-negative weights and
    equilibrium modulus with a positive glassy modulus, a finite reference temperature,
    finite shift factors and covered range, and a finite tabulated curve.
    """

    def finite(values) -> bool:  # NaN or an infinity makes the sum non-finite
        return bool(np.isfinite(np.sum(values)))

    prony = curve.prony
    tau, weights = np.asarray(prony.tau, float), np.asarray(prony.weights, float)
    if not (tau.size and tau.min() > 0 and finite(tau)):
        raise FitError("the fitted spectrum has relaxation times that are not finite and positive")
    if not (weights.size == 0 or (weights.min() >= 0 and finite(weights))):
        raise FitError("the fitted spectrum has weights that are not finite and non-negative")
    glassy = float(prony.equilibrium) + float(weights.sum())
    if not (np.isfinite(prony.equilibrium) and prony.equilibrium >= 0 and np.isfinite(glassy)):
        raise FitError("the fitted spectrum has an equilibrium modulus that is not finite")
    if glassy <= 0:
        raise FitError("the fitted spectrum has no stiffness (all its weights are zero)")
    if not np.isfinite(curve.reference_C):
        raise FitError("the fitted master curve has no finite reference temperature")
    if not finite(curve.shift.log_shift):
        raise FitError("the fitted shift factors are not finite")
    if not finite(curve.log_fr_range):
        raise FitError("the reduced frequencies the data cover are not finite")
    _, _, log_storage, log_loss = curve.table()
    if not (finite(log_storage) and finite(log_loss)):
        raise FitError("the fitted master curve is not finite over its reduced frequencies")


def build_master_curve(
    points: np.ndarray,
    mode: str,
    reference_C: float | None = None,
    vertical_shift: bool = False,
    temperature_tolerance_K: float = DEFAULT_TOLERANCE_K,
    intervals: bool = True,
) -> MasterCurve:
    """Fit a master curve to measured points (raises FitError with a plain reason).

    The points are checked first (:func:`check_points`) and the fitted curve last
    (:func:`check_curve`); floating-point overflow and underflow inside the fit are
    silenced (a fit they spoil is refused by the last check). Parameters and steps:
    :func:`fit_master_curve`.
    """
    points = check_points(points)
    if reference_C is not None and not (
        np.isfinite(reference_C) and ABSOLUTE_ZERO_C < reference_C <= MAX_SWEEP_TEMPERATURE_C
    ):
        raise FitError(f"reference temperature {reference_C:g} degC is not a usable temperature")
    with np.errstate(over="ignore", under="ignore", invalid="ignore", divide="ignore"):
        curve = fit_master_curve(
            points, mode, reference_C, vertical_shift, temperature_tolerance_K, intervals
        )
        check_curve(curve)
    return curve


def fit_master_curve(
    points: np.ndarray,
    mode: str,
    reference_C: float | None = None,
    vertical_shift: bool = False,
    temperature_tolerance_K: float = DEFAULT_TOLERANCE_K,
    intervals: bool = True,
) -> MasterCurve:
    """Fit a master curve to measured points (checked by :func:`check_points`).

    Parameters
    ----------
    points : array (n, 4)
        temperature [degC] (set-point or logged per point), frequency [Hz], storage
        modulus [Pa], loss factor [-].
    mode : {"tensile", "shear"}
        Which modulus the points hold.
    reference_C : float, optional [degC]
        Reference temperature. Default: the isotherm nearest the loss-factor peak at
        1 Hz, or, when the data show no peak, the isotherm nearest 20 degC.
    vertical_shift : bool
        Apply the vertical factor T0/T (kelvin) to the moduli before superposition.
    temperature_tolerance_K : float
        Logged temperatures closer than this belong to one isotherm
        (:func:`engine.physics.isotherms.group_temperatures`).
    intervals : bool
        Make the posterior draws behind every 95 % interval (False: the fitted curve
        only, about half the time).

    Notes
    -----
    Steps: isotherms from the logged temperatures; Tg at 1 Hz from them; pairwise
    horizontal shifts and a WLF (above Tg) / Arrhenius (below Tg) law
    (:mod:`engine.physics.shift`) as the start; a non-negative Prony series by NNLS
    (:mod:`engine.physics.prony`) as the start spectrum; then shift law, isotherm shifts and a
    smooth spectrum fitted together to every point, with posterior draws for the
    intervals (:mod:`engine.physics.jointfit`); residuals per isotherm and the superposition
    check; Tg of the fitted curve with its interval.
    """
    points = np.asarray(points, dtype=float)
    grouping = group_temperatures(points[:, 0], temperature_tolerance_K)
    isotherms = split_isotherms(
        points[:, 0],
        points[:, 1],
        points[:, 2],
        points[:, 3],
        labels=grouping.labels,
        temperatures=grouping.temperatures,
    )
    temps = grouping.temperatures
    notes: list[str] = []
    if grouping.method != "set-points":
        notes.append(grouping.describe())

    f_tg = 1.0
    t_curve, e_curve, eta_curve = isochrone(isotherms, f_tg)
    spans_1hz = any(
        iso.log_frequency[0] - 1e-9 <= 0.0 <= iso.log_frequency[-1] + 1e-9 for iso in isotherms
    )
    if not spans_1hz:
        f_tg = _nearest_measured_frequency(isotherms, 1.0)
        t_curve, e_curve, eta_curve = isochrone(isotherms, f_tg)
        notes.append(f"1 Hz lies outside the measured frequencies: Tg reported at {f_tg:g} Hz")
    tg = transitions_at(t_curve, e_curve, eta_curve, f_tg)
    by_method = {r["method"]: r for r in tg}
    candidates = [by_method[m]["temperature_C"] for m in SPLIT_METHODS if by_method[m]["reached"]]
    split = candidates[0] if candidates else None
    glassy = bool(e_curve.size and np.median(e_curve) > GLASSY_MODULUS[mode])

    if reference_C is None:
        peak = by_method["loss_factor_peak"]
        target = peak["temperature_C"] if peak["reached"] else DEFAULT_REFERENCE_FALLBACK_C
        reference_C = float(temps[np.argmin(np.abs(temps - target))])
    if len(isotherms) == 1:
        reference_C = float(temps[0])
        notes.append(
            "single isotherm: no time-temperature superposition; values interpolate in "
            "frequency at this temperature only"
        )

    storage = points[:, 2].copy()
    if vertical_shift:
        storage *= c_to_k(reference_C) / c_to_k(points[:, 0])
        isotherms = split_isotherms(
            points[:, 0],
            points[:, 1],
            storage,
            points[:, 3],
            labels=grouping.labels,
            temperatures=temps,
        )
    try:
        start = shift_isotherms(isotherms, reference_C, candidates or [None], glassy)
    except FitError as exc:
        # Too few overlapping pairs (a sparse sheet), or no law of the pairs finite at the
        # reference: start from a universal law and let the joint fit find the grade's own.
        law = _start_law(temps, reference_C, split, glassy)
        start = ShiftResult(temps, law.log_shift(temps), np.ones(temps.size, bool), law)
        why = (
            "too few overlapping isotherm pairs for the pairwise shifts"
            if "pair" in str(exc)
            else "the pairwise shifts give no shift law finite at the reference"
        )
        notes.append(
            f"{why}: the shift law was fitted to all points together from a universal start"
        )
    split = start.law.split_C if start.law.split_C is not None else split
    for note in [*start.notes, *start.law.notes]:
        single = note.startswith("single isotherm") and len(isotherms) == 1
        bridged = "bridged with the shift law" in note
        if note not in notes and not single and not bridged:
            notes.append(note)

    # Start spectrum: NNLS at the start shifts, each point at its own temperature.
    labels = grouping.labels
    law_corr = start.log_shift - start.law.log_shift(temps)
    point_shift = start.law.log_shift(points[:, 0]) + law_corr[labels]
    eta = np.maximum(points[:, 3], 1e-6)
    loss = storage * eta
    log_fr0 = np.log10(points[:, 1]) + point_shift
    omega0 = 2.0 * np.pi * 10.0 ** np.clip(log_fr0, -250, 250)
    tau = tau_grid(float(omega0.min()), float(omega0.max()), per_decade=PRONY_PER_DECADE)
    prony0, _ = fit_prony(omega0, storage, loss, tau=tau, smoothing=PRONY_SMOOTHING)
    reference_group = int(np.argmin(np.abs(temps - reference_C)))
    template = _template(start.law, temps)
    joint = fit_jointly(
        points[:, 0],
        points[:, 1],
        storage,
        loss,
        labels,
        temps,
        start.law,
        template,
        start.log_shift,
        tau,
        prony0,
        reference_group,
        n_draws=N_DRAWS if intervals else 0,
        # Each data set draws from a stream of its own (the same on every run), so the
        # draws of two grades are independent.
        rng_seed=int.from_bytes(hashlib.sha256(points.tobytes()).digest()[:8], "little"),
    )
    law = ShiftLaw(**{**joint.law.to_dict(), "rms": start.law.rms, "notes": start.law.notes})
    # An isotherm of a single frequency shows no shape of its own: a modulus error and a
    # shift error look alike, so its shift is the law's as much as its own.
    shapeless = np.array([iso.log_frequency.size < 2 for iso in isotherms])
    from_law_mask = joint.from_law | (shapeless & (np.arange(temps.size) != reference_group))
    shift = ShiftResult(
        temps, joint.log_shift, from_law_mask, law, start.pairs, [], joint.log_shift_sd
    )
    from_law = [float(t) for t, b in zip(temps, from_law_mask, strict=True) if b]
    if from_law and len(isotherms) > 1:
        notes.append(
            f"{len(from_law)} of {temps.size} isotherms take their shift mostly from the law "
            "(the data barely determine it): values there carry a wider interval"
        )
    prony = joint.prony
    log_fr = joint.log_fr
    omega = 2.0 * np.pi * 10.0**log_fr

    # Quality: residual per isotherm against the fitted curve.
    r_e = joint.residual_storage / LN10
    r_eta = (joint.residual_loss - joint.residual_storage) / LN10
    per_iso = []
    iso_rms: list[float] = []  # the larger of the two rms misfits of each isotherm
    for k, t in enumerate(temps):
        sel = labels == k
        rms_storage = float(np.sqrt(np.mean(r_e[sel] ** 2)))
        rms_loss_factor = float(np.sqrt(np.mean(r_eta[sel] ** 2)))
        iso_rms.append(max(rms_storage, rms_loss_factor))
        per_iso.append(
            {
                "temperature_C": float(t),
                "points": int(sel.sum()),
                "log_shift": float(shift.log_shift[k]),
                "log_shift_sd": None
                if shift.log_shift_sd is None
                else float(shift.log_shift_sd[k]),
                "bridged": bool(shift.bridged[k]),
                "rms_log_storage": rms_storage,
                "rms_log_loss_factor": rms_loss_factor,
            }
        )
    collapse = _eta_collapse(np.log10(storage), np.log10(eta))
    worst_iso = max(iso_rms, default=0.0)
    log_f = np.log10(points[:, 1])
    serial = [
        residual_correlation(labels, log_f, joint.residual_storage),
        residual_correlation(labels, log_f, joint.residual_loss),
    ]
    simple = not (np.isfinite(serial[1]) and serial[1] > SERIAL_CORRELATION_LIMIT)
    model_e = prony.storage(omega)
    quality = {
        "per_isotherm": per_iso,
        "rms_log_storage": float(np.sqrt(np.mean(r_e**2))),
        "rms_log_loss_factor": float(np.sqrt(np.mean(r_eta**2))),
        "prony_rms_storage": float(np.sqrt(np.mean((model_e / storage - 1) ** 2))),
        "prony_rms_loss": float(np.sqrt(np.mean((prony.loss(omega) / loss - 1) ** 2))),
        "prony_terms": int(np.count_nonzero(prony.weights > 1e-12 * prony.glassy)),
        "scatter_storage": joint.sigma_storage,
        "scatter_loss_modulus": joint.sigma_loss,
        "eta_vs_log_storage_scatter": collapse,
        "worst_isotherm_rms": float(worst_iso),
        "residual_serial_correlation": serial,
        "superposition_ok": bool(simple and worst_iso <= ISOTHERM_RESIDUAL_LIMIT),
    }
    if worst_iso > ISOTHERM_RESIDUAL_LIMIT:
        notes.append(
            f"an isotherm lies {worst_iso:.2f} decades (rms) off the master curve: "
            "superposition is poor there"
        )
    if not simple:
        notes.append(
            f"the isotherms do not collapse onto one curve (the residuals of E'' run along "
            f"each isotherm: serial correlation {serial[1]:.2f}): "
            "the grade may not be thermorheologically simple (a second relaxation process "
            "on another shift law); treat superposed values with care"
        )

    # Stretches of reduced frequency the shifted data leave empty: values there come
    # from the spectrum alone and are flagged like extrapolation.
    ordered = np.sort(log_fr)
    jumps = np.flatnonzero(np.diff(ordered) > GAP_DECADES)
    gaps = [(float(ordered[j]), float(ordered[j + 1])) for j in jumps]
    for g_lo, g_hi in gaps:
        notes.append(
            f"no data between reduced frequencies {10**g_lo:.3g} and {10**g_hi:.3g} Hz: "
            "values there are flagged as extrapolated"
        )

    secondary = None
    region_list: list[dict] = []
    if t_curve.size >= 3:
        if split is not None:
            secondary = secondary_transition(t_curve, eta_curve, split)
        region_list = [
            {"name": n, "low_C": float(lo), "high_C": float(hi)}
            for n, lo, hi in regions(t_curve, e_curve, eta_curve)
        ]
    curve = MasterCurve(
        mode=mode,
        reference_C=float(reference_C),
        shift=shift,
        prony=prony,
        log_fr_range=(float(log_fr.min()), float(log_fr.max())),
        gaps=gaps,
        temperature_range=(float(points[:, 0].min()), float(points[:, 0].max())),
        frequency_range=(float(points[:, 1].min()), float(points[:, 1].max())),
        vertical_shift=vertical_shift,
        secondary_C=None if secondary is None else float(secondary),
        regions=region_list,
        quality=quality,
        notes=notes,
        grouping=grouping.to_dict(),
        draws=_encode_draws(joint.draws) if joint.draws else None,
    )
    if len(isotherms) > 1:
        model_tg = _model_tg(curve, f_tg)
        curve.tg = model_tg or tg
    else:
        curve.tg = tg
    return curve
