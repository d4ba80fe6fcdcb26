"""The [signals] declarations, path lengths, spectrum files and instrument exports."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from kinfit.core.errors import KinfitError
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.signals import parse_path_length, parse_signals, read_spectrum

CHANNEL_EXPERIMENT = """
    [units]
    time = "s"
    concentration = "uM"
    [signals]
    path_length = 1.0
    offset = "per run"
    drift = "shared"
    nonnegative = true
    [signals.channels]
    A405 = { A = "unknown", B = 1250.0, C = "per run" }
    [[runs]]
    name = "r1"
    file = "r1.csv"
    path_length = "5 mm"
    initial = { A = 10 }
"""


def test_channel_declarations(files):
    files("e.toml", CHANNEL_EXPERIMENT)
    files("r1.csv", "time,A405\n0,0.5\n1,0.4\n2,0.3\n")
    exp = load_experiment(files.folder / "e.toml")
    spec = exp.signals
    assert spec.offset == "per run" and spec.drift == "shared" and spec.nonnegative
    assert spec.channels["A405"].absorbers == {"A": "unknown", "B": 1250.0, "C": "per run"}
    assert exp.runs[0].path_length == pytest.approx(0.5)      # 5 mm in cm (pint)
    assert exp.runs[0].traces[0].species == "A405"


@pytest.mark.parametrize("value, cm", [(1, 1.0), (0.2, 0.2), ("10 mm", 1.0), ("1 cm", 1.0),
                                       ("0.001 m", 0.1)])
def test_path_lengths(value, cm):
    # unit conversions by pint (1 cm = 10 mm = 0.01 m, SI definitions)
    assert parse_path_length(value, "here") == pytest.approx(cm, rel=1e-12)


@pytest.mark.parametrize("value", ["3 s", "long", -1, 0, True, [1]])
def test_bad_path_lengths(value):
    with pytest.raises(KinfitError, match="path length"):
        parse_path_length(value, "here")


@pytest.mark.parametrize("raw, message", [
    ({}, "declares no signal"),
    ({"smell": 1, "channels": {"A1": {"A": "unknown"}}}, "unknown key 'smell'"),
    ({"offset": "sometimes", "channels": {"A1": {"A": "unknown"}}}, "offset must be"),
    ({"drift": True, "channels": {"A1": {"A": "unknown"}}}, "drift must be"),
    ({"nonnegative": "yes", "channels": {"A1": {"A": "unknown"}}}, "nonnegative must be"),
    ({"channels": {"A1": {}}}, "expected the absorbing species"),
    ({"channels": {"A1": {"A": "maybe"}}}, r"A\): expected a known absorptivity"),
    ({"channels": {"A1": {"A": float("nan")}}}, "expected a known absorptivity"),
    ({"spectra": {"absorbers": []}}, "absorbers must list"),
    ({"spectra": {"absorbers": ["A", "A"]}}, "listed twice"),
    ({"spectra": {"absorbers": ["A"], "components": 0}}, "components must be"),
    ({"spectra": {"absorbers": ["A"], "noise": -1}}, "noise must be a positive"),
    ({"spectra": {"absorbers": ["A"], "colour": 1}}, "unknown key 'colour'"),
])
def test_bad_signal_tables(raw, message):
    with pytest.raises(KinfitError, match=message):
        parse_signals(raw, "", "e.toml")


def test_time_unit_in_the_header_is_converted(files):
    files("e.toml", CHANNEL_EXPERIMENT)
    files("r1.csv", "Time (min),A405\n0,0.5\n0.5,0.4\n1,0.3\n")
    exp = load_experiment(files.folder / "e.toml")
    # 0.5 min = 30 s (pint)
    np.testing.assert_allclose(exp.runs[0].traces[0].times, [0.0, 30.0, 60.0])


def test_concentration_unit_in_a_header_is_converted(files):
    files("e.toml", '[units]\nconcentration = "uM"\n[[runs]]\nname = "r1"\nfile = "r1.csv"\n'
          'initial = { A = 10 }\n')
    files("r1.csv", "time,A (mM)\n0,0.010\n1,0.008\n2,0.006\n")
    exp = load_experiment(files.folder / "e.toml")
    np.testing.assert_allclose(exp.runs[0].traces[0].values, [10.0, 8.0, 6.0])   # mM -> uM


def test_a_unit_that_is_not_a_concentration(files):
    files("e.toml", '[[runs]]\nname = "r1"\nfile = "r1.csv"\ninitial = { A = 10 }\n')
    files("r1.csv", "time,A (s)\n0,1\n1,0.8\n2,0.6\n")
    with pytest.raises(KinfitError, match=r"column 'A'.*not a concentration unit"):
        load_experiment(files.folder / "e.toml")


def test_one_file_with_several_runs(files):
    files("e.toml", """
        [signals]
        [signals.channels]
        A405 = { A = "unknown" }
        [[runs]]
        name = "cell 1"
        file = "plate.txt"
        initial = { A = 1 }
        [[runs]]
        name = "cell 2"
        file = "plate.txt"
        initial = { A = 2 }
    """)
    files("plate.txt", "Exported by an invented reader\nrun\tTime (s)\tA405\n"
          "cell 1\t0\t0,50\ncell 1\t5\t0,40\ncell 1\t10\t0,30\n"
          "cell 2\t0\t1,00\ncell 2\t5\t0,80\ncell 2\t10\t0,60\n")
    exp = load_experiment(files.folder / "e.toml")
    np.testing.assert_allclose(exp.runs[1].traces[0].values, [1.0, 0.8, 0.6])
    np.testing.assert_array_equal(exp.runs[1].traces[0].lines, [6, 7, 8])


def test_a_run_missing_from_a_shared_file(files):
    files("e.toml", '[[runs]]\nname = "r9"\nfile = "plate.csv"\ninitial = { A = 1 }\n')
    files("plate.csv", "run,time,A\nr1,0,1\nr1,1,0.5\nr1,2,0.3\n")
    with pytest.raises(KinfitError, match=r"plate\.csv: no rows of run 'r9'.*found: r1"):
        load_experiment(files.folder / "e.toml")


SPECTRUM = "time,400,410,420\n0,0.10,0.20,0.30\n5,0.12,0.22,0.31\n10,0.13,0.23,0.33\n"


def test_spectrum_files(files):
    path = files("s.csv", "Instrument;diode array (invented)\nTime (s);400 nm;410 nm;420 nm\n"
                 "-1;0;0;0\n0;0,10;0,20;0,30\n5;0,12;0,22;0,31\n")
    spectrum = read_spectrum(path, "s.csv", "s", start=0.0)
    np.testing.assert_allclose(spectrum.wavelengths, [400, 410, 420])
    np.testing.assert_allclose(spectrum.times, [0, 5])
    np.testing.assert_allclose(spectrum.values[1], [0.12, 0.22, 0.31])
    np.testing.assert_array_equal(spectrum.lines, [4, 5])


@pytest.mark.parametrize("text, message", [
    ("time,400\n0,1\n", "at least two wavelength columns"),
    ("time,400,blue\n0,1,2\n", "header 'blue' is not a wavelength"),
    ("time,400,410\n0,1,\n", "reading at 410 is missing"),
    ("time,400,410\n-1,1,2\n0,1,2\n", "negative time -1"),
    ("time,400,410\n0,1,2\n0,1,2\n", "time 0 is repeated"),
    ("time,400,400\n0,1,2\n", "repeated name"),
])
def test_bad_spectrum_files(files, text, message):
    path = files("s.csv", text)
    with pytest.raises(KinfitError, match=message):
        read_spectrum(path, "s.csv", "s")


def test_experiment_with_spectra(files):
    files("e.toml", """
        [signals]
        offset = "none"
        [signals.spectra]
        absorbers = ["A", "B"]
        components = 2
        noise = 0.002
        [[runs]]
        name = "r1"
        spectrum = "s.csv"
        initial = { A = 1 }
    """)
    files("s.csv", SPECTRUM)
    exp = load_experiment(files.folder / "e.toml")
    assert exp.runs[0].traces == () and exp.runs[0].spectrum.values.shape == (3, 3)
    assert exp.n_points == 9 and exp.runs[0].t_max == 10
    assert exp.signals.spectra.components == 2 and exp.signals.spectra.noise == 0.002


def test_spectrum_without_a_spectra_table(files):
    files("e.toml", '[[runs]]\nname = "r1"\nspectrum = "s.csv"\ninitial = { A = 1 }\n')
    files("s.csv", SPECTRUM)
    with pytest.raises(KinfitError, match=r"no \[signals\.spectra\] table"):
        load_experiment(files.folder / "e.toml")


signal_value = st.one_of(st.floats(allow_nan=True), st.text(max_size=8), st.booleans(),
                         st.integers(), st.sampled_from(["unknown", "per run", "shared"]))


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.dictionaries(st.sampled_from(["path_length", "offset", "drift", "nonnegative",
                                        "unit", "channels", "spectra", "other"]),
                       st.one_of(signal_value,
                                 st.dictionaries(st.text(max_size=4),
                                                 st.one_of(signal_value,
                                                           st.dictionaries(st.text(max_size=3),
                                                                           signal_value,
                                                                           max_size=3)),
                                                 max_size=3)),
                       max_size=5))
def test_any_signals_table_gives_a_spec_or_a_kinfit_error(raw):
    # Property (common practice for parsers): nothing but KinfitError escapes.
    try:
        parse_signals(raw, "", "e.toml")
    except KinfitError:
        pass
