"""Driving and reading the dashboard in a real browser: shared by the browser tests.

Waiting for Streamlit's runs, reading the map's geometry and the comparison set from the
page, drawing a box on the map, screenshots, and the engine's own ranking of a library
for the expectations.
"""

from __future__ import annotations

import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from dashboard import case
from engine.library.fits import fit_library
from engine.library.store import Library
from engine.selection.ranking import RankResult, rank

CHARTED = ("Map", "Curves", "Mount")
STATUS = '[data-testid="stStatusWidget"]'
EXCEPTION = '[data-testid="stException"]'
MAIN = '[data-testid="stMain"]'
PLOT = '[data-testid="stPlotlyChart"] .js-plotly-plot'
TRACE = f"{PLOT} .scatterlayer .trace"
CHIPS = ".st-key-compare_pick span[data-tag]"
WIDTH = 1280
CHIPS_JS = "(chips) => [...document.querySelectorAll(chips)].map(e => e.getAttribute('aria-label'))"

# Reading the figure a chart draws: the traces and layout of its figure JSON, which Plotly
# keeps on the chart's element as ``.data`` and ``.layout`` (no internals of Plotly). An
# array there is a JSON list or a typed array ``{dtype, bdata, shape}`` (base64 bytes).
FIGURE_JS = """
  const TYPED = {f8: Float64Array, f4: Float32Array, i4: Int32Array, u4: Uint32Array,
    i2: Int16Array, u2: Uint16Array, i1: Int8Array, u1: Uint8Array, u1c: Uint8ClampedArray};
  const values = (v) => {
    if (v == null) return [];
    if (!v.bdata) return Array.from(v);
    const bytes = Uint8Array.from(atob(v.bdata), (c) => c.charCodeAt(0));
    const flat = Array.from(new TYPED[v.dtype](bytes.buffer));
    const shape = typeof v.shape === 'string' ? v.shape.split(',').map(Number) : v.shape;
    if (!shape || shape.length < 2) return flat;
    const n = flat.length / shape[0];
    return Array.from({length: shape[0]}, (_, k) => flat.slice(k * n, (k + 1) * n));
  };
  // Data to viewport pixels through an axis of the layout: its type and range, and the
  // plot area on screen (the drag rectangle Plotly lays over it).
  const scale = (axis, start, length, flip) => {
    const [a, b] = axis.range;
    const f = axis.type === 'log' ? Math.log10 : Number;
    return flip ? (v) => start + (b - f(v)) / (b - a) * length
                : (v) => start + (f(v) - a) / (b - a) * length;
  };
"""

# Every point of every grade's path on the map, in viewport pixels, and each path's width.
MAP_POINTS_JS = (
    """(plot) => {"""
    + FIGURE_JS
    + """
  const gd = document.querySelector(plot);
  const r = gd.querySelector('.nsewdrag').getBoundingClientRect();
  const px = scale(gd.layout.xaxis, r.x, r.width, false);
  const py = scale(gd.layout.yaxis, r.y, r.height, true);
  return {
    box: {x: r.x, y: r.y, w: r.width, h: r.height},
    traces: gd.data.filter(t => t.legendgroup).map(t => {
      const xs = values(t.x), ys = values(t.y);
      return {
        grade: t.legendgroup,
        width: t.line ? t.line.width : undefined,
        points: xs.map((x, k) => [px(x), py(ys[k])]),
      };
    }),
  };
}"""
)

# Rows on screen of the first data frame under ``where`` whose columns begin with ``headers``.
TABLE_JS = """([where, headers]) => {
  for (const frame of document.querySelectorAll(where + ' [data-testid="stDataFrame"]')) {
    const shown = [...frame.querySelectorAll('thead th')].map(th => th.innerText);
    if (headers.every((h, k) => shown[k] === h)) {
      const rows = [...frame.querySelectorAll('tbody tr')]
        .map(tr => [...tr.querySelectorAll('td')].map(td => td.innerText));
      if (rows.length) return rows;
    }
  }
  return null;
}"""


def settle(page) -> None:
    """Wait until Streamlit has finished the run that the last action started."""
    page.wait_for_timeout(300)  # a rerun starts a moment after the browser event
    page.locator(STATUS).wait_for(state="detached", timeout=60_000)


def wait_heading(page, title: str) -> None:
    page.locator(f'{MAIN} [data-testid="stHeading"]').filter(has_text=title).first.wait_for()
    if title in CHARTED:
        page.locator(TRACE).first.wait_for()
    settle(page)


def open_page(page, url: str, path: str, title: str) -> None:
    """Load the dashboard at ``path`` (a new session) and wait until it is drawn."""
    page.goto(f"{url}/{path}")
    wait_heading(page, title)


def nav(page, title: str) -> None:
    """Go to a page by the top navigation (same session, no reload) unless already there."""
    heading = page.locator(f'{MAIN} [data-testid="stHeading"]').first
    if heading.count() and heading.inner_text().strip() == title:
        return
    page.get_by_role("link", name=title, exact=True).click()
    wait_heading(page, title)


def main_text(page) -> str:
    return " ".join(page.locator(MAIN).inner_text().split())


# Bottom of the page's content [px]: the main column's blocks and the sidebar's.
CONTENT_BOTTOM_JS = """() => {
  const parts = document.querySelectorAll(
    '[data-testid="stMainBlockContainer"], [data-testid="stSidebarUserContent"]');
  return Math.max(...[...parts].map(e => e.getBoundingClientRect().bottom));
}"""


def shot(page, path: Path) -> Path:
    """Screenshot 1280 px wide and exactly as tall as the content (Streamlit scrolls inside).

    The viewport only grows, so a later shot on the same page rarely redraws the charts;
    the picture is clipped to the content.
    """
    want = int(min(max(page.evaluate(CONTENT_BOTTOM_JS) + 24, 900), 6000))
    if want > page.viewport_size["height"]:
        page.set_viewport_size({"width": WIDTH, "height": want})
        page.wait_for_timeout(500)  # Plotly and the data grids redraw for the new size
        settle(page)
        want = int(min(max(page.evaluate(CONTENT_BOTTOM_JS) + 24, 900), want))
    path.parent.mkdir(parents=True, exist_ok=True)
    page.screenshot(path=str(path), clip={"x": 0, "y": 0, "width": WIDTH, "height": want})
    return path


def table_rows(page, *headers: str) -> list[list[str]]:
    """Rows on screen of the first main-area data frame whose columns begin with ``headers``.

    Streamlit draws data frames on a canvas; the grid keeps an accessible table of the
    cells on screen, which is what is read here (waiting until it has rows).
    """
    return page.wait_for_function(TABLE_JS, arg=[MAIN, list(headers)], timeout=20_000).json_value()


def poll(read, done, timeout: float = 20.0, every: float = 0.25):
    """Call ``read`` until ``done`` accepts its value or ``timeout`` [s] passes; the value."""
    deadline = time.monotonic() + timeout
    value = read()
    while not done(value) and time.monotonic() < deadline:
        time.sleep(every)
        value = read()
    return value


def chips(page) -> list[str]:
    """The comparison set as its multiselect lists it (read at one moment)."""
    return page.evaluate(CHIPS_JS, CHIPS)


def grades_in(drawn: dict, x0: float, x1: float, y0: float, y1: float) -> list[str]:
    """Grades with a path point inside the pixel box (x0, x1) x (y0, y1)."""
    return sorted(
        t["grade"]
        for t in drawn["traces"]
        if any(x0 < x < x1 and y0 < y < y1 for x, y in t["points"])
    )


def clear_box(drawn: dict, margin: float = 3.0, want=bool) -> tuple[float, float, float, float]:
    """A box in the upper left of the plot (the stiff, lightly damped corner) whose
    grades ``want`` accepts (by default: some grades) and that has no path point within
    ``margin`` [px] of its edges."""
    box = drawn["box"]
    for right, bottom in ((0.45, 0.25), (0.35, 0.2), (0.55, 0.3)):
        for dx in range(0, 60, 6):
            x0, x1 = box["x"] + 4 + dx, box["x"] + right * box["w"] + dx
            y0, y1 = box["y"] + 4, box["y"] + bottom * box["h"]
            small = grades_in(drawn, x0 + margin, x1 - margin, y0 + margin, y1 - margin)
            large = grades_in(drawn, x0 - margin, x1 + margin, y0 - margin, y1 + margin)
            if want(small) and small == large:
                return x0, x1, y0, y1
    raise AssertionError("no clear box over the map's paths: the test box needs moving")


def steady(page, js: str):
    """``page.evaluate(js, PLOT)`` once two reads 0.3 s apart agree: the plot has stopped
    moving (layout and resizes settle)."""
    last = {}

    def same(value):
        agree, last["v"] = value == last.get("v"), value
        return agree

    return poll(lambda: page.evaluate(js, PLOT), same, timeout=10.0, every=0.3)


def box_select(page, box: tuple[float, float, float, float], want: list[str]) -> list[str]:
    """Drag the box (x0, x1, y0, y1) [viewport px] on the map; the comparison set, sorted,
    once it is ``want`` (sorted) and the run it started is done, or after 20 s."""
    x0, x1, y0, y1 = box
    page.mouse.move(x0, y0)
    page.mouse.down()
    page.mouse.move((x0 + x1) / 2, (y0 + y1) / 2, steps=6)
    page.mouse.move(x1, y1, steps=6)
    page.mouse.up()
    if sorted(poll(lambda: chips(page), lambda now: sorted(now) == want)) == want:
        settle(page)
    return sorted(chips(page))


def map_grades(page) -> list[str]:
    return [t["grade"] for t in page.evaluate(MAP_POINTS_JS, PLOT)["traces"]]


def no_exception(page, where: str) -> None:
    boxes = page.locator(EXCEPTION)
    assert boxes.count() == 0, f"{where}: " + " | ".join(boxes.all_inner_texts())


@contextmanager
def map_session(context, url: str) -> Iterator:
    """A page of ``context`` opened on the Map of the dashboard at ``url`` (a new session)."""
    page = context.new_page()
    page.set_default_timeout(60_000)
    open_page(page, url, "", "Map")
    yield page
    page.close()


def engine_result(db: Path, **state) -> RankResult:
    """The engine's own ranking of the library ``db`` for the default case, with the
    case settings ``state`` (dashboard keys, e.g. ``c_temp``) changed."""
    lib = Library(str(db))
    criteria = case.criteria_from_state({**case.default_state(), **state})
    curves, errors = fit_library(lib, processes=1)
    return rank(curves, {m.id: m for m in lib.materials()}, criteria, errors)
