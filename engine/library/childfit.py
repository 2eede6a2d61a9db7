"""A library's fits and curve bank made in a process of their own, for a server.

A long-lived process (the dashboard's server) that fits or stacks thousands of grades
itself keeps what that took: the decoded JSON of every fit, the fitted curves, the
stacking's temporary arrays. At 10,000 grades its resident memory then stayed at
1.7-1.9 GB, and its later rankings took their memory from new pages at 16-35 us a
page fault, against 1.5 us in a process that had read the bank from its record (a
dashboard window change 1.75-1.85 s against 1.37-1.46 s in the bench).
:func:`fit_in_child` runs :func:`engine.library.fits.fitted_library` in a child Python
process, which writes the library's bank record and ends; the server then reads the
record as every later use does. Measured so at 10,000 grades: the server held 540 MiB
after the first use, and its window-change reruns took 0.68-0.79 s with 0.03-0.08 s of
system time, as on a server that read the record.

The child is ``python -m engine.library.childfit``. It reads its request, one line of
JSON, from standard input (so that a database URL with a password is not shown in the
process list), writes ``progress DONE TOTAL`` lines while fitting and one last
``stored N`` line (N grades in the bank), and exits 0; on failure it exits non-zero
with the reason on standard error.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
from pathlib import Path

from engine.library.fits import Progress, fitted_library, one_line
from engine.library.store import Library

# Stacking more grades than this anew is done in a child process. Starting one costs
# its imports, about what a command does beyond the interpreter's start (0.4 s in
# bench.bench_cold); 1,000 grades decode from the fit cache in about 0.5 s (4.7 s for
# 10,000, same bench), so below this count stacking in place costs about as much and
# leaves little behind.
CHILD_FROM_GRADES = 1_000
_PROJECT_ROOT = Path(__file__).resolve().parents[2]


def fit_in_child(
    library: Library,
    reference_C: float | None = None,
    vertical_shift: bool = False,
    progress: Progress | None = None,
) -> str | None:
    """Fit and stack ``library``'s grades in a child process that stores the bank record.

    Returns None once the record is stored, else the one-line reason it is not (the
    caller then stacks in its own process, as before). A library this role may not
    write to is refused at once: the child's record could not be kept.
    """
    if not library.can_write:
        return "this role may not write the library's bank record"
    request = json.dumps(
        {"location": library.location, "reference_C": reference_C, "vertical_shift": vertical_shift}
    )
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(
        p for p in (str(_PROJECT_ROOT), env.get("PYTHONPATH", "")) if p
    )
    with tempfile.TemporaryFile() as errors:  # a file: a full pipe could stall the child
        child = subprocess.Popen(
            [sys.executable, "-m", "engine.library.childfit"],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            stderr=errors,
            env=env,
            text=True,
        )
        assert child.stdin is not None and child.stdout is not None
        child.stdin.write(request + "\n")
        child.stdin.close()
        stored = None
        for line in child.stdout:
            word, *numbers = line.split() or [""]
            if not all(v.isdigit() for v in numbers):
                continue  # not one of the child's own lines
            if word == "progress" and len(numbers) == 2 and progress is not None:
                progress(int(numbers[0]), int(numbers[1]))
            elif word == "stored" and len(numbers) == 1:
                stored = int(numbers[0])
        code = child.wait()
        errors.seek(0)
        said = errors.read().decode("utf-8", "replace").strip().splitlines()
    if code == 0 and stored is not None:
        return None
    last = said[-1] if said else "no reason given"
    return one_line(f"the fitting process ended with code {code}: {last}")


def _main() -> int:
    def progress(done: int, total: int) -> None:
        print(f"progress {done} {total}", flush=True)

    try:
        request = json.loads(sys.stdin.readline())
        library = Library(request["location"])
        result = fitted_library(
            library, request["reference_C"], bool(request["vertical_shift"]), progress=progress
        )
    except Exception as exc:  # noqa: BLE001 - any failure is the caller's one-line reason
        print(f"{type(exc).__name__}: {one_line(str(exc))}", file=sys.stderr)
        return 1
    if not result.record_kept:
        print("the library's bank record could not be written", file=sys.stderr)
        return 1
    print(f"stored {len(result.bank)}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(_main())
