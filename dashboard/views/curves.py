"""Curves page: measured data and master curves of the comparison set or one grade.

The page may show the master curves at a reference temperature of the user's choice
(refitted per grade, as ``fit --reference`` does); the ranking keeps the automatic one.
"""

import json
import math

import numpy as np
import pandas as pd
import streamlit as st

from dashboard import case, data
from dashboard.charts.common import INTERVAL_NOTE
from dashboard.charts.curves import (
    collapse_figure,
    master_curve_figure,
    nomogram_figure,
    relaxation_figure,
    residual_figure,
    shift_figure,
    temperature_figure,
    transitions_figure,
)
from dashboard.common import MISSING, SHOWN_LIMIT, context, plain
from engine.base.errors import CriteriaError, QuietgradeError
from engine.curves.window import OperatingWindow, tensile_factor
from engine.library.fits import summary
from engine.output.palette import GRADE_COLOURS

ctx = context()
st.header("Curves")
available = sorted(ctx.curves)
if not available:
    st.error("no fitted grade in the library: import data on the Library page")
    st.stop()
# Without valid criteria (the sidebar says why), the engine's default window.
window = ctx.criteria.window if ctx.criteria else OperatingWindow()
window_range = (window.temp_range[0], window.temp_range[1])
band = (window.freq_range[0], window.freq_range[1])
design_f = window.design_frequency

c1, c2, c3, c4, c5 = st.columns([1.2, 1.5, 1.2, 1.1, 1.3])
which = c1.radio("Show", ("comparison set", "one grade"), key="curves_which", horizontal=True)
if which == "one grade" or not ctx.compare:
    default = ctx.compare[0] if ctx.compare else available[0]
    if st.session_state.get("curves_one") not in available:
        st.session_state["curves_one"] = default
    one = c2.selectbox("Grade", available, key="curves_one")
    shown = [one]
else:
    in_set = [g for g in ctx.compare if g in ctx.curves]
    shown = in_set[:SHOWN_LIMIT]
    c2.caption(
        "Grades: "
        + ", ".join(plain(g) for g in shown)
        + (
            f" (the first {len(shown)} of the {len(in_set)} in the comparison set)"
            if len(in_set) > len(shown)
            else ""
        )
    )
st.session_state.setdefault("curves_freqs", f"{band[0]:g}, {design_f:.3g}, {band[1]:g}")
text = c3.text_input(
    "Frequencies [Hz]", key="curves_freqs", help="Up to five, separated by commas."
)
try:
    frequencies = [f for f in case.parse_numbers(text, "frequencies") if f > 0][:5]
    if not frequencies:
        raise CriteriaError("frequencies: give at least one positive number")
except CriteriaError as exc:
    st.error(plain(exc))  # quotes what was typed
    frequencies = [design_f]

# The reference outlives the page: Streamlit forgets a widget's value in a run that does
# not draw it, so it is kept under a key of its own too.
if "curves_reference" not in st.session_state:
    st.session_state["curves_reference"] = st.session_state.get("_curves_reference")
reference = c4.number_input(
    "Reference temperature [°C]",
    value=None,
    min_value=-150.0,
    max_value=300.0,
    step=1.0,
    format="%.1f",
    placeholder="automatic",
    key="curves_reference",
    help=(
        "The temperature the master curves of this page are referred to. Blank: each "
        "grade's automatic reference (the isotherm nearest its loss-factor peak at 1 Hz), "
        "which the ranking always uses."
    ),
)
st.session_state["_curves_reference"] = reference
version = ctx.library.version()


def _page_curves(ids: list[str]) -> dict:
    """The master curves this page draws: the ranking's, or refitted at the reference."""
    if reference is None:
        return {gid: ctx.curves[gid] for gid in ids}
    out = {}
    with st.spinner(f"Fitting the master curves at {reference:.1f} °C"):
        for gid in ids:
            try:
                out[gid] = data.curve_at_reference(
                    ctx.library.location, version, gid, float(reference)
                )
            except QuietgradeError as exc:
                st.error(
                    f"{plain(gid)}: no master curve at {reference:.1f} °C ({plain(exc)}); "
                    "the automatic reference is shown"
                )
                out[gid] = ctx.curves[gid]
    return out


def _view(*parts) -> str:
    """A name for a figure of this page: what it shows and the data it is drawn from."""
    ref = "auto" if reference is None else f"{reference:.3f}"
    return json.dumps([ctx.library.location, version, ref, *parts])


curves = _page_curves(shown)
points = {gid: ctx.points(gid) for gid in shown}
# One basis with the Map and the ranking by default: tensile-equivalent moduli.
# Short enough to read whole in the narrow column (800 px windows); the help says more.
BASES = ("tensile E", "as measured")
basis = c5.selectbox(
    "Moduli",
    BASES,
    key="curves_basis",
    help="Tensile E: tensile-equivalent moduli (E = 2(1 + ν)G for shear data), as the Map "
    "and the ranking use. As measured: E' and G' in each grade's own mode.",
)
own_mode = basis == BASES[1]
tensile = None
if not own_mode:
    catalog = data.catalog(ctx.library.location, ctx.library.version())
    poisson = {gid: m.poisson_ratio for gid, m in catalog.items()}
    tensile = {
        gid: float(tensile_factor([curves[gid].mode], [poisson.get(gid) or np.nan])[0])
        for gid in shown
    }
st.plotly_chart(
    data.kept_figure(
        _view("temperature", shown, frequencies, list(window_range), own_mode),
        lambda: temperature_figure(
            shown, curves, points, frequencies, window_range, ctx.colours, tensile
        ),
    ),
    theme=None,
    key="curves_temperature",
)
st.caption(
    (
        "Moduli in each grade's own mode: E' for tensile data, G' for shear data. "
        if own_mode
        else "Moduli tensile-equivalent, as on the Map: shear data as E = 2(1 + ν)G (ν = 0.5 "
        "unless the catalog gives it). "
    )
    + "Faint line parts are extrapolated; marks are the measurements at the measured "
    "frequency nearest each chosen one. Shaded: " + INTERVAL_NOTE + "."
)

st.subheader("One grade in detail")
if st.session_state.get("curves_focus") not in shown:
    st.session_state["curves_focus"] = shown[0]
focus = st.selectbox("Grade", shown, key="curves_focus")
curve = curves[focus]
pts = points.get(focus)
if pts is None:
    pts = ctx.points(focus)


def _reference_caption() -> str:
    """Which reference the focus grade is shown at, and how its points were grouped."""
    t_lo, t_hi = curve.temperature_range
    if reference is None:
        text = f"Reference temperature {curve.reference_C:.1f} °C (automatic)"
    else:
        text = (
            f"Reference temperature {curve.reference_C:.1f} °C (chosen; the ranking keeps "
            f"each grade's automatic reference, {ctx.curves[focus].reference_C:.1f} °C here)"
        )
        if not t_lo - 0.5 <= curve.reference_C <= t_hi + 0.5:
            text += (
                f", outside the measured {t_lo:.1f} to {t_hi:.1f} °C: the curve there rests "
                "on the shift law"
            )
    description = (curve.grouping or {}).get("description")
    if description:
        text += f". Points: {plain(description)}"
    return text + "."


st.caption(_reference_caption())


def _fmt(value, spec: str) -> str:
    """``value`` in format ``spec``, or the mark of a missing value; a ``g`` format keeps
    its trailing zeros (3 significant figures of 8.0 are 8.00)."""
    if value is None or not math.isfinite(float(value)):
        return MISSING
    if spec.endswith("g"):
        return format(float(value), "#" + spec).rstrip(".")
    return format(float(value), spec)


def _with_range(values: dict, key: str, spec: str) -> str:
    """A value of the fit summary with its 95 % interval where the summary gives one."""
    text = _fmt(values.get(key), spec)
    low, high = values.get(f"{key}_low"), values.get(f"{key}_high")
    if text != MISSING and low is not None and high is not None:
        text += f" (95 %: {_fmt(low, spec)} to {_fmt(high, spec)})"
    return text


def _master_tab() -> None:
    """Master curve against reduced frequency, with the covered range."""
    if pts is not None:
        st.plotly_chart(
            data.kept_figure(
                _view("master", focus), lambda: master_curve_figure(focus, curve, pts)
            ),
            theme=None,
            key="mc",
        )
    lo, hi = curve.log_fr_range
    gaps = "; ".join(f"{10**a:.3g} to {10**b:.3g} Hz" for a, b in curve.gaps)
    st.caption(
        f"Covered reduced frequencies: {10**lo:.3g} to {10**hi:.3g} Hz (dotted beyond"
        + (f"; no data in {gaps}, dotted as well" if gaps else "")
        + f"). Measured {curve.temperature_range[0]:.1f} to {curve.temperature_range[1]:.1f} "
        f"°C, {curve.frequency_range[0]:.3g} to {curve.frequency_range[1]:.3g} Hz. Shaded: "
        + INTERVAL_NOTE
        + "."
    )


def _shift_tab() -> None:
    """Shift factors, the fitted shift laws and their spread."""
    st.plotly_chart(
        data.kept_figure(
            _view("shift", focus, list(window_range)),
            lambda: shift_figure(focus, curve, window_range),
        ),
        theme=None,
        key="shift",
    )
    s = summary(curve)
    law_rows = []
    if "wlf" in s:
        w = s["wlf"]
        law_rows.append(
            {
                "law": "WLF",
                "C1": _with_range(w, "C1", ".3g"),
                "C2 [K]": _with_range(w, "C2_K", ".1f"),
                "referred to [°C]": _fmt(w.get("reference_C"), ".1f"),
            }
        )
    if "arrhenius" in s:
        a = s["arrhenius"]
        law_rows.append(
            {
                "law": "Arrhenius",
                "activation energy [kJ/mol]": _with_range(a, "activation_kJ_per_mol", ".0f"),
                "referred to [°C]": _fmt(a.get("reference_C"), ".1f"),
            }
        )
    if law_rows:
        st.dataframe(pd.DataFrame(law_rows), hide_index=True, placeholder=MISSING)
    shift = curve.shift
    low, high = shift.log_shift_low, shift.log_shift_high
    st.dataframe(
        pd.DataFrame(
            {
                "isotherm [°C]": shift.temperatures,
                "log10 aT": shift.log_shift,
                "95 % low": low if low is not None else [None] * len(shift.temperatures),
                "95 % high": high if high is not None else [None] * len(shift.temperatures),
                "bridged by the law": shift.bridged,
            }
        ),
        hide_index=True,
        placeholder=MISSING,
        height=min(36 * (len(shift.temperatures) + 1) + 2, 300),
        key="shift_table",
        column_config={
            "isotherm [°C]": st.column_config.NumberColumn(format="%.1f"),
            "log10 aT": st.column_config.NumberColumn(format="%.3f"),
            "95 % low": st.column_config.NumberColumn(format="%.3f"),
            "95 % high": st.column_config.NumberColumn(format="%.3f"),
        },
    )
    rms = s.get("shift_law_rms")
    st.caption(
        f"Shift factors referred to {curve.reference_C:.1f} °C"
        + (f"; rms of the data about the law: {rms:.3g} decades" if rms is not None else "")
        + ". Bars and shading: "
        + INTERVAL_NOTE
        + "."
    )


def _nomogram_tab() -> None:
    """Reduced-frequency nomogram read at one temperature and frequency."""
    c1, c2 = st.columns(2)
    # The reading point outlives the tab: Streamlit forgets a widget's value in a run
    # that does not draw it, so it is kept under a key of its own too.
    kept = st.session_state.get("_nomo_read", {})
    st.session_state.setdefault("nomo_t", kept.get("t", float(round(sum(window_range) / 2))))
    st.session_state.setdefault("nomo_f", kept.get("f", float(f"{design_f:.3g}")))
    t_read = c1.number_input("Read at temperature [°C]", format="%g", key="nomo_t")
    f_read = c2.number_input("and frequency [Hz]", min_value=1e-9, format="%g", key="nomo_f")
    st.session_state["_nomo_read"] = {"t": t_read, "f": f_read}
    st.plotly_chart(
        nomogram_figure(focus, curve, window_range, band, (t_read, f_read)),
        theme=None,
        key="nomogram",
    )
    p = curve.evaluate(t_read, f_read)
    b = curve.interval(t_read, f_read)
    sym = "G" if curve.mode == "shear" else "E"
    st.caption(
        f"At {t_read:g} °C and {f_read:g} Hz: fR = {float(p.reduced_frequency):.3g} Hz, "
        f"{sym}' = {float(p.storage_modulus) / 1e6:.3g} MPa (95 %: "
        f"{float(b.storage_low) / 1e6:.3g} to {float(b.storage_high) / 1e6:.3g}), "
        f"η = {float(p.loss_factor):.3g} (95 %: {float(b.loss_factor_low):.3g} to "
        f"{float(b.loss_factor_high):.3g})"
        + (" (extrapolated)" if bool(p.extrapolated) else "")
        + ". Follow the isotherm to the frequency on the right-hand axis, then read down to "
        "the curves."
    )


def _transitions_tab() -> None:
    """Glass transition by each method, and the regions."""
    st.plotly_chart(transitions_figure(focus, curve, pts), theme=None, key="tg")
    st.dataframe(
        pd.DataFrame(
            [
                {
                    "method": t["method"].replace("_", " "),
                    "frequency [Hz]": t["frequency_Hz"],
                    "Tg [°C]": t["temperature_C"],
                    "95 % low [°C]": t.get("low_C"),
                    "95 % high [°C]": t.get("high_C"),
                    "found": t["reached"],
                    "note": t["note"],
                }
                for t in curve.tg
            ]
        ),
        hide_index=True,
        placeholder=MISSING,
        width="stretch",
        column_config={
            "Tg [°C]": st.column_config.NumberColumn(format="%.1f"),
            "95 % low [°C]": st.column_config.NumberColumn(format="%.1f"),
            "95 % high [°C]": st.column_config.NumberColumn(format="%.1f"),
            "frequency [Hz]": st.column_config.NumberColumn(format="%g"),
        },
    )
    st.caption(
        "Tg of the fitted curve by each method; shaded on the chart and given in the table: "
        "its 95 % interval from the fit's own uncertainty, where the fit gives one."
    )
    if curve.regions:
        st.caption(
            "Regions: "
            + "; ".join(
                f"{r['name']} {r['low_C']:.1f} to {r['high_C']:.1f} °C" for r in curve.regions
            )
        )
    if curve.secondary_C is not None:
        st.caption(f"Secondary transition near {curve.secondary_C:.1f} °C")


def _relaxation_tab() -> None:
    """Relaxation modulus at the window's ends and middle."""
    lo_t, hi_t = window_range
    temps = sorted({float(lo_t), float(round((lo_t + hi_t) / 2)), float(hi_t)})
    st.plotly_chart(
        relaxation_figure(focus, curve, temps, list(GRADE_COLOURS)), theme=None, key="relax"
    )


def _quality_tab() -> None:
    """Fit residuals and the superposition check."""
    q = curve.quality
    m1, m2, m3, m4 = st.columns(4)
    m1.metric("rms log E' [decades]", f"{q.get('rms_log_storage', float('nan')):.3f}")
    m2.metric("rms log tan δ [decades]", f"{q.get('rms_log_loss_factor', float('nan')):.3f}")
    m3.metric("Prony terms", q.get("prony_terms", 0))
    ok = q.get("superposition_ok")
    m4.metric("superposition", "holds" if ok else "in doubt")
    st.plotly_chart(residual_figure(focus, curve), theme=None, key="resid")
    if pts is not None:
        st.plotly_chart(collapse_figure(focus, curve, pts), theme=None, key="collapse")
    for note in curve.notes:
        st.caption("Note: " + plain(note))


# Only the open tab is drawn: the others would cost every rerun and not be seen.
TABS = {
    "Master curve": _master_tab,
    "Shift factors": _shift_tab,
    "Nomogram": _nomogram_tab,
    "Transitions": _transitions_tab,
    "Relaxation": _relaxation_tab,
    "Data quality": _quality_tab,
}
# The open tab outlives a visit to another page: Streamlit forgets a widget's value in a
# run that does not draw it, so it is kept under a key of its own too.
if st.session_state.get("curves_tab") not in TABS:
    kept_tab = st.session_state.get("_curves_tab")
    if kept_tab in TABS:
        st.session_state["curves_tab"] = kept_tab
tabs = st.tabs(list(TABS), key="curves_tab", on_change="rerun")
st.session_state["_curves_tab"] = st.session_state.get("curves_tab")
for tab, draw in zip(tabs, TABS.values(), strict=True):
    if tab.open:
        with tab:
            draw()
