"""Rank intervals and the data's uncertainty in the ranking (engine.selection.spread).

The grades are master curves fitted to sweeps of the known model of
:mod:`tests.synthetic`: a noisy sweep, the same sweep with a tiny extra scatter (a near
twin, which the data cannot tell apart), and the same sweep moved 30 K up the
temperature axis (a clearly different grade). The intervals are checked against their
definition written out with numpy (numpy.percentile, linear between order statistics,
over one ranking per draw with :func:`engine.selection.ranking.rank`); the exports are read back
with pandas and openpyxl.
"""

from __future__ import annotations

import dataclasses
import html
import io
import sqlite3
import warnings
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest

from dashboard import tables
from engine.base.errors import LibraryError
from engine.curves.mastercurve import build_master_curve
from engine.curves.mountcheck import MountDesign
from engine.curves.window import OperatingWindow
from engine.library.fits import fit_library
from engine.output.export import RANK_INTERVAL_COLUMNS, interval_heading, shortlist_csv
from engine.output.report import report_html
from engine.output.workbook import shortlist_xlsx
from engine.selection.ranking import UNCERTAIN, Constraints, Criteria, rank
from engine.selection.spread import (
    MOUNT_SERIES,
    NO_DRAWS_NOTE,
    PERCENTILES,
    SWAP_SHARE,
    rank_spread,
)
from tests import synthetic
from tests.helpers import material

ROOT = Path(__file__).resolve().parent.parent
POINTS = synthetic.sweep(noise=0.01, seed=1)


def _twin_points() -> np.ndarray:
    """POINTS with a further 0.1 % scatter in E' and 0.2 % in the loss factor."""
    rng = np.random.default_rng(5)
    q = POINTS.copy()
    q[:, 2] *= np.exp(rng.normal(0.0, 0.001, len(q)))
    q[:, 3] *= np.exp(rng.normal(0.0, 0.002, len(q)))
    return q


def _hot_points() -> np.ndarray:
    q = POINTS.copy()
    q[:, 0] += 30.0
    return q


TWIN_A = build_master_curve(POINTS, "tensile")
TWIN_B = build_master_curve(_twin_points(), "tensile")
HOT = build_master_curve(_hot_points(), "tensile")
WINDOW = OperatingWindow(
    temp_range=(-10.0, 40.0), temp_step=5.0, freq_range=(10.0, 100.0), freq_points=5
)
OPEN = Criteria(
    window=WINDOW, constraints=Constraints(allow_extrapolation=True), screening_only=True
)
# The mount case sits on the model grades' rubbery plateau (70-90 degC), where pads sized
# for 20 Hz at 80 degC carry the load, stand up and isolate 50 and 100 Hz for all three;
# nearer their transition the twins' pads would sag or amplify and fail the mount limits
# (which stay on). The static-strain limit is lifted: only the intervals matter here.
MOUNT_WINDOW = dataclasses.replace(WINDOW, temp_range=(70.0, 90.0))
MOUNT = Criteria(
    window=MOUNT_WINDOW,
    constraints=Constraints(allow_extrapolation=True, max_static_strain=1e3),
    mount=MountDesign(
        thickness_mm=25.0, target_fn_Hz=20.0, sizing_temp_C=80.0, disturbance_Hz=(50.0, 100.0)
    ),
)
NAMES = [c.name for c in MOUNT.indices]  # the isolation mount's default indices


def _without_draws(curve):
    """The curve as one stored before draws existed (its cache of draws emptied too)."""
    return dataclasses.replace(curve, draws=None, _tables={})


def _ranked(curves, criteria=OPEN, **spread):
    mats = {gid: material(gid) for gid in curves}
    fitted = rank(curves, mats, criteria)
    return fitted, rank_spread(fitted, curves, mats, **spread), mats


def test_intervals_follow_their_definition_over_one_ranking_per_draw():
    # The definition, written out: for each draw k a ranking of the k-th draws (in each
    # grade's own order) by engine.selection.ranking.rank; then numpy.percentile over the draws.
    curves = {"TWIN-A": TWIN_A, "TWIN-B": TWIN_B, "HOT": HOT}
    fitted, result, mats = _ranked(curves, MOUNT)
    lead = [g.id for g in fitted.shortlist]
    assert len(lead) == 3 and result.spread.leading == tuple(lead)
    n_draws = len(TWIN_A.draw_curves())
    assert result.spread.draws == n_draws == 32
    ranks, values, fn, worst_t = [], [], [], []
    for k in range(n_draws):
        drawn = {g: curves[g].draw_curves()[k] for g in lead}
        one = rank(drawn, mats, MOUNT)
        by_id = {g.id: g for g in one.grades}
        order = sorted(lead, key=lambda g: -by_id[g].raw_score)
        ranks.append([order.index(g) + 1 for g in lead])
        values.append([[by_id[g].indices[n] for n in NAMES] for g in lead])
        fn.append([by_id[g].mount["natural_frequency_Hz"] for g in lead])
        worst_t.append([np.nanmax(by_id[g].mount["transmissibility"]) for g in lead])
    ranks, values = np.array(ranks), np.array(values)
    fn, worst_t = np.array(fn), np.array(worst_t)
    for j, g in enumerate(result.shortlist):
        low, high = np.percentile(ranks[:, j], PERCENTILES)
        best, worst = g.rank_interval
        assert best == min(round(low), g.rank) and worst == max(round(high), g.rank)
        assert best <= g.rank <= worst
        for i, name in enumerate(NAMES):
            lo, hi = np.percentile(values[:, j, i], PERCENTILES)
            v = g.indices[name]
            assert g.index_interval(name) == pytest.approx((min(lo, v), max(hi, v)), rel=1e-9)
        lo, hi = np.percentile(fn[:, j], PERCENTILES, axis=0)
        figs = g.mount
        v = np.asarray(figs["natural_frequency_Hz"])
        np.testing.assert_allclose(figs["natural_frequency_Hz_low"], np.fmin(lo, v), rtol=1e-9)
        np.testing.assert_allclose(figs["natural_frequency_Hz_high"], np.fmax(hi, v), rtol=1e-9)
        lo, hi = np.percentile(worst_t[:, j], PERCENTILES)
        v = np.nanmax(figs["transmissibility"])
        summary = g.spread.mount_summary["worst_transmissibility"]
        assert summary == pytest.approx((min(lo, v), max(hi, v)), rel=1e-9)


def test_every_interval_holds_its_fitted_value():
    _, result, _ = _ranked({"TWIN-A": TWIN_A, "TWIN-B": TWIN_B, "HOT": HOT}, MOUNT)
    for g in result.shortlist:
        best, worst = g.rank_interval
        assert isinstance(best, int) and isinstance(worst, int)
        assert 1 <= best <= g.rank <= worst <= len(result.shortlist)
        for name, v in g.indices.items():
            lo, hi = g.index_interval(name)
            assert lo <= v <= hi
        figs = g.mount
        for name in MOUNT_SERIES:
            v = np.asarray(figs[name])
            assert np.all(np.asarray(figs[f"{name}_low"]) <= v)
            assert np.all(v <= np.asarray(figs[f"{name}_high"]))
            assert np.asarray(figs[f"{name}_low"]).shape == v.shape
        # Sized for 10 Hz at 23 degC, every draw resizes its pad, so the fn range is
        # narrow but not a point (common practice of the sizing; no outside value).
        lo, hi = g.spread.mount_summary["fn_min_Hz"]
        assert 0.0 < lo <= hi


def test_a_fit_without_draws_keeps_a_single_rank():
    exact = _without_draws(TWIN_A)
    assert exact.draw_curves() == []
    _, result, _ = _ranked({"EXACT": exact, "HOT": HOT})
    first, second = result.shortlist
    assert first.id == "EXACT"
    assert first.rank_interval == [1, 1] and second.rank_interval == [2, 2]
    assert first.spread.exact and not second.spread.exact
    for name, v in first.indices.items():
        assert first.index_interval(name) == pytest.approx((v, v), rel=1e-12)
    assert NO_DRAWS_NOTE in first.notes
    assert result.spread.without_draws == ("EXACT",)
    assert "EXACT" in result.spread.describe()
    assert UNCERTAIN not in first.reason and UNCERTAIN not in second.reason


def test_near_twins_cannot_be_told_apart_and_a_different_grade_can():
    _, result, _ = _ranked({"TWIN-A": TWIN_A, "TWIN-B": TWIN_B, "HOT": HOT})
    by_id = {g.id: g for g in result.shortlist}
    twins = [g.id for g in result.shortlist[:2]]
    assert sorted(twins) == ["TWIN-A", "TWIN-B"] and result.shortlist[2].id == "HOT"
    a, b = (by_id[t] for t in twins)
    assert a.spread.flips[b.id] > SWAP_SHARE
    assert f"{UNCERTAIN} of {b.id}" in a.reason
    assert f"{UNCERTAIN} of {a.id}" in b.reason
    assert a.rank_interval == [1, 2] and b.rank_interval == [1, 2]
    hot = by_id["HOT"]
    assert hot.spread.flips[b.id] == 0.0 and hot.spread.alongside == ()
    assert UNCERTAIN not in hot.reason and f"of {hot.id}" not in b.reason
    assert hot.rank_interval == [3, 3]
    # The phrase stands in the reason between the figures and the closing words.
    assert a.reason.startswith(f"rank {a.rank} of 3: ")
    assert a.reason.endswith("meets every constraint")


def test_only_the_leading_grades_get_intervals_and_excluded_grades_none():
    curves = {"TWIN-A": TWIN_A, "TWIN-B": TWIN_B, "HOT": HOT, "COLD-RATED": TWIN_A}
    mats = {gid: material(gid) for gid in curves}
    mats["COLD-RATED"] = material("COLD-RATED", service=(0.0, 150.0))  # misses -10 degC
    fitted = rank(curves, mats, OPEN)
    result = rank_spread(fitted, curves, mats, leading=2)
    assert result.spread.leading == tuple(g.id for g in fitted.shortlist[:2])
    for g in result.shortlist[2:] + result.excluded:
        assert g.spread is None and g.rank_interval is None
        assert g.index_interval("loss_factor") == (None, None)
    assert [g.id for g in result.excluded] == ["COLD-RATED"]
    assert "leading 2 grade(s)" in result.spread.describe()


def test_the_ranking_given_is_left_as_it_was():
    fitted, result, _ = _ranked({"TWIN-A": TWIN_A, "TWIN-B": TWIN_B})
    assert fitted.spread is None and all(g.spread is None for g in fitted.grades)
    assert all(UNCERTAIN not in g.reason for g in fitted.grades)
    assert [g.id for g in result.grades] == [g.id for g in fitted.grades]
    assert [g.score for g in result.grades] == [g.score for g in fitted.grades]


def test_curves_other_than_the_ranking_used_are_refused():
    fitted, _, mats = _ranked({"TWIN-A": TWIN_A, "HOT": HOT})
    with pytest.raises(LibraryError, match=r"no master curve or catalog row for HOT: "):
        rank_spread(fitted, {"TWIN-A": TWIN_A}, mats)
    with pytest.raises(LibraryError, match=r"catalog row for TWIN-A: the intervals need"):
        rank_spread(fitted, {"TWIN-A": TWIN_A, "HOT": HOT}, {"HOT": mats["HOT"]})


def test_without_any_draws_nothing_is_computed():
    curves = {"A": _without_draws(TWIN_A), "B": _without_draws(HOT)}
    _, result, _ = _ranked(curves)
    assert result.spread.draws == 0
    assert "not computed" in result.spread.describe()
    assert all(g.rank_interval is None for g in result.grades)


def test_no_passing_grade_no_intervals():
    mats = {"A": material("A", service=(0.0, 150.0))}
    fitted = rank({"A": TWIN_A}, mats, OPEN)
    result = rank_spread(fitted, {"A": TWIN_A}, mats)
    assert result.spread.leading == () and "No grade meets" in result.spread.describe()


def test_a_grade_at_a_limit_says_in_how_many_draws_it_passes():
    # The lowest loss factor allowed is the grade's own fitted worst case: the fitted
    # curve meets it, and the draws on either side of it fall on both sides.
    fitted, _, _ = _ranked({"TWIN-A": TWIN_A})
    limit = fitted.shortlist[0].worst_loss_factor
    edge = dataclasses.replace(
        OPEN, constraints=Constraints(allow_extrapolation=True, min_loss_factor=limit)
    )
    _, result, _ = _ranked({"TWIN-A": TWIN_A}, edge)
    g = result.shortlist[0]
    assert g.passed and 0.0 < g.spread.pass_share < 1.0 - SWAP_SHARE
    passing = round(g.spread.pass_share * 32)
    assert f"meets every constraint in {passing} of 32 draws" in "; ".join(g.notes)


# ------------------------------------------------------------------ what a user reads


@pytest.fixture(scope="module")
def twins():
    return _ranked({"TWIN-A": TWIN_A, "TWIN-B": TWIN_B, "HOT": HOT}, MOUNT)[1]


def test_csv_shows_rank_interval_and_the_note(twins):
    df = pd.read_csv(io.BytesIO(shortlist_csv(twins)), comment="#", encoding="utf-8-sig")
    best, worst = RANK_INTERVAL_COLUMNS
    assert list(df[best]) == [g.rank_interval[0] for g in twins.shortlist]
    assert list(df[worst]) == [g.rank_interval[1] for g in twins.shortlist]
    assert sum(UNCERTAIN in r for r in df["reason"]) == 2
    low = interval_heading("loss_factor (worst) [-]", "low")
    assert low == "loss_factor (worst) low [-]"
    lows = [g.index_interval("loss_factor")[0] for g in twins.shortlist]
    np.testing.assert_allclose(df[low], lows, rtol=5e-6)  # 6 significant figures
    assert {"fn min low [Hz]", "worst transmissibility high [-]"} <= set(df.columns)
    assert "max static deflection high [mm]" in df.columns


def test_xlsx_shows_rank_interval_and_the_note(twins):
    data = shortlist_xlsx(twins)
    short = pd.read_excel(io.BytesIO(data), sheet_name="Shortlist", header=1)
    best, worst = RANK_INTERVAL_COLUMNS
    assert list(short[best]) == [g.rank_interval[0] for g in twins.shortlist]
    assert list(short[worst]) == [g.rank_interval[1] for g in twins.shortlist]
    assert sum(UNCERTAIN in r for r in short["reason"]) == 2
    wb = openpyxl.load_workbook(io.BytesIO(data))
    assert twins.spread.describe() in wb["Shortlist"]["A1"].value
    crit = pd.read_excel(io.BytesIO(data), sheet_name="Criteria", header=1)
    assert twins.spread.describe() in set(crit["value"])


def test_html_shows_rank_interval_and_the_note(twins):
    text = report_html(twins)
    for g in twins.shortlist:
        best, worst = g.rank_interval
        assert f'<td class="num">{g.rank}<br><small>{best} to {worst}</small></td>' in text
    assert text.count(html.escape(f"{UNCERTAIN} of ")) == 2  # the page escapes the quote
    assert "95 % interval on the data" in text


def test_dashboard_table_shows_the_rank_interval(twins):
    frame = tables.shortlist_frame(twins)
    expected = ["{}–{}".format(*g.rank_interval) for g in twins.shortlist]
    assert list(frame["rank interval"]) == expected
    assert frame["reason"].str.contains(UNCERTAIN).sum() == 2


def test_dashboard_shortlist_page_shows_the_rank_interval(demo_library, tmp_path, monkeypatch):
    # The page of the dashboard, driven headless, against the engine's own intervals.
    pytest.importorskip("streamlit")
    from streamlit.testing.v1 import AppTest

    from dashboard import case

    db = tmp_path / "copy.sqlite"
    with sqlite3.connect(demo_library.location) as src, sqlite3.connect(db) as dst:
        src.backup(dst)
    monkeypatch.setenv("QUIETGRADE_DB", str(db))
    # The default mount isolates no demo grade; the link sizes 25 mm pads for 10 Hz over
    # a window where some do, so the page has a shortlist.
    link = {"t": "-20,45", "f": "10,100", "mh": "25", "mt": "10"}
    at = AppTest.from_file(str(ROOT / "dashboard" / "app.py"), default_timeout=60)
    for key, value in link.items():
        at.query_params[key] = value
    at.run()
    at.switch_page("views/shortlist.py").run()
    assert not at.exception
    frame = next(d.value for d in at.dataframe if "rank interval" in d.value.columns)
    curves, _ = fit_library(demo_library, processes=1)
    mats = {m.id: m for m in demo_library.materials()}
    state, notes = case.from_query(link)
    assert notes == []
    fitted = rank(curves, mats, case.criteria_from_state(state))
    engine = rank_spread(fitted, curves, mats)
    assert len(engine.shortlist) >= 2
    assert list(frame["grade"]) == [g.id for g in engine.shortlist]
    assert list(frame["rank interval"]) == [
        "{}–{}".format(*g.rank_interval) for g in engine.shortlist
    ]
    assert list(frame["reason"]) == [g.reason for g in engine.shortlist]
    assert any(engine.spread.describe() in c.value for c in at.caption)


@pytest.mark.parametrize("seed", range(5))
def test_percentiles_of_every_column_at_once_equal_numpys_nanpercentile(seed):
    # numpy.nanpercentile (linear method) is the reference, column by column.
    from engine.selection.spread import PERCENTILES, nan_percentiles

    rng = np.random.default_rng(seed)
    samples = rng.lognormal(size=(32, 7, 5))
    samples[rng.random(samples.shape) < 0.3] = np.nan
    samples[:, 0, 0] = np.nan  # a column of NaN alone
    samples[:-1, 1, 1] = np.nan  # a column of one value
    samples[:, 2, 2] = np.inf
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        expected = np.nanpercentile(samples, PERCENTILES, axis=0)
    for got, want in zip(nan_percentiles(samples, PERCENTILES), expected, strict=True):
        np.testing.assert_array_equal(got, want)
