"""The stacked curve bank against the master curves it was built from.

The reference is :meth:`engine.curves.mastercurve.MasterCurve.evaluate` (the Prony series at the
shifted frequency); the bank tabulates it every 0.05 decade and interpolates linearly in
log-log, so agreement to 0.5 % is the interpolation error of that grid (common practice).
"""

from __future__ import annotations

import sys
import threading
from pathlib import Path

import numpy as np
import pytest

from engine.curves import bank as bank_module
from engine.curves.bank import CurveBank
from engine.curves.mastercurve import TABLE_MARGIN, build_master_curve
from engine.physics.creep import creep_compliance
from tests import synthetic
from tests.helpers import flat_bank

T_GRID = np.linspace(-80.0, 150.0, 47)[:, None]  # [degC]
F_GRID = np.logspace(-7.0, 10.0, 35)[None, :]  # [Hz]


@pytest.fixture(scope="module")
def curves():
    """Synthetic grades covering every kind of shift law and the vertical factor."""
    sweep = synthetic.sweep
    return {
        "full": build_master_curve(sweep(noise=0.01), "tensile"),
        "vertical": build_master_curve(
            sweep(noise=0.01, seed=2), "shear", reference_C=20.0, vertical_shift=True
        ),
        "glassy": build_master_curve(
            sweep(temperatures=np.arange(-60.0, -24.0, 5.0), noise=0.01, seed=3), "tensile"
        ),
        "rubbery": build_master_curve(
            sweep(temperatures=np.arange(-5.0, 86.0, 5.0), noise=0.01, seed=4), "tensile"
        ),
        "single": build_master_curve(sweep(temperatures=[20.0]), "tensile"),
        # A 25 K gap above Tg: reduced frequencies without data, flagged extrapolated.
        "gapped": build_master_curve(
            sweep(temperatures=[-20.0, -15.0, -10.0, 15.0, 20.0, 25.0, 30.0, 35.0, 40.0]),
            "tensile",
            reference_C=20.0,
        ),
    }


@pytest.fixture(scope="module")
def bank(curves):
    return CurveBank.from_curves(curves)


def test_bank_covers_every_law_kind(curves, bank):
    kinds = {c.shift.law.kind for c in curves.values()}
    assert {"none", "Arrhenius", "WLF+Arrhenius"} <= kinds
    assert len(bank) == len(curves) and bank.ids == list(curves)
    assert bank.modes.tolist() == [c.mode for c in curves.values()]


def test_bank_agrees_with_master_curves(curves, bank):
    storage, loss, extrapolated = bank.evaluate(T_GRID, F_GRID)
    shape = (len(curves), T_GRID.shape[0], F_GRID.shape[1])
    assert storage.shape == loss.shape == extrapolated.shape == shape
    for k, (grade, curve) in enumerate(curves.items()):
        ref = curve.evaluate(T_GRID, F_GRID)
        assert np.array_equal(extrapolated[k], ref.extrapolated), grade
        np.testing.assert_allclose(
            bank.log_shift(T_GRID)[k], curve.log_shift(T_GRID), rtol=1e-12, atol=1e-12
        )
        log_fr = np.log10(ref.reduced_frequency)
        lo, hi = curve.log_fr_range
        tabulated = (log_fr >= lo - TABLE_MARGIN) & (log_fr <= hi + TABLE_MARGIN)
        assert tabulated.any()
        np.testing.assert_allclose(
            storage[k][tabulated], ref.storage_modulus[tabulated], rtol=5e-3, err_msg=grade
        )
        np.testing.assert_allclose(
            loss[k][tabulated], ref.loss_modulus[tabulated], rtol=5e-3, err_msg=grade
        )
        if (~tabulated).any():
            # Beyond the table the bank extends linearly in log-log, as the Prony series
            # does there (E' flat, E'' ~ omega or 1/omega; Ferry 1980): within 5 %.
            np.testing.assert_allclose(
                storage[k][~tabulated], ref.storage_modulus[~tabulated], rtol=0.05
            )
            np.testing.assert_allclose(loss[k][~tabulated], ref.loss_modulus[~tabulated], rtol=0.05)


def test_far_outside_the_table_is_checked(curves, bank):
    # The grid above does reach beyond the tabulated range for the full-range grade.
    curve = curves["full"]
    log_fr = np.log10(curve.evaluate(T_GRID, F_GRID).reduced_frequency)
    lo, hi = curve.log_fr_range
    assert (log_fr < lo - TABLE_MARGIN).any() and (log_fr > hi + TABLE_MARGIN).any()


def test_scalar_point(curves, bank):
    storage, loss, extrapolated = bank.evaluate(25.0, 3.0)
    assert storage.shape == (len(curves),)
    ref = curves["full"].evaluate(25.0, 3.0)
    assert storage[0] == pytest.approx(float(ref.storage_modulus), rel=5e-3)
    assert loss[0] == pytest.approx(float(ref.loss_modulus), rel=5e-3)
    assert bool(extrapolated[0]) is False


def test_evaluate_rows_is_the_diagonal_of_evaluate(curves, bank):
    rng = np.random.default_rng(11)
    n = len(curves)
    t = rng.uniform(-70.0, 120.0, size=(n, 6))
    f = 10.0 ** rng.uniform(-3.0, 6.0, size=(n, 6))
    rows = bank.evaluate_rows(t, f)
    for k in range(n):
        full = bank.evaluate(t[k], f[k])
        for got, want in zip(rows, full, strict=True):
            np.testing.assert_array_equal(got[k], want[k])


def test_evaluate_rows_broadcasts_one_frequency(bank):
    t = np.full((len(bank), 3), 20.0)
    storage, _, _ = bank.evaluate_rows(t, 10.0)
    assert storage.shape == (len(bank), 3)


def test_evaluate_rows_needs_one_row_per_grade(bank):
    with pytest.raises(ValueError, match=rf"one row per grade \({len(bank)}\)"):
        bank.evaluate_rows(np.zeros((len(bank) - 1, 3)), 1.0)


def test_blocks_on_threads_give_the_same_values(bank, monkeypatch):
    # engine.base.blocks: one grade per block on two threads reproduces one block exactly.
    from engine.base import blocks

    whole = bank.evaluate(T_GRID, F_GRID)
    monkeypatch.setattr(blocks, "BLOCK_POINTS", 1)
    monkeypatch.setattr(blocks, "WORKERS", 2)
    split = bank.evaluate(T_GRID, F_GRID)
    for got, want in zip(split, whole, strict=True):
        np.testing.assert_array_equal(got, want)


def test_a_failing_block_raises_in_the_caller(monkeypatch):
    from engine.base import blocks

    monkeypatch.setattr(blocks, "WORKERS", 2)
    seen = []

    def work(a, b):
        seen.append((a, b))
        if a == 4:
            raise ValueError("block 4 failed")

    with pytest.raises(ValueError, match="block 4 failed"):
        blocks.in_blocks(10, work, 2)
    assert sorted(seen) == [(0, 2), (2, 4), (4, 6), (6, 8), (8, 10)]


def test_log_storage_at_is_the_table_of_evaluate(curves, bank):
    # At the reference temperature (log aT = 0) evaluate reads the same table.
    f = np.logspace(-4.0, 6.0, 9)
    for k, curve in enumerate(curves.values()):
        storage, _, _ = bank.evaluate(curve.reference_C, f)
        np.testing.assert_allclose(
            bank.log_storage_at(np.full(f.size, k), np.log10(f)), np.log10(storage[k]), rtol=1e-12
        )


def test_blocks_handed_out_inside_a_block_run_in_its_thread(monkeypatch):
    # A block that cuts its own work into blocks must not wait on the pool it runs in
    # (with every worker busy that would never finish): the inner blocks run inline.
    from engine.base import blocks

    monkeypatch.setattr(blocks, "WORKERS", 2)
    done = []

    def inner(a, b):
        done.append((a, b))

    def outer(a, b):
        blocks.in_blocks(4, inner, 1)

    # Six outer blocks on two workers, four inner each; run from a thread of its own so
    # that a stuck pool fails the test instead of hanging it.
    runner = threading.Thread(target=blocks.in_blocks, args=(6, outer, 1), daemon=True)
    runner.start()
    runner.join(timeout=20.0)
    assert not runner.is_alive(), "nested blocks waited on their own pool"
    assert len(done) == 24


@pytest.mark.parametrize("workers", [1, 2])
def test_work_beside_the_caller_returns_its_value_and_raises_its_error(monkeypatch, workers):
    # engine.base.blocks.beside: the mount check runs beside the window's evaluation; a
    # failure in it must reach the caller, and it may hand out blocks itself.
    from engine.base import blocks

    monkeypatch.setattr(blocks, "WORKERS", workers)
    done = []

    def inner(a, b):
        done.append((a, b))

    def with_blocks():
        blocks.in_blocks(4, inner, 1)
        return threading.current_thread().name

    name = blocks.beside(with_blocks).result(timeout=20.0)
    assert len(done) == 4
    assert (name == threading.current_thread().name) == (workers == 1)

    def failing():
        raise ValueError("in the mount check")

    with pytest.raises(ValueError, match="in the mount check"):
        blocks.beside(failing).result(timeout=20.0)


def test_freed_memory_is_kept_where_the_c_library_allows_it():
    # engine.base.memory: on Linux with glibc the mallopt calls are taken (they return
    # 1); elsewhere nothing is set. A second call gives the first call's answer.
    import platform

    from engine.base.memory import keep_freed_memory

    taken = keep_freed_memory()
    glibc = sys.platform.startswith("linux") and platform.libc_ver()[0] == "glibc"
    assert taken == glibc
    assert keep_freed_memory() == taken


# numpy's switch of huge-page advice: numpy._core.multiarray._set_madvise_hugepage
# returns the setting it replaces (numpy's global_state documentation). Each case runs
# in a new interpreter, since the setting is per process and read once.
_HUGE_PAGES_AFTER = """
import sys
from engine.base.memory import ordinary_pages_for_arrays
{before}
answer = ordinary_pages_for_arrays()
from numpy._core import multiarray
print(answer, multiarray._set_madvise_hugepage(True))
"""


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="Linux's huge pages")
@pytest.mark.parametrize(
    ("before", "switch", "expected"),
    [
        ("import numpy", None, "True False"),  # the setter, numpy already imported
        ("", None, "True False"),  # the environment, before numpy is imported
        ("import numpy", "1", "False True"),  # the user's choice stands
        ("", "0", "True False"),
    ],
)
def test_numpy_arrays_get_ordinary_pages_unless_the_user_chose(before, switch, expected):
    import os
    import subprocess

    from engine.base.memory import HUGE_PAGE_SWITCH

    env = {k: v for k, v in os.environ.items() if k != HUGE_PAGE_SWITCH}
    if switch is not None:
        env[HUGE_PAGE_SWITCH] = switch
    done = subprocess.run(
        [sys.executable, "-c", _HUGE_PAGES_AFTER.format(before=before)],
        env=env,
        capture_output=True,
        text=True,
        timeout=60,
        check=True,
    )
    assert done.stdout.split() == expected.split()


# How many arenas glibc's allocator uses: malloc_info(3) writes one <heap nr="..."> element
# per arena; MALLOC_ARENA_MAX caps their number (mallopt(3), M_ARENA_MAX). Threads that
# allocate at once each take an arena of their own unless capped.
_ARENAS_OF_THREADS = """
import ctypes, threading
libc = ctypes.CDLL(None)
libc.fdopen.restype = ctypes.c_void_p
libc.malloc_info.argtypes = [ctypes.c_int, ctypes.c_void_p]
held, allocated, done = [], threading.Barrier(4), threading.Event()
def work():
    held.append([bytearray(100_000) for _ in range(20)])  # from this thread's arena
    allocated.wait()
    done.wait()
threads = [threading.Thread(target=work) for _ in range(3)]
for t in threads:
    t.start()
allocated.wait()  # every thread holds its blocks
out = libc.fdopen(1, b"w")
libc.malloc_info(0, out)
libc.fflush(ctypes.c_void_p(out))
done.set()
for t in threads:
    t.join()
"""


@pytest.mark.skipif(
    not sys.platform.startswith("linux") or __import__("platform").libc_ver()[0] != "glibc",
    reason="glibc's allocator arenas",
)
def test_a_dashboard_server_starts_with_one_allocator_arena():
    import os
    import subprocess

    from engine.base.memory import ARENA_SWITCH, server_environment

    base = {k: v for k, v in os.environ.items() if k != ARENA_SWITCH}

    def arenas(env) -> int:
        done = subprocess.run(
            [sys.executable, "-c", _ARENAS_OF_THREADS],
            env=env, capture_output=True, text=True, timeout=60, check=True,
        )  # fmt: skip
        return done.stdout.count("<heap nr=")

    assert arenas(base) > 1  # each allocating thread took an arena of its own
    assert arenas(server_environment(base)) == 1
    # a user's own choice stands; a blank one is filled
    assert server_environment({ARENA_SWITCH: "4"})[ARENA_SWITCH] == "4"
    assert server_environment({ARENA_SWITCH: " "})[ARENA_SWITCH] == "1"
    # `make run` starts the server with it (a user's own value stands there too)
    shown = subprocess.run(
        ["make", "-n", "run"], cwd=Path(__file__).resolve().parents[1],
        capture_output=True, text=True, timeout=60, check=True,
    ).stdout  # fmt: skip
    line = next(row for row in shown.splitlines() if "streamlit run dashboard/app.py" in row)
    assert line.lstrip().startswith(f"{ARENA_SWITCH}=${{{ARENA_SWITCH}:-1}} ")


def test_a_server_without_one_arena_says_so_in_its_log(monkeypatch, caplog):
    from dashboard import data
    from engine.base.memory import ARENA_SWITCH

    for value, expected in (("2", False), ("1", True)):
        monkeypatch.setenv(ARENA_SWITCH, value)
        data.note_server_memory.clear()
        caplog.clear()
        with caplog.at_level("WARNING", logger=data.log.name):
            assert data.note_server_memory() is expected
        said = [r.getMessage() for r in caplog.records if r.name == data.log.name]
        assert bool(said) is not expected
        if said:
            assert f"{ARENA_SWITCH}=1" in said[0] and "make run" in said[0]
    data.note_server_memory.clear()


# ------------------------------------------------------------------ creep compliance


def test_compliance_rows_follow_each_curves_spectrum(curves, bank):
    # J at temperature T is J_ref(t / aT) / (T / T0 with a vertical shift), J_ref the
    # creep compliance of the curve's Prony series (exact interconversion, Tschoegl 1989;
    # reduced variables, Ferry 1980 ch. 11); the bank interpolates a 0.2-decade table of
    # it, within 2e-4 (common practice for that grid).
    n = len(curves)
    temps = np.broadcast_to(np.linspace(-60.0, 120.0, 10), (n, 10))
    time = np.array([1.0, 10.0, 3.6e6])[None, None, :]
    compliance, extrapolated = bank.compliance_rows(temps[:, :, None], time)
    assert compliance.shape == extrapolated.shape == (n, 10, 3)
    for k, curve in enumerate(curves.values()):
        t = temps[k][:, None]
        reduced = time[0] / 10.0 ** curve.log_shift(t)
        scale = curve.relaxation_modulus(0.0, t) / curve.prony.relaxation(0.0)  # T/T0 or 1
        expected = creep_compliance(curve.prony, reduced) / scale
        np.testing.assert_allclose(compliance[k], expected, rtol=2e-4, err_msg=str(k))
        # flagged where the reduced frequency 1/(2 pi t/aT) or T leaves the data, as for
        # the moduli at that frequency
        log_fr = -np.log10(2.0 * np.pi * reduced)
        want = curve.extrapolated(t, log_fr)
        np.testing.assert_array_equal(extrapolated[k], want, err_msg=str(k))


def test_compliance_rows_with_a_precomputed_shift(bank):
    temps = np.broadcast_to(np.array([0.0, 40.0]), (len(bank), 2))
    plain = bank.compliance_rows(temps, 10.0)
    shifted = bank.compliance_rows(temps, 10.0, shift=bank.shift_rows(temps))
    for got, want in zip(shifted, plain, strict=True):
        np.testing.assert_array_equal(got, want)
    with pytest.raises(ValueError, match=rf"one row per grade \({len(bank)}\)"):
        bank.compliance_rows(np.zeros((2, 3)), 10.0)


def test_a_rebuilt_bank_reuses_the_tabulated_compliance(curves, bank, monkeypatch):
    # The tables are made once per spectrum: rebuilding the bank from the same curves
    # solves no spectrum again, and gives the same tables.
    calls = []
    real = bank_module.retardation_spectra
    monkeypatch.setattr(bank_module, "retardation_spectra", lambda *a: calls.append(1) or real(*a))
    again = CurveBank.from_curves(curves)
    assert calls == []
    np.testing.assert_array_equal(again.compliance.log_compliance, bank.compliance.log_compliance)
    # a curve with a new spectrum is solved, alone
    fresh = build_master_curve(synthetic.sweep(noise=0.01, seed=9), "tensile")
    CurveBank.from_curves({"fresh": fresh, **curves})
    assert calls == [1]


def test_a_bank_without_spectra_reads_the_static_modulus():
    # A hand-built bank (no spectra) takes J = 1/E'(1/(2 pi t)): for a grade whose modulus
    # does not depend on frequency, exactly 1/E (Tschoegl 1989: no creep).
    flat = flat_bank([2.0e6, 5.0e5], [0.1, 0.2], "tensile")
    assert flat.compliance is None
    compliance, extrapolated = flat.compliance_rows(np.full((2, 3), 23.0), 10.0)
    np.testing.assert_allclose(compliance, [[5e-7] * 3, [2e-6] * 3], rtol=1e-12)
    assert not extrapolated.any()
