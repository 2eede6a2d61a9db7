"""Figures of the Machine page: the six rigid-body modes of a mount system against
temperature for the comparison set, and a mode shape drawn on a sketch of the body and
its mounts."""

from __future__ import annotations

import numpy as np
import plotly.graph_objects as go

from dashboard.charts.common import TEMPLATE
from engine.curves.system import MountSystem, SystemResult
from engine.output.mapfigure import plot_text
from engine.output.palette import GUIDE, INK, WARN

# Dashes told apart for the six tracked modes of one grade (colour is the grade's).
MODE_DASHES = ("solid", "dot", "dash", "longdash", "dashdot", "longdashdot")
# The drawn displacement of the largest-moving point, as a share of the body's size.
SHAPE_SCALE = 0.18


def modes_figure(
    results: dict[str, SystemResult], colours: dict[str, str], system: MountSystem
) -> go.Figure:
    """Each grade's six modes (tracked by shape) against temperature, with the highest
    mode frequency that still isolates each disturbance (f / ratio) as a guide."""
    fig = go.Figure()
    for gid, res in results.items():
        temps = res.temperatures
        rows = np.take_along_axis(res.frequencies, res.track, axis=1)
        for j in range(6):
            name = res.names[0][res.track[0, j]]
            fig.add_trace(
                go.Scatter(
                    x=temps,
                    y=rows[:, j],
                    mode="lines+markers",
                    line={"color": colours.get(gid, INK), "dash": MODE_DASHES[j], "width": 2},
                    marker={"size": 4},
                    name=f"{plot_text(gid)}: {name}",
                    legendgroup=plot_text(gid),
                    hovertemplate=(
                        f"{plot_text(gid)}, {name}<br>%{{x:g}} °C: %{{y:.3g}} Hz<extra></extra>"
                    ),
                )
            )
    limits = sorted(
        {f / system.min_frequency_ratio for d in system.disturbances for f in d.frequencies}
    )
    temps = next(iter(results.values())).temperatures if results else np.array([0.0, 1.0])
    for f in limits:
        # a line trace, not a shape: on a log axis a shape's annotation is placed in
        # log10 units
        fig.add_trace(
            go.Scatter(
                x=[float(temps.min()), float(temps.max())],
                y=[f, f],
                mode="lines",
                line={"color": WARN, "dash": "dot", "width": 1},
                name=f"modes must stay below {f:.3g} Hz",
                hovertemplate=f"isolation needs every mode below {f:.3g} Hz<extra></extra>",
            )
        )
    fig.update_layout(
        template=TEMPLATE,
        height=420,
        margin={"l": 60, "r": 20, "t": 30, "b": 50},
        xaxis_title="temperature [°C]",
        yaxis_title="mode frequency [Hz] (log)",
        yaxis_type="log",
        legend={"font": {"size": 11}},
    )
    return fig


def _outline(points: np.ndarray) -> np.ndarray:
    """A rectangle around ``points`` (N, 2), a little larger, closed."""
    lo, hi = points.min(axis=0), points.max(axis=0)
    pad = 0.08 * max(float(np.max(hi - lo)), 0.1)
    lo, hi = lo - pad, hi + pad
    return np.array([lo, [hi[0], lo[1]], hi, [lo[0], hi[1]], lo])


def shape_figure(system: MountSystem, res: SystemResult, t_index: int, mode: int) -> go.Figure:
    """Top view (x, y) and side view (x, z) of the mounts and the centre of gravity at
    rest (grey) and displaced in one mode (scaled so the largest movement is a fixed share
    of the body's size)."""
    from plotly.subplots import make_subplots

    from engine.physics import rigidbody as rb

    pos = np.array([m.position_m for m in system.mounts])
    cg = np.asarray(system.cg_m)
    points = np.vstack([pos, cg])
    shape = res.shapes[t_index][:, mode]
    moved = np.array([rb.motion_matrix(p - cg) @ shape for p in points])
    size = float(np.max(np.ptp(points, axis=0))) or 1.0
    largest = float(np.max(np.linalg.norm(moved, axis=1))) or 1.0
    shifted = points + moved * (SHAPE_SCALE * size / largest)
    fig = make_subplots(rows=1, cols=2, subplot_titles=("top view (x, y)", "side view (x, z)"))
    for col, (a, b) in enumerate(((0, 1), (0, 2)), start=1):
        box = _outline(points[:, [a, b]])
        fig.add_trace(
            go.Scatter(
                x=box[:, 0],
                y=box[:, 1],
                mode="lines",
                line={"color": GUIDE},
                showlegend=False,
                hoverinfo="skip",
            ),
            row=1,
            col=col,
        )
        for label, xy, colour, symbol in (
            ("at rest", points, GUIDE, "square-open"),
            ("in the mode", shifted, INK, "square"),
        ):
            fig.add_trace(
                go.Scatter(
                    x=xy[:-1, a],
                    y=xy[:-1, b],
                    mode="markers",
                    marker={"symbol": symbol, "size": 11, "color": colour},
                    name=f"mounts {label}",
                    showlegend=col == 1,
                    hovertemplate="mount %{text}<extra></extra>",
                    text=[str(i + 1) for i in range(len(system.mounts))],
                ),
                row=1,
                col=col,
            )
            fig.add_trace(
                go.Scatter(
                    x=[xy[-1, a]],
                    y=[xy[-1, b]],
                    mode="markers",
                    marker={
                        "symbol": "x-thin-open",
                        "size": 14,
                        "color": colour,
                        "line": {"width": 2},
                    },
                    name=f"centre of gravity {label}",
                    showlegend=col == 1,
                    hoverinfo="skip",
                ),
                row=1,
                col=col,
            )
        for p, q in zip(points, shifted, strict=True):
            fig.add_trace(
                go.Scatter(
                    x=[p[a], q[a]],
                    y=[p[b], q[b]],
                    mode="lines",
                    line={"color": WARN, "width": 1},
                    showlegend=False,
                    hoverinfo="skip",
                ),
                row=1,
                col=col,
            )
        fig.update_xaxes(
            title_text="x [m]", row=1, col=col, scaleanchor=f"y{'' if col == 1 else col}"
        )
        fig.update_yaxes(title_text="y [m]" if col == 1 else "z [m]", row=1, col=col)
    fig.update_layout(template=TEMPLATE, height=360, margin={"l": 50, "r": 20, "t": 40, "b": 40})
    return fig
