"""Data tables of measured traces: the long layout and each run's wide table.

* long: one table with columns ``run,time,species,value`` for all runs, and
  optionally ``sigma``. This is kinfit's own layout, read as plain CSV: a fast
  path hands clean files to pandas' numeric parser in one pass, and anything
  unusual goes through a careful reader that names the line of every problem.
  A column it does not know is refused with its name.
* wide: a run's table as instruments write them (a ``time`` column and one
  column per species or signal channel; an empty cell means "not measured
  then"), read through :mod:`kinfit.inputs.instrument`, which detects
  separators, decimal commas, metadata lines and units in headers. A column
  ``sigma_X`` holds the standard deviation of each reading of column ``X``.

Either layout may sit on a sheet of an .xlsx workbook instead
(:mod:`kinfit.inputs.workbook`; the sheet is named by ``sheet``).

**Each point's own σ.** A σ given with a reading is its standard deviation in
the units of the reading: the fit weights the point by 1/σ² and does not
rescale the standard errors, as with declared ``[noise]``, and the point's σ
takes the place of the ``[noise]`` model for that point (:func:`check_own_sigma`
says what applies where). A species' σ is given for all its readings or for
none (per file), and is positive and finite: anything else is refused with
the file, the line and the column.

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
from kinfit.inputs.instrument import (
    MAX_MAGNITUDE,
    at,
    check_times,
    line_word,
    read_table,
    split_unit,
)
from kinfit.inputs.signals import table_times
from kinfit.inputs.sources import decode
from kinfit.inputs.workbook import is_workbook, read_sheet

__all__ = ["Trace", "LONG_COLUMNS", "LONG_OPTIONAL", "SIGMA_PREFIX", "NEGATIVE_NOISE",
           "read_long", "read_wide", "fast_long", "careful_long", "read_csv", "numbers",
           "warn_negative", "check_own_sigma"]

LONG_COLUMNS = ("run", "time", "species", "value")
LONG_OPTIONAL = ("sigma",)
SIGMA_PREFIX = "sigma_"  # wide layout: sigma_A holds the σ of each reading of column A
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
    sigma : ndarray [n] or None
        Each point's own standard deviation (a σ column), in the units of
        `values`; ``None`` when the file gives none.
    """

    species: str
    times: np.ndarray
    values: np.ndarray
    lines: np.ndarray = field(repr=False)
    sigma: np.ndarray | None = field(default=None, repr=False)



def warn_negative(trace, shown):
    """Warn (once per trace) about readings clearly below zero."""
    scale = float(np.max(np.abs(trace.values))) if trace.values.size else 0.0
    bad = np.flatnonzero(trace.values < -NEGATIVE_NOISE * scale)
    if bad.size:
        i = int(bad[0])
        warnings.warn(f"{at(shown, trace.lines[i])}: {trace.species} = {trace.values[i]:g} is "
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
            raise KinfitError(f"{at(shown, lines[i])}: {label} is {text!r}; expected a "
                              f"number (leave the cell empty in the wide layout if nothing "
                              f"was measured)")
        raise KinfitError(f"{at(shown, lines[i])}: {label} {text!r} is not a number"
                          + (" (is the header repeated here?)" if text.lower() == label else ""))
    inf = np.isinf(values)
    if inf.any():
        i = int(np.flatnonzero(inf)[0])
        raise KinfitError(f"{at(shown, lines[i])}: {label} {stripped.iloc[i]!r} is not a "
                          f"finite number")
    huge = np.abs(np.where(blank, 0.0, values)) > MAX_MAGNITUDE
    if huge.any():
        i = int(np.flatnonzero(huge)[0])
        raise KinfitError(f"{at(shown, lines[i])}: {label} {values[i]:g} is implausibly large "
                          f"(beyond ±{MAX_MAGNITUDE:g}); is a unit or an exponent wrong?")
    if blank.any() and not allow_blank:
        i = int(np.flatnonzero(blank)[0])
        raise KinfitError(f"{at(shown, lines[i])}: {label} is missing")
    return values, blank


def fast_long(path):
    """The long table read by pandas' numeric parser, or None when anything is unusual.

    Clean files (no blank lines, no quotes, numbers everywhere they belong) are
    read in one pass; anything else goes through the careful reader, which
    finds the exact line of every problem.

    Returns
    -------
    (runs, times, species, values, sigma, lines) or None
        As :func:`careful_long`.
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
    if len(lower) != len(header) or set(lower) - set(LONG_COLUMNS + LONG_OPTIONAL) \
            or any(c not in lower for c in LONG_COLUMNS):
        return None
    numeric = [c for c in ("time", "value", "sigma") if c in lower]
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            frame = pd.read_csv(io.StringIO(text),
                                dtype={lower["run"]: str, lower["species"]: str,
                                       **{lower[c]: float for c in numeric}},
                                na_filter=False, skipinitialspace=True, index_col=False)
    except (ValueError, pd.errors.ParserError, pd.errors.ParserWarning):
        return None
    columns = {c: frame[lower[c]].to_numpy(dtype=float) for c in numeric}
    if not len(frame) or not all(np.isfinite(v).all() and np.abs(v).max() <= MAX_MAGNITUDE
                                 for v in columns.values()):
        return None
    sigma = columns.get("sigma")
    if sigma is not None and (sigma <= 0).any():
        return None
    runs = frame[lower["run"]].str.strip().to_numpy()
    species = frame[lower["species"]].str.strip().to_numpy()
    if (runs == "").any() or (species == "").any():
        return None
    return (runs, columns["time"], species, columns["value"], sigma,
            np.arange(2, len(frame) + 2))


def read_long(path, shown, listed, own_file, starts=None, sheet=None):
    """Traces of every run in the long table (CSV, or a sheet of a workbook).

    Parameters
    ----------
    path : str or os.PathLike
    shown : str
        The file as named in messages.
    listed : set of str
        The runs of the experiment file.
    own_file : set of str
        Runs with a data file of their own (their rows here are refused).
    starts : dict of str to float, optional
        Each run's start: rows before it are left out.
    sheet : str, optional
        The sheet, for a workbook.

    Returns
    -------
    dict of str to list of Trace
    """
    if is_workbook(path):
        runs, times, species, values, sigma, lines, shown = _sheet_long(path, shown, sheet)
    else:
        _no_sheet(sheet, shown)
        fast = fast_long(path)
        runs, times, species, values, sigma, lines = (
            fast if fast is not None else careful_long(path, shown))
    out = {}
    for run in dict.fromkeys(runs):
        rows = np.flatnonzero(runs == run)
        if run not in listed:
            raise KinfitError(f"{at(shown, lines[rows[0]])}: run {run!r} is not listed in "
                              f"the experiment file; add a [[runs]] entry for it or remove "
                              f"its rows")
        if run in own_file:
            raise KinfitError(f"{at(shown, lines[rows[0]])}: run {run!r} has its own data "
                              f"file too; give each run's data once")
        traces = []
        start = (starts or {}).get(run)
        if start is not None:
            rows = rows[times[rows] >= start]
        for sp in dict.fromkeys(species[rows]):
            sel = rows[species[rows] == sp]
            check_times(times[sel], lines[sel], shown, f"run {run!r}, {sp}")
            own = None if sigma is None or np.isnan(sigma[sel]).all() else sigma[sel]
            traces.append(Trace(sp, times[sel], values[sel], lines[sel], own))
            warn_negative(traces[-1], shown)
        out[run] = traces
    return out


def careful_long(path, shown):
    """Read the long table cell by cell, naming the line of any problem.

    Returns
    -------
    runs, species : ndarray [n] of str
    times, values : ndarray [n]
    sigma : ndarray [n] or None
        Each reading's σ (NaN for a species given none); ``None`` without a
        sigma column.
    lines : ndarray [n] of int
    """
    frame = read_csv(path, shown)
    check_long_header(list(frame.columns), shown, 1)
    return _long_columns(frame, np.arange(2, len(frame) + 2), shown)


def _sheet_long(path, shown, sheet):
    """The long table on a sheet: as :func:`careful_long`, and the sheet as shown."""
    import pandas as pd

    table = read_sheet(path, shown, sheet, anchor=None, text_columns=("run", "species"),
                       check_header=check_long_header)
    frame = pd.DataFrame({name: table.text(i) for i, name in enumerate(table.names)})
    return (*_long_columns(frame, table.lines, table.source), table.source)


def check_long_header(header, shown, line):
    """Refuse a long table's unknown, missing or unit-carrying columns."""
    known = LONG_COLUMNS + LONG_OPTIONAL
    for cell in header:
        name, unit = split_unit(cell)
        if unit is not None and name.lower() in known:
            raise KinfitError(f"{at(shown, line)}: column {cell!r} carries a unit; the long "
                              f"layout's times, values and σ are in the experiment's [units] "
                              f"(name the column {name.lower()!r} and declare its unit there)")
    unknown = [c for c in header if c.lower() not in known]
    lower = [c.lower() for c in header]
    missing = [c for c in LONG_COLUMNS if c not in lower]
    if missing:
        also = f"; unknown: {', '.join(map(repr, unknown))}" if unknown else ""
        raise KinfitError(f"{at(shown, line)}: missing column(s) {', '.join(missing)}; the long "
                          f"layout needs run,time,species,value (found: {', '.join(header)}"
                          f"{also})")
    if unknown:
        raise KinfitError(f"{at(shown, line)}: unknown column {unknown[0]!r}; the long layout "
                          f"has the columns run,time,species,value and optionally sigma (each "
                          f"reading's standard deviation)")


def _long_columns(frame, lines, shown):
    """The long table's columns from a table of text (header checked)."""
    lower = {c.lower(): c for c in frame.columns}
    names = [c for c in LONG_COLUMNS + LONG_OPTIONAL if c in lower]
    frame = frame[[lower[c] for c in names]]
    frame.columns = names
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
            raise KinfitError(f"{at(shown, lines[empty[0]])}: the {label} is missing")
    sigma = None
    if "sigma" in frame:
        sigma, blank = numbers(frame["sigma"], lines, shown, "sigma", allow_blank=True)
        _check_sigma(sigma, blank, lines, shown, "sigma")
        for sp in dict.fromkeys(species):
            mine = np.flatnonzero(species == sp)
            if blank[mine].any() and not blank[mine].all():
                empty, given = mine[blank[mine]][0], mine[~blank[mine]][0]
                raise KinfitError(
                    f"{at(shown, lines[empty])}: sigma is empty for {sp}, but "
                    f"{line_word(shown)} {lines[given]} gives one; give every {sp} reading its σ, or none (then "
                    f"[noise] applies to {sp})")
        sigma = np.where(blank, np.nan, sigma)
    return runs, times, species, values, sigma, lines


def _check_sigma(sigma, blank, lines, shown, label):
    """Refuse a σ at or below zero (text, NaN and infinity are refused by `numbers`)."""
    bad = np.flatnonzero(~blank & ~(sigma > 0))
    if bad.size:
        i = int(bad[0])
        raise KinfitError(f"{at(shown, lines[i])}: {label} {sigma[i]:g} is not positive; a "
                          f"standard deviation is above zero")


def _no_sheet(sheet, shown):
    if sheet is not None:
        raise KinfitError(f"{shown}: a sheet ({sheet!r}) is named, but the file is not an "
                          f".xlsx workbook; give sheet only with a workbook")


def read_wide(path, shown, units, channels=(), run=None, start=None, sheet=None):
    """A run's wide table (see :mod:`kinfit.inputs.instrument`): a time column and one
    column per species or signal channel; an empty cell means not measured. A column
    ``sigma_X`` holds the σ of each reading of column ``X``, in X's unit.

    `sheet` names the sheet of a workbook (:mod:`kinfit.inputs.workbook`)."""
    from kinfit.core.units import UnitError, check_unit, conversion_factor

    if is_workbook(path):
        table = read_sheet(path, shown, sheet)
    else:
        _no_sheet(sheet, shown)
        table = read_table(path, shown)
    shown = table.source
    rows, times = table_times(table, units.time, run, start)
    t_col, run_col = table.index("time"), table.index("run")
    columns = [c for c in range(len(table.names)) if c not in (t_col, run_col)]
    sigma_of = _sigma_columns(table, columns)
    columns = [c for c in columns if c not in sigma_of.values()]
    if not columns:
        raise KinfitError(f"{at(shown, table.header_line)}: only a time column; add one "
                          f"column per measured species")
    traces = []
    lines = table.lines[rows]
    for c in columns:
        name, unit = table.names[c], table.units[c]
        values, blank = table.numbers(c, rows=rows, allow_blank=True)
        if unit and name not in channels:
            loc = f"{at(shown, table.header_line)} (column {name!r})"
            check_unit(unit, "concentration", loc)
            try:
                values = values * conversion_factor(unit, units.concentration)
            except UnitError:   # molar and mass concentrations do not convert
                raise KinfitError(f"{loc}: {unit} cannot be converted to the experiment's "
                                  f"{units.concentration}") from None
        sigma = None
        if name in sigma_of:
            sigma = _wide_sigma(table, sigma_of[name], c, rows, blank, name in channels, units)
        keep = ~blank
        if keep.any():
            traces.append(Trace(name, times[keep], values[keep], lines[keep],
                                None if sigma is None else sigma[keep]))
            warn_negative(traces[-1], shown)
    return traces


def _sigma_columns(table, columns):
    """{name of a value column: index of its sigma_ column}; refuses a σ column
    that names no column of the table."""
    shown = table.source
    out = {}
    for c in columns:
        name = table.names[c]
        if name.lower() == SIGMA_PREFIX.rstrip("_"):
            raise KinfitError(f"{at(shown, table.header_line)}: column {name!r} does not say "
                              f"whose σ it holds; name it after its column, like "
                              f"{SIGMA_PREFIX}A for column A")
        if not name.lower().startswith(SIGMA_PREFIX):
            continue
        target = name[len(SIGMA_PREFIX):]
        found = [i for i in columns if table.names[i] == target]
        if not found:
            others = ", ".join(table.names[i] for i in columns
                               if not table.names[i].lower().startswith(SIGMA_PREFIX))
            raise KinfitError(f"{at(shown, table.header_line)}: column {name!r} holds the σ "
                              f"of a column {target!r}, but the table has none (its columns: "
                              f"{others}); name a σ column {SIGMA_PREFIX}X after its column X")
        out[target] = c
    return out


def _wide_sigma(table, s_col, v_col, rows, blank, channel, units):
    """Each reading's σ from a wide table's sigma_ column, in the values' units [n_rows].

    Refuses a σ without a reading or a reading without its σ, a σ at or below
    zero, and a unit that cannot be placed."""
    from kinfit.core.units import UnitError, check_unit, conversion_factor

    shown, label = table.source, table.names[s_col]
    sigma, s_blank = table.numbers(s_col, rows=rows, allow_blank=True)
    lines = table.lines[rows]
    differ = np.flatnonzero(s_blank != blank)
    if differ.size:
        i = int(differ[0])
        what = (f"{label} is empty but {table.names[v_col]} has a reading" if s_blank[i] else
                f"{label} is given but {table.names[v_col]} is empty")
        raise KinfitError(f"{at(shown, lines[i])}: {what}; give every {table.names[v_col]} "
                          f"reading its σ, or leave the {label} column out (then [noise] "
                          f"applies)")
    _check_sigma(sigma, s_blank, lines, shown, label)
    s_unit, v_unit = table.units[s_col], table.units[v_col]
    loc = f"{at(shown, table.header_line)} (column {label!r})"
    if s_unit is None:
        if v_unit is not None:
            raise KinfitError(f"{loc}: has no unit but {table.names[v_col]} is in {v_unit}; "
                              f"write it in the header, like '{label} ({v_unit})'")
        return sigma
    if channel:
        if s_unit != v_unit:
            raise KinfitError(f"{loc}: a signal's σ is in the signal's unit "
                              f"({v_unit or 'none given'}), not {s_unit}")
        return sigma
    check_unit(s_unit, "concentration", loc)
    try:
        return sigma * conversion_factor(s_unit, units.concentration)
    except UnitError:
        raise KinfitError(f"{loc}: {s_unit} cannot be converted to the experiment's "
                          f"{units.concentration}") from None


def check_own_sigma(runs, noise_keys, source):
    """What σ applies where, when some traces carry their own (σ columns).

    A point with its own σ keeps it; the other points take the declared
    ``[noise]``. Without ``[noise]``, either every trace has its own σ or none
    has (one unknown noise level cannot be estimated for some points only).

    Parameters
    ----------
    runs : sequence of Run
    noise_keys : collection of str or None
        The entries of ``[noise]`` (``"default"`` included), ``None`` without it.
    source : str
        The experiment file.

    Raises
    ------
    KinfitError
        For traces without σ beside traces with one and no ``[noise]``.

    Warns
    -----
    KinfitWarning
        For a ``[noise]`` entry that no point uses because σ columns cover its
        species (or, for ``default``, every trace).
    """
    pairs = [(run, t) for run in runs for t in run.traces]
    own = [(run, t) for run, t in pairs if t.sigma is not None]
    if not own:
        return
    without = [(run, t) for run, t in pairs if t.sigma is None]
    if noise_keys is None:
        if without:
            run, t = without[0]
            first = own[0]
            raise KinfitError(
                f"{run.source}: {t.species} in run {run.name!r} has no σ column, but "
                f"{first[1].species} in run {first[0].name!r} has one; give every trace its "
                f"σ, or declare [noise] for those without (a point's own σ keeps precedence)")
        return
    for key in noise_keys:
        covered = (not without if key == "default" else
                   any(t.species == key for _, t in own)
                   and not any(t.species == key for _, t in without))
        if covered:
            whose = "every trace" if key == "default" else f"every {key} trace"
            warnings.warn(f"{source}: noise.{key} is not used: {whose} has its own σ column, "
                          f"which takes precedence over [noise]", KinfitWarning, stacklevel=3)
