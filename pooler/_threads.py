"""One BLAS thread for pooler's own numerical work.

pooler's linear algebra is tiny (a 3x3 Hessian, two-column least squares, L-BFGS-B's small
LAPACK calls). On a machine with a few cores, OpenBLAS's thread start-up and synchronisation
cost far more than such a call: with the default thread count the selection model at k = 2,000
took 6-7 times as long as with one thread, the bias suite at k = 50 ten times, and
``pooler stress`` six times the wall time, with identical results (measured on a 2-core
machine; see the README's performance table). Parallelism in pooler comes from processes
(``pooler stress --workers``), never from BLAS threads.

Two mechanisms, so that neither costs anything it need not:

- the command line sets the thread-count environment variables before numpy is first
  imported (:func:`limit_before_numpy`); a value the user set is kept;
- library calls (a notebook where numpy is already loaded) run inside
  :func:`one_blas_thread`, which uses threadpoolctl to lower the count for the duration of the
  call and restore it afterwards. It does nothing when the environment already fixed one thread.
"""
from __future__ import annotations

import contextlib
import functools
import os
import sys

#: The variables that OpenBLAS, MKL, BLIS and OpenMP builds read at load time.
ENV_VARS = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS",
            "BLIS_NUM_THREADS", "VECLIB_MAXIMUM_THREADS")


def limit_before_numpy() -> bool:
    """Ask for one BLAS thread through the environment, if numpy is not loaded yet.

    Returns True when the limit is in force this way (numpy not yet imported, so the
    variables take effect when it is). Variables the user already set are left alone.
    """
    if "numpy" in sys.modules:
        return _env_limited()
    for var in ENV_VARS:
        os.environ.setdefault(var, "1")
    return _env_limited()


def _env_limited() -> bool:
    return os.environ.get("OPENBLAS_NUM_THREADS") == "1" and \
        os.environ.get("OMP_NUM_THREADS", "1") == "1"


@contextlib.contextmanager
def one_blas_thread():
    """Run the body with one BLAS thread (restored afterwards).

    Examples
    --------
    >>> import numpy as np
    >>> with one_blas_thread():
    ...     float(np.linalg.solve(np.eye(2), np.ones(2)).sum())
    2.0
    """
    if _env_limited():
        yield
        return
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # pragma: no cover - threadpoolctl is a declared dependency
        yield
        return
    with threadpool_limits(limits=1, user_api="blas"):
        yield


def single_threaded(fn):
    """Decorator: run ``fn`` inside :func:`one_blas_thread`."""
    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        with one_blas_thread():
            return fn(*args, **kwargs)
    return wrapper
