"""Shortlist page: ranked grades with reasons, excluded grades with theirs, downloads.

The leading grades carry their rank intervals from the draws of the fits
(:func:`engine.selection.spread.rank_spread`, kept per ranking); the table, the reasons and the
downloads all show them.
"""

import streamlit as st

from dashboard import data, tables
from dashboard.common import MISSING, context, need_result, plain, screening_caption
from engine.base.errors import QuietgradeError
from engine.output.export import intervals_note
from engine.selection.spread import rank_spread

ctx = context()
st.header("Shortlist")
result = need_result(ctx)


@st.cache_resource(max_entries=16, show_spinner=False)
def _with_intervals(result_key: str, _result, _curves, _library):
    """The ranking with the intervals of engine.selection.spread, kept per ranking (read-only)."""
    return rank_spread(_result, _curves, data.catalog(_library.location, _library.version()))


def _exports(result, library, curves):
    """Download buttons; the files are made only when a button is pressed."""
    try:
        from engine.output import export, report, workbook
    except ImportError as exc:
        st.warning(f"exports are not available in this installation ({plain(exc)})")
        return
    c1, c2, c3, _ = st.columns([1, 1, 1, 2])
    c1.download_button(
        "Shortlist CSV",
        data=lambda: export.shortlist_csv(result, library),
        file_name="quietgrade-shortlist.csv",
        mime="text/csv",
        key="dl_csv",
    )
    c2.download_button(
        "Shortlist XLSX",
        data=lambda: workbook.shortlist_xlsx(result, library),
        file_name="quietgrade-shortlist.xlsx",
        mime="application/vnd.openxmlformats-officedocument.spreadsheetml.sheet",
        key="dl_xlsx",
    )
    c3.download_button(
        "Report (HTML)",
        data=lambda: report.report_html(result, library, curves),
        file_name="quietgrade-report.html",
        mime="text/html",
        key="dl_html",
    )


def _columns(frame):
    """How each column of the shortlist table reads: the key figures first and narrow
    (rank and grade pinned), figures to three significant figures."""
    config = {
        name: st.column_config.NumberColumn(format="%.3g")
        for name in frame.columns
        if frame[name].dtype.kind == "f"
    }
    config.update(
        {
            "rank": st.column_config.NumberColumn(width=45, pinned=True),
            "grade": st.column_config.TextColumn(width=95, pinned=True),
            "score": st.column_config.ProgressColumn(
                "score", min_value=0.0, max_value=100.0, format="%.0f", width=90
            ),
            "fn [Hz]": st.column_config.TextColumn(width=95),
            "worst transmissibility": st.column_config.NumberColumn(
                "worst T [-]",
                format="%.3g",
                width=80,
                help="worst force transmissibility over the window and the disturbances",
            ),
            "long-term sag [mm]": st.column_config.NumberColumn(
                "sag [mm]",
                format="%.3g",
                width=75,
                help="long-term sag of the pad at the end of its service life",
            ),
            "reason": st.column_config.TextColumn(width="large"),
            "rank interval": st.column_config.TextColumn(
                help="best–worst rank over the draws of the master-curve fits"
            ),
        }
    )
    return config


if result is not None:
    try:
        if result.spread is None:  # not yet made by whoever ranked
            result = _with_intervals(ctx.ranking_name(), result, ctx.curves, ctx.library)
    except QuietgradeError as exc:
        st.warning(f"rank intervals are not available: {plain(exc)}")
    n = len(result.grades)
    screening_caption(result)
    st.caption(
        f"{len(result.shortlist)} of {n} grade(s) meet every limit. Score: weighted log10 "
        "index values, 100 for the best passing grade and 0 for the last. "
        + plain(intervals_note(result))
    )
    _exports(result, ctx.library, ctx.curves)
    frame = tables.shortlist_frame(result)
    if frame.empty:
        st.warning("No grade meets every limit: see the reasons below.")
    else:
        st.dataframe(
            frame,
            hide_index=True,
            placeholder=MISSING,
            width="stretch",
            key="shortlist_table",
            column_config=_columns(frame),
        )
        with st.expander("Reasons, in full", expanded=True):
            st.markdown(
                "\n".join(f"- **{plain(g.id)}** {plain(g.reason)}" for g in result.shortlist)
            )
    st.subheader("Excluded")
    if not result.excluded:
        st.caption("None.")
    else:
        st.markdown(
            "\n".join(
                f"- **{plain(g.id)}** ({plain(g.name)}"
                + (f", {plain(g.family)}" if g.family else "")
                + "): "
                + "; ".join(plain(f.text()) for f in g.failures)
                for g in result.excluded
            )
        )
    if result.fit_errors:
        st.subheader("Grades without a master curve")
        for gid, reason in sorted(result.fit_errors.items()):
            st.error(f"{plain(gid)}: {plain(reason)}")
    with st.expander("Notes on individual grades"):
        for g in result.grades:
            for note in g.notes:
                st.caption(f"{plain(g.id)}: {plain(note)}")
