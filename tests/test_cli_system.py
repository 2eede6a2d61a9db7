"""The `system` command and `rank --system`: the CLI contract of the mount-system case."""

from __future__ import annotations

import json
import math
import shutil

import numpy as np
import pytest

from engine.curves.system import EXAMPLE_CASE
from tests.helpers import invoke


@pytest.fixture(scope="module")
def sys_cli(demo_library, tmp_path_factory):
    tmp = tmp_path_factory.mktemp("system")
    db = tmp / "library.sqlite"
    shutil.copyfile(demo_library.location, db)
    case = tmp / "case.json"
    case.write_text(json.dumps(EXAMPLE_CASE))
    return {"db": db, "case": case, "tmp": tmp}


def test_system_json_follows_the_contract(sys_cli):
    run = invoke(
        [
            "system",
            "BW-NR40",
            "--case",
            sys_cli["case"],
            "--temp",
            "-20",
            "23",
            "--json",
            "--db",
            sys_cli["db"],
        ]
    )
    assert run.returncode == 0, run.stderr
    data = json.loads(run.stdout)
    assert data["id"] == "BW-NR40"
    assert [r["temp_C"] for r in data["results"]] == [-20.0, 23.0]
    for r in data["results"]:
        f = r["natural_frequencies_Hz"]
        assert len(f) == 6 and f == sorted(f)
        assert [m["frequency_Hz"] for m in r["modes"]] == f
        for m in r["modes"]:
            assert set(m["energy_fractions"]) == {"x", "y", "z", "rx", "ry", "rz"}
            # kinetic-energy fractions sum to 1 (by their definition)
            assert math.isclose(sum(m["energy_fractions"].values()), 1.0, abs_tol=1e-9)
        forced = r["disturbances"][0]
        # 1480 rpm and its second harmonic: f = rpm / 60 x order (common practice)
        np.testing.assert_allclose(forced["frequency_Hz"], [1480 / 60, 2 * 1480 / 60])
        assert len(forced["mount_forces_N"][0]) == 4
    assert data["verdict"] in ("passes", "fails")


def test_system_refuses_a_bad_case_in_one_line(sys_cli):
    bad = sys_cli["tmp"] / "bad.json"
    bad.write_text(json.dumps({**EXAMPLE_CASE, "mass_kg": -3}))
    run = invoke(["system", "BW-NR40", "--case", bad, "--db", sys_cli["db"]])
    assert run.returncode == 2
    assert run.stderr.count("\n") == 1 and "mass_kg must be a positive number" in run.stderr


def test_rank_with_a_system_names_the_mode_that_fails(sys_cli):
    run = invoke(
        [
            "rank",
            "--temp-range",
            "-20",
            "45",
            "--freq-range",
            "10",
            "100",
            "--system",
            sys_cli["case"],
            "--json",
            "--db",
            sys_cli["db"],
        ]
    )
    assert run.returncode == 0, run.stderr
    data = json.loads(run.stdout)
    assert data["shortlist"], "some demo grade isolates the example skid"
    for r in data["shortlist"]:
        assert {"system_mode_drift", "system_worst_transmissibility"} <= set(r["indices"])
        assert r["indices"]["system_worst_transmissibility"] < 1.0
    named = [r for r in data["excluded"] if " mode " in r["reason"]]
    assert named, "some demo grade has a mode too near the disturbance"
    for r in named:
        assert "°C" in r["reason"] and "Hz" in r["reason"]
