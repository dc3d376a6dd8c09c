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
