"""Tests of engine.physics.mount: shape factor, compression modulus, transmissibility, fn.

Checks are against the single-degree-of-freedom isolator with hysteretic damping
(Snowdon 1968), Gent & Lindley (1959) for bonded blocks, Gent (1958) for hardness and
modulus, closed-form roots, and scipy.optimize.brentq as the reference solver.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy.optimize import brentq

from engine.physics import mount

# ------------------------------------------------------------ hysteretic isolator


@pytest.mark.parametrize(
    ("ratio", "expected", "tolerance"),
    [
        (1.0, 10.05, 0.005),  # sqrt(1.01)/0.1, to the 4 figures quoted
        (np.sqrt(2.0), 1.000, 0.0005),
        (3.0, 0.1256, 0.00005),
    ],
)
def test_hysteretic_transmissibility_eta_0_1(ratio, expected, tolerance):
    # Standard SDOF theory, hysteretic damping (Snowdon 1968): eta = 0.1.
    value = mount.hysteretic_transmissibility(ratio, 0.1)
    assert value == pytest.approx(expected, abs=tolerance)


@given(st.floats(min_value=0.0, max_value=10.0))
def test_unit_transmissibility_at_root_two_for_any_constant_eta(eta):
    # Snowdon 1968: (1 - r^2)^2 = 1 at r = sqrt(2), so T = 1 whatever eta is.
    assert mount.hysteretic_transmissibility(np.sqrt(2.0), eta) == pytest.approx(1.0, rel=1e-12)


def test_transmissibility_constant_stiffness_matches_closed_form():
    # Snowdon 1968: with constant k' and eta, |k*|/|k* - m w^2| reduces to the closed form.
    stiffness, mass = 4.0e5, 25.0
    fn = np.sqrt(stiffness / mass) / (2.0 * np.pi)
    ratio = np.linspace(0.0, 6.0, 61)
    eta = np.array([[0.05], [0.2], [1.0]])  # broadcast: 3 loss factors x 61 ratios
    general = mount.transmissibility(ratio * fn, stiffness, eta, mass)
    closed = mount.hysteretic_transmissibility(ratio, eta)
    assert general.shape == (3, 61)
    np.testing.assert_allclose(general, closed, rtol=1e-12)


def test_transmissibility_with_frequency_dependent_stiffness_at_fn():
    # Snowdon 1968: at fn, k'(fn) = m (2 pi fn)^2 and T = |1 + i eta| / eta
    # = sqrt(1 + eta^2)/eta, the amplification at resonance, whatever k'(f) does elsewhere.
    mass, k0, f0, exponent = 12.0, 3.0e5, 10.0, 0.25

    def stiffness(frequency):
        return k0 * (frequency / f0) ** exponent

    fn = mount.natural_frequency(stiffness, mass).frequency
    eta = np.array([0.1, 0.4, 1.2])
    t_fn = mount.transmissibility(fn, stiffness(fn), eta, mass)
    np.testing.assert_allclose(t_fn, mount.amplification_at_resonance(eta), rtol=1e-9)


def test_transmissibility_undamped_resonance_is_infinite():
    # Snowdon 1968: an undamped isolator has unbounded transmissibility at r = 1.
    assert np.isinf(mount.hysteretic_transmissibility(1.0, 0.0))
    fn = np.sqrt(1e4 / 1.0) / (2.0 * np.pi)
    assert np.isinf(mount.transmissibility(fn, 1e4, 0.0, 1.0))


def test_transmissibility_static_is_one():
    # Snowdon 1968: at f = 0 the mount passes the force unchanged, T = 1.
    assert mount.transmissibility(0.0, 1e5, 0.3, 5.0) == pytest.approx(1.0, rel=1e-15)


def test_amplification_and_isolation_onset():
    # Snowdon 1968: T(r = 1) = sqrt(1 + eta^2)/eta; for eta = 0.1 that is 10.05.
    assert mount.amplification_at_resonance(0.1) == pytest.approx(10.05, abs=0.005)
    eta = np.array([0.05, 0.5, 2.0])
    np.testing.assert_allclose(
        mount.amplification_at_resonance(eta), mount.hysteretic_transmissibility(1.0, eta)
    )
    # Snowdon 1968: isolation (T < 1) begins at r = sqrt(2) for constant eta.
    onset = mount.isolation_onset_frequency(np.array([5.0, 12.0]))
    np.testing.assert_allclose(onset, np.sqrt(2.0) * np.array([5.0, 12.0]))
    assert mount.hysteretic_transmissibility(1.001 * np.sqrt(2.0), 0.3) < 1.0
    assert mount.hysteretic_transmissibility(0.999 * np.sqrt(2.0), 0.3) > 1.0


# ------------------------------------------------------- shape factor and modulus


def test_shape_factor_and_compression_modulus_of_a_disc():
    # Gent & Lindley 1959: S = D/(4h); D = 50 mm, h = 10 mm gives S = 1.25.
    s = mount.shape_factor_disc(0.050, 0.010)
    assert s == pytest.approx(1.25, rel=1e-12)
    # Gent & Lindley 1959: Ec = E (1 + 2 k S^2); with E = 2.2 MPa and k = 0.73 that is
    # 2.2 * (1 + 2 * 0.73 * 1.5625) = 7.21875 MPa.
    ec = mount.compression_modulus(2.2e6, s, 0.73)
    assert ec == pytest.approx(7.21875e6, rel=1e-12)


def test_shape_factor_of_blocks():
    # Gent & Lindley 1959: S = LW / (2h(L + W)); a 40 mm square 10 mm thick has S = 1,
    # equal to L/(4h); a 100 x 50 x 10 mm block has S = 5000/3000 = 5/3.
    s = mount.shape_factor_block(np.array([0.040, 0.100]), np.array([0.040, 0.050]), 0.010)
    np.testing.assert_allclose(s, [1.0, 5.0 / 3.0], rtol=1e-12)


def test_compression_modulus_broadcasts():
    # Gent & Lindley 1959: Ec/E = 1 + 2 k S^2 for every pair (S, k).
    s = np.array([0.5, 1.0, 2.0])[:, None]
    k = np.array([0.52, 0.93])
    ratio = mount.compression_modulus(1.0e6, s, k) / 1.0e6
    np.testing.assert_allclose(ratio, 1.0 + 2.0 * k * s**2, rtol=1e-12)


def test_youngs_modulus_from_hardness_shore_50():
    # Gent 1958: E = 0.0981 (56 + 7.62336 S) / (0.137505 (254 - 2.54 S)) MPa gives
    # 2.46 MPa at Shore A 50 (3 figures).
    assert mount.youngs_modulus_from_hardness(50.0) == pytest.approx(2.46e6, abs=0.005e6)


def test_youngs_modulus_from_hardness_rises_with_hardness():
    # Gent 1958: the relation increases monotonically over its range of use (20 to 90).
    hardness = np.linspace(20.0, 90.0, 71)
    modulus = mount.youngs_modulus_from_hardness(hardness)
    assert modulus.shape == hardness.shape
    assert np.all(np.diff(modulus) > 0)


@pytest.mark.parametrize(
    ("shore_a", "expected"),
    # Gent & Lindley / rubber handbooks, k against hardness (from memory).
    [(30, 0.93), (40, 0.85), (50, 0.73), (60, 0.57), (70, 0.53), (75, 0.52)],
)
def test_k_factor_table(shore_a, expected):
    assert mount.k_factor_from_hardness(shore_a) == pytest.approx(expected, abs=0.005)


def test_k_factor_interpolates_linearly():
    # From memory: 60 -> 0.57 and 70 -> 0.53 bracket 62.5 and 67.5, with 65 -> 0.54 in
    # between; linear interpolation of the table rows (common practice).
    values = mount.k_factor_from_hardness(np.array([62.5, 67.5]))
    np.testing.assert_allclose(values, [0.555, 0.535], atol=0.005)
    assert 0.53 <= float(mount.k_factor_from_hardness(65.0)) <= 0.57


def test_shear_and_youngs_modulus():
    # Isotropic elasticity (Timoshenko & Goodier 1970): G = E / (2(1 + nu)); an
    # incompressible rubber (nu = 0.5) has E = 3 G.
    assert mount.shear_from_youngs(3.0e6) == pytest.approx(1.0e6, rel=1e-12)
    assert mount.shear_from_youngs(2.6e6, 0.3) == pytest.approx(1.0e6, rel=1e-12)
    g = np.array([0.3e6, 1.0e6, 2.2e6])
    np.testing.assert_allclose(mount.youngs_from_shear(g, 0.49), 2.0 * g * 1.49, rtol=1e-12)
    np.testing.assert_allclose(mount.shear_from_youngs(mount.youngs_from_shear(g)), g)


def test_pad_stiffness():
    # Gent & Lindley 1959 (compression) and simple shear: k = M A / h.
    # G = 1 MPa on 100 cm2 and 10 mm gives 1e6 N/m; Ec = 7.2 MPa on the same pad 7.2e6 N/m.
    assert mount.shear_pad_stiffness(1.0e6, 0.01, 0.01) == pytest.approx(1.0e6, rel=1e-12)
    k = mount.compression_pad_stiffness(np.array([7.2e6, 3.6e6]), 0.01, 0.01)
    np.testing.assert_allclose(k, [7.2e6, 3.6e6], rtol=1e-12)


def test_strain_limits_are_the_documented_values():
    # Common practice: long-term static shear strain <= 0.5, static compression <= 0.15.
    assert mount.STATIC_SHEAR_STRAIN_LIMIT == 0.5
    assert mount.STATIC_COMPRESSIVE_STRAIN_LIMIT == 0.15


# ------------------------------------------------ bulk-modulus limit


def test_bulk_limit_against_the_series_spring_formula():
    # Gent & Lindley 1959; Gent, Engineering with Rubber: 1/Ec,eff = 1/Ec + 1/K, by hand:
    # Ec = 400 MPa, K = 2000 MPa -> 1/(1/400 + 1/2000) = 2000 * 400 / 2400 = 333.33 MPa;
    # Ec = K = 2000 MPa -> 1000 MPa.
    assert mount.bulk_limited_compression_modulus(400e6, 2.0e9) == pytest.approx(
        2000e6 * 400e6 / 2400e6, rel=1e-14
    )
    ec = np.array([[2.0e9], [50e6]])
    k = np.array([2.0e9, 1.0e9, np.inf])
    value = mount.bulk_limited_compression_modulus(ec, k)
    assert value.shape == (2, 3)
    # by hand: Ec = 2000 MPa with K = 2000 and 1000 MPa -> 1000 and 666.67 MPa;
    # Ec = 50 MPa with K = 2000 and 1000 MPa -> 48.78 and 47.62 MPa
    expected = [[1.0e9, 2.0e9 / 3.0, 2.0e9], [50e6 / 1.025, 50e6 / 1.05, 50e6]]
    np.testing.assert_allclose(value, expected, rtol=1e-14)
    # K = inf (incompressible) leaves Ec unchanged
    np.testing.assert_array_equal(value[:, 2], ec[:, 0])


def test_bulk_limit_tends_to_k_at_large_shape_factor():
    # Gent & Lindley 1959 series springs: as S -> inf, Ec = E(1 + 2kS^2) -> inf and
    # Ec,eff -> K from below, with 1 - Ec,eff/K = K/(Ec + K).
    e, k_factor, bulk = 3.0e6, 0.57, 2.0e9
    s = np.logspace(0.0, 5.0, 26)
    ec = mount.compression_modulus(e, s, k_factor)
    eff = mount.bulk_limited_compression_modulus(ec, bulk)
    assert np.all(np.diff(eff) > 0.0) and np.all(eff < bulk)
    np.testing.assert_allclose(1.0 - eff / bulk, bulk / (ec + bulk), rtol=1e-8)
    assert eff[-1] == pytest.approx(bulk, rel=1e-5)  # S = 1e5: K/Ec is about 1e-7


def test_bulk_limit_negligible_at_small_shape_factor():
    # Gent & Lindley 1959 series springs: at S = 0.5 a soft rubber has Ec of a few MPa,
    # a thousandth of K, and Ec,eff = Ec / (1 + Ec/K) is Ec to about 0.2 %.
    ec = mount.compression_modulus(3.0e6, 0.5, 0.57)  # 3 * (1 + 2 * 0.57 * 0.25) MPa
    assert ec == pytest.approx(3.855e6, rel=1e-12)
    eff = mount.bulk_limited_compression_modulus(ec, 2.0e9)
    assert eff == pytest.approx(ec, rel=2e-3)
    assert eff / ec == pytest.approx(1.0 / (1.0 + 3.855e6 / 2.0e9), rel=1e-12)


def test_bulk_modulus_from_poisson_ratio_closed_form():
    # Isotropic elasticity (Timoshenko & Goodier 1970): K = E / (3 (1 - 2 nu)).
    # E = 3 MPa: nu = 0.49 -> 3/(3 * 0.02) = 50 MPa; nu = 0.4999 -> 5000 MPa;
    # nu = 0.3 -> 3/(3 * 0.4) = 2.5 MPa.
    nu = np.array([0.49, 0.4999, 0.3])
    result = mount.bulk_modulus_for_grade(np.nan, nu, 3.0e6)
    np.testing.assert_allclose(result.value, [50e6, 5.0e9, 2.5e6], rtol=1e-9)
    assert result.source.tolist() == [mount.BULK_FROM_POISSON] * 3


def test_bulk_modulus_sources_in_order_of_preference():
    # Catalog K first, then K from nu < 0.5 and E, else the stated default (common
    # practice: about 2 GPa for rubbers).
    result = mount.bulk_modulus_for_grade(
        [1500.0, np.nan, np.nan, np.nan, None, np.nan],
        [0.45, 0.45, 0.5, np.nan, np.nan, 0.45],
        [3.0e6, 3.0e6, 3.0e6, 3.0e6, 3.0e6, np.nan],
    )
    np.testing.assert_allclose(
        result.value, [1.5e9, 3.0e6 / (3.0 * 0.1), 2.0e9, 2.0e9, 2.0e9, 2.0e9], rtol=1e-12
    )
    assert result.source.tolist() == [
        mount.BULK_FROM_CATALOG,
        mount.BULK_FROM_POISSON,
        mount.BULK_DEFAULT,  # nu = 0.5 gives no finite K
        mount.BULK_DEFAULT,
        mount.BULK_DEFAULT,
        mount.BULK_DEFAULT,  # nu without E
    ]
    scalar = mount.bulk_modulus_for_grade(np.nan, np.nan, 3.0e6, default=2.5e9)
    assert float(scalar.value) == 2.5e9 and str(scalar.source) == mount.BULK_DEFAULT


def test_bulk_and_shape_factor_constants():
    # Common practice: K of about 2 GPa for rubbers; a warning above S = 10.
    assert mount.DEFAULT_BULK_MODULUS_PA == 2.0e9
    assert mount.HIGH_SHAPE_FACTOR == 10.0


def test_high_shape_factor_flag():
    # Common practice: flag S > 10; unknown (NaN) is not flagged.
    flags = mount.is_high_shape_factor(np.array([0.5, 10.0, 10.01, 25.0, np.nan]))
    assert flags.tolist() == [False, False, True, True, False]
    assert bool(mount.is_high_shape_factor(6.0, limit=5.0))
    assert not bool(mount.is_high_shape_factor(4.0))


def test_pad_stiffness_with_bulk_modulus():
    # Gent & Lindley 1959: k = Ec,eff A / h; without K the result is unchanged, K = inf
    # gives the incompressible pad.
    ec, area, h = np.array([400e6, 7.2e6]), 0.01, 0.01
    plain = mount.compression_pad_stiffness(ec, area, h)
    np.testing.assert_array_equal(plain, ec * area / h)
    np.testing.assert_array_equal(mount.compression_pad_stiffness(ec, area, h, np.inf), plain)
    limited = mount.compression_pad_stiffness(ec, area, h, bulk_modulus=2.0e9)
    np.testing.assert_allclose(limited, 1.0 / (1.0 / ec + 1.0 / 2.0e9) * area / h, rtol=1e-14)


@pytest.mark.parametrize("shape_factor", [10.0, 15.0, 20.0])
def test_uncorrected_natural_frequency_too_high_at_high_shape_factor(shape_factor):
    # A Shore A 60 disc (E from Gent 1958, k from the Gent & Lindley table, from memory)
    # with K = 2 GPa (common practice). fn grows as sqrt(k), so the incompressible pad
    # overstates fn by sqrt(k_plain / k_eff) = sqrt(1 + Ec/K) (series springs, Gent &
    # Lindley 1959), worked by hand below; it is of the order of 10 % at S = 10 and
    # 30 % at S = 20.
    e = mount.youngs_modulus_from_hardness(60.0)
    k_factor = mount.k_factor_from_hardness(60.0)
    h, mass = 0.005, 250.0
    diameter = 4.0 * shape_factor * h
    s = mount.shape_factor_disc(diameter, h)
    area = np.pi * diameter**2 / 4.0
    ec = mount.compression_modulus(e, s, k_factor)
    fn_plain = np.sqrt(mount.compression_pad_stiffness(ec, area, h) / mass) / (2.0 * np.pi)
    fn_eff = np.sqrt(mount.compression_pad_stiffness(ec, area, h, 2.0e9) / mass) / (2.0 * np.pi)
    by_hand = np.sqrt(1.0 + e * (1.0 + 2.0 * k_factor * shape_factor**2) / 2.0e9)
    assert fn_plain / fn_eff == pytest.approx(by_hand, rel=1e-12)
    excess = fn_plain / fn_eff - 1.0
    if shape_factor == 10.0:
        assert 0.05 < excess < 0.15
    elif shape_factor == 20.0:
        assert 0.25 < excess < 0.45
    assert bool(mount.is_high_shape_factor(s)) == (shape_factor > mount.HIGH_SHAPE_FACTOR)


# ------------------------------------------------ static deflection and fn


def test_static_deflection_and_fn_at_one_millimetre():
    # Harris' Shock and Vibration Handbook: fn = (1/2 pi) sqrt(g/delta) = 15.76 Hz at 1 mm.
    stiffness = 10.0 * 9.80665 / 1e-3  # 10 kg sagging exactly 1 mm under standard gravity
    deflection = mount.static_deflection(10.0, stiffness)
    assert deflection == pytest.approx(1e-3, rel=1e-12)
    assert mount.natural_frequency_from_deflection(deflection) == pytest.approx(15.76, abs=0.005)


def test_fn_from_deflection_agrees_with_sqrt_k_over_m():
    # Linear spring-mass: g/delta = k/m, so both routes give the same fn (Harris, ch. 2).
    mass = np.array([2.0, 20.0, 200.0])
    stiffness = 5.0e5
    fn = mount.natural_frequency_from_deflection(mount.static_deflection(mass, stiffness))
    np.testing.assert_allclose(fn, np.sqrt(stiffness / mass) / (2.0 * np.pi), rtol=1e-12)


# -------------------------------------------------------------- root finder


def test_natural_frequency_constant_stiffness_scalar():
    # Closed form: fn = sqrt(k/m) / (2 pi) for a frequency-independent stiffness.
    result = mount.natural_frequency(lambda f: np.full(np.shape(f), 2.0e5), 8.0)
    expected = np.sqrt(2.0e5 / 8.0) / (2.0 * np.pi)
    assert bool(result.converged)
    assert float(result.frequency) == pytest.approx(expected, rel=1e-9)
    scalar = mount.natural_frequency_scalar(lambda f: 2.0e5, 8.0)
    assert scalar == pytest.approx(expected, rel=1e-9)


def test_natural_frequency_constant_stiffness_array():
    # Closed form: fn = sqrt(k/m) / (2 pi), one root per mass.
    mass = np.array([0.5, 5.0, 50.0, 500.0])
    result = mount.natural_frequency(lambda f: np.full(np.shape(f), 1.0e5), mass)
    assert result.frequency.shape == mass.shape
    assert np.all(result.converged)
    np.testing.assert_allclose(result.frequency, np.sqrt(1.0e5 / mass) / (2.0 * np.pi), rtol=1e-9)


def power_law_fn(k0, f0, exponent, mass):
    """Root of fn = (1/2pi) sqrt(k0 (fn/f0)^a / m).

    Squaring: 4 pi^2 m fn^2 = k0 fn^a f0^-a, so fn^(2 - a) = k0 / (4 pi^2 m f0^a) and
    fn = (k0 / (4 pi^2 m f0^a))^(1/(2 - a)) for a < 2.
    """
    return (k0 / (4.0 * np.pi**2 * mass * f0**exponent)) ** (1.0 / (2.0 - exponent))


def test_natural_frequency_power_law_stiffness():
    # Closed-form root of a power-law stiffness k'(f) = k0 (f/f0)^a (derived above).
    k0 = np.array([1.0e5, 4.0e5])  # one stiffness curve per column
    f0, exponent = 10.0, 0.3
    mass = np.array([[1.0], [10.0], [100.0]])

    def stiffness(frequency):
        return k0 * (frequency / f0) ** exponent

    result = mount.natural_frequency(stiffness, mass)
    assert result.frequency.shape == (3, 2)
    assert np.all(result.converged)
    expected = power_law_fn(k0, f0, exponent, mass)
    np.testing.assert_allclose(result.frequency, expected, rtol=1e-6)


@pytest.mark.parametrize("exponent", [-0.5, 0.0, 0.5, 1.0, 1.5])
def test_natural_frequency_scalar_power_law(exponent):
    # Closed-form root of a power-law stiffness (derived in power_law_fn), solved by brentq.
    k0, f0, mass = 2.0e5, 30.0, 4.0
    fn = mount.natural_frequency_scalar(lambda f: k0 * (f / f0) ** exponent, mass)
    assert fn == pytest.approx(power_law_fn(k0, f0, exponent, mass), rel=1e-6)


def test_natural_frequency_reports_no_root_in_bracket():
    # fn = sqrt(1e5/1)/(2 pi) = 50.3 Hz lies above a 1 Hz bracket top: NaN, not converged.
    masses = np.array([1.0, 1.0e6])  # the heavy mass has fn = 0.05 Hz, inside the bracket
    result = mount.natural_frequency(lambda f: np.full(np.shape(f), 1.0e5), masses, 1e-3, 1.0)
    assert result.converged.tolist() == [False, True]
    assert np.isnan(result.frequency[0])
    assert result.frequency[1] == pytest.approx(np.sqrt(0.1) / (2.0 * np.pi), rel=1e-9)


def test_natural_frequency_non_positive_stiffness_does_not_converge():
    # A negative stiffness has no natural frequency (log of k'/m undefined).
    result = mount.natural_frequency(lambda f: np.full(np.shape(f), -1.0), np.array([1.0, 2.0]))
    assert not np.any(result.converged)
    assert np.all(np.isnan(result.frequency))


# ------------------------------------------------------------------- sizing


def test_size_pad_area_shear_round_trip():
    # From (2 pi fn)^2 = G A / (h m): the sized pad has the target fn.
    target, mass, thickness, g = np.array([8.0, 12.0]), 30.0, 0.015, 0.9e6
    area = mount.size_pad_area(target, mass, thickness, g)
    fn = np.sqrt(mount.shear_pad_stiffness(g, area, thickness) / mass) / (2.0 * np.pi)
    np.testing.assert_allclose(fn, target, rtol=1e-12)


@pytest.mark.parametrize("shape", ["disc", "square"])
def test_size_compression_pad_area_matches_brentq(shape):
    # Gent & Lindley 1959 stiffness Ec(S(A)) A / h = m (2 pi fn)^2, solved for A by
    # scipy.optimize.brentq as the reference.
    target, mass, thickness, e, k = 14.0, 40.0, 0.012, 3.0e6, 0.7

    def pad_stiffness(area):
        if shape == "disc":
            s = mount.shape_factor_disc(np.sqrt(4.0 * area / np.pi), thickness)
        else:
            side = np.sqrt(area)
            s = mount.shape_factor_block(side, side, thickness)
        return mount.compression_pad_stiffness(mount.compression_modulus(e, s, k), area, thickness)

    wanted = mass * (2.0 * np.pi * target) ** 2
    reference = brentq(lambda a: pad_stiffness(a) - wanted, 1e-8, 10.0, xtol=1e-16, rtol=1e-14)
    area = mount.size_compression_pad_area(target, mass, thickness, e, k, shape=shape)
    assert area == pytest.approx(reference, rel=1e-10)


def test_size_compression_pad_area_broadcasts_and_reduces_to_shear_form():
    # With k = 0 the shape factor drops out: A = m (2 pi fn)^2 h / E.
    target = np.array([5.0, 10.0, 20.0])
    area = mount.size_compression_pad_area(target, 10.0, 0.01, 2.0e6, 0.0)
    np.testing.assert_allclose(area, mount.size_pad_area(target, 10.0, 0.01, 2.0e6), rtol=1e-12)


# ------------------------------------------------------------------- errors


@pytest.mark.parametrize(
    ("call", "message"),
    [
        (lambda: mount.shape_factor_disc(0.05, -0.01), r"thickness must be positive \[m\]"),
        (lambda: mount.shape_factor_disc(0.0, 0.01), r"diameter must be positive"),
        (lambda: mount.shape_factor_block(0.0, 0.05, 0.01), r"length must be positive"),
        (lambda: mount.shape_factor_block(0.05, -1.0, 0.01), r"width must be positive"),
        (lambda: mount.compression_modulus(-1.0, 1.0, 0.7), r"youngs_modulus must be positive"),
        (lambda: mount.compression_modulus(1e6, -1.0, 0.7), r"shape_factor must be zero or"),
        (lambda: mount.compression_modulus(1e6, 1.0, -0.1), r"k_factor must be zero or"),
        (lambda: mount.compression_modulus("soft", 1.0, 0.7), r"youngs_modulus must be a number"),
        (lambda: mount.youngs_modulus_from_hardness(-1.0), r"Shore A hardness .* \[0, 100\)"),
        (lambda: mount.youngs_modulus_from_hardness(100.0), r"got 100"),
        (lambda: mount.youngs_modulus_from_hardness([50, 120]), r"got 120"),
        (lambda: mount.k_factor_from_hardness(25.0), r"Shore A 30 to 75 only; got 25"),
        (lambda: mount.k_factor_from_hardness([50, 80]), r"Shore A 30 to 75 only; got 80"),
        (lambda: mount.shear_from_youngs(3e6, 0.6), r"poisson_ratio must lie in \(-1, 0.5\]"),
        (lambda: mount.youngs_from_shear(1e6, -1.0), r"poisson_ratio must lie in"),
        (lambda: mount.youngs_from_shear(0.0), r"shear_modulus must be positive"),
        (lambda: mount.shear_pad_stiffness(1e6, 0.0, 0.01), r"area must be positive \[m2\]"),
        (lambda: mount.compression_pad_stiffness(0.0, 0.01, 0.01), r"compression_modulus"),
        (
            lambda: mount.compression_pad_stiffness(1e6, 0.01, 0.01, -2e9),
            r"bulk_modulus must be positive \[Pa\]; got -2e\+09",
        ),
        (
            lambda: mount.bulk_limited_compression_modulus(0.0, 2e9),
            r"compression_modulus must be positive",
        ),
        (
            lambda: mount.bulk_modulus_for_grade([1500.0, -3.0], 0.49, 3e6),
            r"bulk_modulus must be positive \[MPa\]; got -3",
        ),
        (lambda: mount.bulk_modulus_for_grade(np.nan, 0.6, 3e6), r"poisson_ratio must lie in"),
        (
            lambda: mount.bulk_modulus_for_grade(np.nan, 0.4, 0.0),
            r"youngs_modulus must be positive",
        ),
        (
            lambda: mount.bulk_modulus_for_grade(np.nan, 0.4, 3e6, default=0.0),
            r"default must be positive \[Pa\]",
        ),
        (lambda: mount.is_high_shape_factor(-1.0), r"shape_factor must be zero or positive"),
        (lambda: mount.is_high_shape_factor(12.0, limit=0.0), r"limit must be positive"),
        (lambda: mount.transmissibility(-1.0, 1e5, 0.1, 1.0), r"frequency must be zero or"),
        (lambda: mount.transmissibility(1.0, 0.0, 0.1, 1.0), r"storage_stiffness must be"),
        (lambda: mount.transmissibility(1.0, 1e5, -0.1, 1.0), r"loss_factor must be zero or"),
        (lambda: mount.transmissibility(1.0, 1e5, 0.1, 0.0), r"mass must be positive \[kg\]"),
        (lambda: mount.hysteretic_transmissibility(-1.0, 0.1), r"frequency_ratio must be"),
        (lambda: mount.hysteretic_transmissibility(1.0, -0.1), r"loss_factor must be zero"),
        (lambda: mount.amplification_at_resonance(0.0), r"loss_factor must be positive"),
        (lambda: mount.isolation_onset_frequency(-5.0), r"natural_frequency must be positive"),
        (lambda: mount.static_deflection(10.0, 0.0), r"stiffness must be positive \[N/m\]"),
        (lambda: mount.static_deflection(10.0, 1e5, g=-9.8), r"g must be positive"),
        (lambda: mount.natural_frequency_from_deflection(0.0), r"deflection must be positive"),
        (lambda: mount.size_pad_area(0.0, 10.0, 0.01, 1e6), r"target_fn must be positive"),
        (lambda: mount.size_pad_area(10.0, 10.0, 0.01, -1e6), r"modulus_at_target must be"),
        (
            lambda: mount.size_compression_pad_area(10.0, 10.0, 0.01, 1e6, 0.7, shape="ring"),
            r"pad shape must be one of disc, square; got 'ring'",
        ),
        (
            lambda: mount.size_compression_pad_area(10.0, 10.0, 0.01, 1e6, -0.7),
            r"k_factor must be zero or positive",
        ),
    ],
)
def test_bad_arguments_raise(call, message):
    with pytest.raises(ValueError, match=message):
        call()


def constant(frequency):
    return np.full(np.shape(frequency), 1.0e5)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"mass": 0.0}, r"mass must be positive \[kg\]"),
        ({"mass": 1.0, "f_low": 10.0, "f_high": 1.0}, r"0 < f_low < f_high \[Hz\]; got 10, 1"),
        ({"mass": 1.0, "f_low": 0.0}, r"0 < f_low < f_high"),
        ({"mass": 1.0, "f_high": np.inf}, r"0 < f_low < f_high"),
    ],
)
@pytest.mark.parametrize("solver", [mount.natural_frequency, mount.natural_frequency_scalar])
def test_natural_frequency_bad_arguments(solver, kwargs, message):
    with pytest.raises(ValueError, match=message):
        solver(constant, **kwargs)


def test_natural_frequency_array_with_a_bad_mass_raises():
    with pytest.raises(ValueError, match=r"mass must be positive \[kg\]; got -2"):
        mount.natural_frequency(constant, [1.0, -2.0])


def test_natural_frequency_scalar_no_root_raises():
    # fn = 50.3 Hz lies outside a 1e-3 .. 1 Hz bracket.
    with pytest.raises(ValueError, match=r"no natural frequency between 0.001 Hz and 1 Hz"):
        mount.natural_frequency_scalar(lambda f: 1.0e5, 1.0, 1e-3, 1.0)


def test_natural_frequency_scalar_bad_stiffness_raises():
    with pytest.raises(ValueError, match=r"storage stiffness must be positive and finite"):
        mount.natural_frequency_scalar(lambda f: -1.0, 1.0)


# ------------------------------------------------- root in reduced frequency


def power_law_master(k0, f0, exponent):
    """log10 E'(x) of a power-law master curve E' = k0 (fR/f0)^a, x = log10 fR."""

    def log_storage(x, index):
        return np.log10(k0) + exponent * (x - np.log10(f0))

    return log_storage


@pytest.mark.parametrize("exponent", [-0.5, 0.0, 0.3, 1.0, 1.5])
def test_reduced_root_power_law_closed_form(exponent):
    # k'(f) = K E'(f aT) with E' = e0 (fR/f0)^a is the power law k0' (f/f0)^a with
    # k0' = K e0 aT^a: closed-form root from power_law_fn (derived above).
    e0, f0, mass = 2.0e6, 30.0, np.array([[0.5], [4.0], [60.0]])
    log_at = np.array([-3.0, 0.0, 2.5])  # three temperatures
    log_k = np.log10(0.02)  # K = A / h [m]
    result = mount.natural_frequency_reduced(
        power_law_master(e0, f0, exponent), log_at, log_k, mass
    )
    k0 = 0.02 * e0 * (10.0**log_at) ** exponent
    expected = power_law_fn(k0, f0, exponent, mass)
    inside = (expected > 1e-3) & (expected < 1e5)  # the default bracket
    assert result.frequency.shape == (3, 3) and inside.sum() >= 3
    assert np.array_equal(result.converged, inside)
    np.testing.assert_allclose(result.frequency[inside], expected[inside], rtol=1e-9)
    assert np.isnan(result.frequency[~inside]).all()


def test_reduced_root_agrees_with_the_real_frequency_root():
    # The same equation solved in real frequency by natural_frequency: a master curve
    # with a transition, E'(fR) = 1e6 + 1e8 (fR/1e3)^0.6 / (1 + (fR/1e3)^0.6).
    def master(x):
        r = (10.0**x / 1e3) ** 0.6
        return 1e6 + 1e8 * r / (1.0 + r)

    log_at = np.linspace(-6.0, 4.0, 11)
    mass = 25.0
    k = 10.0**-1.5
    reduced = mount.natural_frequency_reduced(
        lambda x, index: np.log10(master(x)), log_at, np.log10(k), mass
    )
    real = mount.natural_frequency(lambda f: k * master(np.log10(f) + log_at), np.full(11, mass))
    assert np.all(reduced.converged) and np.all(real.converged)
    np.testing.assert_allclose(reduced.frequency, real.frequency, rtol=1e-8)


def test_reduced_root_passes_each_entry_its_own_index():
    # Entries solve against their own curves: E' = 10^(6 + index) Pa, constant in fR.
    mass, log_k = 1.0, np.zeros(4)
    result = mount.natural_frequency_reduced(
        lambda x, index: 6.0 + index.astype(float), 0.0, log_k, mass
    )
    expected = np.sqrt(10.0 ** (6.0 + np.arange(4))) / (2.0 * np.pi)  # fn = sqrt(k/m)/2pi
    np.testing.assert_allclose(result.frequency, expected, rtol=1e-9)


def test_reduced_root_without_finite_stiffness_is_not_converged():
    result = mount.natural_frequency_reduced(
        power_law_master(1e6, 1.0, 0.0), np.array([0.0, np.nan, 0.0]), [0.0, 0.0, -np.inf], 1.0
    )
    assert result.converged.tolist() == [True, False, False]
    assert np.isnan(result.frequency[1:]).all()


def test_reduced_root_outside_the_bracket_is_not_converged():
    # fn = sqrt(1e6)/(2 pi) = 159 Hz lies above a 1 Hz bracket top.
    result = mount.natural_frequency_reduced(
        power_law_master(1e6, 1.0, 0.0), 0.0, 0.0, 1.0, 1e-3, 1.0
    )
    assert not bool(result.converged) and np.isnan(result.frequency)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"mass": -1.0}, r"mass must be positive \[kg\]"),
        ({"mass": 1.0, "f_low": 10.0, "f_high": 1.0}, r"0 < f_low < f_high \[Hz\]; got 10, 1"),
    ],
)
def test_reduced_root_bad_arguments(kwargs, message):
    with pytest.raises(ValueError, match=message):
        mount.natural_frequency_reduced(power_law_master(1e6, 1.0, 0.0), 0.0, 0.0, **kwargs)


# ------------------------------------------------- bulk-limited pads in the solvers


def test_reduced_root_with_bulk_softening_constant_modulus_closed_form():
    # Constant E': k' = K E / (1 + s E), the series spring of Gent & Lindley (1959), so
    # fn = (1/2 pi) sqrt(k'/m) in closed form (Snowdon 1968).
    e, k_geo, mass = 4.0e6, 0.05, 20.0
    softening = np.array([0.0, 1e-9, 2.5e-7, 1e-6])  # s = c / K_bulk [1/Pa]
    result = mount.natural_frequency_reduced(
        power_law_master(e, 1.0, 0.0), 0.0, np.log10(k_geo), mass, bulk_softening=softening
    )
    expected = np.sqrt(k_geo * e / (1.0 + softening * e) / mass) / (2.0 * np.pi)
    assert result.converged.all()
    np.testing.assert_allclose(result.frequency, expected, rtol=1e-10)


def test_reduced_root_with_bulk_softening_agrees_with_the_real_frequency_root():
    # A master curve with a transition: the bulk-softened stiffness solved in reduced
    # frequency equals the root of natural_frequency on k'(f) = K E'/(1 + s E') directly.
    def master(x):
        r = (10.0**x / 1e3) ** 0.6
        return 1e6 + 1e8 * r / (1.0 + r)

    log_at = np.linspace(-6.0, 4.0, 11)
    mass, k_geo, soft = 25.0, 10.0**-1.5, 2.0e-8

    def stiffness(f):
        e = master(np.log10(f) + log_at)
        return k_geo * e / (1.0 + soft * e)

    reduced = mount.natural_frequency_reduced(
        lambda x, index: np.log10(master(x)), log_at, np.log10(k_geo), mass, bulk_softening=soft
    )
    real = mount.natural_frequency(stiffness, np.full(11, mass))
    assert reduced.converged.all() and real.converged.all()
    np.testing.assert_allclose(reduced.frequency, real.frequency, rtol=1e-8)


def test_reduced_root_rejects_negative_softening():
    with pytest.raises(ValueError, match=r"bulk_softening must be zero or positive \[1/Pa\]"):
        mount.natural_frequency_reduced(
            power_law_master(1e6, 1.0, 0.0), 0.0, 0.0, 1.0, bulk_softening=-1e-9
        )


@pytest.mark.parametrize("shape", ["disc", "square"])
@pytest.mark.parametrize("bulk", [2.0e9, 5.0e7, 1.0e6])
def test_size_compression_pad_area_with_bulk_modulus_matches_brentq(shape, bulk):
    # Gent & Lindley 1959: k = (A/h) Ec,eff, 1/Ec,eff = 1/Ec + 1/K, Ec = E (1 + 2 k S(A)^2),
    # solved for A by scipy.optimize.brentq as the reference. K = 1 MPa (a foam with
    # nu near 0, K = E/3) takes the other branch of the quadratic (q h alpha / K > 2).
    target, mass, thickness, e, k = 14.0, 40.0, 0.012, 3.0e6, 0.7

    def pad_stiffness(area):
        if shape == "disc":
            s = mount.shape_factor_disc(np.sqrt(4.0 * area / np.pi), thickness)
        else:
            side = np.sqrt(area)
            s = mount.shape_factor_block(side, side, thickness)
        ec = mount.compression_modulus(e, s, k)
        return mount.compression_pad_stiffness(ec, area, thickness, bulk_modulus=bulk)

    wanted = mass * (2.0 * np.pi * target) ** 2
    reference = brentq(lambda a: pad_stiffness(a) - wanted, 1e-8, 10.0, xtol=1e-16, rtol=1e-14)
    area = mount.size_compression_pad_area(
        target, mass, thickness, e, k, shape=shape, bulk_modulus=bulk
    )
    assert area == pytest.approx(reference, rel=1e-9)
    incompressible = mount.size_compression_pad_area(target, mass, thickness, e, k, shape=shape)
    assert area > incompressible  # a softer pad needs more area for the same fn


def test_size_compression_pad_area_with_infinite_bulk_modulus_is_incompressible():
    # K = inf is the incompressible block of Gent & Lindley (1959): the same area.
    target = np.array([5.0, 10.0, 20.0])
    with_inf = mount.size_compression_pad_area(target, 10.0, 0.01, 2.0e6, 0.7, bulk_modulus=np.inf)
    plain = mount.size_compression_pad_area(target, 10.0, 0.01, 2.0e6, 0.7)
    np.testing.assert_allclose(with_inf, plain, rtol=1e-12)
    with pytest.raises(ValueError, match=r"bulk_modulus must be positive \[Pa\]"):
        mount.size_compression_pad_area(10.0, 10.0, 0.01, 2.0e6, 0.7, bulk_modulus=0.0)


def test_compressive_stress_limit_is_the_documented_value():
    # Common practice: static compressive stress of a bonded pad <= about 1 MPa.
    assert mount.STATIC_COMPRESSIVE_STRESS_LIMIT == 1.0e6


# --- buckling --------------------------------------------------------------------------


def test_buckling_load_limits_of_the_haringx_formula():
    # P_cr = (P_S / 2)(sqrt(1 + 4 P_E / P_S) - 1) (Haringx 1948; Gent 1964, and Gent,
    # Engineering with Rubber, for short blocks P_cr = sqrt(P_E P_S)): it tends to
    # sqrt(P_S P_E) with P_S = G A when P_E >> P_S (a short pad) and to the Euler load
    # P_E when P_E << P_S (a slender one).
    e, k = 3.0e6, 0.73
    area = np.pi * 0.1**2 / 4.0  # a 100 mm disc
    h, s = 0.002, 0.1 / (4 * 0.002)
    p_e = np.pi**2 * e * (1 + 2 / 3 * k * s**2) * area**2 / (4 * np.pi) / h**2
    p_s = e / 3.0 * area
    stubby = mount.buckling_load(e, area, h, s, k)
    assert float(stubby) == pytest.approx(np.sqrt(p_s * p_e), rel=0.01)
    slender_h, s = 2.0, 0.1 / (4 * 2.0)
    euler = np.pi**2 * e * (1 + 2 / 3 * k * s**2) * area**2 / (4 * np.pi) / slender_h**2
    slender = mount.buckling_load(e, area, slender_h, s, k)
    assert float(slender) == pytest.approx(euler, rel=0.01)
    assert float(slender) < euler  # the shear flexibility only lowers the load


def test_buckling_load_of_a_square_section_uses_its_second_moment():
    # I / A^2 = 1/12 for a square (common practice); larger than a disc's 1 / (4 pi), so a
    # square pad of the same area buckles at a higher load.
    args = (3.0e6, 0.05**2, 0.05, 0.25, 0.73)
    disc = mount.buckling_load(*args)
    square = mount.buckling_load(*args, second_moment_ratio=1.0 / 12.0)
    assert float(square) > float(disc)


def test_buckling_load_refuses_a_nonpositive_thickness():
    with pytest.raises(ValueError, match="thickness"):
        mount.buckling_load(3.0e6, 1e-3, 0.0, 0.5, 0.73)


def test_hardness_from_youngs_modulus_inverts_the_indentation_relation():
    # Gent (1958): E = 2.46 MPa at 50 Shore A; the inverse returns the hardness exactly.
    s = np.linspace(20.0, 90.0, 15)
    back = mount.hardness_from_youngs_modulus(mount.youngs_modulus_from_hardness(s))
    np.testing.assert_allclose(back, s, rtol=1e-12)
    assert float(mount.hardness_from_youngs_modulus(2.46e6)) == pytest.approx(50.0, abs=0.05)
    with pytest.raises(ValueError, match="positive"):
        mount.hardness_from_youngs_modulus(0.0)


# -- natural_frequency_tabulated: the exact root on tables ------------------------------


def _tables(seed: int, grades: int = 6):
    """Tables of log10 E' with transitions of random height, place and slope (each
    segment's log slope below 2, as any passive solid's), of different lengths."""
    rng = np.random.default_rng(seed)
    step = 0.05
    count = rng.integers(40, 400, grades)
    width = int(count.max())
    start = rng.uniform(-12.0, -2.0, grades)
    table = np.empty((grades, width))
    for g in range(grades):
        x = start[g] + step * np.arange(width)
        r = (10.0 ** (x - rng.uniform(-4.0, 6.0))) ** rng.uniform(0.2, 0.9)
        table[g] = np.log10(
            10.0 ** rng.uniform(5.5, 7.0) * (1.0 + 10.0 ** rng.uniform(0.5, 3) * r / (1.0 + r))
        )
        table[g, count[g] :] = table[g, count[g] - 1]
    return start, step, table, count


def _table_reader(start, step, table, count, rows):
    """log10 E' read off the tables as CurveBank.log_storage_at reads them."""
    flat_rows = rows.ravel()

    def read(x, index):
        g = flat_rows[index]
        pos = (x - start[g]) / step
        i0 = np.clip(np.floor(pos), 0, count[g] - 2).astype(int)
        w = pos - i0
        y0, y1 = table[g, i0], table[g, i0 + 1]
        return y0 + w * (y1 - y0)

    return read


@pytest.mark.parametrize("seed", range(4))
@pytest.mark.parametrize("softened", [False, True])
@pytest.mark.parametrize("wide", [False, True])
def test_tabulated_root_equals_the_general_solver_on_the_same_tables(seed, softened, wide):
    # Reference: natural_frequency_reduced (scipy's elementwise.find_root, Chandrupatla)
    # reading the same tables; they must agree to its tolerance, roots missing included.
    # "wide": the tables padded past 140 decades, where the bisection's node test is
    # taken with logarithms instead of products.
    start, step, table, count = _tables(seed)
    if wide:
        table = np.pad(table, ((0, 0), (0, 2900 - table.shape[1])), mode="edge")
    rng = np.random.default_rng(100 + seed)
    rows = np.repeat(np.arange(len(count)), 15).reshape(len(count), 15)
    shift = rng.uniform(-8.0, 6.0, rows.shape)
    log_k = rng.uniform(-3.5, -0.5, rows.shape)
    shift[0, 0] = np.nan  # no finite shift: no root
    soft = rng.uniform(0.0, 5e-9, rows.shape) if softened else None
    if softened:
        soft[1, :3] = 0.0  # stiffness proportional to the modulus on some entries
    general = mount.natural_frequency_reduced(
        _table_reader(start, step, table, count, rows), shift, log_k, 40.0, bulk_softening=soft
    )
    exact = mount.natural_frequency_tabulated(
        start, step, table, count, rows, shift, log_k, 40.0, bulk_softening=soft
    )
    assert np.array_equal(exact.converged, general.converged)
    assert 20 < exact.converged.sum() < exact.converged.size  # roots found and missing
    np.testing.assert_allclose(
        exact.frequency[exact.converged], general.frequency[general.converged], rtol=1e-10
    )
    assert np.isnan(exact.frequency[~exact.converged]).all()


def test_tabulated_root_of_a_flat_table_is_the_closed_form():
    # E' constant: fn = sqrt(K E' / m) / (2 pi) (Snowdon 1968), on the table and beyond
    # its ends.
    table = np.full((1, 10), 6.5)
    rows = np.zeros(5, dtype=int)
    shift = np.array([-30.0, -3.0, 0.0, 4.0, 30.0])  # roots far outside the table too
    got = mount.natural_frequency_tabulated([0.0], 0.05, table, [10], rows, shift, -2.0, 3.0)
    expected = np.sqrt(10.0**-2.0 * 10.0**6.5 / 3.0) / (2.0 * np.pi)
    np.testing.assert_allclose(got.frequency, expected, rtol=1e-13)
