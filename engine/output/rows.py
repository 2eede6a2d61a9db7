"""The rows every shortlist file writes, and the CSV file made of them.

The export has four modules, in layers, with no circle:

- ``engine.output.rows`` (this one): the rows every format writes (the shortlist, the
  criteria, the window properties, the provenance) and the CSV file.
- :mod:`engine.output.workbook` (the XLSX shortlist) and :mod:`engine.output.report` (the
  self-contained HTML report) build on these rows.
- :mod:`engine.output.export`: :func:`~engine.output.export.write_shortlist`, which picks
  the format from the file extension and imports the writer it needs when it is called
  (so a CSV needs neither openpyxl nor Plotly).

Every file carries the caution of :mod:`engine.base.caution`. Units at this edge: moduli in
MPa, temperatures in °C (``degC`` inside the unit brackets of column headings and setting
names, as in the import format; °C in sentences), frequencies in Hz, pad area in mm2, sag
in mm.

CSV layout: UTF-8 with a byte-order mark (spreadsheets then read the text correctly), one
header row, then one row per grade (passing grades in rank order, then the excluded ones)
and nothing else, so that a plain ``pandas.read_csv(path)`` reads exactly the grade rows;
text cells are always quoted. The last two columns carry the file's own notes in every
row: ``caution`` (:data:`engine.base.caution.CAUTION_LINE` and the full caution, on one
line) and ``provenance`` (one line: quietgrade version, the library's location, when the
file was written and when ranked, the window, how the intervals were made, grades that
could not be ranked; :func:`provenance_line`). No text becomes a live formula in a
spreadsheet (:func:`formula_safe`; common practice): a text cell that begins with ``=``,
``+``, ``-``, ``@``, a tab, a carriage return or a NUL, at once or after white space,
gets a leading ``'``, and so does each part of it after a semicolon, a tab or a line
break (where a spreadsheet that splits at semicolons or tabs starts a new cell); a plain
number (``-20``, ``-1.5e-3``) is left as it is.
"""

from __future__ import annotations

import io
import math
import re
from datetime import UTC, datetime

import numpy as np
from scipy.interpolate import make_interp_spline

from engine.base.caution import CAUTION, CAUTION_LINE
from engine.library.store import Library
from engine.selection.criteria import SCREENING_NOTE
from engine.selection.ranking import RankResult

FORMULA_START = ("=", "+", "-", "@", "\t", "\r", "\0")
_PLAIN_NUMBER = re.compile(r"\s*[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?\s*")
# Where a spreadsheet may start a new cell inside a quoted text cell (one that splits at
# semicolons or tabs reads the quotes as text).
_CELL_BREAK = re.compile(r"([;\t\r\n]+)")


# -- rows --------------------------------------------------------------------------------
def finite(value) -> float | None:
    """A float, or None where the value is missing or not finite."""
    if value is None:
        return None
    v = float(value)
    return v if math.isfinite(v) else None


def _finite_max(values) -> float | None:
    a = np.asarray(values, dtype=float)
    a = a[np.isfinite(a)]
    return float(a.max()) if a.size else None


def _finite_min(values) -> float | None:
    a = np.asarray(values, dtype=float)
    a = a[np.isfinite(a)]
    return float(a.min()) if a.size else None


def yes_no(flag: bool) -> str:
    """A flag as the text the exports write: ``"yes"`` or ``"no"``."""
    return "yes" if flag else "no"


def index_columns(result: RankResult) -> dict[str, str]:
    """Column heading of every chosen index, e.g. ``"loss_factor (worst) [-]"``.

    Point indices name their aggregation over the window; window indices (one number per
    grade for the whole window) say ``window``.
    """
    out = {}
    for choice in result.criteria.indices:
        spec = result.specs[choice.name]
        how = choice.aggregate if spec.kind == "point" else "window"
        unit = f" [{spec.unit}]" if spec.unit else ""
        out[choice.name] = f"{choice.name} ({how}){unit}"
    return out


MOUNT_COLUMNS = (
    "pad area [mm2]",
    "fn min [Hz]",
    "fn max [Hz]",
    "worst transmissibility [-]",
    "amplification at resonance [-]",
    "max static deflection [mm]",
    "max static strain [-]",
    "long-term sag [mm]",
)
# Mount columns with a 95 % interval, and the engine.selection.spread summary figure behind each.
_MOUNT_SPREAD = {
    "fn min [Hz]": "fn_min_Hz",
    "fn max [Hz]": "fn_max_Hz",
    "worst transmissibility [-]": "worst_transmissibility",
    "max static deflection [mm]": "max_static_deflection_mm",
}
RANK_INTERVAL_COLUMNS = ("rank interval best", "rank interval worst")


def interval_heading(heading: str, end: str) -> str:
    """Heading of the ``end`` ("low" or "high") companion of a column, before its unit:
    ``"fn min [Hz]"`` -> ``"fn min low [Hz]"``."""
    name, bracket, unit = heading.rpartition(" [")
    if bracket and heading.endswith("]"):
        return f"{name} {end} [{unit}"
    return f"{heading} {end}"


def interval_columns(result: RankResult) -> dict[str, tuple[str, str]]:
    """Every column that carries a 95 % interval -> the headings of its low and high."""
    headings = list(index_columns(result).values())
    if result.mount is not None:
        headings += list(_MOUNT_SPREAD)
    return {h: (interval_heading(h, "low"), interval_heading(h, "high")) for h in headings}


def _mount_figures(figs: dict | None, spread=None) -> dict:
    """Key mount figures of one grade from :meth:`MountResult.grade`, with the intervals
    of ``spread`` (an :class:`engine.selection.spread.GradeSpread`) where it has them.

    The natural-frequency range is over the window temperatures; the worst
    transmissibility is the largest over the window temperatures and the disturbances;
    the static deflection the largest over the window temperatures.
    """
    out: dict[str, float | None] = {}
    for heading in MOUNT_COLUMNS:  # in the order of the header
        out[heading] = None
        if heading in _MOUNT_SPREAD:
            out.update(dict.fromkeys(interval_heading(heading, e) for e in ("low", "high")))
    if figs is None:
        return out
    out.update(
        {
            "pad area [mm2]": finite(figs["area_mm2"]),
            "fn min [Hz]": _finite_min(figs["natural_frequency_Hz"]),
            "fn max [Hz]": _finite_max(figs["natural_frequency_Hz"]),
            "worst transmissibility [-]": _finite_max(figs["transmissibility"]),
            "amplification at resonance [-]": _finite_max(figs["amplification_at_resonance"]),
            "max static deflection [mm]": _finite_max(figs["static_deflection_mm"]),
            "max static strain [-]": _finite_max(figs["static_strain"]),
            "long-term sag [mm]": finite(figs["sag_mm"]),
        }
    )
    summary = None if spread is None else spread.mount_summary
    if summary:
        for heading, key in _MOUNT_SPREAD.items():
            low, high = summary[key]
            out[interval_heading(heading, "low")] = finite(low)
            out[interval_heading(heading, "high")] = finite(high)
    return out


def shortlist_header(result: RankResult) -> list[str]:
    """The column headings of :func:`shortlist_rows`, in order (also without any grade).

    Each column with a 95 % interval (:func:`interval_columns`) is followed by its low
    and high; they are empty where no interval was computed (:mod:`engine.selection.spread`).
    """
    spread = interval_columns(result)
    head = ["rank", *RANK_INTERVAL_COLUMNS, "id", "name", "supplier", "family"]
    head += ["price [per kg]", "density [kg/m3]"]
    for heading in index_columns(result).values():
        head += [heading, *spread[heading]]
    head += ["score", "pareto", "passed", "reason", "failed constraints", "extrapolated"]
    if result.mount is not None:
        for heading in MOUNT_COLUMNS:
            head += [heading, *spread.get(heading, ())]
    return [*head, "notes"]


def shortlist_rows(result: RankResult) -> list[dict]:
    """One row per grade: passing grades in rank order, then the excluded ones.

    Values are numbers (None where unknown) or short texts; the keys are the column
    headings of the exports (:func:`shortlist_header`). Mount columns appear when the
    ranking checked a mount.
    """
    columns = index_columns(result)
    spread = interval_columns(result)
    pareto_on = result.criteria.pareto is not None
    rows = []
    for g in result.grades:
        best, worst = g.rank_interval or (None, None)
        row = {
            "rank": g.rank,
            RANK_INTERVAL_COLUMNS[0]: best,
            RANK_INTERVAL_COLUMNS[1]: worst,
            "id": g.id,
            "name": g.name,
            "supplier": g.supplier,
            "family": g.family,
            "price [per kg]": finite(g.price),
            "density [kg/m3]": finite(g.density),
        }
        for name, heading in columns.items():
            row[heading] = finite(g.indices.get(name))
            low, high = g.index_interval(name)
            row[spread[heading][0]] = finite(low)
            row[spread[heading][1]] = finite(high)
        row["score"] = finite(g.score)
        row["pareto"] = yes_no(g.pareto) if pareto_on and g.passed else None
        row["passed"] = "pass" if g.passed else "fail"
        row["reason"] = g.reason
        row["failed constraints"] = "; ".join(f.text() for f in g.failures) or None
        row["extrapolated"] = yes_no(g.extrapolated)
        if result.mount is not None:
            row.update(_mount_figures(g.mount, g.spread))
        row["notes"] = "; ".join(g.notes) or None
        rows.append(row)
    return rows


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


def intervals_note(result: RankResult) -> str:
    """How the rank intervals and the low/high columns were made, in one sentence."""
    if result.spread is None:
        return "Rank intervals and low/high values were not computed for this ranking."
    return result.spread.describe()


def exported_at() -> str:
    """Now, as the stamp of a file being written [UTC, ISO 8601 to the second]: a file
    says when it was made, which may be long after the (cached) ranking."""
    return datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%S")


# The file's own notes, the last two columns of every CSV row.
CSV_NOTE_COLUMNS = ("caution", "provenance")
CSV_CAUTION = f"{CAUTION_LINE}. {CAUTION}"


def provenance_line(result: RankResult, library: Library | None = None) -> str:
    """Where a shortlist file comes from, on one line: quietgrade version, the library
    (its display location, or "not given"), when the file was written (now,
    :func:`exported_at`) and when ranked [UTC], the window, how the intervals were made,
    the screening note and the grades that could not be ranked."""
    w = result.criteria.window
    where = "not given" if library is None else library.display_location
    parts = [
        f"quietgrade {result.engine_version}",
        f"library {where}",
        f"written {exported_at()} (UTC)",
        f"ranked {result.created_at} (UTC)",
        f"window {w.temp_range[0]:g} to {w.temp_range[1]:g} °C, {w.freq_range[0]:g} to "
        f"{w.freq_range[1]:g} Hz, design frequency {w.design_frequency:.4g} Hz",
        intervals_note(result),
    ]
    if result.criteria.screening_only:
        parts.append(SCREENING_NOTE)
    for gid, msg in sorted(result.fit_errors.items()):
        parts.append(f"not ranked, master curve failed: {gid}: {msg}")
    return " | ".join(_one_line(p) for p in parts)


# -- criteria, window properties, provenance ---------------------------------------------------
_CONSTRAINT_LABELS = {
    "service_covers_window": "service range must cover the window",
    "hardness_range": "hardness range [Shore A]",
    "max_price": "highest price [per kg]",
    "min_loss_factor": "lowest worst-case loss factor [-]",
    "max_transmissibility": "highest transmissibility at every temperature and disturbance [-]",
    "min_isolation_efficiency": "lowest isolation efficiency 1 - T [-]",
    "min_frequency_ratio": "lowest frequency ratio f/fn [-]",
    "max_amplification": "highest amplification passing through resonance [-]",
    "fn_range_Hz": "natural-frequency range [Hz]",
    "max_static_strain": "highest static strain incl. long-term sag [-]",
    "allow_extrapolation": "extrapolation allowed",
}
_MOUNT_LABELS = {
    "layout": ("pad layout", None),
    "mass_kg": ("total supported mass [kg]", None),
    "mounts": ("pads sharing the mass", None),
    "area_mm2": ("loaded area of one pad [mm2]", None),
    "thickness_mm": ("rubber thickness [mm]", None),
    "shape": ("pad shape", None),
    "shape_factor": ("shape factor [-]", "from the pad shape"),
    "k_factor": ("compression coefficient k [-]", "from the hardness"),
    "disturbance_Hz": ("disturbance frequencies [Hz]", None),
    "disturbance_rpm": ("disturbance speeds [rpm]", "none"),
    "harmonics": ("harmonic orders checked", None),
    "working_strain": ("working strain amplitude [-]", "small strain (DMA)"),
    "target_fn_Hz": ("target natural frequency [Hz]", "off: pad area as given"),
    "sizing_temp_C": ("sizing temperature [degC]", None),
    "service_life_h": ("service life for the sag [h]", None),
}


def _setting(value):
    """A criteria value as a spreadsheet cell: numbers stay numbers."""
    if isinstance(value, bool):
        return yes_no(value)
    if isinstance(value, int | float):
        return value
    if isinstance(value, list | tuple):
        if len(value) == 1 and isinstance(value[0], int | float) and not isinstance(value[0], bool):
            return value[0]  # a list of one number is that number
        if len(value) == 2 and all(isinstance(v, int | float) for v in value):
            return f"{value[0]:g} to {value[1]:g}"
        return ", ".join(f"{v:g}" if isinstance(v, int | float) else str(v) for v in value)
    return str(value)


def criteria_rows(result: RankResult) -> list[tuple[str, str, object]]:
    """(section, setting, value) rows that describe everything the ranking used."""
    c = result.criteria
    w = c.window
    rows: list[tuple[str, str, object]] = [
        ("report", "written at (UTC)", exported_at()),
        ("report", "ranked at (UTC)", result.created_at),
        ("report", "quietgrade version", result.engine_version),
        ("report", "grades ranked", len(result.grades)),
        ("report", "grades passing", len(result.shortlist)),
        ("report", "grades excluded", len(result.excluded)),
        ("report", "intervals", intervals_note(result)),
    ]
    for gid, msg in sorted(result.fit_errors.items()):
        rows.append(("report", f"not ranked: {gid}", f"master curve failed: {msg}"))
    rows += [
        ("window", "lowest temperature [degC]", w.temp_range[0]),
        ("window", "highest temperature [degC]", w.temp_range[1]),
        ("window", "temperature step [K]", w.temp_step),
        ("window", "lowest frequency [Hz]", w.freq_range[0]),
        ("window", "highest frequency [Hz]", w.freq_range[1]),
        ("window", "frequencies in the band", w.freq_points),
        ("window", "design frequency [Hz]", w.design_frequency),
    ]
    for k, p in enumerate(w.duty_points, start=1):
        rows.append(
            (
                "window",
                f"duty point {k}",
                f"{p.temperature_C:g} °C, {p.frequency_Hz:g} Hz, share {p.share:g}",
            )
        )
    rows.append(("design", "design type", c.design))
    if c.screening_only:
        rows.append(("design", "mount", SCREENING_NOTE))
    rows.append(("design", "loss-factor threshold of the damping span [-]", c.eta_threshold))
    for choice in c.indices:
        spec = result.specs[choice.name]
        section = f"index {choice.name}"
        rows += [
            (section, "label", spec.label),
            (section, "unit", spec.unit or "-"),
            (section, "weight", choice.weight),
            (
                section,
                "aggregation",
                choice.aggregate if spec.kind == "point" else "one value for the window",
            ),
            (
                section,
                "direction",
                "higher is better" if spec.higher_is_better else "lower is better",
            ),
        ]
        if choice.formula is not None:
            rows.append((section, "formula", choice.formula))
    rows.append(("ranking", "Pareto pair", "off" if c.pareto is None else ", ".join(c.pareto)))
    for key, value in c.constraints.to_dict().items():
        label = _CONSTRAINT_LABELS.get(key, key)
        if value is None and key == "max_static_strain" and result.mount is not None:
            value = f"{result.mount.strain_limit:g} (the layout's common-practice limit)"
        rows.append(("constraint", label, "off" if value is None else _setting(value)))
    if c.mount is not None:
        for key, value in c.mount.to_dict().items():
            label, when_none = _MOUNT_LABELS.get(key, (key, None))
            blank = value is None or (isinstance(value, list) and not value)
            shown = (when_none or "off") if blank else _setting(value)
            rows.append(("mount", label, shown))
        rows.append(("mount", "mass per pad [kg]", c.mount.mass_per_pad))
        rows.append(("mount", "disturbances checked", ", ".join(c.mount.disturbance_labels())))
    return rows


WINDOW_COLUMNS = (
    "rank",
    "id",
    "name",
    "passed",
    "temperature [degC]",
    "frequency [Hz]",
    "storage modulus E' [MPa]",
    "loss modulus E'' [MPa]",
    "loss factor [-]",
    "extrapolated",
)


def window_properties(result: RankResult):
    """E', E'', flags of every grade at the window temperatures and the design frequency.

    Returns (frequency [Hz], storage (grades, T) [Pa], loss [Pa], extrapolated, note)
    with rows in the order of ``result.window_props.ids``.

    Notes
    -----
    Sources, in order of preference (the note says which one was used):
    the temperature path the ranking evaluated at the design frequency (``path_*``,
    1 K steps) when every window temperature lies on it; else the window grid when the
    design frequency is one of the band frequencies (the default design frequency, the
    geometric mean of the band, is the middle one of an odd number of points); else the
    path interpolated linearly in log10 modulus between its two neighbouring points,
    flagged as extrapolated where either neighbour is; else, without a path, the grid at
    the band frequency nearest the design frequency.
    """
    props = result.window_props
    temps = np.asarray(props.temperatures, dtype=float)
    design_f = result.criteria.window.design_frequency
    tensile = "moduli are tensile-equivalent (shear data converted with E = 2(1 + nu) G)"
    at_design = f"At the design frequency {design_f:.4g} Hz"
    has_path = props.path_storage is not None
    if has_path:
        assert props.path_storage is not None and props.path_loss is not None
        assert props.path_extrapolated is not None  # the path arrays are set together
        pt = np.asarray(props.path_temperatures, dtype=float)
        on_path = np.isclose(pt[:, None], temps[None, :], atol=1e-9, rtol=0)
        if on_path.any(axis=0).all():
            idx = on_path.argmax(axis=0)
            note = f"{at_design}, from the temperature path of the ranking; {tensile}."
            return (
                design_f,
                props.path_storage[:, idx],
                props.path_loss[:, idx],
                props.path_extrapolated[:, idx],
                note,
            )
    on_band = np.isclose(props.frequencies, design_f, rtol=1e-9, atol=0)
    if on_band.any() or not has_path:
        j = (
            int(np.argmax(on_band))
            if on_band.any()
            else int(np.argmin(np.abs(np.log10(props.frequencies / design_f))))
        )
        f_used = float(props.frequencies[j])
        if on_band.any():
            note = f"{at_design}, from the window grid of the ranking; {tensile}."
        else:
            note = (
                f"At {f_used:.4g} Hz, the band frequency nearest the design frequency "
                f"{design_f:.4g} Hz, from the window grid of the ranking; {tensile}."
            )
        return (
            f_used,
            props.storage[:, :, j],
            props.loss[:, :, j],
            props.extrapolated[:, :, j],
            note,
        )
    # Only a window with a temperature path gets here.
    assert props.path_storage is not None and props.path_loss is not None
    assert props.path_extrapolated is not None
    log_s = make_interp_spline(pt, np.log10(props.path_storage), k=1, axis=1)(temps)
    log_l = make_interp_spline(pt, np.log10(props.path_loss), k=1, axis=1)(temps)
    right = np.clip(np.searchsorted(pt, temps), 0, pt.size - 1)
    left = np.clip(np.searchsorted(pt, temps, side="right") - 1, 0, pt.size - 1)
    extrap = props.path_extrapolated[:, left] | props.path_extrapolated[:, right]
    note = (
        f"{at_design}, from the temperature path of the ranking (1 K steps), interpolated "
        f"linearly in log modulus at window temperatures between path points; {tensile}."
    )
    return design_f, 10.0**log_s, 10.0**log_l, extrap, note


def window_rows(result: RankResult) -> tuple[list[dict], str]:
    """Rows of the window-properties table (grades in result order) and its note."""
    freq, storage, loss, extrap, note = window_properties(result)
    where = {gid: k for k, gid in enumerate(result.window_props.ids)}
    temps = result.window_props.temperatures
    rows = []
    for g in result.grades:
        k = where[g.id]
        for i, t in enumerate(temps):
            rows.append(
                {
                    "rank": g.rank,
                    "id": g.id,
                    "name": g.name,
                    "passed": "pass" if g.passed else "fail",
                    "temperature [degC]": float(t),
                    "frequency [Hz]": float(freq),
                    "storage modulus E' [MPa]": finite(storage[k, i] / 1e6),
                    "loss modulus E'' [MPa]": finite(loss[k, i] / 1e6),
                    "loss factor [-]": finite(loss[k, i] / storage[k, i]),
                    "extrapolated": yes_no(bool(extrap[k, i])),
                }
            )
    return rows, note


PROVENANCE_COLUMNS = (
    "record",
    "grade id",
    "file name",
    "file kind",
    "sha256",
    "size [bytes]",
    "rows",
    "points",
    "data hash",
    "imported at",
)


def provenance_rows(result: RankResult, library: Library | None) -> list[dict]:
    """Library imports, then the data set each ranked grade's master curve was fitted to.

    The data set used is the newest one of the grade (as :func:`engine.library.fits.fit_library`
    takes it).
    """
    if library is None:
        return []
    rows = []
    for imp in library.imports():
        rows.append(
            {
                "record": "library import",
                "grade id": None,
                "file name": imp["file_name"],
                "file kind": imp["kind"],
                "sha256": imp["sha256"],
                "size [bytes]": imp["size_bytes"],
                "rows": imp["rows"],
                "points": None,
                "data hash": None,
                "imported at": imp["imported_at"],
            }
        )
    newest = {}
    for data_set in library.datasets():
        newest[data_set.material_id] = data_set  # ordered by data set id within a grade
    for g in result.grades:
        ds = newest.get(g.id)
        rows.append(
            {
                "record": "data set used",
                "grade id": g.id,
                "file name": ds.file_name if ds else "not in this library",
                "file kind": "sweep" if ds else None,
                "sha256": ds.sha256 if ds else None,
                "size [bytes]": None,
                "rows": None,
                "points": ds.n_points if ds else None,
                "data hash": ds.data_hash if ds else None,
                "imported at": ds.imported_at if ds else None,
            }
        )
    return rows


# -- CSV -----------------------------------------------------------------------------------
def csv_cell(value) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return yes_no(value)
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return "" if not math.isfinite(value) else f"{value:.6g}"
    text = formula_safe(str(value))
    return '"' + text.replace('"', '""') + '"'


def _starts_formula(text: str) -> bool:
    """Whether a spreadsheet could run ``text`` as a formula: it begins with one of
    :data:`FORMULA_START`, at once or after white space, and is not a plain number."""
    opens = text.startswith(FORMULA_START) or text.lstrip().startswith(FORMULA_START)
    return opens and not _PLAIN_NUMBER.fullmatch(text)


def _defused(field: str) -> str:
    """A field a spreadsheet splits out, with a ``'`` after its leading white space where
    it would begin a formula."""
    body = field.lstrip()
    if _starts_formula(body):
        return field[: len(field) - len(body)] + "'" + body
    return field


def formula_safe(text: str) -> str:
    """A text cell that no spreadsheet runs as a formula (common practice).

    A leading ``'`` where the text begins a formula (one of :data:`FORMULA_START`, at
    once or after white space, and not a plain number such as ``-20`` or ``-1.5e-3``),
    and the same after each semicolon, tab or line break inside it, where a spreadsheet
    that splits at semicolons or tabs starts a new cell. Other text is unchanged.
    """
    if _starts_formula(text):
        text = "'" + text
    pieces = _CELL_BREAK.split(text)
    for k in range(2, len(pieces), 2):  # the parts after a break
        pieces[k] = _defused(pieces[k])
    return "".join(pieces)


def shortlist_csv(result: RankResult, library: Library | None = None) -> bytes:
    """The shortlist as CSV bytes (UTF-8 with BOM); see the module notes for the layout.

    ``library`` names the library in the provenance column (its display location)."""
    rows = shortlist_rows(result)
    header = [*shortlist_header(result), *CSV_NOTE_COLUMNS]
    notes = [csv_cell(CSV_CAUTION), csv_cell(provenance_line(result, library))]
    out = io.StringIO()
    out.write(",".join(csv_cell(h) for h in header) + "\r\n")
    for row in rows:
        out.write(",".join([*(csv_cell(row[h]) for h in header[:-2]), *notes]) + "\r\n")
    return ("\ufeff" + out.getvalue()).encode("utf-8")
