"""Thread counts for PySCF's OpenMP loops and the BLAS pools of numpy and scipy.

Measured on a 2-core machine (PySCF 2.14, N2): below cc-pVDZ size a second thread does not
pay for itself, and idle BLAS pools that spin while PySCF runs slow a small-basis curve
by up to 2x. So small bases run on one thread per process (and a series spreads its members
over processes); from :data:`THREADED_FROM_NAO` basis functions a curve may use every core.
"""

from __future__ import annotations

import contextlib
import os

#: basis functions of the molecule from which threads pay (N2 in cc-pVDZ has 28, in 6-31G 18)
THREADED_FROM_NAO = 28


_BUDGET: int | None = None


def cores() -> int:
    return max(1, os.cpu_count() or 1)


def set_budget(n: int | None) -> None:
    """Cores this process may use (a worker of a pool gets its share; None: every core)."""
    global _BUDGET
    _BUDGET = None if n is None else max(1, int(n))


def budget() -> int:
    return _BUDGET if _BUDGET is not None else cores()


def threads_for(nao: int) -> int:
    """Threads this process should use for a molecule of ``nao`` basis functions."""
    return budget() if nao >= THREADED_FROM_NAO else 1


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
