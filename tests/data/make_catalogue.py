"""Write the catalogue of malformed and hostile inputs under tests/data/catalogue/.

Each case is a folder holding the files of one ``kinfit fit`` call
(``experiment.toml``, ``model.toml``, data files) and ``expected.toml`` with
the exit code and a regular expression the one-line message must match
(``message`` for errors, ``warning`` for warnings). tests/system/test_catalogue.py
runs every case through the command line. Regenerate with

    python tests/data/make_catalogue.py

Cases that only make sense generated at test time (a 50 MB file of garbage)
live in the test itself.
"""

from __future__ import annotations

import shutil
from pathlib import Path

HERE = Path(__file__).parent / "catalogue"

MODEL = '''# first order, for the catalogue
name = "first order"
[[steps]]
reaction = "A -> P"
rate = "k * [A]"
[parameters]
k = { value = 0.05, min = 0 }
'''

EXPERIMENT = '''name = "catalogue"
[units]
time = "s"
concentration = "M"
[data]
file = "traces.csv"
[[runs]]
name = "r1"
initial = { A = 1.0 }
'''

TRACES = '''run,time,species,value
r1,0,A,1.0
r1,10,A,0.61
r1,20,A,0.37
r1,30,A,0.22
'''

WIDE_EXPERIMENT = '''[units]
time = "s"
concentration = "M"
[[runs]]
name = "r1"
file = "r1.csv"
initial = { A = 1.0 }
'''

WIDE = "time,A,P\n0,1.0,0.0\n10,0.61,0.39\n20,0.37,0.63\n30,0.22,0.78\n"

CASES = {}


def case(name, exit=2, message=None, warning=None, files=None, binary=None):
    """Register a case: files differing from the defaults, and what must happen."""
    CASES[name] = dict(exit=exit, message=message, warning=warning, files=files or {},
                       binary=binary or {})


def sub(text, old, new):
    assert old in text, (old, text)
    return text.replace(old, new)


# --- every bad input listed for the core
case("missing_data_file", message=r"data file 'nope\.csv' not found",
     files={"experiment.toml": sub(EXPERIMENT, "traces.csv", "nope.csv")})
case("species_not_in_model", message=r"traces\.csv, line 2: species 'Z' .*not in the model",
     files={"traces.csv": TRACES.replace(",A,", ",Z,")})
case("run_not_listed", message=r"traces\.csv, line 6: run 'r9' is not listed",
     files={"traces.csv": TRACES + "r9,0,A,1.0\n"})
case("non_numeric_value", message=r"traces\.csv, line 4: value 'abc' is not a number",
     files={"traces.csv": TRACES.replace("0.37", "abc")})
case("nan_value", message=r"traces\.csv, line 4: value is 'NaN'; expected a number",
     files={"traces.csv": TRACES.replace("0.37", "NaN")})
case("infinite_value", message=r"traces\.csv, line 4: value '-inf' is not a finite number",
     files={"traces.csv": TRACES.replace("0.37", "-inf")})
case("negative_time", message=r"traces\.csv, line 2: negative time -1",
     files={"traces.csv": TRACES.replace("r1,0,A", "r1,-1,A")})
case("duplicated_time", message=r"traces\.csv, line 4: time 10 is repeated",
     files={"traces.csv": TRACES.replace("r1,20,A", "r1,10,A")})
case("too_few_points", message=r"run 'r1' has 2 data point\(s\); at least 3",
     files={"traces.csv": "run,time,species,value\nr1,0,A,1.0\nr1,10,A,0.6\n"})
case("empty_data_file", message=r"traces\.csv: the data file is empty", files={"traces.csv": ""})
case("missing_column", message=r"traces\.csv, line 1: missing column\(s\) species",
     files={"traces.csv": TRACES.replace("species,", "kind,")})
case("unreadable_unit", message=r"units\.concentration\): cannot read the unit 'zorks'",
     files={"experiment.toml": sub(EXPERIMENT, '"M"', '"zorks"')})
case("toml_syntax_error", message=r"model\.toml, line 4, column \d+: not valid TOML",
     files={"model.toml": sub(MODEL, '"A -> P"', '"A -> P')})
case("min_above_max", message=r"model\.toml, line 7 \(parameters\.k\): min \(1\) is larger "
                              r"than max \(0\.5\)",
     files={"model.toml": sub(MODEL, "min = 0", "min = 1, max = 0.5")})
case("undeclared_species", message=r"\[cat\] is in the rate law but in no reaction",
     files={"model.toml": sub(MODEL, "k * [A]", "k * [A] * [cat]")})
case("nothing_on_one_side", message=r"model\.toml, line 4 \(steps\[1\]\.reaction\): nothing on "
                                    r"the right side",
     files={"model.toml": sub(MODEL, '"A -> P"', '"A -> "')})
case("code_in_rate_law", message=r"line 5 \(steps\[1\]\.rate\): unexpected character",
     files={"model.toml": sub(MODEL, '"k * [A]"',
                              "'''__import__(\"os\").system(\"touch pwned\")'''")})
case("code_in_exponent", message=r"line 5 \(steps\[1\]\.rate\): unexpected character",
     files={"model.toml": sub(MODEL, '"k * [A]"', "'''k * [A]^(().__class__.__base__)'''")})

# --- encodings and line endings
case("utf8_byte_order_mark", exit=0, binary={"traces.csv": b"\xef\xbb\xbf" + TRACES.encode()})
case("utf16_with_byte_order_mark", exit=0, binary={"traces.csv": TRACES.encode("utf-16")})
case("utf16_without_byte_order_mark", message=r"traces\.csv: .*UTF-16 without a byte-order mark",
     binary={"traces.csv": TRACES.encode("utf-16-le")})
case("latin1_micro_in_units", message=r"experiment\.toml, line 4: byte 0xb5 is not valid UTF-8",
     binary={"experiment.toml": sub(EXPERIMENT, '"M"', '"\u00b5M"').encode("latin-1")})
case("latin1_micro_in_data", message=r"traces\.csv, line 3: byte 0xb5 is not valid UTF-8",
     binary={"traces.csv": TRACES.replace("0.61", "0.61 \u00b5M").encode("latin-1")})
case("windows_line_endings", exit=0,
     binary={"traces.csv": TRACES.replace("\n", "\r\n").encode(),
             "experiment.toml": EXPERIMENT.replace("\n", "\r\n").encode()})

# --- tables
case("header_repeated_mid_file", message=r"traces\.csv, line 4: time 'time' is not a number "
                                         r"\(is the header repeated here\?\)",
     files={"traces.csv": TRACES.replace("r1,20,A,0.37\n", "run,time,species,value\n")})
case("time_goes_backwards", message=r"traces\.csv, line 4: time is not increasing .*t=5 after "
                                    r"t=10",
     files={"traces.csv": TRACES.replace("r1,20,A", "r1,5,A")})
case("ragged_row", message=r"traces\.csv, line 3: not a CSV table|more values than the header",
     files={"traces.csv": TRACES.replace("r1,10,A,0.61", "r1,10,A,0.61,7")})
case("blank_species", message=r"traces\.csv, line 3: the species is missing",
     files={"traces.csv": TRACES.replace("r1,10,A,", "r1,10,,")})
case("wide_layout_without_time", message=r"r1\.csv, line 1: no 'time' column",
     files={"experiment.toml": WIDE_EXPERIMENT, "r1.csv": WIDE.replace("time", "t")})
case("wide_layout_repeated_column", message=r"r1\.csv, line 1: column 3 has an empty or "
                                            r"repeated name 'A'",
     files={"experiment.toml": WIDE_EXPERIMENT, "r1.csv": WIDE.replace("time,A,P", "time,A,A")})
case("wide_layout_text_cell", message=r"r1\.csv, line 3: P 'lots' is not a number",
     files={"experiment.toml": WIDE_EXPERIMENT, "r1.csv": WIDE.replace("0.39", "lots")})
case("huge_number", message=r"traces\.csv, line 3: value 1e\+308 is implausibly large",
     files={"traces.csv": TRACES.replace("0.61", "1e308")})
case("tiny_number", exit=0, files={"traces.csv": TRACES.replace("0.22", "1e-320")})
case("negative_measured_concentration", exit=0,
     warning=r"traces\.csv, line 5: A = -0\.5 is negative",
     files={"traces.csv": TRACES.replace("0.22", "-0.5")})

# --- instrument-style tables and spectra
INSTRUMENT_EXPERIMENT = WIDE_EXPERIMENT.replace('concentration = "M"', 'concentration = "mM"')
case("time_unit_in_header_converted", exit=0,
     files={"experiment.toml": INSTRUMENT_EXPERIMENT,
            "r1.csv": "time (min),A (mM)\n0,1.0\n1,0.6\n2,0.37\n3,0.22\n"})
case("metadata_lines_above_the_table", exit=0,
     files={"experiment.toml": INSTRUMENT_EXPERIMENT,
            "r1.csv": "Spectrometer export\nOperator: nobody\n\ntime;A\n0;1,0\n10;0,6\n"
                      "20;0,37\n30;0,22\n"})
case("units_disagree_concentration_column_in_minutes",
     message=r"r1\.csv, line 1 \(column 'A'\): 'min' is not a concentration unit",
     files={"experiment.toml": INSTRUMENT_EXPERIMENT,
            "r1.csv": "time (s),A (min)\n0,1.0\n10,0.6\n20,0.37\n30,0.22\n"})
case("units_disagree_time_in_kilograms",
     message=r"r1\.csv, line 1 \(time column\): 'kg' is not a time unit",
     files={"experiment.toml": INSTRUMENT_EXPERIMENT,
            "r1.csv": "time (kg),A\n0,1.0\n10,0.6\n20,0.37\n30,0.22\n"})
case("mixed_decimal_marks", message=r"r1\.csv: mixes decimal points .* and decimal commas",
     files={"experiment.toml": INSTRUMENT_EXPERIMENT,
            "r1.csv": "time;A\n0;1,0\n10;0.6\n20;0,37\n30;0,22\n"})
case("no_recognisable_header", message=r"r1\.csv, line 1: no 'time' column",
     files={"experiment.toml": INSTRUMENT_EXPERIMENT, "r1.csv": "foo,bar\n0,1.0\n1,0.6\n"})
SPECTRA_EXPERIMENT = """[units]
time = "s"
concentration = "M"
[signals]
path_length = 1.0
[signals.spectra]
absorbers = ["A", "P"]
components = "all"
[[runs]]
name = "r1"
spectrum = "s1.csv"
initial = { A = 1.0 }
"""
SPECTRUM = "time,400,450,500\n0,1.0,0.5,0.1\n10,0.8,0.55,0.2\n20,0.6,0.6,0.3\n30,0.5,0.62,0.35\n"
case("spectrum_wavelength_not_a_number", message=r"s1\.csv, line 1: .*wavelength",
     files={"experiment.toml": SPECTRA_EXPERIMENT, "s1.csv": SPECTRUM.replace("450", "blue")})
case("spectrum_time_goes_backwards", message=r"s1\.csv, line 4: time is not increasing",
     files={"experiment.toml": SPECTRA_EXPERIMENT, "s1.csv": SPECTRUM.replace("20,0.6", "5,0.6")})
case("spectrum_file_missing", message=r"spectrum file 'nope\.csv' not found|'nope\.csv' not found",
     files={"experiment.toml": SPECTRA_EXPERIMENT.replace("s1.csv", "nope.csv")})
case("spectrum_text_cell", message=r"s1\.csv, line 3: .*not a number",
     files={"experiment.toml": SPECTRA_EXPERIMENT,
            "s1.csv": SPECTRUM.replace("0.55", "dark")})
case("signal_channel_for_unknown_species", message=r"signals.*'Z'|'Z'.*signals|species 'Z'",
     files={"experiment.toml": INSTRUMENT_EXPERIMENT + "[signals]\npath_length = 1.0\n"
            "[signals.channels]\nA480 = { Z = \"unknown\" }\n",
            "r1.csv": "time,A480\n0,1.0\n10,0.6\n20,0.37\n30,0.22\n"})

# --- each point's own σ, and columns kinfit does not know
SIGMA_TRACES = ("run,time,species,value,sigma\nr1,0,A,1.0,0.01\nr1,10,A,0.61,0.01\n"
                "r1,20,A,0.37,0.02\nr1,30,A,0.22,0.02\n")
case("sigma_column_weights_the_fit", exit=0, files={"traces.csv": SIGMA_TRACES})
case("sigma_not_positive", message=r"traces\.csv, line 4: sigma 0 is not positive",
     files={"traces.csv": SIGMA_TRACES.replace("0.37,0.02", "0.37,0")})
case("sigma_blank_for_some_readings", message=r"traces\.csv, line 3: sigma is empty for A, but "
                                               r"line 2 gives one",
     files={"traces.csv": SIGMA_TRACES.replace("0.61,0.01", "0.61,")})
case("sigma_overrides_declared_noise", exit=0,
     warning=r"noise\.default is not used: every trace has its own σ column",
     files={"traces.csv": SIGMA_TRACES,
            "experiment.toml": EXPERIMENT + "[noise]\ndefault = { absolute = 0.5 }\n"})
case("unknown_column_in_long_layout", message=r"traces\.csv, line 1: unknown column 'stdev'; "
                                              r"the long layout has",
     files={"traces.csv": SIGMA_TRACES.replace(",sigma", ",stdev")})
case("wide_sigma_column_names_no_column",
     message=r"r1\.csv, line 1: column 'sigma_B' holds the σ of a column 'B', but the table "
             r"has none",
     files={"experiment.toml": WIDE_EXPERIMENT,
            "r1.csv": "time,A,sigma_B\n0,1.0,0.01\n10,0.6,0.01\n20,0.37,0.01\n"})
case("wide_unknown_column", message=r"r1\.csv, line 2: species 'remarks' \(run 'r1'\) is not "
                                    r"in the model",
     files={"experiment.toml": WIDE_EXPERIMENT,
            "r1.csv": "time,A,remarks\n0,1.0,1\n10,0.6,2\n20,0.37,3\n"})

# --- workbooks (.xlsx, written by openpyxl with fixed dates so that the bytes repeat)
WORKBOOK_EXPERIMENT = sub(EXPERIMENT, 'file = "traces.csv"',
                          'file = "traces.xlsx"\nsheet = "traces"')
WORKBOOK_ROWS = [["run", "time", "species", "value"], ["r1", 0, "A", 1.0],
                 ["r1", 10, "A", 0.61], ["r1", 20, "A", 0.37], ["r1", 30, "A", 0.22]]


def workbook(rows, edit=None, sheet="traces"):
    """The bytes of a one-sheet .xlsx workbook holding `rows`, the same on every run."""
    import io
    import re
    import zipfile

    import openpyxl

    book = openpyxl.Workbook()
    book.active.title = sheet
    for row in rows:
        book.active.append(row)
    if edit is not None:
        edit(book.active)
    raw, out = io.BytesIO(), io.BytesIO()
    book.save(raw)
    with zipfile.ZipFile(raw) as src, zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        for item in src.infolist():
            data = src.read(item.filename)
            if item.filename == "docProps/core.xml":
                data = re.sub(rb"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ", b"2020-01-01T00:00:00Z", data)
            dst.writestr(zipfile.ZipInfo(item.filename, date_time=(2020, 1, 1, 0, 0, 0)), data,
                         compress_type=zipfile.ZIP_DEFLATED)
    return out.getvalue()


def _set(ref, value):
    def edit(sheet):
        sheet[ref] = value
    return edit


case("workbook_long_layout", exit=0, files={"experiment.toml": WORKBOOK_EXPERIMENT},
     binary={"traces.xlsx": workbook(WORKBOOK_ROWS)})
case("workbook_formula_without_saved_value",
     message=r"traces\.xlsx, sheet 'traces', row 3, column D \(cell D3\): the formula "
             r"'=D2\*0\.61' has no saved value",
     files={"experiment.toml": WORKBOOK_EXPERIMENT},
     binary={"traces.xlsx": workbook(WORKBOOK_ROWS, _set("D3", "=D2*0.61"))})
case("workbook_merged_cells", message=r"sheet 'traces', row 4: cells C4:D4 are merged",
     files={"experiment.toml": WORKBOOK_EXPERIMENT},
     binary={"traces.xlsx": workbook(WORKBOOK_ROWS, lambda s: s.merge_cells("C4:D4"))})
case("workbook_text_in_number_column",
     message=r"sheet 'traces', row 5, column D \('value'\): holds the text '< 0\.3', not a "
             r"number",
     files={"experiment.toml": WORKBOOK_EXPERIMENT},
     binary={"traces.xlsx": workbook(WORKBOOK_ROWS, _set("D5", "< 0.3"))})
case("workbook_missing_sheet", message=r"traces\.xlsx: no sheet 'traces'; the workbook has "
                                       r"'Sheet1'",
     files={"experiment.toml": WORKBOOK_EXPERIMENT},
     binary={"traces.xlsx": workbook(WORKBOOK_ROWS, sheet="Sheet1")})
case("workbook_that_is_text", message=r"traces\.xlsx: not a readable \.xlsx workbook",
     files={"experiment.toml": WORKBOOK_EXPERIMENT, "traces.xlsx": TRACES})

# --- experiments
case("negative_initial_concentration", message=r"initial\.A\): a concentration cannot be "
                                               r"negative",
     files={"experiment.toml": sub(EXPERIMENT, "A = 1.0", "A = -1.0")})
case("initial_for_species_model_lacks", message=r"run 'r1' \(initial\.B\): the model 'first "
                                                r"order' has no species 'B'",
     files={"experiment.toml": sub(EXPERIMENT, "A = 1.0", "A = 1.0, B = 2.0")})
case("experiment_without_runs", message=r"experiment\.toml: no runs",
     files={"experiment.toml": '[units]\ntime = "s"\n'})
case("run_names_differ_only_in_punctuation", message=r"differ only in punctuation",
     files={"experiment.toml": EXPERIMENT.replace('"r1"', '"r_1"') + '\n[[runs]]\nname = "r 1"\n',
            "traces.csv": TRACES.replace("r1,", "r_1,") + "r 1,0,A,1\nr 1,1,A,0.9\n"
                                                          "r 1,2,A,0.8\n"})
case("temperature_as_text", message=r"temperature must be a number",
     files={"experiment.toml": sub(EXPERIMENT, 'name = "r1"', 'name = "r1"\ntemperature = "warm"')})
case("temperature_without_unit",
     message=r"experiment\.toml, line 9 \(run 'r1'\): temperature = 25 has no unit; declare "
             r"\[units\] temperature",
     files={"experiment.toml": sub(EXPERIMENT, 'name = "r1"', 'name = "r1"\ntemperature = 25')})
case("default_temperature_without_unit",
     message=r"experiment\.toml, line 1 \(temperature\): temperature = 298\.15 has no unit",
     files={"experiment.toml": "temperature = 298.15\n" + EXPERIMENT})
case("temperature_in_celsius_read_as_kelvin", exit=0,
     warning=r"experiment\.toml: run\(s\) 'r1' at 25\.00 K: outside 150–700 K",
     files={"experiment.toml": sub(sub(EXPERIMENT, 'name = "r1"', 'name = "r1"\ntemperature = 25'),
                                   'concentration = "M"', 'concentration = "M"\ntemperature = "K"')})
case("initial_in_grams_for_a_molar_unit",
     message=r"line 9 \(run 'r1', initial\.A\): '50 g/L' cannot be converted to M",
     files={"experiment.toml": sub(EXPERIMENT, "A = 1.0", 'A = "50 g/L"')})
case("initial_with_a_time_unit",
     message=r"line 9 \(run 'r1', initial\.A\): 's' in '1 s' is not a concentration unit",
     files={"experiment.toml": sub(EXPERIMENT, "A = 1.0", 'A = "1 s"')})
case("fitted_initial_bound_in_an_unknown_unit",
     message=r"line 9 \(run 'r1', initial\.A\.max\): cannot read the unit 'blorps'",
     files={"experiment.toml": sub(EXPERIMENT, "A = 1.0",
                                   'A = { value = "1 M", vary = true, max = "2 blorps" }')})
case("noise_for_another_species", message=r"no noise is declared for 'A'",
     files={"experiment.toml": EXPERIMENT + "[noise]\nB = { absolute = 0.01 }\n"})
case("data_file_is_a_folder", message=r"data file 'sub' is not a file",
     files={"experiment.toml": sub(EXPERIMENT, "traces.csv", "sub"), "sub/keep.txt": "x\n"})
case("experiment_is_binary", message=r"experiment\.toml, line 1: byte 0x\w\w is not valid UTF-8",
     binary={"experiment.toml": bytes(range(128, 256)) * 4})
case("code_in_units", message=r"cannot read the unit",
     files={"experiment.toml": sub(EXPERIMENT, '"M"', "'''__import__(\"os\").getcwd()'''")})

# --- models
case("model_without_steps", message=r"model\.toml: the model has no steps",
     files={"model.toml": 'name = "nothing"\n'})
case("undefined_parameter", message=r"line 5 \(steps\[1\]\.rate\): k2 is used in the rate law "
                                    r"but not defined",
     files={"model.toml": sub(MODEL, "k * [A]", "k2 * [A]")})
case("unused_parameter", exit=0, warning=r"parameters\.spare\): spare is defined but not used",
     files={"model.toml": MODEL + "spare = 3.0\n"})
case("duplicate_parameter_names", message=r"model\.toml, line 8, column \d+: not valid TOML",
     files={"model.toml": MODEL + "k = 0.1\n"})
case("bound_excludes_start", message=r"parameters\.k\): the value 0\.05 is outside its bounds "
                                     r"\[0\.1, 1\]",
     files={"model.toml": sub(MODEL, "min = 0", "min = 0.1, max = 1")})
case("sum_in_rate_law", message=r"sums and differences are not supported",
     files={"model.toml": sub(MODEL, "k * [A]", "k * [A] + k * [P]")})
case("deeply_nested_rate_law", message=r"nested more than 50 levels",
     files={"model.toml": sub(MODEL, '"k * [A]"', '"' + "(" * 200 + "k * [A]" + ")" * 200 + '"')})
case("very_long_rate_law", message=r"characters long; at most 2000",
     files={"model.toml": sub(MODEL, '"k * [A]"', '"k' + " * [A]^0" * 400 + ' * [A]"')})
case("parameter_named_like_a_dunder", message=r"'__class__' is not a usable parameter name",
     files={"model.toml": sub(sub(MODEL, "k * [A]", "__class__ * [A]"), "k = {", "__class__ = {")})
case("reversible_without_reverse_rate", message=r"reversible, so it needs reverse_rate",
     files={"model.toml": sub(MODEL, '"A -> P"', '"A <=> P"')})
case("exponent_calls_a_function", message=r"functions such as exp\(\.\.\.\) are not supported",
     files={"model.toml": sub(MODEL, '"k * [A]"', '"k * [A]^exp(1)"')})
case("reaction_with_two_arrows", message=r"a step has exactly one arrow",
     files={"model.toml": sub(MODEL, '"A -> P"', '"A -> B -> P"')})
case("held_constant_without_concentration", message=r"cat is held constant .* no initial "
                                                    r"concentration",
     files={"model.toml": sub(MODEL, "k * [A]", "k * [A] * [cat]").replace(
         'name = "first order"', 'name = "first order"\nheld_constant = ["cat"]')})
case("model_is_binary", message=r"model\.toml: contains NUL characters",
     binary={"model.toml": b"\x00\x01\x02" * 100})


def write_all(folder=HERE):
    """Write every case under `folder` (replacing what was there)."""
    if folder.exists():
        shutil.rmtree(folder)
    for name, spec in CASES.items():
        target = folder / name
        target.mkdir(parents=True)
        files = {"model.toml": MODEL, "experiment.toml": EXPERIMENT, "traces.csv": TRACES}
        files.update(spec["files"])
        for fname, text in files.items():
            path = target / fname
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_bytes(text.encode("utf-8"))
        for fname, blob in spec["binary"].items():
            (target / fname).write_bytes(blob)
        lines = [f"exit = {spec['exit']}"]
        for key in ("message", "warning"):
            if spec[key]:
                lines.append(f"{key} = '''{spec[key]}'''")
        (target / "expected.toml").write_text("\n".join(lines) + "\n", encoding="utf-8")
    return len(CASES)


if __name__ == "__main__":
    print(f"wrote {write_all()} cases under {HERE.name}/")
