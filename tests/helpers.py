"""Support shared by the test modules (test modules never import one another).

- Paths of the checkout: :data:`ROOT`, the demo files :data:`DEMO`, screenshots
  :data:`SHOTS`.
- The command line in this process: :class:`Run` and :func:`invoke`.
- Hand-built inputs: :func:`flat_bank` (grades whose moduli do not depend on T or f)
  and :func:`material` (a catalog record).
- :func:`kk_storage_minus_equilibrium`, the Kramers-Kronig integral for E'.
"""

from __future__ import annotations

import contextlib
import dataclasses
import io
import json
import os
import socket
import subprocess
import sys
import time
import urllib.request
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy import integrate

from engine.base.memory import server_environment
from engine.cli import main
from engine.curves.bank import CurveBank
from engine.library.importer import data_hash
from engine.library.store import Library, Material
from tests import synthetic

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "demo_materials"
SHOTS = ROOT / "screenshots"  # git-ignored

# Debian's chromium, headless, for every browser check (QUIETGRADE_CHROMIUM names another).
CHROMIUM = os.environ.get("QUIETGRADE_CHROMIUM", "/usr/bin/chromium")
CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]


# ------------------------------------------------------------------ the command line


@dataclass(frozen=True)
class Run:
    """One command: its arguments, exit status and what it wrote."""

    args: tuple[str, ...]
    returncode: int
    stdout: str
    stderr: str

    def json(self):
        return json.loads(self.stdout)

    def one_line(self) -> str:
        """The single line on stderr (the CLI contract for bad input)."""
        lines = self.stderr.strip().splitlines()
        assert len(lines) == 1, self.stderr
        return lines[0]


def stop_server(proc: subprocess.Popen, timeout: float = 15.0) -> None:
    """Ends a dashboard server started for a check: asked first, killed if it lingers."""
    proc.terminate()
    try:
        proc.wait(timeout=timeout)
    except subprocess.TimeoutExpired:
        proc.kill()


def free_port() -> int:
    """A TCP port on 127.0.0.1 that nothing listens on now."""
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@contextlib.contextmanager
def served_dashboard(
    db: Path, prepare: Callable[[dict], None] | None = None, stop_timeout: float = 10.0
) -> Iterator[str]:
    """The dashboard on a free port of 127.0.0.1 serving the library ``db``; its URL,
    once Streamlit's health check answers (an error after 60 s).

    ``prepare(env)`` fills the library while the server boots (the dashboard opens the
    library only when the first browser session runs the script); ``env`` is the
    server's environment.
    """
    env = server_environment({**os.environ, "QUIETGRADE_DB": str(db)})  # as `make run`
    port = free_port()
    proc = subprocess.Popen(
        [sys.executable, "-m", "streamlit", "run", "dashboard/app.py",
         "--server.address", "127.0.0.1", "--server.port", str(port),
         "--server.headless", "true", "--browser.gatherUsageStats", "false"],
        cwd=ROOT, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
    )  # fmt: skip
    try:
        if prepare is not None:
            prepare(env)
        url = f"http://127.0.0.1:{port}"
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline:
            try:
                with urllib.request.urlopen(f"{url}/_stcore/health", timeout=2) as r:
                    if r.status == 200:
                        break
            except OSError:
                if proc.poll() is not None:
                    raise RuntimeError("the dashboard server stopped as it started") from None
                time.sleep(0.3)
        else:
            raise RuntimeError("the dashboard did not start within 60 s")
        yield url
    finally:
        stop_server(proc, timeout=stop_timeout)


def call_main(args) -> int:
    """``engine.cli.main(args)``; the exit status, also where argparse stops with
    SystemExit (as ``python -m engine`` would exit)."""
    try:
        return main([str(a) for a in args])
    except SystemExit as stop:  # argparse: 2 on bad options, 0 after --help
        return stop.code if isinstance(stop.code, int) else int(stop.code is not None)


def invoke(args) -> Run:
    """Run one command in this process with its stdout and stderr captured here (for
    fixtures shared by several tests, where pytest's capsys is not available)."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = call_main(args)
    return Run(tuple(map(str, args)), code, out.getvalue(), err.getvalue())


# ------------------------------------------------------------------ hand-built inputs


def flat_bank(storage, loss_factor, modes, ids=None) -> CurveBank:
    """A CurveBank of grades whose modulus and loss factor do not depend on T or f.

    ``storage`` [Pa] in each grade's own mode, ``loss_factor`` [-], ``modes`` "tensile"
    or "shear" (all broadcast to one entry per grade). The shift law is a WLF law with
    C1 = 0 (log aT = 0 everywhere) and the covered ranges are wide, so nothing is
    flagged as extrapolated.
    """
    storage = np.atleast_1d(np.asarray(storage, dtype=float))
    n = storage.size
    eta = np.broadcast_to(np.asarray(loss_factor, dtype=float), (n,))
    modes = np.array(np.broadcast_to(np.asarray(modes), (n,)))
    nodes = 11
    step = 5.0  # decades between nodes: the table spans -25 to +25 in log10 fR
    nan = np.full(n, np.nan)
    return CurveBank(
        ids=list(ids) if ids is not None else [f"FLAT-{k}" for k in range(n)],
        modes=modes,
        start=np.full(n, -25.0),
        log_storage=np.repeat(np.log10(storage)[:, None], nodes, axis=1),
        log_loss=np.repeat(np.log10(storage * eta)[:, None], nodes, axis=1),
        n_nodes=np.full(n, nodes),
        kind=np.ones(n, dtype=int),  # WLF ...
        reference=np.full(n, 23.0),
        c1=np.zeros(n),  # ... with C1 = 0: no shift at any temperature
        c2=np.full(n, 1e6),
        wlf_reference=np.zeros(n),
        activation=nan,
        split=nan,
        vertical=np.zeros(n, dtype=bool),
        fr_lo=np.full(n, -25.0),
        fr_hi=np.full(n, 25.0),
        t_lo=np.full(n, -273.0),
        t_hi=np.full(n, 1000.0),
        step=step,
    )


def material(gid, density=1100.0, price=5.0, hardness=55.0, service=(-60.0, 150.0), mode="tensile"):
    """A catalog record with the given fields (invented, input only)."""
    return Material(
        id=gid,
        name=f"Grade {gid}",
        mode=mode,
        supplier="Nobody",
        family="synthetic",
        density=density,
        price=price,
        hardness=hardness,
        service_min=service[0],
        service_max=service[1],
    )


# ------------------------------------------------------------------ Kramers-Kronig


def kk_storage_minus_equilibrium(loss, omega: float, tau: np.ndarray) -> float:
    """(2 w^2/pi) PV int_0^inf E''(x) / (x (w^2 - x^2)) dx, by scipy quad.

    Kramers-Kronig relation for the storage modulus, E'(w) - E'(0) (Ferry 1980,
    ch. 3; Tschoegl 1989). With x = w e^u it becomes
    (2/pi) PV int E''(w e^u) / (1 - e^{2u}) du, whose pole at u = 0 is handled by
    quad's Cauchy weight on [-1, 1]; the tails decay exponentially in u.
    """

    def smooth_part(u):  # E''(w e^u) u / (1 - e^{2u}), which tends to -E''(w)/2 at u = 0
        if u == 0.0:
            return -0.5 * loss(omega)
        return loss(omega * np.exp(u)) * u / -np.expm1(2.0 * u)

    def regular(u):
        return loss(omega * np.exp(u)) / -np.expm1(2.0 * u)

    lo = np.log(1.0 / (omega * tau.max())) - 30.0
    hi = np.log(1.0 / (omega * tau.min())) + 30.0
    accuracy = {"limit": 400, "epsabs": 0.0, "epsrel": 1e-9}
    core, _ = integrate.quad(smooth_part, -1.0, 1.0, weight="cauchy", wvar=0.0, **accuracy)
    left, _ = integrate.quad(regular, lo, -1.0, **accuracy)
    right, _ = integrate.quad(regular, 1.0, hi, **accuracy)
    return 2.0 / np.pi * (left + core + right)


# ------------------------------------------------------------------ a library on a server

# An empty PostgreSQL database the role may create tables in (``.ci/run`` starts a server
# on 127.0.0.1 and sets it); without it the server cases of the library tests are skipped.
SERVER_URL_VARIABLE = "QUIETGRADE_TEST_DATABASE_URL"


def drop_library(url: str) -> None:
    """Drop the library's tables from the database at ``url`` (the next Library() there
    starts from an empty database), in one statement on a kept connection."""
    import sqlalchemy as sa

    from engine.library import store

    names = ", ".join(f'"{t.name}"' for t in store._metadata.sorted_tables)
    with _reset_engine(url).begin() as conn:
        conn.execute(sa.text(f"DROP TABLE IF EXISTS {names} CASCADE"))


def empty_library(url: str) -> None:
    """Leave the database at ``url`` as a new library: every row of the library's tables
    removed and its version counter back at 0 when today's schema is there (a TRUNCATE,
    much cheaper than creating the schema again for each test), the tables dropped
    otherwise (another schema version, a part of it, or none)."""
    import sqlalchemy as sa

    from engine.library import store

    with _reset_engine(url).begin() as conn:
        present = set(sa.inspect(conn).get_table_names())
        current = present == set(store._metadata.tables) and conn.execute(
            sa.text("SELECT value FROM meta WHERE key = 'schema_version'")
        ).scalar() == str(store.SCHEMA_VERSION)
        if current:
            names = ", ".join(
                f'"{t.name}"' for t in store._metadata.sorted_tables if t.name != "meta"
            )
            conn.execute(sa.text(f"TRUNCATE {names} RESTART IDENTITY CASCADE"))
            conn.execute(sa.text("UPDATE meta SET value = '0' WHERE key = 'library_version'"))
    if not current:
        drop_library(url)


_reset_engines: dict = {}


def _reset_engine(url: str):
    """One engine per URL for the resets, kept for the session (one login, not one a test)."""
    import sqlalchemy as sa

    from engine.library import store

    if url not in _reset_engines:
        _reset_engines[url] = sa.create_engine(store._url(url), pool_size=1)
    return _reset_engines[url]


# --- grades written straight into a library (tests/test_reliability_*.py) -------------


def good_sweep(seed: int) -> np.ndarray:
    """A full sweep of the known model with its glass transition moved by the seed."""
    tg = float(np.random.default_rng(seed).uniform(-30.0, -10.0))
    law = dataclasses.replace(synthetic.TRUE_LAW, wlf_reference_C=tg, split_C=tg)
    return synthetic.sweep(noise=0.01, seed=seed, law=law)


def with_value(points: np.ndarray, row: int, column: int, value: float) -> np.ndarray:
    out = points.copy()
    out[row, column] = value
    return out


def add_grades(lib: Library, grades: dict[str, np.ndarray]) -> Library:
    """``lib`` with ``grades`` (id -> points in internal units) added in one transaction
    straight into the store (no file, no importer: points the importer would refuse)."""
    files = [
        {
            "key": "f",
            "file_name": "generated.csv",
            "sha256": "0" * 64,
            "size_bytes": 0,
            "rows": sum(len(p) for p in grades.values()),
            "kind": "sweep",
        }
    ]
    datasets = [
        {"material_id": gid, "file_key": "f", "data_hash": data_hash(p), "points": p}
        for gid, p in grades.items()
    ]
    lib.write_import(files, [material(gid) for gid in grades], datasets)
    return lib


# The elements the report's SVG charts are drawn with: none links, loads or runs anything.
SVG_ELEMENTS = frozenset(
    {
        "svg",
        "g",
        "rect",
        "clipPath",
        "path",
        "polyline",
        "polygon",
        "circle",
        "line",
        "text",
        "tspan",
        "title",
    }
)
