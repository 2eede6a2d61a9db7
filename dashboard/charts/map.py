"""Figures of the Map page: the engine's map (:mod:`engine.output.mapfigure`, which the
HTML report draws too) with the page's extras: the 95 % tubes of the comparison set,
shared traces for a large library, a shaded count of the grades not drawn in a very
large one, box and lasso selection over every grade shown, and finding grades by id or
name."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import plotly.graph_objects as go

from dashboard.charts.common import BAND_SUFFIX
from engine.curves.mastercurve import MasterCurve
from engine.curves.window import tensile_factor
from engine.output import mapfigure
from engine.output.palette import INK, band_colours, faded, log_span, loss_modulus_guides
from engine.selection.ranking import RankResult

# Sides of a path's end labels, one per grade of the comparison set in turn.
LABEL_SIDES = ("top right", "bottom left", "top left", "bottom right")
CROWD_LIMIT = 40  # more grades than this on the map: the rest share a few traces
CROWD_TOP = 10  # passing grades always drawn on their own
CROWD_CHOSEN = 20  # grades of the comparison set drawn on their own; more share traces
THIN_LIMIT = 1000  # more grades shown than this: only some of the others are drawn as paths
THIN_DRAWN = 200  # grades drawn as paths on the shared traces when thinned (set apart)
DENSITY_BINS = 60  # cells of the shaded count along each axis
FIND_LIMIT = 200  # most grades a search lists


@dataclass(frozen=True)
class CrowdPlan:
    """How the grades shown on the map are drawn: every row of ``shown`` is in exactly
    one of ``own`` (a trace of its own; None when every grade has one), ``picked`` (the
    rest of the comparison set, on the set's shared traces), ``drawn`` (other grades on
    the shared traces) and ``aggregated`` (only in the shaded count of
    :func:`density_counts`). Rows index ``window_props``."""

    shown: tuple[int, ...]
    own: frozenset[str] | None
    own_rows: tuple[int, ...]
    picked: tuple[int, ...]
    drawn: tuple[int, ...]
    aggregated: tuple[int, ...]

    @property
    def thinned(self) -> bool:
        return bool(self.aggregated)

    def note(self) -> str:
        """One line for the map: how many grades are drawn and that all are ranked."""
        drawn = len(self.shown) - len(self.aggregated)
        return (
            f"{drawn:,} of {len(self.shown):,} grades drawn as paths (the best ranks, the "
            f"comparison set and an even spread of the rest); shading counts the other "
            f"{len(self.aggregated):,}. All are ranked, and a box or lasso picks from all."
        )


def crowd_plan(result: RankResult, shown: Sequence[int], chosen: Sequence[str]) -> CrowdPlan:
    """Which grades get a trace of their own, which share traces and which are only
    counted in the shading.

    Up to ``CROWD_LIMIT`` grades shown: every one has its own trace. Beyond: the first
    ``CROWD_TOP`` passing grades and the first ``CROWD_CHOSEN`` of the comparison set
    have their own, the rest of the set shares the set's traces, and so do the others.
    Beyond ``THIN_LIMIT`` grades shown the others are thinned to ``THIN_DRAWN`` paths:
    the best-ranked passing grades (half of them), then an even, deterministic spread
    of the rest in drawing order (passing in rank order, then excluded in library
    order); the grades not drawn are aggregated. The top ranks and the whole comparison
    set are always drawn.
    """
    props = result.window_props
    shown = tuple(shown)
    if len(shown) <= CROWD_LIMIT:
        return CrowdPlan(shown, None, shown, (), (), ())
    own = frozenset({g.id for g in result.shortlist[:CROWD_TOP]} | set(chosen[:CROWD_CHOSEN]))
    in_set = set(chosen)
    own_rows = tuple(k for k in shown if props.ids[k] in own)
    picked = tuple(k for k in shown if props.ids[k] not in own and props.ids[k] in in_set)
    rest = [k for k in shown if props.ids[k] not in own and props.ids[k] not in in_set]
    if len(shown) <= THIN_LIMIT or len(rest) <= THIN_DRAWN:
        return CrowdPlan(shown, own, own_rows, picked, tuple(rest), ())
    grades = {g.id: g for g in result.grades}
    order = sorted(
        rest,
        key=lambda k: (not grades[props.ids[k]].passed, grades[props.ids[k]].rank or 0, k),
    )
    best = THIN_DRAWN // 2
    remainder = order[best:]
    spread = np.unique(np.linspace(0, len(remainder) - 1, THIN_DRAWN - best).round().astype(int))
    keep = set(order[:best]) | {remainder[j] for j in spread}
    drawn = tuple(k for k in rest if k in keep)
    aggregated = tuple(k for k in rest if k not in keep)
    return CrowdPlan(shown, own, own_rows, picked, drawn, aggregated)


def density_counts(
    eta: np.ndarray,
    storage: np.ndarray,
    rows: Sequence[int],
    x_edges: np.ndarray,
    y_edges: np.ndarray,
    passed: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """How many of the grades ``rows`` pass through each cell of the map.

    ``eta`` and ``storage`` are the path arrays (grades x temperatures; any positive
    unit), ``x_edges`` and ``y_edges`` the log10 cell edges along the loss factor and
    the storage modulus. A grade counts once in every cell holding one of its path
    points (points off the grid or not finite count nowhere). Returns the counts
    (y cells x x cells, as a heatmap reads them) and those of the grades whose
    ``passed`` flag (one per row of ``eta``) is set.
    """
    at_rows = np.asarray(rows, dtype=int)
    nx, ny = len(x_edges) - 1, len(y_edges) - 1
    counts = np.zeros((ny, nx), dtype=int)
    passing = np.zeros((ny, nx), dtype=int)
    if not at_rows.size:
        return counts, passing
    with np.errstate(divide="ignore", invalid="ignore"):
        lx = np.log10(eta[at_rows])
        ly = np.log10(storage[at_rows])
    ix = np.searchsorted(x_edges, lx, side="right") - 1
    iy = np.searchsorted(y_edges, ly, side="right") - 1
    # A point on the last edge belongs to the last cell.
    ix[lx == x_edges[-1]] = nx - 1
    iy[ly == y_edges[-1]] = ny - 1
    ok = np.isfinite(lx) & np.isfinite(ly) & (ix >= 0) & (ix < nx) & (iy >= 0) & (iy < ny)
    # Each grade's cells sorted along its row: a cell counts where it first appears.
    cell = np.sort(np.where(ok, iy * nx + ix, -1), axis=1)
    first = np.ones(cell.shape, dtype=bool)
    first[:, 1:] = cell[:, 1:] != cell[:, :-1]
    first &= cell >= 0
    size = nx * ny
    counts = np.bincount(cell[first], minlength=size).reshape(ny, nx)
    if passed is not None:
        flags = np.asarray(passed, dtype=bool)[at_rows]
        on = first & flags[:, None]
        passing = np.bincount(cell[on], minlength=size).reshape(ny, nx)
    return counts, passing


def density_trace(result: RankResult, rows: Sequence[int], xs: tuple, ys: tuple) -> dict:
    """The grades ``rows`` as a shaded count behind the paths: cells of
    ``DENSITY_BINS`` x ``DENSITY_BINS`` over the axis spans ``xs``, ``ys`` [log10], each
    as dark as the square root of the number of grades passing through it (the hover
    says how many, and how many of them pass the limits)."""
    props = result.window_props
    _, storage, eta = mapfigure.path_arrays(result)
    x_edges = np.linspace(xs[0], xs[1], DENSITY_BINS + 1)
    y_edges = np.linspace(ys[0], ys[1], DENSITY_BINS + 1)
    status = {g.id: g.passed for g in result.grades}
    passed = np.array([status[gid] for gid in props.ids], dtype=bool)
    counts, passing = density_counts(eta, storage, rows, x_edges, y_edges, passed)
    shade = np.where(counts > 0, np.sqrt(counts), np.nan)
    return dict(
        type="heatmap",
        x=10.0**x_edges,
        y=10.0**y_edges,
        z=shade,
        zmin=0.0,
        zmax=float(np.nanmax(shade)) if counts.any() else 1.0,
        colorscale=[[0.0, faded(INK, 0.03)], [1.0, faded(INK, 0.42)]],
        showscale=False,
        hoverongaps=False,
        customdata=np.stack([counts, passing], axis=-1),
        hovertemplate=(
            "%{customdata[0]} grades not drawn pass here<br>"
            "%{customdata[1]} of them pass the limits<extra></extra>"
        ),
        name=f"{len(rows):,} more, counted",
        showlegend=False,
    )


def grades_in_region(
    result: RankResult,
    rows: Sequence[int],
    box: Mapping | None = None,
    lasso: Mapping | None = None,
) -> list[str]:
    """Grades among ``rows`` with a path point inside a box or a lasso, whether drawn or
    only counted, in ranking order (passing by rank, then excluded).

    ``box`` holds ``x`` (two loss factors) and ``y`` (two E' values [MPa]); ``lasso``
    the lists ``x`` and ``y`` of its outline, in the same data units (as a box or lasso
    drawn on the map reports them). The lasso is a polygon in log-log coordinates, as it
    is drawn on the map's log axes (even-odd rule).
    """
    props = result.window_props
    at_rows = np.asarray(rows, dtype=int)
    if not at_rows.size:
        return []
    _, storage, eta = mapfigure.path_arrays(result)
    with np.errstate(divide="ignore", invalid="ignore"):
        lx, ly = np.log10(eta[at_rows]), np.log10(storage[at_rows])
    inside = np.zeros(lx.shape, dtype=bool)
    if box is not None and len(box.get("x", ())) == 2 and len(box.get("y", ())) == 2:
        x0, x1 = sorted(np.log10(np.asarray(box["x"], dtype=float)))
        y0, y1 = sorted(np.log10(np.asarray(box["y"], dtype=float)))
        inside |= (lx >= x0) & (lx <= x1) & (ly >= y0) & (ly <= y1)
    if lasso is not None and len(lasso.get("x", ())) >= 3:
        px = np.log10(np.asarray(lasso["x"], dtype=float))
        py = np.log10(np.asarray(lasso["y"], dtype=float))
        crossings = np.zeros(lx.shape, dtype=bool)
        for xa, ya, xb, yb in zip(px, py, np.roll(px, -1), np.roll(py, -1), strict=True):
            if ya == yb:
                continue
            spans = (ly >= min(ya, yb)) & (ly < max(ya, yb))
            x_cut = xa + (ly - ya) * (xb - xa) / (yb - ya)
            crossings ^= spans & (lx < x_cut)
        inside |= crossings
    hit = {props.ids[k] for k in at_rows[inside.any(axis=1)]}
    return [g.id for g in result.grades if g.id in hit]


def selected_grades(result: RankResult, selection: Mapping, show_excluded: bool) -> list[str]:
    """The grades a box or lasso selection on the map picks (:func:`grades_in_region`
    over every grade shown); where the selection holds no box or lasso, those of the
    points it reports."""
    rows = mapfigure.shown_rows(result, show_excluded)
    regions = [("box", r) for r in selection.get("box") or ()]
    regions += [("lasso", r) for r in selection.get("lasso") or ()]
    picked: list[str] = []
    for kind, region in regions:
        found = grades_in_region(result, rows, **{kind: region})
        picked += [g for g in found if g not in picked]
    if regions:
        return picked
    for point in selection.get("points") or ():
        custom = point.get("customdata")
        gid = custom[0] if isinstance(custom, list | tuple) and custom else None
        if gid and gid not in picked:
            picked.append(gid)
    return picked


def find_grades(result: RankResult, text: str, limit: int = FIND_LIMIT) -> tuple[list[str], int]:
    """Grades whose id or name holds ``text`` (case and spacing ignored), in ranking
    order: the first ``limit`` and how many there are in all."""
    want = " ".join(text.split()).casefold()
    if not want:
        return [], 0
    found = [
        g.id
        for g in result.grades
        if want in " ".join(g.id.split()).casefold() or want in " ".join(g.name.split()).casefold()
    ]
    return found[:limit], len(found)


def crowd_traces(result, rows, chosen: bool = False, marks: np.ndarray | None = None) -> list[dict]:
    """Many grades (rows of the ranking's window props) as two traces per state: their
    paths, and their marks.

    The paths are one SVG line trace with a gap (a NaN point) between grades; the marks,
    which carry the hover text and which a box or lasso selects, are one WebGL trace:
    as SVG, tens of thousands of marks take a browser seconds to draw. ``chosen`` marks
    grades of the comparison set, drawn wider and darker like the set's grades that
    have traces of their own. Every per-point value is handed over as a numpy array:
    Plotly validates, copies and encodes a Python list element by element, which at a
    few hundred grades cost more than the rest of a rerun. ``marks`` (booleans, one per
    path temperature) keeps the marks at some temperatures only (default: all), as one
    SVG trace: a few thousand marks draw quicker so than through a WebGL context.
    The traces are plain dicts, as are those of :func:`density_trace` and
    :func:`path_band_trace`: a figure checks a dict once as it adds it, a graph object
    when it is made and again when it is added.
    """
    props = result.window_props
    grades = {g.id: g for g in result.grades}
    temps, storage, eta = mapfigure.path_arrays(result)
    at = np.ones(temps.size, dtype=bool) if marks is None else np.asarray(marks, dtype=bool)
    n_t = int(at.sum())
    traces: list[dict] = []
    for passed in (True, False):
        ks = np.array([k for k in rows if grades[props.ids[k]].passed == passed], dtype=int)
        if not ks.size:
            continue
        gap = np.full((ks.size, 1), np.nan)  # a NaN point ends one path before the next
        xs = np.hstack([eta[ks], gap]).ravel()
        ys = np.hstack([storage[ks], gap]).ravel()
        states = []
        for k in ks:
            g = grades[props.ids[k]]
            states.append(f"rank {g.rank}" if passed else g.reason)
        custom = np.empty((ks.size, n_t, 2), dtype=object)
        custom[:, :, 0] = np.array([props.ids[k] for k in ks], dtype=object)[:, None]
        custom[:, :, 1] = np.array(temps[at].tolist(), dtype=object)[None, :]
        # The hover shows the id and the state as Plotly labels (mapfigure.plot_text), from
        # text and hovertext; customdata keeps them as they are (a selection reads the id).
        shown_id = np.empty((ks.size, n_t), dtype=object)
        shown_id[:] = np.array([mapfigure.plot_text(props.ids[k]) for k in ks], dtype=object)[
            :, None
        ]
        shown_state = np.empty((ks.size, n_t), dtype=object)
        shown_state[:] = np.array([mapfigure.plot_text(s) for s in states], dtype=object)[:, None]
        state = "passing" if passed else "excluded"
        if chosen:
            alpha = 0.85 if passed else 0.6
            width, size = 3.0, 4
            name = f"{ks.size} more of the set, {state}"
        else:
            alpha = 0.35 if passed else 0.18
            width, size = 1.0, 2
            name = f"{ks.size} more, {state}"
        colour = faded(INK, alpha)
        group = f"{'set' if chosen else 'others'}, {state}"
        traces.append(
            dict(
                type="scatter",
                x=xs,
                y=ys,
                mode="lines",
                name=name,
                legendgroup=group,
                line={"color": colour, "width": width, "dash": "solid" if passed else "dot"},
                hoverinfo="skip",
            )
        )
        traces.append(
            dict(
                type="scatter" if marks is not None else "scattergl",
                x=eta[ks][:, at].ravel(),
                y=storage[ks][:, at].ravel(),
                mode="markers",
                name=name,
                legendgroup=group,
                showlegend=False,
                # WebGL draws a mark's colour at full strength: the fading is an opacity.
                marker={"size": size, "color": INK, "opacity": alpha},
                customdata=custom.reshape(-1, 2),  # grade, temperature
                text=shown_id.ravel(),
                hovertext=shown_state.ravel(),
                hovertemplate=(
                    "<b>%{text}</b><br>T = %{customdata[1]:.0f} °C<br>"
                    "E' = %{y:.3g} MPa<br>η = %{x:.3g}<br>%{hovertext}<extra></extra>"
                ),
            )
        )
    return traces


def map_figure(
    result: RankResult,
    colours: dict[str, str],
    chosen: list[str],
    show_excluded: bool = True,
    bands: dict[str, MasterCurve] | None = None,
    guides: str = "ticks",
    plan: CrowdPlan | None = None,
) -> go.Figure:
    """The engine's map of ``result`` (:func:`engine.output.mapfigure.map_figure`) for the
    Map page: box and lasso select grades, and the grades of ``bands`` (id -> the master
    curve the ranking used) that are drawn on their own get their 95 % intervals as a
    shaded tube along the path (:func:`path_band_trace`).

    A large library (:func:`crowd_plan`): apart from the top ranks and the first grades
    of the comparison set, grades share a few traces (passing or excluded, in the set or
    not), which keeps a rerun quick; a very large one draws only some of the others
    (marked at their ends, the set's grades every ``MARK_EVERY_K``), shades the cells
    the rest pass through
    (:func:`density_trace`); :meth:`CrowdPlan.note` says so in a line for the page.
    ``plan`` is that plan when the caller has made it already.

    The page's own look: lines of constant E'' as ``guides``
    (:func:`engine.output.palette.loss_modulus_guides`), the end temperatures labelled on
    the comparison set's paths only (on the best grade's when the set is empty), each
    grade's labels on another side so that neighbours do not write over each other, and
    the legend in rows under the plot, where no id is cut.
    """
    props = result.window_props
    if plan is None:
        plan = crowd_plan(result, mapfigure.shown_rows(result, show_excluded), chosen)
    own, shared = plan.own, []
    marks = ends = None
    if plan.thinned:
        temps = np.asarray(props.path_temperatures, dtype=float)
        step = np.mod(temps, mapfigure.MARK_EVERY_K)
        marks = np.isclose(step, 0.0) | np.isclose(step, mapfigure.MARK_EVERY_K)
        marks[0] = marks[-1] = True
        # The others drawn from the crowd: a mark at each end (where the hover names
        # them); marks every few kelvin on 200 grey paths cost the browser 0.1 s a draw.
        ends = np.zeros(temps.size, dtype=bool)
        ends[0] = ends[-1] = True
        _, storage, eta = mapfigure.path_arrays(result)
        rows = list(plan.aggregated)
        shared.append(
            density_trace(result, rows, log_span(eta[rows], 0.01), log_span(storage[rows], 0.01))
        )
    if own is not None:
        shared += crowd_traces(result, plan.drawn, marks=ends)
        shared += crowd_traces(result, plan.picked, chosen=True, marks=marks)
    beneath = {}
    if bands:
        row_of = {gid: k for k, gid in enumerate(props.ids)}
        on_map = set(plan.shown)
        temps = np.asarray(props.path_temperatures, dtype=float)
        for gid, curve in bands.items():
            if row_of.get(gid) not in on_map or (own is not None and gid not in own):
                continue
            k = row_of[gid]
            factor = float(tensile_factor([curve.mode], props.poisson[k : k + 1])[0])
            beneath[gid] = [
                path_band_trace(
                    gid,
                    curve,
                    temps,
                    result.criteria.window.design_frequency,
                    factor,
                    colours.get(gid, INK),
                )
            ]
    fig = mapfigure.map_figure(
        result,
        colours,
        chosen,
        show_excluded,
        own=own,
        shared=shared,
        beneath=beneath,
        path_style={  # a box or lasso leaves every path as it is drawn
            "selected": {"marker": {"opacity": 1.0}},
            "unselected": {"marker": {"opacity": 1.0}},
        },
    )
    labelled = [g for g in chosen if g in props.ids] or [g.id for g in result.shortlist[:1]]
    for trace in fig.data:
        if getattr(trace, "mode", None) != mapfigure.PATH_MODE or trace.text is None:
            continue
        if trace.legendgroup in labelled:
            trace.textposition = LABEL_SIDES[labelled.index(trace.legendgroup) % len(LABEL_SIDES)]
        else:
            trace.text = None
    loss_modulus_guides(fig, guides)
    fig.update_layout(
        dragmode="select",
        height=600,
        legend={
            "orientation": "h",
            "x": 0.0,
            "xanchor": "left",
            "y": -0.12,
            "yanchor": "top",
            "title": {"text": "grade", "side": "left"},
        },
        margin={"b": 40},
    )
    return fig


def path_band_trace(
    gid: str,
    curve: MasterCurve,
    temperatures: np.ndarray,
    frequency: float,
    tensile: float,
    colour: str,
) -> dict:
    """The 95 % intervals of a grade's map path as one shaded tube.

    At every temperature of the path the interval of E' (times ``tensile``, which makes
    it tensile-equivalent like the path) and the interval of the loss factor span a box
    on the map; the tube is the union of the boxes, drawn as one outline per box in a
    single filled trace (boxes of one orientation overlap without darkening): box k is
    points 6k to 6k + 4 of the trace, (eta low, E' low), (eta high, E' low), (eta high,
    E' high), (eta low, E' high) and back, E' in MPa, followed by a gap.
    """
    t = np.asarray(temperatures, dtype=float)
    band = curve.interval(t, frequency)
    e_lo = np.asarray(band.storage_low, dtype=float) * tensile / 1e6
    e_hi = np.asarray(band.storage_high, dtype=float) * tensile / 1e6
    n_lo = np.asarray(band.loss_factor_low, dtype=float)
    n_hi = np.asarray(band.loss_factor_high, dtype=float)
    gap = np.full_like(t, np.nan)
    # Counter-clockwise boxes (in log-log as well), a NaN corner between two boxes.
    xs = np.column_stack([n_lo, n_hi, n_hi, n_lo, n_lo, gap]).ravel()
    ys = np.column_stack([e_lo, e_lo, e_hi, e_hi, e_lo, gap]).ravel()
    fill, edge = band_colours(colour)
    return dict(
        type="scatter",
        x=xs,
        y=ys,
        mode="lines",
        fill="toself",
        fillcolor=fill,
        line={"color": edge, "width": 0},
        name=f"{mapfigure.plot_text(gid)} {BAND_SUFFIX}",
        meta=gid,  # no legend group: a trace with one stands for a grade's path on the map
        showlegend=False,
        hoverinfo="skip",
    )


__all__ = [
    "CROWD_CHOSEN",
    "CROWD_LIMIT",
    "CROWD_TOP",
    "DENSITY_BINS",
    "FIND_LIMIT",
    "THIN_DRAWN",
    "THIN_LIMIT",
    "CrowdPlan",
    "crowd_plan",
    "crowd_traces",
    "density_counts",
    "density_trace",
    "find_grades",
    "grades_in_region",
    "map_figure",
    "path_band_trace",
    "selected_grades",
]
