"""Spectrometer signals declared in an experiment file: Beer–Lambert channels and spectra.

A measured column that is a signal rather than a concentration is declared
in the experiment's ``[signals]`` table. By the Beer–Lambert law its value is

    signal(t) = offset + drift·t + ℓ · Σ_X ε_X [X](t)

with ℓ the path length, ε_X the absorptivity of species X at that channel's
wavelength and [X] the model's concentration. Each ε is known (a number),
unknown and shared by every run (``"unknown"``) or unknown in each run
(``"per run"``); the offset is one per run (default), one shared, or none; a
linear drift in time may be added per run or shared. Full spectra (one
matrix per run: time down, wavelength across) are declared in
``[signals.spectra]`` with the species whose spectra are to be resolved.

This module reads those declarations and the spectrum files; the numerics
(variable projection, SVD) are in :mod:`kinfit.numerics.signal_model` and
:mod:`kinfit.numerics.svd`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from kinfit.core.errors import KinfitError, where
from kinfit.inputs.instrument import check_times, read_table
from kinfit.inputs.sources import find_line

__all__ = ["SignalSpec", "ChannelSpec", "SpectraSpec", "Spectrum", "parse_signals",
           "parse_path_length", "read_spectrum", "UNKNOWN", "PER_RUN", "BASELINES",
           "DEFAULT_PATH_CM"]

UNKNOWN = "unknown"
PER_RUN = "per run"
SHARED = "shared"
NONE = "none"
BASELINES = (PER_RUN, SHARED, NONE)
DEFAULT_PATH_CM = 1.0
_SIGNAL_KEYS = {"path_length", "offset", "drift", "nonnegative", "unit", "channels", "spectra"}
_SPECTRA_KEYS = {"absorbers", "components", "noise", "wavelength_unit"}


@dataclass(frozen=True)
class ChannelSpec:
    """One measured column that is a Beer–Lambert signal.

    Attributes
    ----------
    name : str
        The column's name in the data files.
    absorbers : dict of str to float or str
        Each absorbing species: its known ε (a number), ``"unknown"`` (one ε
        shared by every run) or ``"per run"``. Species not listed do not
        absorb at this channel.
    """

    name: str
    absorbers: dict


@dataclass(frozen=True)
class SpectraSpec:
    """Full-spectrum data: whose spectra are resolved and how the data are reduced.

    Attributes
    ----------
    absorbers : tuple of str
        Species whose spectra are unknown (shared by every run); every other
        species is taken as transparent.
    components : int or str
        ``"auto"``: fit the leading singular vectors that the SVD finds
        significant; a number: fit that many; ``"all"``: fit every wavelength.
    noise : float or None
        Standard deviation of one reading (absolute, in signal units), or
        ``None`` when unknown (estimated from the fit).
    wavelength_unit : str
        Label of the wavelengths in the header row.
    """

    absorbers: tuple
    components: str | int = "auto"
    noise: float | None = None
    wavelength_unit: str = "nm"


@dataclass(frozen=True)
class SignalSpec:
    """The ``[signals]`` table of an experiment.

    Attributes
    ----------
    channels : dict of str to ChannelSpec
    spectra : SpectraSpec or None
    path_length : float
        Default path length in cm (a run may give its own).
    offset, drift : str
        ``"per run"``, ``"shared"`` or ``"none"``.
    nonnegative : bool
        Whether unknown absorptivities and spectra are constrained to be
        non-negative (non-negative least squares).
    unit : str
        Unit of the signal ("" for absorbance).
    """

    channels: dict = field(default_factory=dict)
    spectra: SpectraSpec | None = None
    path_length: float = DEFAULT_PATH_CM
    offset: str = PER_RUN
    drift: str = NONE
    nonnegative: bool = False
    unit: str = ""


@dataclass(frozen=True)
class Spectrum:
    """One run's full-spectrum data.

    Attributes
    ----------
    times : ndarray [n_times]
        Increasing, in the experiment's time unit.
    wavelengths : ndarray [n_wavelengths]
    values : ndarray [n_times, n_wavelengths]
    lines : ndarray [n_times] of int
        Line of each row in its file.
    source : str
    """

    times: np.ndarray
    wavelengths: np.ndarray
    values: np.ndarray
    lines: np.ndarray = field(repr=False)
    source: str = ""

    @property
    def n_points(self):
        return self.values.size


def parse_path_length(value, loc):
    """A path length in cm from a number (cm) or text with a unit (``"2 mm"``)."""
    if isinstance(value, bool):
        raise KinfitError(f"{loc}: expected a path length like 1.0 (cm) or \"2 mm\"")
    if isinstance(value, (int, float)):
        cm = float(value)
    elif isinstance(value, str):
        from kinfit.core.units import UnitError, quantity_in

        try:
            cm = quantity_in(value, "cm")
        except UnitError:
            raise KinfitError(f"{loc}: cannot read the path length {value!r}; expected a "
                              f"length like \"1 cm\" or \"2 mm\"") from None
    else:
        raise KinfitError(f"{loc}: expected a path length like 1.0 (cm) or \"2 mm\"")
    if not math.isfinite(cm) or cm <= 0:
        raise KinfitError(f"{loc}: the path length must be positive, got {value!r}")
    return cm


def _choice(raw, key, loc, default):
    value = raw.get(key, default)
    if value not in BASELINES:
        raise KinfitError(f"{loc}: {key} must be \"per run\", \"shared\" or \"none\", got "
                          f"{value!r}")
    return value


def _table(raw, text, source, name, keys, expected):
    """Check that `raw` is a table with only `keys`; returns its location."""
    loc = where(source, find_line(text, None, name), name)
    if not isinstance(raw, dict):
        raise KinfitError(f"{loc}: expected {expected}")
    unknown = set(raw) - keys
    if unknown:
        key = sorted(unknown)[0]
        raise KinfitError(f"{where(source, find_line(text, key, name))}: unknown key {key!r} "
                          f"in [{name}]; it has {', '.join(sorted(keys))}")
    return loc


def parse_signals(raw, text, source):
    """Read an experiment's ``[signals]`` table.

    Parameters
    ----------
    raw : dict
        The table as parsed from TOML.
    text : str
        The experiment file's text (for line numbers).
    source : str
        The experiment file.

    Returns
    -------
    SignalSpec

    Raises
    ------
    KinfitError
        With the line and what was expected.
    """
    loc = _table(raw, text, source, "signals", _SIGNAL_KEYS, "a table [signals]")
    path = parse_path_length(raw.get("path_length", DEFAULT_PATH_CM), f"{loc} (path_length)")
    offset = _choice(raw, "offset", loc, PER_RUN)
    drift = _choice(raw, "drift", loc, NONE)
    nonneg = raw.get("nonnegative", False)
    if not isinstance(nonneg, bool):
        raise KinfitError(f"{loc}: nonnegative must be true or false")
    unit = raw.get("unit", "")
    if not isinstance(unit, str):
        raise KinfitError(f"{loc}: unit must be text, like \"\" for absorbance or \"counts\"")
    channels = _parse_channels(raw.get("channels", {}), text, source)
    spectra = None
    if "spectra" in raw:
        spectra = _parse_spectra(raw["spectra"], text, source)
    if not channels and spectra is None:
        raise KinfitError(f"{loc}: declares no signal; add [signals.channels] (single "
                          f"wavelengths) or [signals.spectra] (full spectra)")
    return SignalSpec(channels=channels, spectra=spectra, path_length=path, offset=offset,
                      drift=drift, nonnegative=nonneg, unit=unit.strip())


def _parse_channels(raw, text, source):
    loc = where(source, find_line(text, None, "signals.channels"), "signals.channels")
    if not isinstance(raw, dict):
        raise KinfitError(f"{loc}: expected a table of channels like A480 = {{ A = \"unknown\" }}")
    channels = {}
    for name, absorbers in raw.items():
        cloc = where(source, find_line(text, name, "signals.channels"),
                     f"signals.channels.{name}")
        if not isinstance(absorbers, dict) or not absorbers:
            raise KinfitError(f"{cloc}: expected the absorbing species with their "
                              f"absorptivity, like {name} = {{ A = 1250.0, B = \"unknown\" }}")
        parsed = {}
        for species, eps in absorbers.items():
            if isinstance(eps, str) and eps.strip() in (UNKNOWN, PER_RUN):
                parsed[species] = eps.strip()
            elif isinstance(eps, (int, float)) and not isinstance(eps, bool) \
                    and math.isfinite(eps):
                parsed[species] = float(eps)
            else:
                raise KinfitError(f"{cloc} ({species}): expected a known absorptivity (a "
                                  f"number), \"unknown\" (one value shared by every run) or "
                                  f"\"per run\", got {eps!r}")
        channels[name.strip()] = ChannelSpec(name.strip(), parsed)
    return channels


def _parse_spectra(raw, text, source):
    loc = _table(raw, text, source, "signals.spectra", _SPECTRA_KEYS,
                 "a table [signals.spectra] with absorbers = [...]")
    absorbers = raw.get("absorbers")
    if not isinstance(absorbers, list) or not absorbers or not all(
            isinstance(a, str) and a.strip() for a in absorbers):
        raise KinfitError(f"{loc}: absorbers must list the species whose spectra are "
                          f"resolved, like absorbers = [\"A\", \"B\"]")
    absorbers = tuple(a.strip() for a in absorbers)
    if len(set(absorbers)) != len(absorbers):
        raise KinfitError(f"{loc}: a species is listed twice in absorbers")
    components = raw.get("components", "auto")
    if isinstance(components, bool) or not (
            components in ("auto", "all") or (isinstance(components, int) and components >= 1)):
        raise KinfitError(f"{loc}: components must be \"auto\", \"all\" or a whole number of "
                          f"at least 1, got {components!r}")
    noise = raw.get("noise")
    if noise is not None and (isinstance(noise, bool) or not isinstance(noise, (int, float))
                              or not math.isfinite(noise) or noise <= 0):
        raise KinfitError(f"{loc}: noise must be a positive number (the standard deviation "
                          f"of one reading), got {noise!r}")
    unit = raw.get("wavelength_unit", "nm")
    if not isinstance(unit, str):
        raise KinfitError(f"{loc}: wavelength_unit must be text, like \"nm\"")
    return SpectraSpec(absorbers=absorbers, components=components,
                       noise=None if noise is None else float(noise), wavelength_unit=unit)


# ------------------------------------------------------------- spectrum files

def read_spectrum(path, shown, time_unit, run=None, start=None):
    """Read one run's spectra: first column time, header row wavelengths.

    Parameters
    ----------
    path : str or os.PathLike
    shown : str
        The file as named in messages.
    time_unit : str
        The experiment's time unit; a unit in the time header is converted.
    run : str, optional
        With a ``run`` column in the file, take only this run's rows.
    start : float, optional
        Drop rows before this time (experiment's time unit).

    Returns
    -------
    Spectrum

    Raises
    ------
    KinfitError
        For a header that is not time then wavelengths, a missing or
        non-numeric reading, or times that do not increase.
    """
    table = read_table(path, shown)
    rows, times = table_times(table, time_unit, run, start)
    t_col = table.index("time")
    run_col = table.index("run")
    wl_cols = [c for c in range(len(table.names)) if c not in (t_col, run_col)]
    if len(wl_cols) < 2:
        raise KinfitError(f"{shown}, line {table.header_line}: a spectrum needs a time column "
                          f"and at least two wavelength columns (found: "
                          f"{', '.join(table.names)})")
    wavelengths = []
    for c in wl_cols:
        cell = table.names[c]
        number = cell.lower().removesuffix("nm").strip()
        try:
            value = float(number.replace(",", ".") if table.decimal == "," else number)
        except ValueError:
            value = math.nan
        if not math.isfinite(value):
            raise KinfitError(f"{shown}, line {table.header_line}: column header {cell!r} is "
                              f"not a wavelength; a spectrum file has a time column, then one "
                              f"column per wavelength with the wavelength as its header")
        wavelengths.append(value)
    wavelengths = np.array(wavelengths)
    if np.any(np.diff(wavelengths) == 0):
        raise KinfitError(f"{shown}, line {table.header_line}: a wavelength is repeated")
    values = np.empty((rows.size, len(wl_cols)))
    for j, c in enumerate(wl_cols):
        values[:, j] = table.numbers(c, label=f"reading at {table.names[c]}", rows=rows)[0]
    return Spectrum(times=times, wavelengths=wavelengths, values=values,
                    lines=table.lines[rows], source=str(shown))


def table_times(table, time_unit, run=None, start=None):
    """Rows of `table` to use and their times in `time_unit`.

    Parameters
    ----------
    table : Table
    time_unit : str
    run : str, optional
        With a ``run`` column: only the rows of this run (an error if none).
    start : float, optional
        Rows before this time are dropped.

    Returns
    -------
    rows : ndarray of int
    times : ndarray [n_rows]
        Increasing (checked).
    """
    from kinfit.core.units import check_unit, conversion_factor

    shown = table.source
    t_col = table.index("time")
    rows = np.arange(table.n_rows)
    run_col = table.index("run")
    if run_col >= 0:
        if run is None:
            raise KinfitError(f"{shown}, line {table.header_line}: has a run column; name the "
                              f"file from each run that it holds")
        names = table.text(run_col)
        rows = np.flatnonzero(names == run)
        if not rows.size:
            found = ", ".join(dict.fromkeys(str(n) for n in names))
            raise KinfitError(f"{shown}: no rows of run {run!r} in its run column (found: "
                              f"{found})")
    times = table.numbers(t_col, label="time", rows=rows)[0]
    unit = table.units[t_col]
    if unit:
        check_unit(unit, "time", f"{shown}, line {table.header_line} (time column)")
        times = times * conversion_factor(unit, time_unit)
    if start is not None:
        keep = times >= start
        rows, times = rows[keep], times[keep]
        if not rows.size:
            raise KinfitError(f"{shown}: no rows at or after the run's start ({start:g} "
                              f"{time_unit})")
    check_times(times, table.lines[rows], shown, hint=" (give the run a start to leave out "
                "readings taken before it)")
    return rows, times
