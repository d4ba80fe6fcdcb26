"""Which candidates are nested in which, and the F and likelihood-ratio tests of each pair.

A candidate is nested in another when it is the other with some parameters
fixed or tied. kinfit finds this from the models' structure (:func:`nests`),
not from their names, with bounds ignored. For such pairs the extra-sum-of-squares
F-test and the likelihood-ratio test (:mod:`kinfit.analysis.criteria`) are
reported. When the fixed value lies on a bound of the larger model (an order
fixed at its minimum 0) the χ² reference distribution is conservative (Self &
Liang 1987, from memory), and the pair is flagged (:func:`on_boundary`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from kinfit.analysis.criteria import f_test, likelihood_ratio_test
from kinfit.inputs.parameters import Role
from kinfit.numerics.rate_system import compile_mechanism

__all__ = ["NestedTest", "structure", "nests", "on_boundary", "nested_tests"]


@dataclass(frozen=True)
class NestedTest:
    """Tests of a candidate against a larger one that contains it.

    Attributes
    ----------
    smaller, larger : str
    extra_params : int
        p_l − p_s.
    df_residual : int
        N − p_l.
    f_statistic, f_pvalue : float
        Extra-sum-of-squares F-test with (extra_params, N − p_l) degrees of
        freedom.
    lr_statistic, lr_pvalue : float
        Likelihood-ratio statistic 2(ln L_l − ln L_s) against χ²(extra_params).
    on_boundary : bool
        The smaller model fixes a parameter at a bound of the larger: the
        p-values are conservative (too large).
    note : str
    """

    smaller: str
    larger: str
    extra_params: int
    df_residual: int
    f_statistic: float
    f_pvalue: float
    lr_statistic: float
    lr_pvalue: float
    on_boundary: bool = False
    note: str = ""


def structure(mech):
    """Arrays describing `mech` for the nesting checks.

    Parameters
    ----------
    mech : Mechanism

    Returns
    -------
    dict
        ``species`` order, ``stoich`` [n_species, n_dir], per-direction rate
        constant names and factors, and the orders as an affine map of the
        free order parameters: E = e0 + C θ, flattened over (direction,
        species).
    """
    names = mech.parameter_names
    params = mech.parameters
    free = [i for i, n in enumerate(names) if params[n].vary and params[n].role == Role.ORDER]
    base = np.array([params[n].value for n in names])
    base[free] = 0.0            # e0: the orders with every free order parameter at 0
    system = compile_mechanism(mech)
    _, e0 = system.rate_arrays(base)
    columns = []
    for i in free:
        row = base.copy()
        row[i] += 1.0
        columns.append((system.rate_arrays(row)[1] - e0).ravel())
    e0 = e0.ravel()
    return {
        "species": mech.species,
        "held": frozenset(mech.held_constant),
        "stoich": system.stoichiometry,
        "constants": tuple(law.constant for _, law, _ in mech.directions),
        "factors": np.array([law.factor for _, law, _ in mech.directions]),
        "e0": e0,
        "C": np.column_stack(columns) if columns else np.zeros((e0.size, 0)),
        "free_orders": tuple(names[i] for i in free),
        "params": params,
        "temperature": getattr(mech, "temperature", None),
        "others": {n: p for n, p in params.items()
                   if p.role not in (Role.ORDER, Role.RATE_CONSTANT)},
    }


def _aligned(small, large):
    """Small's orders re-indexed to large's species order (e0, C), or None."""
    if set(small["species"]) != set(large["species"]) or small["held"] != large["held"]:
        return None
    idx = [small["species"].index(s) for s in large["species"]]
    n_dir = len(small["constants"])
    if n_dir != len(large["constants"]):
        return None
    if not np.allclose(small["stoich"][idx], large["stoich"], atol=1e-12):
        return None
    n_sp = len(idx)
    e0 = small["e0"].reshape(n_dir, n_sp)[:, idx].ravel()
    c = small["C"].reshape(n_dir, n_sp, -1)[:, idx, :].reshape(n_dir * n_sp, -1)
    return e0, c, idx


def nests(small, large, tol=1e-9):
    """Whether mechanism `small` is mechanism `large` with parameters fixed or tied.

    The two must have the same species, held-constant species, steps (same
    stoichiometry, direction by direction) and temperature laws, and the
    same other parameters (activation energies), fixed in `small` wherever
    `large` fixes them. Then `small` is nested in
    `large` when (1) every set of directions sharing a rate constant in
    `large` shares one in `small` with the same ratio of factors, and a rate
    constant `large` fixes is fixed to the same rate in `small`; and (2) the
    orders `small` can reach, an affine set e0_s + C_s θ_s, lie inside those
    `large` can reach: e0_s − e0_l and the columns of C_s are in the column
    space of C_l. Bounds are ignored.

    Parameters
    ----------
    small, large : Mechanism
    tol : float

    Returns
    -------
    bool
    """
    return _nests(structure(small), structure(large), tol)


def _nests(s, l, tol=1e-9):
    """:func:`nests` on two structures from :func:`structure`."""
    aligned = _aligned(s, l)
    if aligned is None or s["temperature"] != l["temperature"]:
        return False
    # other parameters (activation energies): the same ones, and those the larger
    # model fixes are fixed to the same value in the smaller
    if set(s["others"]) != set(l["others"]):
        return False
    for name, p_l in l["others"].items():
        p_s = s["others"][name]
        if not p_l.vary and (p_s.vary or not math.isclose(p_s.value, p_l.value,
                                                          rel_tol=1e-12)):
            return False
    e0_s, c_s, _ = aligned
    n_dir = len(l["constants"])
    for i in range(n_dir):
        k_l, k_s = l["params"][l["constants"][i]], s["params"][s["constants"][i]]
        if not k_l.vary and (k_s.vary or not math.isclose(
                k_s.value * s["factors"][i], k_l.value * l["factors"][i], rel_tol=1e-9)):
            return False
        for j in range(i + 1, n_dir):
            if l["constants"][i] == l["constants"][j]:
                if s["constants"][i] != s["constants"][j] or not math.isclose(
                        s["factors"][i] / l["factors"][i], s["factors"][j] / l["factors"][j],
                        rel_tol=1e-9):
                    return False
    target = np.column_stack([e0_s - l["e0"], c_s])
    if l["C"].shape[1] == 0:
        return bool(np.all(np.abs(target) <= tol))
    sol, *_ = np.linalg.lstsq(l["C"], target, rcond=None)
    return bool(np.all(np.abs(l["C"] @ sol - target) <= tol * max(1.0, np.abs(target).max())))


def on_boundary(small, large, small_fit):
    """Whether the smaller model's orders or rate constants sit on a bound of the larger's.

    Parameters
    ----------
    small, large : dict
        Structures (:func:`structure`) of a nested pair, `small` nested in
        `large`.
    small_fit : FitResult
        The smaller model's fit; only its ``values`` are read.

    Returns
    -------
    bool
        True when a free order of `large`, at the value the smaller fit
        implies, or a rate constant `large` fits and `small` fixes lies on
        one of `large`'s bounds.
    """
    e0_s, c_s, _ = _aligned(small, large)
    theta_s = np.array([small_fit.values[n] for n in small["free_orders"]])
    orders = e0_s + (c_s @ theta_s if theta_s.size else 0.0)
    if large["C"].shape[1]:
        theta_l, *_ = np.linalg.lstsq(large["C"], orders - large["e0"], rcond=None)
        if np.linalg.matrix_rank(large["C"]) == large["C"].shape[1]:
            for name, value in zip(large["free_orders"], theta_l):
                p = large["params"][name]
                if _at(value, p.min) or _at(value, p.max):
                    return True
    for i, name in enumerate(large["constants"]):
        k_l, k_s = large["params"][name], small["params"][small["constants"][i]]
        if k_l.vary and not k_s.vary:
            value = k_s.value * small["factors"][i] / large["factors"][i]
            if _at(value, k_l.min) or _at(value, k_l.max):
                return True
    return False


def _at(value, bound):
    return math.isfinite(bound) and abs(value - bound) <= 1e-9 * max(1.0, abs(bound))


def nested_tests(rows, n_points):
    """F and likelihood-ratio tests of every nested pair among ranked candidates.

    Parameters
    ----------
    rows : sequence of Ranked
    n_points : int

    Returns
    -------
    tests : tuple of NestedTest
    equivalent : list of (str, str)
        Pairs of candidates that are the same model written twice (each
        nested in the other, with equal χ²).
    """
    structures = [structure(r.fit.mechanism) for r in rows]
    tests, equivalent = [], []
    for i, small in enumerate(rows):
        for j, large in enumerate(rows):
            if i == j or small.n_params > large.n_params:
                continue
            if small.n_params == large.n_params:
                # the same model written twice fits the same data equally well, so
                # only pairs with equal χ² need the (costlier) structural check
                if i < j and math.isclose(small.chisqr, large.chisqr, rel_tol=1e-6) and \
                        _nests(structures[i], structures[j]) and \
                        _nests(structures[j], structures[i]):
                    equivalent.append((small.name, large.name))
                continue
            if not _nests(structures[i], structures[j]):
                continue
            extra = large.n_params - small.n_params
            df2 = n_points - large.n_params
            if df2 <= 0:
                continue
            f, fp = f_test(small.chisqr, large.chisqr, small.n_params, large.n_params,
                           n_points)
            lr, lp = likelihood_ratio_test(small.log_likelihood, large.log_likelihood, extra)
            boundary = on_boundary(structures[i], structures[j], small.fit)
            notes = []
            if small.chisqr < large.chisqr * (1 - 1e-9):
                notes.append("the larger model fitted worse than the smaller one it contains, "
                             "so its fit missed the optimum; refit it with more starting "
                             "points")
            if boundary:
                notes.append("the smaller model fixes a value on a bound of the larger one; "
                             "these p-values are conservative (too large)")
            tests.append(NestedTest(small.name, large.name, extra, df2, f, fp, lr, lp,
                                    boundary, "; ".join(notes)))
    return tuple(tests), equivalent
