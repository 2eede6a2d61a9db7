"""Shift law, isotherm shifts and relaxation spectrum fitted together to every point.

The pairwise overlap of :mod:`engine.physics.shift` gives a start; this module then fits, to all
measured points at once, the constants of the shift law, a small correction of the shift
of each isotherm, and a smooth non-negative relaxation spectrum, and turns the fit's own
uncertainty into draws of the whole model. Sparse sheets, logged temperatures and ramps
all go through the same fit.

Glossary: ``z`` is the natural log of the reduced angular frequency 2 pi f aT;
``u`` the natural log of a Prony weight [ln Pa].
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from engine.base.errors import FitError
from engine.physics.prony import PronySeries
from engine.physics.shift import LN10, ShiftLaw

N_DRAWS = 32
DRAW_ALLOWANCE = 10.0  # rise beyond |z|^2 allowed, in sd of chi-square(n), see consistent_draws
SHIFT_PRIOR_DECADES = 0.1  # sd of an isotherm's departure from the law (common practice
# of this project: a few times the temperature error of a DMA oven, ~0.3 K)
SMOOTHING = 0.5  # sd of the second difference of ln E_i per grid step is 1/SMOOTHING
RIDGE_LN = 5.0  # weak prior on each ln E_i about its start (keeps the ends bounded)
SPLIT_PRIOR_K = 10.0  # sd of the WLF/Arrhenius split about its start (the data's Tg)
LAW_PRIOR_LN = 1.5  # sd of ln C1, ln(C2 - C2min), ln Ea about their start values
NOISE_FLOOR = 0.003  # the scatter estimate never goes below 0.3 %
FLOOR_WEIGHT = 1e-6  # relative floor of a Prony weight in the start spectrum
CHI2_1_MEDIAN = 0.454936  # median of chi-square with 1 degree of freedom (scipy.stats)
Z_LIMIT = 700.0  # |ln(omega tau)| beyond which the basis is flat (no overflow)


def _expit(x: np.ndarray) -> np.ndarray:
    """The logistic function 1 / (1 + exp(-x)), without overflow for large |x| (the same
    values as scipy.special.expit, which costs a quarter of a second to import)."""
    e = np.exp(-np.abs(x))
    return np.where(x >= 0, 1.0 / (1.0 + e), e / (1.0 + e))


@dataclass(frozen=True)
class LawTemplate:
    """What stays fixed about the shift law while its constants are fitted."""

    kind: str  # "WLF", "Arrhenius", "WLF+Arrhenius" or "none"
    reference_C: float
    wlf_reference_C: float | None
    split_C: float | None
    c2_min: float  # [K] smallest C2 that keeps WLF finite over the data

    @property
    def size(self) -> int:
        return {"none": 0, "WLF": 2, "Arrhenius": 1, "WLF+Arrhenius": 4}[self.kind]

    def theta(self, law: ShiftLaw) -> np.ndarray:
        """Fitted-space parameters (logs keep every constant inside its valid range)."""
        out = []
        if self.kind in ("WLF", "WLF+Arrhenius"):
            assert law.wlf_c1 is not None and law.wlf_c2 is not None  # the law is of this kind
            out += [np.log(law.wlf_c1), np.log(max(law.wlf_c2 - self.c2_min, 1e-3))]
        if self.kind in ("Arrhenius", "WLF+Arrhenius"):
            assert law.activation_J_per_mol is not None  # the law is of this kind
            out.append(np.log(law.activation_J_per_mol / 1e3))
        if self.kind == "WLF+Arrhenius":
            assert law.split_C is not None  # the law is of this kind
            out.append(law.split_C / SPLIT_PRIOR_K)
        return np.array(out, dtype=float)

    def law(self, theta) -> ShiftLaw:
        theta = np.clip(np.asarray(theta, dtype=float), -50.0, 50.0)
        if self.kind == "none":
            return ShiftLaw("none", self.reference_C)
        if self.kind == "Arrhenius":
            ea = float(np.exp(theta[0])) * 1e3
            return ShiftLaw("Arrhenius", self.reference_C, activation_J_per_mol=ea)
        c1, c2 = float(np.exp(theta[0])), self.c2_min + float(np.exp(theta[1]))
        if self.kind == "WLF":
            return ShiftLaw("WLF", self.reference_C, c1, c2, self.wlf_reference_C)
        ea = float(np.exp(theta[2])) * 1e3
        # The glass transition dividing the two laws is fitted too; WLF is referred to it.
        split = float(theta[3]) * SPLIT_PRIOR_K
        return ShiftLaw("WLF+Arrhenius", self.reference_C, c1, c2, split, ea, split)


def robust_variance(deviations, axis=0):
    """Variance of a spread of draws about their centre, robust to a few wild draws.

    Notes
    -----
    The mean of the squared deviations, each capped at 25 times the median-based
    variance median(d^2) / 0.4549 (0.4549: median of chi-square with one degree of
    freedom, scipy.stats.chi2(1).median()): a squared deviation winsorised at five
    robust standard deviations (Rousseeuw & Croux 1993 for the robust scale). For
    Gaussian draws this is within a few per cent of the plain variance; a Laplace
    approximation that throws one or two of 32 draws far into a region the data exclude
    no longer sets the interval.

    References
    ----------
    Rousseeuw, P. J. and Croux, C. (1993). Alternatives to the median absolute deviation.
    J. Am. Stat. Assoc. 88, 1273-1283.
    """
    sq = np.asarray(deviations, dtype=float) ** 2
    scale = np.median(sq, axis=axis, keepdims=True) / CHI2_1_MEDIAN
    return np.mean(np.minimum(sq, 25.0 * scale), axis=axis)


def consistent_draws(residuals, p, chol, n_draws: int, rng, batches: int = 4) -> np.ndarray:
    """Draws from the Laplace approximation that the data do not contradict.

    Notes
    -----
    Candidates q = p + L z (L L^T the posterior covariance) are drawn in batches. Where
    the model is nearly linear, the objective rises by about |z|^2 from its minimum; a
    candidate whose real rise exceeds |z|^2 by more than DRAW_ALLOWANCE sqrt(2 n) (n
    parameters; ten standard deviations of a chi-square with n degrees of freedom, a
    project value that removes only gross failures and keeps the coverage of
    tests/test_real_exports.py) lies where the quadratic approximation fails, typically
    along a near-degenerate direction such as isotherm shifts moving against the
    spectrum, and is set aside. Up to ``batches``
    batches are tried; any shortfall is made up by the least inconsistent candidates.
    This is a rejection step on the importance ratio of sampling-importance-resampling
    (Rubin 1988), kept simple so that the accepted draws keep the Gaussian's spread.

    References
    ----------
    Rubin, D. B. (1988). Using the SIR algorithm to simulate posterior distributions.
    Bayesian Statistics 3, 395-402. Oxford University Press.
    """
    if n_draws == 0:
        return np.zeros((0, p.size))
    base = float(np.sum(residuals(p) ** 2))
    allowance = DRAW_ALLOWANCE * np.sqrt(2.0 * p.size)
    kept, excess_all, cands = [], [], []
    for _ in range(batches):
        z = rng.standard_normal((n_draws, p.size))
        for zk in z:
            q = p + chol @ zk
            rise = float(np.sum(residuals(q) ** 2)) - base
            excess = rise - float(zk @ zk)
            if np.isfinite(excess) and excess <= allowance:
                kept.append(q)
            else:
                cands.append(q)
                excess_all.append(excess if np.isfinite(excess) else np.inf)
            if len(kept) == n_draws:
                return np.array(kept)
    order = np.argsort(excess_all)
    kept += [cands[i] for i in order[: n_draws - len(kept)]]
    return np.array(kept)


def interpolation_matrix(x, nodes) -> np.ndarray:
    """Weights W (len(x), len(nodes)) of linear interpolation, held at the end nodes."""
    x = np.asarray(x, dtype=float)
    nodes = np.asarray(nodes, dtype=float)
    w = np.zeros((x.size, nodes.size))
    if nodes.size == 1:
        w[:, 0] = 1.0
        return w
    xc = np.clip(x, nodes[0], nodes[-1])
    k = np.clip(np.searchsorted(nodes, xc, side="right") - 1, 0, nodes.size - 2)
    frac = (xc - nodes[k]) / (nodes[k + 1] - nodes[k])
    rows = np.arange(x.size)
    w[rows, k] = 1.0 - frac
    w[rows, k + 1] = frac
    return w


def _basis(z, ln_tau):
    """Storage and loss basis and their derivatives in z, each (points, terms)."""
    a = np.clip(z[:, None] + ln_tau[None, :], -Z_LIMIT, Z_LIMIT)
    s = _expit(2.0 * a)  # (omega tau)^2 / (1 + (omega tau)^2)
    sech = 1.0 / np.cosh(a)
    loss = 0.5 * sech  # omega tau / (1 + (omega tau)^2)
    return s, loss, 2.0 * s * (1.0 - s), -loss * np.tanh(a)


def levenberg_marquardt(residuals, jacobian, p, args, max_iter: int = 60, tol: float = 1e-7):
    """Minimise ||residuals(p)||^2 by Levenberg-Marquardt with Marquardt's scaling.

    Returns (p, converged). The normal equations (J^T J + lambda diag(J^T J)) step = -J^T r
    are solved directly: the problems here have at most a few hundred parameters, for
    which this is far cheaper than a factorisation of J itself (Marquardt 1963;
    Nocedal & Wright 2006, sec. 10.3).

    References
    ----------
    Marquardt, D. W. (1963). An algorithm for least-squares estimation of nonlinear
    parameters. J. SIAM 11(2), 431-441.
    Nocedal, J. and Wright, S. J. (2006). Numerical Optimization, 2nd ed. Springer.
    """
    r = residuals(p, *args)
    cost = float(r @ r)
    lam = 1e-3
    for _ in range(max_iter):
        jac = jacobian(p, *args)
        grad = jac.T @ r
        hess = jac.T @ jac
        scale = np.maximum(np.diag(hess), 1e-12)
        while True:
            try:
                step = np.linalg.solve(hess + lam * np.diag(scale), -grad)
            except np.linalg.LinAlgError:
                step = np.full_like(p, np.nan)
            trial = p + step
            r_new = residuals(trial, *args) if np.all(np.isfinite(step)) else None
            new_cost = float(r_new @ r_new) if r_new is not None else np.inf
            if np.isfinite(new_cost) and new_cost <= cost:
                break
            lam *= 5.0
            if lam > 1e12:
                return p, cost < np.inf
        gain = cost - new_cost
        p, r, cost = trial, r_new, new_cost
        lam = max(lam / 3.0, 1e-9)
        if gain <= tol * max(cost, 1e-300) or np.max(np.abs(step)) < 1e-9:
            return p, True
    return p, False


@dataclass
class JointResult:
    """The joint fit: best parameters, their draws and what they mean."""

    template: LawTemplate
    law: ShiftLaw
    group_temperatures: np.ndarray  # [degC]
    log_shift: np.ndarray  # log10 aT of each isotherm
    log_shift_sd: np.ndarray | None  # posterior sd of log10 aT of each isotherm [decades]
    from_law: np.ndarray  # bool: the isotherm's shift is mostly the law's
    prony: PronySeries
    draws: list  # (ShiftLaw, log_shift per isotherm, PronySeries) per draw
    sigma_storage: float  # relative scatter of E' about the fit
    sigma_loss: float  # relative scatter of E''
    log_fr: np.ndarray  # log10 reduced frequency of each point at the fit
    residual_storage: np.ndarray  # ln(model / measured) of E' per point
    residual_loss: np.ndarray  # ln(model / measured) of E'' per point
    converged: bool


def fit_jointly(
    temperature,
    frequency,
    storage_modulus,
    loss_modulus,
    labels,
    group_temperatures,
    start_law: ShiftLaw,
    template: LawTemplate,
    start_log_shift,
    tau,
    start_prony: PronySeries,
    reference_group: int,
    rng_seed: int = 20261202,
    n_draws: int = N_DRAWS,
) -> JointResult:
    """Fit the shift law, isotherm corrections and log-spectrum to all points.

        Parameters
        ----------
        temperature, frequency : array [degC], [Hz]
            Logged temperature and frequency of each point.
        storage_modulus, loss_modulus : array [Pa]
        labels : int array
            Isotherm of each point; ``group_temperatures`` [degC] their mean temperatures,
            ascending.
        start_law, template : the law to start from and what is fixed about it.
        start_log_shift : array
            log10 aT of each isotherm to start from (pairwise overlap, or the law).
        tau : array [s]
            Relaxation times of the spectrum; ``start_prony`` its start weights.
        reference_group : int
            The isotherm whose correction is pinned at zero (fixes the origin of fR).
        n_draws : int
            Posterior draws to make (0: none, and no interval).

        Notes
        -----
        Point j sits at z_j = ln(2 pi f_j) + ln10 [L(T_j) + c(T_j) - c(T0)], with L the shift
        law at the point's own logged temperature and c the isotherm corrections interpolated
        linearly in temperature (so a point logged 0.3 K off its set-point is shifted by the
        law for those 0.3 K). The model is the generalized Maxwell series with weights
        E_i = exp(u_i). The fit minimises, by Levenberg-Marquardt (scipy.optimize.least_squares
        with an analytic Jacobian), the squared log residuals of E' and E'' scaled by their
        scatter, plus Gaussian priors: corrections ~ N(0, 0.1 decade), second differences of
        u ~ N(0, 1/SMOOTHING) (a smooth spectrum relative to its local level, so noise on a
        small loss factor is not fitted), weak priors on u and the law constants. The scatter
        of E' and E'' is estimated from the residuals (first of the start curve, then of the
    fit) and the fit repeated once where it changed by more than 30 %. The
        posterior covariance is the inverse of J^T J at the optimum (Laplace approximation;
        Bates & Watts 1988, ch. 2); ``N_DRAWS`` draws of all parameters from it give the
        intervals. Every draw has non-negative weights, so every drawn curve is
        Kramers-Kronig consistent.

        References
        ----------
        Bates, D. M. and Watts, D. G. (1988). Nonlinear Regression Analysis and Its
        Applications. Wiley.
        Tschoegl, N. W. (1989). The Phenomenological Theory of Linear Viscoelastic
        Behavior. Springer (ch. 4, discrete spectra and their regularisation).
    """
    t = np.asarray(temperature, dtype=float)
    ln_f = np.log(2.0 * np.pi * np.asarray(frequency, dtype=float))
    ln_es = np.log(np.asarray(storage_modulus, dtype=float))
    ln_el = np.log(np.asarray(loss_modulus, dtype=float))
    temps = np.asarray(group_temperatures, dtype=float)
    n_groups = temps.size
    ln_tau = np.log(np.asarray(tau, dtype=float))
    n_terms = ln_tau.size
    n_law = template.size
    free = np.array([g for g in range(n_groups) if g != reference_group], dtype=np.intp)
    w_pts = interpolation_matrix(t, temps)
    w_ref = interpolation_matrix([template.reference_C], temps)[0]
    # d z / d b for the free corrections: the points' weights minus the reference's.
    dz_db = LN10 * (w_pts - w_ref[None, :])[:, free]

    theta0 = template.theta(start_law) if n_law else np.zeros(0)
    corr0 = np.asarray(start_log_shift, dtype=float) - start_law.log_shift(temps)
    corr0 = corr0 - corr0[reference_group]
    weights0 = np.asarray(start_prony.weights, dtype=float)
    floor = FLOOR_WEIGHT * max(float(weights0.max(initial=0.0)), start_prony.equilibrium, 1.0)
    u0 = np.log(np.maximum(weights0, floor))
    ueq0 = np.log(max(start_prony.equilibrium, floor))
    p0 = np.concatenate([theta0, corr0[free], [ueq0], u0])
    i_b = slice(n_law, n_law + free.size)
    i_eq = n_law + free.size
    i_u = slice(i_eq + 1, i_eq + 1 + n_terms)

    d2 = np.zeros((max(n_terms - 2, 0), n_terms))
    k = np.arange(max(n_terms - 2, 0))
    d2[k, k], d2[k, k + 1], d2[k, k + 2] = 1.0, -2.0, 1.0

    def law_shift(theta):
        return template.law(theta).log_shift(t) if n_law else np.zeros_like(t)

    def unpack(p):
        return p[:n_law], p[i_b], p[i_eq], p[i_u]

    def z_of(p):
        theta, b, _, _ = unpack(p)
        return ln_f + LN10 * law_shift(theta) + dz_db @ b

    memo: dict = {}

    def pieces(p):
        key = p.tobytes()
        if memo.get("key") != key:
            memo["key"], memo["value"] = key, _pieces(p)
        return memo["value"]

    def _pieces(p):
        _, _, ueq, u = unpack(p)
        z = z_of(p)
        s, loss, ds, dl = _basis(z, ln_tau)
        w = np.exp(np.clip(u, -700, 700))
        eq = float(np.exp(np.clip(ueq, -700, 700)))
        ms = eq + s @ w
        ml = np.maximum(loss @ w, 1e-300)
        return z, s, loss, ds, dl, w, eq, ms, ml

    def residuals(p, sig_s, sig_l):
        theta, b, ueq, u = unpack(p)
        *_, ms, ml = pieces(p)
        return np.concatenate(
            [
                (np.log(ms) - ln_es) / sig_s,
                (np.log(ml) - ln_el) / sig_l,
                b / SHIFT_PRIOR_DECADES,
                SMOOTHING * (d2 @ u),
                (u - u0) / RIDGE_LN,
                [(ueq - ueq0) / RIDGE_LN],
                (theta - theta0) / LAW_PRIOR_LN,
            ]
        )

    def jacobian(p, sig_s, sig_l):
        theta, _, _, _ = unpack(p)
        z, s, loss, ds, dl, w, eq, ms, ml = pieces(p)
        n_pts = z.size
        dms_dz = (ds @ w) / ms
        dml_dz = (dl @ w) / ml
        dz_dtheta = np.zeros((n_pts, n_law))
        base = law_shift(theta)
        for i in range(n_law):
            step = np.zeros(n_law)
            step[i] = 1e-6
            dz_dtheta[:, i] = LN10 * (law_shift(theta + step) - base) / 1e-6
        dz_dp = np.hstack([dz_dtheta, dz_db])
        rows_s = np.hstack(
            [dms_dz[:, None] * dz_dp, (eq / ms)[:, None], s * w[None, :] / ms[:, None]]
        )
        rows_l = np.hstack(
            [dml_dz[:, None] * dz_dp, np.zeros((n_pts, 1)), loss * w[None, :] / ml[:, None]]
        )
        n_p = p.size
        prior = np.zeros((free.size + d2.shape[0] + n_terms + 1 + n_law, n_p))
        r = 0
        prior[r : r + free.size, i_b] = np.eye(free.size) / SHIFT_PRIOR_DECADES
        r += free.size
        prior[r : r + d2.shape[0], i_u] = SMOOTHING * d2
        r += d2.shape[0]
        prior[r : r + n_terms, i_u] = np.eye(n_terms) / RIDGE_LN
        r += n_terms
        prior[r, i_eq] = 1.0 / RIDGE_LN
        r += 1
        prior[r : r + n_law, :n_law] = np.eye(n_law) / LAW_PRIOR_LN
        return np.vstack([rows_s / sig_s, rows_l / sig_l, prior])

    # Start the scatter from the residuals of the start curve (one pass usually does).
    *_, ms0, ml0 = pieces(p0)
    sig_s = float(np.clip(np.sqrt(np.mean((np.log(ms0) - ln_es) ** 2)), NOISE_FLOOR, 1.0))
    sig_l = float(np.clip(np.sqrt(np.mean((np.log(ml0) - ln_el) ** 2)), NOISE_FLOOR, 1.0))
    p = p0
    converged = True
    for _pass in range(2):
        p, ok = levenberg_marquardt(residuals, jacobian, p, (sig_s, sig_l))
        converged = converged and ok
        *_, ms, ml = pieces(p)
        rs, rl = np.log(ms) - ln_es, np.log(ml) - ln_el
        dof = max(2 * rs.size - p.size / 2, 1.0)
        new_s = max(float(np.sqrt(np.sum(rs**2) / (dof / 2))), NOISE_FLOOR)
        new_l = max(float(np.sqrt(np.sum(rl**2) / (dof / 2))), NOISE_FLOOR)
        done = max(new_s / sig_s, sig_s / new_s, new_l / sig_l, sig_l / new_l) < 1.3
        sig_s, sig_l = new_s, new_l
        if done:
            break
    if not np.all(np.isfinite(p)):
        raise FitError("the joint fit of shift law and spectrum did not converge")

    jac = jacobian(p, sig_s, sig_l)
    hess = jac.T @ jac
    try:
        chol_h = np.linalg.cholesky(hess + 1e-10 * np.eye(hess.shape[0]))
        inv_chol = np.linalg.solve(chol_h, np.eye(hess.shape[0]))  # L^-1
        cov = inv_chol.T @ inv_chol
    except np.linalg.LinAlgError:
        cov = np.linalg.pinv(hess)
    rng = np.random.default_rng(rng_seed)
    try:
        chol_c = np.linalg.cholesky(cov + 1e-12 * np.eye(cov.shape[0]))
    except np.linalg.LinAlgError:
        vals, vecs = np.linalg.eigh(cov)
        chol_c = vecs * np.sqrt(np.maximum(vals, 0.0))
    samples = consistent_draws(lambda q: residuals(q, sig_s, sig_l), p, chol_c, n_draws, rng)

    def model_of(q):
        theta, b, ueq, u = unpack(q)
        law = template.law(theta)
        corr = np.zeros(n_groups)
        corr[free] = b
        corr = corr - w_ref @ corr
        series = PronySeries(
            np.exp(ln_tau),
            np.exp(np.clip(u, -700, 700)),
            float(np.exp(np.clip(ueq, -700, 700))),
        )
        return law, law.log_shift(temps) + corr, series

    law, log_shift, series = model_of(p)
    draws = [model_of(q) for q in samples]
    shifts = np.array([d[1] for d in draws]).reshape(len(draws), n_groups)
    shift_sd = np.sqrt(robust_variance(shifts - log_shift)) if draws else None
    # An isotherm whose shift its own points barely fix (their information alone leaves
    # it less certain than the prior) takes its shift from the law.
    n_data = 2 * t.size
    info = np.sum(jac[:n_data, i_b] ** 2, axis=0)
    from_law = np.zeros(n_groups, bool)
    from_law[free] = info * SHIFT_PRIOR_DECADES**2 < 1.0
    z = z_of(p)
    return JointResult(
        template=template,
        law=law,
        group_temperatures=temps,
        log_shift=log_shift,
        log_shift_sd=shift_sd,
        from_law=from_law,
        prony=series,
        draws=draws,
        sigma_storage=sig_s,
        sigma_loss=sig_l,
        log_fr=(z - np.log(2.0 * np.pi)) / LN10,
        residual_storage=rs,
        residual_loss=rl,
        converged=converged,
    )
