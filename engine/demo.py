"""The invented demo grades of demo_materials/, loaded into a library."""

from __future__ import annotations

from pathlib import Path

from engine.importer import import_files
from engine.store import ImportSummary, Library

DEMO_DIR = Path(__file__).resolve().parent.parent / "demo_materials"


def load_demo(library: Library) -> ImportSummary:
    """Import the demo catalog and sweeps (idempotent: a second call changes nothing)."""
    return import_files(library, [DEMO_DIR / "catalog.csv"], [DEMO_DIR / "sweeps.csv"])
