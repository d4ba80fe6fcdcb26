"""A compiled explicit integrator with forward sensitivities (numba).

The Dormand–Prince 5(4) pair — the same tableau, error estimate, step-size
control and 4th-order dense output as scipy's ``RK45`` (Dormand & Prince,
J. Comput. Appl. Math. 6, 1980; Hairer, Nørsett & Wanner, Solving ODEs I,
section II.5) — compiled with numba and run over many independent systems in
one call, each system with its own adaptive steps. Optionally it integrates
the forward sensitivity equations alongside the states,

    dS/dt = J S + ∂f/∂q,      S = ∂y/∂q,

with respect to "kernel parameters" q of three kinds: the log of a
direction's rate constant, one exponent e_js of a rate law, or a starting
concentration. The step size is controlled on states and sensitivities
together (a sensitivity left out of the error test can grow without bound
where the equations turn stiff, e.g. once a fractional-order reactant has
run out).

Stiffness is detected as in Hairer's DOPRI5 (h·|λ| estimated from the last
two stages exceeding 3.25 on 15 accepted steps) or by running out of steps; such
systems are reported with status :data:`STIFF` so the caller can hand them to
an implicit integrator (LSODA).

The rate law is the one of :func:`kinfit.mechanism.rates`: clipped at zero,
with a chord below ``eps`` for orders in [0, 1) and a floor ``eps`` for
negative orders; derivatives here are the exact ones of that piecewise law.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["AVAILABLE", "OK", "STIFF", "FAILED", "BLOWUP", "KIND_LOG_K", "KIND_ORDER", "KIND_INITIAL",
           "integrate_batch", "integrate_stiff"]

OK, STIFF, FAILED, BLOWUP = 0, 1, 2, 3
BLOWUP_FACTOR = 1e6   # a concentration this many times the largest start: the equations diverge
KIND_LOG_K, KIND_ORDER, KIND_INITIAL = 0, 1, 2

try:  # numba is a dependency; without it kinfit uses LSODA alone
    from numba import njit

    AVAILABLE = True
except ImportError:  # pragma: no cover - exercised only on machines without numba
    AVAILABLE = False

    def njit(*args, **kwargs):
        def wrap(f):
            return f
        return wrap if not (len(args) == 1 and callable(args[0])) else args[0]

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
def _factors(c, E, present, eps, deriv, pw, slope, dlog):
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
def _rhs(z, n_state, n_sens, basis, dirmap, c0, k, E, present, eps, kind, jj, ss, out, row, c,
         pw, slope, dlog, r, dr, G, J):
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
    _factors(c, E, present, eps, n_sens > 0, pw, slope, dlog)
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
def _rhs_call(z, n_state, n_sens, basis, dirmap, c0, k, E, present, eps, kind, jj, ss, out,
              row, c, pw, slope, dlog, r, dr, G, J):
    """:func:`_rhs` behind a call boundary, for the calls outside the step loop."""
    _rhs(z, n_state, n_sens, basis, dirmap, c0, k, E, present, eps, kind, jj, ss, out, row, c,
         pw, slope, dlog, r, dr, G, J)


@njit(cache=True, inline="always", error_model="numpy")
def _to_conc(z, n_state, n_sens, basis, c0, kind, ss, s, p):
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
    _rhs_call(z, n_state, n_sens, basis, dirmap, c0, k, E, present, eps, kind, jj, ss, K, 0, c,
              pw, slope, dlog, r, dr, G, J)
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
    _rhs_call(tmp, n_state, n_sens, basis, dirmap, c0, k, E, present, eps, kind, jj, ss, K, 1,
              c, pw, slope, dlog, r, dr, G, J)
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
            _rhs(tmp, n_state, n_sens, basis, dirmap, c0, k, E, present, eps, kind, jj, ss, K,
                 st, c, pw, slope, dlog, r, dr, G, J)
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
                y_old = _to_conc(z, n_state, n_sens, basis, c0, kind, ss, s_, p)
                y_new = _to_conc(z_new, n_state, n_sens, basis, c0, kind, ss, s_, p)
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
                    y_out[i_out, s_] = _to_conc(tmp, n_state, n_sens, basis, c0, kind, ss, s_,
                                                -1)
                    for p in range(n_sens):
                        s_out[i_out, s_, p] = _to_conc(tmp, n_state, n_sens, basis, c0, kind,
                                                       ss, s_, p)
                i_out += 1
            t = t_new
            for a in range(n):
                z[a] = z_new[a]
                K[0, a] = K[6, a]
            for s_ in range(S):
                if abs(_to_conc(z, n_state, n_sens, basis, c0, kind, ss, s_, -1)) > \
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
        (see :attr:`kinfit.mechanism.Mechanism.extents`): fewer equations when
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
    kind = np.ascontiguousarray(kind, dtype=np.int64)
    jj = np.ascontiguousarray(jj, dtype=np.int64)
    ss = np.ascontiguousarray(ss, dtype=np.int64)
    n_out, S = t_out.size, y0.shape[1]
    if basis is None:
        basis = (np.eye(S), stoich)
    y_out = np.empty((n_out, S))
    s_out = np.empty((n_out, S, kind.size))
    status = np.empty(y0.shape[0], dtype=np.int64)
    steps = np.empty(y0.shape[0], dtype=np.int64)
    common = (np.ascontiguousarray(basis[0], dtype=np.float64),
              np.ascontiguousarray(basis[1], dtype=np.float64),
              np.ascontiguousarray(present, dtype=np.bool_),
              np.ascontiguousarray(y0, dtype=np.float64),
              np.ascontiguousarray(k, dtype=np.float64),
              np.ascontiguousarray(E, dtype=np.float64),
              np.ascontiguousarray(eps, dtype=np.float64),
              np.ascontiguousarray(t_out, dtype=np.float64),
              np.ascontiguousarray(out_start, dtype=np.int64), float(rtol),
              np.ascontiguousarray(atol, dtype=np.float64), int(max_steps))
    if kind.size:
        n_rhs = _batch(*common, kind, jj, ss, y_out, s_out, status, steps, _A, _B, _C, _E, _P)
    else:
        n_rhs = _batch_states(*common, kind, y_out, s_out, status, steps, _A, _B, _C, _E, _P)
    return y_out, s_out, status, int(n_rhs)


# ----------------------------------------------------------------- stiff path
#
# A linearly implicit Rosenbrock method of order 4 with an embedded order-3
# error estimate (Kaps–Rentrop form with Shampine's parameters, γ = 1/2; four
# stages, three right-hand sides and one Jacobian and LU factorisation per
# step; E. Hairer & G. Wanner, Solving ODEs II, section IV.7; L. F. Shampine,
# ACM TOMS 8, 1982). Steps land on every output time. Sensitivities come from
# parameter-displaced copies of the system integrated in lockstep — the same
# step sizes and the same formulas for every copy — so that their central
# differences are smooth (internal differentiation of the scheme).

_GAM = 0.5
_A21, _A31, _A32 = 2.0, 48.0 / 25.0, 6.0 / 25.0
_C21, _C31, _C32 = -8.0, 372.0 / 25.0, 12.0 / 5.0
_C41, _C42, _C43 = -112.0 / 125.0, -54.0 / 125.0, -2.0 / 5.0
_B1, _B2, _B3, _B4 = 19.0 / 9.0, 0.5, 25.0 / 108.0, 125.0 / 108.0
_E1, _E2, _E3, _E4 = 17.0 / 54.0, 7.0 / 36.0, 0.0, 125.0 / 108.0


@njit(cache=True, error_model="numpy")
def _jac(y, stoich, k, E, present, eps, pw, slope, dlog, J):
    """Analytic Jacobian ∂f/∂y of one system into J."""
    D, S = E.shape
    _factors(y, E, present, eps, True, pw, slope, dlog)
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
def _f(y, stoich, k, E, present, eps, pw, slope, dlog, out):
    """Right-hand side of one system's states into out."""
    D, S = E.shape
    _factors(y, E, present, eps, False, pw, slope, dlog)
    for a in range(S):
        out[a] = 0.0
    for j in range(D):
        r = k[j]
        for s in range(S):
            r *= pw[j, s]
        for a in range(S):
            out[a] += stoich[a, j] * r


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
        _f(Y[c], stoich, K[c], EE[c], present, eps, pw, slope, dlog, F0[c])
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
            _f(Y[c], stoich, K[c], EE[c], present, eps, pw, slope, dlog, F0[c])
            _jac(Y[c], stoich, K[c], EE[c], present, eps, pw, slope, dlog, J)
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
                    _f(Ytmp, stoich, K[c], EE[c], present, eps, pw, slope, dlog, Ft)
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


def integrate_stiff(stoich, present, y0, k, E, t_out, *, rtol, atol, eps, sens=None,
                    max_steps=50_000):
    """Integrate one system with the compiled Rosenbrock 4(3) method.

    Parameters
    ----------
    stoich, present : as in :func:`integrate_batch`
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
    status, _, n_rhs = _ros_lockstep(Y0, np.ascontiguousarray(stoich, dtype=np.float64),
                                     K, EE, np.ascontiguousarray(present, dtype=np.bool_),
                                     float(eps), np.ascontiguousarray(t_out, dtype=np.float64),
                                     float(rtol), float(atol), int(max_steps), y_out)
    s_out = None
    if n_sens:
        s_out = ((y_out[1:1 + n_sens] - y_out[1 + n_sens:]) / (2 * steps[:, None, None])
                 ).transpose(1, 2, 0)
    return y_out[0], s_out, int(status), int(n_rhs)
