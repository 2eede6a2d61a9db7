"""The Kraus model of strain-amplitude dependence (engine/physics/kraus.py) and the
corrections to a working amplitude built on it (engine/curves/amplitude.py).

The equations are those of Kraus, G. (1984), Mechanical losses in carbon-black-filled
rubbers, J. Appl. Polym. Sci.: Appl. Polym. Symp. 39, 75-92:

    E'(g)  = E'inf + (E'0 - E'inf) / (1 + (g/gc)^(2m))
    E''(g) = E''inf + 2 (E''max - E''inf) (g/gc)^m / (1 + (g/gc)^(2m))

The limits and the peak are read from these equations themselves. The fit is checked by
recovering the parameters of sweeps generated from the equations; the parameters are
chosen for the test in the range reported for carbon-black-filled rubbers (m near 0.5 to
0.6, gc of a few per cent; from memory). They are not data of any material.
"""

from __future__ import annotations

import doctest

import numpy as np
import pytest

from engine.curves import amplitude as amplitude_module
from engine.curves.amplitude import AmplitudeCorrection, amplitude_corrections
from engine.physics import kraus as kraus_module
from engine.physics.kraus import (
    REFERENCE_STRAIN,
    KrausFit,
    amplitude_factors,
    fit_kraus,
    kraus_loss,
    kraus_storage,
)

# Parameters of the generated sweeps [Pa, -] (chosen for the test, see the module doc).
TRUE = {
    "e0": 6.0e6,
    "e_inf": 2.0e6,
    "loss_inf": 0.3e6,
    "loss_max": 0.9e6,
    "strain_c": 0.02,
    "m": 0.6,
}
STRAINS = np.logspace(-4.0, np.log10(0.3), 14)  # 14 log-spaced amplitudes, 1e-4 to 0.3
NOISE = 0.02  # 2 % log-normal scatter on E' and on the loss factor


def literal_storage(g, e0, e_inf, strain_c, m):
    """Kraus (1984) E'(g) exactly as printed (no rewriting)."""
    return e_inf + (e0 - e_inf) / (1.0 + (g / strain_c) ** (2.0 * m))


def literal_loss(g, loss_inf, loss_max, strain_c, m):
    """Kraus (1984) E''(g) exactly as printed (no rewriting)."""
    x = (g / strain_c) ** m
    return loss_inf + 2.0 * (loss_max - loss_inf) * x / (1.0 + (g / strain_c) ** (2.0 * m))


def sweep(strain=STRAINS, params=TRUE, noise=0.0, seed=0):
    """(strain, storage [Pa], loss factor) of the model, times log-normal noise."""
    e1 = literal_storage(strain, params["e0"], params["e_inf"], params["strain_c"], params["m"])
    e2 = literal_loss(
        strain, params["loss_inf"], params["loss_max"], params["strain_c"], params["m"]
    )
    eta = e2 / e1
    rng = np.random.default_rng(seed)
    e1 = e1 * np.exp(noise * rng.standard_normal(strain.size))
    eta = eta * np.exp(noise * rng.standard_normal(strain.size))
    return strain, e1, eta


def relative_errors(fit: KrausFit) -> dict[str, float]:
    return {k: abs(getattr(fit, k) / v - 1.0) for k, v in TRUE.items()}


# ---------------------------------------------------------------- the equations


def test_evaluation_matches_the_equations_as_printed():
    # The module writes the equations with tanh and cosh to stay finite at g = 0 and
    # g -> inf; on ordinary strains they must equal the printed form (Kraus 1984).
    g = np.logspace(-6, 1, 200)
    p = TRUE
    np.testing.assert_allclose(
        kraus_storage(g, p["e0"], p["e_inf"], p["strain_c"], p["m"]),
        literal_storage(g, p["e0"], p["e_inf"], p["strain_c"], p["m"]),
        rtol=1e-12,
    )
    np.testing.assert_allclose(
        kraus_loss(g, p["loss_inf"], p["loss_max"], p["strain_c"], p["m"]),
        literal_loss(g, p["loss_inf"], p["loss_max"], p["strain_c"], p["m"]),
        rtol=1e-12,
    )


def test_storage_limits_are_e0_at_small_and_e_inf_at_large_strain():
    # From the equation: (g/gc)^(2m) -> 0 as g -> 0 and -> inf as g -> inf (Kraus 1984).
    args = (6.0e6, 2.0e6, 0.02, 0.6)
    assert kraus_storage(0.0, *args) == 6.0e6
    assert kraus_storage(np.inf, *args) == 2.0e6
    assert kraus_storage(1e-12, *args) == pytest.approx(6.0e6, rel=1e-10)
    assert kraus_storage(1e12, *args) == pytest.approx(2.0e6, rel=1e-10)
    # Half-way at g = gc, where (g/gc)^(2m) = 1.
    assert kraus_storage(0.02, *args) == pytest.approx(4.0e6, rel=1e-14)
    # Monotonic softening between the limits.
    values = kraus_storage(np.logspace(-6, 2, 100), *args)
    assert np.all(np.diff(values) < 0)


def test_loss_peak_is_loss_max_at_strain_c_when_loss_inf_is_zero():
    # From the equation with E''inf = 0: E'' = 2 E''max x / (1 + x^2), x = (g/gc)^m, whose
    # maximum is at x = 1 (g = gc) with the value E''max (Kraus 1984).
    loss_max, strain_c, m = 0.9e6, 0.02, 0.6
    assert kraus_loss(strain_c, 0.0, loss_max, strain_c, m) == pytest.approx(loss_max, rel=1e-14)
    g = np.logspace(-5, 1, 6001)
    values = kraus_loss(g, 0.0, loss_max, strain_c, m)
    peak = int(np.argmax(values))
    assert g[peak] == pytest.approx(strain_c, rel=np.log(10) * 6 / 6000)  # one grid step
    assert values.max() <= loss_max * (1 + 1e-14)
    # Symmetric in log strain about gc: x and 1/x give the same value.
    assert kraus_loss(strain_c * 7, 0.0, loss_max, strain_c, m) == pytest.approx(
        kraus_loss(strain_c / 7, 0.0, loss_max, strain_c, m), rel=1e-13
    )
    # Both limits are E''inf.
    assert kraus_loss(0.0, 0.3e6, loss_max, strain_c, m) == 0.3e6
    assert kraus_loss(np.inf, 0.3e6, loss_max, strain_c, m) == 0.3e6


def test_scalars_give_floats_and_arrays_keep_their_shape():
    assert isinstance(kraus_storage(0.01, 6e6, 2e6, 0.02, 0.6), float)
    assert isinstance(kraus_loss(0.01, 0.3e6, 0.9e6, 0.02, 0.6), float)
    g = np.array([[1e-4, 1e-3], [1e-2, 1e-1]])
    assert np.shape(kraus_storage(g, 6e6, 2e6, 0.02, 0.6)) == (2, 2)
    assert np.shape(kraus_loss(g, 0.3e6, 0.9e6, 0.02, 0.6)) == (2, 2)


@pytest.mark.parametrize(
    ("strain", "strain_c", "m", "message"),
    [
        (-0.01, 0.02, 0.6, "strain amplitudes must be zero or positive"),
        (np.nan, 0.02, 0.6, "strain amplitudes must be zero or positive"),
        (0.01, 0.0, 0.6, "characteristic strain must be positive, not 0.0"),
        (0.01, 0.02, 0.0, "exponent m must be positive, not 0.0"),
    ],
)
def test_model_refuses_bad_arguments(strain, strain_c, m, message):
    with pytest.raises(ValueError, match=message):
        kraus_storage(strain, 6e6, 2e6, strain_c, m)
    with pytest.raises(ValueError, match=message):
        kraus_loss(strain, 0.3e6, 0.9e6, strain_c, m)


# ---------------------------------------------------------------- the fit


def test_fit_recovers_the_parameters_of_an_exact_sweep():
    fit = fit_kraus(*sweep())
    for name, err in relative_errors(fit).items():
        assert err < 1e-6, (name, getattr(fit, name))
    assert fit.rms_log_residual < 1e-8 and fit.points == STRAINS.size


def test_fit_recovers_the_parameters_with_two_percent_noise():
    # 40 sweeps with 2 % scatter on E' and on the loss factor. Tolerances: the spread of
    # the estimates at this noise (medians well inside, every single fit inside the
    # looser bound), so a biased or unstable fit fails.
    errors = {k: [] for k in TRUE}
    rms = []
    for seed in range(40):
        fit = fit_kraus(*sweep(noise=NOISE, seed=seed))
        for k, err in relative_errors(fit).items():
            errors[k].append(err)
        rms.append(fit.rms_log_residual)
    single = {"e0": 0.04, "e_inf": 0.07, "loss_inf": 0.12, "loss_max": 0.06, "strain_c": 0.12}
    single["m"] = 0.15
    median = {"e0": 0.015, "e_inf": 0.025, "loss_inf": 0.045, "loss_max": 0.02, "strain_c": 0.04}
    median["m"] = 0.05
    for k in TRUE:
        assert max(errors[k]) < single[k], (k, max(errors[k]))
        assert np.median(errors[k]) < median[k], (k, np.median(errors[k]))
    # The residual is the noise itself: 2 % on ln E' and sqrt(2) x 2 % on ln E'' = ln(eta
    # E'), so sqrt((0.02^2 + 0.0283^2) / 2) = 0.0245 rms, times sqrt((28 - 6) / 28) for
    # the six fitted parameters: 0.0217.
    assert 0.018 < np.median(rms) < 0.025


def test_fit_takes_points_in_any_order():
    g, e1, eta = sweep(noise=NOISE, seed=3)
    order = np.random.default_rng(1).permutation(g.size)
    a = fit_kraus(g, e1, eta)
    b = fit_kraus(g[order], e1[order], eta[order])
    assert b.e0 == pytest.approx(a.e0, rel=1e-6) and b.m == pytest.approx(a.m, rel=1e-5)


def test_fit_of_a_sweep_that_barely_softens_stays_finite():
    # An unfilled rubber: E' and eta nearly constant. The factors must stay near 1.
    g = np.logspace(-4, -0.5, 12)
    rng = np.random.default_rng(5)
    e1 = 2.0e6 * np.exp(0.01 * rng.standard_normal(g.size))
    eta = 0.05 * np.exp(0.01 * rng.standard_normal(g.size))
    fit = fit_kraus(g, e1, eta)
    storage, loss = amplitude_factors(fit, 0.05)
    assert np.isfinite([fit.e0, fit.e_inf, fit.strain_c, fit.m]).all()
    assert storage == pytest.approx(1.0, abs=0.05) and loss == pytest.approx(1.0, abs=0.1)


@pytest.mark.parametrize(
    ("change", "message"),
    [
        (lambda g, e, n: (g[:4], e[:4], n[:4]), "at least 5 measured points, the sweep has 4"),
        (lambda g, e, n: (g, e[:-1], n), r"differ in length \(14, 13, 14\)"),
        (
            lambda g, e, n: (np.where(g == g[2], np.nan, g), e, n),
            "strain amplitudes must be finite",
        ),
        (lambda g, e, n: (g, np.where(e == e[2], np.inf, e), n), "storage moduli must be finite"),
        (lambda g, e, n: (np.where(g == g[0], 0.0, g), e, n), "strain amplitudes must be positive"),
        (lambda g, e, n: (g, np.where(e == e[1], -1.0, e), n), "storage moduli must be positive"),
        (lambda g, e, n: (g, e, np.where(n == n[1], 0.0, n)), "loss factors must be positive"),
        (
            lambda g, e, n: (np.linspace(0.01, 0.09, 14), e, n),
            r"spans strains 0.01 to 0.09 \(0.95 decades\); a Kraus fit needs at least 1 decade",
        ),
    ],
)
def test_fit_refuses_bad_sweeps(change, message):
    with pytest.raises(ValueError, match=message):
        fit_kraus(*change(*sweep()))


# ---------------------------------------------------------------- amplitude factors


def test_factors_are_one_at_the_reference_strain():
    # E'(g)/E'(g) = 1 and eta(g)/eta(g) = 1 at the reference strain, by definition.
    fit = fit_kraus(*sweep(noise=NOISE, seed=2))
    assert REFERENCE_STRAIN == 1e-3  # 0.1 %, the strain of an ordinary DMA sweep (common practice)
    storage, loss = amplitude_factors(fit, REFERENCE_STRAIN)
    assert storage == pytest.approx(1.0, rel=1e-14) and loss == pytest.approx(1.0, rel=1e-14)
    assert amplitude_factors(fit, 0.01, reference_strain=0.01) == pytest.approx((1.0, 1.0))


def test_factors_follow_the_model_ratios():
    fit = KrausFit(**TRUE, rms_log_residual=0.0, points=14)
    storage, loss = amplitude_factors(fit, 0.05)
    p = TRUE
    e1 = literal_storage(np.array([0.05, 1e-3]), p["e0"], p["e_inf"], p["strain_c"], p["m"])
    e2 = literal_loss(np.array([0.05, 1e-3]), p["loss_inf"], p["loss_max"], p["strain_c"], p["m"])
    assert storage == pytest.approx(e1[0] / e1[1], rel=1e-12)
    assert loss == pytest.approx((e2[0] / e1[0]) / (e2[1] / e1[1]), rel=1e-12)
    assert storage < 1 < loss  # softer and more damping at 5 % than at 0.1 %
    # Arrays broadcast; far beyond the peak E' tends to E'inf.
    many = amplitude_factors(fit, np.array([1e-3, 0.05]))
    np.testing.assert_allclose(many[0], [1.0, storage], rtol=1e-12)
    assert amplitude_factors(fit, 1e9)[0] == pytest.approx(p["e_inf"] / e1[1], rel=1e-9)


@pytest.mark.parametrize("bad", [0.0, -0.05, np.nan, np.inf])
def test_factors_refuse_a_bad_working_strain(bad):
    fit = KrausFit(**TRUE, rms_log_residual=0.0, points=14)
    with pytest.raises(ValueError, match="working strain amplitude must be positive"):
        amplitude_factors(fit, bad)
    with pytest.raises(ValueError, match="reference strain amplitude must be positive"):
        amplitude_factors(fit, 0.05, reference_strain=bad)


# ---------------------------------------------------------------- corrections per grade


def table(strain=STRAINS, noise=NOISE, seed=0, temp=23.0, freq=10.0):
    g, e1, eta = sweep(strain, noise=noise, seed=seed)
    return np.column_stack([g, e1, eta, np.full(g.size, temp), np.full(g.size, freq)])


def test_corrections_per_grade_with_notes_for_the_bad_ones():
    sweeps = {
        "GOOD": table(),
        "SHEAR": table(seed=1, temp=40.0, freq=1.0),
        "NARROW": table(strain=np.logspace(-2, -1.5, 8)),
        "FEW": table()[:3],
        "NAN": np.where(table() == table()[4, 1], np.nan, table()),
        "SHAPE": table()[:, :4],
    }
    found, notes = amplitude_corrections(sweeps, 0.05, modes={"SHEAR": "shear"})
    assert sorted(found) == ["GOOD", "SHEAR"]
    good = found["GOOD"]
    assert isinstance(good, AmplitudeCorrection)
    assert (good.storage_factor, good.loss_factor_factor) == amplitude_factors(good.fit, 0.05)
    assert (good.working_strain, good.temp_C, good.freq_Hz) == (0.05, 23.0, 10.0)
    assert good.source == (
        f"amplitude sweep at 23 °C, 10 Hz: E' x{good.storage_factor:.2f}, "
        f"loss factor x{good.loss_factor_factor:.2f} at strain 0.05"
    )
    assert not good.extrapolated and "GOOD" not in notes
    assert found["SHEAR"].source.startswith("amplitude sweep at 40 °C, 1 Hz: G' x")
    assert notes["NARROW"] == [
        "amplitude sweep not used: the sweep spans strains 0.01 to 0.0316228 (0.50 decades); "
        "a Kraus fit needs at least 1 decade of strain"
    ]
    assert notes["FEW"] == [
        "amplitude sweep not used: a Kraus fit needs at least 5 measured points, the sweep has 3"
    ]
    assert notes["NAN"] == [
        "amplitude sweep not used: storage moduli must be finite numbers; the sweep has a "
        "non-finite one"
    ]
    assert notes["SHAPE"][0].startswith("amplitude sweep not used: an amplitude sweep has 5")


def test_working_strain_outside_the_sweep_is_flagged_as_extrapolated():
    found, notes = amplitude_corrections({"A": table()}, 0.8)
    assert found["A"].extrapolated
    assert notes["A"] == [
        "working strain 0.8 outside the swept strains 0.0001 to 0.3: the amplitude factors "
        "are extrapolated by the Kraus fit"
    ]
    # A sweep that starts above the reference strain extrapolates the reference too.
    found, notes = amplitude_corrections({"B": table(strain=np.logspace(-2.5, -0.5, 10))}, 0.05)
    assert found["B"].extrapolated
    assert notes["B"][0].startswith("reference strain 0.001 outside the swept strains 0.00316228")


def test_a_poor_fit_is_noted_but_used():
    noisy = table(noise=0.25, seed=4)
    found, notes = amplitude_corrections({"A": noisy}, 0.05)
    assert "A" in found and found["A"].fit.rms_log_residual > 0.1
    assert notes["A"][-1].startswith("the Kraus model follows the amplitude sweep poorly")


@pytest.mark.parametrize("bad", [0.0, -1.0, np.nan])
def test_corrections_refuse_a_bad_working_strain(bad):
    with pytest.raises(ValueError, match="working strain amplitude must be positive"):
        amplitude_corrections({"A": table()}, bad)


def test_module_examples_run():
    for module in (kraus_module, amplitude_module):
        found = doctest.testmod(module)
        assert found.attempted >= 1 and found.failed == 0, module.__name__
