"""Master curves of library grades, fitted once and cached in the library.

A fit is keyed by the data set's hash, the engine version and the fit options, so a
grade is refitted only when its data, the engine or the options change.

The module logs (``logging``, logger ``engine.library.fits``) how many fits came from
the cache and how many ran, at INFO, and the seconds each fit took, at DEBUG.
"""

from __future__ import annotations

import hashlib
import logging
import os
import time
from collections.abc import Callable
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

from engine.base import units
from engine.base.errors import FitError
from engine.curves import mastercurve
from engine.curves.mastercurve import MasterCurve, build_master_curve
from engine.library.store import Library
from engine.physics import isotherms, jointfit, prony, shift, transitions
from engine.physics.isotherms import DEFAULT_TOLERANCE_K
from engine.physics.shift import wlf_change_reference

log = logging.getLogger(__name__)

Progress = Callable[[int, int], None]
NUMERIC_FAILURES = (ValueError, ArithmeticError, np.linalg.LinAlgError, StopIteration)

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


def _fit_one(args) -> tuple[str, dict | str]:
    material_id, points, mode, reference_C, vertical, tolerance = args
    try:
        curve = build_master_curve(points, mode, reference_C, vertical, tolerance)
    except FitError as exc:
        return material_id, f"error: {exc}"
    except NUMERIC_FAILURES as exc:
        # One grade whose numbers defeat the fit must not take the library down with it.
        return material_id, f"error: the fit failed on these data ({type(exc).__name__}: {exc})"
    return material_id, curve.to_dict()


def _timed_fit(args) -> tuple[str, dict | str, float]:
    """:func:`_fit_one` and the seconds it took (measured where it ran)."""
    start = time.perf_counter()
    material_id, result = _fit_one(args)
    return material_id, result, time.perf_counter() - start


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
        log.debug("master curve of %s: from the cache", material_id)
        return MasterCurve.from_dict(cached)
    start = time.perf_counter()
    try:
        curve = build_master_curve(points, material.mode, reference_C, vertical_shift, tolerance_K)
    except NUMERIC_FAILURES as exc:
        raise FitError(
            f"grade {material_id!r}: the fit failed on these data ({type(exc).__name__}: {exc})"
        ) from exc
    library.store_fits({dataset.data_hash: curve.to_dict()}, key)
    log.debug("master curve of %s: fitted in %.3f s", material_id, time.perf_counter() - start)
    return curve


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
    materials = {m.id: m for m in library.materials()}
    latest = library.all_latest_points()
    key = options_key(reference_C, vertical_shift)
    hashes = {mid: ds.data_hash for mid, (ds, _) in latest.items() if mid in materials}
    cached = library.cached_fits(set(hashes.values()), key)
    curves: dict[str, MasterCurve] = {}
    errors: dict[str, str] = {}
    todo = []
    for mid, h in hashes.items():
        if h in cached:
            if "error" in cached[h]:
                errors[mid] = cached[h]["error"]
            else:
                curves[mid] = MasterCurve.from_dict(cached[h])
        else:
            todo.append(
                (
                    mid,
                    latest[mid][1],
                    materials[mid].mode,
                    reference_C,
                    vertical_shift,
                    DEFAULT_TOLERANCE_K,
                )
            )
    total = len(hashes)
    done = total - len(todo)
    log.info(
        "fit_library: %d grade(s) with data, %d cache hit(s), %d cache miss(es)",
        total,
        done,
        len(todo),
    )
    if progress:
        progress(done, total)
    if not todo:
        return curves, errors
    workers = processes or min(os.cpu_count() or 1, 2)
    new: dict[str, dict] = {}
    start = time.perf_counter()

    def take(mid, result, seconds):
        nonlocal done
        log.debug(
            "fit_library: %s fitted in %.3f s%s",
            mid,
            seconds,
            " (failed)" if isinstance(result, str) else "",
        )
        if isinstance(result, str):
            errors[mid] = result[len("error: ") :]
            new[hashes[mid]] = {"error": errors[mid]}
        else:
            curves[mid] = MasterCurve.from_dict(result)
            new[hashes[mid]] = result
        done += 1
        if progress and (done % 50 == 0 or done == total):
            progress(done, total)

    serial = workers <= 1 or len(todo) < 8
    if serial:
        for args in todo:
            take(*_timed_fit(args))
    else:
        with ProcessPoolExecutor(max_workers=workers) as pool:
            for mid, result, seconds in pool.map(
                _timed_fit, todo, chunksize=max(1, min(chunk, len(todo) // (4 * workers) or 1))
            ):
                take(mid, result, seconds)
    library.store_fits(new, key)
    failed = sum(1 for mid in errors if hashes[mid] in new)
    log.info(
        "fit_library: %d fit(s) in %.2f s (%s), %d failed",
        len(todo),
        time.perf_counter() - start,
        "serial" if serial else f"{workers} processes",
        failed,
    )
    return curves, errors


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
