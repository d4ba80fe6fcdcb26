"""The reaction and rate-law parsers, including property-based tests."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from kinfit.inputs.expressions import (
    MAX_DEPTH,
    MAX_LENGTH,
    Affine,
    ParseError,
    parse_expression,
    parse_reaction,
    to_power_law,
)


def orders(law):
    return {s: (a.const, dict(a.coef)) for s, a in law.orders}


@pytest.mark.parametrize("text, constant, expected", [
    ("k * [A]^m * [B]^n", "k", {"A": (0.0, {"m": 1.0}), "B": (0.0, {"n": 1.0})}),
    ("k * [A] * [B]^2", "k", {"A": (1.0, {}), "B": (2.0, {})}),
    ("k*[A]**2", "k", {"A": (2.0, {})}),
    ("k[A][B]", "k", {"A": (1.0, {}), "B": (1.0, {})}),
    ("k · [A] × [B]^0.5", "k", {"A": (1.0, {}), "B": (0.5, {})}),
    ("k * [A] / [I]", "k", {"A": (1.0, {}), "I": (-1.0, {})}),
    ("k * [A]^-1", "k", {"A": (-1.0, {})}),
    ("k * [A]^(m - 1) * [A]", "k", {"A": (0.0, {"m": 1.0})}),
    ("k * ([A] * [B])^2", "k", {"A": (2.0, {}), "B": (2.0, {})}),
    ("k * [A]^(0.5*n)", "k", {"A": (0.0, {"n": 0.5})}),
    ("k", "k", {}),
    ("((k)) * (([ A ]))", "k", {"A": (1.0, {})}),
])
def test_power_laws(text, constant, expected):
    law = to_power_law(text)
    assert law.constant == constant
    assert orders(law) == expected


def test_numeric_factor_and_overall_order():
    law = to_power_law("2 * k * [A]^m * [B]")
    assert law.factor == 2.0
    assert law.overall_order({"m": 1.5}) == pytest.approx(2.5)
    assert law.order_parameters == ("m",)


@pytest.mark.parametrize("text, message", [
    ("", "empty"),
    ("k * [A] + k2 * [B]", "sums and differences"),
    ("-k * [A]", "must be positive"),
    ("k * K * [A]", "exactly one rate constant"),
    ("[A]^2", "exactly one rate constant"),
    ("k^2 * [A]", "first power"),
    ("k * [A]^[B]", "cannot be an exponent"),
    ("k * [A]^m^2", "exponent must be"),
    ("k * exp([A])", "functions"),
    ("k * [A", "unexpected character"),
    ("k * ([A]", "not closed"),
    ("k * [A])", r"unexpected '\)'"),
    ("k * [2A]", "not a concentration"),
    ("k * [A] ^", "ends too early"),
    ("k * [A]^100", "beyond"),
    ("k * 1e999 * [A]", "too large"),
    ("0 * k * [A]", "positive finite"),
    ("k * [A] / 0", "division by zero"),
    ("__import__('os').system('echo hi')", "unexpected character"),
    ("k.__class__", "unexpected character"),
    ("lambda: k", "unexpected character"),
    ("k * [A]; import os", "unexpected character"),
])
def test_refused_rate_laws(text, message):
    with pytest.raises(ParseError, match=message):
        to_power_law(text)


def test_deep_nesting_is_refused_not_a_crash():
    # Far deeper than Python's recursion limit would allow a naive parser.
    text = "(" * 100_00 + "k" + ")" * 100_00
    with pytest.raises(ParseError, match="long|nested"):
        to_power_law(text)
    text = "(" * (MAX_DEPTH + 1) + "k" + ")" * (MAX_DEPTH + 1)
    with pytest.raises(ParseError, match="nested"):
        to_power_law(text)
    with pytest.raises(ParseError, match="nested"):
        to_power_law("k * [A]^" + "-" * (MAX_DEPTH + 1) + "1")


def test_very_long_expression_is_refused():
    with pytest.raises(ParseError, match="characters long"):
        parse_expression("k" + " * [A]" * MAX_LENGTH)


@pytest.mark.parametrize("text, reactants, products, reversible", [
    ("A + B -> P", {"A": 1, "B": 1}, {"P": 1}, False),
    ("2 A -> P", {"A": 2}, {"P": 1}, False),
    ("2A -> P", {"A": 2}, {"P": 1}, False),
    ("A + A -> P", {"A": 2}, {"P": 1}, False),
    ("0.5 O2 + H2 -> H2O", {"O2": 0.5, "H2": 1}, {"H2O": 1}, False),
    ("A <=> B", {"A": 1}, {"B": 1}, True),
    ("A <-> B", {"A": 1}, {"B": 1}, True),
    ("A ⇌ B", {"A": 1}, {"B": 1}, True),
    ("A → B", {"A": 1}, {"B": 1}, False),
    ("A + P -> 2 P", {"A": 1, "P": 1}, {"P": 2}, False),
])
def test_reactions(text, reactants, products, reversible):
    r = parse_reaction(text)
    assert dict(r.reactants) == reactants
    assert dict(r.products) == products
    assert r.reversible is reversible


def test_net_stoichiometry_of_autocatalysis():
    assert parse_reaction("A + P -> 2 P").net() == {"A": -1.0, "P": 1.0}


@pytest.mark.parametrize("text, message", [
    ("A + B", "no arrow"),
    ("A ->", "nothing on the right"),
    ("-> P", "nothing on the left"),
    ("A -> B -> C", "exactly one arrow"),
    ("A <=> B -> C", "exactly one arrow"),
    ("A + + B -> P", "empty term"),
    ("A + -> P", "empty term"),
    ("2 3A -> P", "not a species name"),
    ("0 A -> P", "positive"),
    ("A.__class__ -> P", "not a species name"),
    ("__import__('os') -> P", "not a species name"),
])
def test_refused_reactions(text, message):
    with pytest.raises(ParseError, match=message):
        parse_reaction(text)


def test_affine_text():
    assert Affine(0.0, (("m", 1.0),)).text() == "m"
    assert (Affine(-1.0, (("m", 1.0),))).text() == "m - 1"
    assert Affine(2.0).text() == "2"
    assert Affine(0.0, (("m", 1.0),)).text({"m": 1.23456}, 3) == "1.23"


# ------------------------------------------------------------------ properties

names = st.from_regex(r"[A-Za-z][A-Za-z0-9_]{0,6}", fullmatch=True)
numbers = st.floats(min_value=0.0, max_value=5.0, allow_nan=False).map(lambda x: round(x, 3))


@settings(max_examples=200, deadline=None)
@given(st.text(max_size=80))
def test_any_text_gives_a_rate_law_or_a_parse_error(text):
    # Property: the parser never raises anything but ParseError (common practice
    # for parsers of untrusted input).
    try:
        to_power_law(text)
    except ParseError:
        pass


@settings(max_examples=200, deadline=None)
@given(st.text(alphabet="kAB[]()^*/+- .0123456789mn", max_size=60))
def test_grammar_soup_gives_a_rate_law_or_a_parse_error(text):
    try:
        to_power_law(text)
    except ParseError:
        pass


@settings(max_examples=200, deadline=None)
@given(st.text(max_size=60))
def test_any_text_gives_a_reaction_or_a_parse_error(text):
    try:
        parse_reaction(text)
    except ParseError:
        pass


@settings(max_examples=100, deadline=None)
@given(st.dictionaries(names.map(str.upper), numbers, min_size=1, max_size=4))
def test_generated_power_laws_round_trip(exps):
    text = "k * " + " * ".join(f"[{s}]^{e}" for s, e in exps.items())
    law = to_power_law(text)
    assert law.constant == "k"
    got = {s: a.const for s, a in law.orders}
    assert got == {s: float(e) for s, e in exps.items() if e != 0}


@settings(max_examples=100, deadline=None)
@given(st.dictionaries(names, st.integers(1, 4), min_size=1, max_size=3),
       st.dictionaries(names, st.integers(1, 4), min_size=1, max_size=3))
def test_generated_reactions_round_trip(left, right):
    text = " + ".join(f"{c} {s}" for s, c in left.items()) + " -> " + \
        " + ".join(f"{c} {s}" for s, c in right.items())
    r = parse_reaction(text)
    assert dict(r.reactants) == {s: float(c) for s, c in left.items()}
    assert dict(r.products) == {s: float(c) for s, c in right.items()}
