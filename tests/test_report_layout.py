"""The HTML report as purchasing reads and prints it: key figures first, readable
headings, notes folded, one copy of the chart library, a print stylesheet; the files'
stamp is the time they are written."""

from __future__ import annotations

import re
from datetime import UTC, datetime

import pytest

from engine.curves.mountcheck import default_mount
from engine.library.demo import DEMO_DIR
from engine.library.fits import fit_library
from engine.library.importer import import_files
from engine.library.store import Library
from engine.output.report import report_html
from engine.output.rows import criteria_rows
from engine.selection.ranking import Criteria, rank


@pytest.fixture(scope="module")
def ranked(tmp_path_factory):
    db = tmp_path_factory.mktemp("report") / "demo.db"
    lib = Library(str(db))
    import_files(lib, [DEMO_DIR / "catalog.csv"], [DEMO_DIR / "sweeps.csv"])
    curves, errors = fit_library(lib, processes=1)
    criteria = Criteria(mount=default_mount())
    result = rank(curves, {m.id: m for m in lib.materials()}, criteria, errors)
    assert result.shortlist
    return result, lib, curves


def _headings(text: str) -> list[str]:
    table = text.split("<h2>Ranked shortlist</h2>", 1)[1].split("</thead>", 1)[0]
    return re.findall(r"<th>(.*?)</th>", table)


def test_key_figures_lead_the_ranked_table(ranked):
    text = report_html(*ranked)
    head = _headings(text)
    # rank, grade, the key figures, then the reason: all within the first eight columns.
    assert head[:2] == ["rank", "grade"]
    assert "score" in head[:4] and "worst T" in head[:8] and "sag [mm]" in head[:8]
    assert head.index("reason") < 9 and head[-1] == "notes"
    # No raw identifier as a heading (common practice: labels a reader can read).
    assert not [h for h in head if "_" in h], head


def test_notes_fold_and_print_stylesheet(ranked):
    text = report_html(*ranked)
    assert "<details><summary>notes</summary>" in text
    assert "@media print" in text and "size: A4 landscape" in text
    assert text.count("* plotly.js v") == 1  # the chart library once


def test_stamp_is_the_time_of_writing(ranked):
    result = ranked[0]
    before = datetime.now(UTC).replace(microsecond=0, tzinfo=None)
    stamp = dict(((s, k), v) for s, k, v in criteria_rows(result))[("report", "written at (UTC)")]
    written = datetime.fromisoformat(stamp)
    assert before <= written <= datetime.now(UTC).replace(tzinfo=None)
