"""Ranking a large library with a sized mount check, against a plain per-point loop.

(a) 10,000 grades (in both modes) whose master curves are already fitted: the
    fits of the invented demo grades (rubbers, damping polymers, a glassy reference),
    cloned with perturbed modulus scales, shifted temperature axes and scattered
    catalog fields, each passed through the JSON form the library's fit cache stores
    (the decoding is timed as its own figure). Timed:
    :meth:`engine.curves.bank.CurveBank.from_curves`
    and :func:`engine.selection.ranking.rank` over a 41-temperature x 13-frequency window with
    three merit indices and a compression mount sized for a target fn: the first run in
    the process and the median of the runs after it. Peak memory of the same work is
    measured in a further pass under tracemalloc.
(b) The same work written as the loop a user would otherwise write: for each grade, for
    each temperature and frequency, a scalar ``MasterCurve.evaluate``; fn per grade and
    temperature by ``scipy.optimize.brentq`` on scalar evaluations of the pad's
    stiffness (Ec = E (1 + 2 k S^2) in series with the bulk modulus, k from the
    hardness, as the ranking has them); scalar transmissibility. The agreement figure
    compares the indices and fn (the loop's static strain reads 1 / E' at the load's
    frequency instead of the creep compliance, and it takes one disturbance). Timed on
    200 grades (50 in quick mode) and scaled linearly to the full size.
(c) The rank intervals (:func:`engine.selection.spread.rank_spread`: the whole chain rerun on the
    posterior draws of the fits of the leading grades) after the ranking, as their own
    figures: for the demo library and for 1,000 of the cloned grades, the first call in
    the process (decoding and tabulating the draws of the leading grades) and the median
    of the calls after it; and, for scale, intervals for every one of 200 grades. The
    clones' draws are scaled with their curves, so the intervals stay those of a fit.

Run: ``python -m bench.bench_rank [--full]`` or through ``python -m bench.run_all``.
"""

from __future__ import annotations

import base64
import functools
import json
import math
import resource
import statistics
import sys
import tempfile
import time
import tracemalloc
from dataclasses import replace
from pathlib import Path

import numpy as np
from scipy.optimize import brentq

from bench import Figure
from engine.curves.bank import CurveBank
from engine.curves.mastercurve import MasterCurve
from engine.curves.mountcheck import (
    FALLBACK_K_FACTOR,
    HARDNESS_READ_FREQ_HZ,
    HARDNESS_READ_TEMP_C,
    STATIC_LOAD_TIME_S,
    MountDesign,
)
from engine.curves.window import DEFAULT_POISSON, OperatingWindow
from engine.library.fits import fit_library
from engine.library.importer import import_files
from engine.library.store import Library, Material
from engine.physics import mount
from engine.selection.ranking import Constraints, Criteria, IndexChoice, rank
from engine.selection.spread import LEADING_GRADES, rank_spread

FULL_GRADES = 10_000
FULL_BASELINE = 200
QUICK_BASELINE = 50
SPREAD_GRADES = 1_000
SPREAD_ALL = 200  # intervals for every grade of a library this size, for scale
MEMORY_TARGET_MIB = 2048.0
SPEEDUP_TARGET = 30.0  # loop time / vectorised time, at least
REPEATS = 3
DEMO = Path(__file__).resolve().parent.parent / "demo_materials"

WINDOW_KW = {"temp_range": (-20.0, 60.0), "temp_step": 2.0, "freq_range": (10.0, 1000.0)}
INDICES = (
    IndexChoice("loss_factor", 1.0, "worst"),
    IndexChoice("frequency_drift", 1.0, "worst"),
    IndexChoice("beam_damping", 1.0, "mean"),
)
DESIGN = MountDesign(
    layout="compression",
    mass_kg=180.0,
    mounts=4,
    thickness_mm=30.0,
    shape="disc",
    disturbance_Hz=(24.7,),
    target_fn_Hz=10.0,
    sizing_temp_C=23.0,
)


def criteria() -> Criteria:
    return Criteria(
        window=OperatingWindow(**WINDOW_KW),
        indices=INDICES,
        constraints=Constraints(allow_extrapolation=True),
        mount=DESIGN,
    )


# ------------------------------------------------------------------ synthetic library


@functools.cache
def base_grades() -> list[tuple[dict, Material]]:
    """The demo grades, imported and fitted in a temporary library (curve dicts, rows;
    fitted once per process, to be read and never changed)."""
    with tempfile.TemporaryDirectory(prefix="quietgrade-bench-") as tmp:
        lib = Library(str(Path(tmp) / "demo.sqlite"))
        import_files(lib, [DEMO / "catalog.csv"], [DEMO / "sweeps.csv"])
        curves, _ = fit_library(lib, processes=1)
        return [(curves[m.id].to_dict(), m) for m in lib.materials() if m.id in curves]


def _scaled(encoded: str, scale: float) -> str:
    """A base64 float array of the fit's draws (MasterCurve.draws), times ``scale``."""
    values = np.frombuffer(base64.b64decode(encoded), dtype="<f8") * scale
    return base64.b64encode(values.astype("<f8").tobytes()).decode("ascii")


def clone(base: dict, scale: float, dt: float) -> MasterCurve:
    """``base`` with moduli x ``scale`` and its shift law moved by ``dt`` [K] (not yet
    tabulated: :meth:`MasterCurve.to_dict` tabulates it as a fit does). The draws of the
    fit follow: their spectra are scaled alike, and their shift laws take the clone's
    reference temperatures."""
    draws = base.get("draws")
    if draws:
        draws = {
            **draws,
            "weights": _scaled(draws["weights"], scale),
            "equilibrium": _scaled(draws["equilibrium"], scale),
        }
    prony = base["prony"]
    shift = base["shift"]
    law = dict(shift["law"])
    for key in ("reference_C", "wlf_reference_C", "split_C"):
        if law[key] is not None:
            law[key] += dt
    return MasterCurve.from_dict(
        {
            **base,
            "prony": {
                "tau_s": prony["tau_s"],
                "weights_Pa": [w * scale for w in prony["weights_Pa"]],
                "equilibrium_Pa": prony["equilibrium_Pa"] * scale,
            },
            "shift": {
                **shift,
                "law": law,
                "temperatures_C": [t + dt for t in shift["temperatures_C"]],
            },
            "reference_C": base["reference_C"] + dt,
            "temperature_range": [t + dt for t in base["temperature_range"]],
            "draws": draws,
        }
    )


def cached_fits(curves: dict[str, MasterCurve]) -> dict[str, str]:
    """Each curve in the JSON text the library's fit cache holds (table included)."""
    return {gid: json.dumps(c.to_dict()) for gid, c in curves.items()}


def from_cache(texts: dict[str, str]) -> dict[str, MasterCurve]:
    """Master curves decoded from fit-cache JSON, as engine.library.fits.fit_library does."""
    return {gid: MasterCurve.from_dict(json.loads(t)) for gid, t in texts.items()}


def library(n: int) -> tuple[dict[str, MasterCurve], dict[str, Material]]:
    """n grades: cloned curves and catalog rows with scattered density, price, hardness."""
    bases = base_grades()
    rng = np.random.default_rng(2024)
    curves, materials = {}, {}
    for k in range(n):
        gid = f"RANK-{k:05d}"
        curve, row = bases[k % len(bases)]
        dt = float(rng.uniform(-8.0, 8.0))
        curves[gid] = clone(curve, 10.0 ** rng.uniform(-0.3, 0.3), dt)
        hardness = None if row.hardness is None else float(row.hardness + rng.uniform(-5, 5))
        materials[gid] = replace(
            row,
            id=gid,
            name=f"Bench grade {k} ({row.family})",
            density=float(row.density * rng.uniform(0.9, 1.1)),
            price=float(rng.uniform(2.0, 25.0)),
            hardness=hardness,
            service_min=row.service_min + dt,
            service_max=row.service_max + dt,
        )
    return curves, materials


# ------------------------------------------------------------------ vectorised


def vectorised(curves, materials, crit):
    """Build the bank and rank; returns (result, bank seconds, rank seconds, CPU seconds)."""
    cpu = time.process_time()
    start = time.perf_counter()
    bank = CurveBank.from_curves(curves)
    built = time.perf_counter()
    result = rank(curves, materials, crit, bank=bank)
    done = time.perf_counter()
    return result, built - start, done - built, time.process_time() - cpu


def peak_memory_mib(curves, materials, crit) -> float:
    """Peak memory traced while building the bank and ranking [MiB]."""
    tracemalloc.start()
    try:
        vectorised(curves, materials, crit)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    return peak / 2**20


# ------------------------------------------------------------------ plain loop


def loop_one(curve: MasterCurve, mat: Material, temps, freqs, design: MountDesign) -> dict:
    """Everything rank() computes for one grade, point by point with scalar calls."""
    nu = DEFAULT_POISSON if mat.poisson_ratio is None else mat.poisson_ratio
    to_e = 2.0 * (1.0 + nu) if curve.mode == "shear" else 1.0  # E = 2 (1 + nu) G
    storage = [[0.0] * len(freqs) for _ in temps]
    eta = [[0.0] * len(freqs) for _ in temps]
    for i, t in enumerate(temps):
        for j, f in enumerate(freqs):
            p = curve.evaluate(t, f)
            storage[i][j] = float(p.storage_modulus) * to_e
            eta[i][j] = float(p.loss_factor)
    flat_e = [v for row in storage for v in row]
    flat_eta = [v for row in eta for v in row]
    beam = [math.sqrt(x * e / 1e6) / mat.density for x, e in zip(flat_eta, flat_e, strict=True)]
    indices = {
        "loss_factor": min(flat_eta),
        "beam_damping": sum(beam) / len(beam),
    }
    # Sizing: compression disc at the target fn and the sizing temperature. k: from the
    # catalog hardness, else from the hardness Young's modulus reads as (Gent 1958).
    m, h = design.mass_per_pad, design.thickness_mm * 1e-3
    shore = mat.hardness
    if shore is None:
        e_read = to_e * float(
            curve.evaluate(HARDNESS_READ_TEMP_C, HARDNESS_READ_FREQ_HZ).storage_modulus
        )
        shore = float(mount.hardness_from_youngs_modulus(e_read)) if e_read > 0 else None
    if shore is None:
        kf = FALLBACK_K_FACTOR
    else:
        kf = float(mount.k_factor_from_hardness(min(max(shore, 30.0), 75.0)))

    def bulk(e: float) -> float:
        """K [Pa]: the catalog's, else E / (3 (1 - 2 nu)) from a catalog nu < 0.5, else
        the common-practice default."""
        if mat.bulk_modulus is not None:
            return mat.bulk_modulus * 1e6
        if mat.poisson_ratio is not None and mat.poisson_ratio < 0.5:
            return e / (3.0 * (1.0 - 2.0 * mat.poisson_ratio))
        return mount.DEFAULT_BULK_MODULUS_PA

    e_target = to_e * float(
        curve.evaluate(design.sizing_temp_C, design.target_fn_Hz).storage_modulus
    )
    area = float(
        mount.size_compression_pad_area(
            design.target_fn_Hz, m, h, e_target, kf, bulk_modulus=bulk(e_target)
        )
    )
    s = math.sqrt(4.0 * area / math.pi) / (4.0 * h)

    def stiffness(t, f):
        # Ec = E (1 + 2 k S^2) in series with the bulk modulus (Gent 2012).
        e = float(curve.evaluate(t, f).storage_modulus) * to_e
        ec = e * (1.0 + 2.0 * kf * s * s)
        return area / h / (1.0 / ec + 1.0 / bulk(e))

    fn, trans, amplification, strain = [], [], [], []
    f_dist = design.disturbance_Hz[0]
    f_static = 1.0 / (2.0 * math.pi * STATIC_LOAD_TIME_S)
    for t in temps:

        def residual(log_f, t=t):
            k = stiffness(t, 10.0**log_f)
            return log_f - 0.5 * math.log10(k / m) + math.log10(2.0 * math.pi)

        try:
            f_n = 10.0 ** brentq(residual, -3.0, 5.0)
        except ValueError:  # no root in 1 mHz - 100 kHz
            f_n = math.nan
        fn.append(f_n)
        if math.isfinite(f_n):
            k_n = stiffness(t, f_n)
            kc = complex(k_n, k_n * float(curve.evaluate(t, f_n).loss_factor))
            amplification.append(abs(kc) / abs(kc - m * (2.0 * math.pi * f_n) ** 2))
        k_d = stiffness(t, f_dist)
        kc = complex(k_d, k_d * float(curve.evaluate(t, f_dist).loss_factor))
        trans.append(abs(kc) / abs(kc - m * (2.0 * math.pi * f_dist) ** 2))
        strain.append(m * mount.STANDARD_GRAVITY / stiffness(t, f_static) / h)
    indices["frequency_drift"] = max(fn) / min(fn)  # the mount's own fn over temperature
    f_life = 1.0 / (2.0 * math.pi * design.service_life_h * 3600.0)
    sag = m * mount.STANDARD_GRAVITY / stiffness(max(temps), f_life) / h
    score = (
        math.log10(indices["loss_factor"])
        - math.log10(indices["frequency_drift"])
        + math.log10(indices["beam_damping"])
    ) / 3.0
    return {
        "indices": indices,
        "fn": fn,
        "transmissibility": trans,
        "amplification": amplification,
        "strain": max(max(strain), sag),
        "area": area,
        "score": score,
    }


def plain_loop(curves, materials, ids, crit):
    temps = [float(t) for t in crit.window.temperatures]
    freqs = [float(f) for f in crit.window.frequencies]
    start = time.perf_counter()
    out = {gid: loop_one(curves[gid], materials[gid], temps, freqs, crit.mount) for gid in ids}
    order = sorted(ids, key=lambda g: -out[g]["score"])
    return out, order, time.perf_counter() - start


def agreement(result, loop_out) -> float:
    """Largest relative difference between the two methods over indices and fn."""
    by_id = {g.id: g for g in result.grades}
    worst = 0.0
    for gid, ref in loop_out.items():
        g = by_id[gid]
        for name, v in ref["indices"].items():
            worst = max(worst, abs(g.indices[name] / v - 1.0))
        fn = np.asarray(g.mount["natural_frequency_Hz"], dtype=float)
        worst = max(worst, float(np.nanmax(np.abs(fn / np.asarray(ref["fn"]) - 1.0))))
    return worst


# ------------------------------------------------------------------ rank intervals


def spread_times(curves, materials, crit, leading: int = LEADING_GRADES):
    """rank once, then time rank_spread: (first call [s], median of the next [s], result).

    ``curves`` must come fresh from the fit cache (no draws decoded yet), so that the
    first call pays for decoding and tabulating the draws as the dashboard's first view
    of a ranking does.
    """
    result = rank(curves, materials, crit)
    start = time.perf_counter()
    spread = rank_spread(result, curves, materials, leading)
    first = time.perf_counter() - start
    times = []
    for _ in range(REPEATS):
        start = time.perf_counter()
        rank_spread(result, curves, materials, leading)
        times.append(time.perf_counter() - start)
    return first, statistics.median(times), spread


def spread_figures(texts: dict[str, str], materials: dict[str, Material], crit) -> list[Figure]:
    """Figures (c) of the module notes, from the fit-cache JSON of the cloned grades."""
    bases = base_grades()
    demo = {m.id: MasterCurve.from_dict(curve) for curve, m in bases}
    demo_mats = {m.id: m for _, m in bases}
    figures = []
    cases = [
        (f"demo library ({len(demo)} grades)", demo, demo_mats, LEADING_GRADES),
        (f"{SPREAD_GRADES:,} grades", None, None, LEADING_GRADES),
        (f"{SPREAD_ALL} grades, every passing grade", None, None, SPREAD_ALL),
    ]
    for label, curves, mats, leading in cases:
        if curves is None:
            n = SPREAD_GRADES if leading == LEADING_GRADES else SPREAD_ALL
            ids = list(texts)[:n]
            curves = from_cache({gid: texts[gid] for gid in ids})
            mats = {gid: materials[gid] for gid in ids}
        sys.stderr.write(f"  rank intervals, {label}\n")
        first, again, spread = spread_times(curves, mats, crit, leading)
        k = spread.spread.draws
        lead = len(spread.spread.leading)
        figures.append(
            Figure(
                f"rank intervals, {label}",
                again,
                "s",
                None,
                f"median of {REPEATS} after the first call ({first:.2f} s, draws decoded "
                f"and tabulated); {lead} leading grade(s) x {k} draws",
            )
        )
    return figures


# ------------------------------------------------------------------ figures


def main(quick: bool = True) -> list[Figure]:
    n = FULL_GRADES  # the target size, measured directly in both modes
    n_loop = QUICK_BASELINE if quick else FULL_BASELINE
    crit = criteria()
    sys.stderr.write(f"  building {n:,} cloned master curves and their fit-cache JSON\n")
    fresh, materials = library(n)
    texts = cached_fits(fresh)
    del fresh
    start = time.perf_counter()
    curves = from_cache(texts)
    t_decode = time.perf_counter() - start
    window = f"{crit.window.temperatures.size} T x {crit.window.frequencies.size} f"
    sys.stderr.write(f"  bank + rank of {n:,} grades\n")
    result, b1, r1, cpu = vectorised(curves, materials, crit)
    first = b1 + r1
    runs = [vectorised(curves, materials, crit)[1:] for _ in range(REPEATS)]  # timings only
    t_bank = statistics.median(r[0] for r in runs)
    t_rank = statistics.median(r[1] for r in runs)
    total = statistics.median(r[0] + r[1] for r in runs)
    cpu = statistics.median(r[2] for r in runs)
    vec_full = total
    how = f"median of {REPEATS}; first run in the process {first:.2f} s; CPU {cpu:.2f} s"
    sys.stderr.write("  peak memory (tracemalloc pass)\n")
    peak = peak_memory_mib(curves, materials, crit)
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # kB -> MiB (Linux)
    sys.stderr.write(f"  plain loop over {n_loop} grades\n")
    ids = list(curves)[:n_loop]
    cpu_loop = time.process_time()
    loop_out, _, t_loop = plain_loop(curves, materials, ids, crit)
    cpu_loop = time.process_time() - cpu_loop
    loop_full = t_loop * FULL_GRADES / n_loop
    speedup = loop_full / vec_full
    cpu_speedup = (cpu_loop * FULL_GRADES / n_loop) / cpu
    diff = agreement(result, loop_out)
    spread = spread_figures(texts, materials, crit)
    return [
        Figure(
            f"decode {n:,} cached fits (JSON -> MasterCurve)",
            t_decode,
            "s",
            None,
            "as engine.library.fits.fit_library reads the fit cache",
        ),
        Figure(
            f"CurveBank.from_curves, {n:,} grades",
            t_bank,
            "s",
            None,
            f"median of {REPEATS}; stack the fitted curves",
        ),
        Figure(
            f"rank, {n:,} grades, {window}, 3 indices, sized mount",
            t_rank,
            "s",
            None,
            f"median of {REPEATS}; {len(result.shortlist):,} pass",
        ),
        Figure(
            f"bank stacked from decoded fits + rank, {FULL_GRADES:,} grades",
            vec_full,
            "s",
            None,
            f"{how}; the stacking a library pays once per version (its targets, from the "
            "stored bank, are bench_cold's)",
        ),
        Figure(
            f"peak traced memory, bank + rank, {FULL_GRADES:,} grades",
            peak,
            "MiB",
            MEMORY_TARGET_MIB,
            f"process max RSS {rss:.0f} MiB",
        ),
        Figure(
            f"plain loop, {n_loop} grades",
            t_loop,
            "s",
            None,
            f"{t_loop / n_loop * 1e3:.0f} ms per grade; x {FULL_GRADES // n_loop} -> "
            f"{loop_full:.0f} s for {FULL_GRADES:,}",
        ),
        Figure(
            "vectorised / loop time, 10,000 grades",
            100.0 / speedup,
            "%",
            100.0 / SPEEDUP_TARGET,
            f"speed-up {speedup:.0f} x wall, {cpu_speedup:.0f} x CPU (target >= "
            f"{SPEEDUP_TARGET:g} x); results agree to {diff:.1e} relative",
        ),
        *spread,
    ]


if __name__ == "__main__":
    from bench.run_all import table

    sys.stdout.write(table(main(quick="--full" not in sys.argv[1:])) + "\n")
