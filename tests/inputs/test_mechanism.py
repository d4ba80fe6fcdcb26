"""Model files: loading, checks, steps and directions, rate-law text, copies."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from conftest import MODELS

from kinfit.core.errors import KinfitError, KinfitWarning
from kinfit.inputs.mechanism import format_rate_law, load_mechanism, mechanism_from_text
from kinfit.numerics.integrate import simulate


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


def test_species_and_roles():
    mech = load_mechanism(MODELS / "power_law_two.toml")
    assert mech.species == ("A", "B", "P")
    assert mech.rate_constants == ("k",)
    assert mech.orders == ("m", "n")


def test_reversible_step_has_two_directions_and_held_species_come_last():
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
    step = mech.steps[0]
    assert mech.directions == ((0, step.forward, 1.0), (0, step.reverse, -1.0))
    assert [law.constant for _, law, _ in mech.directions] == ["kf", "kr"]


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


def test_a_mechanism_is_a_specification_without_arrays():
    # the arrays of the rate equations are built by kinfit.numerics.rate_system
    from dataclasses import fields

    mech = load_mechanism(MODELS / "pre_equilibrium.toml")
    assert [f.name for f in fields(mech)] == ["name", "species", "held_constant", "steps",
                                               "parameters", "source", "description",
                                               "temperature"]
    assert not any(isinstance(getattr(mech, f.name), np.ndarray) for f in fields(mech))
