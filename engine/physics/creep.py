"""Creep compliance from a relaxation spectrum (interconversion of linear viscoelastic functions).

A generalized Maxwell (Prony) series gives the relaxation modulus E(t) after a step strain.
The creep compliance J(t), the strain after a unit step stress, follows from it exactly:
in the Laplace domain the operational modulus and compliance are reciprocal, so J(t) of a
Prony series is itself a finite sum of exponentials, a generalized Kelvin-Voigt series,
whose retardation times interlace the relaxation times. This module computes that series
(for one relaxation series, or for many stacked ones in one vectorised pass), tabulates
J(t) on log-time grids for fast lookup, and gives the static quantities a mount check
reads from it.

Units: modulus [Pa], compliance [1/Pa], time [s]. The same formulas hold for shear data
(G(t) and the shear creep compliance).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from engine.base.blocks import in_blocks
from engine.physics.prony import PronySeries

__all__ = [
    "RetardationSpectrum",
    "RetardationSpectra",
    "retardation_spectrum",
    "retardation_spectra",
    "ComplianceTable",
    "tabulate_compliance",
    "creep_compliance",
    "static_modulus_from_compliance",
    "dynamic_to_static_ratio",
]

# Smallest distance from a relaxation time at which a retardation time is sought, relative
# to the half-gap between neighbouring relaxation times. A root closer than this sits on
# its pole to within 1e-200 relative: its retardation weight is zero in double precision.
_NEAREST_TO_POLE = 1e-200

# Root-times-term entries per block of the stacked solver (retardation_spectra): large
# enough that the solver's fixed cost per call is small, small enough to stay in memory.
_STACKED_ENTRIES = 1 << 19
# Half-width [ln units] of the first bracket of each root, about its two-pole estimate.
_START_WIDTH = 0.7


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
    from scipy.optimize import elementwise  # imported when a compliance is solved

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


@dataclass(frozen=True, eq=False)
class RetardationSpectra:
    """Retardation spectra of many relaxation series, stacked: row k belongs to series k.

    Parameters
    ----------
    glassy_compliance : array [1/Pa]
        ``J_g`` of each series, shape (G,).
    times : array [s]
        Retardation times, shape (G, M), ascending in each row's first ``count[k]``
        columns, padded with 1 s.
    weights : array [1/Pa]
        Retardation strengths, shape (G, M), padded with 0 (a padded term adds nothing).
    fluidity : array [1/(Pa s)]
        ``1 / eta_0`` of each series without an equilibrium modulus, else 0; shape (G,).
    count : array of int
        Retardation times in each row, shape (G,).

    Notes
    -----
    Row k is the :class:`RetardationSpectrum` of series k (see :meth:`row`).
    """

    glassy_compliance: np.ndarray
    times: np.ndarray
    weights: np.ndarray
    fluidity: np.ndarray
    count: np.ndarray

    def __len__(self) -> int:
        return int(self.glassy_compliance.size)

    def row(self, k: int) -> RetardationSpectrum:
        """The spectrum of series ``k`` alone."""
        m = int(self.count[k])
        return RetardationSpectrum(
            float(self.glassy_compliance[k]),
            self.times[k, :m],
            self.weights[k, :m],
            float(self.fluidity[k]),
        )

    def compliance(self, time: ArrayLike) -> NDArray[np.float64]:
        """Creep compliance of every series; row k of ``time`` belongs to series k.

        Parameters
        ----------
        time : array [s]
            Times since the step stress, shape (G, ...), ``t >= 0``.

        Returns
        -------
        array [1/Pa]
            ``J_k(t)`` with the shape of ``time``.

        Raises
        ------
        ValueError
            If a time is negative, or ``time`` has not one row per series.
        """
        t = _times(time)
        if t.ndim == 0 or t.shape[0] != len(self):
            raise ValueError(f"time must have one row per series ({len(self)}); got {t.shape}")
        flat = t.reshape(len(self), -1)
        out = np.empty(flat.shape)
        per = max(1, _STACKED_ENTRIES // max(flat.shape[1] * self.times.shape[1], 1))

        def work(a: int, b: int) -> None:
            x = flat[a:b, :, None] / self.times[a:b, None, :]
            creep = np.einsum("gpm,gm->gp", -np.expm1(-x), self.weights[a:b])
            out[a:b] = (
                self.glassy_compliance[a:b, None] + creep + self.fluidity[a:b, None] * flat[a:b]
            )

        in_blocks(len(self), work, per)
        return out.reshape(t.shape)


def _stacked_terms(tau, weights, equilibrium):
    """Rows of active terms (weight > 0), ascending, equal times merged, left-aligned.

    Returns (tau, weights, equilibrium, count) with the inactive columns of each row
    holding tau = -1 and weight 0: no pole, and never equal to a retardation time (> 0).
    """
    tau = np.atleast_2d(np.asarray(tau, dtype=float))
    weights = np.atleast_2d(np.asarray(weights, dtype=float))
    e_inf = np.atleast_1d(np.asarray(equilibrium, dtype=float)).astype(float)
    if tau.shape != weights.shape or e_inf.shape != tau.shape[:1]:
        raise ValueError(
            f"tau {tau.shape}, weights {weights.shape} and equilibrium {e_inf.shape} must "
            "hold one row (and one equilibrium modulus) per series"
        )
    if not np.all(np.isfinite(tau)) or np.any(tau <= 0.0):
        raise ValueError("relaxation times tau must be finite and positive [s]")
    if not np.all(np.isfinite(weights)) or np.any(weights < 0.0):
        raise ValueError("weights must be finite and non-negative [Pa]")
    if not np.all(np.isfinite(e_inf)) or np.any(e_inf < 0.0):
        raise ValueError("equilibrium moduli must be finite and non-negative [Pa]")
    active = weights > 0.0
    order = np.argsort(np.where(active, tau, np.inf), axis=1, kind="stable")
    tau = np.take_along_axis(tau, order, axis=1)
    weights = np.take_along_axis(np.where(active, weights, 0.0), order, axis=1)
    count = active.sum(axis=1)
    column = np.arange(tau.shape[1])
    valid = column < count[:, None]
    repeated = valid[:, 1:] & (tau[:, 1:] == tau[:, :-1])
    for k in np.flatnonzero(repeated.any(axis=1)):  # rare: merge equal times as one term
        times, inverse = np.unique(tau[k, : count[k]], return_inverse=True)
        merged = np.bincount(inverse, weights=weights[k, : count[k]], minlength=times.size)
        count[k] = times.size
        tau[k, : times.size], weights[k, : times.size] = times, merged
    valid = column < count[:, None]
    return np.where(valid, tau, -1.0), np.where(valid, weights, 0.0), e_inf, count


def retardation_spectra(
    tau: ArrayLike, weights: ArrayLike, equilibrium: ArrayLike
) -> RetardationSpectra:
    """Exact retardation spectra of many Prony relaxation series in one vectorised pass.

    Parameters
    ----------
    tau : array [s]
        Relaxation times, shape (G, N): row k holds the terms of series k (rows may hold
        terms of zero weight, which are dropped, so series of different lengths stack).
    weights : array [Pa]
        Term moduli ``E_i >= 0``, shape (G, N).
    equilibrium : array [Pa]
        Equilibrium moduli ``E_inf >= 0``, shape (G,).

    Returns
    -------
    RetardationSpectra
        Row k equals :func:`retardation_spectrum` of series k.

    Raises
    ------
    ValueError
        If the shapes disagree, a value is out of range, or a series has no stiffness
        (the message names its row).

    Notes
    -----
    The method of :func:`retardation_spectrum` (one root of the secular equation in each
    interval between neighbouring relaxation times, found on the logarithm of its
    distance from the nearer pole, and the residues as strengths), with the roots of all
    series solved together by scipy's vectorised Chandrupatla solver in blocks of series
    shared among threads (:mod:`engine.base.blocks`).

    References
    ----------
    Tschoegl, N. W. (1989). The Phenomenological Theory of Linear Viscoelastic
    Behavior. Springer.
    Chandrupatla, T. R. (1997). Adv. Eng. Software 28, 145-149.
    """
    tau_s, w_s, e_inf, count = _stacked_terms(tau, weights, equilibrium)
    total = e_inf + w_s.sum(axis=1)
    empty = np.flatnonzero(total <= 0.0)
    if empty.size:
        raise ValueError(
            f"series {int(empty[0])} has no stiffness (equilibrium modulus and every weight "
            "are zero); a creep compliance needs a positive modulus"
        )
    n_series, n_terms = tau_s.shape
    solid = e_inf > 0.0
    ew = w_s * tau_s  # E_i tau_i [Pa s]; 0 in the padding
    eta0 = ew.sum(axis=1)
    fluidity = np.where(solid, 0.0, 1.0 / np.where(solid, 1.0, eta0))
    n_roots = np.where(solid, count, count - 1)
    width = max(int(n_roots.max(initial=0)), 1)
    times = np.ones((n_series, width))
    strengths = np.zeros((n_series, width))
    # Series in order of their number of terms, so that each block is cut to the width
    # its longest series needs.
    order = np.argsort(count, kind="stable")
    per = max(1, _STACKED_ENTRIES // max(n_terms * n_terms, 1))

    def work(a: int, b: int) -> None:
        block = order[a:b]
        terms = max(int(count[block].max()), 1)
        k, j = np.nonzero(np.arange(width)[None, :] < n_roots[block, None])
        if k.size == 0:
            return
        g = block[k]
        t_b, ew_b = tau_s[g, :terms], ew[g, :terms]
        times[g, j], strengths[g, j] = _roots(t_b, ew_b, e_inf[g], j, count[g], eta0[g])

    in_blocks(n_series, work, per)
    return RetardationSpectra(1.0 / total, times, strengths, fluidity, n_roots)


def _roots(tau, ew, e_inf, j, count, eta0):
    """Retardation times and strengths of root ``j`` of each entry's series (one entry a
    row: its terms ``tau``, ``ew = E_i tau_i``, ``e_inf``; see retardation_spectrum)."""
    rows = np.arange(j.size)
    interior = j < count - 1
    last = tau.shape[1] - 1
    left = tau[rows, j]
    right = tau[rows, np.minimum(j + 1, last)]
    c_left = ew[rows, j]
    c_right = np.where(interior, ew[rows, np.minimum(j + 1, last)], 0.0)
    gap = np.where(interior, right - left, left)
    mid = left + 0.5 * gap
    with np.errstate(divide="ignore", invalid="ignore"):  # only if a midpoint rounds onto tau
        f_mid = e_inf + (ew / (tau - mid[:, None])).sum(axis=1)
    from_left = ~interior | (f_mid > 0.0)
    origin = np.where(interior & ~from_left, right, left)
    with np.errstate(divide="ignore"):
        last_span = 2.0 * eta0 / e_inf  # f(tau_N + u) > 0 once u > eta_0 / E_inf
    span = np.where(interior, 0.5 * gap, last_span)
    sign = np.where(from_left, 1.0, -1.0)
    offset = tau - origin[:, None]  # exactly 0 in the origin's column

    def scaled_f(log_u, index):
        # u f(lambda): the origin's term becomes the constant -+E_o tau_o (no pole, no
        # overflow); u > 0, so the sign and the root are those of f.
        r = np.ravel(index)
        u = np.exp(np.ravel(log_u))
        whole = r.size == rows.size
        q = offset.copy() if whole else offset[r]
        q -= (sign[r] * u)[:, None]  # tau_i - lambda, never 0
        np.divide(u[:, None], q, out=q)  # exactly -sign in the origin's column
        value = e_inf[r] * u + np.einsum("ij,ij->i", ew if whole else ew[r], q)
        return value.reshape(np.shape(log_u))

    # Start: the root of the two nearest poles with the other terms held at their value
    # at the midpoint, f = C - c_l / a + c_r / (gap - a); its root in (0, gap) is
    # a = 2 c_l gap / (B + sqrt(B^2 - 4 C c_l gap)), B = C gap + c_l + c_r (the
    # discriminant is (C gap - c_l + c_r)^2 + 4 c_l c_r >= 0), and b = gap - a likewise
    # from the right. Above the last pole of a solid, a = c_N / E_inf lies below the root.
    with np.errstate(divide="ignore", invalid="ignore"):
        rest = f_mid - c_left / (left - mid) - c_right / (right - mid)
        rest = np.where(interior, rest, e_inf)
        x = rest * gap
        disc = np.sqrt((x - c_left + c_right) ** 2 + 4.0 * c_left * c_right)
        a = 2.0 * c_left * gap / (x + c_left + c_right + disc)
        b = 2.0 * c_right * gap / (c_left + c_right - x + disc)
        guess = np.where(interior, np.where(from_left, a, b), c_left / e_inf)
    log_span = np.log(span)
    log_guess = np.log(np.clip(guess, span * _NEAREST_TO_POLE, span))
    log_lo = np.where(interior, log_guess - _START_WIDTH, log_guess)
    log_hi = np.minimum(log_guess + _START_WIDTH, log_span)
    g_lo, g_hi = scaled_f(log_lo, rows), scaled_f(log_hi, rows)
    rising = np.where(from_left, 1.0, -1.0)  # g rises with u from the left pole
    wide = ~((rising * g_lo <= 0.0) & (rising * g_hi >= 0.0)) | ~np.isfinite(g_lo + g_hi)
    if wide.any():  # the start missed: the whole half-interval
        k = np.flatnonzero(wide)
        log_lo[k] = log_span[k] + np.log(_NEAREST_TO_POLE)
        log_hi[k] = log_span[k]
        g_lo[k], g_hi[k] = scaled_f(log_lo[k], k), scaled_f(log_hi[k], k)
    # A root beyond a bracket end (a pole term too weak to register, or rounding at the
    # midpoint) sits at that end.
    below_lo = rising * g_lo >= 0.0
    beyond_hi = rising * g_hi <= 0.0
    from scipy.optimize import elementwise  # imported when a compliance is solved

    result = elementwise.find_root(
        scaled_f,
        (log_lo, log_hi),
        args=(rows,),
        tolerances={"xatol": 1e-14, "xrtol": 4.0 * np.finfo(float).eps, "fatol": 0.0},
    )
    log_u = np.where(below_lo, log_lo, np.where(beyond_hi, log_hi, result.x))
    u = np.exp(log_u)
    lam = origin + sign * u
    distance = offset - (sign * u)[:, None]
    with np.errstate(divide="ignore", over="ignore"):
        slope = np.einsum("ij,ij->i", ew, 1.0 / distance**2)  # f'(lambda_j)
        return lam, 1.0 / (lam * slope)


COMPLIANCE_STEP = 0.2
"""Spacing of a tabulated creep compliance [decades of time] (see `tabulate_compliance`)."""
COMPLIANCE_MARGIN = 3.0
"""Decades tabulated beyond the shortest and the longest retardation time."""


@dataclass(frozen=True, eq=False)
class ComplianceTable:
    """Creep compliance of many series on uniform log10-time grids, one grid a row.

    Parameters
    ----------
    start : array [log10 s]
        Time of each row's first node, shape (G,).
    step : float [decades]
        Node spacing.
    log_compliance : array [log10 1/Pa]
        ``log10 J`` at the nodes, shape (G, W), each row's first ``count[k]`` valid.
    slope : array [-]
        ``d log10 J / d log10 t`` at the nodes, shape (G, W).
    count : array of int
        Nodes in each row (at least 2), shape (G,).
    glassy : array [1/Pa]
        ``J_g = J(0)``, shape (G,).
    creep_rate : array [1/(Pa s)]
        ``dJ/dt`` at ``t = 0``: ``sum_j J_j / lambda_j`` plus the fluidity, shape (G,).
    equilibrium : array [1/Pa]
        ``J_g + sum_j J_j``, shape (G,).
    fluidity : array [1/(Pa s)]
        ``1 / eta_0`` of a series without equilibrium modulus, else 0, shape (G,).

    Notes
    -----
    Between nodes ``log10 J`` is a cubic Hermite interpolant of the node values and
    slopes (within 1e-4 of the series at 0.2-decade spacing on the fitted spectra of the
    demo grades). Each row spans ``COMPLIANCE_MARGIN`` decades beyond its shortest and
    longest retardation times; before the first node ``J = J_g + t dJ/dt(0)`` (within
    ``t / (2 lambda_min) <= 5e-4`` of the creep there), after the last
    ``J = J_e + t / eta_0`` (every retardation term has decayed to ``exp(-1000)``).
    """

    start: np.ndarray
    step: float
    log_compliance: np.ndarray
    slope: np.ndarray
    count: np.ndarray
    glassy: np.ndarray
    creep_rate: np.ndarray
    equilibrium: np.ndarray
    fluidity: np.ndarray

    def __len__(self) -> int:
        return int(self.start.size)

    def row(self, k: int) -> tuple:
        """The data of row ``k``: (start, log J nodes, slopes, glassy, creep rate,
        equilibrium, fluidity), for caching one series' table."""
        m = int(self.count[k])
        return (
            float(self.start[k]),
            self.log_compliance[k, :m].copy(),
            self.slope[k, :m].copy(),
            float(self.glassy[k]),
            float(self.creep_rate[k]),
            float(self.equilibrium[k]),
            float(self.fluidity[k]),
        )

    @classmethod
    def from_rows(cls, rows: Sequence[tuple], step: float = COMPLIANCE_STEP) -> ComplianceTable:
        """Stack rows made by :meth:`row` (tables of the same ``step``)."""
        n = len(rows)
        count = np.fromiter((r[1].size for r in rows), dtype=np.intp, count=n)
        width = int(count.max(initial=2))
        valid = np.arange(width)[None, :] < count[:, None]
        log_j = np.zeros((n, width))
        slope = np.zeros((n, width))
        if n:
            log_j[valid] = np.concatenate([r[1] for r in rows])
            slope[valid] = np.concatenate([r[2] for r in rows])
            last = log_j[np.arange(n), count - 1]
            log_j = np.where(valid, log_j, last[:, None])  # padded with the last value
        scalars = np.array([(r[0], *r[3:]) for r in rows], dtype=float).reshape(n, 5).T
        return cls(scalars[0], step, log_j, slope, count, *scalars[1:])

    def log_compliance_at(self, rows: ArrayLike, log_time: ArrayLike) -> NDArray[np.float64]:
        """``log10 J`` [log10 1/Pa] of rows ``rows`` at times ``10**log_time`` [s]
        (``rows`` and ``log_time`` broadcast)."""
        g = np.asarray(rows, dtype=np.intp)
        x = np.asarray(log_time, dtype=float)
        g, x = np.broadcast_arrays(g, x)
        step = self.step
        pos = (x - self.start[g]) / step
        count = self.count[g]
        i0 = np.clip(np.floor(pos), 0, count - 2).astype(np.intp)
        w = np.clip(pos - i0, 0.0, 1.0)
        width = self.log_compliance.shape[1]
        flat = g * width + i0
        # Valid indices: no bounds check; [1:] read at flat is the next node.
        log_j, slope = self.log_compliance.ravel(), self.slope.ravel()
        y0, y1 = np.take(log_j, flat, mode="clip"), np.take(log_j[1:], flat, mode="clip")
        m0 = np.take(slope, flat, mode="clip") * step
        m1 = np.take(slope[1:], flat, mode="clip") * step
        v = 1.0 - w
        out = np.asarray(
            (y0 * (1.0 + 2.0 * w) + m0 * w) * v * v + (y1 * (3.0 - 2.0 * w) - m1 * v) * w * w
        )
        for beyond, base, rate in (
            (pos < 0.0, self.glassy, self.creep_rate),
            (pos > count - 1, self.equilibrium, self.fluidity),
        ):
            if beyond.any():
                rows_out = g[beyond]
                out[beyond] = np.log10(base[rows_out] + rate[rows_out] * 10.0 ** x[beyond])
        return out[()] if out.ndim == 0 else out


def tabulate_compliance(
    spectra: RetardationSpectra,
    step: float = COMPLIANCE_STEP,
    margin: float = COMPLIANCE_MARGIN,
) -> ComplianceTable:
    """Creep compliance of stacked retardation spectra on log10-time grids, in one pass.

    Parameters
    ----------
    spectra : RetardationSpectra
        From :func:`retardation_spectra`.
    step : float [decades], default `COMPLIANCE_STEP`
        Node spacing.
    margin : float [decades], default `COMPLIANCE_MARGIN`
        Decades tabulated beyond each row's shortest and longest retardation time.

    Returns
    -------
    ComplianceTable
        Row k tabulates ``J`` of spectrum k: node values ``log10 J`` and slopes
        ``d log10 J / d log10 t = t J'(t) / J(t)``, both exact (from the series).

    Raises
    ------
    ValueError
        If ``step`` or ``margin`` is not positive.
    """
    if not (np.isfinite(step) and step > 0 and np.isfinite(margin) and margin > 0):
        raise ValueError(f"step and margin must be positive [decades]; got {step!r}, {margin!r}")
    n = len(spectra)
    count = spectra.count
    has = count > 0
    column = np.arange(spectra.times.shape[1])
    valid = column[None, :] < count[:, None]
    with np.errstate(divide="ignore"):
        log_times = np.log10(spectra.times)
    lo = np.where(has, np.where(valid, log_times, np.inf).min(axis=1, initial=np.inf), 0.0)
    hi = np.where(has, np.where(valid, log_times, -np.inf).max(axis=1, initial=-np.inf), 0.0)
    start = np.floor((lo - margin) / step) * step
    nodes = np.maximum(np.ceil((hi + margin - start) / step).astype(np.intp) + 1, 2)
    width = int(nodes.max(initial=2))
    log_j = np.empty((n, width))
    slope = np.empty((n, width))
    weights = spectra.weights
    rate = (weights / spectra.times).sum(axis=1) + spectra.fluidity
    per = max(1, _STACKED_ENTRIES // max(width * max(int(count.max(initial=1)), 1), 1))

    def work(a: int, b: int) -> None:
        terms = max(int(count[a:b].max(initial=1)), 1)
        t = 10.0 ** (start[a:b, None] + step * np.arange(width)[None, :])  # (g, nodes)
        lam, w = spectra.times[a:b, None, :terms], weights[a:b, :terms]
        x = np.divide(t[:, :, None], lam)
        np.negative(x, out=x)
        np.expm1(x, out=x)  # exp(-t / lambda_j) - 1
        flow = spectra.fluidity[a:b, None] * t
        j = spectra.glassy_compliance[a:b, None] + flow - np.einsum("gnm,gm->gn", x, w)
        x += 1.0  # exp(-t / lambda_j)
        # t J'(t) = t sum_j (J_j / lambda_j) exp(-t / lambda_j) + t / eta_0
        creep = np.einsum("gnm,gm->gn", x, w / lam[:, 0, :]) * t + flow
        log_j[a:b] = np.log10(j)
        slope[a:b] = creep / j

    in_blocks(n, work, per)
    equilibrium = spectra.glassy_compliance + weights.sum(axis=1)
    return ComplianceTable(
        start,
        step,
        log_j,
        slope,
        nodes,
        spectra.glassy_compliance,
        rate,
        equilibrium,
        spectra.fluidity,
    )


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
        ``omega = 1 / t`` for static deflection and sag; it lies at or above the
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
