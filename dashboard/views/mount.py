"""Mount page: the verdict of each grade of the comparison set with its key figures, then
natural frequency, transmissibility, amplification at resonance and static strain across
the window, and the pads table."""

import numpy as np
import streamlit as st

from dashboard import tables
from dashboard.charts.mount import mount_figures
from dashboard.common import MISSING, SHOWN_LIMIT, context, need_result, plain
from engine.curves.mountcheck import MountDesign, MountResult
from engine.physics.mount import BUCKLING_LOAD_SHARE, STANDARD_GRAVITY
from engine.selection.ranking import GradeResult, RankResult
from engine.selection.results import short_number

VERDICT_COLOURS = {"passes": "green", "fails": "red"}


def _range(values) -> str | None:
    """Smallest to largest of the finite values, or None when there are none."""
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if v.size == 0:
        return None
    lo, hi = short_number(float(v.min())), short_number(float(v.max()))
    return lo if lo == hi else f"{lo} to {hi}"


def _largest(values) -> int | None:
    """Index of the largest finite value, or None."""
    v = np.asarray(values, dtype=float)
    return int(np.nanargmax(v)) if np.isfinite(v).any() else None


def design_caption(design: MountDesign) -> str:
    """The mount of the case in one sentence, with every disturbance checked."""
    sized = (
        f"each pad sized for fn = {design.target_fn_Hz:g} Hz at {design.sizing_temp_C:g} °C"
        if design.target_fn_Hz is not None
        else f"pad area {design.area_mm2:g} mm² as given"
    )
    strain = (
        "stiffness and damping at small strain, as measured"
        if design.working_strain is None
        else f"working strain amplitude {design.working_strain:g}"
    )
    return (
        f"{design.mounts} {design.layout} pads ({design.shape}) under {design.mass_kg:g} kg "
        f"in total, {design.thickness_mm:g} mm of rubber, {sized}; {strain}. Disturbances "
        f"checked: {', '.join(design.disturbance_labels())}."
    )


def key_figures(mres: MountResult, design: MountDesign, k: int) -> str:
    """Grade k's figures an engineer signs a mount on: a line of its dynamics (fn,
    isolation, run-up through resonance, dynamic-to-static ratio) and a line of its
    static load (strain, sag, buckling)."""
    temps = mres.temperatures
    labels = design.disturbance_labels()
    dynamic, static = [], []
    fn = _range(mres.natural_frequency[k])
    dynamic.append("fn not found" if fn is None else f"fn {fn} Hz")
    trans = np.where(mres.converged[k][:, None], mres.transmissibility[k], np.nan)
    at = _largest(trans.ravel())
    if at is not None:
        ti, fj = (int(v) for v in np.unravel_index(at, trans.shape))
        worst = float(trans[ti, fj])
        effect = f"isolates {1.0 - worst:.0%}" if worst < 1.0 else "amplifies"
        dynamic.append(
            f"worst T {short_number(worst)} ({effect}) at {temps[ti]:g} °C, {labels[fj]}"
        )
    i = _largest(mres.amplification[k])
    if i is not None:
        dynamic.append(
            f"run-up through resonance x{short_number(float(mres.amplification[k, i]))} "
            f"at {temps[i]:g} °C"
        )
    if mres.dynamic_to_static_ratio is not None:
        ratio = _range(mres.dynamic_to_static_ratio[k])
        if ratio is not None:
            dynamic.append(f"dynamic-to-static stiffness {ratio}")
    i = _largest(mres.static_strain[k])
    if i is not None:
        static.append(
            f"static strain up to {short_number(float(mres.static_strain[k, i]))} at "
            f"{temps[i]:g} °C (limit {mres.strain_limit:g})"
        )
    if np.isfinite(mres.sag[k]):
        static.append(
            f"sag {short_number(float(mres.sag[k] * 1e3))} mm (strain "
            f"{short_number(float(mres.sag_strain[k]))}) after {design.service_life_h:g} h "
            f"at {temps.max():g} °C"
        )
    if mres.critical_load is not None and np.isfinite(mres.critical_load[k]):
        load = design.mass_per_pad * STANDARD_GRAVITY
        critical = float(mres.critical_load[k])
        static.append(
            f"load {short_number(load)} N per pad, buckling load {short_number(critical)} N "
            f"({BUCKLING_LOAD_SHARE:.0%} of it allowed)"
        )
    return f"**Dynamic** {' · '.join(dynamic)}  \n**Static** {' · '.join(static)}"


def verdict_text(gid: str, g: GradeResult, result: RankResult, k: int) -> str:
    """The verdict line of grade k (with its place in the ranking) and, when it fails,
    its plain reasons, each once."""
    mres = result.mount
    assert mres is not None
    word = mres.verdict[k]
    place = f"rank {g.rank} of {len(result.shortlist)}" if g.passed else "excluded"
    line = f"**{plain(gid)}** · mount verdict: :{VERDICT_COLOURS[word]}[**{word}**] · {place}"
    reasons = list(dict.fromkeys(mres.reasons(k)))
    return "\n".join([line, *(f"- {plain(r)}" for r in reasons)])


def beyond_verdict(g: GradeResult, result: RankResult, k: int) -> list[str]:
    """The ranking's failures of grade k that the mount verdict does not already state
    (the case's own limits: f/fn, amplification, extrapolation, service range...)."""
    mres = result.mount
    assert mres is not None
    failing = mres.failing
    said = set(mres.reasons(k))
    chosen = result.criteria.constraints.max_static_strain
    limit = mres.strain_limit if chosen is None else chosen
    strain_said = bool(failing["strain"][k] or failing["cannot_carry"][k])
    out = []
    for f in g.failures:
        text = f.text()
        if text in said:
            continue
        if f.constraint == "amplifies the disturbance" and failing["isolation"][k]:
            continue
        if f.constraint == "natural frequency" and f.value == "not found" and failing["no_fn"][k]:
            continue
        if strain_said and f.constraint == mres.strain_text(k, limit):
            continue
        if text not in out:
            out.append(text)
    return out


def others_line(g: GradeResult, result: RankResult, k: int) -> str | None:
    """Why the ranking excludes grade k beyond its mount verdict, or None."""
    others = [] if g.passed else beyond_verdict(g, result, k)
    if not others:
        return None
    assert result.mount is not None
    lead = "Also outside" if not result.mount.passes[k] else "Excluded by"
    return f"{lead} the case's other limits: " + "; ".join(plain(o) for o in others)


def grade_verdict(gid: str, g: GradeResult, result: RankResult, design: MountDesign) -> None:
    mres = result.mount
    assert mres is not None
    k = mres.ids.index(gid)
    with st.container(border=True):
        st.markdown(verdict_text(gid, g, result, k))
        st.caption(key_figures(mres, design, k))
        others = others_line(g, result, k)
        if others:
            st.caption(others)
        # What the verdict does not cover (a slender pad, an assumed k factor, a sag read
        # from an extrapolated curve), folded together.
        notes = mres.notes.get(gid, [])
        if notes:
            with st.expander(f"Notes on {plain(gid)} ({len(notes)})"):
                st.markdown("\n".join(f"- {plain(n)}" for n in notes))


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
        st.caption(design_caption(design))
        grades = {g.id: g for g in result.grades}
        drawn = ids[:SHOWN_LIMIT]
        fn_fig, tr_fig, am_fig, sd_fig = mount_figures(result, drawn, ctx.colours)
        # The answer first: natural frequency and transmissibility on the first screen,
        # then each grade's verdict, then amplification and static strain. Two charts a
        # row, each drawn with st.plotly_chart inside its column.
        first = [(fn_fig, "mount_fn"), (tr_fig, "mount_tr")]
        second = [(am_fig, "mount_am"), (sd_fig, "mount_sd")]
        for column, (fig, key) in zip(st.columns(2), first, strict=True):
            with column:
                st.plotly_chart(fig, theme=None, key=key)
        if len(drawn) < len(ids):
            st.caption(
                f"The charts show the first {len(drawn)} of the {len(ids)} grades in the "
                "comparison set; the verdicts and the table below list them all."
            )
        st.subheader("Verdict")
        for gid in ids:
            grade_verdict(gid, grades[gid], result, design)
        for column, (fig, key) in zip(st.columns(2), second, strict=True):
            with column:
                st.plotly_chart(fig, theme=None, key=key)
        st.subheader("Pads")
        st.dataframe(
            tables.mount_frame(result, ids),
            hide_index=True,
            placeholder=MISSING,
            width="stretch",
            key="mount_table",
            column_config={
                "grade": st.column_config.TextColumn(width=110, pinned=True),
                "pad area [mm²]": st.column_config.NumberColumn(format="%.0f"),
                "shape factor": st.column_config.NumberColumn(format="%.2f"),
                "k factor": st.column_config.NumberColumn(format="%.2f"),
                "worst transmissibility": st.column_config.NumberColumn(format="%.3g"),
                "peak amplification at resonance": st.column_config.NumberColumn(format="%.3g"),
                "largest static strain": st.column_config.NumberColumn(format="%.3g"),
                "long-term sag [mm]": st.column_config.NumberColumn(format="%.3g"),
                "sag strain": st.column_config.NumberColumn(format="%.3g"),
                "strain limit": st.column_config.NumberColumn(format="%.3g"),
                "load per pad [N]": st.column_config.NumberColumn(format="%.0f"),
                "buckling load per pad [N]": st.column_config.NumberColumn(format="%.0f"),
            },
        )
