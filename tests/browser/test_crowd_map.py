"""The map of a library too large to draw grade by grade, in a real browser.

A second dashboard server (conftest.py) serves CROWD_GRADES grades (tests/crowd.py), more
than ``charts.CROWD_LIMIT``: apart from the top ranks and the first grades of the
comparison set, grades share an SVG line trace of their paths and a WebGL trace of their
marks. The checks: the map and its WebGL canvas are drawn without an exception; a box
over shared-trace grades puts into the comparison set exactly the grades with a path
point inside it; hovering the mark of an excluded shared-trace grade shows the reasons it
is excluded. The paths and the reasons expected come from the engine's own ranking of
the same library, placed on screen through the axes the page reports.
"""

from __future__ import annotations

import numpy as np
import pytest

from dashboard import charts
from tests.browser import driving as drive
from tests.crowd import CROWD_GRADES
from tests.helpers import SHOTS

pytestmark = pytest.mark.browser

# The plot area [viewport px], the axis ranges [log10 of the data], the grades whose marks
# are on a shared WebGL trace, and whether each WebGL canvas holds a live context. The
# traces and axes are read from the figure JSON on the chart (``.data``, ``.layout``).
FRAME_JS = (
    """(plot) => {"""
    + drive.FIGURE_JS
    + """
  const gd = document.querySelector(plot);
  const r = gd.querySelector('.nsewdrag').getBoundingClientRect();
  const shared = gd.data.filter(t => t.type === 'scattergl')
    .flatMap(t => values(t.customdata).map(row => row[0]));
  return {
    box: {x: r.x, y: r.y, w: r.width, h: r.height},
    x: gd.layout.xaxis.range,
    y: gd.layout.yaxis.range,
    shared: [...new Set(shared)].sort(),
    gl: [...gd.querySelectorAll('canvas.gl-canvas-context')].map(c => {
      const ctx = c.getContext('webgl');
      return Boolean(ctx) && !ctx.isContextLost() && c.width > 0 && c.height > 0;
    }),
  };
}"""
)

# The lines of the hover label on show, or null.
HOVER_JS = """(plot) => {
  const label = document.querySelector(plot + ' .hoverlayer .hovertext text');
  if (!label) return null;
  const lines = [...label.querySelectorAll('tspan.line')].map(t => t.textContent);
  return lines.length ? lines : [label.textContent];
}"""


@pytest.fixture(scope="module")
def ranking(crowd_url):
    """The engine's ranking of the crowd library."""
    return drive.engine_result(crowd_url[1])


@pytest.fixture(scope="module")
def crowd(crowd_url, context, ranking):
    """One session on the crowd library's Map, shared by the tests that only look (the
    comparison set stays the default one), and the engine's ranking of the library."""
    with drive.map_session(context, crowd_url[0]) as page:
        yield page, ranking


@pytest.fixture
def own_crowd(crowd_url, context, ranking):
    """A session of its own on the crowd library's Map, for a test that changes the
    comparison set, and the engine's ranking of the library."""
    with drive.map_session(context, crowd_url[0]) as page:
        yield page, ranking


def engine_paths(result, frame: dict) -> dict:
    """Every grade's path from the engine, in viewport pixels through the page's axes,
    in the form ``drive.grades_in`` and ``drive.clear_box`` read."""
    props = result.window_props
    box = frame["box"]
    (xa, xb), (ya, yb) = frame["x"], frame["y"]
    x = box["x"] + (np.log10(props.path_loss_factor) - xa) / (xb - xa) * box["w"]
    y = box["y"] + (yb - np.log10(np.asarray(props.path_storage) / 1e6)) / (yb - ya) * box["h"]
    return {
        "box": box,
        "traces": [
            {"grade": gid, "points": list(zip(x[k], y[k], strict=True))}
            for k, gid in enumerate(props.ids)
        ],
    }


def test_a_large_library_draws_its_map_with_webgl_marks(crowd):
    page, result = crowd
    frame = drive.steady(page, FRAME_JS)
    assert len(result.grades) == CROWD_GRADES > charts.CROWD_LIMIT
    assert frame["gl"] and all(frame["gl"]), "no live WebGL canvas on the map"
    # On the shared traces: every grade but the top ranks and the first of the set.
    seeded = drive.chips(page)
    own = {g.id for g in result.shortlist[: charts.CROWD_TOP]} | set(seeded[: charts.CROWD_CHOSEN])
    assert frame["shared"] == sorted({g.id for g in result.grades} - own)
    drive.no_exception(page, "map of a large library")
    drive.shot(page, SHOTS / "07-crowd-map.png")


def test_hovering_an_excluded_shared_mark_shows_its_reasons(crowd):
    page, result = crowd
    page.locator(drive.PLOT).scroll_into_view_if_needed()
    frame = drive.steady(page, FRAME_JS)
    drawn = engine_paths(result, frame)
    box = frame["box"]
    bottom = min(box["y"] + box["h"], page.viewport_size["height"])  # the visible part
    grades = {g.id: g for g in result.grades}
    points = {t["grade"]: np.array(t["points"]) for t in drawn["traces"]}
    everything = np.vstack(list(points.values()))
    owner = np.repeat(list(points), [len(p) for p in points.values()])

    def isolated(gid: str, px: float, py: float, gap: float = 8.0) -> bool:
        """Inside the plot by ``gap`` [px] and farther than that from other grades' marks
        (the nearest mark under the pointer is the one Plotly labels)."""
        inside = box["x"] + gap < px < box["x"] + box["w"] - gap
        inside &= box["y"] + gap < py < bottom - gap
        near = np.hypot(everything[:, 0] - px, everything[:, 1] - py) < gap
        return bool(inside) and set(owner[near]) == {gid}

    target = next(
        (
            (gid, px, py)
            for gid in frame["shared"]
            if not grades[gid].passed
            for px, py in points[gid]
            if isolated(gid, px, py)
        ),
        None,
    )
    assert target, "no mark of an excluded shared-trace grade stands clear of the others"
    gid, px, py = target
    # From off the plot straight onto the mark: no hover on the way past other grades.
    page.mouse.move(box["x"] + box["w"] + 5, box["y"] - 20)
    page.mouse.move(px, py, steps=1)
    lines = page.wait_for_function(HOVER_JS, arg=drive.PLOT, timeout=10_000).json_value()
    reasons = "excluded: " + "; ".join(f.text() for f in grades[gid].failures)
    assert lines[0] == gid and lines[-1] == reasons
    page.mouse.move(box["x"] + box["w"] + 5, box["y"] - 20)  # off the plot, label and all
    drive.no_exception(page, "map after hovering")


def test_a_box_over_shared_marks_fills_the_comparison_set(own_crowd):
    page, result = own_crowd
    page.locator(drive.PLOT).scroll_into_view_if_needed()
    seeded = drive.chips(page)
    frame = drive.steady(page, FRAME_JS)
    drawn = engine_paths(result, frame)
    shared = set(frame["shared"])
    box = drive.clear_box(drawn, want=lambda grades: bool(shared & set(grades)))
    inside = drive.grades_in(drawn, *box)
    assert inside != sorted(seeded)

    picked = drive.box_select(page, box, inside)
    assert picked == inside  # every grade with a path point in the box, no other
    assert shared & set(picked), "the box picked no grade drawn on the shared traces"
    drive.no_exception(page, "map of a large library after the box")
    drive.shot(page, SHOTS / "08-crowd-map-box.png")
