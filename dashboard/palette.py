"""Colours of the dashboard and the Plotly template its charts use.

The grade colours are a hand-mixed set of earthy, medium-dark tones that stay apart on
a warm white background; a grade keeps its colour on every chart (colour follows the
grade, not its family).
"""

from __future__ import annotations

import plotly.graph_objects as go
import plotly.io as pio

INK = "#23292E"
PAPER = "#FBFAF7"
GRID = "#E4E1D9"
FRAME = "#8A8F94"
ACCENT = "#2E6F73"
FEASIBLE = "rgba(46, 111, 115, 0.08)"
WINDOW_BAND = "rgba(196, 154, 42, 0.10)"
GUIDE = "#B9B4A8"
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


def grade_colours(ids) -> dict[str, str]:
    """A colour for every grade id, assigned in sorted id order."""
    return {gid: GRADE_COLOURS[k % len(GRADE_COLOURS)] for k, gid in enumerate(sorted(ids))}


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
pio.templates["quietgrade"] = TEMPLATE
