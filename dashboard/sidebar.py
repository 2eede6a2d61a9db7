"""The design case in the sidebar: window, design type, limits, merit indices, mount."""

from __future__ import annotations

import json

import pandas as pd
import streamlit as st

from dashboard import case
from dashboard.common import plain
from engine.base.errors import CriteriaError
from engine.curves.mountcheck import LAYOUTS, SHAPES
from engine.physics.indices import AGGREGATES, BUILT_IN
from engine.selection.ranking import DESIGN_TYPES, Criteria

DUTY_COLUMNS = ["temp_C", "freq_Hz", "share"]


def apply_state(values: dict) -> None:
    """Put case values into session state (before the widgets are drawn)."""
    for key in [k for k in st.session_state if str(k).startswith(("c_w_", "c_a_"))]:
        del st.session_state[key]
    for key, value in values.items():
        st.session_state[key] = value
    st.session_state["c_duty_rev"] = st.session_state.get("c_duty_rev", 0) + 1
    st.session_state.pop("c_duty_now", None)
    st.session_state.pop(MOUNT_MSG, None)


def init_state() -> None:
    """On a session's first run: defaults, overlaid by the link's query parameters."""
    if st.session_state.get("_case_ready"):
        return
    values, notes = case.from_query(st.query_params.to_dict())
    apply_state(values)
    st.session_state["_case_ready"] = True
    st.session_state["_link_notes"] = notes


def _on_design() -> None:
    design = st.session_state["c_design"]
    mount_on = case.mount_checked_by_default(design)
    for key, value in case.index_state(design, mount_on).items():
        st.session_state[key] = value
    st.session_state["c_pareto"] = []
    st.session_state["c_mount_on"] = mount_on


def _on_mount() -> None:
    """The mount switch: default indices follow it (an isolation mount without a mount is
    a material screening); chosen ones stay, less those a mount check must give."""
    design, mount_on = st.session_state["c_design"], bool(st.session_state["c_mount_on"])
    chosen = list(st.session_state.get("c_indices", []))
    before = [n for n, _, _ in case.default_indices(design, not mount_on)]
    if chosen == before:
        for key, value in case.index_state(design, mount_on).items():
            st.session_state[key] = value
    elif not mount_on:
        kept = [n for n in chosen if not (n in BUILT_IN and BUILT_IN[n].needs_mount)]
        if kept:
            st.session_state["c_indices"] = kept
        else:
            for key, value in case.index_state(design, mount_on).items():
                st.session_state[key] = value


def _on_case_file() -> None:
    upload = st.session_state.get("case_file")
    if upload is None:
        return
    try:
        try:
            data = json.loads(upload.getvalue().decode("utf-8-sig"))
        except (UnicodeDecodeError, json.JSONDecodeError) as exc:
            raise CriteriaError(f"not valid JSON: {exc}") from None
        values = case.state_from_criteria(Criteria.from_dict(data))
        problems = case.out_of_range(values)
        if problems:
            raise CriteriaError("; ".join(problems))
    except CriteriaError as exc:
        st.session_state["_case_msg"] = ("error", f"{upload.name}: {exc}")
        return
    values["compare"] = st.session_state.get("compare", [])
    apply_state(values)
    st.session_state["_case_msg"] = ("ok", f"case loaded from {upload.name}")


def _window() -> None:
    lo, hi = st.session_state["c_temp"]
    st.slider(
        "Temperature range [°C]",
        min_value=float(min(-100.0, lo)),
        max_value=float(max(200.0, hi)),
        step=1.0,
        format="%.0f",
        key="c_temp",
        help="Service temperatures the grade must cover.",
    )
    c1, c2 = st.columns(2)
    c1.number_input("f from [Hz]", min_value=case.LOWER["c_flo"], format="%g", key="c_flo")
    c2.number_input("f to [Hz]", min_value=case.LOWER["c_fhi"], format="%g", key="c_fhi")
    c1, c2 = st.columns(2)
    c1.number_input(
        "Points in band",
        min_value=case.LOWER["c_fpoints"],
        max_value=case.UPPER["c_fpoints"],
        step=1,
        key="c_fpoints",
        help="Points spaced evenly on a log scale between the lowest and highest frequency.",
    )
    c2.number_input("T step [K]", min_value=case.LOWER["c_tstep"], format="%g", key="c_tstep")
    st.number_input(
        "Design frequency [Hz]",
        min_value=case.LOWER["c_fdesign"],
        format="%g",
        key="c_fdesign",
        placeholder="mean of the band",
        help="Frequency of the temperature paths on the map and of the damping span; "
        "blank: the geometric mean of the band.",
    )
    st.caption("Duty points (optional): temperature, frequency and share of service time")
    rows = pd.DataFrame(st.session_state.get("c_duty", []), columns=DUTY_COLUMNS).astype(float)
    edited = st.data_editor(
        rows,
        key=f"duty_editor_{st.session_state.get('c_duty_rev', 0)}",
        num_rows="dynamic",
        hide_index=True,
        column_config={
            "temp_C": st.column_config.NumberColumn("T [°C]", format="%g", width="small"),
            "freq_Hz": st.column_config.NumberColumn(
                "f [Hz]", min_value=1e-6, format="%g", width="small"
            ),
            "share": st.column_config.NumberColumn(
                "share", min_value=0.0, format="%g", width="small"
            ),
        },
        width="stretch",
    )
    st.session_state["c_duty_now"] = edited.to_dict("records")


def _limits() -> None:
    st.number_input(
        "Minimum worst-case loss factor",
        min_value=case.LOWER["c_eta_min"],
        format="%g",
        key="c_eta_min",
        placeholder="no limit",
        help="Lowest tan δ anywhere in the window.",
    )
    st.number_input(
        "Maximum price [per kg]",
        min_value=case.LOWER["c_price_max"],
        format="%g",
        key="c_price_max",
        placeholder="no limit",
    )
    st.checkbox("Limit hardness", key="c_hard_on")
    st.slider(
        "Hardness [Shore A]",
        *case.HARDNESS_SCALE,
        step=1.0,
        format="%.0f",
        key="c_hard",
        disabled=not st.session_state.get("c_hard_on"),
    )
    mount_on = bool(st.session_state.get("c_mount_on"))
    st.number_input(
        "Maximum transmissibility",
        min_value=case.LOWER["c_trans_max"],
        format="%g",
        key="c_trans_max",
        placeholder="no limit",
        disabled=not mount_on,
        help="At every window temperature and disturbance frequency (needs a mount). "
        "Below 1 the mount isolates; blank: no limit.",
    )
    st.number_input(
        "Lowest isolation efficiency [%]",
        min_value=case.LOWER["c_iso_min"],
        max_value=case.UPPER["c_iso_min"],
        format="%g",
        key="c_iso_min",
        placeholder="no limit",
        disabled=not mount_on,
        help="Share of the disturbing force kept from the structure, 1 − T, at every window "
        "temperature and disturbance frequency (needs a mount).",
    )
    st.number_input(
        "Lowest f/fn",
        min_value=case.LOWER["c_ratio_min"],
        format="%.3g",
        key="c_ratio_min",
        placeholder="no limit",
        disabled=not mount_on,
        help="Disturbance frequency over the mount's natural frequency, at every window "
        "temperature: above √2 a mount isolates; raise it for a margin (needs a mount).",
    )
    st.number_input(
        "Highest amplification at resonance",
        min_value=case.LOWER["c_amp_max"],
        format="%g",
        key="c_amp_max",
        placeholder="no limit",
        disabled=not mount_on,
        help="Amplification when the machine runs up through the mount's natural frequency, "
        "at every window temperature (needs a mount).",
    )
    c1, c2 = st.columns(2)
    c1.number_input(
        "fn from [Hz]",
        min_value=case.LOWER["c_fn_lo"],
        format="%g",
        key="c_fn_lo",
        placeholder="any",
        disabled=not mount_on,
    )
    c2.number_input(
        "fn to [Hz]",
        min_value=case.LOWER["c_fn_hi"],
        format="%g",
        key="c_fn_hi",
        placeholder="any",
        disabled=not mount_on,
    )
    st.number_input(
        "Maximum static strain",
        min_value=case.LOWER["c_strain_max"],
        format="%g",
        key="c_strain_max",
        placeholder="usual limit of the layout",
        help="Static strain including long-term sag; blank uses the layout's usual limit.",
    )
    st.toggle("Allow extrapolated values", key="c_extrap")
    st.toggle("Service range must cover the window", key="c_service")


def _indices() -> None:
    st.multiselect(
        "Merit indices",
        options=list(BUILT_IN),
        format_func=lambda n: BUILT_IN[n].label,
        key="c_indices",
    )
    for name in st.session_state["c_indices"]:
        spec = BUILT_IN[name]
        st.session_state.setdefault(case.weight_key(name), 1.0)
        st.session_state.setdefault(case.aggregate_key(name), "worst")
        c1, c2 = st.columns([3, 2])
        top = max(5.0, float(st.session_state[case.weight_key(name)]))
        c1.slider(f"Weight: {spec.label}", 0.0, top, step=0.25, key=case.weight_key(name))
        c2.selectbox(
            "over window",
            AGGREGATES,
            key=case.aggregate_key(name),
            disabled=spec.kind == "window",
            help="How point values are reduced over the window (window indices are one number).",
        )
    st.toggle("Add a custom index", key="c_cx_on")
    if st.session_state.get("c_cx_on"):
        st.text_input("Name", key="c_cx_name")
        st.text_input(
            "Formula",
            key="c_cx_formula",
            placeholder="e.g. loss_factor * sqrt(storage_modulus) / density",
            help="Quantities: loss_factor, storage_modulus [MPa], loss_modulus [MPa], "
            "shear_modulus [MPa], density, price, hardness, temperature, frequency. "
            "Operators + - * / ** and log10 log exp sqrt abs min max.",
        )
        c1, c2 = st.columns([3, 2])
        top = max(5.0, float(st.session_state.get("c_cx_w", 1.0)))
        c1.slider("Weight: custom", 0.0, top, step=0.25, key="c_cx_w")
        c2.selectbox("over window", AGGREGATES, key="c_cx_a")
        st.toggle("Higher is better", key="c_cx_hi")
    names = list(st.session_state["c_indices"])
    if st.session_state.get("c_cx_on"):
        names.append(str(st.session_state.get("c_cx_name", "")).strip())
    st.session_state["c_pareto"] = [n for n in st.session_state.get("c_pareto", []) if n in names]
    st.multiselect(
        "Pareto pair (optional)",
        options=names,
        max_selections=2,
        key="c_pareto",
        format_func=lambda n: BUILT_IN[n].label if n in BUILT_IN else n,
    )
    st.number_input(
        "Loss-factor threshold of the damping span",
        min_value=case.LOWER["c_eta_thr"],
        format="%g",
        key="c_eta_thr",
    )


# Last valid value of each disturbance input, kept so that a bad entry can be undone.
KEPT = "_kept_"
MOUNT_MSG = "_mount_msg"


def _shown(value) -> str:
    if isinstance(value, list):
        return ", ".join(f"{n}x" for n in value) or "none"
    return str(value).strip() or "blank"


def _on_disturbance(key: str) -> None:
    """A disturbance input changed: keep it if the disturbances still make a mount design,
    else undo it to its last valid value and say why in one line."""
    problem = case.disturbance_problem(st.session_state)
    if problem is None:
        st.session_state.pop(MOUNT_MSG, None)
        return
    kept = st.session_state.get(KEPT + key, case.DEFAULTS[key])
    st.session_state[key] = list(kept) if isinstance(kept, list) else kept
    st.session_state[MOUNT_MSG] = f"{problem}; kept {_shown(kept)}"


def _disturbances(off: bool) -> None:
    """Disturbances as frequencies and/or shaft speeds, the harmonic orders checked and
    the working strain amplitude."""
    if case.disturbance_problem(st.session_state) is None:
        for key in case.DISTURBANCE_KEYS:
            value = st.session_state.get(key, case.DEFAULTS[key])
            st.session_state[KEPT + key] = list(value) if isinstance(value, list) else value
    c1, c2 = st.columns(2)
    c1.text_input(
        "Disturbance [Hz]",
        key="c_dist",
        disabled=off,
        on_change=_on_disturbance,
        args=("c_dist",),
        placeholder="none",
        help="Frequencies of the disturbance, separated by commas; may be blank when "
        "speeds are given.",
    )
    c2.text_input(
        "Shaft speed [rpm]",
        key="c_rpm",
        disabled=off,
        on_change=_on_disturbance,
        args=("c_rpm",),
        placeholder="none",
        help="Speeds of the disturbing machine, separated by commas; each runs at speed / 60 Hz.",
    )
    st.multiselect(
        "Harmonic orders",
        options=list(case.HARMONIC_ORDERS),
        format_func=lambda n: "1x (fundamental)" if n == 1 else f"{n}x",
        key="c_harm",
        disabled=off,
        on_change=_on_disturbance,
        args=("c_harm",),
        help="Each disturbance (Hz and rpm) is checked at these multiples of its frequency.",
    )
    msg = st.session_state.get(MOUNT_MSG)
    if msg:
        st.warning(plain(msg))  # quotes what was typed
    st.number_input(
        "Working strain amplitude [-]",
        min_value=case.LOWER["c_work"],
        max_value=case.UPPER["c_work"],
        format="%g",
        step=0.01,
        key="c_work",
        placeholder="small strain, as measured",
        disabled=off,
        help="Dynamic strain amplitude of the pad in service, e.g. 0.05 for 5 %; blank or "
        "0: the small-strain values of the DMA data.",
    )


def _mount() -> None:
    st.toggle(
        "Check a mount",
        key="c_mount_on",
        on_change=_on_mount,
        help="Off for an isolation mount: a material screening only, with no mount figures.",
    )
    off = not st.session_state.get("c_mount_on")
    c1, c2 = st.columns(2)
    c1.selectbox("Layout", LAYOUTS, key="c_layout", disabled=off)
    c2.selectbox("Pad shape", SHAPES, key="c_shape", disabled=off)
    c1, c2 = st.columns(2)
    c1.number_input(
        "Total mass [kg]", min_value=case.LOWER["c_mass"], format="%g", key="c_mass", disabled=off
    )
    c2.number_input("Pads", min_value=case.LOWER["c_mounts"], step=1, key="c_mounts", disabled=off)
    c1, c2 = st.columns(2)
    c1.number_input(
        "Pad area [mm²]",
        min_value=case.LOWER["c_area"],
        format="%g",
        key="c_area",
        disabled=off,
        help="Loaded area of one pad; replaced by the sized area when sizing is on.",
    )
    c2.number_input(
        "Rubber thickness [mm]",
        min_value=case.LOWER["c_thick"],
        format="%g",
        key="c_thick",
        disabled=off,
    )
    c1, c2 = st.columns(2)
    c1.number_input(
        "Shape factor",
        min_value=case.LOWER["c_sf"],
        format="%g",
        key="c_sf",
        placeholder="from the shape",
        disabled=off,
    )
    c2.number_input(
        "k factor",
        min_value=case.LOWER["c_kf"],
        format="%g",
        key="c_kf",
        placeholder="from hardness",
        disabled=off,
    )
    st.toggle("Size each pad for a target natural frequency", key="c_size_on", disabled=off)
    c1, c2 = st.columns(2)
    c1.number_input(
        "Target fn [Hz]",
        min_value=case.LOWER["c_fn_target"],
        format="%g",
        key="c_fn_target",
        disabled=off or not st.session_state.get("c_size_on"),
    )
    c2.number_input(
        "Sizing at [°C]",
        format="%g",
        key="c_size_temp",
        disabled=off or not st.session_state.get("c_size_on"),
    )
    _disturbances(off)
    st.number_input(
        "Service life for sag [h]",
        min_value=case.LOWER["c_life"],
        format="%g",
        key="c_life",
        disabled=off,
    )


def render() -> tuple[Criteria | None, str | None]:
    """Draw the sidebar; the criteria of the case, or the one-line reason it is invalid."""
    sb = st.sidebar
    with sb:
        st.markdown("### Design case")
        st.selectbox(
            "Design type",
            DESIGN_TYPES,
            format_func=lambda design: case.DESIGN_LABELS[design],
            key="c_design",
            on_change=_on_design,
        )
        with st.expander("Operating window", expanded=True):
            _window()
        with st.expander("Must meet", expanded=False):
            _limits()
        with st.expander("Merit indices", expanded=False):
            _indices()
        with st.expander("Mount", expanded=False):
            _mount()
        criteria, problem = None, None
        try:
            criteria = case.criteria_from_state(st.session_state)
        except CriteriaError as exc:
            problem = str(exc)
        with st.expander("Case file", expanded=False):
            st.download_button(
                "Save the case (JSON)",
                data=json.dumps(criteria.to_dict(), indent=1) if criteria else "",
                file_name="quietgrade-case.json",
                mime="application/json",
                disabled=criteria is None,
                width="stretch",
            )
            st.file_uploader("Load a case", type=["json"], key="case_file", on_change=_on_case_file)
            msg = st.session_state.get("_case_msg")
            if msg:
                (st.error if msg[0] == "error" else st.success)(plain(msg[1]))
    return criteria, problem
