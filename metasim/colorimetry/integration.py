"""Sums over the wavelength grid, with a fixed summation order for every element.

Every tristimulus value in metasim is a sum over wavelength of a spectrum times an observer
function. Done as a BLAS matrix product, the rounding of one element depends on the shapes of the
whole product (optimised BLAS kernels treat edge tiles differently), so the same display seen by
the same observer could differ in the last bits between a single study and a sweep chunk of
another size. :func:`spectral_products` sums each element in its own compiled reduction loop,
whose order (vector lanes, then their combination) depends only on the grid length, whatever
else is in the product, so results are reproducible across batch and chunk sizes. It runs rows in
parallel for large inputs and is as fast as BLAS for these thin products.
"""

from __future__ import annotations

import numba
import numpy as np

from metasim.colorimetry._simd import wide_vectors

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


@numba.njit(cache=True, parallel=True, error_model="numpy")
def _products_parallel(a, b, out):
    wide_vectors()
    for i in numba.prange(a.shape[0]):
        ai = a[i]
        for j in range(b.shape[0]):
            out[i, j] = _dot(ai, b[j])


@numba.njit(cache=True, error_model="numpy")
def _products_serial(a, b, out):
    wide_vectors()
    for i in range(a.shape[0]):
        ai = a[i]
        for j in range(b.shape[0]):
            out[i, j] = _dot(ai, b[j])


def spectral_products(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """``a @ b.T`` for a (M, W) and b (K, W), each element summed over W in a fixed order.

    Equal to the matrix product up to rounding; unlike it, element (i, j) depends only on row i of
    ``a`` and row j of ``b``.
    """
    a = np.ascontiguousarray(a, dtype=float)
    b = np.ascontiguousarray(b, dtype=float)
    if a.ndim != 2 or b.ndim != 2 or a.shape[1] != b.shape[1]:
        raise ValueError(f"spectral_products needs (M, W) and (K, W) arrays, got {a.shape} and {b.shape}")
    out = np.empty((a.shape[0], b.shape[0]))
    if out.size == 0:
        return out
    # put the longer side on the parallel axis
    if a.shape[0] >= b.shape[0]:
        (_products_parallel if a.shape[0] * b.shape[0] >= 2048 else _products_serial)(a, b, out)
        return out
    out_t = np.empty((b.shape[0], a.shape[0]))
    (_products_parallel if out.size >= 2048 else _products_serial)(b, a, out_t)
    return out_t.T.copy()



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


@numba.njit(cache=True, parallel=True, error_model="numpy")
def _apply(drive_t, matrices, offset, out):
    """out[g, o, s, k] from :func:`xyz_of_drives`, every group and observer in parallel."""
    groups, observers = matrices.shape[0], matrices.shape[1]
    width = drive_t.shape[2]
    stimuli = out.shape[2]
    for task in numba.prange(groups * observers):
        g = task // observers
        o = task % observers
        acc = np.empty((3, width))
        xyz_of_drives(drive_t, g, matrices, offset, o, acc, 0)
        for s in range(stimuli):
            for k in range(3):
                out[g, o, s, k] = acc[k, s]


def padded_drives(drive: np.ndarray) -> np.ndarray:
    """Drives (G, S, N) as (G, N, S_padded) columns, zero beyond S (the layout of :func:`xyz_of_drives`)."""
    drive = np.asarray(drive, dtype=float)
    groups, stimuli, n = drive.shape
    drive_t = np.zeros((groups, n, (stimuli + _PAD - 1) // _PAD * _PAD))
    drive_t[:, :, :stimuli] = np.swapaxes(drive, 1, 2)
    return drive_t


def apply_matrices(drive: np.ndarray, matrices: np.ndarray, offset: np.ndarray) -> np.ndarray:
    """XYZ = offset + matrix · drive for every group, observer and stimulus.

    drive (G, S, N), matrices (G, O, 3, N), offset (G, O, 3) → (G, O, S, 3); each value is summed
    over the N primaries in order, starting from the offset (the display black), so it does not
    depend on how many groups, observers or stimuli are in the call.
    """
    drive_t = padded_drives(drive)
    matrices = np.ascontiguousarray(matrices, dtype=float)
    offset = np.ascontiguousarray(offset, dtype=float)
    out = np.empty((matrices.shape[0], matrices.shape[1], np.shape(drive)[1], 3))
    if out.size:
        _apply(drive_t, matrices, offset, out)
    return out


__all__ = ["apply_matrices", "padded_drives", "spectral_products", "xyz_of_drives"]
