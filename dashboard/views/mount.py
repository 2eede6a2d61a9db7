"""Mount page: natural frequency, transmissibility and deflection of the comparison set."""

import streamlit as st

from dashboard import tables
from dashboard.charts.mount import mount_figures
from dashboard.common import MISSING, SHOWN_LIMIT, context, need_result

ctx = context()
st.header("Mount")
result = need_result(ctx)
if result is not None:
    design = result.criteria.mount
    if design is None or result.mount is None:
        st.info("No mount is checked: switch on 'Check a mount' in the sidebar (Mount).")
    else:
        ids = [g for g in ctx.compare if g in result.mount.ids]
        if not ids:
            ids = [g.id for g in result.shortlist][:3]
            st.caption("The comparison set is empty: showing the first grades of the shortlist.")
        sized = (
            f"each pad sized for fn = {design.target_fn_Hz:g} Hz at {design.sizing_temp_C:g} °C"
            if design.target_fn_Hz is not None
            else f"pad area {design.area_mm2:g} mm² as given"
        )
        st.caption(
            f"{design.mounts} {design.layout} pads ({design.shape}) under {design.mass_kg:g} kg in "
            f"total, {design.thickness_mm:g} mm of rubber, {sized}; disturbance at "
            + ", ".join(f"{f:g}" for f in design.disturbance_Hz)
            + " Hz."
        )
        drawn = ids[:SHOWN_LIMIT]
        if len(drawn) < len(ids):
            st.caption(
                f"The charts show the first {len(drawn)} of the {len(ids)} grades in the "
                "comparison set; the table below lists them all."
            )
        fn_fig, tr_fig, sd_fig = mount_figures(result, drawn, ctx.colours)
        c1, c2 = st.columns(2)
        c1.plotly_chart(fn_fig, theme=None, key="mount_fn")
        c2.plotly_chart(tr_fig, theme=None, key="mount_tr")
        c1, c2 = st.columns(2)
        c1.plotly_chart(sd_fig, theme=None, key="mount_sd")
        with c2:
            st.markdown("**Pass or fail against the limits**")
            grades = {g.id: g for g in result.grades}
            for gid in drawn:
                g = grades[gid]
                if g.passed:
                    st.success(f"{gid}: meets every limit ({g.reason.split(':')[0]})")
                else:
                    st.error(f"{gid}: " + "; ".join(f.text() for f in g.failures))
                # What the limits do not cover (a slender pad, an assumed k factor, a sag
                # read from an extrapolated curve) is said beside the verdict.
                for note in result.mount.notes.get(gid, []):
                    st.warning(f"{gid}: {note}")
        st.subheader("Pads")
        st.dataframe(
            tables.mount_frame(result, ids),
            hide_index=True,
            placeholder=MISSING,
            width="stretch",
            key="mount_table",
            column_config={
                "pad area [mm²]": st.column_config.NumberColumn(format="%.0f"),
                "shape factor": st.column_config.NumberColumn(format="%.2f"),
                "k factor": st.column_config.NumberColumn(format="%.2f"),
                "worst transmissibility": st.column_config.NumberColumn(format="%.3g"),
                "peak amplification at resonance": st.column_config.NumberColumn(format="%.3g"),
                "largest static strain": st.column_config.NumberColumn(format="%.3g"),
                "long-term sag [mm]": st.column_config.NumberColumn(format="%.3g"),
                "sag strain": st.column_config.NumberColumn(format="%.3g"),
                "strain limit": st.column_config.NumberColumn(format="%.3g"),
            },
        )
