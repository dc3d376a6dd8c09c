"""One compiled pass from both sides' XYZ to CIELAB, CIE 2000 and the metamerism index.

Population studies evaluate the same chain for every observer × stimulus pair: CIELAB of the
reference and of the test rendering against the observer's white, their CIE 2000 difference, and the
CIE 2000 difference after an additive XYZ correction (the metamerism index). Done as separate numpy
passes this is memory-bound; here each observer's row of stimuli is transposed once into columns
and the vectorised CIELAB and CIE 2000 loops behind :mod:`metasim.colorimetry.cielab` and
:mod:`metasim.colorimetry.difference` run on them (:mod:`metasim.colorimetry._kernels.fused`). Same
formulas, same results.

References
----------
CIE 15:2004 §8.2.1 (CIELAB); Sharma, Wu & Dalal (2005) (CIE 2000); ISO 18314-4 (additive correction).
"""

from __future__ import annotations

import numpy as np

from metasim.colorimetry._kernels.fused import pair_rows, pair_rows_driven
from metasim.colorimetry._kernels.sums import padded_drives


def driven_pair_differences(ref_drive, ref_matrices, ref_black, test_drive, test_matrices, test_black, white,
                            correction):
    """:func:`pair_differences` of two displays given by drives and observer matrices, with both
    sides' XYZ computed in the same pass (:func:`metasim.colorimetry._kernels.sums.xyz_of_drives`,
    the values :func:`~metasim.colorimetry.integration.apply_matrices` gives).

    ref_drive (1, S, Nr), ref_matrices (1, O, 3, Nr), ref_black (1, O, 3); test_drive (G, S, N),
    test_matrices (G, O, 3, N), test_black (G, O, 3); white (G·O, 3); correction (G, S, 3).
    Returns xyz_ref (O, S, 3), xyz_test (G, O, S, 3), lab_ref, lab_test (G·O, S, 3), delta_e,
    index (G·O, S).
    """
    reference_drives, test_drives = padded_drives(ref_drive), padded_drives(test_drive)
    groups, observers = test_matrices.shape[0], test_matrices.shape[1]
    stimuli = np.shape(test_drive)[1]
    xyz_ref = np.empty((observers, stimuli, 3))
    xyz_test = np.empty((groups, observers, stimuli, 3))
    rows = groups * observers
    lab_ref, lab_test = np.empty((rows, stimuli, 3)), np.empty((rows, stimuli, 3))
    delta_e, index = np.empty((rows, stimuli)), np.empty((rows, stimuli))
    as_float = [np.ascontiguousarray(a, dtype=float) for a in (ref_matrices, ref_black, test_matrices, test_black,
                                                                 white, correction)]
    pair_rows_driven(reference_drives, as_float[0], as_float[1], test_drives, as_float[2], as_float[3], as_float[4], as_float[5],
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
    pair_rows(xyz_ref, xyz_test, white, correction, rows // groups, lab_ref, lab_test, delta_e, index)
    return lab_ref, lab_test, delta_e, index


__all__ = ["driven_pair_differences", "pair_differences"]
