"""Experiments: runs, measured traces, initial conditions, units and noise.

An experiment file (TOML) names the units, the runs with their starting
concentrations (and temperatures), the measurement noise and where the data
are. Two data layouts are read (by :mod:`kinfit.inputs.tables`):

* long: one CSV with columns ``run,time,species,value`` (and optionally
  ``sigma``) for all runs (named by ``[data] file``);
* wide: one CSV per run with a ``time`` column and one column per species,
  and optionally ``sigma_X`` columns (named by the run's ``file``); an empty
  cell means "not measured then".
  Wide files are read as instruments write them (see
  :mod:`kinfit.inputs.instrument`: separators, decimal commas, metadata lines, a
  unit in the time header, a ``run`` column for several runs in one file).

Either may be a sheet of an .xlsx workbook, named by ``sheet`` (in ``[data]``,
or on the run). A point's own σ takes precedence over ``[noise]``.

Spectrometer signals (Beer–Lambert channels and full spectra) are declared
in a ``[signals]`` table, read by :mod:`kinfit.inputs.signals`; a run's ``spectrum``
names its matrix of spectra, ``path_length`` its cell and ``start`` the time
before which readings are left out.

Nothing is guessed: a run temperature needs ``[units] temperature`` (a bare
number is refused, never taken as kelvin; runs outside 150–700 K are warned
about), and a starting concentration is a number in ``[units] concentration``
or text with a unit (``"10 mM"``) converted through :mod:`kinfit.core.units`.
Every problem is reported with the file, the line and what was expected.
"""

from __future__ import annotations

import math
import re
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from kinfit.core.errors import KinfitError, KinfitWarning, where
from kinfit.core.units import Units, parse_units, read_quantity, to_kelvin
from kinfit.inputs.parameters import Parameter, Role
from kinfit.inputs.signals import parse_path_length, parse_signals, read_spectrum
from kinfit.inputs.sources import find_line, load_toml, resolve_file
from kinfit.inputs.tables import Trace, check_own_sigma, read_long, read_wide
from kinfit.inputs.temperature import PLAUSIBLE_KELVIN

if TYPE_CHECKING:
    from kinfit.inputs.signals import SignalSpec, Spectrum

__all__ = ["Run", "Noise", "Experiment", "load_experiment", "initial_name",
           "offset_name", "MIN_POINTS"]

MIN_POINTS = 3

_EXPERIMENT_KEYS = {"name", "description", "units", "data", "noise", "runs", "temperature",
                    "signals"}
_RUN_KEYS = {"name", "temperature", "initial", "file", "time_offset", "path_length", "start",
             "spectrum", "sheet"}


@dataclass(frozen=True)
class Run:
    """One run: starting conditions and the traces measured.

    Attributes
    ----------
    name : str
    traces : tuple of Trace
    initial : dict of str to float
        Known initial concentrations; species not listed start at zero.
    fitted_initial : dict of str to Parameter
        Initial concentrations fitted for this run, keyed by species.
    temperature : float or None
        In kelvin.
    time_offset : Parameter or None
        A fitted shift t0: the model is evaluated at t + t0 (mixing dead
        time), when declared.
    source : str
        The data file.
    path_length : float or None
        Path length of the run's cell in cm, for signals (``None``: the
        ``[signals]`` default).
    start : float or None
        Readings before this time were left out (data clock).
    spectrum : Spectrum or None
        The run's full spectra (time x wavelength), when given.
    """

    name: str
    traces: tuple[Trace, ...]
    initial: dict[str, float]
    fitted_initial: dict[str, Parameter] = field(default_factory=dict)
    temperature: float | None = None
    time_offset: Parameter | None = None
    source: str = ""
    path_length: float | None = None
    start: float | None = None
    spectrum: Spectrum | None = None

    @property
    def n_points(self):
        return sum(len(t.times) for t in self.traces) + (
            self.spectrum.n_points if self.spectrum is not None else 0)

    @property
    def t_max(self):
        ends = [float(t.times[-1]) for t in self.traces]
        if self.spectrum is not None:
            ends.append(float(self.spectrum.times[-1]))
        return max(ends)

    @property
    def species(self):
        return tuple(t.species for t in self.traces)

    def parameters(self):
        """The per-run parameters (fitted initial concentrations, time offset)."""
        out = list(self.fitted_initial.values())
        if self.time_offset is not None:
            out.append(self.time_offset)
        return out


@dataclass(frozen=True)
class Noise:
    """Declared measurement noise of one species: σ = sqrt(a² + (r·|y|)²).

    Attributes
    ----------
    absolute : float
        a, in concentration units.
    relative : float
        r, a fraction (0.02 for 2 %).
    """

    absolute: float = 0.0
    relative: float = 0.0

    def sigma(self, values):
        """Standard deviation of each measured value [n]."""
        return np.sqrt(self.absolute ** 2 + (self.relative * np.abs(values)) ** 2)


@dataclass(frozen=True)
class Experiment:
    """Runs of one reaction followed under different starting conditions.

    Attributes
    ----------
    name : str
    runs : tuple of Run
    units : Units
    noise : dict of str to Noise, or None
        Declared noise per species; ``None`` when not declared, in which case
        one unknown noise level shared by all points is estimated from the fit
        (ordinary least squares), unless every point has its own σ (a σ
        column, :attr:`Trace.sigma`, which takes precedence over `noise`).
    source : str
        The experiment file.
    signals : SignalSpec or None
        Beer–Lambert channels and spectra (see :mod:`kinfit.inputs.signals`).
    """

    name: str
    runs: tuple[Run, ...]
    units: Units = Units()
    noise: dict[str, Noise] | None = None
    source: str = "<experiment>"
    description: str = ""
    data_files: tuple[str, ...] = ()
    signals: SignalSpec | None = None

    @property
    def n_points(self):
        return sum(r.n_points for r in self.runs)

    @property
    def species(self):
        """Species measured in any run, in order of first appearance."""
        seen = []
        for run in self.runs:
            for s in run.species:
                if s not in seen:
                    seen.append(s)
        return tuple(seen)

    def sigma(self, trace):
        """σ of each point of `trace` [n]: its own (a σ column), else the declared
        noise; ``None`` if neither is known."""
        if trace.sigma is not None:
            return trace.sigma
        if self.noise is None:
            return None
        return self.noise[trace.species].sigma(trace.values)

    @property
    def sigma_known(self):
        """Whether every point has a σ, declared or its own."""
        return all(self.sigma(t) is not None for run in self.runs for t in run.traces)

    def run(self, name):
        for r in self.runs:
            if r.name == name:
                return r
        raise KinfitError(f"{self.source}: no run named {name!r}")


def initial_name(species, run):
    """Name of the fitted initial concentration of `species` in `run`: ``A_0_r1``.

    The ``_0_`` keeps the species apart from the subscript zero, so that
    species N2O5 in run d1 gives ``N2O5_0_d1``, never ``N2O50_d1``.
    """
    return f"{species}_0_{_identifier(run)}"


def offset_name(run):
    """Name of the fitted time offset of `run`: ``t0_r1``."""
    return f"t0_{_identifier(run)}"


def _identifier(text):
    return re.sub(r"\W", "_", text, flags=re.ASCII)


# ------------------------------------------------------------------- loading

def load_experiment(path):
    """Read an experiment file (TOML) and its data files.

    Parameters
    ----------
    path : str or os.PathLike

    Returns
    -------
    Experiment

    Raises
    ------
    KinfitError
        With the file, the line or field, and what was expected.
    """
    table, text = load_toml(path, "experiment file")
    path = Path(path)
    source = str(path)

    unknown = set(table) - _EXPERIMENT_KEYS
    if unknown:
        key = sorted(unknown)[0]
        raise KinfitError(f"{where(source, find_line(text, key))}: unknown key {key!r}; an "
                          f"experiment file has {', '.join(sorted(_EXPERIMENT_KEYS))}")
    units = parse_units(table.get("units", {}), source)
    name = table.get("name", path.stem)
    if not isinstance(name, str):
        raise KinfitError(f"{where(source, find_line(text, 'name'), 'name')}: expected text")

    raw_runs = table.get("runs")
    if not isinstance(raw_runs, list) or not raw_runs or not all(
            isinstance(r, dict) for r in raw_runs):
        raise KinfitError(f"{source}: no runs; list each run as\n  [[runs]]\n  name = \"r1\"\n"
                          f"  initial = {{ A = 0.1 }}")
    signals = parse_signals(table["signals"], text, source) if "signals" in table else None
    specs = [_parse_run(i, raw, text, source, units, table.get("temperature"))
             for i, raw in enumerate(raw_runs)]
    _check_run_names([s["name"] for s in specs], text, source)
    _warn_implausible_temperatures(specs, units, source)
    traces, spectra, files = _read_data(table, text, source, path.parent, specs, units,
                                        signals)
    runs = [_assemble_run(spec, traces.get(spec["name"], []), spectra.get(spec["name"]),
                          files) for spec in specs]

    experiment = Experiment(name=name, runs=tuple(runs), units=units, source=source,
                            description=str(table.get("description", "")),
                            data_files=tuple(files), signals=signals)
    noise = _parse_noise(table.get("noise"), text, source, experiment)
    return Experiment(**{**experiment.__dict__, "noise": noise})


def _check_run_names(names, text, source):
    """Run names are unique, also after dropping punctuation (per-run parameter names)."""
    for i, n in enumerate(names):
        if names.index(n) != i:
            raise KinfitError(f"{where(source, find_line(text, 'name', 'runs', i))}: run name "
                              f"{n!r} is used twice")
    ids = [_identifier(n) for n in names]
    for i, n in enumerate(ids):
        if ids.index(n) != i:
            raise KinfitError(f"{where(source, find_line(text, 'name', 'runs', i))}: run names "
                              f"{names[ids.index(n)]!r} and {names[i]!r} differ only in "
                              f"punctuation; kinfit names per-run parameters after runs, so "
                              f"make them differ in letters or digits")


def _read_data(table, text, source, folder, specs, units, signals):
    """Every run's traces and spectra from the long [data] file and the runs' own files.

    Returns (traces by run, spectra by run, data files read in order).
    """
    traces, spectra, files = {}, {}, []
    names = {s["name"] for s in specs}
    data = table.get("data")
    if data is not None:
        if not isinstance(data, dict) or set(data) - {"file", "sheet"} or "file" not in data \
                or not isinstance(data.get("sheet", ""), str):
            raise KinfitError(f"{where(source, find_line(text, None, 'data'))}: expected "
                              f"[data] with file = \"traces.csv\" (columns run,time,species,"
                              f"value and optionally sigma), and sheet = \"...\" for a "
                              f"workbook")
        data_path = resolve_file(data["file"], "data file", folder,
                                 where(source, find_line(text, "file", "data"), "data.file"))
        files.append(str(data_path))
        traces.update(read_long(data_path, data["file"], names,
                                {s["name"] for s in specs if s["file"]},
                                {s["name"]: s["start"] for s in specs}, data.get("sheet")))
    channels = set(signals.channels) if signals is not None else set()
    for spec in specs:
        if spec["file"]:
            run_path = resolve_file(spec["file"], "data file", folder, spec["where"])
            files.append(str(run_path))
            traces[spec["name"]] = read_wide(run_path, spec["file"], units, channels,
                                             spec["name"], spec["start"], spec["sheet"])
        if spec["spectrum"]:
            if signals is None or signals.spectra is None:
                raise KinfitError(f"{spec['where']}: run {spec['name']!r} gives a spectrum "
                                  f"but the experiment has no [signals.spectra] table saying "
                                  f"which species absorb")
            spec_path = resolve_file(spec["spectrum"], "spectrum file", folder, spec["where"])
            files.append(str(spec_path))
            spectra[spec["name"]] = read_spectrum(spec_path, spec["spectrum"], units.time,
                                                  spec["name"], spec["start"])
    return traces, spectra, files


def _assemble_run(spec, run_traces, spectrum, files):
    """A :class:`Run` from its parsed table and data, refused with too few points."""
    if not run_traces and spectrum is None:
        raise KinfitError(f"{spec['where']}: run {spec['name']!r} has no data; give it "
                          f"file = \"...\" (wide layout) or add its rows to the [data] file")
    n_points = sum(len(t.times) for t in run_traces) + (
        spectrum.n_points if spectrum is not None else 0)
    if n_points < MIN_POINTS:
        raise KinfitError(f"{spec['where']}: run {spec['name']!r} has {n_points} data "
                          f"point(s); at least {MIN_POINTS} are needed")
    return Run(name=spec["name"], traces=tuple(run_traces), initial=spec["initial"],
               fitted_initial=spec["fitted"], temperature=spec["temperature"],
               time_offset=spec["offset"], source=spec["source"] or (files[0] if files else ""),
               path_length=spec["path_length"], start=spec["start"], spectrum=spectrum)


def _parse_run(index, raw, text, source, units, default_temperature):
    loc = where(source, find_line(text, None, "runs", index), f"runs[{index + 1}]")
    unknown = set(raw) - _RUN_KEYS
    if unknown:
        key = sorted(unknown)[0]
        raise KinfitError(f"{where(source, find_line(text, key, 'runs', index))}: unknown key "
                          f"{key!r} in a run; a run has {', '.join(sorted(_RUN_KEYS))}")
    name = raw.get("name")
    if not isinstance(name, str) or not name.strip():
        raise KinfitError(f"{loc}: every run needs a name, like name = \"r1\"")
    name = name.strip()
    loc = where(source, find_line(text, "name", "runs", index), f"run {name!r}")

    temperature = _run_temperature(raw, index, name, text, source, units, default_temperature)
    initial, fitted = _initial(raw.get("initial", {}), index, name, text, source, units)

    offset = raw.get("time_offset")
    if offset is not None:
        if not isinstance(offset, dict):
            offset = {"value": offset, "vary": False}
        offset = _fitted(offset_name(name), offset, f"{loc} (time_offset)", Role.TIME_OFFSET)
        if not offset.vary and offset.value == 0:
            offset = None

    file = raw.get("file")
    if file is not None and not isinstance(file, str):
        raise KinfitError(f"{loc} (file): expected a file name")
    sheet = raw.get("sheet")
    if sheet is not None and (not isinstance(sheet, str) or file is None):
        raise KinfitError(f"{loc} (sheet): expected the name of a sheet of the run's file")
    spectrum = raw.get("spectrum")
    if spectrum is not None and not isinstance(spectrum, str):
        raise KinfitError(f"{loc} (spectrum): expected a file name")
    path_length = None
    if "path_length" in raw:
        path_length = parse_path_length(raw["path_length"], f"{loc} (path_length)")
    start = raw.get("start")
    if start is not None and (isinstance(start, bool) or not isinstance(start, (int, float))
                              or not math.isfinite(start)):
        raise KinfitError(f"{loc} (start): expected a time in {units.time}, got {start!r}")
    return dict(name=name, where=loc, temperature=temperature, initial=initial, fitted=fitted,
                offset=offset, file=file, sheet=sheet, source=file or spectrum, spectrum=spectrum,
                path_length=path_length, start=None if start is None else float(start))


def _run_temperature(raw, index, name, text, source, units, default):
    """The run's temperature in kelvin (its own or the file's default), or ``None``.

    A temperature is read only in the unit declared by ``[units] temperature``
    (``units.temperature`` is then set; ``None`` when not declared): a number
    with no declared unit is refused rather than taken as kelvin.
    """
    own = "temperature" in raw
    value = raw["temperature"] if own else default
    if value is None:
        return None
    line = find_line(text, "temperature", "runs", index) if own else find_line(text,
                                                                               "temperature")
    loc = where(source, line, f"run {name!r}" if own else "temperature")
    if isinstance(value, bool) or not isinstance(value, (int, float)) \
            or not math.isfinite(value):
        raise KinfitError(f"{loc}: temperature must be a number in "
                          f"{units.temperature or 'the unit of [units] temperature'}, "
                          f"got {value!r}")
    if units.temperature is None:
        raise KinfitError(f"{loc}: temperature = {value:g} has no unit; declare [units] "
                          f"temperature = \"degC\" (or \"K\") in the experiment file; kinfit "
                          f"does not assume kelvin")
    kelvin = to_kelvin(float(value), units.temperature)
    if kelvin <= 0:
        raise KinfitError(f"{loc}: temperature is at or below absolute zero "
                          f"({value:g} {units.temperature} = {kelvin:g} K)")
    return kelvin


def _warn_implausible_temperatures(specs, units, source):
    """One :class:`KinfitWarning` naming every run outside :data:`PLAUSIBLE_KELVIN`."""
    low, high = PLAUSIBLE_KELVIN
    odd = [s for s in specs if s["temperature"] is not None
           and not low <= s["temperature"] <= high]
    if not odd:
        return
    listed = ", ".join(f"{s['name']!r} at {s['temperature']:.2f} K" for s in odd[:3])
    if len(odd) > 3:
        kelvin = [s["temperature"] for s in odd]
        listed += f" and {len(odd) - 3} more ({min(kelvin):.2f}–{max(kelvin):.2f} K)"
    warnings.warn(f"{source}: run(s) {listed}: outside {low:g}–{high:g} K, unusual for "
                  f"reactions in solution; check [units] temperature (now "
                  f"{units.temperature!r})", KinfitWarning, stacklevel=3)


def _initial(raw, index, name, text, source, units):
    """The run's known and fitted starting concentrations, in the experiment's unit.

    A value is a number in ``[units] concentration``, text with a unit
    (``"10 mM"``, converted through :func:`kinfit.core.units.read_quantity`) or
    a table ``{ value = ..., vary = true, min = ..., max = ... }`` whose
    entries may be either.
    """
    line = find_line(text, "initial", "runs", index) or find_line(text, "name", "runs", index)
    if not isinstance(raw, dict):
        raise KinfitError(f"{where(source, line, f'run {name!r}')}: initial must be a table "
                          f"like initial = {{ A = 0.1, B = 0.2 }}")
    initial, fitted = {}, {}
    for species, value in raw.items():
        field_loc = where(source, line, f"run {name!r}, initial.{species}")
        if isinstance(value, dict):
            value = {key: read_quantity(v, "concentration", units.concentration,
                                        where(source, line,
                                              f"run {name!r}, initial.{species}.{key}"))
                     if key in ("value", "min", "max") and isinstance(v, str) else v
                     for key, v in value.items()}
            p = _fitted(initial_name(species, name), value, field_loc, Role.INITIAL, lower=0.0)
            if p.value < 0:
                raise KinfitError(f"{field_loc}: a concentration cannot be negative")
            if p.vary:
                fitted[species] = p
            else:
                initial[species] = p.value
            continue
        value = _concentration(value, field_loc, units)
        if value is None:
            raise KinfitError(f"{field_loc}: expected a concentration in "
                              f"{units.concentration} (0.1 or \"10 mM\") or a table "
                              f"{{ value = ..., vary = true }}, got {raw[species]!r}")
        if value < 0:
            raise KinfitError(f"{field_loc}: a concentration cannot be negative "
                              f"(got {raw[species]!r})")
        initial[species] = value
    return initial, fitted


def _concentration(value, loc, units):
    """A number as written, or text with a unit converted; ``None`` for anything else."""
    if isinstance(value, str):
        return read_quantity(value, "concentration", units.concentration, loc)
    if isinstance(value, bool) or not isinstance(value, (int, float)) \
            or not math.isfinite(value):
        return None
    return float(value)


def _fitted(pname, spec, loc, role, lower=-math.inf):
    """A fitted per-run :class:`Parameter` from ``{ value, vary, min, max }``."""
    unknown = set(spec) - {"value", "vary", "min", "max"}
    if unknown:
        raise KinfitError(f"{loc}: unknown key {sorted(unknown)[0]!r}; expected value, vary, "
                          f"min, max")
    out = {}
    for key, default in (("value", None), ("min", lower), ("max", math.inf)):
        v = spec.get(key, default)
        if v is None:
            raise KinfitError(f"{loc}: missing value, e.g. {{ value = 0.1, vary = true }}")
        if isinstance(v, bool) or not isinstance(v, (int, float)) or math.isnan(v):
            raise KinfitError(f"{loc}: {key} must be a number, got {v!r}")
        out[key] = float(v)
    vary = spec.get("vary", True)
    if not isinstance(vary, bool):
        raise KinfitError(f"{loc}: vary must be true or false")
    if not math.isfinite(out["value"]):
        raise KinfitError(f"{loc}: value must be finite")
    if out["min"] > out["max"]:
        raise KinfitError(f"{loc}: min ({out['min']:g}) is larger than max ({out['max']:g})")
    if not out["min"] <= out["value"] <= out["max"]:
        raise KinfitError(f"{loc}: the value {out['value']:g} is outside its bounds "
                          f"[{out['min']:g}, {out['max']:g}]")
    return Parameter(pname, out["value"], out["min"], out["max"], vary, role)


def _parse_noise(raw, text, source, experiment):
    if raw is None:
        check_own_sigma(experiment.runs, None, source)
        return None
    loc = where(source, find_line(text, None, "noise"), "noise")
    if not isinstance(raw, dict) or not raw:
        raise KinfitError(f"{loc}: expected entries like default = {{ absolute = 0.001, "
                          f"relative = 0.02 }}")
    noise = {}
    for key, spec in raw.items():
        kloc = where(source, find_line(text, key, "noise"), f"noise.{key}")
        if not isinstance(spec, dict) or not spec or set(spec) - {"absolute", "relative"}:
            raise KinfitError(f"{kloc}: expected {{ absolute = ..., relative = ... }} (either "
                              f"or both; absolute in {experiment.units.concentration}, "
                              f"relative as a fraction)")
        values = {}
        for part in ("absolute", "relative"):
            v = spec.get(part, 0.0)
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) \
                    or v < 0:
                raise KinfitError(f"{kloc}: {part} must be a non-negative number, got {v!r}")
            values[part] = float(v)
        if values["absolute"] == 0 and values["relative"] == 0:
            raise KinfitError(f"{kloc}: the noise cannot be zero")
        noise[key] = Noise(**values)
    check_own_sigma(experiment.runs, list(noise), source)
    default = noise.pop("default", None)
    out = {}
    for run in experiment.runs:
        for trace in (t for t in run.traces if t.sigma is None):   # own σ takes precedence
            spec = noise.get(trace.species, default)
            if spec is None:
                raise KinfitError(f"{loc}: no noise is declared for {trace.species!r}; add "
                                  f"{trace.species} = {{ absolute = ... }} or a default entry")
            sigma = spec.sigma(trace.values)
            bad = np.flatnonzero(sigma <= 0)
            if bad.size:
                raise KinfitError(
                    f"{run.source}, line {trace.lines[bad[0]]}: a reading of 0 with purely "
                    f"relative noise gives σ = 0; add an absolute part to noise."
                    f"{'default' if trace.species not in noise else trace.species}")
            out[trace.species] = spec
    return out


# ------------------------------------------------------------ table reading
