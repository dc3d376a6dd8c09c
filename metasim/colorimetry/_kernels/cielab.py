"""Compiled CIELAB (the kernel behind :mod:`metasim.colorimetry.cielab`), CIE 15:2004 §8.2.1.

The cube root is :func:`~metasim.colorimetry._kernels.series.cbrt_folded` (no libm, no
division), so the column loop :func:`lab_columns` vectorises. Every span of rows goes through
padded columns (full vectors only), so a colour's CIELAB does not depend on the array it came in.
"""

from __future__ import annotations

import numba
import numpy as np

from metasim._threads import run_in_parts
from metasim.colorimetry._kernels.series import cbrt_folded
from metasim.colorimetry._kernels.simd import wide_vectors as _wide_vectors
from metasim.colorimetry._kernels.types import writable
from metasim.colorimetry.constants import CIELAB_EPSILON as _EPSILON
from metasim.colorimetry.constants import CIELAB_KAPPA as _KAPPA

_FAST = {"contract", "arcp", "nsz"}


@numba.njit(cache=True, inline="always", error_model="numpy", fastmath=_FAST)
def _f_lab(t):
    return cbrt_folded(max(t, _EPSILON)) if t > _EPSILON else (_KAPPA * t + 16.0) / 116.0


@numba.njit(cache=True, error_model="numpy", fastmath=_FAST)
def lab_columns(x, y, z, wx, wy, wz, out_l, out_a, out_b):
    """L*, a*, b* columns of the X, Y, Z columns against the white (wx, wy, wz): the vector loop."""
    _wide_vectors()
    for s in range(x.shape[0]):
        fx = _f_lab(x[s] / wx)
        fy = _f_lab(y[s] / wy)
        fz = _f_lab(z[s] / wz)
        out_l[s] = 116.0 * fy - 16.0
        out_a[s] = 500.0 * (fx - fy)
        out_b[s] = 200.0 * (fy - fz)


@numba.njit(cache=True, inline="always", error_model="numpy")
def _lab_span(xyz, start, stop, wx, wy, wz, out):
    """CIELAB of the rows xyz[start:stop] (X, Y, Z) into out[start:stop], through padded columns."""
    m = stop - start
    width = (m + 15) // 16 * 16  # full vectors only: results do not depend on the span length
    cols = np.ones((6, width))
    for s in range(m):
        cols[0, s] = xyz[start + s, 0]
        cols[1, s] = xyz[start + s, 1]
        cols[2, s] = xyz[start + s, 2]
    lab_columns(cols[0], cols[1], cols[2], wx, wy, wz, cols[3], cols[4], cols[5])
    for s in range(m):
        out[start + s, 0] = cols[3, s]
        out[start + s, 1] = cols[4, s]
        out[start + s, 2] = cols[5, s]


@numba.njit(cache=True, inline="always", error_model="numpy")
def _lab_of_row(xyz, white, out, r):
    _lab_span(xyz[r], 0, xyz.shape[1], white[r, 0], white[r, 1], white[r, 2], out[r])


_CHUNK = 1024


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _lab_chunks(flat, out, start, stop):
    """CIELAB of ratios flat (n, 3) (white 1, 1, 1), chunks start:stop of _CHUNK rows."""
    n = flat.shape[0]
    for c in range(start, stop):
        _lab_span(flat, c * _CHUNK, min(c * _CHUNK + _CHUNK, n), 1.0, 1.0, 1.0, out)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _lab_rows(xyz, white, out, start, stop):
    """CIELAB of xyz (rows, columns, 3) against one white per row (rows, 3), rows start:stop."""
    for r in range(start, stop):
        _lab_of_row(xyz, white, out, r)


def lab_of_ratios(flat: np.ndarray, out: np.ndarray) -> None:
    """CIELAB of ratios XYZ / XYZ_white (n, 3) into out (n, 3); on the kernel threads from 4096 rows."""
    chunks = (flat.shape[0] + _CHUNK - 1) // _CHUNK
    run_in_parts(_lab_chunks, chunks, writable(flat), out, min_part=1 if flat.shape[0] >= 4096 else chunks)


def lab_of_rows(xyz: np.ndarray, white: np.ndarray, out: np.ndarray) -> None:
    """CIELAB of xyz (rows, columns, 3) against one white per row (rows, 3) into out."""
    rows = xyz.shape[0]
    run_in_parts(_lab_rows, rows, writable(xyz), writable(white), out,
                 min_part=1 if rows * xyz.shape[1] >= 4096 else rows)


#: Argument types of the kernels as the entry points above call them (compiled ahead of need by
#: :mod:`metasim._warmup`; ``tests/test_kernels.py`` checks a study calls exactly these).
SIGNATURES = {
    "_lab_chunks": ("float64[:, ::1]", "float64[:, ::1]", "int64", "int64"),
    "_lab_rows": ("float64[:, :, ::1]", "float64[:, ::1]", "float64[:, :, ::1]", "int64", "int64"),
}
