"""Simulation against closed-form integrated rate laws, and the table of methods.

Check values are copied from textbook closed forms (sources named beside each
test; the formulas are standard physical-chemistry results):
[Atkins] P. Atkins, J. de Paula, J. Keeler, Atkins' Physical Chemistry, 11th ed.,
OUP 2018, chapters on chemical kinetics; [Laidler] K. J. Laidler, Chemical
Kinetics, 3rd ed., 1987; [Espenson] J. H. Espenson, Chemical Kinetics and
Reaction Mechanisms, 2nd ed., 1995; [Gold] IUPAC Compendium of Chemical
Terminology, "rate of reaction". Chapter and page were not checked: from memory.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from conftest import MODELS
from scipy.integrate import solve_ivp

from kinfit.core.errors import KinfitError
from kinfit.inputs.mechanism import load_mechanism, mechanism_from_text
from kinfit.numerics.integrate import METHODS, describe_method, integrate_flat, simulate
from kinfit.numerics.rate_system import compile_mechanism

REL = 1e-6  # required agreement with the closed forms


def one_step(reaction, rate, **params):
    lines = [f'[[steps]]\nreaction = "{reaction}"\nrate = "{rate}"\n[parameters]']
    lines += [f"{k} = {v!r}" for k, v in params.items()]
    return mechanism_from_text("\n".join(lines) + "\n")


def test_zeroth_order_and_stop_at_zero():
    # [Atkins; Laidler] zeroth order: A = A0 - k t for t <= A0/k, then A = 0.
    # A0 = 1 M, k = 0.01 M/s: A(30 s) = 0.7 M; exhausted at 100 s.
    mech = one_step("A -> P", "k", k=0.01)
    traj = simulate(mech, {"A": 1.0}, times=[0.0, 30.0, 50.0, 99.0, 150.0])
    assert traj["A"][1] == pytest.approx(0.7, rel=REL)
    assert traj["A"][2] == pytest.approx(0.5, rel=REL)          # half-life A0/(2k) = 50 s
    assert traj["A"][3] == pytest.approx(0.01, rel=1e-5)
    assert abs(traj["A"][4]) < 1e-8                             # clamped at 0, not negative
    assert traj["P"][4] == pytest.approx(1.0, rel=REL)


def test_first_order():
    # [Atkins; Laidler] A = A0 exp(-k t); A0 = 1 M, k = 0.1/s: A(10 s) = 0.367879441171442
    mech = one_step("A -> P", "k * [A]", k=0.1)
    traj = simulate(mech, {"A": 1.0}, times=[0.0, 6.93147180559945, 10.0])
    assert traj["A"][2] == pytest.approx(0.367879441171442, rel=REL)
    assert traj["A"][1] == pytest.approx(0.5, rel=REL)          # t1/2 = ln 2 / k


def test_second_order_species_rate_convention():
    # [Atkins; Laidler] dA/dt = -k A^2 (a step A -> P, stoichiometric number 1,
    # with rate k[A]^2): A = A0/(1 + k A0 t); A0 = 1, k = 0.5: A(10) = 0.166666666666667.
    mech = one_step("A -> P", "k * [A]^2", k=0.5)
    traj = simulate(mech, {"A": 1.0}, times=[0.0, 2.0, 10.0])
    assert traj["A"][2] == pytest.approx(0.166666666666667, rel=REL)
    assert traj["A"][1] == pytest.approx(0.5, rel=REL)          # t1/2 = 1/(k A0)


def test_second_order_iupac_rate_of_reaction():
    # [Gold "rate of reaction"; Atkins] 2A -> P with v = -(1/2) dA/dt = k A^2:
    # 1/A = 1/A0 + 2 k t; A0 = 1, k = 0.5: A(10) = 0.0909090909090909.
    mech = one_step("2 A -> P", "k * [A]^2", k=0.5)
    traj = simulate(mech, {"A": 1.0}, times=[0.0, 10.0])
    assert traj["A"][1] == pytest.approx(0.0909090909090909, rel=REL)
    assert traj["P"][1] == pytest.approx((1.0 - 0.0909090909090909) / 2, rel=REL)


def test_second_order_a_plus_b_unequal():
    # [Laidler; Espenson] A + B -> P, v = k A B, A0 = 1, B0 = 2 M, k = 0.1 /(M s):
    # A(t) = A0 (B0 - A0)/(B0 exp((B0 - A0) k t) - A0); A(5 s) = 0.435266598393584
    mech = one_step("A + B -> P", "k * [A] * [B]", k=0.1)
    traj = simulate(mech, {"A": 1.0, "B": 2.0}, times=[0.0, 5.0])
    a, b = traj["A"][1], traj["B"][1]
    assert a == pytest.approx(0.435266598393584, rel=REL)
    # ln(B A0 / (A B0)) = (B0 - A0) k t = 0.5
    assert math.log(b * 1.0 / (a * 2.0)) == pytest.approx(0.5, rel=REL)


def test_second_order_a_plus_b_nearly_equal():
    # [Laidler] near A0 = B0 the closed form is singular; the limit is
    # 1/A = 1/A0 + k t. A0 = 1, B0 = 1 + 1e-9, k = 0.1, t = 5: A ~ 1/1.5.
    mech = one_step("A + B -> P", "k * [A] * [B]", k=0.1)
    traj = simulate(mech, {"A": 1.0, "B": 1.0 + 1e-9}, times=[0.0, 5.0])
    assert traj["A"][1] == pytest.approx(1.0 / 1.5, rel=1e-6)


@pytest.mark.parametrize("n, a0, k, t, expected", [
    (1.5, 4.0, 0.25, 4.0, 1.0),          # nth_1.5_A
    (3.0, 1.0, 0.5, 3.0, 0.5),           # nth_3_A
    (0.5, 1.0, 0.1, 5.0, 0.5625),        # nth_0.5_A
])
def test_nth_order(n, a0, k, t, expected):
    # [Atkins; Laidler] dA/dt = -k A^n, A = (A0^(1-n) - (1-n) k t)^(1/(1-n))
    mech = one_step("A -> P", f"k * [A]^{n}", k=k)
    traj = simulate(mech, {"A": a0}, times=[0.0, t])
    assert traj["A"][1] == pytest.approx(expected, rel=REL)


@pytest.mark.parametrize("n, a0, k", [(1.5, 4.0, 0.25), (3.0, 1.0, 0.5), (0.5, 1.0, 0.1)])
def test_nth_order_half_life(n, a0, k):
    # [Atkins] t1/2 = (2^(n-1) - 1)/((n-1) k A0^(n-1))
    thalf = (2 ** (n - 1) - 1) / ((n - 1) * k * a0 ** (n - 1))
    mech = one_step("A -> P", f"k * [A]^{n}", k=k)
    traj = simulate(mech, {"A": a0}, times=[0.0, thalf])
    assert traj["A"][1] / a0 == pytest.approx(0.5, rel=REL)


def test_fractional_order_runs_out_without_nan():
    # [Laidler] for n < 1 the reactant is used up at t_end = A0^(1-n)/((1-n) k):
    # n = 0.5, A0 = 1, k = 0.1 -> t_end = 20 s. Beyond it, A stays at zero.
    mech = one_step("A -> P", "k * [A]^0.5", k=0.1)
    traj = simulate(mech, {"A": 1.0}, times=np.linspace(0.0, 60.0, 61))
    assert np.isfinite(traj.conc).all()
    assert np.all(np.abs(traj["A"][21:]) < 1e-8)
    assert traj["P"][-1] == pytest.approx(1.0, rel=REL)


def test_reversible_first_order():
    # [Atkins; Espenson] A <=> B, k1 = 2, k-1 = 1 /s, A0 = 1, B0 = 0:
    # A(t) = Aeq + (A0 - Aeq) exp(-(k1 + k-1) t), Aeq = 1/3; A(0.5 s) = 0.482086773432287
    mech = mechanism_from_text("""
        [[steps]]
        reaction = "A <=> B"
        rate = "kf * [A]"
        reverse_rate = "kr * [B]"
        [parameters]
        kf = 2.0
        kr = 1.0
    """)
    traj = simulate(mech, {"A": 1.0}, times=[0.0, 0.5, 50.0])
    assert traj["A"][1] == pytest.approx(0.482086773432287, rel=REL)
    assert traj["B"][2] / traj["A"][2] == pytest.approx(2.0, rel=REL)   # K = k1/k-1


CONSECUTIVE = """
    [[steps]]
    reaction = "A -> B"
    rate = "k1 * [A]"
    [[steps]]
    reaction = "B -> C"
    rate = "k2 * [B]"
    [parameters]
    k1 = 1.0
    k2 = 2.0
"""


@pytest.mark.parametrize("k2, b1, c1, tmax, bmax", [
    # [Atkins; Laidler; Espenson] B = A0 k1/(k2 - k1)(exp(-k1 t) - exp(-k2 t)),
    # t_max = ln(k1/k2)/(k1 - k2), B_max = A0 (k1/k2)^(k2/(k2 - k1))
    (2.0, 0.23254415793483, 0.399576400893728, 0.693147180559945, 0.25),
    # k1 = k2 = k limit: B = A0 k t exp(-k t), t_max = 1/k, B_max = A0/e
    (1.0, 0.367879441171442, 0.264241117657115, 1.0, 0.367879441171442),
])
def test_consecutive_first_order(k2, b1, c1, tmax, bmax):
    mech = mechanism_from_text(CONSECUTIVE)
    traj = simulate(mech, {"A": 1.0}, {"k2": k2}, times=[0.0, 1.0])
    assert traj["B"][1] == pytest.approx(b1, rel=REL)
    assert traj["C"][1] == pytest.approx(c1, rel=REL)
    at_max = simulate(mech, {"A": 1.0}, {"k2": k2}, times=[0.0, tmax])
    assert at_max["B"][1] == pytest.approx(bmax, rel=REL)


def test_pseudo_first_order_exact_solution():
    # [Espenson; Atkins] A + B, A0 = 1e-3, B0 = 1e-2 M, k = 1 /(M s): exact A(100 s)
    # from the A + B closed form = 0.000381420076852974 (not the pseudo-first-order
    # approximation 0.000367879441171442).
    mech = one_step("A + B -> P", "k * [A] * [B]", k=1.0)
    traj = simulate(mech, {"A": 1e-3, "B": 1e-2}, times=[0.0, 100.0])
    assert traj["A"][1] == pytest.approx(0.000381420076852974, rel=REL)


def test_stiff_pre_equilibrium_matches_radau():
    # Reference integrator: scipy's Radau at tight tolerance on the same equations
    # (general-purpose reference library, independent of LSODA).
    mech = mechanism_from_text("""
        [[steps]]
        reaction = "A + B <=> I"
        rate = "k1 * [A] * [B]"
        reverse_rate = "k_1 * [I]"
        [[steps]]
        reaction = "I -> P"
        rate = "k2 * [I]"
        [parameters]
        k1 = 1e5
        k_1 = 1e4
        k2 = 0.1
    """)
    times = np.array([0.0, 1.0, 10.0, 60.0])
    traj = simulate(mech, {"A": 1.0, "B": 0.5}, times=times)

    def f(t, y):
        a, b, i, p = y
        r1, r2, r3 = 1e5 * a * b, 1e4 * i, 0.1 * i
        return [-r1 + r2, -r1 + r2, r1 - r2 - r3, r3]

    ref = solve_ivp(f, (0, 60), [1.0, 0.5, 0.0, 0.0], method="Radau", t_eval=times,
                    rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(traj.conc.T[:, 1:], ref.y[:, 1:], rtol=1e-6, atol=1e-12)


@pytest.mark.parametrize("method", ["BDF", "Radau", "DOP853"])
def test_other_integrators_agree(method):
    # [Atkins] first order again, through the other solve_ivp methods.
    mech = one_step("A -> P", "k * [A]", k=0.1)
    traj = simulate(mech, {"A": 1.0}, times=[0.0, 10.0], method=method)
    assert traj["A"][1] == pytest.approx(0.367879441171442, rel=REL)
    assert traj.method == method


def test_simulate_checks_its_inputs():
    mech = one_step("A -> P", "k * [A]", k=0.1)
    with pytest.raises(KinfitError, match="no species 'Q'"):
        simulate(mech, {"Q": 1.0})
    with pytest.raises(KinfitError, match="no parameter named 'kk'"):
        simulate(mech, {"A": 1.0}, {"kk": 1.0})
    with pytest.raises(KinfitError, match="increasing"):
        simulate(mech, {"A": 1.0}, times=[0.0, 5.0, 2.0])
    with pytest.raises(KinfitError, match="non-negative"):
        simulate(mech, {"A": -1.0})
    with pytest.raises(KinfitError, match="unknown integrator"):
        simulate(mech, {"A": 1.0}, method="Euler")


@pytest.mark.parametrize("path", sorted(MODELS.glob("*.toml")), ids=lambda p: p.name)
def test_every_model_agrees_with_scipy_radau(path):
    # Reference: scipy's Radau at rtol 1e-12 on the same right-hand side.
    mech = load_mechanism(path)
    system = compile_mechanism(mech)
    values = np.array([mech.values()[n] for n in mech.parameter_names])
    start = np.linspace(1.0, 0.5, mech.n_species)
    t = np.linspace(0.0, 30.0, 16)
    traj = simulate(mech, dict(zip(mech.species, start)), times=t)
    k, orders = system.rate_arrays(values)
    ref = solve_ivp(lambda _, y: system.rhs(y[None], k, orders, 1e-9)[0],
                    (0, 30), start, method="Radau", t_eval=t, rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(traj.conc, ref.y.T, rtol=1e-6, atol=1e-9)


def test_stiff_system_is_handed_to_the_implicit_method():
    # "auto": the explicit method finds the fast pre-equilibrium stiff, the compiled
    # Rosenbrock method finishes it; scipy's Radau is the reference.
    system = compile_mechanism(load_mechanism(MODELS / "pre_equilibrium.toml"))
    y0 = [1.0, 0.5, 0.0, 0.0]
    k, orders = system.rate_arrays(np.array([1e5, 1e4, 0.1]))
    sol = integrate_flat(system.stoichiometry, system.present, np.array([y0]), k, orders,
                         np.linspace(0, 60, 7), np.array([0, 7]))
    assert sol.ok[0] and sol.n_stiff == 1 and sol.n_compiled == 0 and sol.n_implicit == 0
    ref = integrate_flat(system.stoichiometry, system.present, np.array([y0]), k, orders,
                         np.linspace(0, 60, 7), np.array([0, 7]), method="Radau")
    assert ref.n_implicit == 1 and ref.n_compiled == 0
    np.testing.assert_allclose(sol.conc, ref.conc, rtol=1e-6, atol=1e-10)
    # "compiled" does not hand it over: it fails and says why
    alone = integrate_flat(system.stoichiometry, system.present, np.array([y0]), k, orders,
                           np.linspace(0, 60, 7), np.array([0, 7]), method="compiled")
    assert not alone.ok[0] and "stiff" in alone.message


def test_table_of_methods_and_their_description():
    assert list(METHODS) == ["auto", "compiled", "LSODA", "BDF", "Radau", "RK45", "DOP853"]
    assert describe_method("Radau", 3, 4, tally=True) == "Radau"
    assert describe_method("auto") == "compiled Dormand-Prince 5(4)"
    assert describe_method("auto", n_stiff=1) == "compiled Rosenbrock 4(3)"
    assert describe_method("auto", n_stiff=1, n_implicit=1) == "LSODA"
    assert describe_method("auto", 2, 5, tally=True) == (
        "compiled Dormand-Prince 5(4); compiled Rosenbrock 4(3) for 2 stiff run "
        "evaluation(s); LSODA for 5 run evaluation(s)")
    mech = one_step("A -> P", "k * [A]", k=0.1)
    assert simulate(mech, {"A": 1.0}, times=[0.0, 1.0]).method == "compiled Dormand-Prince 5(4)"
