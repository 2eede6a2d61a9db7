"""Writing a shortlist file: the extension (.csv, .xlsx, .html) picks the format.

The rows and the CSV are :mod:`engine.output.rows`, the workbook
:mod:`engine.output.workbook`, the report :mod:`engine.output.report`; the names of
:mod:`engine.output.rows` that callers use are re-exported here.
"""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path

from engine.base.errors import CriteriaError, InputError
from engine.curves.mastercurve import MasterCurve
from engine.library.store import Library
from engine.output.rows import (
    CSV_NOTE_COLUMNS,
    MOUNT_COLUMNS,
    PROVENANCE_COLUMNS,
    RANK_INTERVAL_COLUMNS,
    WINDOW_COLUMNS,
    criteria_rows,
    finite,
    formula_safe,
    index_columns,
    interval_columns,
    interval_heading,
    intervals_note,
    provenance_line,
    provenance_rows,
    shortlist_csv,
    shortlist_header,
    shortlist_rows,
    window_properties,
    window_rows,
    yes_no,
)
from engine.selection.results import RankResult

EXTENSIONS = (".csv", ".xlsx", ".html")


def write_shortlist(
    result: RankResult,
    path: str | Path,
    library: Library | None = None,
    curves: Mapping[str, MasterCurve] | None = None,
) -> Path:
    """Write the shortlist to ``path``; the extension (.csv, .xlsx, .html) picks the format.

    The parent folder is created when missing. Every format carries the caution. Text
    from data is never live in the file: in the CSV a text cell that a spreadsheet would
    run as a formula gets a leading ``'`` (:func:`~engine.output.rows.formula_safe`); the
    workbook stores text as text and numbers as numbers; the report escapes it for HTML
    and SVG and holds no script (its charts are static SVG, :mod:`engine.output.svgchart`).

    Parameters
    ----------
    result : RankResult
        The ranking to write.
    path : str or Path
        ``.csv`` (one row per grade, the caution and the provenance in the last two
        columns of every row), ``.xlsx`` (workbook of five sheets) or ``.html`` (a
        self-contained report with its charts).
    library : Library, optional
        Adds the provenance of each grade's data (files, hashes, import dates; in the
        CSV the library's location).
    curves : mapping of grade id to MasterCurve, optional
        Master curves for the report's charts.

    Returns
    -------
    Path
        The path written.

    Raises
    ------
    CriteriaError
        For an extension that is not a shortlist format.
    InputError
        For a path that cannot be written (no permission, a folder in the way, a full
        disk), naming the file and the reason.

    Examples
    --------
    >>> write_shortlist(None, "shortlist.pdf")
    Traceback (most recent call last):
    ...
    engine.base.errors.CriteriaError: shortlist file shortlist.pdf: '.pdf' is not a ... .html

    A whole selection that ends in a shortlist file is the example of :mod:`engine.api`.
    """
    p = Path(path)
    suffix = p.suffix.lower()
    if suffix not in EXTENSIONS:
        shown = f"'{p.suffix}'" if p.suffix else "no extension"
        raise CriteriaError(
            f"shortlist file {p.name}: {shown} is not a shortlist format; accepted "
            f"extensions: {', '.join(EXTENSIONS)}"
        )
    if suffix == ".csv":
        data = shortlist_csv(result, library)
    elif suffix == ".xlsx":
        from engine.output.workbook import shortlist_xlsx

        data = shortlist_xlsx(result, library)
    else:
        from engine.output.report import report_html

        data = report_html(result, library, curves).encode("utf-8")
    try:
        p.parent.mkdir(parents=True, exist_ok=True)
        p.write_bytes(data)
    except OSError as exc:
        raise InputError(
            f"cannot write the shortlist here: {exc.strerror or exc}", file=str(p)
        ) from None
    return p


__all__ = [
    "CSV_NOTE_COLUMNS",
    "EXTENSIONS",
    "MOUNT_COLUMNS",
    "PROVENANCE_COLUMNS",
    "WINDOW_COLUMNS",
    "RANK_INTERVAL_COLUMNS",
    "criteria_rows",
    "finite",
    "formula_safe",
    "index_columns",
    "interval_columns",
    "interval_heading",
    "intervals_note",
    "provenance_line",
    "provenance_rows",
    "shortlist_csv",
    "shortlist_header",
    "shortlist_rows",
    "window_properties",
    "window_rows",
    "write_shortlist",
    "yes_no",
]
