"""Integrators of the rate equations, one module per method, and what they share.

As in :mod:`scipy.integrate`'s ``_ivp`` package, each method has its own
module -- :mod:`.dopri` (compiled Dormand–Prince 5(4) with forward
sensitivities), :mod:`.rosenbrock` (compiled Rosenbrock 4(3) for stiff
systems) and :mod:`.scipy_ivp` (:func:`scipy.integrate.solve_ivp`) -- and
:mod:`kinfit.numerics.integrate` is the front door with the table of
methods. The compiled rate law both compiled methods integrate is in
``_kernels``.

This module holds what the methods and their callers share: the status codes
of a system, the kinds of kernel parameter a forward sensitivity can be taken
with respect to, the default tolerances and whether numba is there.

Kernel parameters q of a sensitivity (``sens = (kind, direction, species)``):

* :data:`KIND_LOG_K` -- ln k of direction ``direction``;
* :data:`KIND_ORDER` -- the exponent e of ``species`` in that direction's
  rate law;
* :data:`KIND_INITIAL` -- the starting concentration of ``species``.

Tolerances default to rtol = 1e-8 and atol = 1e-12 times each system's
largest starting concentration: far below any measurement noise (common
practice), and tight enough to reproduce closed-form integrated rate laws to
better than 1e-6 relative (tested).
"""

from __future__ import annotations

__all__ = ["AVAILABLE", "OK", "STIFF", "FAILED", "BLOWUP", "KIND_LOG_K", "KIND_ORDER",
           "KIND_INITIAL", "RTOL", "ATOL", "MAX_RHS_CALLS"]

try:  # numba is a dependency; without it kinfit uses LSODA alone
    import numba  # noqa: F401

    AVAILABLE = True
except ImportError:  # pragma: no cover - exercised only on machines without numba
    AVAILABLE = False

# status of one system after an integration
OK, STIFF, FAILED, BLOWUP = 0, 1, 2, 3
KIND_LOG_K, KIND_ORDER, KIND_INITIAL = 0, 1, 2

RTOL = 1e-8
ATOL = 1e-12
MAX_RHS_CALLS = 50_000     # work bound of one integration, right-hand-side evaluations
