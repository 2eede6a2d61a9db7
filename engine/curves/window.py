"""The operating window: where in temperature and frequency a grade must perform.

A window is a temperature range with a step and a log-spaced frequency band, or a list
of duty points (temperature, frequency, share of service time). :func:`evaluate_window`
gives every grade's properties at every window point in one vectorised pass.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field
from functools import cached_property
from typing import TYPE_CHECKING, Any

import numpy as np

from engine.base.errors import CriteriaError, reject_unknown
from engine.base.units import ABSOLUTE_ZERO_C

if TYPE_CHECKING:  # the window's defaults are read by the command line's parser alone
    from engine.curves.bank import CurveBank

DEFAULT_POISSON = 0.5  # rubber, unless the catalog says otherwise (Gent & Lindley 1959)

# Limits on what a user may ask for, refused before anything is allocated (common practice
# for polymer DMA: instruments cool to about -150 degC with liquid nitrogen, and
# elastomers and damping polymers decompose well below 400 degC; 1e-6 Hz is a period of
# about 12 days, 1e9 Hz far beyond any dynamic test of a solid polymer).
MIN_TEMPERATURE_C = -150.0
MAX_TEMPERATURE_C = 400.0
MIN_FREQUENCY_HZ = 1e-6
MAX_FREQUENCY_HZ = 1e9
MAX_WINDOW_TEMPERATURES = 2001  # temperatures of one window (2000 steps)
MAX_WINDOW_FREQUENCIES = 500  # frequencies of one band
MAX_QUERY_POINTS = 2001  # temperatures or frequencies of one property query
# Grades x window points evaluated in one pass (each array of that size is 8 bytes per
# value, and the evaluation holds several): about 0.4 GB per array at the limit.
MAX_WINDOW_VALUES = 50_000_000


def check_temperatures(values, what: str = "temperature") -> np.ndarray:
    """``values`` [degC] as a float array, refused unless finite and within the limits.

    Raises
    ------
    CriteriaError
        Naming ``what``, the first bad value and the accepted range
        (:data:`MIN_TEMPERATURE_C` to :data:`MAX_TEMPERATURE_C`).
    """
    t = np.atleast_1d(np.asarray(values, dtype=float)).reshape(-1)
    if t.size > MAX_QUERY_POINTS:
        raise CriteriaError(f"{what}: {t.size:,} values; at most {MAX_QUERY_POINTS:,} are accepted")
    for v in t.tolist():
        if not np.isfinite(v):
            raise CriteriaError(f"{what}: {v:g} is not a number of degC")
        if v < ABSOLUTE_ZERO_C:
            raise CriteriaError(f"{what}: {v:g} degC is below absolute zero")
        if not MIN_TEMPERATURE_C <= v <= MAX_TEMPERATURE_C:
            raise CriteriaError(
                f"{what}: {v:g} degC is outside {MIN_TEMPERATURE_C:g} to "
                f"{MAX_TEMPERATURE_C:g} degC, the temperatures quietgrade evaluates"
            )
    return t


def check_frequencies(values, what: str = "frequency") -> np.ndarray:
    """``values`` [Hz] as a float array, refused unless finite and within the limits
    (:data:`MIN_FREQUENCY_HZ` to :data:`MAX_FREQUENCY_HZ`); raises CriteriaError."""
    f = np.atleast_1d(np.asarray(values, dtype=float)).reshape(-1)
    if f.size > MAX_QUERY_POINTS:
        raise CriteriaError(f"{what}: {f.size:,} values; at most {MAX_QUERY_POINTS:,} are accepted")
    for v in f.tolist():
        if not np.isfinite(v):
            raise CriteriaError(f"{what}: {v:g} is not a number of Hz")
        if v <= 0:
            raise CriteriaError(f"{what}: {v:g} Hz; frequencies must be positive")
        if not MIN_FREQUENCY_HZ <= v <= MAX_FREQUENCY_HZ:
            raise CriteriaError(
                f"{what}: {v:g} Hz is outside {MIN_FREQUENCY_HZ:g} to {MAX_FREQUENCY_HZ:g} Hz, "
                "the frequencies quietgrade evaluates"
            )
    return f


def _pair(values: Iterable[Any]) -> tuple[float, float]:
    """A (low, high) setting as two floats; ValueError or TypeError if it is not two numbers."""
    low, high = tuple(float(v) for v in values)
    return low, high


@dataclass(frozen=True)
class DutyPoint:
    temperature_C: float
    frequency_Hz: float
    share: float  # share of service time, any positive weights (normalised)


@dataclass(frozen=True)
class OperatingWindow:
    """Temperatures [degC] x frequencies [Hz], or duty points.

    Parameters
    ----------
    temp_range : (float, float)
        Lowest and highest temperature [degC].
    temp_step : float
        Spacing of the temperature grid [K].
    freq_range : (float, float)
        Lowest and highest frequency [Hz]; the grid is log-spaced.
    freq_points : int
        Number of frequencies.
    duty_points : tuple of DutyPoint
        Temperature, frequency and share of service time; with them the point indices
        are taken at the duty points.
    design_frequency_Hz : float, optional
        The frequency at which temperature paths are drawn and the damping temperature
        span is measured; by default the geometric mean of the band.

    Examples
    --------
    >>> w = OperatingWindow(temp_range=(-20.0, 40.0), temp_step=10.0, freq_range=(10.0, 1000.0))
    >>> w.temperatures.tolist()
    [-20.0, -10.0, 0.0, 10.0, 20.0, 30.0, 40.0]
    >>> round(w.design_frequency, 6)
    100.0
    >>> OperatingWindow(temp_range=(60.0, -20.0))
    Traceback (most recent call last):
    ...
    engine.base.errors.CriteriaError: temperature range 60 to -20 degC is inverted
    """

    temp_range: tuple[float, float] = (-20.0, 60.0)
    temp_step: float = 5.0
    freq_range: tuple[float, float] = (5.0, 200.0)
    freq_points: int = 13
    duty_points: tuple[DutyPoint, ...] = field(default_factory=tuple)
    design_frequency_Hz: float | None = None

    def __post_init__(self) -> None:
        lo, hi = self.temp_range
        if not (np.isfinite(lo) and np.isfinite(hi)):
            raise CriteriaError("window temperatures must be numbers")
        if lo > hi:
            raise CriteriaError(f"temperature range {lo:g} to {hi:g} degC is inverted")
        if lo < ABSOLUTE_ZERO_C:
            raise CriteriaError(f"temperature {lo:g} degC is below absolute zero")
        if not (np.isfinite(self.temp_step) and self.temp_step > 0):
            raise CriteriaError(
                f"temperature step must be positive and finite, not {self.temp_step:g}"
            )
        flo, fhi = self.freq_range
        if not (np.isfinite(flo) and np.isfinite(fhi)):
            raise CriteriaError(f"frequencies must be finite numbers, not {flo:g} to {fhi:g} Hz")
        if flo <= 0 or fhi <= 0:
            raise CriteriaError("frequencies must be positive")
        if flo > fhi:
            raise CriteriaError(f"frequency range {flo:g} to {fhi:g} Hz is inverted")
        if self.freq_points < 1:
            raise CriteriaError("the frequency band needs at least one point")
        # Every limit is checked here, before a grid is made (each check is arithmetic).
        for end in (lo, hi):
            check_temperatures(end, "window temperature")
        for end in (flo, fhi):
            check_frequencies(end, "window frequency")
        steps = (hi - lo) / self.temp_step
        if steps > MAX_WINDOW_TEMPERATURES - 1:
            raise CriteriaError(
                f"temperature step too fine: more than 2000 temperatures after the first "
                f"({lo:g} to {hi:g} degC in steps of {self.temp_step:g} K); a window holds "
                f"at most {MAX_WINDOW_TEMPERATURES:,}"
            )
        if self.freq_points > MAX_WINDOW_FREQUENCIES:
            raise CriteriaError(
                f"more than {MAX_WINDOW_FREQUENCIES} frequencies in the band "
                f"({self.freq_points:,} asked)"
            )
        for p in self.duty_points:
            if not np.isfinite([p.temperature_C, p.frequency_Hz, p.share]).all():
                raise CriteriaError(
                    "duty-point temperature, frequency and share must be finite numbers, not "
                    f"{p.temperature_C:g} degC, {p.frequency_Hz:g} Hz, {p.share:g}"
                )
            if p.share < 0 or p.frequency_Hz <= 0 or p.temperature_C < ABSOLUTE_ZERO_C:
                raise CriteriaError(
                    "duty points need a temperature above absolute zero, a positive "
                    "frequency and a non-negative share"
                )
            check_temperatures(p.temperature_C, "duty-point temperature")
            check_frequencies(p.frequency_Hz, "duty-point frequency")
        if len(self.duty_points) > MAX_QUERY_POINTS:
            raise CriteriaError(
                f"{len(self.duty_points):,} duty points; at most {MAX_QUERY_POINTS:,} are accepted"
            )
        if self.duty_points and sum(p.share for p in self.duty_points) <= 0:
            raise CriteriaError("duty-point shares add up to zero")
        if self.design_frequency_Hz is not None and not (
            np.isfinite(self.design_frequency_Hz) and self.design_frequency_Hz > 0
        ):
            raise CriteriaError("design frequency must be positive and finite")
        if self.design_frequency_Hz is not None:
            check_frequencies(self.design_frequency_Hz, "design frequency")

    @property
    def temperatures(self) -> np.ndarray:
        lo, hi = self.temp_range
        n = int(np.floor((hi - lo) / self.temp_step + 1e-9)) + 1
        t = lo + self.temp_step * np.arange(n)
        return t if np.isclose(t[-1], hi) else np.append(t, hi)

    @property
    def frequencies(self) -> np.ndarray:
        lo, hi = self.freq_range
        if self.freq_points == 1 or lo == hi:
            return np.array([np.sqrt(lo * hi)])
        return np.logspace(np.log10(lo), np.log10(hi), self.freq_points)

    @property
    def design_frequency(self) -> float:
        if self.design_frequency_Hz is not None:
            return float(self.design_frequency_Hz)
        return float(np.sqrt(self.freq_range[0] * self.freq_range[1]))

    def to_dict(self) -> dict:
        return {
            "temp_range": list(self.temp_range),
            "temp_step": self.temp_step,
            "freq_range": list(self.freq_range),
            "freq_points": self.freq_points,
            "duty_points": [
                {"temp_C": p.temperature_C, "freq_Hz": p.frequency_Hz, "share": p.share}
                for p in self.duty_points
            ],
            "design_frequency_Hz": self.design_frequency_Hz,
        }

    @classmethod
    def from_dict(cls, data: dict) -> OperatingWindow:
        known = {
            "temp_range",
            "temp_step",
            "freq_range",
            "freq_points",
            "duty_points",
            "design_frequency_Hz",
        }
        if not isinstance(data, dict):
            raise CriteriaError(f"window must be a mapping of settings, not {data!r}")
        reject_unknown(data, known, "window setting(s)")
        try:
            duty = tuple(
                DutyPoint(float(p["temp_C"]), float(p["freq_Hz"]), float(p.get("share", 1.0)))
                for p in data.get("duty_points", [])
            )
            given: dict = {}
            if "temp_range" in data:
                given["temp_range"] = _pair(data["temp_range"])
            if "temp_step" in data:
                given["temp_step"] = float(data["temp_step"])
            if "freq_range" in data:
                given["freq_range"] = _pair(data["freq_range"])
            if "freq_points" in data:
                given["freq_points"] = int(data["freq_points"])
            if data.get("design_frequency_Hz") is not None:
                given["design_frequency_Hz"] = float(data["design_frequency_Hz"])
            return cls(duty_points=duty, **given)  # the rest: the class defaults
        except (KeyError, TypeError, ValueError) as exc:
            raise CriteriaError(f"bad window setting: {exc}") from None


@dataclass
class WindowProps:
    """Every grade's properties over the window.

    Arrays have shape (grades, temperatures, frequencies); ``duty_*`` arrays have shape
    (grades, duty points) when the window has duty points. Moduli are tensile-equivalent
    E' and E'' [Pa] (shear data converted with E = 2(1+nu)G); ``poisson`` holds the
    Poisson ratio of each grade used for the conversions.
    """

    ids: list[str]
    temperatures: np.ndarray
    frequencies: np.ndarray
    storage: np.ndarray
    loss: np.ndarray
    extrapolated: np.ndarray
    poisson: np.ndarray
    duty_storage: np.ndarray | None = None
    duty_loss: np.ndarray | None = None
    duty_extrapolated: np.ndarray | None = None
    duty_share: np.ndarray | None = None
    duty_temperatures: np.ndarray | None = None
    duty_frequencies: np.ndarray | None = None
    path_temperatures: np.ndarray | None = None  # fine grid at the design frequency
    path_storage: np.ndarray | None = None
    path_loss: np.ndarray | None = None
    path_extrapolated: np.ndarray | None = None

    @cached_property
    def loss_factor(self) -> np.ndarray:
        return self.loss / self.storage

    @property
    def to_shear(self) -> np.ndarray:
        """Factor G / E = 1 / (2 (1 + nu)) of each grade."""
        return 1.0 / (2.0 * (1.0 + self.poisson))

    @cached_property
    def shear_storage(self) -> np.ndarray:
        """Shear storage modulus G' [Pa] over the window."""
        return self.storage * self.to_shear[:, None, None]

    @cached_property
    def path_loss_factor(self) -> np.ndarray | None:
        """Loss factor along the temperature path at the design frequency."""
        if self.path_loss is None:
            return None
        return self.path_loss / self.path_storage


def poisson_or_default(poisson) -> np.ndarray:
    """Each grade's Poisson ratio, :data:`DEFAULT_POISSON` where the catalog has none (NaN)."""
    poisson = np.asarray(poisson, dtype=float)
    return np.where(np.isnan(poisson), DEFAULT_POISSON, poisson)


def tensile_factor(modes, poisson) -> np.ndarray:
    """Factor that turns each grade's own modulus into a tensile one: 1 or 2(1 + nu)."""
    nu = poisson_or_default(poisson)
    return np.where(np.asarray(modes) == "shear", 2.0 * (1.0 + nu), 1.0)


def check_window_size(grades: int, window: OperatingWindow, path_step: float = 1.0) -> None:
    """CriteriaError when :func:`evaluate_window` of ``grades`` grades over ``window``
    would evaluate more than :data:`MAX_WINDOW_VALUES` values at once."""
    t, f = window.temperatures, window.frequencies
    lo, hi = window.temp_range
    n_path = int((hi - lo) / path_step) + 2
    values = grades * (t.size * f.size + len(window.duty_points) + n_path)
    if values > MAX_WINDOW_VALUES:
        raise CriteriaError(
            f"the window of {t.size:,} temperatures x {f.size:,} frequencies over "
            f"{grades:,} grades asks for {values:,} values, more than the "
            f"{MAX_WINDOW_VALUES:,} evaluated at once; use a coarser temperature step or "
            "fewer frequencies"
        )


def evaluate_window(
    bank: CurveBank,
    window: OperatingWindow,
    poisson: np.ndarray,
    path_step: float = 1.0,
    shift: np.ndarray | None = None,
) -> WindowProps:
    """Properties of all grades of ``bank`` over ``window`` in one pass.

    ``poisson`` holds each grade's Poisson ratio (NaN: 0.5) for the E <-> G conversion.
    ``shift`` may hold ``bank.shift_rows`` at the window's temperatures (grades x
    temperatures), made once for this and the mount check.
    """
    t = window.temperatures
    f = window.frequencies
    lo, hi = window.temp_range
    check_window_size(len(bank.ids), window, path_step)
    if shift is None:
        storage, loss, extrap = bank.evaluate(t[:, None], f[None, :])
    else:
        n = len(bank.ids)
        storage, loss, extrap = bank.evaluate_rows(
            np.broadcast_to(t[None, :, None], (n, t.size, 1)),
            f[None, None, :],
            shift=np.asarray(shift)[:, :, None],
        )
    to_e = tensile_factor(bank.modes, poisson)
    if (to_e != 1.0).any():
        storage *= to_e[:, None, None]
        loss *= to_e[:, None, None]
    props = WindowProps(
        ids=list(bank.ids),
        temperatures=t,
        frequencies=f,
        storage=storage,
        loss=loss,
        extrapolated=extrap,
        poisson=poisson_or_default(poisson),
    )
    if window.duty_points:
        dt = np.array([p.temperature_C for p in window.duty_points])
        df = np.array([p.frequency_Hz for p in window.duty_points])
        s, l, x = bank.evaluate(dt, df)
        props.duty_storage = s * to_e[:, None]
        props.duty_loss = l * to_e[:, None]
        props.duty_extrapolated = x
        share = np.array([p.share for p in window.duty_points])
        props.duty_share = share / share.sum()
        props.duty_temperatures, props.duty_frequencies = dt, df
    pt = np.arange(lo, hi + path_step / 2, path_step) if hi > lo else np.array([lo])
    s, l, x = bank.evaluate(pt, window.design_frequency)
    props.path_temperatures = pt
    props.path_storage = s * to_e[:, None]
    props.path_loss = l * to_e[:, None]
    props.path_extrapolated = x
    return props
