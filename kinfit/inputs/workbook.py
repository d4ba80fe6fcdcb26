"""Data tables on the sheets of .xlsx workbooks.

Many chemists keep their readings in spreadsheets. :func:`read_sheet` reads
the table on one sheet into the same :class:`~kinfit.inputs.instrument.Table`
a CSV file gives, with the same checks (a header with a ``time`` column, rows
of notes above it skipped, units in headers such as ``Time (min)``, blank rows
skipped), the sheet's rows in place of lines, and the refusals a workbook
needs of its own, each naming the sheet, the row and the column:

* a formula with no saved value: the value that pandas and openpyxl read is
  empty (files written by programs that do not compute formulas); found by
  reading the workbook a second time with its formulas;
* an error value such as ``#DIV/0!`` (read as NaN);
* merged cells from the header down (all but the first read as empty);
* text, a date or time of day, or TRUE/FALSE in a number column, a number
  stored as text included (what "1.234" means depends on the locale that
  wrote it);
* a value outside the header's columns.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from kinfit.core.errors import KinfitError
from kinfit.inputs.instrument import SheetPlace, Table, at, header_names, split_unit

__all__ = ["read_sheet", "is_workbook", "WORKBOOK_SUFFIXES"]

WORKBOOK_SUFFIXES = (".xlsx", ".xlsm")


def is_workbook(path):
    """Whether `path` names an .xlsx workbook (by its suffix)."""
    return Path(path).suffix.lower() in WORKBOOK_SUFFIXES


def read_sheet(path, shown=None, sheet=None, anchor="time", text_columns=("run",),
               check_header=None):
    """Read the table on one sheet of an .xlsx workbook (see the module notes).

    Parameters
    ----------
    path : str or os.PathLike
    shown : str, optional
        The file as named in messages (default: `path`).
    sheet : str, optional
        The sheet's name; may be left out when the workbook has one sheet.
    anchor : str or None
        The column that marks the header row (its next non-empty row must hold
        a number there); ``None``: the first non-empty row is the header.
    text_columns : sequence of str
        Columns that hold names (case-insensitive); every other column holds
        numbers.
    check_header : callable, optional
        ``check_header(cells, place, row)``, called with the header's cells
        before any cell below them is checked.

    Returns
    -------
    Table
        Cells as text (numbers written exactly), `lines` the sheet's row
        numbers, `source` a :class:`SheetPlace`, `separator` empty.
    """
    from openpyxl.utils import get_column_letter

    shown = str(path) if shown is None else shown
    grid, formulas, place = _open_sheet(path, shown, sheet)
    filled = [[c for c in range(grid.shape[1]) if not _empty(grid[r, c])]
              for r in range(grid.shape[0])]
    nonblank = [r for r in range(grid.shape[0]) if filled[r]]
    if not nonblank:
        raise KinfitError(f"{place}: the sheet is empty")
    top = _sheet_header(grid, nonblank, anchor, place)
    for merged in sorted(formulas.merged_cells.ranges, key=lambda m: (m.min_row, m.min_col)):
        if merged.max_row >= top + 1:
            raise KinfitError(f"{at(place, merged.min_row)}: cells {merged.coord} are merged; "
                              f"unmerge them so that every reading has a cell of its own")
    first, last = filled[top][0], filled[top][-1]
    letters = [get_column_letter(c + 1) for c in range(first, last + 1)]
    header = [_text(grid[top, c]) for c in range(first, last + 1)]
    names, units = header_names(header, place, top + 1, letters)
    if check_header is not None:
        check_header(header, place, top + 1)
    text_columns = {c.lower() for c in text_columns}
    cells, lines = [], []
    for r in (r for r in nonblank if r > top):
        outside = [c for c in filled[r] if c < first or c > last]
        if outside:
            c = outside[0]
            raise KinfitError(f"{at(place, r + 1)}, column {get_column_letter(c + 1)}: a value "
                              f"({grid[r, c]!r}) outside the table, whose header on row "
                              f"{top + 1} spans columns {letters[0]} to {letters[-1]}")
        row = []
        for j, c in enumerate(range(first, last + 1)):
            loc = f"{at(place, r + 1)}, column {letters[j]} ({names[j]!r})"
            row.append(_text(grid[r, c]) if names[j].lower() in text_columns
                       else _number_text(grid[r, c], loc))
        cells.append(tuple(row))
        lines.append(r + 1)
    if not cells:
        raise KinfitError(f"{place}: the sheet has a header but no data rows")
    return Table(names=tuple(names), units=tuple(units), cells=tuple(cells),
                 lines=np.array(lines), header_line=top + 1, separator="", decimal=".",
                 skipped=sum(1 for r in nonblank if r < top), source=place)


def _open_sheet(path, shown, sheet):
    """(cell values [n_rows, n_columns] as objects, the openpyxl sheet with its
    formulas, the sheet as a :class:`SheetPlace`), unreadable cells refused."""
    import warnings
    import zipfile
    from xml.etree import ElementTree

    import pandas as pd
    from openpyxl import load_workbook
    from openpyxl.utils.exceptions import InvalidFileException

    unreadable = (zipfile.BadZipFile, InvalidFileException, KeyError, ValueError, TypeError,
                  OSError, EOFError, ElementTree.ParseError)
    try:
        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", category=UserWarning, module="openpyxl")
            with pd.ExcelFile(path, engine="openpyxl",
                              engine_kwargs={"read_only": False}) as book:
                names = list(book.sheet_names)
                listing = ", ".join(repr(n) for n in names)
                if not names:
                    raise KinfitError(f"{shown}: the workbook has no sheet that can be read")
                if sheet is None and len(names) != 1:
                    raise KinfitError(f"{shown}: the workbook has {len(names)} sheets "
                                      f"({listing}); name the one with the data, like "
                                      f"sheet = {names[0]!r}")
                if sheet is not None and sheet not in names:
                    raise KinfitError(f"{shown}: no sheet {sheet!r}; the workbook has "
                                      f"{listing}")
                sheet = names[0] if sheet is None else sheet
                frame = pd.read_excel(book, sheet_name=sheet, header=None, dtype=object,
                                      na_filter=False)
                cached = book.book[sheet]         # the values pandas read, with their types
                formulas = load_workbook(path, data_only=False)[sheet]
                grid = (frame.to_numpy(dtype=object) if frame.size else
                        np.empty((0, 0), dtype=object))
                place = SheetPlace(f"{shown}, sheet {sheet!r}")
                _refuse_unreadable(grid, formulas, cached, place)
    except unreadable as exc:
        raise KinfitError(f"{shown}: not a readable .xlsx workbook ({exc})") from None
    return grid, formulas, place


def _empty(value):
    return value is None or (isinstance(value, str) and not value.strip())


def _refuse_unreadable(grid, formulas, cached, place):
    """Refuse a formula with no saved value and an error value, anywhere on the sheet.

    `cached` is the sheet as read for its values: a formula whose saved value is
    empty text reads as an empty cell of type ``"str"``; one with no saved
    value, as an empty cell of another type."""
    from openpyxl.utils import get_column_letter

    for row in formulas.iter_rows():
        for cell in row:
            r, c = cell.row - 1, cell.column - 1
            value = grid[r, c] if r < grid.shape[0] and c < grid.shape[1] else None
            letter = get_column_letter(cell.column)
            loc = f"{at(place, cell.row)}, column {letter} (cell {letter}{cell.row})"
            formula = str(getattr(cell.value, "text", cell.value))
            if cell.data_type == "f" and _empty(value) and \
                    cached.cell(cell.row, cell.column).data_type != "str":
                raise KinfitError(f"{loc}: the formula {formula!r} has no saved value (the file "
                                  f"was written by a program that does not compute formulas); "
                                  f"open and save it in a spreadsheet program, or paste the "
                                  f"values")
            if isinstance(value, float) and math.isnan(value):
                what = (f"its formula {formula!r} gives an error" if cell.data_type == "f"
                        else f"it holds the error value {cell.value!r}")
                raise KinfitError(f"{loc}: {what}; correct it or leave the cell empty")


def _sheet_header(grid, nonblank, anchor, place):
    """Index of the header row: the first with an `anchor` cell over a number."""
    from openpyxl.utils import get_column_letter

    if anchor is None:
        return nonblank[0]
    near = None
    for k, r in enumerate(nonblank):
        columns = [c for c in range(grid.shape[1]) if isinstance(grid[r, c], str)
                   and split_unit(grid[r, c])[0].lower() == anchor]
        if not columns:
            continue
        if k + 1 == len(nonblank):
            return r                      # a header with no rows: said so when read
        below = nonblank[k + 1]
        if _is_number(grid[below, columns[0]]):
            return r
        near = near or (r, below, columns[0])
    if near is not None:
        r, below, c = near
        raise KinfitError(f"{at(place, below + 1)}, column {get_column_letter(c + 1)}: the "
                          f"header on row {r + 1} has a '{anchor}' column, but the cell below it "
                          f"holds {grid[below, c]!r}, not a number")
    found = ", ".join(_text(v) for v in grid[nonblank[0]] if not _empty(v))
    raise KinfitError(f"{at(place, nonblank[0] + 1)}: no '{anchor}' column; expected a header "
                      f"row with a '{anchor}' cell (its unit may follow, like 'Time (min)') "
                      f"above rows of numbers (found: {found[:60]!r})")


def _is_number(value):
    return isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(
        value, (bool, np.bool_))


def _text(value):
    """A name cell as text (a whole number without its '.0')."""
    if isinstance(value, str):
        return value.strip()
    if isinstance(value, (bool, np.bool_)):
        return str(bool(value)).upper()
    if isinstance(value, (float, np.floating)) and float(value).is_integer():
        return str(int(value))
    return str(value)


def _number_text(value, loc):
    """A number cell written exactly as text ('' when empty); anything else refused."""
    import datetime

    if _empty(value):
        return ""
    if _is_number(value):
        return str(int(value)) if isinstance(value, (int, np.integer)) else repr(float(value))
    if isinstance(value, str):
        try:
            hint = (" (a number stored as text: format the cell as a number)"
                    if math.isfinite(float(value)) else "")
        except ValueError:
            hint = ""
        raise KinfitError(f"{loc}: holds the text {value.strip()!r}, not a number{hint}")
    if isinstance(value, (bool, np.bool_)):
        raise KinfitError(f"{loc}: holds {str(bool(value)).upper()}, not a number")
    if isinstance(value, (datetime.date, datetime.time, datetime.timedelta)):
        raise KinfitError(f"{loc}: holds a date or time of day ({value}), not a number; give "
                          f"times as numbers with their unit in the header, like 'time (min)'")
    raise KinfitError(f"{loc}: holds {value!r}, not a number")
