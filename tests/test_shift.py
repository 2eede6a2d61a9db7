"""Shift laws and automatic shifting, checked against published constants."""

import numpy as np
import pytest
from scipy import constants

from engine.base.errors import FitError
from engine.physics.shift import (
    WLF_UNIVERSAL_C1,
    WLF_UNIVERSAL_C2,
    ShiftLaw,
    arrhenius_log_shift,
    fit_shift_law,
    shift_isotherms,
    split_isotherms,
    wlf_change_reference,
    wlf_log_shift,
)
from tests import synthetic


def test_wlf_universal_constants_at_tg_plus_10():
    # Williams, Landel & Ferry (1955): C1 = 17.44, C2 = 51.6 K with Tg as reference;
    # log aT = -17.44 * 10 / 61.6 = -2.831 at Tg + 10 K.
    assert WLF_UNIVERSAL_C1 == 17.44 and WLF_UNIVERSAL_C2 == 51.6
    assert wlf_log_shift(10.0, 17.44, 51.6, 0.0) == pytest.approx(-2.831, abs=5e-4)
    assert wlf_log_shift(-50.0, 17.44, 51.6, -60.0) == pytest.approx(-2.831, abs=5e-4)


def test_wlf_zero_at_reference_scalar_and_array():
    assert wlf_log_shift(25.0, 8.86, 101.6, 25.0) == 0.0
    out = wlf_log_shift(np.array([[0.0, 10.0], [20.0, 30.0]]), 17.44, 51.6, 0.0)
    assert out.shape == (2, 2) and np.all(np.diff(out.ravel()) < 0)


def test_wlf_change_reference_to_tg_plus_50():
    # WLF 1955 / Ferry 1980 ch. 11: C2' = C2 + 50 = 101.6 K, C1' = C1 C2 / C2' = 8.86.
    c1, c2 = wlf_change_reference(17.44, 51.6, 0.0, 50.0)
    assert c2 == pytest.approx(101.6, abs=1e-9)
    assert c1 == pytest.approx(8.86, abs=5e-3)
    # The curve is the same apart from the zero: differences agree everywhere.
    t = np.linspace(0, 100, 11)
    a = wlf_log_shift(t, 17.44, 51.6, 0.0)
    b = wlf_log_shift(t, c1, c2, 50.0)
    assert np.allclose(a - a[5], b - b[5], atol=1e-12)


def test_wlf_change_reference_below_divergence():
    with pytest.raises(FitError, match="divergence temperature"):
        wlf_change_reference(17.44, 51.6, 0.0, -60.0)


def test_arrhenius_matches_definition_with_scipy_constants():
    # aT = exp(Ea/R (1/T - 1/T0)) (Arrhenius); R from scipy.constants (CODATA).
    ea = 100e3
    t, t0 = -20.0, 0.0
    expected = np.log10(np.exp(ea / constants.R * (1 / (t + 273.15) - 1 / (t0 + 273.15))))
    assert arrhenius_log_shift(t, ea, t0) == pytest.approx(expected, rel=1e-9)
    assert arrhenius_log_shift(np.array([0.0, 20.0]), ea, 0.0)[0] == 0.0


def test_tg_frequency_dependence_from_wlf():
    # With the universal constants a decade of frequency moves the transition by
    # dT where 17.44 dT / (51.6 + dT) = 1, i.e. 51.6 / 16.44 = 3.14 K (WLF 1955;
    # a few K per decade is the common practice rule).
    law = ShiftLaw("WLF", 0.0, 17.44, 51.6, 0.0)
    t = np.linspace(0, 10, 100001)
    dt = t[np.argmin(np.abs(law.log_shift(t) + 1.0))]
    assert dt == pytest.approx(51.6 / 16.44, abs=1e-3)


def test_shift_round_trip_recovers_law_and_factors():
    # Round trip against the known model of tests/synthetic.py: shifts within 0.1 decade.
    pts = synthetic.sweep(noise=0.01)
    isos = split_isotherms(*pts.T)
    res = shift_isotherms(isos, 0.0, synthetic.TG_C)
    truth = synthetic.TRUE_LAW.log_shift(res.temperatures)
    assert np.max(np.abs(res.log_shift - truth)) < 0.1
    law = res.law
    assert law.kind == "WLF+Arrhenius"
    assert law.wlf_c1 == pytest.approx(17.44, rel=0.05)
    assert law.wlf_c2 == pytest.approx(51.6, rel=0.05)
    assert law.activation_J_per_mol == pytest.approx(200e3, rel=0.05)


def test_non_overlapping_pair_is_bridged_and_flagged():
    # A 25 K gap just above Tg moves the isotherm by more than the 3 decades measured.
    temps = np.array([-20.0, -15.0, -10.0, 15.0, 20.0, 25.0, 30.0, 35.0, 40.0, 50.0, 60.0])
    pts = synthetic.sweep(temperatures=temps)
    isos = split_isotherms(*pts.T)
    res = shift_isotherms(isos, 20.0, -20.0)
    gap = [p for p in res.pairs if p.lower == -10.0][0]
    assert gap.status == "no overlap"
    assert res.bridged[list(temps).index(15.0)]
    assert any("-10 and 15 °C: no overlap, bridged" in n for n in res.notes)
    truth = synthetic.TRUE_LAW.log_shift(temps) - synthetic.TRUE_LAW.log_shift(20.0)
    assert np.max(np.abs(res.log_shift - truth)) < 0.1


def test_single_isotherm_has_no_superposition():
    pts = synthetic.sweep(temperatures=np.array([20.0]))
    res = shift_isotherms(split_isotherms(*pts.T), 20.0, None)
    assert res.law.kind == "none"
    assert res.law.log_shift(50.0) == 0.0


def test_too_few_pairs_to_fit():
    with pytest.raises(FitError, match="too few"):
        fit_shift_law([], 0.0, None)


def test_shift_law_round_trips_through_dict():
    law = synthetic.TRUE_LAW
    again = ShiftLaw.from_dict(law.to_dict())
    t = np.linspace(-60, 80, 15)
    assert np.array_equal(law.log_shift(t), again.log_shift(t))
