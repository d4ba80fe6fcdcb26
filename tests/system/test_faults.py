"""Numerical faults never crash a fit, and a killed run never leaves half-written files."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest
from conftest import DEMO, MODELS, ROOT, write

from kinfit.estimation.least_squares import fit
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism, mechanism_from_text
from kinfit.numerics.integrate import integrate_flat
from kinfit.numerics.rate_system import compile_mechanism
from kinfit.output.fit import format_fit


@pytest.fixture
def decay(tmp_path):
    """A first-order decay measured in one run ([Atkins] A = A0 exp(-k t), k = 0.1)."""
    t = np.linspace(0, 40, 21)
    rows = "\n".join(f"r1,{ti:g},A,{np.exp(-0.1 * ti):.6f}" for ti in t)
    write(tmp_path, "traces.csv", "run,time,species,value\n" + rows + "\n")
    write(tmp_path, "e.toml", '[data]\nfile = "traces.csv"\n[[runs]]\nname = "r1"\n'
                              'initial = { A = 1.0, P = 0.01 }\n')
    return load_experiment(tmp_path / "e.toml")


def test_equations_that_blow_up_do_not_crash_the_fit(decay):
    # P -> 2 P with rate k2 [P]^2 explodes in finite time when k2 is large.
    mech = mechanism_from_text("""
        [[steps]]
        reaction = "A -> P"
        rate = "k1 * [A]"
        [[steps]]
        reaction = "P -> 2 P"
        rate = "k2 * [P]^2"
        [parameters]
        k1 = 0.2
        k2 = { value = 10, min = 1e-6 }
    """)
    result = fit(decay, mech, starts=4)
    assert result.n_failed > 0                       # counted ...
    assert result.to_dict()["fit"]["failed_evaluations"] == result.n_failed   # ... and reported
    assert np.isfinite(result.chi2)
    # the data are a plain decay: k1 is found and the explosive step switched off
    assert result.values["k1"] == pytest.approx(0.1, rel=1e-3)
    assert result.values["k2"] < 1e-3


def test_extremely_stiff_equations_finish(decay):
    mech = mechanism_from_text("""
        [[steps]]
        reaction = "A <=> I"
        rate = "kf * [A]"
        reverse_rate = "kr * [I]"
        [[steps]]
        reaction = "I -> P"
        rate = "k2 * [I]"
        [parameters]
        kf = { value = 1e12, vary = false }
        kr = { value = 1e12, vary = false }
        k2 = 0.2
    """)
    t0 = time.perf_counter()
    result = fit(decay, mech, starts=1)
    assert time.perf_counter() - t0 < 60
    # fast equilibrium A <=> I with K = 1, then I -> P: [A] + [I] decays with k2/2 (Espenson,
    # pre-equilibrium kinetics; from memory), and A is half of it
    assert result.success
    assert "Rosenbrock" in result.method or "LSODA" in result.method


def test_work_bound_stops_an_endless_integration():
    system = compile_mechanism(load_mechanism(MODELS / "pre_equilibrium.toml"))
    k, orders = system.rate_arrays(np.array([1e9, 1e9, 0.1]))
    sol = integrate_flat(system.stoichiometry, system.present, np.array([[1.0, 1.0, 0, 0]]), k,
                         orders, np.linspace(0, 1e6, 5), np.array([0, 5]), method="LSODA",
                         max_rhs=200)
    assert not sol.ok[0]
    assert "stopped after 200" in sol.message


def test_concentrations_never_go_negative_with_zero_order():
    # [Atkins] zero order: A = A0 - k t until A runs out, then the step stops
    system = compile_mechanism(load_mechanism(MODELS / "zero_order.toml"))
    k, orders = system.rate_arrays(np.array([1.0]))
    sol = integrate_flat(system.stoichiometry, system.present, np.array([[1.0, 0.0]]), k, orders,
                         np.linspace(0, 100, 11), np.array([0, 11]))
    assert sol.conc[:, 0].min() > -1e-8 and sol.conc[-1, 1] == pytest.approx(1.0, rel=1e-6)


def test_a_fit_that_did_not_converge_says_so(decay):
    mech = mechanism_from_text('[[steps]]\nreaction = "A -> P"\nrate = "k * [A]"\n'
                               '[parameters]\nk = 1e-4\n')
    result = fit(decay, mech, starts=1, max_evaluations=2)
    assert not result.success
    assert any("did not report convergence" in w for w in result.warnings)
    assert "NOT converged" in format_fit(result)


# ------------------------------------------------------------- atomic outputs

def _complete(path):
    """True if an output file is whole: parseable JSON, closed PNG/SVG/HTML, ended text."""
    data = path.read_bytes()
    if path.suffix == ".json":
        json.loads(data)
        return True
    if path.suffix == ".png":
        return data.startswith(b"\x89PNG") and data.endswith(b"IEND\xaeB`\x82")
    if path.suffix == ".svg":
        return data.rstrip().endswith(b"</svg>")
    if path.suffix == ".html":
        return data.rstrip().endswith(b"</html>")
    return data.endswith(b"\n")


def test_killed_runs_leave_previous_or_new_complete_outputs(tmp_path):
    out = tmp_path / "out"
    cmd = [sys.executable, "-m", "kinfit.app.cli", "fit", str(DEMO / "experiment.toml"), "--model",
           str(DEMO / "thiol_addition.toml"), "--out", str(out), "--starts", "2", "--overwrite"]
    subprocess.run(cmd, check=True, capture_output=True, cwd=ROOT)
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    rng = np.random.default_rng(8)
    for delay in rng.uniform(1.0, 6.0, size=3):         # bounded: three kills
        proc = subprocess.Popen(cmd + ["--seed", str(int(delay * 1000))], cwd=ROOT,
                                stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        time.sleep(delay)
        proc.send_signal(signal.SIGKILL)
        proc.wait()
        for path in out.iterdir():
            if path.name.startswith("."):                # a temporary file being written
                continue
            assert _complete(path), f"{path.name} is half-written after a kill at {delay:.1f} s"
        assert {p.name for p in out.iterdir() if not p.name.startswith(".")} == set(before)
    os.sync()
