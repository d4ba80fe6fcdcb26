"""The compiled rate law that the compiled integrators integrate (numba kernels).

The rate law is the one of :mod:`kinfit.numerics.rate_system`: r_j = k_j Π_s
g(c_s; e_js), with g(c; e) = max(c, 0)^e clipped at zero, a chord below
``eps`` for orders in [0, 1) and a floor ``eps`` for negative orders;
derivatives here are the exact ones of that piecewise law.
``tests/numerics/test_rate_system.py`` checks both against the numpy version.

* :func:`factors` -- g, ∂g/∂c and ∂g/∂e of every direction and species;
* :func:`extent_rhs` -- the right-hand side in extents of reaction (or in the
  concentrations themselves) with the forward-sensitivity equations
  dS/dt = J S + ∂f/∂q, used by :mod:`.dopri`;
* :func:`plain_rhs` and :func:`plain_jacobian` -- the plain right-hand side
  and its Jacobian, used by :mod:`.rosenbrock`.

The kernels are long because numba compiles explicit loops over scalars into
fast machine code but would allocate a temporary array for every numpy
expression inside the integrators' inner loops.

Numba caches each compiled function on disk next to its own source file and
checks only that file's time stamp: after editing this module, delete the
``__pycache__`` folder beside it so that the integrators that inline these
kernels are compiled again.
"""

from __future__ import annotations

import math

import numpy as np

from kinfit.numerics.integrators import AVAILABLE

__all__ = ["njit", "contiguous", "BLOWUP_FACTOR", "factors", "extent_rhs", "extent_rhs_call",
           "to_conc", "plain_rhs", "plain_jacobian"]

if AVAILABLE:
    from numba import njit
else:  # pragma: no cover - exercised only on machines without numba
    def njit(*args, **kwargs):
        def wrap(f):
            return f
        return wrap if not (len(args) == 1 and callable(args[0])) else args[0]

BLOWUP_FACTOR = 1e6   # a concentration this many times the largest start: the equations diverge


def contiguous(x, dtype):
    """`x` as a writable C-contiguous array of `dtype` (a copy only when needed).

    The compiled kernels are compiled for writable arrays; a read-only array
    (such as those of a cached :class:`~kinfit.numerics.rate_system.RateSystem`)
    would make numba compile and cache a second copy of every kernel.
    """
    if (type(x) is np.ndarray and x.dtype == dtype and x.flags.c_contiguous
            and x.flags.writeable):
        return x                 # the usual case, checked cheaply (called ~15 times a step)
    return np.array(x, dtype=dtype, order="C")


@njit(cache=True, error_model="numpy")
def factors(c, E, present, eps, deriv, pw, slope, dlog):
    """Per (direction, species): factor, its slope in c and its derivative in e.

    pw[j, s] = g(c_s; e_js); with `deriv`, also slope = ∂g/∂c and
    dlog = ∂g/∂e (needed only for sensitivities).
    """
    D, S = E.shape
    for j in range(D):
        for s in range(S):
            e = E[j, s]
            if e == 0.0 and not present[j, s]:
                pw[j, s] = 1.0
                if deriv:
                    slope[j, s] = 0.0
                    dlog[j, s] = 0.0
                continue
            x = c[s] if c[s] > 0.0 else 0.0
            if present[j, s] and x < eps and e < 1.0:
                if e >= 0.0:        # chord below eps for orders in [0, 1)
                    g = eps ** e * (x / eps)
                    d = eps ** (e - 1.0)
                else:               # negative orders: floor at eps
                    g = eps ** e
                    d = 0.0
                pw[j, s] = g
                if deriv:
                    slope[j, s] = d
                    dlog[j, s] = g * math.log(eps)
            elif x > 0.0:
                if e == 1.0:
                    g = x
                    d = 1.0
                elif e == 2.0:
                    g = x * x
                    d = 2.0 * x
                elif e == 0.0:
                    g = 1.0
                    d = 0.0
                elif e == 0.5:
                    g = math.sqrt(x)
                    d = 0.5 * g / x
                else:
                    g = x ** e
                    d = e * g / x
                pw[j, s] = g
                if deriv:
                    slope[j, s] = d
                    dlog[j, s] = g * math.log(x)
            else:  # x == 0 with e >= 1, or e == 0 on a gating species above eps
                pw[j, s] = 1.0 if e == 0.0 else 0.0
                if deriv:
                    slope[j, s] = 1.0 if e == 1.0 else 0.0
                    dlog[j, s] = 0.0


@njit(cache=True, inline="always", error_model="numpy")
def extent_rhs(z, n_state, n_sens, basis, dirmap, c0, k, E, present, eps, kind, jj, ss, out, row,
               c, pw, slope, dlog, r, dr, G, J):
    """Right-hand side of the extents (and their sensitivities) for one system, into out[row].

    The concentrations are c = c0 + basis z; the extents change as
    dz/dt = dirmap r(c). With basis = I and dirmap = S this is the plain
    system in the concentrations' changes.
    """
    S = c0.size
    D = E.shape[0]
    for s in range(S):
        acc = c0[s]
        for i in range(n_state):
            acc += basis[s, i] * z[i]
        c[s] = acc
    factors(c, E, present, eps, n_sens > 0, pw, slope, dlog)
    for j in range(D):
        prod = k[j]
        for s in range(S):
            prod *= pw[j, s]
        r[j] = prod
    for i in range(n_state):
        acc = 0.0
        for j in range(D):
            acc += dirmap[i, j] * r[j]
        out[row, i] = acc
    if n_sens == 0:
        return
    # dr[j, t] = k_j slope_jt Π_{s != t} pw_js = ∂r_j/∂c_t
    for j in range(D):
        for t in range(S):
            prod = k[j] * slope[j, t]
            if prod != 0.0:
                for s in range(S):
                    if s != t:
                        prod *= pw[j, s]
            dr[j, t] = prod
    # G = dr · basis [D, n_state]; J = dirmap · G [n_state, n_state]
    for j in range(D):
        for b in range(n_state):
            acc = 0.0
            for t in range(S):
                acc += dr[j, t] * basis[t, b]
            G[j, b] = acc
    for a in range(n_state):
        for b in range(n_state):
            acc = 0.0
            for j in range(D):
                acc += dirmap[a, j] * G[j, b]
            J[a, b] = acc
    for p in range(n_sens):
        for a in range(n_state):
            acc = 0.0
            for b in range(n_state):
                acc += J[a, b] * z[n_state + b * n_sens + p]
            if kind[p] == 0:                       # ln k of direction jj
                acc += dirmap[a, jj[p]] * r[jj[p]]
            elif kind[p] == 1:                     # exponent e[jj, ss]
                j = jj[p]
                t = ss[p]
                d = k[j] * dlog[j, t]
                if d != 0.0:
                    for s in range(S):
                        if s != t:
                            d *= pw[j, s]
                acc += dirmap[a, j] * d
            else:                                  # starting concentration of ss
                t = ss[p]
                for j in range(D):
                    acc += dirmap[a, j] * dr[j, t]
            out[row, n_state + a * n_sens + p] = acc


@njit(cache=True, error_model="numpy")
def extent_rhs_call(z, n_state, n_sens, basis, dirmap, c0, k, E, present, eps, kind, jj, ss, out,
                    row, c, pw, slope, dlog, r, dr, G, J):
    """:func:`_rhs` behind a call boundary, for the calls outside the step loop."""
    extent_rhs(z, n_state, n_sens, basis, dirmap, c0, k, E, present, eps, kind, jj, ss, out, row,
               c, pw, slope, dlog, r, dr, G, J)


@njit(cache=True, inline="always", error_model="numpy")
def to_conc(z, n_state, n_sens, basis, c0, kind, ss, s, p):
    """Concentration s (p < 0) or its sensitivity to kernel parameter p, from extents z."""
    if p < 0:
        acc = c0[s]
        for i in range(n_state):
            acc += basis[s, i] * z[i]
        return acc
    acc = 1.0 if (kind[p] == 2 and ss[p] == s) else 0.0
    for i in range(n_state):
        acc += basis[s, i] * z[n_state + i * n_sens + p]
    return acc


@njit(cache=True, error_model="numpy")
def plain_jacobian(y, stoich, k, E, present, eps, pw, slope, dlog, J):
    """Analytic Jacobian ∂f/∂y of one system into J."""
    D, S = E.shape
    factors(y, E, present, eps, True, pw, slope, dlog)
    for a in range(S):
        for b in range(S):
            J[a, b] = 0.0
    for j in range(D):
        for t in range(S):
            d = k[j] * slope[j, t]
            if d != 0.0:
                for s in range(S):
                    if s != t:
                        d *= pw[j, s]
                for a in range(S):
                    J[a, t] += stoich[a, j] * d


@njit(cache=True, error_model="numpy")
def plain_rhs(y, stoich, k, E, present, eps, pw, slope, dlog, out):
    """Right-hand side of one system's states into out."""
    D, S = E.shape
    factors(y, E, present, eps, False, pw, slope, dlog)
    for a in range(S):
        out[a] = 0.0
    for j in range(D):
        r = k[j]
        for s in range(S):
            r *= pw[j, s]
        for a in range(S):
            out[a] += stoich[a, j] * r
