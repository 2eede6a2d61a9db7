"""The report's static SVG charts: axis mapping, log ticks, escaping and valid XML.

Tick positions are checked against numpy.log10 (a general-purpose library); the pixel
of a point against the linear map of t(v) = log10(v) (or v) onto the plot area, the
definition of a log or linear chart axis (common practice); the drawing is parsed with
the standard library's XML parser (the SVG 1.1 document is XML: W3C SVG 1.1, section 1.1,
from memory), and escaping is read back through it.
"""

from __future__ import annotations

import xml.etree.ElementTree as ET

import numpy as np
import pytest

from engine.output.svgchart import (
    LEGEND_WIDTH,
    Axis,
    Chart,
    LegendEntry,
    clean_text,
    escape,
    linear_ticks,
    log_ticks,
    minor_log_ticks,
    text_width,
    wrap_text,
)
from tests.helpers import SVG_ELEMENTS

NS = {"svg": "http://www.w3.org/2000/svg"}
HOSTILE = (
    "<img src=x onerror=alert(1)>",
    '=HYPERLINK("http://x","y")',
    "%{x} and %{customdata[0]} at $5",
    "<script>alert(2)</script> & co",
    "line one\nline two\ttab",
)


def test_log_ticks_fall_on_each_decade():
    ticks = log_ticks(1e5, 1e9)
    # numpy.log10 of each tick is an integer, one per decade from 5 to 9.
    np.testing.assert_allclose(np.log10(ticks), [5, 6, 7, 8, 9], atol=1e-12)
    # A range between decades keeps the decades inside it only.
    inner = log_ticks(3e-2, 4e3)
    np.testing.assert_allclose(np.log10(inner), [-1, 0, 1, 2, 3], atol=1e-12)
    # Past twelve decades every second one is labelled.
    wide = log_ticks(1e-3, 1e12)
    assert np.all(np.diff(np.log10(wide)) == pytest.approx(2.0))
    minor = minor_log_ticks(1e5, 1e7)
    assert len(minor) == 16 and minor[0] == pytest.approx(2e5) and minor[-1] == pytest.approx(9e6)


def test_narrow_log_spans_get_readable_ticks():
    # Under 2.5 decades: 1, 2 and 5 times each decade (common practice).
    np.testing.assert_allclose(log_ticks(0.02, 1.3), [0.02, 0.05, 0.1, 0.2, 0.5, 1.0])
    # Under half a decade: round linear steps, still at least three ticks.
    narrow = log_ticks(1.5, 2.6)
    assert len(narrow) >= 3 and np.all((narrow >= 1.5) & (narrow <= 2.6))
    with pytest.raises(ValueError, match="0 < lo < hi"):
        log_ticks(0.0, 10.0)


def test_linear_ticks_are_round_steps_inside_the_range():
    ticks = linear_ticks(-20.0, 60.0)
    np.testing.assert_allclose(ticks, [-20, 0, 20, 40, 60])
    small = linear_ticks(0.0, 0.055)
    assert small[0] == 0.0 and small[-1] <= 0.055 and len(small) >= 4
    step = np.diff(small)
    np.testing.assert_allclose(step, step[0])
    with pytest.raises(ValueError, match="lo < hi"):
        linear_ticks(1.0, 1.0)


def test_a_points_pixel_follows_the_axis_mapping():
    chart = Chart(width=1000.0, title="t")
    x = Axis("loss factor [-]", 1e-2, 1.0, log=True)
    y = Axis("temperature [°C]", -20.0, 60.0)
    panel = chart.panel(x, y, 400.0)
    left, top, w, h = panel.left, panel.top, panel.width, panel.height
    # px = left + w (log10 v - log10 lo) / (log10 hi - log10 lo), numpy as the reference.
    for v in (1e-2, 0.05, 0.3, 1.0):
        expected = left + w * (np.log10(v) - np.log10(1e-2)) / (np.log10(1.0) - np.log10(1e-2))
        assert panel.px(v) == pytest.approx(expected, rel=1e-12)
    # y counts down from the top of the plot area; linear axis.
    for t in (-20.0, 0.0, 23.0, 60.0):
        assert panel.py(t) == pytest.approx(top + h * (1 - (t + 20.0) / 80.0), rel=1e-12)
    assert panel.px(0.1) == pytest.approx(left + w / 2)  # a decade is half of two
    # No place on a log axis for zero or a negative value.
    assert np.isnan(panel.px(0.0)) and np.isnan(panel.px(-1.0))
    with pytest.raises(ValueError, match="log axis needs lo > 0"):
        Axis("E' [MPa]", 0.0, 10.0, log=True)
    with pytest.raises(ValueError, match="needs lo < hi"):
        Axis("T [°C]", 5.0, 5.0)


def _chart_with(labels) -> str:
    chart = Chart(title=labels[0], legend_title=labels[1], id_prefix="t")
    panel = chart.panel(
        Axis("storage modulus E' [MPa]", 1e5, 1e9, log=True),
        Axis("loss factor tan δ [-]", 0.0, 1.0),
        300.0,
    )
    x = np.logspace(5, 9, 20)
    y = np.linspace(0.1, 0.9, 20)
    y[7] = np.nan  # a gap
    panel.draw(
        panel.line(x, y, "#2E6F73", 2.0, "dot", 0.5),
        panel.markers(x, y, 7.0, "#2E6F73", hollow=np.arange(20) % 2 == 0),
        title=labels[0],
    )
    for label in labels:
        panel.draw(panel.text(x[3], y[3], label, "#23292E"), title=label)
        chart.add_legend(LegendEntry(label, "#2E6F73", title=label))
    return chart.svg()


def test_the_drawing_is_valid_xml_with_ticks_and_titles():
    svg = _chart_with(["title", "grade", "BW-NR40"])
    root = ET.fromstring(svg)  # raises on anything that is not well-formed XML
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    texts = ["".join(t.itertext()) for t in root.iter("{http://www.w3.org/2000/svg}text")]
    # Decade labels 10^5..10^9 on the x axis (written as 10 with a raised exponent).
    assert [s for s in texts if s in {"105", "106", "107", "108", "109"}] == [
        "105",
        "106",
        "107",
        "108",
        "109",
    ]
    assert "storage modulus E' [MPa]" in texts and "loss factor tan δ [-]" in texts
    # The gap splits the line in two pieces.
    lines = root.findall(".//svg:polyline", NS)
    assert len(lines) == 2
    assert len(root.findall(".//svg:circle", NS)) == 19  # the NaN point draws no mark


def test_labels_from_data_are_escaped_and_read_back_as_written():
    svg = _chart_with(list(HOSTILE))
    for raw in ("<img", "<script", '"http://x"'):
        assert raw not in svg
    root = ET.fromstring(svg)
    tags = {e.tag.split("}")[1] for e in root.iter()}
    assert tags <= SVG_ELEMENTS
    assert not [k for e in root.iter() for k in e.attrib if k.lower().startswith("on")]
    texts = " ".join("".join(t.itertext()) for t in root.iter())
    for label in HOSTILE:
        assert clean_text(label) in texts  # shown as written, on one line
    assert clean_text("a\r\n\tb  c") == "a b c"
    assert escape("<&>\"'") == "&lt;&amp;&gt;&quot;&#x27;"
    # Characters XML cannot hold become U+FFFD instead of breaking the drawing.
    ET.fromstring(_chart_with(["a\x00b", "c\x1bd", "e\ufffef"]))


def test_the_legend_holds_every_label_whole():
    long = "Brackwater BD-30 damping sheet, second supplier batch (EXTRA-LONG-GRADE-NAME-42)"
    labels = [f"{k}. {long}" for k in range(12)]
    svg = _chart_with(["t", "grade", *labels])
    root = ET.fromstring(svg)
    height = float(root.get("height"))
    width = float(root.get("width"))
    # Each long label is wrapped onto lines that fit the legend column...
    for line in wrap_text(long, LEGEND_WIDTH - 40, 12.0):
        assert text_width(line, 12.0) <= LEGEND_WIDTH - 40
    assert "".join(wrap_text(long, LEGEND_WIDTH - 40, 12.0)).replace(" ", "") == long.replace(
        " ", ""
    )
    # ... and the drawing grows to hold every row: the last legend line is inside it.
    legend = root.findall(".//svg:g[@font-size='12']/svg:g/svg:text", NS)
    assert len(legend) == len(labels) + 2
    spans = [s for t in legend for s in t.findall("svg:tspan", NS)]
    bottom = float(legend[-1].get("y")) + sum(float(s.get("dy")) for s in legend[-1])
    assert len(spans) > len(legend) and bottom < height
    assert all(float(s.get("x")) < width for s in spans)
