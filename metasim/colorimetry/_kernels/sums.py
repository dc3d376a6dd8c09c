"""Compiled sums behind :mod:`metasim.colorimetry.integration`: wavelength sums with a fixed order
per element, and drive → XYZ per observer.

Each element of :func:`products` is its own reduction loop, whose split into vector lanes depends
only on the grid length; :func:`xyz_of_drives` sums the primaries of one observer in order from
the display black. Neither depends on the shapes around an element, so results are reproducible
across batch and chunk sizes.
"""

from __future__ import annotations

import numba
import numpy as np

from metasim._threads import run_in_parts
from metasim.colorimetry._kernels.simd import wide_vectors
from metasim.colorimetry._kernels.types import writable

_FAST = {"contract"}  # fused multiply-add only
_SUM = {"contract", "reassoc"}  # the wavelength sum may be split into vector lanes


@numba.njit(cache=True, error_model="numpy", fastmath=_SUM)
def _dot(ai, bj):
    # one reduction loop per element: LLVM splits it into vector lanes the same way for every
    # call (the split depends only on the grid length), never on the shapes around it
    total = 0.0
    for w in range(ai.shape[0]):
        total += ai[w] * bj[w]
    return total


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _products(a, b, out, start, stop):
    """Rows start:stop of out = a @ b.T, each element by :func:`_dot`."""
    wide_vectors()
    for i in range(start, stop):
        ai = a[i]
        for j in range(b.shape[0]):
            out[i, j] = _dot(ai, b[j])


_PAD = 16  # vector loops run on whole multiples of this many stimuli (no scalar remainder)


@numba.njit(cache=True, error_model="numpy", fastmath=_FAST)
def xyz_of_drives(drive_t, g, matrices, offset, o, out, first):
    """out[first + k, s] = offset[g, o, k] + Σ_p drive_t[g, p, s]·matrices[g, o, k, p], p in order,
    for every (padded) column s of drive_t (G, N, S_padded): one observer's XYZ of all stimuli as
    three columns. The one place drives become XYZ, so every caller gets the same values."""
    wide_vectors()
    n, width = drive_t.shape[1], drive_t.shape[2]
    for k in range(3):
        row = out[first + k]
        base = offset[g, o, k]
        for s in range(width):
            row[s] = base
        for p in range(n):
            weight = matrices[g, o, k, p]
            for s in range(width):
                row[s] += drive_t[g, p, s] * weight


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _apply(drive_t, matrices, offset, out, start, stop):
    """out[g, o, s, k] from :func:`xyz_of_drives` for the (group, observer) tasks start:stop."""
    observers = matrices.shape[1]
    width = drive_t.shape[2]
    stimuli = out.shape[2]
    for task in range(start, stop):
        g = task // observers
        o = task % observers
        acc = np.empty((3, width))
        xyz_of_drives(drive_t, g, matrices, offset, o, acc, np.int64(0))  # the int64 version the fused pass uses
        for s in range(stimuli):
            for k in range(3):
                out[g, o, s, k] = acc[k, s]


def products(a: np.ndarray, b: np.ndarray, out: np.ndarray) -> None:
    """out[i, j] = Σ_w a[i, w]·b[j, w] for float a (M, W), b (K, W); rows of a on the kernel threads
    from 2048 elements."""
    run_in_parts(_products, a.shape[0], writable(a), writable(b), out,
                 min_part=a.shape[0] if out.size < 2048 else 1)


def padded_drives(drive: np.ndarray) -> np.ndarray:
    """Drives (G, S, N) as (G, N, S_padded) columns, zero beyond S (the layout of :func:`xyz_of_drives`)."""
    drive = np.asarray(drive, dtype=float)
    groups, stimuli, n = drive.shape
    drive_t = np.zeros((groups, n, (stimuli + _PAD - 1) // _PAD * _PAD))
    drive_t[:, :, :stimuli] = np.swapaxes(drive, 1, 2)
    return drive_t


def apply(drive_t: np.ndarray, matrices: np.ndarray, offset: np.ndarray, out: np.ndarray) -> None:
    """out (G, O, S, 3) from the padded drives (G, N, S_padded), matrices (G, O, 3, N) and offset (G, O, 3)."""
    run_in_parts(_apply, matrices.shape[0] * matrices.shape[1], writable(drive_t), writable(matrices),
                 writable(offset), out)


#: Argument types of the kernels as the entry points above call them (compiled ahead of need by
#: :mod:`metasim._warmup`; ``tests/test_kernels.py`` checks a study calls exactly these).
SIGNATURES = {
    "_products": ("float64[:, ::1]", "float64[:, ::1]", "float64[:, ::1]", "int64", "int64"),
    "_apply": ("float64[:, :, ::1]", "float64[:, :, :, ::1]", "float64[:, :, ::1]", "float64[:, :, :, ::1]",
               "int64", "int64"),
}
