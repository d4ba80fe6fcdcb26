"""Data tables: both layouts, each point's own σ, columns kinfit does not know."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import SMALL_EXPERIMENT
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from kinfit.core.errors import KinfitError, KinfitWarning
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.tables import careful_long, fast_long

WIDE = """
    [units]
    time = "s"
    concentration = "M"
    [[runs]]
    name = "r1"
    file = "r1.csv"
    initial = { A = 1.0 }
"""
LONG_SIGMA = ("run,time,species,value,sigma\nr1,0,A,1.0,0.01\nr1,10,A,0.61,0.02\n"
              "r1,20,A,0.37,0.03\nr1,30,A,0.22,0.04\n")


def _load(files, experiment, **data):
    files("experiment.toml", experiment)
    for name, text in data.items():
        files(name.replace("_", "."), text)
    return load_experiment(files.folder / "experiment.toml")


def test_long_layout_sigma_column_is_each_points_sigma(files):
    exp = _load(files, SMALL_EXPERIMENT, traces_csv=LONG_SIGMA)
    trace = exp.runs[0].traces[0]
    np.testing.assert_array_equal(trace.sigma, [0.01, 0.02, 0.03, 0.04])
    np.testing.assert_array_equal(exp.sigma(trace), trace.sigma)
    assert exp.noise is None and exp.sigma_known


def test_long_layout_sigma_for_one_species_only_needs_noise_for_the_other(files):
    text = LONG_SIGMA + "r1,0,P,0.0,\nr1,10,P,0.39,\nr1,20,P,0.63,\n"
    with pytest.raises(KinfitError, match=r"traces\.csv: P in run 'r1' has no σ column, but A in "
                                          r"run 'r1' has one; .*declare \[noise\]"):
        _load(files, SMALL_EXPERIMENT, traces_csv=text)
    exp = _load(files, SMALL_EXPERIMENT + "[noise]\nP = { absolute = 0.005 }\n",
                traces_csv=text)
    a, p = exp.runs[0].traces
    np.testing.assert_array_equal(exp.sigma(a), [0.01, 0.02, 0.03, 0.04])
    np.testing.assert_array_equal(exp.sigma(p), [0.005] * 3)


def test_own_sigma_takes_precedence_over_declared_noise_and_says_so(files):
    experiment = SMALL_EXPERIMENT + "[noise]\nA = { absolute = 0.5 }\n"
    with pytest.warns(KinfitWarning, match=r"noise\.A is not used: every A trace has its own σ "
                                           r"column, which takes precedence over \[noise\]"):
        exp = _load(files, experiment, traces_csv=LONG_SIGMA)
    np.testing.assert_array_equal(exp.sigma(exp.runs[0].traces[0]), [0.01, 0.02, 0.03, 0.04])


@pytest.mark.parametrize("body, message", [
    ("r1,0,A,1.0,0.01\nr1,10,A,0.61,\nr1,20,A,0.37,0.03\n",
     r"traces\.csv, line 3: sigma is empty for A, but line 2 gives one"),
    ("r1,0,A,1.0,0.01\nr1,10,A,0.61,0\nr1,20,A,0.37,0.03\n",
     r"traces\.csv, line 3: sigma 0 is not positive"),
    ("r1,0,A,1.0,0.01\nr1,10,A,0.61,-0.02\nr1,20,A,0.37,0.03\n",
     r"traces\.csv, line 3: sigma -0\.02 is not positive"),
    ("r1,0,A,1.0,0.01\nr1,10,A,0.61,inf\nr1,20,A,0.37,0.03\n",
     r"traces\.csv, line 3: sigma 'inf' is not a finite number"),
    ("r1,0,A,1.0,0.01\nr1,10,A,0.61,NaN\nr1,20,A,0.37,0.03\n",
     r"traces\.csv, line 3: sigma is 'NaN'; expected a number"),
    ("r1,0,A,1.0,0.01\nr1,10,A,0.61,small\nr1,20,A,0.37,0.03\n",
     r"traces\.csv, line 3: sigma 'small' is not a number"),
])
def test_bad_sigma_in_the_long_layout_is_refused(files, body, message):
    with pytest.raises(KinfitError, match=message):
        _load(files, SMALL_EXPERIMENT, traces_csv="run,time,species,value,sigma\n" + body)


@pytest.mark.parametrize("header, message", [
    ("run,time,species,value,note", r"traces\.csv, line 1: unknown column 'note'; the long "
                                    r"layout has the columns run,time,species,value and "
                                    r"optionally sigma"),
    ("run,time,species,value,sd", r"unknown column 'sd'"),
    ("run,time (min),species,value", r"line 1: column 'time \(min\)' carries a unit; .* in the "
                                     r"experiment's \[units\]"),
    ("run,time,species", r"line 1: missing column\(s\) value"),
])
def test_columns_the_long_layout_does_not_know_are_refused(files, header, message):
    # before, an extra column was read past without a word (a σ column included)
    width = len(header.split(","))
    rows = "".join(",".join(["r1", str(t), "A", "1.0", "x"][:width]) + "\n" for t in (0, 1, 2))
    with pytest.raises(KinfitError, match=message):
        _load(files, SMALL_EXPERIMENT, traces_csv=header + "\n" + rows)


def test_wide_layout_sigma_columns_with_units(files):
    exp = _load(files, WIDE, r1_csv="time (min),A (mM),sigma_A (uM),P (mM),sigma_P (mM)\n"
                                    "0,1000,20,0,1\n1,600,20,,\n2,370,30,630,5\n")
    a, p = exp.runs[0].traces
    # mM and µM to the experiment's M (SI prefixes)
    np.testing.assert_allclose(a.values, [1.0, 0.6, 0.37])
    np.testing.assert_allclose(a.sigma, [2e-5, 2e-5, 3e-5])
    np.testing.assert_allclose(a.times, [0, 60, 120])
    np.testing.assert_allclose(p.sigma, [1e-3, 5e-3])      # the blank row is not measured
    assert exp.species == ("A", "P")            # a σ column is not taken for a species


@pytest.mark.parametrize("table, message", [
    ("time,A,sigma_A\n0,1,0.01\n1,0.6,\n2,0.4,0.01\n",
     r"r1\.csv, line 3: sigma_A is empty but A has a reading; give every A reading its σ"),
    ("time,A,sigma_A\n0,1,0.01\n1,,0.01\n2,0.4,0.01\n",
     r"r1\.csv, line 3: sigma_A is given but A is empty"),
    ("time,A,sigma_A\n0,1,0.01\n1,0.6,0\n2,0.4,0.01\n", r"r1\.csv, line 3: sigma_A 0 is not "
                                                         r"positive"),
    ("time,A,sigma_A\n0,1,0.01\n1,0.6,-inf\n2,0.4,0.01\n",
     r"r1\.csv, line 3: sigma_A is '-inf'; expected a number"),
    ("time,A,sigma_B\n0,1,0.01\n1,0.6,0.01\n2,0.4,0.01\n",
     r"r1\.csv, line 1: column 'sigma_B' holds the σ of a column 'B', but the table has none "
     r"\(its columns: A\)"),
    ("time,A,sigma\n0,1,0.01\n1,0.6,0.01\n2,0.4,0.01\n",
     r"r1\.csv, line 1: column 'sigma' does not say whose σ it holds; .*like sigma_A"),
    ("time,A (mM),sigma_A\n0,1,0.01\n1,0.6,0.01\n2,0.4,0.01\n",
     r"column 'sigma_A'\): has no unit but A is in mM; write it in the header, like "
     r"'sigma_A \(mM\)'"),
    ("time,A,sigma_A (min)\n0,1,0.01\n1,0.6,0.01\n2,0.4,0.01\n",
     r"column 'sigma_A'\): 'min' is not a concentration unit"),
    ("time,A\n0,1\n1,0.6\n2,0.4\n", None),
])
def test_bad_sigma_in_the_wide_layout_is_refused(files, table, message):
    if message is None:      # the same table without σ reads
        assert _load(files, WIDE, r1_csv=table).runs[0].traces[0].sigma is None
        return
    with pytest.raises(KinfitError, match=message):
        _load(files, WIDE, r1_csv=table)


def test_sheet_key_with_a_csv_file_is_refused(files):
    with pytest.raises(KinfitError, match=r"r1\.csv: a sheet \('data'\) is named, but the file "
                                          r"is not an \.xlsx workbook"):
        _load(files, WIDE.replace('file = "r1.csv"', 'file = "r1.csv"\n    sheet = "data"'),
              r1_csv="time,A\n0,1\n1,0.6\n2,0.4\n")


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                   HealthCheck.function_scoped_fixture])
@given(st.lists(st.tuples(st.sampled_from(["r1", "r2"]), st.floats(0, 1e6),
                          st.sampled_from(["A", "P"]), st.floats(-1e3, 1e3),
                          st.floats(1e-6, 1e3)),
                min_size=1, max_size=30),
       st.sampled_from(["run,time,species,value", "Run,Time,Species,Value",
                        "value,species,time,run,sigma", "run,time,species,value,SIGMA"]))
def test_fast_and_careful_long_readers_agree(tmp_path_factory, rows, header):
    # The fast numeric reader must return exactly what the careful reader does.
    cols = [c.lower() for c in header.split(",")]
    lines = [header] + [",".join({"run": r, "time": repr(t), "species": s, "value": repr(v),
                                  "sigma": repr(u)}[c] for c in cols) for r, t, s, v, u in rows]
    path = tmp_path_factory.mktemp("fast") / "t.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    fast = fast_long(path)
    careful = careful_long(path, "t.csv")
    assert fast is not None
    assert (fast[4] is None) == ("sigma" not in cols)
    for a, b in zip(fast, careful):
        np.testing.assert_array_equal(a, b)
