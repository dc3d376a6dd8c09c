"""Memory: allocator settings for processes that run metasim studies, and estimates before large runs.

:func:`require_memory` compares a run's estimated memory with what the machine has available
(:func:`available_memory`) and refuses it in one line before anything is allocated; observer
populations and :func:`metasim.mismatch` call it with their own estimates (bytes per observer and
wavelength, bytes per observer × stimulus × design pair, measured on metasim's own runs).

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


# -- memory estimates before large runs -------------------------------------------------------------

#: Estimates below this many bytes are not checked (reading the system's figures costs more than they save).
CHECK_FROM_BYTES = 256 << 20


def available_memory() -> int | None:
    """Bytes this process can still allocate without swapping, or None when the system does not say.

    Linux: ``MemAvailable`` of ``/proc/meminfo``, lowered to the room left under a control-group
    limit (``memory.max`` minus ``memory.current``, cgroup v2) when one is set.
    """
    available = None
    try:
        with open("/proc/meminfo", encoding="ascii") as handle:
            for line in handle:
                if line.startswith("MemAvailable:"):
                    available = int(line.split()[1]) * 1024
                    break
    except (OSError, ValueError, IndexError):
        return None
    try:
        with open("/sys/fs/cgroup/memory.max", encoding="ascii") as handle:
            limit = handle.read().strip()
        with open("/sys/fs/cgroup/memory.current", encoding="ascii") as handle:
            used = int(handle.read().strip())
        if limit != "max":
            room = max(int(limit) - used, 0)
            available = room if available is None else min(available, room)
    except (OSError, ValueError):
        pass
    return available


def _size(nbytes: float) -> str:
    for unit in ("bytes", "KB", "MB", "GB", "TB", "PB"):
        if nbytes < 1000 or unit == "PB":
            return f"{nbytes:.0f} {unit}" if unit == "bytes" else f"{nbytes:.1f} {unit}"
        nbytes /= 1000
    return f"{nbytes:.1f} PB"


def require_memory(nbytes: float, what: str, advice: str = "") -> None:
    """Refuse a run whose estimated memory (``nbytes``) exceeds what the machine has available.

    Raises :class:`~metasim.errors.NotEnoughMemoryError` stating the estimate, the memory available
    and ``advice`` (e.g. how far to reduce the size), before anything is allocated.
    """
    if nbytes < CHECK_FROM_BYTES:
        return
    available = available_memory()
    if available is None or nbytes <= available:
        return
    from metasim.errors import NotEnoughMemoryError

    raise NotEnoughMemoryError(f"{what} needs about {_size(nbytes)} of memory; this machine has {_size(available)} "
                               f"available{'; ' + advice if advice else ''}")


def largest_fitting(bytes_each: float) -> int:
    """How many items of ``bytes_each`` fit in the memory available now (0 when unknown)."""
    available = available_memory()
    return int(available // bytes_each) if available else 0
