"""How many BLAS threads a solve uses, chosen by the size of the problem.

An ALM iteration on a small matrix is many small LAPACK and BLAS calls. With
OpenBLAS free to use every core, each call wakes a pool of threads for a few
microseconds of work, and while other work runs on the machine the pool's
spinning threads compete with it: a 200 x 200 solve was measured at 3.5 s
against 0.17 s on one thread (benchmarks/hard.py shows both settings). Large
matrices are the opposite case: their products are worth spreading over threads. So, as
scikit-learn does for its small inner loops (threadpoolctl), a solve whose
smaller side is below ``ONE_THREAD_BELOW`` runs with one BLAS thread, and a
larger one with the library's default. An explicit limit set by the user
(OPENBLAS_NUM_THREADS, or an enclosing ``threadpool_limits``) is kept when
it is lower.
"""

from contextlib import contextmanager, nullcontext

__all__ = ["ONE_THREAD_BELOW", "blas_threads", "threads_for"]

ONE_THREAD_BELOW = 500  # smaller side, in units; measured in benchmarks/hard.py


def threads_for(shape):
    """1 for a small problem, None (the library's default) for a large one."""
    return 1 if min(shape) < ONE_THREAD_BELOW else None


@contextmanager
def blas_threads(shape):
    """Run the body with the BLAS thread count ``threads_for(shape)``."""
    limit = threads_for(shape)
    if limit is None:
        context = nullcontext()
    else:
        from threadpoolctl import threadpool_limits
        context = threadpool_limits(limits=limit, user_api="blas")
    with context:
        yield
