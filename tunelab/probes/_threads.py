"""One BLAS / OpenMP thread while a probe fits, as every trial fits."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager


@contextmanager
def one_thread() -> Iterator[None]:
    """Limit every loaded BLAS and OpenMP pool to one thread for the ``with`` block.

    On a shared 2-core machine, two threads under contention were measured up to 10x slower, and
    the probes are meant as per-worker costs; on a busy machine a multi-threaded solver on a
    thousand rows spins more than it computes (digits: 10 s against 2.5 s for the whole
    numeric-map probe under load).  The limit only reaches libraries already loaded, hence the
    imports of the probed estimators first.
    """
    import sklearn.discriminant_analysis
    import sklearn.ensemble
    import sklearn.neighbors
    import sklearn.svm  # noqa: F401
    from threadpoolctl import threadpool_limits

    with threadpool_limits(limits=1):
        yield


__all__ = ["one_thread"]
