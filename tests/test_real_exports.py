"""Master curves from exports like real ones, checked against the model they came from.

The sweeps come from tests/synthetic.py: a generalized Maxwell model with the WLF
universal constants above Tg (Williams, Landel & Ferry 1955: C1 = 17.44, C2 = 51.6 K at
Tg) and Arrhenius below it, sampled as instruments log it (each point at its own
temperature, ramps, sparse sheets, gaps, 1-3 % noise). Everything is compared with that
truth at conditions that were never measured: midway between set-points and between
measured frequencies. The accuracy limits (E' within 5 %, tan delta within 10 %) and the
interval coverage (the truth inside the 95 % interval at >= 90 % of points) are the
targets the project sets for its fitter.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from engine.base.errors import FitError
from engine.curves.mastercurve import build_master_curve
from engine.physics.isotherms import group_temperatures
from tests import synthetic as S


def _grid(t_lo, t_hi, step=5.0):
    """Unmeasured conditions: midway between 5 K set-points, between measured frequencies."""
    t = np.arange(t_lo + step / 2, t_hi, step)
    f = np.array([0.2, 0.5, 2.0, 5.0, 20.0, 50.0])
    return np.meshgrid(t, f, indexing="ij")


def _score(curve, grade, t_range=(-60.0, 85.0)):
    tt, ff = _grid(*t_range)
    es, eta = grade(tt, ff)
    p = curve.evaluate(tt, ff)
    b = curve.interval(tt, ff)
    inside = ~p.extrapolated
    err_e = np.abs(p.storage_modulus / es - 1)[inside]
    err_eta = np.abs(p.loss_factor / eta - 1)[inside]
    cover_e = ((es >= b.storage_low) & (es <= b.storage_high))[inside]
    cover_eta = ((eta >= b.loss_factor_low) & (eta <= b.loss_factor_high))[inside]
    half = (b.storage_high / p.storage_modulus - 1)[inside]
    return {
        "e90": float(np.quantile(err_e, 0.9)),
        "eta90": float(np.quantile(err_eta, 0.9)),
        "cover_e": float(cover_e.mean()),
        "cover_eta": float(cover_eta.mean()),
        "half": float(np.median(half)),
    }


CASES = {
    "dense, 1 %": lambda: S.sweep(noise=0.01),
    "logged +-0.1 K, 2 %": lambda: S.logged_sweep(jitter_K=0.1, noise=0.02),
    "logged +-0.3 K, 3 %": lambda: S.logged_sweep(jitter_K=0.3, noise=0.03, drift_K=0.2),
    "ramp, 4 frequencies": lambda: S.ramp_sweep(),
    "ramp, 3 frequencies": lambda: S.ramp_sweep(frequencies=(1.0, 10.0, 100.0)),
    "gap": lambda: S.gapped_sweep(),
}


@pytest.fixture(scope="module")
def fitted():
    return {name: build_master_curve(make(), "tensile") for name, make in CASES.items()}


@pytest.mark.parametrize("name", list(CASES))
def test_accuracy_and_coverage_at_unmeasured_points(fitted, name):
    # Known model (tests/synthetic.py): E' within 5 %, tan delta within 10 % at 90 % of
    # the unmeasured points; the truth inside the 95 % interval at >= 90 % of them; the
    # interval narrow on dense data (median half-width under 8 %).
    s = _score(fitted[name], S.REFERENCE)
    assert s["e90"] < 0.05, s
    assert s["eta90"] < 0.10, s
    assert s["cover_e"] >= 0.9, s
    assert s["cover_eta"] >= 0.9, s
    assert s["half"] < 0.08, s


def test_sparse_sheet_gives_a_master_curve_with_a_wide_honest_interval(fitted):
    # A 3-frequency sheet in 10 K steps used to be refused. Now: a curve, E' within 10 %
    # (90 % of points), the truth inside the interval at >= 90 % of points, and the
    # interval wider than on the dense sweep.
    curve = build_master_curve(S.sparse_sheet(), "tensile")
    s = _score(curve, S.REFERENCE, (-50.0, 70.0))
    assert s["e90"] < 0.10, s
    assert s["cover_e"] >= 0.9 and s["cover_eta"] >= 0.9, s
    assert s["half"] > 2 * _score(fitted["dense, 1 %"], S.REFERENCE)["half"]
    dense = fitted["dense, 1 %"].shift
    spread = curve.shift.log_shift_high - curve.shift.log_shift_low
    assert np.median(spread) > 2 * np.median(dense.log_shift_high - dense.log_shift_low)


def test_logged_temperatures_form_the_sweeps_own_isotherms(fitted):
    # 30 set-points logged with +-0.3 K: 30 isotherms, each at the mean of its points.
    curve = fitted["logged +-0.3 K, 3 %"]
    assert curve.shift.temperatures.size == S.TEMPERATURES.size
    assert np.max(np.abs(curve.shift.temperatures - S.TEMPERATURES)) < 0.3
    assert curve.grouping["method"] == "logged"
    assert "logged temperatures" in curve.grouping["description"]


def test_a_ramp_is_cut_into_bins_and_said_so(fitted):
    curve = fitted["ramp, 4 frequencies"]
    assert curve.grouping["method"] == "ramp"
    assert "ramp" in " ".join(curve.notes)


def test_grouping_of_set_points_logged_points_and_ramps():
    # Common practice: DMA set-points hold within a few tenths of a kelvin.
    g = group_temperatures([20.0, 20.0, 25.0, 25.0])
    assert g.method == "set-points" and g.temperatures.tolist() == [20.0, 25.0]
    g = group_temperatures([19.8, 20.3, 20.1, 24.7, 25.2])
    assert g.method == "logged" and g.labels.tolist() == [0, 0, 0, 1, 1]
    assert g.temperatures == pytest.approx([20.0667, 24.95], abs=1e-3)
    g = group_temperatures(np.arange(0.0, 20.0, 0.5))
    assert g.method == "ramp" and g.temperatures.size == 10
    with pytest.raises(ValueError, match="tolerance must be positive"):
        group_temperatures([1.0], tolerance_K=0.0)


def test_wlf_constants_recovered_at_tg():
    # Williams, Landel & Ferry (1955): the model's C1 = 17.44, C2 = 51.6 K at Tg = -20 C
    # and 200 kJ/mol below; the fit finds them within 5 % (Tg within 2 K).
    law = build_master_curve(S.sweep(noise=0.01), "tensile").shift.law
    assert law.kind == "WLF+Arrhenius"
    assert law.split_C == pytest.approx(S.TG_C, abs=2.0)
    assert law.wlf_c1 == pytest.approx(17.44, rel=0.05)
    assert law.wlf_c2 == pytest.approx(51.6, rel=0.05)
    assert law.activation_J_per_mol == pytest.approx(200e3, rel=0.05)


def test_interval_widens_outside_the_data(fitted):
    curve = fitted["dense, 1 %"]
    lo, hi = curve.log_fr_range
    t = curve.reference_C
    inside = curve.interval(t, 10 ** ((lo + hi) / 2))
    beyond = curve.interval(t, 10 ** (hi + 3))
    assert beyond.storage_high / beyond.storage_low > 1.5 * (
        inside.storage_high / inside.storage_low
    )
    t_lo, t_hi = curve.log_shift_interval(curve.temperature_range[1] + 40)
    i_lo, i_hi = curve.log_shift_interval(curve.temperature_range[1] - 5)
    assert t_hi - t_lo > i_hi - i_lo


def test_interval_wider_across_a_gap(fitted):
    curve = fitted["gap"]
    assert curve.gaps
    g_lo, g_hi = curve.gaps[0]
    mid = curve.interval(curve.reference_C, 10 ** ((g_lo + g_hi) / 2))
    out = curve.interval(curve.reference_C, 10 ** (curve.log_fr_range[0] + 0.5))
    assert mid.storage_high / mid.storage_low > out.storage_high / out.storage_low


def test_shift_factor_intervals_contain_the_truth(fitted):
    # Known WLF/Arrhenius law: each isotherm's true log aT inside its 95 % interval at
    # >= 90 % of the isotherms.
    curve = fitted["logged +-0.1 K, 2 %"]
    truth = S.TRUE_LAW.log_shift(curve.shift.temperatures) - S.TRUE_LAW.log_shift(curve.reference_C)
    inside = (truth >= curve.shift.log_shift_low - 1e-9) & (
        truth <= curve.shift.log_shift_high + 1e-9
    )
    assert inside.mean() >= 0.9


def test_tg_interval_contains_the_tg_of_the_model(fitted):
    # The loss-factor peak at 1 Hz of the known model, found on a 0.05 K grid, lies in
    # the 95 % interval of the fitted Tg (ASTM E1640 definition of the peak).
    curve = fitted["logged +-0.1 K, 2 %"]
    t = np.arange(-40.0, 60.0, 0.05)
    _, eta = S.REFERENCE(t, 1.0)
    true_peak = t[np.argmax(eta)]
    tg = {r["method"]: r for r in curve.tg}["loss_factor_peak"]
    assert tg["low_C"] - 0.5 <= true_peak <= tg["high_C"] + 0.5
    assert tg["high_C"] - tg["low_C"] < 10.0


@pytest.mark.parametrize("name", list(CASES))
def test_simple_grades_superpose(fitted, name):
    assert fitted[name].quality["superposition_ok"], fitted[name].notes


def test_two_process_grade_is_reported_as_not_superposing():
    # Alpha on WLF, beta on its own Arrhenius law (tests/synthetic.py): not simple.
    for pts in (S.two_process_sweep(), S.two_process_sweep(noise=0.02, jitter_K=0.2)):
        curve = build_master_curve(pts, "tensile")
        assert not curve.quality["superposition_ok"]
        assert any("not be thermorheologically simple" in n for n in curve.notes)


def test_sparse_and_universal_grades_superpose():
    assert build_master_curve(S.sparse_sheet(), "tensile").quality["superposition_ok"]


@pytest.mark.parametrize("side", ["cold", "warm"])
def test_from_law_flag_sits_on_the_isotherm_without_data(side):
    # One isotherm keeps a single frequency: one point shows no shape of its own (a
    # modulus error and a shift error look alike), so it (and only it) takes the law's
    # shift, on either side of the reference.
    pts = S.sweep(noise=0.01)
    target = -45.0 if side == "cold" else 60.0
    keep = (pts[:, 0] != target) | (pts[:, 1] == 1.0)
    curve = build_master_curve(pts[keep], "tensile", reference_C=20.0)
    flagged = curve.shift.temperatures[curve.shift.bridged].tolist()
    assert flagged == [target]


def test_a_family_of_generated_grades_fits_without_failures_or_warnings():
    # 40 grades, 5 frequencies x 12 temperatures, Tg over -45..5 C, tan delta to 1e-5.
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        curves = [(build_master_curve(p, "tensile"), g) for p, g in S.family(40, noise=0.02)]
    cover, cover_gaps = [], []
    for curve, grade in curves:
        tt, ff = np.meshgrid(curve.shift.temperatures[:-1] + 5.0, [0.5, 5.0], indexing="ij")
        es, eta = grade(tt, ff)
        b = curve.interval(tt, ff)
        ok = ~curve.evaluate(tt, ff).extrapolated
        cover.append(((es >= b.storage_low) & (es <= b.storage_high))[ok])
        # Where reduced frequency falls in a gap between isotherms, the loss factor is
        # flagged extrapolated and its interval must still hold the truth.
        cover_gaps.append(((eta >= b.loss_factor_low) & (eta <= b.loss_factor_high))[~ok])
    assert np.concatenate(cover).mean() >= 0.9
    gaps = np.concatenate(cover_gaps)
    assert gaps.size > 20 and gaps.mean() >= 0.9


def test_jitter_does_not_move_the_answer():
    # The demo failure: +-0.1 K of jitter moved tan delta at -20 C, 10 Hz by a factor 4.
    # Now the logged and the set-point sweeps agree within 10 %.
    base = build_master_curve(S.sweep(noise=0.01), "tensile")
    jit = build_master_curve(S.logged_sweep(jitter_K=0.1, noise=0.01), "tensile")
    a, b = base.evaluate(-20.0, 10.0), jit.evaluate(-20.0, 10.0)
    assert float(b.loss_factor) == pytest.approx(float(a.loss_factor), rel=0.1)


def test_small_loss_factor_is_not_rippled_between_measured_frequencies():
    # Generated grades with tan delta below 1e-3 on the rubbery plateau (tests/synthetic.py
    # family), 2 % noise: along each measured isotherm, on a fine frequency grid between
    # the 5 measured frequencies, the fitted loss factor follows the truth (90 % of points
    # within 10 %, none off by more than 30 %): the spectrum's smoothness is relative to
    # its local level, so noise on a small loss factor is not fitted.
    errors = []
    for points, grade in S.family(12, noise=0.02):
        curve = build_master_curve(points, "tensile", intervals=False)
        tt, ff = np.meshgrid(
            np.unique(np.round(points[:, 0])), np.geomspace(0.3, 30.0, 41), indexing="ij"
        )
        _, eta = grade(tt, ff)
        p = curve.evaluate(tt, ff)
        small = (eta < 1e-3) & ~p.extrapolated
        errors.append(np.abs(p.loss_factor / eta - 1)[small])
    e = np.concatenate(errors)
    assert e.size > 100
    assert np.quantile(e, 0.9) < 0.10
    assert e.max() < 0.30


def test_frequencies_spanning_too_many_decades_are_refused():
    pts = S.sweep(temperatures=[0.0, 10.0], noise=0.01)
    pts[0, 1] = 1e-300  # a subnormal-size frequency: a unit or parsing error
    with pytest.raises(FitError, match="frequencies span .* decades"):
        build_master_curve(pts, "tensile")


def test_a_grade_whose_numbers_defeat_the_fit_does_not_stop_the_library(monkeypatch):
    # fits._fit_one turns any numeric failure into that grade's fit error.
    from engine.library import fits

    def broken(*args, **kwargs):
        raise np.linalg.LinAlgError("Singular matrix")

    monkeypatch.setattr(fits, "build_master_curve", broken)
    mid, result = fits._fit_one(("G-1", S.sweep(), "tensile", None, False, 1.0))
    assert mid == "G-1" and result.startswith("error: the fit failed on these data")
