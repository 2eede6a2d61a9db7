"""Real-browser fixtures: dashboard servers on 127.0.0.1 (one serving the demo library,
one a library too large for the map to draw grade by grade, and one for each test that
writes to its library) and Debian's chromium.

The tests are skipped, with the reason printed, only where chromium is absent.
"""

from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from tests.crowd import write_crowd_library
from tests.helpers import CHROMIUM, CHROMIUM_ARGS, ROOT, SHOTS, served_dashboard


def pytest_collection_modifyitems(config, items):
    if Path(CHROMIUM).exists() or shutil.which("chromium"):
        return
    skip = pytest.mark.skip(reason=f"chromium not found at {CHROMIUM}: browser tests skipped")
    for item in items:
        if "browser" in item.keywords:
            item.add_marker(skip)


def _load_demo(env: dict) -> None:
    try:
        subprocess.run(
            [sys.executable, "-m", "engine", "demo"],
            cwd=ROOT,
            env=env,
            check=True,
            capture_output=True,
        )
    except subprocess.CalledProcessError as exc:
        raise RuntimeError(f"loading the demo library failed: {exc.stderr.decode()}") from None


@pytest.fixture(scope="session")
def app_url(tmp_path_factory):
    """The dashboard serving a fresh demo library: (URL, library)."""
    db = tmp_path_factory.mktemp("browser") / "library.sqlite"
    with served_dashboard(db, _load_demo) as url:
        yield url, db


@pytest.fixture
def own_app_url(app_url, tmp_path):
    """A dashboard of its own serving a copy of the demo library, for a test that writes
    to the library (the shared one stays as every other test expects it): (URL, library)."""
    _, shared = app_url
    db = tmp_path / "library.sqlite"
    with served_dashboard(db, lambda env: shutil.copyfile(shared, db)) as url:
        yield url, db


@pytest.fixture(scope="session")
def crowd_url(tmp_path_factory):
    """The dashboard serving a library of CROWD_GRADES grades (tests/crowd.py), more
    than the map draws one by one: (URL, library)."""
    db = tmp_path_factory.mktemp("browser-crowd") / "crowd.sqlite"
    with served_dashboard(db, lambda env: write_crowd_library(db)) as url:
        yield url, db


@pytest.fixture(scope="session")
def browser():
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        yield b
        b.close()


@pytest.fixture(scope="session")
def context(browser):
    """One browser context for the run: its cache keeps the large chart bundle warm.

    Every page opened in it is a new Streamlit session with the default case.
    """
    SHOTS.mkdir(exist_ok=True)
    ctx = browser.new_context(viewport={"width": 1280, "height": 900}, accept_downloads=True)
    yield ctx
    ctx.close()


@pytest.fixture
def page(context):
    pg = context.new_page()
    pg.set_default_timeout(60_000)
    yield pg
    pg.close()
