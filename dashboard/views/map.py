"""Map page: every grade's path through the window on storage modulus against loss factor."""

import streamlit as st

from dashboard import data, tables
from dashboard.charts.common import INTERVAL_NOTE
from dashboard.common import (
    MISSING,
    SHOWN_LIMIT,
    context,
    need_result,
    screening_caption,
    take_map_selection,
)
from engine.output.mapfigure import READING

ctx = context()
st.header("Map")
result = need_result(ctx)
if result is not None:
    screening_caption(result)
    c1, c2 = st.columns([3, 1])
    c1.caption(
        READING + " Draw a box or a lasso to put grades in the comparison set. Shaded tubes around "
        "the grades of the comparison set"
        + (f" (the first {SHOWN_LIMIT})" if len(ctx.compare) > SHOWN_LIMIT else "")
        + f": at each temperature of the path, E' and η within their {INTERVAL_NOTE}."
    )
    show_excluded = c2.toggle("Show excluded grades", value=True, key="map_show_excluded")
    c2.toggle("Selection adds to the set", key="map_adds")
    fig = data.map_figure(
        ctx.ranking_name(),
        tuple(ctx.compare),
        show_excluded,
        result,
        ctx.colours,
        banded=tuple(ctx.compare[:SHOWN_LIMIT]),
        _curves=ctx.curves,
    )
    st.plotly_chart(
        fig,
        key="map_chart",
        on_select=take_map_selection,
        selection_mode=("box", "lasso"),
        theme=None,
        config={"displaylogo": False},
    )
    st.subheader("Comparison set")
    frame = tables.comparison_frame(result, ctx.compare)
    if frame.empty:
        st.caption("No grade chosen yet.")
    else:
        st.dataframe(
            frame,
            hide_index=True,
            placeholder=MISSING,
            width="stretch",
            key="compare_table",
            column_config={
                "score": st.column_config.NumberColumn(format="%.0f"),
                "worst loss factor in window": st.column_config.NumberColumn(format="%.3g"),
                "worst transmissibility": st.column_config.NumberColumn(format="%.3g"),
                "pad area [mm²]": st.column_config.NumberColumn(format="%.0f"),
            },
        )
