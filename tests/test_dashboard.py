"""The dashboard, driven headless with Streamlit's AppTest, and its helper modules.

The checks are behavioural: every page renders, the shown ranking follows the window and
agrees with the engine's own ranking, the comparison set is highlighted, a link
reproduces the case, and a bad import shows its one-line reason and writes nothing.
The charts are read as the pages hand them to ``st.plotly_chart`` (the figure's public
data, ``Figure.to_dict()``), matched to the charts on the page by their keys.
"""

import base64
import dataclasses
import html
import json
import re
from pathlib import Path

import numpy as np
import pytest

from tests import synthetic
from tests.crowd import CROWD_GRADES, SWEEP_HEADER, write_crowd_library

pytest.importorskip("streamlit")

import streamlit as st  # noqa: E402
from streamlit.testing.v1 import AppTest  # noqa: E402

from dashboard import case, charts, data, importing  # noqa: E402
from dashboard.common import SCREENING_CAPTION, SHOWN_LIMIT  # noqa: E402
from engine.base.caution import CAUTION  # noqa: E402
from engine.base.errors import CriteriaError, FitError, InputError  # noqa: E402
from engine.curves.mountcheck import default_mount  # noqa: E402
from engine.curves.window import OperatingWindow, tensile_factor  # noqa: E402
from engine.library.fits import fit_library, master_curve  # noqa: E402
from engine.library.importer import import_files  # noqa: E402
from engine.library.store import Library  # noqa: E402
from engine.output import mapfigure  # noqa: E402
from engine.output.palette import SET_COLOURS, grade_colours  # noqa: E402
from engine.output.report import report_html  # noqa: E402
from engine.selection.criteria import SCREENING_INDICES, SCREENING_NOTE  # noqa: E402
from engine.selection.ranking import Constraints, Criteria, rank  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
APP = str(ROOT / "dashboard" / "app.py")
PAGES = {
    "views/map.py": "Map",
    "views/curves.py": "Curves",
    "views/mount.py": "Mount",
    "views/shortlist.py": "Shortlist",
    "views/library.py": "Library",
}


DRAWN: dict = {}  # chart key -> the figure a page last handed to st.plotly_chart

# The engine's default mount (10 mm pads of 2000 mm², not sized) isolates no demo grade
# over the default window. This case, set by the link, sizes 25 mm pads for 10 Hz over
# -20 to 45 °C and 10 to 100 Hz: some grades isolate, so there is a shortlist to read.
ISOLATING = {"t": "-20,45", "f": "10,100", "mh": "25", "mt": "10"}


def isolating_state() -> dict:
    state, notes = case.from_query(ISOLATING)
    assert notes == []
    return state


@pytest.fixture(autouse=True)
def record_charts(monkeypatch):
    """Keep every figure the pages draw, under its chart's key (every chart has one)."""
    draw = st.plotly_chart

    def plotly_chart(figure_or_data, *args, **kwargs):
        DRAWN[kwargs.get("key")] = figure_or_data
        return draw(figure_or_data, *args, **kwargs)

    DRAWN.clear()
    monkeypatch.setattr(st, "plotly_chart", plotly_chart)


def figures(at: AppTest) -> list:
    """The figures of the charts on the page, in page order."""
    keys = [c.key for c in at.get("plotly_chart")]
    assert None not in keys, "a chart without a key"
    return [DRAWN[k] for k in keys]


def specs(at: AppTest) -> list[dict]:
    """The public data (``to_dict``) of the charts on the page, in page order."""
    return [fig.to_dict() for fig in figures(at)]


@pytest.fixture(scope="module")
def demo_db(tmp_path_factory):
    """An empty library file: the app's first run loads the demo grades into it."""
    return tmp_path_factory.mktemp("dash") / "dash.sqlite"


def app(monkeypatch, db, **query) -> AppTest:
    monkeypatch.setenv("QUIETGRADE_DB", str(db))
    at = AppTest.from_file(APP, default_timeout=60)
    for key, value in query.items():
        at.query_params[key] = value
    return at.run()


def shortlist_ids(at: AppTest) -> list[str]:
    tables = [d.value for d in at.dataframe if "rank" in d.value.columns]
    assert tables, "no shortlist table on the page"
    return tables[0]["grade"].tolist()


def engine_shortlist(db, criteria: Criteria) -> list[str]:
    lib = Library(str(db))
    curves, errors = fit_library(lib, processes=1)
    result = rank(curves, {m.id: m for m in lib.materials()}, criteria, errors)
    return [g.id for g in result.shortlist]


def test_empty_library_loads_demo_and_every_page_renders(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db)
    assert not at.exception
    assert any("demo grades" in i.value for i in at.info)
    assert len(Library(str(demo_db)).materials()) == 14  # demo_materials/catalog.csv rows
    for page, title in PAGES.items():
        at.switch_page(page).run()
        assert not at.exception, f"{page}: {at.exception}"
        assert at.header[0].value == title
        assert any(CAUTION in c.value for c in at.caption), f"{page}: no caution"


def test_changing_the_window_changes_the_ranking(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db, **ISOLATING)
    at.switch_page("views/shortlist.py").run()
    before = shortlist_ids(at)
    assert before and before == engine_shortlist(
        demo_db, case.criteria_from_state(isolating_state())
    )
    at.slider(key="c_temp").set_value((0.0, 40.0)).run()
    assert not at.exception
    after = shortlist_ids(at)
    state = isolating_state()
    state["c_temp"] = (0.0, 40.0)
    assert after == engine_shortlist(demo_db, case.criteria_from_state(state))
    assert after != before
    assert at.query_params["t"] == "0,40"


def test_comparison_set_is_listed_and_highlighted(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db)
    chosen = ["BW-FD30", "QC-IIR55"]
    at.multiselect(key="compare_pick").set_value(chosen).run()
    assert not at.exception
    table = [d.value for d in at.dataframe if "worst loss factor in window" in d.value.columns]
    assert table and table[0]["grade"].tolist() == chosen
    spec = map_spec(at)
    widths = {
        t["legendgroup"]: t["line"]["width"]
        for t in spec["data"]
        if t.get("legendgroup") and not t.get("fill")  # not the grade's shaded interval
    }
    others = [w for g, w in widths.items() if g not in chosen]
    assert all(widths[g] > max(others) for g in chosen)
    assert at.query_params["g"] == "BW-FD30,QC-IIR55"


def test_a_link_reproduces_the_case(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db, t="0,40", f="5,50", d="layer", le="0.05", g="FP-VL15")
    assert not at.exception
    assert at.slider(key="c_temp").value == (0.0, 40.0)
    assert at.selectbox(key="c_design").value == "damping_layer"
    assert at.multiselect(key="c_indices").value == ["loss_modulus", "damping_span"]
    assert at.session_state["compare"] == ["FP-VL15"]
    result = at.session_state["_context"].ranking()
    assert result.criteria.window.freq_range == (5.0, 50.0)
    assert result.criteria.constraints.min_loss_factor == 0.05
    assert result.criteria.mount is None  # no mount check by default for a damping layer
    assert at.query_params["d"] == "layer" and at.query_params["le"] == "0.05"


def test_a_bad_link_parameter_is_reported_and_ignored(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db, t="cold,hot")
    assert not at.exception
    assert any("t=cold,hot" in w.value for w in at.warning)
    assert at.slider(key="c_temp").value == case.DEFAULTS["c_temp"]


def test_link_values_the_widgets_cannot_hold_are_refused(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db, mm="-5", hd="-10,150", ix="loss_factor:-1:worst")
    assert not at.exception
    notes = " ".join(w.value for w in at.warning)
    assert "mass -5 is below" in notes and "hardness -10 to 150" in notes
    assert at.number_input(key="c_mass").value == case.DEFAULTS["c_mass"]


def test_invalid_case_shows_the_engine_reason(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db)
    at.toggle(key="c_cx_on").set_value(True).run()
    at.text_input(key="c_cx_formula").set_value("loss_factor +").run()
    assert not at.exception
    assert at.error and "formula" in at.error[0].value.lower()
    for page in PAGES:
        at.switch_page(page).run()
        assert not at.exception, f"{page}: {at.exception}"
    at.text_input(key="c_cx_formula").set_value("loss_factor * sqrt(storage_modulus)").run()
    assert not at.exception and not at.error
    assert "own_index" in at.session_state["_context"].ranking().specs


def test_bad_case_file_shows_the_reason(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db)
    at.file_uploader(key="case_file").set_value(("case.json", b"{not json", "application/json"))
    at.run()
    assert any("not valid JSON" in e.value for e in at.error)
    default = case.criteria_from_state(case.default_state())
    good = dataclasses.replace(
        default, window=dataclasses.replace(default.window, temp_range=(-10.0, 30.0))
    )
    payload = json.dumps(good.to_dict()).encode()
    at.file_uploader(key="case_file").set_value(("case.json", payload, "application/json"))
    at.run()
    assert not at.exception
    assert at.slider(key="c_temp").value == (-10.0, 30.0)


def test_bad_import_shows_the_reason_and_writes_nothing(monkeypatch, demo_db):
    lib = Library(str(demo_db))
    bad = (SWEEP_HEADER + "NOPE,20,1,5,0.1\n").encode()
    version = lib.version()
    with pytest.raises(InputError, match=r"bad\.csv, row 2, column 'material': unknown grade"):
        importing.plan_uploads(lib, [("bad.csv", bad)])
    preview, reason = importing.try_plan(importing.plan_uploads, lib, [("bad.csv", bad)])
    assert preview is None and "unknown grade id 'NOPE'" in reason
    at = app(monkeypatch, demo_db)
    at.switch_page("views/library.py").run()
    at.file_uploader(key="upload_format_0").set_value(("bad.csv", bad, "text/csv")).run()
    assert not at.exception
    assert any("unknown grade id 'NOPE'" in e.value for e in at.error)
    assert not [b for b in at.button if b.label == "Write to library"]
    assert lib.version() == version


def test_bad_column_mapping_names_the_problem(monkeypatch, demo_db):
    lib = Library(str(demo_db))
    export = ("run7.csv", b"Temp (C);Freq;E1 (MPa);tan d\n20;1;5,0;0,1\n")
    with pytest.raises(InputError, match="no column 'Frequency'"):
        importing.plan_mapped(
            lib,
            export,
            {"temperature": "Temp (C)", "frequency": "Frequency", "storage_modulus": "E1 (MPa)"},
            {"temperature": "degC", "frequency": "Hz", "storage_modulus": "MPa"},
            material_id="BW-NR40",
        )
    with pytest.raises(InputError, match="this is not a catalog"):
        importing.plan_mapped(
            lib,
            export,
            {
                "temperature": "Temp (C)",
                "frequency": "Freq",
                "storage_modulus": "E1 (MPa)",
                "loss_factor": "tan d",
            },
            {"temperature": "degC", "frequency": "Hz", "storage_modulus": "MPa"},
            material_id="NEW-1",
            catalogs=[("notes.csv", b"a,b\n1,2\n")],
        )
    with pytest.raises(InputError, match="no file uploaded"):
        importing.plan_uploads(lib, [])


def test_import_edit_delete_and_restore(monkeypatch, tmp_path):
    """On a library of its own: a mapped export is previewed, then written on request."""
    db = tmp_path / "own.sqlite"
    synthetic.write_catalog(tmp_path / "catalog.csv", ids=("SYN-1",))
    lib = Library(str(db))
    import_files(lib, [tmp_path / "catalog.csv"], [])
    points = synthetic.sweep(temperatures=(-30.0, -20.0, -10.0, 0.0, 10.0), frequencies=(1.0, 10.0))
    lines = ["Temp (C),Freq (Hz),E' (MPa),tan d"] + [
        f"{t:g},{f:g},{e / 1e6:.6g},{eta:.6g}" for t, f, e, eta in points
    ]
    export = ("\n".join(lines) + "\n").encode()
    guess = importing.guess_mapping(["Temp (C)", "Freq (Hz)", "E' (MPa)", "tan d"])
    assert guess["temperature"] == "Temp (C)" and guess["loss_factor"] == "tan d"

    at = app(monkeypatch, db)
    assert not at.exception
    at.switch_page("views/library.py").run()
    at.radio(key="import_how").set_value("one instrument export (map its columns)").run()
    at.file_uploader(key="upload_export_0").set_value(("run.csv", export, "text/csv")).run()
    assert not at.exception
    assert at.selectbox(key="map_unit_storage_modulus").value == "MPa"  # from "E' (MPa)"
    assert not [b for b in at.button if b.label == "Write to library"]  # no grade chosen yet
    at.selectbox(key="map_grade_id").set_value("SYN-1").run()
    version = lib.version()
    assert lib.datasets("SYN-1") == []  # previewed only
    write = [b for b in at.button if b.label == "Write to library"]
    assert write
    assert not [e for e in at.error if "run.csv" in e.value]
    write[0].click().run()
    assert not at.exception
    assert lib.version() > version
    assert lib.datasets("SYN-1")[0].n_points == len(points)

    at.session_state["catalog_editor_0"] = {
        "edited_rows": {0: {"price": 7.5}},
        "added_rows": [],
        "deleted_rows": [],
    }
    at.run()
    at.button(key="catalog_save").click().run()
    assert not at.exception
    assert lib.material("SYN-1").price == 7.5

    at.checkbox(key="delete_sure_0").check().run()
    at.button(key="delete_go").click().run()
    assert lib.deleted_ids() == ["SYN-1"]
    at.button(key="restore_go").click().run()
    assert not at.exception
    assert lib.deleted_ids() == [] and "SYN-1" in lib.existing_ids()


# -- a library too large to draw grade by grade -------------------------------------------


@pytest.fixture(scope="module")
def crowd_db(tmp_path_factory):
    """A library of CROWD_GRADES grades (tests/crowd.py), fitted once."""
    return write_crowd_library(tmp_path_factory.mktemp("crowd") / "crowd.sqlite")


def _array(value) -> np.ndarray:
    """A data array of a figure's trace: a list or array, or a typed array in plotly.js's
    documented form (``dtype``, base64 ``bdata``, optional ``shape``)."""
    if isinstance(value, dict):
        flat = np.frombuffer(base64.b64decode(value["bdata"]), dtype=value["dtype"])
        shape = value.get("shape")
        if isinstance(shape, str):
            shape = [int(n) for n in shape.split(",")]
        return flat.reshape(shape) if shape else flat
    return np.asarray(value, dtype=float)


def map_spec(at: AppTest) -> dict:
    """The map's figure data; the map is the first chart of its page."""
    charts_on_page = at.get("plotly_chart")
    assert charts_on_page and charts_on_page[0].key == "map_chart"
    return DRAWN["map_chart"].to_dict()


def drawn_widths(spec: dict, ids) -> dict[str, float]:
    """Grade -> width of the line its path is drawn with, whether its own or shared."""
    ids = set(ids)
    widths, shared = {}, {}
    for t in spec["data"]:
        if t.get("fill"):  # a grade's shaded interval
            continue
        if t.get("legendgroup") in ids:
            widths[t["legendgroup"]] = t["line"]["width"]
        elif t.get("mode") == "lines" and t.get("legendgroup"):
            shared[t["legendgroup"]] = t["line"]["width"]
    for t in spec["data"]:
        if t.get("type") == "scattergl":
            for row in t["customdata"]:
                widths[row[0]] = shared[t["legendgroup"]]
    return widths


def test_a_large_library_draws_every_grade_with_its_state(monkeypatch, crowd_db):
    at = app(monkeypatch, crowd_db, **ISOLATING)
    assert not at.exception
    lib = Library(str(crowd_db))
    curves, errors = fit_library(lib, processes=1)
    own = rank(
        curves,
        {m.id: m for m in lib.materials()},
        case.criteria_from_state(isolating_state()),
        errors,
    )
    grades = {g.id: g for g in own.grades}
    props = own.window_props
    row_of = {gid: k for k, gid in enumerate(props.ids)}
    temps = list(props.path_temperatures)
    spec = map_spec(at)
    alone = {t["legendgroup"] for t in spec["data"] if t.get("legendgroup") in grades}
    assert CROWD_GRADES > charts.CROWD_LIMIT and len(alone) < charts.CROWD_LIMIT
    marks = [t for t in spec["data"] if t.get("type") == "scattergl"]
    assert marks, "no shared trace on the map of a large library"
    shared = []
    for t in marks:
        x, y = _array(t["x"]), _array(t["y"])
        ids = [row[0] for row in t["customdata"]]
        shared += list(dict.fromkeys(ids))
        for j, ((gid, temp), state) in enumerate(zip(t["customdata"], t["hovertext"], strict=True)):
            g, k = grades[gid], row_of[gid]
            step = temps.index(temp)
            # each mark sits on its grade's path as the engine computed it...
            assert x[j] == pytest.approx(props.path_loss_factor[k][step], rel=1e-12)
            assert y[j] == pytest.approx(props.path_storage[k][step] / 1e6, rel=1e-12)
            # ...and its hover names the grade's rank or every reason it is excluded
            if g.passed:
                assert state == mapfigure.plot_text(f"rank {g.rank}")
            else:
                assert state == mapfigure.plot_text(
                    "excluded: " + "; ".join(f.text() for f in g.failures)
                )
        lines = next(
            u
            for u in spec["data"]
            if u.get("mode") == "lines" and u.get("legendgroup") == t["legendgroup"]
        )
        lx = _array(lines["x"])
        assert np.isnan(lx).sum() == len(set(ids))  # one gap after each grade's path
        assert np.array_equal(lx[~np.isnan(lx)], x)
    assert sorted(shared) == sorted(set(shared))  # no grade drawn twice
    assert alone.isdisjoint(shared) and alone | set(shared) == set(grades)
    assert any(not grades[g].passed for g in shared)  # the test covers excluded grades too
    assert any(grades[g].passed for g in shared)  # and passing ones


def test_a_large_comparison_set_is_highlighted_and_bounded(monkeypatch, crowd_db):
    at = app(monkeypatch, crowd_db)
    ids = sorted(at.session_state["_context"].ranking().window_props.ids)
    chosen = ids[: charts.CROWD_CHOSEN + 10]
    at.multiselect(key="compare_pick").set_value(chosen).run()
    assert not at.exception
    widths = drawn_widths(map_spec(at), ids)
    assert set(widths) == set(ids)
    assert min(widths[g] for g in chosen) > max(w for g, w in widths.items() if g not in chosen)
    table = [d.value for d in at.dataframe if "worst loss factor in window" in d.value.columns]
    assert table and table[0]["grade"].tolist() == chosen

    at.switch_page("views/curves.py").run()
    assert not at.exception
    assert any(f"first {SHOWN_LIMIT} of the {len(chosen)}" in c.value for c in at.caption)
    names = {t["legendgroup"].rsplit("-", 1)[0] for t in specs(at)[0]["data"]}
    assert names == set(chosen[:SHOWN_LIMIT])

    at.switch_page("views/mount.py").run()
    assert not at.exception
    assert any(f"first {SHOWN_LIMIT} of the {len(chosen)}" in c.value for c in at.caption)
    pads = [d.value for d in at.dataframe if "pad area [mm²]" in d.value.columns]
    assert pads and pads[0]["grade"].tolist() == chosen


def test_returning_to_a_window_draws_its_own_map(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db)
    first = DRAWN["map_chart"].to_json()
    at.slider(key="c_temp").set_value((0.0, 40.0)).run()
    assert "0 to 40 °C" in map_spec(at)["layout"]["title"]["text"]
    at.slider(key="c_temp").set_value(case.DEFAULTS["c_temp"]).run()
    assert not at.exception
    map_spec(at)  # the map is on the page again
    assert DRAWN["map_chart"].to_json() == first


def test_curves_page_draws_the_open_tab_and_keeps_the_reading(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db)
    at.switch_page("views/curves.py").run()
    expected = {
        "Master curve": ["Master curve of"],
        "Shift factors": ["Shift factors of"],
        "Nomogram": ["Reduced-frequency nomogram of"],
        "Transitions": ["Glass transition of"],
        "Relaxation": ["Relaxation modulus of"],
        "Data quality": ["Fit residual per isotherm of", "tan δ against"],
    }
    for tab, titles in expected.items():
        at.session_state["curves_tab"] = tab
        at.run()
        assert not at.exception, f"{tab}: {at.exception}"
        drawn = [spec["layout"]["title"]["text"] for spec in specs(at)]
        assert drawn[0].startswith("Stiffness and damping against temperature")
        assert len(drawn) == 1 + len(titles)
        assert all(d.startswith(t) for d, t in zip(drawn[1:], titles, strict=True)), tab
    at.session_state["curves_tab"] = "Nomogram"
    at.run()
    at.number_input(key="nomo_t").set_value(7.0).run()
    at.session_state["curves_tab"] = "Relaxation"
    at.run()
    at.session_state["curves_tab"] = "Nomogram"
    at.run()
    assert not at.exception
    assert at.number_input(key="nomo_t").value == 7.0  # not the default, 12


# -- 95 % intervals and the reference temperature ------------------------------------------


def chart_spec(at: AppTest, title: str) -> dict:
    """The figure spec of the chart whose title starts with ``title``."""
    for spec in specs(at):
        if spec["layout"]["title"]["text"].startswith(title):
            return spec
    raise AssertionError(f"no chart titled {title!r} on the page")


def band_points(trace: dict) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """x, upper and lower edge of every outline of a band trace (charts.band_trace)."""
    x, y = _array(trace["x"]), _array(trace["y"])
    cuts = np.flatnonzero(np.isnan(x))
    xs, highs, lows = [], [], []
    for sx, sy in zip(np.split(x, cuts), np.split(y, cuts), strict=True):
        sx, sy = sx[~np.isnan(sx)], sy[~np.isnan(sx)]
        n = sx.size // 2
        assert sx.size == 2 * n and np.array_equal(sx[n:][::-1], sx[:n]), "not a closed band"
        xs.append(sx[:n])
        highs.append(sy[:n])
        lows.append(sy[n:][::-1])
    return np.concatenate(xs), np.concatenate(highs), np.concatenate(lows)


def bands_of(spec: dict, meta: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """All band points drawn around the curve ``meta`` (inside and beyond the data)."""
    parts = [band_points(t) for t in spec["data"] if t.get("fill") and t.get("meta") == meta]
    assert parts, f"no band around {meta!r}"
    x, high, low = (np.concatenate(p) for p in zip(*parts, strict=True))
    return x, high, low


def line_values(spec: dict, name: str, x: np.ndarray) -> np.ndarray:
    """The line ``name`` (its parts inside and beyond the data joined) read at ``x``."""
    parts = [t for t in spec["data"] if t.get("name", "").startswith(name) and not t.get("fill")]
    grid = _array(parts[0]["x"])
    y = np.full(grid.size, np.nan)
    for t in parts:
        v = _array(t["y"])
        y = np.where(np.isnan(y), v, y)
    idx = np.searchsorted(grid, x)
    assert np.allclose(grid[idx], x, rtol=1e-12)
    return y[idx]


def test_band_trace_draws_one_outline_per_run():
    x = np.arange(6.0)
    low, high = np.full(6, 1.0), np.full(6, 2.0)
    high[3] = np.nan  # an edge that cannot be drawn on a log axis
    where = np.array([True, True, False, False, False, True])
    trace = charts.band_trace(x, low, high, "#2E6F73", "E'", where=where).to_plotly_json()
    bx, bhigh, blow = band_points(trace)
    # the runs widen by one point (0..2 and 4..5); point 3 has no upper edge
    assert bx.tolist() == [0.0, 1.0, 2.0, 4.0, 5.0]
    assert np.all(bhigh == 2.0) and np.all(blow == 1.0)
    assert trace["meta"] == "E'" and trace["name"] == f"E' {charts.BAND_SUFFIX}"


def test_curves_page_draws_the_fits_95_percent_intervals(monkeypatch, demo_db):
    # Two grades in the comparison set, the first (shown first) with a Tg interval.
    at = app(monkeypatch, demo_db, g="QC-EPDM60,BW-NR40")
    at.switch_page("views/curves.py").run()
    assert not at.exception
    ctx = at.session_state["_context"]
    assert ctx.compare, "no grade in the comparison set: the temperature bands go unchecked"
    focus = at.selectbox(key="curves_focus").value
    curve = ctx.curves[focus]
    assert any(charts.INTERVAL_NOTE in c.value for c in at.caption)

    # Master curve: a band around E', E'' and tan delta, equal to the engine's interval.
    spec = chart_spec(at, "Master curve of")
    m = "G" if curve.mode == "shear" else "E"
    for what, low_of, high_of, unit in (
        (f"{m}'", "storage_low", "storage_high", 1e6),
        (f"{m}''", "loss_low", "loss_high", 1e6),
        ("tan δ", "loss_factor_low", "loss_factor_high", 1.0),
    ):
        x, high, low = bands_of(spec, f"{what} master curve")
        fitted = line_values(spec, f"{what} master curve", x)
        assert np.all(low < fitted) and np.all(fitted < high), what
        band = curve.interval(curve.reference_C, x)
        assert low == pytest.approx(getattr(band, low_of) / unit, rel=1e-6)
        assert high == pytest.approx(getattr(band, high_of) / unit, rel=1e-6)

    # Temperature charts: a band around every curve of every grade shown.
    spec = chart_spec(at, "Stiffness and damping against temperature")
    frequencies = case.parse_numbers(at.text_input(key="curves_freqs").value, "f")
    for gid in at.session_state["_context"].compare[:SHOWN_LIMIT]:
        for f in frequencies:
            x, high, low = bands_of(spec, f"{gid} tan δ {f:g} Hz")
            band = ctx.curves[gid].interval(x, f)
            assert low == pytest.approx(band.loss_factor_low, rel=1e-6)
            assert high == pytest.approx(band.loss_factor_high, rel=1e-6)
            assert np.all(low < ctx.curves[gid].evaluate(x, f).loss_factor)

    # Tg: the interval on the chart's strip and in the table.
    at.session_state["curves_tab"] = "Transitions"
    at.run()
    spec = chart_spec(at, "Glass transition of")
    table = next(d.value for d in at.dataframe if "95 % low [°C]" in d.value.columns)
    known = [t for t in curve.tg if t["reached"] and t.get("low_C") is not None]
    assert known, "the demo grade shows no Tg with an interval"
    for tg in known:
        method = tg["method"].replace("_", " ")
        mark = next(t for t in spec["data"] if t.get("name") == f"Tg {method}")
        bars = mark["error_x"]
        assert mark["x"][0] + _array(bars["array"])[0] == pytest.approx(tg["high_C"])
        assert mark["x"][0] - _array(bars["arrayminus"])[0] == pytest.approx(tg["low_C"])
        row = table[table["method"] == method].iloc[0]
        assert (row["95 % low [°C]"], row["95 % high [°C]"]) == (tg["low_C"], tg["high_C"])


def test_map_shades_the_intervals_of_the_comparison_set(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db, **ISOLATING)  # the set is seeded from the shortlist
    ctx = at.session_state["_context"]
    props = ctx.ranking().window_props
    spec = map_spec(at)
    tubes = {t["meta"]: t for t in spec["data"] if t.get("fill") and t.get("meta") in props.ids}
    assert set(tubes) == set(ctx.compare) and ctx.compare
    design_f = ctx.ranking().criteria.window.design_frequency
    for gid in ctx.compare:
        k = props.ids.index(gid)
        curve = ctx.curves[gid]
        # box k: points 6k..6k+4 (eta low, E' low), (eta high, E' low), (eta high, E' high)...
        bx, by = _array(tubes[gid]["x"]).reshape(-1, 6), _array(tubes[gid]["y"]).reshape(-1, 6)
        eta_lo, eta_hi = bx[:, 0], bx[:, 1]
        e_lo, e_hi = by[:, 0], by[:, 2]
        band = curve.interval(props.path_temperatures, design_f)
        to_e = tensile_factor([curve.mode], props.poisson[k : k + 1])[0]
        assert eta_lo == pytest.approx(band.loss_factor_low, rel=1e-6)
        assert eta_hi == pytest.approx(band.loss_factor_high, rel=1e-6)
        assert e_lo == pytest.approx(band.storage_low * to_e / 1e6, rel=1e-6)
        assert e_hi == pytest.approx(band.storage_high * to_e / 1e6, rel=1e-6)
        # each point of the grade's path lies in its own box
        eta, storage = props.path_loss_factor[k], props.path_storage[k] / 1e6
        assert np.all((eta_lo < eta) & (eta < eta_hi))
        assert np.all((e_lo < storage) & (storage < e_hi))


def test_a_chosen_reference_temperature_refits_the_curves_page(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db)
    at.switch_page("views/curves.py").run()
    focus = at.selectbox(key="curves_focus").value
    automatic = at.session_state["_context"].curves[focus]
    assert at.number_input(key="curves_reference").value is None  # blank: automatic
    reference = next(t for t in (20.0, 25.0) if abs(t - automatic.reference_C) > 1)
    captions = " ".join(c.value for c in at.caption)
    assert f"Reference temperature {automatic.reference_C:.1f} °C (automatic)" in captions
    assert automatic.grouping["description"] in captions
    at.session_state["curves_tab"] = "Shift factors"
    at.run()
    before = chart_spec(at, "Shift factors of")

    at.number_input(key="curves_reference").set_value(reference).run()
    assert not at.exception
    captions = " ".join(c.value for c in at.caption)
    assert f"Reference temperature {reference:.1f} °C (chosen" in captions
    spec = chart_spec(at, f"Shift factors of {focus} (reference {reference:.1f} °C")
    marks = next(t for t in spec["data"] if t.get("name") == "from overlapping isotherms")
    old = next(t for t in before["data"] if t.get("name") == "from overlapping isotherms")
    refit = master_curve(Library(str(demo_db)), focus, reference)
    shift = refit.shift
    rows = ~np.asarray(shift.bridged, dtype=bool)
    temps, logs = _array(marks["x"]), _array(marks["y"])
    assert temps == pytest.approx(shift.temperatures[rows])
    assert logs == pytest.approx(shift.log_shift[rows], abs=1e-9)
    # referred to the chosen temperature: slower below it, faster above
    assert np.all(logs[temps < reference - 1] > 0) and np.all(logs[temps > reference + 1] < 0)
    assert not np.allclose(logs, _array(old["y"]))
    # each isotherm's 95 % interval as an error bar
    assert logs + _array(marks["error_y"]["array"]) == pytest.approx(shift.log_shift_high[rows])
    assert logs - _array(marks["error_y"]["arrayminus"]) == pytest.approx(shift.log_shift_low[rows])
    table = next(d.value for d in at.dataframe if "log10 aT" in d.value.columns)
    assert table["log10 aT"].to_numpy() == pytest.approx(shift.log_shift)
    # the ranking keeps the automatic reference
    ranked = at.session_state["_context"].curves[focus]
    assert ranked.reference_C == automatic.reference_C

    at.number_input(key="curves_reference").set_value(None).run()
    assert not at.exception
    assert chart_spec(at, f"Shift factors of {focus} (reference {automatic.reference_C:.1f} °C")


def _rgb(colour: str) -> tuple[int, int, int]:
    """The red, green and blue of a #rrggbb or rgba(...) colour."""
    if colour.startswith("#"):
        red, green, blue = (int(colour[i : i + 2], 16) for i in (1, 3, 5))
        return red, green, blue
    match = re.match(r"rgba?\((\d+), (\d+), (\d+)", colour)
    assert match, f"not a colour: {colour!r}"
    red, green, blue = (int(v) for v in match.groups())
    return red, green, blue


def test_the_report_and_the_map_page_give_a_grade_one_colour(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db, **ISOLATING)
    ctx = at.session_state["_context"]
    assert ctx.ranking().shortlist  # the report's table has rows to check
    paths = [t for t in map_spec(at)["data"] if t.get("mode") == mapfigure.PATH_MODE]
    page = {t["legendgroup"]: t["line"]["color"] for t in paths}
    report_map = mapfigure.map_figure(ctx.ranking())  # the map of the HTML report
    report = {t.legendgroup: t.line.color for t in report_map.data if t.mode == mapfigure.PATH_MODE}
    assert set(page) == set(report) == set(ctx.ranking().window_props.ids)
    # Outside the comparison set a grade has the report's colour; the set's grades take the
    # colour-blind-safe set colours (Okabe & Ito 2008), in the set's order.
    for gid in page:
        assert _rgb(page[gid]) == _rgb(ctx.colours[gid]), gid
        if gid in ctx.compare:
            assert ctx.colours[gid] == SET_COLOURS[ctx.compare.index(gid)], gid
        else:
            assert _rgb(page[gid]) == _rgb(report[gid]), gid
    text = report_html(ctx.ranking(), ctx.library, ctx.curves)
    for g in ctx.ranking().shortlist:  # the swatch beside each grade of the report's table
        swatch = (
            f'<span class="swatch" style="background:{grade_colours(ctx.curves)[g.id]}"></span>'
        )
        assert swatch + html.escape(g.name) in text, g.id


def test_shortlist_page_offers_the_downloads(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db)
    at.switch_page("views/shortlist.py").run()
    assert not at.exception
    assert not [w for w in at.warning if "exports are not available" in w.value]
    labels = {b.label for b in at.get("download_button")}
    assert {"Shortlist CSV", "Shortlist XLSX", "Report (HTML)"} <= labels


def test_curves_page_without_valid_criteria_uses_the_engines_window(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db)
    at.slider(key="c_temp").set_value((0.0, 40.0)).run()
    at.toggle(key="c_cx_on").set_value(True).run()  # a custom index with no formula
    assert at.session_state["_context"].criteria is None
    at.switch_page("views/curves.py").run()
    assert not at.exception
    w = OperatingWindow()
    freqs = f"{w.freq_range[0]:g}, {w.design_frequency:.3g}, {w.freq_range[1]:g}"
    assert at.text_input(key="curves_freqs").value == freqs
    spec = chart_spec(at, "Stiffness and damping against temperature")
    shaded = [(shape["x0"], shape["x1"]) for shape in spec["layout"]["shapes"]]
    assert shaded and all(band == w.temp_range for band in shaded)


def test_a_reference_the_fit_refuses_is_reported(monkeypatch, demo_db):
    def refuse(library, material_id, reference_C=None, vertical_shift=False):
        raise FitError(f"cannot refer {material_id} to {reference_C:g} °C")

    monkeypatch.setattr(data, "master_curve", refuse)
    at = app(monkeypatch, demo_db)
    at.switch_page("views/curves.py").run()
    at.number_input(key="curves_reference").set_value(-77.7).run()
    assert not at.exception
    focus = at.selectbox(key="curves_focus").value
    errors = [e.value for e in at.error]
    assert any(e.startswith(f"{focus}: no master curve at -77.7 °C (cannot refer") for e in errors)
    automatic = at.session_state["_context"].curves[focus].reference_C
    assert chart_spec(at, f"Master curve of {focus} at the reference temperature {automatic:.1f}")


# -- the case as widget values, criteria and link ------------------------------------------


def full_state() -> dict:
    state = case.default_state()
    state.update(
        c_temp=(-10.0, 50.0),
        c_tstep=2.5,
        c_fdesign=40.0,
        c_duty=[{"temp_C": 20.0, "freq_Hz": 25.0, "share": 3.0}],
        c_indices=["loss_factor", "stiffness_drift"],
        c_cx_on=True,
        c_cx_name="stiff_damping",
        c_cx_formula="loss_factor * sqrt(storage_modulus)",
        c_cx_hi=True,
        c_cx_w=2.0,
        c_cx_a="weighted",
        c_pareto=["loss_factor", "stiff_damping"],
        c_eta_min=0.05,
        c_price_max=12.0,
        c_hard_on=True,
        c_hard=(40.0, 70.0),
        c_trans_max=0.5,
        c_iso_min=85.0,
        c_ratio_min=2.0,
        c_amp_max=6.0,
        c_extrap=False,
        c_fn_lo=5.0,
        c_fn_hi=15.0,
        c_layout="shear",
        c_mass=90.0,
        c_mounts=3,
        c_thick=12.0,
        c_size_on=False,
        c_dist="24.7, 49.4",
        compare=["BW-NR40"],
    )
    state[case.weight_key("stiffness_drift")] = 0.5
    state[case.aggregate_key("stiffness_drift")] = "worst"
    state[case.weight_key("loss_factor")] = 1.5
    state[case.aggregate_key("loss_factor")] = "mean"
    return state


def test_case_round_trips_through_criteria_and_link():
    state = full_state()
    criteria = case.criteria_from_state(state)
    assert criteria.mount.disturbance_Hz == (24.7, 49.4)
    assert criteria.indices[-1].formula == "loss_factor * sqrt(storage_modulus)"
    con = criteria.constraints
    assert (con.max_transmissibility, con.min_isolation_efficiency) == (0.5, 0.85)
    assert (con.min_frequency_ratio, con.max_amplification) == (2.0, 6.0)
    again = case.criteria_from_state(case.state_from_criteria(criteria))
    assert again.to_dict() == criteria.to_dict()
    back, notes = case.from_query(case.to_query(state))
    assert notes == []
    assert case.criteria_from_state(back).to_dict() == criteria.to_dict()
    assert back["compare"] == ["BW-NR40"]


def test_the_default_case_is_the_engines():
    # Every default with an engine counterpart is the engine's own: the default case's
    # criteria are the engine's default criteria, which check its default mount design
    # for the default design type, an isolation mount.
    default = case.criteria_from_state(case.default_state())
    assert default == Criteria() == Criteria(mount=default_mount())
    assert not default.screening_only
    assert case.DEFAULTS["c_trans_max"] == Constraints().max_transmissibility == 1.0
    assert case.DEFAULTS["c_ratio_min"] == Constraints().min_frequency_ratio
    assert case.DEFAULTS["c_iso_min"] is Constraints().min_isolation_efficiency is None
    assert case.DEFAULTS["c_amp_max"] is Constraints().max_amplification is None
    # The mount switch off for an isolation mount: the engine's material screening.
    state = case.default_state()
    state.update(c_mount_on=False, **case.index_state("isolation_mount", False))
    screening = case.criteria_from_state(state)
    assert screening == Criteria(screening_only=True)
    assert [(c.name, c.weight, c.aggregate) for c in screening.indices] == SCREENING_INDICES
    state = case.default_state()
    state.update(c_design="general", c_mount_on=case.mount_checked_by_default("general"))
    state.update(case.index_state("general", state["c_mount_on"]))
    general = case.criteria_from_state(state)
    assert general.mount is None and general == Criteria(design="general")


def test_default_link_is_short():
    w = OperatingWindow()
    assert case.to_query(case.default_state()) == {
        "t": "{:g},{:g}".format(*w.temp_range),
        "f": "{:g},{:g}".format(*w.freq_range),
        "d": "mount",
    }


def test_sizing_a_pad_survives_the_link():
    # Sizing switched from the default case's choice (the isolation case's default pads
    # are sized) must reach the link, either way.
    state = case.default_state()
    assert state["c_size_on"] is (default_mount().target_fn_Hz is not None)
    state["c_size_on"] = not state["c_size_on"]
    back, notes = case.from_query(case.to_query(state))
    assert notes == [] and back["c_size_on"] is state["c_size_on"]
    assert case.criteria_from_state(back) == case.criteria_from_state(state)


@pytest.mark.parametrize("design", ["isolation_mount", "damping_layer", "general"])
@pytest.mark.parametrize("mount_on", [True, False])
def test_mount_switch_survives_the_link(design, mount_on):
    state = case.default_state()
    state.update(c_design=design, c_mount_on=mount_on, **case.index_state(design, mount_on))
    back, notes = case.from_query(case.to_query(state))
    assert notes == [] and back["c_mount_on"] is mount_on
    criteria = case.criteria_from_state(state)
    assert case.criteria_from_state(back) == criteria
    assert criteria.screening_only is (design == "isolation_mount" and not mount_on)
    assert (criteria.mount is None) is not mount_on


def _limits_off_state() -> dict:
    """The default case with the engine's default mount limits switched off and the
    limits it leaves off by default set."""
    state = case.default_state()
    state.update(c_trans_max=None, c_ratio_min=None, c_iso_min=70.0, c_amp_max=8.0)
    return state


def test_mount_limits_survive_the_link_and_the_case_file():
    state = _limits_off_state()
    criteria = case.criteria_from_state(state)
    con = criteria.constraints
    assert con.max_transmissibility is None and con.min_frequency_ratio is None
    assert con.min_isolation_efficiency == 0.7 and con.max_amplification == 8.0
    # The link writes a default limit switched off, not only a limit set.
    query = case.to_query(state)
    assert {k: query[k] for k in ("tm", "rr", "ie", "ra")} == {
        "tm": case.SWITCHED_OFF,
        "rr": case.SWITCHED_OFF,
        "ie": "70",
        "ra": "8",
    }
    back, notes = case.from_query(query)
    assert notes == [] and case.criteria_from_state(back) == criteria
    # The case file: the criteria's JSON, read back as the sidebar's loader does.
    loaded = Criteria.from_dict(json.loads(json.dumps(criteria.to_dict())))
    values = case.state_from_criteria(loaded)
    assert case.out_of_range(values) == []
    assert case.criteria_from_state(values) == criteria
    assert (values["c_iso_min"], values["c_amp_max"]) == (70.0, 8.0)


def test_link_mount_limits_the_widgets_cannot_hold_are_refused():
    state, notes = case.from_query({"ie": "100", "ra": "0.5", "rr": "fast"})
    assert "iso_min 100 is above 99.9" in notes and "amp_max 0.5 is below 1" in notes
    assert any(n.startswith("rr=fast: ") for n in notes)
    defaults = case.default_state()
    for key in ("c_iso_min", "c_amp_max", "c_ratio_min"):
        assert state[key] == defaults[key]


def test_default_case_shortlists_no_grade_that_amplifies(monkeypatch, demo_db):
    # The transmissibility limit is on by default (1: the mount must isolate at every
    # window temperature and disturbance). No grade on the page's shortlist has a worst
    # transmissibility of 1 or more; the grades that do are listed as excluded for it.
    at = app(monkeypatch, demo_db)
    at.switch_page("views/shortlist.py").run()
    assert not at.exception
    assert at.number_input(key="c_trans_max").value == Constraints().max_transmissibility
    result = at.session_state["_context"].ranking()
    assert result.criteria.constraints.max_transmissibility == 1.0
    mount = result.mount
    worst = {gid: np.nanmax(mount.transmissibility[k]) for k, gid in enumerate(mount.ids)}
    shown = [d.value for d in at.dataframe if "rank" in d.value.columns]
    listed = shown[0]["grade"].tolist() if shown else []
    assert listed == [g.id for g in result.shortlist]
    assert all(worst[gid] < 1.0 for gid in listed)
    amplifying = [gid for gid, t in worst.items() if t >= 1.0]
    assert amplifying, "no demo grade amplifies in the default case: the check is empty"
    excluded = " ".join(m.value for m in at.markdown)
    grades = {g.id: g for g in result.grades}
    named = 0
    for gid in amplifying:
        assert not grades[gid].passed
        k = mount.ids.index(gid)
        if mount.failing["cannot_carry"][k] or mount.failing["too_stiff"][k]:
            # An unusable pad is excused the isolation check: its own reason stands.
            failure = grades[gid].failures[0]
        else:
            failure = next(
                f for f in grades[gid].failures if f.constraint == "amplifies the disturbance"
            )
            named += 1
        assert f"**{gid}**" in excluded and failure.text() in excluded
    assert named, "some grade that carries its load amplifies: the isolation check is empty"
    # A case with a shortlist: the page's own column of worst transmissibility, below 1.
    at = app(monkeypatch, demo_db, **ISOLATING)
    at.switch_page("views/shortlist.py").run()
    table = next(d.value for d in at.dataframe if "rank" in d.value.columns)
    assert len(table) >= 2 and (table["worst transmissibility"] < 1.0).all()


def test_the_mount_switch_off_shows_a_material_screening(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db, **ISOLATING)
    for page in ("views/map.py", "views/shortlist.py"):
        at.switch_page(page).run()
        assert not any(SCREENING_CAPTION in c.value for c in at.caption), page
    at.toggle(key="c_mount_on").set_value(False).run()
    assert not at.exception
    result = at.session_state["_context"].ranking()
    assert result.criteria.screening_only and result.criteria.mount is None
    assert at.multiselect(key="c_indices").value == [n for n, _, _ in SCREENING_INDICES]
    assert at.query_params["m"] == "0"
    for page in ("views/map.py", "views/shortlist.py"):
        at.switch_page(page).run()
        assert not at.exception, page
        assert any(SCREENING_CAPTION in c.value for c in at.caption), page
    reasons = [d.value for d in at.dataframe if "rank" in d.value.columns][0]["reason"]
    assert len(reasons) and all(SCREENING_NOTE in r for r in reasons)
    # On again: the mount of the sidebar, and the isolation indices back.
    at.toggle(key="c_mount_on").set_value(True).run()
    assert not at.exception
    result = at.session_state["_context"].ranking()
    assert result.criteria == case.criteria_from_state(isolating_state())
    assert not any(SCREENING_CAPTION in c.value for c in at.caption)


def test_the_new_mount_limits_reach_the_ranking(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db, **ISOLATING)
    at.switch_page("views/shortlist.py").run()
    before = shortlist_ids(at)
    at.number_input(key="c_iso_min").set_value(72.0).run()
    at.number_input(key="c_ratio_min").set_value(2.2).run()
    at.number_input(key="c_amp_max").set_value(33.0).run()
    assert not at.exception
    con = at.session_state["_context"].ranking().criteria.constraints
    assert (con.min_isolation_efficiency, con.min_frequency_ratio) == (0.72, 2.2)
    assert con.max_amplification == 33.0
    link = tuple(at.query_params[k] for k in ("ie", "rr", "ra"))
    assert link == ("72", "2.2", "33")
    state = isolating_state()
    state.update(c_iso_min=72.0, c_ratio_min=2.2, c_amp_max=33.0)
    after = shortlist_ids(at)
    assert after == engine_shortlist(demo_db, case.criteria_from_state(state))
    assert after and set(after) < set(before)  # the tighter limits leave fewer grades


def test_case_errors_name_the_setting():
    state = case.default_state()
    state["c_dist"] = "fast"
    with pytest.raises(CriteriaError, match="disturbance frequencies: 'fast' is not a list"):
        case.criteria_from_state(state)
    state = case.default_state()
    state["c_fn_lo"] = 5.0
    with pytest.raises(CriteriaError, match="both ends of the natural-frequency range"):
        case.criteria_from_state(state)
    state = case.default_state()
    state["c_indices"] = []
    with pytest.raises(CriteriaError, match="at least one merit index"):
        case.criteria_from_state(state)
    state = case.default_state()
    state["c_duty"] = [{"temp_C": 20.0, "freq_Hz": None, "share": 1.0}]
    with pytest.raises(CriteriaError, match="both a temperature and a frequency"):
        case.criteria_from_state(state)
    state = case.default_state()
    state["c_temp"] = (40.0, 10.0)
    with pytest.raises(CriteriaError, match="inverted"):
        case.criteria_from_state(state)


def test_mount_page_says_what_the_limits_do_not_cover(monkeypatch, demo_db):
    # 30 mm compression discs sized for 10 Hz (set by the link): slender pads. The
    # engine's notes on each shown grade (buckling, assumed k factor...) must be on the
    # page beside its verdict, word for word, folded into one expander per grade.
    link = {"mh": "30", "mt": "10"}
    at = app(monkeypatch, demo_db, **link)
    at.switch_page("views/mount.py").run()
    assert not at.exception
    lib = Library(str(demo_db))
    curves, errors = fit_library(lib, processes=1)
    state, notes = case.from_query(link)
    assert notes == []
    criteria = case.criteria_from_state(state)
    assert criteria.mount.thickness_mm == 30.0 and criteria.mount.target_fn_Hz == 10.0
    result = rank(curves, {m.id: m for m in lib.materials()}, criteria, errors)
    shown = [g.id for g in result.shortlist][:3]  # the seeded comparison set
    expected = {gid: result.mount.notes.get(gid, []) for gid in shown}
    assert any(expected.values()), "the default case gives the shown grades no mount note"
    assert any("slender" in n for notes in expected.values() for n in notes)
    for gid, notes in expected.items():
        folds = [e for e in at.expander if e.label == f"Notes on {gid} ({len(notes)})"]
        assert len(folds) == (1 if notes else 0), gid
        if notes:
            lines = folds[0].markdown[0].value.split("\n")
            assert lines == [f"- {n}" for n in notes]
    # One fold per grade, no warning box per note.
    assert not any(n in w.value for w in at.warning for ns in expected.values() for n in ns)


# -- disturbances as speeds and harmonics, and the mount verdict ---------------------------


def page_texts(at: AppTest) -> list[str]:
    """Every text a reader sees on the page: markdown, captions and message boxes."""
    kinds = (at.markdown, at.caption, at.warning, at.error, at.info, at.success)
    return [e.value for kind in kinds for e in kind]


def test_speeds_and_harmonics_in_the_sidebar_reach_the_mount(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db, **ISOLATING)
    at.text_input(key="c_rpm").set_value("1480").run()
    at.text_input(key="c_dist").set_value("").run()  # speeds alone
    at.multiselect(key="c_harm").set_value([1, 2]).run()
    assert not at.exception
    assert not any("disturbance" in w.value for w in at.warning)
    design = at.session_state["_context"].ranking().criteria.mount
    assert (design.disturbance_Hz, design.disturbance_rpm, design.harmonics) == (
        (),
        (1480.0,),
        (1, 2),
    )
    # A shaft at n rpm runs at n / 60 Hz, its k-th harmonic at k n / 60 (common practice).
    assert design.frequencies == pytest.approx((1480 / 60, 2 * 1480 / 60), rel=1e-9)
    assert design.frequencies == pytest.approx((24.667, 49.333), abs=5e-4)
    link = {k: at.query_params[k] for k in ("md", "mr", "mo")}
    assert link == {"md": case.SWITCHED_OFF, "mr": "1480", "mo": "1,2"}
    back, notes = case.from_query(dict(at.query_params))
    assert notes == [] and case.criteria_from_state(back).mount == design
    at.switch_page("views/mount.py").run()
    assert not at.exception
    assert any(
        "Disturbances checked: 24.7 Hz (1480 rpm), 49.3 Hz (2 x 1480 rpm)." in c.value
        for c in at.caption
    )
    # Two disturbance frequencies: one transmissibility line per grade and frequency.
    mres = at.session_state["_context"].ranking().mount
    tr = DRAWN["mount_tr"]
    assert "a dash per disturbance" in tr.layout.yaxis.title.text
    drawn = [t for t in tr.data if t.legendgroup in mres.ids]
    shown = at.session_state["_context"].compare
    assert shown and len(drawn) == 2 * len(shown)
    for gid in shown:
        lines = [t for t in drawn if t.legendgroup == gid]
        k = mres.ids.index(gid)
        for j, line in enumerate(lines):
            assert np.allclose(line.y, mres.transmissibility[k][:, j], equal_nan=True)


def test_many_disturbances_draw_the_worst_transmissibility(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db, **ISOLATING, mo="1,2,3,4")
    at.switch_page("views/mount.py").run()
    assert not at.exception
    result = at.session_state["_context"].ranking()
    mres = result.mount
    assert result.criteria.mount.harmonics == (1, 2, 3, 4) and mres.disturbance.size == 4
    tr = DRAWN["mount_tr"]
    assert "worst transmissibility over 4 disturbances" in tr.layout.yaxis.title.text
    drawn = [t for t in tr.data if t.legendgroup in mres.ids]
    assert [t.legendgroup for t in drawn] == at.session_state["_context"].compare
    for line in drawn:
        k = mres.ids.index(line.legendgroup)
        assert np.allclose(line.y, np.nanmax(mres.transmissibility[k], axis=1))


def test_mount_page_gives_each_grade_its_verdict_once(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db, **ISOLATING)
    mres = at.session_state["_context"].ranking().mount
    passing = [g for g, v in zip(mres.ids, mres.verdict, strict=True) if v == "passes"]
    failing = sorted(
        (g for g, v in zip(mres.ids, mres.verdict, strict=True) if v == "fails"),
        key=lambda g: -len(mres.reasons(mres.ids.index(g))),
    )
    assert passing and failing, "the case needs a grade that passes and one that fails"
    chosen = [passing[0], *failing[:3]]
    at.multiselect(key="compare_pick").set_value(chosen).run()
    at.switch_page("views/mount.py").run()
    assert not at.exception
    mres = at.session_state["_context"].ranking().mount
    texts = page_texts(at)
    for gid in chosen:
        k = mres.ids.index(gid)
        lines = [t for t in texts if t.startswith(f"**{gid}** · mount verdict: ")]
        assert len(lines) == 1, gid
        word = mres.verdict[k]
        other = "fails" if word == "passes" else "passes"
        first = lines[0].split("\n")[0]
        assert f"[**{word}**]" in first and other not in first
        reasons = mres.reasons(k)
        assert bool(reasons) is (word == "fails")
        for reason in reasons:
            assert sum(t.count(reason) for t in texts) == 1, reason
            assert f"- {reason}" in lines[0].split("\n")
    assert len(mres.reasons(mres.ids.index(failing[0]))) > 1  # the test reads several
    table = next(d.value for d in at.dataframe if "mount verdict" in d.value.columns)
    assert table["grade"].tolist() == chosen
    assert table["mount verdict"].tolist() == [mres.verdict[mres.ids.index(g)] for g in chosen]


def test_bad_disturbance_input_is_reported_and_undone(monkeypatch, demo_db):
    at = app(monkeypatch, demo_db)
    at.text_input(key="c_rpm").set_value("1480").run()
    at.text_input(key="c_rpm").set_value("fast").run()
    assert not at.exception
    said = [w.value for w in at.warning if "rpm" in w.value]
    assert said == ["disturbance speeds [rpm]: 'fast' is not a list of numbers; kept 1480"]
    assert at.text_input(key="c_rpm").value == "1480"
    design = at.session_state["_context"].ranking().criteria.mount
    assert design.disturbance_rpm == (1480.0,) and design.disturbance_Hz == (24.7,)
    # No disturbance at all: the engine's reason, and the frequency kept.
    at.text_input(key="c_rpm").set_value("").run()
    at.text_input(key="c_dist").set_value("").run()
    assert not at.exception
    assert any(
        "give at least one disturbance" in w.value and w.value.endswith("kept 24.7")
        for w in at.warning
    )
    assert at.text_input(key="c_dist").value == "24.7"
    assert at.session_state["_context"].ranking() is not None
    # No harmonic order: refused, the fundamental kept.
    at.multiselect(key="c_harm").set_value([]).run()
    assert not at.exception
    assert any("harmonic orders" in w.value and "kept 1x" in w.value for w in at.warning)
    assert at.multiselect(key="c_harm").value == [1]
    # A good entry clears the message.
    at.multiselect(key="c_harm").set_value([1, 3]).run()
    assert not any("kept" in w.value for w in at.warning)
    assert at.session_state["_context"].ranking().criteria.mount.harmonics == (1, 3)


def test_disturbance_link_codes_round_trip():
    state = case.default_state()
    state.update(c_dist="", c_rpm="1480, 2960", c_harm=[2, 1, 3], c_work=0.05)
    design = case.criteria_from_state(state).mount
    assert design.disturbance_Hz == () and design.disturbance_rpm == (1480.0, 2960.0)
    assert design.harmonics == (1, 2, 3) and design.working_strain == 0.05
    query = case.to_query(state)
    assert {k: query[k] for k in ("md", "mr", "mo", "mw")} == {
        "md": case.SWITCHED_OFF,
        "mr": "1480,2960",
        "mo": "1,2,3",
        "mw": "0.05",
    }
    back, notes = case.from_query(query)
    assert notes == [] and case.criteria_from_state(back).mount == design
    # The case file: the criteria's JSON, read back as the sidebar's loader does.
    criteria = case.criteria_from_state(state)
    loaded = Criteria.from_dict(json.loads(json.dumps(criteria.to_dict())))
    values = case.state_from_criteria(loaded)
    assert case.out_of_range(values) == [] and case.criteria_from_state(values) == criteria
    # A working strain of 0 is the small-strain case, as measured: no code in the link.
    state.update(c_work=0.0)
    assert case.criteria_from_state(state).mount.working_strain is None
    assert "mw" not in case.to_query(state)
    # The defaults write none of these codes and read back as MountDesign's defaults.
    default = case.default_state()
    assert not {"md", "mr", "mo", "mw"} & set(case.to_query(default))
    d = case.criteria_from_state(default).mount
    m = default_mount()
    assert (d.disturbance_Hz, d.disturbance_rpm, d.harmonics, d.working_strain) == (
        m.disturbance_Hz,
        m.disturbance_rpm,
        m.harmonics,
        m.working_strain,
    )


def test_bad_disturbance_link_codes_are_reported_and_ignored():
    state, notes = case.from_query({"mr": "fast", "mo": "0,30", "mw": "2"})
    assert any(n.startswith("mr=fast: ") for n in notes)
    assert any(n.startswith("mo=0,30: ") and "from 1 to 20" in n for n in notes)
    assert "work 2 is above 1" in notes
    defaults = case.default_state()
    for key in ("c_rpm", "c_harm", "c_work"):
        assert state[key] == defaults[key]
    # Frequencies switched off and no speed: no disturbance left, so the default is used.
    state, notes = case.from_query({"md": case.SWITCHED_OFF})
    assert any("give at least one disturbance" in n for n in notes)
    assert state["c_dist"] == defaults["c_dist"]
    assert case.criteria_from_state(state).mount.frequencies == default_mount().frequencies


# -- screens read at a glance ------------------------------------------------------------
@pytest.fixture(scope="module")
def glance(tmp_path_factory):
    """The demo library ranked with the default mount, and its master curves."""
    from engine.library.demo import DEMO_DIR
    from engine.selection.ranking import Criteria, rank

    lib = Library(str(tmp_path_factory.mktemp("glance") / "demo.db"))
    import_files(lib, [DEMO_DIR / "catalog.csv"], [DEMO_DIR / "sweeps.csv"])
    curves, errors = fit_library(lib, processes=1)
    materials = {m.id: m for m in lib.materials()}
    return lib, curves, rank(curves, materials, Criteria(mount=default_mount()), errors)


def test_a_catalog_without_mode_is_reported_as_a_catalog(glance):
    lib = glance[0]
    version = lib.version()
    catalog = b"id,name,supplier\nNEW-1,Grade one,Somebody\n"
    with pytest.raises(InputError, match=r"cat\.csv: missing required column 'mode'"):
        importing.plan_uploads(lib, [("cat.csv", catalog)])
    _, reason = importing.try_plan(importing.plan_uploads, lib, [("cat.csv", catalog)])
    assert "material" not in reason  # not read as a sweep
    assert lib.version() == version


def test_a_refused_file_type_names_the_file_and_the_accepted_types(monkeypatch, demo_db):
    lib = Library(str(demo_db))
    with pytest.raises(InputError, match=r"case\.json: a \.json file is not accepted.*CSV, XLSX"):
        importing.plan_uploads(lib, [("case.json", b"{}")])
    with pytest.raises(InputError, match=r"run\.dat: a \.dat file is not accepted as an instr"):
        importing.read_export("run.dat", b"a,b\n1,2\n")
    at = app(monkeypatch, demo_db)
    at.switch_page("views/library.py").run()
    at.file_uploader(key="upload_format_0").set_value(
        ("case.json", b"{}", "application/json")
    ).run()
    assert not at.exception
    assert any("case.json" in e.value and "CSV, XLSX or TXT" in e.value for e in at.error)


def test_fit_notes_of_written_grades_are_the_curves_own(glance):
    lib, curves, _ = glance
    notes = importing.fit_notes(lib, ["BW-NR40", "BW-NR40", "NOPE"])
    assert list(notes) == ["BW-NR40", "NOPE"]  # each grade once
    assert notes["BW-NR40"] == list(curves["BW-NR40"].notes)
    assert notes["NOPE"][0].startswith("no master curve")


def test_static_strain_axis_is_not_set_by_one_far_grade(glance):
    from dashboard.charts.mount import STRAIN_AXIS_TOP, mount_figures, strain_axis_top

    _, curves, result = glance
    mres = result.mount
    ids = list(mres.ids)
    rows = list(range(len(ids)))
    limit = mres.strain_limit
    top = strain_axis_top(result, rows, limit)
    peaks = {ids[k]: float(np.nanmax(mres.static_strain[k])) for k in rows}
    # Twice the limit and every passing grade are inside; the axis never grows past
    # STRAIN_AXIS_TOP; a grade far above the others is cut, not followed.
    assert 2.0 * limit <= top <= STRAIN_AXIS_TOP
    assert all(peaks[g.id] <= top for g in result.shortlist)
    far = [gid for gid, peak in peaks.items() if peak > top]
    assert far, "the demo holds a grade far above the others (its check needs one)"
    assert top < 0.5 * max(peaks.values())
    fig = mount_figures(result, ids, grade_colours(curves))[3]
    assert fig.layout.yaxis.range[1] == pytest.approx(top)
    cut = [t for t in fig.data if t.name and t.name.endswith("above the axis")]
    assert {t.name.split(" above")[0] for t in cut} == set(far)
    assert all("cut off" in t.text[0] for t in cut)


def test_shortlist_table_leads_with_the_key_figures_in_words(glance):
    from dashboard import tables

    frame = tables.shortlist_frame(glance[2])
    assert list(frame.columns[: len(tables.SHORTLIST_KEY)]) == list(tables.SHORTLIST_KEY)
    assert not [c for c in frame.columns if "_" in c]  # no raw identifiers
    assert all(re.search(r"\[[^\]]+\]$", c) for c in tables.index_columns(glance[2]).values())


def test_curves_charts_read_at_a_glance(glance):
    from dashboard.charts.curves import (
        REGION_SHADES,
        nomogram_figure,
        relaxation_figure,
        transitions_figure,
    )
    from engine.output.palette import GRADE_COLOURS, WINDOW_BAND

    _, curves, _ = glance
    curve = curves["BW-NR40"]
    nomo = nomogram_figure("BW-NR40", curve, (-20.0, 60.0), (5.0, 200.0))
    e = np.asarray(nomo.data[0].y, dtype=float)
    lo, hi = nomo.layout.yaxis.range
    assert lo <= np.floor(np.log10(e.min())) and hi >= np.log10(e.max())
    tg = transitions_figure("BW-NR40", curve, None)
    fills = [s.fillcolor for s in tg.layout.shapes if s.type == "rect"]
    assert fills and WINDOW_BAND not in fills and len(set(fills)) == len(fills)
    assert set(fills) <= set(REGION_SHADES)
    assert tg.layout.yaxis2.title.standoff > 0
    relax = relaxation_figure("BW-NR40", curve, [-20.0, 60.0], list(GRADE_COLOURS))
    assert not [t for t in relax.data if t.text]  # no values beside the marks
    named = [t.name for t in relax.data if t.showlegend is not False]
    assert all("at 1 h" in n and "at 1000 h" in n for n in named)


def test_kept_rankings_stay_within_their_grade_budget(monkeypatch):
    # dashboard.data._Rankings: rankings of a large library are kept a few at a time
    # (each holds its window arrays), small ones up to RANKINGS_KEPT; the one asked for
    # last is kept longest; another version of the library drops the old one's.
    from types import SimpleNamespace

    from dashboard import data

    monkeypatch.setattr(data, "RANKINGS_KEPT_GRADES", 25_000)
    store = data._Rankings()

    def ranking(n):
        return SimpleNamespace(grades=[None] * n)

    for k in range(4):
        store.put(("lib", 1, f"window {k}"), ranking(10_000))
    assert [key[2] for key in store.kept] == ["window 2", "window 3"]
    assert store.get(("lib", 1, "window 2")) is not None  # now the newest
    store.put(("lib", 1, "window 4"), ranking(10_000))
    assert [key[2] for key in store.kept] == ["window 2", "window 4"]
    for k in range(40):
        store.put(("small", 1, f"window {k}"), ranking(14))
    assert len(store.kept) == data.RANKINGS_KEPT
    store.put(("small", 2, "window 0"), ranking(14))
    assert [key for key in store.kept if key[0] == "small"] == [("small", 2, "window 0")]
    one_large = data._Rankings()
    one_large.put(("huge", 1, "w"), ranking(100_000))  # over the budget alone: still kept
    assert one_large.get(("huge", 1, "w")) is not None


def test_rankings_that_a_new_one_would_push_out_go_before_it_is_made(monkeypatch):
    # dashboard.data._Rankings.make_room: the memory of the rankings that will be dropped
    # is freed before the new ranking's arrays are made, so they can use it.
    from types import SimpleNamespace

    from dashboard import data

    monkeypatch.setattr(data, "RANKINGS_KEPT_GRADES", 25_000)
    store = data._Rankings()
    for k in range(2):
        store.put(("lib", 1, f"window {k}"), SimpleNamespace(grades=[None] * 10_000))
    store.make_room(("lib", 1, "window 2"), 10_000)
    assert [key[2] for key in store.kept] == ["window 1"]
    store.make_room(("lib", 1, "window 2"), 30_000)  # over the budget alone: room for it
    assert not store.kept
    store.put(("lib", 1, "window 2"), SimpleNamespace(grades=[None] * 10_000))
    store.make_room(("lib", 2, "window 0"), 10)  # a new version: the old one's go
    assert not store.kept


def test_fits_set_aside_from_collections_let_earlier_garbage_go():
    # dashboard.data._set_aside_from_collections freezes what is alive (the fits of a
    # large library stay out of every full collection) but first thaws and collects what
    # an earlier call froze: a reference cycle that became garbage meanwhile is freed.
    import gc
    import weakref

    from dashboard import data

    class Node:
        pass

    node = Node()
    node.me = node  # a cycle: only the collector frees it
    gone = weakref.ref(node)
    data._set_aside_from_collections()
    assert gc.get_freeze_count() > 0
    del node
    gc.collect()
    assert gone() is not None, "frozen: left alone by collections"
    data._set_aside_from_collections()
    assert gone() is None, "thawed and collected by the next call"
    gc.unfreeze()


def test_loss_modulus_ticks_sit_where_each_decade_meets_the_frame():
    # engine.output.palette.loss_modulus_guides("ticks"): log E'' = log eta + log E'
    # (E'' = eta E', the definition of the loss factor), so the decade d meets the top
    # edge log E' = yb at log eta = d - yb and the right edge log eta = xb at log E' =
    # d - xb. Annotations already on the figure stay.
    import plotly.graph_objects as go

    from engine.output.palette import loss_modulus_guides

    fig = go.Figure(layout={"xaxis": {"type": "log", "range": [-2, 0]}})
    fig.update_layout(yaxis={"type": "log", "range": [0, 3]})
    fig.add_annotation(text="kept", x=0, y=0)
    loss_modulus_guides(fig, "ticks")
    notes = [(a.text, a.x, a.y) for a in fig.layout.annotations]
    assert notes[0] == ("kept", 0, 0)
    marks = sorted(n for n in notes[1:] if n[0] != "E'' [MPa]")
    assert marks == [("10", 0, 1), ("100", -1, 3), ("100", 0, 2)]
    assert any(n[0] == "E'' [MPa]" for n in notes)


def test_a_session_lets_go_of_its_ranking_when_its_run_ends(monkeypatch, demo_db):
    # dashboard.common.Context.let_go: a closed page's session is kept by Streamlit for
    # a while, so its context must not hold a ranking beyond those the dashboard keeps.
    # The callbacks of the next rerun get it back from the kept rankings, or ranked
    # again when those let it go; the search's button still fills the set.
    from dashboard import data

    at = app(monkeypatch, demo_db)
    at.switch_page("views/map.py").run()
    ctx = at.session_state["_context"]
    assert ctx.result is None and ctx.result_key is not None
    kept = ctx.ranking()
    assert kept is data.ranked(ctx.library, ctx.criteria)
    ctx.let_go()
    data._rankings().clear()
    again = ctx.ranking()
    assert again is not kept
    assert [g.id for g in again.grades] == [g.id for g in kept.grades]
    at.session_state["compare"] = []
    at.text_input(key="map_find").input("QC-").run()
    at.button(key="map_find_add").click().run()
    assert not at.exception
    found = at.session_state["compare"]
    assert found and all(g.startswith("QC-") for g in found)


def test_no_ranking_outlives_the_kept_ones(monkeypatch, demo_db):
    # A ranking lives as long as the dashboard keeps it (dashboard.data._Rankings), not
    # as long as a session: neither the session's context nor the Map page's widget
    # callbacks (dashboard/picking.py) hold it once the run is over.
    import gc
    import weakref

    from dashboard import data

    data._rankings().clear()  # rankings made by this test alone (a test before may hold its own)
    at = app(monkeypatch, demo_db)
    at.switch_page("views/map.py").run()
    at.slider(key="c_temp").set_value((-10.0, 40.0)).run()
    assert not at.exception
    rankings = data._rankings()
    alive = [weakref.ref(r) for r in rankings.kept.values()]
    assert len(alive) >= 2
    rankings.clear()
    gc.collect()
    assert [r for r in alive if r() is not None] == []


def test_a_callback_without_its_ranking_does_nothing(monkeypatch, demo_db):
    # Context.ranking(): a ranking that cannot be made again (say the library went
    # since) gives None, and the callbacks leave the set as it is.
    from dashboard import data, picking
    from engine.base.errors import LibraryError

    at = app(monkeypatch, demo_db)
    ctx = at.session_state["_context"]

    def gone(library, criteria):
        raise LibraryError("the library is gone")

    monkeypatch.setattr(data, "ranked", gone)
    data._rankings().clear()
    assert ctx.ranking() is None
    monkeypatch.setattr(picking, "context", lambda: ctx)
    monkeypatch.setattr(picking.st, "session_state", {"compare": ["BW-NR40"], "map_find": "QC"})
    picking.take_found()
    assert picking.st.session_state["compare"] == ["BW-NR40"]
