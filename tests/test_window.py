"""Tests of engine.curves.window: the operating window and the one-pass window evaluation.

Checks are against numpy as the reference library (inclusive grids, log spacing), the
definition of the geometric mean of a band, and the isotropic-elasticity relation
E = 2 (1 + nu) G (Timoshenko & Goodier 1970) that turns shear data into tensile moduli.
A frequency-independent grade built by hand (:func:`tests.helpers.flat_bank`) makes
every expected modulus known in closed form.
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from engine.base.errors import CriteriaError
from engine.curves.bank import CurveBank
from engine.curves.mastercurve import build_master_curve
from engine.curves.window import (
    DutyPoint,
    OperatingWindow,
    evaluate_window,
    tensile_factor,
)
from tests import synthetic
from tests.helpers import flat_bank

# ------------------------------------------------------------------ grids


def test_temperatures_inclusive_ends_on_the_step():
    # numpy reference: -20, -15, ..., 60 degC, both ends included.
    window = OperatingWindow(temp_range=(-20.0, 60.0), temp_step=5.0)
    np.testing.assert_allclose(window.temperatures, np.arange(-20.0, 60.0 + 2.5, 5.0))
    assert window.temperatures.size == 17


def test_temperatures_end_kept_when_the_step_does_not_divide_the_range():
    # The upper end of the window is part of the service range: it is always evaluated.
    window = OperatingWindow(temp_range=(-20.0, 45.0), temp_step=10.0)
    np.testing.assert_allclose(window.temperatures, [-20, -10, 0, 10, 20, 30, 40, 45])


def test_single_temperature_window():
    window = OperatingWindow(temp_range=(23.0, 23.0))
    np.testing.assert_array_equal(window.temperatures, [23.0])


def test_frequencies_log_spaced_inclusive():
    # numpy reference (np.geomspace): 13 log-spaced points from 10 to 100 Hz.
    window = OperatingWindow(freq_range=(10.0, 100.0), freq_points=13)
    f = window.frequencies
    np.testing.assert_allclose(f, np.geomspace(10.0, 100.0, 13), rtol=1e-12)
    assert f[0] == pytest.approx(10.0, rel=1e-12)
    assert f[-1] == pytest.approx(100.0, rel=1e-12)
    ratios = f[1:] / f[:-1]
    np.testing.assert_allclose(ratios, 10.0 ** (1.0 / 12.0), rtol=1e-12)


@pytest.mark.parametrize(("freq_range", "points"), [((10.0, 1000.0), 1), ((50.0, 50.0), 13)])
def test_single_frequency_is_the_geometric_mean(freq_range, points):
    window = OperatingWindow(freq_range=freq_range, freq_points=points)
    expected = np.sqrt(freq_range[0] * freq_range[1])
    np.testing.assert_allclose(window.frequencies, [expected], rtol=1e-12)


def test_design_frequency_defaults_to_geometric_mean():
    # Geometric mean of the band, the centre of a log-spaced band: sqrt(10 * 1000) = 100.
    assert OperatingWindow(freq_range=(10.0, 1000.0)).design_frequency == pytest.approx(
        100.0, rel=1e-12
    )
    assert OperatingWindow(
        freq_range=(10.0, 1000.0), design_frequency_Hz=30.0
    ).design_frequency == pytest.approx(30.0)


# ------------------------------------------------------------------ validation

NAN = float("nan")


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"temp_range": (NAN, 20.0)}, "window temperatures must be numbers"),
        ({"temp_range": (-20.0, float("inf"))}, "window temperatures must be numbers"),
        ({"temp_range": (45.0, -20.0)}, "temperature range 45 to -20 degC is inverted"),
        ({"temp_range": (-300.0, 20.0)}, "-300 degC is below absolute zero"),
        ({"temp_step": 0.0}, "temperature step must be positive"),
        ({"temp_step": -5.0}, "temperature step must be positive"),
        ({"temp_range": (0.0, 100.0), "temp_step": 0.01}, "more than 2000 temperatures"),
        ({"freq_range": (0.0, 100.0)}, "frequencies must be positive"),
        ({"freq_range": (10.0, -100.0)}, "frequencies must be positive"),
        ({"freq_range": (100.0, 10.0)}, "frequency range 100 to 10 Hz is inverted"),
        ({"freq_points": 0}, "needs at least one point"),
        ({"freq_points": 501}, "more than 500 frequencies"),
        ({"design_frequency_Hz": 0.0}, "design frequency must be positive"),
        ({"duty_points": (DutyPoint(20.0, -1.0, 1.0),)}, "a positive frequency"),
        ({"duty_points": (DutyPoint(-280.0, 10.0, 1.0),)}, "above absolute zero"),
        ({"duty_points": (DutyPoint(20.0, 10.0, -0.5),)}, "non-negative share"),
        (
            {"duty_points": (DutyPoint(20.0, 10.0, 0.0), DutyPoint(40.0, 10.0, 0.0))},
            "duty-point shares add up to zero",
        ),
    ],
)
def test_window_errors(kwargs, message):
    with pytest.raises(CriteriaError, match=re.escape(message)):
        OperatingWindow(**kwargs)


def test_from_dict_unknown_key_lists_the_known_ones():
    with pytest.raises(CriteriaError, match=r"unknown window setting\(s\) temp_rnge; known: "):
        OperatingWindow.from_dict({"temp_rnge": [0, 10]})


@pytest.mark.parametrize(
    ("data", "message"),
    [
        ({"temp_range": [1, 2, 3]}, "bad window setting"),
        ({"temp_range": 5}, "bad window setting"),
        ({"temp_step": "fine"}, "bad window setting"),
        ({"duty_points": [{"freq_Hz": 10.0}]}, "bad window setting"),
        ({"temp_range": [60, -20]}, "is inverted"),
    ],
)
def test_from_dict_bad_values(data, message):
    with pytest.raises(CriteriaError, match=message):
        OperatingWindow.from_dict(data)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"temp_step": NAN}, "temperature step must be positive and finite, not nan"),
        ({"temp_step": float("inf")}, "temperature step must be positive and finite, not inf"),
        ({"freq_range": (NAN, 100.0)}, "frequencies must be finite numbers, not nan to 100 Hz"),
        ({"freq_range": (10.0, float("inf"))}, "frequencies must be finite numbers"),
        ({"design_frequency_Hz": NAN}, "design frequency must be positive and finite"),
        ({"design_frequency_Hz": float("inf")}, "design frequency must be positive and finite"),
        ({"duty_points": (DutyPoint(NAN, 10.0, 1.0),)}, "duty-point temperature, frequency"),
        ({"duty_points": (DutyPoint(20.0, float("inf"), 1.0),)}, "must be finite numbers"),
        ({"duty_points": (DutyPoint(20.0, 10.0, NAN),)}, "not 20 degC, 10 Hz, nan"),
    ],
)
def test_non_finite_window_values_are_rejected(kwargs, message):
    with pytest.raises(CriteriaError, match=re.escape(message)):
        OperatingWindow(**kwargs)


def test_window_from_dict_needs_a_mapping():
    with pytest.raises(CriteriaError, match=re.escape("window must be a mapping of settings")):
        OperatingWindow.from_dict([-20, 45])


@pytest.mark.parametrize(
    "window",
    [
        OperatingWindow(),
        OperatingWindow(
            temp_range=(-40.0, 85.0),
            temp_step=2.5,
            freq_range=(1.0, 2000.0),
            freq_points=21,
            design_frequency_Hz=50.0,
        ),
        OperatingWindow(
            duty_points=(DutyPoint(-10.0, 30.0, 0.25), DutyPoint(40.0, 60.0, 0.75)),
        ),
    ],
)
def test_to_dict_from_dict_round_trip(window):
    assert OperatingWindow.from_dict(window.to_dict()) == window


# ------------------------------------------------------------------ evaluation


def test_tensile_factor_is_two_one_plus_nu():
    # Timoshenko & Goodier 1970: E = 2 (1 + nu) G; nu = 0.5 (rubber) when unknown.
    factor = tensile_factor(
        np.array(["shear", "shear", "tensile"]), np.array([np.nan, 0.4, np.nan])
    )
    np.testing.assert_allclose(factor, [3.0, 2.8, 1.0], rtol=1e-15)


def test_evaluate_window_shapes_and_shear_conversion():
    g_shear, e_tensile = 0.8e6, 5.0e6
    bank = flat_bank([g_shear, e_tensile, g_shear], [0.2, 0.05, 0.2], ["shear", "tensile", "shear"])
    poisson = np.array([np.nan, np.nan, 0.45])
    window = OperatingWindow(temp_range=(-20.0, 45.0), temp_step=5.0, freq_range=(10.0, 100.0))
    props = evaluate_window(bank, window, poisson)
    shape = (3, window.temperatures.size, window.frequencies.size)
    assert shape == (3, 14, 13)
    for name in ("storage", "loss", "shear_storage", "extrapolated", "loss_factor"):
        assert getattr(props, name).shape == shape, name
    assert props.ids == bank.ids
    # Timoshenko & Goodier 1970, E = 2 (1 + nu) G: nu = 0.5 by default -> factor 3.
    np.testing.assert_allclose(props.storage[0], 3.0 * g_shear, rtol=1e-12)
    np.testing.assert_allclose(props.storage[2], 2.0 * 1.45 * g_shear, rtol=1e-12)
    np.testing.assert_allclose(props.storage[1], e_tensile, rtol=1e-12)
    np.testing.assert_allclose(props.shear_storage[0], g_shear, rtol=1e-12)
    np.testing.assert_allclose(props.shear_storage[1], e_tensile / 3.0, rtol=1e-12)
    # The loss factor is a ratio: unchanged by the E <-> G conversion (common practice).
    np.testing.assert_allclose(props.loss_factor[0], 0.2, rtol=1e-12)
    np.testing.assert_allclose(props.loss[0], 0.2 * 3.0 * g_shear, rtol=1e-12)
    assert not props.extrapolated.any()
    assert props.duty_storage is None


def test_evaluate_window_duty_points_and_path():
    bank = flat_bank([1.0e6, 4.0e6], [0.3, 0.1], ["shear", "tensile"])
    duty = (DutyPoint(-10.0, 20.0, 1.0), DutyPoint(20.0, 40.0, 3.0), DutyPoint(40.0, 80.0, 4.0))
    window = OperatingWindow(temp_range=(-10.0, 40.0), freq_range=(20.0, 80.0), duty_points=duty)
    props = evaluate_window(bank, window, np.array([np.nan, np.nan]), path_step=0.5)
    assert props.duty_storage.shape == (2, 3)
    assert props.duty_loss.shape == (2, 3)
    assert props.duty_extrapolated.shape == (2, 3)
    np.testing.assert_allclose(props.duty_share, [0.125, 0.375, 0.5], rtol=1e-15)
    np.testing.assert_allclose(props.duty_storage[0], 3.0e6, rtol=1e-12)  # E = 3 G
    np.testing.assert_array_equal(props.duty_temperatures, [-10.0, 20.0, 40.0])
    np.testing.assert_array_equal(props.duty_frequencies, [20.0, 40.0, 80.0])
    # Path: every 0.5 K from -10 to 40 degC, ends included, at the design frequency.
    np.testing.assert_allclose(props.path_temperatures, np.arange(-10.0, 40.25, 0.5))
    assert props.path_storage.shape == (2, 101)
    np.testing.assert_allclose(props.path_loss[1] / props.path_storage[1], 0.1, rtol=1e-12)


@pytest.fixture(scope="module")
def synthetic_curve():
    return build_master_curve(synthetic.sweep(), "tensile")


def test_evaluate_window_agrees_with_the_master_curve(synthetic_curve):
    # The stacked table is linear interpolation in log-log on a 0.05-decade grid; the
    # Prony series evaluated directly (Ferry 1980, generalized Maxwell model) is the
    # reference. Interpolation error on that grid stays well under 0.5 %.
    bank = CurveBank.from_curves({"SYN": synthetic_curve})
    window = OperatingWindow(temp_range=(-20.0, 60.0), temp_step=10.0, freq_range=(1.0, 100.0))
    props = evaluate_window(bank, window, np.array([np.nan]))
    t, f = window.temperatures[:, None], window.frequencies[None, :]
    direct = synthetic_curve.evaluate(t, f)
    np.testing.assert_allclose(props.storage[0], direct.storage_modulus, rtol=5e-3)
    np.testing.assert_allclose(props.loss_factor[0], direct.loss_factor, rtol=5e-3)
    np.testing.assert_array_equal(props.extrapolated[0], direct.extrapolated)
