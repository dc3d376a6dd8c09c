"""Compiled pass behind :mod:`metasim.colorimetry.fused`: per row (one observer of one design), XYZ
as columns → CIELAB of both sides → CIE 2000 → the additively corrected difference (the index).

Reuses the column loops of the CIELAB, CIE 2000 and drive-sum kernels, so every value equals what
the separate kernels give.
"""

from __future__ import annotations

import numba
import numpy as np

from metasim._threads import run_in_parts
from metasim.colorimetry._kernels.cielab import lab_columns
from metasim.colorimetry._kernels.ciede2000 import delta_e_2000_columns, delta_e_2000_scalar, padded
from metasim.colorimetry._kernels.sums import xyz_of_drives
from metasim.colorimetry._kernels.types import writable


@numba.njit(cache=True, error_model="numpy")
def mend(lab_1, lab_2, out, special):
    """The pairs the vector loop flagged (``special``) again on the scalar CIE 2000 path."""
    for j in range(out.shape[0]):
        if special[j]:
            out[j] = delta_e_2000_scalar(lab_1[0, j], lab_1[1, j], lab_1[2, j], lab_2[0, j], lab_2[1, j], lab_2[2, j], 1.0)


@numba.njit(cache=True, error_model="numpy")
def _pairs_of_columns(buf, c, wx, wy, wz, columns, r, lab_ref, lab_test, delta_e, index):
    """Row r of the outputs from buf (6, width): the reference and test XYZ as columns."""
    width = buf.shape[1]
    lab = np.empty((6, width))  # lab_ref, lab_test
    corrected = np.int64(0)  # not the constant 0: numba would compile the callee a second time for it
    for s in range(columns):
        corrected += (c[s, 0] != 0.0) | (c[s, 1] != 0.0) | (c[s, 2] != 0.0)
    for side in range(2):
        lab_columns(buf[3 * side], buf[3 * side + 1], buf[3 * side + 2], wx, wy, wz,
                 lab[3 * side], lab[3 * side + 1], lab[3 * side + 2])
    special = np.empty(width, dtype=np.bool_)
    values = np.empty(width)
    delta_e_2000_columns(lab[0], lab[1], lab[2], lab[3], lab[4], lab[5], 1.0, values, special)
    mend(lab[0:3], lab[3:6], values, special)
    for s in range(columns):
        delta_e[r, s] = values[s]
        index[r, s] = values[s]  # no correction: the index is the difference itself
        for k in range(3):
            lab_ref[r, s, k] = lab[k, s]
            lab_test[r, s, k] = lab[3 + k, s]
    if corrected == 0:
        return
    corrected_differences(buf[3:6], lab[0:3], c, columns, corrected, wx, wy, wz, index[r])


@numba.njit(cache=True, error_model="numpy")
def corrected_differences(xyz_test, lab_ref, c, columns, corrected, wx, wy, wz, out):
    """out[s] = CIE 2000 between the reference CIELAB (columns of lab_ref) and the test XYZ (columns
    of xyz_test) minus the correction c[s] (clipped at 0), for the ``corrected`` stimuli whose
    correction is not zero; the others are left as they are."""
    part = padded(corrected)
    corrected_differences_into(xyz_test, lab_ref, c, columns, corrected, wx, wy, wz, out,
                               np.empty(corrected, dtype=np.int64), np.ones((3, part)), np.ones((3, part)),
                               np.empty((3, part)), np.empty(part, dtype=np.bool_), np.empty(part))


@numba.njit(cache=True, error_model="numpy")
def corrected_differences_into(xyz_test, lab_ref, c, columns, corrected, wx, wy, wz, out, where, cbuf, cref, clab,
                               cspecial, cvalues):
    """:func:`corrected_differences` with its work arrays given (reused from row to row): where
    (corrected,), cbuf and cref (3, padded(corrected)) filled with 1 beyond ``corrected`` columns,
    clab (3, padded), cspecial and cvalues (padded,)."""
    # the stimuli with a correction, gathered into columns of their own
    j = 0
    for s in range(columns):
        if (c[s, 0] != 0.0) | (c[s, 1] != 0.0) | (c[s, 2] != 0.0):
            where[j] = s
            for k in range(3):
                cbuf[k, j] = max(xyz_test[k, s] - c[s, k], 0.0)
                cref[k, j] = lab_ref[k, s]
            j += 1
    lab_columns(cbuf[0], cbuf[1], cbuf[2], wx, wy, wz, clab[0], clab[1], clab[2])
    delta_e_2000_columns(cref[0], cref[1], cref[2], clab[0], clab[1], clab[2], 1.0, cvalues, cspecial)
    mend(cref, clab, cvalues, cspecial)
    for j in range(corrected):
        out[where[j]] = cvalues[j]


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _pair_rows(xyz_ref, xyz_test, white, correction, observers, lab_ref, lab_test, delta_e, index, start, stop):
    columns = xyz_test.shape[1]
    width = padded(columns)  # full vectors only: results do not depend on the row length
    for r in range(start, stop):
        buf = np.ones((6, width))  # xyz_ref, xyz_test (as columns)
        for s in range(columns):
            for k in range(3):
                buf[k, s] = xyz_ref[r, s, k]
                buf[3 + k, s] = xyz_test[r, s, k]
        _pairs_of_columns(buf, correction[r // observers], white[r, 0], white[r, 1], white[r, 2], columns, r,
                          lab_ref, lab_test, delta_e, index)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def _pair_rows_driven(ref_t, ref_matrices, ref_black, test_t, test_matrices, test_black, white, correction,
                      xyz_ref, xyz_test, lab_ref, lab_test, delta_e, index, start, stop):
    observers = test_matrices.shape[1]
    columns = xyz_test.shape[2]
    width = test_t.shape[2]
    for r in range(start, stop):
        g = r // observers
        o = r % observers
        buf = np.empty((6, width))
        # np.int64(...), not plain constants: numba compiles a callee once per constant value passed
        xyz_of_drives(ref_t, np.int64(0), ref_matrices, ref_black, o, buf, np.int64(0))
        xyz_of_drives(test_t, g, test_matrices, test_black, o, buf, np.int64(3))
        for s in range(columns):
            for k in range(3):
                xyz_test[g, o, s, k] = buf[3 + k, s]
        if g == 0:
            for s in range(columns):
                for k in range(3):
                    xyz_ref[o, s, k] = buf[k, s]
        _pairs_of_columns(buf, correction[g], white[r, 0], white[r, 1], white[r, 2], columns, r,
                          lab_ref, lab_test, delta_e, index)


def pair_rows(xyz_ref, xyz_test, white, correction, observers, lab_ref, lab_test, delta_e, index) -> None:
    """Every row (observer of a group) of :func:`metasim.colorimetry.fused.pair_differences`, rows
    on the kernel threads: inputs xyz_ref, xyz_test (rows, S, 3), white (rows, 3), correction
    (groups, S, 3); outputs lab_ref, lab_test (rows, S, 3), delta_e, index (rows, S)."""
    run_in_parts(_pair_rows, xyz_test.shape[0], writable(xyz_ref), writable(xyz_test), writable(white),
                 writable(correction), int(observers), lab_ref, lab_test, delta_e, index)


def pair_rows_driven(ref_t, ref_matrices, ref_black, test_t, test_matrices, test_black, white, correction,
                     xyz_ref, xyz_test, lab_ref, lab_test, delta_e, index) -> None:
    """Every row of :func:`metasim.colorimetry.fused.driven_pair_differences` (one observer of one
    design), rows on the kernel threads."""
    inputs = [writable(a) for a in (ref_t, ref_matrices, ref_black, test_t, test_matrices, test_black, white,
                                    correction)]
    run_in_parts(_pair_rows_driven, test_matrices.shape[0] * test_matrices.shape[1], *inputs,
                 xyz_ref, xyz_test, lab_ref, lab_test, delta_e, index)


#: Argument types of the kernels as the entry points above call them (compiled ahead of need by
#: :mod:`metasim._warmup`; ``tests/test_kernels.py`` checks a study calls exactly these).
SIGNATURES = {
    "_pair_rows": ("float64[:, :, ::1]", "float64[:, :, ::1]", "float64[:, ::1]", "float64[:, :, ::1]",
                   "int64", "float64[:, :, ::1]", "float64[:, :, ::1]", "float64[:, ::1]", "float64[:, ::1]",
                   "int64", "int64"),
    "_pair_rows_driven": ("float64[:, :, ::1]", "float64[:, :, :, ::1]", "float64[:, :, ::1]",
                          "float64[:, :, ::1]", "float64[:, :, :, ::1]", "float64[:, :, ::1]",
                          "float64[:, ::1]", "float64[:, :, ::1]", "float64[:, :, ::1]",
                          "float64[:, :, :, ::1]", "float64[:, :, ::1]", "float64[:, :, ::1]",
                          "float64[:, ::1]", "float64[:, ::1]", "int64", "int64"),
}
