"""Memory arranged for large arrays: freed blocks kept, fresh pages the ordinary size.

A ranking of 10,000 grades makes and frees arrays of tens of megabytes, and the
dashboard keeps the rankings of recent windows (about 120 MB each at its default
window), so every new window also needs memory the process has never touched. Two
settings of the platform decide what that costs; :func:`arrange_memory`, called once
by the command line and the dashboard when they start, makes both:

- :func:`keep_freed_memory`. The GNU C library's allocator gives each block above its
  mapping threshold (which it raises by itself, but to 32 MiB at most) back to the
  operating system when it is freed, and maps a new one for the next array: every page
  of it is then faulted in again. A ranking of 10,000 grades over a 41 x 13 window
  took about 60,000 such faults (0.1 s of its 0.6 s) on every call. Raising the
  threshold and the heap's trim threshold keeps freed blocks in the process for the
  next array. The cost: the process keeps the memory of its largest ranking until it
  ends (the dashboard's server does in any case for the curve bank it holds).
- :func:`ordinary_pages_for_arrays`. numpy asks Linux for transparent huge pages
  (``madvise(MADV_HUGEPAGE)``) for every array of 4 MiB and more. A 2 MiB page must be
  found whole, and with the kernel's usual ``defrag=madvise`` policy the page fault
  waits while the kernel frees and zeroes one. Measured on a 2-core virtual machine:
  200 MB of new arrays took 0.3-2.2 s to touch on huge pages against 0.075 s on 4 KiB
  pages, and a dashboard window change at 10,000 grades spent 0.9-1.1 s of system time
  in such faults (0.05-0.08 s on ordinary pages). With the memory kept for reuse the
  huge pages bought nothing measurable (a steady ranking 0.41-0.46 s either way). A
  user's own ``NUMPY_MADVISE_HUGEPAGE`` (numpy's documented switch, read when numpy is
  imported) is left as they set it.

Elsewhere than on Linux (and, for the first, with the GNU C library) they do nothing.

A third setting must be made before a process starts, so the dashboard's launchers make
it (:func:`server_environment`: ``make run``, and the tests' and benches' servers):

- One allocator arena (``MALLOC_ARENA_MAX=1``, glibc's documented variable; mallopt(3)).
  glibc gives each thread that allocates its own arena, and Streamlit runs every rerun
  of the script on a new thread, which takes whichever arena is free. The rankings a
  server keeps were thus spread over many arenas, and memory freed in one could not
  serve a ranking made in another: a thread's arena grows in separate mappings of at
  most 64 MiB, each given back whole when it empties, so new rankings took fresh pages
  again. Measured in a browser at 10,000 grades, 6 new windows after 6 page loads on
  one server, three servers each way: the server's resident memory grew to about
  1,050 MB with one arena per thread and stayed at 760 MB with one arena; a window
  change until the new map was drawn took a median 1.35-1.61 s against 1.08-1.13 s,
  some reruns spending 0.3-1.2 s of system time in page faults against 0.01-0.06 s.
  The cost is that threads allocating at once take turns at the one arena's lock: the
  array work of a ranking allocates a few blocks per thread per pass.
"""

from __future__ import annotations

import ctypes
import functools
import os
import sys
from collections.abc import Mapping

KEPT_BYTES = 1 << 30  # blocks below this come from the heap; freed ones stay there
_M_TRIM_THRESHOLD = -1  # mallopt parameters of glibc's <malloc.h>
_M_MMAP_THRESHOLD = -3
HUGE_PAGE_SWITCH = "NUMPY_MADVISE_HUGEPAGE"  # numpy's environment variable
ARENA_SWITCH = "MALLOC_ARENA_MAX"  # glibc's environment variable (mallopt(3), M_ARENA_MAX)
SERVER_ARENAS = "1"


def arrange_memory() -> tuple[bool, bool]:
    """Both settings of this module, once per process: whether freed memory is kept
    and whether numpy's arrays are on ordinary pages (see the module's text)."""
    return keep_freed_memory(), ordinary_pages_for_arrays()


@functools.cache  # set once per process; later calls give the first call's answer
def keep_freed_memory() -> bool:
    """Keep freed blocks below :data:`KEPT_BYTES` in the process (glibc's ``mallopt``);
    True when the allocator took the setting."""
    if not sys.platform.startswith("linux"):
        return False
    try:
        mallopt = ctypes.CDLL(None).mallopt
    except (OSError, AttributeError):  # another C library: nothing to set
        return False
    mallopt.argtypes = [ctypes.c_int, ctypes.c_int]
    mallopt.restype = ctypes.c_int
    return bool(mallopt(_M_MMAP_THRESHOLD, KEPT_BYTES)) and bool(
        mallopt(_M_TRIM_THRESHOLD, KEPT_BYTES)
    )


@functools.cache
def ordinary_pages_for_arrays() -> bool:
    """Stop numpy asking for transparent huge pages for its large arrays, unless the
    user chose through :data:`HUGE_PAGE_SWITCH`; True when numpy asks for none.

    Before numpy is imported (the command line imports it only for the commands that
    compute) the switch is set in the environment, where numpy reads it on import and
    the processes started from here inherit it; after, numpy's own setter is called."""
    if not sys.platform.startswith("linux"):
        return False
    chosen = os.environ.get(HUGE_PAGE_SWITCH)
    if chosen is not None:
        return chosen.strip() == "0"
    if "numpy" not in sys.modules:
        os.environ[HUGE_PAGE_SWITCH] = "0"
        return True
    from numpy._core import multiarray

    switch = getattr(multiarray, "_set_madvise_hugepage", None)
    if switch is None:  # a numpy without the setter
        return False
    switch(False)
    return True


def server_environment(env: Mapping[str, str]) -> dict[str, str]:
    """``env`` with one allocator arena for a dashboard server to be started with
    (:data:`ARENA_SWITCH`; see the module's text), unless it already says how many."""
    out = dict(env)
    if not out.get(ARENA_SWITCH, "").strip():
        out[ARENA_SWITCH] = SERVER_ARENAS
    return out


def one_arena() -> bool:
    """Whether this process was started with one allocator arena (read by the
    dashboard, which says in its log when a server was started without)."""
    return os.environ.get(ARENA_SWITCH, "").strip() == SERVER_ARENAS
