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
"""

from __future__ import annotations

import ctypes
import functools
import os
import sys

KEPT_BYTES = 1 << 30  # blocks below this come from the heap; freed ones stay there
_M_TRIM_THRESHOLD = -1  # mallopt parameters of glibc's <malloc.h>
_M_MMAP_THRESHOLD = -3
HUGE_PAGE_SWITCH = "NUMPY_MADVISE_HUGEPAGE"  # numpy's environment variable


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
