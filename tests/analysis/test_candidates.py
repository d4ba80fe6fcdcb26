"""Fitting candidates: warm starts from a template, and workers that do not change the fits."""

from __future__ import annotations

import math

import numpy as np
import pytest
from conftest import MODELS, synthetic_power_law

from kinfit.analysis.candidates import (
    Candidate,
    candidate_names,
    fit_candidates,
    unique_names,
    warm_start,
)
from kinfit.analysis.lattice import order_lattice
from kinfit.inputs.mechanism import load_mechanism, with_fixed


def test_warm_start_keeps_the_rate_at_typical_concentrations(small_ranking):
    # The start of a fixed-order candidate has the template's rate at the
    # geometric-mean starting concentrations (algebraic property of _warm_start).
    comparison, exp, mech = small_ranking
    template = comparison["A + B -> P, free orders"].fit
    fixed = with_fixed(mech, {"m": 2.0, "n": 1.0})
    start = warm_start(fixed, template, exp).parameters
    a_bar = math.exp(np.mean(np.log([r.initial["A"] for r in exp.runs])))
    b_bar = math.exp(np.mean(np.log([r.initial["B"] for r in exp.runs])))
    v = template.values
    rate_template = v["k"] * a_bar ** v["m"] * b_bar ** v["n"]
    assert start["k"].value * a_bar ** 2 * b_bar == pytest.approx(rate_template, rel=1e-12)


def test_parallel_workers_give_the_same_fits(tmp_path):
    # Every fit has the same seed and derived candidates start from their
    # template's fit, so the number of processes cannot change the answer.
    exp, mech = synthetic_power_law(tmp_path, seed=2, times=np.linspace(0, 100, 9),
                                    starts={"r1": (1.0, 1.0), "r2": (2.0, 1.0),
                                            "r3": (1.0, 2.0)})
    candidates = [Candidate("free", mech, starts=1)] + order_lattice(
        mech, {"m": (1, 2)}, name="free")
    seen = []
    one = fit_candidates(exp, candidates, workers=1, progress=lambda *a: seen.append(a))
    two = fit_candidates(exp, candidates, workers=2)
    assert [f.chi2 for f in one] == [f.chi2 for f in two]
    assert [f.values for f in one] == [f.values for f in two]
    assert [s[:2] for s in seen] == [(1, 3), (2, 3), (3, 3)] and seen[0][2] == "free"


def test_names_are_made_unique():
    assert unique_names(["a", "a", "b", "a"]) == ["a", "a #2", "b", "a #3"]
    mech = load_mechanism(MODELS / "first_order.toml")
    names = candidate_names([mech, mech])
    assert names == [f"{mech.name} (first_order.toml)", f"{mech.name} (first_order.toml) #2"]
