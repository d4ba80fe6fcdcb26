"""Property-based fuzzing of every reader and parser: nothing escapes but KinfitError.

Runs quickly by default; the long profile tries 10,000 inputs per target:

    python -m pytest tests/system/test_fuzz.py --hypothesis-profile=long

(about 8 minutes; when last run, 15 targets x 10,000 inputs, no failure).

The property (common practice for code that reads untrusted files): whatever
the input, the reader returns a value or raises kinfit's own error type —
never another exception, never a hang.
"""

from __future__ import annotations

import string

import numpy as np
from hypothesis import given
from hypothesis import strategies as st

from kinfit.core.errors import KinfitError
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.expressions import ParseError, parse_reaction, to_power_law
from kinfit.inputs.mechanism import load_mechanism, mechanism_from_text

RATE_ALPHABET = "kmnAB[]()^*/+-. 0123456789eE_·×−"
names = st.text(alphabet=string.ascii_letters + string.digits + "_", min_size=1, max_size=6)


def toml_value():
    scalars = st.one_of(st.integers(-10, 10), st.floats(allow_nan=True, allow_infinity=True),
                        st.text(max_size=12), st.booleans())
    return st.recursive(scalars, lambda inner: st.one_of(
        st.lists(inner, max_size=3), st.dictionaries(names, inner, max_size=3)), max_leaves=6)


def toml_literal(value):
    """Write a Python value as a TOML value (strings as literal strings where possible)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        if isinstance(value, float) and value != value:
            return "nan"
        if isinstance(value, float) and value in (float("inf"), float("-inf")):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, str):
        return '"' + value.encode("unicode_escape").decode("ascii").replace('"', '\\"') + '"'
    if isinstance(value, list):
        return "[" + ", ".join(toml_literal(v) for v in value) + "]"
    return "{ " + ", ".join(f"{k} = {toml_literal(v)}" for k, v in value.items()) + " }"


@given(st.text(max_size=120))
def test_rate_law_text(text):
    try:
        to_power_law(text)
    except ParseError:
        pass


@given(st.text(alphabet=RATE_ALPHABET, max_size=120))
def test_rate_law_grammar_soup(text):
    try:
        to_power_law(text)
    except ParseError:
        pass


@given(st.text(alphabet="AB2 +<=>-→⇌.0123456789_", max_size=60) | st.text(max_size=60))
def test_reaction_text(text):
    try:
        parse_reaction(text)
    except ParseError:
        pass


@given(st.text(max_size=400))
def test_model_file_text(text):
    try:
        mechanism_from_text(text)
    except KinfitError:
        pass


@given(st.lists(st.fixed_dictionaries(
    {"reaction": st.one_of(st.sampled_from(["A -> P", "A + B -> P", "2 A <=> B", "A ->"]),
                           st.text(max_size=15)),
     "rate": st.one_of(st.sampled_from(["k * [A]", "k * [A]^m", "kf * [A]", "k"]),
                       st.text(alphabet=RATE_ALPHABET, max_size=20))},
    optional={"reverse_rate": st.text(alphabet=RATE_ALPHABET, max_size=15),
              "extra": toml_value()}), max_size=3),
       st.dictionaries(st.sampled_from(["k", "m", "kf", "kr", "n", "x"]), toml_value(),
                       max_size=4),
       st.one_of(st.none(), toml_value()))
def test_model_file_structure(tmp_path_factory, steps, parameters, held):
    lines = [] if held is None else [f"held_constant = {toml_literal(held)}"]
    for step in steps:
        lines.append("[[steps]]")
        lines += [f"{k} = {toml_literal(v)}" for k, v in step.items()]
    lines.append("[parameters]")
    lines += [f"{k} = {toml_literal(v)}" for k, v in parameters.items()]
    path = tmp_path_factory.mktemp("model") / "model.toml"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    try:
        load_mechanism(path)
    except KinfitError:
        pass


def _experiment(folder, text, data=None, name="traces.csv"):
    (folder / "experiment.toml").write_text(text, encoding="utf-8")
    if data is not None:
        (folder / name).write_bytes(data)
    try:
        exp = load_experiment(folder / "experiment.toml")
    except KinfitError:
        return None
    for run in exp.runs:
        for trace in run.traces:
            assert np.isfinite(trace.values).all() and (np.diff(trace.times) > 0).all()
    return exp


@given(st.text(max_size=400))
def test_experiment_file_text(tmp_path_factory, text):
    folder = tmp_path_factory.mktemp("exp")
    _experiment(folder, text, b"run,time,species,value\nr1,0,A,1\nr1,1,A,0.5\nr1,2,A,0.2\n")


@given(st.dictionaries(st.sampled_from(["name", "initial", "temperature", "file",
                                        "time_offset", "other"]), toml_value(), max_size=5),
       st.one_of(st.none(), st.dictionaries(st.sampled_from(["time", "concentration",
                                                             "temperature"]),
                                            st.text(max_size=8), max_size=3)))
def test_experiment_file_structure(tmp_path_factory, run, units):
    folder = tmp_path_factory.mktemp("exp")
    lines = []
    if units is not None:
        lines.append("[units]")
        lines += [f"{k} = {toml_literal(v)}" for k, v in units.items()]
    lines += ["[data]", 'file = "traces.csv"', "[[runs]]"]
    lines += [f"{k} = {toml_literal(v)}" for k, v in run.items()]
    _experiment(folder, "\n".join(lines) + "\n",
                b"run,time,species,value\nr1,0,A,1\nr1,1,A,0.5\nr1,2,A,0.2\n")


@given(st.binary(max_size=600))
def test_long_table_bytes(tmp_path_factory, blob):
    folder = tmp_path_factory.mktemp("long")
    _experiment(folder, '[data]\nfile = "traces.csv"\n[[runs]]\nname = "r1"\n', blob)


cell = st.one_of(st.sampled_from(["r1", "A", "P", "", " ", "nan", "1e999", "-0", "time"]),
                 st.floats(allow_nan=True).map(repr), st.text(alphabet="0123456789.-eE,; \"'",
                                                              max_size=6))


@given(st.lists(st.lists(cell, min_size=1, max_size=5), max_size=10))
def test_long_table_cells(tmp_path_factory, rows):
    folder = tmp_path_factory.mktemp("long")
    text = "run,time,species,value\n" + "\n".join(",".join(r) for r in rows)
    _experiment(folder, '[data]\nfile = "traces.csv"\n[[runs]]\nname = "r1"\n',
                text.encode("utf-8"))


@given(st.lists(cell, min_size=1, max_size=4), st.lists(st.lists(cell, min_size=1, max_size=4),
                                                          max_size=10))
def test_wide_table_cells(tmp_path_factory, header, rows):
    folder = tmp_path_factory.mktemp("wide")
    text = ",".join(["time"] + header) + "\n" + "\n".join(",".join(r) for r in rows)
    _experiment(folder, '[[runs]]\nname = "r1"\nfile = "r1.csv"\n', text.encode("utf-8"),
                name="r1.csv")


@given(st.binary(max_size=600))
def test_wide_table_bytes(tmp_path_factory, blob):
    folder = tmp_path_factory.mktemp("wide")
    _experiment(folder, '[[runs]]\nname = "r1"\nfile = "r1.csv"\n', blob, name="r1.csv")


# ---------------------------------------------------------- instrument exports

INSTRUMENT_ALPHABET = "time,;\t0123456789.,-eE \nAB()[]/\"xminsµ#:="


@given(st.text(alphabet=st.sampled_from(list(INSTRUMENT_ALPHABET)), max_size=300))
def test_instrument_table_text(text):
    from kinfit.inputs.instrument import table_from_text

    try:
        table = table_from_text(text, "fuzz.csv")
    except KinfitError:
        return
    for c in range(len(table.names)):
        try:
            values, blank = table.numbers(c, allow_blank=True)
        except KinfitError:
            continue
        assert np.isfinite(values[~blank]).all()


@given(st.binary(max_size=600))
def test_instrument_table_bytes(tmp_path_factory, blob):
    from kinfit.inputs.instrument import read_table

    path = tmp_path_factory.mktemp("inst") / "export.csv"
    path.write_bytes(blob)
    try:
        read_table(path, "export.csv")
    except KinfitError:
        pass


@given(st.one_of(st.binary(max_size=600),
                 st.text(alphabet=st.sampled_from(list(INSTRUMENT_ALPHABET)),
                         max_size=400).map(lambda t: t.encode("utf-8"))))
def test_spectrum_matrix(tmp_path_factory, blob):
    from kinfit.inputs.signals import read_spectrum

    path = tmp_path_factory.mktemp("spec") / "spectrum.csv"
    path.write_bytes(blob)
    try:
        read_spectrum(path, "spectrum.csv", "s")
    except KinfitError:
        pass


@given(st.dictionaries(st.sampled_from(["path_length", "offset", "drift", "nonnegative", "unit",
                                        "channels", "spectra", "other"]), toml_value(),
                       max_size=5))
def test_experiment_with_signals(tmp_path_factory, signals):
    folder = tmp_path_factory.mktemp("sig")
    lines = ["[data]", 'file = "traces.csv"', "[signals]"]
    lines += [f"{k} = {toml_literal(v)}" for k, v in signals.items()]
    lines += ["[[runs]]", 'name = "r1"']
    _experiment(folder, "\n".join(lines) + "\n",
                b"run,time,species,value\nr1,0,A,1\nr1,1,A,0.5\nr1,2,A,0.2\n")
