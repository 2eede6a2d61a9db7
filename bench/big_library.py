"""A large library on disk whose fits are already in its cache, for the cold-start benches.

The grades are the clones of :func:`bench.bench_rank.library` (the invented demo grades with
perturbed moduli, temperature axes and catalog fields). Each gets a data set (its base
grade's measured points with the temperatures moved by the clone's shift, so every data
hash differs) and its fitted curve written into the fit cache under the default fit
options, as ``fit_library`` would leave it. Writing 10,000 grades takes about a minute,
where fitting them would take two or more.

Run: ``python -m bench.big_library PATH [N]`` writes the library at PATH (default 10,000
grades).
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

import numpy as np

from bench import bench_rank
from bench.bench_library import bench_file
from engine.library.fits import options_key
from engine.library.importer import data_hash, import_files
from engine.library.store import Library


def demo_points() -> dict[str, np.ndarray]:
    """Measured points of each demo grade, by family order of :func:`bench_rank.base_grades`."""
    with tempfile.TemporaryDirectory(prefix="quietgrade-bench-") as tmp:
        lib = Library(str(Path(tmp) / "demo.sqlite"))
        import_files(lib, [bench_rank.DEMO / "catalog.csv"], [bench_rank.DEMO / "sweeps.csv"])
        return {mid: points for mid, (_, points) in lib.all_latest_points().items()}


def write_library(location: str, n: int) -> Library:
    """A library at ``location`` with ``n`` cloned grades, data sets and cached fits."""
    curves, materials = bench_rank.library(n)
    bases = bench_rank.base_grades()
    points_by_base = demo_points()
    library = Library(location)
    datasets, fits = [], {}
    for k, (gid, curve) in enumerate(curves.items()):
        base_row = bases[k % len(bases)][1]
        points = points_by_base[base_row.id].copy()
        points[:, 0] += curve.reference_C - bases[k % len(bases)][0]["reference_C"]
        h = data_hash(points)
        datasets.append({"material_id": gid, "file_key": "f", "data_hash": h, "points": points})
        fits[h] = curve.to_dict()
    library.write_import(bench_file(n), list(materials.values()), datasets)
    library.store_fits(fits, options_key())
    return library


def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else argv
    if not args:
        sys.stderr.write("usage: python -m bench.big_library PATH [N]\n")
        return 2
    n = int(args[1]) if len(args) > 1 else bench_rank.FULL_GRADES
    write_library(args[0], n)
    print(f"{n:,} fitted grades written to {args[0]}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
