"""Thread counts of the numerical libraries numpy and scipy may be built with.

OpenBLAS (numpy's and scipy's wheels), MKL and OpenMP read their thread count from the
environment once, when numpy is imported. piezo's linear algebra is small (fits of a few
parameters, filter designs), so more than one thread only costs: starting an OpenBLAS
pool takes about 0.05 s of CPU at import, and idle pool threads spin on the other cores.
The command line and the batch runner's workers therefore ask for one thread, unless the
user chose a count.

May import: the standard library only (the command line reads this before numpy).
"""

from __future__ import annotations

from collections.abc import MutableMapping

__all__ = ["NUMERIC_THREAD_VARIABLES", "one_numeric_thread"]

#: Thread-count variables of the numeric libraries numpy and scipy may be built with.
NUMERIC_THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")


def one_numeric_thread(environ: MutableMapping[str, str]) -> list[str]:
    """Set every variable of :data:`NUMERIC_THREAD_VARIABLES` to 1 in ``environ`` unless
    the user set any of them (then none is touched); the names set.

    Only a process that has not imported numpy yet (or a child it starts) is affected.

    Examples
    --------
    >>> one_numeric_thread({})
    ['OMP_NUM_THREADS', 'OPENBLAS_NUM_THREADS', 'MKL_NUM_THREADS']
    >>> one_numeric_thread({"OMP_NUM_THREADS": "4"})
    []
    """
    if any(name in environ for name in NUMERIC_THREAD_VARIABLES):
        return []
    for name in NUMERIC_THREAD_VARIABLES:
        environ[name] = "1"
    return list(NUMERIC_THREAD_VARIABLES)
