"""Compiled Dormand–Prince 5(4) with forward sensitivities, for many systems at once.

The Dormand–Prince 5(4) pair — the same tableau, error estimate, step-size
control and 4th-order dense output as scipy's ``RK45`` (Dormand & Prince,
J. Comput. Appl. Math. 6, 1980; Hairer, Nørsett & Wanner, Solving ODEs I,
section II.5) — compiled with numba and run over many independent systems in
one call, each system with its own adaptive steps. Optionally it integrates
the forward sensitivity equations alongside the states,

    dS/dt = J S + ∂f/∂q,      S = ∂y/∂q,

with respect to "kernel parameters" q of three kinds (see
:mod:`kinfit.numerics.integrators`): the log of a direction's rate constant,
one exponent e_js of a rate law, or a starting concentration. The step size
is controlled on states and sensitivities together (a sensitivity left out of
the error test can grow without bound where the equations turn stiff, e.g.
once a fractional-order reactant has run out).

Stiffness is detected as in Hairer's DOPRI5 (h·|λ| estimated from the last
two stages exceeding 3.25 on 15 accepted steps), by running out of steps or
by steps collapsing; such
systems are reported with status :data:`~kinfit.numerics.integrators.STIFF`
so the caller can hand them to an implicit integrator (:mod:`.rosenbrock`,
then LSODA).

When a mechanism has fewer steps than species, the state is one extent of
reaction per step, c = c0 + N z with dz/dt = M r(c) (``RateSystem.extents``
of :mod:`kinfit.numerics.rate_system`): fewer equations, while the error
test and the outputs stay in concentrations. Otherwise N = I and M is the
stoichiometry.

The kernel exists in two compiled copies: ``_batch`` with sensitivities and
``_batch_states`` without, in which the compiler knows that there are none
and drops their loops (two to three times faster per system than one general
copy, measured with ``_one`` called both ways in one process).

The right-hand side is the compiled rate law of ``_kernels`` (the numpy
law of :mod:`kinfit.numerics.rate_system`); :func:`right_hand_side` evaluates
it at given states so that the two can be compared.
"""

from __future__ import annotations

import math

import numpy as np

from kinfit.numerics.integrators import BLOWUP, FAILED, KIND_INITIAL, OK, STIFF
from kinfit.numerics.integrators._kernels import (
    BLOWUP_FACTOR,
    contiguous,
    extent_rhs,
    extent_rhs_call,
    njit,
    to_conc,
)

__all__ = ["NAME", "COMPILED", "integrate_batch", "right_hand_side"]

NAME = "compiled Dormand-Prince 5(4)"     # as reports name it

# Dormand–Prince 5(4) tableau as in scipy.integrate.RK45
_C = np.array([0.0, 1 / 5, 3 / 10, 4 / 5, 8 / 9, 1.0])
_A = np.array([
    [0.0, 0.0, 0.0, 0.0, 0.0],
    [1 / 5, 0.0, 0.0, 0.0, 0.0],
    [3 / 40, 9 / 40, 0.0, 0.0, 0.0],
    [44 / 45, -56 / 15, 32 / 9, 0.0, 0.0],
    [19372 / 6561, -25360 / 2187, 64448 / 6561, -212 / 729, 0.0],
    [9017 / 3168, -355 / 33, 46732 / 5247, 49 / 176, -5103 / 18656]])
_B = np.array([35 / 384, 0.0, 500 / 1113, 125 / 192, -2187 / 6784, 11 / 84])
_E = np.array([-71 / 57600, 0.0, 71 / 16695, -71 / 1920, 17253 / 339200, -22 / 525, 1 / 40])
_P = np.array([
    [1.0, -8048581381 / 2820520608, 8663915743 / 2820520608, -12715105075 / 11282082432],
    [0.0, 0.0, 0.0, 0.0],
    [0.0, 131558114200 / 32700410799, -68118460800 / 10900136933,
     87487479700 / 32700410799],
    [0.0, -1754552775 / 470086768, 14199869525 / 1410260304, -10690763975 / 1880347072],
    [0.0, 127303824393 / 49829197408, -318862633887 / 49829197408,
     701980252875 / 199316789632],
    [0.0, -282668133 / 205662961, 2019193451 / 616988883, -1453857185 / 822651844],
    [0.0, 40617522 / 29380423, -110615467 / 29380423, 69997945 / 29380423]])


@njit(cache=True, error_model="numpy")
def _one(c0, n_state, n_sens, basis, dirmap, k, E, present, eps, kind, jj, ss, t_out, rtol,
         atol, max_steps, y_out, s_out, A, B, C, Ecoef, P):
    """Integrate one system from t = 0, writing every requested output time.

    The state is the extents z (zero at t = 0) and, with sensitivities,
    ∂z/∂q; the error test and the outputs are in concentrations.

    Returns (status, accepted steps, right-hand-side evaluations).
    """
    S = c0.size
    D = E.shape[0]
    n = n_state * (1 + n_sens)
    pw = np.empty((D, S))
    slope = np.empty((D, S))
    dlog = np.empty((D, S))
    r = np.empty(D)
    dr = np.empty((D, S))
    G = np.empty((D, n_state))
    J = np.empty((n_state, n_state))
    c = np.empty(S)
    K = np.empty((7, n))
    scale = 0.0
    for a in range(S):
        scale = max(scale, abs(c0[a]))
    scale = max(scale, 1e-300)
    # absolute tolerance of each concentration-space component (states, then each
    # sensitivity; sensitivities to a starting concentration are dimensionless)
    n_c = S * (1 + n_sens)
    atol_c = np.empty(n_c)
    for a in range(S):
        atol_c[a] = atol
        for p in range(n_sens):
            atol_c[S + a * n_sens + p] = atol / scale if kind[p] == 2 else atol
    z = np.zeros(n)
    z_new = np.empty(n)
    tmp = np.empty(n)
    y6 = np.empty(n)
    err = np.empty(n)
    A7 = np.zeros((7, 6))       # the tableau with the solution weights as its last row
    for i in range(6):
        for q in range(5):
            A7[i, q] = A[i, q]
    for q in range(6):
        A7[6, q] = B[q]
    n_out = t_out.size
    i_out = 0
    while i_out < n_out and t_out[i_out] <= 0.0:
        for a in range(S):
            y_out[i_out, a] = c0[a]
            for p in range(n_sens):
                s_out[i_out, a, p] = 1.0 if (kind[p] == 2 and ss[p] == a) else 0.0
        i_out += 1
    if i_out == n_out:
        return OK, 0, 0
    t = 0.0
    t_end = t_out[n_out - 1]
    extent_rhs_call(z, n_state, n_sens, basis, dirmap, c0, k, E, present, eps, kind, jj, ss, K,
                    0, c, pw, slope, dlog, r, dr, G, J)
    n_rhs = 1
    # initial step (Hairer, Nørsett & Wanner, II.4; as scipy's select_initial_step),
    # measured on the concentrations
    acc0 = 0.0
    acc1 = 0.0
    for a in range(S):
        sc = atol + abs(c0[a]) * rtol
        dc = 0.0
        for i in range(n_state):
            dc += basis[a, i] * K[0, i]
        acc0 += (c0[a] / sc) ** 2
        acc1 += (dc / sc) ** 2
    d0 = math.sqrt(acc0 / S)
    d1 = math.sqrt(acc1 / S)
    if d0 < 1e-5 or d1 < 1e-5:
        h0 = 1e-6
    else:
        h0 = 0.01 * d0 / d1
    h0 = min(h0, t_end)
    for a in range(n):
        tmp[a] = z[a] + h0 * K[0, a]
    extent_rhs_call(tmp, n_state, n_sens, basis, dirmap, c0, k, E, present, eps, kind, jj, ss,
                    K, 1, c, pw, slope, dlog, r, dr, G, J)
    n_rhs += 1
    acc2 = 0.0
    for a in range(S):
        sc = atol + abs(c0[a]) * rtol
        dd = 0.0
        for i in range(n_state):
            dd += basis[a, i] * (K[1, i] - K[0, i])
        acc2 += (dd / sc) ** 2
    d2 = math.sqrt(acc2 / S) / h0
    if d1 <= 1e-15 and d2 <= 1e-15:
        h1 = max(1e-6, h0 * 1e-3)
    else:
        h1 = (0.01 / max(d1, d2)) ** 0.2
    h = min(100.0 * h0, h1, t_end)
    steps = 0
    rejected = False
    stiff_count = 0
    while t < t_end:
        if steps >= max_steps:
            return STIFF, steps, n_rhs
        if h < 1e-14 * max(abs(t), t_end):
            return STIFF, steps, n_rhs       # steps collapsed: leave it to the implicit method
        if t + h > t_end:
            h = t_end - t
        # stages 2..7; the 7th is evaluated at the new solution (first same as last)
        for st in range(1, 7):
            for a in range(n):
                acc = z[a]
                for q in range(st):
                    acc += h * A7[st, q] * K[q, a]
                tmp[a] = acc
            if st == 5:
                for a in range(n):
                    y6[a] = tmp[a]
            extent_rhs(tmp, n_state, n_sens, basis, dirmap, c0, k, E, present, eps, kind, jj,
                       ss, K, st, c, pw, slope, dlog, r, dr, G, J)
        for a in range(n):
            z_new[a] = tmp[a]
        n_rhs += 6
        for a in range(n):
            acc = 0.0
            for q in range(7):
                acc += Ecoef[q] * K[q, a]
            err[a] = h * acc
        # error norm in concentrations: states, then sensitivities
        acc_e = 0.0
        for s_ in range(S):
            for p in range(-1, n_sens):
                e_c = 0.0
                for i in range(n_state):
                    e_c += basis[s_, i] * err[i if p < 0 else n_state + i * n_sens + p]
                y_old = to_conc(z, n_state, n_sens, basis, c0, kind, ss, s_, p)
                y_new = to_conc(z_new, n_state, n_sens, basis, c0, kind, ss, s_, p)
                at = atol_c[s_] if p < 0 else atol_c[S + s_ * n_sens + p]
                v = e_c / (at + max(abs(y_old), abs(y_new)) * rtol)
                acc_e += v * v
        en = math.sqrt(acc_e / n_c)
        if not math.isfinite(en):
            h *= 0.2
            rejected = True
            continue
        if en < 1.0:
            # stiffness test (Hairer's DOPRI5): h |lambda| ~ h |k7 - k6| / |y_new - y6|
            num = 0.0
            den = 0.0
            for a in range(n):
                num += (K[6, a] - K[5, a]) ** 2
                den += (z_new[a] - y6[a]) ** 2
            if den > 0.0 and h * math.sqrt(num / den) > 3.25:
                stiff_count += 1
                if stiff_count >= 15:
                    return STIFF, steps, n_rhs
            else:
                stiff_count = 0
            t_new = t + h
            # dense output at requested times inside (t, t_new]
            while i_out < n_out and t_out[i_out] <= t_new:
                theta = (t_out[i_out] - t) / h
                p1 = theta
                p2 = p1 * theta
                p3 = p2 * theta
                p4 = p3 * theta
                for a in range(n):
                    q0 = 0.0
                    q1 = 0.0
                    q2 = 0.0
                    q3 = 0.0
                    for q in range(7):
                        kq = K[q, a]
                        q0 += kq * P[q, 0]
                        q1 += kq * P[q, 1]
                        q2 += kq * P[q, 2]
                        q3 += kq * P[q, 3]
                    tmp[a] = z[a] + h * (q0 * p1 + q1 * p2 + q2 * p3 + q3 * p4)
                for s_ in range(S):
                    y_out[i_out, s_] = to_conc(tmp, n_state, n_sens, basis, c0, kind, ss, s_,
                                               -1)
                    for p in range(n_sens):
                        s_out[i_out, s_, p] = to_conc(tmp, n_state, n_sens, basis, c0, kind,
                                                      ss, s_, p)
                i_out += 1
            t = t_new
            for a in range(n):
                z[a] = z_new[a]
                K[0, a] = K[6, a]
            for s_ in range(S):
                if abs(to_conc(z, n_state, n_sens, basis, c0, kind, ss, s_, -1)) > \
                        BLOWUP_FACTOR * scale:
                    return BLOWUP, steps, n_rhs
            steps += 1
            if en == 0.0:
                factor = 10.0
            else:
                factor = min(10.0, 0.9 * en ** -0.2)
            if rejected:
                factor = min(1.0, factor)
            h *= factor
            rejected = False
        else:
            h *= max(0.2, 0.9 * en ** -0.2)
            rejected = True
    for a in range(n):
        if not math.isfinite(z[a]):
            return FAILED, steps, n_rhs
    return OK, steps, n_rhs


@njit(cache=True, error_model="numpy")
def _batch(basis, dirmap, present, y0, k, E, eps, t_out, out_start, rtol, atol, max_steps,
           kind, jj, ss, y_out, s_out, status, steps, A, B, C, Ecoef, P):
    """Every system, with the sensitivities of `kind`."""
    n_sys = y0.shape[0]
    n_state = basis.shape[1]
    n_sens = kind.size
    n_rhs = 0
    for i in range(n_sys):
        lo = out_start[i]
        hi = out_start[i + 1]
        st, nst, nr = _one(y0[i], n_state, n_sens, basis, dirmap, k[i], E[i], present, eps[i],
                           kind, jj, ss, t_out[lo:hi], rtol, atol[i], max_steps, y_out[lo:hi],
                           s_out[lo:hi], A, B, C, Ecoef, P)
        status[i] = st
        steps[i] = nst
        n_rhs += nr
    return n_rhs


@njit(cache=True, error_model="numpy")
def _batch_states(basis, dirmap, present, y0, k, E, eps, t_out, out_start, rtol, atol,
                  max_steps, kind, y_out, s_out, status, steps, A, B, C, Ecoef, P):
    """Every system, states only: with no sensitivities known when compiling, the
    optimiser drops their loops from this copy (about twice as fast)."""
    n_sys = y0.shape[0]
    n_state = basis.shape[1]
    n_rhs = 0
    for i in range(n_sys):
        lo = out_start[i]
        hi = out_start[i + 1]
        st, nst, nr = _one(y0[i], n_state, 0, basis, dirmap, k[i], E[i], present, eps[i],
                           kind, kind, kind, t_out[lo:hi], rtol, atol[i], max_steps,
                           y_out[lo:hi], s_out[lo:hi], A, B, C, Ecoef, P)
        status[i] = st
        steps[i] = nst
        n_rhs += nr
    return n_rhs


# the compiled entry points (with sensitivities, states only): their numba cache
# tells whether this machine has compiled them yet
COMPILED = (_batch, _batch_states)


def integrate_batch(stoich, present, y0, k, E, t_out, out_start, *, rtol, atol, eps,
                    sens=None, max_steps=20_000, basis=None):
    """Integrate many systems with the compiled Dormand–Prince 5(4) method.

    Parameters
    ----------
    stoich : ndarray [n_species, n_directions]
    present : ndarray [n_directions, n_species] of bool
    y0 : ndarray [n_sys, n_species]
    k : ndarray [n_sys, n_directions]
    E : ndarray [n_sys, n_directions, n_species]
    t_out : ndarray [n_out_total]
        Output times of all systems concatenated; sorted within each system.
    out_start : ndarray [n_sys + 1] of int
        System i's outputs are ``t_out[out_start[i]:out_start[i + 1]]``.
    rtol : float
    atol, eps : ndarray [n_sys]
        Absolute tolerance and chord threshold of each system.
    sens : tuple of three int arrays (kind, direction, species), optional
        Kernel parameters for forward sensitivities (see the module notes);
        ``None`` for states only.
    max_steps : int
        Accepted steps allowed per system before it is reported stiff.
    basis : tuple (N [n_species, n_state], M [n_state, n_directions]), optional
        Integrate n_state extents z with c = c0 + N z and dz/dt = M r(c)
        (see :class:`kinfit.numerics.rate_system.RateSystem`, field ``extents``): fewer equations when
        a mechanism has fewer steps than species. Default: the concentrations
        themselves (N = I, M = stoich).

    Returns
    -------
    y_out : ndarray [n_out_total, n_species]
    s_out : ndarray [n_out_total, n_species, n_sens]
    status : ndarray [n_sys] of int (OK, STIFF, FAILED, BLOWUP)
    n_rhs : int
        Right-hand-side evaluations, all systems together.
    """
    kind, jj, ss = sens if sens is not None else (np.zeros(0, np.int64),) * 3
    kind = contiguous(kind, dtype=np.int64)
    jj = contiguous(jj, dtype=np.int64)
    ss = contiguous(ss, dtype=np.int64)
    n_out, S = t_out.size, y0.shape[1]
    if basis is None:
        basis = (np.eye(S), stoich)
    y_out = np.empty((n_out, S))
    s_out = np.empty((n_out, S, kind.size))
    status = np.empty(y0.shape[0], dtype=np.int64)
    steps = np.empty(y0.shape[0], dtype=np.int64)
    common = (contiguous(basis[0], dtype=np.float64),
              contiguous(basis[1], dtype=np.float64),
              contiguous(present, dtype=np.bool_),
              contiguous(y0, dtype=np.float64),
              contiguous(k, dtype=np.float64),
              contiguous(E, dtype=np.float64),
              contiguous(eps, dtype=np.float64),
              contiguous(t_out, dtype=np.float64),
              contiguous(out_start, dtype=np.int64), float(rtol),
              contiguous(atol, dtype=np.float64), int(max_steps))
    if kind.size:
        n_rhs = _batch(*common, kind, jj, ss, y_out, s_out, status, steps, _A, _B, _C, _E, _P)
    else:
        n_rhs = _batch_states(*common, kind, y_out, s_out, status, steps, _A, _B, _C, _E, _P)
    return y_out, s_out, status, int(n_rhs)


def right_hand_side(conc, stoichiometry, present, k, orders, eps, sens=None, basis=None):
    """The right-hand side this method integrates, evaluated at given states.

    Runs the compiled kernel once per system with the extents and the
    sensitivities at zero, so that the concentrations are `conc`: for
    checking the kernel against the numpy rate law of
    :mod:`kinfit.numerics.rate_system`.

    Parameters
    ----------
    conc : ndarray [n_sys, n_species]
    stoichiometry : ndarray [n_species, n_directions]
    present : ndarray [n_directions, n_species] of bool
    k : ndarray [n_sys, n_directions]
    orders : ndarray [n_sys, n_directions, n_species]
    eps : float or ndarray [n_sys]
    sens : tuple (kind, direction, species) of int arrays, optional
        Kernel parameters, as in :func:`integrate_batch`.
    basis : tuple (N, M), optional
        Extents of reaction, as in :func:`integrate_batch`.

    Returns
    -------
    f : ndarray [n_sys, n_state]
        dz/dt; with no `basis` the state is the concentrations and f = d[X]/dt.
    jac : ndarray [n_sys, n_state, n_state]
        ∂f/∂z, the matrix J of the sensitivity equations.
    dfdq : ndarray [n_sys, n_state, n_sens] or None
        ∂f/∂q at fixed state, the inhomogeneous term of the sensitivity
        equations (``None`` without `sens`).
    """
    conc = contiguous(np.atleast_2d(conc), np.float64)
    n_sys, n_species = conc.shape
    k = contiguous(k, np.float64)
    orders = contiguous(orders, np.float64)
    eps = np.broadcast_to(np.asarray(eps, dtype=np.float64), (n_sys,))
    if basis is None:
        basis = (np.eye(n_species), stoichiometry)
    n_basis, dirmap = contiguous(basis[0], np.float64), contiguous(basis[1], np.float64)
    present = contiguous(present, np.bool_)
    # the kernel forms J only with sensitivities: ask for one when none is wanted
    kind, jj, ss = sens if sens is not None else ([KIND_INITIAL], [0], [0])
    kind, jj, ss = (contiguous(a, np.int64) for a in (kind, jj, ss))
    n_state, n_sens = n_basis.shape[1], kind.size
    n_dir = dirmap.shape[1]
    f = np.empty((n_sys, n_state))
    jac = np.empty((n_sys, n_state, n_state))
    dfdq = np.empty((n_sys, n_state, n_sens))
    z = np.zeros(n_state * (1 + n_sens))
    out = np.empty((1, z.size))
    scratch = (np.empty(n_species), np.empty((n_dir, n_species)), np.empty((n_dir, n_species)),
               np.empty((n_dir, n_species)), np.empty(n_dir), np.empty((n_dir, n_species)),
               np.empty((n_dir, n_state)), np.empty((n_state, n_state)))
    for i in range(n_sys):
        extent_rhs_call(z, n_state, n_sens, n_basis, dirmap, conc[i], k[i], orders[i], present,
                        float(eps[i]), kind, jj, ss, out, 0, *scratch)
        f[i] = out[0, :n_state]
        jac[i] = scratch[-1]
        dfdq[i] = out[0, n_state:].reshape(n_state, n_sens)
    return f, jac, (dfdq if sens is not None else None)
