"""The design case as the dashboard holds it: widget values, the page link, the criteria.

The sidebar widgets keep their values in Streamlit's session state under the keys of
:data:`DEFAULTS`. This module turns those values into :class:`engine.selection.ranking.Criteria`
(built directly from its frozen dataclasses, which check them), back again from a
loaded criteria file, and into the short query string that makes a link reproduce the
view. It imports no Streamlit, so it is tested as plain functions.

Link keys (values with ``,`` between numbers)::

    t   window temperatures lo,hi [degC]     ts  temperature step [K]
    f   frequency band lo,hi [Hz]            fp  points in the band
    fd  design frequency [Hz]                dp  duty points T:f:share;T:f:share
    d   design type: mount | layer | general
    ix  indices name:weight:aggregation,...  pa  Pareto pair a,b
    cx  custom index name:hi|lo:weight:aggregation, with its formula in cf
    et  loss-factor threshold of the damping span
    le  minimum worst-case loss factor       pm  maximum price [per kg]
    hd  hardness range lo,hi [Shore A]       tm  maximum transmissibility
    ie  minimum isolation efficiency [%]     rr  minimum disturbance-to-fn ratio f/fn
    ra  maximum amplification at resonance
    x   allow extrapolation 1|0              sv  service range must cover the window 1|0
    sm  maximum static strain                fr  natural-frequency range lo,hi [Hz]
    m   mount layout c | s, or 0 for no mount check (an isolation mount: a screening)
    mm  total mass [kg]   mc  pads   ma  pad area [mm2]   mh  rubber thickness [mm]
    ms  pad shape disc | square   msf shape factor   mk  k factor
    mt  target natural frequency [Hz] (0: no sizing)   md  disturbances f1,f2 [Hz]
    mr  disturbance speeds r1,r2 [rpm]   mo  harmonic orders n1,n2 (1: the fundamental)
    mw  working strain amplitude [-] (0: small strain, as measured)
    mst sizing temperature [degC]   ml  service life [h]
    g   comparison set id,id

A limit the engine sets by default (tm, rr) that is switched off is written ``off``, and
so is ``md`` when the disturbances are given as speeds alone.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from engine.base.errors import CriteriaError
from engine.curves.mountcheck import (
    MAX_HARMONIC,
    MAX_WORKING_STRAIN,
    SHAPES,
    MountDesign,
    default_mount,
)
from engine.curves.window import DutyPoint, OperatingWindow
from engine.physics.indices import AGGREGATES, BUILT_IN
from engine.selection.criteria import SCREENING_INDICES
from engine.selection.ranking import DEFAULT_INDICES, Constraints, Criteria, IndexChoice

DESIGN_CODES = {"isolation_mount": "mount", "damping_layer": "layer", "general": "general"}
DESIGN_LABELS = {
    "isolation_mount": "isolation mount",
    "damping_layer": "damping layer",
    "general": "general",
}
LAYOUT_CODES = {"compression": "c", "shear": "s"}


def mount_checked_by_default(design: str) -> bool:
    """Whether a design type starts with the mount check on (the dashboard's choice: the
    engine checks a mount whenever its criteria hold a mount design)."""
    return design == "isolation_mount"


def screening(design: str, mount_on: bool) -> bool:
    """Whether the case is a material screening: an isolation mount with no mount checked."""
    return design == "isolation_mount" and not mount_on


def default_indices(design: str, mount_on: bool) -> list[tuple[str, float, str]]:
    """The engine's default indices (name, weight, aggregation) of the case: those of the
    design type, or of a material screening when an isolation mount is not checked."""
    return list(SCREENING_INDICES if screening(design, mount_on) else DEFAULT_INDICES[design])


def index_state(design: str, mount_on: bool) -> dict:
    """Widget values of the default indices of the case (list, weights, aggregations)."""
    chosen = default_indices(design, mount_on)
    state: dict[str, Any] = {"c_indices": [n for n, _, _ in chosen]}
    for name, weight, agg in chosen:
        state[weight_key(name)] = weight
        state[aggregate_key(name)] = agg
    return state


# Widget values that no engine default gives: the numbers a box shows once its switch is
# turned on (sizing a pad, limiting hardness), and the name of a new custom index.
SIZING_TARGET_HZ = 10.0
HARDNESS_SHOWN = (30.0, 80.0)  # Shore A
CUSTOM_NAME = "own_index"


def _listed(values) -> str:
    """Numbers as a list box shows them: ``24.7, 49.4`` (blank for none)."""
    return ", ".join(f"{float(v):g}" for v in values)


def _percent(share: float | None) -> float | None:
    """A share (0.8) as the percentage a box shows (80), rounded off the binary noise."""
    return None if share is None else round(100.0 * share, 9)


def _defaults() -> dict:
    """The widget values of the engine's default criteria (its dataclasses' defaults)."""
    criteria = Criteria()
    window, con, mount = criteria.window, criteria.constraints, default_mount()
    custom = IndexChoice(CUSTOM_NAME)
    return {
        "c_temp": tuple(float(v) for v in window.temp_range),
        "c_tstep": float(window.temp_step),
        "c_flo": float(window.freq_range[0]),
        "c_fhi": float(window.freq_range[1]),
        "c_fpoints": int(window.freq_points),
        "c_fdesign": window.design_frequency_Hz,
        "c_duty": [
            {"temp_C": p.temperature_C, "freq_Hz": p.frequency_Hz, "share": p.share}
            for p in window.duty_points
        ],
        "c_design": criteria.design,
        "c_indices": [c.name for c in criteria.indices],
        "c_cx_on": False,
        "c_cx_name": custom.name,
        "c_cx_formula": "",
        "c_cx_hi": custom.higher_is_better,
        "c_cx_w": float(custom.weight),
        "c_cx_a": custom.aggregate,
        "c_pareto": list(criteria.pareto or []),
        "c_eta_thr": float(criteria.eta_threshold),
        "c_eta_min": con.min_loss_factor,
        "c_price_max": con.max_price,
        "c_hard_on": con.hardness_range is not None,
        "c_hard": tuple(con.hardness_range or HARDNESS_SHOWN),
        "c_trans_max": con.max_transmissibility,
        "c_iso_min": _percent(con.min_isolation_efficiency),
        "c_ratio_min": con.min_frequency_ratio,
        "c_amp_max": con.max_amplification,
        "c_extrap": con.allow_extrapolation,
        "c_service": con.service_covers_window,
        "c_strain_max": con.max_static_strain,
        "c_fn_lo": con.fn_range_Hz[0] if con.fn_range_Hz else None,
        "c_fn_hi": con.fn_range_Hz[1] if con.fn_range_Hz else None,
        "c_mount_on": mount_checked_by_default(criteria.design),
        "c_layout": mount.layout,
        "c_mass": float(mount.mass_kg),
        "c_mounts": int(mount.mounts),
        "c_area": float(mount.area_mm2),
        "c_thick": float(mount.thickness_mm),
        "c_shape": mount.shape,
        "c_sf": mount.shape_factor,
        "c_kf": mount.k_factor,
        "c_size_on": mount.target_fn_Hz is not None,
        "c_fn_target": float(mount.target_fn_Hz or SIZING_TARGET_HZ),
        "c_dist": _listed(mount.disturbance_Hz),
        "c_rpm": _listed(mount.disturbance_rpm),
        "c_harm": [int(n) for n in mount.harmonics],
        "c_work": mount.working_strain,
        "c_size_temp": float(mount.sizing_temp_C),
        "c_life": float(mount.service_life_h),
        "compare": [],
    }


# Every value with an engine counterpart is the engine's default (engine.curves.window,
# engine.curves.mountcheck, engine.selection.ranking): the dashboard opens on the case
# that `rank` with no options ranks, with the mount check of an isolation mount.
DEFAULTS: dict = _defaults()


# Lowest (and highest) values the sidebar widgets accept; loaded values outside are refused.
LOWER = {
    "c_tstep": 0.1,
    "c_flo": 1e-6,
    "c_fhi": 1e-6,
    "c_fpoints": 1,
    "c_fdesign": 1e-6,
    "c_eta_thr": 1e-4,
    "c_eta_min": 0.0,
    "c_price_max": 0.0,
    "c_trans_max": 0.0,
    "c_iso_min": 0.0,
    "c_ratio_min": 0.0,
    "c_amp_max": 1.0,  # at resonance T = sqrt(1 + eta^2) / eta, never below 1
    "c_strain_max": 0.0,
    "c_fn_lo": 0.0,
    "c_fn_hi": 0.0,
    "c_mass": 1e-3,
    "c_mounts": 1,
    "c_area": 1e-3,
    "c_thick": 1e-3,
    "c_sf": 0.0,
    "c_kf": 0.0,
    "c_fn_target": 1e-3,
    "c_life": 1e-3,
    "c_work": 0.0,  # 0: the small-strain values, as measured
    "c_cx_w": 0.0,
}
UPPER = {
    "c_fpoints": 500,
    "c_iso_min": 99.9,  # an efficiency of 100 % is no mount
    "c_work": MAX_WORKING_STRAIN,
}
HARMONIC_ORDERS = tuple(range(1, MAX_HARMONIC + 1))  # the orders the sidebar offers
# A limit the engine sets by default (tm, rr), switched off, is written so in the link.
SWITCHED_OFF = "off"
HARDNESS_SCALE = (0.0, 100.0)  # Shore A


def out_of_range(state: Mapping) -> list[str]:
    """Settings that the sidebar widgets cannot show, one line each."""
    out = []
    for key, low in LOWER.items():
        value = state.get(key)
        if value is not None and value < low:
            out.append(f"{key[2:]} {value:g} is below {low:g}")
    for key, high in UPPER.items():
        value = state.get(key)
        if value is not None and value > high:
            out.append(f"{key[2:]} {value:g} is above {high:g}")
    lo, hi = state.get("c_hard", HARDNESS_SCALE)
    if lo < HARDNESS_SCALE[0] or hi > HARDNESS_SCALE[1]:
        out.append(f"hardness {lo:g} to {hi:g} lies outside 0 to 100 Shore A")
    for key, value in state.items():
        if str(key).startswith("c_w_") and value is not None and value < 0:
            out.append(f"weight of {key[4:]} {value:g} is negative")
    return out


def weight_key(name: str) -> str:
    return f"c_w_{name}"


def aggregate_key(name: str) -> str:
    return f"c_a_{name}"


def default_state() -> dict:
    """A fresh copy of the defaults with the weights of the default indices."""
    state: dict[str, Any] = {
        k: (list(v) if isinstance(v, list) else v) for k, v in DEFAULTS.items()
    }
    state.update(index_state(state["c_design"], bool(state["c_mount_on"])))
    return state


# -- criteria ------------------------------------------------------------------------------


def parse_numbers(text: str, what: str, blank_ok: bool = False) -> list[float]:
    """Numbers written with commas or spaces between them, e.g. ``24.7, 49.4``; with
    ``blank_ok`` an empty text is the empty list."""
    parts = [p for p in str(text).replace(";", ",").replace(" ", ",").split(",") if p]
    try:
        values = [float(p) for p in parts]
    except ValueError:
        raise CriteriaError(f"{what}: '{text}' is not a list of numbers") from None
    if not all(math.isfinite(v) for v in values):
        raise CriteriaError(f"{what}: '{text}' holds a value that is not a finite number")
    if not values and not blank_ok:
        raise CriteriaError(f"{what}: give at least one number")
    return values


# The mount inputs typed as text or picked from a list: the sidebar keeps their last
# valid values (a bad entry is reported and undone), the link refuses bad ones.
DISTURBANCE_KEYS = ("c_dist", "c_rpm", "c_harm")


def _disturbances(state: Mapping) -> dict[str, Any]:
    """The disturbance settings of a MountDesign from the widget values (unchecked)."""
    harmonics = state.get("c_harm", DEFAULTS["c_harm"]) or ()
    return {
        "disturbance_Hz": tuple(
            parse_numbers(state["c_dist"], "disturbance frequencies", blank_ok=True)
        ),
        "disturbance_rpm": tuple(
            parse_numbers(state.get("c_rpm", ""), "disturbance speeds [rpm]", blank_ok=True)
        ),
        "harmonics": tuple(sorted({int(n) for n in harmonics})),
    }


def disturbance_problem(state: Mapping) -> str | None:
    """Why the disturbances in ``state`` (Hz, rpm, harmonic orders) make no mount design,
    in one line, or None when they do (the engine's MountDesign checks them)."""
    try:
        MountDesign(**_disturbances(state))
    except (CriteriaError, TypeError, ValueError) as exc:
        return str(exc)
    return None


def _working_strain(state: Mapping) -> float | None:
    """The working strain amplitude [-]; blank or 0 means the small-strain values."""
    value = _optional(state.get("c_work"))
    return value if value else None


def _optional(value):
    if value is None:
        return None
    value = float(value)
    return None if math.isnan(value) else value


def duty_points(rows) -> list[dict]:
    """Complete duty-point rows (temperature, frequency, share); blank rows are dropped."""
    out = []
    for row in rows or []:
        vals = [_optional(row.get(k)) for k in ("temp_C", "freq_Hz", "share")]
        if vals[0] is None and vals[1] is None:
            continue
        if vals[0] is None or vals[1] is None:
            raise CriteriaError("a duty point needs both a temperature and a frequency")
        out.append(
            {"temp_C": vals[0], "freq_Hz": vals[1], "share": 1.0 if vals[2] is None else vals[2]}
        )
    return out


def _window(state: Mapping) -> OperatingWindow:
    lo, hi = state["c_temp"]
    return OperatingWindow(
        temp_range=(float(lo), float(hi)),
        temp_step=float(state["c_tstep"]),
        freq_range=(float(state["c_flo"]), float(state["c_fhi"])),
        freq_points=int(state["c_fpoints"]),
        duty_points=tuple(
            DutyPoint(p["temp_C"], p["freq_Hz"], p["share"])
            for p in duty_points(state.get("c_duty_now", state.get("c_duty")))
        ),
        design_frequency_Hz=_optional(state.get("c_fdesign")),
    )


def _indices(state: Mapping) -> tuple[IndexChoice, ...]:
    indices = [
        IndexChoice(
            name,
            weight=float(state.get(weight_key(name), 1.0)),
            aggregate=str(state.get(aggregate_key(name), "worst")),
        )
        for name in state["c_indices"]
    ]
    if state.get("c_cx_on"):
        formula = str(state.get("c_cx_formula") or "").strip()
        if not formula:
            raise CriteriaError("the custom index has no formula")
        indices.append(
            IndexChoice(
                str(state["c_cx_name"]).strip(),
                weight=float(state["c_cx_w"]),
                aggregate=str(state["c_cx_a"]),
                formula=formula,
                higher_is_better=bool(state["c_cx_hi"]),
            )
        )
    if not indices:
        raise CriteriaError("choose at least one merit index")
    return tuple(indices)


def _constraints(state: Mapping, mount_on: bool) -> Constraints:
    fn_lo, fn_hi = _optional(state.get("c_fn_lo")), _optional(state.get("c_fn_hi"))
    if (fn_lo is None) != (fn_hi is None):
        raise CriteriaError("give both ends of the natural-frequency range, or neither")
    efficiency = _optional(state.get("c_iso_min"))
    # The mount limits stay as set without a mount (the engine applies them to a checked
    # mount only), except the fn range, which the engine refuses without one.
    return Constraints(
        service_covers_window=bool(state["c_service"]),
        hardness_range=tuple(state["c_hard"]) if state.get("c_hard_on") else None,
        max_price=_optional(state.get("c_price_max")),
        min_loss_factor=_optional(state.get("c_eta_min")),
        max_transmissibility=_optional(state.get("c_trans_max")),
        min_isolation_efficiency=None if efficiency is None else efficiency / 100.0,
        min_frequency_ratio=_optional(state.get("c_ratio_min")),
        max_amplification=_optional(state.get("c_amp_max")),
        fn_range_Hz=(fn_lo, fn_hi) if (mount_on and fn_lo is not None) else None,
        max_static_strain=_optional(state.get("c_strain_max")),
        allow_extrapolation=bool(state["c_extrap"]),
    )


def _mount(state: Mapping) -> MountDesign:
    return MountDesign(
        layout=state["c_layout"],
        mass_kg=float(state["c_mass"]),
        mounts=int(state["c_mounts"]),
        area_mm2=float(state["c_area"]),
        thickness_mm=float(state["c_thick"]),
        shape=state["c_shape"],
        shape_factor=_optional(state.get("c_sf")),
        k_factor=_optional(state.get("c_kf")),
        **_disturbances(state),
        working_strain=_working_strain(state),
        target_fn_Hz=_optional(state["c_fn_target"]) if state.get("c_size_on") else None,
        sizing_temp_C=float(state["c_size_temp"]),
        service_life_h=float(state["c_life"]),
    )


def criteria_from_state(state: Mapping) -> Criteria:
    """The engine's criteria for the case in ``state``; :class:`CriteriaError` if bad.

    The criteria are built from the engine's dataclasses directly, which check every
    setting (the window's temperatures in :class:`OperatingWindow`, the pads in
    :class:`MountDesign`, ...); the dashboard checks only what its widgets hold apart
    (both ends of a range given, a custom formula, at least one index).
    """
    mount_on = bool(state.get("c_mount_on"))
    pareto = tuple(state.get("c_pareto") or ())
    try:
        return Criteria(
            window=_window(state),
            design=state["c_design"],
            indices=_indices(state),
            constraints=_constraints(state, mount_on),
            mount=_mount(state) if mount_on else None,
            pareto=pareto or None,
            eta_threshold=float(state["c_eta_thr"]),
            screening_only=screening(state["c_design"], mount_on),
        )
    except (TypeError, ValueError) as exc:
        raise CriteriaError(f"bad setting: {exc}") from None


def state_from_criteria(criteria: Criteria) -> dict:
    """Widget values that reproduce ``criteria`` (inverse of :func:`criteria_from_state`)."""
    state = default_state()
    for key in list(state):
        if key.startswith(("c_w_", "c_a_")):
            del state[key]
    w = criteria.window
    state["c_temp"] = tuple(float(v) for v in w.temp_range)
    state["c_tstep"] = float(w.temp_step)
    state["c_flo"], state["c_fhi"] = (float(v) for v in w.freq_range)
    state["c_fpoints"] = int(w.freq_points)
    state["c_fdesign"] = w.design_frequency_Hz
    state["c_duty"] = [
        {"temp_C": p.temperature_C, "freq_Hz": p.frequency_Hz, "share": p.share}
        for p in w.duty_points
    ]
    state["c_design"] = criteria.design
    built_in = [c for c in criteria.indices if c.formula is None]
    custom = [c for c in criteria.indices if c.formula is not None]
    if len(custom) > 1:
        raise CriteriaError("the dashboard holds one custom index; this file has more")
    state["c_indices"] = [c.name for c in built_in]
    for c in built_in:
        state[weight_key(c.name)] = float(c.weight)
        state[aggregate_key(c.name)] = c.aggregate
    state["c_cx_on"] = bool(custom)
    if custom:
        c = custom[0]
        state.update(
            c_cx_name=c.name,
            c_cx_formula=c.formula,
            c_cx_hi=bool(c.higher_is_better),
            c_cx_w=float(c.weight),
            c_cx_a=c.aggregate,
        )
    state["c_pareto"] = list(criteria.pareto or [])
    state["c_eta_thr"] = float(criteria.eta_threshold)
    con = criteria.constraints
    state["c_service"] = bool(con.service_covers_window)
    state["c_hard_on"] = con.hardness_range is not None
    if con.hardness_range is not None:
        state["c_hard"] = tuple(float(v) for v in con.hardness_range)
    state["c_price_max"] = con.max_price
    state["c_eta_min"] = con.min_loss_factor
    state["c_trans_max"] = con.max_transmissibility
    state["c_iso_min"] = _percent(con.min_isolation_efficiency)
    state["c_ratio_min"] = con.min_frequency_ratio
    state["c_amp_max"] = con.max_amplification
    state["c_strain_max"] = con.max_static_strain
    state["c_extrap"] = bool(con.allow_extrapolation)
    state["c_fn_lo"], state["c_fn_hi"] = con.fn_range_Hz or (None, None)
    m = criteria.mount
    state["c_mount_on"] = m is not None
    if m is not None:
        state.update(
            c_layout=m.layout,
            c_mass=float(m.mass_kg),
            c_mounts=int(m.mounts),
            c_area=float(m.area_mm2),
            c_thick=float(m.thickness_mm),
            c_shape=m.shape,
            c_sf=m.shape_factor,
            c_kf=m.k_factor,
            c_size_on=m.target_fn_Hz is not None,
            c_fn_target=float(m.target_fn_Hz or DEFAULTS["c_fn_target"]),
            c_dist=_listed(m.disturbance_Hz),
            c_rpm=_listed(m.disturbance_rpm),
            c_harm=sorted({int(n) for n in m.harmonics}),
            c_work=m.working_strain,
            c_size_temp=float(m.sizing_temp_C),
            c_life=float(m.service_life_h),
        )
    return state


# -- the page link -------------------------------------------------------------------------


def _g(v) -> str:
    return f"{float(v):g}"


def _pair(v) -> str:
    return f"{_g(v[0])},{_g(v[1])}"


def to_query(state: Mapping) -> dict[str, str]:
    """Short query parameters for the case in ``state`` (defaults left out, except t f d)."""
    d = DEFAULTS
    q: dict[str, str] = {
        "t": _pair(state["c_temp"]),
        "f": f"{_g(state['c_flo'])},{_g(state['c_fhi'])}",
        "d": DESIGN_CODES[state["c_design"]],
    }

    def put(key, state_key, fmt=_g):
        value = state.get(state_key)
        if value is None:
            if d[state_key] is not None:  # a default limit switched off
                q[key] = SWITCHED_OFF
        elif value != d[state_key]:
            q[key] = fmt(value)

    put("ts", "c_tstep")
    put("fp", "c_fpoints", lambda v: str(int(v)))
    put("fd", "c_fdesign")
    duty = duty_points(state.get("c_duty_now", state.get("c_duty")))
    if duty:
        q["dp"] = ";".join(f"{_g(p['temp_C'])}:{_g(p['freq_Hz'])}:{_g(p['share'])}" for p in duty)
    own_defaults = default_indices(state["c_design"], bool(state.get("c_mount_on")))
    design_default = [n for n, _, _ in own_defaults]
    ix = [
        f"{n}:{_g(state.get(weight_key(n), 1.0))}:{state.get(aggregate_key(n), 'worst')}"
        for n in state["c_indices"]
    ]
    plain = all(
        float(state.get(weight_key(n), 1.0)) == w and state.get(aggregate_key(n), "worst") == a
        for n, w, a in own_defaults
    )
    if list(state["c_indices"]) != design_default or not plain:
        q["ix"] = ",".join(ix)
    if state.get("c_cx_on"):
        q["cx"] = (
            f"{state['c_cx_name']}:{'hi' if state['c_cx_hi'] else 'lo'}:"
            f"{_g(state['c_cx_w'])}:{state['c_cx_a']}"
        )
        q["cf"] = str(state.get("c_cx_formula") or "")
    if state.get("c_pareto"):
        q["pa"] = ",".join(state["c_pareto"])
    put("et", "c_eta_thr")
    put("le", "c_eta_min")
    put("pm", "c_price_max")
    if state.get("c_hard_on"):
        q["hd"] = _pair(state["c_hard"])
    put("tm", "c_trans_max")
    put("ie", "c_iso_min")
    put("rr", "c_ratio_min")
    put("ra", "c_amp_max")
    if bool(state["c_extrap"]) != d["c_extrap"]:
        q["x"] = "1" if state["c_extrap"] else "0"
    if bool(state["c_service"]) != d["c_service"]:
        q["sv"] = "1" if state["c_service"] else "0"
    put("sm", "c_strain_max")
    if state.get("c_fn_lo") is not None and state.get("c_fn_hi") is not None:
        q["fr"] = f"{_g(state['c_fn_lo'])},{_g(state['c_fn_hi'])}"
    mount_default = mount_checked_by_default(state["c_design"])
    if not state.get("c_mount_on"):
        if mount_default:
            q["m"] = "0"
    else:
        if state["c_layout"] != d["c_layout"] or not mount_default:
            q["m"] = LAYOUT_CODES[state["c_layout"]]
        put("mm", "c_mass")
        put("mc", "c_mounts", lambda v: str(int(v)))
        put("ma", "c_area")
        put("mh", "c_thick")
        put("ms", "c_shape", str)
        put("msf", "c_sf")
        put("mk", "c_kf")
        if not state.get("c_size_on"):
            if d["c_size_on"]:
                q["mt"] = "0"
        elif d["c_size_on"]:
            put("mt", "c_fn_target")
        else:
            q["mt"] = _g(state["c_fn_target"])
        _put_disturbances(q, state)
        put("mst", "c_size_temp")
        put("ml", "c_life")
    if state.get("compare"):
        q["g"] = ",".join(state["compare"])
    return q


def _put_disturbances(q: dict[str, str], state: Mapping) -> None:
    """The link codes md, mr, mo and mw of the case (those that differ from the defaults);
    a list that does not parse is left out (the sidebar never holds one for long)."""
    d = DEFAULTS
    try:
        parts = _disturbances(state)
    except CriteriaError:
        return
    hz, rpm, orders = parts["disturbance_Hz"], parts["disturbance_rpm"], parts["harmonics"]
    if _listed(hz) != d["c_dist"]:
        q["md"] = ",".join(_g(v) for v in hz) if hz else SWITCHED_OFF
    if _listed(rpm) != d["c_rpm"]:
        q["mr"] = ",".join(_g(v) for v in rpm) if rpm else SWITCHED_OFF
    if list(orders) != d["c_harm"]:
        q["mo"] = ",".join(str(n) for n in orders)
    strain = _working_strain(state)
    if strain != d["c_work"]:
        q["mw"] = SWITCHED_OFF if strain is None else _g(strain)


def from_query(params: Mapping[str, str]) -> tuple[dict, list[str]]:
    """Widget values from query parameters, and a note for every parameter ignored.

    Values start from :func:`default_state`; a parameter that does not parse is left at
    its default and reported.
    """
    state = default_state()
    notes: list[str] = []
    codes = {v: k for k, v in DESIGN_CODES.items()}
    layouts = {v: k for k, v in LAYOUT_CODES.items()}

    def num(text):
        value = float(text)
        if not math.isfinite(value):
            raise ValueError("not a finite number")
        return value

    def pair(text):
        a, b = (num(v) for v in str(text).split(","))
        return (a, b)

    def limit(text):
        return None if text == SWITCHED_OFF else num(text)

    def flag(text):
        if text not in ("0", "1"):
            raise ValueError("use 0 or 1")
        return text == "1"

    def design(text):
        if text not in codes:
            raise ValueError("use " + ", ".join(codes))
        return codes[text]

    if "d" in params:
        try:
            state["c_design"] = design(params["d"])
        except ValueError as exc:
            notes.append(f"d={params['d']}: {exc}")
        state["c_mount_on"] = mount_checked_by_default(state["c_design"])

    simple = {
        "t": ("c_temp", pair),
        "ts": ("c_tstep", num),
        "fp": ("c_fpoints", lambda v: int(num(v))),
        "fd": ("c_fdesign", num),
        "et": ("c_eta_thr", num),
        "le": ("c_eta_min", limit),
        "pm": ("c_price_max", limit),
        "tm": ("c_trans_max", limit),
        "ie": ("c_iso_min", limit),
        "rr": ("c_ratio_min", limit),
        "ra": ("c_amp_max", limit),
        "x": ("c_extrap", flag),
        "sv": ("c_service", flag),
        "sm": ("c_strain_max", limit),
        "mm": ("c_mass", num),
        "mc": ("c_mounts", lambda v: int(num(v))),
        "ma": ("c_area", num),
        "mh": ("c_thick", num),
        "msf": ("c_sf", num),
        "mk": ("c_kf", num),
        "mst": ("c_size_temp", num),
        "ml": ("c_life", num),
    }
    for key, (state_key, parse) in simple.items():
        if key in params:
            try:
                state[state_key] = parse(params[key])
            except (ValueError, TypeError) as exc:
                notes.append(f"{key}={params[key]}: {exc}")

    def special(key, apply):
        if key in params:
            try:
                apply(params[key])
            except (ValueError, TypeError, CriteriaError) as exc:
                notes.append(f"{key}={params[key]}: {exc}")

    def band(text):
        state["c_flo"], state["c_fhi"] = pair(text)

    def duty(text):
        rows = []
        for item in str(text).split(";"):
            t, f, s = (num(v) for v in item.split(":"))
            rows.append({"temp_C": t, "freq_Hz": f, "share": s})
        state["c_duty"] = rows

    def indices(text):
        names, weights, aggs = [], {}, {}
        for item in str(text).split(","):
            name, w, a = item.split(":")
            if name not in BUILT_IN:
                raise ValueError(f"unknown index '{name}'")
            if a not in AGGREGATES:
                raise ValueError(f"unknown aggregation '{a}'")
            names.append(name)
            weights[name], aggs[name] = num(w), a
        state["c_indices"] = names
        for n in names:
            state[weight_key(n)], state[aggregate_key(n)] = weights[n], aggs[n]

    def custom(text):
        name, direction, w, a = str(text).split(":")
        if direction not in ("hi", "lo") or a not in AGGREGATES:
            raise ValueError("expected name:hi|lo:weight:aggregation")
        state.update(
            c_cx_on=True, c_cx_name=name, c_cx_hi=direction == "hi", c_cx_w=num(w), c_cx_a=a
        )
        state["c_cx_formula"] = str(params.get("cf", ""))

    def pareto(text):
        names = str(text).split(",")
        if len(names) != 2:
            raise ValueError("give two index names")
        state["c_pareto"] = names

    def hardness(text):
        state["c_hard"] = pair(text)
        state["c_hard_on"] = True

    def fn_range(text):
        state["c_fn_lo"], state["c_fn_hi"] = pair(text)

    def mount(text):
        if text == "0":
            state["c_mount_on"] = False
        elif text in layouts:
            state["c_mount_on"], state["c_layout"] = True, layouts[text]
        else:
            raise ValueError("use 0, c or s")

    def shape(text):
        if text not in SHAPES:
            raise ValueError("use " + ", ".join(SHAPES))
        state["c_shape"] = text

    def target(text):
        value = num(text)
        state["c_size_on"] = value > 0
        if value > 0:
            state["c_fn_target"] = value

    def disturbances(text):
        blank = text == SWITCHED_OFF
        state["c_dist"] = "" if blank else _listed(parse_numbers(text, "disturbances"))

    def speeds(text):
        blank = text == SWITCHED_OFF
        state["c_rpm"] = "" if blank else _listed(parse_numbers(text, "speeds [rpm]"))

    def orders(text):
        values = parse_numbers(text, "harmonic orders")
        if any(v not in HARMONIC_ORDERS for v in values):
            raise ValueError(f"harmonic orders are whole numbers from 1 to {MAX_HARMONIC}")
        state["c_harm"] = sorted({int(v) for v in values})

    def working_strain(text):
        state["c_work"] = None if text == SWITCHED_OFF else num(text)

    def compare(text):
        state["compare"] = [g for g in str(text).split(",") if g]

    special("f", band)
    special("dp", duty)
    special("m", mount)
    # The indices of the case: those of the link, else the defaults of its design type
    # with or without the mount check.
    for key in [k for k in state if k.startswith(("c_w_", "c_a_"))]:
        del state[key]
    state.update(index_state(state["c_design"], bool(state["c_mount_on"])))
    special("ix", indices)
    special("cx", custom)
    special("pa", pareto)
    special("hd", hardness)
    special("fr", fn_range)
    special("ms", shape)
    special("mt", target)
    special("md", disturbances)
    special("mr", speeds)
    special("mo", orders)
    special("mw", working_strain)
    problem = disturbance_problem(state)
    if problem is not None:
        notes.append(f"disturbances: {problem}; the default disturbance is used")
        for key in DISTURBANCE_KEYS:
            state[key] = default_state()[key]
    special("g", compare)
    defaults = default_state()
    for problem in out_of_range(state):
        notes.append(problem)
    for key, low in LOWER.items():
        if state.get(key) is not None and state[key] < low:
            state[key] = defaults[key]
    for key, high in UPPER.items():
        if state.get(key) is not None and state[key] > high:
            state[key] = defaults[key]
    lo, hi = state["c_hard"]
    if lo < HARDNESS_SCALE[0] or hi > HARDNESS_SCALE[1]:
        state["c_hard"], state["c_hard_on"] = defaults["c_hard"], False
    for key in [k for k in state if str(k).startswith("c_w_")]:
        if state[key] is not None and state[key] < 0:
            state[key] = 1.0
    return state, notes
