"""Strain-amplitude dependence of filled rubber: the Kraus model.

A filled rubber softens as its dynamic strain amplitude grows (the filler network breaks
down and re-forms each cycle), and its loss modulus passes through a maximum on the way.
Kraus (1984) modelled both from the breaking and re-forming of filler-filler contacts;
the model has a small-strain and a large-strain storage modulus, a characteristic strain
and one exponent shared by storage and loss. This module evaluates the model, fits it to
a measured strain-amplitude sweep (storage modulus and loss factor at one temperature and
frequency) and gives the factors that carry small-strain values to a working amplitude.

Units: strain amplitude [-] (0.01 for 1 %), moduli [Pa]. The same equations hold for
tensile data (E', E'') and shear data (G', G''), each with its own strain.

References
----------
Kraus, G. (1984). Mechanical losses in carbon-black-filled rubbers. J. Appl. Polym. Sci.:
Appl. Polym. Symp. 39, 75-92.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "REFERENCE_STRAIN",
    "MIN_POINTS",
    "M_BOUNDS",
    "KrausFit",
    "kraus_storage",
    "kraus_loss",
    "fit_kraus",
    "amplitude_factors",
]

# Strain amplitude of an ordinary DMA temperature/frequency sweep, the strain at which
# the small-strain data of a grade are taken to be measured: 0.1 % (common practice).
REFERENCE_STRAIN = 1e-3
MIN_POINTS = 5  # fewest points a fit of the six parameters accepts
M_BOUNDS = (0.1, 2.0)  # range of the exponent m the fit searches
_MIN_DECADES = 1.0  # the sweep must span at least this many decades of strain
# The large-strain values are sought between this fraction and 1 of the small-strain
# storage modulus and of the peak loss modulus (Kraus: E'inf <= E'0, E''inf <= E''max).
_MIN_RATIO = 1e-4
# The characteristic strain is sought within this factor beyond the swept range.
_STRAIN_C_MARGIN = 100.0
_M_STARTS = (0.3, 0.6, 1.2)  # exponents the fit starts from (the best result is kept)


def _log_ratio(strain: ArrayLike, strain_c: float, m: float) -> NDArray[np.float64]:
    """``t = m ln(strain / strain_c)``; -inf at zero strain. ValueError on bad input."""
    g = np.asarray(strain, dtype=float)
    if np.any(g < 0) or np.any(np.isnan(g)):
        raise ValueError("strain amplitudes must be zero or positive numbers")
    if not (np.isfinite(strain_c) and strain_c > 0):
        raise ValueError(f"the characteristic strain must be positive, not {strain_c}")
    if not (np.isfinite(m) and m > 0):
        raise ValueError(f"the exponent m must be positive, not {m}")
    with np.errstate(divide="ignore"):
        return m * np.log(g / strain_c)


def kraus_storage(
    strain: ArrayLike, e0: float, e_inf: float, strain_c: float, m: float
) -> NDArray[np.float64] | float:
    """Storage modulus at a dynamic strain amplitude, Kraus (1984).

    Parameters
    ----------
    strain : array_like [-]
        Dynamic strain amplitude, zero or positive (0.01 for 1 %).
    e0 : float [Pa]
        Storage modulus in the small-strain limit, E'0.
    e_inf : float [Pa]
        Storage modulus in the large-strain limit, E'inf.
    strain_c : float [-]
        Characteristic strain amplitude gc, where E' is half-way between the limits.
    m : float [-]
        Exponent of the model, positive.

    Returns
    -------
    float or ndarray [Pa]
        E'(g), shaped like ``strain``.

    Notes
    -----
    ``E'(g) = E'inf + (E'0 - E'inf) / (1 + (g/gc)^(2m))`` (Kraus 1984), evaluated as
    ``E'inf + (E'0 - E'inf) (1 - tanh(t)) / 2`` with ``t = m ln(g/gc)``, the same
    expression written so that it neither overflows nor divides by zero at g = 0 or
    g -> infinity. E'(0) = E'0, E'(gc) = (E'0 + E'inf)/2, E'(inf) = E'inf.

    References
    ----------
    Kraus, G. (1984). Mechanical losses in carbon-black-filled rubbers. J. Appl. Polym.
    Sci.: Appl. Polym. Symp. 39, 75-92.

    Examples
    --------
    >>> float(kraus_storage(0.02, e0=6e6, e_inf=2e6, strain_c=0.02, m=0.6))
    4000000.0
    """
    t = _log_ratio(strain, strain_c, m)
    out = e_inf + (e0 - e_inf) * 0.5 * (1.0 - np.tanh(t))
    return float(out) if np.ndim(out) == 0 else out


def kraus_loss(
    strain: ArrayLike, loss_inf: float, loss_max: float, strain_c: float, m: float
) -> NDArray[np.float64] | float:
    """Loss modulus at a dynamic strain amplitude, Kraus (1984).

    Parameters
    ----------
    strain : array_like [-]
        Dynamic strain amplitude, zero or positive.
    loss_inf : float [Pa]
        Loss modulus far from the peak (both limits), E''inf.
    loss_max : float [Pa]
        Loss modulus at its peak, E''max, reached at g = gc.
    strain_c : float [-]
        Characteristic strain amplitude gc (the same as in :func:`kraus_storage`).
    m : float [-]
        Exponent of the model (the same as in :func:`kraus_storage`).

    Returns
    -------
    float or ndarray [Pa]
        E''(g), shaped like ``strain``.

    Notes
    -----
    ``E''(g) = E''inf + 2 (E''max - E''inf) (g/gc)^m / (1 + (g/gc)^(2m))`` (Kraus 1984),
    evaluated as ``E''inf + (E''max - E''inf) / cosh(t)`` with ``t = m ln(g/gc)``: with
    ``x = (g/gc)^m = exp(t)``, ``2x / (1 + x^2) = 2 / (exp(t) + exp(-t)) = 1/cosh(t)``.
    E''(0) = E''(inf) = E''inf and E''(gc) = E''max.

    References
    ----------
    Kraus, G. (1984). Mechanical losses in carbon-black-filled rubbers. J. Appl. Polym.
    Sci.: Appl. Polym. Symp. 39, 75-92.

    Examples
    --------
    >>> float(kraus_loss(0.02, loss_inf=0.2e6, loss_max=0.8e6, strain_c=0.02, m=0.6))
    800000.0
    """
    t = _log_ratio(strain, strain_c, m)
    with np.errstate(over="ignore"):  # cosh(+-inf) = inf: the peak term is then zero
        out = loss_inf + (loss_max - loss_inf) / np.cosh(t)
    return float(out) if np.ndim(out) == 0 else out


@dataclass(frozen=True)
class KrausFit:
    """A Kraus model fitted to one strain-amplitude sweep.

    Parameters
    ----------
    e0, e_inf : float [Pa]
        Small- and large-strain storage moduli E'0 and E'inf.
    loss_inf, loss_max : float [Pa]
        Loss modulus E''inf away from the peak and E''max at the peak.
    strain_c : float [-]
        Characteristic strain amplitude gc.
    m : float [-]
        Exponent of the model.
    rms_log_residual : float [-]
        Root mean square of the natural-log residuals of E' and E'' at the measured
        points (0.02 is about 2 % scatter).
    points : int
        Number of measured points fitted.
    """

    e0: float
    e_inf: float
    loss_inf: float
    loss_max: float
    strain_c: float
    m: float
    rms_log_residual: float
    points: int

    def storage(self, strain: ArrayLike) -> NDArray[np.float64] | float:
        """E'(g) [Pa] of the fitted model (:func:`kraus_storage`)."""
        return kraus_storage(strain, self.e0, self.e_inf, self.strain_c, self.m)

    def loss_modulus(self, strain: ArrayLike) -> NDArray[np.float64] | float:
        """E''(g) [Pa] of the fitted model (:func:`kraus_loss`)."""
        return kraus_loss(strain, self.loss_inf, self.loss_max, self.strain_c, self.m)

    def loss_factor(self, strain: ArrayLike) -> NDArray[np.float64] | float:
        """Loss factor eta(g) = E''(g) / E'(g) [-] of the fitted model."""
        out = np.asarray(self.loss_modulus(strain)) / np.asarray(self.storage(strain))
        return float(out) if np.ndim(out) == 0 else out


def _checked_sweep(
    strain: ArrayLike, storage: ArrayLike, loss_factor: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    g = np.asarray(strain, dtype=float).ravel()
    e1 = np.asarray(storage, dtype=float).ravel()
    eta = np.asarray(loss_factor, dtype=float).ravel()
    if not (g.size == e1.size == eta.size):
        raise ValueError(
            f"strain, storage modulus and loss factor differ in length "
            f"({g.size}, {e1.size}, {eta.size})"
        )
    if g.size < MIN_POINTS:
        raise ValueError(
            f"a Kraus fit needs at least {MIN_POINTS} measured points, the sweep has {g.size}"
        )
    for name, values in (
        ("strain amplitudes", g),
        ("storage moduli", e1),
        ("loss factors", eta),
    ):
        if not np.all(np.isfinite(values)):
            raise ValueError(f"{name} must be finite numbers; the sweep has a non-finite one")
        if np.any(values <= 0):
            raise ValueError(f"{name} must be positive; the sweep has {values.min():g}")
    decades = np.log10(g.max() / g.min())
    if decades < _MIN_DECADES:
        raise ValueError(
            f"the sweep spans strains {g.min():g} to {g.max():g} ({decades:.2f} decades); "
            f"a Kraus fit needs at least {_MIN_DECADES:g} decade of strain"
        )
    return g, e1, eta


def fit_kraus(strain: ArrayLike, storage: ArrayLike, loss_factor: ArrayLike) -> KrausFit:
    """Fit the Kraus (1984) model to a strain-amplitude sweep.

    Parameters
    ----------
    strain : array_like [-]
        Dynamic strain amplitudes of the sweep, positive; at least one decade wide.
    storage : array_like [Pa]
        Storage modulus at each amplitude (E' or G'), positive.
    loss_factor : array_like [-]
        Loss factor at each amplitude, positive.

    Returns
    -------
    KrausFit

    Raises
    ------
    ValueError
        Fewer than :data:`MIN_POINTS` points, arrays of different lengths, a non-finite
        or non-positive value, or a sweep narrower than one decade of strain.

    Notes
    -----
    Storage and loss moduli (E'' = eta E') are fitted jointly by
    :func:`scipy.optimize.least_squares` (trust-region reflective, bounded) on the
    natural-log residuals of both, so every point weighs by its relative error. The
    positive parameters are fitted as logarithms: ln E'0, ln(E'inf/E'0) in
    [ln 1e-4, 0], ln E''max, ln(E''inf/E''max) in [ln 1e-4, 0], ln gc within a factor
    100 beyond the swept strains; m in [0.1, 2]. Starting values come from the data
    (E'0 from the smallest strains, E'inf from the largest, gc where E' is half-way,
    E''max from the largest loss modulus); the fit starts from m = 0.3, 0.6 and 1.2 and
    keeps the best.

    References
    ----------
    Kraus, G. (1984). Mechanical losses in carbon-black-filled rubbers. J. Appl. Polym.
    Sci.: Appl. Polym. Symp. 39, 75-92.
    """
    g, e1, eta = _checked_sweep(strain, storage, loss_factor)
    order = np.argsort(g)
    g, e1, eta = g[order], e1[order], eta[order]
    e2 = eta * e1
    log_g, log_e1, log_e2 = np.log(g), np.log(e1), np.log(e2)

    lo_ratio = np.log(_MIN_RATIO)
    lo = np.array([log_e1.min() - 3.0, lo_ratio, log_e2.min() - 3.0, lo_ratio, 0.0, M_BOUNDS[0]])
    hi = np.array([log_e1.max() + 3.0, 0.0, log_e2.max() + 3.0, 0.0, 0.0, M_BOUNDS[1]])
    lo[4] = log_g[0] - np.log(_STRAIN_C_MARGIN)
    hi[4] = log_g[-1] + np.log(_STRAIN_C_MARGIN)

    n_end = max(2, g.size // 5)
    e0_start = float(np.exp(log_e1[:n_end].mean()))
    e_inf_start = float(np.exp(log_e1[-n_end:].mean()))
    e_inf_start = min(e_inf_start, 0.95 * e0_start)
    half = 0.5 * (e0_start + e_inf_start)
    below = np.nonzero(e1 <= half)[0]
    strain_c_start = float(g[below[0]]) if below.size else float(g[-1])
    loss_max_start = float(e2.max())
    loss_inf_start = min(float(e2[0]), float(e2[-1]), 0.9 * loss_max_start)

    def residuals(p: NDArray[np.float64]) -> NDArray[np.float64]:
        ln_e0, ln_r1, ln_lmax, ln_r2, ln_gc, m = p
        t = m * (log_g - ln_gc)
        e0, e_inf = np.exp(ln_e0), np.exp(ln_e0 + ln_r1)
        lmax, linf = np.exp(ln_lmax), np.exp(ln_lmax + ln_r2)
        model_e1 = e_inf + (e0 - e_inf) * 0.5 * (1.0 - np.tanh(t))
        with np.errstate(over="ignore"):
            model_e2 = linf + (lmax - linf) / np.cosh(t)
        return np.concatenate([np.log(model_e1) - log_e1, np.log(model_e2) - log_e2])

    from scipy.optimize import least_squares  # here: importing it costs ~0.7 s

    best = None
    for m_start in _M_STARTS:
        start = np.array(
            [
                np.log(e0_start),
                np.log(e_inf_start / e0_start),
                np.log(loss_max_start),
                np.log(max(loss_inf_start / loss_max_start, 2 * _MIN_RATIO)),
                np.log(strain_c_start),
                m_start,
            ]
        )
        width = hi - lo
        start = np.clip(start, lo + 1e-6 * width, hi - 1e-6 * width)
        result = least_squares(residuals, start, bounds=(lo, hi), method="trf", x_scale="jac")
        if best is None or result.cost < best.cost:
            best = result
    assert best is not None  # _M_STARTS is not empty
    ln_e0, ln_r1, ln_lmax, ln_r2, ln_gc, m = best.x
    rms = float(np.sqrt(np.mean(best.fun**2)))
    return KrausFit(
        e0=float(np.exp(ln_e0)),
        e_inf=float(np.exp(ln_e0 + ln_r1)),
        loss_inf=float(np.exp(ln_lmax + ln_r2)),
        loss_max=float(np.exp(ln_lmax)),
        strain_c=float(np.exp(ln_gc)),
        m=float(m),
        rms_log_residual=rms,
        points=int(g.size),
    )


def amplitude_factors(
    fit: KrausFit, working_strain: ArrayLike, reference_strain: float = REFERENCE_STRAIN
) -> tuple[NDArray[np.float64] | float, NDArray[np.float64] | float]:
    """Factors that carry small-strain storage modulus and loss factor to a working strain.

    Parameters
    ----------
    fit : KrausFit
        The grade's fitted strain-amplitude sweep.
    working_strain : array_like [-]
        Dynamic strain amplitude in service, positive (0.05 for 5 %).
    reference_strain : float [-], optional
        Strain amplitude of the small-strain data the factors multiply: 1e-3 (0.1 %),
        the strain of an ordinary DMA temperature/frequency sweep (common practice).

    Returns
    -------
    storage_factor : float or ndarray [-]
        ``E'(working) / E'(reference)``.
    loss_factor_factor : float or ndarray [-]
        ``eta(working) / eta(reference)``.

    Raises
    ------
    ValueError
        A working or reference strain that is not a positive finite number.

    Notes
    -----
    The Kraus model describes the amplitude dependence at the temperature and frequency
    of the sweep; using the factors at other temperatures and frequencies assumes that
    the relative softening does not depend on them, a first approximation only.

    Examples
    --------
    >>> fit = KrausFit(6e6, 2e6, 0.2e6, 0.8e6, 0.02, 0.6, 0.0, 14)
    >>> amplitude_factors(fit, 1e-3)
    (1.0, 1.0)
    """
    w = np.asarray(working_strain, dtype=float)
    if not np.all(np.isfinite(w)) or np.any(w <= 0):
        raise ValueError(f"the working strain amplitude must be positive, not {w}")
    if not (np.isfinite(reference_strain) and reference_strain > 0):
        raise ValueError(f"the reference strain amplitude must be positive, not {reference_strain}")
    storage = np.asarray(fit.storage(w)) / fit.storage(reference_strain)
    eta = np.asarray(fit.loss_factor(w)) / fit.loss_factor(reference_strain)
    if np.ndim(storage) == 0:
        return float(storage), float(eta)
    return storage, eta
