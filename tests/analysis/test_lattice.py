"""Parsing an order grid and building the order lattice of a template."""

from __future__ import annotations

import math

import numpy as np
import pytest
from conftest import MODELS
from hypothesis import given, settings
from hypothesis import strategies as st

from kinfit.analysis.lattice import order_lattice, parse_order_grid, template_for
from kinfit.core.errors import KinfitError
from kinfit.inputs.mechanism import load_mechanism


def test_order_lattice():
    free = load_mechanism(MODELS / "power_law_two.toml")
    lattice = order_lattice(free, {"m": (0, 0.5, 1), "n": (1, 2)})
    assert len(lattice) == 6
    assert lattice[0].name == "A + B -> P, free orders [m=0, n=1]"
    assert lattice[-1].template == "A + B -> P, free orders"
    last = lattice[-1].mechanism.parameters
    assert (last["m"].value, last["m"].vary, last["n"].value, last["k"].vary) == (1, False, 2,
                                                                                  True)
    with pytest.raises(KinfitError, match="'k' is not an order parameter"):
        order_lattice(free, {"k": (1,)})
    with pytest.raises(KinfitError, match="cannot fix m at 4"):
        order_lattice(free, {"m": (4,)})
    with pytest.raises(KinfitError, match="at most 2000"):
        order_lattice(free, {"m": tuple(np.linspace(0, 3, 50)), "n": tuple(np.linspace(0, 3,
                                                                                       50))})


def test_template_is_the_first_model_with_every_order():
    first = load_mechanism(MODELS / "first_order.toml")
    free = load_mechanism(MODELS / "power_law_two.toml")
    assert template_for([first, free, free], {"m": (1,), "n": (2,)}) == 1
    with pytest.raises(KinfitError, match="no model given has order parameter"):
        template_for([first], {"m": (1,)})


def test_parse_order_grid():
    assert parse_order_grid(["m=0,0.5,1,1.5,2", " n = 0, 1,2,1 "]) == {
        "m": (0.0, 0.5, 1.0, 1.5, 2.0), "n": (0.0, 1.0, 2.0)}
    assert parse_order_grid(None) == {}
    for bad, message in (("m", "expected NAME=V1"), ("m=", "'' is not a number"),
                         ("m=1,,2", "is not a number"), ("m=1,x", "'x' is not a number"),
                         ("m=nan", "'nan' is not a number"), ("2m=1", "expected NAME"),
                         ("m=inf", "is not a number")):
        with pytest.raises(KinfitError, match=message):
            parse_order_grid([bad])
    with pytest.raises(KinfitError, match="given twice"):
        parse_order_grid(["m=1", "m=2"])


@settings(max_examples=300, deadline=None)
@given(st.lists(st.text(max_size=30), max_size=4))
def test_parse_order_grid_raises_only_its_own_error(items):
    # Property (common practice for parsers): any text gives a grid or a KinfitError.
    try:
        grid = parse_order_grid(items)
    except KinfitError:
        return
    for name, values in grid.items():
        assert name.isidentifier() and values
        assert all(math.isfinite(v) for v in values)


@settings(max_examples=200, deadline=None)
@given(st.dictionaries(st.from_regex(r"[a-z][a-z0-9_]{0,6}", fullmatch=True),
                       st.lists(st.floats(allow_nan=False, allow_infinity=False), min_size=1,
                                max_size=5), min_size=1, max_size=3))
def test_parse_order_grid_round_trip(grid):
    items = [f"{n}=" + ",".join(repr(v) for v in vals) for n, vals in grid.items()]
    parsed = parse_order_grid(items)
    assert list(parsed) == list(grid)
    for n, vals in grid.items():
        assert parsed[n] == tuple(dict.fromkeys(float(v) for v in vals))
