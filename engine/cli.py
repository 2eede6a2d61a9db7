"""Command line: ``python -m engine COMMAND``.

Temperatures in degC, frequencies in Hz, moduli in MPa on the command line and in JSON.
Exit status 0 on success, 2 on bad input with a one-line reason on stderr. No traceback
and no warning reaches the user: an unexpected failure is one line too (``--verbose``
adds the traceback), and warnings are logged (shown under ``--verbose``), not printed.
"""

from __future__ import annotations

import argparse
import importlib
import json
import logging
import math
import re
import sys
import traceback
import warnings
from concurrent.futures import ThreadPoolExecutor
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np

from engine.base.errors import LibraryError, QuietgradeError
from engine.base.fields import CATALOG
from engine.base.memory import arrange_memory
from engine.base.version import __version__
from engine.library.store import Library, default_location
from engine.physics.isotherms import DEFAULT_TOLERANCE_K

log = logging.getLogger(__name__)
MAX_MESSAGE_CHARS = 2000  # an error line is cut here


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit status 2
        sys.stderr.write(f"{self.prog}: {message}\n")
        raise SystemExit(2)


# NaN and the infinities as the json module writes them, found outside strings (a string
# token is matched whole first, so its text is never read as a number).
_NON_FINITE = re.compile(r'"(?:[^"\\]|\\.)*"|(NaN|-?Infinity)')


def _json_default(value):
    """numpy's values as plain ones for the json module (called for the types it lacks)."""
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.floating):
        return float(value)
    raise TypeError(f"{type(value).__name__} is not JSON")


def _null_if_non_finite(match: re.Match) -> str:
    return "null" if match.group(1) else match.group(0)


def _dumps(value) -> str:
    """``json.dumps(value)`` with numpy's values plain and NaN and the infinities null
    (RFC 8259 has neither). The C encoder writes the text, and the non-finite numbers
    are replaced in it after: walking a 10,000-grade ranking in Python to clean it first
    took 2 s of the 4.2 s `rank --json` took."""
    text = json.dumps(value, default=_json_default)
    if "NaN" in text or "Infinity" in text:
        text = _NON_FINITE.sub(_null_if_non_finite, text)
    return text


def _write_json(value, out) -> None:
    """``value`` as one line of JSON on ``out``, spaced as ``json.dumps`` spaces it,
    written a top-level entry (and a list's item) at a time by the json module's C
    encoder: an indented dump of a 10,000-grade
    ranking took 12 s in its pure-Python encoder, one string of it 90 MB more memory.
    Pipe it to a formatter to read it."""
    if isinstance(value, dict):
        out.write("{")
        for k, (key, item) in enumerate(value.items()):
            out.write((", " if k else "") + json.dumps(str(key)) + ": ")
            _write_json(item, out)
        out.write("}")
    elif isinstance(value, list):
        out.write("[")
        for k, item in enumerate(value):
            out.write((", " if k else "") + _dumps(item))
        out.write("]")
    else:
        out.write(_dumps(value))


def _emit(args, data, text_lines):
    """Print ``data`` as JSON (``--json``; a callable is called for it) or the lines."""
    if args.json:
        _write_json(data() if callable(data) else data, sys.stdout)
        sys.stdout.write("\n")
    else:
        for line in text_lines:
            print(line)


def _library(args) -> Library:
    return Library(args.db or default_location())


# -- commands ----------------------------------------------------------------------------


def cmd_load(args) -> int:
    from engine.library.importer import import_files, looks_like_catalog, read_table

    lib = _library(args)
    tables = [read_table(p) for p in [args.catalog, *args.sweeps]]
    catalogs = [tables[0]]
    sweeps: list = []
    for t in tables[1:]:
        (catalogs if looks_like_catalog(t) else sweeps).append(t)
    summary = import_files(lib, catalogs, sweeps)
    lines = [
        f"added {len(summary.materials_added)} grade(s), updated "
        f"{len(summary.materials_updated)}, added {len(summary.datasets_added)} data set(s)"
    ]
    lines += [f"  data set for {m}: {n} points" for m, n in summary.datasets_added]
    lines += [f"  amplitude sweep for {m}: {n} points" for m, n in summary.amplitude_sweeps_added]
    lines += [f"  unchanged (already imported): {f}" for f in summary.files_skipped]
    lines += [f"  note: {n}" for n in summary.notes]
    _emit(args, summary.to_dict(), lines)
    return 0


def cmd_list(args) -> int:
    lib = _library(args)
    sets: dict[str, list] = {}
    for ds in lib.datasets():
        sets.setdefault(ds.material_id, []).append(ds)
    materials = lib.materials()

    def rows() -> list[dict[str, Any]]:  # the JSON form, made only for --json
        return [
            {
                "id": m.id,
                **{f.json_name: getattr(m, f.name) for f in CATALOG},
                "extra": m.extra,
                "datasets": [
                    {
                        "dataset_id": d.dataset_id,
                        "points": d.n_points,
                        "file": d.file_name,
                        "sha256": d.sha256,
                        "imported_at": d.imported_at,
                        "in_use": i == len(sets.get(m.id, [])) - 1,
                    }
                    for i, d in enumerate(sets.get(m.id, []))
                ],
            }
            for m in materials
        ]

    if args.json:
        _emit(args, rows, [])
        return 0
    lines = [f"{len(materials)} grade(s) in {lib.display_location}"]
    # Columns as wide as their longest entry: ids, names and suppliers are never cut.
    shown = [
        (_one_line(m.id or "-"), _one_line(m.name or "-"), _one_line(m.supplier or "-"))
        for m in materials
    ]
    wide = [max([len(cells[k]) for cells in shown] + [1]) for k in range(3)]
    for m, (gid, name, supplier) in zip(materials, shown, strict=True):
        own = sets.get(m.id, [])
        pts = own[-1].n_points if own else 0
        lines.append(
            f"  {gid:<{wide[0]}}  {name:<{wide[1]}}  {m.mode:<8} {supplier:<{wide[2]}}  "
            f"{len(own)} data set(s), newest {pts} points"
        )
    sys.stdout.write("\n".join(lines) + "\n")
    return 0


def _grade_id(lib: Library, given: str) -> str:
    """The library's id for ``given``: as written, else the one id equal to it when case
    is ignored; else the library's own error (``Library.material``) with the nearest ids
    as a suggestion."""
    ids = sorted(lib.existing_ids())  # one column, not the whole catalog
    if given in ids:
        return given
    same = [g for g in ids if g.casefold() == given.casefold()]
    if len(same) == 1:
        return same[0]
    try:
        lib.material(given)  # the store's own message (and its check of the text)
    except LibraryError as exc:
        import difflib

        folded = {g.casefold(): g for g in ids}
        near = difflib.get_close_matches(given.casefold(), list(folded), n=3, cutoff=0.5)
        if not near:
            raise
        shown = " or ".join(f"'{folded[g]}'" for g in near)
        raise LibraryError(f"{exc}; did you mean {shown}?") from None
    return given


def _tolerance(args) -> float:
    tol = args.temperature_tolerance
    if not np.isfinite(tol) or tol <= 0:
        raise QuietgradeError(f"--temperature-tolerance: {tol:g} K must be positive")
    return tol


def cmd_fit(args) -> int:
    from engine.library.fits import master_curve, summary

    lib = _library(args)
    args.id = _grade_id(lib, args.id)
    curve = master_curve(lib, args.id, args.reference, args.vertical_shift, _tolerance(args))
    data = {"id": args.id, **summary(curve)}
    if args.out:
        from engine.output.modelfile import write_model

        write_model(curve, args.out, args.id)
    data["model_file"] = args.out
    law = curve.shift.law
    lines = [
        f"{args.id}: master curve at {curve.reference_C:.1f} °C, shift law {law.kind}",
    ]
    if curve.grouping:
        lines.append(f"  points: {curve.grouping['description']}")

    def band(d, key, fmt):
        lo, hi = d.get(f"{key}_low"), d.get(f"{key}_high")
        return "" if lo is None or hi is None else f" (95 %: {lo:{fmt}} to {hi:{fmt}})"

    for key, label in (("wlf", "at the reference"), ("wlf_at_tg", "at Tg")):
        if key in data:
            w = data[key]
            if w["C1"] is None or w["C2_K"] is None:  # the reference is below the divergence
                lines.append(f"  WLF {label}: no constants there ({w['reference_C']:.1f} °C)")
                continue
            lines.append(
                f"  WLF C1 = {w['C1']:.3g}{band(w, 'C1', '.3g')}, C2 = {w['C2_K']:.1f} K"
                f"{band(w, 'C2_K', '.1f')} {label}, {w['reference_C']:.1f} °C"
            )
    if "arrhenius" in data:
        a = data["arrhenius"]
        lines.append(
            f"  Arrhenius Ea = {a['activation_kJ_per_mol']:.0f} kJ/mol"
            f"{band(a, 'activation_kJ_per_mol', '.0f')}"
        )
    for tg in curve.tg:
        if tg["reached"]:
            value = f"{tg['temperature_C']:.1f} °C"
            if tg.get("low_C") is not None:
                value += f" (95 %: {tg['low_C']:.1f} to {tg['high_C']:.1f} °C)"
        else:
            value = tg["note"]
        lines.append(f"  Tg ({tg['method']}, {tg['frequency_Hz']:g} Hz): {value}")
    lo, hi = data["reduced_frequency_range_Hz"]
    lines.append(f"  reduced frequency covered: {lo:.3g} to {hi:.3g} Hz")
    q = curve.quality
    lines.append(
        f"  residuals: rms log E' {q['rms_log_storage']:.4f}, rms log tan d "
        f"{q['rms_log_loss_factor']:.4f}"
    )
    for label in ("1 h", "1000 h"):
        r = data["relaxation_modulus"][label]
        flag = " (extrapolated)" if r["extrapolated"] else ""
        lines.append(f"  relaxation modulus at {label}: {r['modulus_MPa']:.4g} MPa{flag}")
    lines += [f"  note: {n}" for n in curve.notes]
    if args.out:
        lines.append(f"model written to {args.out}")
    _emit(args, data, lines)
    return 0


def cmd_props(args) -> int:
    from engine.curves.window import check_frequencies, check_temperatures
    from engine.library.fits import master_curve

    t = check_temperatures(args.temp, "--temp")[:, None]
    f = check_frequencies(args.freq, "--freq")[None, :]
    lib = _library(args)
    args.id = _grade_id(lib, args.id)
    curve = master_curve(lib, args.id, args.reference, args.vertical_shift, _tolerance(args))
    p = curve.evaluate(t, f)
    b = curve.interval(t, f)
    out = []
    for i in range(t.shape[0]):
        for j in range(f.shape[1]):
            out.append(
                {
                    "temp_C": float(t[i, 0]),
                    "freq_Hz": float(f[0, j]),
                    "storage_MPa": float(p.storage_modulus[i, j] / 1e6),
                    "loss_MPa": float(p.loss_modulus[i, j] / 1e6),
                    "loss_factor": float(p.loss_factor[i, j]),
                    "extrapolated": bool(p.extrapolated[i, j]),
                    "mode": curve.mode,
                    "storage_MPa_low": float(b.storage_low[i, j] / 1e6),
                    "storage_MPa_high": float(b.storage_high[i, j] / 1e6),
                    "loss_MPa_low": float(b.loss_low[i, j] / 1e6),
                    "loss_MPa_high": float(b.loss_high[i, j] / 1e6),
                    "loss_factor_low": float(b.loss_factor_low[i, j]),
                    "loss_factor_high": float(b.loss_factor_high[i, j]),
                }
            )
    sym = "E" if curve.mode == "tensile" else "G"
    lines = [
        f"{'T [degC]':>9} {'f [Hz]':>9} {sym + chr(39) + ' [MPa]':>12} "
        f"{sym + chr(39) * 2 + ' [MPa]':>12} {'tan d':>8}   95 % interval of {sym}' and tan d"
    ]
    for r in out:
        flag = "  extrapolated" if r["extrapolated"] else ""
        lines.append(
            f"{r['temp_C']:9.1f} {r['freq_Hz']:9.3g} {r['storage_MPa']:12.4g} "
            f"{r['loss_MPa']:12.4g} {r['loss_factor']:8.4f}   "
            f"{r['storage_MPa_low']:.4g}-{r['storage_MPa_high']:.4g} MPa, "
            f"{r['loss_factor_low']:.3g}-{r['loss_factor_high']:.3g}{flag}"
        )
    _emit(args, out, lines)
    return 0


def cmd_demo(args) -> int:
    from engine.library.demo import load_demo
    from engine.library.fits import fit_library

    lib = _library(args)
    summary = load_demo(lib)
    curves, errors = fit_library(lib)
    data = {**summary.to_dict(), "fitted": sorted(curves), "fit_errors": errors}
    if summary.materials_added or summary.datasets_added:
        added = len(summary.materials_added)
        head = f"demo library loaded into {lib.display_location}: {added} grade(s)"
    else:
        head = f"demo library already in {lib.display_location}: nothing changed"
    lines = [head]
    for mid in sorted(curves):
        c = curves[mid]
        tg = next((t for t in c.tg if t["method"] == "loss_factor_peak"), None)
        tg_text = f"{tg['temperature_C']:.0f} °C" if tg and tg["reached"] else "not in range"
        lines.append(
            f"  {mid:<14} {c.shift.law.kind:<14} reference {c.reference_C:6.1f} °C, "
            f"tan d peak at 1 Hz: {tg_text}"
        )
    lines += [f"  {mid}: fit failed: {e}" for mid, e in errors.items()]
    _emit(args, data, lines)
    return 0


def _json_file(name: str) -> Any:
    """The JSON in file ``name``, or a one-line refusal naming the file."""
    path = Path(name)
    if not path.exists():
        raise QuietgradeError(f"{path}: file not found")
    try:
        return json.loads(path.read_text(encoding="utf-8-sig"))
    except UnicodeDecodeError:
        raise QuietgradeError(f"{path}: not UTF-8 text") from None
    except json.JSONDecodeError as exc:
        raise QuietgradeError(f"{path}: not valid JSON: {exc}") from None


def _system_case(name: str):
    from engine.base.errors import CriteriaError
    from engine.curves.system import MountSystem

    try:
        return MountSystem.from_dict(_json_file(name))
    except CriteriaError as exc:
        raise QuietgradeError(f"{name}: {exc}") from None


def cmd_system(args) -> int:
    from engine.curves.system import solve_system
    from engine.curves.window import OperatingWindow, check_temperatures
    from engine.library.fits import master_curve

    temps = check_temperatures(args.temp, "--temp") if args.temp else OperatingWindow().temperatures
    system = _system_case(args.case)
    lib = _library(args)
    args.id = _grade_id(lib, args.id)
    material = lib.material(args.id)
    curve = master_curve(lib, args.id)
    row = {
        "poisson_ratio": material.poisson_ratio,
        "hardness": material.hardness,
        "bulk_modulus": material.bulk_modulus,
    }
    res = solve_system(curve, row, system, temps)
    data = {"id": args.id, **res.to_dict()}
    fails = res.failures()
    head = f"{args.id}: passes" if not fails else f"{args.id}: fails — " + "; ".join(fails)
    lines = [
        head,
        f"  {system.mass_kg:g} kg on {len(system.mounts)} mounts; highest mode "
        f"{res.highest_mode:.3g} Hz; worst transmissibility {res.worst_transmissibility:.3g}",
    ]
    for i, t in enumerate(res.temperatures):
        modes = ", ".join(f"{res.names[i][j]} {res.frequencies[i, j]:.3g}" for j in range(6))
        worst = max((float(tm[i].max()) for tm in res.transmissibility if tm.size), default=0.0)
        lines.append(f"  {t:6.1f} °C: {modes} Hz; worst T {worst:.3g}")
    lines += [f"  note: {n}" for n in res.notes]
    _emit(args, data, lines)
    return 0


def cmd_mount(args) -> int:
    from engine.curves.bank import CurveBank
    from engine.curves.mountcheck import MountDesign, check_mounts
    from engine.curves.window import check_temperatures
    from engine.library.fits import master_curve

    check_temperatures(args.temp, "--temp")
    lib = _library(args)
    args.id = _grade_id(lib, args.id)
    material = lib.material(args.id)
    curve = master_curve(lib, args.id)
    optional = {
        "mounts": args.mounts,
        "shape": args.shape,
        "service_life_h": args.service_life_h,
        "harmonics": None if args.harmonics is None else tuple(args.harmonics),
        "working_strain": args.working_strain,
        # Neither Hz nor rpm given: the design's default disturbance.
        "disturbance_Hz": (
            tuple(args.disturbance_hz or ()) if args.disturbance_hz or args.rpm else None
        ),
    }
    design = MountDesign(
        layout=args.layout,
        mass_kg=args.mass,
        area_mm2=args.area_mm2,
        thickness_mm=args.thickness_mm,
        shape_factor=args.shape_factor,
        k_factor=args.k_factor,
        disturbance_rpm=tuple(args.rpm or ()),
        target_fn_Hz=args.target_fn,
        **{k: v for k, v in optional.items() if v is not None},  # else the design's defaults
    )
    bank = CurveBank.from_curves({args.id: curve})

    def known(v):
        return np.array([np.nan if v is None else float(v)])

    res = check_mounts(
        bank,
        design,
        np.array(args.temp, dtype=float),
        known(material.poisson_ratio),
        known(material.hardness),
        bulk_modulus=known(material.bulk_modulus),
        amplitude_sweeps=(
            None if design.working_strain is None else lib.amplitude_sweeps([args.id])
        ),
    )
    figs = res.grade(0)
    one_t = len(args.temp) == 1
    one_d = len(design.frequencies) == 1

    def pick(values):
        return values[0] if one_t else values

    trans = figs["transmissibility"]
    if one_d:
        trans = [row[0] for row in trans]
    data = {
        "id": args.id,
        "verdict": figs["verdict"],
        "verdict_reasons": figs["verdict_reasons"],
        "mode": curve.mode,
        "layout": design.layout,
        "temp_C": pick(figs["temperatures_C"]),
        "disturbance_Hz": design.frequencies[0] if one_d else list(design.frequencies),
        "disturbances": design.disturbance_labels(),
        "natural_frequency_Hz": pick(figs["natural_frequency_Hz"]),
        "transmissibility": pick(trans),
        "static_deflection_mm": pick(figs["static_deflection_mm"]),
        "static_strain": pick(figs["static_strain"]),
        "dynamic_to_static_ratio": pick(figs["dynamic_to_static_ratio"]),
        "loss_factor_at_resonance": pick(figs["loss_factor_at_resonance"]),
        "amplification_at_resonance": pick(figs["amplification_at_resonance"]),
        "isolation_onset_Hz": pick(figs["isolation_onset_Hz"]),
        "area_mm2": figs["area_mm2"],
        "shape_factor": figs["shape_factor"],
        "k_factor": figs["k_factor"],
        "bulk_modulus_MPa": figs["bulk_modulus_MPa"],
        "bulk_modulus_source": figs["bulk_modulus_source"],
        "mass_per_mount_kg": design.mass_per_pad,
        "static_stress_MPa": figs["static_stress_MPa"],
        "stress_limit_MPa": figs["stress_limit_MPa"],
        "long_term_sag_mm": figs["sag_mm"],
        "long_term_strain": figs["sag_strain"],
        "strain_limit": figs["strain_limit"],
        "extrapolated": pick(figs["extrapolated"]),
        "notes": figs["notes"],
    }
    reasons = figs["verdict_reasons"]
    verdict = f"{args.id}: passes" if not reasons else f"{args.id}: fails — " + "; ".join(reasons)
    lines = [
        verdict,
        f"  {design.mounts} {design.layout} pad(s) of {figs['area_mm2']:.4g} mm2 x "
        f"{design.thickness_mm:g} mm under {design.mass_per_pad:.4g} kg each",
    ]
    carried = not any(r.startswith(("cannot carry", "too stiff")) for r in reasons)
    hz = ", ".join(design.disturbance_labels())
    for i, t in enumerate(figs["temperatures_C"]):
        strain = figs["static_strain"][i]
        flag = "  extrapolated" if figs["extrapolated"][i] else ""
        if not carried:  # the linear figures of a pad that cannot carry its load mean nothing
            lines.append(f"  {t:6.1f} °C: static strain {strain:.3g}{flag}")
            continue
        fn = figs["natural_frequency_Hz"][i]
        if not math.isfinite(fn):
            lines.append(f"  {t:6.1f} °C: no natural frequency, static strain {strain:.3g}{flag}")
            continue
        tr = ", ".join(f"{v:.3f}" for v in figs["transmissibility"][i])
        lines.append(
            f"  {t:6.1f} °C: fn {fn:.3g} Hz, T = {tr} at {hz}, amplification at resonance "
            f"{figs['amplification_at_resonance'][i]:.3g}, static strain {strain:.3g} "
            f"({figs['static_deflection_mm'][i]:.3g} mm), dynamic/static stiffness "
            f"{figs['dynamic_to_static_ratio'][i]:.3g}{flag}"
        )
    lines.append(
        f"  long-term sag {figs['sag_mm']:.3g} mm (strain {figs['sag_strain']:.3g}) after "
        f"{design.service_life_h:g} h at {max(args.temp):g} °C; strain limit "
        f"{figs['strain_limit']:g}"
    )
    lines += [f"  note: {n}" for n in figs["notes"]]
    _emit(args, data, lines)
    return 0


def _criteria_from_args(args):
    """The criteria of ``rank``: the criteria file (or the defaults, with the design's
    default indices) changed by the options given, each change one ``replace``."""
    from engine.curves.mountcheck import MountDesign
    from engine.selection.criteria import Criteria, IndexChoice

    criteria = Criteria.load(args.criteria) if args.criteria else Criteria()
    given = {
        "temp_range": tuple(args.temp_range) if args.temp_range else None,
        "temp_step": args.temp_step,
        "freq_range": tuple(args.freq_range) if args.freq_range else None,
        "freq_points": args.freq_points,
    }
    window = replace(criteria.window, **{k: v for k, v in given.items() if v is not None})
    limits = {
        key: getattr(args, key)
        for key in (
            "min_loss_factor",
            "max_price",
            "max_transmissibility",
            "min_isolation_efficiency",
            "min_frequency_ratio",
            "max_amplification",
            "max_static_strain",
        )
        if getattr(args, key) is not None
    }
    if args.allow_extrapolation:
        limits["allow_extrapolation"] = True
    if args.ignore_service_range:
        limits["service_covers_window"] = False
    changes: dict = {"window": window, "constraints": replace(criteria.constraints, **limits)}
    if args.design:
        changes["design"] = args.design
        if not args.criteria:
            changes["indices"] = ()  # the design's default indices and mount
            changes["mount"] = None
    if args.screening:
        changes.update(screening_only=True, mount=None, design="isolation_mount")
        if not args.index and not args.criteria:
            changes["indices"] = ()
    if args.index:
        changes["indices"] = tuple(IndexChoice(n, 1.0, args.aggregate) for n in args.index)
    if args.mount:
        changes["mount"] = MountDesign.from_dict(_json_file(args.mount))
    if args.system:
        changes["system"] = _system_case(args.system)
        if not args.mount:
            changes["mount"] = None  # the system takes the place of the one-pad mount
        if not args.index and not args.criteria:
            changes["indices"] = ()  # the mount system's default indices
    if args.pareto:
        changes["pareto"] = tuple(args.pareto)
    return replace(criteria, **changes)


def _rank_json(result, criteria, errors: dict, out) -> dict:
    """The ``rank --json`` document of ``result``."""
    from engine.selection.spread import MOUNT_SERIES

    rows = []
    for g in result.grades:
        mount = g.mount
        if mount is not None:  # null companions where no interval was computed
            for key in (f"{name}_{end}" for name in MOUNT_SERIES for end in ("low", "high")):
                mount.setdefault(key, None)
        rows.append(
            {
                "rank": g.rank,
                "rank_interval": g.rank_interval,
                "id": g.id,
                "name": g.name,
                "supplier": g.supplier,
                "price_per_kg": g.price,
                "passed": g.passed,
                "score": g.score,
                "pareto": g.pareto,
                "indices": g.indices,
                "indices_low": {n: g.index_interval(n)[0] for n in g.indices},
                "indices_high": {n: g.index_interval(n)[1] for n in g.indices},
                "failures": [
                    {"constraint": f.constraint, "value": f.value, "limit": f.limit}
                    for f in g.failures
                ],
                "reason": g.reason,
                "extrapolated": g.extrapolated,
                "mount": mount,
            }
        )
    spread = result.spread
    assert spread is not None  # rank_spread always says how the intervals were made
    data = {
        "criteria": criteria.to_dict(),
        "engine_version": __version__,
        "shortlist": [r for r in rows if r["passed"]],
        "excluded": [r for r in rows if not r["passed"]],
        "fit_errors": errors,
        "intervals": {
            "draws": spread.draws,
            "leading": list(spread.leading),
            "note": spread.describe(),
        },
        "out": out,
    }
    return data


# What `rank` imports while another thread reads the library (reading the stored curve
# bank, ~160 MB for 10,000 grades, waits on the file and leaves the interpreter lock
# free): the ranking, and scipy.optimize (~0.3 s to import), whose root finder gives the
# creep spectra of the draws the rank intervals stack. The modules import one another in
# one order (the layers), so two threads importing at once cannot wait on each other.
_RANK_MODULES = ("engine.selection.ranking", "engine.selection.spread", "scipy.optimize")


def _import_all(names: tuple[str, ...]) -> None:
    """Import ``names`` ahead of use; a failure is left for the import where they are used
    (which reports it as every failure is), never printed here."""
    for name in names:
        try:
            importlib.import_module(name)
        except Exception:  # noqa: BLE001 - raised again, and reported, where it is used
            return


# Excluded grades listed one by one in the text of `rank` up to this many; above it, a
# count per first failed limit (a 10,000-grade library excludes thousands).
EXCLUDED_LISTED = 40


def _excluded_lines(excluded: list, every: bool) -> list[str]:
    """The text lines of the excluded grades: each with its reasons, or a summary."""
    if every or len(excluded) <= EXCLUDED_LISTED:
        return [f"    - {g.id:<14} {g.reason}" for g in excluded]
    first: dict[str, int] = {}
    for g in excluded:
        what = g.failures[0].about if g.failures else "excluded"
        first[what] = first.get(what, 0) + 1
    lines = [
        f"  {len(excluded):,} grade(s) excluded, by the first limit each fails "
        "(--all-excluded lists each with every reason):"
    ]
    for what, count in sorted(first.items(), key=lambda item: (-item[1], item[0])):
        lines.append(f"    - {count:>7,}  {what}")
    return lines


def cmd_rank(args) -> int:
    from engine.library.fits import fitted_library
    from engine.selection.criteria import SCREENING_NOTE

    lib = _library(args)
    criteria = _criteria_from_args(args)
    with ThreadPoolExecutor(max_workers=1) as reader:
        reading = reader.submit(fitted_library, lib)
        _import_all(_RANK_MODULES)
        fitted = reading.result()
    from engine.selection.ranking import rank, working_sweeps
    from engine.selection.spread import rank_spread

    curves, errors = fitted.curves, fitted.errors
    if not curves:
        failed = "; ".join(f"{gid}: {why}" for gid, why in sorted(errors.items())[:3])
        more = f" and {len(errors) - 3} more" if len(errors) > 3 else ""
        raise QuietgradeError(
            f"no fitted grades in the library {lib.display_location}"
            + (f"; the fit failed for {len(errors)} grade(s): {failed}{more}" if errors else "")
        )
    materials = {m.id: m for m in lib.materials()}
    sweeps = working_sweeps(lib, criteria)
    ranked = rank(curves, materials, criteria, errors, bank=fitted.bank, amplitude_sweeps=sweeps)
    result = rank_spread(ranked, curves, materials)
    if args.out:
        from engine.output.export import write_shortlist

        write_shortlist(result, args.out, lib, curves)

    def data() -> dict:  # the JSON form, made only for --json
        return _rank_json(result, criteria, errors, args.out)

    lo, hi = criteria.window.temp_range
    flo, fhi = criteria.window.freq_range
    lines = [
        f"window {lo:g} to {hi:g} °C, {flo:g} to {fhi:g} Hz; "
        f"{len(result.shortlist)} of {len(result.grades)} grade(s) pass"
        + (f"; {len(errors)} not ranked (master curve failed)" if errors else "")
    ]
    design = criteria.mount
    if design is not None:
        limit = criteria.constraints.transmissibility_limit
        lines.append(
            f"mount: {design.mounts} {design.layout} pad(s) under {design.mass_kg:g} kg, "
            f"disturbance {', '.join(design.disturbance_labels())}"
            + (f", T below {limit:g} at every temperature" if limit is not None else "")
        )
    elif criteria.screening_only:
        lines.append(SCREENING_NOTE)
    for g in result.shortlist:
        span = "" if g.rank_interval is None else "ranks {}-{}".format(*g.rank_interval)
        lines.append(f"  {g.rank:>3}. {g.id:<14} score {g.score:5.1f} {span:>10}  {g.reason}")
    lines += _excluded_lines(result.excluded, args.all_excluded)
    for gid, why in sorted(errors.items()):
        lines.append(f"    - {_one_line(gid):<14} not ranked: master curve failed: {why}")
    if args.out:
        lines.append(f"shortlist written to {args.out}")
    _emit(args, data, lines)
    return 0


def _global_options(parser: _Parser, suppress: bool) -> _Parser:
    """Add the global options. A command's copy has no defaults (``suppress``), so that
    one given before the command is not overwritten by the command's own default."""

    def default(value):
        return argparse.SUPPRESS if suppress else value

    parser.add_argument(
        "--db",
        default=default(None),
        help="library file or database URL (default: $QUIETGRADE_DB)",
    )
    parser.add_argument(
        "--json",
        action="store_true",
        default=default(False),
        help="machine-readable output on stdout",
    )
    parser.add_argument(
        "--verbose",
        action="store_true",
        default=default(False),
        help="log cache use and fit timing on stderr",
    )
    return parser


ID_HELP = "grade id as `list` shows it (case does not matter)"


def build_parser() -> argparse.ArgumentParser:
    from engine.curves.window import OperatingWindow
    from engine.physics.indices import AGGREGATES, BUILT_IN

    common = _global_options(_Parser(add_help=False), suppress=True)
    parser = _global_options(
        _Parser(
            prog="quietgrade",
            description="quietgrade: choose elastomer and damping-polymer grades from DMA data",
        ),
        suppress=False,
    )
    parser.add_argument("--version", action="version", version=f"quietgrade {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, parser_class=_Parser)

    p = sub.add_parser("load", parents=[common], help="import a catalog and sweep files")
    p.add_argument("catalog", help="catalog CSV or XLSX, one row per grade (README)")
    p.add_argument("sweeps", nargs="*", help="sweep files (CSV or XLSX), one point a row")
    p.set_defaults(func=cmd_load)

    p = sub.add_parser("list", parents=[common], help="the grades in the library")
    p.set_defaults(func=cmd_list)

    fit_opts = _Parser(add_help=False)
    fit_opts.add_argument(
        "--reference",
        type=float,
        help="reference temperature [degC] (default: automatic, near the tan δ peak at 1 Hz)",
    )
    fit_opts.add_argument(
        "--vertical-shift", action="store_true", help="apply the T0/T vertical factor"
    )
    fit_opts.add_argument(
        "--temperature-tolerance",
        type=float,
        default=DEFAULT_TOLERANCE_K,
        help="logged temperatures closer than this [K] form one isotherm (default: %(default)g)",
    )

    p = sub.add_parser("fit", parents=[common, fit_opts], help="master curve of one grade")
    p.add_argument("id", help=ID_HELP)
    p.add_argument("--out", help="write the fitted model: model.json or .csv")
    p.set_defaults(func=cmd_fit)

    p = sub.add_parser("props", parents=[common, fit_opts], help="properties at T and f")
    p.add_argument("id", help=ID_HELP)
    p.add_argument("--temp", type=float, nargs="+", required=True, help="temperatures [degC]")
    p.add_argument("--freq", type=float, nargs="+", required=True, help="frequencies [Hz]")
    p.set_defaults(func=cmd_props)

    p = sub.add_parser("demo", parents=[common], help="load the invented demo grades")
    p.set_defaults(func=cmd_demo)

    p = sub.add_parser(
        "system",
        parents=[common],
        help="a machine on N mounts of one grade, six degrees of freedom",
    )
    p.add_argument("id", help=ID_HELP)
    p.add_argument("--case", required=True, help="mount-system case JSON file (README)")
    p.add_argument(
        "--temp", type=float, nargs="+", help="[degC]; omitted: the default window's temperatures"
    )
    p.set_defaults(func=cmd_system)

    p = sub.add_parser("mount", parents=[common], help="check a mount made of one grade")
    p.add_argument("id", help=ID_HELP)
    p.add_argument(
        "--layout", choices=("shear", "compression"), required=True, help="how the pads work"
    )
    p.add_argument("--mass", type=float, required=True, help="total supported mass [kg]")
    p.add_argument(
        "--mounts",
        type=int,
        help="identical pads sharing the mass (omitted: the mount design's default, 4)",
    )
    p.add_argument("--area-mm2", type=float, required=True, help="loaded area of one pad [mm²]")
    p.add_argument(
        "--thickness-mm", type=float, required=True, help="rubber thickness of one pad [mm]"
    )
    p.add_argument("--shape", choices=("disc", "square"), help="omitted: disc")
    p.add_argument(
        "--shape-factor",
        type=float,
        help="shape factor S = loaded / force-free area [-] (default: from the pad's shape)",
    )
    p.add_argument(
        "--k-factor",
        type=float,
        help="Gent & Lindley compression coefficient k [-] (default: from the hardness)",
    )
    p.add_argument("--temp", type=float, nargs="+", required=True, help="temperatures [degC]")
    p.add_argument("--disturbance-hz", type=float, nargs="+", help="disturbance frequencies [Hz]")
    p.add_argument("--rpm", type=float, nargs="+", help="disturbance shaft speeds [rev/min]")
    p.add_argument(
        "--harmonics",
        type=int,
        nargs="+",
        help="orders of each disturbance to check, e.g. 1 2 3 (omitted: 1)",
    )
    p.add_argument(
        "--working-strain",
        type=float,
        help="dynamic strain amplitude in service [-], e.g. 0.05; used with a grade's "
        "strain-amplitude sweep",
    )
    p.add_argument("--target-fn", type=float, help="size the pad area for this fn [Hz]")
    p.add_argument("--service-life-h", type=float, help="omitted: 1000 h")
    p.set_defaults(func=cmd_mount)

    p = sub.add_parser("rank", parents=[common], help="the ranked shortlist")
    window = OperatingWindow()
    p.add_argument("--criteria", help="criteria file (JSON or TOML) as the dashboard saves")
    p.add_argument(
        "--temp-range",
        type=float,
        nargs=2,
        metavar=("LO", "HI"),
        help="service temperatures [degC] (default: {:g} {:g})".format(*window.temp_range),
    )
    p.add_argument(
        "--temp-step",
        type=float,
        help=f"step of the temperatures checked [K] (default: {window.temp_step:g})",
    )
    p.add_argument(
        "--freq-range",
        type=float,
        nargs=2,
        metavar=("LO", "HI"),
        help="excitation band [Hz] (default: {:g} {:g})".format(*window.freq_range),
    )
    p.add_argument(
        "--freq-points",
        type=int,
        help=f"frequencies checked in the band, log-spaced (default: {window.freq_points})",
    )
    p.add_argument(
        "--design",
        choices=("isolation_mount", "damping_layer", "general"),
        help="the kind of part; picks the default indices and limits",
    )
    p.add_argument(
        "--index",
        nargs="+",
        metavar="NAME",
        help="merit indices, equal weights; one of: " + ", ".join(sorted(BUILT_IN)),
    )
    p.add_argument(
        "--aggregate",
        choices=AGGREGATES,
        default="worst",
        help="how a point index is taken over the window (default: %(default)s)",
    )
    p.add_argument(
        "--min-loss-factor", type=float, help="lowest loss factor in the window [-] (default: none)"
    )
    p.add_argument("--max-price", type=float, help="highest price [per kg] (default: none)")
    p.add_argument("--max-transmissibility", type=float, help="default 1 with a mount")
    p.add_argument("--min-isolation-efficiency", type=float, help="e.g. 0.8 for 80 %%")
    p.add_argument("--min-frequency-ratio", type=float, help="f/fn; default sqrt(2)")
    p.add_argument("--max-amplification", type=float, help="T at resonance (run-up)")
    p.add_argument(
        "--screening",
        action="store_true",
        help="isolation design without a mount: a material screening only",
    )
    p.add_argument(
        "--max-static-strain",
        type=float,
        help="largest static strain of a pad [-] (default: the mount check's limit)",
    )
    p.add_argument(
        "--allow-extrapolation",
        action="store_true",
        help="rank grades whose master curve is extrapolated in the window (default: exclude)",
    )
    p.add_argument(
        "--ignore-service-range",
        action="store_true",
        help="do not exclude grades whose catalog service range misses the window",
    )
    p.add_argument(
        "--mount",
        help="mount design JSON file: the keys of the mount command's options, e.g. "
        '{"layout": "compression", "mass_kg": 180, "mounts": 4, "thickness_mm": 25, '
        '"target_fn_Hz": 10, "disturbance_Hz": [24.7]} (README)',
    )
    p.add_argument(
        "--system", help="mount-system case JSON file: check each grade as the whole machine"
    )
    p.add_argument(
        "--pareto",
        nargs=2,
        metavar=("INDEX_A", "INDEX_B"),
        help="flag the grades no other beats on both indices",
    )
    p.add_argument("--out", help="write the shortlist: shortlist.csv, .xlsx or .html")
    p.add_argument(
        "--all-excluded",
        action="store_true",
        help=f"list every excluded grade with its reasons (default: each one up to "
        f"{EXCLUDED_LISTED}, above that a count per first failed limit; --json lists all)",
    )
    p.set_defaults(func=cmd_rank)

    return parser


def _one_line(text: object, limit: int = MAX_MESSAGE_CHARS) -> str:
    """``text`` on one line: line breaks and other control characters written as escapes."""
    out = str(text).strip()
    if not out.isprintable():  # checked for the whole text first: 10,000 names at once
        out = "".join(c if c.isprintable() else repr(c)[1:-1] for c in out)
    return out if len(out) <= limit else out[: limit - 3] + "..."


def _masked(location: str) -> str:
    """A library location with any password of a database URL masked."""
    return re.sub(r"(://[^/:@]*:)[^/@]*@", r"\1***@", location)


def _busy(exc: BaseException) -> bool:
    """True when ``exc`` (or what caused it) is SQLite's refusal of a held write lock."""
    seen: set[int] = set()
    current: BaseException | None = exc
    while current is not None and id(current) not in seen:
        seen.add(id(current))
        text = str(current).lower()
        if "database is locked" in text or "database table is locked" in text:
            return True
        current = current.__cause__ or current.__context__
    return False


def _failure_line(args, exc: BaseException) -> str:
    """The one line that reports ``exc`` (after ``error: ``)."""
    if _busy(exc):
        try:
            where = _masked(str(args.db or default_location()))
        except Exception:  # noqa: BLE001 - the message must not fail in its turn
            where = "file"
        return f"the library {where} is busy: another program holds its write lock; try again"
    if isinstance(exc, QuietgradeError):
        return _one_line(exc)
    if isinstance(exc, MemoryError):
        return f"not enough memory for the {args.command} command; ask for less at once"
    if isinstance(exc, ModuleNotFoundError) and exc.name:
        return (
            f"the {args.command} command needs the Python module '{exc.name}', which is not "
            "installed; install it and try again"
        )
    detail = _one_line(exc, 300)
    hint = "" if args.verbose else "; run it again with --verbose for the details"
    return (
        f"the {args.command} command failed unexpectedly ({type(exc).__name__}"
        + (f": {detail}" if detail else "")
        + f"){hint}"
    )


def _log_warning(message, category, filename, lineno, file=None, line=None) -> None:
    """Where a warning goes: the log (shown under --verbose), never straight to stderr."""
    log.info("%s: %s (%s:%s)", category.__name__, _one_line(message), filename, lineno)


def main(argv: list[str] | None = None) -> int:
    arrange_memory()  # freed arrays reused, new ones on ordinary pages (engine.base.memory)
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.verbose:
        logging.basicConfig(level=logging.INFO, format="%(name)s: %(message)s")
    with warnings.catch_warnings():
        warnings.showwarning = _log_warning  # put back on leaving the block
        try:
            return args.func(args)
        except BrokenPipeError:
            return 0
        except KeyboardInterrupt:
            sys.stderr.write("error: interrupted\n")
            return 130
        except Exception as exc:  # noqa: BLE001 - every failure is one line on stderr
            if args.verbose and not isinstance(exc, QuietgradeError):
                traceback.print_exception(exc, file=sys.stderr)
            sys.stderr.write(f"error: {_failure_line(args, exc)}\n")
            return 2
