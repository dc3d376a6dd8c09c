"""One compiled pass from both sides' XYZ to CIELAB, CIE 2000 and the metamerism index.

Population studies evaluate the same chain for every observer × stimulus pair: CIELAB of the
reference and of the test rendering against the observer's white, their CIE 2000 difference, and the
CIE 2000 difference after an additive XYZ correction (the metamerism index). Done as separate numpy
passes this is memory-bound; here each observer's row of stimuli is transposed once into columns
and the vectorised CIELAB and CIE 2000 loops of :mod:`metasim.colorimetry.cielab` and
:mod:`metasim.colorimetry.difference` run on them. Same formulas, same results (to rounding).

References
----------
CIE 15:2004 §8.2.1 (CIELAB); Sharma, Wu & Dalal (2005) (CIE 2000); ISO 18314-4 (additive correction).
"""

from __future__ import annotations

import numba
import numpy as np

from metasim.colorimetry.cielab import _lab_row
from metasim.colorimetry.difference import _delta_e_2000_vector, _pair, padded
from metasim.colorimetry.integration import padded_drives, xyz_of_drives


@numba.njit(cache=True, error_model="numpy")
def _mend(lab_1, lab_2, out, special):
    for j in range(out.shape[0]):
        if special[j]:
            out[j] = _pair(lab_1[0, j], lab_1[1, j], lab_1[2, j], lab_2[0, j], lab_2[1, j], lab_2[2, j], 1.0)


@numba.njit(cache=True, error_model="numpy")
def _pairs_of_columns(buf, c, wx, wy, wz, columns, r, lab_ref, lab_test, delta_e, index):
    """Row r of the outputs from buf (6, width): the reference and test XYZ as columns."""
    width = buf.shape[1]
    lab = np.empty((6, width))  # lab_ref, lab_test
    corrected = 0
    for s in range(columns):
        corrected += (c[s, 0] != 0.0) | (c[s, 1] != 0.0) | (c[s, 2] != 0.0)
    for side in range(2):
        _lab_row(buf[3 * side], buf[3 * side + 1], buf[3 * side + 2], wx, wy, wz,
                 lab[3 * side], lab[3 * side + 1], lab[3 * side + 2])
    special = np.empty(width, dtype=np.bool_)
    values = np.empty(width)
    _delta_e_2000_vector(lab[0], lab[1], lab[2], lab[3], lab[4], lab[5], 1.0, values, special)
    _mend(lab[0:3], lab[3:6], values, special)
    for s in range(columns):
        delta_e[r, s] = values[s]
        index[r, s] = values[s]  # no correction: the index is the difference itself
        for k in range(3):
            lab_ref[r, s, k] = lab[k, s]
            lab_test[r, s, k] = lab[3 + k, s]
    if corrected == 0:
        return
    # the stimuli with a correction, gathered into columns of their own
    part = padded(corrected)
    where = np.empty(corrected, dtype=np.int64)
    cbuf = np.ones((3, part))
    cref = np.ones((3, part))
    clab = np.empty((3, part))
    j = 0
    for s in range(columns):
        if (c[s, 0] != 0.0) | (c[s, 1] != 0.0) | (c[s, 2] != 0.0):
            where[j] = s
            for k in range(3):
                cbuf[k, j] = max(buf[3 + k, s] - c[s, k], 0.0)
                cref[k, j] = lab[k, s]
            j += 1
    _lab_row(cbuf[0], cbuf[1], cbuf[2], wx, wy, wz, clab[0], clab[1], clab[2])
    cspecial = np.empty(part, dtype=np.bool_)
    cvalues = np.empty(part)
    _delta_e_2000_vector(cref[0], cref[1], cref[2], clab[0], clab[1], clab[2], 1.0, cvalues, cspecial)
    _mend(cref, clab, cvalues, cspecial)
    for j in range(corrected):
        index[r, where[j]] = cvalues[j]


@numba.njit(cache=True, parallel=True, error_model="numpy")
def _pair_rows(xyz_ref, xyz_test, white, correction, observers, lab_ref, lab_test, delta_e, index):
    rows, columns = xyz_test.shape[0], xyz_test.shape[1]
    width = padded(columns)  # full vectors only: results do not depend on the row length
    for r in numba.prange(rows):
        buf = np.ones((6, width))  # xyz_ref, xyz_test (as columns)
        for s in range(columns):
            for k in range(3):
                buf[k, s] = xyz_ref[r, s, k]
                buf[3 + k, s] = xyz_test[r, s, k]
        _pairs_of_columns(buf, correction[r // observers], white[r, 0], white[r, 1], white[r, 2], columns, r,
                          lab_ref, lab_test, delta_e, index)


@numba.njit(cache=True, parallel=True, error_model="numpy")
def _pair_rows_driven(ref_t, ref_matrices, ref_black, test_t, test_matrices, test_black, white, correction,
                      xyz_ref, xyz_test, lab_ref, lab_test, delta_e, index):
    groups, observers = test_matrices.shape[0], test_matrices.shape[1]
    columns = xyz_test.shape[2]
    width = test_t.shape[2]
    for r in numba.prange(groups * observers):
        g = r // observers
        o = r % observers
        buf = np.empty((6, width))
        xyz_of_drives(ref_t, 0, ref_matrices, ref_black, o, buf, 0)
        xyz_of_drives(test_t, g, test_matrices, test_black, o, buf, 3)
        for s in range(columns):
            for k in range(3):
                xyz_test[g, o, s, k] = buf[3 + k, s]
        if g == 0:
            for s in range(columns):
                for k in range(3):
                    xyz_ref[o, s, k] = buf[k, s]
        _pairs_of_columns(buf, correction[g], white[r, 0], white[r, 1], white[r, 2], columns, r,
                          lab_ref, lab_test, delta_e, index)


def driven_pair_differences(ref_drive, ref_matrices, ref_black, test_drive, test_matrices, test_black, white,
                            correction):
    """:func:`pair_differences` of two displays given by drives and observer matrices, with both
    sides' XYZ computed in the same pass (:func:`metasim.colorimetry.integration.xyz_of_drives`,
    the values :func:`~metasim.colorimetry.integration.apply_matrices` gives).

    ref_drive (1, S, Nr), ref_matrices (1, O, 3, Nr), ref_black (1, O, 3); test_drive (G, S, N),
    test_matrices (G, O, 3, N), test_black (G, O, 3); white (G·O, 3); correction (G, S, 3).
    Returns xyz_ref (O, S, 3), xyz_test (G, O, S, 3), lab_ref, lab_test (G·O, S, 3), delta_e,
    index (G·O, S).
    """
    ref_t, test_t = padded_drives(ref_drive), padded_drives(test_drive)
    groups, observers = test_matrices.shape[0], test_matrices.shape[1]
    stimuli = np.shape(test_drive)[1]
    xyz_ref = np.empty((observers, stimuli, 3))
    xyz_test = np.empty((groups, observers, stimuli, 3))
    rows = groups * observers
    lab_ref, lab_test = np.empty((rows, stimuli, 3)), np.empty((rows, stimuli, 3))
    delta_e, index = np.empty((rows, stimuli)), np.empty((rows, stimuli))
    as_float = [np.ascontiguousarray(a, dtype=float) for a in (ref_matrices, ref_black, test_matrices, test_black,
                                                                 white, correction)]
    _pair_rows_driven(ref_t, as_float[0], as_float[1], test_t, as_float[2], as_float[3], as_float[4], as_float[5],
                      xyz_ref, xyz_test, lab_ref, lab_test, delta_e, index)
    return xyz_ref, xyz_test, lab_ref, lab_test, delta_e, index


def pair_differences(xyz_ref: np.ndarray, xyz_test: np.ndarray, white: np.ndarray, correction: np.ndarray):
    """CIELAB of both sides, their CIE 2000 difference and the additively corrected difference.

    Parameters
    ----------
    xyz_ref, xyz_test : (rows, stimuli, 3)
        XYZ of the reference and test renderings; a row is one observer (of one design).
    white : (rows, 3)
        The white each row's CIELAB is computed against.
    correction : (groups, stimuli, 3)
        XYZ subtracted from the test side before the index difference (sample minus standard under
        the reference condition); row r uses group ``r // (rows / groups)``. Negative corrected XYZ
        are clipped to 0. Where a correction is exactly zero the index is the difference itself
        (the same computation), and only the corrected stimuli go through CIELAB and CIE 2000 again.

    Returns
    -------
    lab_ref, lab_test : (rows, stimuli, 3); delta_e, index : (rows, stimuli)
    """
    xyz_ref = np.ascontiguousarray(xyz_ref, dtype=float)
    xyz_test = np.ascontiguousarray(xyz_test, dtype=float)
    white = np.ascontiguousarray(white, dtype=float)
    correction = np.ascontiguousarray(correction, dtype=float)
    rows, columns = xyz_test.shape[:2]
    groups = correction.shape[0]
    lab_ref = np.empty((rows, columns, 3))
    lab_test = np.empty((rows, columns, 3))
    delta_e = np.empty((rows, columns))
    index = np.empty((rows, columns))
    _pair_rows(xyz_ref, xyz_test, white, correction, rows // groups, lab_ref, lab_test, delta_e, index)
    return lab_ref, lab_test, delta_e, index


__all__ = ["driven_pair_differences", "pair_differences"]
