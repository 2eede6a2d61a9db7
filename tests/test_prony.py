"""Tests of engine.physics.prony: the generalized Maxwell (Prony) series and its NNLS fit.

Checks are against closed forms of the Maxwell model (Ferry 1980; Tschoegl 1989), the
Kramers-Kronig relations and the step-response transform integrated numerically with
scipy.integrate.quad, and recovery of a series from the curves it generates.
"""

from __future__ import annotations

import json
import time

import numpy as np
import pytest
from scipy import integrate

from engine.base.errors import FitError
from engine.physics.prony import PronyFitReport, PronySeries, fit_prony, tau_grid
from tests.helpers import kk_storage_minus_equilibrium

OMEGA = np.logspace(-2.0, 6.0, 200)  # [rad/s], eight decades, 25 points per decade


def smooth_spectrum(per_decade: float = 5.0) -> PronySeries:
    """A broad, smooth log-normal spectrum (test input only, not a check value)."""
    tau = tau_grid(OMEGA.min(), OMEGA.max(), per_decade=per_decade)
    weights = 2e8 * np.exp(-0.5 * ((np.log10(tau) + 1.0) / 2.0) ** 2)
    return PronySeries(tau=tau, weights=weights, equilibrium=1e6)


# ---------------------------------------------------------------- the series itself


def test_single_maxwell_closed_forms():
    # Single Maxwell element, E' = E w^2 t^2/(1+w^2 t^2), E'' = E w t/(1+w^2 t^2),
    # E(t) = E exp(-t/tau) (Ferry 1980, Viscoelastic Properties of Polymers).
    e1, tau1 = 3.0e7, 0.02
    series = PronySeries(tau=[tau1], weights=[e1], equilibrium=0.0)
    # at omega tau = 1: E' = E'' = E/2 and tan delta = 1 (Ferry 1980)
    assert series.storage(1.0 / tau1) == pytest.approx(e1 / 2.0, rel=1e-14)
    assert series.loss(1.0 / tau1) == pytest.approx(e1 / 2.0, rel=1e-14)
    assert series.loss_factor(1.0 / tau1) == pytest.approx(1.0, rel=1e-14)
    # tan delta of a single Maxwell element is 1/(omega tau) (Ferry 1980)
    omega = np.array([0.1, 3.0, 250.0, 4.0e4])
    np.testing.assert_allclose(series.loss_factor(omega), 1.0 / (omega * tau1), rtol=1e-13)
    time_s = np.array([0.0, 1e-3, 0.02, 0.1, 1.0])
    np.testing.assert_allclose(series.relaxation(time_s), e1 * np.exp(-time_s / tau1), rtol=1e-14)


def test_standard_linear_solid_relaxation():
    # Standard linear solid: E(t) = E_inf + E1 exp(-t/tau) (Tschoegl 1989)
    series = PronySeries(tau=[5.0], weights=[9e6], equilibrium=1e6)
    time_s = np.linspace(0.0, 50.0, 11)
    np.testing.assert_allclose(
        series.relaxation(time_s), 1e6 + 9e6 * np.exp(-time_s / 5.0), rtol=1e-14
    )


def test_glassy_and_equilibrium_limits():
    # E'(0) = E(inf) = E_inf and E'(inf) = E(0) = E_inf + sum E_i (Tschoegl 1989)
    series = smooth_spectrum()
    glassy = 1e6 + series.weights.sum()
    assert series.glassy == pytest.approx(glassy, rel=1e-14)
    assert series.storage(0.0) == pytest.approx(1e6, rel=1e-14)
    assert series.loss(0.0) == 0.0
    assert series.relaxation(0.0) == pytest.approx(glassy, rel=1e-14)
    assert series.relaxation(1e12) == pytest.approx(1e6, rel=1e-14)
    # far above the fastest term, E' -> glassy like 1 - sum(E_i/(w tau_i)^2)/E_g
    assert series.storage(1e14) == pytest.approx(glassy, rel=1e-6)
    assert series.loss(1e14) == pytest.approx(0.0, abs=1e-6 * glassy)


def test_scalars_and_arrays_broadcast():
    series = smooth_spectrum(per_decade=1.0)
    scalar = series.storage(10.0)
    assert np.ndim(scalar) == 0
    grid = np.array([[1.0, 10.0, 100.0], [1e3, 1e4, 1e5]])
    for method in (series.storage, series.loss, series.loss_factor, series.relaxation):
        values = method(grid)
        assert values.shape == grid.shape
        # each element equals the scalar evaluation (common practice: broadcasting check)
        np.testing.assert_allclose(values, [[method(v) for v in row] for row in grid], rtol=1e-14)


def test_dict_round_trip_is_json_safe():
    series = smooth_spectrum(per_decade=1.0)
    text = json.dumps(series.to_dict())
    again = PronySeries.from_dict(json.loads(text))
    np.testing.assert_array_equal(again.tau, series.tau)
    np.testing.assert_array_equal(again.weights, series.weights)
    assert again.equilibrium == series.equilibrium


def test_series_is_read_only():
    series = smooth_spectrum(per_decade=1.0)
    with pytest.raises(ValueError, match="read-only"):
        series.weights[0] = 1.0


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"tau": [1.0, 2.0], "weights": [1.0], "equilibrium": 0.0}, "one weight per"),
        ({"tau": [0.0], "weights": [1.0], "equilibrium": 0.0}, "finite and positive"),
        ({"tau": [1.0], "weights": [-1.0], "equilibrium": 0.0}, "non-negative"),
        ({"tau": [1.0], "weights": [1.0], "equilibrium": -5.0}, "equilibrium modulus"),
    ],
)
def test_series_rejects_bad_terms(kwargs, message):
    with pytest.raises(ValueError, match=message):
        PronySeries(**kwargs)


def test_from_dict_names_missing_keys():
    with pytest.raises(ValueError, match="lacks weights_Pa"):
        PronySeries.from_dict({"tau_s": [1.0], "equilibrium_Pa": 0.0})


# ---------------------------------------------------------------- the tau grid


def test_tau_grid_spans_range_with_margin():
    tau = tau_grid(1e-2, 1e6, per_decade=1.0, margin_decades=1.0)
    # 1/omega_max / 10 .. 1/omega_min * 10, one point per decade
    np.testing.assert_allclose(tau, np.logspace(-7.0, 3.0, 11), rtol=1e-12)
    dense = tau_grid(1.0, 1e3, per_decade=2.5, margin_decades=0.0)
    assert dense[0] == pytest.approx(1e-3, rel=1e-12)
    assert dense[-1] == pytest.approx(1.0, rel=1e-12)
    assert np.all(np.diff(np.log10(dense)) <= 1.0 / 2.5 + 1e-12)
    assert tau_grid(5.0, 5.0, margin_decades=0.0) == pytest.approx([0.2])


@pytest.mark.parametrize(
    ("args", "message"),
    [
        ((0.0, 10.0), "0 < omega_min <= omega_max"),
        ((10.0, 1.0), "0 < omega_min <= omega_max"),
        ((1.0, np.inf), "finite"),
        ((1.0, 10.0, 0.0), "per_decade must be positive"),
        ((1.0, 10.0, 1.0, -1.0), "margin_decades"),
    ],
)
def test_tau_grid_errors(args, message):
    with pytest.raises(FitError, match=message):
        tau_grid(*args)


# ---------------------------------------------------------------- the fit


def test_fit_recovers_known_series_on_same_grid():
    # common practice: a fit of exact model data on the model's own grid returns the model
    tau = tau_grid(OMEGA.min(), OMEGA.max(), per_decade=1.0)
    weights = np.array([0.0, 4e6, 2e7, 1.2e8, 5e8, 9e8, 6e8, 1e8, 3e7, 0.0, 5e6])
    known = PronySeries(tau=tau, weights=weights, equilibrium=2.5e6)
    series, report = fit_prony(OMEGA, known.storage(OMEGA), known.loss(OMEGA), tau=tau)
    np.testing.assert_allclose(series.weights, weights, rtol=0.0, atol=1e-8 * known.glassy)
    assert series.equilibrium == pytest.approx(2.5e6, rel=1e-6)
    np.testing.assert_allclose(series.storage(OMEGA), known.storage(OMEGA), rtol=1e-6)
    np.testing.assert_allclose(series.loss(OMEGA), known.loss(OMEGA), rtol=1e-6)
    assert isinstance(report, PronyFitReport)
    assert report.n_terms == np.count_nonzero(series.weights)
    assert report.max_abs < 1e-6
    assert report.storage_residual.shape == OMEGA.shape
    assert report.loss_residual.shape == OMEGA.shape


def test_fit_on_other_grid_reproduces_curves():
    # common practice: two terms per decade reproduce a smooth spectrum to about 1 %
    known = smooth_spectrum(per_decade=5.0)
    other_tau = tau_grid(OMEGA.min(), OMEGA.max(), per_decade=2.0) * 10**0.25
    storage, loss = known.storage(OMEGA), known.loss(OMEGA)
    series, report = fit_prony(OMEGA, storage, loss, tau=other_tau)
    assert not np.any(np.isclose(other_tau[:, None], known.tau, rtol=1e-3))
    dense = np.logspace(-2.0, 6.0, 1001)  # between the fitted points too
    np.testing.assert_allclose(series.storage(dense), known.storage(dense), rtol=1e-2)
    np.testing.assert_allclose(series.loss(dense), known.loss(dense), rtol=1e-2)
    assert report.rms_storage < 1e-2 and report.rms_loss < 1e-2
    # the report's residuals are those of the returned series
    np.testing.assert_allclose(report.storage_residual, series.storage(OMEGA) / storage - 1.0)
    np.testing.assert_allclose(report.loss_residual, series.loss(OMEGA) / loss - 1.0)
    assert report.max_abs == pytest.approx(
        max(np.abs(report.storage_residual).max(), np.abs(report.loss_residual).max())
    )


def test_fit_default_grid_and_weights_non_negative():
    known = smooth_spectrum(per_decade=5.0)
    series, report = fit_prony(OMEGA, known.storage(OMEGA), known.loss(OMEGA), per_decade=2.0)
    np.testing.assert_allclose(series.tau, tau_grid(OMEGA.min(), OMEGA.max(), 2.0))
    assert np.all(series.weights >= 0.0) and series.equilibrium >= 0.0
    assert 0 < report.n_terms <= series.tau.size


def test_fitted_curves_are_kramers_kronig_consistent():
    known = smooth_spectrum(per_decade=5.0)
    series, _ = fit_prony(OMEGA, known.storage(OMEGA), known.loss(OMEGA), per_decade=1.5)
    for omega in (0.03, 1.0, 47.0, 2.0e3, 5.0e5):
        from_loss = kk_storage_minus_equilibrium(series.loss, omega, series.tau)
        direct = series.storage(omega) - series.equilibrium
        # Kramers-Kronig (Ferry 1980; Tschoegl 1989); the relation is exact and quad is
        # asked for 1e-9, so 1e-6 leaves room for quadrature error only
        assert from_loss == pytest.approx(direct, rel=1e-6)


def test_relaxation_matches_cosine_transform_of_loss():
    # E(t) = E_inf + (2/pi) int_0^inf (E''(w)/w) cos(w t) dw (Ferry 1980, ch. 3),
    # integrated with quad's cosine weight: QAWO up to 1e3/tau_min, QAWF for the smooth tail
    known = smooth_spectrum(per_decade=2.0)
    split = 1e3 / known.tau.min()
    accuracy = {"epsabs": 1e-9 * known.glassy, "epsrel": 1e-9}

    def loss_over_omega(w):
        return known.loss(w) / w if w > 0.0 else float(known.weights @ known.tau)

    for time_s in (1e-5, 1e-3, 0.1, 10.0):
        points = np.logspace(np.log10(1e-3 / known.tau.max()), np.log10(split), 9)
        body = sum(
            integrate.quad(loss_over_omega, a, b, weight="cos", wvar=time_s, limit=400, **accuracy)[
                0
            ]
            for a, b in zip(np.r_[0.0, points[:-1]], points, strict=True)
        )
        tail, _ = integrate.quad(
            loss_over_omega, split, np.inf, weight="cos", wvar=time_s, epsabs=1e-9 * known.glassy
        )
        value = known.equilibrium + 2.0 / np.pi * (body + tail)
        # exact relation; 1e-6 leaves room for quadrature error only
        assert value == pytest.approx(known.relaxation(time_s), rel=1e-6)


def test_fit_time_for_200_points_and_20_terms():
    # performance target: 200 points, 20 terms, well under 5 ms per fit
    known = smooth_spectrum(per_decade=5.0)
    storage, loss = known.storage(OMEGA), known.loss(OMEGA)
    tau = np.logspace(-7.0, 3.0, 20)
    fit_prony(OMEGA, storage, loss, tau=tau)
    repeats = 50
    start = time.perf_counter()
    for _ in range(repeats):
        fit_prony(OMEGA, storage, loss, tau=tau)
    per_fit = (time.perf_counter() - start) / repeats
    assert per_fit < 5e-3


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (([], [], []), "omega is empty"),
        (([1.0, 2.0], [1e6, 2e6], [1e5]), "same number of points"),
        (([1.0, -2.0], [1e6, 2e6], [1e5, 1e5]), "omega holds -2.0"),
        (([1.0, 2.0], [1e6, 0.0], [1e5, 1e5]), "storage_modulus holds 0.0"),
        (([1.0, 2.0], [1e6, 2e6], [1e5, -3.0]), "loss_modulus holds -3.0"),
        (([1.0, np.nan], [1e6, 2e6], [1e5, 1e5]), "NaN or infinite"),
    ],
)
def test_fit_input_errors(args, message):
    with pytest.raises(FitError, match=message):
        fit_prony(*args)


def test_fit_rejects_bad_tau():
    with pytest.raises(FitError, match="tau must hold"):
        fit_prony([1.0, 2.0], [1e6, 2e6], [1e5, 1e5], tau=[1.0, -1.0])
    with pytest.raises(FitError, match="tau must hold"):
        fit_prony([1.0, 2.0], [1e6, 2e6], [1e5, 1e5], tau=[])
