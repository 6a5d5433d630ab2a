"""Test-session settings that must hold before numpy is imported.

One BLAS/OpenMP thread per process: the suite's matrix work is small (ring-down pencils,
fits), and threaded BLAS on a two-core machine that also runs the tests spends more time
spinning than computing (a 334x334 ``eigh`` took 0.3 s threaded and 0.05 s on one thread
on a loaded two-core machine). Results do not depend on the thread count.
"""

import os

for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_name, "1")
