"""Data tables on sheets of .xlsx workbooks, written here with openpyxl (seeded data)."""

from __future__ import annotations

import datetime
import io
import zipfile

import numpy as np
import openpyxl
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from kinfit.core.errors import KinfitError
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.workbook import is_workbook, read_sheet

LONG = """
[units]
time = "s"
concentration = "M"
[data]
file = "{file}"
{sheet}
[[runs]]
name = "r1"
initial = {{ A = 1.0 }}
[[runs]]
name = "r2"
initial = {{ A = 0.5 }}
"""
WIDE = """
[units]
time = "s"
concentration = "M"
[[runs]]
name = "r1"
file = "{file}"
{sheet}
initial = {{ A = 1.0 }}
"""


def save_workbook(path, sheets, edit=None):
    """Write {sheet name: rows} (a row is a list of cells; None leaves a cell empty).

    `edit(book)` may change the workbook before it is saved."""
    book = openpyxl.Workbook()
    book.remove(book.active)
    for name, rows in sheets.items():
        sheet = book.create_sheet(name)
        for r, row in enumerate(rows, start=1):
            for c, value in enumerate(row, start=1):
                if value is not None:
                    sheet.cell(r, c, value)
    if edit is not None:
        edit(book)
    book.save(path)
    return path


def long_rows(seed=11, sigma=True):
    """A seeded first-order decay in two runs, as rows of the long layout."""
    rng = np.random.default_rng(seed)
    rows = [["run", "time", "species", "value"] + (["sigma"] if sigma else [])]
    for run, a0 in (("r1", 1.0), ("r2", 0.5)):
        for t in np.arange(0.0, 60.0, 10.0):
            s = 0.01 + 0.005 * rng.random()
            row = [run, float(t), "A", float(round(a0 * np.exp(-0.05 * t) + s * rng.normal(), 6))]
            rows.append(row + ([float(round(s, 6))] if sigma else []))
    return rows


def as_csv(rows):
    return "".join(",".join("" if v is None else repr(v) if isinstance(v, float) else str(v)
                            for v in row) + "\n" for row in rows)


def experiment(folder, template, file, sheet=None):
    path = folder / "experiment.toml"
    path.write_text(template.format(file=file, sheet="" if sheet is None else
                                    f'sheet = "{sheet}"'), encoding="utf-8")
    return path


def assert_same_traces(a, b):
    for run_a, run_b in zip(a.runs, b.runs, strict=True):
        for ta, tb in zip(run_a.traces, run_b.traces, strict=True):
            assert ta.species == tb.species
            np.testing.assert_array_equal(ta.times, tb.times)
            np.testing.assert_array_equal(ta.values, tb.values)
            if ta.sigma is None or tb.sigma is None:
                assert ta.sigma is None and tb.sigma is None
            else:
                np.testing.assert_array_equal(ta.sigma, tb.sigma)


def test_long_layout_on_a_named_sheet_reads_as_its_csv(tmp_path):
    rows = long_rows()
    save_workbook(tmp_path / "data.xlsx", {"notes": [["invented study"]], "traces": rows})
    (tmp_path / "traces.csv").write_text(as_csv(rows), encoding="utf-8")
    from_sheet = load_experiment(experiment(tmp_path, LONG, "data.xlsx", "traces"))
    from_csv = load_experiment(experiment(tmp_path, LONG, "traces.csv"))
    assert_same_traces(from_sheet, from_csv)
    assert from_sheet.sigma_known
    np.testing.assert_array_equal(from_sheet.runs[1].traces[0].lines, np.arange(8, 14))


def test_wide_layout_on_a_sheet_with_notes_above_units_and_gaps(tmp_path):
    title = [None, "Run 1, invented data"]
    rows = [title, [None, "operator", "nobody"], [],
            [None, "Time (min)", "A (mM)", "sigma_A (mM)", "P (mM)"],
            [None, 0, 1000, 10, 0], [None, 0.5, 740, 10, None], [None, 1, 550, 12, 450],
            [], [None, 2, 300, 15, 700]]

    def merge_title(book):          # a merged title above the table is fine
        book["r1"].merge_cells("B1:E1")

    save_workbook(tmp_path / "r1.xlsx", {"r1": rows}, merge_title)
    # one sheet: no sheet key needed; P has no σ column, so [noise] gives its σ
    exp = load_experiment(experiment(tmp_path, WIDE + "[noise]\nP = {{ absolute = 0.005 }}\n",
                                     "r1.xlsx"))
    a, p = exp.runs[0].traces
    np.testing.assert_allclose(a.times, [0, 30, 60, 120])
    np.testing.assert_allclose(a.values, [1.0, 0.74, 0.55, 0.30])     # mM to M
    np.testing.assert_allclose(a.sigma, [0.010, 0.010, 0.012, 0.015])
    np.testing.assert_array_equal(a.lines, [5, 6, 7, 9])
    np.testing.assert_allclose(p.times, [0, 60, 120])
    assert p.sigma is None and exp.sigma(p) == pytest.approx([0.005] * 3)


def test_formulas_with_their_saved_values_are_read(tmp_path):
    # openpyxl writes formulas without a saved value; a spreadsheet program stores both
    # (the <v> element beside <f>, and t="str" for a text result: ECMA-376 Part 1, 18.3.1.4
    # "c (Cell)", from memory). A formula giving empty text is an empty cell: not measured.
    rows = [["time", "A", "P"], [0, 1.0, 0.0], [10, "=B2*0.6", "=T(B2)"], [20, 0.37, 0.63]]
    path = save_workbook(tmp_path / "r1.xlsx", {"r1": rows})
    patches = {b'<c r="B3"><f>B2*0.6</f><v /></c>': b'<c r="B3"><f>B2*0.6</f><v>0.6</v></c>',
               b'<c r="C3"><f>T(B2)</f><v /></c>': b'<c r="C3" t="str"><f>T(B2)</f><v></v></c>'}
    blob = io.BytesIO()
    with zipfile.ZipFile(path) as src, zipfile.ZipFile(blob, "w") as dst:
        for item in src.infolist():
            data = src.read(item.filename)
            if item.filename == "xl/worksheets/sheet1.xml":
                for old, new in patches.items():
                    assert old in data
                    data = data.replace(old, new)
            dst.writestr(item, data)
    path.write_bytes(blob.getvalue())
    a, p = load_experiment(experiment(tmp_path, WIDE, "r1.xlsx")).runs[0].traces
    np.testing.assert_allclose(a.values, [1.0, 0.6, 0.37])
    np.testing.assert_allclose(p.times, [0, 20])


def _cell(ref, value):
    def edit(book):
        book["r1"][ref] = value
    return edit


def _merge(ref):
    def edit(book):
        book["r1"].merge_cells(ref)
    return edit


def _extra_sheet(book):
    book.create_sheet("notes")


GOOD = [["time", "A", "sigma_A"], [0, 1.0, 0.01], [10, 0.61, 0.01], [20, 0.37, 0.01],
        [30, 0.22, 0.01]]


@pytest.mark.parametrize("edit, sheet, message", [
    (_cell("B3", "=B2*0.6"), None, r"r1\.xlsx, sheet 'r1', row 3, column B \(cell B3\): the "
                                   r"formula '=B2\*0\.6' has no saved value"),
    (_cell("B4", "#DIV/0!"), None, r"sheet 'r1', row 4, column B \(cell B4\): it holds the "
                                   r"error value '#DIV/0!'"),
    (_merge("B3:C3"), None, r"sheet 'r1', row 3: cells B3:C3 are merged; unmerge them"),
    (_cell("B4", "n.d."), None, r"sheet 'r1', row 4, column B \('A'\): holds the text 'n\.d\.', "
                                r"not a number$"),
    (_cell("B4", "0.37"), None, r"row 4, column B \('A'\): holds the text '0\.37', not a number "
                                r"\(a number stored as text: format the cell as a number\)"),
    (_cell("A4", datetime.time(0, 0, 20)), None, r"row 4, column A \('time'\): holds a date or "
                                                  r"time of day \(00:00:20\), not a number"),
    (_cell("B4", True), None, r"row 4, column B \('A'\): holds TRUE, not a number"),
    (_cell("E4", 7), None, r"sheet 'r1', row 4, column E: a value \(7\) outside the table, whose "
                           r"header on row 1 spans columns A to C"),
    (_cell("A4", 5), None, r"sheet 'r1', row 4: time is not increasing \(t=5 after t=10\)"),
    (_cell("A4", None), None, r"sheet 'r1', row 4: time is missing"),
    (_cell("C4", 0), None, r"sheet 'r1', row 4: sigma_A 0 is not positive"),
    (_cell("C4", None), None, r"sheet 'r1', row 4: sigma_A is empty but A has a reading"),
    (_cell("B1", None), None, r"sheet 'r1', row 1: column B has an empty or repeated name"),
    (_extra_sheet, None, r"r1\.xlsx: the workbook has 2 sheets \('r1', 'notes'\); name the one "
                         r"with the data, like sheet = 'r1'"),
    (_extra_sheet, "R1", r"r1\.xlsx: no sheet 'R1'; the workbook has 'r1', 'notes'"),
    (None, "notes", None),
])
def test_what_a_sheet_must_not_hold_is_refused_with_sheet_row_and_column(tmp_path, edit, sheet,
                                                                          message):
    save_workbook(tmp_path / "r1.xlsx", {"r1": GOOD}, edit)
    path = experiment(tmp_path, WIDE, "r1.xlsx", sheet)
    if message is None:
        with pytest.raises(KinfitError, match=r"no sheet 'notes'; the workbook has 'r1'"):
            load_experiment(path)
        return
    with pytest.raises(KinfitError, match=message):
        load_experiment(path)


@pytest.mark.parametrize("rows, message", [
    ([["run", "time", "species", "value", "note"], ["r1", 0, "A", 1.0, "x"]],
     r"data\.xlsx, sheet 'traces', row 1: unknown column 'note'; the long layout has"),
    ([["run", "time", "species", "value (mM)"], ["r1", 0, "A", 1.0]],
     r"sheet 'traces', row 1: column 'value \(mM\)' carries a unit"),
    ([["run", "time", "species", "value"], ["r1", 0, "A", "1,0"]],
     r"sheet 'traces', row 2, column D \('value'\): holds the text '1,0', not a number"),
    ([["run", "time", "species", "value", "sigma"], ["r1", 0, "A", 1.0, 0.1],
      ["r1", 1, "A", 0.9, None]], r"sheet 'traces', row 3: sigma is empty for A, but row 2"),
    ([["run", "time", "species", "value"], ["r9", 0, "A", 1.0]],
     r"sheet 'traces', row 2: run 'r9' is not listed in the experiment file"),
    ([["run", "time", "species", "value"]], r"sheet 'traces': the sheet has a header but no "
                                            r"data rows"),
    ([], r"sheet 'traces': the sheet is empty"),
])
def test_long_layout_sheet_refusals(tmp_path, rows, message):
    save_workbook(tmp_path / "data.xlsx", {"traces": rows})
    with pytest.raises(KinfitError, match=message):
        load_experiment(experiment(tmp_path, LONG, "data.xlsx", "traces"))


def test_a_file_that_is_not_a_workbook_is_refused(tmp_path):
    (tmp_path / "r1.xlsx").write_text("time,A\n0,1\n", encoding="utf-8")
    with pytest.raises(KinfitError, match=r"r1\.xlsx: not a readable \.xlsx workbook"):
        load_experiment(experiment(tmp_path, WIDE, "r1.xlsx"))


def test_sheet_reader_finds_the_table_and_names_its_place(tmp_path):
    save_workbook(tmp_path / "w.xlsx", {"s": [["export"], [], [None, "time [s]", "A"],
                                              [None, 1, 2.5], [None, 2, 3]]})
    table = read_sheet(tmp_path / "w.xlsx", "w.xlsx", "s")
    assert table.names == ("time", "A") and table.units == ("s", None)
    assert table.header_line == 3 and table.skipped == 1 and str(table.source) == \
        "w.xlsx, sheet 's'"
    np.testing.assert_array_equal(table.lines, [4, 5])
    np.testing.assert_array_equal(table.numbers(1)[0], [2.5, 3.0])
    assert is_workbook("a.XLSX") and not is_workbook("a.csv")


# openpyxl writes 16 significant digits (a spreadsheet shows 15): the data carry 15
finite = st.floats(0, 1e6).map(lambda v: float(f"{v:.15g}"))


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                  HealthCheck.function_scoped_fixture])
@given(st.lists(st.tuples(finite, st.floats(1e-6, 1e3), st.booleans()), min_size=3,
                max_size=15),
       st.booleans(), st.sampled_from(["s", "min"]))
def test_a_table_written_as_csv_and_as_xlsx_gives_the_same_traces(tmp_path_factory, points,
                                                                   with_sigma, unit):
    folder = tmp_path_factory.mktemp("round")
    # wide layout, times 0, 1, 2 ... in `unit`; a False flag leaves P unmeasured then
    header = [f"time ({unit})", "A (mM)", "P (mM)"] + (
        ["sigma_A (mM)", "sigma_P (uM)"] if with_sigma else [])
    rows = []
    for i, (a, s, keep) in enumerate(points):
        s = float(f"{s:.15g}")
        p = a if keep or i == 0 else None
        rows.append([float(i), a, p] + ([s, None if p is None else s] if with_sigma else []))
    rows.insert(0, header)
    save_workbook(folder / "r1.xlsx", {"r1": rows})
    (folder / "r1.csv").write_text(as_csv(rows), encoding="utf-8")
    from_sheet = load_experiment(experiment(folder, WIDE, "r1.xlsx"))
    from_csv = load_experiment(experiment(folder, WIDE, "r1.csv"))
    assert_same_traces(from_sheet, from_csv)
    # and the long layout, both runs
    long = long_rows(seed=len(points), sigma=with_sigma)
    save_workbook(folder / "data.xlsx", {"traces": long})
    (folder / "traces.csv").write_text(as_csv(long), encoding="utf-8")
    assert_same_traces(load_experiment(experiment(folder, LONG, "data.xlsx")),
                       load_experiment(experiment(folder, LONG, "traces.csv")))


def _good_workbook_bytes():
    buffer = io.BytesIO()
    save_workbook(buffer, {"r1": GOOD})
    return buffer.getvalue()


GOOD_BYTES = _good_workbook_bytes()
with zipfile.ZipFile(io.BytesIO(GOOD_BYTES)) as _book:
    MEMBERS = [item.filename for item in _book.infolist()]


def _damaged(action, member, cut):
    """GOOD_BYTES truncated, or with one member dropped or cut short."""
    if action == "truncate":
        return GOOD_BYTES[:cut % len(GOOD_BYTES)]
    out = io.BytesIO()
    with zipfile.ZipFile(io.BytesIO(GOOD_BYTES)) as src, zipfile.ZipFile(out, "w") as dst:
        for name in MEMBERS:
            data = src.read(name)
            if name == member:
                if action == "drop":
                    continue
                data = data[:cut % (len(data) + 1)]
            dst.writestr(name, data)
    return out.getvalue()


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                  HealthCheck.function_scoped_fixture])
@given(st.sampled_from(["truncate", "drop", "cut"]), st.sampled_from(MEMBERS),
       st.integers(0, 10 ** 6))
def test_a_damaged_workbook_gives_a_table_or_a_kinfit_error(tmp_path_factory, action, member,
                                                            cut):
    path = tmp_path_factory.mktemp("damaged") / "r1.xlsx"
    path.write_bytes(_damaged(action, member, cut))
    try:
        table = read_sheet(path, "r1.xlsx")
    except KinfitError as exc:
        assert str(exc).startswith("r1.xlsx")
    else:   # a part the values do not need (styles, properties) may go missing
        np.testing.assert_array_equal(table.numbers(0)[0], [0, 10, 20, 30])


@pytest.mark.parametrize("template, message", [
    (WIDE.replace('file = "{file}"\n{sheet}\n', 'sheet = "r1"\n'),
     r"experiment\.toml, line 6 \(run 'r1'\) \(sheet\): expected the name of a sheet of the "
     r"run's file"),
    (LONG.replace("{sheet}", "sheet = 3"), r"expected \[data\] with file = .* and sheet = "),
])
def test_sheet_keys_that_cannot_be_placed_are_refused(tmp_path, template, message):
    save_workbook(tmp_path / "data.xlsx", {"traces": long_rows()})
    with pytest.raises(KinfitError, match=message):
        load_experiment(experiment(tmp_path, template, "data.xlsx"))
