"""Experiment files and data tables: both layouts, units, noise and bad input."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from conftest import DEMO, SMALL_EXPERIMENT, SMALL_TRACES
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import constants
from scipy.constants import convert_temperature

from kinfit.core.errors import KinfitError, KinfitWarning
from kinfit.inputs.experiment import initial_name, load_experiment


def test_demo_experiment_loads():
    exp = load_experiment(DEMO / "experiment.toml")
    assert len(exp.runs) == 6 and exp.n_points == 300
    assert exp.units.time == "min" and exp.units.concentration == "mM"
    assert exp.species == ("thiol", "adduct")
    # 25 degC in kelvin, against scipy.constants' conversion (CODATA-based reference)
    assert exp.runs[0].temperature == pytest.approx(convert_temperature(25, "Celsius", "Kelvin"))
    sigma = exp.sigma(exp.runs[0].traces[0])
    y = exp.runs[0].traces[0].values
    np.testing.assert_allclose(sigma, np.sqrt(0.3 ** 2 + (0.015 * y) ** 2))


def test_long_layout(small):
    exp = load_experiment(small["experiment"])
    run = exp.runs[0]
    assert run.initial == {"A": 1.0}
    np.testing.assert_array_equal(run.traces[0].times, [0, 10, 20, 30])
    np.testing.assert_array_equal(run.traces[0].lines, [2, 3, 4, 5])
    assert exp.noise is None


def test_wide_layout_with_gaps_and_fitted_initial(files):
    files("e.toml", """
        [units]
        time = "min"
        concentration = "uM"
        [[runs]]
        name = "run 1"
        file = "run1.csv"
        initial = { A = { value = 10, vary = true, min = 0 }, B = 5 }
        time_offset = { value = 0.1, vary = true, min = 0, max = 1 }
    """)
    files("run1.csv", """
        time,A,P
        0,10.0,0.0
        1,8.1,
        2,6.7,3.2

        3,5.5,4.4
    """)
    exp = load_experiment(files.folder / "e.toml")
    run = exp.runs[0]
    assert [t.species for t in run.traces] == ["A", "P"]
    np.testing.assert_array_equal(run.traces[1].times, [0, 2, 3])   # the empty cell is skipped
    np.testing.assert_array_equal(run.traces[1].lines, [2, 4, 6])
    assert run.initial == {"B": 5.0}
    assert run.fitted_initial["A"].name == initial_name("A", "run 1") == "A_0_run_1"
    assert run.time_offset.name == "t0_run_1" and run.time_offset.vary


def test_windows_line_endings_and_byte_order_mark(files):
    model = SMALL_EXPERIMENT
    files("experiment.toml", model)
    data = ("\ufeff" + SMALL_TRACES.strip().replace("    ", "")).replace("\n", "\r\n")
    (files.folder / "traces.csv").write_bytes(data.encode("utf-8"))
    exp = load_experiment(files.folder / "experiment.toml")
    assert exp.n_points == 4


def test_utf16_with_byte_order_mark_is_read(files):
    files("experiment.toml", SMALL_EXPERIMENT)
    text = SMALL_TRACES.strip().replace("    ", "")
    (files.folder / "traces.csv").write_bytes(text.encode("utf-16"))
    assert load_experiment(files.folder / "experiment.toml").n_points == 4


def test_noise_declarations(files):
    files("e.toml", SMALL_EXPERIMENT + """
    [noise]
    A = { absolute = 0.01, relative = 0.02 }
    """)
    files("traces.csv", SMALL_TRACES)
    exp = load_experiment(files.folder / "e.toml")
    trace = exp.runs[0].traces[0]
    np.testing.assert_allclose(exp.sigma(trace),
                               np.sqrt(0.01 ** 2 + (0.02 * trace.values) ** 2))


def test_fitted_starting_concentration_names_keep_the_species_apart_from_the_zero():
    # species N2O5 in run d1: the old form glued the subscript zero to the name (N2O50_d1)
    assert initial_name("N2O5", "d1") == "N2O5_0_d1"
    assert initial_name("A", "run 1") == "A_0_run_1"


def test_starting_concentrations_with_units(files):
    # SI prefixes from scipy.constants (CODATA/SI) as the outside reference; 1 M = 1 mol/L
    experiment = SMALL_EXPERIMENT.replace('concentration = "M"', 'concentration = "mM"').replace(
        "A = 1.0", 'A = "1 M", B = "250 uM", C = "2e-3mol/L", '
                   'D = { value = "0.5 M", vary = true, min = "100 mM", max = "2 mol/L" }, '
                   'E = { value = "40 µM", vary = false }')
    run = load_experiment(experiment_with(files, experiment=experiment)).runs[0]
    milli, micro = constants.milli, constants.micro
    assert run.initial["A"] == pytest.approx(1.0 / milli)
    assert run.initial["B"] == pytest.approx(250 * micro / milli)
    assert run.initial["C"] == pytest.approx(2e-3 / milli)
    assert run.initial["E"] == pytest.approx(40 * micro / milli)
    d = run.fitted_initial["D"]
    assert (d.value, d.min, d.max) == pytest.approx((0.5 / milli, 100.0, 2.0 / milli))


@pytest.mark.parametrize("initial, message", [
    ('A = "50 g/L"', r"line 9 \(run 'r1', initial\.A\): '50 g/L' cannot be converted to M, "
                     r"the experiment's concentration unit"),
    ('A = "3 min"', r"line 9 \(run 'r1', initial\.A\): 'min' in '3 min' is not a concentration"),
    ('A = { value = 1, vary = true, max = "2 m" }',
     r"line 9 \(run 'r1', initial\.A\.max\): 'm' in '2 m' is not a concentration unit"),
    ('A = "-2 mM"', r"initial\.A\): a concentration cannot be negative \(got '-2 mM'\)"),
])
def test_starting_concentrations_with_wrong_units_are_refused(files, initial, message):
    path = experiment_with(files, experiment=SMALL_EXPERIMENT.replace("A = 1.0", initial))
    with pytest.raises(KinfitError, match=message):
        load_experiment(path)


@pytest.mark.parametrize("experiment, message", [
    # runs at 10-50 meant as °C were once read as 10-50 K without a word
    (SMALL_EXPERIMENT.replace('name = "r1"', 'name = "r1"\ntemperature = 25'),
     r"experiment\.toml, line 9 \(run 'r1'\): temperature = 25 has no unit; declare \[units\] "
     r"temperature = \"degC\" \(or \"K\"\) in the experiment file"),
    ("temperature = 25\n" + SMALL_EXPERIMENT,
     r"experiment\.toml, line 1 \(temperature\): temperature = 25 has no unit"),
])
def test_a_temperature_without_a_declared_unit_is_refused(files, experiment, message):
    with pytest.raises(KinfitError, match=message):
        load_experiment(experiment_with(files, experiment=experiment))


def test_no_temperature_needs_no_temperature_unit(small):
    exp = load_experiment(small["experiment"])
    assert exp.runs[0].temperature is None and exp.units.temperature is None


def test_implausible_temperatures_are_named_in_a_warning(files):
    # 150-700 K: the range of solution kinetics (common practice); 25 K is a °C slip
    experiment = SMALL_EXPERIMENT.replace('name = "r1"', 'name = "r1"\ntemperature = 25')
    experiment = experiment.replace('concentration = "M"', 'concentration = "M"\n'
                                                           'temperature = "K"')
    with pytest.warns(KinfitWarning, match=r"experiment\.toml: run\(s\) 'r1' at 25\.00 K: "
                                           r"outside 150–700 K.*\[units\] temperature"):
        exp = load_experiment(experiment_with(files, experiment=experiment))
    assert exp.runs[0].temperature == 25.0
    with warnings.catch_warnings():
        warnings.simplefilter("error", KinfitWarning)
        celsius = load_experiment(experiment_with(
            files, experiment=experiment.replace('temperature = "K"', 'temperature = "degC"')))
    # 25 degC in kelvin, against scipy.constants (CODATA-based reference)
    assert celsius.runs[0].temperature == pytest.approx(constants.zero_Celsius + 25.0)


def test_many_implausible_runs_are_summarised(files):
    runs = "".join(f'[[runs]]\nname = "r{i}"\ntemperature = {10 * i}\ninitial = {{ A = 1 }}\n'
                   for i in range(1, 6))
    traces = "run,time,species,value\n" + "".join(f"r{i},{t},A,{1 - t / 10}\n"
                                                    for i in range(1, 6) for t in (0, 1, 2))
    files("traces.csv", traces)
    files("e.toml", '[units]\ntemperature = "K"\n[data]\nfile = "traces.csv"\n' + runs)
    with pytest.warns(KinfitWarning, match=r"run\(s\) 'r1' at 10\.00 K, 'r2' at 20\.00 K, "
                                           r"'r3' at 30\.00 K and 2 more \(10\.00–50\.00 K\)"):
        load_experiment(files.folder / "e.toml")


# ---------------------------------------------------------------- bad input

def experiment_with(files, traces=SMALL_TRACES, experiment=SMALL_EXPERIMENT, extra=""):
    files("experiment.toml", experiment + extra)
    if traces is not None:
        files("traces.csv", traces)
    return files.folder / "experiment.toml"


@pytest.mark.parametrize("traces, message", [
    ("", r"traces\.csv: the data file is empty"),
    ("run,time,species,value\n", "header but no data rows"),
    ("run,time,value\nr1,0,1\n", r"line 1: missing column\(s\) species"),
    ("run,time,species,value\nr1,0,A,1\nr1,10,A,abc\nr1,20,A,0.3\n",
     r"line 3: value 'abc' is not a number"),
    ("run,time,species,value\nr1,0,A,1\nr1,10,A,nan\nr1,20,A,0.3\n",
     r"line 3: value is 'nan'; expected a number"),
    ("run,time,species,value\nr1,0,A,1\nr1,10,A,inf\nr1,20,A,0.3\n",
     r"line 3: value 'inf' is not a finite number"),
    ("run,time,species,value\nr1,-5,A,1\nr1,10,A,0.5\nr1,20,A,0.3\n", r"line 2: negative time"),
    ("run,time,species,value\nr1,0,A,1\nr1,10,A,0.5\nr1,10,A,0.4\n",
     r"line 4: time 10 is repeated"),
    ("run,time,species,value\nr1,0,A,1\nr1,20,A,0.5\nr1,10,A,0.6\n",
     r"line 4: time is not increasing .*t=10 after t=20"),
    ("run,time,species,value\nr1,0,A,1\nr1,10,A,0.5\n", "has 2 data point"),
    ("run,time,species,value\nr1,0,A,1\nr1,10,A,0.5\nr1,20,A,0.3\nr9,0,A,1\n",
     r"line 5: run 'r9' is not listed in the experiment"),
    ("run,time,species,value\nr1,0,A,1\nrun,time,species,value\nr1,20,A,0.3\n",
     r"line 3: time 'time' is not a number \(is the header repeated here\?\)"),
    ("run,time,species,value\nr1,0,A,1,7\n", r"line 2: more values than the header"),
    ("run,time,species,value\nr1,0,A,1\nr1,1,A,1,7\n", r"line 3: not a CSV table.*saw 5"),
    ("run,time,species,value\nr1,0,A\n", r"line 2: value is missing"),
    ("run,time,species,value\nr1,0,,1\n", r"line 2: the species is missing"),
])
def test_bad_long_tables(files, traces, message):
    with pytest.raises(KinfitError, match=message):
        load_experiment(experiment_with(files, traces))


def test_latin1_file_is_refused_with_its_line(files):
    path = experiment_with(files, None)
    (files.folder / "traces.csv").write_bytes(
        "run,time,species,value\nr1,0,A,1\nr1,10,A,0.5 \u00b5M\n".encode("latin-1"))
    with pytest.raises(KinfitError, match=r"traces\.csv, line 3: byte 0xb5 is not valid UTF-8"):
        load_experiment(path)


@pytest.mark.parametrize("extra_or_experiment, message", [
    (SMALL_EXPERIMENT.replace('concentration = "M"', 'concentration = "blorps"'),
     r"cannot read the unit 'blorps'"),
    (SMALL_EXPERIMENT.replace('concentration = "M"', 'concentration = "s"'),
     r"'s' is not a concentration unit"),
    (SMALL_EXPERIMENT.replace('file = "traces.csv"', 'file = "missing.csv"'),
     r"experiment\.toml, line 6 \(data\.file\): data file 'missing\.csv' not found"),
    (SMALL_EXPERIMENT.replace('name = "r1"', 'name = "r1"\nsmell = 1'),
     r"unknown key 'smell' in a run"),
    (SMALL_EXPERIMENT.replace("A = 1.0", "A = -1.0"), r"cannot be negative"),
    (SMALL_EXPERIMENT.replace("A = 1.0", 'A = "lots"'),
     r"initial\.A\): cannot read 'lots'; expected a concentration"),
    (SMALL_EXPERIMENT.replace("A = 1.0", "A = { value = 1, vary = true, min = 2 }"),
     r"outside its bounds"),
    (SMALL_EXPERIMENT.replace("[[runs]]", "[[runs]\n"), r"line 7, column \d+: not valid TOML"),
    (SMALL_EXPERIMENT.replace('name = "r1"', 'name = "r1"\ntemperature = "warm"'),
     "temperature must be a number"),
    (SMALL_EXPERIMENT + '\n[[runs]]\nname = "r1"\n', "run name 'r1' is used twice"),
    (SMALL_EXPERIMENT + '\n[[runs]]\nname = "r2"\n', "run 'r2' has no data"),
    (SMALL_EXPERIMENT + "\n[noise]\nB = { absolute = 0.1 }\n", "no noise is declared for 'A'"),
    (SMALL_EXPERIMENT + "\n[noise]\nA = { absolute = -0.1 }\n", "non-negative"),
    (SMALL_EXPERIMENT + "\n[noise]\nA = { relative = 0.1 }\n", "relative noise gives σ = 0"),
])
def test_bad_experiment_files(files, extra_or_experiment, message):
    path = experiment_with(files, SMALL_TRACES.replace("r1,30,A,0.22", "r1,30,A,0.0"),
                           experiment=extra_or_experiment)
    with pytest.raises(KinfitError, match=message):
        load_experiment(path)


def test_missing_experiment_file(tmp_path):
    with pytest.raises(KinfitError, match="experiment file .*not found"):
        load_experiment(tmp_path / "nope.toml")


def test_wide_layout_errors(files):
    files("e.toml", '[[runs]]\nname = "a"\nfile = "a.csv"\n')
    files("a.csv", "t,A\n0,1\n1,2\n2,3\n")
    with pytest.raises(KinfitError, match=r"a\.csv, line 1: no 'time' column"):
        load_experiment(files.folder / "e.toml")
    files("a.csv", "time,A\n0,1\n1,x\n2,3\n")
    with pytest.raises(KinfitError, match=r"a\.csv, line 3: A 'x' is not a number"):
        load_experiment(files.folder / "e.toml")
    files("a.csv", "time,A,A\n0,1,1\n1,2,2\n2,3,3\n")
    with pytest.raises(KinfitError, match=r"empty or repeated name"):
        load_experiment(files.folder / "e.toml")


# ------------------------------------------------------------------ properties

@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                   HealthCheck.function_scoped_fixture])
@given(st.binary(max_size=400))
def test_any_bytes_as_a_data_table_give_data_or_a_kinfit_error(files, blob):
    # Property: whatever the data file holds, the reader returns an experiment or
    # raises KinfitError, never anything else (common practice for file readers).
    path = experiment_with(files, None)
    (files.folder / "traces.csv").write_bytes(blob)
    try:
        load_experiment(path)
    except KinfitError:
        pass


csv_cell = st.one_of(st.just("r1"), st.just("A"), st.floats(allow_nan=True).map(str),
                     st.text(alphabet="0123456789.-e, \"", max_size=6))


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                   HealthCheck.function_scoped_fixture])
@given(st.lists(st.lists(csv_cell, min_size=1, max_size=5), max_size=8))
def test_csv_like_tables_give_data_or_a_kinfit_error(files, rows):
    path = experiment_with(files, None)
    text = "run,time,species,value\n" + "\n".join(",".join(r) for r in rows)
    (files.folder / "traces.csv").write_text(text, encoding="utf-8")
    try:
        exp = load_experiment(path)
    except KinfitError:
        return
    for run in exp.runs:
        for trace in run.traces:
            assert np.isfinite(trace.values).all() and (np.diff(trace.times) > 0).all()


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                   HealthCheck.function_scoped_fixture])
@given(st.text(max_size=300))
def test_any_experiment_text_gives_an_experiment_or_a_kinfit_error(files, text):
    (files.folder / "experiment.toml").write_text(text, encoding="utf-8")
    files("traces.csv", SMALL_TRACES)
    try:
        load_experiment(files.folder / "experiment.toml")
    except KinfitError:
        pass
