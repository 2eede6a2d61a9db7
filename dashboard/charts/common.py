"""What the dashboard's figures share: the template, the 95 % bands, small helpers.

Plotting transforms only: every value drawn comes from an engine object (WindowProps,
MasterCurve, MountResult) or the measured points; the few arrays made here are axis
geometry. Colours, the template and the log-axis ticks are the engine's
(:mod:`engine.output.palette`), which the HTML report draws with too.
"""

from __future__ import annotations

import numpy as np
import plotly.graph_objects as go

from engine.curves.mastercurve import MasterCurve
from engine.output.mapfigure import plot_text
from engine.output.palette import TEMPLATE_NAME, band_colours, log_span, tidy_log_axes

TEMPLATE = TEMPLATE_NAME
BAND_SUFFIX = "95 % interval"  # ends the name of every band trace
INTERVAL_NOTE = (
    "95 % interval from the fit's own uncertainty; wider where shifts come from the law, "
    "across gaps and outside the data"
)
BEYOND_STRENGTH = 0.45  # opacity of a band beyond the data, relative to one inside


def mode_symbol(curve: MasterCurve) -> str:
    """E for tensile data, G for shear data."""
    return "G" if curve.mode == "shear" else "E"


def band_trace(
    x, low, high, colour: str, of: str, where=None, strength: float = 1.0, **kwargs
) -> go.Scatter:
    """A shaded band between ``low`` and ``high`` over ``x``.

    ``of`` names the curve the band surrounds; it is the trace's ``meta`` and, unless
    ``name`` is given, starts its name. The band is drawn where ``where`` holds (all
    points by default; a run is widened by one point each side so that bands drawn for
    the complementary masks meet) and both edges are finite and positive, one closed
    outline per run of such points, outlines separated by a gap (NaN): each outline runs
    along the upper edge in the order of ``x`` and back along the lower edge, so its
    first half is the upper edge and its second half, reversed, the lower one.
    ``strength`` scales the opacity (fainter beyond the data).
    """
    x, low, high = (np.asarray(v, dtype=float).ravel() for v in (x, low, high))
    keep = np.isfinite(x) & np.isfinite(low) & np.isfinite(high) & (low > 0) & (high > 0)
    if where is not None:
        w = np.asarray(where, dtype=bool).ravel()
        wide = w.copy()
        wide[1:] |= w[:-1]
        wide[:-1] |= w[1:]
        keep &= wide
    idx = np.flatnonzero(keep)
    runs = np.split(idx, np.flatnonzero(np.diff(idx) > 1) + 1) if idx.size else []
    xs, ys = [], []
    for run in (r for r in runs if r.size >= 2):
        xs += [x[run], x[run][::-1], [np.nan]]
        ys += [high[run], low[run][::-1], [np.nan]]
    fill, edge = band_colours(colour, strength)
    return go.Scatter(
        x=np.concatenate(xs[:-1]) if xs else np.zeros(0),
        y=np.concatenate(ys[:-1]) if ys else np.zeros(0),
        mode="lines",
        fill="toself",
        fillcolor=fill,
        line={"color": edge, "width": 0.6 if strength >= 1.0 else 0.0},
        hoverinfo="skip",
        **{"name": f"{of} {BAND_SUFFIX}", "meta": of, **kwargs},
    )


def band_traces(x, low, high, beyond, colour: str, of: str, **kwargs) -> list[go.Scatter]:
    """The band of :func:`band_trace` inside the data and, fainter, ``beyond`` it."""
    beyond = np.asarray(beyond, dtype=bool).ravel()
    out = [band_trace(x, low, high, colour, of, where=~beyond, **kwargs)]
    if beyond.any():
        extra = {**kwargs, "showlegend": False}
        if "name" in kwargs:
            extra["name"] = f"{kwargs['name']} (beyond the data)"
        else:
            extra["name"] = f"{of} {BAND_SUFFIX} (beyond the data)"
        out.append(
            band_trace(x, low, high, colour, of, where=beyond, strength=BEYOND_STRENGTH, **extra)
        )
    return out


def with_interval(what: str) -> str:
    """Hover line of a value with its 95 % interval held in customdata[0] and [1]."""
    return f"{what}%{{y:.3g}} (95 %: %{{customdata[0]:.3g}} to %{{customdata[1]:.3g}})"


def empty_figure(message: str) -> go.Figure:
    """A blank figure carrying ``message`` in its middle."""
    fig = go.Figure()
    fig.add_annotation(
        text=plot_text(message), showarrow=False, xref="paper", yref="paper", x=0.5, y=0.5
    )
    fig.update_layout(template=TEMPLATE, height=260, xaxis_visible=False, yaxis_visible=False)
    return fig


__all__ = [
    "BAND_SUFFIX",
    "BEYOND_STRENGTH",
    "INTERVAL_NOTE",
    "TEMPLATE",
    "band_trace",
    "band_traces",
    "empty_figure",
    "log_span",
    "mode_symbol",
    "tidy_log_axes",
    "with_interval",
]
