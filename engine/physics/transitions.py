"""Glass transition and viscoelastic regions from a temperature sweep at one frequency.

Every function takes the sweep as arrays of equal length: ``temperature`` [degC],
strictly ascending; ``storage_modulus`` [Pa], positive; ``loss_factor`` [-], not
negative. The loss modulus is loss_factor * storage_modulus. Three Tg methods are
offered, one function each, with a dispatcher that takes the method's name; every Tg is
reported with its method and frequency, as ASTM E1640 and ISO 6721-11 ask.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from engine.base.errors import InputError

__all__ = [
    "TgResult",
    "TG_METHODS",
    "TRANSITION_SLOPE",
    "GLASSY_SLOPE_FRACTION",
    "GLASSY_MODULUS",
    "BETA_MIN_SEPARATION",
    "BETA_MIN_PROMINENCE",
    "tg_storage_onset",
    "tg_loss_modulus_peak",
    "tg_loss_factor_peak",
    "glass_transition",
    "applicable_methods",
    "secondary_transition",
    "regions",
    "energy_ratio",
]

# Heuristics of common practice (no standard fixes them); see the docstrings that use them.
TRANSITION_SLOPE = 0.02  # [decade/K] -dlog10E'/dT at or above which E' is "dropping"
GLASSY_SLOPE_FRACTION = 0.1  # glassy tangent: slope below this share of the steepest drop
GLASSY_MODULUS = 1e8  # [Pa] E' level dividing glassy from rubbery when no drop is seen
BETA_MIN_SEPARATION = 15.0  # [K] a secondary peak lies at least this far below Tg
BETA_MIN_PROMINENCE = 0.01  # [-] smallest loss-factor prominence taken as a peak


@dataclass(frozen=True)
class TgResult:
    """A glass-transition temperature with the method and frequency it belongs to.

    Attributes
    ----------
    method : str
        Name of the method, a key of :data:`TG_METHODS`.
    frequency_Hz : float [Hz]
        Frequency of the sweep.
    temperature_C : float or None [degC]
        Tg, or None when the sweep does not reach what the method needs.
    reached : bool
        True when the sweep holds what the method needs and ``temperature_C`` is set.
    note : str
        Empty when reached; otherwise why not, in words a person can act on.
    """

    method: str
    frequency_Hz: float
    temperature_C: float | None
    reached: bool
    note: str = ""


def _sweep(temperature, storage_modulus=None, loss_factor=None) -> list[np.ndarray]:
    """Check a sweep and return its arrays as 1-D float arrays (the given ones only)."""
    named = [("temperature", temperature)]
    if storage_modulus is not None:
        named.append(("storage_modulus", storage_modulus))
    if loss_factor is not None:
        named.append(("loss_factor", loss_factor))
    arrays = []
    for name, values in named:
        array = np.asarray(values, dtype=float).reshape(-1)
        if not np.all(np.isfinite(array)):
            raise InputError(f"{name} holds NaN or infinite values; all must be finite")
        arrays.append(array)
    sizes = [a.size for a in arrays]
    if len(set(sizes)) != 1:
        listing = ", ".join(f"{n} {s}" for (n, _), s in zip(named, sizes, strict=True))
        raise InputError(f"sweep arrays differ in length ({listing}); give one value per point")
    if sizes[0] < 3:
        raise InputError(f"sweep has {sizes[0]} points; at least 3 temperatures are needed")
    if np.any(np.diff(arrays[0]) <= 0.0):
        raise InputError("temperature must be strictly ascending [degC]; sort the sweep first")
    for (name, _), array in zip(named[1:], arrays[1:], strict=True):
        if name == "storage_modulus" and np.any(array <= 0.0):
            raise InputError(f"storage_modulus holds {float(array.min())}; it must be positive")
        if name == "loss_factor" and np.any(array < 0.0):
            raise InputError(f"loss_factor holds {float(array.min())}; it must not be negative")
    return arrays


def _vertex(x: np.ndarray, y: np.ndarray, i: int) -> float:
    """Abscissa of the maximum of the parabola through points i-1, i, i+1."""
    x0, x1, x2 = x[i - 1 : i + 2]
    y0, y1, y2 = y[i - 1 : i + 2]
    # Newton form y = y0 + d01 (x - x0) + c (x - x0)(x - x1); dy/dx = 0 at the vertex
    d01 = (y1 - y0) / (x1 - x0)
    d12 = (y2 - y1) / (x2 - x1)
    curvature = (d12 - d01) / (x2 - x0)
    if curvature >= 0.0:  # flat top: three equal values
        return float(x1)
    return float(0.5 * (x0 + x1) - 0.5 * d01 / curvature)


def _peak(method: str, quantity: str, temperature, values, frequency_hz: float) -> TgResult:
    i = int(np.argmax(values))
    if i in (0, values.size - 1):
        end = "cold" if i == 0 else "warm"
        return TgResult(
            method,
            float(frequency_hz),
            None,
            False,
            f"{quantity} peak not reached: maximum at the {end} end of the sweep "
            f"({temperature[i]:.1f} °C)",
        )
    return TgResult(method, float(frequency_hz), _vertex(temperature, values, i), True, "")


def tg_loss_factor_peak(
    temperature, storage_modulus, loss_factor, frequency_hz: float = 1.0
) -> TgResult:
    """Tg as the temperature of the loss-factor (tan delta) peak.

    Parameters
    ----------
    temperature : array [degC]
        Sweep temperatures, strictly ascending.
    storage_modulus : array [Pa]
        E' at each temperature (checked, not used by this method).
    loss_factor : array [-]
        tan delta at each temperature.
    frequency_hz : float [Hz], optional
        Frequency of the sweep, carried into the result.

    Returns
    -------
    TgResult
        Not reached when the largest loss factor is at either end of the sweep.

    Notes
    -----
    The peak is the largest sampled value, refined by the vertex of the parabola through
    it and its two neighbours: T = (x0 + x1)/2 - d01 / (2 c), with d01 the slope from
    point 0 to point 1 and c the second divided difference. The loss-factor peak lies
    warmer than the loss-modulus peak and the storage onset.

    References
    ----------
    ASTM E1640 - Standard Test Method for Assignment of the Glass Transition Temperature
    by Dynamic Mechanical Analysis. ISO 6721-11 - Plastics, Determination of dynamic
    mechanical properties, Part 11: Glass transition temperature.
    """
    temperature, _, loss_factor = _sweep(temperature, storage_modulus, loss_factor)
    return _peak("loss_factor_peak", "loss-factor", temperature, loss_factor, frequency_hz)


def tg_loss_modulus_peak(
    temperature, storage_modulus, loss_factor, frequency_hz: float = 1.0
) -> TgResult:
    """Tg as the temperature of the loss-modulus peak, E'' = loss_factor * E'.

    Parameters and result as :func:`tg_loss_factor_peak`; the peak is refined the same
    way (parabola through the largest sampled E'' and its neighbours).

    References
    ----------
    ASTM E1640; ISO 6721-11.
    """
    temperature, storage_modulus, loss_factor = _sweep(temperature, storage_modulus, loss_factor)
    return _peak(
        "loss_modulus_peak",
        "loss-modulus",
        temperature,
        loss_factor * storage_modulus,
        frequency_hz,
    )


def tg_storage_onset(
    temperature, storage_modulus, loss_factor, frequency_hz: float = 1.0
) -> TgResult:
    """Tg as the onset of the storage-modulus drop, by intersecting two tangents.

    Parameters and result as :func:`tg_loss_factor_peak`.

    Notes
    -----
    On y = log10 E' against T, with slope s = dy/dT from ``numpy.gradient``:

    1. the inflection is the point of steepest descent, min s; it must be steeper than
       :data:`TRANSITION_SLOPE` (else "no drop") and lie inside the sweep (at the warm
       end: "inflection not reached");
    2. the glassy region is the run of points just before the drop whose descent
       -s is at most :data:`GLASSY_SLOPE_FRACTION` of the steepest descent; a straight
       line is fitted through it by least squares (at least two points, else "no glassy
       region before the drop");
    3. the inflection tangent is y_i + s_i (T - T_i); Tg is where it meets the glassy
       line: T = (a_g - y_i + s_i T_i) / (s_i - b_g) with glassy line y = a_g + b_g T.

    The thresholds are heuristics of common practice, not part of the standard.

    References
    ----------
    ASTM E1640 - Standard Test Method for Assignment of the Glass Transition Temperature
    by Dynamic Mechanical Analysis (onset of the storage-modulus drop).
    """
    temperature, storage_modulus, _ = _sweep(temperature, storage_modulus, loss_factor)
    method, frequency = "storage_onset", float(frequency_hz)
    log_modulus = np.log10(storage_modulus)
    slope = np.gradient(log_modulus, temperature)
    i = int(np.argmin(slope))
    if -slope[i] < TRANSITION_SLOPE:
        return TgResult(
            method,
            frequency,
            None,
            False,
            f"storage-modulus onset not reached: no drop in E' steeper than "
            f"{TRANSITION_SLOPE} decade/K in the sweep",
        )
    if i == temperature.size - 1:
        return TgResult(
            method,
            frequency,
            None,
            False,
            "storage-modulus onset not reached: steepest descent at the warm end of the "
            f"sweep ({temperature[i]:.1f} °C), so the inflection is not reached",
        )
    glassy = -slope[:i] <= GLASSY_SLOPE_FRACTION * -slope[i]
    # the run of glassy points that ends closest before the drop
    candidates = np.flatnonzero(glassy)
    end = int(candidates[-1]) if candidates.size else -1
    breaks = np.flatnonzero(~glassy[: end + 1])
    start = int(breaks[-1]) + 1 if breaks.size else 0
    if end - start + 1 < 2:
        return TgResult(
            method,
            frequency,
            None,
            False,
            "storage-modulus onset not reached: no glassy region before the drop "
            f"(the sweep starts at {temperature[0]:.1f} °C)",
        )
    run = slice(start, end + 1)
    glassy_slope, glassy_intercept = np.polyfit(temperature[run], log_modulus[run], 1)
    onset = (glassy_intercept - log_modulus[i] + slope[i] * temperature[i]) / (
        slope[i] - glassy_slope
    )
    return TgResult(method, frequency, float(onset), True, "")


TG_METHODS: dict[str, Callable[..., TgResult]] = {
    "storage_onset": tg_storage_onset,
    "loss_modulus_peak": tg_loss_modulus_peak,
    "loss_factor_peak": tg_loss_factor_peak,
}


def glass_transition(
    method: str, temperature, storage_modulus, loss_factor, frequency_hz: float = 1.0
) -> TgResult:
    """Tg by the named method (a key of :data:`TG_METHODS`).

    Raises
    ------
    ValueError
        When ``method`` is not one of the names in :data:`TG_METHODS`.
    """
    try:
        function = TG_METHODS[method]
    except KeyError:
        raise ValueError(
            f"unknown Tg method {method!r}; valid methods: {', '.join(TG_METHODS)}"
        ) from None
    return function(temperature, storage_modulus, loss_factor, frequency_hz)


def applicable_methods(temperature, storage_modulus, loss_factor) -> list[str]:
    """Names of the Tg methods whose result is reached on this sweep, in TG_METHODS order."""
    return [
        name
        for name, function in TG_METHODS.items()
        if function(temperature, storage_modulus, loss_factor).reached
    ]


def secondary_transition(
    temperature,
    loss_factor,
    tg_c: float | None,
    min_separation_k: float = BETA_MIN_SEPARATION,
    min_prominence: float = BETA_MIN_PROMINENCE,
) -> float | None:
    """Temperature of a secondary (beta) loss peak below the glass transition.

    Parameters
    ----------
    temperature : array [degC]
        Sweep temperatures, strictly ascending.
    loss_factor : array [-]
        tan delta at each temperature.
    tg_c : float or None [degC]
        Glass transition of the same sweep; None gives None.
    min_separation_k : float [K], optional
        A secondary peak lies at least this far below Tg.
    min_prominence : float [-], optional
        Smallest prominence (``scipy.signal.find_peaks``) taken as a peak.

    Returns
    -------
    float or None [degC]
        The most prominent qualifying local peak, refined by a parabola through it and
        its neighbours; None when there is none.

    Notes
    -----
    Prominences are measured on the whole sweep, so a beta peak on the flank of the
    alpha peak is judged against its own surroundings. A beta process that shows only
    as a shoulder (no local maximum) is not found. The defaults are common practice.
    """
    temperature, loss_factor = _sweep(temperature, loss_factor=loss_factor)
    if tg_c is None:
        return None
    from scipy.signal import find_peaks  # here: scipy.signal takes ~0.5 s to import

    peaks, props = find_peaks(loss_factor, prominence=min_prominence)
    keep = temperature[peaks] <= float(tg_c) - min_separation_k
    if not np.any(keep):
        return None
    best = peaks[keep][int(np.argmax(props["prominences"][keep]))]
    return _vertex(temperature, loss_factor, int(best))


def _crossing(temperature, excess, k: int) -> float:
    """Temperature between points k and k+1 where ``excess`` changes sign (linear)."""
    e0, e1 = excess[k], excess[k + 1]
    return float(temperature[k] + (temperature[k + 1] - temperature[k]) * e0 / (e0 - e1))


def regions(temperature, storage_modulus, loss_factor) -> list[tuple[str, float, float]]:
    """Viscoelastic regions the sweep reaches: glassy, transition, rubbery plateau, flow.

    Parameters
    ----------
    temperature : array [degC]
        Sweep temperatures, strictly ascending.
    storage_modulus : array [Pa]
        E' at each temperature.
    loss_factor : array [-]
        tan delta at each temperature (checked; the regions follow E').

    Returns
    -------
    list of (name, t_low, t_high)
        Contiguous regions in order of temperature [degC]; only those the data reach.

    Notes
    -----
    With s = -dlog10 E'/dT [decade/K] (``numpy.gradient``), a point is "dropping" when
    s >= :data:`TRANSITION_SLOPE` (0.02 decade/K) and "level" otherwise; boundaries are
    where s crosses the threshold, interpolated linearly. The dropping run with the
    largest fall in log10 E' is the glass transition; level runs before it are glassy
    (smaller drops there, such as a beta process, count as glassy too), level runs after
    it are the rubbery plateau, and a dropping run after the plateau starts flow, which
    then lasts to the warm end (the regions come in this physical order only). A sweep
    without any drop is glassy when its geometric-mean E' is at least
    :data:`GLASSY_MODULUS` (1e8 Pa) and rubbery plateau below. The thresholds are
    heuristics of common practice: glassy polymers lose well under 0.01 decade/K, the
    glass transition two to four decades over a few tens of kelvin. Noisy data should
    be smoothed first, or short runs will split a region.
    """
    temperature, storage_modulus, _ = _sweep(temperature, storage_modulus, loss_factor)
    log_modulus = np.log10(storage_modulus)
    excess = -np.gradient(log_modulus, temperature) - TRANSITION_SLOPE
    dropping = excess >= 0.0
    changes = np.flatnonzero(dropping[1:] != dropping[:-1])
    starts = np.r_[0, changes + 1]
    ends = np.r_[changes, temperature.size - 1]
    bounds = [float(temperature[0])]
    bounds += [_crossing(temperature, excess, int(k)) for k in changes]
    bounds.append(float(temperature[-1]))

    if not np.any(dropping):
        level = np.mean(log_modulus) >= np.log10(GLASSY_MODULUS)
        return [("glassy" if level else "rubbery plateau", bounds[0], bounds[-1])]

    falls = [
        log_modulus[a] - log_modulus[b] if dropping[a] else -np.inf
        for a, b in zip(starts, ends, strict=True)
    ]
    anchor = int(np.argmax(falls))
    labels = []
    for k, a in enumerate(starts):
        if k < anchor:
            labels.append("glassy")
        elif k == anchor:
            labels.append("transition")
        elif labels[-1] != "flow" and not dropping[a]:
            labels.append("rubbery plateau")
        else:
            labels.append("flow")

    merged: list[tuple[str, float, float]] = []
    for k, label in enumerate(labels):
        if merged and merged[-1][0] == label:
            merged[-1] = (label, merged[-1][1], bounds[k + 1])
        else:
            merged.append((label, bounds[k], bounds[k + 1]))
    return merged


def energy_ratio(loss_factor):
    """Energy dissipated per cycle over the peak stored energy, Delta W / U = 2 pi eta.

    Parameters
    ----------
    loss_factor : float or array [-]
        Loss factor eta = E''/E', not negative.

    Returns
    -------
    float or array [-]
        2 pi eta, shape of ``loss_factor``.

    Raises
    ------
    InputError
        When a loss factor is negative or not finite.

    Notes
    -----
    For a linear viscoelastic solid under strain eps0 sin(wt) the stress is
    eps0 (E' sin wt + E'' cos wt); one cycle dissipates Delta W = pi E'' eps0^2 and the
    peak stored energy is U = E' eps0^2 / 2, so Delta W / U = 2 pi E''/E' = 2 pi eta.

    References
    ----------
    Ferry, J. D. (1980). Viscoelastic Properties of Polymers, 3rd ed. Wiley.
    """
    eta = np.asarray(loss_factor, dtype=float)
    if not np.all(np.isfinite(eta)) or np.any(eta < 0.0):
        raise InputError("loss_factor must be finite and not negative")
    return (2.0 * np.pi * eta)[()]
