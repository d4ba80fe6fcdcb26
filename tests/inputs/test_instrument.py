"""Instrument-style tables: separators, decimal commas, metadata, units, runs."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from kinfit.core.errors import KinfitError
from kinfit.inputs.instrument import (
    SheetPlace,
    at,
    check_times,
    header_names,
    read_table,
    split_unit,
    table_from_text,
)


def test_semicolons_decimal_commas_metadata_and_a_time_unit():
    text = ("Instrument;UV-Vis 2\nOperator;(invented)\nTime;12:30:01\n\n"
            "Time (min);A480;A520;\n0;0,512;0,101;\n0,5;0,498;0,120;\n1;0,470;0,141;\n")
    table = table_from_text(text, "export.csv")
    assert table.separator == ";" and table.decimal == ","
    assert table.names == ("Time", "A480", "A520") and table.units == ("min", None, None)
    assert table.header_line == 5 and table.skipped == 3
    np.testing.assert_array_equal(table.lines, [6, 7, 8])
    np.testing.assert_allclose(table.numbers(0)[0], [0.0, 0.5, 1.0])
    np.testing.assert_allclose(table.numbers(2)[0], [0.101, 0.120, 0.141])


def test_tabs_and_a_run_column():
    text = "run\ttime [s]\tA\nr1\t0\t1.0\nr1\t10\t0.5\nr2\t0\t2.0\n"
    table = table_from_text(text, "runs.txt")
    assert table.separator == "\t" and table.units[1] == "s"
    assert list(table.text(table.index("run"))) == ["r1", "r1", "r2"]


def test_plain_csv_with_blank_cells_and_blank_lines():
    table = table_from_text("time,A,P\n0,10.0,0.0\n1,8.1,\n\n2,6.7,3.2\n", "w.csv")
    values, blank = table.numbers(2, allow_blank=True)
    np.testing.assert_array_equal(blank, [False, True, False])
    np.testing.assert_array_equal(table.lines, [2, 3, 5])


@pytest.mark.parametrize("header, expected", [
    ("Time (min)", ("Time", "min")), ("time [s]", ("time", "s")), ("time/s", ("time", "s")),
    ("t / h", ("t / h", None)), ("A/B", ("A/B", None)), ("A (mM)", ("A", "mM")),
    ("A480", ("A480", None)),
])
def test_units_in_headers(header, expected):
    # quantity calculus "time/s" (IUPAC Green Book convention, from memory) and
    # the bracket forms instruments print
    assert split_unit(header) == expected


@pytest.mark.parametrize("text, message", [
    ("", "the data file is empty"),
    ("t,A\n0,1\n", r"line 1: no 'time' column"),
    ("Instrument X\nno table here\n", r"line 1: no 'time' column.*found: 'Instrument X'"),
    ("time,A\n", "header but no data rows"),
    ("time,A\nzero,1\n", r"line 2: the header on line 1 has a 'time' column, but this line"),
    ("time,A\n0,1,2\n", r"line 2: more values \(3\) than the header on line 1 has columns"),
    ("time;A\n0,5;1.5\n", r"mixes decimal points \(line 2: '1\.5'\) and decimal commas"),
    ("time,A\n0,1\n1,0,5\n", r"line 3: more values"),
    ("time,A\n0,1\n1,x\n", r"line 3: A 'x' is not a number"),
    ("time,A\n0,1\n1,nan\n", r"line 3: A is 'nan'; expected a number"),
    ("time,A\n0,1\nEnd of data\n", r"line 3: time 'End of data' is not a number"),
    ("time,A,a\n0,1,2\n", "empty or repeated name"),
    ("time,A\n0,1\n1,1e999\n", "not a finite number"),
])
def test_tables_that_cannot_be_placed_are_refused(text, message):
    with pytest.raises(KinfitError, match=message):
        table = table_from_text(text, "bad.csv")
        for c in range(len(table.names)):
            table.numbers(c, allow_blank=True)


def test_decimal_comma_with_comma_separator_gets_a_hint():
    table = table_from_text('time,A\n0,"0,5"\n', "q.csv")
    with pytest.raises(KinfitError, match="a decimal comma needs semicolons or tabs"):
        table.numbers(1)


def test_utf16_export_is_read(tmp_path):
    path = tmp_path / "u16.txt"
    path.write_bytes("Time (s)\tA\n0\t1,5\n1\t1,25\n".encode("utf-16"))
    table = read_table(path, "u16.txt")
    np.testing.assert_allclose(table.numbers(1)[0], [1.5, 1.25])


# ------------------------------------------------------------------ properties

finite = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False, allow_infinity=False)


@settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.lists(finite, min_size=3, max_size=3), min_size=1, max_size=12),
       st.sampled_from([(",", "."), (";", "."), (";", ","), ("\t", "."), ("\t", ",")]),
       st.lists(st.sampled_from(["Instrument: model 7", "Date;2024", "# comment", ""]),
                max_size=3),
       st.booleans())
def test_written_tables_read_back(rows, style, metadata, trailing):
    # Property (common practice for readers): a table written in any accepted
    # style reads back to the same numbers.
    sep, dec = style
    end = sep if trailing else ""

    def cell(v):
        text = repr(float(v))
        return text.replace(".", ",") if dec == "," else text

    lines = metadata + [sep.join(["Time (s)", "A", "B"]) + end]
    lines += [sep.join(cell(v) for v in row) + end for row in rows]
    table = table_from_text("\n".join(lines) + "\n", "p.csv")
    got = np.column_stack([table.numbers(c)[0] for c in range(3)])
    np.testing.assert_array_equal(got, np.array(rows))


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.text(alphabet=st.sampled_from(list("time,;\t0123456789.,-eE \nAB()[]/\"x")),
               max_size=200))
def test_any_text_gives_a_table_or_a_kinfit_error(text):
    # Property: whatever the text, the reader returns a table whose numeric
    # cells are finite, or raises KinfitError (common practice for readers).
    try:
        table = table_from_text(text, "fuzz.csv")
        for c in range(len(table.names)):
            values, blank = table.numbers(c, allow_blank=True)
            assert np.isfinite(values[~blank]).all()
    except KinfitError:
        pass


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.binary(max_size=300))
def test_any_bytes_give_a_table_or_a_kinfit_error(tmp_path_factory, blob):
    path = tmp_path_factory.mktemp("b") / "blob.csv"
    path.write_bytes(blob)
    try:
        read_table(path, "blob.csv")
    except KinfitError:
        pass


def test_places_in_a_sheet_are_rows_and_in_a_file_lines():
    sheet = SheetPlace("book.xlsx, sheet 'r1'")
    assert at("data.csv", 7) == "data.csv, line 7"
    assert at(sheet, 7) == "book.xlsx, sheet 'r1', row 7"
    with pytest.raises(KinfitError, match=r"^book\.xlsx, sheet 'r1', row 5: time 3 is repeated "
                                          r"\(also at row 4\)$"):
        check_times(np.array([1.0, 3.0, 3.0]), np.array([3, 4, 5]), sheet)
    with pytest.raises(KinfitError, match=r"^data\.csv, line 5: time is not increasing"):
        check_times(np.array([1.0, 3.0, 2.0]), np.array([3, 4, 5]), "data.csv")


def test_header_names_split_units_and_refuse_repeats_naming_the_column():
    assert header_names(["Time (min)", "A [mM]", "sigma_A (mM)"], "w.csv", 1) == (
        ["Time", "A", "sigma_A"], ["min", "mM", "mM"])
    with pytest.raises(KinfitError, match=r"sheet 's', row 3: column D has an empty or repeated "
                                          r"name 'a \(mM\)'"):
        header_names(["time", "A", "P", "a (mM)"], SheetPlace("b.xlsx, sheet 's'"), 3,
                     ["A", "B", "C", "D"])
