"""Relaxation spectrum as a generalized Maxwell (Prony) series.

A Prony series holds an equilibrium modulus and a set of Maxwell terms (relaxation time,
weight). It turns a master curve, measured as storage and loss modulus against angular
frequency, into a smooth, physically consistent function that can be evaluated at any
frequency or time. Units: modulus [Pa], angular frequency [rad/s], time [s].
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from engine.base.errors import FitError

__all__ = ["PronySeries", "PronyFitReport", "tau_grid", "fit_prony"]


def _terms(values, tau: np.ndarray) -> np.ndarray:
    """``values[..., None] * tau``: one trailing axis for the Maxwell terms."""
    return np.asarray(values, dtype=float)[..., None] * tau


@dataclass(frozen=True, eq=False)
class PronySeries:
    """Generalized Maxwell model: an equilibrium spring and N spring-dashpot terms.

    Parameters
    ----------
    tau : array [s]
        Relaxation times, shape (N,), positive.
    weights : array [Pa]
        Term moduli E_i, shape (N,), non-negative.
    equilibrium : float [Pa]
        Equilibrium (long-time, zero-frequency) modulus E_inf, non-negative.

    Notes
    -----
    With x_i = omega tau_i::

        E'(omega)  = E_inf + sum_i E_i x_i^2 / (1 + x_i^2)
        E''(omega) = sum_i E_i x_i / (1 + x_i^2)
        E(t)       = E_inf + sum_i E_i exp(-t / tau_i)

    The limits are E'(0) = E(inf) = E_inf and E'(inf) = E(0) = E_inf + sum_i E_i (the
    glassy modulus). The same formulas hold for shear (G) data. Every method broadcasts:
    the result has the shape of its argument, with the terms summed over an extra
    trailing axis. Arrays are stored read-only.

    Each term with E_i >= 0 is a passive spring-dashpot element, so any non-negative
    series is causal and its E' and E'' satisfy the Kramers-Kronig relations by
    construction.

    References
    ----------
    Ferry, J. D. (1980). Viscoelastic Properties of Polymers, 3rd ed. Wiley.
    Tschoegl, N. W. (1989). The Phenomenological Theory of Linear Viscoelastic
    Behavior. Springer.
    """

    tau: np.ndarray
    weights: np.ndarray
    equilibrium: float

    def __post_init__(self) -> None:
        tau = np.array(self.tau, dtype=float).reshape(-1)
        weights = np.array(self.weights, dtype=float).reshape(-1)
        equilibrium = float(self.equilibrium)
        if tau.shape != weights.shape:
            raise ValueError(
                f"tau has {tau.size} relaxation times but weights has {weights.size} "
                "values; give one weight per relaxation time"
            )
        if not np.all(np.isfinite(tau)) or np.any(tau <= 0.0):
            raise ValueError("relaxation times tau must be finite and positive [s]")
        if not np.all(np.isfinite(weights)) or np.any(weights < 0.0):
            raise ValueError("weights must be finite and non-negative [Pa]")
        if not np.isfinite(equilibrium) or equilibrium < 0.0:
            raise ValueError(
                f"equilibrium modulus {equilibrium!r} must be finite and non-negative [Pa]"
            )
        tau.setflags(write=False)
        weights.setflags(write=False)
        object.__setattr__(self, "tau", tau)
        object.__setattr__(self, "weights", weights)
        object.__setattr__(self, "equilibrium", equilibrium)

    @property
    def glassy(self) -> float:
        """Glassy (instantaneous, infinite-frequency) modulus E_inf + sum E_i [Pa]."""
        return self.equilibrium + float(self.weights.sum())

    def storage(self, omega):
        """Storage modulus E'(omega).

        Parameters
        ----------
        omega : float or array [rad/s]
            Angular frequency, any shape.

        Returns
        -------
        float or array [Pa]
            E' = E_inf + sum E_i (omega tau_i)^2 / (1 + (omega tau_i)^2), shape of omega.
        """
        x2 = _terms(omega, self.tau) ** 2
        return (self.equilibrium + (self.weights * (x2 / (1.0 + x2))).sum(axis=-1))[()]

    def loss(self, omega):
        """Loss modulus E''(omega).

        Parameters
        ----------
        omega : float or array [rad/s]
            Angular frequency, any shape.

        Returns
        -------
        float or array [Pa]
            E'' = sum E_i omega tau_i / (1 + (omega tau_i)^2), shape of omega.
        """
        x = _terms(omega, self.tau)
        return (self.weights * (x / (1.0 + x * x))).sum(axis=-1)[()]

    def loss_factor(self, omega):
        """Loss factor eta = tan delta = E''/E' [-] at angular frequency omega [rad/s]."""
        return (np.asarray(self.loss(omega)) / np.asarray(self.storage(omega)))[()]

    def relaxation(self, time):
        """Relaxation modulus E(t) after a step strain.

        Parameters
        ----------
        time : float or array [s]
            Time since the step, any shape, t >= 0.

        Returns
        -------
        float or array [Pa]
            E(t) = E_inf + sum E_i exp(-t/tau_i), shape of time.
        """
        x = np.asarray(time, dtype=float)[..., None] / self.tau
        return (self.equilibrium + (self.weights * np.exp(-x)).sum(axis=-1))[()]

    def to_dict(self) -> dict:
        """Plain, JSON-safe form: ``{"tau_s": [...], "weights_Pa": [...], "equilibrium_Pa"}``."""
        return {
            "tau_s": self.tau.tolist(),
            "weights_Pa": self.weights.tolist(),
            "equilibrium_Pa": self.equilibrium,
        }

    @classmethod
    def from_dict(cls, data: dict) -> PronySeries:
        """Rebuild a series from :meth:`to_dict` output.

        Raises
        ------
        ValueError
            When a key is missing or a value breaks the rules of the series.
        """
        missing = [k for k in ("tau_s", "weights_Pa", "equilibrium_Pa") if k not in data]
        if missing:
            raise ValueError(
                f"Prony series record lacks {', '.join(missing)}; "
                "expected keys tau_s, weights_Pa, equilibrium_Pa"
            )
        return cls(
            tau=np.asarray(data["tau_s"], dtype=float),
            weights=np.asarray(data["weights_Pa"], dtype=float),
            equilibrium=float(data["equilibrium_Pa"]),
        )


@dataclass(frozen=True, eq=False)
class PronyFitReport:
    """How well a Prony series reproduces the data it was fitted to.

    Relative residuals are (model - measured) / measured, one per data point.

    Attributes
    ----------
    rms_storage : float [-]
        Root-mean-square relative residual of E'.
    rms_loss : float [-]
        Root-mean-square relative residual of E''.
    max_abs : float [-]
        Largest absolute relative residual over E' and E''.
    n_terms : int
        Number of Maxwell terms with a nonzero weight (E_inf not counted).
    storage_residual : array [-]
        Relative residual of E' at each data point.
    loss_residual : array [-]
        Relative residual of E'' at each data point.
    """

    rms_storage: float
    rms_loss: float
    max_abs: float
    n_terms: int
    storage_residual: np.ndarray
    loss_residual: np.ndarray


def tau_grid(
    omega_min: float,
    omega_max: float,
    per_decade: float = 1.0,
    margin_decades: float = 1.0,
) -> np.ndarray:
    """Log-spaced relaxation times covering a frequency range.

    Parameters
    ----------
    omega_min, omega_max : float [rad/s]
        Lowest and highest angular frequency of the data, 0 < omega_min <= omega_max.
    per_decade : float, optional
        Terms per decade of time (at least this many; the grid spans its range exactly).
    margin_decades : float, optional
        Decades added beyond each end of 1/omega_max .. 1/omega_min.

    Returns
    -------
    array [s]
        Ascending relaxation times from 10^-margin / omega_max to 10^margin / omega_min.

    Raises
    ------
    FitError
        When the range or the spacing is not positive and finite.
    """
    values = np.array([omega_min, omega_max, per_decade, margin_decades], dtype=float)
    if not np.all(np.isfinite(values)):
        raise FitError(
            "relaxation-time grid: omega_min, omega_max, per_decade and margin_decades "
            "must all be finite numbers"
        )
    if omega_min <= 0.0 or omega_max < omega_min:
        raise FitError(
            f"relaxation-time grid: need 0 < omega_min <= omega_max [rad/s], "
            f"got {omega_min!r} and {omega_max!r}"
        )
    if per_decade <= 0.0:
        raise FitError(f"relaxation-time grid: per_decade must be positive, got {per_decade!r}")
    if margin_decades < 0.0:
        raise FitError(
            f"relaxation-time grid: margin_decades must be zero or more, got {margin_decades!r}"
        )
    log_lo = -np.log10(omega_max) - margin_decades
    log_hi = -np.log10(omega_min) + margin_decades
    span = log_hi - log_lo
    if span == 0.0:
        return np.array([10.0**log_lo])
    n_steps = max(int(np.ceil(span * per_decade - 1e-9)), 1)
    return np.logspace(log_lo, log_hi, n_steps + 1)


def _checked_data(omega, storage_modulus, loss_modulus) -> tuple[np.ndarray, ...]:
    arrays = []
    for name, values in (
        ("omega", omega),
        ("storage_modulus", storage_modulus),
        ("loss_modulus", loss_modulus),
    ):
        array = np.asarray(values, dtype=float).reshape(-1)
        if array.size == 0:
            raise FitError(f"Prony fit: {name} is empty; give at least one data point")
        if not np.all(np.isfinite(array)):
            raise FitError(f"Prony fit: {name} holds NaN or infinite values; all must be finite")
        if np.any(array <= 0.0):
            bad = float(array[array <= 0.0][0])
            raise FitError(
                f"Prony fit: {name} holds {bad}; angular frequencies and moduli must be "
                "positive (relative residuals divide by the measured value)"
            )
        arrays.append(array)
    sizes = {a.size for a in arrays}
    if len(sizes) != 1:
        raise FitError(
            "Prony fit: omega, storage_modulus and loss_modulus must have the same number "
            f"of points, got {arrays[0].size}, {arrays[1].size} and {arrays[2].size}"
        )
    return tuple(arrays)


def fit_prony(
    omega,
    storage_modulus,
    loss_modulus,
    tau=None,
    per_decade: float = 1.0,
    smoothing: float = 0.0,
) -> tuple[PronySeries, PronyFitReport]:
    """Fit a non-negative Prony series to storage and loss modulus together.

    Parameters
    ----------
    omega : array [rad/s]
        Angular frequency of each point (reduced frequency for a master curve), positive.
    storage_modulus : array [Pa]
        Measured E' at each point, positive.
    loss_modulus : array [Pa]
        Measured E'' at each point, positive.
    tau : array [s], optional
        Relaxation times to use. Default: :func:`tau_grid` over the data's frequency
        range with ``per_decade`` terms per decade and one decade of margin each side.
    per_decade : float, optional
        Terms per decade for the default grid (ignored when ``tau`` is given).
    smoothing : float, optional
        Weight of a second-difference penalty on the spectrum (0: none); it damps
        ripple where the data leave gaps in reduced frequency.

    Returns
    -------
    series : PronySeries
        The fitted series; it keeps every relaxation time of the grid, including terms
        whose weight came out zero.
    report : PronyFitReport
        Relative residuals and the number of active terms.

    Raises
    ------
    FitError
        When an input is empty, non-finite, non-positive or of mismatched length, or
        when the least-squares solver fails.

    Notes
    -----
    The relaxation times are fixed, so the model is linear in the unknowns
    p = [E_inf, E_1 .. E_N]. Each row of the stacked system is divided by its measured
    value, so the solver minimises the sum of squared relative residuals of E' and E''::

        minimise || A p - 1 ||^2  subject to  p >= 0
        A[k, 0] = 1 / E'_k,  A[k, i] = (x_ki^2 / (1 + x_ki^2)) / E'_k      (E' rows)
        A[k, 0] = 0,         A[k, i] = (x_ki / (1 + x_ki^2)) / E''_k        (E'' rows)

    with x_ki = omega_k tau_i, solved by non-negative least squares after scaling each
    column to unit norm (a positive scaling, which keeps the constraint). Because every
    weight is non-negative the fitted E' and E'' are Kramers-Kronig consistent by
    construction: the fit cannot return a pair of curves no material could show.

    The grid sets the smoothness: with one term per decade the fitted E'' ripples by a
    few per cent between the relaxation times even on smooth data; two or more terms per
    decade follow a smooth spectrum far more closely. Terms beyond the data's frequency
    range are weakly determined; the margin only keeps the ends of the curves free.

    References
    ----------
    Lawson, C. L. and Hanson, R. J. (1974). Solving Least Squares Problems.
    Prentice-Hall (the NNLS algorithm, as implemented by scipy.optimize.nnls).
    Tschoegl, N. W. (1989). The Phenomenological Theory of Linear Viscoelastic
    Behavior. Springer.
    """
    omega, storage_modulus, loss_modulus = _checked_data(omega, storage_modulus, loss_modulus)
    if tau is None:
        tau = tau_grid(float(omega.min()), float(omega.max()), per_decade=per_decade)
    else:
        tau = np.asarray(tau, dtype=float).reshape(-1)
        if tau.size == 0 or not np.all(np.isfinite(tau)) or np.any(tau <= 0.0):
            raise FitError("Prony fit: tau must hold at least one finite, positive time [s]")

    x = omega[:, None] * tau
    storage_basis = x * x / (1.0 + x * x)
    loss_basis = x / (1.0 + x * x)
    n = omega.size
    matrix = np.zeros((2 * n, tau.size + 1))
    matrix[:n, 0] = 1.0
    matrix[:n, 1:] = storage_basis
    matrix[n:, 1:] = loss_basis
    measured = np.concatenate([storage_modulus, loss_modulus])
    matrix /= measured[:, None]

    norms = np.linalg.norm(matrix, axis=0)
    usable = norms > 0.0
    scaled = np.zeros_like(matrix)
    scaled[:, usable] = matrix[:, usable] / norms[usable]
    rhs = np.ones(2 * n)
    if smoothing > 0.0 and tau.size >= 3:
        # Tikhonov rows: smoothing x second differences of E_i / max(E'), which keeps
        # the spectrum from rippling where the master curve has gaps (Tschoegl 1989,
        # ch. 4; a common regularisation of discrete-spectrum fits).
        m = tau.size
        d2 = np.zeros((m - 2, m + 1))
        idx = np.arange(m - 2)
        d2[idx, idx + 1], d2[idx, idx + 2], d2[idx, idx + 3] = 1.0, -2.0, 1.0
        d2 *= smoothing / float(np.max(storage_modulus))
        d2_scaled = np.zeros_like(d2)
        d2_scaled[:, usable] = d2[:, usable] / norms[usable]
        scaled = np.vstack([scaled, d2_scaled])
        rhs = np.concatenate([rhs, np.zeros(m - 2)])
    try:
        from scipy.optimize import nnls  # imported when a fit needs it

        solution, _ = nnls(scaled, rhs, maxiter=50 * (tau.size + 1))
    except RuntimeError as exc:  # iteration limit
        raise FitError(f"Prony fit: the non-negative least-squares solver failed ({exc})") from exc
    params = np.zeros(tau.size + 1)
    params[usable] = solution[usable] / norms[usable]

    series = PronySeries(tau=tau, weights=params[1:], equilibrium=params[0])
    residual = matrix @ params - 1.0
    storage_residual = residual[:n]
    loss_residual = residual[n:]
    report = PronyFitReport(
        rms_storage=float(np.sqrt(np.mean(storage_residual**2))),
        rms_loss=float(np.sqrt(np.mean(loss_residual**2))),
        max_abs=float(np.max(np.abs(residual))),
        n_terms=int(np.count_nonzero(params[1:])),
        storage_residual=storage_residual,
        loss_residual=loss_residual,
    )
    return series, report
