"""The command line contract of DESIGN.md.

The commands run through :func:`engine.cli.main` in this process (a new interpreter per
command would cost its start-up and imports each time); the one test at the end runs
``python -m engine`` as a process, to show that the entry point works there too. A
library loaded once by ``load`` is copied for each test that needs it, so every test
has a library of its own and no command sees what another test's commands wrote.
"""

from __future__ import annotations

import csv
import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from engine.physics.shift import wlf_change_reference
from tests import synthetic
from tests.helpers import DEMO, ROOT, invoke

PROPS_KEYS = {
    "storage_MPa_low",
    "storage_MPa_high",
    "loss_MPa_low",
    "loss_MPa_high",
    "loss_factor_low",
    "loss_factor_high",
    "temp_C",
    "freq_Hz",
    "storage_MPa",
    "loss_MPa",
    "loss_factor",
    "extrapolated",
    "mode",
}
BAD_ROW = 116  # spreadsheet row of the broken cell (header is row 1)


def write_files(folder: Path) -> dict[str, Path]:
    files = {name: folder / f"{name}.csv" for name in ("catalog", "s1", "s2", "cat3", "bad")}
    synthetic.write_catalog(files["catalog"], ids=("SYN-1", "SYN-2"))
    synthetic.write_catalog(files["cat3"], ids=("SYN-3",))
    synthetic.write_csv(files["s1"], synthetic.sweep(noise=0.01), "SYN-1")
    synthetic.write_csv(files["s2"], synthetic.sweep(noise=0.01, seed=3), "SYN-2")
    lines = files["s1"].read_text().splitlines()
    cells = lines[BAD_ROW - 1].split(",")
    cells[3] = "abc"
    lines[BAD_ROW - 1] = ",".join(cells)
    files["bad"].write_text("\n".join(lines).replace("SYN-1,", "SYN-3,") + "\n")
    return files


@pytest.fixture(scope="module")
def files(tmp_path_factory) -> dict[str, Path]:
    return write_files(tmp_path_factory.mktemp("cli-files"))


def load_args(files) -> list:
    return ["load", files["catalog"], files["s1"], files["s2"], "--json"]


@pytest.fixture(scope="module")
def loaded(files, tmp_path_factory) -> Path:
    """A library written once by the ``load`` of :func:`load_args`."""
    db = tmp_path_factory.mktemp("cli-loaded") / "main.sqlite"
    run = invoke([*load_args(files), "--db", db])
    assert run.returncode == 0, run.stderr
    return db


@pytest.fixture
def db(loaded, tmp_path) -> Path:
    """A copy of the loaded library for one test."""
    copy = tmp_path / "library.sqlite"
    shutil.copyfile(loaded, copy)
    return copy


# ---------------------------------------------------------------- load and list


def test_load_prints_what_was_added(run_cli, files, tmp_path):
    run = run_cli(tmp_path / "fresh.sqlite", *load_args(files))
    assert run.returncode == 0, run.stderr
    summary = run.json()
    assert summary["materials_added"] == ["SYN-1", "SYN-2"]
    assert summary["materials_updated"] == [] and summary["files_skipped"] == []
    n = synthetic.TEMPERATURES.size * synthetic.FREQUENCIES.size
    assert summary["datasets_added"] == [
        {"material": "SYN-1", "points": n},
        {"material": "SYN-2", "points": n},
    ]


def test_load_again_changes_nothing(run_cli, files, db):
    load = run_cli(db, *load_args(files))
    assert load.returncode == 0, load.stderr
    summary = load.json()
    assert summary["materials_added"] == summary["materials_updated"] == []
    assert summary["datasets_added"] == [] and len(summary["files_skipped"]) == 3


def test_bad_sweep_is_refused_with_one_line_and_nothing_changes(run_cli, files, db):
    before = run_cli(db, "list", "--json")
    assert before.returncode == 0, before.stderr
    load = run_cli(db, "load", files["cat3"], files["bad"], "--json")
    assert load.returncode == 2 and load.stdout == ""
    line = load.one_line()
    assert "bad.csv" in line
    assert f"row {BAD_ROW}" in line
    assert "column 'storage_modulus [MPa]'" in line
    assert "'abc' is not a number" in line
    # All or nothing: the good catalog of the same command (SYN-3) was not written.
    listing = run_cli(db, "list", "--json")
    assert listing.returncode == 0
    assert listing.json() == before.json()


def test_list_fields(run_cli, db):
    run = run_cli(db, "list", "--json")
    assert run.returncode == 0, run.stderr
    rows = run.json()
    assert [r["id"] for r in rows] == ["SYN-1", "SYN-2"]
    row = rows[0]
    assert set(row) == {
        "id",
        "name",
        "mode",
        "supplier",
        "family",
        "density_kg_m3",
        "price_per_kg",
        "hardness_shore_a",
        "service_min_C",
        "service_max_C",
        "poisson_ratio",
        "bulk_modulus_MPa",
        "notes",
        "extra",
        "datasets",
    }
    assert row["mode"] == "tensile" and row["density_kg_m3"] == 1100.0
    assert row["service_min_C"] is None  # blank optional cell: unknown
    (dataset,) = row["datasets"]
    assert dataset["points"] == 210 and dataset["file"] == "s1.csv" and dataset["in_use"]
    assert len(dataset["sha256"]) == 64


# ---------------------------------------------------------------- fit and props


def test_fit_json(run_cli, db):
    run = run_cli(db, "fit", "SYN-1", "--json")
    assert run.returncode == 0, run.stderr
    data = run.json()
    for key in ("reference_C", "shift_factors", "tg", "reduced_frequency_range_Hz", "residuals"):
        assert key in data
    assert "wlf" in data or "arrhenius" in data
    # Shift factors: one per isotherm, within 0.1 decade of the known law (round trip).
    temps = np.array([s["temp_C"] for s in data["shift_factors"]])
    log_at = np.array([s["log_aT"] for s in data["shift_factors"]])
    np.testing.assert_array_equal(temps, synthetic.TEMPERATURES)
    law = synthetic.TRUE_LAW
    truth = law.log_shift(temps) - law.log_shift(data["reference_C"])
    assert np.max(np.abs(log_at - truth)) < 0.1
    # Each shift factor carries its 95 % interval, containing the value.
    for s in data["shift_factors"]:
        assert s["log_aT_low"] <= s["log_aT"] <= s["log_aT_high"]
    assert isinstance(data["residuals"]["superposition_ok"], bool)
    assert set(data["wlf"]) >= {"C1", "C2_K", "reference_C"}
    # WLF constants are given at the master curve's own reference.
    assert data["wlf"]["reference_C"] == data["reference_C"]
    # WLF constants moved to Tg = -20 degC (Ferry 1980, ch. 11: C2' = C2 + T1 - T0,
    # C1' = C1 C2 / C2') against the universal 17.44 and 51.6 K of the model (WLF 1955).
    w = data["wlf"]
    c1, c2 = wlf_change_reference(w["C1"], w["C2_K"], w["reference_C"], synthetic.TG_C)
    assert c1 == pytest.approx(17.44, rel=0.1) and c2 == pytest.approx(51.6, rel=0.1)
    assert data["arrhenius"]["activation_kJ_per_mol"] == pytest.approx(200.0, rel=0.05)
    # Tg with method and frequency (ASTM E1640, ISO 6721-11).
    assert {t["method"] for t in data["tg"]} == {
        "storage_onset",
        "loss_modulus_peak",
        "loss_factor_peak",
    }
    assert all(t["frequency_Hz"] == 1.0 for t in data["tg"])
    lo, hi = data["reduced_frequency_range_Hz"]
    assert 0 < lo < hi
    assert np.log10(hi) - np.log10(lo) > 15.0  # 30 isotherms span many decades
    assert len(data["residuals"]["per_isotherm"]) == temps.size
    assert data["residuals"]["rms_log_storage"] < 0.05


def measured(files, material="SYN-1") -> dict[tuple[float, float], float]:
    with open(files["s1"], newline="") as handle:
        return {
            (float(r["temperature [degC]"]), float(r["frequency [Hz]"])): float(
                r["storage_modulus [MPa]"]
            )
            for r in csv.DictReader(handle)
            if r["material"] == material
        }


def test_props_json(run_cli, files, db):
    run = run_cli(db, "props", "SYN-1", "--temp", 20, 30, "--freq", 1, 10, 100, "--json")
    assert run.returncode == 0, run.stderr
    rows = run.json()
    assert len(rows) == 6
    assert all(set(r) == PROPS_KEYS for r in rows)
    assert [(r["temp_C"], r["freq_Hz"]) for r in rows] == [
        (t, f) for t in (20.0, 30.0) for f in (1.0, 10.0, 100.0)
    ]
    assert {r["mode"] for r in rows} == {"tensile"}
    assert not any(r["extrapolated"] for r in rows)
    data = measured(files)
    for r in rows:
        # MPa in, MPa out: the fitted curve within 3 % of the imported 1 %-noise value.
        assert r["storage_MPa"] == pytest.approx(data[(r["temp_C"], r["freq_Hz"])], rel=0.03)
        assert r["loss_MPa"] == pytest.approx(r["loss_factor"] * r["storage_MPa"], rel=1e-9)
        # The 95 % interval (DESIGN.md contract) brackets each value and stays narrow on
        # dense 1 %-noise data (a few per cent).
        for key in ("storage_MPa", "loss_MPa", "loss_factor"):
            assert r[f"{key}_low"] <= r[key] <= r[f"{key}_high"]
            assert r[f"{key}_high"] / r[f"{key}_low"] < 1.15


# ---------------------------------------------------------------- failures


def test_unknown_grade_is_exit_2_with_one_line(run_cli, db):
    run = run_cli(db, "fit", "NOPE", "--json")
    assert run.returncode == 2 and run.stdout == ""
    assert "no grade 'NOPE'" in run.one_line()


@pytest.mark.parametrize("name", ["folder", "garbage"])
def test_db_that_is_not_a_library(run_cli, tmp_path, name):
    target = tmp_path
    if name == "garbage":
        target = tmp_path / "garbage.sqlite"
        target.write_bytes(b"\x00garbage, not a library\n" * 100)
    # --db names the library even where QUIETGRADE_DB names another.
    run = run_cli(tmp_path / "other.sqlite", "list", "--json", "--db", target)
    assert run.returncode == 2 and run.stdout == ""
    assert "not a quietgrade library" in run.one_line()


def test_demo_twice_is_idempotent(run_cli, tmp_path):
    db = tmp_path / "demo.sqlite"
    first, second = run_cli(db, "demo", "--json"), run_cli(db, "demo", "--json")
    assert first.returncode == 0, first.stderr
    assert second.returncode == 0, second.stderr
    a, b = first.json(), second.json()
    with open(DEMO / "catalog.csv", newline="") as handle:
        ids = sorted(r["id"] for r in csv.DictReader(handle))
    assert sorted(a["materials_added"]) == ids
    assert b["materials_added"] == b["materials_updated"] == b["datasets_added"] == []
    assert len(b["files_skipped"]) == 3  # catalog, sweeps, amplitude sweeps
    assert a["fitted"] == b["fitted"] and a["fit_errors"] == b["fit_errors"]


# ---------------------------------------------------------------- as a process


def test_python_m_engine_runs_as_a_process(tmp_path):
    """``python -m engine`` through the real interpreter: output on stdout, the exit
    status of the process, the library named by QUIETGRADE_DB."""
    env = {**os.environ, "QUIETGRADE_DB": str(tmp_path / "library.sqlite")}

    def engine(*args):
        return subprocess.run(
            [sys.executable, "-m", "engine", *args],
            cwd=ROOT,
            env=env,
            capture_output=True,
            text=True,
            timeout=300,
        )

    demo = engine("demo", "--json")
    assert demo.returncode == 0, demo.stderr
    loaded = json.loads(demo.stdout)
    assert loaded["fitted"] and set(loaded["fitted"]) <= set(loaded["materials_added"])
    listing = engine("list", "--json")
    assert listing.returncode == 0, listing.stderr
    rows = json.loads(listing.stdout)
    with open(DEMO / "catalog.csv", newline="") as handle:
        ids = sorted(r["id"] for r in csv.DictReader(handle))
    assert sorted(r["id"] for r in rows) == ids
    assert all(len(r["datasets"]) == 1 for r in rows)
    refused = engine("fit", "NOPE")
    assert refused.returncode == 2 and refused.stdout == ""
    (line,) = refused.stderr.strip().splitlines()
    assert line.startswith("error: no grade 'NOPE'")
