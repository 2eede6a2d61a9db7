import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from engine.library.store import Library  # noqa: E402


@pytest.fixture
def library(tmp_path):
    return Library(str(tmp_path / "lib.sqlite"))


@pytest.fixture(scope="session")
def demo_library(tmp_path_factory):
    """A library with the demo grades loaded and fitted (shared, read-only use)."""
    from engine.library.fits import fit_library
    from engine.library.importer import import_files

    path = tmp_path_factory.mktemp("demo") / "demo.sqlite"
    lib = Library(str(path))
    demo = ROOT / "demo_materials"
    import_files(lib, [demo / "catalog.csv"], [demo / "sweeps.csv"])
    fit_library(lib, processes=1)
    return lib
