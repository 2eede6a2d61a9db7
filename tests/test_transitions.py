"""Tests of engine.physics.transitions: Tg methods, secondary transition, regions, energy ratio.

Check values are analytic: peak locations of closed-form curves, the tangent
intersection of ASTM E1640 on a curve built so that it has a closed form, the loss
peaks of the standard linear solid (Zener 1948), and Delta W / U = 2 pi eta against the
hysteresis loop integrated with scipy.integrate.quad.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate

from engine.base.errors import InputError
from engine.physics.transitions import (
    TG_METHODS,
    TgResult,
    applicable_methods,
    energy_ratio,
    glass_transition,
    regions,
    secondary_transition,
    tg_loss_factor_peak,
    tg_loss_modulus_peak,
    tg_storage_onset,
)

GRID_5K = np.arange(-60.0, 121.0, 5.0)  # [degC], a common DMA step


def zener_sweep(temperature, centre_c=22.0, theta_k=6.0, relaxed=2e6, unrelaxed=2e9):
    """Standard linear solid swept in temperature at fixed frequency.

    omega tau = x = exp(-(T - centre)/theta); E' = (E_r + E_u x^2)/(1 + x^2),
    E'' = (E_u - E_r) x/(1 + x^2) (Zener 1948, Elasticity and Anelasticity of Metals).
    E'' peaks at x = 1 (T = centre); tan delta = (E_u - E_r) x/(E_r + E_u x^2) peaks at
    x = sqrt(E_r/E_u), i.e. T = centre + (theta/2) ln(E_u/E_r).
    """
    x = np.exp(-(np.asarray(temperature) - centre_c) / theta_k)
    storage = (relaxed + unrelaxed * x**2) / (1.0 + x**2)
    loss = (unrelaxed - relaxed) * x / (1.0 + x**2)
    return storage, loss / storage


def onset_curve(temperature, t1=10.0, span=40.0, drop=3.0, glassy_slope=-0.004):
    """log10 E' = 9.3 + g u for u = T - t1 <= 0, minus drop (1 - cos(pi u/L))/2 on [0, L].

    Glassy line y = 9.3 + g u; steepest descent at u = L/2 with slope g - drop pi/(2L).
    Their tangents meet at u = L (1/2 - 1/pi) (worked out for this test from the ASTM
    E1640 definition: intersection of the glassy tangent and the inflection tangent).
    """
    u = np.asarray(temperature) - t1
    bump = np.where(u <= 0.0, 0.0, np.where(u >= span, 1.0, (1.0 - np.cos(np.pi * u / span)) / 2))
    return 10.0 ** (9.3 + glassy_slope * u - drop * bump)


# ---------------------------------------------------------------- peak methods


@pytest.mark.parametrize("peak_c", [20.0, 21.3, 22.5, 24.9])
@pytest.mark.parametrize("shape", ["gaussian", "lorentzian"])
def test_loss_factor_peak_of_known_curve(peak_c, shape):
    # ASTM E1640 / ISO 6721-11: Tg at the tan delta peak; the curve's peak is at peak_c
    # by construction, recovered to < 0.5 K on a 5 K grid by the 3-point parabola
    z = (GRID_5K - peak_c) / 12.0
    bell = np.exp(-0.5 * z**2) if shape == "gaussian" else 1.0 / (1.0 + z**2)
    loss_factor = 0.03 + 1.1 * bell
    result = tg_loss_factor_peak(GRID_5K, np.full(GRID_5K.size, 1e8), loss_factor, 10.0)
    assert result == TgResult("loss_factor_peak", 10.0, result.temperature_C, True, "")
    assert result.temperature_C == pytest.approx(peak_c, abs=0.5)


def test_loss_factor_peak_on_sample_is_exact():
    # a parabola sampled at three points is its own fit (common practice)
    temperature = np.array([0.0, 5.0, 10.0, 15.0])
    loss_factor = 1.0 - (temperature - 6.25) ** 2 / 100.0
    result = tg_loss_factor_peak(temperature, np.full(4, 1e8), loss_factor)
    assert result.temperature_C == pytest.approx(6.25, abs=1e-12)


@pytest.mark.parametrize("centre_c", [20.0, 22.0, 23.7])
def test_peaks_of_standard_linear_solid(centre_c):
    storage, loss_factor = zener_sweep(GRID_5K, centre_c=centre_c)
    loss_peak = tg_loss_modulus_peak(GRID_5K, storage, loss_factor, 1.0)
    tan_peak = tg_loss_factor_peak(GRID_5K, storage, loss_factor, 1.0)
    # Zener 1948: E'' peaks at omega tau = 1, tan delta at omega tau = sqrt(E_r/E_u)
    assert loss_peak.reached and loss_peak.method == "loss_modulus_peak"
    assert loss_peak.temperature_C == pytest.approx(centre_c, abs=0.5)
    expected_tan = centre_c + 3.0 * np.log(2e9 / 2e6)
    assert tan_peak.temperature_C == pytest.approx(expected_tan, abs=0.5)
    # usual order (common practice): storage onset < loss-modulus peak < loss-factor peak
    onset = tg_storage_onset(GRID_5K, storage, loss_factor, 1.0)
    assert onset.temperature_C < loss_peak.temperature_C < tan_peak.temperature_C


def test_loss_factor_peak_not_reached_at_warm_end():
    storage, loss_factor = zener_sweep(GRID_5K, centre_c=110.0)
    result = tg_loss_factor_peak(GRID_5K, storage, loss_factor, 1.0)
    assert result == TgResult(
        "loss_factor_peak",
        1.0,
        None,
        False,
        "loss-factor peak not reached: maximum at the warm end of the sweep (120.0 °C)",
    )


def test_loss_modulus_peak_not_reached_at_cold_end():
    storage, loss_factor = zener_sweep(GRID_5K, centre_c=-80.0)
    result = tg_loss_modulus_peak(GRID_5K, storage, loss_factor, 1.0)
    assert not result.reached and result.temperature_C is None
    assert result.note == (
        "loss-modulus peak not reached: maximum at the cold end of the sweep (-60.0 °C)"
    )


# ---------------------------------------------------------------- storage onset


@pytest.mark.parametrize(("step_k", "tolerance_k"), [(1.0, 0.05), (2.0, 0.1), (5.0, 0.5)])
def test_storage_onset_tangent_intersection(step_k, tolerance_k):
    # ASTM E1640 onset: glassy tangent meets the inflection tangent at t1 + L(1/2 - 1/pi)
    temperature = np.arange(-60.0, 121.0, step_k)
    storage = onset_curve(temperature)
    result = tg_storage_onset(temperature, storage, np.full(temperature.size, 0.1), 1.0)
    assert result.reached and result.method == "storage_onset" and result.note == ""
    assert result.temperature_C == pytest.approx(10.0 + 40.0 * (0.5 - 1.0 / np.pi), abs=tolerance_k)


def test_storage_onset_no_drop():
    temperature = np.arange(-60.0, 1.0, 5.0)
    storage = 10.0 ** (9.3 - 0.004 * temperature)
    result = tg_storage_onset(temperature, storage, np.full(temperature.size, 0.02))
    assert not result.reached and result.temperature_C is None
    assert result.note.startswith("storage-modulus onset not reached: no drop in E'")


def test_storage_onset_inflection_beyond_warm_end():
    temperature = np.arange(-60.0, 26.0, 5.0)  # stops before the inflection at 30 degC
    result = tg_storage_onset(temperature, onset_curve(temperature), np.full(temperature.size, 0.1))
    assert not result.reached
    assert "steepest descent at the warm end of the sweep (25.0 °C)" in result.note


def test_storage_onset_without_glassy_region():
    temperature = np.arange(20.0, 121.0, 5.0)  # starts inside the drop
    result = tg_storage_onset(temperature, onset_curve(temperature), np.full(temperature.size, 0.1))
    assert not result.reached
    assert result.note == (
        "storage-modulus onset not reached: no glassy region before the drop "
        "(the sweep starts at 20.0 °C)"
    )


# ---------------------------------------------------------------- dispatcher


def test_dispatcher_matches_each_method():
    storage, loss_factor = zener_sweep(GRID_5K)
    for name, function in TG_METHODS.items():
        assert glass_transition(name, GRID_5K, storage, loss_factor, 3.0) == function(
            GRID_5K, storage, loss_factor, 3.0
        )
    assert set(TG_METHODS) == {"storage_onset", "loss_modulus_peak", "loss_factor_peak"}


def test_dispatcher_unknown_method_lists_valid_names():
    storage, loss_factor = zener_sweep(GRID_5K)
    with pytest.raises(
        ValueError,
        match="unknown Tg method 'midpoint'; valid methods: "
        "storage_onset, loss_modulus_peak, loss_factor_peak",
    ):
        glass_transition("midpoint", GRID_5K, storage, loss_factor, 1.0)


def test_applicable_methods():
    storage, loss_factor = zener_sweep(GRID_5K)
    assert applicable_methods(GRID_5K, storage, loss_factor) == list(TG_METHODS)
    # the tan delta peak (22 + 3 ln 1000 = 42.7 degC) lies beyond a sweep ending at 40 degC
    cut = GRID_5K <= 40.0
    assert applicable_methods(GRID_5K[cut], storage[cut], loss_factor[cut]) == [
        "storage_onset",
        "loss_modulus_peak",
    ]


# ---------------------------------------------------------------- secondary transition


def _alpha_beta(beta_height: float, beta_c: float = -50.0) -> np.ndarray:
    alpha = 1.2 * np.exp(-0.5 * ((GRID_5K - 20.0) / 10.0) ** 2)
    beta = beta_height * np.exp(-0.5 * ((GRID_5K - beta_c) / 12.0) ** 2)
    return 0.02 + alpha + beta


def test_secondary_transition_found():
    # the beta peak of the curve is at -50 degC by construction (common practice: a
    # local loss peak well below Tg)
    beta = secondary_transition(GRID_5K, _alpha_beta(0.05), tg_c=20.0)
    assert beta == pytest.approx(-50.0, abs=0.5)


def test_secondary_transition_absent():
    assert secondary_transition(GRID_5K, _alpha_beta(0.0), tg_c=20.0) is None
    # a bump smaller than the prominence threshold is not a peak
    assert secondary_transition(GRID_5K, _alpha_beta(0.005), tg_c=20.0) is None
    # a peak closer than 15 K to Tg is not a beta transition
    assert secondary_transition(GRID_5K, _alpha_beta(0.05, beta_c=10.0), tg_c=20.0) is None
    assert secondary_transition(GRID_5K, _alpha_beta(0.05), tg_c=None) is None


# ---------------------------------------------------------------- regions


def test_regions_glassy_transition_rubbery():
    temperature = np.arange(-60.0, 121.0, 1.0)
    found = regions(temperature, onset_curve(temperature), np.full(temperature.size, 0.1))
    assert [name for name, _, _ in found] == ["glassy", "transition", "rubbery plateau"]
    # boundaries where -dlog10E'/dT = 0.02 on the constructed curve:
    # 0.004 + (3 pi/80) sin(pi u/40) = 0.02, u = (40/pi) asin(0.016 * 80/(3 pi))
    u = 40.0 / np.pi * np.arcsin(0.016 * 80.0 / (3.0 * np.pi))
    assert found[0][1] == -60.0 and found[-1][2] == 120.0
    assert found[0][2] == pytest.approx(10.0 + u, abs=0.1)
    assert found[1][2] == pytest.approx(50.0 - u, abs=0.1)
    assert found[1][1] == found[0][2] and found[2][1] == found[1][2]


def test_regions_with_beta_drop_and_flow():
    temperature = np.arange(-100.0, 181.0, 1.0)
    log_beta = -0.3 * np.clip((temperature + 70.0) / 10.0, 0.0, 1.0)  # 0.03 decade/K
    log_flow = -1.5 * np.clip((temperature - 140.0) / 30.0, 0.0, 1.0)  # 0.05 decade/K
    storage = onset_curve(temperature) * 10.0 ** (log_beta + log_flow)
    found = regions(temperature, storage, np.full(temperature.size, 0.1))
    names = [name for name, _, _ in found]
    # the small beta drop stays inside the glassy region
    assert names == ["glassy", "transition", "rubbery plateau", "flow"]
    assert found[3][1] == pytest.approx(140.0, abs=1.0)
    assert found[3][2] == 180.0


def test_regions_without_drop_use_modulus_level():
    temperature = np.arange(-60.0, -9.0, 5.0)
    glassy = np.full(temperature.size, 2e9)
    rubbery = np.full(temperature.size, 3e6)
    eta = np.full(temperature.size, 0.05)
    assert regions(temperature, glassy, eta) == [("glassy", -60.0, -10.0)]
    assert regions(temperature, rubbery, eta) == [("rubbery plateau", -60.0, -10.0)]


# ---------------------------------------------------------------- energy ratio


@pytest.mark.parametrize("eta", [0.0, 0.05, 0.3, 1.0, 2.5])
def test_energy_ratio_against_hysteresis_loop(eta):
    # Delta W / U = 2 pi eta (Ferry 1980; common practice): integrate sigma d(eps) over
    # one cycle of eps = eps0 sin(w t), sigma = eps0 (E' sin w t + E'' cos w t)
    storage, eps0, omega = 5e6, 0.01, 2.0 * np.pi * 7.0
    loss = eta * storage

    def power(t):
        stress = eps0 * (storage * np.sin(omega * t) + loss * np.cos(omega * t))
        return stress * eps0 * omega * np.cos(omega * t)  # sigma * d(eps)/dt

    peak_stored = 0.5 * storage * eps0**2
    dissipated, _ = integrate.quad(
        power, 0.0, 2.0 * np.pi / omega, epsabs=1e-13 * peak_stored, epsrel=1e-12
    )
    assert energy_ratio(eta) == pytest.approx(dissipated / peak_stored, rel=1e-9, abs=1e-12)


def test_energy_ratio_arrays():
    eta = np.array([[0.1, 0.2], [0.5, 1.0]])
    np.testing.assert_allclose(energy_ratio(eta), 2.0 * np.pi * eta, rtol=1e-15)
    assert np.ndim(energy_ratio(0.1)) == 0


def test_energy_ratio_rejects_negative():
    with pytest.raises(InputError, match="finite and not negative"):
        energy_ratio([0.1, -0.2])


# ---------------------------------------------------------------- input errors


@pytest.mark.parametrize(
    ("temperature", "storage", "eta", "message"),
    [
        ([0.0, 5.0, 10.0], [1e9, 1e9], [0.1, 0.1, 0.1], "differ in length"),
        ([0.0, 10.0, 5.0], [1e9] * 3, [0.1] * 3, "strictly ascending"),
        ([0.0, 5.0], [1e9] * 2, [0.1] * 2, "at least 3 temperatures"),
        ([0.0, 5.0, 10.0], [1e9, -1.0, 1e9], [0.1] * 3, "storage_modulus holds -1.0"),
        ([0.0, 5.0, 10.0], [1e9] * 3, [0.1, -0.1, 0.1], "loss_factor holds -0.1"),
        ([0.0, np.nan, 10.0], [1e9] * 3, [0.1] * 3, "temperature holds NaN"),
    ],
)
@pytest.mark.parametrize("function", [*TG_METHODS.values(), regions, applicable_methods])
def test_sweep_input_errors(function, temperature, storage, eta, message):
    with pytest.raises(InputError, match=message):
        function(temperature, storage, eta)


def test_secondary_transition_input_error():
    with pytest.raises(InputError, match="strictly ascending"):
        secondary_transition([0.0, 0.0, 5.0], [0.1, 0.2, 0.1], tg_c=60.0)
