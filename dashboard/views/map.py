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
from engine.output.palette import GUIDE_STYLES

# The menu of how lines of constant E'' show, in the order of palette.GUIDE_STYLES.
GUIDE_CHOICES = ("E'' ticks on the frame", "E'' as a colour field", "no E'' guides")
GRID_SENTENCE = "Grey dotted diagonals are lines of constant loss modulus E'' = η E'. "
GUIDE_SENTENCE = (
    "Loss modulus E'' = η E' is constant along diagonals: its decades are marked on the "
    "top and right edges, or shown as a faint field (the menu beside). "
)

ctx = context()
st.header("Map")
result = need_result(ctx)
if result is not None:
    screening_caption(result)
    c1, c2, c3 = st.columns([1, 1, 1.3], vertical_alignment="center")
    show_excluded = c1.toggle(
        "Excluded",
        value=True,
        key="map_show_excluded",
        help="Draw the grades that fail a limit too (dotted, faded; hover for the reasons).",
    )
    c2.toggle(
        "Adds to set",
        key="map_adds",
        help="A box or lasso on the map adds its grades to the comparison set instead of "
        "replacing it.",
    )
    guides = c3.selectbox(
        "Loss modulus E''",
        GUIDE_CHOICES,
        key="map_guides",
        label_visibility="collapsed",
        help="Lines of constant loss modulus E'' = η E': not drawn, as ticks along the "
        "frame, or as a faint colour field behind the paths.",
    )
    fig = data.map_figure(
        ctx.ranking_name(),
        tuple(ctx.compare),
        show_excluded,
        result,
        ctx.colours,
        banded=tuple(ctx.compare[:SHOWN_LIMIT]),
        _curves=ctx.curves,
        guides=GUIDE_STYLES[GUIDE_CHOICES.index(guides)],
    )
    st.plotly_chart(
        fig,
        key="map_chart",
        on_select=take_map_selection,
        selection_mode=("box", "lasso"),
        theme=None,
        config={"displaylogo": False},
    )
    # How to read it, folded under the chart: the chart comes first.
    with st.expander("How to read the map"):
        st.caption(
            READING.replace(GRID_SENTENCE, GUIDE_SENTENCE)
            + " Draw a box or a lasso to put grades in the comparison set. Shaded tubes "
            "around the grades of the comparison set"
            + (f" (the first {SHOWN_LIMIT})" if len(ctx.compare) > SHOWN_LIMIT else "")
            + f": at each temperature of the path, E' and η within their {INTERVAL_NOTE}."
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
