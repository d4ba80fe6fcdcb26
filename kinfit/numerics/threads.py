"""Thread limits for the small dense linear algebra of kinfit."""

from __future__ import annotations

__all__ = ["one_blas_thread"]

_CONTROLLER = []


def one_blas_thread():
    """A context running BLAS/LAPACK on one thread (threadpoolctl).

    The matrices here are small (a design of a few columns, spectra of a few
    hundred wavelengths); on a shared two-core machine the multi-threaded SVD
    of a 1200 x 300 matrix was measured at 0.4-2.4 s against 0.03 s on one
    thread (tests/benchmarks/bench_spectra.py).
    """
    if not _CONTROLLER:
        from threadpoolctl import ThreadpoolController

        _CONTROLLER.append(ThreadpoolController())
    return _CONTROLLER[0].limit(limits=1, user_api="blas")
