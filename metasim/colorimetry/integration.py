"""Sums over the wavelength grid, with a fixed summation order for every element.

Every tristimulus value in metasim is a sum over wavelength of a spectrum times an observer
function (CIE 15:2004 §7.1, X = Σ_λ S(λ) x̄(λ) Δλ), and every colour a display shows is its black
plus the drives times the primaries' XYZ (channel additivity). Done as a BLAS matrix product, the
rounding of one element depends on the shapes of the whole product (optimised BLAS kernels treat
edge tiles differently), so the same display seen by the same observer could differ in the last
bits between a single study and a sweep chunk of another size. Here each element is summed in its
own compiled loop (:mod:`metasim.colorimetry._kernels.sums`) whose order depends only on the
grid length (or the number of primaries), whatever else is in the product, so results are
reproducible across batch and chunk sizes. Rows run on the kernel threads for large inputs; as fast as BLAS
for these thin products.
"""

from __future__ import annotations

import numpy as np

from metasim.colorimetry._kernels import sums
from metasim.colorimetry._kernels.sums import padded_drives


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
        sums.products(a, b, out)
        return out
    out_t = np.empty((b.shape[0], a.shape[0]))
    sums.products(b, a, out_t)
    return out_t.T.copy()


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
        sums.apply(drive_t, matrices, offset, out)
    return out


__all__ = ["apply_matrices", "spectral_products"]
