"""Reading data tables the way instruments and their software write them.

A spectrometer's export is a table with a few habits of its own. This reader
accepts, and says so when it meets something else:

* fields separated by a comma, a semicolon or a tab (the separator is found,
  not assumed: the one under which a header with a time column is followed
  by rows of the same width);
* a decimal comma (with semicolon or tab separators), never mixed with
  decimal points in one table;
* lines of metadata above the table (instrument, operator, date ...), which
  are skipped; the table starts at the first line holding a ``time`` column
  that is followed by a row of numbers of the same width;
* a unit in a column header: ``Time (min)``, ``time [s]`` or ``time/s``
  (quantity calculus); other headers may carry one in brackets too,
  ``A (mM)``;
* a trailing separator at the end of every line;
* a ``run`` column, when one file holds several runs.

Text after the table, rows of a different width and cells that are not
numbers are refused with the file, the line and what was expected: a table
that cannot be placed is never read by guesswork.

The same table may sit on a sheet of an .xlsx workbook, read by
:mod:`kinfit.inputs.workbook` into the same :class:`Table` (its lines are the
sheet's rows, its source a :class:`SheetPlace`).
"""

from __future__ import annotations

import csv
import io
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from kinfit.core.errors import KinfitError
from kinfit.inputs.sources import decode

__all__ = ["Table", "read_table", "table_from_text", "split_unit", "header_names",
           "check_times", "at", "line_word", "SheetPlace", "SEPARATORS", "MAX_MAGNITUDE"]

MAX_MAGNITUDE = 1e100   # larger times or values are typing errors, not measurements

SEPARATORS = {",": "comma", ";": "semicolon", "\t": "tab"}
_NUMBER_DOT = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")
_NUMBER_COMMA = re.compile(r"^[+-]?(\d+,?\d*|,\d+)([eE][+-]?\d+)?$")
_HAS_COMMA_DECIMAL = re.compile(r"^[+-]?\d*,\d+([eE][+-]?\d+)?$")
_HAS_POINT_DECIMAL = re.compile(r"^[+-]?\d*\.\d+([eE][+-]?\d+)?$")
_BRACKET_UNIT = re.compile(r"^(?P<name>.*?)\s*(?:\((?P<a>[^()]*)\)|\[(?P<b>[^\[\]]*)\])$")
_SLASH_UNIT = re.compile(r"^(?P<name>[A-Za-z][A-Za-z ]*?)\s*/\s*(?P<unit>\S.*)$")
_NOT_NUMBERS = ("nan", "na", "n/a", "null", "none", "inf", "+inf", "-inf", "infinity",
                "-infinity")


@dataclass(frozen=True)
class Table:
    """A table read from a data file: header, cells and where each row was.

    Attributes
    ----------
    names : tuple of str
        Column names as written, without a unit in brackets.
    units : tuple of str or None
        The unit each header carried, if any.
    cells : tuple of tuple of str
        The data rows [n_rows][n_columns], stripped.
    lines : ndarray [n_rows] of int
        Line of each row in the file (1-based).
    header_line : int
    separator : str
        ``","``, ``";"`` or ``"\\t"`` (empty for a sheet of a workbook).
    decimal : str
        ``"."`` or ``","``.
    skipped : int
        Lines of metadata above the header.
    source : str
        The file, as shown in messages.
    """

    names: tuple
    units: tuple
    cells: tuple
    lines: np.ndarray
    header_line: int
    separator: str
    decimal: str
    skipped: int
    source: str

    @property
    def n_rows(self):
        return len(self.cells)

    def index(self, name):
        """Column index of `name` (case-insensitive), or -1."""
        lower = [n.lower() for n in self.names]
        return lower.index(name.lower()) if name.lower() in lower else -1

    def text(self, column):
        """Cells of one column as text [n_rows]."""
        return np.array([row[column] for row in self.cells], dtype=object)

    def numbers(self, column, label=None, allow_blank=False, rows=None):
        """Cells of one column as floats.

        Parameters
        ----------
        column : int
        label : str, optional
            Name for messages (default: the column's name).
        allow_blank : bool
            Whether an empty cell is allowed (it becomes NaN).
        rows : ndarray of int, optional
            Only these rows.

        Returns
        -------
        values : ndarray [n_rows]
        blank : ndarray [n_rows] of bool

        Raises
        ------
        KinfitError
            For text, NaN or infinity, or a blank cell when not allowed, with
            the line.
        """
        label = self.names[column] if label is None else label
        rows = np.arange(self.n_rows) if rows is None else rows
        cells = [self.cells[i][column] for i in rows]
        return _to_floats(cells, self.lines[rows], self.decimal, self.source, label,
                          allow_blank)


def _to_floats(cells, lines, decimal, shown, label, allow_blank):
    pattern = _NUMBER_DOT if decimal == "." else _NUMBER_COMMA
    values = np.full(len(cells), np.nan)
    blank = np.zeros(len(cells), dtype=bool)
    for i, cell in enumerate(cells):
        if cell == "":
            if not allow_blank:
                raise KinfitError(f"{at(shown, lines[i])}: {label} is missing")
            blank[i] = True
            continue
        if pattern.match(cell):
            values[i] = float(cell.replace(",", ".")) if decimal == "," else float(cell)
            if not np.isfinite(values[i]):
                raise KinfitError(f"{at(shown, lines[i])}: {label} {cell!r} is not a finite "
                                  f"number")
            if abs(values[i]) > MAX_MAGNITUDE:
                raise KinfitError(f"{at(shown, lines[i])}: {label} {values[i]:g} is "
                                  f"implausibly large (beyond ±{MAX_MAGNITUDE:g}); is a unit or "
                                  f"an exponent wrong?")
            continue
        if cell.lower() in _NOT_NUMBERS:
            raise KinfitError(f"{at(shown, lines[i])}: {label} is {cell!r}; expected a "
                              f"number (leave the cell empty if nothing was measured)")
        hint = ""
        if decimal == "." and _HAS_COMMA_DECIMAL.match(cell):
            hint = " (a decimal comma needs semicolons or tabs between fields)"
        elif cell.lower() == label.lower():
            hint = " (is the header repeated here?)"
        raise KinfitError(f"{at(shown, lines[i])}: {label} {cell!r} is not a number{hint}")
    return values, blank


def split_unit(header):
    """Split a column header into its name and unit.

    ``"Time (min)"`` -> ``("Time", "min")``; ``"time [s]"`` -> ``("time", "s")``;
    ``"time/s"`` -> ``("time", "s")``; ``"A"`` -> ``("A", None)``. The slash
    form is read only after a plain word, so that a name such as ``A/B`` keeps
    its slash.

    >>> split_unit("Time (min)")
    ('Time', 'min')
    """
    header = header.strip()
    m = _BRACKET_UNIT.match(header)
    if m and m.group("name").strip():
        unit = (m.group("a") if m.group("a") is not None else m.group("b")).strip()
        return m.group("name").strip(), unit or None
    m = _SLASH_UNIT.match(header)
    if m and m.group("name").strip().lower() == "time":
        return m.group("name").strip(), m.group("unit").strip()
    return header, None


def _fields(line, separator):
    """One line split into stripped fields."""
    row = next(csv.reader(io.StringIO(line), delimiter=separator, skipinitialspace=True),
               [])
    return [f.strip() for f in row]


def _header_fields(line, separator):
    """A header's fields, without the empty one a trailing separator leaves."""
    row = _fields(line, separator)
    return row[:-1] if len(row) > 1 and row[-1] == "" else row


def _locate(lines, separator, anchor):
    """First line that is a header under `separator`: it has an `anchor` column
    and the next non-blank line has as many fields with a number below it.

    Returns (header index, fields) or None.
    """
    for i, line in enumerate(lines):
        if separator not in line:
            continue
        header = _header_fields(line, separator)
        if len(header) < 2:
            continue
        cols = [c for c, cell in enumerate(header) if anchor(cell)]
        if not cols:
            continue
        below = next((j for j in range(i + 1, len(lines)) if lines[j].strip()), None)
        if below is None:
            return i, header              # a header with no rows: said so when read
        row = _fields(lines[below], separator)
        cell = row[cols[0]] if len(row) > cols[0] else ""
        if _NUMBER_DOT.match(cell) or _NUMBER_COMMA.match(cell):
            return i, header
    return None


def _near_miss(lines, anchor):
    """(header index, next line index) of the first line with an `anchor` column
    under any separator, for the message when no table was found."""
    for i, line in enumerate(lines):
        for sep in SEPARATORS:
            fields = _header_fields(line, sep)
            if len(fields) >= 2 and any(anchor(c) for c in fields):
                nxt = next((j for j in range(i + 1, len(lines)) if lines[j].strip()), None)
                if nxt is not None:
                    return i, nxt
    return None


def table_from_text(text, shown, anchor="time"):
    """Find and read the table in decoded `text` (see the module notes).

    Parameters
    ----------
    text : str
        Decoded file text with ``\\n`` line ends.
    shown : str
        The file as named in messages.
    anchor : str
        The column that marks the header (``"time"``).

    Returns
    -------
    Table

    Raises
    ------
    KinfitError
        When no header with a time column over rows of numbers is found, when
        two separators would read the file differently, when a row has another
        width than the header, when decimal points and commas are mixed, or
        when text follows the table.
    """
    if not text.strip():
        raise KinfitError(f"{shown}: the data file is empty")
    lines = text.split("\n")
    anchor_of = (lambda cell: split_unit(cell)[0].lower() == anchor)
    readings = {}
    for sep in SEPARATORS:
        found = _locate(lines, sep, anchor_of)
        if found is not None:
            readings[sep] = found
    if not readings:
        near = _near_miss(lines, anchor_of)
        if near is not None:
            header, below = near
            raise KinfitError(
                f"{shown}, line {below + 1}: the header on line {header + 1} has a '{anchor}' "
                f"column, but this line below it is not a row of numbers "
                f"({lines[below].strip()[:60]!r}); expected numbers with a decimal point (or "
                f"a decimal comma with semicolons or tabs between fields)")
        first = next((n for n, line in enumerate(lines, start=1) if line.strip()), 1)
        shown_line = lines[first - 1].strip()
        raise KinfitError(
            f"{shown}, line {first}: no '{anchor}' column; expected a header with a "
            f"'{anchor}' column (its unit may follow, like 'Time (min)') above rows of numbers, "
            f"fields separated by commas, semicolons or tabs (found: "
            f"{shown_line[:60]!r})")
    first_line = min(i for i, _ in readings.values())
    candidates = {s: r for s, r in readings.items() if r[0] == first_line}
    if len(candidates) > 1:
        widths = {s: len(r[1]) for s, r in candidates.items()}
        best = max(widths.values())
        candidates = {s: r for s, r in candidates.items() if widths[s] == best}
        if len(candidates) > 1:
            names = " and ".join(SEPARATORS[s] for s in candidates)
            raise KinfitError(f"{shown}, line {first_line + 1}: the table reads equally well "
                              f"with {names} as the separator; use one separator only")
    separator, (header_index, header) = next(iter(candidates.items()))
    return _read_rows(lines, header_index, header, separator, shown)


def _read_rows(lines, header_index, header, separator, shown):
    """Rows below the header: blank lines skipped, a trailing separator dropped,
    short rows padded with empty cells (not measured), long rows refused."""
    width = len(header)
    cells, numbers = [], []
    for n in range(header_index + 1, len(lines)):
        if not lines[n].strip():
            continue
        row = _fields(lines[n], separator)
        if len(row) == width + 1 and row[-1] == "":
            row = row[:-1]
        if len(row) > width:
            raise KinfitError(f"{shown}, line {n + 1}: more values ({len(row)}) than the "
                              f"header on line {header_index + 1} has columns ({width}; "
                              f"separator: {SEPARATORS[separator]})")
        cells.append(tuple(row) + ("",) * (width - len(row)))
        numbers.append(n + 1)
    if not cells:
        raise KinfitError(f"{shown}: the data file has a header but no data rows")
    names, units = header_names(header, shown, header_index + 1)
    decimal = _decimal(cells, numbers, separator, shown)
    return Table(names=tuple(names), units=tuple(units), cells=tuple(cells),
                 lines=np.array(numbers), header_line=header_index + 1, separator=separator,
                 decimal=decimal, skipped=sum(1 for line in lines[:header_index] if line.strip()),
                 source=str(shown))


def header_names(header, shown, header_line, columns=None):
    """Column names and units of a header; refuses empty and repeated names.

    `columns` names each column in messages (default: its number)."""
    names, units = [], []
    for i, cell in enumerate(header):
        name, unit = split_unit(cell)
        if not name or name.lower() in [x.lower() for x in names]:
            column = columns[i] if columns else i + 1
            raise KinfitError(f"{at(shown, header_line)}: column {column} has an empty "
                              f"or repeated name {cell!r}")
        names.append(name)
        units.append(unit)
    return names, units


def _decimal(cells, lines, separator, shown):
    """The decimal mark of a table's numbers; refuses a mix of both."""
    if separator == ",":
        return "."
    comma = point = None
    for row, line in zip(cells, lines):
        for cell in row:
            if comma is None and _HAS_COMMA_DECIMAL.match(cell):
                comma = (line, cell)
            elif point is None and _HAS_POINT_DECIMAL.match(cell):
                point = (line, cell)
        if comma and point:
            raise KinfitError(f"{shown}: mixes decimal points (line {point[0]}: {point[1]!r}) "
                              f"and decimal commas (line {comma[0]}: {comma[1]!r}); use one "
                              f"decimal mark")
    return "," if comma else "."


def read_table(path, shown=None, anchor="time"):
    """Read the table in a data file (see the module notes).

    Parameters
    ----------
    path : str or os.PathLike
    shown : str, optional
        The file as named in messages (default: `path`).
    anchor : str
        The column that marks the header.

    Returns
    -------
    Table
    """
    shown = str(path) if shown is None else shown
    return table_from_text(decode(Path(path).read_bytes(), shown), shown, anchor)


def check_times(times, lines, shown, what=None, hint=""):
    """Refuse negative, repeated or decreasing times, naming the line.

    Parameters
    ----------
    times : ndarray [n]
    lines : ndarray [n] of int
    shown : str
        The file, as named in messages.
    what : str, optional
        Which trace, for the message ("run 'r1', A").
    hint : str
        Added to the message about a negative time.
    """
    about = f" ({what})" if what else ""
    if times.size and times.min() < 0:
        i = int(np.flatnonzero(times < 0)[0])
        raise KinfitError(f"{at(shown, lines[i])}: negative time {times[i]:g}{about}; "
                          f"times are measured from the start of the reaction{hint}")
    steps = np.diff(times)
    if (steps <= 0).any():
        i = int(np.flatnonzero(steps <= 0)[0]) + 1
        if steps[i - 1] == 0:
            also = f"{what}, also" if what else "also"
            raise KinfitError(f"{at(shown, lines[i])}: time {times[i]:g} is repeated "
                              f"({also} at {line_word(shown)} {lines[i - 1]})")
        trace = f"{what}: " if what else ""
        raise KinfitError(f"{at(shown, lines[i])}: time is not increasing ({trace}"
                          f"t={times[i]:g} after t={times[i - 1]:g})")


# ------------------------------------------------------------ places in files

class SheetPlace(str):
    """A worksheet as named in messages, ``"book.xlsx, sheet 'r1'"``: its lines are rows."""


def line_word(shown):
    """``"row"`` on a worksheet, else ``"line"``."""
    return "row" if isinstance(shown, SheetPlace) else "line"


def at(shown, line):
    """Where a line of a data file is: ``"data.csv, line 7"``, or
    ``"book.xlsx, sheet 'r1', row 7"`` on a worksheet (a :class:`SheetPlace`)."""
    return f"{shown}, {line_word(shown)} {line}"

