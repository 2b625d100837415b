"""Sharing the machine's cores between pilewise's own processes and the libraries' thread pools.

Where pilewise runs work in a second process beside the main one (`pipeline._Beside`, the LSA fit beside
phrase counting), each process must keep to one core: scikit-learn's k-means (OpenMP) and the BLAS calls of
silhouettes and SVD otherwise start one thread per core in each process, and on two cores the four threads
wait on one another (at 50,000 texts the assessing stage took 6.5 s instead of 2.7 s beside the map's
worker; docs/performance.md, sixth pass).
"""

from __future__ import annotations

from typing import Any


def one_thread_each() -> Any:
    """Limit OpenMP and BLAS to one thread in this process (and in processes forked while the limit holds)
    until the returned limiter's `restore_original_limits()`; also a context manager."""
    from threadpoolctl import threadpool_limits  # a dependency of scikit-learn

    return threadpool_limits(limits=1)
