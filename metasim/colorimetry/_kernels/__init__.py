"""Compiled kernels of the colorimetry layer, fenced off from the model modules.

Everything here exists for speed or for bit-for-bit reproducibility, not for the colour science:
the models (:mod:`~metasim.colorimetry.cielab`, :mod:`~metasim.colorimetry.difference`,
:mod:`~metasim.colorimetry.integration`, :mod:`~metasim.colorimetry.fused`) state the published
method and call one entry point here. Modules:

``simd``       wide_vectors(): 512-bit vectors in one compiled function
``series``     arctangent, exponential, sine and cube root as branch-free series (vectorisable)
``cielab``     CIELAB column loop; entry points lab_of_ratios, lab_of_rows
``ciede2000``  CIE 2000 vector and scalar paths; entry point delta_e_2000_pairs
``sums``       wavelength sums and drive → XYZ in a fixed order; entry points products, apply
``fused``      XYZ → CIELAB → CIE 2000 → index per row; entry points pair_rows, pair_rows_driven

Entry points take C-contiguous float64 numpy arrays and write into ``out`` arrays the caller
allocates; checks, labels and shapes belong to the callers. Names without an underscore may be
used by other kernel modules (compiled helpers are inlined across modules).
"""
