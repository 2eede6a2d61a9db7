"""Figures of the Mount page: natural frequency, transmissibility and static strain of
the comparison set against temperature, from the engine's MountResult."""

from __future__ import annotations

import numpy as np
import plotly.graph_objects as go

from dashboard.charts.common import TEMPLATE, tidy_log_axes
from engine.output.palette import FREQUENCY_DASHES, GUIDE, INK, WARN, WINDOW_BAND
from engine.selection.ranking import RankResult


def mount_figures(
    result: RankResult, ids: list[str], colours: dict[str, str]
) -> tuple[go.Figure, go.Figure, go.Figure]:
    """Natural frequency, transmissibility and static deflection against temperature.

    Drawn only for a ranking that checked a mount: the Mount page says so and draws
    nothing when ``result.mount`` or ``result.criteria.mount`` is None.
    """
    mres = result.mount
    design = result.criteria.mount
    if mres is None or design is None:
        raise ValueError("mount figures need a ranking that checked a mount; none was checked")
    con = result.criteria.constraints
    temps = np.asarray(mres.temperatures, dtype=float)
    rows = {gid: k for k, gid in enumerate(mres.ids)}
    fn_fig, tr_fig, sd_fig = go.Figure(), go.Figure(), go.Figure()
    for f in mres.disturbance:
        fn_fig.add_hline(
            y=float(f),
            line={"color": WARN, "dash": "dash", "width": 1.2},
            annotation_text=f"disturbance {f:g} Hz",
            annotation_position="top left",
            annotation_font_size=10,
        )
    if con.fn_range_Hz is not None:
        fn_fig.add_hrect(
            y0=con.fn_range_Hz[0], y1=con.fn_range_Hz[1], fillcolor=WINDOW_BAND, line_width=0
        )
    if design.target_fn_Hz is not None:
        fn_fig.add_trace(
            go.Scatter(
                x=[design.sizing_temp_C],
                y=[design.target_fn_Hz],
                mode="markers",
                name=f"sizing target {design.target_fn_Hz:g} Hz at {design.sizing_temp_C:g} °C",
                marker={"symbol": "star-open", "size": 13, "color": INK, "line": {"width": 1.5}},
            )
        )
    if con.min_frequency_ratio is not None and mres.disturbance.size:
        # The highest fn the f/fn limit allows, at the lowest disturbance.
        ceiling = float(np.min(mres.disturbance)) / con.min_frequency_ratio
        fn_fig.add_hline(
            y=ceiling,
            line={"color": WARN, "dash": "dot", "width": 1.2},
            annotation_text=f"highest fn for f/fn >= {con.min_frequency_ratio:.3g}",
            annotation_position="bottom left",
            annotation_font_size=10,
        )
    # Level lines as traces: shapes on a log axis would stretch its autorange. The limit
    # is the tighter of the transmissibility limit and 1 - the isolation efficiency.
    limit = con.transmissibility_limit
    if limit == 1.0:
        levels = [(1.0, "1: no isolation (the limit)", WARN, "dash")]
    else:
        levels = [(1.0, "1: no isolation", GUIDE, "dot")]
        if limit is not None:
            levels.append((limit, f"limit {limit:g}", WARN, "dash"))
    for y, label, colour, dash in levels:
        tr_fig.add_trace(
            go.Scatter(
                x=[temps.min(), temps.max()],
                y=[y, y],
                mode="lines+text",
                line={"color": colour, "dash": dash, "width": 1.2},
                text=[label, ""],
                textposition="top right",
                textfont={"size": 10},
                hoverinfo="skip",
                showlegend=False,
            )
        )
    single = mres.disturbance.size == 1
    for gid in ids:
        if gid not in rows:
            continue
        k = rows[gid]
        colour = colours.get(gid, INK)
        fn_fig.add_trace(
            go.Scatter(
                x=temps,
                y=mres.natural_frequency[k],
                mode="lines+markers",
                name=gid,
                line={"color": colour, "width": 2},
                marker={"size": 5},
                hovertemplate=f"{gid}<br>T = %{{x:g}} °C<br>fn = %{{y:.3g}} Hz<extra></extra>",
            )
        )
        for j, f in enumerate(mres.disturbance):
            tr_fig.add_trace(
                go.Scatter(
                    x=temps,
                    y=mres.transmissibility[k][:, j],
                    mode="lines+markers",
                    name=gid if single else f"{gid} at {f:g} Hz",
                    legendgroup=gid,
                    line={"color": colour, "width": 2, "dash": FREQUENCY_DASHES[j % 5]},
                    marker={"size": 5},
                    hovertemplate=(
                        f"{gid} at {f:g} Hz<br>T = %{{x:g}} °C<br>transmissibility %{{y:.3g}}"
                        "<extra></extra>"
                    ),
                )
            )
        sd_fig.add_trace(
            go.Scatter(
                x=temps,
                y=mres.static_strain[k],
                mode="lines+markers",
                name=gid,
                legendgroup=gid,
                line={"color": colour, "width": 2},
                marker={"size": 5},
                customdata=mres.static_deflection[k] * 1e3,
                hovertemplate=(
                    f"{gid}<br>T = %{{x:g}} °C<br>static strain %{{y:.3g}} "
                    "(%{customdata:.3g} mm)<extra></extra>"
                ),
            )
        )
        sd_fig.add_trace(
            go.Scatter(
                x=[temps.max()],
                y=[mres.sag_strain[k]],
                mode="markers",
                legendgroup=gid,
                showlegend=False,
                name=f"{gid} with sag after {design.service_life_h:g} h",
                marker={
                    "color": colour,
                    "size": 11,
                    "symbol": "triangle-down-open",
                    "line": {"width": 2},
                },
                customdata=[mres.sag[k] * 1e3],
                hovertemplate=(
                    f"{gid}: strain %{{y:.3g}} (%{{customdata:.3g}} mm) after "
                    f"{design.service_life_h:g} h at {temps.max():g} °C<extra></extra>"
                ),
            )
        )
    limit = mres.strain_limit if con.max_static_strain is None else con.max_static_strain
    sd_fig.add_hline(
        y=limit,
        line={"color": WARN, "dash": "dash"},
        annotation_text=f"strain limit {limit:g}",
        annotation_position="top left",
        annotation_font_size=10,
    )
    bottom = {"orientation": "h", "y": -0.22, "font": {"size": 10}}
    fn_fig.update_layout(
        template=TEMPLATE,
        height=460,
        title="Natural frequency across the window",
        xaxis_title="temperature [°C]",
        yaxis_title="natural frequency fn [Hz]",
        legend=bottom,
    )
    tr_fig.update_layout(
        template=TEMPLATE,
        height=460,
        title="Transmissibility at the disturbance",
        xaxis_title="temperature [°C]",
        yaxis={"type": "log", "title": {"text": "transmissibility [-]"}},
        legend=bottom,
    )
    sd_fig.update_layout(
        template=TEMPLATE,
        height=460,
        title=f"Static strain (triangles: with sag after {design.service_life_h:g} h)",
        xaxis_title="temperature [°C]",
        yaxis={
            "title": {"text": "static strain (deflection / thickness) [-]"},
            "rangemode": "tozero",
        },
        legend=bottom,
    )
    return tidy_log_axes(fn_fig), tidy_log_axes(tr_fig), tidy_log_axes(sd_fig)
