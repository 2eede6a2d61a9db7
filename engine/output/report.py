"""The shortlist as one self-contained HTML report, with its charts.

The map is :func:`engine.output.mapfigure.map_figure`, the figure the dashboard's map
page draws too; the charts take their colours and template from
:mod:`engine.output.palette`, so a grade has the same colour here as in the dashboard.
Built on the rows of :mod:`engine.output.rows` (see :mod:`engine.output.export` for the layers);
:func:`engine.output.export.write_shortlist` calls :func:`report_html` for ``.html`` files.
The page writes temperatures as °C throughout, setting names included (the files write
those with the import format's unit name ``[degC]``).
"""

from __future__ import annotations

import base64
import functools
import gzip
import html

import numpy as np
import plotly.graph_objects as go
import plotly.io as pio
from plotly.offline import get_plotlyjs
from plotly.offline import get_plotlyjs_version as plotly_js_version
from plotly.subplots import make_subplots

from engine.base.caution import CAUTION
from engine.curves.mastercurve import MasterCurve
from engine.library.store import Library
from engine.output.mapfigure import READING, map_figure, plot_text, ranking_colours
from engine.output.palette import TEMPLATE_NAME, tidy_log_axes
from engine.output.rows import (
    RANK_INTERVAL_COLUMNS,
    criteria_rows,
    exported_at,
    finite,
    index_columns,
    interval_columns,
    intervals_note,
    provenance_rows,
    shortlist_rows,
)
from engine.selection.ranking import RankResult

FONT_STACK = '"Source Sans 3", "Noto Sans", "DejaVu Sans", "Segoe UI", Arial, sans-serif'


_CSS = """
:root { --ink: #23282b; --muted: #5d666b; --rule: #d5dad3; --head: #e8ece6;
        --warn: #b3603f; --warn-bg: #fbf1e9; }
body { font-family: $font; color: var(--ink); background: #ffffff; margin: 0;
       line-height: 1.45; font-size: 15px; }
main { max-width: 1180px; margin: 0 auto; padding: 24px 28px 48px; }
h1 { font-size: 26px; margin: 0 0 4px; font-weight: 600; letter-spacing: 0.01em; }
h2 { font-size: 19px; margin: 34px 0 10px; font-weight: 600;
     border-bottom: 2px solid var(--rule); padding-bottom: 4px; }
p.meta, p.hint { color: var(--muted); margin: 4px 0 10px; }
.caution { border-left: 6px solid var(--warn); background: var(--warn-bg);
           padding: 12px 16px; margin: 18px 0; border-radius: 3px; }
.caution strong { color: var(--warn); }
.scroll { overflow-x: auto; }
table { border-collapse: collapse; font-size: 13.5px; margin: 6px 0 4px; }
th, td { border-bottom: 1px solid var(--rule); padding: 5px 9px; text-align: left;
         vertical-align: top; }
th { background: var(--head); font-weight: 600; white-space: nowrap; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
td.reason { min-width: 220px; max-width: 340px; font-size: 12.5px; }
td.grade { min-width: 130px; }
td.notes { font-size: 12.5px; color: var(--muted); }
td.notes details { max-width: 320px; }
td.notes summary { cursor: pointer; }
th { white-space: normal; min-width: 60px; max-width: 150px; }
td small, li small { color: var(--muted); }
tr.excluded td { color: var(--muted); }
ul.fails { margin: 0; padding-left: 18px; }
.swatch { display: inline-block; width: 10px; height: 10px; border-radius: 2px;
          margin-right: 6px; vertical-align: baseline; }
.figure { border: 1px solid var(--rule); border-radius: 4px; padding: 6px; margin: 8px 0; }
code { font-size: 12.5px; }
@media print {
  @page { size: A4 landscape; margin: 12mm; }
  body { font-size: 10.5px; }
  main { max-width: none; padding: 0; }
  h2 { margin: 16px 0 6px; break-after: avoid; }
  table { font-size: 9.5px; }
  th, td { padding: 2px 5px; }
  thead { display: table-header-group; }
  tr { break-inside: avoid; }
  .scroll { overflow: visible; }
  .figure { break-inside: avoid; border: none; }
  td.notes details > *, td.notes details { display: block; }
  .modebar { display: none !important; }
}
""".replace("$font", FONT_STACK)


def _e(value) -> str:
    """Text from data, escaped for HTML (and for Plotly's HTML-like labels)."""
    return html.escape("" if value is None else str(value), quote=True)


def _num(value, digits: int = 3) -> str:
    """A number for a table cell: about ``digits`` significant figures."""
    if isinstance(value, str):
        return _e(value)
    if isinstance(value, int) and not isinstance(value, bool):
        return str(value)
    v = finite(value)
    if v is None:
        return "&ndash;"
    a = abs(v)
    if a != 0 and (a >= 1e5 or a < 1e-3):
        return f"{v:.{digits - 1}e}"
    if a >= 100:
        return f"{v:.0f}"
    return f"{v:.{digits}g}"


def _cell(value) -> str:
    if isinstance(value, int | float) and not isinstance(value, bool):
        return f'<td class="num">{_num(value)}</td>'
    return f"<td>{'&ndash;' if value is None else _e(value)}</td>"


def _cell_interval(value, low, high) -> str:
    """A number with its 95 % interval under it (the number alone without one)."""
    if low is None or high is None:
        return _cell(value)
    return f'<td class="num">{_num(value)}<br><small>{_num(low)} to {_num(high)}</small></td>'


def _split(y: np.ndarray, flag: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(measured, extrapolated) copies of ``y`` with NaN gaps; the dotted part keeps the
    neighbouring points so that the two lines join."""
    flag = np.asarray(flag, dtype=bool)
    near = flag.copy()
    near[1:] |= flag[:-1]
    near[:-1] |= flag[1:]
    return np.where(flag, np.nan, y), np.where(near, y, np.nan)


def _label(g) -> str:
    """Escaped "name (id)" of a grade, safe inside a Plotly hover template too."""
    return f"{plot_text(g.name)} ({plot_text(g.id)})"


def _flags(extrap: np.ndarray) -> list[str]:
    return ["<br>extrapolated" if x else "" for x in extrap]


def curves_figure(result: RankResult) -> go.Figure:
    """E' and loss factor against temperature at the design frequency, shortlist only."""
    props = result.window_props
    path_storage, path_loss = props.path_storage, props.path_loss
    path_extrapolated = props.path_extrapolated
    if path_storage is None or path_loss is None or path_extrapolated is None:
        raise ValueError("the curves need the ranking's temperature path; it has none")
    colours = ranking_colours(result)
    where = {gid: k for k, gid in enumerate(props.ids)}
    temps = np.asarray(props.path_temperatures, dtype=float)
    fig = make_subplots(rows=2, cols=1, shared_xaxes=True, vertical_spacing=0.07)
    for g in result.shortlist:
        k = where[g.id]
        storage = path_storage[k] / 1e6
        eta = path_loss[k] / path_storage[k]
        extrap = path_extrapolated[k]
        name = f"{g.rank}. {_label(g)}"
        for row, values, shown in (
            (1, storage, "E' %{y:.4~g} MPa"),
            (2, eta, "loss factor %{y:.3~g}"),
        ):
            solid, dotted = _split(values, extrap)
            hover = f"{_label(g)}<br>%{{x:.4~g}} °C: {shown}%{{text}}<extra></extra>"
            for y, dash, legend in ((solid, "solid", row == 1), (dotted, "dot", False)):
                fig.add_trace(
                    go.Scatter(
                        x=temps,
                        y=y,
                        mode="lines",
                        line={"color": colours[g.id], "width": 2.2, "dash": dash},
                        name=name,
                        legendgroup=g.id,
                        showlegend=legend,
                        text=_flags(extrap),
                        hovertemplate=hover,
                    ),
                    row=row,
                    col=1,
                )
    fig.update_layout(template=TEMPLATE_NAME, height=640, hovermode="closest")
    fig.update_yaxes(type="log", title_text="storage modulus E' [MPa]", row=1, col=1)
    fig.update_yaxes(title_text="loss factor tan δ [-]", row=2, col=1)
    fig.update_xaxes(title_text="temperature [°C]", row=2, col=1)
    return tidy_log_axes(fig)


# A figure's drawing script waits for the chart library: its type is this, and the
# loader (_plotly_loader) runs it once Plotly is unpacked.
FIGURE_SCRIPT = "text/x-quietgrade-figure"


@functools.lru_cache(maxsize=1)
def _plotly_loader() -> str:
    """Plotly's script once in the page, gzip-compressed and base64-encoded (about 1.9 MB
    instead of 4.8 MB), unpacked by the browser's own DecompressionStream (every current
    browser) and then run, followed by each figure's drawing script. Still one file
    that opens offline."""
    packed = base64.b64encode(gzip.compress(get_plotlyjs().encode("utf-8"), 9, mtime=0))
    return (
        # Plotly's own set-up line, as it writes it before its library.
        "<script>window.PlotlyConfig = {MathJaxConfig: 'local'};</script>\n"
        f"<script>/* plotly.js v{plotly_js_version()} (MIT licence), gzip + base64; "
        "unpacked below */\n"
        f'window.quietgradePlotly = (async () => {{ const packed = "{packed.decode()}";\n'
        "const bytes = Uint8Array.from(atob(packed), (c) => c.charCodeAt(0));\n"
        "const stream = new Blob([bytes]).stream()"
        '.pipeThrough(new DecompressionStream("gzip"));\n'
        "const code = await new Response(stream).text();\n"
        "const lib = document.createElement('script'); lib.text = code;\n"
        "document.head.appendChild(lib);\n"
        f"document.querySelectorAll('script[type=\"{FIGURE_SCRIPT}\"]')"
        ".forEach((s) => (0, eval)(s.text)); })();</script>"
    )


def _figure_html(fig, first: bool = False) -> str:
    """A figure's div and its drawing script, run by the loader once Plotly is there."""
    out = pio.to_html(
        fig,
        include_plotlyjs=False,
        full_html=False,
        default_height=f"{fig.layout.height}px",
        config={"displaylogo": False, "responsive": True},
    )
    # Plotly writes each figure's drawing script as a bare "<script>" (and so does no
    # text from data: it is escaped).
    return out.replace("<script>", f'<script type="{FIGURE_SCRIPT}">')


def _table(header: list[str], rows: list[list[str]], row_class: str = "") -> str:
    head = "".join(f"<th>{_e(h)}</th>" for h in header)
    cls = f' class="{row_class}"' if row_class else ""
    body = "".join(f"<tr{cls}>" + "".join(r) + "</tr>" for r in rows)
    return (
        f'<div class="scroll"><table><thead><tr>{head}</tr></thead>'
        f"<tbody>{body}</tbody></table></div>"
    )


def _criteria_html(result: RankResult) -> str:
    rows = [
        [f"<td>{_e(s)}</td>", f"<td>{_e(_celsius(k))}</td>", _cell(v)]
        for s, k, v in criteria_rows(result)
    ]
    return _table(["section", "setting", "value"], rows)


def _celsius(setting: str) -> str:
    """A setting name as the page shows it: ``[degC]``, the files' unit name, as ``[°C]``."""
    return setting.replace("[degC]", "[°C]")


# The figures purchasing reads first, in this order after rank and grade (when the
# ranking has them), with the heading the report gives each; the rest follow, notes last.
KEY_COLUMNS = (
    ("score", "score"),
    ("fn min [Hz]", "fn min [Hz]"),
    ("fn max [Hz]", "fn max [Hz]"),
    ("worst transmissibility [-]", "worst T"),
    ("long-term sag [mm]", "sag [mm]"),
)


def index_headings(result: RankResult) -> dict[str, str]:
    """Readable heading of each chosen index column: the index's label, how it is taken
    over the window and its unit, e.g. ``"loss factor (worst)"`` for the file heading
    ``"loss_factor (worst) [-]"``."""
    out = {}
    for choice in result.criteria.indices:
        spec = result.specs[choice.name]
        how = choice.aggregate if spec.kind == "point" else "window"
        unit = f" [{spec.unit}]" if spec.unit and spec.unit != "-" else ""
        out[index_columns(result)[choice.name]] = f"{spec.label} ({how}){unit}"
    return out


def _ranked_html(result: RankResult) -> str:
    rows = shortlist_rows(result)
    passing = [r for r in rows if r["passed"] == "pass"]
    if not passing:
        return '<p class="hint">No grade meets every constraint.</p>'
    colours = ranking_colours(result)
    spread = interval_columns(result)
    skip = {"rank", "id", "name", "passed", "failed constraints", "reason", "notes"}
    skip |= set(RANK_INTERVAL_COLUMNS) | {h for pair in spread.values() for h in pair}
    if result.criteria.pareto is None:
        skip.add("pareto")
    headings = {h: h for h in passing[0]} | dict(KEY_COLUMNS) | index_headings(result)
    key = [h for h, _ in KEY_COLUMNS if h in passing[0] and h not in skip]
    middle = [h for h in passing[0] if h not in skip and h not in key]
    header = ["rank", "grade", *(headings[h] for h in key), "reason"]
    header += [headings[h] for h in middle] + ["notes"]
    best, worst = RANK_INTERVAL_COLUMNS

    def cells(r: dict, names: list[str]) -> list[str]:
        return [
            _cell_interval(r[h], r[spread[h][0]], r[spread[h][1]]) if h in spread else _cell(r[h])
            for h in names
        ]

    body = []
    for r in passing:
        swatch = f'<span class="swatch" style="background:{colours[r["id"]]}"></span>'
        notes = r["notes"] or ""
        folded = f"<details><summary>notes</summary>{_e(notes)}</details>" if notes else ""
        body.append(
            [
                _cell_interval(r["rank"], r[best], r[worst]),
                f'<td class="grade">{swatch}{_e(r["name"])}<br><small>{_e(r["id"])}</small></td>',
                *cells(r, key),
                f'<td class="reason">{_e(r["reason"])}</td>',
                *cells(r, middle),
                f'<td class="notes">{folded}</td>',
            ]
        )
    hint = (
        '<p class="hint">Under a rank or a figure: its 95 % interval on the data. '
        f"{_e(intervals_note(result))}</p>"
    )
    return hint + _table(header, body, row_class="ranked")


def _excluded_html(result: RankResult) -> str:
    if not result.excluded:
        return '<p class="hint">Every grade meets every constraint.</p>'
    body = []
    for g in result.excluded:
        fails = "".join(
            f"<li>{_e(f.constraint)}: {_e(f.value)} <small>(needs {_e(f.limit)})</small></li>"
            for f in g.failures
        )
        body.append(
            [
                f'<td class="grade">{_e(g.name)}<br><small>{_e(g.id)}</small></td>',
                _cell(g.supplier),
                _cell(g.family),
                _cell(finite(g.price)),
                f'<td><ul class="fails">{fails}</ul></td>',
            ]
        )
    return _table(
        ["grade", "supplier", "family", "price [per kg]", "why excluded"], body, "excluded"
    )


def _curves_html(result: RankResult, curves: dict[str, MasterCurve]) -> str:
    body = []
    for g in result.grades:
        c = curves.get(g.id)
        if c is None:
            continue
        tg = next((t for t in c.tg if t.get("method") == "loss_factor_peak"), None)
        if tg is None:
            tg_text = "&ndash;"
        elif tg.get("reached"):
            tg_text = f"{tg['temperature_C']:.1f} °C at {tg['frequency_Hz']:g} Hz"
        else:
            tg_text = _e(tg.get("note", "not reached"))
        lo, hi = c.temperature_range
        body.append(
            [
                f'<td class="grade">{_e(g.name)}<br><small>{_e(g.id)}</small></td>',
                _cell(c.mode),
                f'<td class="num">{c.reference_C:.1f}</td>',
                _cell(c.shift.law.kind),
                f"<td>{tg_text}</td>",
                f"<td>{lo:g} to {hi:g}</td>",
                f"<td>{10 ** c.log_fr_range[0]:.3g} to {10 ** c.log_fr_range[1]:.3g}</td>",
            ]
        )
    if not body:
        return ""
    return "<h2>Master curves behind the figures</h2>" + _table(
        [
            "grade",
            "mode",
            "reference [°C]",
            "shift law",
            "Tg, loss-factor peak",
            "measured [°C]",
            "reduced frequency covered [Hz]",
        ],
        body,
    )


def _provenance_html(result: RankResult, library: Library | None) -> str:
    if library is None:
        return ""
    body = []
    for r in provenance_rows(result, library):
        body.append(
            [
                _cell(r["record"]),
                _cell(r["grade id"]),
                _cell(r["file name"]),
                f"<td><code>{_e(r['sha256'] or '')}</code></td>",
                _cell(r["size [bytes]"] if r["size [bytes]"] is None else int(r["size [bytes]"])),
                _cell(r["points"] if r["points"] is not None else r["rows"]),
                _cell(r["imported at"]),
            ]
        )
    return "<h2>Provenance</h2>" + _table(
        ["record", "grade", "file", "sha256", "size [bytes]", "rows / points", "imported at"],
        body,
    )


def report_html(
    result: RankResult,
    library: Library | None = None,
    curves: dict[str, MasterCurve] | None = None,
) -> str:
    """A self-contained HTML report (Plotly's script inline, so it opens offline).

    Sections: caution, criteria, ranked shortlist, excluded grades with reasons, the
    modulus-loss map, E' and loss factor against temperature for the shortlist, and,
    when given, the master-curve summary (``curves``) and provenance (``library``).
    Every text that comes from data is HTML-escaped, in tables and in chart labels.
    """
    w = result.criteria.window
    f_design = w.design_frequency
    lo, hi = w.temp_range
    caution = (
        f'<section class="caution" role="note"><strong>Caution.</strong> {_e(CAUTION)}</section>'
    )
    fit_errors = ""
    if result.fit_errors:
        items = "".join(
            f"<li>{_e(gid)}: {_e(msg)}</li>" for gid, msg in sorted(result.fit_errors.items())
        )
        fit_errors = f"<h2>Not ranked</h2><p>No master curve could be built:</p><ul>{items}</ul>"
    map_fig = _figure_html(map_figure(result), first=True)
    if result.shortlist:
        curves_fig = f'<div class="figure">{_figure_html(curves_figure(result), first=False)}</div>'
    else:
        curves_fig = '<p class="hint">No grade meets every constraint.</p>'
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        "<title>quietgrade shortlist</title>",
        f"<style>{_CSS}</style></head><body><main>",
        _plotly_loader(),
        "<h1>quietgrade shortlist</h1>",
        f'<p class="meta">{len(result.shortlist)} of {len(result.grades)} grade(s) meet every '
        f"constraint over {lo:g} to {hi:g} °C and {w.freq_range[0]:g} to "
        f"{w.freq_range[1]:g} Hz. Written {_e(exported_at())} (UTC); ranked "
        f"{_e(result.created_at)} (UTC) with quietgrade "
        f"{_e(result.engine_version)}.</p>",
        caution,
        "<h2>Ranked shortlist</h2>",
        _ranked_html(result),
        "<h2>Excluded grades</h2>",
        _excluded_html(result),
        fit_errors,
        "<h2>Stiffness and damping across the window</h2>",
        f'<p class="hint">From {lo:g} to {hi:g} °C at the design frequency {f_design:.4g} '
        f"Hz. {_e(READING)}</p>",
        f'<div class="figure">{map_fig}</div>',
        "<h2>Shortlisted grades against temperature</h2>",
        f'<p class="hint">Storage modulus and loss factor at {f_design:.4g} Hz; dotted where '
        "extrapolated.</p>",
        curves_fig,
        _curves_html(result, curves) if curves else "",
        "<h2>Criteria</h2>",
        _criteria_html(result),
        _provenance_html(result, library),
        caution,
        "</main></body></html>",
    ]
    return "\n".join(p for p in parts if p)


__all__ = ["curves_figure", "report_html"]
