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
A serial loop over a range of designs that releases the GIL: the entry point
(:func:`metasim.sweep.evaluate.design_statistics`) runs ranges on the kernel threads.
"""

from __future__ import annotations

import numba
import numpy as np

from metasim.colorimetry._kernels.cielab import lab_columns
from metasim.colorimetry._kernels.ciede2000 import delta_e_2000_columns, padded
from metasim.colorimetry._kernels.fused import mend
from metasim.colorimetry._kernels.sums import xyz_of_drives
from metasim.statistics._kernels.order import numpy_sum, summarise_groups, summarise_in_order

# flags per design
NOT_FINITE = 1  # a difference was NaN: the caller takes numpy's route for this design


@numba.njit(cache=True, error_model="numpy")
def _design(d, test_t, matrices, black, white, reference, reference_is_lab, correction, band_of, band_sizes,
            thresholds, per_stimulus, overall, overall_index, by_band, counts, by_stimulus, differences, flags):
    observers = matrices.shape[1]
    stimuli = correction.shape[1]
    width = test_t.shape[2]
    pairs = observers * stimuli
    keep = differences.shape[0] > 0
    values_all = differences[d].reshape(pairs) if keep else np.empty(pairs)
    c = correction[d]
    corrected = 0
    for s in range(stimuli):
        corrected += (c[s, 0] != 0.0) | (c[s, 1] != 0.0) | (c[s, 2] != 0.0)
    where = np.empty(corrected, dtype=np.int64)
    j = 0
    for s in range(stimuli):
        if (c[s, 0] != 0.0) | (c[s, 1] != 0.0) | (c[s, 2] != 0.0):
            where[j] = s
            j += 1
    index_all = np.empty(pairs if corrected > 0 else 0)
    # the corrected stimuli of one observer as columns (CIELAB against that observer's white), then
    # those of every observer side by side, for one CIE 2000 column loop per design
    part = padded(corrected)
    cbuf, clab = np.ones((3, part)), np.empty((3, part))
    span = padded(observers * corrected)
    batch_ref, batch_lab = np.ones((3, span)), np.ones((3, span))
    batch_special, batch_values = np.empty(span, dtype=np.bool_), np.empty(span)
    buf = np.empty((3, width))
    lab = np.empty((3, width))
    lab_r = np.empty((3, width))
    values = np.empty(width)
    special = np.empty(width, dtype=np.bool_)
    n_t = thresholds.shape[0]
    for t in range(n_t):
        for s in range(stimuli):
            counts[d, t, s] = 0
    not_finite = 0
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
            row[s] = values[s]
        for s in range(stimuli):
            not_finite += values[s] != values[s]
        for t in range(n_t):  # observers beyond each threshold, stimulus by stimulus
            limit = thresholds[t]
            line = counts[d, t]
            for s in range(stimuli):
                line[s] += values[s] > limit
        if corrected > 0:  # the corrected colours (test XYZ minus the correction, clipped at 0) as CIELAB
            for j in range(corrected):
                s = where[j]
                for k in range(3):
                    cbuf[k, j] = max(buf[k, s] - c[s, k], 0.0)
            lab_columns(cbuf[0], cbuf[1], cbuf[2], wx, wy, wz, clab[0], clab[1], clab[2])
            for j in range(corrected):
                for k in range(3):
                    batch_ref[k, o * corrected + j] = ref[k, where[j]]
                    batch_lab[k, o * corrected + j] = clab[k, j]
    if corrected > 0:  # the metamerism index: CIE 2000 of the corrected colours, every observer in one loop
        delta_e_2000_columns(batch_ref[0], batch_ref[1], batch_ref[2], batch_lab[0], batch_lab[1], batch_lab[2], 1.0,
                             batch_values, batch_special)
        mend(batch_ref, batch_lab, batch_values, batch_special)
        for i in range(pairs):
            index_all[i] = values_all[i]
        for o in range(observers):
            for j in range(corrected):
                v = batch_values[o * corrected + j]
                index_all[o * stimuli + where[j]] = v
                not_finite += v != v
    if not_finite > 0:
        flags[d] |= NOT_FINITE
        return
    # median, p95 and max of all pairs, of each age band's pairs and of the index in one selection
    positions = np.empty(observers * corrected, dtype=np.int64)
    for o in range(observers):
        for j in range(corrected):
            positions[o * corrected + j] = o * stimuli + where[j]
    summarise_groups(values_all, band_of, stimuli, positions, batch_values[:observers * corrected],
                     band_sizes.shape[0] > 0, overall[d], by_band[d], overall_index[d])
    overall[d, 0] = numpy_sum(values_all, 0, pairs) / pairs  # the means in numpy's order
    if corrected > 0:
        overall_index[d, 0] = numpy_sum(index_all, 0, pairs) / pairs
    else:  # no correction: the index is the difference itself
        overall_index[d, :] = overall[d]
    members = np.empty(pairs)
    for g in range(band_sizes.shape[0]):
        if band_sizes[g] == 0:
            by_band[d, :, g] = np.nan
            continue
        k = 0
        for o in range(observers):
            if band_of[o] == g:
                members[k:k + stimuli] = values_all[o * stimuli:(o + 1) * stimuli]
                k += stimuli
        by_band[d, 0, g] = numpy_sum(members, 0, k) / k
    if per_stimulus:  # statistics over observers of each stimulus (the mean in numpy's order for that axis)
        column = np.empty(observers)
        summary = np.empty(4)
        for s in range(stimuli):
            for o in range(observers):
                column[o] = values_all[o * stimuli + s]
            summarise_in_order(column, 0, observers, summary)
            for k in range(4):
                by_stimulus[d, k, s] = summary[k]


@numba.njit(cache=True, nogil=True, error_model="numpy")
def design_statistics(test_t, matrices, black, white, reference, reference_is_lab, correction, band_of, band_sizes,
                      thresholds, per_stimulus, overall, overall_index, by_band, counts, by_stimulus, differences, flags,
                      start, stop):
    """The summaries of designs start:stop (a serial loop that releases the GIL; callers split the
    designs over the kernel threads with :func:`metasim._threads.run_in_parts`).

    test_t (D, N, S_padded) padded drives; matrices (D, O, 3, N) and black (D, O, 3) the test
    display's observer matrices; white (D·O, 3) each row's adapted white; reference (O, 3,
    S_padded): the reference CIELAB columns (``reference_is_lab``) or XYZ columns; correction
    (D, S, 3); band_of (O,) age band of each observer (−1: none), band_sizes (G,); thresholds (T,).
    Writes overall, overall_index (D, 4): mean, median, p95, max of the differences and of the
    index over all pairs; by_band (D, 4, G); counts (D, T, S) observers beyond each threshold;
    by_stimulus (D, 4, S) statistics over observers (if ``per_stimulus``); differences (D, O, S)
    every pair's CIE 2000 difference (when its first dim is not empty: kept for intervals);
    flags (D,).
    """
    for d in range(start, stop):
        _design(d, test_t, matrices, black, white, reference, reference_is_lab, correction, band_of, band_sizes,
                thresholds, per_stimulus, overall, overall_index, by_band, counts, by_stimulus, differences, flags)


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
                          "int64[:, :, ::1]", "float64[:, :, ::1]", "float64[:, :, ::1]", "int64[::1]", "int64",
                          "int64"),
    "reference_columns": ("float64[:, :, ::1]", "float64[:, ::1]", "boolean", "float64[:, :, ::1]"),
}
