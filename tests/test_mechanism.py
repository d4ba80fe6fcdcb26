"""Model files: loading, checks, stoichiometry and the rate equations."""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from conftest import MODELS
from kinfit.core.errors import KinfitError, KinfitWarning
from kinfit.inputs.mechanism import (format_rate_law, jacobian, load_mechanism, mechanism_from_text,
                              rhs)
from kinfit.numerics.simulate import simulate


@pytest.mark.parametrize("path", sorted(MODELS.glob("*.toml")), ids=lambda p: p.name)
def test_every_shipped_model_loads_and_simulates(path):
    text = path.read_text(encoding="utf-8")
    assert text.startswith("#"), "each model file opens with a comment saying what it is"
    mech = load_mechanism(path)
    start = {s: 1.0 for s in mech.species}
    traj = simulate(mech, start, times=np.linspace(0, 10, 11))
    assert traj.success and np.isfinite(traj.conc).all()


def test_at_least_the_required_models_are_shipped():
    names = {p.stem for p in MODELS.glob("*.toml")}
    assert {"power_law_one", "power_law_two", "power_law_three", "first_order",
            "second_order", "reversible", "consecutive", "parallel", "pre_equilibrium",
            "autocatalytic"} <= names


def test_species_roles_and_stoichiometry():
    mech = load_mechanism(MODELS / "power_law_two.toml")
    assert mech.species == ("A", "B", "P")
    assert mech.rate_constants == ("k",)
    assert mech.orders == ("m", "n")
    np.testing.assert_array_equal(mech.stoichiometry, [[-1], [-1], [1]])


def test_iupac_convention_two_a():
    # IUPAC Gold Book, "rate of reaction" (from memory): d[X]/dt = nu_X v.
    # For 2 A -> P with v = k[A]^2: d[A]/dt = -2 k [A]^2, d[P]/dt = +k [A]^2.
    mech = load_mechanism(MODELS / "second_order.toml")
    k, orders = mech.rate_arrays([0.5])
    d = rhs(np.array([[0.4, 0.0]]), k, orders, mech.present, 1e-9, mech.stoichiometry)
    np.testing.assert_allclose(d, [[-2 * 0.5 * 0.16, 0.5 * 0.16]])


def test_stoichiometry_does_not_set_orders():
    # A + 2 B -> P with rate k [A] [B]: B is used twice as fast, order in B stays 1.
    mech = mechanism_from_text("""
        [[steps]]
        reaction = "A + 2 B -> P"
        rate = "k * [A] * [B]"
        [parameters]
        k = 1.0
    """)
    k, orders = mech.rate_arrays([1.0])
    d = rhs(np.array([[0.5, 2.0, 0.0]]), k, orders, mech.present, 1e-9, mech.stoichiometry)
    np.testing.assert_allclose(d, [[-1.0, -2.0, 1.0]])


def test_reversible_and_held_constant():
    mech = mechanism_from_text("""
        held_constant = ["H"]
        [[steps]]
        reaction = "A <=> B"
        rate = "kf * [A] * [H]"
        reverse_rate = "kr * [B]"
        [parameters]
        kf = 2.0
        kr = 1.0
    """)
    assert mech.species == ("A", "B", "H")
    assert len(mech.directions) == 2
    np.testing.assert_array_equal(mech.stoichiometry, [[-1, 1], [1, -1], [0, 0]])
    traj = simulate(mech, {"A": 1.0, "H": 0.5}, times=[0.0, 5.0])
    assert traj["H"][-1] == 0.5


def test_analytic_jacobian_matches_finite_differences():
    # Central differences as an independent check (common practice).
    mech = load_mechanism(MODELS / "pre_equilibrium.toml")
    values = np.array([mech.values()[n] for n in mech.parameter_names])
    k, orders = mech.rate_arrays(values)
    c = np.array([[0.7, 0.4, 0.05, 0.2]])
    jac = jacobian(c, k, orders, mech.present, 1e-12, mech.stoichiometry)[0]
    h = 1e-6
    fd = np.empty((4, 4))
    for j in range(4):
        up, down = c.copy(), c.copy()
        up[0, j] += h
        down[0, j] -= h
        fd[:, j] = (rhs(up, k, orders, mech.present, 1e-12, mech.stoichiometry)
                    - rhs(down, k, orders, mech.present, 1e-12, mech.stoichiometry))[0] / (2 * h)
    np.testing.assert_allclose(jac, fd, rtol=1e-6, atol=1e-9)


def test_fractional_order_jacobian_is_finite_at_zero():
    mech = load_mechanism(MODELS / "power_law_one.toml")
    k, orders = mech.rate_arrays([0.1, 0.5])
    jac = jacobian(np.array([[0.0, 1.0]]), k, orders, mech.present, 1e-9, mech.stoichiometry)
    assert np.isfinite(jac).all()


def test_format_rate_law_shows_fitted_orders_with_decimals():
    mech = load_mechanism(MODELS / "power_law_two.toml")
    law = mech.steps[0].forward
    assert format_rate_law(law) == "k [A]^m [B]^n"
    assert format_rate_law(law, {"m": 1.0004, "n": 2.0}) == "k [A]^1.000 [B]^2.000"


def test_overall_orders():
    mech = load_mechanism(MODELS / "power_law_three.toml")
    assert mech.overall_orders({"m": 1.0, "n": 0.5, "q": 1.0})["k"] == pytest.approx(2.5)


# ---------------------------------------------------------------- bad input

def load(files, text, name="model.toml"):
    return load_mechanism(files(name, text))


@pytest.mark.parametrize("text, message", [
    ('name = "x"\n', "no steps"),
    ("[[steps]]\nreaction = \"A -> P\"\nrate = \"k*[A]\"\n", r"line 3 \(steps\[1\]\.rate\).*k is used in the rate law but not defined"),
    ('[[steps]]\nreaction = "A -> P"\nrate = "k*[A]*[cat]"\n[parameters]\nk = 1\n',
     r"\[cat\] is in the rate law but in no reaction.*held_constant"),
    ('[[steps]]\nreaction = "A ->"\nrate = "k*[A]"\n[parameters]\nk = 1\n',
     r"line 2 \(steps\[1\]\.reaction\): nothing on the right side"),
    ('[[steps]]\nreaction = "A -> P"\nrate = "k*[A]"\n[parameters]\nk = { value = 1, min = 2, max = 1 }\n',
     r"line 5 \(parameters\.k\): min \(2\) is larger than max \(1\)"),
    ('[[steps]]\nreaction = "A -> P"\nrate = "k*[A]^n"\n[parameters]\nk = 1\nn = { value = 5, min = 0, max = 3 }\n',
     r"parameters\.n.*outside its bounds"),
    ('[[steps]]\nreaction = "A -> P"\nrate = "k*[A]"\n[parameters]\nk = { value = 1, min = -1 }\n',
     "cannot be negative"),
    ('[[steps]]\nreaction = "A -> P"\nrate = "k*[A]"\n[parameters]\nk = 0\n',
     "positive starting value"),
    ('[[steps]]\nreaction = "A -> P"\nrate = "k*[A]^k"\n[parameters]\nk = 1\n',
     "both as a rate constant and as an order"),
    ('[[steps]]\nreaction = "A <=> P"\nrate = "k*[A]"\n[parameters]\nk = 1\n',
     "reversible, so it needs reverse_rate"),
    ('[[steps]]\nreaction = "A -> P"\nrate = "k*[A]"\nreverse_rate = "k*[P]"\n[parameters]\nk = 1\n',
     "only a reversible step"),
    ('[[steps]]\nreaction = "A -> P"\nrate = "k*[A]"\nspeed = 2\n[parameters]\nk = 1\n',
     "unknown key 'speed'"),
    ('colour = "red"\n[[steps]]\nreaction = "A -> P"\nrate = "k*[A]"\n',
     r"line 1: unknown key 'colour'"),
    ('[[steps]]\nreaction = "A -> P"\nrate = "k*[A]"\n[parameters]\nk = { value = "1" }\n',
     "value must be a number"),
    ('[[steps]]\nreaction = "A -> P"\nrate = "k*[A]"\n[parameters]\nk = { value = 1, vary = "no" }\n',
     "vary must be true or false"),
    ('[[steps]]\nreaction = "A -> P"\nrate = "k*[A]"\n[parameters]\nk = { value = 1, step = 2 }\n',
     "unknown key 'step'"),
    ('[[steps]]\nreaction = "A -> P"\nrate = "k*[A]"\n[parameters]\nk = 1\nk = 2\n',
     r"line 6, column \d+: not valid TOML"),
    ('[[steps]]\nreaction = "A -> P"\nrate = "k*[A]\n', r"line 3, column \d+: not valid TOML"),
    ('[[steps]]\nrate = "k*[A]"\n', r"steps\[1\]\.reaction\): missing"),
    ('[[steps]]\nreaction = "A -> P"\n', r"steps\[1\]\.rate\): missing"),
    ('held_constant = "cat"\n[[steps]]\nreaction = "A -> P"\nrate = "k*[A]"\n',
     "expected a list of species names"),
])
def test_bad_model_files(files, text, message):
    with pytest.raises(KinfitError, match=message):
        load(files, text)


@pytest.mark.parametrize("field, value", [
    ("rate", "__import__('os').system('touch pwned')"),
    ("rate", "k * [A]^(().__class__.__bases__[0])"),
    ("rate", "k * [A] if True else 0"),
    ("rate", "lambda x: x"),
    ("rate", "k * [A]^compile('1', 'f', 'single')"),
    ("reaction", "__import__('os').system('touch pwned') -> P"),
    ("reaction", "A.__class__ -> P"),
])
def test_model_text_never_runs_code(files, field, value, monkeypatch):
    # The parser refuses code-like text; a tripwire on eval/exec proves nothing ran.
    import builtins

    def tripwire(*args, **kwargs):
        raise AssertionError("eval/exec was called")

    monkeypatch.setattr(builtins, "eval", tripwire)
    monkeypatch.setattr(builtins, "exec", tripwire)
    step = {"reaction": "A -> P", "rate": "k * [A]"}
    step[field] = value
    quote = "'" * 3  # TOML literal strings take the text as it is
    text = (f"[[steps]]\nreaction = {quote}{step['reaction']}{quote}\n"
            f"rate = {quote}{step['rate']}{quote}\n[parameters]\nk = 1\n")
    with pytest.raises(KinfitError):
        load(files, text)
    assert not (files.folder / "pwned").exists()


def test_unused_parameter_is_a_warning(files):
    with pytest.warns(KinfitWarning, match="unused_k is defined but not used"):
        mech = load(files, '[[steps]]\nreaction = "A -> P"\nrate = "k*[A]"\n'
                           '[parameters]\nk = 1\nunused_k = 2\n')
    assert mech.parameters["unused_k"].role == "unused"


def test_bad_parameter_names(files):
    with pytest.raises(KinfitError, match="log10_"):
        load(files, '[[steps]]\nreaction = "A -> P"\nrate = "log10_k*[A]"\n'
                    '[parameters]\nlog10_k = 1\n')


def test_missing_model_file(tmp_path):
    with pytest.raises(KinfitError, match="model file .*not found"):
        load_mechanism(tmp_path / "nope.toml")


def test_no_warning_for_a_clean_model():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        load_mechanism(MODELS / "pre_equilibrium.toml")


def test_with_fixed_and_with_start():
    from kinfit.inputs.mechanism import with_fixed, with_start

    free = load_mechanism(MODELS / "power_law_two.toml")
    fixed = with_fixed(free, {"m": 1.5}, name="m fixed")
    assert fixed.name == "m fixed" and fixed.parameters["m"].value == 1.5
    assert not fixed.parameters["m"].vary and free.parameters["m"].vary    # a copy
    # the compiled arrays are shared: fixing changes values, not the layout
    k, orders = fixed.rate_arrays([0.5, 1.5, 2.0])
    assert orders[0, 0, fixed.species.index("A")] == 1.5
    with pytest.raises(KinfitError, match="cannot fix m at 3.5; the model allows m from 0 "
                                          "to 3"):
        with_fixed(free, {"m": 3.5})
    with pytest.raises(KinfitError, match="no parameter named 'q'"):
        with_fixed(free, {"q": 1})
    started = with_start(fixed, {"k": 2e-3, "m": 0.2, "n": 9.0})
    assert started.parameters["k"].value == 2e-3
    assert started.parameters["m"].value == 1.5          # fixed: left alone
    assert started.parameters["n"].value == 3.0          # clipped into its bounds
    assert with_start(free, {"k": -1.0}).parameters["k"].value == 0.5   # log scale: kept
