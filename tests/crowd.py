"""Libraries too large for the map to draw grade by grade, built from the demo grades.

The demo grades are copied under new ids, each copy's moduli scaled by its own factor so
that no two paths coincide. The data are invented (input only, never a check value).
"""

from __future__ import annotations

import csv
from pathlib import Path

from engine.library.fits import fit_library
from engine.library.importer import import_files
from engine.library.store import Library

DEMO = Path(__file__).resolve().parent.parent / "demo_materials"
SWEEP_HEADER = "material,temperature [degC],frequency [Hz],storage_modulus [MPa],loss_factor\n"
CROWD_GRADES = 60  # more than the map draws one by one (charts.CROWD_LIMIT)


def write_crowd_library(db: Path) -> Path:
    """Write the cloned catalog and sweeps beside the library file ``db``, import them
    into it and fit them; ``db``."""
    folder = db.parent
    with open(DEMO / "catalog.csv", newline="") as fh:
        reader = csv.DictReader(fh)
        header, catalog = list(reader.fieldnames), list(reader)
    with open(DEMO / "sweeps.csv", newline="") as fh:
        rows = list(csv.reader(fh))[1:]
    sweeps = {}
    for row in rows:
        sweeps.setdefault(row[0], []).append(row[1:])
    bases = [c for c in catalog if c["id"] in sweeps]
    lines, copies = [SWEEP_HEADER.strip()], []
    for k in range(CROWD_GRADES):
        base = bases[k % len(bases)]
        gid = f"CROWD-{k:03d}"
        copies.append(dict(base, id=gid, name=f"copy {k} of {base['id']}"))
        scale = 10.0 ** (0.4 * (k / CROWD_GRADES - 0.5))
        for t, f, e, eta in sweeps[base["id"]]:
            lines.append(f"{gid},{t},{f},{float(e) * scale:.6g},{eta}")
    with open(folder / "catalog.csv", "w", newline="") as fh:
        writer = csv.DictWriter(fh, fieldnames=header)
        writer.writeheader()
        writer.writerows(copies)
    (folder / "sweeps.csv").write_text("\n".join(lines) + "\n")
    lib = Library(str(db))
    import_files(lib, [folder / "catalog.csv"], [folder / "sweeps.csv"])
    fit_library(lib, processes=1)
    return db


def large_ranking(n: int):
    """The ranking, under the dashboard's default case, of ``n`` grades cloned in memory
    from the demo grades (:func:`bench.bench_rank.library`: perturbed moduli,
    temperature axes and catalog fields); input only, never a check value."""
    from bench import bench_rank
    from dashboard import case
    from engine.selection.ranking import rank

    curves, materials = bench_rank.library(n)
    return rank(curves, materials, case.criteria_from_state(case.default_state()))
