"""Plotly figures of the dashboard, one module per page (as ``dashboard/views/``):
:mod:`~dashboard.charts.map`, :mod:`~dashboard.charts.curves` and
:mod:`~dashboard.charts.mount`, with what they share in :mod:`~dashboard.charts.common`.

A page imports from its own module; the public names are gathered here as well.
"""

from dashboard.charts.common import (
    BAND_SUFFIX,
    BEYOND_STRENGTH,
    INTERVAL_NOTE,
    TEMPLATE,
    band_trace,
    band_traces,
    empty_figure,
    mode_symbol,
    tidy_log_axes,
    with_interval,
)
from dashboard.charts.curves import (
    HOUR_S,
    collapse_figure,
    master_curve_figure,
    nomogram_figure,
    relaxation_figure,
    residual_figure,
    shift_figure,
    temperature_figure,
    transitions_figure,
)
from dashboard.charts.map import (
    CROWD_CHOSEN,
    CROWD_LIMIT,
    CROWD_TOP,
    crowd_traces,
    map_figure,
    path_band_trace,
)
from dashboard.charts.mount import mount_figures

__all__ = [
    "BAND_SUFFIX",
    "BEYOND_STRENGTH",
    "CROWD_CHOSEN",
    "CROWD_LIMIT",
    "CROWD_TOP",
    "HOUR_S",
    "INTERVAL_NOTE",
    "TEMPLATE",
    "band_trace",
    "band_traces",
    "collapse_figure",
    "crowd_traces",
    "empty_figure",
    "map_figure",
    "master_curve_figure",
    "mode_symbol",
    "mount_figures",
    "nomogram_figure",
    "path_band_trace",
    "relaxation_figure",
    "residual_figure",
    "shift_figure",
    "temperature_figure",
    "tidy_log_axes",
    "transitions_figure",
    "with_interval",
]
