"""Map page: every grade's path through the window on storage modulus against loss factor.

A box or lasso on the map picks every grade with a path point inside it, drawn or only
counted in the shading of a very large library (the ranking's own values, not the points
the browser drew); the search under the map finds grades by id or name among all.
"""

import streamlit as st

from dashboard import data, picking, tables
from dashboard.charts.common import INTERVAL_NOTE
from dashboard.charts.map import FIND_LIMIT, find_grades
from dashboard.common import (
    MISSING,
    SHOWN_LIMIT,
    context,
    need_result,
    plain,
    screening_caption,
)
from engine.output.mapfigure import GUIDE_READING, READING
from engine.output.palette import GUIDE_STYLES

# The menu of how lines of constant E'' show, in the order of palette.GUIDE_STYLES.
GUIDE_CHOICES = ("E'' ticks on the frame", "E'' as a colour field", "no E'' guides")
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
    fig, plan = data.map_figure(
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
        on_select=picking.take_selection,
        selection_mode=("box", "lasso"),
        theme=None,
        config={"displaylogo": False},
    )
    if plan.thinned:
        st.caption(plan.note())
    # How to read it, folded under the chart: the chart comes first.
    with st.expander("How to read the map"):
        st.caption(
            READING.replace(GUIDE_READING, GUIDE_SENTENCE)
            + " Draw a box or a lasso to put grades in the comparison set. Shaded tubes "
            "around the grades of the comparison set"
            + (f" (the first {SHOWN_LIMIT})" if len(ctx.compare) > SHOWN_LIMIT else "")
            + f": at each temperature of the path, E' and η within their {INTERVAL_NOTE}."
        )
    f1, f2 = st.columns([3, 1], vertical_alignment="bottom")
    text = f1.text_input(
        "Find grades by id or name",
        key="map_find",
        placeholder="part of an id or a name, e.g. a family or a supplier's word",
        help="Searches every grade of the ranking, drawn on the map or not.",
    )
    found, total = find_grades(result, text)
    f2.button(
        f"Add {len(found)} to the set" if found else "Add to the set",
        key="map_find_add",
        on_click=picking.take_found,
        disabled=not found,
        width="stretch",
    )
    if text.strip():
        shown = ", ".join(found[:12]) + (" …" if len(found) > 12 else "")
        st.caption(
            f"{total:,} grades match"
            + (
                f" (the first {FIND_LIMIT} in ranking order join the set)"
                if total > FIND_LIMIT
                else ""
            )
            + (f": {plain(shown)}" if found else ".")
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
