"""Compiled pass behind :mod:`metasim.sweep.evaluate`: every design of a block from its drives and
observer matrices straight to its summaries, the pairs never leaving the worker's scratch memory.

Per design, per observer: the test XYZ of every stimulus from the drives
(:func:`~metasim.colorimetry._kernels.sums.xyz_of_drives`), CIELAB against the observer's adapted
white, CIE 2000 against the reference CIELAB (given, or made from the reference XYZ against the
same white), the metamerism index where the design carries a correction — the column loops of
:mod:`metasim.colorimetry._kernels.fused`, so every difference equals a mismatch call's. Then the
design's statistics over its observer × stimulus pairs with the selection and numpy-order sums of
:mod:`metasim.statistics._kernels.order`, the statistics layer's compiled summary (numpy's mean,
linear quantiles and maximum, bit for bit).
Designs run in parallel; the GIL is released.
"""

from __future__ import annotations

import math

import numba
import numpy as np

from metasim.colorimetry._kernels.cielab import lab_columns
from metasim.colorimetry._kernels.ciede2000 import delta_e_2000_columns, padded
from metasim.colorimetry._kernels.fused import corrected_differences_into, mend
from metasim.colorimetry._kernels.sums import xyz_of_drives
from metasim.statistics._kernels.order import summarise, summarise_in_order

# flags per design
NOT_FINITE = 1  # a difference was NaN: the caller takes numpy's route for this design


@numba.njit(cache=True, error_model="numpy")
def _design(d, test_t, matrices, black, white, reference, reference_is_lab, correction, band_of, band_sizes,
            thresholds, per_stimulus, overall, overall_index, by_band, counts, by_stimulus, flags):
    observers = matrices.shape[1]
    stimuli = correction.shape[1]
    width = test_t.shape[2]
    pairs = observers * stimuli
    values_all = np.empty(pairs)
    c = correction[d]
    corrected = 0
    for s in range(stimuli):
        corrected += (c[s, 0] != 0.0) | (c[s, 1] != 0.0) | (c[s, 2] != 0.0)
    index_all = np.empty(pairs if corrected > 0 else 0)
    part = padded(corrected)  # work arrays of the corrected stimuli, reused from observer to observer
    where, cbuf, cref = np.empty(corrected, dtype=np.int64), np.ones((3, part)), np.ones((3, part))
    clab, cspecial, cvalues = np.empty((3, part)), np.empty(part, dtype=np.bool_), np.empty(part)
    buf = np.empty((3, width))
    lab = np.empty((3, width))
    lab_r = np.empty((3, width))
    values = np.empty(width)
    special = np.empty(width, dtype=np.bool_)
    n_t = thresholds.shape[0]
    for t in range(n_t):
        for s in range(stimuli):
            counts[d, t, s] = 0
    finite = True
    for o in range(observers):
        r = d * observers + o
        wx, wy, wz = white[r, 0], white[r, 1], white[r, 2]
        xyz_of_drives(test_t, d, matrices, black, o, buf, 0)
        lab_columns(buf[0], buf[1], buf[2], wx, wy, wz, lab[0], lab[1], lab[2])
        if reference_is_lab:
            ref = reference[o]
        else:
            x = reference[o]
            lab_columns(x[0], x[1], x[2], wx, wy, wz, lab_r[0], lab_r[1], lab_r[2])
            ref = lab_r
        delta_e_2000_columns(ref[0], ref[1], ref[2], lab[0], lab[1], lab[2], 1.0, values, special)
        mend(ref, lab, values, special)
        row = values_all[o * stimuli:(o + 1) * stimuli]
        for s in range(stimuli):
            v = values[s]
            row[s] = v
            finite &= not math.isnan(v)
            for t in range(n_t):
                counts[d, t, s] += v > thresholds[t]
        if corrected > 0:
            index_row = index_all[o * stimuli:(o + 1) * stimuli]
            index_row[:] = row
            corrected_differences_into(buf, ref, c, stimuli, corrected, wx, wy, wz, index_row, where, cbuf, cref,
                                       clab, cspecial, cvalues)
            for s in range(stimuli):
                finite &= not math.isnan(index_row[s])
    if not finite:
        flags[d] |= NOT_FINITE
        return
    summarise(values_all, 0, pairs, overall[d])
    if corrected > 0:
        summarise(index_all, 0, pairs, overall_index[d])
    else:  # no correction: the index is the difference itself
        overall_index[d, :] = overall[d]
    for g in range(band_sizes.shape[0]):
        if band_sizes[g] == 0:
            by_band[d, :, g] = np.nan
            continue
        members = np.empty(band_sizes[g] * stimuli)
        k = 0
        for o in range(observers):
            if band_of[o] == g:
                members[k:k + stimuli] = values_all[o * stimuli:(o + 1) * stimuli]
                k += stimuli
        summary = np.empty(4)
        summarise(members, 0, k, summary)
        by_band[d, :, g] = summary
    if per_stimulus:  # statistics over observers of each stimulus (the mean in numpy's order for that axis)
        column = np.empty(observers)
        summary = np.empty(4)
        for s in range(stimuli):
            for o in range(observers):
                column[o] = values_all[o * stimuli + s]
            summarise_in_order(column, 0, observers, summary)
            for k in range(4):
                by_stimulus[d, k, s] = summary[k]


@numba.njit(cache=True, parallel=True, nogil=True, error_model="numpy")
def design_statistics(test_t, matrices, black, white, reference, reference_is_lab, correction, band_of, band_sizes,
                      thresholds, per_stimulus, overall, overall_index, by_band, counts, by_stimulus, flags):
    """Every design's summaries (designs in parallel).

    test_t (D, N, S_padded) padded drives; matrices (D, O, 3, N) and black (D, O, 3) the test
    display's observer matrices; white (D·O, 3) each row's adapted white; reference (O, 3,
    S_padded): the reference CIELAB columns (``reference_is_lab``) or XYZ columns; correction
    (D, S, 3); band_of (O,) age band of each observer (−1: none), band_sizes (G,); thresholds (T,).
    Writes overall, overall_index (D, 4): mean, median, p95, max of the differences and of the
    index over all pairs; by_band (D, 4, G); counts (D, T, S) observers beyond each threshold;
    by_stimulus (D, 4, S) statistics over observers (if ``per_stimulus``); flags (D,).
    """
    for d in numba.prange(matrices.shape[0]):
        _design(d, test_t, matrices, black, white, reference, reference_is_lab, correction, band_of, band_sizes,
                thresholds, per_stimulus, overall, overall_index, by_band, counts, by_stimulus, flags)


@numba.njit(cache=True, nogil=True, error_model="numpy")
def reference_columns(xyz, white, lab, out):
    """out[o] (3, S_padded): the reference colours observer o sees, as columns: CIELAB against
    white[o] (``lab``) or the XYZ themselves; xyz (O, S, 3), columns beyond S padded with 1."""
    observers, stimuli = xyz.shape[0], xyz.shape[1]
    buf = np.ones((3, out.shape[2]))
    for o in range(observers):
        for s in range(stimuli):
            for k in range(3):
                buf[k, s] = xyz[o, s, k]
        if lab:
            lab_columns(buf[0], buf[1], buf[2], white[o, 0], white[o, 1], white[o, 2], out[o, 0], out[o, 1], out[o, 2])
        else:
            out[o] = buf


#: Argument types of the kernels as :mod:`metasim.sweep.evaluate` calls them (compiled ahead of need
#: by :mod:`metasim._warmup` in the test suite's warm-up).
SIGNATURES = {
    "design_statistics": ("float64[:, :, ::1]", "float64[:, :, :, ::1]", "float64[:, :, ::1]", "float64[:, ::1]",
                          "float64[:, :, ::1]", "boolean", "float64[:, :, ::1]", "int64[::1]", "int64[::1]",
                          "float64[::1]", "boolean", "float64[:, ::1]", "float64[:, ::1]", "float64[:, :, ::1]",
                          "int64[:, :, ::1]", "float64[:, :, ::1]", "int64[::1]"),
    "reference_columns": ("float64[:, :, ::1]", "float64[:, ::1]", "boolean", "float64[:, :, ::1]"),
}
