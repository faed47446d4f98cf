"""BLAS thread control.

Threaded BLAS/LAPACK on the matrices of a PPP problem pays badly whenever the machine has other work:
OpenBLAS threads wait for each other, and a preempted helper thread stalls every call. Measured on
the 2-core development machine while other jobs ran (``benchmarks/bench_scaling.py`` prints the
same comparison): a 26 x 26 eigensolve 1.6 ms with two threads against 0.17 ms with one; a
398-centre ribbon 54 s with two threads against 8 s with one. ppp therefore runs each chromophore with
one BLAS thread unless asked otherwise (``Options.threads``); throughput comes from running several
molecules at once (one process per core).

The :mod:`threadpoolctl` controller is created on first use (it inspects the loaded libraries,
about 10 ms) and reused; the limit is a context manager, so no setting outlives the call. It reads the
BLAS libraries' thread counts directly and changes (and later restores) only those that differ: about
2 us when the limit is already in place (a batch worker, or a loop inside one ``blas_threads`` block),
against about 20 us for threadpoolctl's general ``limit``, once per chromophore.
"""
from __future__ import annotations

from contextlib import contextmanager
from functools import lru_cache


@lru_cache(maxsize=1)
def _controller():
    import scipy.linalg  # noqa: F401  (loads scipy's own BLAS so that the controller sees it too)
    from threadpoolctl import ThreadpoolController
    return ThreadpoolController()


@lru_cache(maxsize=1)
def _blas_libraries() -> tuple:
    """threadpoolctl's controllers of the loaded BLAS libraries (numpy's and scipy's)."""
    return tuple(lib for lib in _controller().lib_controllers if lib.user_api == "blas")


@contextmanager
def blas_threads(n_threads: int = 1):
    """Context manager limiting BLAS (numpy's and scipy's) to ``n_threads`` threads."""
    n = max(1, int(n_threads))
    changed = []
    try:
        for lib in _blas_libraries():
            old = lib.num_threads
            if old != n:
                lib.set_num_threads(n)
                changed.append((lib, old))
        yield
    finally:
        for lib, old in reversed(changed):
            lib.set_num_threads(old)
