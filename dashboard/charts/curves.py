"""Figures of the Curves page: stiffness and damping against temperature, the master
curve, shift factors, the reduced-frequency nomogram, the glass transition, relaxation
and the fit's data quality. Plotting transforms only: every value drawn comes from a
MasterCurve or the measured points; the arrays made here are axis geometry (guide
lines, label positions, shifted abscissae from the engine's shift factors)."""

from __future__ import annotations

import numpy as np
import plotly.graph_objects as go
from plotly.subplots import make_subplots

from dashboard.charts.common import (
    BAND_SUFFIX,
    TEMPLATE,
    band_trace,
    band_traces,
    log_span,
    mode_symbol,
    tidy_log_axes,
    with_interval,
)
from engine.curves.mastercurve import MasterCurve
from engine.output.mapfigure import plot_text
from engine.output.palette import (
    ACCENT,
    FREQUENCY_DASHES,
    FREQUENCY_SYMBOLS,
    GRADE_COLOURS,
    GUIDE,
    INK,
    INTERVAL_WASH,
    LOSS_FACTOR_COLOUR,
    LOSS_MODULUS_COLOUR,
    TEMPERATURE_SCALE,
    WARN,
    WINDOW_BAND,
    faded,
)

HOUR_S = 3600.0
# The shades of the regions on the glass-transition chart, in the engine's order
# (transition, rubbery plateau, flow): washes of the palette's ink blue, moss and slate,
# none the ochre of the operating window.
REGION_SHADES = tuple(faded(GRADE_COLOURS[k], 0.10) for k in (5, 2, 9))


def decade_span(values, pad: float = 0.1) -> tuple[float, float]:
    """log10 axis range covering every finite positive value, its ends on whole decades
    or beyond the padded extremes, so that the smallest and largest values drawn sit
    inside the axis with a labelled decade at or past each [decades]."""
    lo, hi = log_span(values, pad)
    v = np.asarray(values, dtype=float).ravel()
    v = v[np.isfinite(v) & (v > 0)]
    if v.size == 0:
        return lo, hi
    return float(min(lo, np.floor(np.log10(v.min())))), float(max(hi, np.ceil(np.log10(v.max()))))


def _nearest_measured(points: np.ndarray, frequency: float) -> tuple[float, np.ndarray]:
    """The measured frequency nearest ``frequency`` (log scale) and the rows measured there."""
    logs = np.log10(points[:, 1])
    levels = np.unique(np.round(logs, 2))
    level = levels[np.argmin(np.abs(levels - np.log10(frequency)))]
    rows = np.abs(logs - level) < 0.006
    return float(10.0**level), rows


# Said on the axes of moduli on the tensile-equivalent basis.
TENSILE_NOTE = "tensile equivalent: E = 2(1+ν)G for shear data"


def temperature_figure(
    ids: list[str],
    curves: dict[str, MasterCurve],
    points: dict[str, np.ndarray | None],
    frequencies: list[float],
    window_range: tuple[float, float],
    colours: dict[str, str],
    tensile: dict[str, float] | None = None,
) -> go.Figure:
    """E', E'' and tan delta against temperature at chosen frequencies, with measurements.

    ``tensile`` (grade id -> 1 for tensile data, 2(1 + nu) for shear data): the moduli on
    the tensile-equivalent basis the map and the ranking use, E = 2(1 + nu) G, said on the
    axes; without it each grade in its own mode (E' or G').
    """
    fig = make_subplots(rows=3, cols=1, shared_xaxes=True, vertical_spacing=0.035)
    t_lo = min([window_range[0]] + [curves[g].temperature_range[0] for g in ids])
    t_hi = max([window_range[1]] + [curves[g].temperature_range[1] for g in ids])
    grid = np.linspace(t_lo, t_hi, 241)
    # Axis ranges follow the master curve inside the data and the measurements; an
    # extrapolated tail (a Prony series falls steeply beyond its shortest time) may run
    # off the chart rather than squash what is known.
    known: dict[int, list[np.ndarray]] = {1: [], 2: [], 3: []}
    for gid in ids:
        curve = curves[gid]
        colour = colours.get(gid, INK)
        factor = 1.0 if tensile is None else float(tensile.get(gid, 1.0))
        m = "E" if tensile is not None else mode_symbol(curve)
        pts = points.get(gid)
        # One pass of the posterior draws for every temperature and frequency of the grade.
        band = curve.interval(grid[:, None], np.asarray(frequencies, dtype=float)[None, :])
        for j, f in enumerate(frequencies):
            p = curve.evaluate(grid, f)
            x = np.asarray(p.extrapolated, dtype=bool)
            dash = FREQUENCY_DASHES[j % len(FREQUENCY_DASHES)]
            series = (
                (
                    1,
                    p.storage_modulus * factor / 1e6,
                    f"{m}'",
                    band.storage_low * factor,
                    band.storage_high * factor,
                    1e6,
                ),
                (
                    2,
                    p.loss_modulus * factor / 1e6,
                    f"{m}''",
                    band.loss_low * factor,
                    band.loss_high * factor,
                    1e6,
                ),
                (3, p.loss_factor, "tan δ", band.loss_factor_low, band.loss_factor_high, 1.0),
            )
            for row, values, what, low, high, unit in series:
                low, high = low[:, j] / unit, high[:, j] / unit
                known[row] += [np.asarray(values)[~x], low[~x], high[~x]]
                for trace in band_traces(
                    grid,
                    low,
                    high,
                    x,
                    colour,
                    f"{plot_text(gid)} {what} {f:g} Hz",
                    legendgroup=f"{gid}-{j}",
                    showlegend=False,
                ):
                    fig.add_trace(trace, row=row, col=1)
                for part, mask in (("", ~x), (" extrapolated", x)):
                    fig.add_trace(
                        go.Scatter(
                            x=grid,
                            y=np.where(mask, values, np.nan),
                            mode="lines",
                            name=f"{plot_text(gid)} {f:g} Hz",
                            legendgroup=f"{gid}-{j}",
                            showlegend=row == 1 and not part,
                            line={
                                "color": colour if not part else faded(colour, 0.35),
                                "dash": dash,
                                "width": 2 if not part else 1.5,
                            },
                            customdata=np.column_stack([low, high]),
                            hovertemplate=(
                                f"{plot_text(gid)} {what}{part}<br>"
                                f"T = %{{x:.1f}} °C, f = {f:g} Hz<br>"
                                + with_interval("")
                                + "<extra></extra>"
                            ),
                        ),
                        row=row,
                        col=1,
                    )
            if pts is None or pts.size == 0:
                continue
            fm, rows = _nearest_measured(pts, f)
            sel = pts[rows]
            symbol = FREQUENCY_SYMBOLS[j % len(FREQUENCY_SYMBOLS)]
            measured = (
                (1, sel[:, 2] * factor / 1e6),
                (2, sel[:, 2] * sel[:, 3] * factor / 1e6),
                (3, sel[:, 3]),
            )
            for row, values in measured:
                known[row].append(values)
                fig.add_trace(
                    go.Scatter(
                        x=sel[:, 0],
                        y=values,
                        mode="markers",
                        name=f"{plot_text(gid)} measured {fm:.3g} Hz",
                        legendgroup=f"{gid}-{j}",
                        showlegend=row == 1,
                        marker={
                            "symbol": symbol + "-open",
                            "size": 6,
                            "color": colour,
                            "line": {"width": 1.2},
                        },
                        hovertemplate=(
                            f"{plot_text(gid)} measured at {fm:.3g} Hz<br>T = %{{x:.1f}} °C<br>"
                            "%{y:.3g}<extra></extra>"
                        ),
                    ),
                    row=row,
                    col=1,
                )
    for row in (1, 2, 3):
        fig.add_vrect(
            x0=window_range[0],
            x1=window_range[1],
            fillcolor=WINDOW_BAND,
            line_width=0,
            row=row,
            col=1,
        )
    fig.add_annotation(
        x=window_range[0],
        y=1.0,
        xref="x",
        yref="paper",
        text="window",
        showarrow=False,
        xanchor="left",
        yanchor="bottom",
        font={"size": 11, "color": "#8C6A12"},
    )
    fig.update_yaxes(type="log")
    for row, parts in known.items():
        v = np.concatenate(parts) if parts else np.zeros(0)
        v = v[np.isfinite(v) & (v > 0)]
        if v.size:
            lo, hi = np.log10(v.min()), np.log10(v.max())
            pad = max(0.15 * (hi - lo), 0.15)
            fig.update_yaxes(range=[lo - pad, hi + pad], row=row, col=1)
    if tensile is None:
        fig.update_yaxes(title_text="storage modulus E' or G' [MPa] (own mode)", row=1, col=1)
        fig.update_yaxes(title_text="loss modulus E'' or G'' [MPa] (own mode)", row=2, col=1)
    else:
        fig.update_yaxes(title_text="E' [MPa], tensile equivalent", row=1, col=1)
        fig.update_yaxes(title_text="E'' [MPa], tensile equivalent", row=2, col=1)
    fig.update_yaxes(title_text="loss factor tan δ [-]", row=3, col=1)
    fig.update_xaxes(title_text="temperature [°C]", row=3, col=1)
    fig.update_layout(
        template=TEMPLATE,
        height=860,
        title=(
            "Stiffness and damping against temperature (lines: master curve, shaded: its 95 % "
            "interval; marks: measured)"
            + ("" if tensile is None else f"<br><sup>Moduli {TENSILE_NOTE}</sup>")
        ),
        legend={"orientation": "h", "y": -0.07, "font": {"size": 10}},
        hovermode="closest",
    )
    return tidy_log_axes(fig)


def _isotherm_index(points: np.ndarray, curve: MasterCurve) -> np.ndarray:
    temps = np.asarray(curve.shift.temperatures, dtype=float)
    return np.argmin(np.abs(points[:, 0][:, None] - temps[None, :]), axis=1)


def master_curve_figure(gid: str, curve: MasterCurve, points: np.ndarray) -> go.Figure:
    """The master curve at the reference temperature with the shifted measured points."""
    m = mode_symbol(curve)
    lo, hi = curve.log_fr_range
    fr = np.logspace(lo - 1.0, hi + 1.0, 400)
    p = curve.evaluate(curve.reference_C, fr)
    band = curve.interval(curve.reference_C, fr)
    inside = ~np.asarray(p.extrapolated, dtype=bool)  # dotted beyond the data and in its gaps
    fig = make_subplots(
        rows=2, cols=1, shared_xaxes=True, vertical_spacing=0.05, row_heights=[0.62, 0.38]
    )
    loss_colour = LOSS_MODULUS_COLOUR
    lines = (
        (1, p.storage_modulus / 1e6, f"{m}'", INK, band.storage_low, band.storage_high, 1e6),
        (1, p.loss_modulus / 1e6, f"{m}''", loss_colour, band.loss_low, band.loss_high, 1e6),
        (2, p.loss_factor, "tan δ", INK, band.loss_factor_low, band.loss_factor_high, 1.0),
    )
    # Bands under everything else; one legend entry shows or hides all three.
    for k, (row, _, what, colour, low, high, unit) in enumerate(lines):
        for trace in band_traces(
            fr,
            low / unit,
            high / unit,
            ~inside,
            ACCENT if colour == INK else colour,
            f"{what} master curve",
            name=BAND_SUFFIX,
            legendgroup="interval",
            showlegend=k == 0,
            legendrank=2000,
        ):
            fig.add_trace(trace, row=row, col=1)
    idx = _isotherm_index(points, curve)
    shifted = points[:, 1] * 10.0 ** np.asarray(curve.shift.log_shift, dtype=float)[idx]
    t_range = (float(points[:, 0].min()), float(points[:, 0].max()))
    for row, values, label, symbol in (
        (1, points[:, 2] / 1e6, f"{m}' measured, shifted", "circle"),
        (1, points[:, 2] * points[:, 3] / 1e6, f"{m}'' measured, shifted", "diamond-open"),
        (2, points[:, 3], "tan δ measured, shifted", "circle"),
    ):
        fig.add_trace(
            go.Scatter(
                x=shifted,
                y=values,
                mode="markers",
                name=label,
                marker={
                    "symbol": symbol,
                    "size": 5,
                    "color": points[:, 0],
                    "colorscale": [list(s) for s in TEMPERATURE_SCALE],
                    "cmin": t_range[0],
                    "cmax": t_range[1],
                    "showscale": row == 1 and symbol == "circle",
                    "colorbar": {"title": {"text": "T [°C]"}, "len": 0.6, "y": 0.7},
                },
                customdata=points[:, [0, 1]],
                hovertemplate=(
                    "T = %{customdata[0]:.1f} °C, f = %{customdata[1]:.3g} Hz<br>"
                    "fR = %{x:.3g} Hz<br>%{y:.3g}<extra></extra>"
                ),
            ),
            row=row,
            col=1,
        )
    for row, values, what, colour, low, high, unit in lines:
        label = f"{what} master curve"
        for part, mask in (("", inside), (" (beyond the data)", ~inside)):
            fig.add_trace(
                go.Scatter(
                    x=fr,
                    y=np.where(mask, values, np.nan),
                    mode="lines",
                    name=label + part,
                    showlegend=not part,
                    line={"color": colour, "width": 2, "dash": "solid" if not part else "dot"},
                    customdata=np.column_stack([low / unit, high / unit]),
                    hovertemplate=(
                        f"{label}{part}<br>fR = %{{x:.3g}} Hz<br>"
                        + with_interval("")
                        + "<extra></extra>"
                    ),
                ),
                row=row,
                col=1,
            )
    fig.update_xaxes(type="log")
    fig.update_yaxes(type="log")
    fig.update_xaxes(title_text="reduced frequency fR = f·aT [Hz]", row=2, col=1)
    fig.update_yaxes(title_text=f"{m}', {m}'' [MPa]", row=1, col=1)
    fig.update_yaxes(title_text="loss factor tan δ [-]", row=2, col=1)
    fig.update_layout(
        template=TEMPLATE,
        height=640,
        title=(
            f"Master curve of {plot_text(gid)} at the reference temperature "
            f"{curve.reference_C:.1f} °C"
        ),
        legend={"orientation": "h", "y": -0.14, "font": {"size": 10}},
    )
    return tidy_log_axes(fig)


def shift_figure(gid: str, curve: MasterCurve, window_range: tuple[float, float]) -> go.Figure:
    """Shift factors of the isotherms with the fitted law."""
    shift = curve.shift
    temps = np.asarray(shift.temperatures, dtype=float)
    logs = np.asarray(shift.log_shift, dtype=float)
    bridged = np.asarray(shift.bridged, dtype=bool)
    t_lo = min(temps.min(), window_range[0])
    t_hi = max(temps.max(), window_range[1])
    grid = np.linspace(t_lo, t_hi, 301)
    law = np.asarray(curve.log_shift(grid), dtype=float)
    law_lo, law_hi = (np.asarray(v, dtype=float) for v in curve.log_shift_interval(grid))
    inside = (grid >= curve.temperature_range[0]) & (grid <= curve.temperature_range[1])
    fig = go.Figure()
    fig.add_vrect(x0=window_range[0], x1=window_range[1], fillcolor=WINDOW_BAND, line_width=0)
    # The shift is a log already: the band is drawn on a linear axis, so its edges may
    # be of any sign (band_trace keeps positive values only, for log axes).
    fig.add_trace(
        go.Scatter(
            x=np.concatenate([grid, grid[::-1]]),
            y=np.concatenate([law_hi, law_lo[::-1]]),
            mode="lines",
            fill="toself",
            fillcolor=INTERVAL_WASH,
            line={"color": faded(ACCENT, 0.3), "width": 0.6},
            name=BAND_SUFFIX,
            meta="shift",
            hoverinfo="skip",
        )
    )
    for part, mask in (("", inside), (" (beyond the data)", ~inside)):
        fig.add_trace(
            go.Scatter(
                x=grid,
                y=np.where(mask, law, np.nan),
                mode="lines",
                name=f"fitted law: {shift.law.kind}{part}",
                showlegend=not part or bool((~inside).any()),
                line={"color": ACCENT, "width": 2, "dash": "solid" if not part else "dot"},
                customdata=np.column_stack([law_lo, law_hi]),
                hovertemplate=(
                    "T = %{x:.1f} °C<br>log aT = %{y:.3f} "
                    "(95 %: %{customdata[0]:.3f} to %{customdata[1]:.3f})<extra>law</extra>"
                ),
            )
        )
    low, high = shift.log_shift_low, shift.log_shift_high
    known = low is not None and high is not None
    for name, rows, marker, extra in (
        ("from overlapping isotherms", ~bridged, {"color": INK, "size": 8}, "data"),
        (
            "bridged (no overlap: taken from the law)",
            bridged,
            {"color": WARN, "size": 10, "symbol": "x-thin-open", "line": {"width": 2}},
            "bridged",
        ),
    ):
        if not rows.any():
            continue
        hover = "T = %{x:.1f} °C<br>log aT = %{y:.3f}"
        bars = None
        if known:
            lo, hi = np.asarray(low, dtype=float)[rows], np.asarray(high, dtype=float)[rows]
            bars = {
                "type": "data",
                "symmetric": False,
                "array": hi - logs[rows],
                "arrayminus": logs[rows] - lo,
                "color": marker["color"],
                "thickness": 1.3,
                "width": 5,
            }
            hover += " (95 %: %{customdata[0]:.3f} to %{customdata[1]:.3f})"
        fig.add_trace(
            go.Scatter(
                x=temps[rows],
                y=logs[rows],
                mode="markers",
                name=name,
                marker=marker,
                error_y=bars,
                customdata=np.column_stack([lo, hi]) if known else None,
                hovertemplate=hover + f"<extra>{extra}</extra>",
            )
        )
    if shift.law.kind == "WLF+Arrhenius" and shift.law.split_C is not None:
        fig.add_vline(
            x=shift.law.split_C,
            line={"color": GUIDE, "dash": "dash"},
            annotation_text=f"Arrhenius below, WLF above {shift.law.split_C:.0f} °C",
            annotation_position="top right",
            annotation_font_size=11,
        )
    fig.update_layout(
        template=TEMPLATE,
        height=440,
        title=(
            f"Shift factors of {plot_text(gid)} (reference {curve.reference_C:.1f} °C; bars "
            "and shading: 95 % interval)"
        ),
        xaxis_title="temperature [°C]",
        yaxis_title="log10 aT [-]",
        legend={"font": {"size": 10}},
    )
    return fig


def nomogram_figure(
    gid: str,
    curve: MasterCurve,
    window_range: tuple[float, float],
    band_Hz: tuple[float, float],
    reading: tuple[float, float] | None = None,
) -> go.Figure:
    """Reduced-frequency nomogram in the layout of ISO 10112.

    Reduced frequency along the bottom (log), E' and loss factor on the left (log),
    frequency on the right (log), and isotherms as diagonals log f = log fR - log aT(T).
    """
    m = mode_symbol(curve)
    lo, hi = curve.log_fr_range
    xa, xb = lo - 0.5, hi + 0.5
    fr = np.logspace(xa, xb, 400)
    p = curve.evaluate(curve.reference_C, fr)
    f_lo = min(curve.frequency_range[0], band_Hz[0])
    f_hi = max(curve.frequency_range[1], band_Hz[1])
    fa, fb = np.floor(np.log10(f_lo)) - 1.0, np.ceil(np.log10(f_hi)) + 1.0
    fig = go.Figure()
    fig.add_trace(
        go.Scatter(
            x=fr,
            y=p.storage_modulus / 1e6,
            mode="lines",
            name=f"{m}' [MPa]",
            line={"color": INK, "width": 2.5},
            hovertemplate=f"fR = %{{x:.3g}} Hz<br>{m}' = %{{y:.3g}} MPa<extra></extra>",
        )
    )
    fig.add_trace(
        go.Scatter(
            x=fr,
            y=p.loss_factor,
            mode="lines",
            name="loss factor η",
            yaxis="y3",
            line={"color": LOSS_FACTOR_COLOUR, "width": 2.5, "dash": "dash"},
            hovertemplate="fR = %{x:.3g} Hz<br>η = %{y:.3g}<extra></extra>",
        )
    )
    # Window frequency band on the right-hand axis.
    fig.add_trace(
        go.Scatter(
            x=[10**xa, 10**xb, 10**xb, 10**xa, 10**xa],
            y=[band_Hz[0], band_Hz[0], band_Hz[1], band_Hz[1], band_Hz[0]],
            yaxis="y2",
            fill="toself",
            fillcolor=WINDOW_BAND,
            line={"width": 0},
            mode="lines",
            hoverinfo="skip",
            name="window band",
        )
    )
    t_lo, t_hi = curve.temperature_range
    t_lo, t_hi = min(t_lo, window_range[0]), max(t_hi, window_range[1])
    step = 10.0 if (t_hi - t_lo) <= 100.0 else 20.0
    temps = np.arange(np.ceil(t_lo / step) * step, t_hi + 1e-9, step)
    marked = sorted({float(window_range[0]), float(window_range[1])})
    lines = []
    for t in sorted(set(temps.tolist()) | set(marked)):
        s = float(curve.log_shift(t))
        # log f = log fR - s; the segment inside the box [xa, xb] x [fa, fb].
        x0, x1 = max(xa, fa + s), min(xb, fb + s)
        if x1 > x0:
            lines.append((t, s, x0, x1, t in marked))
    placed: list[tuple[float, float]] = []  # label positions, as fractions of the box
    for t, s, x0, x1, bold in sorted(lines, key=lambda item: not item[4]):
        fig.add_trace(
            go.Scatter(
                x=[10**x0, 10**x1],
                y=[10 ** (x0 - s), 10 ** (x1 - s)],
                mode="lines",
                yaxis="y2",
                showlegend=False,
                line={"color": ACCENT if bold else GUIDE, "width": 2 if bold else 0.9},
                hovertemplate=(
                    f"isotherm {t:g} °C<br>fR = %{{x:.3g}} Hz, f = %{{y:.3g}} Hz<extra></extra>"
                ),
            )
        )
        spot = ((x1 - xa) / (xb - xa), (x1 - s - fa) / (fb - fa))
        if not bold and any(abs(spot[0] - a) < 0.05 and abs(spot[1] - b) < 0.06 for a, b in placed):
            continue  # the label would sit on another one; the line keeps its hover text
        placed.append(spot)
        fig.add_annotation(
            x=x1,
            y=x1 - s,
            xref="x",
            yref="y2",
            text=f"{t:g} °C",
            showarrow=False,
            xanchor="right" if x1 >= xb - 1e-9 else "center",
            yanchor="bottom",
            font={"size": 10, "color": ACCENT if bold else "#7D786C"},
        )
    if reading is not None:
        t_r, f_r = reading
        fr_r = f_r * 10.0 ** float(curve.log_shift(t_r))
        fig.add_trace(
            go.Scatter(
                x=[fr_r],
                y=[f_r],
                yaxis="y2",
                mode="markers",
                name=f"reading {t_r:g} °C, {f_r:.3g} Hz",
                marker={
                    "size": 11,
                    "color": ACCENT,
                    "symbol": "circle-open",
                    "line": {"width": 2.5},
                },
                hovertemplate=f"{t_r:g} °C, {f_r:.3g} Hz -> fR = {fr_r:.3g} Hz<extra></extra>",
            )
        )
        fig.add_shape(
            type="line",
            x0=fr_r,
            x1=fr_r,
            y0=0,
            y1=1,
            xref="x",
            yref="paper",
            line={"color": ACCENT, "dash": "dot", "width": 1.5},
        )
    # The axes cover the whole curve and its 95 % interval, down to a labelled decade
    # below its softest value.
    spread = curve.interval(curve.reference_C, fr)
    ea, eb = decade_span(
        np.concatenate([p.storage_modulus, spread.storage_low, spread.storage_high]) / 1e6
    )
    na, nb = decade_span(
        np.concatenate([p.loss_factor, spread.loss_factor_low, spread.loss_factor_high])
    )
    fig.update_layout(
        template=TEMPLATE,
        height=620,
        title=f"Reduced-frequency nomogram of {plot_text(gid)} (ISO 10112 layout)",
        xaxis={
            "type": "log",
            "range": [xa, xb],
            "domain": [0.1, 0.93],
            "title": {"text": "reduced frequency fR = f·aT [Hz]"},
        },
        yaxis={"type": "log", "range": [ea, eb], "title": {"text": f"{m}' [MPa]"}},
        yaxis3={
            "type": "log",
            "range": [na, nb],
            "overlaying": "y",
            "side": "left",
            "anchor": "free",
            "position": 0.0,
            "title": {"text": "loss factor η [-]"},
            "showgrid": False,
            "tickfont": {"color": LOSS_FACTOR_COLOUR},
        },
        yaxis2={
            "type": "log",
            "range": [fa, fb],
            "overlaying": "y",
            "side": "right",
            "title": {"text": "frequency f [Hz]"},
            "showgrid": False,
        },
        legend={"orientation": "h", "y": -0.15, "font": {"size": 10}},
        margin={"l": 40, "r": 70},
    )
    return tidy_log_axes(fig)


def transitions_figure(gid: str, curve: MasterCurve, points: np.ndarray | None) -> go.Figure:
    """E' and tan delta at the Tg frequency, with Tg by each method and the regions.

    Each Tg found stands as a vertical line on the curves and, on a strip above them, as
    a mark with its 95 % interval as a bar (where the fit gives one), one row per method.
    """
    m = mode_symbol(curve)
    f_tg = float(curve.tg[0]["frequency_Hz"]) if curve.tg else 1.0
    t_lo, t_hi = curve.temperature_range
    grid = np.linspace(t_lo, t_hi, 301)
    p = curve.evaluate(grid, f_tg)
    band = curve.interval(grid, f_tg)
    fig = go.Figure()
    for k, region in enumerate(curve.regions):
        fig.add_vrect(
            x0=region["low_C"],
            x1=region["high_C"],
            fillcolor=REGION_SHADES[k % len(REGION_SHADES)],
            line_width=0,
            annotation_text=region["name"],
            annotation_position="bottom left",
            annotation_font_size=11,
        )
    fig.add_trace(
        band_trace(grid, band.storage_low / 1e6, band.storage_high / 1e6, ACCENT, f"{m}'")
    )
    fig.add_trace(
        band_trace(
            grid,
            band.loss_factor_low,
            band.loss_factor_high,
            LOSS_FACTOR_COLOUR,
            "tan δ",
            yaxis="y2",
        )
    )
    fig.add_trace(
        go.Scatter(
            x=grid,
            y=p.storage_modulus / 1e6,
            mode="lines",
            name=f"{m}' [MPa]",
            line={"color": INK, "width": 2.2},
        )
    )
    fig.add_trace(
        go.Scatter(
            x=grid,
            y=p.loss_factor,
            mode="lines",
            name="tan δ",
            yaxis="y2",
            line={"color": LOSS_FACTOR_COLOUR, "width": 2.2, "dash": "dash"},
        )
    )
    if points is not None and points.size:
        fm, rows = _nearest_measured(points, f_tg)
        sel = points[rows]
        fig.add_trace(
            go.Scatter(
                x=sel[:, 0],
                y=sel[:, 2] / 1e6,
                mode="markers",
                name=f"{m}' measured {fm:.3g} Hz",
                marker={"color": INK, "size": 6, "symbol": "circle-open"},
            )
        )
        fig.add_trace(
            go.Scatter(
                x=sel[:, 0],
                y=sel[:, 3],
                mode="markers",
                yaxis="y2",
                name=f"tan δ measured {fm:.3g} Hz",
                marker={"color": LOSS_FACTOR_COLOUR, "size": 6, "symbol": "diamond-open"},
            )
        )
    dashes = ("dash", "dot", "dashdot")
    rows_shown = []
    for k, tg in enumerate(curve.tg):
        if not tg.get("reached") or tg.get("temperature_C") is None:
            continue
        t, low, high = tg["temperature_C"], tg.get("low_C"), tg.get("high_C")
        known = low is not None and high is not None
        method = tg["method"].replace("_", " ")
        rows_shown.append(method)
        dash = dashes[k % len(dashes)]
        fig.add_vline(x=t, line={"color": ACCENT, "dash": dash, "width": 1.5})
        spread = f" (95 %: {low:.1f} to {high:.1f})" if known else ""
        fig.add_trace(
            go.Scatter(
                x=[t],
                y=[method],
                yaxis="y3",
                mode="markers+text",
                name=f"Tg {method}",
                showlegend=False,
                marker={"color": ACCENT, "size": 8, "symbol": "diamond"},
                error_x=(
                    {
                        "type": "data",
                        "symmetric": False,
                        "array": [high - t],
                        "arrayminus": [t - low],
                        "color": ACCENT,
                        "thickness": 2,
                        "width": 5,
                    }
                    if known
                    else None
                ),
                text=[f"{method}: {t:.1f} °C{spread}"],
                textposition="middle right" if t < 0.5 * (t_lo + t_hi) else "middle left",
                textfont={"size": 11, "color": INK},
                hovertemplate=f"Tg by the {method} at {tg['frequency_Hz']:g} Hz: "
                f"{t:.1f} °C{spread}<extra></extra>",
            )
        )
    strip = bool(rows_shown)
    fig.update_layout(
        template=TEMPLATE,
        height=500 if strip else 460,
        title=f"Glass transition of {plot_text(gid)} at {f_tg:g} Hz",
        xaxis={"title": {"text": "temperature [°C]"}, "range": [t_lo - 2.0, t_hi + 2.0]},
        yaxis={
            "type": "log",
            "title": {"text": f"{m}' [MPa]"},
            "domain": [0.0, 0.74 if strip else 1.0],
        },
        yaxis2={
            "type": "log",
            "overlaying": "y",
            "side": "right",
            "showgrid": False,
            "title": {"text": "loss factor tan δ [-]", "standoff": 14},
            "automargin": True,
        },
        legend={"orientation": "h", "y": -0.2, "font": {"size": 10}},
        margin={"r": 100},
    )
    if strip:
        fig.update_layout(
            yaxis3={
                "domain": [0.8, 1.0],
                "anchor": "x",
                "type": "category",
                "categoryorder": "array",
                "categoryarray": rows_shown[::-1],
                "range": [-0.6, len(rows_shown) - 0.4],
                "showgrid": False,
                "showticklabels": False,
                "ticks": "",
                "title": {"text": "Tg", "font": {"size": 12}},
            }
        )
    return tidy_log_axes(fig)


def relaxation_figure(
    gid: str, curve: MasterCurve, temperatures: list[float], colours: list[str]
) -> go.Figure:
    """Relaxation modulus against time, with the 1 h and 1000 h values marked."""
    m = mode_symbol(curve)
    t = np.logspace(-3, 9, 361)
    marks = np.array([HOUR_S, 1000.0 * HOUR_S])
    fig = go.Figure()
    for k, temp in enumerate(temperatures):
        colour = colours[k % len(colours)]
        hover = f"{temp:g} °C<br>t = %{{x:.3g}} s<br>{m}(t) = %{{y:.3g}} MPa<extra></extra>"
        e = np.asarray(curve.relaxation_modulus(t, temp), dtype=float) / 1e6
        v = np.asarray(curve.relaxation_modulus(marks, temp), dtype=float) / 1e6
        # The values at 1 h and 1000 h go in the legend: beside the marks they would sit
        # on one another where the curves of two temperatures meet.
        fig.add_trace(
            go.Scatter(
                x=t,
                y=e,
                mode="lines",
                name=f"{temp:g} °C: {v[0]:.3g} MPa at 1 h, {v[1]:.3g} MPa at 1000 h",
                legendgroup=f"{temp:g}",
                line={"color": colour, "width": 2},
                hovertemplate=hover,
            )
        )
        fig.add_trace(
            go.Scatter(
                x=marks,
                y=v,
                mode="markers",
                showlegend=False,
                legendgroup=f"{temp:g}",
                marker={"color": colour, "size": 9, "symbol": "square"},
                hovertemplate=hover,
            )
        )
    for x, label in ((HOUR_S, "1 h"), (1000.0 * HOUR_S, "1000 h")):
        fig.add_shape(
            type="line",
            x0=x,
            x1=x,
            y0=0,
            y1=1,
            xref="x",
            yref="paper",
            line={"color": GUIDE, "dash": "dash"},
        )
        fig.add_annotation(
            x=np.log10(x),
            y=1.0,
            xref="x",
            yref="paper",
            text=label,
            showarrow=False,
            yanchor="bottom",
            font={"size": 11},
        )
    fig.update_layout(
        template=TEMPLATE,
        height=520,
        title=f"Relaxation modulus of {plot_text(gid)}",
        xaxis={"type": "log", "range": [-3, 9], "title": {"text": "time t [s]"}},
        yaxis={"type": "log", "title": {"text": f"relaxation modulus {m}(t) [MPa]"}},
        legend={"orientation": "v", "x": 0.0, "y": -0.2, "yanchor": "top", "font": {"size": 11}},
        margin={"b": 120},
    )
    return tidy_log_axes(fig)


def residual_figure(gid: str, curve: MasterCurve) -> go.Figure:
    """Residual of the master curve per isotherm (rms of log10 values)."""
    rows = curve.quality.get("per_isotherm", [])
    temps = [r["temperature_C"] for r in rows]
    bridged = [bool(r["bridged"]) for r in rows]
    fig = go.Figure()
    fig.add_trace(
        go.Bar(
            x=temps,
            y=[r["rms_log_storage"] for r in rows],
            name="log E' (or G')",
            marker={"color": ACCENT, "pattern": {"shape": ["/" if b else "" for b in bridged]}},
        )
    )
    fig.add_trace(
        go.Bar(
            x=temps,
            y=[r["rms_log_loss_factor"] for r in rows],
            name="log tan δ",
            marker={"color": "#C49A2A", "pattern": {"shape": ["/" if b else "" for b in bridged]}},
        )
    )
    fig.update_layout(
        template=TEMPLATE,
        height=380,
        barmode="group",
        title=f"Fit residual per isotherm of {plot_text(gid)} (hatched: bridged isotherm)",
        xaxis_title="isotherm temperature [°C]",
        yaxis_title="rms residual [decades]",
        legend={"orientation": "h", "y": -0.25},
    )
    return fig


def collapse_figure(gid: str, curve: MasterCurve, points: np.ndarray) -> go.Figure:
    """Loss factor against storage modulus of the measured points (needs no shifts)."""
    scatter = curve.quality.get("eta_vs_log_storage_scatter")
    ok = curve.quality.get("superposition_ok")
    fig = go.Figure(
        go.Scatter(
            x=points[:, 2] / 1e6,
            y=points[:, 3],
            mode="markers",
            name="measured",
            marker={
                "size": 5,
                "color": points[:, 0],
                "colorscale": [list(s) for s in TEMPERATURE_SCALE],
                "colorbar": {"title": {"text": "T [°C]"}},
            },
            customdata=points[:, [0, 1]],
            hovertemplate=(
                "T = %{customdata[0]:.1f} °C, f = %{customdata[1]:.3g} Hz<br>"
                "E' = %{x:.3g} MPa, tan δ = %{y:.3g}<extra></extra>"
            ),
        )
    )
    text = "n/a" if scatter is None or not np.isfinite(scatter) else f"{scatter:.3f} decades"
    fig.update_layout(
        template=TEMPLATE,
        height=380,
        title=(
            f"tan δ against {mode_symbol(curve)}' of {plot_text(gid)}: scatter {text}, "
            + ("one curve (superposition holds)" if ok else "does not collapse onto one curve")
        ),
        xaxis={"type": "log", "title": {"text": f"storage modulus {mode_symbol(curve)}' [MPa]"}},
        yaxis={"type": "log", "title": {"text": "loss factor tan δ [-]"}},
    )
    return tidy_log_axes(fig)
