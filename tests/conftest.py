import os

import pytest

from engine.library.store import Library
from tests.helpers import DEMO, SERVER_URL_VARIABLE, Run, call_main, drop_library, empty_library


@pytest.fixture
def library(tmp_path):
    return Library(str(tmp_path / "lib.sqlite"))


@pytest.fixture(scope="session")
def demo_library(tmp_path_factory):
    """A library with the demo grades loaded and fitted, its curve bank stored (shared,
    read-only use)."""
    from engine.library.fits import fitted_library
    from engine.library.importer import import_files

    path = tmp_path_factory.mktemp("demo") / "demo.sqlite"
    lib = Library(str(path))
    import_files(lib, [DEMO / "catalog.csv"], [DEMO / "sweeps.csv"])
    fitted_library(lib, processes=1)
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


def pytest_configure(config):
    config.addinivalue_line(
        "markers",
        "sqlite_only: a library test about SQLite's files (bytes, backups, WAL, permissions, "
        "migration copies) that has no PostgreSQL case",
    )


@pytest.fixture(scope="session")
def _server_database():
    """The PostgreSQL database of the library tests, its library tables dropped at the
    start and at the end of the session (None when no server is named)."""
    url = os.environ.get(SERVER_URL_VARIABLE)
    if url:
        drop_library(url)
    yield url
    if url:
        drop_library(url)


@pytest.fixture(params=["sqlite", "postgresql"])
def library_url(request, tmp_path):
    """Where a library test keeps its library, once per database: a new SQLite file, then
    the PostgreSQL database named by QUIETGRADE_TEST_DATABASE_URL (skipped when it is not
    set), emptied before the test (and its tables dropped at the end of the session)."""
    if request.param == "sqlite":
        yield str(tmp_path / "lib.sqlite")
        return
    url = request.getfixturevalue("_server_database")
    if not url:
        pytest.skip(f"{SERVER_URL_VARIABLE} is not set: no PostgreSQL server")
    empty_library(url)
    yield url


@pytest.fixture
def any_library(library_url):
    """A new, empty library on each database (see :func:`library_url`)."""
    lib = Library(library_url)
    yield lib
    lib.engine.dispose()  # no idle server connections left behind by each test
