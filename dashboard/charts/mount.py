"""Figures of the Mount page: natural frequency, transmissibility, amplification at
resonance and static strain of the comparison set against temperature, from the engine's
MountResult."""

from __future__ import annotations

import numpy as np
import plotly.graph_objects as go

from dashboard.charts.common import TEMPLATE, tidy_log_axes
from engine.curves.mountcheck import MAX_STATIC_STRAIN
from engine.output.mapfigure import plot_text
from engine.output.palette import FREQUENCY_DASHES, GUIDE, INK, WARN, WINDOW_BAND
from engine.selection.ranking import RankResult

# Up to this many disturbance frequencies the transmissibility chart draws one line per
# frequency and grade (a dash per frequency); beyond, one line per grade: the worst.
LINES_PER_DISTURBANCE = 3
# The static-strain axis ends at most a little above the strain at which a pad cannot
# carry its load at all (strain_axis_top): a sag of 40 would flatten every other line.
# Beyond the axis a line or a sag is marked at the top with its value.
STRAIN_AXIS_TOP = 1.2 * MAX_STATIC_STRAIN
FAR_OFF = 4.0  # a grade whose peak strain is this many times the middle grade's is far off


def _grade_line(temps, y, gid: str, colour: str, hover: str, dash: str, **extra) -> go.Scatter:
    """One grade's line against temperature; ``hover`` follows the grade's id."""
    return go.Scatter(
        x=temps,
        y=y,
        mode="lines+markers",
        name=plot_text(gid),
        line={"color": colour, "width": 2, "dash": dash},
        marker={"size": 5},
        hovertemplate=f"{plot_text(gid)}{hover}<extra></extra>",
        **extra,
    )


def strain_axis_top(result: RankResult, rows: list[int], limit: float) -> float:
    """Top of the static-strain axis for the grades of ``rows``: what the passing grades,
    the strain limit and most of the drawn values need, not the one grade far off.

    The larger of twice the limit, the passing grades' largest strain (with sag) and the
    95th percentile of the strains of the other drawn grades, a tenth above; never above
    :data:`STRAIN_AXIS_TOP`. A grade far off (its peak more than FAR_OFF times the middle
    grade's) does not set the axis. Lines above it are cut and marked at the top.
    """
    mres = result.mount
    assert mres is not None
    passed = {g.id for g in result.shortlist}
    drawn, needed = [], [2.0 * limit]
    for k in rows:
        values = np.append(np.asarray(mres.static_strain[k], dtype=float), mres.sag_strain[k])
        values = values[np.isfinite(values)]
        if values.size:
            drawn.append(values)
            if mres.ids[k] in passed:
                needed.append(float(values.max()))
    if drawn:
        middle = float(np.median([v.max() for v in drawn]))
        near = [v for v in drawn if v.max() <= FAR_OFF * max(middle, limit)]
        if near:
            needed.append(float(np.percentile(np.concatenate(near), 95)))
    return float(min(1.1 * max(needed), STRAIN_AXIS_TOP))


def mount_figures(
    result: RankResult, ids: list[str], colours: dict[str, str]
) -> tuple[go.Figure, go.Figure, go.Figure, go.Figure]:
    """Natural frequency, transmissibility, amplification at resonance (the run-up) and
    static strain against temperature.

    The transmissibility is drawn at each disturbance frequency (a dash per frequency)
    when there are at most :data:`LINES_PER_DISTURBANCE`, else as the worst over the
    disturbances; its axis says which. Drawn only for a ranking that checked a mount:
    the Mount page says so and draws nothing when ``result.mount`` or
    ``result.criteria.mount`` is None.
    """
    mres = result.mount
    design = result.criteria.mount
    if mres is None or design is None:
        raise ValueError("mount figures need a ranking that checked a mount; none was checked")
    con = result.criteria.constraints
    temps = np.asarray(mres.temperatures, dtype=float)
    rows = {gid: k for k, gid in enumerate(mres.ids)}
    labels = design.disturbance_labels()
    fn_fig, tr_fig, am_fig, sd_fig = go.Figure(), go.Figure(), go.Figure(), go.Figure()
    for f, label in zip(mres.disturbance, labels, strict=True):
        fn_fig.add_hline(
            y=float(f),
            line={"color": WARN, "dash": "dash", "width": 1.2},
            annotation_text=f"disturbance {label}",
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
    limit = mres.strain_limit if con.max_static_strain is None else con.max_static_strain
    shown = [rows[g] for g in ids if g in rows]
    strain_top = strain_axis_top(result, shown, limit)
    single = mres.disturbance.size == 1
    each = mres.disturbance.size <= LINES_PER_DISTURBANCE
    if each and not single:
        # A key to the dashes: one grey line per disturbance frequency, in the legend only.
        for j, label in enumerate(labels):
            tr_fig.add_trace(
                go.Scatter(
                    x=[None],
                    y=[None],
                    mode="lines",
                    name=label,
                    legendgroup="disturbances",
                    line={"color": GUIDE, "width": 2, "dash": FREQUENCY_DASHES[j % 5]},
                    hoverinfo="skip",
                )
            )
    amp_limit = con.max_amplification
    if amp_limit is not None:
        am_fig.add_trace(
            go.Scatter(
                x=[temps.min(), temps.max()],
                y=[amp_limit, amp_limit],
                mode="lines+text",
                line={"color": WARN, "dash": "dash", "width": 1.2},
                text=[f"limit {amp_limit:g}", ""],
                textposition="top right",
                textfont={"size": 10},
                hoverinfo="skip",
                showlegend=False,
            )
        )
    for gid in ids:
        if gid not in rows:
            continue
        k = rows[gid]
        colour = colours.get(gid, INK)

        def grade_line(y, hover: str, dash: str = "solid", **extra) -> go.Scatter:
            # called within this iteration only, so its gid and colour are this grade's
            return _grade_line(temps, y, gid, colour, hover, dash, **extra)  # noqa: B023

        fn_fig.add_trace(
            grade_line(mres.natural_frequency[k], "<br>T = %{x:g} °C<br>fn = %{y:.3g} Hz")
        )
        trans = mres.transmissibility[k]
        if each:
            for j, label in enumerate(labels):
                tr_fig.add_trace(
                    grade_line(
                        trans[:, j],
                        f" at {label}<br>T = %{{x:g}} °C<br>transmissibility %{{y:.3g}}",
                        FREQUENCY_DASHES[j % 5],
                        legendgroup=gid,
                        showlegend=j == 0,
                    )
                )
        else:
            finite = np.isfinite(trans).any(axis=1)
            at = np.argmax(np.where(np.isfinite(trans), trans, -np.inf), axis=1)
            worst = np.where(finite, trans[np.arange(temps.size), at], np.nan)
            tr_fig.add_trace(
                grade_line(
                    worst,
                    "<br>T = %{x:g} °C<br>worst transmissibility %{y:.3g} at %{customdata}",
                    legendgroup=gid,
                    customdata=[labels[j] for j in at],
                )
            )
        am_fig.add_trace(
            grade_line(
                mres.amplification[k],
                "<br>T = %{x:g} °C<br>amplification %{y:.3g} at fn %{customdata:.3g} Hz",
                legendgroup=gid,
                customdata=mres.natural_frequency[k],
            )
        )
        sd_fig.add_trace(
            grade_line(
                mres.static_strain[k],
                "<br>T = %{x:g} °C<br>static strain %{y:.3g} (%{customdata:.3g} mm)",
                legendgroup=gid,
                customdata=mres.static_deflection[k] * 1e3,
            )
        )
        strain = np.asarray(mres.static_strain[k], dtype=float)
        over = np.isfinite(strain) & (strain > strain_top)
        if over.any():
            # The line leaves the axis: a mark at the top where it does, with its largest.
            first = int(np.argmax(over))
            sd_fig.add_trace(
                go.Scatter(
                    x=[temps[first]],
                    y=[strain_top],
                    mode="markers+text",
                    text=[
                        f"{plot_text(gid)}: up to {np.nanmax(strain):.3g}"
                        + (
                            f" ({mres.sag_strain[k]:.3g} with sag)"
                            if np.isfinite(mres.sag_strain[k])
                            else ""
                        )
                        + ", cut off"
                    ],
                    textposition="bottom right" if first < temps.size / 4 else "bottom left",
                    textfont={"size": 10, "color": colour},
                    legendgroup=gid,
                    showlegend=False,
                    name=f"{plot_text(gid)} above the axis",
                    marker={"color": colour, "size": 10, "symbol": "arrow-bar-up"},
                    hovertemplate=(
                        f"{plot_text(gid)}: static strain above {strain_top:.3g} from "
                        f"{temps[first]:g} °C, up to {np.nanmax(strain):.3g}<extra></extra>"
                    ),
                )
            )
        sag = float(mres.sag_strain[k])
        off_scale = sag > strain_top
        sd_fig.add_trace(
            go.Scatter(
                x=[temps.max()],
                y=[strain_top if off_scale else sag],
                mode="markers+text" if off_scale else "markers",
                text=(
                    [f"{plot_text(gid)}: {sag:.3g}, off the scale"]
                    if off_scale and not over.any()
                    else None
                ),
                textposition="bottom left",
                textfont={"size": 10, "color": colour},
                legendgroup=gid,
                showlegend=False,
                name=f"{plot_text(gid)} with sag after {design.service_life_h:g} h",
                marker={
                    "color": colour,
                    "size": 11,
                    "symbol": "triangle-up-open" if off_scale else "triangle-down-open",
                    "line": {"width": 2},
                },
                customdata=[[sag, mres.sag[k] * 1e3]],
                hovertemplate=(
                    f"{plot_text(gid)}: strain %{{customdata[0]:.3g}} "
                    "(%{customdata[1]:.3g} mm) after "
                    f"{design.service_life_h:g} h at {temps.max():g} °C<extra></extra>"
                ),
            )
        )
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
    if single:
        tr_title, tr_axis = f"Transmissibility at {labels[0]}", "transmissibility [-]"
    elif each:
        tr_title = "Transmissibility at each disturbance"
        tr_axis = "transmissibility, a dash per disturbance [-]"
    else:
        tr_title = f"Worst transmissibility over the {len(labels)} disturbances"
        tr_axis = f"worst transmissibility over {len(labels)} disturbances [-]"
    tr_fig.update_layout(
        template=TEMPLATE,
        height=460,
        title=tr_title,
        xaxis_title="temperature [°C]",
        yaxis={"type": "log", "title": {"text": tr_axis}},
        legend=bottom,
    )
    am_fig.update_layout(
        template=TEMPLATE,
        height=460,
        title="Amplification at resonance (run-up through fn)",
        xaxis_title="temperature [°C]",
        yaxis={"type": "log", "title": {"text": "transmissibility at fn [-]"}},
        legend=bottom,
        showlegend=True,  # name the grade even when it is the only line
    )
    sd_fig.update_layout(
        template=TEMPLATE,
        height=460,
        title=f"Static strain (triangles: with sag after {design.service_life_h:g} h)",
        xaxis_title="temperature [°C]",
        yaxis={
            "title": {"text": "static strain (deflection / thickness) [-]"},
            "range": [0.0, strain_top],
        },
        legend=bottom,
    )
    return (
        tidy_log_axes(fn_fig),
        tidy_log_axes(tr_fig),
        tidy_log_axes(am_fig),
        tidy_log_axes(sd_fig),
    )
