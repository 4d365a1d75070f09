"""Thread counts for PySCF's OpenMP loops and the BLAS pools of numpy and scipy.

Measured on a 2-core machine (PySCF 2.14, N2 RHF points warm-started along a curve, stability
checked; best of two runs): one thread against two took 0.033 against 0.097 s per point in
cc-pVDZ (28 functions), 0.063 against 0.161 in 6-311G* (36), 0.126 against 0.176 in aug-cc-pVDZ
(46) and 0.388 against 0.405 in cc-pVTZ (60). Idle BLAS pools spinning next to PySCF also slowed
small-basis curves by up to 2x. So every basis up to cc-pVTZ size runs on one thread per process,
and a second core is used by a second process (the workers of :mod:`lcao.execute`). From
:data:`THREADED_FROM_NAO` functions a process's integrals grow past 40 MB per geometry and a
second process would double them, so larger bases take the threads instead.
"""

from __future__ import annotations

import contextlib
import os

#: basis functions of the molecule from which one process takes every core (N2: 6-31G 18,
#: cc-pVDZ 28, cc-pVTZ 60, cc-pVQZ 110)
THREADED_FROM_NAO = 80


def cores() -> int:
    """Cores of this machine (the default worker count)."""
    return max(1, os.cpu_count() or 1)


@contextlib.contextmanager
def limited(n: int):
    """Run the block with ``n`` threads in PySCF (OpenMP) and in the BLAS/LAPACK libraries."""
    from pyscf import lib
    from threadpoolctl import threadpool_limits

    before = lib.num_threads()
    lib.num_threads(n)
    try:
        with threadpool_limits(limits=n):
            yield
    finally:
        lib.num_threads(before)
