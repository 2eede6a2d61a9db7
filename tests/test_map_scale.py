"""The map of a very large library: which grades are drawn, which are only counted in
the shading, and selection and search over all of them.

The ranking is of grades cloned in memory from the demo grades (tests/crowd.py), more
than ``charts.map.THIN_LIMIT``; the data are input only. The checks are counts and set
identities (every grade shown is drawn or counted, exactly once), brute-force oracles
(the shading against a loop over each grade's points, a box against a filter of the
path values, a convex lasso against the half-plane test of its edges) and what the
figure hands to the browser.
"""

from __future__ import annotations

import numpy as np
import pytest

from dashboard.charts import map as chart
from engine.output import mapfigure
from engine.output.palette import grade_colours, log_span
from tests.crowd import large_ranking

GRADES = 1500  # more than chart.THIN_LIMIT


@pytest.fixture(scope="module")
def result():
    return large_ranking(GRADES)


@pytest.fixture(scope="module")
def chosen(result):
    """A comparison set of 40 grades spread over the whole ranking, excluded ones too."""
    ids = [g.id for g in result.grades]
    return ids[:: len(ids) // 40][:40]


def _paths(result):
    _, storage, eta = mapfigure.path_arrays(result)
    return storage, eta


def _partition_holds(result, plan, chosen, shown):
    ids = result.window_props.ids
    parts = [plan.own_rows, plan.picked, plan.drawn, plan.aggregated]
    union = [k for part in parts for k in part]
    assert len(union) == len(set(union)), "a grade is in two parts"
    assert sorted(union) == sorted(shown), "a grade shown is neither drawn nor counted"
    drawn = {ids[k] for k in (*plan.own_rows, *plan.picked, *plan.drawn)}
    passing = [g.id for g in result.shortlist]
    in_set = [g for g in chosen if g in {ids[k] for k in shown}]
    assert set(passing[: chart.CROWD_TOP]) <= drawn, "a top rank is not drawn"
    assert set(in_set) <= drawn, "a grade of the comparison set is not drawn"
    assert {ids[k] for k in plan.aggregated}.isdisjoint(in_set)


def test_every_grade_shown_is_drawn_or_counted_once(result, chosen):
    shown = mapfigure.shown_rows(result, True)
    plan = chart.crowd_plan(result, shown, chosen)
    assert len(shown) == GRADES > chart.THIN_LIMIT
    assert plan.thinned and len(plan.drawn) == chart.THIN_DRAWN
    _partition_holds(result, plan, chosen, shown)
    drawn_total = len(plan.own_rows) + len(plan.picked) + len(plan.drawn)
    assert drawn_total + len(plan.aggregated) == GRADES
    assert f"{drawn_total:,} of {GRADES:,} grades drawn" in plan.note()
    assert f"the other {len(plan.aggregated):,}" in plan.note()


def test_passing_grades_only_still_partition(result, chosen):
    shown = mapfigure.shown_rows(result, False)
    plan = chart.crowd_plan(result, shown, chosen)
    _partition_holds(result, plan, chosen, shown)
    assert all(
        g.passed for g in result.grades if g.id in {result.window_props.ids[k] for k in shown}
    )


def test_thinning_keeps_the_best_ranks_and_is_repeatable(result, chosen):
    shown = mapfigure.shown_rows(result, True)
    plan = chart.crowd_plan(result, shown, chosen)
    again = chart.crowd_plan(result, list(shown), list(chosen))
    assert plan == again
    ids = result.window_props.ids
    own_or_set = {ids[k] for k in (*plan.own_rows, *plan.picked)}
    best = [g.id for g in result.shortlist if g.id not in own_or_set][: chart.THIN_DRAWN // 2]
    assert set(best) <= {ids[k] for k in plan.drawn}
    # The spread reaches the end of the drawing order: some excluded grade is drawn too.
    assert any(not g.passed for g in result.grades if g.id in {ids[k] for k in plan.drawn})


def test_smaller_libraries_are_not_thinned(result):
    shown = mapfigure.shown_rows(result, True)
    few = chart.crowd_plan(result, shown[: chart.CROWD_LIMIT], [])
    assert few.own is None and few.own_rows == tuple(shown[: chart.CROWD_LIMIT])
    some = chart.crowd_plan(result, shown[: chart.THIN_LIMIT], [])
    assert not some.thinned and len(some.own_rows) + len(some.drawn) == chart.THIN_LIMIT


def test_the_shading_counts_each_grade_once_per_cell(result, chosen):
    """Against a loop over every grade's path points (brute force)."""
    shown = mapfigure.shown_rows(result, True)
    plan = chart.crowd_plan(result, shown, chosen)
    storage, eta = _paths(result)
    rows = list(plan.aggregated)
    xs = np.linspace(*log_span(eta[rows], 0.01), 13)
    ys = np.linspace(*log_span(storage[rows], 0.01), 11)
    status = {g.id: g.passed for g in result.grades}
    flags = np.array([status[gid] for gid in result.window_props.ids])
    counts, passing = chart.density_counts(eta, storage, rows, xs, ys, flags)
    want = np.zeros_like(counts)
    want_passing = np.zeros_like(counts)
    for k in rows:
        cells = set()
        for e, s in zip(eta[k], storage[k], strict=True):
            i = min(int(np.searchsorted(xs, np.log10(e), side="right")) - 1, len(xs) - 2)
            j = min(int(np.searchsorted(ys, np.log10(s), side="right")) - 1, len(ys) - 2)
            cells.add((j, i))
        for j, i in cells:
            want[j, i] += 1
            want_passing[j, i] += flags[k]
    np.testing.assert_array_equal(counts, want)
    np.testing.assert_array_equal(passing, want_passing)
    # Every counted grade is in some cell: the grid spans all its points.
    assert (counts > 0).any() and counts.sum() >= len(rows)


def test_a_grade_inside_one_cell_counts_once():
    eta = np.array([[0.1, 0.11, 0.12], [0.1, 1.0, 0.1], [np.nan, 0.1, 0.1]])
    storage = np.ones_like(eta)
    counts, _ = chart.density_counts(
        eta, storage, [0, 1, 2], np.array([-2, -0.5, 0.5]), np.array([-1, 1])
    )
    np.testing.assert_array_equal(counts, [[3, 1]])


def test_a_box_picks_every_grade_with_a_point_inside(result):
    """Against a filter of the ranking's path values, drawn grades or not."""
    storage, eta = _paths(result)
    ids = result.window_props.ids
    shown = mapfigure.shown_rows(result, True)
    rng = np.random.default_rng(3)
    for _ in range(8):
        x0, x1 = np.sort(10.0 ** rng.uniform(np.log10(eta.min()), np.log10(eta.max()), 2))
        y0, y1 = np.sort(10.0 ** rng.uniform(np.log10(storage.min()), np.log10(storage.max()), 2))
        inside = (eta >= x0) & (eta <= x1) & (storage >= y0) & (storage <= y1)
        want = {ids[k] for k in np.flatnonzero(inside.any(axis=1))}
        # The box as the map reports it: data units, corners in drawing order.
        got = chart.grades_in_region(result, shown, box={"x": [x1, x0], "y": [y0, y1]})
        assert set(got) == want and len(got) == len(want)
    everything = chart.grades_in_region(
        result, shown, box={"x": [eta.min(), eta.max()], "y": [storage.min(), storage.max()]}
    )
    assert everything == [g.id for g in result.grades]  # ranking order, all of them


def test_a_convex_lasso_picks_the_points_inside_all_its_edges(result):
    """Against the half-plane test: a point is inside a convex polygon listed counter-
    clockwise when it is left of every edge (common practice)."""
    storage, eta = _paths(result)
    ids = result.window_props.ids
    lx, ly = np.log10(eta), np.log10(storage)
    cx, cy = np.median(lx), np.median(ly)
    angles = np.linspace(0.0, 2 * np.pi, 7)[:-1]
    px, py = cx + 0.5 * np.cos(angles), cy + 0.3 * np.sin(angles)
    inside = np.ones(lx.shape, dtype=bool)
    for xa, ya, xb, yb in zip(px, py, np.roll(px, -1), np.roll(py, -1), strict=True):
        inside &= (xb - xa) * (ly - ya) - (yb - ya) * (lx - xa) > 0
    want = {ids[k] for k in np.flatnonzero(inside.any(axis=1))}
    assert want, "the lasso holds no grade: move it"
    lasso = {"x": list(10.0**px), "y": list(10.0**py)}
    got = chart.grades_in_region(result, mapfigure.shown_rows(result, True), lasso=lasso)
    assert set(got) == want


def test_a_selection_event_picks_from_the_grades_shown(result):
    storage, eta = _paths(result)
    box = {
        "xref": "x",
        "yref": "y",
        "x": [eta.min(), eta.max()],
        "y": [storage.max(), storage.min()],
    }
    event = {"points": [], "point_indices": [], "box": [box], "lasso": []}
    every = chart.selected_grades(result, event, show_excluded=True)
    passing = chart.selected_grades(result, event, show_excluded=False)
    assert len(every) == GRADES
    assert passing == [g.id for g in result.shortlist]
    only_points = {"points": [{"customdata": ["RANK-00007", 20.0]}], "box": [], "lasso": []}
    assert chart.selected_grades(result, only_points, True) == ["RANK-00007"]


def test_search_finds_grades_by_id_or_name_among_all(result):
    found, total = chart.find_grades(result, "rank-0149")
    assert total == 10 and set(found) == {f"RANK-0149{d}" for d in range(10)}
    found, total = chart.find_grades(result, "  BENCH   grade 1499 ")
    assert found == ["RANK-01499"] and total == 1
    found, total = chart.find_grades(result, "bench grade")
    assert total == GRADES and len(found) == chart.FIND_LIMIT
    assert found == [g.id for g in result.grades][: chart.FIND_LIMIT]
    assert chart.find_grades(result, "   ") == ([], 0)


def test_the_figure_draws_the_plan_and_shades_the_rest(result, chosen):
    fig = chart.map_figure(result, grade_colours(result.window_props.ids), chosen)
    plan = chart.crowd_plan(result, mapfigure.shown_rows(result, True), chosen)
    ids = result.window_props.ids
    own = {t.legendgroup for t in fig.data if t.type == "scatter" and t.mode == mapfigure.PATH_MODE}
    marked = [t for t in fig.data if t.type != "heatmap" and t.mode == "markers"]
    assert marked and all(t.type == "scatter" for t in marked)  # few marks: SVG, no WebGL
    shared = {row[0] for t in marked for row in t.customdata}
    assert own == {ids[k] for k in plan.own_rows}
    assert shared == {ids[k] for k in (*plan.picked, *plan.drawn)}
    heat = [
        t
        for t in fig.data
        if t.type == "heatmap" and t.hovertemplate.startswith("%{customdata[0]}")
    ]
    assert len(heat) == 1
    counts = np.asarray(heat[0].customdata)[..., 0]
    assert counts.sum() >= len(plan.aggregated) and (counts >= 0).all()
    # Marks (hover) every 10 K and at the ends of each drawn path, not at every point.
    temps = np.asarray(result.window_props.path_temperatures)
    marks = sum(len(t.x) for t in marked)
    per_grade = marks / len(shared)
    assert per_grade < temps.size / 4
