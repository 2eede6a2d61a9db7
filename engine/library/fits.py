"""Master curves of library grades, fitted once and cached in the library.

A fit is keyed by the data set's hash, the engine version and the fit options, so a
grade is refitted only when its data, the engine or the options change.

Failures stay local: whatever goes wrong in one grade's fit (a refusal of its data, a
numerical failure, a fitted curve that is not finite) becomes that grade's one-line fit
error, and the other grades are fitted as before. A cache entry that cannot be used is
fitted again; a cache that cannot be written is skipped.

The module logs (``logging``, logger ``engine.library.fits``) how many fits came from
the cache and how many ran, at INFO, and the seconds each fit took, at DEBUG.
"""

from __future__ import annotations

import hashlib
import logging
import os
import threading
import time
from collections.abc import Callable, Iterator, Mapping
from concurrent.futures import ProcessPoolExecutor
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from engine.base import units
from engine.base.errors import FitError, QuietgradeError
from engine.curves import bank as bank_module
from engine.curves import bankfile, mastercurve
from engine.curves.bank import CurveBank
from engine.curves.bankfile import BankFileError, read_bank, write_bank
from engine.curves.mastercurve import MasterCurve, build_master_curve
from engine.library.store import Library
from engine.physics import creep, isotherms, jointfit, prony, shift, transitions
from engine.physics.isotherms import DEFAULT_TOLERANCE_K
from engine.physics.shift import wlf_change_reference

log = logging.getLogger(__name__)

Progress = Callable[[int, int], None]
# Failures of the numerics on bad data, named in plain words in a grade's fit error.
_FAILURE_WORDS = {
    "StopIteration": "no candidate was left to choose from",
    "FloatingPointError": "a floating-point overflow or invalid operation",
    "OverflowError": "a number too large to hold",
    "ZeroDivisionError": "a division by zero",
    "LinAlgError": "a singular or ill-conditioned linear system",
    "MemoryError": "not enough memory",
    "RuntimeWarning": "a numerical warning",
}
MAX_REASON_CHARS = 300  # a grade's fit error is one line of at most this many characters
# Failures that depend on the machine or the warnings filter rather than on the data:
# reported, but not cached as the grade's fit error (the next run fits it again).
TRANSIENT_FAILURES = (MemoryError, Warning)

# The fit code itself is part of the cache key, so that a change to the fitting
# chain refits even where the version number was not raised.
_FIT_MODULES = (shift, prony, transitions, mastercurve, units, isotherms, jointfit)
FIT_FINGERPRINT = hashlib.sha256(
    b"".join(Path(str(module.__file__)).read_bytes() for module in _FIT_MODULES)
).hexdigest()[:12]


def options_key(
    reference_C: float | None = None,
    vertical_shift: bool = False,
    tolerance_K: float = DEFAULT_TOLERANCE_K,
) -> str:
    ref = "auto" if reference_C is None else f"{float(reference_C):.3f}"
    tol = "" if tolerance_K == DEFAULT_TOLERANCE_K else f";tol={float(tolerance_K):.3f}"
    return f"ref={ref};vertical={int(bool(vertical_shift))}{tol};code={FIT_FINGERPRINT}"


def one_line(text: str, limit: int = MAX_REASON_CHARS) -> str:
    """``text`` on one line (line breaks and other control characters written as escapes),
    cut to ``limit`` characters."""
    out = "".join(c if c.isprintable() else repr(c)[1:-1] for c in str(text).strip())
    return out if len(out) <= limit else out[: limit - 3] + "..."


def failure_reason(exc: BaseException) -> str:
    """A grade's fit failure as one plain line: the engine's own reason for a
    :class:`QuietgradeError`, else what failed in words and the exception's message."""
    if isinstance(exc, QuietgradeError):
        return one_line(str(exc))
    name = type(exc).__name__
    words = _FAILURE_WORDS.get(name, f"an unexpected {name}")
    detail = one_line(str(exc), 160)
    return one_line(f"the fit failed on these data ({words}{': ' + detail if detail else ''})")


def _fit_result(args) -> tuple[str, dict | str, bool]:
    """(grade id, the fitted curve's dict or ``"error: <reason>"``, whether the result may
    be cached)."""
    material_id, points, mode, reference_C, vertical, tolerance = args
    try:
        curve = build_master_curve(points, mode, reference_C, vertical, tolerance)
        result = curve.to_dict()
    except Exception as exc:  # noqa: BLE001 - one grade never takes the library down
        log.debug("fit of %s failed", material_id, exc_info=True)
        return material_id, f"error: {failure_reason(exc)}", not isinstance(exc, TRANSIENT_FAILURES)
    return material_id, result, True


def _fit_one(args) -> tuple[str, dict | str]:
    """(grade id, the fitted curve's dict or ``"error: <reason>"``): any failure of the
    grade's fit is its own error."""
    material_id, result, _ = _fit_result(args)
    return material_id, result


def _decoded(material_id: str, data: dict) -> MasterCurve | None:
    """A cached fit as a master curve, or None where it cannot be used (it is refitted).

    The spectrum is checked as it is rebuilt (:class:`PronySeries` refuses relaxation
    times and weights that are not finite); the rest was checked when it was fitted.
    """
    try:
        curve = MasterCurve.from_dict(data)
    except Exception as exc:  # noqa: BLE001 - a cache entry that fails is fitted again
        log.info("cached fit of %s not usable (%s): fitting again", material_id, exc)
        return None
    return curve


def _timed_fit(args) -> tuple[str, dict | str, float, bool]:
    """:func:`_fit_result` with the seconds it took (measured where it ran)."""
    start = time.perf_counter()
    material_id, result, cacheable = _fit_result(args)
    return material_id, result, time.perf_counter() - start, cacheable


def master_curve(
    library: Library,
    material_id: str,
    reference_C: float | None = None,
    vertical_shift: bool = False,
    tolerance_K: float = DEFAULT_TOLERANCE_K,
) -> MasterCurve:
    """The master curve of one grade from its newest data set (cached).

    ``tolerance_K``: logged temperatures closer than this form one isotherm.
    """
    material = library.material(material_id)
    dataset, points = library.latest_points(material_id)
    key = options_key(reference_C, vertical_shift, tolerance_K)
    cached = library.cached_fit(dataset.data_hash, key)
    if cached is not None and "error" not in cached:
        curve = _decoded(material_id, cached)
        if curve is not None:
            log.debug("master curve of %s: from the cache", material_id)
            return curve
    start = time.perf_counter()
    try:
        curve = build_master_curve(points, material.mode, reference_C, vertical_shift, tolerance_K)
        result = curve.to_dict()
    except AssertionError:  # a broken invariant of the code, not of the data
        raise
    except Exception as exc:  # noqa: BLE001 - reported as this grade's fit error
        log.debug("fit of %s failed", material_id, exc_info=True)
        raise FitError(f"grade {material_id!r}: {failure_reason(exc)}") from exc
    _store(library, {dataset.data_hash: result}, key)
    log.debug("master curve of %s: fitted in %.3f s", material_id, time.perf_counter() - start)
    return curve


def _store(library: Library, results: dict[str, dict], key: str) -> None:
    """Write fits to the cache; a cache that cannot be written (a library another program
    holds locked, a read-only role) costs a refit next time, never the fits themselves."""
    if not results:
        return
    try:
        library.store_fits(results, key)
    except Exception as exc:  # noqa: BLE001 - the cache is an optimisation
        log.info("fit cache not written (%s)", one_line(str(exc)))


# Fit workers run numpy's linear algebra on one thread each. Each process otherwise
# brings a BLAS thread pool the size of the machine, the threads outnumber the cores and
# spin against each other: 200 grades on 2 cores took 50 s with 2 workers and 22 s with
# one, against 13 s with one BLAS thread per worker (measured on bench.bench_dashboard's
# clones). The limit is set in each worker as it starts; the calling process keeps its
# own setting.
def _one_blas_thread() -> None:
    """Initializer of a fit worker: numpy's BLAS on one thread in this process."""
    try:
        from threadpoolctl import threadpool_limits  # type: ignore[import-untyped]
    except ImportError:  # an installation without it fits as before, only slower
        return
    threadpool_limits(limits=1, user_api="blas")


def fit_library(
    library: Library,
    reference_C: float | None = None,
    vertical_shift: bool = False,
    processes: int | None = None,
    progress: Progress | None = None,
    chunk: int = 256,
) -> tuple[dict[str, MasterCurve], dict[str, str]]:
    """Master curves of every grade with data; fits missing from the cache run in parallel.

    Parameters
    ----------
    library : Library
        The library whose grades are fitted (each on its newest data set).
    reference_C : float, optional
        Reference temperature of the master curves [degC]; by default each grade's own.
    vertical_shift : bool, default False
        Also fit the temperature's vertical (modulus) factor.
    processes : int, optional
        Worker processes for the fits missing from the cache (both cores by default).
    progress : callable, optional
        ``progress(done, total)``, called as fits complete.
    chunk : int
        Grades sent to a worker at a time.

    Returns
    -------
    curves : dict of MasterCurve
        By grade id.
    errors : dict of str
        Why a grade could not be fitted, by grade id.

    See Also
    --------
    fitted_library : the same fits with their curve bank, read from one stored record.

    Examples
    --------
    >>> import tempfile
    >>> from pathlib import Path
    >>> from engine.library.demo import load_demo
    >>> lib = Library(str(Path(tempfile.mkdtemp()) / "demo.sqlite"))
    >>> _ = load_demo(lib)
    >>> curves, errors = fit_library(lib)
    >>> len(curves), errors
    (14, {})
    >>> curves["BW-NR40"].reference_C is not None
    True
    """
    live = library.existing_ids()
    hashes = {mid: h for mid, h in library.latest_hashes().items() if mid in live}
    return _fit_grades(
        library, hashes, reference_C, vertical_shift, processes, progress, chunk, len(hashes)
    )


def _fit_grades(
    library: Library,
    hashes: dict[str, str],
    reference_C: float | None,
    vertical_shift: bool,
    processes: int | None,
    progress: Progress | None,
    chunk: int,
    total: int,
) -> tuple[dict[str, MasterCurve], dict[str, str]]:
    """Master curves of the grades ``hashes`` names (id -> data hash of its newest data
    set): from the fit cache, else fitted (in parallel) and cached. ``total`` is the
    count ``progress`` reports against (grades settled before count as done)."""
    key = options_key(reference_C, vertical_shift)
    cached = library.cached_fits(set(hashes.values()), key)
    curves: dict[str, MasterCurve] = {}
    errors: dict[str, str] = {}
    missing = []
    for mid, h in hashes.items():
        if h in cached and "error" in cached[h]:
            errors[mid] = one_line(str(cached[h]["error"]))
            continue
        curve = _decoded(mid, cached[h]) if h in cached else None
        if curve is not None:
            curves[mid] = curve
        else:
            missing.append(mid)
    done = total - len(missing)
    log.info(
        "fit_library: %d grade(s) with data, %d cache hit(s), %d cache miss(es)",
        total,
        done,
        len(missing),
    )
    if progress:
        progress(done, total)
    if not missing:
        return curves, errors
    modes = {m.id: m.mode for m in library.materials() if m.id in set(missing)}
    points = library.latest_points_of(missing)
    todo = [
        (mid, points[mid][1], modes[mid], reference_C, vertical_shift, DEFAULT_TOLERANCE_K)
        for mid in missing
        if mid in points and mid in modes
    ]
    workers = processes or min(os.cpu_count() or 1, 2)
    new: dict[str, dict] = {}
    start = time.perf_counter()

    def take(mid, result, seconds, cacheable):
        nonlocal done
        log.debug(
            "fit_library: %s fitted in %.3f s%s",
            mid,
            seconds,
            " (failed)" if isinstance(result, str) else "",
        )
        if not isinstance(result, str):
            try:
                curves[mid] = MasterCurve.from_dict(result)
            except Exception as exc:  # noqa: BLE001 - this grade's failure alone
                result = f"error: {failure_reason(exc)}"
        if isinstance(result, str):
            errors[mid] = result[len("error: ") :]
            if cacheable:
                new[hashes[mid]] = {"error": errors[mid]}
        else:
            new[hashes[mid]] = result
        done += 1
        if progress and (done % 50 == 0 or done == total):
            progress(done, total)

    serial = workers <= 1 or len(todo) < 8
    if not serial:
        try:
            with ProcessPoolExecutor(max_workers=workers, initializer=_one_blas_thread) as pool:
                for outcome in pool.map(
                    _timed_fit,
                    todo,
                    chunksize=max(1, min(chunk, len(todo) // (4 * workers) or 1)),
                ):
                    take(*outcome)
        except (BrokenProcessPool, OSError) as exc:
            # A worker that died (out of memory, killed) or could not start: the fits it
            # left undone run here, one at a time.
            log.info("fit_library: worker processes failed (%s); fitting the rest here", exc)
            serial = True
    if serial:
        for args in todo:
            if args[0] not in curves and args[0] not in errors:
                take(*_timed_fit(args))
    _store(library, new, key)
    fitted_now = {args[0] for args in todo}
    failed = sum(1 for mid in errors if mid in fitted_now)
    log.info(
        "fit_library: %d fit(s) in %.2f s (%s), %d failed",
        len(todo),
        time.perf_counter() - start,
        "serial" if serial else f"{workers} processes",
        failed,
    )
    return curves, errors


# -- the fitted bank, stored -------------------------------------------------------------

# The stacking code is part of the bank record's key, as the fit code is of a fit's.
_BANK_MODULES = (bank_module, bankfile, creep)
BANK_FINGERPRINT = hashlib.sha256(
    b"".join(Path(str(module.__file__)).read_bytes() for module in _BANK_MODULES)
).hexdigest()[:12]


def bank_key(reference_C: float | None = None, vertical_shift: bool = False) -> str:
    """The key of the stored bank record: the fit options and the stacking code."""
    return f"{options_key(reference_C, vertical_shift)};bank={BANK_FINGERPRINT}"


# A call that stacks more grades than this anew keeps none of their decoded curves:
# the bank holds what ranking reads, and a curve shown is read again from the fit cache
# (about 0.5 ms). Kept, 10,000 decoded curves held about 400 MB of a process (570 MiB in
# use after the stack, 177 MiB without them).
DECODED_KEPT = 1_000


class FittedCurves(Mapping[str, MasterCurve]):
    """The master curves of a library's fitted grades, by id, decoded on first use.

    The ids and their order are known at once (those of the curve bank); a curve is
    read from the library's fit cache (or fitted again, should the cache have lost it)
    the first time it is asked for, and kept. Ranking reads the bank and not the curves,
    so ranking 10,000 grades decodes only the few whose draws or tables are shown.
    """

    def __init__(
        self,
        library: Library,
        hashes: dict[str, str],
        decoded: dict[str, MasterCurve],
        reference_C: float | None = None,
        vertical_shift: bool = False,
    ) -> None:
        self._library = library
        self._hashes = hashes  # id -> data hash, in the bank's order
        self._decoded = dict(decoded)
        self._options = (reference_C, vertical_shift)
        self._lock = threading.Lock()

    def __len__(self) -> int:
        return len(self._hashes)

    def __iter__(self) -> Iterator[str]:
        return iter(self._hashes)

    def __contains__(self, gid: object) -> bool:
        return gid in self._hashes

    def __getitem__(self, gid: str) -> MasterCurve:
        curve = self._decoded.get(gid)
        if curve is not None:
            return curve
        if gid not in self._hashes:
            raise KeyError(gid)
        with self._lock:
            curve = self._decoded.get(gid)
            if curve is None:
                curve = self._load(gid)
                self._decoded[gid] = curve
        return curve

    def decoded_count(self) -> int:
        """How many curves have been decoded so far."""
        return len(self._decoded)

    def _load(self, gid: str) -> MasterCurve:
        reference_C, vertical_shift = self._options
        cached = self._library.cached_fit(
            self._hashes[gid], options_key(reference_C, vertical_shift)
        )
        curve = None if cached is None or "error" in cached else _decoded(gid, cached)
        if curve is None:  # the fit cache lost it since: fitted (and cached) again
            curve = master_curve(self._library, gid, reference_C, vertical_shift)
        return curve


@dataclass
class FittedLibrary:
    """Every fitted grade of a library: lazily decoded curves, fit errors, the bank."""

    curves: FittedCurves
    errors: dict[str, str]
    bank: CurveBank  # the grades of ``curves``, in that order
    restacked: int = 0  # grades stacked anew in this call (the rest came from the record)
    record_kept: bool = True  # whether the library's bank record now holds this bank


@dataclass
class FitPlan:
    """What :func:`fitted_library` finds before it fits or stacks anything: the stored
    bank record (if usable), the data hash of every live grade, the record's rows and
    fit errors that still hold, and the grades left to fit or stack."""

    key: str  # the bank record's key (:func:`bank_key`)
    stored: CurveBank | None
    hashes: dict[str, str]  # id -> data hash of its newest data set, live grades only
    kept_rows: list[int]  # rows of ``stored`` whose grade has the same data
    errors: dict[str, str]  # fit errors of the record that still hold
    todo: dict[str, str]  # id -> data hash: to be fitted (or read from the fit cache)

    @property
    def to_stack(self) -> int:
        """How many grades a call would stack anew."""
        return len(self.todo)


def plan_fits(
    library: Library, reference_C: float | None = None, vertical_shift: bool = False
) -> FitPlan:
    """What a :func:`fitted_library` call with these options would do (reads the record)."""
    # The record first: reading it waits on the file, which another thread can use (the
    # command line imports the ranking meanwhile). Its rows are checked against the data
    # hashes read after it, so a grade changed in between is fitted again.
    key = bank_key(reference_C, vertical_shift)
    stored, extra = _stored_bank(library, key)
    live = library.existing_ids()
    hashes = {mid: h for mid, h in library.latest_hashes().items() if mid in live}
    kept_rows: list[int] = []
    errors: dict[str, str] = {}
    if stored is not None:
        row_hashes = extra.get("hashes", [])
        kept_rows = [k for k, gid in enumerate(stored.ids) if hashes.get(gid) == row_hashes[k]]
        errors = {
            gid: str(why)
            for gid, (h, why) in extra.get("errors", {}).items()
            if hashes.get(gid) == h
        }
    kept_ids = {stored.ids[k] for k in kept_rows} if stored is not None else set()
    todo = {mid: h for mid, h in hashes.items() if mid not in kept_ids and mid not in errors}
    return FitPlan(key, stored, hashes, kept_rows, errors, todo)


def fitted_library(
    library: Library,
    reference_C: float | None = None,
    vertical_shift: bool = False,
    processes: int | None = None,
    progress: Progress | None = None,
    plan: FitPlan | None = None,
) -> FittedLibrary:
    """The fits of every grade with data and their curve bank, from one stored record.

    The library keeps the bank of its fitted grades as one binary record
    (:mod:`engine.curves.bankfile`) beside the JSON fits. A call reads the record,
    keeps the rows whose grade still has the same data, fits (or reads from the fit
    cache) only the grades that are new or changed, stacks them onto the kept rows and
    writes the record back when anything changed (a role that may only read keeps
    nothing and pays the stacking each time). A record that cannot be read is stacked
    again from the fits. Results equal :func:`fit_library` followed by
    ``CurveBank.from_curves``, up to the order of the grades. ``plan`` is what
    :func:`plan_fits` returned for the same library and options, if the caller has it.

    Examples
    --------
    >>> import tempfile
    >>> from pathlib import Path
    >>> from engine.library.demo import load_demo
    >>> lib = Library(str(Path(tempfile.mkdtemp()) / "demo.sqlite"))
    >>> _ = load_demo(lib)
    >>> first = fitted_library(lib)
    >>> len(first.curves), first.restacked, first.errors
    (14, 14, {})
    >>> again = fitted_library(lib)
    >>> again.restacked, again.curves.decoded_count(), again.bank.ids == list(again.curves)
    (0, 0, True)
    """
    if plan is None:
        plan = plan_fits(library, reference_C, vertical_shift)
    stored, hashes, kept_rows, todo = plan.stored, plan.hashes, plan.kept_rows, plan.todo
    errors = dict(plan.errors)
    new_curves, new_errors = (
        _fit_grades(
            library,
            todo,
            reference_C,
            vertical_shift,
            processes,
            progress,
            256,
            len(hashes),
        )
        if todo
        else ({}, {})
    )
    errors.update(new_errors)
    parts = []
    if stored is not None and kept_rows:
        parts.append(stored if len(kept_rows) == len(stored) else stored.take(kept_rows))
    if new_curves:
        parts.append(CurveBank.from_curves(new_curves))
    bank = CurveBank.concat(parts) if parts else CurveBank.from_curves({})
    changed = stored is None or len(kept_rows) != len(stored) or bool(todo)
    if changed:
        record = {
            "hashes": [hashes[gid] for gid in bank.ids],
            "errors": {gid: [hashes[gid], why] for gid, why in errors.items()},
        }
        record_kept = _keep_bank(library, plan.key, bank, record)
    else:
        record_kept = True
    curves = FittedCurves(
        library,
        {gid: hashes[gid] for gid in bank.ids},
        new_curves if len(new_curves) <= DECODED_KEPT else {},
        reference_C,
        vertical_shift,
    )
    log.info(
        "fitted_library: %d grade(s) from the stored bank, %d stacked anew",
        len(kept_rows),
        len(new_curves),
    )
    return FittedLibrary(curves, errors, bank, restacked=len(new_curves), record_kept=record_kept)


def _stored_bank(library: Library, key: str) -> tuple[CurveBank | None, dict]:
    """The stored bank record under ``key`` and its extra, or (None, {})."""
    try:
        blob = library.cached_bank(key)
        if blob is None:
            return None, {}
        bank, extra = read_bank(blob)  # views of blob's bytes
        hashes = extra.get("hashes")
        if not isinstance(hashes, list) or len(hashes) != len(bank):
            raise BankFileError("the stored curve bank has no data hash for every row")
        return bank, extra
    except Exception as exc:  # noqa: BLE001 - the record is a cache: stacked again
        log.info("stored curve bank not usable (%s): stacking it again", one_line(str(exc)))
        return None, {}


def _keep_bank(library: Library, key: str, bank: CurveBank, record: dict) -> bool:
    """Write the bank record, and say whether it was kept; one that cannot be written
    costs a restack next time."""
    try:
        return library.store_bank(key, write_bank(bank, record), len(bank))
    except Exception as exc:  # noqa: BLE001 - the record is an optimisation
        log.info("curve bank not written (%s)", one_line(str(exc)))
        return False


def _sig(value, digits: int = 4):
    """``value`` rounded to ``digits`` significant figures (None stays None)."""
    if value is None or not np.isfinite(value):
        return None
    return float(f"{float(value):.{digits}g}")


def summary(curve: MasterCurve) -> dict:
    """The JSON summary of a fit printed by ``python -m engine fit``.

    Numbers carry the digits the data support: shift factors to 0.001 decade,
    temperatures to 0.01 K, constants to four significant figures.
    """
    law = curve.shift.law
    lows, highs = curve.shift.log_shift_low, curve.shift.log_shift_high
    per_iso = curve.quality.get("per_isotherm", [])
    factors = []
    for k, (t, a, b) in enumerate(
        zip(curve.shift.temperatures, curve.shift.log_shift, curve.shift.bridged, strict=True)
    ):
        entry = {
            "temp_C": round(float(t), 2),
            "log_aT": round(float(a), 3),
            "log_aT_low": None if lows is None else round(float(lows[k]), 3),
            "log_aT_high": None if highs is None else round(float(highs[k]), 3),
            "bridged": bool(b),
            "law_log_aT": round(float(law.log_shift(t)), 3),
        }
        if k < len(per_iso) and "points" in per_iso[k]:
            entry["points"] = per_iso[k]["points"]
        factors.append(entry)
    out: dict = {
        "reference_C": curve.reference_C,
        "mode": curve.mode,
        "grouping": curve.grouping,
        "shift_law": law.kind,
        "shift_factors": factors,
        "shift_law_rms": _sig(law.rms),
        "tg": curve.tg,
        "secondary_transition_C": curve.secondary_C,
        "regions": curve.regions,
        "reduced_frequency_range_Hz": [
            _sig(10.0 ** curve.log_fr_range[0]),
            _sig(10.0 ** curve.log_fr_range[1]),
        ],
        "log_reduced_frequency_range": list(curve.log_fr_range),
        "measured_temperature_range_C": list(curve.temperature_range),
        "residuals": curve.quality,
        "prony_terms": int(np.count_nonzero(curve.prony.weights)),
        "relaxation_modulus": relaxation_summary(curve),
        "notes": curve.notes,
    }
    out.update(law_constants(curve))
    if law.kind == "WLF+Arrhenius":
        out["law_used"] = [
            {"law": "Arrhenius", "below_C": _sig(law.split_C)},
            {"law": "WLF", "from_C": _sig(law.split_C)},
        ]
    return out


def law_constants(curve: MasterCurve) -> dict:
    """WLF and Arrhenius constants with their 95 % intervals from the fit's draws.

    WLF is given at the master curve's reference temperature (``wlf``; Ferry 1980,
    ch. 11 reference change) and, where the law was fitted from a glass transition, at
    that temperature too (``wlf_at_tg``). Intervals are the 2.5 and 97.5 percentiles over
    the draws.
    """
    law = curve.shift.law
    draws = [d.shift.law for d in curve.draw_curves()]
    out: dict = {}

    def spread(values):
        v = np.array([x for x in values if x is not None and np.isfinite(x)], dtype=float)
        if v.size < 3:
            return None, None
        return _sig(np.percentile(v, 2.5)), _sig(np.percentile(v, 97.5))

    def at(lw, reference):
        try:
            return wlf_change_reference(lw.wlf_c1, lw.wlf_c2, lw.wlf_reference_C, reference)
        except FitError:  # a reference below the divergence has no WLF constants
            return None, None

    if law.kind in ("WLF", "WLF+Arrhenius"):
        c1, c2 = at(law, curve.reference_C)
        pairs = [at(d, curve.reference_C) for d in draws]
        c1_lo, c1_hi = spread(p[0] for p in pairs)
        c2_lo, c2_hi = spread(p[1] for p in pairs)
        out["wlf"] = {
            "C1": _sig(c1),
            "C2_K": _sig(c2),
            "reference_C": curve.reference_C,
            "C1_low": c1_lo,
            "C1_high": c1_hi,
            "C2_K_low": c2_lo,
            "C2_K_high": c2_hi,
        }
        if law.wlf_reference_C is not None and law.wlf_reference_C != curve.reference_C:
            lo1, hi1 = spread(d.wlf_c1 for d in draws)
            lo2, hi2 = spread(d.wlf_c2 for d in draws)
            out["wlf_at_tg"] = {
                "C1": _sig(law.wlf_c1),
                "C2_K": _sig(law.wlf_c2),
                "reference_C": _sig(law.wlf_reference_C),
                "C1_low": lo1,
                "C1_high": hi1,
                "C2_K_low": lo2,
                "C2_K_high": hi2,
                "label": "at the glass transition dividing the WLF and Arrhenius laws",
            }
    if law.kind in ("Arrhenius", "WLF+Arrhenius"):
        assert law.activation_J_per_mol is not None  # laws of these kinds have one
        lo, hi = spread((d.activation_J_per_mol or np.nan) / 1e3 for d in draws)
        out["arrhenius"] = {
            "activation_kJ_per_mol": _sig(law.activation_J_per_mol / 1e3),
            "activation_kJ_per_mol_low": lo,
            "activation_kJ_per_mol_high": hi,
            "reference_C": _sig(law.split_C if law.kind == "WLF+Arrhenius" else law.reference_C),
            "below_C": _sig(law.split_C),
        }
    return out


DESIGN_TIMES_S = {"1 h": 3600.0, "1000 h": 3.6e6}


def relaxation_summary(curve: MasterCurve, temperature_C: float | None = None) -> dict:
    """Relaxation modulus at 1 h and 1000 h, the times design data sheets quote.

    At ``temperature_C`` (default: the reference temperature), in MPa, with the flag
    ``extrapolated`` where 1/(2 pi t) falls outside the covered reduced frequencies.
    """
    t = curve.reference_C if temperature_C is None else float(temperature_C)
    out = {"temp_C": t, "mode": curve.mode}
    lo, hi = curve.log_fr_range
    for label, seconds in DESIGN_TIMES_S.items():
        value = float(curve.relaxation_modulus(seconds, t))
        log_fr = np.log10(1.0 / (2.0 * np.pi * seconds)) + float(curve.log_shift(t))
        out[label] = {
            "time_s": seconds,
            "modulus_MPa": value / 1e6,
            "extrapolated": bool(log_fr < lo or log_fr > hi),
        }
    return out
