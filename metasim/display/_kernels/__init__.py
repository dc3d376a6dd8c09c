"""Compiled kernels of the display layer, fenced off from the model modules.

``qp``    box QP and equality-constrained box QP, row by row (entry points box_qp_rows,
          equality_qp_rows; used by :mod:`metasim.display.solvers`)
``clip``  Gauss-Newton CIELAB clipping of out-of-gamut colours (entry point clip_rows; used by
          :mod:`metasim.display.drive`)

Entry points take C-contiguous numpy arrays and write into arrays the caller allocates.
"""
