"""The invented demo grades of demo_materials/, loaded into a library.

In a source checkout the files are read from ``demo_materials/`` beside the package; an
installed package carries copies of the files in ``engine/demo_data/`` (setup.py copies
them when the wheel is built, so ``demo_materials/`` stays their one source). The
strain-amplitude sweeps (``amplitude.csv``) are loaded where the folder has them.
"""

from __future__ import annotations

from importlib.resources import files
from pathlib import Path

from engine.library.importer import import_files
from engine.library.store import ImportSummary, Library

DEMO_FILES = ("catalog.csv", "sweeps.csv")
DEMO_AMPLITUDE = "amplitude.csv"  # strain-amplitude sweeps of four filled grades


def _demo_dir() -> Path:
    """The folder holding the demo catalog and sweeps: the checkout's, else the package's."""
    checkout = Path(__file__).resolve().parents[2] / "demo_materials"
    if all((checkout / name).is_file() for name in DEMO_FILES):
        return checkout
    return Path(str(files("engine") / "demo_data"))


DEMO_DIR = _demo_dir()


def load_demo(library: Library) -> ImportSummary:
    """Import the demo catalog, sweeps and amplitude sweeps (idempotent: a second call
    changes nothing)."""
    amplitude = DEMO_DIR / DEMO_AMPLITUDE
    return import_files(
        library,
        [DEMO_DIR / "catalog.csv"],
        [DEMO_DIR / "sweeps.csv"],
        [amplitude] if amplitude.is_file() else [],
    )
