"""How the process keeps the memory it frees (glibc's allocator), for the command line.

A run with many results allocates and frees arrays of tens of megabytes block
after block.  glibc hands free memory at the top of its heap back to the
system once more than 128 kB of it is free (its trim threshold), and every
array given back is paged in again, zeroed, the next time: at a thousand load
cases of a 100k-member model that is several seconds of the kernel's time
(measured: 4-26 s of system time in a 10-30 s solve, depending on how busy the
machine's host is).  :func:`keep_freed_memory` raises the trim threshold, so
freed memory is reused instead.  The library itself never calls it: the
allocator belongs to the program, and ``spaceframe run`` is one.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import sys

#: Free memory kept at the top of the heap before any is given back, bytes.
TRIM_THRESHOLD = 1 << 30
#: Arrays up to this size come from the heap (and are reused), larger ones
#: are mapped on their own.  32 MB is as far as glibc raises it by itself
#: (from 128 kB, as arrays are freed), and setting the trim threshold stops
#: that, so it is set too.  Measured at 1000 cases of a 100k-member model,
#: the whole run: 47.6 s with these settings, 47.0 s with 256 MB, 69.1 s
#: with glibc's own (a busy host; the solve 11.3 s, 13.4 s and 29.2 s).
MMAP_THRESHOLD = 1 << 25
_M_TRIM_THRESHOLD, _M_MMAP_THRESHOLD = -1, -3  # glibc's <malloc.h>


def keep_freed_memory(trim: int = TRIM_THRESHOLD, mmap: int = MMAP_THRESHOLD) -> bool:
    """Keep up to ``trim`` bytes of freed memory in this process; True if set.

    The settings of the study's workers (``study.WORKER_ENVIRON``), here
    for the process itself.  Only on Linux with glibc (``mallopt``);
    elsewhere nothing changes and False is returned.
    """
    if not sys.platform.startswith("linux"):
        return False
    try:
        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6")
        mallopt = libc.mallopt
    except (OSError, AttributeError):  # not glibc (musl has no mallopt)
        return False
    mallopt.argtypes, mallopt.restype = [ctypes.c_int, ctypes.c_int], ctypes.c_int
    ok = mallopt(_M_MMAP_THRESHOLD, min(int(mmap), 2**31 - 1))
    return bool(ok and mallopt(_M_TRIM_THRESHOLD, min(int(trim), 2**31 - 1)))
