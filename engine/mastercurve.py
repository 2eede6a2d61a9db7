"""Master curve of one grade: shifting, shift law, relaxation spectrum and quality.

:func:`build_master_curve` composes :mod:`engine.shift`, :mod:`engine.prony` and
:mod:`engine.transitions` on one data set; :class:`MasterCurve` evaluates the stiffness
and damping of the grade at any temperature and frequency, flagging extrapolation.
"""

from __future__ import annotations

import base64
import hashlib
from dataclasses import dataclass, field

import numpy as np

from engine.errors import FitError
from engine.prony import PronySeries, fit_prony
from engine.shift import ShiftResult, shift_isotherms, split_isotherms
from engine.transitions import TG_METHODS, glass_transition, regions, secondary_transition
from engine.units import c_to_k

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
    _tables: dict = field(default_factory=dict, repr=False, compare=False)

    # -- evaluation -----------------------------------------------------------------
    def log_shift(self, temperature):
        """log10 aT at ``temperature`` [degC].

        Inside the measured temperatures the shift follows the measured shift factors
        (linear between isotherms, bridged ones taken from the law); outside them the
        fitted law carries on from the nearest end isotherm, so the curve is continuous.
        """
        t = np.asarray(temperature, dtype=float)
        return self.shift.law.log_shift(t) + self.shift_correction(t)

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
        t = np.asarray(temperature, dtype=float)
        f = np.asarray(frequency, dtype=float)
        log_fr = np.log10(f) + self.log_shift(t)
        start, step, ls, ll = self.table(FINE_TABLE_STEP)
        pos = (log_fr - start) / step
        i0 = np.clip(np.floor(pos).astype(np.intp), 0, ls.size - 2)
        w = pos - i0
        scale = self._vertical(t)
        storage = 10.0 ** (ls[i0] * (1 - w) + ls[i0 + 1] * w) * scale
        loss = 10.0 ** (ll[i0] * (1 - w) + ll[i0 + 1] * w) * scale
        return Props(storage, loss, loss / storage, 10.0**log_fr, self.extrapolated(t, log_fr))

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
        )


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
        "log_storage": base64.b64encode(ls.astype("<f8").tobytes()).decode("ascii"),
        "log_loss": base64.b64encode(ll.astype("<f8").tobytes()).decode("ascii"),
    }


def _decode_table(data: dict):
    def arr(text):
        return np.frombuffer(base64.b64decode(text), dtype="<f8").copy()

    return (
        float(data["start"]),
        float(data["step"]),
        arr(data["log_storage"]),
        arr(data["log_loss"]),
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
    """Tg by every method of :data:`engine.transitions.TG_METHODS` at one frequency."""
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


def build_master_curve(
    points: np.ndarray,
    mode: str,
    reference_C: float | None = None,
    vertical_shift: bool = False,
) -> MasterCurve:
    """Fit a master curve to measured points.

    Parameters
    ----------
    points : array (n, 4)
        temperature [degC], frequency [Hz], storage modulus [Pa], loss factor [-].
    mode : {"tensile", "shear"}
        Which modulus the points hold.
    reference_C : float, optional [degC]
        Reference temperature. Default: the measured isotherm nearest the loss-factor
        peak at 1 Hz, or, when the data show no peak, the isotherm nearest 20 degC.
    vertical_shift : bool
        Apply the vertical factor T0/T (kelvin) to the moduli before superposition.

    Notes
    -----
    Steps: isotherms; Tg at 1 Hz from the measured data; pairwise horizontal shifts and a
    WLF (above Tg) / Arrhenius (below Tg) law (:mod:`engine.shift`); a Prony series
    fitted to E' and E'' on the master curve by NNLS (:mod:`engine.prony`); residuals per
    isotherm and the eta-against-log E' check.
    """
    points = np.asarray(points, dtype=float)
    if points.ndim != 2 or points.shape[1] != 4 or points.shape[0] < 2:
        raise FitError("a master curve needs at least two measured points")
    isotherms = split_isotherms(points[:, 0], points[:, 1], points[:, 2], points[:, 3])
    temps = np.array([iso.temperature for iso in isotherms])
    notes: list[str] = []

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
        isotherms = split_isotherms(points[:, 0], points[:, 1], storage, points[:, 3])
    shift = shift_isotherms(isotherms, reference_C, candidates or [None], glassy)
    split = shift.law.split_C if shift.law.split_C is not None else split
    for note in [*shift.notes, *shift.law.notes]:
        single = note.startswith("single isotherm") and len(isotherms) == 1
        if note not in notes and not single:
            notes.append(note)

    # Master curve data: each point at its isotherm's shift.
    t_round = np.round(points[:, 0], 1)
    idx = np.searchsorted(temps, t_round)
    log_fr = np.log10(points[:, 1]) + shift.log_shift[idx]
    loss = storage * points[:, 3]
    omega = 2.0 * np.pi * 10.0**log_fr
    prony, report = fit_prony(
        omega,
        storage,
        np.maximum(loss, storage * 1e-6),
        per_decade=PRONY_PER_DECADE,
        smoothing=PRONY_SMOOTHING,
    )

    # Quality: residual per isotherm against the spectrum, at the data shifts.
    model_e = prony.storage(omega)
    model_eta = prony.loss(omega) / model_e
    r_e = np.log10(model_e / storage)
    r_eta = np.log10(model_eta / np.maximum(points[:, 3], 1e-6))
    per_iso = []
    for k, t in enumerate(temps):
        sel = idx == k
        per_iso.append(
            {
                "temperature_C": float(t),
                "log_shift": float(shift.log_shift[k]),
                "bridged": bool(shift.bridged[k]),
                "rms_log_storage": float(np.sqrt(np.mean(r_e[sel] ** 2))),
                "rms_log_loss_factor": float(np.sqrt(np.mean(r_eta[sel] ** 2))),
            }
        )
    collapse = _eta_collapse(np.log10(storage), np.log10(np.maximum(points[:, 3], 1e-6)))
    worst_iso = max(
        (max(p["rms_log_storage"], p["rms_log_loss_factor"]) for p in per_iso), default=0.0
    )
    collapse_ok = not np.isfinite(collapse) or collapse <= ETA_COLLAPSE_LIMIT
    quality = {
        "per_isotherm": per_iso,
        "rms_log_storage": float(np.sqrt(np.mean(r_e**2))),
        "rms_log_loss_factor": float(np.sqrt(np.mean(r_eta**2))),
        "prony_rms_storage": report.rms_storage,
        "prony_rms_loss": report.rms_loss,
        "prony_terms": report.n_terms,
        "eta_vs_log_storage_scatter": collapse,
        "worst_isotherm_rms": float(worst_iso),
        "superposition_ok": bool(collapse_ok and worst_iso <= ISOTHERM_RESIDUAL_LIMIT),
    }
    if worst_iso > ISOTHERM_RESIDUAL_LIMIT:
        notes.append(
            f"an isotherm lies {worst_iso:.2f} decades (rms) off the master curve: "
            "superposition is poor there"
        )
    if np.isfinite(collapse) and collapse > ETA_COLLAPSE_LIMIT:
        notes.append(
            f"loss factor against log E' scatters by {collapse:.3f} decades: the grade may not "
            "be thermorheologically simple; treat superposed values with care"
        )

    # Stretches of reduced frequency the shifted data leave empty (a non-overlapping
    # pair): values there come from the spectrum alone and are flagged like extrapolation.
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
        split_or_tg = split if split is not None else None
        if split_or_tg is not None:
            secondary = secondary_transition(t_curve, eta_curve, split_or_tg)
        region_list = [
            {"name": n, "low_C": float(lo), "high_C": float(hi)}
            for n, lo, hi in regions(t_curve, e_curve, eta_curve)
        ]
    return MasterCurve(
        mode=mode,
        reference_C=float(reference_C),
        shift=shift,
        prony=prony,
        log_fr_range=(float(log_fr.min()), float(log_fr.max())),
        gaps=gaps,
        temperature_range=(float(temps.min()), float(temps.max())),
        frequency_range=(float(points[:, 1].min()), float(points[:, 1].max())),
        vertical_shift=vertical_shift,
        tg=tg,
        secondary_C=None if secondary is None else float(secondary),
        regions=region_list,
        quality=quality,
        notes=notes,
    )
