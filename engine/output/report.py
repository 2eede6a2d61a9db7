"""The shortlist as one self-contained HTML report, with its charts.

The charts are static SVG drawn by :mod:`engine.output.svgchart` (the page holds no
script at all, prints as it shows and opens offline): the map draws what
:func:`engine.output.mapfigure.map_figure` draws on the dashboard's map page, from the
same rows (:func:`~engine.output.mapfigure.path_arrays`,
:func:`~engine.output.mapfigure.shown_rows`) with the same colours
(:func:`~engine.output.mapfigure.ranking_colours`, :mod:`engine.output.palette`), so a
grade has the same colour here as in the dashboard.
Built on the rows of :mod:`engine.output.rows` (see :mod:`engine.output.export` for the layers);
:func:`engine.output.export.write_shortlist` calls :func:`report_html` for ``.html`` files.
The page writes temperatures as °C throughout, setting names included (the files write
those with the import format's unit name ``[degC]``).
"""

from __future__ import annotations

import html
from collections.abc import Mapping

import numpy as np

from engine.base.caution import CAUTION
from engine.curves.mastercurve import MasterCurve
from engine.library.store import Library
from engine.output.mapfigure import (
    AXIS_PAD,
    MARK_EVERY_K,
    READING,
    path_arrays,
    ranking_colours,
    shown_rows,
)
from engine.output.palette import ACCENT, FEASIBLE, GUIDE_TEXT, INK, log_span
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
from engine.output.svgchart import Axis, Chart, LegendEntry
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
h3 { font-size: 16px; margin: 22px 0 6px; font-weight: 600; }
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
table.key { max-width: 980px; }  /* the key figures on a laptop screen and an A4 page */
td.grade { min-width: 130px; }
td.notes { font-size: 12.5px; color: var(--muted); }
td.notes details { max-width: 320px; }
td.notes summary { cursor: pointer; }
td.notes div.printed { display: none; }  /* the notes unfolded, on paper only */
th { white-space: normal; min-width: 60px; max-width: 150px; }
td small, li small { color: var(--muted); }
tr.excluded td { color: var(--muted); }
ul.fails { margin: 0; padding-left: 18px; }
.swatch { display: inline-block; width: 10px; height: 10px; border-radius: 2px;
          margin-right: 6px; vertical-align: baseline; }
.figure { border: 1px solid var(--rule); border-radius: 4px; padding: 6px; margin: 8px 0; }
.figure svg { display: block; width: 100%; max-width: 1100px; height: auto; }
code { font-size: 12.5px; }
@media print {
  @page { size: A4 landscape; margin: 12mm; }
  body { font-size: 10.5px; }
  main { max-width: none; padding: 0; }
  h2 { margin: 16px 0 6px; break-after: avoid; }
  h3 { margin: 12px 0 4px; break-after: avoid; }
  table { font-size: 9.5px; }
  th, td { padding: 2px 5px; }
  th { min-width: 0; }
  td.reason, td.notes, td small { font-size: 8.5px; }
  td.reason { min-width: 160px; }
  table.further { width: 100%; }
  table.further td.num { white-space: normal; }
  thead { display: table-header-group; }
  tr { break-inside: avoid; }
  .scroll { overflow: visible; }
  .figure { break-inside: avoid; border: none; }
  td.notes details { display: none; }
  td.notes div.printed { display: block; }
}
""".replace("$font", FONT_STACK)


def _e(value) -> str:
    """Text from data, escaped for HTML."""
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


MAP_PLOT_HEIGHT = 520.0  # the map's plot area [px]; the drawing is 1100 px wide
CURVES_HEIGHTS = (300.0, 210.0)  # E' above, loss factor below [px]


def _drawing_order(result: RankResult, rows: list[int]) -> list[int]:
    """Excluded grades first (under the others), then the passing ones in rank order."""
    grades = {g.id: g for g in result.grades}
    ids = result.window_props.ids
    return sorted(rows, key=lambda k: (grades[ids[k]].passed, grades[ids[k]].rank or 0, k))


def _status(g) -> str:
    """A grade's standing, for its tooltip: rank and score, or why it is excluded."""
    if g.passed:
        return f"rank {g.rank}, score {g.score:.0f}"
    return g.reason


def map_svg(result: RankResult) -> str:
    """The map as static SVG: E' against loss factor (log-log), each grade a path.

    What :func:`engine.output.mapfigure.map_figure` draws: each grade's path through the
    window's temperatures at the design frequency, marks every :data:`MARK_EVERY_K` K,
    open marks where extrapolated, the ends labelled; excluded grades dotted and faded
    under the others; the decades of constant loss modulus E'' = eta E' as marks along the
    top and right edges of the frame (as the dashboard draws them by default); the region
    that meets a lowest loss factor. The legend lists the passing grades in rank
    order, then the excluded ones; each grade's tooltip gives its name and standing.
    """
    props = result.window_props
    if props.path_extrapolated is None:
        raise ValueError("the map needs the ranking's temperature path; it has none")
    colours = ranking_colours(result)
    grades = {g.id: g for g in result.grades}
    temps, storage, eta = path_arrays(result)
    shown = shown_rows(result)
    limit = result.criteria.constraints.min_loss_factor
    xs = log_span(np.concatenate([eta[shown].ravel(), [limit] if limit else []]), AXIS_PAD)
    ys = log_span(storage[shown], AXIS_PAD)
    (xa, xb), (ya, yb) = xs, ys
    title = (
        f"Paths through the window at {result.criteria.window.design_frequency:.3g} Hz, "
        f"{temps[0]:g} to {temps[-1]:g} °C"
    )
    chart = Chart(
        title=title,
        legend_title="grade",
        id_prefix="map",
        ink=INK,
        margin_top=16.0,  # the E'' marks along the top edge
        margin_right=40.0,  # ... and along the right edge
    )
    panel = chart.panel(
        Axis("loss factor η = tan δ [-]", 10**xa, 10**xb, log=True),
        Axis("storage modulus E' [MPa] (tensile equivalent)", 10**ya, 10**yb, log=True),
        MAP_PLOT_HEIGHT,
    )
    if limit:
        x0 = max(limit, 10**xa)
        panel.draw(
            panel.region([x0, 10**xb, 10**xb, x0], [10**ya, 10**ya, 10**yb, 10**yb], FEASIBLE),
            # at the foot of the region, clear of the guides' labels along the top
            panel.text(x0, 10**ya, f"η ≥ {limit:g} (limit met)", ACCENT, 11, dx=4, dy=-7),
            title="where the worst-case loss factor meets its limit",
        )
    # Lines of constant loss modulus E'' = eta E' as marks along the top and right edges
    # of the frame, where each decade of E'' meets them: the paths stand alone inside.
    for d in range(int(np.floor(xa + ya)), int(np.ceil(xb + yb)) + 1):
        label = f"{10.0**d:g}"
        tip = f"constant loss modulus E'' = {10.0**d:g} MPa"
        if xa < d - yb < xb:
            panel.draw_outside(
                panel.frame_tick("top", 10 ** (d - yb), label, GUIDE_TEXT), title=tip
            )
        if ya < d - xb < yb:
            panel.draw_outside(
                panel.frame_tick("right", 10 ** (d - xb), label, GUIDE_TEXT), title=tip
            )
    panel.draw_outside(
        f'<text x="{panel.left + panel.width + 9:.1f}" y="{panel.top - 9:.1f}" font-size="10" '
        f"fill=\"{GUIDE_TEXT}\">E'' [MPa]</text>"
    )

    step = np.mod(temps, MARK_EVERY_K)
    on_mark = np.isclose(step, 0.0) | np.isclose(step, MARK_EVERY_K)
    sizes = np.where(on_mark, 7.0, 0.0)
    sizes[0] = sizes[-1] = 9.0
    for k in _drawing_order(result, shown):
        gid = props.ids[k]
        g = grades[gid]
        colour = colours.get(gid, INK)
        alpha, width, dash = (1.0, 2.0, "solid") if g.passed else (0.38, 1.3, "dot")
        extrap = np.asarray(props.path_extrapolated[k], dtype=np.bool_)
        marks = sizes if g.passed else np.where(sizes > 0, 4.0, 0.0)
        ends = []
        if g.passed:
            for i in (0, -1):
                ends.append(
                    panel.text(
                        eta[k, i], storage[k, i], f"{temps[i]:g} °C", colour, 10, dx=5, dy=-5
                    )
                )
        panel.draw(
            panel.line(eta[k], storage[k], colour, width, dash, alpha),
            panel.markers(eta[k], storage[k], marks, colour, alpha, hollow=extrap),
            *ends,
            title=f"{gid} {g.name}: {_status(g)}",
        )
    for g in result.shortlist + result.excluded:
        if g.id not in props.ids:
            continue
        chart.add_legend(
            LegendEntry(
                g.id,
                colours.get(g.id, INK),
                "solid" if g.passed else "dot",
                1.0 if g.passed else 0.85,  # a legend sample stays legible
                2.0 if g.passed else 1.8,
                marker=g.passed,
                title=f"{g.name}: {_status(g)}",
            )
        )
    return chart.svg()


def curves_svg(result: RankResult) -> str:
    """E' (log) and loss factor (linear) against temperature at the design frequency,
    shortlist only, as static SVG; dotted where the master curve is extrapolated."""
    props = result.window_props
    path_storage, path_loss = props.path_storage, props.path_loss
    path_extrapolated = props.path_extrapolated
    if path_storage is None or path_loss is None or path_extrapolated is None:
        raise ValueError("the curves need the ranking's temperature path; it has none")
    colours = ranking_colours(result)
    where = {gid: k for k, gid in enumerate(props.ids)}
    temps = np.asarray(props.path_temperatures, dtype=float)
    rows = [where[g.id] for g in result.shortlist]
    storage = path_storage[rows] / 1e6
    eta = path_loss[rows] / path_storage[rows]
    lo, hi = log_span(storage, 0.12)
    top = float(np.nanmax(eta)) if np.isfinite(eta).any() else 0.0
    top = 1.1 * top if top > 0 else 1.0  # room above the highest loss factor
    t_lo, t_hi = float(temps.min()), float(temps.max())
    if t_hi <= t_lo:  # a window of one temperature: a kelvin either side
        t_lo, t_hi = t_lo - 1.0, t_hi + 1.0
    t_axis = ("temperature [°C]", t_lo, t_hi)
    chart = Chart(
        legend_title="grade",
        id_prefix="curves",
        label=f"Storage modulus and loss factor against temperature at "
        f"{result.criteria.window.design_frequency:.4g} Hz",
        ink=INK,
    )
    upper = chart.panel(
        Axis(*t_axis),
        Axis("storage modulus E' [MPa]", 10**lo, 10**hi, log=True),
        CURVES_HEIGHTS[0],
        x_labels=False,
    )
    lower = chart.panel(Axis(*t_axis), Axis("loss factor tan δ [-]", 0.0, top), CURVES_HEIGHTS[1])
    for n, g in enumerate(result.shortlist):
        extrap = np.asarray(path_extrapolated[where[g.id]], dtype=bool)
        name = f"{g.rank}. {g.name} ({g.id})"
        for panel, values in ((upper, storage[n]), (lower, eta[n])):
            solid, dotted = _split(values, extrap)
            panel.draw(
                panel.line(temps, solid, colours[g.id], 2.2, "solid"),
                panel.line(temps, dotted, colours[g.id], 2.2, "dot"),
                title=name,
            )
        chart.add_legend(LegendEntry(name, colours[g.id], width=2.2))
    chart.add_legend(LegendEntry("extrapolated (dotted)", GUIDE_TEXT, "dot", width=2.2))
    return chart.svg()


def _table(
    header: list[str], rows: list[list[str]], row_class: str = "", table_class: str = ""
) -> str:
    head = "".join(f"<th>{_e(h)}</th>" for h in header)
    cls = f' class="{row_class}"' if row_class else ""
    table = f'<table class="{table_class}">' if table_class else "<table>"
    body = "".join(f"<tr{cls}>" + "".join(r) + "</tr>" for r in rows)
    return (
        f'<div class="scroll">{table}<thead><tr>{head}</tr></thead>'
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
    header = ["rank", "grade", *(headings[h] for h in key), "reason", "notes"]
    further = ["rank", "grade", *(headings[h] for h in middle)]
    best, worst = RANK_INTERVAL_COLUMNS

    def cells(r: dict, names: list[str]) -> list[str]:
        return [
            _cell_interval(r[h], r[spread[h][0]], r[spread[h][1]]) if h in spread else _cell(r[h])
            for h in names
        ]

    body, more = [], []
    for r in passing:
        swatch = f'<span class="swatch" style="background:{colours[r["id"]]}"></span>'
        notes = r["notes"] or ""
        folded = (
            f'<details><summary>notes</summary>{_e(notes)}</details><div class="printed">'
            f"{_e(notes)}</div>"
            if notes
            else ""
        )
        rank = _cell_interval(r["rank"], r[best], r[worst])
        grade = f'<td class="grade">{swatch}{_e(r["name"])}<br><small>{_e(r["id"])}</small></td>'
        body.append(
            [
                rank,
                grade,
                *cells(r, key),
                f'<td class="reason">{_e(r["reason"])}</td>',
                f'<td class="notes">{folded}</td>',
            ]
        )
        more.append([rank, grade, *cells(r, middle)])
    hint = (
        '<p class="hint">Under a rank or a figure: its 95 % interval on the data. '
        f"{_e(intervals_note(result))}</p>"
    )
    # The key figures in one table that fits a laptop screen and an A4 page; the other
    # figures follow in a second one, so that neither has to be read sideways.
    out = hint + _table(header, body, row_class="ranked", table_class="key")
    if middle:
        out += "<h3>Further figures of the ranked grades</h3>" + _table(
            further, more, row_class="ranked", table_class="further"
        )
    return out


def _excluded_html(result: RankResult) -> str:
    if not result.excluded:
        return '<p class="hint">Every grade meets every constraint.</p>'
    body = []
    for g in result.excluded:
        fails = "".join(
            f"<li>{_e(f.constraint)}{': ' + _e(f.value) if f.value != '' else ''}"
            f"{f' <small>(needs {_e(f.limit)})</small>' if f.limit else ''}</li>"
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


def _curves_html(result: RankResult, curves: Mapping[str, MasterCurve]) -> str:
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
    curves: Mapping[str, MasterCurve] | None = None,
) -> str:
    """A self-contained HTML report with no script: its charts are inline SVG.

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
    map_fig = f'<figure class="figure">{map_svg(result)}</figure>'
    if result.shortlist:
        curves_fig = f'<figure class="figure">{curves_svg(result)}</figure>'
    else:
        curves_fig = '<p class="hint">No grade meets every constraint.</p>'
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        "<title>quietgrade shortlist</title>",
        f"<style>{_CSS}</style></head><body><main>",
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
        map_fig,
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


__all__ = ["curves_svg", "map_svg", "report_html"]
