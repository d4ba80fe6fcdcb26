"""The command line: commands on the demo, and clear errors for bad input."""

from __future__ import annotations

import json
import re
import subprocess
import sys

import pytest
from conftest import (
    DEMO,
    FIRST_ORDER_MODEL,
    MODELS,
    SMALL_EXPERIMENT,
    SMALL_TRACES,
    write,
    write_line_problem,
)
from typer.testing import CliRunner

from kinfit.app.cli import app

runner = CliRunner()


COMMANDS = ([], ["fit"], ["simulate"], ["demo"], ["rank"], ["sample"], ["report"],
            ["components"], ["templates"])


def test_help_of_every_command_shows_an_example():
    for command in COMMANDS:
        result = runner.invoke(app, command + ["--help"])
        assert result.exit_code == 0
        assert "Example" in result.output and "kinfit " in result.output


def _known_results(out):
    """Every file kinfit wrote in the result folders of `out` is a result it knows by
    name (so that the folder rule recognises and replaces it)."""
    from kinfit.app.folders import RESULT_FOLDERS, earlier_results

    written = {p for folder in RESULT_FOLDERS if (out / folder).is_dir()
               for p in (out / folder).iterdir() if p.is_file()}
    assert written and written == set(earlier_results(out)), sorted(
        p.name for p in written - set(earlier_results(out)))


def test_demo_command(tmp_path):
    out = tmp_path / "demo"
    result = runner.invoke(app, ["demo", "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert "rate = k [thiol]^" in result.output
    assert "mM^-1." in result.output and " min^-1" in result.output   # k with its unit
    assert "standard errors)" in result.output
    data = json.loads((out / "result.json").read_text())
    assert data["success"] and (out / "fit.png").exists() and (out / "inputs" / "traces.csv").exists()
    # the spectrometer part
    assert "Quillmere Dyes" in result.output and "significant components: 3" in result.output
    assert "eps_intermediate_A510" in result.output
    for name in ("spectra.csv", "spectra.png", "wavelength_traces.png", "residual_map.png",
                 "components.png"):
        assert (out / "spectrometer" / "spectra" / name).exists(), name
    assert (out / "inputs" / "spectrometer" / "absorbance_r1.txt").exists()
    _known_results(out)
    again = runner.invoke(app, ["demo", "--out", str(out)])      # refused before any work
    assert again.exit_code == 2 and "already holds results of an earlier run" in again.output


def test_fit_command_on_the_demo(tmp_path):
    out = tmp_path / "fit"
    result = runner.invoke(app, ["fit", str(DEMO / "experiment.toml"), "--model",
                                 str(DEMO / "thiol_addition.toml"), "--out", str(out),
                                 "--starts", "1"])
    assert result.exit_code == 0, result.output
    assert "Rate law" in result.output and "k " in result.output
    data = json.loads((out / "result.json").read_text())
    assert set(data["statistics"]) >= {"n_data", "n_params", "chisqr", "aic", "aicc", "bic"}


def test_simulate_command(tmp_path):
    out = tmp_path / "sim"
    result = runner.invoke(app, ["simulate", str(MODELS / "consecutive.toml"), "-i", "A=1",
                                 "--set", "k1=0.5", "--until", "20", "--points", "21",
                                 "--time-unit", "min", "--concentration-unit", "mM",
                                 "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert "at t = 20 min:" in result.output and result.output.split("\n")[0].endswith(" mM")
    lines = (out / "simulation.csv").read_text().splitlines()
    assert lines[0] == "time (min),A (mM),B (mM),C (mM)" and len(lines) == 22
    assert (out / "simulation.png").exists()
    _known_results(out)


def test_simulate_bad_pairs(tmp_path):
    result = runner.invoke(app, ["simulate", str(MODELS / "first_order.toml"), "-i", "A:1",
                                 "--time-unit", "s", "--concentration-unit", "M",
                                 "--out", str(tmp_path / "x")])
    assert result.exit_code == 2 and "expected NAME=NUMBER" in result.output
    assert not (tmp_path / "x").exists()


# ---------------------------------------------------------------- bad input

GOOD_TRACES = SMALL_TRACES
BAD_CASES = {
    # name: (file to replace, its new text, message expected)
    "missing data file": ("experiment.toml", SMALL_EXPERIMENT.replace("traces.csv", "nope.csv"),
                          "data file 'nope.csv' not found"),
    "species not in model": ("traces.csv", GOOD_TRACES.replace(",A,", ",Z,"),
                             r"traces\.csv, line 2: species 'Z' \(run 'r1'\) is not in the model"),
    "run not listed": ("traces.csv", GOOD_TRACES + "    r7,0,A,1\n",
                       "run 'r7' is not listed"),
    "non-numeric value": ("traces.csv", GOOD_TRACES.replace("0.37", "0,37x"),
                          "not a CSV table|not a number"),
    "text value": ("traces.csv", GOOD_TRACES.replace("0.37", "abc"), "'abc' is not a number"),
    "nan value": ("traces.csv", GOOD_TRACES.replace("0.37", "NaN"), "expected a number"),
    "infinite value": ("traces.csv", GOOD_TRACES.replace("0.37", "inf"),
                       "not a finite number"),
    "negative time": ("traces.csv", GOOD_TRACES.replace("r1,0,", "r1,-1,"), "negative time"),
    "duplicated time": ("traces.csv", GOOD_TRACES.replace("r1,20,", "r1,10,"), "is repeated"),
    "too few points": ("traces.csv", "run,time,species,value\nr1,0,A,1\nr1,5,A,0.8\n",
                       "at least 3 are needed"),
    "empty data file": ("traces.csv", "", "the data file is empty"),
    "missing column": ("traces.csv", GOOD_TRACES.replace("species,", "kind,"),
                       r"missing column\(s\) species"),
    "unreadable unit": ("experiment.toml", SMALL_EXPERIMENT.replace('"M"', '"zorks"'),
                        "cannot read the unit 'zorks'"),
    "TOML syntax error": ("model.toml", FIRST_ORDER_MODEL.replace('"A -> P"', '"A -> P'),
                          r"line 3, column \d+: not valid TOML"),
    "min above max": ("model.toml", FIRST_ORDER_MODEL.replace("min = 0", "min = 1, max = 0.5"),
                      r"min \(1\) is larger than max \(0\.5\)"),
    "undeclared species": ("model.toml", FIRST_ORDER_MODEL.replace("k * [A]", "k * [A] * [cat]"),
                           r"\[cat\] is in the rate law but in no reaction"),
    "empty side": ("model.toml", FIRST_ORDER_MODEL.replace('"A -> P"', '"A -> "'),
                   "nothing on the right side"),
    "code in a rate law": ("model.toml", FIRST_ORDER_MODEL.replace(
        '"k * [A]"', "'''__import__(\"os\").system(\"touch pwned\")'''"),
        "unexpected character"),
    "code in an exponent": ("model.toml", FIRST_ORDER_MODEL.replace(
        '"k * [A]"', "'''k * [A]^(().__class__)'''"), "unexpected character"),
}


@pytest.mark.parametrize("case", sorted(BAD_CASES))
def test_bad_input_gives_one_clear_line_and_exit_2(tmp_path, case):
    write(tmp_path, "model.toml", FIRST_ORDER_MODEL)
    write(tmp_path, "experiment.toml", SMALL_EXPERIMENT)
    write(tmp_path, "traces.csv", GOOD_TRACES)
    name, text, message = BAD_CASES[case]
    write(tmp_path, name, text)
    out = tmp_path / "out"
    result = runner.invoke(app, ["fit", str(tmp_path / "experiment.toml"), "--model",
                                 str(tmp_path / "model.toml"), "--out", str(out)])
    assert result.exit_code == 2, result.output
    errors = [line for line in result.output.splitlines() if line.startswith("error:")]
    assert len(errors) == 1, result.output
    assert re.search(message, errors[0]), errors[0]
    assert "Traceback" not in result.output
    assert not out.exists(), "nothing may be written on bad input"
    assert not (tmp_path / "pwned").exists()


def test_bad_input_does_not_touch_an_existing_output_folder(tmp_path):
    write(tmp_path, "model.toml", FIRST_ORDER_MODEL)
    write(tmp_path, "experiment.toml", SMALL_EXPERIMENT)
    write(tmp_path, "traces.csv", "")
    out = tmp_path / "out"
    out.mkdir()
    (out / "result.json").write_text("previous")
    result = runner.invoke(app, ["fit", str(tmp_path / "experiment.toml"), "--model",
                                 str(tmp_path / "model.toml"), "--out", str(out),
                                 "--overwrite"])
    assert result.exit_code == 2
    assert (out / "result.json").read_text() == "previous"
    assert [p.name for p in out.iterdir()] == ["result.json"]


def test_console_script_exit_codes(tmp_path):
    # A real process: exit code 2 and no traceback on stderr.
    write(tmp_path, "model.toml", FIRST_ORDER_MODEL)
    proc = subprocess.run([sys.executable, "-m", "kinfit.app.cli", "fit", str(tmp_path / "none.toml"),
                           "--model", str(tmp_path / "model.toml")],
                          capture_output=True, text=True)
    assert proc.returncode == 2
    assert proc.stderr.startswith("error: ") and "Traceback" not in proc.stderr
    assert len(proc.stderr.strip().splitlines()) == 1


# ------------------------------------------------------------ temperature

TEMPERATURE_DEMO = DEMO / "temperature"


@pytest.fixture(scope="module")
def temperature_fit(tmp_path_factory):
    out = tmp_path_factory.mktemp("tfit") / "fit"
    result = runner.invoke(app, ["fit", str(TEMPERATURE_DEMO / "experiment.toml"), "--model",
                                 str(TEMPERATURE_DEMO / "ester_hydrolysis.toml"), "--out",
                                 str(out), "--starts", "1"])
    return result, out


def test_fit_command_on_the_temperature_example(temperature_fit):
    result, out = temperature_fit
    assert result.exit_code == 0, result.output
    text = " ".join(result.output.split())
    for needed in ("Temperature dependence", "Ea (fitted)", "ΔH‡", "ΔS‡", "ΔG‡(298.15 K)",
                   "Two-stage analysis", "Caution (temperature)", "calorimetry",
                   "Extrapolation beyond the measured range is unsafe"):
        assert needed in text, needed
    for name in ("temperature.json", "arrhenius.png", "eyring.png", "result.json"):
        assert (out / name).exists(), name
    data = json.loads((out / "temperature.json").read_text())
    ea = data["activation"][0]["estimates"]["Ea"]
    # the example's truth (demo/temperature/truth.toml): Ea = 55 kJ/mol
    assert abs(ea["value"] - 55.0) < 3 * ea["stderr"]
    assert data["activation"][0]["temperature_range_K"] == [288.15, 318.15]
    assert "Caution (temperature)" in (out / "summary.txt").read_text()
    _known_results(out)
    assert data["two_stage"]["orders"] == "global"      # the default, DEFAULT_TWO_STAGE


def test_simulate_from_the_fit_flags_extrapolation(tmp_path, temperature_fit):
    _, fitted = temperature_fit
    out = tmp_path / "sim"
    result = runner.invoke(app, ["simulate", str(TEMPERATURE_DEMO / "ester_hydrolysis.toml"),
                                 "-i", "ester=20", "-i", "hydroxide=90", "-T", "60",
                                 "--temperature-unit", "degC", "--fit",
                                 str(fitted / "temperature.json"), "--until", "30",
                                 "--draws", "30", "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert "EXTRAPOLATED" in result.output and "60.0 °C" in result.output
    assert "starting [hydroxide] = 90 mM is outside the fitted range 30–60 mM" in result.output
    data = json.loads((out / "prediction.json").read_text())
    assert data["extrapolated"] is True and len(data["flags"]) == 2
    assert data["rate_constants"]["k"]["stderr"] > 0 and "calorimetry" in data["cautions"]
    inside = runner.invoke(app, ["simulate", str(TEMPERATURE_DEMO / "ester_hydrolysis.toml"),
                                 "-i", "ester=20", "-i", "hydroxide=40", "-T", "303.15",
                                 "--fit", str(fitted / "temperature.json"), "--draws", "30",
                                 "--out", str(tmp_path / "in")])
    assert inside.exit_code == 0, inside.output
    assert "EXTRAPOLATED" not in inside.output
    assert json.loads((tmp_path / "in" / "prediction.json").read_text())["flags"] == []


def test_simulate_reads_a_fit_with_or_without_a_schema_and_refuses_an_unknown_one(
        tmp_path, temperature_fit):
    _, fitted = temperature_fit
    data = json.loads((fitted / "temperature.json").read_text())
    assert next(iter(data)) == "schema" and data["schema"] == "kinfit.temperature/1"
    assert json.loads((fitted / "result.json").read_text())["schema"] == "kinfit.result/1"
    args = ["simulate", str(TEMPERATURE_DEMO / "ester_hydrolysis.toml"), "-i", "ester=20",
            "-i", "hydroxide=40", "-T", "303.15", "--draws", "5"]
    old = {key: value for key, value in data.items() if key != "schema"}   # before versions
    write(tmp_path, "old.json", json.dumps(old))
    result = runner.invoke(app, args + ["--fit", str(tmp_path / "old.json"), "--out",
                                        str(tmp_path / "a")])
    assert result.exit_code == 0, result.output
    assert next(iter(json.loads((tmp_path / "a" / "prediction.json").read_text()))) == "schema"
    write(tmp_path, "new.json", json.dumps({**data, "schema": "kinfit.temperature/2"}))
    result = runner.invoke(app, args + ["--fit", str(tmp_path / "new.json"), "--out",
                                        str(tmp_path / "b")])
    errors = [line for line in result.output.splitlines() if line.startswith("error:")]
    assert result.exit_code == 2 and len(errors) == 1, result.output
    assert "schema 'kinfit.temperature/2' is not one this kinfit reads" in errors[0]
    assert not (tmp_path / "b").exists()


@pytest.mark.parametrize("args, message", [
    (["-i", "ester=20"], "depend on temperature; give --temperature"),
    (["-i", "ester=20", "-T", "300"], "none is known; add reference"),
    (["-i", "ester=20", "-T", "-300"], "at or below absolute zero"),
    (["-i", "ester=20", "-T", "30", "--temperature-unit", "m"], "'m' is not one of 'K', 'degC'"),
])
def test_simulate_temperature_errors(tmp_path, args, message):
    result = runner.invoke(app, ["simulate", str(TEMPERATURE_DEMO / "ester_hydrolysis.toml"),
                                 *args, "--time-unit", "min", "--concentration-unit", "mM",
                                 "--out", str(tmp_path / "x")])
    assert result.exit_code == 2 and message in result.output, result.output
    assert not (tmp_path / "x").exists()


def test_temperature_on_a_model_without_temperature_dependence(tmp_path):
    result = runner.invoke(app, ["simulate", str(MODELS / "first_order.toml"), "-i", "A=1",
                                 "-T", "300", "--time-unit", "s", "--concentration-unit", "M",
                                 "--out", str(tmp_path / "x")])
    assert result.exit_code == 2 and "do not depend on temperature" in result.output


def test_fit_with_a_run_without_temperature(tmp_path):
    write(tmp_path, "model.toml", FIRST_ORDER_MODEL + 'Ea = 50\n[temperature]\n'
                                                      'arrhenius = { k = "Ea" }\n')
    write(tmp_path, "experiment.toml", SMALL_EXPERIMENT)
    write(tmp_path, "traces.csv", SMALL_TRACES)
    result = runner.invoke(app, ["fit", str(tmp_path / "experiment.toml"), "--model",
                                 str(tmp_path / "model.toml"), "--out", str(tmp_path / "o")])
    assert result.exit_code == 2
    assert "run 'r1': the model's rate constants depend on temperature" in result.output
    assert not (tmp_path / "o").exists()


def test_two_stage_that_cannot_run_is_skipped_with_a_warning(tmp_path):
    # One run at each of two temperatures, 3 points each, with a fitted starting
    # concentration: the global fit has 5 parameters for 6 points, but each stage-one fit
    # with free orders would have 3 (k, m, A0) for 3 points, so the two-stage analysis
    # cannot run.
    write(tmp_path, "model.toml", """
        # A -> P, free order, Arrhenius
        [[steps]]
        reaction = "A -> P"
        rate = "k * [A]^m"
        [parameters]
        k = { value = 0.05, min = 0 }
        m = { value = 1, min = 0, max = 3 }
        Ea = 50
        [temperature]
        arrhenius = { k = "Ea" }
    """)
    write(tmp_path, "experiment.toml", """
        [units]
        temperature = "K"
        [data]
        file = "traces.csv"
        [[runs]]
        name = "cold"
        temperature = 300
        initial = { A = { value = 1.0, vary = true, min = 0 } }
        [[runs]]
        name = "warm"
        temperature = 320
        initial = { A = { value = 1.0, vary = true, min = 0 } }
    """)
    write(tmp_path, "traces.csv", """
        run,time,species,value
        cold,0,A,1.0
        cold,10,A,0.61
        cold,20,A,0.37
        warm,0,A,1.0
        warm,10,A,0.22
        warm,20,A,0.05
    """)
    out = tmp_path / "o"
    result = runner.invoke(app, ["fit", str(tmp_path / "experiment.toml"), "--model",
                                 str(tmp_path / "model.toml"), "--out", str(out),
                                 "--starts", "1", "--two-stage", "free"])
    assert result.exit_code == 0, result.output
    assert "warning: the two-stage analysis was skipped" in result.output
    assert "3 fitted parameters but only 3 data points" in result.output
    assert json.loads((out / "temperature.json").read_text())["two_stage"] is None


# ------------------------------------------------------------------- rank

@pytest.fixture
def rank_inputs(tmp_path):
    import numpy as np
    from conftest import synthetic_power_law

    synthetic_power_law(tmp_path, seed=5, times=np.linspace(0, 100, 9),
                        starts={"r1": (1.0, 1.0), "r2": (2.0, 1.0), "r3": (1.0, 2.0)})
    return tmp_path


def test_rank_command(rank_inputs):
    out = rank_inputs / "ranked"
    result = runner.invoke(app, ["rank", str(rank_inputs / "e.toml"), "--model",
                                 str(rank_inputs / "model.toml"), "--orders", "m=1,2",
                                 "--orders", "n=2", "--starts", "1", "--workers", "1",
                                 "--fixed-order-starts", "2", "--criterion", "AICc",
                                 "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert "Ranking of 3 candidates" in result.output and "Verdict" in result.output
    data = json.loads((out / "ranking.json").read_text())
    assert data["criterion"] == "aicc"
    assert data["candidates"][0]["fixed"] == {"m": 1.0, "n": 2.0}
    assert sum(c["akaike_weight"] for c in data["candidates"]) == pytest.approx(1.0)
    assert data["nested_tests"] and data["initial_rates"]["regression"] is not None
    assert (out / "weights.png").exists() and (out / "best" / "result.json").exists()
    assert (out / "report.html").exists()
    provenance = json.loads((out / "provenance.json").read_text())
    assert set(provenance["inputs"]) >= {"experiment", "model 1"}
    assert provenance["settings"]["orders"] == {"m": [1.0, 2.0], "n": [2.0]}
    assert provenance["settings"]["lattice_starts"] == 2
    _known_results(out)
    # the earlier name of --fixed-order-starts still works, hidden from --help
    older = runner.invoke(app, ["rank", str(rank_inputs / "e.toml"), "-m",
                                str(rank_inputs / "model.toml"), "--orders", "m=1,2",
                                "--starts", "1", "--workers", "1", "--lattice-starts", "3",
                                "--no-initial-rates", "--no-report", "--out", str(out),
                                "--overwrite"])
    assert older.exit_code == 0, older.output
    provenance = json.loads((out / "provenance.json").read_text())
    assert provenance["settings"]["lattice_starts"] == 3
    assert not (out / "report.html").exists()          # the earlier run's, removed
    assert "--lattice-starts" not in runner.invoke(app, ["rank", "--help"]).output


@pytest.mark.parametrize("orders, message", [
    ("m=1,two", "'two' is not a number"),
    ("q=1,2", "no model given has order parameter"),
    ("m=5", "cannot fix m at 5"),
])
def test_rank_bad_orders(rank_inputs, orders, message):
    out = rank_inputs / "ranked"
    result = runner.invoke(app, ["rank", str(rank_inputs / "e.toml"), "-m",
                                 str(rank_inputs / "model.toml"), "--orders", orders,
                                 "--out", str(out)])
    assert result.exit_code == 2, result.output
    errors = [line for line in result.output.splitlines() if line.startswith("error:")]
    assert len(errors) == 1 and re.search(message, errors[0]), result.output
    assert "Traceback" not in result.output and not out.exists()


def test_rank_needs_two_candidates_and_a_known_criterion(rank_inputs):
    base = ["rank", str(rank_inputs / "e.toml"), "-m", str(rank_inputs / "model.toml"),
            "--out", str(rank_inputs / "x")]
    result = runner.invoke(app, base)
    assert result.exit_code == 2 and "at least two candidates" in result.output
    result = runner.invoke(app, base + ["-m", str(rank_inputs / "model.toml"), "--criterion",
                                        "hqic"])
    assert result.exit_code == 2 and "'hqic' is not one of 'aicc', 'aic', 'bic'" in result.output
    assert not (rank_inputs / "x").exists()


# ------------------------------------------------------------------- sample

def _sample_args(paths, out, *extra):
    return ["sample", str(paths["experiment"]), "--model", str(paths["model"]), "--out",
            str(out), "--walkers", "8", "--seed", "3", "--starts", "1", *extra]


def test_sample_command(tmp_path):
    paths = write_line_problem(tmp_path)
    out = tmp_path / "post"
    result = runner.invoke(app, _sample_args(paths, out, "--steps", "400"))
    assert result.exit_code == 0, result.output
    assert "NOT CONVERGED" in result.output or "CONVERGED" in result.output
    assert "covariance 95 %" in result.output and "profile 95 %" in result.output
    assert "posterior 95 %" in result.output and "Caution" in result.output
    data = json.loads((out / "posterior.json").read_text())
    assert set(data["parameters"]) == {"k", "A_0_r1"}
    assert data["settings"]["steps"] == 400 and data["seed"] == 3
    for name in ("chain.npz", "corner.png", "bands.png", "profiles.png",
                 "posterior_summary.txt"):
        assert (out / name).exists(), name
    _known_results(out)
    # a second run into the same folder must not silently replace the chain
    again = runner.invoke(app, _sample_args(paths, out, "--steps", "400"))
    assert again.exit_code == 2 and "already holds a chain (400 steps)" in again.output
    longer = runner.invoke(app, _sample_args(paths, out, "--steps", "450", "--resume",
                                             "--no-profile"))
    assert longer.exit_code == 0, longer.output
    assert json.loads((out / "posterior.json").read_text())["diagnostics"]["n_steps"] == 450


@pytest.mark.parametrize("extra, message", [
    (["--noise", "loud"], "'loud' is not one of 'auto', 'declared', 'per-species', 'shared'"),
    (["--moves", "hop"], "'hop' is not one of 'de', 'stretch'"),
    (["--walkers", "3"], "walkers must be even"),
    (["--max-time", "-1"], "expected a positive number of seconds"),
    (["--resume", "--overwrite"], "--resume and --overwrite cannot be combined"),
])
def test_sample_bad_options(tmp_path, extra, message):
    paths = write_line_problem(tmp_path)
    out = tmp_path / "post"
    result = runner.invoke(app, _sample_args(paths, out, "--steps", "10", *extra))
    assert result.exit_code == 2, result.output
    assert message in result.output and "Traceback" not in result.output
    assert not out.exists(), "nothing may be written on bad input"


def test_killed_sampler_resumes_to_the_same_chain(tmp_path):
    # A real process is killed (SIGKILL) after its first checkpoints; the same command
    # with --resume must finish the chain exactly as an uninterrupted run does.
    import signal
    import time

    import numpy as np

    from kinfit.estimation.chains import load_chain

    paths = write_line_problem(tmp_path)
    command = [sys.executable, "-m", "kinfit.app.cli"]
    options = ["--steps", "300", "--checkpoint-every", "10", "--no-profile"]
    killed = tmp_path / "killed"
    proc = subprocess.Popen(command + _sample_args(paths, killed, *options),
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    chain_file = killed / "chain.npz"
    deadline = time.monotonic() + 120
    try:
        while time.monotonic() < deadline and proc.poll() is None:
            if chain_file.exists() and load_chain(chain_file)[0].n_done >= 20:
                break
            time.sleep(0.01)
    finally:
        proc.send_signal(signal.SIGKILL)
        proc.wait()
    done = load_chain(chain_file)[0].n_done
    assert 20 <= done < 300, "the process must be killed part-way"
    assert not (killed / "posterior.json").exists()
    resumed = subprocess.run(command + _sample_args(paths, killed, *options, "--resume"),
                             capture_output=True, text=True)
    assert resumed.returncode == 0, resumed.stderr
    whole = tmp_path / "whole"
    straight = subprocess.run(command + _sample_args(paths, whole, *options),
                              capture_output=True, text=True)
    assert straight.returncode == 0, straight.stderr
    a, b = load_chain(chain_file)[0], load_chain(whole / "chain.npz")[0]
    assert a.n_done == b.n_done == 300
    np.testing.assert_array_equal(a.chain, b.chain)
    np.testing.assert_array_equal(a.log_prob, b.log_prob)
    post_a = json.loads((killed / "posterior.json").read_text())["parameters"]
    post_b = json.loads((whole / "posterior.json").read_text())["parameters"]
    assert post_a["k"]["median"] == post_b["k"]["median"]


# ------------------------------------------------------------ spectrometer

SPECTRA_DEMO = DEMO / "spectra"


def test_fit_command_on_full_spectra(tmp_path):
    out = tmp_path / "spectra"
    result = runner.invoke(app, ["fit", str(SPECTRA_DEMO / "spectra.toml"), "--model",
                                 str(SPECTRA_DEMO / "dye_formation.toml"), "--out", str(out),
                                 "--starts", "1", "--wavelengths", "420,560"])
    assert result.exit_code == 0, result.output
    assert "resolved at 71 wavelengths" in result.output and "SVD of the spectra" in result.output
    header = (out / "spectra.csv").read_text().splitlines()[0]
    assert header == ("wavelength_nm,precursor,precursor_stderr,intermediate,"
                      "intermediate_stderr,dye,dye_stderr")
    data = json.loads((out / "result.json").read_text())
    assert data["signals"]["components"]["n_significant"] == 3
    assert len(data["signals"]["spectra"]["wavelengths"]) == 71
    lines = (out / "residual_map_r2.csv").read_text().splitlines()
    assert lines[0].startswith("time,380,384") and len(lines) == 1 + 46
    _known_results(out)


def test_fit_command_on_absorbance(tmp_path):
    out = tmp_path / "abs"
    result = runner.invoke(app, ["fit", str(SPECTRA_DEMO / "absorbance.toml"), "--model",
                                 str(SPECTRA_DEMO / "dye_formation.toml"), "--out", str(out),
                                 "--starts", "1"])
    assert result.exit_code == 0, result.output
    data = json.loads((out / "result.json").read_text())
    eps = data["signals"]["coefficients"]["eps_dye_A510"]
    assert eps["unit"] == "mM^-1 cm^-1" and eps["stderr"] > 0
    assert data["statistics"]["n_params"] == 2 + 4 + 2 + 4    # k, t0, ε, offsets


def test_components_command():
    result = runner.invoke(app, ["components", str(SPECTRA_DEMO / "spectra.toml")])
    assert result.exit_code == 0, result.output
    assert "3 run(s), 138 spectra of 71 wavelengths" in result.output
    assert "significant components: 3" in result.output


@pytest.mark.parametrize("args, message", [
    (["--components", "none"], "expected auto, all or a whole number"),
    (["--wavelengths", "blue"], "expected numbers separated by commas"),
])
def test_bad_spectrometer_options(tmp_path, args, message):
    result = runner.invoke(app, ["fit", str(SPECTRA_DEMO / "spectra.toml"), "--model",
                                 str(SPECTRA_DEMO / "dye_formation.toml"), "--out",
                                 str(tmp_path / "o"), *args])
    assert result.exit_code == 2 and message in result.output
    assert not (tmp_path / "o").exists()


def test_components_of_an_experiment_without_spectra():
    result = runner.invoke(app, ["components", str(DEMO / "experiment.toml")])
    assert result.exit_code == 2 and "no run gives a spectrum file" in result.output


def test_sample_on_a_temperature_model_gives_posterior_activation_intervals(tmp_path):
    # The sampler covers temperature dependence: Ea, A, ΔH‡, ΔS‡ and ΔG‡ get
    # posterior intervals beside the delta-method ones.
    out = tmp_path / "post"
    result = runner.invoke(app, ["sample", str(DEMO / "temperature" / "experiment.toml"),
                                 "--model", str(DEMO / "temperature" / "ester_hydrolysis.toml"),
                                 "--out", str(out), "--steps", "300", "--walkers", "16",
                                 "--no-profile", "--starts", "2"])
    assert result.exit_code == 0, result.output
    data = json.loads((out / "temperature.json").read_text())
    estimates = data["activation"][0]["estimates"]
    for name in ("Ea", "dH"):
        lo, hi = estimates[name]["posterior_interval"]
        assert lo < estimates[name]["value"] < hi
    assert "temperature" in (out / "report.html").read_text(encoding="utf-8").lower()


def test_command_line_and_library_share_their_defaults():
    # each option default of the CLI is the library's own default (core/defaults.py)
    import inspect

    import kinfit
    from kinfit.app import cli

    def option(command, name):
        return inspect.signature(command).parameters[name].default.default

    def library(function, name):
        return inspect.signature(function).parameters[name].default

    assert option(cli.fit_command, "starts") == library(kinfit.fit, "starts")
    assert option(cli.sample_command, "walkers") == library(kinfit.sample, "walkers")
    assert option(cli.sample_command, "steps") == library(kinfit.sample, "steps")
    assert option(cli.sample_command, "moves") == library(kinfit.sample, "moves")
    assert option(cli.rank_command, "fixed_order_starts") == library(kinfit.rank,
                                                                     "lattice_starts")
    assert option(cli.rank_command, "criterion") == library(kinfit.rank, "criterion")


# --------------------------------------------- simulate: units from the fit or given

MIN_MM_EXPERIMENT = """
    [units]
    time = "min"
    concentration = "mM"
    [data]
    file = "traces.csv"
    [[runs]]
    name = "r1"
    initial = { A = 1.0 }
    [[runs]]
    name = "r2"
    initial = { A = 2.0 }
"""


@pytest.fixture(scope="module")
def minute_fit(tmp_path_factory):
    """A first-order fit in min and mM (data from the closed form A0 exp(−kt), seeded)."""
    import numpy as np

    folder = tmp_path_factory.mktemp("minute")
    rng = np.random.default_rng(4)
    times = np.linspace(0.0, 40.0, 11)
    rows = ["run,time,species,value"]
    for run, a0 in (("r1", 1.0), ("r2", 2.0)):
        values = a0 * np.exp(-0.07 * times) + rng.normal(0, 0.01, times.size)
        rows += [f"{run},{t:g},A,{v:.5f}" for t, v in zip(times, values)]
    write(folder, "model.toml", FIRST_ORDER_MODEL)
    write(folder, "experiment.toml", MIN_MM_EXPERIMENT)
    write(folder, "traces.csv", "\n".join(rows) + "\n")
    out = folder / "fit"
    result = runner.invoke(app, ["fit", str(folder / "experiment.toml"), "-m",
                                 str(folder / "model.toml"), "-o", str(out), "--starts", "1",
                                 "--no-report"])
    assert result.exit_code == 0, result.output
    return folder, out


def test_simulate_needs_units_without_a_fit(tmp_path):
    out = tmp_path / "sim"
    result = runner.invoke(app, ["simulate", str(MODELS / "first_order.toml"), "-i", "A=1",
                                 "--time-unit", "min", "--out", str(out)])
    assert result.exit_code == 2
    assert ("give --concentration-unit: the model file's values carry no units"
            in result.output)
    result = runner.invoke(app, ["simulate", str(MODELS / "first_order.toml"), "-i", "A=1",
                                 "--out", str(out)])
    assert result.exit_code == 2 and "give --time-unit and --concentration-unit" in result.output
    assert not out.exists()


def test_simulate_from_an_ordinary_fit_takes_its_values_units_and_covariance(tmp_path,
                                                                            minute_fit):
    import numpy as np

    folder, fitted = minute_fit
    data = json.loads((fitted / "result.json").read_text())
    basis = data["prediction_basis"]
    assert basis["units"]["time"] == "min" and basis["units"]["concentration"] == "mM"
    assert basis["free"] == ["k"] and basis["fitted_range"]["initial"]["A"] == [1.0, 2.0]
    se = data["parameters"]["k"]["stderr"]
    # the covariance written for the band is the fit's (standard error squared)
    assert basis["covariance"][0][0] == pytest.approx(se ** 2, rel=1e-9)
    out = tmp_path / "sim"
    result = runner.invoke(app, ["simulate", str(folder / "model.toml"), "-i", "A=1.5",
                                 "--fit", str(fitted / "result.json"), "--until", "30",
                                 "--points", "31", "--draws", "50", "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert "times in min, concentrations in mM" in result.output
    assert "at t = 30 min:" in result.output and " mM  (95 % band" in result.output
    assert "EXTRAPOLATED" not in result.output
    header, *rows = (out / "simulation.csv").read_text().splitlines()
    assert header == "time (min),A (mM),P (mM),A_lower (mM),A_upper (mM),P_lower (mM),P_upper (mM)"
    table = np.array([[float(x) for x in row.split(",")] for row in rows])
    k = data["parameters"]["k"]["value"]
    # outside check: the closed form of first-order decay (physical-chemistry textbooks),
    # [A] = [A]0 exp(-k t), at the fitted k
    np.testing.assert_allclose(table[:, 1], 1.5 * np.exp(-k * table[:, 0]), rtol=1e-6)
    assert (table[1:, 3] < table[1:, 1]).all() and (table[1:, 1] < table[1:, 4]).all()
    prediction = json.loads((out / "prediction.json").read_text())
    assert prediction["units"] == {"time": "min", "concentration": "mM"}
    assert prediction["uncertainty"] == "covariance"


def test_simulate_from_a_fit_refuses_other_units_and_other_files(tmp_path, minute_fit):
    folder, fitted = minute_fit
    base = ["simulate", str(folder / "model.toml"), "-i", "A=1", "--fit",
            str(fitted / "result.json"), "--out", str(tmp_path / "x")]
    result = runner.invoke(app, base + ["--time-unit", "s"])
    assert result.exit_code == 2
    assert "--time-unit s: the fit in" in result.output and "is in min" in result.output
    same = runner.invoke(app, base + ["--time-unit", "minute", "--concentration-unit",
                                      "mmol/L", "--draws", "0"])
    assert same.exit_code == 0, same.output        # the same units, written otherwise
    data = json.loads((fitted / "result.json").read_text())
    write(tmp_path, "posterior.json", json.dumps({"schema": "kinfit.posterior/1"}))
    other = runner.invoke(app, base[:-4] + ["--fit", str(tmp_path / "posterior.json"),
                                            "--out", str(tmp_path / "y")])
    assert other.exit_code == 2 and "holds 'kinfit.posterior/1', not a fit" in other.output
    write(tmp_path, "bare.json", json.dumps({**data, "prediction_basis": None}))
    bare = runner.invoke(app, base[:-4] + ["--fit", str(tmp_path / "bare.json"),
                                           "--out", str(tmp_path / "z")])
    assert bare.exit_code == 2 and "holds no prediction basis" in bare.output


# --------------------------------------------------------- options of every command

def test_version():
    from kinfit.core.version import __version__

    result = runner.invoke(app, ["--version"])
    assert result.exit_code == 0 and result.output.strip() == f"kinfit {__version__}"


def test_every_help_lists_the_allowed_values():
    shown = {}
    for command in COMMANDS:
        text = runner.invoke(app, command + ["-h"]).output
        assert "<str>" not in text and "<list[" not in text, command
        shown[tuple(command)] = " ".join(text.split())
    assert "--two-stage <free|global|none>" in shown[("fit",)]
    for command in (("fit",), ("sample",)):
        assert "--noise <auto|declared|per-species|shared>" in shown[command]
    assert "--moves <de|stretch>" in shown[("sample",)]
    assert "--criterion <aicc|aic|bic>" in shown[("rank",)]
    assert "--components <auto|all|N>" in shown[("fit",)]
    assert "--temperature-unit <K|degC>" in shown[("simulate",)]


def test_the_allowed_values_are_the_library_s():
    import typing

    from kinfit.analysis.criteria import CRITERIA
    from kinfit.analysis.two_stage import ORDERS
    from kinfit.app import cli
    from kinfit.estimation.noise import FIT_NOISE_MODES
    from kinfit.estimation.sampler import MOVES
    from kinfit.estimation.space import NOISE_MODES

    def choices(command, name):
        return typing.get_args(typing.get_type_hints(command)[name])

    assert choices(cli.fit_command, "noise") == cli.NOISE == FIT_NOISE_MODES == NOISE_MODES
    assert choices(cli.sample_command, "noise") == cli.NOISE
    assert choices(cli.sample_command, "moves") == cli.MOVES == MOVES
    assert choices(cli.fit_command, "two_stage") == cli.TWO_STAGE == ORDERS + ("none",)
    assert set(choices(cli.rank_command, "criterion")) == set(cli.CRITERIA) == set(CRITERIA)


def test_short_options_mean_the_same_in_every_command(tmp_path):
    import typer.main

    from kinfit.app import cli

    meaning = {}
    for command in typer.main.get_command(cli.app).commands.values():
        for param in command.params:
            if param.param_type_name != "option" or param.hidden:
                continue
            longs = [o for o in param.opts if o.startswith("--")]
            for short in (o for o in param.opts if not o.startswith("--")):
                meaning.setdefault(short, set()).add(longs[0])
    assert meaning == {"-m": {"--model"}, "-o": {"--out"}, "-i": {"--initial"},
                       "-T": {"--temperature"}}
    # --set keeps its earlier short form, hidden
    assert "-s," not in runner.invoke(app, ["simulate", "-h"]).output
    outputs = []
    for option in ("-s", "--set"):
        out = tmp_path / option
        result = runner.invoke(app, ["simulate", str(MODELS / "consecutive.toml"), "-i", "A=1",
                                     option, "k1=2.5", "--time-unit", "s",
                                     "--concentration-unit", "M", "--until", "1", "--points",
                                     "3", "-o", str(out)])
        assert result.exit_code == 0, result.output
        outputs.append((out / "simulation.csv").read_text())
    assert outputs[0] == outputs[1]
    default = runner.invoke(app, ["simulate", str(MODELS / "consecutive.toml"), "-i", "A=1",
                                  "--time-unit", "s", "--concentration-unit", "M", "--until",
                                  "1", "--points", "3", "-o", str(tmp_path / "default")])
    assert default.exit_code == 0
    assert (tmp_path / "default" / "simulation.csv").read_text() != outputs[0]


def test_fit_noise_option(tmp_path, minute_fit):
    folder, _ = minute_fit
    out = tmp_path / "fit"
    args = ["fit", str(folder / "experiment.toml"), "-m", str(folder / "model.toml"), "-o",
            str(out), "--starts", "1", "--no-report"]
    declared = runner.invoke(app, args + ["--noise", "declared"])
    assert declared.exit_code == 2 and "noise 'declared' was asked for" in declared.output
    assert not out.exists()
    result = runner.invoke(app, args + ["--noise", "per-species"])
    assert result.exit_code == 0, result.output
    assert "σ of each species estimated: A " in result.output
    data = json.loads((out / "result.json").read_text())
    assert data["statistics"]["noise"] == "per-species"
    assert set(data["statistics"]["noise_levels"]) == {"A"}
    assert json.loads((out / "provenance.json").read_text())["settings"]["noise"] == "per-species"


# ---------------------------------------------------- one rule for output folders

def test_fit_refuses_a_folder_with_earlier_results_and_overwrite_replaces_them(tmp_path):
    write(tmp_path, "model.toml", FIRST_ORDER_MODEL)
    write(tmp_path, "experiment.toml", SMALL_EXPERIMENT)
    write(tmp_path, "traces.csv", SMALL_TRACES)
    out = tmp_path / "out"
    args = ["fit", str(tmp_path / "experiment.toml"), "-m", str(tmp_path / "model.toml"),
            "-o", str(out), "--starts", "1"]
    assert runner.invoke(app, args).exit_code == 0
    # an earlier sampling's files and a file of the user's in the same folder
    (out / "posterior.json").write_text('{"schema": "kinfit.posterior/1"}')
    (out / "corner.png").write_bytes(b"old")
    (out / "notes.txt").write_text("mine")
    before = (out / "result.json").read_text()
    again = runner.invoke(app, args)
    assert again.exit_code == 2
    errors = [line for line in again.output.splitlines() if line.startswith("error:")]
    assert len(errors) == 1 and re.fullmatch(
        rf"error: --out {re.escape(str(out))}: already holds results of an earlier run "
        r"\(corner\.png and \d+ more\); add --overwrite to replace them, or choose another "
        r"--out", errors[0]), errors
    assert (out / "result.json").read_text() == before
    replaced = runner.invoke(app, args + ["--overwrite"])
    assert replaced.exit_code == 0, replaced.output
    assert not (out / "posterior.json").exists() and not (out / "corner.png").exists()
    assert (out / "notes.txt").read_text() == "mine"
    assert "Posterior" not in (out / "report.html").read_text(encoding="utf-8")


@pytest.mark.parametrize("command", [
    ["simulate", str(MODELS / "first_order.toml"), "-i", "A=1", "--time-unit", "s",
     "--concentration-unit", "M"],
    ["rank", "e.toml", "-m", "m1.toml", "-m", "m2.toml"],
    ["sample", "e.toml", "-m", "m1.toml"],
    ["demo"],
])
def test_every_command_refuses_a_folder_with_earlier_results(tmp_path, command):
    out = tmp_path / "out"
    out.mkdir()
    (out / "result.json").write_text("{}")
    result = runner.invoke(app, command + ["--out", str(out)])
    assert result.exit_code == 2, result.output
    assert "already holds results of an earlier run (result.json)" in result.output
    assert [p.name for p in out.iterdir()] == ["result.json"]
