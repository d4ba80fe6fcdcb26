"""Data tables of measured traces: the long layout and each run's wide table.

* long: one CSV with columns ``run,time,species,value`` for all runs. This is
  kinfit's own layout, read as plain CSV: a fast path hands clean files to
  pandas' numeric parser in one pass, and anything unusual goes through a
  careful reader that names the line of every problem.
* wide: a run's table as instruments write it (a ``time`` column and one
  column per species or signal channel; an empty cell means "not measured
  then"), read through :mod:`kinfit.inputs.instrument`, which detects
  separators, decimal commas, metadata lines and units in headers.

Every reader returns :class:`Trace` objects in the experiment's units.
"""

from __future__ import annotations

import csv
import io
import re
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from kinfit.core.errors import KinfitError, KinfitWarning
from kinfit.inputs.instrument import MAX_MAGNITUDE, check_times, read_table
from kinfit.inputs.signals import table_times
from kinfit.inputs.sources import decode

__all__ = ["Trace", "LONG_COLUMNS", "NEGATIVE_NOISE", "read_long", "read_wide", "fast_long",
           "careful_long", "read_csv", "numbers", "warn_negative"]

LONG_COLUMNS = ("run", "time", "species", "value")
NEGATIVE_NOISE = 0.05   # a reading below -5 % of its trace's largest is not noise around 0


@dataclass(frozen=True)
class Trace:
    """Measurements of one species in one run.

    Attributes
    ----------
    species : str
    times : ndarray [n]
        Strictly increasing, in the experiment's time unit.
    values : ndarray [n]
        In the experiment's concentration unit.
    lines : ndarray [n] of int
        Line of each point in its file (for messages).
    """

    species: str
    times: np.ndarray
    values: np.ndarray
    lines: np.ndarray = field(repr=False)



def warn_negative(trace, shown):
    """Warn (once per trace) about readings clearly below zero."""
    scale = float(np.max(np.abs(trace.values))) if trace.values.size else 0.0
    bad = np.flatnonzero(trace.values < -NEGATIVE_NOISE * scale)
    if bad.size:
        i = int(bad[0])
        warnings.warn(f"{shown}, line {trace.lines[i]}: {trace.species} = {trace.values[i]:g} is "
                      f"negative beyond plausible noise around zero ({bad.size} reading(s) in "
                      f"this trace); check the sign, the baseline or the units",
                      KinfitWarning, stacklevel=3)


def read_csv(path, shown):
    """Read a CSV as strings; returns (DataFrame of str, first data line number)."""
    import pandas as pd

    text = decode(Path(path).read_bytes(), shown)
    if not text.strip():
        raise KinfitError(f"{shown}: the data file is empty")
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error", pd.errors.ParserWarning)
            frame = pd.read_csv(io.StringIO(text), dtype=str, keep_default_na=False,
                                skip_blank_lines=False, skipinitialspace=True, index_col=False)
    except pd.errors.ParserWarning:
        raise KinfitError(f"{_ragged_line(text, shown)}: more values than the header has "
                          f"columns") from None
    except pd.errors.ParserError as exc:
        msg = str(exc).strip()
        m = re.search(r"line (\d+)", msg)
        loc = f"{shown}, line {m.group(1)}" if m else shown
        detail = re.sub(r"^Error tokenizing data\. C error: ", "", msg)
        raise KinfitError(f"{loc}: not a CSV table: {detail}") from None
    except pd.errors.EmptyDataError:
        raise KinfitError(f"{shown}: the data file is empty") from None
    header = [c.strip() for c in next(csv.reader(io.StringIO(text)), [])]
    for i, name in enumerate(header):
        if not name or header.index(name) != i:
            raise KinfitError(f"{shown}, line 1: column {i + 1} has an empty or repeated "
                              f"name {name!r}")
    frame.columns = header
    return frame


def _ragged_line(text, shown):
    """Location of the first row with more fields than the header."""
    rows = csv.reader(io.StringIO(text))
    width = len(next(rows, []))
    for number, row in enumerate(rows, start=2):
        if len(row) > width:
            return f"{shown}, line {number}"
    return str(shown)


def numbers(column, lines, shown, label, allow_blank=False):
    """Convert a column of strings to floats, refusing text, NaN and infinity."""
    import pandas as pd

    stripped = column.fillna("").astype(str).str.strip()
    values = pd.to_numeric(stripped.where(stripped != "", "nan"), errors="coerce").to_numpy(
        dtype=float)
    blank = (stripped == "").to_numpy()
    bad = np.isnan(values) & ~blank
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        text = stripped.iloc[i]
        if text.lower() in ("nan", "na", "n/a", "null", "none"):
            raise KinfitError(f"{shown}, line {lines[i]}: {label} is {text!r}; expected a "
                              f"number (leave the cell empty in the wide layout if nothing "
                              f"was measured)")
        raise KinfitError(f"{shown}, line {lines[i]}: {label} {text!r} is not a number"
                          + (" (is the header repeated here?)" if text.lower() == label else ""))
    inf = np.isinf(values)
    if inf.any():
        i = int(np.flatnonzero(inf)[0])
        raise KinfitError(f"{shown}, line {lines[i]}: {label} {stripped.iloc[i]!r} is not a "
                          f"finite number")
    huge = np.abs(np.where(blank, 0.0, values)) > MAX_MAGNITUDE
    if huge.any():
        i = int(np.flatnonzero(huge)[0])
        raise KinfitError(f"{shown}, line {lines[i]}: {label} {values[i]:g} is implausibly large "
                          f"(beyond ±{MAX_MAGNITUDE:g}); is a unit or an exponent wrong?")
    if blank.any() and not allow_blank:
        i = int(np.flatnonzero(blank)[0])
        raise KinfitError(f"{shown}, line {lines[i]}: {label} is missing")
    return values, blank


def fast_long(path):
    """The long table read by pandas' numeric parser, or None when anything is unusual.

    Clean files (no blank lines, no quotes, numbers everywhere they belong) are
    read in one pass; anything else goes through the careful reader, which
    finds the exact line of every problem.
    """
    import pandas as pd

    try:
        text = Path(path).read_bytes().decode("utf-8")
    except UnicodeDecodeError:
        return None
    if "\r" in text or '"' in text or "\n\n" in text.strip("\n") or text.startswith("\ufeff"):
        return None
    header = [c.strip() for c in text.split("\n", 1)[0].split(",")]
    body = text.strip("\n")
    if body.count(",") != (body.count("\n") + 1) * (len(header) - 1):
        return None                   # some row has more or fewer fields than the header
    lower = {c.lower(): c for c in header}
    if len(set(header)) != len(header) or any(c not in lower for c in LONG_COLUMNS):
        return None
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            frame = pd.read_csv(io.StringIO(text), usecols=[lower[c] for c in LONG_COLUMNS],
                                dtype={lower["run"]: str, lower["species"]: str,
                                       lower["time"]: float, lower["value"]: float},
                                na_filter=False, skipinitialspace=True, index_col=False)
    except (ValueError, pd.errors.ParserError, pd.errors.ParserWarning):
        return None
    times = frame[lower["time"]].to_numpy(dtype=float)
    values = frame[lower["value"]].to_numpy(dtype=float)
    if not (np.isfinite(times).all() and np.isfinite(values).all()) or not len(frame):
        return None
    if np.abs(times).max() > MAX_MAGNITUDE or np.abs(values).max() > MAX_MAGNITUDE:
        return None
    runs = frame[lower["run"]].str.strip().to_numpy()
    species = frame[lower["species"]].str.strip().to_numpy()
    if (runs == "").any() or (species == "").any():
        return None
    return runs, times, species, values, np.arange(2, len(frame) + 2)


def read_long(path, shown, listed, own_file, starts=None):
    fast = fast_long(path)
    if fast is not None:
        runs, times, species, values, lines = fast
    else:
        runs, times, species, values, lines = careful_long(path, shown)
    out = {}
    for run in dict.fromkeys(runs):
        rows = np.flatnonzero(runs == run)
        if run not in listed:
            raise KinfitError(f"{shown}, line {lines[rows[0]]}: run {run!r} is not listed in "
                              f"the experiment file; add a [[runs]] entry for it or remove "
                              f"its rows")
        if run in own_file:
            raise KinfitError(f"{shown}, line {lines[rows[0]]}: run {run!r} has its own data "
                              f"file too; give each run's data once")
        traces = []
        start = (starts or {}).get(run)
        if start is not None:
            rows = rows[times[rows] >= start]
        for sp in dict.fromkeys(species[rows]):
            sel = rows[species[rows] == sp]
            check_times(times[sel], lines[sel], shown, f"run {run!r}, {sp}")
            traces.append(Trace(sp, times[sel], values[sel], lines[sel]))
            warn_negative(traces[-1], shown)
        out[run] = traces
    return out


def careful_long(path, shown):
    """Read the long table cell by cell, naming the line of any problem."""
    frame = read_csv(path, shown)
    lower = {c.lower(): c for c in frame.columns}
    missing = [c for c in LONG_COLUMNS if c not in lower]
    if missing:
        raise KinfitError(f"{shown}, line 1: missing column(s) {', '.join(missing)}; the long "
                          f"layout needs run,time,species,value (found: "
                          f"{', '.join(frame.columns)})")
    frame = frame[[lower[c] for c in LONG_COLUMNS]]
    frame.columns = list(LONG_COLUMNS)
    lines = np.arange(2, len(frame) + 2)
    blank_row = (frame.fillna("").apply(lambda c: c.astype(str).str.strip()) == "").all(axis=1)
    frame, lines = frame[~blank_row.to_numpy()], lines[~blank_row.to_numpy()]
    if not len(frame):
        raise KinfitError(f"{shown}: the data file has a header but no data rows")
    runs = frame["run"].astype(str).str.strip().to_numpy()
    species = frame["species"].astype(str).str.strip().to_numpy()
    times, _ = numbers(frame["time"], lines, shown, "time")
    values, _ = numbers(frame["value"], lines, shown, "value")
    for label, col in (("run", runs), ("species", species)):
        empty = np.flatnonzero(col == "")
        if empty.size:
            raise KinfitError(f"{shown}, line {lines[empty[0]]}: the {label} is missing")

    return runs, times, species, values, lines


def read_wide(path, shown, units, channels=(), run=None, start=None):
    """A run's wide table (see :mod:`kinfit.inputs.instrument`): a time column and one
    column per species or signal channel; an empty cell means not measured."""
    from kinfit.core.units import UnitError, check_unit, conversion_factor

    table = read_table(path, shown)
    rows, times = table_times(table, units.time, run, start)
    t_col, run_col = table.index("time"), table.index("run")
    columns = [c for c in range(len(table.names)) if c not in (t_col, run_col)]
    if not columns:
        raise KinfitError(f"{shown}, line {table.header_line}: only a time column; add one "
                          f"column per measured species")
    traces = []
    lines = table.lines[rows]
    for c in columns:
        name, unit = table.names[c], table.units[c]
        values, blank = table.numbers(c, rows=rows, allow_blank=True)
        if unit and name not in channels:
            loc = f"{shown}, line {table.header_line} (column {name!r})"
            check_unit(unit, "concentration", loc)
            try:
                values = values * conversion_factor(unit, units.concentration)
            except UnitError:   # molar and mass concentrations do not convert
                raise KinfitError(f"{loc}: {unit} cannot be converted to the experiment's "
                                  f"{units.concentration}") from None
        keep = ~blank
        if keep.any():
            traces.append(Trace(name, times[keep], values[keep], lines[keep]))
            warn_negative(traces[-1], shown)
    return traces
