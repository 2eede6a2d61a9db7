"""Checks of the synthetic-sweep generators themselves (not of the fitter).

The generators sample a known :class:`tests.synthetic.Grade`; these tests hold the
properties the round-trip checks rely on: shapes, logged temperatures within their
jitter, moduli taken at the logged temperature, unique ramp temperatures, the gap in
reduced frequency, the failure of superposition of the two-process grade, the range of
the generated family and determinism.
"""

from __future__ import annotations

import numpy as np
import pytest

from tests import synthetic


def _best_shift_misfit(grade, cold, warm):
    """Smallest rms misfit [decades] of log E' and log eta of the ``warm`` isotherm
    (0.1-100 Hz) against the ``cold`` one over all horizontal shifts (0.005-decade grid)."""
    frequency = np.logspace(-1, 2, 31)
    log_fine = np.linspace(-8.0, 8.0, 3201)
    storage, eta = grade(cold, 10.0**log_fine)
    s_warm, e_warm = grade(warm, frequency)
    shifted = np.log10(frequency) + np.arange(-8.0, 8.0, 0.005)[:, None]
    d_s = np.interp(shifted, log_fine, np.log10(storage)) - np.log10(s_warm)
    d_e = np.interp(shifted, log_fine, np.log10(eta)) - np.log10(e_warm)
    return float(np.sqrt(np.mean(d_s**2 + d_e**2, axis=1)).min())


def test_reference_grade_is_the_model():
    t = np.linspace(-70.0, 90.0, 41)
    f = np.logspace(-2, 3, 41)
    storage, eta = synthetic.REFERENCE(t, f)
    m_storage, m_eta = synthetic.model(t, f)
    np.testing.assert_array_equal(storage, m_storage)
    np.testing.assert_array_equal(eta, m_eta)
    # scalar in, scalar-shaped out
    s0, e0 = synthetic.REFERENCE(20.0, 1.0)
    assert np.shape(s0) == () and np.shape(e0) == ()


def test_grade_limits_are_equilibrium_and_glassy():
    # E'(w -> 0) = E_e and E'(w -> inf) = E_e + sum w_i (Ferry 1980, ch. 3)
    grade = synthetic.REFERENCE
    low, _ = grade(0.0, 1e-30)
    high, _ = grade(0.0, 1e30)
    assert low == pytest.approx(synthetic.EQUILIBRIUM, rel=1e-9)
    assert high == pytest.approx(grade.glassy, rel=1e-9)


@pytest.mark.parametrize("distribution", ["uniform", "normal"])
def test_logged_sweep_temperatures_sit_within_the_jitter(distribution):
    temps, freqs = synthetic.TEMPERATURES, synthetic.FREQUENCIES
    points = synthetic.logged_sweep(temps, freqs, jitter_K=0.3, distribution=distribution)
    assert points.shape == (temps.size * freqs.size, 4)
    set_point = np.repeat(temps, freqs.size)
    deviation = points[:, 0] - set_point
    assert np.abs(deviation).max() <= 0.3 + 1e-9  # rounding of set-point + deviation
    assert np.abs(deviation).max() > 0.1  # the jitter is really there
    np.testing.assert_array_equal(points[:, 1], np.tile(freqs, temps.size))
    assert np.unique(points[:, 0]).size == points.shape[0]


def test_logged_sweep_drift_runs_across_each_scan():
    temps, freqs = np.array([0.0, 10.0]), synthetic.FREQUENCIES
    points = synthetic.logged_sweep(temps, freqs, jitter_K=0.0, noise=0.0, drift_K=0.4)
    deviation = (points[:, 0] - np.repeat(temps, freqs.size)).reshape(2, -1)
    np.testing.assert_allclose(deviation[0], np.linspace(-0.2, 0.2, freqs.size), atol=1e-12)
    np.testing.assert_allclose(deviation[1], deviation[0], atol=1e-12)
    jittered = synthetic.logged_sweep(temps, freqs, jitter_K=0.2, drift_K=0.4)
    assert np.abs(jittered[:, 0] - np.repeat(temps, freqs.size)).max() <= 0.2 + 0.2 + 1e-9


def test_logged_sweep_moduli_are_taken_at_the_logged_temperature():
    points = synthetic.logged_sweep(jitter_K=0.3, noise=0.0)
    storage, eta = synthetic.REFERENCE(points[:, 0], points[:, 1])
    np.testing.assert_array_equal(points[:, 2], storage)
    np.testing.assert_array_equal(points[:, 3], eta)
    # and not at the set-point: near Tg 0.3 K moves E' by several per cent
    at_set, _ = synthetic.REFERENCE(np.repeat(synthetic.TEMPERATURES, 7), points[:, 1])
    assert np.abs(np.log(storage / at_set)).max() > 0.02


def test_logged_sweep_noise_scatters_about_the_truth():
    points = synthetic.logged_sweep(jitter_K=0.1, noise=0.02)
    storage, eta = synthetic.REFERENCE(points[:, 0], points[:, 1])
    log_ratio = np.log(points[:, 2] / storage)
    assert np.std(log_ratio) == pytest.approx(0.02, rel=0.2)
    assert np.std(np.log(points[:, 3] / eta)) == pytest.approx(0.04, rel=0.2)


def test_logged_sweep_rejects_an_unknown_distribution():
    with pytest.raises(ValueError, match="distribution must be 'uniform' or 'normal'"):
        synthetic.logged_sweep(distribution="triangular")


def test_ramp_sweep_has_a_temperature_per_point():
    points = synthetic.ramp_sweep(-60.0, 85.0, frequencies=(1.0, 3.0, 10.0, 30.0))
    t = points[:, 0]
    assert points.shape == (726, 4)  # 145 K at 0.2 K per point, both ends included
    assert np.unique(t).size == t.size
    assert np.unique(np.round(t, 1)).size == t.size  # even as logged to 0.1 K
    assert np.all(np.diff(t) > 0)
    np.testing.assert_allclose(np.diff(t), 2.0 * 6.0 / 60.0)
    np.testing.assert_array_equal(points[:8, 1], [1, 3, 10, 30, 1, 3, 10, 30])
    assert t[0] == -60.0 and t[-1] == pytest.approx(85.0)


def test_ramp_sweep_cools_when_asked():
    points = synthetic.ramp_sweep(40.0, -40.0, frequencies=(1.0, 10.0, 100.0), noise=0.0)
    assert np.all(np.diff(points[:, 0]) < 0)
    np.testing.assert_array_equal(points[:3, 1], [1.0, 10.0, 100.0])
    storage, eta = synthetic.REFERENCE(points[:, 0], points[:, 1])
    np.testing.assert_array_equal(points[:, 2], storage)


def test_ramp_sweep_rejects_a_non_positive_rate():
    with pytest.raises(ValueError, match="must be positive"):
        synthetic.ramp_sweep(rate_K_per_min=0.0)
    with pytest.raises(ValueError, match="must be positive"):
        synthetic.ramp_sweep(seconds_per_point=-1.0)


def test_sparse_sheet_is_three_frequencies_at_10_K():
    points = synthetic.sparse_sheet()
    temps = np.unique(points[:, 0])
    np.testing.assert_array_equal(np.unique(points[:, 1]), [1.0, 10.0, 100.0])
    np.testing.assert_allclose(np.diff(temps), 10.0)
    assert points.shape == (temps.size * 3, 4)
    assert temps[0] == -50.0 and temps[-1] == 70.0


def test_gapped_sweep_leaves_a_gap_in_reduced_frequency():
    points = synthetic.gapped_sweep()
    temps = np.unique(points[:, 0])
    assert not np.any((temps > -12.5) & (temps < 7.5))
    assert {-15.0, 10.0} <= set(temps)
    # coverage with the true shifts: union of each isotherm's log fR span
    law = synthetic.REFERENCE.law
    f = synthetic.FREQUENCIES
    lo = np.log10(f.min()) + law.log_shift(temps)
    hi = np.log10(f.max()) + law.log_shift(temps)
    order = np.argsort(lo)
    reach = np.maximum.accumulate(hi[order])
    widest = np.max(lo[order][1:] - reach[:-1])
    assert widest == pytest.approx(1.86, abs=0.05)  # 4.87 decades of shift minus 3 of scan


def test_two_process_model_is_not_a_simple_shift():
    # A thermorheologically simple material superposes exactly (Ferry 1980, ch. 11): the
    # best horizontal shift of one isotherm onto the next leaves only interpolation error.
    assert _best_shift_misfit(synthetic.REFERENCE, -50.0, -40.0) < 0.005
    assert _best_shift_misfit(synthetic.TWO_PROCESS, -50.0, -40.0) > 0.05
    t, f = -50.0, np.logspace(-1, 2, 7)
    np.testing.assert_array_equal(
        synthetic.two_process_model(t, f)[1], synthetic.TWO_PROCESS(t, f)[1]
    )


def test_two_process_beta_strength_and_loss_peak():
    grade = synthetic.TWO_PROCESS
    beta = grade.beta.weights.sum() / grade.glassy
    assert 0.05 <= beta <= 0.15
    # well below Tg the alpha process leaves almost no loss; the beta process does
    _, eta_alpha = synthetic.REFERENCE(-60.0, synthetic.FREQUENCIES)
    _, eta_two = synthetic.two_process_model(-60.0, synthetic.FREQUENCIES)
    assert eta_alpha.max() < 1e-3 < 5e-3 < eta_two.min()
    points = synthetic.two_process_sweep(noise=0.0)
    np.testing.assert_array_equal(points[:, 3], grade(points[:, 0], points[:, 1])[1])


def test_family_spans_the_stated_ranges():
    grades = synthetic.family(40, noise=0.0)
    assert len(grades) == 40
    tgs = np.array([truth.law.split_C for _, truth in grades])
    assert tgs.min() >= -45.0 and tgs.max() <= 5.0
    for points, truth in grades:
        assert points.shape == (60, 4)
        assert np.unique(points[:, 0]).size == 12
        np.testing.assert_array_equal(np.unique(points[:, 1]), synthetic.FAMILY_FREQUENCIES)
        storage, eta = truth(points[:, 0], points[:, 1])
        np.testing.assert_array_equal(points[:, 2], storage)
        np.testing.assert_array_equal(points[:, 3], eta)
    lowest = np.array([p[:, 3].min() for p, _ in grades])
    peak = np.array([p[:, 3].max() for p, _ in grades])
    assert 5e-6 < lowest.min() < 5e-5  # loss factor down to about 1e-5
    assert 0.3 < peak.min() and peak.max() < 4.0


@pytest.mark.parametrize(
    "make",
    [
        lambda seed: synthetic.logged_sweep(seed=seed),
        lambda seed: synthetic.logged_sweep(seed=seed, distribution="normal", drift_K=0.2),
        lambda seed: synthetic.ramp_sweep(seed=seed),
        lambda seed: synthetic.sparse_sheet(seed=seed, jitter_K=0.2),
        lambda seed: synthetic.gapped_sweep(seed=seed),
        lambda seed: synthetic.two_process_sweep(seed=seed),
        lambda seed: np.vstack([p for p, _ in synthetic.family(3, seed=seed)]),
    ],
)
def test_generators_are_deterministic_given_their_seed(make):
    np.testing.assert_array_equal(make(3), make(3))
    assert not np.array_equal(make(3), make(4))
