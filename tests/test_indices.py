"""Tests of engine.physics.indices: built-in merit indices, custom formulas and aggregation.

Expected values are computed with numpy from the formulas as derived in the index
docstrings: the damping indices follow the scaling of Ashby's stiffness indices (Ashby,
M. F. (2005). Materials Selection in Mechanical Design, 3rd ed., light stiff beam
E^(1/2)/rho and plate E^(1/3)/rho) with E replaced by eta E; the loss factor and loss
modulus are the definitions tan delta = E''/E' (ISO 6721-1) and E'' = eta E'.
"""

from __future__ import annotations

import numpy as np
import pytest

from engine.base.errors import CriteriaError
from engine.physics.indices import (
    AGGREGATES,
    BUILT_IN,
    QUANTITIES,
    aggregate,
    custom_index,
    damping_span,
    resolve,
)


@pytest.fixture
def quantities():
    """Two grades x three points; catalog fields as columns (grades, 1)."""
    eta = np.array([[0.10, 0.25, 0.40], [0.05, 0.08, 0.02]])
    storage = np.array([[4.0, 2.5, 1.2], [12.0, 10.0, 9.0]])  # [MPa]
    return {
        "loss_factor": eta,
        "storage_modulus": storage,
        "loss_modulus": eta * storage,
        "shear_modulus": storage / 3.0,
        "density": np.array([[1100.0], [1250.0]]),
        "price": np.array([[5.0], [8.0]]),
        "hardness": np.array([[50.0], [65.0]]),
        "temperature": np.broadcast_to([-20.0, 20.0, 60.0], eta.shape),
        "frequency": np.broadcast_to([10.0, 10.0, 10.0], eta.shape),
    }


# ------------------------------------------------------------------ built-in indices


def test_loss_factor_and_loss_modulus_are_the_definitions(quantities):
    # ISO 6721-1: tan delta = E''/E'; E'' = eta E'.
    q = quantities
    np.testing.assert_allclose(BUILT_IN["loss_factor"].point(q), q["loss_factor"], rtol=1e-15)
    np.testing.assert_allclose(
        BUILT_IN["loss_modulus"].point(q), q["loss_factor"] * q["storage_modulus"], rtol=1e-15
    )


def test_beam_damping_index(quantities):
    # Ashby 2005 beam scaling with E -> eta E: (eta E)^(1/2) / rho.
    q = quantities
    expected = (q["loss_factor"] * q["storage_modulus"]) ** 0.5 / q["density"]
    np.testing.assert_allclose(BUILT_IN["beam_damping"].point(q), expected, rtol=1e-14)


def test_plate_damping_index(quantities):
    # Ashby 2005 plate scaling with E -> eta E: (eta E)^(1/3) / rho.
    q = quantities
    expected = (q["loss_factor"] * q["storage_modulus"]) ** (1.0 / 3.0) / q["density"]
    np.testing.assert_allclose(BUILT_IN["plate_damping"].point(q), expected, rtol=1e-14)


def test_per_cost_indices_divide_by_price(quantities):
    # Cost of the part = mass x price per kg (Ashby 2005): the index per unit cost.
    q = quantities
    beam = (q["loss_factor"] * q["storage_modulus"]) ** 0.5 / q["density"] / q["price"]
    plate = (q["loss_factor"] * q["storage_modulus"]) ** (1.0 / 3.0) / q["density"] / q["price"]
    np.testing.assert_allclose(BUILT_IN["beam_damping_per_cost"].point(q), beam, rtol=1e-14)
    np.testing.assert_allclose(BUILT_IN["plate_damping_per_cost"].point(q), plate, rtol=1e-14)


def test_beam_index_scales_with_the_square_root_of_the_modulus(quantities):
    # Ashby 2005: a fourfold modulus doubles a square-root index, a threefold density
    # divides it by three.
    q = dict(quantities)
    base = BUILT_IN["beam_damping"].point(q)
    q["storage_modulus"] = 4.0 * q["storage_modulus"]
    q["density"] = 3.0 * q["density"]
    np.testing.assert_allclose(BUILT_IN["beam_damping"].point(q), base * 2.0 / 3.0, rtol=1e-14)


def test_built_in_directions_kinds_and_needs():
    expected = {
        "loss_factor": (True, "point", ()),
        "loss_modulus": (True, "point", ()),
        "stiffness_drift": (False, "window", ()),
        "frequency_drift": (False, "window", ()),
        "worst_transmissibility": (False, "window", ()),
        "isolation_efficiency": (True, "window", ()),
        "damping_span": (True, "window", ()),
        "beam_damping": (True, "point", ("density",)),
        "plate_damping": (True, "point", ("density",)),
        "beam_damping_per_cost": (True, "point", ("density", "price")),
        "plate_damping_per_cost": (True, "point", ("density", "price")),
        "system_highest_mode": (False, "window", ()),
        "system_worst_transmissibility": (False, "window", ()),
        "system_mode_drift": (False, "window", ()),
    }
    assert set(BUILT_IN) == set(expected)
    for name, (higher, kind, needs) in expected.items():
        spec = resolve(name)
        assert (spec.higher_is_better, spec.kind, spec.needs) == (higher, kind, needs), name
        assert spec.needs_mount == (
            name in ("frequency_drift", "worst_transmissibility", "isolation_efficiency")
        )
        assert spec.needs_system == name.startswith("system_")
        assert spec.doc and spec.label
        assert (spec.point is None) == (kind == "window"), name


def test_unknown_index_lists_the_built_in_ones():
    with pytest.raises(CriteriaError, match=r"unknown merit index 'tan_delta'; built-in indices: "):
        resolve("tan_delta")


# ------------------------------------------------------------------ aggregation


@pytest.fixture
def values():
    return np.array([[1.0, 4.0, 2.0, 3.0], [0.5, 0.5, 8.0, 1.0]])


@pytest.mark.parametrize(
    ("how", "higher", "expected"),
    [
        ("worst", True, [1.0, 0.5]),  # minimum of a higher-is-better index
        ("worst", False, [4.0, 8.0]),  # maximum of a lower-is-better index
        ("best", True, [4.0, 8.0]),
        ("best", False, [1.0, 0.5]),
        ("mean", True, [2.5, 2.5]),
        ("mean", False, [2.5, 2.5]),
    ],
)
def test_aggregate(values, how, higher, expected):
    # Worst case of a higher-is-better index is its minimum over the window, and so on
    # (common practice); expected values by hand from the 2 x 4 table.
    np.testing.assert_allclose(aggregate(values, how, higher), expected, rtol=1e-15)


@pytest.mark.parametrize("higher", [True, False])
def test_weighted_aggregate_is_the_time_weighted_mean(values, higher):
    share = np.array([0.1, 0.2, 0.3, 0.4])
    expected = np.average(values, axis=1, weights=share)  # numpy reference
    np.testing.assert_allclose(aggregate(values, "weighted", higher, share), expected, rtol=1e-14)


def test_weighted_aggregate_needs_shares(values):
    with pytest.raises(CriteriaError, match="'weighted' aggregation needs duty points"):
        aggregate(values, "weighted", True)


def test_unknown_aggregate(values):
    with pytest.raises(CriteriaError, match="unknown aggregation 'median'; use one of worst"):
        aggregate(values, "median", True)
    assert AGGREGATES == ("worst", "mean", "weighted", "best")


# ------------------------------------------------------------------ damping span


def test_damping_span_of_a_gaussian_peak():
    # eta(T) = 0.5 exp(-((T - 20)/10)^2) >= 0.2 where |T - 20| <= 10 sqrt(ln 2.5):
    # a width of 19.14 K. On a grid the span is the point count x step: within one step.
    width = 20.0 * np.sqrt(np.log(2.5))
    for step in (1.0, 0.1):
        t = np.arange(-40.0, 80.0 + step / 2, step)
        eta = 0.5 * np.exp(-(((t - 20.0) / 10.0) ** 2))
        flat = np.full_like(t, 0.1)
        span = damping_span(t, np.vstack([eta, flat]), 0.2)
        assert span[0] == pytest.approx(width, abs=step)
        assert span[1] == 0.0


def test_damping_span_grows_as_the_threshold_falls():
    t = np.arange(-40.0, 81.0, 1.0)
    eta = (0.5 * np.exp(-(((t - 20.0) / 10.0) ** 2)))[None, :]
    spans = [damping_span(t, eta, th)[0] for th in (0.45, 0.3, 0.2, 0.1)]
    assert spans == sorted(spans)
    # 2 * 10 sqrt(ln(0.5/th)) for each threshold, within the 1 K grid.
    for th, span in zip((0.45, 0.3, 0.2, 0.1), spans, strict=True):
        assert span == pytest.approx(20.0 * np.sqrt(np.log(0.5 / th)), abs=1.0)


def test_damping_span_single_temperature_is_zero():
    np.testing.assert_array_equal(damping_span([20.0], np.array([[0.5], [0.1]]), 0.2), [0, 0])


# ------------------------------------------------------------------ custom indices


def test_custom_index_equals_numpy(quantities):
    q = quantities
    spec = custom_index(
        "stiff_damping", "loss_factor * storage_modulus ** 0.5 / density", higher_is_better=True
    )
    expected = q["loss_factor"] * np.sqrt(q["storage_modulus"]) / q["density"]
    np.testing.assert_allclose(spec.point(q), expected, rtol=1e-14)
    assert (spec.kind, spec.needs, spec.higher_is_better) == ("point", ("density",), True)
    assert spec.formula is not None and spec.formula.names == {
        "loss_factor",
        "storage_modulus",
        "density",
    }


def test_custom_index_functions_and_catalog_needs(quantities):
    q = quantities
    spec = custom_index(
        "cheap_soft",
        "log10(loss_modulus) - min(price, hardness / 10) + sqrt(shear_modulus)",
        higher_is_better=False,
        label="cheap and soft",
    )
    expected = (
        np.log10(q["loss_modulus"])
        - np.minimum(q["price"], q["hardness"] / 10.0)
        + np.sqrt(q["shear_modulus"])
    )
    np.testing.assert_allclose(spec.point(q), expected, rtol=1e-14)
    assert spec.needs == ("price", "hardness")
    assert spec.label == "cheap and soft"
    assert spec.higher_is_better is False


def test_custom_index_may_use_every_quantity(quantities):
    text = " + ".join(QUANTITIES)
    spec = custom_index("everything", text)
    expected = sum(np.asarray(quantities[n], dtype=float) for n in QUANTITIES)
    np.testing.assert_allclose(spec.point(quantities), expected, rtol=1e-14)


@pytest.mark.parametrize("name", sorted(BUILT_IN))
def test_custom_name_clashing_with_a_built_in(name):
    with pytest.raises(CriteriaError, match=f"'{name}' is a built-in index"):
        custom_index(name, "loss_factor * 2")


@pytest.mark.parametrize("name", ["", "my index", "eta/E", "a-b"])
def test_custom_name_must_be_letters_digits_underscore(name):
    with pytest.raises(CriteriaError, match="must be letters, digits and '_'"):
        custom_index(name, "loss_factor")


@pytest.mark.parametrize(
    ("formula", "message"),
    [
        ("loss_factor +", "is not valid"),
        ("tan_delta * 2", "unknown quantity 'tan_delta'"),
        ("", "formula is empty"),
        ("__import__('os')", "reserved"),
    ],
)
def test_custom_index_bad_formula(formula, message):
    with pytest.raises(CriteriaError, match=message):
        custom_index("mine", formula)
