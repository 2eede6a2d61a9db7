import pytest

from engine.library.store import Library
from tests.helpers import DEMO, Run, call_main


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
    import_files(lib, [DEMO / "catalog.csv"], [DEMO / "sweeps.csv"])
    fit_library(lib, processes=1)
    return lib


@pytest.fixture
def run_cli(capsys, monkeypatch):
    """``run_cli(db, *args)``: one command through :func:`engine.cli.main` in this
    process, the library ``db`` named by QUIETGRADE_DB as a user's shell would; a
    :class:`tests.helpers.Run` with the exit status and what the command wrote."""

    def run(db, *args) -> Run:
        monkeypatch.setenv("QUIETGRADE_DB", str(db))
        capsys.readouterr()  # what came before is not this command's
        code = call_main(args)
        out, err = capsys.readouterr()
        return Run(tuple(map(str, args)), code, out, err)

    return run
