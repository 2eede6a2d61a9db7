"""Tests of engine.physics.creep: creep compliance J(t) from a Prony relaxation series.

Checks are against closed forms of the standard linear solid and the Maxwell fluid (Ferry
1980; Tschoegl 1989), the interconversion identities int_0^t E(t - s) J(s) ds = t and
int_0^t E(t - s) dJ(s) = 1 (Tschoegl 1989) evaluated by independent numerical
integration, and the known bounds J(t) E(t) <= 1 and dJ/dt >= 0 (Tschoegl 1989).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.linalg import solve_triangular

from engine.physics.creep import (
    COMPLIANCE_STEP,
    ComplianceTable,
    RetardationSpectrum,
    creep_compliance,
    dynamic_to_static_ratio,
    retardation_spectra,
    retardation_spectrum,
    static_modulus_from_compliance,
    tabulate_compliance,
)
from engine.physics.prony import PronySeries, fit_prony, tau_grid
from tests import synthetic

# ------------------------------------------------------------------ helpers

_GL_NODES, _GL_WEIGHTS = np.polynomial.legendre.leggauss(12)


def _log_panels(start: float, stop: float, per_decade: int = 8) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre nodes and weights on log-spaced panels covering [start, stop]."""
    n = max(int(np.ceil(np.log10(stop / start) * per_decade)), 1)
    edges = np.logspace(np.log10(start), np.log10(stop), n + 1)
    a, b = edges[:-1, None], edges[1:, None]
    nodes = 0.5 * (a + b) + 0.5 * (b - a) * _GL_NODES
    weights = 0.5 * (b - a) * _GL_WEIGHTS
    return nodes.ravel(), weights.ravel()


def convolution(series: PronySeries, compliance, time: float, start: float) -> float:
    """int_0^t E(t - s) J(s) ds by composite Gauss-Legendre quadrature.

    The integral is split at t/2; each half is integrated on panels log-spaced in the
    distance from its end point (s from 0, t - s from t), from ``start`` (far below
    every relaxation and retardation time) up to t/2, so that the fast parts of E near
    s = t and of J near s = 0 are resolved. The piece [0, start] of each half is taken
    as start times the integrand at its end (its share is below start/t relative).
    """
    half = 0.5 * time
    start = min(start, 1e-3 * half)
    s, w = _log_panels(start, half)
    near_zero = np.sum(w * series.relaxation(time - s) * compliance(s))
    near_t = np.sum(w * series.relaxation(s) * compliance(time - s))
    ends = start * (series.relaxation(time) * compliance(0.0) + series.glassy * compliance(time))
    return float(near_zero + near_t + ends)


def volterra_solution(series: PronySeries, grid: np.ndarray) -> np.ndarray:
    """J on ``grid`` (grid[0] = 0) solving int_0^t E(t - s) dJ(s) = 1 step by step.

    J is taken piecewise linear between grid points (dJ = r_k ds on interval k), so at
    each t_n: E(t_n) J(0) + sum_k r_k int_{t_k-1}^{t_k} E(t_n - s) ds = 1, a lower
    triangular system for the slopes r_k. The integrals of the Prony E over each interval
    are exact; the only approximation is the piecewise-linear J (product integration of
    the Volterra equation, second order in the step).
    """
    t = grid[1:]
    step = np.diff(grid)
    lag_end = t[:, None] - grid[None, 1:]  # t_n - t_k >= 0 below the diagonal
    below = lag_end >= 0.0
    lag_end = np.where(below, lag_end, 0.0)
    matrix = series.equilibrium * np.broadcast_to(step, lag_end.shape).copy()
    for e_i, tau_i in zip(series.weights, series.tau, strict=True):
        if e_i == 0.0:
            continue
        # int exp(-(t_n - s)/tau) ds over [t_k-1, t_k] = tau exp(-lag/tau) (1 - exp(-dt/tau))
        matrix += e_i * tau_i * np.exp(-lag_end / tau_i) * -np.expm1(-step / tau_i)
    matrix = np.where(below, matrix, 0.0)
    j0 = 1.0 / series.glassy
    rhs = 1.0 - series.relaxation(t) * j0
    slopes = solve_triangular(matrix, rhs, lower=True)
    return np.concatenate([[j0], j0 + np.cumsum(slopes * step)])


def broad_series(n_terms: int = 60) -> PronySeries:
    """A log-normal spectrum of n terms over 24 decades (test input, not a check value)."""
    tau = np.logspace(-14.0, 10.0, n_terms)
    weights = np.exp(-0.5 * ((np.log10(tau) + 4.0) / 2.5) ** 2)
    return PronySeries(tau=tau, weights=weights / weights.sum() * 2.0e9, equilibrium=2.0e6)


def fitted_series() -> PronySeries:
    """30-term NNLS fit to a noisy master curve of the known series in tests/synthetic.py.

    The master curve: E' and E'' of synthetic.TAU/WEIGHTS/EQUILIBRIUM (81 terms over 20
    decades) at 161 angular frequencies over 16 decades, with 2.5 % log-normal scatter.
    """
    known = PronySeries(
        tau=synthetic.TAU, weights=synthetic.WEIGHTS, equilibrium=synthetic.EQUILIBRIUM
    )
    omega = np.logspace(-4.0, 12.0, 161)
    rng = np.random.default_rng(11)
    storage = known.storage(omega) * np.exp(rng.normal(0.0, 0.025, omega.size))
    loss = known.loss(omega) * np.exp(rng.normal(0.0, 0.025, omega.size))
    tau = tau_grid(omega.min(), omega.max(), per_decade=29.0 / 18.0)
    assert tau.size == 30
    series, _ = fit_prony(omega, storage, loss, tau=tau)
    return series


# ------------------------------------------------------------ closed forms


def test_standard_linear_solid_against_closed_form():
    # Standard linear solid E(t) = E_inf + E_1 exp(-t/tau): J(t) = 1/E_inf
    # - (1/E_inf - 1/E_0) exp(-t E_inf / (E_0 tau)), E_0 = E_inf + E_1 (Ferry 1980,
    # ch. 3; Tschoegl 1989). Exact, so checked to rtol 1e-10.
    e_inf, e_1, tau = 1.5e6, 4.0e8, 0.3
    e_0 = e_inf + e_1
    series = PronySeries(tau=[tau], weights=[e_1], equilibrium=e_inf)
    time = np.concatenate([[0.0], np.logspace(-4.0, 4.0, 161)])
    closed = 1.0 / e_inf - (1.0 / e_inf - 1.0 / e_0) * np.exp(-time * e_inf / (e_0 * tau))
    np.testing.assert_allclose(creep_compliance(series, time), closed, rtol=1e-10, atol=0.0)
    spectrum = retardation_spectrum(series)
    # the retardation time of the standard linear solid is tau E_0 / E_inf (Tschoegl 1989)
    assert spectrum.times == pytest.approx([tau * e_0 / e_inf], rel=1e-12)


def test_maxwell_fluid_against_closed_form():
    # Maxwell element E(t) = E_1 exp(-t/tau): J(t) = 1/E_1 + t/(E_1 tau), a glassy
    # compliance plus steady flow with eta_0 = E_1 tau (Ferry 1980, ch. 3).
    e_1, tau = 3.0e6, 2.0
    series = PronySeries(tau=[tau], weights=[e_1], equilibrium=0.0)
    time = np.array([0.0, 0.01, 1.0, 100.0, 1e6])
    np.testing.assert_allclose(
        creep_compliance(series, time), 1.0 / e_1 + time / (e_1 * tau), rtol=1e-14
    )
    spectrum = retardation_spectrum(series)
    assert spectrum.times.size == 0
    assert spectrum.fluidity == pytest.approx(1.0 / (e_1 * tau), rel=1e-15)
    assert spectrum.equilibrium_compliance == np.inf


def test_pure_spring_has_constant_compliance():
    # Hooke solid: J = 1/E at every time (Tschoegl 1989).
    series = PronySeries(tau=[1.0, 10.0], weights=[0.0, 0.0], equilibrium=4.0e6)
    np.testing.assert_allclose(creep_compliance(series, [0.0, 5.0, 1e9]), 0.25e-6, rtol=1e-15)


def test_two_term_solid_against_quadratic_roots():
    # With two terms f(lambda) = 0 is a quadratic in lambda (Tschoegl 1989):
    # E_inf (tau_1 - l)(tau_2 - l) + E_1 tau_1 (tau_2 - l) + E_2 tau_2 (tau_1 - l) = 0.
    e_inf, (e_1, e_2), (t_1, t_2) = 2.0e6, (5.0e8, 3.0e7), (1e-3, 10.0)
    series = PronySeries(tau=[t_2, t_1], weights=[e_2, e_1], equilibrium=e_inf)  # unsorted
    a = e_inf
    b = -(e_inf * (t_1 + t_2) + e_1 * t_1 + e_2 * t_2)
    c = (e_inf + e_1 + e_2) * t_1 * t_2
    roots = np.sort(np.roots([a, b, c]).real)
    spectrum = retardation_spectrum(series)
    np.testing.assert_allclose(spectrum.times, roots, rtol=1e-12)
    assert t_1 < spectrum.times[0] < t_2 < spectrum.times[1]


# ---------------------------------------------------------- limits and bounds


@pytest.mark.parametrize("make", [broad_series, fitted_series])
def test_limits_at_zero_and_infinity(make):
    # J(0) = 1/E(0) and J(inf) = 1/E_inf (Tschoegl 1989): the initial and final
    # value theorems on s J~(s) = 1 / (s E~(s)).
    series = make()
    spectrum = retardation_spectrum(series)
    assert creep_compliance(series, 0.0) == pytest.approx(1.0 / series.relaxation(0.0), rel=1e-14)
    assert spectrum.equilibrium_compliance == pytest.approx(1.0 / series.equilibrium, rel=1e-12)
    late = 1e6 * spectrum.times.max()
    assert creep_compliance(series, late) == pytest.approx(1.0 / series.equilibrium, rel=1e-12)


@pytest.mark.parametrize("make", [broad_series, fitted_series])
def test_compliance_times_modulus_at_most_one_and_monotone(make):
    # J(t) E(t) <= 1 for t >= 0, equal to 1 at t = 0 (common practice: a known
    # inequality, Tschoegl 1989), and J non-decreasing (every retardation strength >= 0).
    series = make()
    time = np.concatenate([[0.0], np.logspace(-18.0, 14.0, 641)])
    j = creep_compliance(series, time)
    product = j * series.relaxation(time)
    assert product[0] == pytest.approx(1.0, rel=1e-14)
    assert np.all(product <= 1.0 + 1e-13)
    # strictly below 1 wherever the material is relaxing: E(t) more than 0.1 % away from
    # both its glassy and its equilibrium value
    modulus = series.relaxation(time)
    inside = (modulus < 0.999 * series.glassy) & (modulus > 1.001 * series.equilibrium)
    assert np.count_nonzero(inside) > 100
    assert np.all(product[inside] < 1.0 - 1e-9)
    assert np.all(np.diff(j) >= 0.0)


@pytest.mark.parametrize("make", [broad_series, fitted_series])
def test_retardation_times_interlace_relaxation_times(make):
    # Tschoegl 1989: tau_1 < lambda_1 < tau_2 < lambda_2 < ... < tau_N < lambda_N.
    series = make()
    spectrum = retardation_spectrum(series)
    tau = np.unique(series.tau[series.weights > 0.0])
    assert spectrum.times.size == tau.size
    assert np.all(spectrum.times > tau)
    assert np.all(spectrum.times[:-1] < tau[1:])
    assert np.all(spectrum.weights >= 0.0)


# ------------------------------------------------- interconversion identities


def test_convolution_identity_on_fitted_spectrum():
    # int_0^t E(t - s) J(s) ds = t (Tschoegl 1989), by independent quadrature,
    # over 30 decades of time on a 30-term NNLS fit to a noisy master curve.
    series = fitted_series()
    spectrum = retardation_spectrum(series)
    start = 1e-6 * min(series.tau.min(), spectrum.times.min())
    residual = []
    for time in np.logspace(-16.0, 14.0, 61):
        value = convolution(series, spectrum.compliance, time, start)
        residual.append(value / time - 1.0)
    # exact interconversion and a 12-point Gauss-Legendre rule on 1/8-decade panels
    # leave only rounding (about 1e-15); 1e-10 still fails a 1e-6 error in one strength
    assert np.max(np.abs(residual)) < 1e-10


@pytest.mark.parametrize("equilibrium", [2.0e6, 0.0])
def test_convolution_identity_on_broad_60_term_spectrum(equilibrium):
    # Same identity (Tschoegl 1989) on 60 terms over 24 decades, for a solid and
    # for a fluid (no equilibrium modulus: J grows as t / eta_0 at long times).
    broad = broad_series(60)
    series = PronySeries(tau=broad.tau, weights=broad.weights, equilibrium=equilibrium)
    spectrum = retardation_spectrum(series)
    start = 1e-6 * min(series.tau.min(), spectrum.times.min())
    residual = [
        convolution(series, spectrum.compliance, time, start) / time - 1.0
        for time in np.logspace(-18.0, 16.0, 35)
    ]
    assert np.max(np.abs(residual)) < 1e-10


def test_matches_step_by_step_volterra_solution():
    # int_0^t E(t - s) dJ(s) = 1 solved numerically by product integration on a log grid
    # (Tschoegl 1989; the step scheme is described in volterra_solution). The
    # scheme's error falls about threefold per doubling of the points: 40 points per
    # decade agree to about 5e-4.
    series = fitted_series()
    grid = np.concatenate([[0.0], np.logspace(-17.0, 9.0, 26 * 40 + 1)])
    numeric = volterra_solution(series, grid)
    exact = creep_compliance(series, grid)
    assert np.max(np.abs(numeric / exact - 1.0)) < 1e-3


def test_fitted_compliance_follows_the_true_compliance():
    # The fitted spectrum's J(t) stays close to the J(t) of the series that made the data,
    # inside the time window the data cover (1/omega_max .. 1/omega_min); a 2.5 % scatter
    # and a 30-term grid leave about 1 % (common practice for NNLS spectra).
    known = PronySeries(
        tau=synthetic.TAU, weights=synthetic.WEIGHTS, equilibrium=synthetic.EQUILIBRIUM
    )
    time = np.logspace(-12.0, 4.0, 161)
    ratio = creep_compliance(fitted_series(), time) / creep_compliance(known, time)
    assert np.max(np.abs(ratio - 1.0)) < 0.02


@settings(max_examples=60, deadline=None)
@given(
    n_terms=st.integers(min_value=1, max_value=60),
    decades=st.floats(min_value=1.0, max_value=30.0),
    log_equilibrium=st.floats(min_value=-6.0, max_value=0.0),
    seed=st.integers(min_value=0, max_value=2**32 - 1),
)
def test_partial_fractions_close_for_random_spectra(n_terms, decades, log_equilibrium, seed):
    # The residues sum to U(0) = 1/E_inf (partial fractions of 1/Q(s); Tschoegl 1989)
    # and the retardation times interlace, for random spectra with weights spread over
    # twelve decades of magnitude.
    rng = np.random.default_rng(seed)
    tau = np.sort(10.0 ** rng.uniform(-15.0, -15.0 + decades, n_terms))
    weights = 10.0 ** rng.uniform(-3.0, 9.0, n_terms)
    glassy = float(weights.sum())
    series = PronySeries(tau=tau, weights=weights, equilibrium=glassy * 10.0**log_equilibrium)
    spectrum = retardation_spectrum(series)
    active = np.unique(tau)
    assert spectrum.times.size == active.size
    assert np.all(spectrum.times > active)
    assert np.all(spectrum.times[:-1] < active[1:])
    assert spectrum.equilibrium_compliance == pytest.approx(1.0 / series.equilibrium, rel=1e-9)
    assert spectrum.glassy_compliance == pytest.approx(1.0 / series.glassy, rel=1e-14)


def test_zero_weights_and_repeated_times_are_handled():
    # A zero-weight term has no pole; two terms at one time act as one (Tschoegl 1989).
    merged = PronySeries(tau=[1e-3, 1.0], weights=[2e8, 5e7], equilibrium=1e6)
    split = PronySeries(tau=[1.0, 1e-3, 1.0, 30.0], weights=[2e7, 2e8, 3e7, 0.0], equilibrium=1e6)
    time = np.logspace(-6.0, 6.0, 49)
    np.testing.assert_allclose(
        creep_compliance(split, time), creep_compliance(merged, time), rtol=1e-13
    )
    assert retardation_spectrum(split).times.size == 2


def test_scalars_and_arrays_broadcast():
    # common practice: the compliance has the shape of its time argument
    series = broad_series(20)
    assert np.ndim(creep_compliance(series, 1.0)) == 0
    grid = np.array([[0.0, 1e-6, 1e-3], [1.0, 1e3, 1e9]])
    values = creep_compliance(series, grid)
    assert values.shape == grid.shape
    np.testing.assert_allclose(
        values, [[float(creep_compliance(series, v)) for v in row] for row in grid], rtol=1e-14
    )
    assert np.isnan(creep_compliance(series, [1.0, np.nan])[1])


# ------------------------------------------------------- static modulus helpers


def test_static_modulus_and_dynamic_to_static_ratio():
    # Definitions: E_static(t) = 1/J(t); ratio = E'(f) / E_static(t) = E'(f) J(t).
    j = np.array([2.0e-7, 5.0e-7])
    np.testing.assert_allclose(static_modulus_from_compliance(j), [5.0e6, 2.0e6], rtol=1e-15)
    np.testing.assert_allclose(dynamic_to_static_ratio(6.0e6, j), [1.2, 3.0], rtol=1e-15)
    assert static_modulus_from_compliance(4.0e-7) == pytest.approx(2.5e6, rel=1e-15)


def test_dynamic_stiffness_exceeds_static_for_a_relaxing_solid():
    # A relaxing solid is stiffer at 1 Hz than after 10 s under load, E'(omega) > 1/J(t)
    # for omega t >> 1 (common practice).
    series = fitted_series()
    storage = series.storage(2.0 * np.pi * 1.0)
    ratio = dynamic_to_static_ratio(storage, creep_compliance(series, 10.0))
    assert ratio > 1.0
    assert ratio == pytest.approx(storage * creep_compliance(series, 10.0), rel=1e-15)


# ------------------------------------------------------------------ errors


def test_errors_name_the_problem():
    series = broad_series(5)
    with pytest.raises(ValueError, match=r"time must be zero or positive \[s\]; got -1"):
        creep_compliance(series, [0.0, -1.0])
    with pytest.raises(ValueError, match=r"time must be a number"):
        creep_compliance(series, "soon")
    with pytest.raises(ValueError, match=r"the Prony series has no stiffness"):
        retardation_spectrum(PronySeries(tau=[1.0], weights=[0.0], equilibrium=0.0))
    with pytest.raises(ValueError, match=r"compliance must be positive \[1/Pa\]; got 0"):
        static_modulus_from_compliance([1e-6, 0.0])
    with pytest.raises(ValueError, match=r"storage_modulus must be positive \[Pa\]; got -2"):
        dynamic_to_static_ratio(-2.0, 1e-6)
    with pytest.raises(ValueError, match=r"compliance must be a number"):
        dynamic_to_static_ratio(1e6, "stiff")


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"times": [1.0, 2.0], "weights": [1e-7]}, "one weight per retardation time"),
        ({"times": [0.0], "weights": [1e-7]}, "retardation times must be finite and positive"),
        ({"times": [1.0], "weights": [-1e-7]}, "weights must be finite and non-negative"),
        ({"glassy_compliance": 0.0}, "glassy compliance 0.0 must be finite and positive"),
        ({"fluidity": -1.0}, "fluidity -1.0 must be finite and non-negative"),
    ],
)
def test_spectrum_rejects_bad_values(kwargs, message):
    values = {"glassy_compliance": 1e-9, "times": [1.0], "weights": [1e-7], "fluidity": 0.0}
    with pytest.raises(ValueError, match=message):
        RetardationSpectrum(**(values | kwargs))


# ------------------------------------------------- many series in one pass


def _stack(series_list):
    """Series of different lengths padded with zero-weight terms into (G, N) arrays."""
    width = max(p.tau.size for p in series_list)
    tau = np.ones((len(series_list), width))
    weights = np.zeros((len(series_list), width))
    for k, p in enumerate(series_list):
        tau[k, : p.tau.size] = p.tau
        weights[k, : p.tau.size] = p.weights
    return tau, weights, np.array([p.equilibrium for p in series_list])


def _mixed_series():
    """Solids, a fluid, a spring, repeated and zero-weight terms, unsorted times."""
    broad = broad_series(60)
    return [
        broad,
        PronySeries(tau=broad.tau, weights=broad.weights, equilibrium=0.0),
        fitted_series(),
        PronySeries(tau=[0.3], weights=[4.0e8], equilibrium=1.5e6),
        PronySeries(tau=[2.0], weights=[3.0e6], equilibrium=0.0),
        PronySeries(tau=[1.0, 10.0], weights=[0.0, 0.0], equilibrium=4.0e6),
        PronySeries(tau=[1.0, 1e-3, 1.0, 30.0], weights=[2e7, 2e8, 3e7, 0.0], equilibrium=1e6),
        PronySeries(tau=[10.0, 1e-3], weights=[3.0e7, 5.0e8], equilibrium=2.0e6),
    ]


def test_stacked_spectra_equal_one_at_a_time():
    # retardation_spectra solves all series together; each row must be the spectrum of
    # retardation_spectrum (the same exact interconversion, Tschoegl 1989) to rounding.
    series = _mixed_series()
    stacked = retardation_spectra(*_stack(series))
    assert len(stacked) == len(series)
    time = np.concatenate([[0.0], np.logspace(-20.0, 20.0, 81)])
    for k, p in enumerate(series):
        one, row = retardation_spectrum(p), stacked.row(k)
        assert row.times.size == one.times.size, k
        np.testing.assert_allclose(row.times, one.times, rtol=1e-12, err_msg=str(k))
        np.testing.assert_allclose(row.weights, one.weights, rtol=1e-10, atol=0, err_msg=str(k))
        assert row.fluidity == pytest.approx(one.fluidity, rel=1e-14)
        np.testing.assert_allclose(row.compliance(time), one.compliance(time), rtol=1e-12)
    rows = np.broadcast_to(time, (len(series), time.size))
    expected = [retardation_spectrum(p).compliance(time) for p in series]
    np.testing.assert_allclose(stacked.compliance(rows), expected, rtol=1e-12)


def test_stacked_standard_linear_solid_against_closed_form():
    # J(t) = 1/E_inf - (1/E_inf - 1/E_0) exp(-t E_inf / (E_0 tau)) (Ferry 1980, ch. 3;
    # Tschoegl 1989) for several solids at once.
    e_inf = np.array([1.5e6, 3.0e5, 8.0e6])
    e_1 = np.array([4.0e8, 2.0e9, 1.0e7])
    tau = np.array([0.3, 1e-5, 40.0])
    e_0 = e_inf + e_1
    stacked = retardation_spectra(tau[:, None], e_1[:, None], e_inf)
    time = np.logspace(-8.0, 6.0, 57)
    closed = 1.0 / e_inf[:, None] - (1.0 / e_inf - 1.0 / e_0)[:, None] * np.exp(
        -time * (e_inf / (e_0 * tau))[:, None]
    )
    np.testing.assert_allclose(
        stacked.compliance(np.broadcast_to(time, closed.shape)), closed, rtol=1e-12
    )
    np.testing.assert_allclose(stacked.times[:, 0], tau * e_0 / e_inf, rtol=1e-12)


@pytest.mark.parametrize("make", [broad_series, fitted_series])
def test_tabulated_compliance_follows_the_series(make):
    # The table holds exact node values and slopes (Tschoegl 1989 series) and interpolates
    # log J by cubic Hermite between nodes 0.2 decade apart: within 2e-4 of the series
    # (the interpolation error of that grid, common practice), and exact or within 5e-4 of
    # the creep beyond the tabulated span (J_g + t J'(0) before, J_e + t/eta_0 after).
    series = make()
    table = tabulate_compliance(retardation_spectra(*_stack([series])))
    assert table.step == COMPLIANCE_STEP == 0.2
    log_time = np.linspace(-40.0, 40.0, 8001)
    tabulated = 10.0 ** table.log_compliance_at(0, log_time)
    exact = creep_compliance(series, 10.0**log_time)
    assert np.max(np.abs(tabulated / exact - 1.0)) < 2e-4


def test_tabulated_compliance_of_a_fluid_keeps_flowing():
    # Maxwell fluid: J(t) = 1/E_1 + t/(E_1 tau) at every time (Ferry 1980, ch. 3), also
    # far beyond the table; and a broad fluid beyond its longest retardation time. Within
    # the 2e-4 of the table's interpolation (common practice, as above).
    broad = broad_series(40)
    fluid = PronySeries(tau=broad.tau, weights=broad.weights, equilibrium=0.0)
    maxwell = PronySeries(tau=[2.0], weights=[3.0e6], equilibrium=0.0)
    table = tabulate_compliance(retardation_spectra(*_stack([maxwell, fluid])))
    log_time = np.linspace(-20.0, 30.0, 501)
    time = 10.0**log_time
    np.testing.assert_allclose(
        10.0 ** table.log_compliance_at(0, log_time), 1.0 / 3.0e6 + time / 6.0e6, rtol=2e-4
    )
    far = np.array([-20.0, 25.0])  # outside the table: the closed forms, exact
    np.testing.assert_allclose(
        10.0 ** table.log_compliance_at(0, far), 1.0 / 3.0e6 + 10.0**far / 6.0e6, rtol=1e-12
    )
    np.testing.assert_allclose(
        10.0 ** table.log_compliance_at(1, log_time), creep_compliance(fluid, time), rtol=2e-4
    )


def test_compliance_table_rows_round_trip():
    # Rows taken out (for a cache) and stacked again give the same table values.
    series = _mixed_series()
    table = tabulate_compliance(retardation_spectra(*_stack(series)))
    again = ComplianceTable.from_rows([table.row(k) for k in range(len(table))])
    rows = np.arange(len(series))[:, None]
    log_time = np.linspace(-25.0, 25.0, 101)[None, :]
    np.testing.assert_array_equal(
        again.log_compliance_at(rows, log_time), table.log_compliance_at(rows, log_time)
    )
    reversed_rows = ComplianceTable.from_rows([table.row(k) for k in reversed(range(len(table)))])
    np.testing.assert_array_equal(
        reversed_rows.log_compliance_at(rows[::-1], log_time),
        table.log_compliance_at(rows, log_time),
    )


def test_stacked_errors_name_the_problem():
    tau, weights, equilibrium = _stack([broad_series(5), broad_series(5)])
    with pytest.raises(ValueError, match=r"must hold one row \(and one equilibrium modulus\)"):
        retardation_spectra(tau, weights[:, :3], equilibrium)
    with pytest.raises(ValueError, match=r"relaxation times tau must be finite and positive"):
        retardation_spectra(-tau, weights, equilibrium)
    with pytest.raises(ValueError, match=r"weights must be finite and non-negative"):
        retardation_spectra(tau, -weights, equilibrium)
    with pytest.raises(ValueError, match=r"equilibrium moduli must be finite and non-negative"):
        retardation_spectra(tau, weights, -equilibrium)
    with pytest.raises(ValueError, match=r"series 1 has no stiffness"):
        retardation_spectra(tau, weights * [[1.0], [0.0]], equilibrium * [1.0, 0.0])
    stacked = retardation_spectra(tau, weights, equilibrium)
    with pytest.raises(ValueError, match=r"time must have one row per series \(2\)"):
        stacked.compliance(np.ones((3, 4)))
    with pytest.raises(ValueError, match=r"time must be zero or positive"):
        stacked.compliance(-np.ones((2, 1)))
    with pytest.raises(ValueError, match=r"step and margin must be positive"):
        tabulate_compliance(stacked, step=0.0)


def test_tabulated_compliance_takes_scalars():
    # common practice: a scalar time gives a scalar, on the table and beyond both ends
    series = PronySeries(tau=[0.3], weights=[4.0e8], equilibrium=1.5e6)
    table = tabulate_compliance(retardation_spectra(*_stack([series])))
    for log_time in (-40.0, 0.0, 40.0):
        value = table.log_compliance_at(0, log_time)
        assert np.ndim(value) == 0
        assert 10.0**value == pytest.approx(creep_compliance(series, 10.0**log_time), rel=2e-4)
