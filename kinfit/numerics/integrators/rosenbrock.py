"""Compiled Rosenbrock 4(3) for stiff systems, with sensitivities by lockstep copies.

A linearly implicit Rosenbrock method of order 4 with an embedded order-3
error estimate (Kaps–Rentrop form with Shampine's parameters, γ = 1/2; four
stages, three right-hand sides and one Jacobian and LU factorisation per
step; E. Hairer & G. Wanner, Solving ODEs II, section IV.7; L. F. Shampine,
ACM TOMS 8, 1982). Steps land on every output time. Sensitivities come from
parameter-displaced copies of the system integrated in lockstep — the same
step sizes and the same formulas for every copy — so that their central
differences are smooth (internal differentiation of the scheme).

It takes the systems the explicit method (:mod:`.dopri`) reports stiff. The
right-hand side and its analytic Jacobian are the compiled rate law of
``_kernels``; :func:`right_hand_side` evaluates them at given states so that
they can be compared with the numpy law of :mod:`kinfit.numerics.rate_system`.
"""

from __future__ import annotations

import math

import numpy as np

from kinfit.numerics.integrators import (
    BLOWUP,
    FAILED,
    KIND_INITIAL,
    KIND_LOG_K,
    KIND_ORDER,
    OK,
    STIFF,
)
from kinfit.numerics.integrators._kernels import (
    BLOWUP_FACTOR,
    contiguous,
    njit,
    plain_jacobian,
    plain_rhs,
)

__all__ = ["NAME", "COMPILED", "integrate_stiff", "right_hand_side"]

NAME = "compiled Rosenbrock 4(3)"     # as reports name it

_GAM = 0.5
_A21, _A31, _A32 = 2.0, 48.0 / 25.0, 6.0 / 25.0
_C21, _C31, _C32 = -8.0, 372.0 / 25.0, 12.0 / 5.0
_C41, _C42, _C43 = -112.0 / 125.0, -54.0 / 125.0, -2.0 / 5.0
_B1, _B2, _B3, _B4 = 19.0 / 9.0, 0.5, 25.0 / 108.0, 125.0 / 108.0
_E1, _E2, _E3, _E4 = 17.0 / 54.0, 7.0 / 36.0, 0.0, 125.0 / 108.0


@njit(cache=True, error_model="numpy")
def _lu(M, piv):
    """In-place LU with partial pivoting of a small square matrix; False if singular."""
    n = M.shape[0]
    for c in range(n):
        p = c
        big = abs(M[c, c])
        for r in range(c + 1, n):
            if abs(M[r, c]) > big:
                big = abs(M[r, c])
                p = r
        if big == 0.0 or not math.isfinite(big):
            return False
        piv[c] = p
        if p != c:
            for q in range(n):
                tmp = M[c, q]
                M[c, q] = M[p, q]
                M[p, q] = tmp
        for r in range(c + 1, n):
            M[r, c] /= M[c, c]
            f = M[r, c]
            if f != 0.0:
                for q in range(c + 1, n):
                    M[r, q] -= f * M[c, q]
    return True


@njit(cache=True, error_model="numpy")
def _solve_lu(M, piv, b):
    n = M.shape[0]
    for c in range(n):
        p = piv[c]
        if p != c:
            tmp = b[c]
            b[c] = b[p]
            b[p] = tmp
    for r in range(n):
        acc = b[r]
        for q in range(r):
            acc -= M[r, q] * b[q]
        b[r] = acc
    for r in range(n - 1, -1, -1):
        acc = b[r]
        for q in range(r + 1, n):
            acc -= M[r, q] * b[q]
        b[r] = acc / M[r, r]


@njit(cache=True, error_model="numpy")
def _ros_lockstep(Y0, stoich, K, EE, present, eps, t_out, rtol, atol, max_steps, y_out):
    """Integrate m copies of one system in lockstep with the Rosenbrock 4(3) pair.

    Parameters
    ----------
    Y0 : [m, S] starting states; K : [m, D]; EE : [m, D, S] rates and orders of each copy.
    y_out : [m, n_out, S] filled at every output time.

    Returns (status, accepted steps, right-hand sides).
    """
    m, S = Y0.shape
    D = EE.shape[1]
    pw = np.empty((D, S))
    slope = np.empty((D, S))
    dlog = np.empty((D, S))
    J = np.empty((S, S))
    LU = np.empty((m, S, S))
    piv = np.empty((m, S), dtype=np.int64)
    Y = Y0.copy()
    Ynew = np.empty((m, S))
    F0 = np.empty((m, S))
    Ft = np.empty(S)
    G = np.empty((4, m, S))
    Ytmp = np.empty(S)
    RA = np.zeros((4, 3))       # stage-argument weights a_iq
    RA[1, 0] = _A21
    RA[2, 0] = _A31
    RA[2, 1] = _A32
    RC = np.zeros((4, 3))       # Jacobian-correction weights c_iq
    RC[1, 0] = _C21
    RC[2, 0] = _C31
    RC[2, 1] = _C32
    RC[3, 0] = _C41
    RC[3, 1] = _C42
    RC[3, 2] = _C43
    blowup = 0.0
    for c in range(m):
        for a in range(S):
            blowup = max(blowup, abs(Y0[c, a]))
    blowup = BLOWUP_FACTOR * max(blowup, 1e-300)
    n_out = t_out.size
    i_out = 0
    while i_out < n_out and t_out[i_out] <= 0.0:
        for c in range(m):
            for a in range(S):
                y_out[c, i_out, a] = Y[c, a]
        i_out += 1
    if i_out == n_out:
        return OK, 0, 0
    t = 0.0
    t_end = t_out[n_out - 1]
    # first step from the size of the initial rates (Hairer, Nørsett & Wanner II.4)
    h = 1e-6 * t_end
    for c in range(m):
        plain_rhs(Y[c], stoich, K[c], EE[c], present, eps, pw, slope, dlog, F0[c])
        y_norm = 0.0
        f_norm = 0.0
        for a in range(S):
            sc = atol + abs(Y[c, a]) * rtol
            y_norm = max(y_norm, abs(Y[c, a]) / sc)
            f_norm = max(f_norm, abs(F0[c, a]) / sc)
        if f_norm > 0.0 and y_norm > 0.0:
            h = min(h, 0.01 * y_norm / f_norm)
    h = max(min(h, t_out[i_out]), 1e-300)
    n_rhs = 0
    steps = 0
    while t < t_end:
        if steps >= max_steps:
            return STIFF, steps, n_rhs
        target = t_out[i_out]
        last = False
        if t + h >= target:
            h = target - t
            last = True
        if h <= 1e-15 * t or h <= 0.0:
            return FAILED, steps, n_rhs
        ok_lu = True
        for c in range(m):
            plain_rhs(Y[c], stoich, K[c], EE[c], present, eps, pw, slope, dlog, F0[c])
            plain_jacobian(Y[c], stoich, K[c], EE[c], present, eps, pw, slope, dlog, J)
            for a in range(S):
                for b in range(S):
                    LU[c, a, b] = -J[a, b]
                LU[c, a, a] += 1.0 / (_GAM * h)
            if not _lu(LU[c], piv[c]):
                ok_lu = False
        n_rhs += m
        if not ok_lu:
            h *= 0.5
            continue
        err_acc = 0.0
        for c in range(m):
            # stage i solves (1/(γh) - J) g_i = f(y + Σ a_iq g_q) + Σ c_iq g_q / h;
            # stages 3 and 4 share one right-hand side
            for a in range(S):
                Ft[a] = F0[c, a]
            for st in range(4):
                if st == 1 or st == 2:
                    for a in range(S):
                        acc = Y[c, a]
                        for q in range(st):
                            acc += RA[st, q] * G[q, c, a]
                        Ytmp[a] = acc
                    plain_rhs(Ytmp, stoich, K[c], EE[c], present, eps, pw, slope, dlog, Ft)
                g = G[st, c]
                for a in range(S):
                    acc = Ft[a]
                    for q in range(st):
                        acc += RC[st, q] * G[q, c, a] / h
                    g[a] = acc
                _solve_lu(LU[c], piv[c], g)
            for a in range(S):
                Ynew[c, a] = Y[c, a] + _B1 * G[0, c, a] + _B2 * G[1, c, a] + _B3 * G[2, c, a] \
                    + _B4 * G[3, c, a]
                e = _E1 * G[0, c, a] + _E2 * G[1, c, a] + _E3 * G[2, c, a] + _E4 * G[3, c, a]
                sc = atol + max(abs(Y[c, a]), abs(Ynew[c, a])) * rtol
                err_acc += (e / sc) ** 2
        n_rhs += 2 * m
        en = math.sqrt(err_acc / (m * S))
        if not math.isfinite(en):
            h *= 0.25
            continue
        if en <= 1.0:
            t = target if last else t + h
            for c in range(m):
                for a in range(S):
                    if abs(Y[c, a]) > blowup:
                        return BLOWUP, steps, n_rhs
            for c in range(m):
                for a in range(S):
                    Y[c, a] = Ynew[c, a]
            steps += 1
            while i_out < n_out and t_out[i_out] <= t * (1.0 + 1e-15):
                for c in range(m):
                    for a in range(S):
                        y_out[c, i_out, a] = Y[c, a]
                i_out += 1
            factor = 5.0 if en < 1e-12 else min(5.0, 0.9 * en ** -0.25)
            if last and i_out < n_out:
                factor = max(factor, 1.0)     # a step shortened to land on an output
            h *= factor
        else:
            h *= max(0.2, 0.9 * en ** (-1.0 / 3.0))
    for c in range(m):
        for a in range(S):
            if not math.isfinite(Y[c, a]):
                return FAILED, steps, n_rhs
    return OK, steps, n_rhs


# the compiled entry point (see dopri.COMPILED)
COMPILED = (_ros_lockstep,)


def integrate_stiff(stoich, present, y0, k, E, t_out, *, rtol, atol, eps, sens=None,
                    max_steps=50_000):
    """Integrate one system with the compiled Rosenbrock 4(3) method.

    Parameters
    ----------
    stoich, present : as in :func:`kinfit.numerics.integrators.dopri.integrate_batch`
    y0 : ndarray [n_species]
    k : ndarray [n_directions]
    E : ndarray [n_directions, n_species]
    t_out : ndarray [n_out], non-decreasing
    rtol, atol, eps : float
    sens : tuple (kind, direction, species) of int arrays, optional
        Kernel parameters; sensitivities by central differences of copies
        integrated in lockstep.

    Returns
    -------
    y_out : ndarray [n_out, n_species]
    s_out : ndarray [n_out, n_species, n_sens] or None
    status : int
    n_rhs : int
    """
    y0 = np.asarray(y0, dtype=float)
    n_sens = 0 if sens is None else len(sens[0])
    m = 1 + 2 * n_sens
    Y0 = np.repeat(y0[None], m, axis=0)
    K = np.repeat(np.asarray(k, float)[None], m, axis=0)
    EE = np.repeat(np.asarray(E, float)[None], m, axis=0)
    steps = np.empty(n_sens)
    scale = max(float(y0.max()), 1e-300)
    for p in range(n_sens):
        kind, j, s = int(sens[0][p]), int(sens[1][p]), int(sens[2][p])
        for sign, row in ((1.0, 1 + p), (-1.0, 1 + n_sens + p)):
            if kind == KIND_LOG_K:
                K[row, j] *= math.exp(sign * 1e-5)
            elif kind == KIND_ORDER:
                EE[row, j, s] += sign * 1e-5
            else:
                Y0[row, s] += sign * 1e-5 * scale
        steps[p] = 1e-5 * scale if kind == KIND_INITIAL else 1e-5
    y_out = np.empty((m, t_out.size, y0.size))
    status, _, n_rhs = _ros_lockstep(Y0, contiguous(stoich, dtype=np.float64),
                                     K, EE, contiguous(present, dtype=np.bool_),
                                     float(eps), contiguous(t_out, dtype=np.float64),
                                     float(rtol), float(atol), int(max_steps), y_out)
    s_out = None
    if n_sens:
        s_out = ((y_out[1:1 + n_sens] - y_out[1 + n_sens:]) / (2 * steps[:, None, None])
                 ).transpose(1, 2, 0)
    return y_out[0], s_out, int(status), int(n_rhs)


def right_hand_side(conc, stoichiometry, present, k, orders, eps):
    """The right-hand side this method integrates and its Jacobian, at given states.

    For checking the compiled kernels against the numpy rate law of
    :mod:`kinfit.numerics.rate_system`.

    Parameters
    ----------
    conc : ndarray [n_sys, n_species]
    stoichiometry : ndarray [n_species, n_directions]
    present : ndarray [n_directions, n_species] of bool
    k : ndarray [n_sys, n_directions]
    orders : ndarray [n_sys, n_directions, n_species]
    eps : float or ndarray [n_sys]

    Returns
    -------
    f : ndarray [n_sys, n_species]
        d[X]/dt.
    jac : ndarray [n_sys, n_species, n_species]
        ∂f/∂[X], the Jacobian of each Rosenbrock step.
    """
    conc = contiguous(np.atleast_2d(conc), np.float64)
    n_sys, n_species = conc.shape
    stoich = contiguous(stoichiometry, np.float64)
    present = contiguous(present, np.bool_)
    k = contiguous(k, np.float64)
    orders = contiguous(orders, np.float64)
    eps = np.broadcast_to(np.asarray(eps, dtype=np.float64), (n_sys,))
    n_dir = stoich.shape[1]
    pw, slope, dlog = (np.empty((n_dir, n_species)) for _ in range(3))
    f = np.empty((n_sys, n_species))
    jac = np.empty((n_sys, n_species, n_species))
    for i in range(n_sys):
        plain_rhs(conc[i], stoich, k[i], orders[i], present, float(eps[i]), pw, slope, dlog,
                  f[i])
        plain_jacobian(conc[i], stoich, k[i], orders[i], present, float(eps[i]), pw, slope,
                       dlog, jac[i])
    return f, jac
