"""Sums over the wavelength grid, with a fixed summation order for every element.

Every tristimulus value in metasim is a sum over wavelength of a spectrum times an observer
function. Done as a BLAS matrix product, the rounding of one element depends on the shapes of the
whole product (optimised BLAS kernels treat edge tiles differently), so the same display seen by
the same observer could differ in the last bits between a single study and a sweep chunk of
another size. :func:`spectral_products` sums each element in one fixed order — 32 interleaved
partial sums combined pairwise — whatever else is in the product, so results are reproducible
across batch and chunk sizes. It is compiled and runs rows in parallel for large inputs.
"""

from __future__ import annotations

import numba
import numpy as np

_LANES = 32
_FAST = {"contract"}  # fused multiply-add only: the summation order is exactly as written


@numba.njit(cache=True, inline="always", error_model="numpy", fastmath=_FAST)
def _dot(a, i, b, j, acc):
    n = a.shape[1]
    full = n // _LANES * _LANES
    for k in range(_LANES):
        acc[k] = 0.0
    for w0 in range(0, full, _LANES):
        for k in range(_LANES):
            acc[k] += a[i, w0 + k] * b[j, w0 + k]
    for w in range(full, n):
        acc[w - full] += a[i, w] * b[j, w]
    half = _LANES // 2
    while half >= 1:
        for k in range(half):
            acc[k] = acc[k] + acc[k + half]
        half //= 2
    return acc[0]


@numba.njit(cache=True, parallel=True, error_model="numpy", fastmath=_FAST)
def _products_parallel(a, b, out):
    for i in numba.prange(a.shape[0]):
        acc = np.empty(_LANES)
        for j in range(b.shape[0]):
            out[i, j] = _dot(a, i, b, j, acc)


@numba.njit(cache=True, error_model="numpy", fastmath=_FAST)
def _products_serial(a, b, out):
    acc = np.empty(_LANES)
    for i in range(a.shape[0]):
        for j in range(b.shape[0]):
            out[i, j] = _dot(a, i, b, j, acc)


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


__all__ = ["spectral_products"]
