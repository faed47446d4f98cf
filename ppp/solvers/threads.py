"""BLAS thread control.

Threaded BLAS/LAPACK on the matrices of a PPP problem pays badly whenever the machine has other work:
OpenBLAS threads wait for each other, and a preempted helper thread stalls every call. Measured on
the 2-core development machine while other jobs ran (``benchmarks/bench_scaling.py`` prints the
same comparison): a 26 x 26 eigensolve 1.6 ms with two threads against 0.17 ms with one; a
398-centre ribbon 54 s with two threads against 8 s with one. ppp therefore runs each chromophore with
one BLAS thread unless asked otherwise (``Options.threads``); throughput comes from running several
molecules at once (one process per core).

The :mod:`threadpoolctl` controller is created on first use (it inspects the loaded libraries,
about 10 ms) and reused; the limit is a context manager, so no setting outlives the call.
"""
from __future__ import annotations

from functools import lru_cache


@lru_cache(maxsize=1)
def _controller():
    import scipy.linalg  # noqa: F401  (loads scipy's own BLAS so that the controller sees it too)
    from threadpoolctl import ThreadpoolController
    return ThreadpoolController()


def blas_threads(n_threads: int = 1):
    """Context manager limiting BLAS (numpy's and scipy's) to ``n_threads`` threads."""
    return _controller().limit(limits=max(1, int(n_threads)), user_api="blas")
