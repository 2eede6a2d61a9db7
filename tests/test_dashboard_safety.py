"""Text from data is shown as written on every dashboard page, never as markup.

A library whose ids, names, suppliers, families and notes carry markdown, Streamlit
directives and HTML (a remote image, a link, coloured text, a fake heading) is driven
through every page with Streamlit's AppTest; every markdown source the pages hand to
the browser (markdown, captions, message boxes, expander and widget labels) must hold
those texts in their escaped form only, and the Plotly figures must carry them as
entities (``engine.output.mapfigure.plot_text``). The escaping rules are those of
CommonMark 0.31 (backslash escapes of ASCII punctuation, section 2.4; entity and numeric
character references, 2.5; raw HTML and autolinks open with ``<``, 6.5 and 6.6), of
GitHub Flavored Markdown (autolink literals ``http://``, ``www.`` and e-mail, section
6.9) and of Plotly's label markup (``<b>``, ``<a href>``, ``<br>``; ``%{...}`` template
placeholders). A real-browser check (Debian's chromium through Playwright) reads the
rendered DOM: no image from the data, no link to the data's address. The grades' data
are the invented demo data under hostile ids (input only, never a check value).
"""

from __future__ import annotations

import csv
import io
import re
import urllib.parse
import urllib.request
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("streamlit")

import streamlit as st  # noqa: E402
from streamlit.testing.v1 import AppTest  # noqa: E402

from dashboard.common import plain  # noqa: E402
from engine.library.fits import fit_library  # noqa: E402
from engine.library.importer import import_files  # noqa: E402
from engine.library.store import Library  # noqa: E402
from engine.output.mapfigure import plot_text  # noqa: E402
from tests.helpers import CHROMIUM, CHROMIUM_ARGS, served_dashboard  # noqa: E402
from tests.offloop import off_the_event_loop  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
APP = str(ROOT / "dashboard" / "app.py")
DEMO = ROOT / "demo_materials"
PAGES = ("views/map.py", "views/curves.py", "views/mount.py", "views/shortlist.py")

IMAGE = "http://127.0.0.1:9/p.png"
EVIL = "http://evil"
# Ids, names and notes that would be markup if rendered as markdown or Plotly labels.
HOSTILE_IDS = (f"X![i]({IMAGE})", "Y:red[alert]", "Z<img src=x onerror=alert(1)>")
HOSTILE_NAME = "**bold** [link](http://x) :red[alert] <img src=x onerror=alert(1)>"
HOSTILE_NOTE = f"# Session expired — [log in]({EVIL})"
HOSTILE_SUPPLIER = f"<a href='{EVIL}'>Supplier</a> :material/warning: %{{x}}"
SAFE_ID = "BW-NR40"  # a grade whose data stay as they are, so there is a ranking
# What must never reach a markdown source from the data: its image and links, its colour
# directive (the page's own verdict colours are markup of the page), its HTML tags, its
# heading and its icon. Each counts as raw unless a backslash stands before it.
RAW_MARKUP = ("](http", "<img", ":red[alert", "<a ", "# Session", ":material/warning")
# What must never reach a Plotly label: HTML-like tags of the data (Plotly reads no
# markdown, so brackets there are plain).
RAW_PLOT = ("<img", "<a ")


def _demo_rows() -> tuple[list[str], list[dict], dict[str, list[list[str]]]]:
    with open(DEMO / "catalog.csv", newline="") as fh:
        reader = csv.DictReader(fh)
        header, catalog = list(reader.fieldnames or []), list(reader)
    sweeps: dict[str, list[list[str]]] = {}
    with open(DEMO / "sweeps.csv", newline="") as fh:
        for row in list(csv.reader(fh))[1:]:
            sweeps.setdefault(row[0], []).append(row[1:])
    return header, catalog, sweeps


def write_hostile_library(db: Path) -> Path:
    """The demo grade SAFE_ID and three copies of other demo grades under HOSTILE_IDS with
    the hostile name, supplier and note, imported and fitted into ``db``."""
    header, catalog, sweeps = _demo_rows()
    by_id = {c["id"]: c for c in catalog}
    bases = [c["id"] for c in catalog if c["id"] in sweeps and c["id"] != SAFE_ID][:3]
    rows = [by_id[SAFE_ID]]
    sweep = io.StringIO()
    out = csv.writer(sweep, lineterminator="\n")
    out.writerow(
        ["material", "temperature [degC]", "frequency [Hz]"]
        + ["storage_modulus [MPa]", "loss_factor"]
    )
    for row in sweeps[SAFE_ID]:
        out.writerow([SAFE_ID, *row])
    for gid, base in zip(HOSTILE_IDS, bases, strict=True):
        rows.append(
            dict(
                by_id[base],
                id=gid,
                name=HOSTILE_NAME,
                supplier=HOSTILE_SUPPLIER,
                family=HOSTILE_NAME,
                notes=HOSTILE_NOTE,
            )
        )
        for row in sweeps[base]:
            out.writerow([gid, *row])
    cat = io.StringIO()
    writer = csv.DictWriter(cat, fieldnames=header, lineterminator="\n")
    writer.writeheader()
    writer.writerows(rows)
    folder = db.parent
    (folder / "catalog.csv").write_text(cat.getvalue(), encoding="utf-8")
    (folder / "sweeps.csv").write_text(sweep.getvalue(), encoding="utf-8")
    lib = Library(str(db))
    import_files(lib, [folder / "catalog.csv"], [folder / "sweeps.csv"])
    fit_library(lib, processes=1)
    return db


@pytest.fixture(scope="module")
def hostile_db(tmp_path_factory):
    return write_hostile_library(tmp_path_factory.mktemp("hostile") / "hostile.sqlite")


DRAWN: list = []  # every figure a page handed to st.plotly_chart


@pytest.fixture(autouse=True)
def record_charts(monkeypatch):
    draw = st.plotly_chart

    def plotly_chart(figure_or_data, *args, **kwargs):
        DRAWN.append(figure_or_data)
        return draw(figure_or_data, *args, **kwargs)

    DRAWN.clear()
    monkeypatch.setattr(st, "plotly_chart", plotly_chart)


def app(monkeypatch, db, **query) -> AppTest:
    monkeypatch.setenv("QUIETGRADE_DB", str(db))
    at = AppTest.from_file(APP, default_timeout=90)
    for key, value in query.items():
        at.query_params[key] = value
    return at.run()


def markdown_sources(at: AppTest) -> list[str]:
    """Every markdown source on the page: markdown and captions, message boxes, and the
    labels of expanders, checkboxes and other widgets (Streamlit renders them as markdown)."""
    kinds = (at.markdown, at.caption, at.error, at.warning, at.info, at.success)
    out = [e.value for kind in kinds for e in kind]
    out += [e.label for e in at.expander]
    for kind in ("checkbox", "toggle", "button", "selectbox", "multiselect", "radio"):
        out += [str(e.label) for e in at.get(kind)]
    return out


def unescaped(source: str) -> list[str]:
    """The raw markup of RAW_MARKUP in ``source`` (a backslash before it escapes it)."""
    return [
        mark
        for mark in RAW_MARKUP
        for m in re.finditer(re.escape(mark), source)
        if not source[: m.start()].endswith("\\")
    ]


def plot_labels(fig) -> list[str]:
    """The texts Plotly renders as label markup: trace names, hover templates, texts and
    hover texts, titles and annotations (custom data show only through a template)."""
    spec = fig.to_dict()
    out = []
    for t in spec.get("data", []):
        for key in ("name", "hovertemplate", "text", "hovertext"):
            value = t.get(key)
            if isinstance(value, np.ndarray):
                value = value.tolist()
            if isinstance(value, str):
                out.append(value)
            elif isinstance(value, list | tuple):
                out += [v for v in value if isinstance(v, str)]
    layout = spec.get("layout", {})
    title = layout.get("title")
    if isinstance(title, dict) and isinstance(title.get("text"), str):
        out.append(title["text"])
    out += [a.get("text", "") for a in layout.get("annotations", [])]
    return out


# -- the escaping itself -------------------------------------------------------------


@pytest.mark.parametrize(
    ("text", "escaped"),
    [
        # CommonMark 2.4: an ASCII punctuation character after a backslash is literal.
        (f"X![i]({IMAGE})", "X![i\\](http\\://127.0.0.1:9/p.png)"),
        # A "]" that would close a link's text; a "[" at the start (a definition).
        ("[a][b] [c]: d", "\\[a\\][b] [c]: d"),
        ("speeds [rpm]: 'fast'", None),
        ("**bold** _it_ `code`", "\\*\\*bold\\*\\* \\_it\\_ \\`code\\`"),
        # Streamlit's colour and icon directives; its logo shortcode (common practice).
        (":red[alert]", "\\:red[alert]"),
        (":material/home:", "\\:material\\/home:"),
        (":streamlit:", "\\:streamlit\u2060:"),
        # CommonMark 6.5/6.6: "<" + letter opens raw HTML or an autolink.
        ("<img src=x>", "&lt;img src=x>"),
        ("<http://evil>", "&lt;http\\://evil>"),
        # CommonMark 2.5: a character reference is decoded; its "&" written as an entity.
        ("&lt;b&gt;", "&amp;lt;b&amp;gt;"),
        # GFM 6.9: autolink literals.
        ("www.evil.com a@b.c", "www\\.evil.com a\\@b.c"),
        # CommonMark 4.2, 5.1, 5.2, 5.3: block markers at the start of a line.
        ("# Session expired", "\\# Session expired"),
        ("- item", "\\- item"),
        ("> quote", "&gt; quote"),
        ("12. item", "12\\. item"),
        # Math and tables, strike-through (common practice: Streamlit's markdown has them).
        ("$x$ | ~y~", "\\$x\\$ \\| \\~y\\~"),
        # One line: a line break would start a new block.
        ("a\n# b\r\nc", "a # b c"),
        # Text that is no markup stays as it is.
        ("needs f/fn >= 1.41 (needs < 1); Gent & Lindley: 3", None),
        ("FP-VL15: no master curve at -77.7 °C", None),
    ],
)
def test_plain_escapes_markup_and_keeps_plain_text(text, escaped):
    assert plain(text) == (text if escaped is None else escaped)


# -- every page, a hostile library -----------------------------------------------------


def test_every_page_shows_hostile_text_escaped(monkeypatch, hostile_db):
    at = app(monkeypatch, hostile_db, g=",".join((SAFE_ID, *HOSTILE_IDS)))
    assert not at.exception
    result = at.session_state["_context"].ranking()
    assert result is not None and set(HOSTILE_IDS) <= set(result.window_props.ids)
    assert set(at.session_state["compare"]) >= set(HOSTILE_IDS)
    seen_escaped = False
    for page in (*PAGES, "views/library.py"):
        DRAWN.clear()
        at.switch_page(page).run()
        assert not at.exception, f"{page}: {at.exception}"
        sources = markdown_sources(at)
        for source in sources:
            assert not unescaped(source), f"{page}: raw markup in {source!r}"
        seen_escaped |= any(plain(HOSTILE_IDS[0]) in s for s in sources)
        for fig in DRAWN:
            for label in plot_labels(fig):
                assert not any(m in label for m in RAW_PLOT), f"{page}: {label!r}"
    assert seen_escaped, "no page named a hostile grade: the check saw nothing"


def test_curves_and_mount_pages_draw_hostile_grades_with_escaped_labels(monkeypatch, hostile_db):
    at = app(monkeypatch, hostile_db, g=",".join(HOSTILE_IDS), mh="25", mt="10")
    at.switch_page("views/curves.py").run()
    assert not at.exception
    labels = [label for fig in DRAWN for label in plot_labels(fig)]
    for gid in HOSTILE_IDS:
        assert any(plot_text(gid) in label for label in labels), gid
    assert not any("<img" in label for label in labels)
    DRAWN.clear()
    at.switch_page("views/mount.py").run()
    assert not at.exception
    labels = [label for fig in DRAWN for label in plot_labels(fig)]
    assert labels, "the Mount page drew no chart"
    assert any(plot_text(HOSTILE_IDS[2]) in label for label in labels)
    assert not any("<img" in label for label in labels)
    folds = [e.label for e in at.expander if e.label.startswith("Notes on ")]
    assert all(not unescaped(f) for f in folds)


def test_library_page_shows_a_hostile_import_error_escaped(monkeypatch, hostile_db):
    cell = f"![x]({IMAGE}) [log in]({EVIL})"
    bad = (
        "material,temperature [degC],frequency [Hz],storage_modulus [MPa],loss_factor\n"
        f'"{cell}",20,1,5,0.1\n'
    ).encode()
    at = app(monkeypatch, hostile_db)
    at.switch_page("views/library.py").run()
    at.file_uploader(key="upload_format_0").set_value(("bad.csv", bad, "text/csv")).run()
    assert not at.exception
    errors = [e.value for e in at.error]
    assert any(plain(cell) in e for e in errors), errors
    assert not any(unescaped(e) for e in errors)


def test_a_link_parameter_echoed_in_a_message_is_escaped(monkeypatch, hostile_db):
    value = f"**x**,[a]({EVIL})"
    at = app(monkeypatch, hostile_db, t=value)
    assert not at.exception
    notes = [w.value for w in at.warning if "link parameter ignored" in w.value]
    assert notes and all(plain(f"t={value}") in n for n in notes)
    assert not any(unescaped(n) or "**x**" in n for n in notes)
    # The comparison set from the link: an unknown id is dropped, never shown as markup.
    at = app(monkeypatch, hostile_db, g=f"**x**,{HOSTILE_IDS[0]}")
    assert not at.exception
    assert at.session_state["compare"] == [HOSTILE_IDS[0]]
    assert not any(unescaped(s) for s in markdown_sources(at))


def test_a_ranking_that_fails_leaves_the_other_pages_working(monkeypatch, hostile_db):
    from dashboard import data

    def broken(*args, **kwargs):
        raise ValueError("relaxation times tau must be finite and positive")

    monkeypatch.setattr(data, "rank", broken)
    data._rankings().clear()
    at = app(monkeypatch, hostile_db, le="0.0123")  # a case no earlier test ranked
    assert not at.exception
    assert any("no ranking: an unexpected ValueError" in e.value for e in at.error)
    for page in (*PAGES, "views/library.py"):
        at.switch_page(page).run()
        assert not at.exception, f"{page}: {at.exception}"
    assert at.selectbox(key="delete_grade").options, "the Library page cannot delete a grade"


def test_a_fit_step_that_fails_leaves_the_library_page_working(monkeypatch, hostile_db):
    from dashboard import data

    def broken(*args, **kwargs):
        raise StopIteration

    monkeypatch.setattr(data, "fitted_library", broken)
    store = data._fit_store()
    kept = dict(store)
    store.clear()
    try:
        at = app(monkeypatch, hostile_db)
        assert not at.exception
        assert any("master curves could not be fitted" in e.value for e in at.error)
        at.switch_page("views/library.py").run()
        assert not at.exception, at.exception
        assert set(HOSTILE_IDS) <= set(at.selectbox(key="delete_grade").options)
    finally:
        store.clear()
        store.update(kept)


# -- a real browser --------------------------------------------------------------------


@pytest.mark.browser
def test_browser_dom_holds_no_image_or_link_from_the_data(tmp_path):
    if not Path(CHROMIUM).exists():
        pytest.skip(f"chromium not found at {CHROMIUM}")
    playwright = pytest.importorskip("playwright.sync_api")
    db = write_hostile_library(tmp_path / "hostile.sqlite")
    with served_dashboard(db) as url:
        requested: list[str] = []
        ids = ",".join((SAFE_ID, *HOSTILE_IDS))

        def drive() -> None:
            with playwright.sync_playwright() as p:
                browser = p.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
                page = browser.new_page(viewport={"width": 1280, "height": 900})
                page.set_default_timeout(60_000)
                page.on("request", lambda req: requested.append(req.url))
                # Each page is read once its last element is drawn.
                for path, last in (
                    ("shortlist", "Notes on individual grades"),
                    ("library", "Imports"),
                ):
                    query = urllib.parse.urlencode({"g": ids})
                    page.goto(f"{url}/{path}?{query}")
                    page.wait_for_selector('[data-testid="stMain"] [data-testid="stHeading"]')
                    if path == "library":
                        page.get_by_role("tab", name="Data sets").click()
                    page.get_by_text(last, exact=True).first.wait_for()
                    page.wait_for_timeout(500)
                    text = page.inner_text('[data-testid="stMain"]')
                    assert not page.query_selector('[data-testid="stException"]'), path
                    images = page.eval_on_selector_all(
                        "img", "els => els.map(e => e.getAttribute('src') || '')"
                    )
                    links = page.eval_on_selector_all(
                        "a", "els => els.map(e => e.getAttribute('href') || '')"
                    )
                    assert not [s for s in images if "127.0.0.1:9" in s or s == "x"], path
                    assert not [h for h in links if h.startswith((EVIL, "http://x"))], path
                    assert not page.query_selector("h1:has-text('Session expired')"), path
                    # The texts are there, as written.
                    if path == "shortlist":
                        assert HOSTILE_IDS[0] in text, "the shortlist page names no hostile grade"
                browser.close()

        off_the_event_loop(drive)
        assert not [r for r in requested if r.startswith(("http://127.0.0.1:9", EVIL))]
