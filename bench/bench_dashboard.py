"""Dashboard rerun time after a change of the operating window.

The dashboard is driven headless by ``streamlit.testing.v1.AppTest`` (its own overhead
is part of every figure). For each library the app is run once to warm the caches (the
master curves are already fitted and cached in the library), then the temperature range
slider of the sidebar is moved and the rerun is timed:

- alternating between two ranges: after each range has been seen once its ranking and
  its map figure are cache hits, so this is the user going back and forth;
- a new range every time: the ranking and the map are computed on every rerun, the
  case of a user dragging the slider to fresh positions.

Every timed rerun is checked afterwards: it must have ranked the new window and drawn
the map for it (the figure's title names the range). Medians and maxima are reported.

(a) the invented demo library (``python -m engine demo``), target 0.3 s per rerun;
(b) 500 grades (200 in quick mode) cloned from the demo sweeps with perturbed moduli and
    scattered catalog fields, imported from CSV files and fitted first (the fitting
    time is printed as its own figure), target 1 s per rerun.

For reference, the engine-only part, :func:`engine.selection.ranking.rank` on the same curves
with the same new windows, is timed too: the rest of a rerun is the dashboard.

(c) 10,000 grades (2,000 in quick mode, which reports its figures and extrapolates
    nothing from them) written with their fits by :func:`bench.big_library.write_library`,
    served by a real dashboard server and timed in headless chromium (Playwright), where
    the map is drawn by the browser itself:

    - first map: a new page load on a warm server (one page load has already read the
      fits and ranked the default window), from ``page.goto`` until the map's plot
      holds its traces under the default window's title; target 5 s;
    - window change: an end of the temperature range moved by one degree with the
      keyboard (a range not seen before, so the library is ranked again), until the
      plot shows the new window's title; target 1.5 s.

    Both are measured twice, each time on a new server: first on the library as
    written (fits, no bank record), whose first page has the curve bank stacked (the
    first use after fitting, what ``bench.bench_cold`` times as a figure of its own; the
    server has a child process stack it, :mod:`engine.library.childfit`) and its record
    stored; then on the library as every later use finds it, the bank read
    from its record. The AppTest rerun figures of (b) are given for this library too.
    Without chromium or Playwright the browser figures are left out, with a note.

Run: ``python -m bench.bench_dashboard [--full]`` or through ``python -m bench.run_all``.
"""

from __future__ import annotations

import contextlib
import csv
import io
import json
import os
import statistics
import sys
import tempfile
import time
from collections.abc import Iterator
from pathlib import Path

import numpy as np

from bench import Figure, progress_line
from bench.big_library import write_library
from dashboard import case
from engine import cli
from engine.library.fits import fit_library
from engine.library.importer import import_files
from engine.library.store import Library
from engine.selection.ranking import rank
from tests.helpers import CHROMIUM, CHROMIUM_ARGS, served_dashboard

ROOT = Path(__file__).resolve().parent.parent
APP = str(ROOT / "dashboard" / "app.py")
DEMO = ROOT / "demo_materials"
FULL_GRADES = 500
QUICK_GRADES = 200
DEMO_TARGET_S = 0.3
LARGE_TARGET_S = 1.0
REPEATS = 5
HUGE_FULL = 10_000
HUGE_QUICK = 2_000
FIRST_MAP_TARGET_S = 5.0
WINDOW_CHANGE_TARGET_S = 1.5
BROWSER_REPEATS = 4  # at most len(MOVES)
# True once the map's plot holds traces and its title names the window given.
MAP_DRAWN_JS = """(window) => {
  const gd = document.querySelector('[data-testid="stPlotlyChart"] .js-plotly-plot');
  if (!gd || !gd.layout || !gd.layout.title || !gd.querySelector('.scatterlayer .trace'))
    return false;
  return (gd.layout.title.text || '').includes(window);
}"""
THUMBS = ".st-key-c_temp input[type=range]"  # the range's lower end, then its upper end
_LO, _HI = case.DEFAULTS["c_temp"]
# Window changes of the browser figure, one per timed page: (thumb, key, the new range);
# each range differs from the default and from the others, so none is a cache hit.
MOVES = (
    (0, "ArrowRight", (_LO + 1.0, _HI)),
    (1, "ArrowLeft", (_LO, _HI - 1.0)),
    (0, "ArrowLeft", (_LO - 1.0, _HI)),
    (1, "ArrowRight", (_LO, _HI + 1.0)),
)
ALTERNATING = ((0.0, 40.0), (-20.0, 45.0))  # the second is the dashboard's default
# New ranges, one per timed rerun: none repeats, so no ranking is a cache hit.
FRESH = tuple((-20.0 + k, 45.0 - k) for k in range(1, REPEATS + 1))


@contextlib.contextmanager
def library_env(db: Path) -> Iterator[None]:
    """``QUIETGRADE_DB`` set to ``db`` for the duration, then restored."""
    before = os.environ.get("QUIETGRADE_DB")
    os.environ["QUIETGRADE_DB"] = str(db)
    try:
        yield
    finally:
        if before is None:
            os.environ.pop("QUIETGRADE_DB", None)
        else:
            os.environ["QUIETGRADE_DB"] = before


# ------------------------------------------------------------------ libraries


def demo_library(folder: Path) -> Path:
    """The demo grades loaded and fitted by the command line, in a new library file."""
    db = folder / "demo.sqlite"
    with library_env(db), contextlib.redirect_stdout(io.StringIO()):
        status = cli.main(["demo"])
    if status != 0:
        raise RuntimeError(f"python -m engine demo failed with status {status}")
    return db


def write_clones(folder: Path, n: int, seed: int = 7) -> tuple[Path, Path]:
    """A catalog and a sweep CSV of n grades cloned from the demo grades.

    Each clone takes the sweep of demo grade ``k mod 14`` with its storage modulus scaled
    by 10^u, u uniform in [-0.3, 0.3], and 1 % multiplicative scatter on both storage
    modulus and loss factor; the catalog row gets a scattered price and hardness.
    """
    rng = np.random.default_rng(seed)
    with open(DEMO / "catalog.csv", newline="") as fh:
        reader = csv.DictReader(fh)
        cat_header = list(reader.fieldnames or [])
        catalog = list(reader)
    with open(DEMO / "sweeps.csv", newline="") as fh:
        reader = csv.reader(fh)
        sweep_header = next(reader)
        sweeps: dict[str, list[list[float]]] = {}
        for row in reader:
            sweeps.setdefault(row[0], []).append([float(v) for v in row[1:]])
    bases = [row for row in catalog if row["id"] in sweeps]
    cat_rows, sweep_lines = [], [",".join(sweep_header)]
    for k in range(n):
        base = bases[k % len(bases)]
        gid = f"DASH-{k:04d}"
        row = dict(base, id=gid, name=f"Bench grade {k} ({base['family']})")
        row["price [per kg]"] = f"{rng.uniform(2.0, 25.0):.2f}"
        if row["hardness [Shore A]"]:
            hardness = float(row["hardness [Shore A]"]) + rng.uniform(-5.0, 5.0)
            row["hardness [Shore A]"] = f"{min(max(hardness, 10.0), 95.0):.0f}"
        cat_rows.append(row)
        points = np.array(sweeps[base["id"]])
        scale = 10.0 ** rng.uniform(-0.3, 0.3)
        storage = points[:, 2] * scale * np.exp(rng.normal(0.0, 0.01, len(points)))
        eta = points[:, 3] * np.exp(rng.normal(0.0, 0.01, len(points)))
        for (t, f, _, _), e, d in zip(points, storage, eta, strict=True):
            sweep_lines.append(f"{gid},{t:g},{f:g},{e:.6g},{d:.6g}")
    cat_path = folder / "catalog.csv"
    with open(cat_path, "w", newline="") as fh:
        writer = csv.DictWriter(fh, fieldnames=cat_header)
        writer.writeheader()
        writer.writerows(cat_rows)
    sweep_path = folder / "sweeps.csv"
    sweep_path.write_text("\n".join(sweep_lines) + "\n")
    return cat_path, sweep_path


def large_library(folder: Path, n: int) -> tuple[Path, float, str]:
    """A library of n cloned grades, imported and fitted; (file, fit seconds, note)."""
    db = folder / f"clones{n}.sqlite"
    lib = Library(str(db))
    catalog, sweeps = write_clones(folder, n)
    import_files(lib, [catalog], [sweeps])
    start = time.perf_counter()
    curves, errors = fit_library(lib, processes=2, progress=progress_line(f"fitting {n}"))
    fitted = time.perf_counter() - start
    return db, fitted, f"{len(curves)} fitted, {len(errors)} fit errors, 2 processes"


# ------------------------------------------------------------------ timing


def _check(at, temp_range: tuple[float, float]) -> None:
    """The run ranked ``temp_range`` and drew the map of that ranking."""
    if at.exception:
        raise RuntimeError(f"the dashboard raised: {at.exception[0].message}")
    result = at.session_state["_context"].ranking()
    if result is None or tuple(result.criteria.window.temp_range) != temp_range:
        raise RuntimeError(f"the rerun did not rank the window {temp_range}")
    charts = at.get("plotly_chart")
    title = json.loads(charts[0].proto.spec)["layout"]["title"]["text"] if charts else ""
    lo, hi = temp_range
    if f"{lo:g} to {hi:g} °C" not in title:
        raise RuntimeError(f"the rerun did not draw the map of the window {temp_range}")


def time_reruns(db: Path) -> dict[str, float]:
    """Rerun times [s] after a window change, median and maximum: alternating and new
    ranges."""
    from streamlit.testing.v1 import AppTest

    with library_env(db):
        at = AppTest.from_file(APP, default_timeout=120)
        start = time.perf_counter()
        at.run()
        first = time.perf_counter() - start
        _check(at, case.DEFAULTS["c_temp"])

        def rerun(temp_range: tuple[float, float]) -> float:
            at.slider(key="c_temp").set_value(temp_range)
            start = time.perf_counter()
            at.run()
            elapsed = time.perf_counter() - start
            _check(at, temp_range)
            return elapsed

        rerun(ALTERNATING[0])  # each alternating range seen once before timing
        alternating = [rerun(ALTERNATING[(k + 1) % 2]) for k in range(REPEATS)]
        fresh = [rerun(r) for r in FRESH]
    return {
        "first": first,
        "alternating": statistics.median(alternating),
        "alternating_max": max(alternating),
        "fresh": statistics.median(fresh),
        "fresh_max": max(fresh),
    }


def time_engine(db: Path) -> float:
    """Median time of ``rank`` on the cached curves for the new windows [s]."""
    lib = Library(str(db))
    curves, errors = fit_library(lib, processes=1)
    materials = {m.id: m for m in lib.materials()}
    times = []
    for temp_range in FRESH:
        state = case.default_state()
        state["c_temp"] = temp_range
        crit = case.criteria_from_state(state)
        start = time.perf_counter()
        rank(curves, materials, crit, errors)
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def figures_for(label: str, db: Path, target: float) -> list[Figure]:
    sys.stderr.write(f"  dashboard reruns, {label}\n")
    t = time_reruns(db)
    engine = time_engine(db)
    return [
        Figure(
            f"dashboard rerun, {label}, alternating 2 ranges",
            t["alternating"],
            "s",
            target,
            f"median of {REPEATS} (max {t['alternating_max']:.2f} s); ranking and map "
            f"cached; first run {t['first']:.2f} s",
        ),
        Figure(
            f"dashboard rerun, {label}, new range each time",
            t["fresh"],
            "s",
            target,
            f"median of {REPEATS} (max {t['fresh_max']:.2f} s); ranking computed",
        ),
        Figure(
            f"  engine only: rank, {label}, new range",
            engine,
            "s",
            None,
            f"median of {REPEATS}; UI and AppTest ~{max(t['fresh'] - engine, 0.0):.2f} s",
        ),
    ]


# ------------------------------------------------------------------ real browser


def _window_text(temp_range: tuple[float, float]) -> str:
    lo, hi = temp_range
    return f"{lo:g} to {hi:g} °C"


def time_browser(db: Path) -> dict[str, list[float]] | str:
    """First-map and window-change times [s] in headless chromium, or why there are none."""
    if not Path(CHROMIUM).exists():
        return f"no chromium at {CHROMIUM}"
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        return "Playwright is not installed"
    default = tuple(case.DEFAULTS["c_temp"])
    first, change = [], []
    with served_dashboard(db, stop_timeout=15) as url, sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        context = browser.new_context(viewport={"width": 1280, "height": 900})
        try:
            for k in range(BROWSER_REPEATS + 1):  # the first load warms the server
                page = context.new_page()
                page.set_default_timeout(600_000)
                start = time.perf_counter()
                page.goto(url)
                page.wait_for_function(MAP_DRAWN_JS, arg=_window_text(default), polling=50)
                if k:
                    first.append(time.perf_counter() - start)
                page.locator('[data-testid="stStatusWidget"]').wait_for(state="detached")
                if k:
                    end, key, moved = MOVES[(k - 1) % len(MOVES)]
                    thumb = page.locator(THUMBS).nth(end)
                    thumb.focus()
                    start = time.perf_counter()
                    thumb.press(key)  # a range no page has ranked yet
                    page.wait_for_function(MAP_DRAWN_JS, arg=_window_text(moved), polling=50)
                    change.append(time.perf_counter() - start)
                    page.locator('[data-testid="stStatusWidget"]').wait_for(state="detached")
                page.close()
        finally:
            browser.close()
    return {"first": first, "change": change}


def huge_figures(folder: Path, n: int, quick: bool) -> list[Figure]:
    """Figures (c): the map of ``n`` grades in a real browser, and AppTest reruns."""
    sys.stderr.write(f"  writing {n:,} fitted grades (bench.big_library)\n")
    start = time.perf_counter()
    db = folder / f"big{n}.sqlite"
    write_library(str(db), n)
    written = time.perf_counter() - start
    label = f"{n:,} grades"
    mode = f"; quick mode ({HUGE_FULL:,} full), nothing extrapolated" if quick else ""
    figures = []
    # The library as written holds its fits but no bank record: the first server's first
    # page has the bank stacked (the first use after fitting) and its record stored; the
    # second server reads it, as every later use of a library does.
    for served, how in (
        ("first use", "the bank stacked by the server's child process"),
        ("record", "the bank read from its record"),
    ):
        sys.stderr.write(f"  real browser, {label}, {how}\n")
        times = time_browser(db)
        if isinstance(times, str):
            figures.append(Figure(f"map in a browser, {label}", float("nan"), "s", None, times))
            break
        figures += [
            Figure(
                f"first map after page load, {label}, {served} (browser)",
                statistics.median(times["first"]),
                "s",
                FIRST_MAP_TARGET_S,
                f"median of {len(times['first'])} loads on a warm server (max "
                f"{max(times['first']):.2f} s); {how}; headless chromium{mode}",
            ),
            Figure(
                f"window change to new map, {label}, {served} (browser)",
                statistics.median(times["change"]),
                "s",
                WINDOW_CHANGE_TARGET_S,
                f"median of {len(times['change'])} (max {max(times['change']):.2f} s); "
                f"library ranked again each time; {how}{mode}",
            ),
        ]
    figures += [
        Figure(f.name, f.value, f.unit, f.target, f.note + mode)
        for f in figures_for(label, db, WINDOW_CHANGE_TARGET_S)
    ]
    figures.append(
        Figure(f"  write_library, {label} (setup, not timed above)", written, "s", None, "")
    )
    return figures


def main(quick: bool = True) -> list[Figure]:
    n = QUICK_GRADES if quick else FULL_GRADES
    with tempfile.TemporaryDirectory(prefix="quietgrade-bench-") as tmp:
        folder = Path(tmp)
        figures = figures_for("demo (14 grades)", demo_library(folder), DEMO_TARGET_S)
        sys.stderr.write(f"  building and fitting {n} cloned grades\n")
        db, fitted, note = large_library(folder, n)
        label = f"{n} grades"
        large = figures_for(label, db, LARGE_TARGET_S)
        if quick:
            large = [
                Figure(
                    f.name, f.value, f.unit, f.target, f"{f.note}; quick mode ({FULL_GRADES} full)"
                )
                for f in large
            ]
        figures += large
        figures.append(
            Figure(f"  fit_library, {label} (setup, not timed above)", fitted, "s", None, note)
        )
        figures += huge_figures(folder, HUGE_QUICK if quick else HUGE_FULL, quick)
    return figures


if __name__ == "__main__":
    from bench.run_all import table

    sys.stdout.write(table(main(quick="--full" not in sys.argv[1:])) + "\n")
