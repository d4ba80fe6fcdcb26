"""Per-run warnings of a fit: a run that cannot react, a run that carries the misfit."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import f as f_dist

from kinfit.estimation.least_squares import fit
from kinfit.estimation.run_warnings import MISFIT_ALPHA, misfit_runs, run_warnings
from kinfit.inputs.experiment import Experiment, Run, load_experiment
from kinfit.inputs.mechanism import load_mechanism, mechanism_from_text
from kinfit.inputs.tables import Trace

MODEL = """
name = "A + B -> P"
[[steps]]
reaction = "A + B -> P"
rate = "k * [A] * [B]"
[parameters]
k = { value = 0.05, min = 0 }
"""

STARTS = {"r1": (1.0, 2.0), "r2": (1.0, 3.0), "r3": (0.5, 2.0)}
K_TRUE = 0.04


def _second_order(a0, b0, t, k):
    """[A] for A + B -> P, rate k[A][B], [A]0 != [B]0: the integrated second-order rate law
    ln([B][A]0 / ([A][B]0)) = ([B]0 - [A]0) k t (physical-chemistry textbooks, e.g. Atkins)."""
    grow = np.exp((b0 - a0) * k * t)
    return a0 * (b0 - a0) / (b0 * grow - a0)


def _study(folder, leave_out_b=None):
    rng = np.random.default_rng(20260113)
    rows, runs = ["run,time,species,value"], []
    t = np.linspace(0.0, 40.0, 15)
    for name, (a0, b0) in STARTS.items():
        y = _second_order(a0, b0, t, K_TRUE) + rng.normal(0.0, 0.005, t.size)
        rows += [f"{name},{ti:g},A,{yi:.5f}" for ti, yi in zip(t, y)]
        initial = f"A = {a0}" + ("" if name == leave_out_b else f", B = {b0}")
        runs.append(f'[[runs]]\nname = "{name}"\ninitial = {{ {initial} }}\n')
    (folder / "traces.csv").write_text("\n".join(rows) + "\n")
    (folder / "experiment.toml").write_text('[units]\ntime = "min"\nconcentration = "M"\n'
                                            '[data]\nfile = "traces.csv"\n' + "\n".join(runs))
    (folder / "model.toml").write_text(MODEL)
    return load_experiment(folder / "experiment.toml"), load_mechanism(folder / "model.toml")


def test_a_reactant_left_out_of_one_run_is_named(tmp_path):
    # the slip: B left out of run r3's initial; the fit still "converges"
    experiment, mechanism = _study(tmp_path, leave_out_b="r3")
    result = fit(experiment, mechanism, starts=2)
    warnings = result.to_dict()["warnings"]
    assert ("run 'r3': steps[1] (A + B -> P) cannot proceed: B starts at zero and no step "
            "forms it (left out of the run's initial?)") in warnings
    misfit = [w for w in warnings if w.startswith("run 'r3' carries")]
    assert len(misfit) == 1 and "of the points" in misfit[0]
    assert not any(w.startswith(("run 'r1'", "run 'r2'")) for w in warnings)


def test_the_same_study_without_the_slip_has_no_run_warnings(tmp_path):
    experiment, mechanism = _study(tmp_path)
    result = fit(experiment, mechanism, starts=2)
    assert not [w for w in result.warnings if w.startswith("run ")]
    # and k is recovered within three standard errors of the truth
    assert abs(result.values["k"] - K_TRUE) < 3 * result.stderr["k"]


def _experiment(sizes):
    runs = []
    for i, n in enumerate(sizes):
        t = np.arange(float(n))
        trace = Trace("A", t, np.ones(n), np.arange(2, n + 2))
        runs.append(Run(name=f"r{i + 1}", traces=(trace,), initial={"A": 1.0}))
    return Experiment("e", runs=tuple(runs))


def test_misfit_rule_by_hand():
    # r1: 10 points, sum of squares 40; the others: 30 points, sum of squares 15
    exp = _experiment([10, 10, 20])
    res = np.concatenate([np.full(10, 2.0), np.full(10, np.sqrt(0.5)), np.full(20, np.sqrt(0.5))])
    [(name, share, points, ratio, p)] = misfit_runs(exp, res)
    assert (name, share, points) == ("r1", pytest.approx(40 / 55), pytest.approx(0.25))
    assert ratio == pytest.approx((40 / 10) / (15 / 30))
    # Snedecor's F distribution from scipy.stats as the outside reference
    assert p == pytest.approx(f_dist.sf(8.0, 10, 30))
    # a ratio below 4 is not named however small its p-value (size matters, not only detection)
    res_mild = np.concatenate([np.full(10, 1.9), np.ones(30)])
    assert misfit_runs(exp, res_mild) == []
    # one run alone is compared with nothing
    assert misfit_runs(_experiment([10]), np.full(10, 5.0)) == []


def test_misfit_rule_names_a_run_rarely_when_all_fit_equally():
    # pure noise, five runs of ten points: the family-wise rate of naming any run stays
    # near or below the Bonferroni level (Bonferroni's inequality bounds it by MISFIT_ALPHA)
    exp = _experiment([10] * 5)
    rng = np.random.default_rng(7)
    named = sum(bool(misfit_runs(exp, rng.normal(size=50))) for _ in range(2000))
    assert named / 2000 <= MISFIT_ALPHA


def test_reference_temperature_outside_the_runs_reaches_the_fit_warnings():
    mech = mechanism_from_text(MODEL + 'Ea = 50\n[temperature]\narrhenius = { k = "Ea" }\n'
                               'reference = "25 degC"\n', source="m.toml")
    runs = tuple(Run(name=f"T{t}", traces=(), initial={"A": 1.0, "B": 1.0}, temperature=t)
                 for t in (10.0, 50.0))
    warnings = run_warnings(mech, Experiment("e", runs=runs), mech.values(), np.zeros(0))
    assert warnings == [w for w in warnings if w.startswith("m.toml: the reference temperature")]
    assert len(warnings) == 1
