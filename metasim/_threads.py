"""Keep BLAS single-threaded while metasim's own parallel kernels run.

metasim's hot loops are compiled with numba and run on all cores. OpenBLAS (numpy's and scipy's
BLAS) keeps its worker threads spinning for a while after every multi-threaded matrix product, so a
parallel kernel that follows a large ``@`` competes with idle-spinning BLAS threads for the same
cores; measured here, that made a population study 1.4× slower. The matrix products metasim does
are thin (spectra × a few primaries), where BLAS threads gain nothing, so the public entry points
that mix the two run their work inside :func:`single_threaded_blas`. The previous BLAS thread
count is restored on exit; nothing is changed globally.
"""

from __future__ import annotations

import contextlib
import functools
import threading

from threadpoolctl import ThreadpoolController

from metasim import _warmup


_lock = threading.Lock()
_depth = 0
_restore = None


@functools.lru_cache(maxsize=1)
def _controller() -> ThreadpoolController:
    # created on first use, after numpy and scipy have loaded their BLAS libraries
    return ThreadpoolController()


@contextlib.contextmanager
def single_threaded_blas():
    """Context manager: BLAS libraries use one thread inside, their previous count after.

    Re-entrant and thread-safe: the first of several concurrent or nested users sets the limit and
    the last one to leave restores the previous count, so work running in parallel threads (sweep
    chunks, say) never sees the count change under it.
    """
    global _depth, _restore
    with _lock:
        if _depth == 0:
            _restore = _controller().limit(limits=1, user_api="blas")
        _depth += 1
    try:
        yield
    finally:
        with _lock:
            _depth -= 1
            if _depth == 0:
                _restore.restore_original_limits()
                _restore = None


def blas_single_threaded(function):
    """Decorator form of :func:`single_threaded_blas`."""

    @functools.wraps(function)
    def wrapper(*args, **kwargs):
        with single_threaded_blas():
            return function(*args, **kwargs)

    return wrapper


# -- metasim's own kernel threads ------------------------------------------------------------------
# The compiled kernels are serial loops over rows that release the GIL (``nogil=True``); work is
# spread over cores by running disjoint row ranges of one kernel on a shared thread pool. Compared
# with numba's ``parallel=True`` this compiles each kernel once (no parallel variant of its loop
# body, no separate small-input variant) and leaves no spinning worker threads behind. Every row is
# computed by the same machine code whatever range it falls in, so results do not depend on the
# number of threads or parts.

_pool = None
_pool_lock = threading.Lock()


def kernel_threads() -> int:
    """Threads the kernels use: ``NUMBA_NUM_THREADS`` if set, else the CPUs this process may use."""
    import os

    value = os.environ.get("NUMBA_NUM_THREADS", "")
    if value.strip().isdigit() and int(value) > 0:
        return int(value)
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def _executor():
    global _pool
    if _pool is None:
        with _pool_lock:
            if _pool is None:
                from concurrent.futures import ThreadPoolExecutor

                _pool = ThreadPoolExecutor(max_workers=kernel_threads(), thread_name_prefix="metasim-kernel")
    return _pool


def run_in_parts(kernel, count: int, *args, min_part: int = 1) -> None:
    """``kernel(*args, start, stop)`` over ``[0, count)``: in one call for small counts, else in
    contiguous parts of at least ``min_part`` rows run on the kernel thread pool (a few parts per
    thread, so uneven rows even out). Returns when every part is done; re-raises a part's error."""
    _warmup.wait(kernel)  # compiled ahead in a helper process: wait for it, then load it from the cache
    threads = kernel_threads()
    parts = min(4 * threads, count // max(min_part, 1)) if threads > 1 else 1
    if parts <= 1:
        kernel(*args, 0, count)
        return
    bounds = [count * i // parts for i in range(parts + 1)]
    pool = _executor()
    futures = [pool.submit(kernel, *args, bounds[i], bounds[i + 1]) for i in range(parts)]
    for future in futures:
        future.result()
