"""Prior densities and the model file's prior tables."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from kinfit.core.errors import KinfitError
from kinfit.inputs.mechanism import mechanism_from_text
from kinfit.inputs.priors import Prior, parse_prior


def test_normal_matches_scipy():
    # reference: scipy.stats.norm.logpdf
    x = np.array([0.2, 1.0, 1.7])
    prior = parse_prior({"kind": "normal", "mean": 1.0, "sd": 0.3}, "here")
    np.testing.assert_allclose(prior.log_density(x), stats.norm(1.0, 0.3).logpdf(x), rtol=1e-12)


def test_log_normal_matches_scipy():
    # reference: scipy.stats.lognorm with s = ln(factor) and scale = median
    x = np.array([1e-4, 2e-3, 0.05])
    prior = parse_prior({"kind": "log-normal", "median": 2e-3, "factor": 1.5}, "here")
    np.testing.assert_allclose(prior.log_density(x),
                               stats.lognorm(s=math.log(1.5), scale=2e-3).logpdf(x), rtol=1e-12)


def test_uniform_kinds_and_bounds():
    uniform = Prior("uniform").within(0.0, 3.0)
    np.testing.assert_array_equal(uniform.log_density(np.array([-0.1, 0.0, 2.0, 3.1])),
                                  [-np.inf, 0.0, 0.0, -np.inf])
    log_uniform = Prior("log-uniform").within(1e-6, np.inf)
    lp = log_uniform.log_density(np.array([1e-3, 1e-2]))
    # density ∝ 1/x: ten times larger x, ten times smaller density
    assert lp[0] - lp[1] == pytest.approx(math.log(10.0))
    assert log_uniform.log_density(np.array([0.0]))[0] == -np.inf


def test_describe_and_dict():
    prior = parse_prior({"kind": "normal", "mean": 1.0, "sd": 0.1}, "here").within(0, 3)
    assert prior.describe() == "normal(mean 1, sd 0.1) on [0, 3]"
    assert prior.to_dict() == {"kind": "normal", "source": "model file", "lower": 0.0,
                               "upper": 3.0, "mean": 1.0, "sd": 0.1}


@pytest.mark.parametrize("spec, message", [
    ("3", "must be a table"),
    ('{ kind = "gamma" }', "prior kind 'gamma' is not known"),
    ('{ kind = "normal", mean = 1 }', "sd is missing"),
    ('{ kind = "normal", mean = 1, sd = -1 }', "sd must be positive"),
    ('{ kind = "normal", mean = 1, sd = 1, min = 0 }', "not 'min'"),
    ('{ kind = "log-normal", median = 0, factor = 2 }', "median must be positive"),
    ('{ kind = "log-normal", median = 1, factor = 1 }', "factor must be above 1"),
    ('{ kind = "normal", mean = "one", sd = 1 }', "mean must be a finite number"),
])
def test_bad_priors_in_a_model_file(spec, message):
    text = f"""
[[steps]]
reaction = "A -> P"
rate = "k * [A]^m"
[parameters]
k = {{ value = 0.1, min = 0 }}
m = {{ value = 1, prior = {spec} }}
"""
    with pytest.raises(KinfitError, match=message) as info:
        mechanism_from_text(text, "model.toml")
    assert "model.toml, line 7 (parameters.m)" in str(info.value)


def test_model_file_prior_is_kept():
    mech = mechanism_from_text("""
[[steps]]
reaction = "A -> P"
rate = "k * [A]"
[parameters]
k = { value = 0.1, min = 0, prior = { kind = "log-normal", median = 0.1, factor = 2 } }
""")
    assert mech.parameters["k"].prior == Prior("log-normal", 0.1, 2.0, source="model file")


values = st.one_of(st.none(), st.booleans(), st.integers(), st.floats(allow_nan=True),
                   st.text(max_size=5))


@settings(max_examples=200, deadline=None)
@given(st.one_of(values, st.dictionaries(st.sampled_from(
    ["kind", "mean", "sd", "median", "factor", "min", "x"]), st.one_of(
    values, st.sampled_from(["uniform", "log-uniform", "normal", "log-normal"])), max_size=4)))
def test_parse_prior_raises_only_its_own_error(spec):
    # property: any TOML-like value gives a Prior or a KinfitError, nothing else
    try:
        prior = parse_prior(spec, "here")
    except KinfitError:
        return
    assert isinstance(prior, Prior)
    assert np.isfinite(prior.log_density(np.array([1.0]))).all() or prior.kind != "uniform"
