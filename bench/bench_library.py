"""The library: fitting every grade of a large library, and a large import."""

from __future__ import annotations

import tempfile
import time
from pathlib import Path

import numpy as np

from bench import Figure, progress_line
from engine.library.fits import fit_library
from engine.library.importer import data_hash, import_files
from engine.library.store import Library, Material
from engine.physics.shift import ShiftLaw
from tests import synthetic

QUICK_GRADES = 500
FULL_GRADES = 10_000
LIBRARY_TARGET_S = 600.0  # fit 10,000 grades on two cores
CACHED_TARGET_S = 60.0  # project target: a cached pass at a tenth of a fresh one
IMPORT_POINTS = 200_000
IMPORT_TARGET_S = 3.0


def synthetic_grade(k: int) -> np.ndarray:
    """Sweep k of the known model with its glass transition moved to -40..0 degC."""
    rng = np.random.default_rng(k)
    tg = float(rng.uniform(-40.0, 0.0))
    law = ShiftLaw("WLF+Arrhenius", 0.0, 17.44, 51.6, tg, 200e3, tg)
    return synthetic.sweep(noise=0.01, seed=k, law=law)


def bench_file(rows: int, name: str = "bench.csv", sha256: str = "0" * 64) -> list[dict]:
    """The one import-file record that written bench grades point to (key ``"f"``)."""
    return [
        {
            "key": "f",
            "file_name": name,
            "sha256": sha256,
            "size_bytes": 0,
            "rows": rows,
            "kind": "sweep",
        }
    ]


def fill_library(library: Library, n: int) -> None:
    """Write n synthetic grades straight into the library (one transaction)."""
    materials, datasets = [], []
    for k in range(n):
        mid = f"BENCH-{k:05d}"
        points = synthetic_grade(k)
        materials.append(Material(id=mid, name=f"Bench grade {k}", mode="tensile"))
        datasets.append(
            {"material_id": mid, "file_key": "f", "data_hash": data_hash(points), "points": points}
        )
    library.write_import(bench_file(n), materials, datasets)


def bench_fit_library(folder: Path, n: int) -> list[Figure]:
    library = Library(str(folder / "fit.sqlite"))
    fill_library(library, n)
    start = time.perf_counter()
    curves, errors = fit_library(library, processes=2, progress=progress_line(f"fitting {n}"))
    fresh = time.perf_counter() - start
    start = time.perf_counter()
    again, _ = fit_library(library, processes=2)
    cached = time.perf_counter() - start
    scale = FULL_GRADES / n
    note = f"{len(curves)} fitted, {len(errors)} fit errors"
    if len(again) != len(curves):
        note += f"; cached pass returned {len(again)} curves"
    figures = [Figure(f"fit_library, {n:,} grades, 2 processes", fresh, "s", None, note)]
    if n != FULL_GRADES:
        figures.append(
            Figure(
                f"  extrapolated to {FULL_GRADES:,} grades",
                fresh * scale,
                "s",
                LIBRARY_TARGET_S,
                f"x {scale:g}",
            )
        )
    else:
        figures[0] = Figure(figures[0].name, fresh, "s", LIBRARY_TARGET_S, note)
    figures.append(
        Figure(
            f"  cached second pass ({n:,} grades{', extrapolated' if n != FULL_GRADES else ''})",
            cached * scale,
            "s",
            CACHED_TARGET_S,
            f"measured {cached:.2f} s" if n != FULL_GRADES else "",
        )
    )
    return figures


def write_import_files(folder: Path, n_points: int) -> tuple[Path, Path]:
    """A catalog and one sweep CSV of n_points rows (grades of 40 x 5 points)."""
    temperatures = np.arange(-60.0, 140.0, 5.0)  # 40 isotherms
    frequencies = np.array([0.1, 1.0, 3.0, 10.0, 30.0])
    per_grade = temperatures.size * frequencies.size
    n_grades = n_points // per_grade
    ids = [f"IMP-{k:04d}" for k in range(n_grades)]
    catalog = folder / "catalog.csv"
    synthetic.write_catalog(catalog, ids=ids)
    base = synthetic.sweep(temperatures=temperatures, frequencies=frequencies)
    rng = np.random.default_rng(5)
    header = "material,temperature [degC],frequency [Hz],storage_modulus [MPa],loss_factor"
    lines = [header]
    for mid in ids:
        scale = np.exp(rng.normal(0.0, 0.01, base.shape[0]))
        for (t, f, e, eta), s in zip(base, scale, strict=True):
            lines.append(f"{mid},{t:g},{f:g},{e * s / 1e6:.6g},{eta:.6g}")
    sweep = folder / "sweeps.csv"
    sweep.write_text("\n".join(lines) + "\n")
    return catalog, sweep


def bench_import(folder: Path, n_points: int = IMPORT_POINTS) -> list[Figure]:
    catalog, sweep = write_import_files(folder, n_points)
    library = Library(str(folder / "import.sqlite"))
    start = time.perf_counter()
    summary = import_files(library, [catalog], [sweep])
    elapsed = time.perf_counter() - start
    points = sum(n for _, n in summary.datasets_added)
    size = sweep.stat().st_size / 1e6
    return [
        Figure(
            f"import {points:,} points (CSV {size:.1f} MB, {len(summary.materials_added)} grades)",
            elapsed,
            "s",
            IMPORT_TARGET_S,
        )
    ]


def main(quick: bool = True) -> list[Figure]:
    n = QUICK_GRADES if quick else FULL_GRADES
    with tempfile.TemporaryDirectory(prefix="quietgrade-bench-") as tmp:
        folder = Path(tmp)
        return bench_import(folder) + bench_fit_library(folder, n)
