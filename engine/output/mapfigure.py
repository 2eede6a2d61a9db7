"""The map of a ranking: storage modulus against loss factor, log-log, each grade a path.

Every grade is drawn as its path through the window's temperatures at the design
frequency (the ranking's ``window_props.path_*`` arrays, tensile-equivalent E'), over
lines of constant loss modulus E'' = eta E' and, where the criteria ask for a lowest
loss factor, the region that meets it. The HTML report draws this figure as it is; the
dashboard's map page draws the same figure with its interactive extras (the 95 % tubes
of the comparison set, shared traces for a large library, box and lasso selection),
handed in through ``beneath`` and ``shared``.

Plotting transforms only: every value drawn comes from the ranking; the arrays made
here are axis geometry (the guide lines, their labels and the feasible region).
"""

from __future__ import annotations

from collections.abc import Collection, Mapping, Sequence

import numpy as np
import plotly.graph_objects as go
from plotly.basedatatypes import BaseTraceType

from engine.output.palette import (
    ACCENT,
    FEASIBLE,
    INK,
    TEMPLATE_NAME,
    faded,
    grade_colours,
    log_span,
    tidy_log_axes,
)
from engine.selection.ranking import RankResult

AXIS_PAD = 0.15  # room around the paths [decades]
MARK_EVERY_K = 10.0  # a small mark on every path at each multiple of this temperature
PATH_MODE = "lines+markers+text"  # the mode of a grade's own path trace

# How to read the map, for the text beside it (the report's hint, the dashboard's caption).
GUIDE_READING = (
    "Loss modulus E'' = η E' is constant along diagonals: its decades are marked on the "
    "top and right edges of the frame. "
)
READING = (
    "Each line is a grade's path through the window's temperatures at the design "
    f"frequency, its ends labelled; small marks every {MARK_EVERY_K:g} K, open marks where "
    "the master curve is extrapolated. Dotted, faded lines are excluded grades (hover for "
    f"the reasons). {GUIDE_READING}Moduli are tensile-equivalent."
)


_PLOT_ENTITIES = str.maketrans(
    {"&": "&amp;", "<": "&lt;", ">": "&gt;", '"': "&#34;", "'": "&#39;", "%": "&#37;", "$": "&#36;"}
)


def plot_text(value) -> str:
    """Text from data for a Plotly label or hover template, shown as it is written.

    On one line (runs of white space, line breaks included, become one space, as Plotly
    shows them), with ``& < >`` written as entities (Plotly reads labels as HTML-like
    markup: ``<b>``, ``<a href>``, ``<br>``...), and quotes, ``%`` (so ``%{x}`` is not a
    template's placeholder) and ``$`` (Plotly typesets ``$...$`` as LaTeX where MathJax
    is on the page) too. Plotly shows the entities as the characters: ``&amp;``,
    ``&lt;``, ``&gt;`` and numeric ones (it knows no ``&quot;``).
    """
    text = " ".join(("" if value is None else str(value)).split())
    return text.translate(_PLOT_ENTITIES)


def ranking_colours(result: RankResult) -> dict[str, str]:
    """The grade colours of a ranking (:func:`engine.output.palette.grade_colours` of its
    ranked grades): those the dashboard gives the same library's grades."""
    return grade_colours(result.window_props.ids)


def path_arrays(result: RankResult) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Path temperatures [degC], E' [MPa] (grades x temperatures) and loss factor [-]."""
    props = result.window_props
    temps = np.asarray(props.path_temperatures, dtype=float)
    storage = np.asarray(props.path_storage, dtype=float) / 1e6
    eta = np.asarray(props.path_loss_factor, dtype=float)
    return temps, storage, eta


def shown_rows(result: RankResult, show_excluded: bool = True) -> list[int]:
    """Rows of ``result.window_props`` the map shows: every grade, or the passing ones."""
    passed = {g.id: g.passed for g in result.grades}
    ids = result.window_props.ids
    return [k for k, gid in enumerate(ids) if show_excluded or passed[gid]]


def _add_feasible(fig: go.Figure, limit: float, xs: tuple, ys: tuple) -> None:
    """The region eta >= ``limit`` as a filled polygon in data coordinates, labelled."""
    (xa, xb), (ya, yb) = xs, ys
    x0 = max(limit, 10**xa)
    fig.add_trace(
        go.Scatter(
            x=[x0, 10**xb, 10**xb, x0, x0],
            y=[10**ya, 10**ya, 10**yb, 10**yb, 10**ya],
            fill="toself",
            fillcolor=FEASIBLE,
            line={"width": 0},
            mode="lines",
            hoverinfo="skip",
            showlegend=False,
        )
    )
    fig.add_annotation(
        x=np.log10(x0),
        y=yb,
        yshift=-4,
        text=f"η ≥ {limit:g} (limit met)",
        showarrow=False,
        xanchor="left",
        yanchor="top",
        font={"size": 11, "color": ACCENT},
    )


def _drawing_order(result: RankResult, rows: list[int]) -> list[int]:
    """Excluded grades first (under the others), then the passing ones in rank order."""
    grades = {g.id: g for g in result.grades}
    ids = result.window_props.ids
    return sorted(rows, key=lambda k: (grades[ids[k]].passed, grades[ids[k]].rank or 0, k))


def map_figure(
    result: RankResult,
    colours: Mapping[str, str] | None = None,
    chosen: Sequence[str] = (),
    show_excluded: bool = True,
    own: Collection[str] | None = None,
    shared: Sequence[BaseTraceType | dict] = (),
    beneath: Mapping[str, Sequence[BaseTraceType | dict]] | None = None,
    path_style: Mapping[str, object] | None = None,
) -> go.Figure:
    """E' against loss factor, each grade a path through the window's temperatures.

    Parameters
    ----------
    result : the ranking drawn.
    colours : grade id -> #rrggbb; by default :func:`ranking_colours`.
    chosen : grades drawn wider and darker (the dashboard's comparison set); when some
        are chosen, the other passing grades are drawn fainter.
    show_excluded : draw the excluded grades too (dotted, faded, their reasons in the
        hover text).
    own : the grades drawn with a trace of their own (default: every grade shown); the
        caller draws the others, e.g. in ``shared``.
    shared : traces drawn under the grades' own paths (over the feasible band).
    beneath : grade id -> traces drawn just under that grade's path.
    path_style : further properties of every grade's own path trace (the dashboard's
        look of selected points).

    Each grade's own path is one trace of mode :data:`PATH_MODE` whose ``legendgroup`` is
    the grade id, as is its name, and whose ``customdata`` rows are (grade id, temperature
    [degC], extrapolation flag text), one per path point; the legend lists the passing
    grades in rank order, then the excluded ones. Every text from data is escaped
    (:func:`plot_text`).
    """
    props = result.window_props
    if props.path_extrapolated is None:
        raise ValueError("the map needs the ranking's temperature path; it has none")
    path_extrapolated = props.path_extrapolated
    colours = ranking_colours(result) if colours is None else colours
    grades = {g.id: g for g in result.grades}
    place = {g.id: k for k, g in enumerate(result.grades)}  # passing in rank order first
    temps, storage, eta = path_arrays(result)
    shown = shown_rows(result, show_excluded)
    limit = result.criteria.constraints.min_loss_factor
    xs = log_span(np.concatenate([eta[shown].ravel(), [limit] if limit else []]), AXIS_PAD)
    ys = log_span(storage[shown], AXIS_PAD)
    fig = go.Figure()
    if limit:
        _add_feasible(fig, limit, xs, ys)
    for trace in shared:
        fig.add_trace(trace)

    step = np.mod(temps, MARK_EVERY_K)
    on_mark = np.isclose(step, 0.0) | np.isclose(step, MARK_EVERY_K)
    sizes = np.where(on_mark, 7, 0)
    sizes[0] = sizes[-1] = 9
    labels = [""] * temps.size
    labels[0] = f"{temps[0]:g} °C"
    labels[-1] = f"{temps[-1]:g} °C"
    drawn = [k for k in shown if own is None or props.ids[k] in own]
    for k in _drawing_order(result, drawn):
        gid = props.ids[k]
        g = grades[gid]
        colour = colours.get(gid, INK)
        picked = gid in chosen
        if g.passed:
            status = f"rank {g.rank}, score {g.score:.0f}"
            alpha = 1.0 if (picked or not chosen) else 0.5
            width = 4.0 if picked else 2.0
            dash = "solid"
        else:
            status = "excluded:<br>" + "<br>".join(plot_text(f.text()) for f in g.failures)
            alpha = 0.9 if picked else 0.38
            width = 3.0 if picked else 1.3
            dash = "dot"  # excluded grades are told apart by their dotted, faded line
        labelled = g.passed or picked
        marks = sizes if labelled else np.where(sizes > 0, 4, 0)
        extrap = np.asarray(path_extrapolated[k], dtype=np.bool_)
        custom = np.empty((temps.size, 3), dtype=object)
        custom[:, 0] = gid
        custom[:, 1] = temps
        custom[:, 2] = np.where(extrap, " (extrapolated)", "")
        for trace in (beneath or {}).get(gid, ()):
            fig.add_trace(trace)
        # A plain dict: the figure checks it once as it adds it (a go.Scatter would be
        # checked when made and again when added, 4 x the time for 20 paths).
        fig.add_trace(
            dict(
                type="scatter",
                x=eta[k],
                y=storage[k],
                mode=PATH_MODE,
                name=plot_text(gid),
                legendgroup=gid,
                legendrank=1 + place[gid],
                line={"color": faded(colour, alpha), "width": width, "dash": dash},
                marker={
                    "size": marks,
                    "color": faded(colour, alpha),
                    # Plotly's numbers for "circle-open" (100) and "circle" (0): an
                    # array of numbers is checked at once, names one by one.
                    "symbol": np.where(extrap, 100, 0).astype(np.int16),
                    "line": {"width": 1.2, "color": faded(colour, alpha)},
                },
                text=labels if labelled else None,
                textposition="top right",
                textfont={"size": 10, "color": faded(colour, max(alpha, 0.5))},
                customdata=custom,
                hovertemplate=(
                    f"<b>{plot_text(gid)}</b> {plot_text(g.name)}<br>"
                    "T = %{customdata[1]:.0f} °C%{customdata[2]}<br>"
                    "E' = %{y:.3g} MPa<br>η = %{x:.3g}<br>"
                    f"{status}<extra></extra>"
                ),
                **(path_style or {}),
            )
        )
    fig.update_layout(
        template=TEMPLATE_NAME,
        height=640,
        title=(
            f"Paths through the window at {result.criteria.window.design_frequency:.3g} Hz, "
            f"{temps[0]:g} to {temps[-1]:g} °C"
        ),
        xaxis={
            "type": "log",
            "range": list(xs),
            "title": {"text": "loss factor η = tan δ [-]"},
        },
        yaxis={
            "type": "log",
            "range": list(ys),
            "title": {"text": "storage modulus E' [MPa] (tensile equivalent)"},
        },
        legend={"title": {"text": "grade"}, "itemclick": "toggle"},
        hovermode="closest",
    )
    return tidy_log_axes(fig)


__all__ = [
    "PATH_MODE",
    "READING",
    "map_figure",
    "path_arrays",
    "plot_text",
    "ranking_colours",
    "shown_rows",
]
