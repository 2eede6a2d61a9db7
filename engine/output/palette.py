"""Colours, the Plotly template and the log-axis ticks of every quietgrade figure.

The HTML report (:mod:`engine.output.report`) and the dashboard draw with these, so a
chart looks the same in both and a grade has the same colour in both.

The grade colours are a hand-mixed set of earthy, medium-dark tones that stay apart on
a warm white background; a grade keeps its colour on every chart (colour follows the
grade, not its family). Importing this module registers the template as
``"quietgrade"`` with Plotly.
"""

from __future__ import annotations

from collections.abc import Iterable

import numpy as np
import plotly.graph_objects as go
import plotly.io as pio

INK = "#23292E"
GRID = "#E4E1D9"
FRAME = "#8A8F94"
ACCENT = "#2E6F73"
FEASIBLE = "rgba(46, 111, 115, 0.09)"  # where a limit is met, e.g. eta above its minimum
WINDOW_BAND = "rgba(196, 154, 42, 0.10)"
GUIDE = "#B9B4A8"
GUIDE_TEXT = "#A39E91"
WARN = "#9E3B4D"
LOSS_MODULUS_COLOUR = "#8C6239"  # walnut: E'' beside E' on one chart
LOSS_FACTOR_COLOUR = "#B8562F"  # rust: tan delta beside E' on one chart
# 95 % intervals: a faint wash of the curve's own colour, with a hairline edge a little
# stronger so that overlapping bands stay told apart.
BAND_ALPHA = 0.14
BAND_EDGE_ALPHA = 0.30
INTERVAL_WASH = "rgba(46, 111, 115, 0.12)"  # teal wash behind an interval on a line chart

GRADE_COLOURS = (
    "#2E6F73",  # deep teal
    "#B8562F",  # rust
    "#5B7F2E",  # moss
    "#7A4E8C",  # plum
    "#C49A2A",  # ochre
    "#35598F",  # ink blue
    "#9E3B4D",  # rosewood
    "#4F9A86",  # sea green
    "#8C6239",  # walnut
    "#6C7A89",  # slate
    "#D07C5B",  # clay
    "#3E7C4C",  # pine
    "#A3779D",  # heather
    "#7F8A2E",  # olive
    "#5C4B8A",  # dusk
    "#B36B7E",  # dusty rose
)

# The comparison set: the colour-blind-safe set of Okabe & Ito (2008, "Color Universal
# Design", jfly.uni-koeln.de/color), told apart under the common colour-vision
# deficiencies; yellow last and darkened to ochre, which reads on white.
SET_COLOURS = (
    "#0072B2",  # blue
    "#D55E00",  # vermillion
    "#009E73",  # bluish green
    "#CC79A7",  # reddish purple
    "#E69F00",  # orange
    "#56B4E9",  # sky blue
    "#000000",  # black
    "#B59F00",  # yellow, darkened
)
# Loss modulus E'' behind the map: a faint field, light to a little darker.
LOSS_FIELD_SCALE = ((0.0, "#FFFFFF"), (1.0, "#C9D6DC"))

# Cold to warm, for colouring measured points by temperature.
TEMPERATURE_SCALE = (
    (0.0, "#2F4F7F"),
    (0.35, "#7F9DB5"),
    (0.5, "#D9D2BF"),
    (0.7, "#D49A6A"),
    (1.0, "#9A3F22"),
)

FREQUENCY_DASHES = ("solid", "dash", "dashdot", "longdash", "dot")
FREQUENCY_SYMBOLS = ("circle", "square", "diamond", "triangle-up", "cross")


def grade_colours(ids: Iterable[str]) -> dict[str, str]:
    """A colour for every grade id, assigned in sorted id order.

    Give it the ids of the ranked grades (the fitted grades of a library, the ranking's
    ``window_props.ids``): every view of one library then gives a grade one colour, in
    the dashboard and in the report alike.
    """
    return {gid: GRADE_COLOURS[k % len(GRADE_COLOURS)] for k, gid in enumerate(sorted(ids))}


def with_set_colours(colours: dict[str, str], chosen: Iterable[str]) -> dict[str, str]:
    """``colours`` with the grades of the comparison set ``chosen`` in :data:`SET_COLOURS`,
    in the set's order (beyond eight grades the set's colours repeat)."""
    out = dict(colours)
    for k, gid in enumerate(chosen):
        out[gid] = SET_COLOURS[k % len(SET_COLOURS)]
    return out


def faded(colour: str, alpha: float) -> str:
    """``colour`` (#rrggbb) as an rgba string with opacity ``alpha``."""
    r, g, b = (int(colour[i : i + 2], 16) for i in (1, 3, 5))
    return f"rgba({r}, {g}, {b}, {alpha:.2f})"


def band_colours(colour: str, strength: float = 1.0) -> tuple[str, str]:
    """Fill and edge colour of the 95 % band around a curve of ``colour``; ``strength``
    scales their opacity."""
    return faded(colour, BAND_ALPHA * strength), faded(colour, BAND_EDGE_ALPHA * strength)


def _axis() -> dict:
    return {
        "gridcolor": GRID,
        "linecolor": FRAME,
        "showline": True,
        "mirror": True,
        "ticks": "outside",
        "tickcolor": FRAME,
        "zeroline": False,
        "title": {"font": {"size": 13}},
    }


TEMPLATE_NAME = "quietgrade"
TEMPLATE = go.layout.Template(
    layout={
        "font": {"family": "Source Sans 3, Segoe UI, Helvetica, Arial, sans-serif", "color": INK},
        "paper_bgcolor": "#FFFFFF",
        "plot_bgcolor": "#FFFFFF",
        "colorway": list(GRADE_COLOURS),
        "xaxis": _axis(),
        "yaxis": _axis(),
        "legend": {"bgcolor": "rgba(255,255,255,0.7)", "font": {"size": 11}},
        "hoverlabel": {"bgcolor": "#FFFFFF", "bordercolor": FRAME, "font": {"color": INK}},
        "margin": {"l": 70, "r": 30, "t": 50, "b": 60},
        "title": {"font": {"size": 15}, "x": 0.0, "xanchor": "left"},
    }
)
pio.templates[TEMPLATE_NAME] = TEMPLATE


# -- log axes ------------------------------------------------------------------------------


def log_span(values, pad: float = 0.12) -> tuple[float, float]:
    """log10 range covering the finite positive ``values``, padded [decades]."""
    v = np.asarray(values, dtype=float).ravel()
    v = v[np.isfinite(v) & (v > 0)]
    if v.size == 0:
        return (-1.0, 1.0)
    lo, hi = np.log10(v.min()), np.log10(v.max())
    if hi - lo < 0.5:
        mid = 0.5 * (lo + hi)
        lo, hi = mid - 0.25, mid + 0.25
    return (float(lo - pad), float(hi + pad))


def tidy_log_axes(fig: go.Figure) -> go.Figure:
    """Readable tick labels on log axes: few labels on narrow spans, decades on wide ones.

    The template cannot say this (the ticks depend on the span of the data drawn), so
    every figure with a log axis ends with this call.
    """
    spans: dict[str, list[float]] = {}
    for trace in fig.data:
        for letter in ("x", "y"):
            ref = getattr(trace, f"{letter}axis", None) or letter
            values = getattr(trace, letter, None)
            if values is None:
                continue
            try:
                v = np.asarray(values, dtype=float).ravel()
            except ValueError:  # a category axis
                continue
            v = v[np.isfinite(v) & (v > 0)]
            if v.size:
                lo, hi = spans.get(ref, [np.inf, -np.inf])
                spans[ref] = [min(lo, np.log10(v.min())), max(hi, np.log10(v.max()))]
    for ref, (lo, hi) in spans.items():
        name = ("xaxis" if ref[0] == "x" else "yaxis") + ref[1:]
        axis = fig.layout[name] if name in fig.layout else None
        if axis is None or axis.type != "log":
            continue
        if axis.range is not None:
            lo, hi = sorted(axis.range)
        span = hi - lo
        if span >= 2.5:
            axis.update(
                dtick=1 if span <= 12 else 2,
                exponentformat="power" if span > 7 else "none",
                minor={"ticks": "outside", "ticklen": 3, "dtick": "D1", "showgrid": False},
            )
        elif span >= 0.7:
            # 1-2-5 ticks with their full values (Plotly's "D2" labels 0.5 as "5").
            decades = range(int(np.floor(lo)) - 1, int(np.ceil(hi)) + 1)
            ticks = [m * 10.0**d for d in decades for m in (1, 2, 5)]
            ticks = [v for v in ticks if lo - 1e-9 <= np.log10(v) <= hi + 1e-9]
            axis.update(tickvals=ticks, ticktext=[f"{v:g}" for v in ticks])
    return fig


# -- lines of constant loss modulus on the map ----------------------------------------------

GUIDE_STYLES = ("ticks", "field", "none")  # how the map shows constant E'' = eta E'


def loss_modulus_guides(fig: go.Figure, style: str = "ticks") -> go.Figure:
    """The map's lines of constant loss modulus E'' = eta E' [MPa] drawn as ``style``.

    ``"ticks"``: a short mark with the value where each decade of E'' meets the top and the
    right edge of the frame; ``"field"``: a faint colour field of log10 E'' behind the
    paths (its scale beside the plot); ``"none"``: not drawn.
    The axes must be log axes with their ranges set (as the map sets them).
    """
    if style not in GUIDE_STYLES:
        raise ValueError(f"guide style {style!r}: use one of {', '.join(GUIDE_STYLES)}")
    xa, xb = fig.layout.xaxis.range
    ya, yb = fig.layout.yaxis.range
    if style == "ticks":
        marks = []  # added at once: the figure checks each annotation it adds alone

        def tick(label: str, **where) -> dict:
            return dict(
                text=label,
                showarrow=True,
                arrowhead=0,
                arrowcolor=GUIDE_TEXT,
                font={"size": 10, "color": GUIDE_TEXT},
                **where,
            )

        for d in range(int(np.floor(xa + ya)), int(np.ceil(xb + yb)) + 1):
            label = f"{10.0**d:g}"
            if xa < d - yb < xb:  # where log E'' = d meets the top edge
                marks.append(tick(label, x=d - yb, y=yb, ax=0, ay=-9, yanchor="bottom"))
            if ya < d - xb < yb:  # ... and the right edge
                marks.append(tick(label, x=xb, y=d - xb, ax=9, ay=0, xanchor="left"))
        marks.append(
            dict(
                x=1.0,
                y=1.0,
                xref="paper",
                yref="paper",
                xanchor="left",
                yanchor="bottom",
                text="E'' [MPa]",
                showarrow=False,
                xshift=4,
                yshift=4,
                font={"size": 10, "color": GUIDE_TEXT},
            )
        )
        fig.update_layout(annotations=[*fig.layout.annotations, *marks])
        fig.update_layout(margin={"r": 60})
    elif style == "field":
        gx = np.linspace(xa, xb, 60)
        gy = np.linspace(ya, yb, 60)
        field = go.Heatmap(
            x=10.0**gx,
            y=10.0**gy,
            z=gy[:, None] + gx[None, :],
            colorscale=[list(stop) for stop in LOSS_FIELD_SCALE],
            showscale=True,
            colorbar={
                "title": {"text": "E'' [MPa]", "side": "right"},
                "thickness": 10,
                "len": 0.6,
                "tickvals": list(range(int(np.ceil(xa + ya)), int(np.floor(xb + yb)) + 1)),
                "ticktext": [
                    f"{10.0**d:g}" for d in range(int(np.ceil(xa + ya)), int(np.floor(xb + yb)) + 1)
                ],
            },
            hoverinfo="skip",
            name="loss modulus E''",
        )
        fig.add_trace(field)
        fig.data = (fig.data[-1], *fig.data[:-1])  # the field under everything
    return fig
