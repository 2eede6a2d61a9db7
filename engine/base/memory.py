"""Freed memory kept in the process for the next large array.

A ranking of 10,000 grades makes and frees arrays of tens of megabytes. The GNU C
library's allocator gives each block above its mapping threshold (which it raises by
itself, but to 32 MiB at most) back to the operating system when it is freed, and maps
a new one for the next array: every page of it is then faulted in again. A ranking of
10,000 grades over a 41 x 13 window took about 60,000 such faults (0.1 s of its 0.6 s)
on every call. :func:`keep_freed_memory`, called once by the command line and the
dashboard when they start, raises the threshold and the heap's trim threshold so that
freed blocks stay in the process and are used again. The cost: the process keeps the
memory of its largest ranking until it ends (the dashboard's server does in any case
for the curve bank it holds).

Elsewhere than on Linux with the GNU C library it does nothing.
"""

from __future__ import annotations

import ctypes
import functools
import sys

KEPT_BYTES = 1 << 30  # blocks below this come from the heap; freed ones stay there
_M_TRIM_THRESHOLD = -1  # mallopt parameters of glibc's <malloc.h>
_M_MMAP_THRESHOLD = -3


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
