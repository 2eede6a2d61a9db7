"""Command line: ``python -m engine COMMAND``.

Temperatures in degC, frequencies in Hz, moduli in MPa on the command line and in JSON.
Exit status 0 on success, 2 on bad input with a one-line reason on stderr.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
from pathlib import Path

import numpy as np

from engine import __version__
from engine.errors import QuietgradeError
from engine.store import Library, default_location

DEMO_DIR = Path(__file__).resolve().parent.parent / "demo_materials"


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit status 2
        sys.stderr.write(f"{self.prog}: {message}\n")
        raise SystemExit(2)


def _clean(value):
    """JSON-safe copy: NaN and infinities become null, numpy scalars plain numbers."""
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_clean(v) for v in value]
    if isinstance(value, np.ndarray):
        return _clean(value.tolist())
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, float | np.floating):
        v = float(value)
        return v if math.isfinite(v) else None
    return value


def _emit(args, data, text_lines):
    if args.json:
        json.dump(_clean(data), sys.stdout, indent=1)
        sys.stdout.write("\n")
    else:
        for line in text_lines:
            print(line)


def _library(args) -> Library:
    return Library(args.db or default_location())


# -- commands ----------------------------------------------------------------------------


def cmd_load(args) -> int:
    from engine.importer import import_files, looks_like_catalog, read_table

    lib = _library(args)
    tables = [read_table(p) for p in [args.catalog, *args.sweeps]]
    catalogs = [tables[0]]
    sweeps = []
    for t in tables[1:]:
        (catalogs if looks_like_catalog(t) else sweeps).append(t)
    summary = import_files(lib, catalogs, sweeps)
    lines = [
        f"added {len(summary.materials_added)} grade(s), updated "
        f"{len(summary.materials_updated)}, added {len(summary.datasets_added)} data set(s)"
    ]
    lines += [f"  data set for {m}: {n} points" for m, n in summary.datasets_added]
    lines += [f"  unchanged (already imported): {f}" for f in summary.files_skipped]
    _emit(args, summary.to_dict(), lines)
    return 0


def cmd_list(args) -> int:
    lib = _library(args)
    sets = {}
    for ds in lib.datasets():
        sets.setdefault(ds.material_id, []).append(ds)
    rows = []
    for m in lib.materials():
        entry = {
            "id": m.id,
            "name": m.name,
            "mode": m.mode,
            "supplier": m.supplier,
            "family": m.family,
            "density_kg_m3": m.density,
            "price_per_kg": m.price,
            "hardness_shore_a": m.hardness,
            "service_min_C": m.service_min,
            "service_max_C": m.service_max,
            "poisson_ratio": m.poisson_ratio,
            "notes": m.notes,
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
        rows.append(entry)
    lines = [f"{len(rows)} grade(s) in {lib.location}"]
    for r in rows:
        n = len(r["datasets"])
        pts = r["datasets"][-1]["points"] if n else 0
        lines.append(
            f"  {r['id']:<14} {r['name'][:30]:<30} {r['mode']:<8} "
            f"{(r['supplier'] or '-')[:22]:<22} "
            f"{n} data set(s), newest {pts} points"
        )
    _emit(args, rows, lines)
    return 0


def cmd_fit(args) -> int:
    from engine.fits import master_curve, summary

    lib = _library(args)
    curve = master_curve(lib, args.id, args.reference, args.vertical_shift)
    data = {"id": args.id, **summary(curve)}
    law = curve.shift.law
    lines = [
        f"{args.id}: master curve at {curve.reference_C:g} degC, shift law {law.kind}",
    ]
    if "wlf" in data:
        w = data["wlf"]
        lines.append(
            f"  WLF C1 = {w['C1']:.3f}, C2 = {w['C2_K']:.1f} K at {w['reference_C']:g} degC"
        )
    if "arrhenius" in data:
        lines.append(f"  Arrhenius Ea = {data['arrhenius']['activation_kJ_per_mol']:.0f} kJ/mol")
    for tg in curve.tg:
        value = f"{tg['temperature_C']:.1f} degC" if tg["reached"] else tg["note"]
        lines.append(f"  Tg ({tg['method']}, {tg['frequency_Hz']:g} Hz): {value}")
    lo, hi = data["reduced_frequency_range_Hz"]
    lines.append(f"  reduced frequency covered: {lo:.3g} to {hi:.3g} Hz")
    q = curve.quality
    lines.append(
        f"  residuals: rms log E' {q['rms_log_storage']:.4f}, rms log tan d "
        f"{q['rms_log_loss_factor']:.4f}"
    )
    lines += [f"  note: {n}" for n in curve.notes]
    _emit(args, data, lines)
    return 0


def cmd_props(args) -> int:
    from engine.fits import master_curve

    lib = _library(args)
    curve = master_curve(lib, args.id, args.reference, args.vertical_shift)
    t = np.asarray(args.temp, dtype=float)[:, None]
    f = np.asarray(args.freq, dtype=float)[None, :]
    if (f <= 0).any():
        raise QuietgradeError("--freq: frequencies must be positive")
    p = curve.evaluate(t, f)
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
                }
            )
    sym = "E" if curve.mode == "tensile" else "G"
    lines = [
        f"{'T [degC]':>9} {'f [Hz]':>9} {sym + chr(39) + ' [MPa]':>12} "
        f"{sym + chr(39) * 2 + ' [MPa]':>12} {'tan d':>8}"
    ]
    for r in out:
        flag = "  extrapolated" if r["extrapolated"] else ""
        lines.append(
            f"{r['temp_C']:9.1f} {r['freq_Hz']:9.3g} {r['storage_MPa']:12.4g} "
            f"{r['loss_MPa']:12.4g} {r['loss_factor']:8.4f}{flag}"
        )
    _emit(args, out, lines)
    return 0


def cmd_demo(args) -> int:
    from engine.fits import fit_library
    from engine.importer import import_files

    lib = _library(args)
    summary = import_files(lib, [DEMO_DIR / "catalog.csv"], [DEMO_DIR / "sweeps.csv"])
    curves, errors = fit_library(lib)
    data = {**summary.to_dict(), "fitted": sorted(curves), "fit_errors": errors}
    if summary.materials_added or summary.datasets_added:
        head = f"demo library loaded into {lib.location}: {len(summary.materials_added)} grade(s)"
    else:
        head = f"demo library already in {lib.location}: nothing changed"
    lines = [head]
    for mid in sorted(curves):
        c = curves[mid]
        tg = next((t for t in c.tg if t["method"] == "loss_factor_peak"), None)
        tg_text = f"{tg['temperature_C']:.0f} degC" if tg and tg["reached"] else "not in range"
        lines.append(
            f"  {mid:<14} {c.shift.law.kind:<14} reference {c.reference_C:6.1f} degC, "
            f"tan d peak at 1 Hz: {tg_text}"
        )
    lines += [f"  {mid}: fit failed: {e}" for mid, e in errors.items()]
    _emit(args, data, lines)
    return 0


def build_parser() -> argparse.ArgumentParser:
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument("--db", help="library file or database URL (default: $QUIETGRADE_DB)")
    common.add_argument("--json", action="store_true", help="machine-readable output on stdout")
    parser = _Parser(
        prog="python -m engine",
        description="quietgrade: choose elastomer and damping-polymer grades from DMA data",
        parents=[common],
    )
    parser.add_argument("--version", action="version", version=f"quietgrade {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, parser_class=_Parser)

    p = sub.add_parser("load", parents=[common], help="import a catalog and sweep files")
    p.add_argument("catalog")
    p.add_argument("sweeps", nargs="*")
    p.set_defaults(func=cmd_load)

    p = sub.add_parser("list", parents=[common], help="the grades in the library")
    p.set_defaults(func=cmd_list)

    fit_opts = argparse.ArgumentParser(add_help=False)
    fit_opts.add_argument("--reference", type=float, help="reference temperature [degC]")
    fit_opts.add_argument(
        "--vertical-shift", action="store_true", help="apply the T0/T vertical factor"
    )

    p = sub.add_parser("fit", parents=[common, fit_opts], help="master curve of one grade")
    p.add_argument("id")
    p.set_defaults(func=cmd_fit)

    p = sub.add_parser("props", parents=[common, fit_opts], help="properties at T and f")
    p.add_argument("id")
    p.add_argument("--temp", type=float, nargs="+", required=True, help="[degC]")
    p.add_argument("--freq", type=float, nargs="+", required=True, help="[Hz]")
    p.set_defaults(func=cmd_props)

    p = sub.add_parser("demo", parents=[common], help="load the invented demo grades")
    p.set_defaults(func=cmd_demo)

    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return args.func(args)
    except QuietgradeError as exc:
        sys.stderr.write(f"error: {exc}\n")
        return 2
    except BrokenPipeError:
        return 0
