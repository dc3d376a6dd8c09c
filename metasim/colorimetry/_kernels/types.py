"""One argument type per kernel parameter: every kernel is compiled once.

numba compiles a function anew for each combination of argument types it sees, and an array's type
includes its layout and whether it is read-only. Entry points pass arrays through :func:`writable`,
so a kernel sees C-contiguous, writable float64 (or the given dtype) whatever the caller had.
"""

from __future__ import annotations

import numpy as np


def writable(array, dtype=float) -> np.ndarray:
    """``array`` as a C-contiguous writable array of ``dtype`` (a copy only when needed)."""
    out = np.ascontiguousarray(array, dtype=dtype)
    return out if out.flags.writeable else out.copy()
