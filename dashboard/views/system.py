"""Machine page: a machine on N mounts in six degrees of freedom, for the comparison set.

The case is the engine's mount-system case file (engine.curves.system.MountSystem): an
example skid until the user loads one of their own.
"""

import json

import numpy as np
import pandas as pd
import streamlit as st

from dashboard.charts.system import modes_figure, shape_figure
from dashboard.common import MISSING, SHOWN_LIMIT, context, plain
from engine.base.errors import CriteriaError
from engine.curves.system import EXAMPLE_CASE, MountSystem, SystemResult, solve_system
from engine.physics import rigidbody as rb

CASE_KEY = "system_case"


@st.cache_data(max_entries=64, show_spinner=False)
def _solved(location: str, version: int, gid: str, case_text: str, temps: tuple) -> SystemResult:
    ctx = context()
    system = MountSystem.from_dict(json.loads(case_text))
    m = ctx.library.material(gid)
    row = {"poisson_ratio": m.poisson_ratio, "hardness": m.hardness, "bulk_modulus": m.bulk_modulus}
    return solve_system(ctx.curves[gid], row, system, np.asarray(temps))


ctx = context()
st.header("Machine on its mounts")
if CASE_KEY not in st.session_state:
    st.session_state[CASE_KEY] = json.dumps(EXAMPLE_CASE)
with st.expander("The machine and its mounts (a case file)", expanded=False):
    st.caption(
        "Keys: mass_kg, inertia_kgm2 (3 x 3 about the centre of gravity), cg_m, mounts "
        "(position_m, axis, area_mm2, thickness_mm, optional shape_factor, k_factor), "
        "optional disturbances (force_N, moment_Nm, point_m, frequency_Hz or rpm, harmonics). "
        "Axes: x, y in the mount plane, z up; roll about x, pitch about y, yaw about z."
    )
    upload = st.file_uploader("Load a case file (JSON)", type=["json"], key="system_upload")
    if upload is not None:
        try:
            text = upload.getvalue().decode("utf-8")
            MountSystem.from_dict(json.loads(text))
        except (UnicodeDecodeError, json.JSONDecodeError, CriteriaError) as exc:
            st.error(f"{plain(upload.name)}: {plain(exc)}; the case in use is kept")
        else:
            st.session_state[CASE_KEY] = text
    if st.button("Back to the example skid", key="system_example"):
        st.session_state[CASE_KEY] = json.dumps(EXAMPLE_CASE)
    st.download_button(
        "Save this case", st.session_state[CASE_KEY], "mount_system.json", "application/json"
    )
system = MountSystem.from_dict(json.loads(st.session_state[CASE_KEY]))
result = ctx.result
ids = [g for g in ctx.compare if g in ctx.curves] or (
    [g.id for g in result.shortlist][:3] if result is not None else []
)
if not ids:
    st.info("Choose grades in the comparison set to see their mount system.")
else:
    drawn = ids[:SHOWN_LIMIT]
    temps = (
        tuple(float(t) for t in result.criteria.window.temperatures)
        if result is not None
        else tuple(np.arange(-20.0, 61.0, 5.0))
    )
    version = ctx.library.version()
    case_text = st.session_state[CASE_KEY]
    solved = {gid: _solved(ctx.library.location, version, gid, case_text, temps) for gid in drawn}
    labels = ", ".join(f"{f:.3g} Hz" for d in system.disturbances for f in d.frequencies)
    st.caption(
        f"{system.mass_kg:g} kg on {len(system.mounts)} mounts; disturbances at {labels}; "
        f"every mode must lie {system.min_frequency_ratio:.3g} times below each one."
    )
    for gid, res in solved.items():
        fails = res.failures()
        verdict = "passes" if not fails else "fails"
        line = (
            f"**{plain(gid)}** · system verdict: {verdict} · highest mode "
            f"{res.highest_mode:.3g} Hz · worst transmissibility {res.worst_transmissibility:.3g}"
        )
        st.markdown(line + ("" if not fails else " — " + "; ".join(plain(f) for f in fails)))
    st.plotly_chart(modes_figure(solved, ctx.colours, system), theme=None, key="system_modes")
    c1, c2 = st.columns([1, 1])
    gid = c1.selectbox("Grade", drawn, key="system_grade")
    res = solved[gid]
    t_pick = c2.select_slider(
        "Temperature [°C]", options=[float(t) for t in res.temperatures], key="system_temp"
    )
    i = int(np.flatnonzero(res.temperatures == t_pick)[0])
    table = pd.DataFrame(
        {
            "mode": [res.names[i][j] for j in range(6)],
            "frequency [Hz]": res.frequencies[i],
            **{f"{n} [%]": 100.0 * res.energy[i][:, d] for d, n in enumerate(rb.DOF_NAMES)},
        }
    )
    st.markdown("**Decoupling**: kinetic energy of each mode by axis")
    st.dataframe(
        table,
        hide_index=True,
        placeholder=MISSING,
        width="stretch",
        key="system_table",
        column_config={
            c: st.column_config.NumberColumn(format="%.0f")
            for c in table.columns
            if c.endswith("[%]")
        }
        | {"frequency [Hz]": st.column_config.NumberColumn(format="%.3g")},
    )
    j = st.radio(
        "Mode shape",
        list(range(6)),
        format_func=lambda k: f"{res.names[i][k]} ({res.frequencies[i][k]:.3g} Hz)",
        horizontal=True,
        key="system_mode",
    )
    st.plotly_chart(shape_figure(system, res, i, int(j)), theme=None, key="system_shape")
    # Where the mounts' elastic centre lies against the centre of gravity: a suggestion.
    assert res.elastic_centres is not None
    centre = res.elastic_centres[i]
    gap = np.asarray(system.cg_m) - centre
    st.caption(
        f"**Suggestion** (for {plain(gid)} at {t_pick:g} °C): the mounts' elastic centre lies "
        f"at ({centre[0]:.3f}, {centre[1]:.3f}, {centre[2]:.3f}) m, the centre of gravity "
        f"{np.linalg.norm(gap) * 1e3:.0f} mm from it. Moving the mounts so that the two meet "
        "(raise their plane, incline them towards the centre of gravity, or shift them by "
        f"({gap[0] * 1e3:.0f}, {gap[1] * 1e3:.0f}, {gap[2] * 1e3:.0f}) mm) decouples the "
        "lateral and rocking modes. A suggestion only: check the new layout here."
    )
    notes = sorted({n for r in solved.values() for n in r.notes})
    if notes:
        with st.expander(f"Notes ({len(notes)})"):
            for n in notes:
                st.text(n)
