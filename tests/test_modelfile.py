"""The fitted-model file (``fit ID --out model.json|.csv``) and its read-back.

The round trips below are regression checks of this program against itself (the file
must reproduce the master curve it was written from, to 1e-9 relative), not checks
against the world. The checks against outside sources are the WLF reference change of
the universal constants (Williams, Landel & Ferry 1955; Ferry 1980, ch. 11) and the
normalisation of the Prony moduli (g_i = E_i / E_0, common practice).
"""

from __future__ import annotations

import copy
import csv
import io
import json
import re
from dataclasses import replace
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest

from engine.base.caution import CAUTION
from engine.base.errors import InputError
from engine.base.version import __version__
from engine.cli import main
from engine.curves.mastercurve import build_master_curve
from engine.library.fits import master_curve
from engine.library.importer import import_files
from engine.library.store import Library
from engine.output.modelfile import (
    CSV_COLUMNS,
    FORMAT_NAME,
    model_record,
    read_model,
    series_from_record,
    shift_law_from_record,
    write_model,
)
from engine.physics.shift import ShiftLaw
from tests import synthetic

TEMPS = np.array([-80.0, -60.0, -37.5, -18.0, 0.0, 12.3, 25.0, 61.0, 85.0, 110.0])  # [degC]
FREQS = np.logspace(-3, 5, 17)  # [Hz]


@pytest.fixture(scope="module")
def curve():
    return build_master_curve(synthetic.sweep(), "tensile")


@pytest.fixture(scope="module")
def single():
    """A master curve from one isotherm: no shift law at all."""
    return build_master_curve(synthetic.sweep(temperatures=[25.0]), "tensile")


def written(curve, folder, suffix, material_id="SYN-1"):
    path = write_model(curve, folder / f"model{suffix}", material_id)
    return path, read_model(path)


def rebuilt_log_shift(record, temperature):
    """log10 aT as the module notes describe it: the law plus the measured difference."""
    law = shift_law_from_record(record)
    sf = record["shift_factors"]
    temps = np.asarray(sf["temperature_C"], dtype=float)
    diff = np.asarray(sf["log_aT"], dtype=float) - law.log_shift(temps)
    if temps.size < 2:
        return law.log_shift(temperature)
    return law.log_shift(temperature) + np.interp(temperature, temps, diff)


# -- round trips (regression checks) -----------------------------------------------------
@pytest.mark.parametrize("suffix", [".json", ".csv"])
def test_round_trip_reproduces_the_master_curve(curve, tmp_path, suffix):
    path, record = written(curve, tmp_path, suffix)
    assert path == tmp_path / f"model{suffix}"
    assert record == model_record(curve, "SYN-1")
    series = series_from_record(record)
    omega = 2.0 * np.pi * FREQS
    np.testing.assert_allclose(series.storage(omega), curve.prony.storage(omega), rtol=1e-9)
    np.testing.assert_allclose(series.loss(omega), curve.prony.loss(omega), rtol=1e-9)
    assert series.glassy == pytest.approx(curve.prony.glassy, rel=1e-9)
    law = shift_law_from_record(record)
    assert law.kind == curve.shift.law.kind == "WLF+Arrhenius"
    np.testing.assert_allclose(law.log_shift(TEMPS), curve.shift.law.log_shift(TEMPS), rtol=1e-9)
    np.testing.assert_allclose(
        rebuilt_log_shift(record, TEMPS), curve.log_shift(TEMPS), rtol=1e-9, atol=1e-12
    )
    # E' and E'' at temperature and frequency, from the file alone against the series.
    fr = FREQS[None, :] * 10.0 ** rebuilt_log_shift(record, TEMPS)[:, None]
    truth = FREQS[None, :] * 10.0 ** curve.log_shift(TEMPS)[:, None]
    np.testing.assert_allclose(
        series.storage(2 * np.pi * fr), curve.prony.storage(2 * np.pi * truth), rtol=1e-9
    )


def test_json_and_csv_read_back_to_the_same_record(curve, tmp_path):
    _, from_json = written(curve, tmp_path, ".json")
    _, from_csv = written(curve, tmp_path, ".csv")
    assert from_json == from_csv
    assert from_json["format"] == {"name": FORMAT_NAME, "version": 1, "engine_version": __version__}


def test_record_holds_the_law_range_and_measured_shifts(curve):
    r = model_record(curve, "SYN-1")
    law = curve.shift.law
    s = r["shift_law"]
    assert s["wlf_c1"] == law.wlf_c1 and s["wlf_c2_K"] == law.wlf_c2
    assert s["wlf_reference_C"] == law.wlf_reference_C and s["split_C"] == law.split_C
    assert s["activation_kJ_per_mol"] == pytest.approx(law.activation_J_per_mol / 1e3)
    assert s["arrhenius_anchor_C"] == law.split_C
    assert (s["valid_from_C"], s["valid_to_C"]) == curve.temperature_range == (-60.0, 85.0)
    assert r["curve"]["reference_C"] == curve.reference_C
    lo, hi = r["curve"]["reduced_frequency_low_Hz"], r["curve"]["reduced_frequency_high_Hz"]
    assert np.log10([lo, hi]) == pytest.approx(curve.log_fr_range, abs=1e-12)
    sf = r["shift_factors"]
    assert sf["count"] == synthetic.TEMPERATURES.size
    assert sf["temperature_C"] == synthetic.TEMPERATURES.tolist()
    assert sf["log_aT"] == curve.shift.log_shift.tolist()
    assert sf["bridged"] == curve.shift.bridged.tolist()
    for key, name in (("log_aT_low", "log_shift_low"), ("log_aT_high", "log_shift_high")):
        interval = getattr(curve.shift, name, None)  # 95 % interval, where the engine has one
        assert sf[key] == (None if interval is None else np.asarray(interval).tolist())
    assert r["grade"] == {"id": "SYN-1", "mode": "tensile", "modulus_symbol": "E"}
    assert r["about"]["caution"] == CAUTION


def test_shear_data_are_g_moduli(curve):
    assert model_record(replace(curve, mode="shear"), "X")["grade"]["modulus_symbol"] == "G"


@pytest.mark.parametrize("interval", [True, False])
def test_interval_per_isotherm_is_written_when_there_is_one(curve, tmp_path, interval):
    # A stand-in shift result with or without the 95 % interval per isotherm.
    s = curve.shift
    low = s.log_shift - 0.1 if interval else None
    high = s.log_shift + np.linspace(0.1, 0.3, s.log_shift.size) if interval else None
    shift = SimpleNamespace(
        temperatures=s.temperatures,
        log_shift=s.log_shift,
        bridged=s.bridged,
        law=s.law,
        log_shift_low=low,
        log_shift_high=high,
    )
    _, record = written(replace(curve, shift=shift), tmp_path, ".csv")
    sf = record["shift_factors"]
    if interval:
        np.testing.assert_array_equal(sf["log_aT_low"], low)
        np.testing.assert_array_equal(sf["log_aT_high"], high)
    else:
        assert sf["log_aT_low"] is None and sf["log_aT_high"] is None


@pytest.mark.parametrize("suffix", [".json", ".csv"])
def test_single_isotherm_has_no_shift_law(single, tmp_path, suffix):
    _, record = written(single, tmp_path, suffix)
    assert record == model_record(single, "SYN-1")
    s = record["shift_law"]
    assert s["kind"] == "none"
    assert s["wlf_c1"] is s["curve_wlf_c1"] is s["activation_kJ_per_mol"] is None
    assert s["valid_from_C"] == s["valid_to_C"] == 25.0
    np.testing.assert_array_equal(shift_law_from_record(record).log_shift(TEMPS), 0.0)


# -- against outside sources -------------------------------------------------------------
def test_wlf_constants_moved_to_the_curve_reference(curve):
    # Universal constants C1 = 17.44, C2 = 51.6 K at Tg (Williams, Landel & Ferry 1955);
    # moved to Tg + 50 K by C2' = C2 + 50 K = 101.6 K, C1' = C1 C2 / C2' = 8.86
    # (Ferry 1980, ch. 11; the values the trade quotes to three figures).
    tg = -20.0
    law = ShiftLaw("WLF", tg + 50.0, 17.44, 51.6, tg)
    moved = replace(curve, reference_C=tg + 50.0, shift=replace(curve.shift, law=law))
    s = model_record(moved, "WLF")["shift_law"]
    assert (s["wlf_c1"], s["wlf_c2_K"], s["wlf_reference_C"]) == (17.44, 51.6, tg)
    assert s["curve_wlf_c1"] == pytest.approx(8.86, rel=1e-3)
    assert s["curve_wlf_c2_K"] == pytest.approx(101.6, rel=1e-12)
    assert s["arrhenius_anchor_C"] is None and s["split_C"] is None
    # The moved constants describe the same law, zero at the new reference (Ferry 1980),
    # wherever WLF is defined (above its divergence T0 - C2; below it the law holds inf).
    temps = TEMPS[TEMPS > tg - 51.6]
    dt = temps - (tg + 50.0)
    by_moved = -s["curve_wlf_c1"] * dt / (s["curve_wlf_c2_K"] + dt)
    np.testing.assert_allclose(by_moved, law.log_shift(temps), rtol=1e-12, atol=1e-12)
    assert np.all(np.isinf(law.log_shift(TEMPS[TEMPS <= tg - 51.6])))


def test_normalised_prony_moduli_sum_to_one_minus_the_equilibrium_share(curve):
    # g_i = E_i / E_0 with E_0 = E_inf + sum E_i, so sum g_i = 1 - E_inf / E_0 (common
    # practice: the normalised Prony coefficients of finite-element programs).
    p = model_record(curve, "SYN-1")["prony"]
    e0 = curve.prony.equilibrium + curve.prony.weights.sum()
    assert p["glassy_modulus_Pa"] == pytest.approx(e0, rel=1e-12)
    assert p["equilibrium_fraction"] == pytest.approx(curve.prony.equilibrium / e0, rel=1e-12)
    assert sum(p["g"]) == pytest.approx(1.0 - p["equilibrium_fraction"], rel=1e-12)
    np.testing.assert_allclose(p["g"], np.asarray(p["modulus_Pa"]) / e0, rtol=1e-12)
    # Only terms with a modulus are written; they keep their order of relaxation time.
    assert p["terms"] == len(p["tau_s"]) == np.count_nonzero(curve.prony.weights)
    assert min(p["modulus_Pa"]) > 0 and np.all(np.diff(p["tau_s"]) > 0)


# -- the CSV layout ----------------------------------------------------------------------
def test_csv_reads_cleanly_in_pandas(curve, tmp_path):
    path, record = written(curve, tmp_path, ".csv")
    table = pd.read_csv(path)
    assert tuple(table.columns) == CSV_COLUMNS
    assert table["value"].dtype == np.float64
    lists = table[(table["section"] == "prony") & table["index"].notna()]
    prony = lists.pivot(index="index", columns="key", values="value")  # one row per term
    np.testing.assert_array_equal(prony["tau_s"], record["prony"]["tau_s"])
    np.testing.assert_array_equal(prony["g"], record["prony"]["g"])
    units = dict(zip(table["key"], table["unit"].fillna(""), strict=False))
    assert units["tau_s"] == "s" and units["modulus_Pa"] == "Pa"
    assert units["wlf_c2_K"] == "K" and units["reference_C"] == "degC"
    assert units["activation_kJ_per_mol"] == "kJ/mol" and units["g"] == ""
    caution = table[(table["section"] == "about") & (table["key"] == "caution")]["text"]
    assert caution.tolist() == [CAUTION]


@pytest.mark.parametrize("grade", ["=1+2", "+A1", "-2+3", "@SUM(A1)"])
def test_text_cells_never_start_a_formula(curve, tmp_path, grade):
    path, record = written(curve, tmp_path, ".csv", grade)
    rows = list(csv.reader(io.StringIO(path.read_text(encoding="utf-8-sig"))))
    (cell,) = [r[4] for r in rows if r[:2] == ["grade", "id"]]
    assert cell == "'" + grade
    text_cells = [c for r in rows[1:] for c in (r[0], r[1], r[4], r[5]) if c]
    assert not any(c.startswith(("=", "+", "-", "@")) for c in text_cells)
    assert record["grade"]["id"] == grade  # the quote comes off on reading


@pytest.mark.parametrize("suffix", [".json", ".csv"])
def test_every_file_carries_the_caution(curve, tmp_path, suffix):
    path, _ = written(curve, tmp_path, suffix)
    assert CAUTION in path.read_text(encoding="utf-8-sig")


# -- bad input ---------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("name", "shown"),
    [("m.txt", r"'\.txt'"), ("model", "no extension"), ("m.csv.xlsx", r"'\.xlsx'")],
)
def test_write_refuses_other_extensions(curve, tmp_path, name, shown):
    with pytest.raises(
        InputError, match=shown + r" is not a model file format; accepted extensions: \.json, \.csv"
    ):
        write_model(curve, tmp_path / "sub" / name, "SYN-1")
    assert not (tmp_path / "sub").exists()


def test_write_to_an_unwritable_place(curve, tmp_path):
    (tmp_path / "plain").write_text("a file, not a folder")
    with pytest.raises(InputError, match=r"plain.model\.json: cannot write the model file"):
        write_model(curve, tmp_path / "plain" / "model.json", "SYN-1")


def test_read_refuses_other_extensions_and_missing_files(tmp_path):
    with pytest.raises(InputError, match=r"'\.toml' is not a model file format"):
        read_model(tmp_path / "m.toml")
    with pytest.raises(InputError, match=r"nothere\.json: file not found"):
        read_model(tmp_path / "nothere.json")


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ('{"format": ', r"m\.json: not valid JSON"),
        ("[1, 2]", r"not a quietgrade-model file"),
        ('{"format": {"name": "other"}}', r"not a quietgrade-model file"),
        ('{"format": {"name": "quietgrade-model", "version": 2}}', r"format version 2 is not"),
    ],
)
def test_read_json_that_is_not_a_model(tmp_path, text, message):
    path = tmp_path / "m.json"
    path.write_text(text)
    with pytest.raises(InputError, match=message):
        read_model(path)


def _broken_csv(curve, tmp_path, edit):
    path = write_model(curve, tmp_path / "m.csv", "SYN-1")
    lines = path.read_text(encoding="utf-8-sig").splitlines()
    edit(lines)
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _set_cell(row_text: str, column: int, value: str) -> str:
    cells = next(csv.reader([row_text]))
    cells[column] = value
    out = io.StringIO()
    csv.writer(out).writerow(cells)
    return out.getvalue().strip()


def _row_of(lines, section, key, index=""):
    for k, line in enumerate(lines):
        if next(csv.reader([line]))[:3] == [section, key, index]:
            return k
    raise AssertionError(f"no row {section}.{key}")


def _set(section, key, column, value, index=""):
    def edit(lines):
        k = _row_of(lines, section, key, index)
        lines[k] = _set_cell(lines[k], column, value)

    return edit


@pytest.mark.parametrize(
    ("edit", "message"),
    [
        (
            lambda lines: lines.__setitem__(0, "section,key,value"),
            r"m\.csv, row 1: the header must be section,key,index,value,text,unit",
        ),
        (
            _set("curve", "reference_C", 3, "abc"),
            r"m\.csv, row 15, column 'value': 'abc' is not a number",
        ),
        (_set("curve", "vertical_shift", 4, "maybe"), r"row 16, column 'text': 'maybe' is not a"),
        (_set("curve", "reference_C", 4, "warm"), r"row 15: a row holds a number .* give one"),
        (_set("prony", "tau_s", 2, "5", "2"), r"column 'index': index '5' of 'prony\.tau_s' is"),
        (lambda lines: lines.append('"grade","id",,,"B",'), r"'grade\.id' appears twice"),
        (lambda lines: lines.insert(3, "a,b,c"), r"row 4: 3 cells; a model row has 6"),
        (lambda lines: lines.insert(3, ",,,1,,"), r"row 4: blank section or key"),
        (_set("format", "name", 4, "other"), r"not a quietgrade-model file"),
    ],
)
def test_read_csv_with_a_broken_row(curve, tmp_path, edit, message):
    with pytest.raises(InputError, match=message):
        read_model(_broken_csv(curve, tmp_path, edit))


def test_read_csv_that_is_not_text(tmp_path):
    path = tmp_path / "m.csv"
    path.write_bytes(b"\xff\xfe\x00garbage")
    with pytest.raises(InputError, match=r"m\.csv: not a UTF-8 text file"):
        read_model(path)


def test_rebuilding_from_an_incomplete_record(curve):
    record = model_record(curve, "SYN-1")
    bad = copy.deepcopy(record)
    del bad["prony"]["tau_s"]
    with pytest.raises(InputError, match="lacks the Prony value 'tau_s'"):
        series_from_record(bad)
    bad = copy.deepcopy(record)
    bad["prony"]["modulus_Pa"][0] = -1.0
    with pytest.raises(InputError, match="Prony series is not usable .*non-negative"):
        series_from_record(bad)
    bad = copy.deepcopy(record)
    del bad["shift_law"]["split_C"]
    with pytest.raises(InputError, match="lacks the shift-law value 'split_C'"):
        shift_law_from_record(bad)
    bad = copy.deepcopy(record)
    bad["shift_law"]["wlf_c1"] = None
    with pytest.raises(InputError, match="a WLF\\+Arrhenius shift law needs wlf_c1"):
        shift_law_from_record(bad)
    bad["shift_law"]["kind"] = "VFT"
    with pytest.raises(InputError, match="kind 'VFT' is unknown; known: WLF, Arrhenius"):
        shift_law_from_record(bad)


# -- command line (in this process) --------------------------------------------------------
@pytest.fixture(scope="module")
def db(tmp_path_factory):
    folder = tmp_path_factory.mktemp("modelfile")
    catalog, sweeps = folder / "catalog.csv", folder / "sweeps.csv"
    synthetic.write_catalog(catalog)
    synthetic.write_csv(sweeps, synthetic.sweep(noise=0.01))
    import_files(Library(str(folder / "lib.sqlite")), [catalog], [sweeps])
    return folder / "lib.sqlite"


def test_cli_fit_writes_the_model(db, tmp_path, capsys):
    out = tmp_path / "models" / "syn.json"
    assert main(["fit", "SYN-1", "--db", str(db), "--out", str(out), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["model_file"] == str(out)
    record = read_model(out)
    assert record == model_record(master_curve(Library(str(db)), "SYN-1"), "SYN-1")
    assert record["grade"]["id"] == "SYN-1"
    assert main(["fit", "SYN-1", "--db", str(db), "--out", str(tmp_path / "syn.csv")]) == 0
    text = capsys.readouterr().out
    assert text.splitlines()[-1] == f"model written to {tmp_path / 'syn.csv'}"
    assert read_model(tmp_path / "syn.csv") == record


def test_cli_fit_without_out_writes_nothing(db, capsys):
    assert main(["fit", "SYN-1", "--db", str(db), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["model_file"] is None


@pytest.mark.parametrize(
    ("name", "message"),
    [
        ("x.txt", r"x\.txt: '\.txt' is not a model file format; accepted extensions"),
        ("plain/x.json", r"cannot write the model file"),
    ],
)
def test_cli_fit_bad_out_exits_2_with_one_line(db, tmp_path, capsys, name, message):
    (tmp_path / "plain").write_text("a file, not a folder")
    assert main(["fit", "SYN-1", "--db", str(db), "--out", str(tmp_path / name), "--json"]) == 2
    out, err = capsys.readouterr()
    assert out == ""
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("error: ")
    assert re.search(message, lines[0])
