"""Compiled kernels of the metamerism layer, fenced off from the model modules.

``rowstats``  median, 95th percentile, maximum and shares beyond thresholds of sorted rows (entry
              points sorted_rows, sorted_one; used by :mod:`metasim.metamerism._rowstats`)
"""
