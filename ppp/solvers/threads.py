"""BLAS thread control for small problems.

Threaded BLAS/LAPACK calls on matrices of a few dozen rows cost more in thread hand-off than in
arithmetic, and on a loaded machine a preempted helper thread turns a 50 microsecond eigensolve into
milliseconds (measured in ``benchmarks/bench_dye.py``: about ten times slower with two threads than
with one for N = 26). Small chromophores therefore run single-threaded; large ones keep every thread.

The controller of :mod:`threadpoolctl` is created on first use (it inspects the loaded libraries,
about 10 ms) and reused; limiting is a context manager, so no global setting outlives the call.
"""
from __future__ import annotations

import contextlib
from functools import lru_cache

#: Chromophores with fewer centres than this run with one BLAS thread.
SINGLE_THREAD_BELOW = 150


@lru_cache(maxsize=1)
def _controller():
    import scipy.linalg  # noqa: F401  (loads scipy's own BLAS so that the controller sees it too)
    from threadpoolctl import ThreadpoolController
    return ThreadpoolController()


def blas_threads_for(n_centres: int):
    """Context manager: one BLAS thread for small problems, no change otherwise."""
    if n_centres >= SINGLE_THREAD_BELOW:
        return contextlib.nullcontext()
    return _controller().limit(limits=1, user_api="blas")
