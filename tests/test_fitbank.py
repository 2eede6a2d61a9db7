"""The fitted curve bank kept as one binary record in the library (issue: 10,000 grades).

The checks are of agreement: a bank read back from its record, or joined from kept rows
and newly stacked ones, evaluates bit for bit as the bank stacked from the fits (the
reference is :meth:`CurveBank.from_curves`, the stacking every ranking used before), and
a ranking from the stored record equals the ranking from the decoded fits.
"""

from __future__ import annotations

import json
import shutil
import struct
from types import SimpleNamespace

import numpy as np
import pytest

from engine.curves.bank import CurveBank
from engine.curves.bankfile import MAGIC, BankFileError, read_bank, write_bank
from engine.curves.mountcheck import MountDesign
from engine.curves.window import OperatingWindow
from engine.library.childfit import fit_in_child
from engine.library.fits import bank_key, fit_library, fitted_library
from engine.library.store import Library
from engine.selection.ranking import Criteria, rank
from tests.test_store import load_grades

TEMPS = np.linspace(-40.0, 80.0, 13)[:, None]
FREQS = np.geomspace(0.1, 1e4, 9)[None, :]
CRITERIA = Criteria(
    window=OperatingWindow(temp_range=(-20.0, 45.0), freq_range=(10.0, 100.0)),
    mount=MountDesign(mass_kg=180.0, mounts=4, thickness_mm=25.0, target_fn_Hz=10.0),
)


@pytest.fixture(scope="module")
def demo_curves(demo_library):
    curves, errors = fit_library(demo_library, processes=1)
    assert not errors
    return curves


@pytest.fixture
def demo_copy(demo_library, tmp_path):
    """A writable copy of the fitted demo library (its bank record stored)."""
    path = tmp_path / "demo.sqlite"
    shutil.copyfile(demo_library.location, path)
    return Library(str(path))


def _same_evaluation(a: CurveBank, b: CurveBank) -> None:
    """E', E'', flags, log aT and creep compliance of two banks equal bit for bit."""
    assert a.ids == b.ids
    for x, y in zip(a.evaluate(TEMPS, FREQS), b.evaluate(TEMPS, FREQS), strict=True):
        np.testing.assert_array_equal(x, y)
    np.testing.assert_array_equal(a.log_shift(TEMPS[:, 0]), b.log_shift(TEMPS[:, 0]))
    t = np.full((len(a), 4), 23.0)
    times = np.array([1.0, 3600.0, 3.6e6, 3.6e7])[None, :]
    for x, y in zip(a.compliance_rows(t, times), b.compliance_rows(t, times), strict=True):
        np.testing.assert_array_equal(x, y)
    assert a.notes == b.notes


def _same_ranking(left, right) -> None:
    """The same order, scores, index values and reasons (tolerance: exact arithmetic)."""
    assert [g.id for g in left.grades] == [g.id for g in right.grades]
    for a, b in zip(left.grades, right.grades, strict=True):
        assert a.passed == b.passed and a.reason == b.reason
        assert (a.score is None) == (b.score is None)
        if a.score is not None:
            assert a.score == pytest.approx(b.score, rel=1e-12, abs=1e-12)
        for name, value in a.indices.items():
            np.testing.assert_allclose(value, b.indices[name], rtol=1e-12, atol=0)


# ---------------------------------------------------------------- the record itself


def test_a_bank_read_back_from_its_record_evaluates_bit_for_bit(demo_curves):
    bank = CurveBank.from_curves(demo_curves)
    back, extra = read_bank(write_bank(bank, {"hashes": ["a"] * len(bank)}))
    assert extra == {"hashes": ["a"] * len(bank)}
    _same_evaluation(bank, back)
    # Views of the record's bytes: nothing copied, nothing to write through.
    assert not back.log_storage.flags.writeable
    assert back.compliance is not None and not back.compliance.slope.flags.writeable


def test_rows_taken_and_banks_joined_equal_stacking_those_grades(demo_curves):
    ids = list(demo_curves)
    bank = CurveBank.from_curves(demo_curves)
    chosen = [ids[5], ids[0], ids[9]]
    _same_evaluation(
        bank.take([5, 0, 9]), CurveBank.from_curves({i: demo_curves[i] for i in chosen})
    )
    head = CurveBank.from_curves({i: demo_curves[i] for i in ids[:6]})
    tail = CurveBank.from_curves({i: demo_curves[i] for i in ids[6:]})
    _same_evaluation(CurveBank.concat([head, CurveBank.from_curves({}), tail]), bank)


def _record(meta_change=None, cut=None, array_change=None) -> bytes:
    """A small valid record, then damaged as asked."""
    bank = CurveBank.from_curves({})
    blob = write_bank(bank)
    (length,) = struct.unpack("<Q", blob[8:16])
    meta = json.loads(blob[16 : 16 + length])
    if meta_change:
        meta.update(meta_change)
    if array_change:
        name, entry = array_change
        meta["arrays"][name] = entry
    header = json.dumps(meta).encode()
    out = MAGIC + struct.pack("<Q", len(header)) + header
    out += b"\0" * (-len(out) % 64) + b"\0" * 4096
    return out[:cut] if cut else out


@pytest.mark.parametrize(
    ("blob", "words"),
    [
        (b"", "not a bank record"),
        (b"PK\x03\x04" + b"\0" * 64, "not a bank record"),
        (_record({"format": 2}), "format 2"),
        (_record(cut=20), "incomplete or damaged"),
        (_record(array_change=("start", ["<f8", [10**9], 0])), "past the end"),
        (_record(array_change=("start", ["|O", [1], 0])), "not a plain number"),
        (_record(array_change=("start", ["<f8", [3], 0])), "do not have 0 rows"),
        (_record({"ids": None}), "incomplete or damaged"),
    ],
)
def test_a_damaged_record_is_refused_with_its_reason(blob, words):
    with pytest.raises(BankFileError, match=words):
        read_bank(blob)


# ---------------------------------------------------------------- in the library


def test_the_stored_bank_ranks_as_the_fits_do_and_decodes_no_curve(demo_copy):
    fitted = fitted_library(demo_copy)
    assert fitted.restacked == 0  # the demo library's record was written when it was fitted
    assert fitted.curves.decoded_count() == 0
    curves, errors = fit_library(demo_copy)
    assert fitted.errors == errors and set(fitted.curves) == set(curves)
    materials = {m.id: m for m in demo_copy.materials()}
    from_record = rank(fitted.curves, materials, CRITERIA, fitted.errors, bank=fitted.bank)
    assert fitted.curves.decoded_count() == 0  # ranking reads the bank alone
    _same_ranking(from_record, rank(curves, materials, CRITERIA, errors))
    # A curve asked for is decoded from the fit cache: the same curve.
    gid = from_record.shortlist[0].id
    assert fitted.curves[gid].to_dict() == curves[gid].to_dict()
    assert fitted.curves.decoded_count() == 1


def test_a_changed_grade_is_restacked_alone_and_a_deleted_one_dropped(demo_copy):
    grade = "BW-NR40"
    dataset, points = demo_copy.latest_points(grade)
    changed = points.copy()
    changed[:, 2] *= 1.25  # a stiffer batch of the same grade
    demo_copy.write_import(
        [
            {
                "key": "f",
                "file_name": "rerun.csv",
                "sha256": "1" * 64,
                "size_bytes": 1,
                "rows": len(changed),
                "kind": "sweep",
            }
        ],
        [],
        [
            {
                "material_id": grade,
                "file_key": "f",
                "data_hash": "changed-" + dataset.data_hash[:40],
                "points": changed,
            }
        ],
    )
    fitted = fitted_library(demo_copy, processes=1)
    assert fitted.restacked == 1
    curves, errors = fit_library(demo_copy)
    reference = CurveBank.from_curves({gid: curves[gid] for gid in fitted.bank.ids})
    _same_evaluation(fitted.bank, reference)
    assert fitted_library(demo_copy).restacked == 0  # the record was written back

    demo_copy.delete_material("QC-EPDM60")
    after = fitted_library(demo_copy)
    assert "QC-EPDM60" not in after.bank.ids and "QC-EPDM60" not in after.curves
    assert after.restacked == 0 and len(after.bank) == len(fitted.bank) - 1
    materials = {m.id: m for m in demo_copy.materials()}
    curves, errors = fit_library(demo_copy)
    _same_ranking(
        rank(after.curves, materials, CRITERIA, after.errors, bank=after.bank),
        rank(curves, materials, CRITERIA, errors),
    )


def test_a_damaged_stored_bank_is_stacked_again(demo_copy, caplog):
    key = bank_key()
    assert demo_copy.store_bank(key, b"not a bank at all", 14)
    with caplog.at_level("INFO", logger="engine.library.fits"):
        fitted = fitted_library(demo_copy)
    assert fitted.restacked == len(fitted.bank) == 14
    assert "stored curve bank not usable" in caplog.text
    read_bank(demo_copy.cached_bank(key) or b"")  # a good record is back


@pytest.mark.parametrize(("kept", "decoded"), [(14, 14), (13, 0)])
def test_a_whole_library_stacked_anew_keeps_no_decoded_curve(demo_copy, monkeypatch, kept, decoded):
    # engine.library.fits.DECODED_KEPT: a restack of more grades than this holds none of
    # their decoded curves (the bank serves the ranking); a curve asked for afterwards is
    # read from the fit cache and is the same curve.
    from engine.library import fits

    monkeypatch.setattr(fits, "DECODED_KEPT", kept)
    assert demo_copy.store_bank(bank_key(), b"not a bank at all", 14)  # stacked anew
    fitted = fitted_library(demo_copy)
    assert fitted.restacked == 14
    assert fitted.curves.decoded_count() == decoded
    curves, _ = fit_library(demo_copy)
    assert fitted.curves["BW-NR40"].to_dict() == curves["BW-NR40"].to_dict()


def test_bank_records_on_each_database(any_library, tmp_path, monkeypatch):
    load_grades(any_library, tmp_path, ["G-1", "G-2"])
    first = fitted_library(any_library, processes=1)
    assert first.restacked == 2
    again = fitted_library(any_library, processes=1)
    assert again.restacked == 0 and again.bank.ids == first.bank.ids
    _same_evaluation(again.bank, first.bank)
    # One record per fit options: a rewrite replaces it.
    blob = any_library.cached_bank(bank_key())
    assert blob is not None and any_library.store_bank(bank_key(), blob, 2)
    assert any_library.cached_bank(bank_key()) == blob
    # A role that may only read keeps nothing and says so.
    monkeypatch.setattr(Library, "can_write", property(lambda self: False))
    assert not any_library.store_bank("other", blob, 2)
    assert any_library.cached_bank("other") is None


def test_a_child_process_stacks_the_bank_and_stores_its_record(any_library, tmp_path):
    # engine.library.childfit: a server's stacking done in a child process. The record
    # the child stores is read back whole, and evaluates as the bank stacked here from
    # the same fits (on each database: the location goes to the child on its stdin).
    load_grades(any_library, tmp_path, ["G-1", "G-2", "G-3"])
    seen: list[tuple[int, int]] = []
    assert (
        fit_in_child(any_library, progress=lambda done, total: seen.append((done, total))) is None
    )
    assert seen and seen[-1] == (3, 3)
    again = fitted_library(any_library, processes=1)
    assert again.restacked == 0 and again.record_kept
    curves, errors = fit_library(any_library, processes=1)
    assert not errors
    _same_evaluation(again.bank, CurveBank.from_curves({g: curves[g] for g in again.bank.ids}))


def test_a_child_process_that_fails_gives_a_one_line_reason(tmp_path, demo_copy, monkeypatch):
    notes = tmp_path / "notes.sqlite"
    notes.write_text("not a database at all\n")
    why = fit_in_child(SimpleNamespace(location=str(notes), can_write=True))
    assert why is not None and why.startswith("the fitting process ended with code 1: ")
    assert "notes.sqlite" in why and "\n" not in why
    # A role that may only read could not keep the child's record: no child is started.
    monkeypatch.setattr(Library, "can_write", property(lambda self: False))
    assert fit_in_child(demo_copy) == "this role may not write the library's bank record"


def test_the_dashboard_stacks_thousands_of_grades_in_a_child(demo_copy, monkeypatch):
    # dashboard.data.fitted: more grades to stack than CHILD_FROM_GRADES go to a child
    # process, and the server reads the record the child stored (nothing stacked here);
    # a child that fails leaves the stacking to the server, as before.
    from dashboard import data

    monkeypatch.setattr(data, "CHILD_FROM_GRADES", 13)
    assert demo_copy.store_bank(bank_key(), b"not a bank at all", 14)  # 14 to stack
    found = data.fitted(demo_copy)
    assert found.restacked == 0 and len(found.bank) == 14
    data._fit_store().clear()
    assert demo_copy.store_bank(bank_key(), b"not a bank at all", 14)
    monkeypatch.setattr(data, "fit_in_child", lambda library, progress=None: "refused")
    assert data.fitted(demo_copy).restacked == 14
    data._fit_store().clear()
