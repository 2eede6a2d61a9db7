"""Static SVG charts: log and linear axes, lines, markers, text and a legend.

The HTML report draws its charts with this module, so that the page needs no script:
the SVG is written into the page as it is, prints as it shows and opens anywhere.
Pure Python and numpy; the colours are the caller's (:mod:`engine.output.palette`).

A chart is a column of panels that share the left edge and the width of their plot
area (a second panel below the first shares its x axis), with the legend to the right
of the panels. Each axis maps a value ``v`` in ``[lo, hi]`` to a pixel by

    px = left + width * (t(v) - t(lo)) / (t(hi) - t(lo)),

``t = log10`` on a log axis and the identity on a linear one (y counts from the bottom
of the plot area). Log axes are ticked at each decade (every second decade above twelve)
and, on spans under 2.5 decades, at 1, 2 and 5 times each decade. Every text drawn is
escaped for XML and HTML (:func:`escape`): a name from data is shown as it is written
and never read as markup. The legend wraps long labels and the drawing grows to hold
every legend row, so no entry is cut off.
"""

from __future__ import annotations

import html
import math
import re
import unicodedata
from dataclasses import dataclass

import numpy as np

FONT_SIZE = 12.0  # axis titles and legend labels [px]
TICK_SIZE = 11.0  # tick labels [px]
TITLE_SIZE = 15.0
LEFT = 84.0  # room for the y tick labels and the y axis title [px]
TOP = 44.0  # room for the title [px]
BOTTOM = 52.0  # room for the x tick labels and the x axis title [px]
PANEL_GAP = 18.0  # between two stacked panels [px]
LEGEND_WIDTH = 250.0  # the legend column to the right of the plot area [px]
LEGEND_GAP = 22.0
LEGEND_SWATCH = 30.0  # the line sample before a legend label [px]
LINE_HEIGHT = 1.3  # legend line height [font sizes]

# Characters not allowed in XML 1.0 (section 2.2, Char), even as character references.
_NOT_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff\ufffe\uffff]")


def clean_text(value) -> str:
    """``value`` as one line of text that XML can hold: runs of white space (line breaks
    included) become one space; characters XML 1.0 does not allow become U+FFFD."""
    text = " ".join(("" if value is None else str(value)).split())
    return _NOT_XML.sub("\ufffd", text)


def escape(value) -> str:
    """Text from data for an SVG text node or attribute: :func:`clean_text`, with
    ``& < > " '`` written as references (read alike by an XML and an HTML parser)."""
    return html.escape(clean_text(value), quote=True)


def _char_width(ch: str) -> float:
    """A generous width of one character [font sizes] in a proportional sans-serif
    font, so that an estimate of a text's width is rather too wide than too narrow."""
    if unicodedata.east_asian_width(ch) in ("W", "F"):
        return 1.05
    if unicodedata.combining(ch):
        return 0.0
    if ch in "il.,:;'|!()[]{} ":
        return 0.36
    if ch in "MWmw@%&" or ch.isupper():
        return 0.86
    return 0.62


def text_width(text: str, size: float) -> float:
    """Estimated width of ``text`` at font size ``size`` [px], on the generous side."""
    return size * sum(_char_width(ch) for ch in text)


def wrap_text(text: str, width: float, size: float) -> list[str]:
    """``text`` broken into lines no wider than ``width`` [px] (by :func:`text_width`),
    at spaces where it can, inside a word where a word alone is too wide."""
    lines: list[str] = []
    line = ""
    for word in clean_text(text).split(" "):
        trial = f"{line} {word}" if line else word
        if text_width(trial, size) <= width:
            line = trial
            continue
        if line:
            lines.append(line)
        line = ""
        for ch in word:
            if line and text_width(line + ch, size) > width:
                lines.append(line)
                line = ""
            line += ch
    if line or not lines:
        lines.append(line)
    return lines


# -- ticks -----------------------------------------------------------------------------------
def log_ticks(lo: float, hi: float) -> np.ndarray:
    """Ticks of a log axis over ``[lo, hi]``: the decades 10**k (every second one over
    spans of more than twelve decades); on spans under 2.5 decades, 1, 2 and 5 times
    each decade; where those give fewer than three ticks, :func:`linear_ticks`."""
    if not (0 < lo < hi):
        raise ValueError(f"a log axis needs 0 < lo < hi, not {lo!r} to {hi!r}")
    a, b = math.log10(lo), math.log10(hi)
    eps = 1e-9 * max(1.0, b - a)
    decades = np.arange(math.ceil(a - eps), math.floor(b + eps) + 1)
    if b - a >= 2.5:
        step = 2 if b - a > 12 else 1
        return 10.0 ** decades[decades % step == 0]
    around = np.arange(math.floor(a) - 1, math.ceil(b) + 1)
    ticks = np.array([m * 10.0**d for d in around for m in (1.0, 2.0, 5.0)])
    logs = np.log10(ticks)
    ticks = ticks[(logs >= a - eps) & (logs <= b + eps)]
    if ticks.size >= 3:
        return ticks
    # Under about half a decade: round linear steps, which a log axis spaces unevenly.
    steps = linear_ticks(lo, hi, 5)
    return steps[steps > 0]


def minor_log_ticks(lo: float, hi: float) -> np.ndarray:
    """2, 3, ... 9 times each decade inside ``[lo, hi]``: unlabelled short ticks."""
    a, b = math.log10(lo), math.log10(hi)
    ticks = np.array(
        [m * 10.0**d for d in range(math.floor(a), math.ceil(b) + 1) for m in range(2, 10)]
    )
    logs = np.log10(ticks)
    return ticks[(logs > a) & (logs < b)]


def linear_ticks(lo: float, hi: float, target: int = 6) -> np.ndarray:
    """About ``target`` ticks at a round step (1, 2, 2.5 or 5 times a power of ten)."""
    if not lo < hi:
        raise ValueError(f"an axis needs lo < hi, not {lo!r} to {hi!r}")
    raw = (hi - lo) / max(target, 1)
    power = 10.0 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1.0, 2.0, 2.5, 5.0, 10.0) if m * power >= raw)
    first = math.ceil(lo / step - 1e-9)
    last = math.floor(hi / step + 1e-9)
    return np.arange(first, last + 1) * step


def _superscript(k: int) -> str:
    return f'10<tspan dy="-0.45em" font-size="75%">{k}</tspan>'


def tick_label(value: float, log: bool) -> str:
    """The SVG text of a tick label (markup of our own: a number, or ten to a power)."""
    if log and value > 0:
        k = math.log10(value)
        if abs(k - round(k)) < 1e-9 and not -3 <= round(k) <= 4:
            return _superscript(round(k))
        return f"{value:g}"
    if value == 0:
        return "0"
    return f"{value:.10g}".replace("-", "\u2212")


def label_width(value: float, log: bool) -> float:
    """Width of a tick label [px], estimated as for :func:`text_width`."""
    plain = re.sub(r"<[^>]+>", "", tick_label(value, log))
    return text_width(plain, TICK_SIZE)


# -- axes and panels ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Axis:
    """One axis: its title (with the unit in brackets), its range and its kind."""

    title: str
    lo: float
    hi: float
    log: bool = False

    def __post_init__(self):
        if not (math.isfinite(self.lo) and math.isfinite(self.hi) and self.lo < self.hi):
            raise ValueError(f"axis {self.title!r}: needs lo < hi, not {self.lo} to {self.hi}")
        if self.log and self.lo <= 0:
            raise ValueError(f"axis {self.title!r}: a log axis needs lo > 0, not {self.lo}")

    def fraction(self, values) -> np.ndarray:
        """Where ``values`` lie from lo (0) to hi (1); NaN where a log axis has no place
        for them (zero, negative) or a value is missing."""
        v = np.asarray(values, dtype=float)
        if self.log:
            with np.errstate(divide="ignore", invalid="ignore"):
                t = np.where(v > 0, np.log10(np.where(v > 0, v, 1.0)), np.nan)
            a, b = math.log10(self.lo), math.log10(self.hi)
        else:
            t, a, b = v, self.lo, self.hi
        return (t - a) / (b - a)

    def ticks(self) -> np.ndarray:
        return log_ticks(self.lo, self.hi) if self.log else linear_ticks(self.lo, self.hi)

    def minor_ticks(self) -> np.ndarray:
        if self.log and math.log10(self.hi / self.lo) >= 2.5:
            return minor_log_ticks(self.lo, self.hi)
        return np.array([])


def _f(v: float) -> str:
    return f"{v:.1f}"


def _points(xs: np.ndarray, ys: np.ndarray) -> str:
    return " ".join(f"{_f(x)},{_f(y)}" for x, y in zip(xs, ys, strict=True))


def _runs(ok: np.ndarray) -> list[tuple[int, int]]:
    """(start, stop) of each run of True in ``ok``."""
    edges = np.flatnonzero(np.diff(np.concatenate([[0], ok.astype(int), [0]])))
    return list(zip(edges[::2].tolist(), edges[1::2].tolist(), strict=True))


def _dash(dash: str, width: float) -> str:
    """Stroke attributes of a dash style: ``solid``, ``dot`` (round dots) or ``dash``."""
    if dash == "dot":
        return f' stroke-dasharray="0.1 {_f(max(2.6 * width, 3.0))}" stroke-linecap="round"'
    if dash == "dash":
        return f' stroke-dasharray="{_f(4 * width)} {_f(2.5 * width)}"'
    if dash == "solid":
        return ' stroke-linecap="round" stroke-linejoin="round"'
    raise ValueError(f"dash {dash!r}: use solid, dot or dash")


def _opacity(name: str, value: float) -> str:
    return "" if value >= 1.0 else f' {name}="{value:.2f}"'


class Panel:
    """A plot area with its two axes; draws in data coordinates, clipped to the area."""

    def __init__(
        self,
        x: Axis,
        y: Axis,
        box: tuple[float, float, float, float],
        clip_id: str,
        x_labels: bool = True,
        frame: str = "#8A8F94",
        grid: str = "#E4E1D9",
        ink: str = "#23292E",
    ):
        self.x, self.y = x, y
        self.left, self.top, self.width, self.height = box
        self.clip_id = clip_id
        self.x_labels = x_labels
        self.frame, self.grid, self.ink = frame, grid, ink
        self.parts: list[str] = []  # drawn in order, clipped to the plot area
        self.outside: list[str] = []  # drawn over the frame, not clipped (frame marks)

    # mapping -------------------------------------------------------------------------------
    def px(self, values) -> np.ndarray:
        """Pixel x of data ``values`` (the module's mapping formula)."""
        return self.left + self.width * self.x.fraction(values)

    def py(self, values) -> np.ndarray:
        """Pixel y of data ``values``, counted down from the top of the drawing."""
        return self.top + self.height * (1.0 - self.y.fraction(values))

    # drawing -------------------------------------------------------------------------------
    def line(
        self,
        x,
        y,
        colour: str,
        width: float = 2.0,
        dash: str = "solid",
        opacity: float = 1.0,
    ) -> str:
        """A polyline through the points (x, y), broken where a value is missing."""
        px, py = self.px(x), self.py(y)
        ok = np.isfinite(px) & np.isfinite(py)
        style = (
            f' fill="none" stroke="{colour}" stroke-width="{width:g}"'
            + _dash(dash, width)
            + _opacity("stroke-opacity", opacity)
        )
        out = []
        for a, b in _runs(ok):
            if b - a >= 2:
                out.append(f'<polyline points="{_points(px[a:b], py[a:b])}"{style}/>')
        return "".join(out)

    def markers(
        self,
        x,
        y,
        size,
        colour: str,
        opacity: float = 1.0,
        hollow=None,
    ) -> str:
        """Circles of diameter ``size`` [px] (an array or one number; 0 draws none) at
        (x, y); ``hollow`` (flags) draws open circles."""
        px, py = self.px(x), self.py(y)
        sizes = np.broadcast_to(np.asarray(size, dtype=float), px.shape)
        open_ = np.broadcast_to(
            np.asarray(False if hollow is None else hollow, dtype=bool), px.shape
        )
        out = []
        fill_op = _opacity("fill-opacity", opacity)
        stroke_op = _opacity("stroke-opacity", opacity)
        for cx, cy, s, o in zip(px, py, sizes, open_, strict=True):
            if not (s > 0 and math.isfinite(cx) and math.isfinite(cy)):
                continue
            paint = 'fill="#FFFFFF"' if o else f'fill="{colour}"{fill_op}'
            out.append(
                f'<circle cx="{_f(cx)}" cy="{_f(cy)}" r="{s / 2:.1f}" {paint} '
                f'stroke="{colour}" stroke-width="1.2"{stroke_op}/>'
            )
        return "".join(out)

    def text(
        self,
        x: float,
        y: float,
        text: str,
        colour: str,
        size: float = 10.0,
        anchor: str = "start",
        dx: float = 0.0,
        dy: float = 0.0,
        opacity: float = 1.0,
    ) -> str:
        """``text`` (escaped) at data point (x, y), moved by (dx, dy) pixels."""
        px = float(self.px(x)) + dx
        py = float(self.py(y)) + dy
        if not (math.isfinite(px) and math.isfinite(py)):
            return ""
        return (
            f'<text x="{_f(px)}" y="{_f(py)}" font-size="{size:g}" fill="{colour}"'
            f'{_opacity("fill-opacity", opacity)} text-anchor="{anchor}">{escape(text)}</text>'
        )

    def region(self, x, y, fill: str, opacity: float = 1.0) -> str:
        """A filled polygon through the data points (x, y)."""
        px, py = self.px(x), self.py(y)
        return (
            f'<polygon points="{_points(px, py)}" fill="{fill}"'
            f'{_opacity("fill-opacity", opacity)} stroke="none"/>'
        )

    def draw(self, *parts: str, title: str | None = None) -> None:
        """Add drawn parts as one group; ``title`` (escaped) is its tooltip in a browser."""
        body = "".join(p for p in parts if p)
        if not body:
            return
        tip = f"<title>{escape(title)}</title>" if title else ""
        self.parts.append(f"<g>{tip}{body}</g>")

    def draw_outside(self, *parts: str, title: str | None = None) -> None:
        """As :meth:`draw`, over the frame and not clipped: marks along its edges."""
        body = "".join(p for p in parts if p)
        if body:
            tip = f"<title>{escape(title)}</title>" if title else ""
            self.outside.append(f"<g>{tip}{body}</g>")

    def frame_tick(self, edge: str, value: float, label: str, colour: str) -> str:
        """A short mark out of the ``edge`` ("top" or "right") of the frame at the data
        ``value`` of that edge's axis, with ``label`` beyond it."""
        if edge == "top":
            x = float(self.px(value))
            return (
                f'<path d="M{_f(x)} {_f(self.top)}v-6" stroke="{colour}" stroke-width="1"/>'
                f'<text x="{_f(x)}" y="{_f(self.top - 9)}" font-size="10" fill="{colour}" '
                f'text-anchor="middle">{escape(label)}</text>'
            )
        if edge == "right":
            right = self.left + self.width
            y = float(self.py(value))
            return (
                f'<path d="M{_f(right)} {_f(y)}h6" stroke="{colour}" stroke-width="1"/>'
                f'<text x="{_f(right + 9)}" y="{_f(y + 3.5)}" font-size="10" fill="{colour}" '
                f'text-anchor="start">{escape(label)}</text>'
            )
        raise ValueError(f"edge {edge!r}: use 'top' or 'right'")

    # axes --------------------------------------------------------------------------------
    def _x_px(self, v: float) -> float:
        return float(self.px(v))

    def _y_px(self, v: float) -> float:
        return float(self.py(v))

    def svg(self, x_title: bool = True) -> str:
        """The panel: grid, clipped drawing, frame, ticks, tick labels and axis titles."""
        left, top, w, h = self.left, self.top, self.width, self.height
        bottom, right = top + h, left + w
        out = [
            f'<clipPath id="{self.clip_id}"><rect x="{_f(left)}" y="{_f(top)}" '
            f'width="{_f(w)}" height="{_f(h)}"/></clipPath>'
        ]
        grid = []
        ticks = []
        labels = []
        for v in self.x.ticks():
            p = self._x_px(v)
            grid.append(f"M{_f(p)} {_f(top)}V{_f(bottom)}")
            ticks.append(f"M{_f(p)} {_f(bottom)}v5")
            if self.x_labels:
                labels.append(
                    f'<text x="{_f(p)}" y="{_f(bottom + 19)}" text-anchor="middle">'
                    f"{tick_label(v, self.x.log)}</text>"
                )
        for v in self.x.minor_ticks():
            ticks.append(f"M{_f(self._x_px(v))} {_f(bottom)}v3")
        for v in self.y.ticks():
            p = self._y_px(v)
            grid.append(f"M{_f(left)} {_f(p)}H{_f(right)}")
            ticks.append(f"M{_f(left)} {_f(p)}h-5")
            labels.append(
                f'<text x="{_f(left - 8)}" y="{_f(p + 4)}" text-anchor="end">'
                f"{tick_label(v, self.y.log)}</text>"
            )
        for v in self.y.minor_ticks():
            ticks.append(f"M{_f(left)} {_f(self._y_px(v))}h-3")
        out.append(f'<path d="{"".join(grid)}" stroke="{self.grid}" stroke-width="1"/>')
        out.append(f'<g clip-path="url(#{self.clip_id})">{"".join(self.parts)}</g>')
        out.append(
            f'<rect x="{_f(left)}" y="{_f(top)}" width="{_f(w)}" height="{_f(h)}" '
            f'fill="none" stroke="{self.frame}" stroke-width="1"/>'
        )
        out.append(f'<path d="{"".join(ticks)}" stroke="{self.frame}" stroke-width="1"/>')
        out.extend(self.outside)
        out.append(f'<g font-size="{TICK_SIZE:g}" fill="{self.ink}">{"".join(labels)}</g>')
        if x_title:
            out.append(
                f'<text x="{_f(left + w / 2)}" y="{_f(bottom + 40)}" text-anchor="middle" '
                f'font-size="{FONT_SIZE + 1:g}" fill="{self.ink}">{escape(self.x.title)}</text>'
            )
        widest = max((label_width(v, self.y.log) for v in self.y.ticks()), default=20.0)
        ty = left - 14 - widest
        out.append(
            f'<text transform="translate({_f(ty)} {_f(top + h / 2)}) rotate(-90)" '
            f'text-anchor="middle" font-size="{FONT_SIZE + 1:g}" fill="{self.ink}">'
            f"{escape(self.y.title)}</text>"
        )
        return "".join(out)


@dataclass(frozen=True)
class LegendEntry:
    label: str
    colour: str
    dash: str = "solid"
    opacity: float = 1.0
    width: float = 2.0
    marker: bool = False
    title: str | None = None


class Chart:
    """A column of panels, a title above them and a legend to their right.

    ``id_prefix`` names the chart's clip paths; give each chart on one page its own.
    """

    def __init__(
        self,
        width: float = 1100.0,
        title: str = "",
        legend_title: str = "",
        id_prefix: str = "chart",
        label: str = "",
        ink: str = "#23292E",
        legend: bool = True,
        margin_top: float = 0.0,
        margin_right: float = 0.0,
    ):
        self.width = width
        self.margin_right = margin_right  # extra room right of the plot (frame marks)
        self.title = title
        self.legend_title = legend_title
        self.id_prefix = re.sub(r"[^A-Za-z0-9_-]", "-", id_prefix) or "chart"
        self.label = label or title
        self.ink = ink
        self.has_legend = legend
        self.panels: list[Panel] = []
        self.entries: list[LegendEntry] = []
        self._next_top = (TOP if title else 16.0) + margin_top

    @property
    def plot_width(self) -> float:
        room = LEGEND_GAP + LEGEND_WIDTH if self.has_legend else 24.0
        return self.width - LEFT - room - self.margin_right

    def panel(self, x: Axis, y: Axis, height: float, x_labels: bool = True, **colours) -> Panel:
        """A new panel under the last one, ``height`` pixels tall."""
        if self.panels:
            self._next_top += PANEL_GAP + (BOTTOM if self.panels[-1].x_labels else 0.0)
        box = (LEFT, self._next_top, self.plot_width, height)
        p = Panel(x, y, box, f"{self.id_prefix}-clip{len(self.panels)}", x_labels, **colours)
        self._next_top += height
        self.panels.append(p)
        return p

    def add_legend(self, entry: LegendEntry) -> None:
        self.entries.append(entry)

    def _legend(self) -> tuple[str, float]:
        """The legend's SVG and its bottom edge [px]."""
        if not (self.has_legend and self.entries):
            return "", 0.0
        x0 = LEFT + self.plot_width + self.margin_right + LEGEND_GAP
        text_x = x0 + LEGEND_SWATCH + 6
        room = self.width - text_x - 4
        step = FONT_SIZE * LINE_HEIGHT
        y = (self.panels[0].top if self.panels else TOP) + FONT_SIZE
        out = []
        if self.legend_title:
            for line in wrap_text(self.legend_title, self.width - x0 - 4, FONT_SIZE):
                out.append(
                    f'<text x="{_f(x0)}" y="{_f(y)}" font-weight="600">{escape(line)}</text>'
                )
                y += step
            y += 4
        for e in self.entries:
            lines = wrap_text(e.label, room, FONT_SIZE)
            mid = y - FONT_SIZE * 0.35
            sample = (
                f'<line x1="{_f(x0)}" y1="{_f(mid)}" x2="{_f(x0 + LEGEND_SWATCH)}" '
                f'y2="{_f(mid)}" stroke="{e.colour}" stroke-width="{e.width:g}"'
                f"{_dash(e.dash, e.width)}{_opacity('stroke-opacity', e.opacity)}/>"
            )
            if e.marker:
                sample += (
                    f'<circle cx="{_f(x0 + LEGEND_SWATCH / 2)}" cy="{_f(mid)}" r="3.5" '
                    f'fill="{e.colour}"{_opacity("fill-opacity", e.opacity)}/>'
                )
            spans = "".join(
                f'<tspan x="{_f(text_x)}" dy="{0 if k == 0 else step:.1f}">{escape(s)}</tspan>'
                for k, s in enumerate(lines)
            )
            tip = f"<title>{escape(e.title)}</title>" if e.title else ""
            out.append(f'<g>{tip}{sample}<text x="{_f(text_x)}" y="{_f(y)}">{spans}</text></g>')
            y += step * len(lines) + 3
        return f'<g font-size="{FONT_SIZE:g}" fill="{self.ink}">{"".join(out)}</g>', y

    def svg(self) -> str:
        """The whole chart as one ``<svg>`` element (valid XML, to be written into HTML)."""
        legend, legend_bottom = self._legend()
        parts = []
        last = len(self.panels) - 1
        for k, p in enumerate(self.panels):
            parts.append(p.svg(x_title=k == last or p.x_labels))
        bottom = self._next_top + (BOTTOM if self.panels else 0.0)
        height = math.ceil(max(bottom, legend_bottom + 8))
        title = ""
        if self.title:
            title = (
                f'<text x="{_f(LEFT)}" y="24" font-size="{TITLE_SIZE:g}" fill="{self.ink}">'
                f"{escape(self.title)}</text>"
            )
        w = math.ceil(self.width)
        return (
            f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {w} {height}" '
            f'width="{w}" height="{height}" role="img" aria-label="{escape(self.label)}" '
            "overflow=\"visible\" font-family=\"'Source Sans 3', 'Noto Sans', "
            "'DejaVu Sans', 'Segoe UI', Arial, sans-serif\">"
            f'<rect width="{w}" height="{height}" fill="#FFFFFF"/>'
            f"{title}{''.join(parts)}{legend}</svg>"
        )


__all__ = [
    "Axis",
    "Chart",
    "LegendEntry",
    "Panel",
    "clean_text",
    "escape",
    "linear_ticks",
    "log_ticks",
    "minor_log_ticks",
    "text_width",
    "tick_label",
    "wrap_text",
]
