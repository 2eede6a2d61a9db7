"""Figures of the Map page: the engine's map (:mod:`engine.output.mapfigure`, which the
HTML report draws too) with the page's extras: the 95 % tubes of the comparison set,
shared traces for a large library, and box and lasso selection."""

from __future__ import annotations

import numpy as np
import plotly.graph_objects as go

from dashboard.charts.common import BAND_SUFFIX
from engine.curves.mastercurve import MasterCurve
from engine.curves.window import tensile_factor
from engine.output import mapfigure
from engine.output.palette import INK, band_colours, faded, loss_modulus_guides
from engine.selection.ranking import RankResult

# Sides of a path's end labels, one per grade of the comparison set in turn.
LABEL_SIDES = ("top right", "bottom left", "top left", "bottom right")
CROWD_LIMIT = 40  # more grades than this on the map: the rest share a few traces
CROWD_TOP = 10  # passing grades always drawn on their own
CROWD_CHOSEN = 20  # grades of the comparison set drawn on their own; more share traces


def crowd_traces(result, rows, chosen: bool = False) -> list:
    """Many grades (rows of the ranking's window props) as two traces per state: their
    paths, and their marks.

    The paths are one SVG line trace with a gap (a NaN point) between grades; the marks,
    which carry the hover text and which a box or lasso selects, are one WebGL trace:
    as SVG, tens of thousands of marks take a browser seconds to draw. ``chosen`` marks
    grades of the comparison set, drawn wider and darker like the set's grades that
    have traces of their own. Every per-point value is handed over as a numpy array:
    Plotly validates, copies and encodes a Python list element by element, which at a
    few hundred grades cost more than the rest of a rerun.
    """
    props = result.window_props
    grades = {g.id: g for g in result.grades}
    temps, storage, eta = mapfigure.path_arrays(result)
    n_t = temps.size
    traces = []
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
            states.append(
                f"rank {g.rank}"
                if passed
                else "excluded: " + "; ".join(f.text() for f in g.failures)
            )
        custom = np.empty((ks.size, n_t, 3), dtype=object)
        custom[:, :, 0] = np.array([props.ids[k] for k in ks], dtype=object)[:, None]
        custom[:, :, 1] = np.array(temps.tolist(), dtype=object)[None, :]
        custom[:, :, 2] = np.array(states, dtype=object)[:, None]
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
            go.Scatter(
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
            go.Scattergl(
                x=eta[ks].ravel(),
                y=storage[ks].ravel(),
                mode="markers",  # box and lasso select marked points only
                name=name,
                legendgroup=group,
                showlegend=False,
                # WebGL draws a mark's colour at full strength: the fading is an opacity.
                marker={"size": size, "color": INK, "opacity": alpha},
                customdata=custom.reshape(-1, 3),  # grade, temperature, state
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
) -> go.Figure:
    """The engine's map of ``result`` (:func:`engine.output.mapfigure.map_figure`) for the
    Map page: box and lasso select grades, and the grades of ``bands`` (id -> the master
    curve the ranking used) that are drawn on their own get their 95 % intervals as a
    shaded tube along the path (:func:`path_band_trace`).

    A large library: apart from the top ranks and the first grades of the comparison
    set, grades share a few traces (passing or excluded, in the set or not), which keeps
    a rerun quick.

    The page's own look: lines of constant E'' as ``guides``
    (:func:`engine.output.palette.loss_modulus_guides`), the end temperatures labelled on
    the comparison set's paths only (on the best grade's when the set is empty), each
    grade's labels on another side so that neighbours do not write over each other, and
    the legend in rows under the plot, where no id is cut.
    """
    props = result.window_props
    shown = mapfigure.shown_rows(result, show_excluded)
    own, shared = None, []
    if len(shown) > CROWD_LIMIT:
        own = {g.id for g in result.shortlist[:CROWD_TOP]} | set(chosen[:CROWD_CHOSEN])
        picked = set(chosen)
        crowd = [k for k in shown if props.ids[k] not in own]
        shared = crowd_traces(result, [k for k in crowd if props.ids[k] not in picked])
        shared += crowd_traces(result, [k for k in crowd if props.ids[k] in picked], chosen=True)
    beneath = {}
    if bands:
        row_of = {gid: k for k, gid in enumerate(props.ids)}
        on_map = set(shown)
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
        result, colours, chosen, show_excluded, own=own, shared=shared, beneath=beneath
    )
    fig.update_traces(
        selected={"marker": {"opacity": 1.0}},
        unselected={"marker": {"opacity": 1.0}},
        selector={"type": "scatter", "mode": mapfigure.PATH_MODE},
    )
    labelled = [g for g in chosen if g in props.ids] or [g.id for g in result.shortlist[:1]]
    for trace in fig.data:
        if trace.mode != mapfigure.PATH_MODE or trace.text is None:
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
) -> go.Scatter:
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
    return go.Scatter(
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
    "crowd_traces",
    "map_figure",
    "path_band_trace",
]
