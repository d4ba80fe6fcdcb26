"""Nesting found from the models' structure, and the boundary flag."""

from __future__ import annotations

from types import SimpleNamespace

from conftest import MODELS

from kinfit.analysis.nesting import nests, on_boundary, structure
from kinfit.inputs.mechanism import load_mechanism, mechanism_from_text, with_fixed


def test_nesting_from_modelstructure():
    free = load_mechanism(MODELS / "power_law_two.toml")
    first_each = load_mechanism(MODELS / "second_order_ab.toml")
    assert nests(first_each, free) and not nests(free, first_each)
    assert nests(with_fixed(free, {"m": 1}), free)
    # a tie m = n is a restriction of free m and n
    tied = mechanism_from_text('[[steps]]\nreaction = "A + B -> P"\nrate = "k*[A]^q*[B]^q"\n'
                               '[parameters]\nk = 1\nq = 1\n')
    assert nests(tied, free) and not nests(free, tied)
    # different reactions or a fixed rate constant in the larger model: not nested
    first = load_mechanism(MODELS / "first_order.toml")
    assert nests(first, load_mechanism(MODELS / "power_law_one.toml"))
    assert not nests(first, load_mechanism(MODELS / "second_order.toml"))    # 2 A -> P
    assert not nests(first, free)
    assert not nests(first_each, with_fixed(first_each, {"k": 0.5}))


def test_boundary_of_the_larger_model_is_flagged():
    # An order fixed at its minimum (0) lies on the boundary of the larger
    # model; the χ² reference is then conservative (Self & Liang 1987, from memory).
    free = load_mechanism(MODELS / "power_law_two.toml")
    at_zero, inside = with_fixed(free, {"m": 0.0}), with_fixed(free, {"m": 1.0})
    big = structure(free)
    assert on_boundary(structure(at_zero), big, SimpleNamespace(values={"n": 1.3}))
    assert not on_boundary(structure(inside), big, SimpleNamespace(values={"n": 1.3}))
