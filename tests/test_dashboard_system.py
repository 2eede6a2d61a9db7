"""The Machine page: the mount system of the comparison set, in six degrees of freedom."""

from __future__ import annotations

import json

import numpy as np
import pytest

from engine.curves.system import EXAMPLE_CASE, MountSystem, solve_system
from engine.library.fits import master_curve
from engine.library.store import Library
from tests.test_dashboard import app, demo_db  # noqa: F401 (the fixture)

pytestmark = pytest.mark.filterwarnings("ignore::DeprecationWarning")


def test_machine_page_shows_the_modes_and_verdicts_of_the_comparison_set(monkeypatch, demo_db):  # noqa: F811
    at = app(monkeypatch, demo_db, g="BW-NR40,BW-CR60")
    at.switch_page("views/system.py").run()
    assert not at.exception
    lines = [m.value for m in at.markdown if "system verdict" in m.value]
    assert len(lines) == 2 and any("BW-CR60" in v and "fails" in v for v in lines)
    # The page's figures are the engine's: BW-NR40's modes at the first temperature.
    lib = Library(str(demo_db))
    temps = at.session_state["_context"].ranking().criteria.window.temperatures
    m = lib.material("BW-NR40")
    row = {"poisson_ratio": m.poisson_ratio, "hardness": m.hardness, "bulk_modulus": m.bulk_modulus}
    res = solve_system(
        master_curve(lib, "BW-NR40"), row, MountSystem.from_dict(EXAMPLE_CASE), temps
    )
    table = next(d.value for d in at.dataframe if "mode" in d.value.columns)
    np.testing.assert_allclose(table["frequency [Hz]"], res.frequencies[0], rtol=1e-6)
    np.testing.assert_allclose(table.filter(like="[%]").sum(axis=1), 100.0, atol=1e-6)
    assert any("Suggestion" in c.value for c in at.caption)


def test_the_case_in_use_drives_the_page(monkeypatch, demo_db):  # noqa: F811
    # Pads four times the example's area: stiffer mounts, higher modes (k' = E A / h).
    at = app(monkeypatch, demo_db, g="BW-NR40")
    at.switch_page("views/system.py").run()
    low = next(d.value for d in at.dataframe if "mode" in d.value.columns)["frequency [Hz]"]
    case = json.loads(json.dumps(EXAMPLE_CASE))
    for m in case["mounts"]:
        m["area_mm2"] *= 4.0
    at.session_state["system_case"] = json.dumps(case)
    at.run()
    assert not at.exception
    high = next(d.value for d in at.dataframe if "mode" in d.value.columns)["frequency [Hz]"]
    assert (high.to_numpy() > 1.5 * low.to_numpy()).all()
