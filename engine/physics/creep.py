"""Creep compliance from a relaxation spectrum (interconversion of linear viscoelastic functions).

A generalized Maxwell (Prony) series gives the relaxation modulus E(t) after a step strain.
The creep compliance J(t), the strain after a unit step stress, follows from it exactly:
in the Laplace domain the operational modulus and compliance are reciprocal, so J(t) of a
Prony series is itself a finite sum of exponentials, a generalized Kelvin-Voigt series,
whose retardation times interlace the relaxation times. This module computes that series
and the static quantities a mount check reads from it.

Units: modulus [Pa], compliance [1/Pa], time [s]. The same formulas hold for shear data
(G(t) and the shear creep compliance).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import elementwise

from engine.physics.prony import PronySeries

__all__ = [
    "RetardationSpectrum",
    "retardation_spectrum",
    "creep_compliance",
    "static_modulus_from_compliance",
    "dynamic_to_static_ratio",
]

# Smallest distance from a relaxation time at which a retardation time is sought, relative
# to the half-gap between neighbouring relaxation times. A root closer than this sits on
# its pole to within 1e-200 relative: its retardation weight is zero in double precision.
_NEAREST_TO_POLE = 1e-200


@dataclass(frozen=True, eq=False)
class RetardationSpectrum:
    """Discrete retardation spectrum: creep compliance as a generalized Kelvin-Voigt series.

    Parameters
    ----------
    glassy_compliance : float [1/Pa]
        Instantaneous compliance ``J_g = J(0) = 1 / E(0)``.
    times : array [s]
        Retardation times ``lambda_j``, ascending, shape (M,).
    weights : array [1/Pa]
        Retardation strengths ``J_j >= 0``, shape (M,).
    fluidity : float [1/(Pa s)]
        ``1 / eta_0`` of a series without equilibrium modulus (a fluid), 0 for a solid.

    Notes
    -----
    ``J(t) = J_g + sum_j J_j (1 - exp(-t / lambda_j)) + t fluidity``.

    For a solid the equilibrium compliance is ``J_e = J(inf) = J_g + sum_j J_j``, which
    equals ``1 / E_inf`` of the relaxation series it came from.

    References
    ----------
    Tschoegl, N. W. (1989). The Phenomenological Theory of Linear Viscoelastic
    Behavior. Springer.
    """

    glassy_compliance: float
    times: np.ndarray
    weights: np.ndarray
    fluidity: float

    def __post_init__(self) -> None:
        times = np.array(self.times, dtype=float).reshape(-1)
        weights = np.array(self.weights, dtype=float).reshape(-1)
        if times.shape != weights.shape:
            raise ValueError(
                f"times has {times.size} retardation times but weights has {weights.size} "
                "values; give one weight per retardation time"
            )
        if not np.all(np.isfinite(times)) or np.any(times <= 0.0):
            raise ValueError("retardation times must be finite and positive [s]")
        if not np.all(np.isfinite(weights)) or np.any(weights < 0.0):
            raise ValueError("retardation weights must be finite and non-negative [1/Pa]")
        glassy = float(self.glassy_compliance)
        fluidity = float(self.fluidity)
        if not np.isfinite(glassy) or glassy <= 0.0:
            raise ValueError(f"glassy compliance {glassy!r} must be finite and positive [1/Pa]")
        if not np.isfinite(fluidity) or fluidity < 0.0:
            raise ValueError(f"fluidity {fluidity!r} must be finite and non-negative [1/(Pa s)]")
        times.setflags(write=False)
        weights.setflags(write=False)
        object.__setattr__(self, "times", times)
        object.__setattr__(self, "weights", weights)
        object.__setattr__(self, "glassy_compliance", glassy)
        object.__setattr__(self, "fluidity", fluidity)

    @property
    def equilibrium_compliance(self) -> float:
        """``J_e = J(inf)`` [1/Pa]: ``J_g + sum J_j`` for a solid, ``inf`` for a fluid."""
        if self.fluidity > 0.0:
            return float("inf")
        return self.glassy_compliance + float(self.weights.sum())

    def compliance(self, time: ArrayLike) -> NDArray[np.float64]:
        """Creep compliance after a unit step stress.

        Parameters
        ----------
        time : float or array [s]
            Time since the step, any shape, ``t >= 0``.

        Returns
        -------
        float or array [1/Pa]
            ``J(t) = J_g + sum_j J_j (1 - exp(-t / lambda_j)) + t fluidity``, shape of
            ``time``.

        Raises
        ------
        ValueError
            If a time is negative (NaN entries propagate).
        """
        t = _times(time)
        x = t[..., None] / self.times
        creep = (self.weights * -np.expm1(-x)).sum(axis=-1)
        return np.asarray(self.glassy_compliance + creep + self.fluidity * t)[()]


def _times(time: ArrayLike) -> NDArray[np.float64]:
    try:
        t = np.asarray(time, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"time must be a number or an array of numbers; got {time!r}") from exc
    bad = t < 0.0
    if np.any(bad):
        raise ValueError(f"time must be zero or positive [s]; got {t[bad].flat[0]:g}")
    return t


def _active_terms(series: PronySeries) -> tuple[np.ndarray, np.ndarray]:
    """Relaxation times with a positive weight, ascending, equal times merged."""
    keep = series.weights > 0.0
    tau, inverse = np.unique(series.tau[keep], return_inverse=True)
    weights = np.bincount(inverse, weights=series.weights[keep], minlength=tau.size)
    return tau, weights


def retardation_spectrum(series: PronySeries) -> RetardationSpectrum:
    """Exact retardation spectrum (creep compliance) of a Prony relaxation series.

    Parameters
    ----------
    series : PronySeries
        Relaxation modulus ``E(t) = E_inf + sum_i E_i exp(-t / tau_i)``.

    Returns
    -------
    RetardationSpectrum
        ``J(t) = J_g + sum_j J_j (1 - exp(-t / lambda_j)) (+ t / eta_0 if E_inf = 0)``.

    Raises
    ------
    ValueError
        If the series has no stiffness at all (``E_inf = 0`` and every ``E_i = 0``).

    Notes
    -----
    In the Laplace domain ``s E~(s) s J~(s) = 1`` (Tschoegl 1989). The
    operational modulus of the series is ``Q(s) = E_inf + sum_i E_i s tau_i / (1 + s tau_i)``
    and the operational compliance ``U(s) = 1 / Q(s)``. The poles of ``U`` are the zeros of
    ``Q``, at ``s = -1 / lambda`` with

        f(lambda) = E_inf + sum_i E_i tau_i / (tau_i - lambda) = 0.

    ``f`` increases on each interval between neighbouring relaxation times and runs from
    ``-inf`` to ``+inf`` there, so exactly one retardation time lies in each interval
    ``(tau_i, tau_i+1)``; a solid (``E_inf > 0``) has one more above the longest
    relaxation time, where ``f`` rises from ``-inf`` to ``E_inf``. The retardation times
    interlace the relaxation times (Tschoegl 1989). The residues of ``U`` give the
    retardation strengths

        J_j = 1 / (lambda_j f'(lambda_j)),  f'(lambda) = sum_i E_i tau_i / (tau_i - lambda)^2,

    and ``J_g = 1 / (E_inf + sum E_i)``. A series without equilibrium modulus flows:
    ``U(s)`` has a pole at ``s = 0`` with residue ``1 / eta_0``, ``eta_0 = sum E_i tau_i``.

    Each root is found by bracketed root finding (scipy's vectorised Chandrupatla solver)
    on the logarithm of its distance from the nearer relaxation time of its interval,
    with the differences ``tau_i - lambda`` formed from the exact ``tau_i - tau_origin``.
    This keeps full relative accuracy when a root crowds its pole, as it does next to a
    weak term of a spectrum spanning many decades (the device of Bunch, Nielsen &
    Sorensen 1978 for the same secular equation). Terms of zero weight have no pole and
    are dropped; equal relaxation times are merged. Every ``J_j`` is positive, so ``J(t)``
    is non-decreasing and ``J(t) E(t) <= 1`` (Tschoegl 1989).

    References
    ----------
    Tschoegl, N. W. (1989). The Phenomenological Theory of Linear Viscoelastic
    Behavior. Springer.
    Park, S. W. and Schapery, R. A. (1999). Methods of interconversion between linear
    viscoelastic material functions. Part I - a numerical method based on Prony series.
    Int. J. Solids Struct. 36, 1653-1675.
    Bunch, J. R., Nielsen, C. P. and Sorensen, D. C. (1978). Rank-one modification of
    the symmetric eigenproblem. Numer. Math. 31, 31-48.
    Chandrupatla, T. R. (1997). Adv. Eng. Software 28, 145-149.
    """
    tau, weights = _active_terms(series)
    e_inf = series.equilibrium
    glassy = e_inf + float(weights.sum())
    if glassy <= 0.0:
        raise ValueError(
            "the Prony series has no stiffness (equilibrium modulus and every weight are "
            "zero); a creep compliance needs a positive modulus"
        )
    n = tau.size
    solid = e_inf > 0.0
    fluidity = 0.0 if solid else 1.0 / float(weights @ tau)
    n_roots = n if solid else n - 1
    if n_roots == 0:
        empty = np.zeros(0)
        return RetardationSpectrum(1.0 / glassy, empty, empty, fluidity)

    ew = weights * tau  # E_i tau_i [Pa s]
    left = tau[:n_roots]
    interior = n - 1  # roots between neighbouring relaxation times
    right = tau[1:]
    mid = left[:interior] + 0.5 * (right - left[:interior])
    with np.errstate(divide="ignore", invalid="ignore"):  # only if a midpoint rounds onto tau
        f_mid = e_inf + (ew / (tau - mid[:, None])).sum(axis=1)
    # Origin: the nearer pole of the half-interval that holds the root. lambda = origin +
    # sign * u with 0 < u <= span.
    from_left = np.ones(n_roots, dtype=bool)
    from_left[:interior] = f_mid > 0.0
    origin = np.where(from_left[:interior], left[:interior], right)
    span = np.where(from_left[:interior], mid - left[:interior], right - mid)
    if solid:
        # f(tau_N + u) >= E_inf - eta_0 / u > 0 once u > eta_0 / E_inf: use twice that.
        origin = np.append(origin, tau[-1])
        span = np.append(span, 2.0 * float(ew.sum()) / e_inf)
    sign = np.where(from_left, 1.0, -1.0)
    offset = tau - origin[:, None]  # tau_i - origin, exactly 0 in the origin's column

    def scaled_f(log_u, index):
        # u f(lambda): the origin's term becomes the constant -+E_o tau_o (no pole, no
        # overflow); u > 0, so the sign and the root are those of f.
        rows = np.ravel(index)
        u = np.exp(np.ravel(log_u))[:, None]
        distance = offset[rows] - sign[rows, None] * u  # tau_i - lambda, never 0
        # u / distance is exactly -sign in the origin's column (x / -x = -1 in IEEE).
        value = e_inf * u[:, 0] + (ew * (u / distance)).sum(axis=1)
        return value.reshape(np.shape(log_u))

    index = np.arange(n_roots)
    log_hi = np.log(span)
    log_lo = log_hi + np.log(_NEAREST_TO_POLE)
    g_lo, g_hi = scaled_f(log_lo, index), scaled_f(log_hi, index)
    # f rises with lambda: below the root it is negative. A root beyond a bracket end
    # (a pole term too weak to register, or rounding at the midpoint) sits at that end.
    below_lo = np.where(from_left, g_lo >= 0.0, g_lo <= 0.0)
    beyond_hi = np.where(from_left, g_hi <= 0.0, g_hi >= 0.0)
    result = elementwise.find_root(
        scaled_f,
        (log_lo, log_hi),
        args=(index,),
        tolerances={"xatol": 1e-14, "xrtol": 4.0 * np.finfo(float).eps, "fatol": 0.0},
    )
    log_u = np.where(below_lo, log_lo, np.where(beyond_hi, log_hi, result.x))
    u = np.exp(log_u)
    times = origin + sign * u
    distance = offset - (sign * u)[:, None]
    with np.errstate(divide="ignore", over="ignore"):
        slope = (ew / distance**2).sum(axis=1)  # f'(lambda_j)
        strengths = 1.0 / (times * slope)
    return RetardationSpectrum(1.0 / glassy, times, strengths, fluidity)


def creep_compliance(series: PronySeries, time: ArrayLike) -> NDArray[np.float64]:
    """Creep compliance ``J(t)`` of a Prony relaxation series.

    Parameters
    ----------
    series : PronySeries
        Relaxation modulus ``E(t) = E_inf + sum_i E_i exp(-t / tau_i)``.
    time : array [s]
        Times since the step stress, any shape, ``t >= 0``.

    Returns
    -------
    array [1/Pa]
        ``J(t)``, shape of ``time``: ``1 / E(0)`` at ``t = 0``, ``1 / E_inf`` as
        ``t -> inf`` for a solid.

    Raises
    ------
    ValueError
        If a time is negative or the series has no stiffness.

    Notes
    -----
    ``J`` solves ``int_0^t E(t - s) dJ(s) = 1`` for ``t >= 0``, equivalently
    ``int_0^t E(t - s) J(s) ds = t``; see :func:`retardation_spectrum` for the method.

    References
    ----------
    Tschoegl, N. W. (1989). The Phenomenological Theory of Linear Viscoelastic
    Behavior. Springer.
    """
    t = _times(time)
    return retardation_spectrum(series).compliance(t)


def static_modulus_from_compliance(compliance: ArrayLike) -> NDArray[np.float64]:
    """Static (creep) modulus ``1 / J(t)`` at a stated loading time.

    Parameters
    ----------
    compliance : array [1/Pa]
        Creep compliance ``J(t)`` at the loading time, positive.

    Returns
    -------
    array [Pa]
        ``E_c(t) = 1 / J(t)``: the stress over the strain reached a time ``t`` after a
        constant load was applied. Used in place of the storage modulus at
        ``omega = 1 / t`` for static deflection and sag; it lies at or below the
        relaxation modulus ``E(t)`` since ``J(t) E(t) <= 1``.

    Raises
    ------
    ValueError
        If a compliance is not positive (NaN entries propagate).

    References
    ----------
    Tschoegl, N. W. (1989). The Phenomenological Theory of Linear Viscoelastic
    Behavior. Springer.
    """
    j = _positive_compliance(compliance)
    return 1.0 / j


def dynamic_to_static_ratio(
    storage_modulus: ArrayLike, compliance: ArrayLike
) -> NDArray[np.float64]:
    """Dynamic-to-static stiffness ratio of a rubber part.

    Parameters
    ----------
    storage_modulus : array [Pa]
        Storage modulus ``E'(f)`` at the working frequency and temperature.
    compliance : array [1/Pa]
        Creep compliance ``J(t)`` at the static loading time and temperature.

    Returns
    -------
    array [-]
        ``E'(f) / (1 / J(t)) = E'(f) J(t)``; the same for pad stiffnesses, since the
        pad geometry factor cancels. Above 1 for rubbers (the part is stiffer under
        vibration than under its dead load).

    Raises
    ------
    ValueError
        If a modulus or a compliance is not positive (NaN entries propagate).

    References
    ----------
    Gent, A. N. (ed.) (2012). Engineering with Rubber, 3rd ed., Hanser.
    """
    try:
        e = np.asarray(storage_modulus, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(
            f"storage_modulus must be a number or an array of numbers; got {storage_modulus!r}"
        ) from exc
    bad = e <= 0.0
    if np.any(bad):
        raise ValueError(f"storage_modulus must be positive [Pa]; got {e[bad].flat[0]:g}")
    return e * _positive_compliance(compliance)


def _positive_compliance(compliance: ArrayLike) -> NDArray[np.float64]:
    try:
        j = np.asarray(compliance, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(
            f"compliance must be a number or an array of numbers; got {compliance!r}"
        ) from exc
    bad = j <= 0.0
    if np.any(bad):
        raise ValueError(f"compliance must be positive [1/Pa]; got {j[bad].flat[0]:g}")
    return j
