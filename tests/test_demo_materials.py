"""The invented demo data set: reproducible, consistent, and plausible for each family.

The data are invented; nothing here uses them as a check value. The checks compare the
invented numbers with handbook ranges for each polymer family (recalled from memory,
Ferry 1980 and common handbook tables) and check that the files are exactly what
``demo_materials/generate.py`` writes.
"""

from __future__ import annotations

import csv
import importlib.util
import sys
from collections import defaultdict
from pathlib import Path

import numpy as np
import pytest

DEMO = Path(__file__).resolve().parent.parent / "demo_materials"

CATALOG_COLUMNS = [
    "id",
    "name",
    "mode",
    "supplier",
    "family",
    "density [kg/m3]",
    "price [per kg]",
    "hardness [Shore A]",
    "service_min [degC]",
    "service_max [degC]",
    "poisson_ratio",
    "notes",
]
SWEEP_COLUMNS = [
    "material",
    "temperature [degC]",
    "frequency [Hz]",
    "storage_modulus [MPa]",
    "loss_factor",
]

# Loss-factor peak temperature at 1 Hz [degC] by family (from memory: Ferry 1980 and
# handbook DMA curves; the loss-factor peak at 1 Hz lies some kelvin above the DSC Tg).
TG_RANGE_1HZ = {
    "natural rubber": (-70.0, -45.0),
    "butyl": (-50.0, -20.0),
    "chloroprene": (-45.0, -20.0),
    "nitrile": (-40.0, 0.0),
    "silicone": (-130.0, -100.0),
    "polyurethane": (-50.0, 10.0),
    "EPDM": (-60.0, -35.0),
    "damping polymer": (-10.0, 40.0),
    "TPE": (-60.0, -30.0),
    "plasticised vinyl": (-20.0, 30.0),
    "filled damping compound": (10.0, 50.0),
    "glassy thermoplastic": (100.0, 130.0),
}

ELASTOMER_FAMILIES = (
    "natural rubber",
    "butyl",
    "chloroprene",
    "nitrile",
    "silicone",
    "polyurethane",
    "EPDM",
    "TPE",
)

# How each grade was measured, as demo_materials/README.md describes it (the data must
# show it; the test reads the shape from the numbers alone). Logged grades: decimals
# written. Every other grade is a set-point sweep.
LOGGED_DECIMALS = {"LAB-NR55": 2, "LAB-AC0": 2, "FP-IIR50": 1, "FP-PU70": 1, "FP-VL15": 1}
RAMP = "QC-IIR55"
SPARSE = "QC-PVC75"
SET_POINT_STEP = 5.0  # [K] isotherm spacing of the logged sweeps


@pytest.fixture(scope="module")
def generator():
    """``demo_materials/generate.py`` imported as a module (it is a script, not a package)."""
    name = "quietgrade_demo_generate"
    spec = importlib.util.spec_from_file_location(name, DEMO / "generate.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module  # dataclasses look their module up while it loads
    try:
        spec.loader.exec_module(module)
        yield module
    finally:
        del sys.modules[name]


def _read(name: str) -> tuple[list[str], list[dict[str, str]]]:
    with open(DEMO / name, newline="", encoding="utf-8") as handle:
        reader = csv.DictReader(handle)
        return list(reader.fieldnames), list(reader)


@pytest.fixture(scope="module")
def catalog() -> dict[str, dict[str, str]]:
    _, rows = _read("catalog.csv")
    return {row["id"]: row for row in rows}


@pytest.fixture(scope="module")
def sweeps() -> dict[str, np.ndarray]:
    """Per grade an array of (temperature, frequency, storage modulus, loss factor)."""
    _, rows = _read("sweeps.csv")
    grouped = defaultdict(list)
    for row in rows:
        grouped[row["material"]].append([float(row[c]) for c in SWEEP_COLUMNS[1:]])
    return {grade: np.array(points) for grade, points in grouped.items()}


@pytest.fixture(scope="module")
def temperature_text() -> dict[str, list[str]]:
    """Per grade the temperature cells exactly as written, in file order."""
    _, rows = _read("sweeps.csv")
    grouped = defaultdict(list)
    for row in rows:
        grouped[row["material"]].append(row["temperature [degC]"])
    return dict(grouped)


def _at(points: np.ndarray, frequency: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Temperature, storage modulus and loss factor of one grade at one frequency."""
    rows = points[np.isclose(points[:, 1], frequency)]
    rows = rows[np.argsort(rows[:, 0])]
    return rows[:, 0], rows[:, 2], rows[:, 3]


def test_generator_reproduces_committed_files(generator, tmp_path):
    written = generator.write(tmp_path)
    assert sorted(path.name for path in written) == ["catalog.csv", "sweeps.csv"]
    for path in written:
        assert path.read_bytes() == (DEMO / path.name).read_bytes(), path.name


def test_check_flag_reports_a_stale_file(generator, tmp_path, capsys):
    assert generator.main(["--check"]) == 0
    generator.write(tmp_path)
    with open(tmp_path / "sweeps.csv", "a", encoding="utf-8") as handle:
        handle.write("BW-NR40,125,1,1.5,0.02\n")
    assert generator.main(["--check", "--out", str(tmp_path)]) == 1
    assert "sweeps.csv" in capsys.readouterr().err
    (tmp_path / "catalog.csv").unlink()
    assert generator.main(["--check", "--out", str(tmp_path)]) == 1
    assert "catalog.csv, sweeps.csv" in capsys.readouterr().err


def test_headers_follow_the_import_format():
    # Import format of the project (DESIGN.md, "Import format").
    assert _read("catalog.csv")[0] == CATALOG_COLUMNS
    assert _read("sweeps.csv")[0] == SWEEP_COLUMNS


def test_every_sweep_grade_is_in_the_catalog_and_back(catalog, sweeps):
    _, rows = _read("catalog.csv")
    assert len(rows) == len(catalog), "catalog ids must be unique"
    assert set(sweeps) <= set(catalog)
    assert set(catalog) <= set(sweeps), "every catalog grade has a sweep"
    assert len(catalog) >= 13


def test_required_cells_filled_and_modes_valid(catalog):
    for grade, row in catalog.items():
        assert grade and row["name"], grade
        assert row["mode"] in ("tensile", "shear"), grade
    assert {row["mode"] for row in catalog.values()} == {"tensile", "shear"}
    suppliers = {row["supplier"] for row in catalog.values()}
    assert "in-house lab" in suppliers
    assert len(suppliers) >= 4


def test_every_family_is_present(catalog):
    assert set(TG_RANGE_1HZ) <= {row["family"] for row in catalog.values()}


def test_some_optional_cells_are_blank(catalog):
    # A blank optional cell means "unknown" (DESIGN.md, "Import format").
    assert catalog["LAB-AC0"]["hardness [Shore A]"] == ""
    assert any(row["price [per kg]"] == "" for row in catalog.values())


def test_catalog_values_in_handbook_ranges(catalog):
    for grade, row in catalog.items():
        # Solid elastomers and polymers, unfoamed: 900-1900 kg/m3 (from memory).
        assert 900.0 <= float(row["density [kg/m3]"]) <= 1900.0, grade
        if row["hardness [Shore A]"]:
            # Shore A is used from about 30 to 90 (ISO 48-4 scale range, from memory).
            assert 30.0 <= float(row["hardness [Shore A]"]) <= 90.0, grade
        assert float(row["service_min [degC]"]) < float(row["service_max [degC]"]), grade
        if row["poisson_ratio"]:
            # Rubbers close to 0.5, glassy polymers about 0.35-0.4 (from memory).
            assert 0.3 <= float(row["poisson_ratio"]) <= 0.5, grade
        if row["price [per kg]"]:
            assert float(row["price [per kg]"]) > 0.0, grade


def test_moduli_positive_and_loss_factors_non_negative(sweeps):
    for grade, points in sweeps.items():
        assert np.all(points[:, 2] > 0.0), grade
        assert np.all(points[:, 3] >= 0.0), grade
        assert np.all(np.isfinite(points)), grade


def _shape(points: np.ndarray) -> str:
    """How a grade was measured, read off its points alone."""
    temperature = points[:, 0]
    if len(np.unique(temperature)) == len(temperature):
        return "ramp"
    if np.all(temperature == np.round(temperature)):
        return "sparse" if len(np.unique(points[:, 1])) == 3 else "set-point"
    return "logged"


def test_each_grade_has_its_documented_shape(sweeps):
    assert (DEMO / "sweeps.csv").stat().st_size < 2_000_000
    expected = {grade: "set-point" for grade in sweeps}
    expected.update({grade: "logged" for grade in LOGGED_DECIMALS})
    expected.update({RAMP: "ramp", SPARSE: "sparse"})
    assert {grade: _shape(points) for grade, points in sweeps.items()} == expected
    assert len(LOGGED_DECIMALS) >= 3


def _full_grid(points: np.ndarray, temperatures: np.ndarray) -> bool:
    """Every (temperature, frequency) pair present exactly once."""
    pairs = {(t, f) for t, f in zip(temperatures, points[:, 1], strict=True)}
    count = len(np.unique(temperatures)) * len(np.unique(points[:, 1]))
    return len(pairs) == len(points) == count


def test_set_point_sweeps_are_full_grids(sweeps):
    for grade, points in sweeps.items():
        if grade in LOGGED_DECIMALS or grade in (RAMP, SPARSE):
            continue
        temperatures = np.unique(points[:, 0])
        frequencies = np.unique(points[:, 1])
        assert _full_grid(points, points[:, 0]), grade
        steps = np.unique(np.diff(temperatures))
        assert len(steps) == 1 and steps[0] in (5.0, 10.0), grade  # regular steps
        assert len(frequencies) >= 4 and len(temperatures) >= 10, grade
        assert 1.0 in frequencies, grade


def test_logged_grades_carry_per_point_temperatures(sweeps, temperature_text):
    for grade, decimals in LOGGED_DECIMALS.items():
        points = sweeps[grade]
        set_point = np.round(points[:, 0] / SET_POINT_STEP) * SET_POINT_STEP
        deviation = points[:, 0] - set_point
        # Every point lies within 0.5 K of a regular 5 K set-point grid, and each
        # set-point holds one full frequency sweep.
        assert np.all(np.abs(deviation) <= 0.5 + 1e-9), grade
        assert np.all(np.diff(np.unique(set_point)) == SET_POINT_STEP), grade
        assert _full_grid(points, set_point), grade
        assert len(np.unique(set_point)) >= 10 and 1.0 in points[:, 1], grade
        # The deviations are per point: most points are off their set-point, by about
        # 0.1-0.4 K, and the logged temperature moves within most isotherms.
        assert np.mean(deviation != 0.0) >= 0.6, grade
        assert 0.05 <= np.mean(np.abs(deviation)) <= 0.3, grade
        assert np.abs(deviation).max() >= 0.2, grade
        moving = [np.ptp(points[set_point == t, 0]) > 0.0 for t in np.unique(set_point)]
        assert np.mean(moving) >= 0.8, grade
        # Written with the instrument's decimals.
        assert all(len(cell.partition(".")[2]) == decimals for cell in temperature_text[grade])


def test_ramp_grade_never_repeats_a_temperature(sweeps, temperature_text):
    points = sweeps[RAMP]
    temperature = points[:, 0]  # file order is time order
    assert np.all(np.diff(temperature) > 0.0)
    frequencies = list(dict.fromkeys(points[:, 1]))  # in the order they are taken
    assert 3 <= len(frequencies) <= 4 and 1.0 in frequencies
    cycles = len(points) // len(frequencies)
    assert len(points) == cycles * len(frequencies)
    assert np.array_equal(points[:, 1], np.tile(frequencies, cycles))
    for frequency in frequencies:
        step = np.diff(temperature[points[:, 1] == frequency])
        # one point per frequency every 0.5-1 K
        assert 0.5 <= step.min() and step.max() <= 1.0, (frequency, step.min(), step.max())
    assert np.ptp(temperature) >= 100.0
    assert any(cell.partition(".")[2] not in ("", "0", "00") for cell in temperature_text[RAMP])


def test_sparse_sheet_has_three_frequencies_at_10_k_steps(sweeps):
    points = sweeps[SPARSE]
    temperatures = np.unique(points[:, 0])
    assert len(np.unique(points[:, 1])) == 3 and 1.0 in points[:, 1]
    assert np.all(np.diff(temperatures) == 10.0)
    assert _full_grid(points, points[:, 0])
    assert len(temperatures) >= 10


def test_ramp_with_too_much_reading_noise_is_refused(generator):
    ramp = generator.TemperatureRamp(
        start=0.0,
        stop=10.0,
        rate=2.0,
        frequencies=("1", "10"),
        seconds=(3.0, 3.0),
        jitter=5.0,
        decimals=2,
        modulus_noise=0.01,
        loss_noise=0.02,
    )
    with pytest.raises(ValueError, match="strictly rising temperatures"):
        generator._ramp_points(ramp, np.random.default_rng(1))


def test_changing_one_grade_leaves_the_others_alone(generator, monkeypatch):
    # Each grade draws its noise from its own generator (demo_materials/README.md).
    before = generator.sweeps_text().splitlines()
    monkeypatch.setitem(
        generator.GRIDS,
        "quillmoor_sheet",
        generator.SweepGrid((-40, -20, 0, 20, 40), ("1", "10", "100"), 0.015, 0.025),
    )
    after = generator.sweeps_text().splitlines()
    assert [r for r in after if not r.startswith(SPARSE)] == [
        r for r in before if not r.startswith(SPARSE)
    ]
    assert [r for r in after if r.startswith(SPARSE)] != [r for r in before if r.startswith(SPARSE)]


def _peak_at_1hz(points: np.ndarray) -> tuple[float, float, bool]:
    temperature, _, loss_factor = _at(points, 1.0)
    i = int(np.argmax(loss_factor))
    return temperature[i], loss_factor[i], 0 < i < len(temperature) - 1


def test_loss_factor_peak_at_1hz_in_family_range(catalog, sweeps):
    checked = 0
    for grade, row in catalog.items():
        low, high = TG_RANGE_1HZ[row["family"]]
        peak_temperature, peak_value, inside = _peak_at_1hz(sweeps[grade])
        temperatures = np.unique(sweeps[grade][:, 0])
        family_range_measured = temperatures[0] < low and high < temperatures[-1]
        if not inside and not family_range_measured:
            continue  # the transition lies outside the measured range
        assert inside, grade
        assert low <= peak_temperature <= high, (grade, peak_temperature)
        # A glass transition shows a loss-factor peak well above the rubbery
        # plateau, 0.3 or more (common practice).
        assert peak_value >= 0.3, grade
        checked += 1
    assert checked == len(catalog) - 1  # all but the silicone


def test_silicone_is_rubbery_throughout(catalog, sweeps):
    # Silicone Tg is about -120 degC (from memory): no transition in the measured range,
    # rubbery modulus and low loss factor everywhere.
    grades = [g for g, row in catalog.items() if row["family"] == "silicone"]
    assert grades
    for grade in grades:
        points = sweeps[grade]
        assert points[:, 0].min() > TG_RANGE_1HZ["silicone"][1]
        assert points[:, 2].max() < 10.0, grade
        assert points[:, 3].max() < 0.2, grade


def test_damping_polymer_peak_loss_factor_above_one(catalog, sweeps):
    # Polymers sold for constrained-layer damping peak above tan delta = 1
    # (common practice).
    for grade, row in catalog.items():
        if row["family"] == "damping polymer":
            assert _peak_at_1hz(sweeps[grade])[1] > 1.0, grade


def test_room_temperature_moduli_in_handbook_ranges(catalog, sweeps):
    for grade, row in catalog.items():
        temperature, storage, _ = _at(sweeps[grade], 1.0)
        nearest = int(np.argmin(np.abs(temperature - 20.0)))
        if abs(temperature[nearest] - 20.0) > 0.5:
            continue  # not measured at room temperature
        modulus = storage[nearest]
        if row["mode"] == "shear":
            modulus = 3.0 * modulus  # E = 3 G for an incompressible rubber (common practice)
        if row["family"] in ELASTOMER_FAMILIES:
            # Solid elastomers at room temperature: E about 1-15 MPa (from memory).
            assert 1.0 <= modulus <= 15.0, (grade, modulus)
        if row["family"] == "glassy thermoplastic":
            # Acrylic glass at room temperature: E about 3 GPa (from memory).
            assert 2500.0 <= modulus <= 3500.0, (grade, modulus)


def test_glassy_moduli_in_handbook_range(catalog, sweeps):
    # Glassy polymers: E about 1-4.5 GPa (from memory); G about E/3 (common practice).
    # Checked where the sweep reaches 30 K or more below the loss-factor peak at 1 Hz.
    checked = 0
    for grade, row in catalog.items():
        peak_temperature, _, inside = _peak_at_1hz(sweeps[grade])
        if not inside or sweeps[grade][:, 0].min() > peak_temperature - 30.0:
            continue
        highest = sweeps[grade][:, 2].max()
        if row["mode"] == "shear":
            highest = 3.0 * highest
        assert 1000.0 <= highest <= 4500.0, (grade, highest)
        checked += 1
    assert checked >= 5


def test_tpe_softens_near_the_top_of_its_range(catalog, sweeps):
    # Styrenic block TPEs soften as the hard domains soften above about 100 degC
    # (from memory): loss factor rises again and the modulus falls.
    for grade, row in catalog.items():
        if row["family"] != "TPE":
            continue
        temperature, storage, loss_factor = _at(sweeps[grade], 1.0)
        at_60 = temperature == 60.0
        assert temperature[-1] >= 110.0
        assert loss_factor[-1] > 3.0 * loss_factor[at_60][0], grade
        assert storage[-1] < 0.8 * storage[at_60][0], grade
