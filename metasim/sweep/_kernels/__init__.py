"""Compiled kernels of the sweep layer, fenced off from the model modules.

``designs``  one pass per design from drives and observer matrices to the design's summaries
             (CIELAB, CIE 2000 and the metamerism index of every observer × stimulus pair, then
             their mean, median, 95th percentile and maximum overall and per age band, the counts
             beyond the thresholds and, if asked, the statistics per stimulus); entry point
             design_statistics, used by :mod:`metasim.sweep.evaluate`
``pareto``   non-dominated sorting of points in lexicographic order (entry point sorted_ranks, used
             by :func:`metasim.sweep.pareto.pareto_ranks`)
"""
