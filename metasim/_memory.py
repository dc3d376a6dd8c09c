"""Allocator settings for processes that run metasim studies.

A population study returns tens of MB of fresh arrays per call. With glibc's default policy the
freed memory at the top of the heap is handed back to the kernel, so the next study's arrays are
page-faulted in again (measured: about 1 ms of a 16 ms study). :func:`keep_freed_memory` asks
glibc (``mallopt``) to keep up to a limit of freed memory for reuse and to serve blocks up to
32 MiB from the heap. It changes the policy of the whole process, so the library never calls it on
import: the ``metasim`` command and the benchmark scripts do, and so may any program that runs many
studies. Elsewhere (other C libraries, other systems) it does nothing and returns False.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import os
import sys

_M_TRIM_THRESHOLD = -1
_M_MMAP_THRESHOLD = -3
_MMAP_LIMIT = 32 << 20  # glibc's largest allowed mmap threshold on 64-bit systems


def keep_freed_memory(limit_mib: int = 512) -> bool:
    """Keep up to ``limit_mib`` MiB of freed heap memory for reuse (glibc only); True if applied.

    ``METASIM_KEEP_FREED_MEMORY=0`` in the environment turns it off.
    """
    if os.environ.get("METASIM_KEEP_FREED_MEMORY", "1") == "0" or not sys.platform.startswith("linux"):
        return False
    try:
        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6")
        mallopt = libc.mallopt
    except (OSError, AttributeError):
        return False
    mallopt.argtypes = [ctypes.c_int, ctypes.c_int]
    mallopt.restype = ctypes.c_int
    return bool(mallopt(_M_MMAP_THRESHOLD, _MMAP_LIMIT)) and bool(mallopt(_M_TRIM_THRESHOLD, int(limit_mib) << 20))
