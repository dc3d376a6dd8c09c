"""Compiled kernels of the statistics layer, fenced off from the model modules.

``pooled``  pooled quantiles of the full sample and of every resample of the observers (histogram
            pass, window gathering, walks), and resample counts from raw random words (entry
            points first_pass, gather_windows, walk, resample_counts; used by
            :mod:`metasim.statistics.resampling`)
``rowstats`` median, 95th percentile, maximum and shares beyond thresholds of sorted rows (entry
            point sorted_rows; used by :mod:`metasim.statistics.sorted_rows`)
``order``   mean (in numpy's pairwise order), linear quantiles and maximum of unsorted rows by
            bucket selection, no sort (entry points summarise_rows, summarise, summarise_in_order,
            numpy_sum; used by
            :mod:`metasim.statistics.selection` and, per design, by the sweep's compiled pass
            :mod:`metasim.sweep._kernels.designs`)
"""
