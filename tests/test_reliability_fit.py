"""Failures stay local in the fit, and the window refuses what cannot be evaluated.

A grade whose data defeat the fit (a nine-point sweep with a far reference, a subnormal
frequency, a temperature below absolute zero, any exception inside the numerics, a
fitted spectrum that is not finite) gets a one-line fit error of its own; the other
grades are fitted as before. The libraries here are written straight into the store, as
a library written by an older importer would hold them, so the fit's own checks are
what is tested. The window refuses temperatures, frequencies and sizes beyond its limits
before anything is allocated.

Sources: absolute zero is -273.15 degC (SI Brochure, 9th ed., 2019: the kelvin and the
degree Celsius); the window and sweep limits are common practice for polymer DMA (see
engine/curves/window.py and engine/curves/mastercurve.py); the synthetic sweeps are the
generalized Maxwell model of tests/synthetic.py (Ferry 1980).
"""

from __future__ import annotations

import dataclasses
import re
import shutil
from pathlib import Path

import numpy as np
import pytest

from engine.base.errors import CriteriaError, FitError
from engine.curves import window as window_module
from engine.curves.mastercurve import (
    SPLIT_METHODS,
    build_master_curve,
    check_curve,
    isochrone,
    transitions_at,
)
from engine.curves.window import (
    DutyPoint,
    OperatingWindow,
    check_frequencies,
    check_temperatures,
    evaluate_window,
)
from engine.library import fits
from engine.library.fits import fit_library, master_curve, options_key
from engine.library.importer import data_hash
from engine.library.store import Library
from engine.physics.isotherms import group_temperatures
from engine.physics.prony import PronySeries
from engine.physics.shift import shift_isotherms, split_isotherms
from tests import synthetic
from tests.helpers import add_grades, flat_bank, good_sweep, with_value

ABSOLUTE_ZERO_C = -273.15  # SI Brochure (2019)
# Nine points: three isotherms of three frequencies each, of the known model.
NINE_TEMPERATURES = (15.0, 25.0, 35.0)
NINE_FREQUENCIES = (0.1, 0.3, 30.0)


def nine_point_sweep() -> np.ndarray:
    return synthetic.sweep(NINE_TEMPERATURES, NINE_FREQUENCIES)


@pytest.fixture(scope="module")
def good_points() -> dict[str, np.ndarray]:
    return {"GOOD-1": good_sweep(1), "GOOD-2": good_sweep(2)}


@pytest.fixture(scope="module")
def fitted_good(tmp_path_factory, good_points) -> Path:
    """A library file with the two good grades, fitted once (their fits in its cache)."""
    path = tmp_path_factory.mktemp("good") / "good.sqlite"
    curves, errors = fit_library(add_grades(Library(str(path)), good_points), processes=1)
    assert sorted(curves) == ["GOOD-1", "GOOD-2"] and errors == {}
    return path


@pytest.fixture
def good_library(fitted_good, tmp_path) -> Library:
    """A copy of the fitted good library for one test."""
    copy = tmp_path / "lib.sqlite"
    shutil.copyfile(fitted_good, copy)
    return Library(str(copy))


# ------------------------------------------------------------- the nine-point sweep


def test_nine_point_sweep_shift_law_refuses_a_reference_beyond_the_wlf_divergence():
    """The pairwise-shift law of a nine-point sweep referred to -100 degC: WLF diverges
    C2 below its reference, so no law is finite both at the isotherms and there
    (Williams, Landel & Ferry 1955, eq. 1). Refused with a reason (it used to end in a
    bare StopIteration)."""
    points = nine_point_sweep()
    grouping = group_temperatures(points[:, 0])
    isotherms = split_isotherms(
        *points.T, labels=grouping.labels, temperatures=grouping.temperatures
    )
    t, e, eta = isochrone(isotherms, 1.0)
    tg = {r["method"]: r for r in transitions_at(t, e, eta, 1.0)}
    splits = [tg[m]["temperature_C"] for m in SPLIT_METHODS if tg[m]["reached"]]
    assert splits  # the sweep shows a transition: WLF above it
    with pytest.raises(FitError, match="choose a reference nearer the measured temperatures"):
        shift_isotherms(isotherms, -100.0, splits)


def test_nine_point_sweep_with_a_far_reference_still_gives_a_master_curve():
    """The fit goes on from a universal start law and passes through the nine points."""
    points = nine_point_sweep()
    assert points.shape == (9, 4)
    curve = build_master_curve(points, "tensile", reference_C=-100.0)
    p = curve.evaluate(points[:, 0], points[:, 1])
    assert np.all(np.isfinite(p.storage_modulus)) and np.all(np.isfinite(p.loss_factor))
    # A loose check: the curve goes through the data (7 % and 12 % measured), not an
    # accuracy claim for so far a reference.
    np.testing.assert_allclose(p.storage_modulus, points[:, 2], rtol=0.25)
    np.testing.assert_allclose(p.loss_factor, points[:, 3], rtol=0.25)


# ------------------------------------------------------------- checks of the points


@pytest.mark.parametrize(
    ("row", "column", "value", "message"),
    [
        (0, 1, 1e-310, "the frequencies span 312 decades (1e-310 to 100 Hz)"),
        (0, 1, 5e-324, "the frequencies span 325 decades (4.94e-324 to 100 Hz)"),
        (5, 1, 5e9, "a frequency of 5e+09 Hz lies outside 1e-09 to 1e+09 Hz"),
        (0, 0, -300.0, "a temperature of -300 degC lies below absolute zero (-273.15 degC)"),
        (-1, 0, 5000.0, "a temperature of 5000 degC lies above 4000 degC"),
        (3, 0, np.nan, "a master curve needs finite values in every point"),
    ],
)
def test_points_outside_the_physical_range_are_refused_before_the_fit(row, column, value, message):
    """Sweep limits (common practice): frequencies of dynamic tests, and temperatures
    from absolute zero (SI Brochure 2019) to above the melting point of every solid."""
    points = with_value(synthetic.sweep(noise=0.01), row, column, value)
    with pytest.raises(FitError, match=re.escape(message)):
        build_master_curve(points, "tensile", intervals=False)


@pytest.mark.parametrize(
    ("scale", "message"),
    [
        (1e-310, "a frequency of 1e-311 Hz lies outside 1e-09 to 1e+09 Hz"),
        (1e12, "a frequency of 1e+14 Hz lies outside 1e-09 to 1e+09 Hz"),
    ],
)
def test_a_sweep_whose_frequencies_all_lie_beyond_the_limits_is_refused(scale, message):
    """Every frequency subnormal (or far too high): the span alone looks normal."""
    points = synthetic.sweep(noise=0.01)
    points[:, 1] *= scale
    with pytest.raises(FitError, match=re.escape(message)):
        build_master_curve(points, "tensile", intervals=False)


def test_a_reference_that_is_not_a_temperature_is_refused():
    with pytest.raises(FitError, match="reference temperature -300 degC is not a usable"):
        build_master_curve(nine_point_sweep(), "tensile", reference_C=-300.0)


# ------------------------------------------------------------- checks of the fitted curve


def _broken(curve, **prony):
    """``curve`` with its spectrum's arrays replaced, as a failed fit could leave them
    (PronySeries refuses such values, so they are set past its checks)."""
    series = curve.prony
    broken = object.__new__(PronySeries)
    for name in ("tau", "weights", "equilibrium"):
        object.__setattr__(broken, name, prony.get(name, getattr(series, name)))
    return dataclasses.replace(curve, prony=broken, _tables={})


@pytest.fixture(scope="module")
def nine_curve():
    return build_master_curve(nine_point_sweep(), "tensile")


@pytest.mark.parametrize(
    ("change", "message"),
    [
        ("tau_inf", "relaxation times that are not finite and positive"),
        ("tau_zero", "relaxation times that are not finite and positive"),
        ("weight_nan", "weights that are not finite and non-negative"),
        ("weight_negative", "weights that are not finite and non-negative"),
        ("all_zero", "has no stiffness"),
    ],
)
def test_a_fitted_curve_that_cannot_be_evaluated_is_refused(nine_curve, change, message):
    check_curve(nine_curve)  # the fitted curve itself is usable
    tau = np.array(nine_curve.prony.tau)
    weights = np.array(nine_curve.prony.weights)
    if change == "tau_inf":
        tau[-1] = np.inf
        bad = _broken(nine_curve, tau=tau)
    elif change == "tau_zero":
        tau[0] = 0.0
        bad = _broken(nine_curve, tau=tau)
    elif change == "weight_nan":
        weights[3] = np.nan
        bad = _broken(nine_curve, weights=weights)
    elif change == "weight_negative":
        weights[3] = -1.0
        bad = _broken(nine_curve, weights=weights)
    else:
        bad = _broken(nine_curve, weights=np.zeros_like(weights), equilibrium=0.0)
    with pytest.raises(FitError, match=re.escape(message)):
        check_curve(bad)


# ------------------------------------------------------------- a library with broken grades


def test_fit_library_fits_the_good_grades_and_names_each_broken_one(good_library):
    all_subnormal = good_sweep(5)
    all_subnormal[:, 1] *= 1e-310
    grades = {
        "SUBNORMAL": with_value(good_sweep(3), 0, 1, 1e-310),
        "ALL-SUBNORMAL": all_subnormal,
        "COLD": with_value(good_sweep(4), 0, 0, -300.0),
        "NINE": nine_point_sweep(),
    }
    lib = add_grades(good_library, grades)
    curves, errors = fit_library(lib, processes=1)
    assert sorted(curves) == ["GOOD-1", "GOOD-2", "NINE"]
    assert errors == {
        "SUBNORMAL": "the frequencies span 312 decades (1e-310 to 100 Hz); a dynamic "
        "mechanical sweep spans at most 12 — check the frequency column and its unit",
        "ALL-SUBNORMAL": "a frequency of 1e-311 Hz lies outside 1e-09 to 1e+09 Hz, where "
        "dynamic tests are made: check the frequency column and its unit",
        "COLD": "a temperature of -300 degC lies below absolute zero (-273.15 degC): check "
        "the temperature column and its unit",
    }
    # The failures are cached like the fits: a second pass fits nothing and says the same.
    again, errors_again = fit_library(lib, processes=1)
    assert sorted(again) == sorted(curves) and errors_again == errors


@pytest.mark.parametrize(
    ("exc", "words"),
    [
        (StopIteration(), "the fit failed on these data (no candidate was left to choose from)"),
        (
            FloatingPointError("overflow encountered in multiply"),
            "(a floating-point overflow or invalid operation: overflow encountered in multiply)",
        ),
        (ValueError("array must not contain infs or NaNs"), "array must not contain infs"),
        (
            np.linalg.LinAlgError("Singular matrix"),
            "(a singular or ill-conditioned linear system: Singular matrix)",
        ),
        (RuntimeWarning("overflow encountered in exp"), "(a numerical warning: overflow"),
        (TypeError("unsupported operand"), "(an unexpected TypeError: unsupported operand)"),
        (MemoryError(), "(not enough memory)"),
        (FitError("too few isotherms\nfor a law"), "too few isotherms\\nfor a law"),
    ],
)
def test_any_failure_in_one_grade_is_that_grade_s_one_line_error(
    good_library, monkeypatch, exc, words
):
    """Whatever one grade's fit raises (a RuntimeWarning too, as a warnings filter that
    promotes warnings makes it), it is that grade's error; the others are fitted."""
    broken = good_sweep(5)
    real = fits.build_master_curve

    def fit_or_fail(points, *args, **kwargs):
        if np.array_equal(points, broken):
            raise exc
        return real(points, *args, **kwargs)

    monkeypatch.setattr(fits, "build_master_curve", fit_or_fail)
    lib = add_grades(good_library, {"BROKEN": broken})
    curves, errors = fit_library(lib, processes=1)
    assert sorted(curves) == ["GOOD-1", "GOOD-2"]
    assert list(errors) == ["BROKEN"]
    assert words in errors["BROKEN"]
    assert "\n" not in errors["BROKEN"] and len(errors["BROKEN"]) <= fits.MAX_REASON_CHARS
    # One grade asked for alone: the same reason, naming the grade.
    with pytest.raises(FitError, match=r"^grade 'BROKEN': ") as info:
        master_curve(lib, "BROKEN")
    assert words in str(info.value)
    # A failure of the data is cached as the grade's error; one of the machine (memory,
    # a warnings filter) is not, and the next run fits the grade.
    monkeypatch.undo()
    curves, errors_again = fit_library(lib, processes=1)
    if isinstance(exc, MemoryError | Warning):
        assert sorted(curves) == ["BROKEN", "GOOD-1", "GOOD-2"] and errors_again == {}
    else:
        assert errors_again == errors


def test_fits_left_by_a_worker_that_died_run_in_this_process(good_library, monkeypatch):
    from concurrent.futures.process import BrokenProcessPool

    class DeadPool:
        def __init__(self, *args, **kwargs):
            pass

        def __enter__(self):
            return self

        def __exit__(self, *exc):
            return False

        def map(self, *args, **kwargs):
            raise BrokenProcessPool("a child process terminated abruptly")

    monkeypatch.setattr(fits, "ProcessPoolExecutor", DeadPool)
    small = {
        f"SMALL-{k}": synthetic.sweep(NINE_TEMPERATURES, NINE_FREQUENCIES, noise=0.01, seed=k)
        for k in range(8)
    }
    curves, errors = fit_library(add_grades(good_library, small), processes=2)
    assert sorted(curves) == sorted(["GOOD-1", "GOOD-2", *small]) and errors == {}


def test_a_fit_returning_a_curve_with_infinite_relaxation_times_is_refused(
    good_library, monkeypatch
):
    """The check of the fitted curve runs inside the fit: a curve that would hold an
    infinite relaxation time never reaches the cache or the ranking."""
    from engine.curves import mastercurve

    broken = good_sweep(6)
    real = mastercurve.fit_master_curve

    def fit_badly(points, *args, **kwargs):
        curve = real(points, *args, **kwargs)
        if np.array_equal(points, broken):
            tau = np.array(curve.prony.tau)
            tau[-1] = np.inf
            return _broken(curve, tau=tau)
        return curve

    monkeypatch.setattr(mastercurve, "fit_master_curve", fit_badly)
    lib = add_grades(good_library, {"INFINITE": broken})
    curves, errors = fit_library(lib, processes=1)
    assert sorted(curves) == ["GOOD-1", "GOOD-2"]
    assert errors == {
        "INFINITE": "the fitted spectrum has relaxation times that are not finite and positive"
    }


def test_a_cached_fit_with_an_infinite_relaxation_time_is_fitted_again(good_library, good_points):
    """A cache entry whose spectrum holds an infinite relaxation time (what made ``rank``
    stop with "relaxation times tau must be finite and positive") is fitted again from
    the data; the others come from the cache."""
    lib = good_library
    key = options_key()
    h = data_hash(good_points["GOOD-2"])
    entry = lib.cached_fit(h, key)
    assert entry is not None
    entry["prony"]["tau_s"][-1] = float("inf")
    lib.store_fits({h: entry}, key)
    curves, errors = fit_library(lib, processes=1)
    assert sorted(curves) == ["GOOD-1", "GOOD-2"] and errors == {}
    assert np.all(np.isfinite(curves["GOOD-2"].prony.tau))
    refitted = lib.cached_fit(h, key)
    assert refitted is not None and np.all(np.isfinite(refitted["prony"]["tau_s"]))
    # The single-grade path reads the repaired entry too.
    assert np.all(np.isfinite(master_curve(lib, "GOOD-2").prony.tau))


def test_a_cache_that_cannot_be_written_costs_a_refit_not_the_fits(monkeypatch, good_library):
    lib = add_grades(good_library, {"NINE": nine_point_sweep()})

    def locked(*_args, **_kwargs):
        raise RuntimeError("database is locked")

    monkeypatch.setattr(lib, "store_fits", locked)
    curves, errors = fit_library(lib, processes=1)
    assert sorted(curves) == ["GOOD-1", "GOOD-2", "NINE"] and errors == {}


# ------------------------------------------------------------- window limits


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        (
            {"temp_range": (-20.0, 1e9), "temp_step": 1e6},
            "window temperature: 1e+09 degC is outside -150 to 400 degC",
        ),
        ({"temp_range": (-200.0, 20.0)}, "window temperature: -200 degC is outside -150 to 400"),
        ({"temp_range": (-20.0, 450.0)}, "window temperature: 450 degC is outside -150 to 400"),
        (
            {"freq_range": (10.0, 1e12)},
            "window frequency: 1e+12 Hz is outside 1e-06 to 1e+09 Hz",
        ),
        ({"freq_range": (1e-310, 10.0)}, "window frequency: 1e-310 Hz is outside 1e-06"),
        (
            {"duty_points": (DutyPoint(1e6, 10.0, 1.0),)},
            "duty-point temperature: 1e+06 degC is outside -150 to 400 degC",
        ),
        (
            {"duty_points": (DutyPoint(20.0, 1e10, 1.0),)},
            "duty-point frequency: 1e+10 Hz is outside",
        ),
        ({"design_frequency_Hz": 1e12}, "design frequency: 1e+12 Hz is outside"),
        (
            {"temp_range": (-150.0, 50.0), "temp_step": 0.0999},
            "a window holds at most 2,001",
        ),
        ({"freq_points": 10_000_000}, "more than 500 frequencies in the band (10,000,000 asked)"),
    ],
)
def test_window_beyond_its_limits_is_refused_before_a_grid_is_made(kwargs, message):
    """Window limits (common practice for polymer DMA): -150 to 400 degC, 1e-6 to 1e9 Hz,
    at most 2,001 temperatures and 500 frequencies."""
    with pytest.raises(CriteriaError, match=re.escape(message)):
        OperatingWindow(**kwargs)


def test_the_largest_window_is_accepted():
    w = OperatingWindow(
        temp_range=(-150.0, 50.0), temp_step=0.1, freq_range=(1e-6, 1e9), freq_points=500
    )
    assert w.temperatures.size == window_module.MAX_WINDOW_TEMPERATURES == 2001
    assert w.frequencies.size == window_module.MAX_WINDOW_FREQUENCIES == 500
    assert w.temperatures[0] == -150.0 and w.temperatures[-1] == pytest.approx(50.0)


def test_a_window_too_large_for_the_library_is_refused_before_evaluation(monkeypatch):
    """Grades x window points are counted before any array is made."""
    bank = flat_bank(np.full(5, 1e6), 0.1, "tensile")
    w = OperatingWindow()  # 17 temperatures x 13 frequencies and an 81-point path
    per_grade = w.temperatures.size * w.frequencies.size + 82
    monkeypatch.setattr(window_module, "MAX_WINDOW_VALUES", 4 * per_grade)
    with pytest.raises(CriteriaError, match=r"over 5 grades asks for 1,515 values, more than"):
        evaluate_window(bank, w, np.full(5, np.nan))
    monkeypatch.setattr(window_module, "MAX_WINDOW_VALUES", 5 * per_grade)
    props = evaluate_window(bank, w, np.full(5, np.nan))
    assert props.storage.shape == (5, 17, 13)


@pytest.mark.parametrize(
    ("values", "message"),
    [
        ([20.0, -300.0], "--temp: -300 degC is below absolute zero"),
        ([float("nan")], "--temp: nan is not a number of degC"),
        ([1e9], "--temp: 1e+09 degC is outside -150 to 400 degC"),
        ([0.0] * 2002, "--temp: 2,002 values; at most 2,001 are accepted"),
    ],
)
def test_query_temperatures_are_checked(values, message):
    with pytest.raises(CriteriaError, match=re.escape(message)):
        check_temperatures(values, "--temp")


@pytest.mark.parametrize(
    ("values", "message"),
    [
        ([0.0], "--freq: 0 Hz; frequencies must be positive"),
        ([float("inf")], "--freq: inf is not a number of Hz"),
        ([1e-310], "--freq: 1e-310 Hz is outside 1e-06 to 1e+09 Hz"),
    ],
)
def test_query_frequencies_are_checked(values, message):
    with pytest.raises(CriteriaError, match=re.escape(message)):
        check_frequencies(values, "--freq")


def test_query_values_within_the_limits_pass_as_arrays():
    np.testing.assert_array_equal(check_temperatures(23.0), [23.0])
    np.testing.assert_array_equal(check_temperatures([-150.0, 400.0]), [-150.0, 400.0])
    np.testing.assert_array_equal(check_frequencies([1e-6, 1e9]), [1e-6, 1e9])


def _blas_threads() -> list[int]:
    from threadpoolctl import threadpool_info

    return [i["num_threads"] for i in threadpool_info() if i["user_api"] == "blas"]


def test_fit_workers_run_blas_on_one_thread_and_leave_the_caller_as_it_was():
    # Several BLAS threads per worker process on a machine with as many cores as workers
    # made fitting four times slower (common practice: one BLAS thread per process).
    pytest.importorskip("threadpoolctl")
    from concurrent.futures import ProcessPoolExecutor

    before = _blas_threads()
    with ProcessPoolExecutor(max_workers=1, initializer=fits._one_blas_thread) as pool:
        in_worker = pool.submit(_blas_threads).result()
    assert in_worker and set(in_worker) == {1}
    assert _blas_threads() == before
