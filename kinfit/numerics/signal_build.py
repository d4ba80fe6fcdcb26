"""Building a signal model: an experiment's signals joined to a mechanism.

This module owns :func:`build_signal_model`, which turns the ``[signals]``
of an experiment into the :class:`~kinfit.numerics.signal_model.Block` s of a
:class:`~kinfit.numerics.signal_model.SignalModel`: which concentrations the
model must give at which times, the linear unknowns of each channel
(absorptivities, offsets, drifts) and the measured vector the fit sees. The
declarations are checked against the mechanism here, where they meet it.

Full spectra are one block whose channels are the wavelengths. Unless
``components`` is "all", the block is reduced to the data projected on the
leading right singular vectors (:mod:`kinfit.numerics.svd`), with the full
block kept for resolving the spectra after the fit.
"""

from __future__ import annotations

import re
from dataclasses import replace

import numpy as np

from kinfit.core.errors import KinfitError
from kinfit.numerics.observation import Observation, build_observation
from kinfit.numerics.signal_model import (
    KIND_ABSORPTIVITY,
    KIND_DRIFT,
    KIND_OFFSET,
    Block,
    Column,
    SignalModel,
)
from kinfit.numerics.svd import significant_components
from kinfit.numerics.threads import one_blas_thread

__all__ = ["build_signal_model"]


def build_signal_model(mechanism, experiment, components=None):
    """Join an experiment's signals to a mechanism.

    Parameters
    ----------
    mechanism : Mechanism
    experiment : Experiment
        With ``experiment.signals`` set.
    components : int or str, optional
        Overrides ``[signals.spectra] components`` ("auto", "all" or a number).

    Returns
    -------
    observation : Observation
        The measured points: concentration and channel traces (run by run,
        trace by trace), then the spectra (or their leading components).
    points : Observation
        The concentration points the model is evaluated at (run by run).
    model : SignalModel

    Raises
    ------
    KinfitError
        For absorbers the model lacks, channel names that are species,
        spectra on different wavelength grids, or undeclared noise shared by
        concentrations and signals.
    """
    spec = experiment.signals
    species_index = {s: i for i, s in enumerate(mechanism.species)}
    n_runs = len(experiment.runs)
    _check_declarations(mechanism, experiment, species_index)
    measured = build_observation(mechanism, experiment)
    _check_noise(experiment, measured)
    conc_flat, conc_triples = _concentration_rows(measured, spec, species_index)
    pending = _channel_rows(experiment, measured)
    spectral = _spectral_rows(experiment, spec, measured.n_points)
    if spectral is not None:
        pending.append(spectral)
    needed = _needed(n_runs, conc_triples, pending, species_index)
    points, index = _points_for(needed, n_runs)
    blocks = _signal_blocks(pending, index, species_index, experiment)
    _check_coefficient_names(blocks, mechanism, experiment.source)
    conc_inner = np.array([index[t] for t in conc_triples], dtype=int)
    fit_blocks, observation, comps, notes = _reduce(blocks, measured, spec, components)
    model = SignalModel(blocks=tuple(fit_blocks), full_blocks=tuple(blocks), conc_flat=conc_flat,
                        conc_inner=conc_inner, n_points=observation.n_points,
                        components=comps, spec=spec, units=experiment.units,
                        run_names=tuple(r.name for r in experiment.runs), notes=tuple(notes))
    return observation, points, model


def _check_declarations(mechanism, experiment, species_index):
    """Channel names that are species, and absorbers the model lacks, are refused."""
    spec = experiment.signals
    src = experiment.source
    for name in spec.channels:
        if name in species_index:
            raise KinfitError(f"{src} (signals.channels.{name}): {name!r} is a species of the "
                              f"model '{mechanism.name}'; a signal channel needs its own name "
                              f"(like A480)")
    absorber_lists = [(f"signals.channels.{c.name}", list(c.absorbers))
                      for c in spec.channels.values()]
    if spec.spectra is not None:
        absorber_lists.append(("signals.spectra.absorbers", list(spec.spectra.absorbers)))
    for loc, names in absorber_lists:
        for s in names:
            if s not in species_index:
                raise KinfitError(f"{src} ({loc}): the model '{mechanism.name}' has no species "
                                  f"{s!r}; its species are {', '.join(mechanism.species)}")


def _concentration_rows(measured, spec, species_index):
    """Measured concentrations: their positions in the measured vector [n] and
    their (run, time, species) triples."""
    conc_flat, triples = [], []
    for r, name, sl in measured.traces:
        if name in spec.channels:
            continue
        times = measured.run_times[r][measured.time_index[sl]]
        s = species_index[name]
        for k, t in zip(range(sl.start, sl.stop), times):
            conc_flat.append(k)
            triples.append((r, float(t), s))
    return np.array(conc_flat, dtype=int), triples


def _channel_rows(experiment, measured):
    """The rows of each single-wavelength channel, one block's worth each."""
    spec = experiment.signals
    pending = []
    for c, chan in spec.channels.items():
        parts = [(r, sl) for r, name, sl in measured.traces if name == c]
        if not parts:
            raise KinfitError(f"{experiment.source} (signals.channels.{c}): no run measured "
                              f"the channel {c!r}; no data column has that name")
        rows_run = np.concatenate([np.full(sl.stop - sl.start, r) for r, sl in parts])
        flat = np.concatenate([np.arange(sl.start, sl.stop) for _, sl in parts])
        rows_time = np.concatenate([measured.run_times[r][measured.time_index[sl]]
                                    for r, sl in parts])
        absorbers = tuple(chan.absorbers)
        kinds = {s: (v if isinstance(v, str) else "known") for s, v in chan.absorbers.items()}
        known = np.array([[v if isinstance(v, float) else 0.0 for v in chan.absorbers.values()]])
        weight = np.ones(flat.size) if measured.sigma is None else 1.0 / measured.sigma[flat]
        runs_here = sorted(set(rows_run.tolist()))
        pending.append(dict(label=c, channels=(c,), absorbers=absorbers, kinds=kinds,
                            known=known, rows_run=rows_run, rows_time=rows_time, flat=flat[None],
                            values=measured.values[flat][None], weight=weight,
                            runs_here=runs_here))
    return pending


def _needed(n_runs, conc_triples, pending, species_index):
    """The (time, species) pairs the model must give in each run."""
    needed = [set() for _ in range(n_runs)]
    for r, t, s in conc_triples:
        needed[r].add((t, s))
    for p in pending:
        for r, t in zip(p["rows_run"], p["rows_time"]):
            for s in p["absorbers"]:
                needed[r].add((float(t), species_index[s]))
    return needed


def _signal_blocks(pending, index, species_index, experiment):
    """One :class:`Block` per pending set of rows, its design laid out."""
    spec = experiment.signals
    run_names = tuple(r.name for r in experiment.runs)
    paths = np.array([r.path_length if r.path_length is not None else spec.path_length
                      for r in experiment.runs])
    blocks = []
    for p in pending:
        abs_idx = [species_index[s] for s in p["absorbers"]]
        conc_index = np.array([[index[(r, float(t), s)] for s in abs_idx]
                               for r, t in zip(p["rows_run"], p["rows_time"])], dtype=int)
        columns = _columns(p["label"], p["absorbers"], spec, p["runs_here"], run_names,
                           p["kinds"])
        rows_path = paths[p["rows_run"]]
        blocks.append(Block(
            label=p["label"], channels=p["channels"], absorbers=p["absorbers"],
            columns=columns, rows_run=p["rows_run"], rows_time=p["rows_time"], path=rows_path,
            conc_index=conc_index, coef=_coef(columns, p["rows_run"], p["rows_time"], rows_path),
            feature=np.array([c.absorber if c.kind == KIND_ABSORPTIVITY else -1
                              for c in columns], dtype=int),
            known=p["known"], values=p["values"], row_weight=p["weight"], flat=p["flat"],
            nonneg=np.array([spec.nonnegative and c.kind == KIND_ABSORPTIVITY
                             for c in columns], dtype=bool),
            wavelengths=p.get("wavelengths")))
    return blocks


def _check_coefficient_names(blocks, mechanism, source):
    """The names kinfit gives single-channel coefficients must not be model parameters."""
    names = set(mechanism.parameters)
    for b in blocks:
        for col in b.columns:
            if b.wavelengths is None and col.name in names:
                raise KinfitError(f"{source}: kinfit names a signal coefficient {col.name!r}, "
                                  f"but the model has a parameter of that name; rename it")


def _check_noise(experiment, measured):
    """Spectra need files; one estimated noise level cannot span different units."""
    spec = experiment.signals
    has_spectra = any(r.spectrum is not None for r in experiment.runs)
    if spec.spectra is not None and not has_spectra:
        raise KinfitError(f"{experiment.source} (signals.spectra): no run gives a spectrum "
                          f"file; add spectrum = \"run1_spectra.csv\" to the runs")
    n_traces = len(measured.traces)
    declared = experiment.sigma_known
    if has_spectra and n_traces and (spec.spectra.noise is not None) != declared:
        raise KinfitError(
            f"{experiment.source}: noise is declared for "
            f"{'the traces' if declared else 'the spectra'} but not for "
            f"{'the spectra' if declared else 'the traces'}; declare both "
            f"([noise] for traces, noise in [signals.spectra]) or neither")
    if not declared and n_traces:
        signal = {name in spec.channels for _, name, _ in measured.traces}
        if len(signal) > 1 or (has_spectra and False in signal):
            raise KinfitError(
                f"{experiment.source}: concentrations and signals are measured in different "
                f"units, so they cannot share one noise level estimated from the fit; declare "
                f"[noise] for each measured column (and noise in [signals.spectra])")


def _spectral_rows(experiment, spec, offset):
    """The spectra of all runs as one block's rows (None without spectra)."""
    runs = [(r, run) for r, run in enumerate(experiment.runs) if run.spectrum is not None]
    if not runs:
        return None
    first = runs[0][1].spectrum
    for r, run in runs[1:]:
        wl = run.spectrum.wavelengths
        if wl.shape != first.wavelengths.shape or not np.allclose(wl, first.wavelengths,
                                                                  rtol=0, atol=1e-9):
            raise KinfitError(f"{run.spectrum.source}: the wavelengths differ from those of "
                              f"{first.source} ({wl.size} from {wl[0]:g} to {wl[-1]:g} against "
                              f"{first.wavelengths.size} from {first.wavelengths[0]:g} to "
                              f"{first.wavelengths[-1]:g}); every run's spectra need the same "
                              f"wavelengths")
    rows_run = np.concatenate([np.full(run.spectrum.times.size, r) for r, run in runs])
    rows_time = np.concatenate([run.spectrum.times for _, run in runs])
    values = np.concatenate([run.spectrum.values for _, run in runs], axis=0).T  # [n_w, rows]
    n_w, n_rows = values.shape
    flat = offset + np.arange(n_rows)[None, :] + n_rows * np.arange(n_w)[:, None]
    sigma = spec.spectra.noise
    absorbers = spec.spectra.absorbers
    return dict(label="spectra", channels=tuple(f"{w:g}" for w in first.wavelengths),
                absorbers=absorbers, kinds={s: "unknown" for s in absorbers},
                known=np.zeros((n_w, len(absorbers))), rows_run=rows_run, rows_time=rows_time,
                flat=flat, values=values,
                weight=np.full(n_rows, 1.0 if sigma is None else 1.0 / sigma),
                runs_here=sorted({r for r, _ in runs}), wavelengths=first.wavelengths)


def _reduce(blocks, measured, spec, components):
    """The blocks and measured observation the fit sees; SVD of the spectra.

    Returns
    -------
    blocks, observation, components (Components or None), notes (tuple of str)
    """
    spectral = [b for b in blocks if b.wavelengths is not None]
    if not spectral:
        return blocks, measured, None, []
    block = spectral[0]
    setting = spec.spectra.components if components is None else components
    data = block.values.T                                          # [rows, n_w]
    sigma = spec.spectra.noise
    with one_blas_thread():
        _, singular, vt = np.linalg.svd(data, full_matrices=False)
    comps = significant_components(data, sigma, singular_values=singular)
    notes = []
    n_abs = len(block.absorbers)
    if comps.n_significant < n_abs:
        notes.append(f"the SVD of the spectra finds {comps.n_significant} significant "
                     f"component(s) but the model has {n_abs} absorbing species; their spectra "
                     f"may not be separable from these data")
    if setting == "all":
        used = None
    else:
        used = comps.n_significant if setting == "auto" else int(setting)
        used = max(1, min(used, min(data.shape)))
        if used >= data.shape[1]:
            used = None
    comps = significant_components(data, sigma, used, singular)
    if used is None:
        values = np.concatenate([measured.values, block.values.ravel()])
        sigma_vec = None if measured.sigma is None and sigma is None else np.concatenate(
            [measured.sigma if measured.sigma is not None else np.empty(0),
             np.full(block.values.size, sigma)])
        return blocks, _with_points(measured, values, sigma_vec), comps, notes
    basis = vt[:used].T                                            # [n_w, k]
    reduced_values = (data @ basis).T                              # [k, rows]
    n_rows = data.shape[0]
    offset = measured.n_points
    flat = offset + np.arange(n_rows)[None, :] + n_rows * np.arange(used)[:, None]
    # every spectrum is unknown, so no known part to project; the reduced
    # coefficients B V_k are unconstrained (non-negativity applies to spectra)
    red = replace(block, channels=tuple(f"component {i + 1}" for i in range(used)),
                  known=np.zeros((used, n_abs)), values=reduced_values, flat=flat,
                  nonneg=np.zeros_like(block.nonneg), wavelengths=None, basis=basis)
    values = np.concatenate([measured.values, reduced_values.ravel()])
    sigma_vec = None if sigma is None else np.concatenate(
        [measured.sigma if measured.sigma is not None else np.empty(0),
         np.full(reduced_values.size, sigma)])
    out = [red if b is block else b for b in blocks]
    return out, _with_points(measured, values, sigma_vec), comps, notes


def _with_points(measured, values, sigma):
    """The measured observation with the spectral points appended."""
    extra = values.size - measured.n_points
    return replace(measured, values=values, sigma=sigma,
                   time_index=np.concatenate([measured.time_index, np.zeros(extra, int)]),
                   species_index=np.concatenate([measured.species_index,
                                                 np.full(extra, -1, dtype=int)]))


def _ident(text):
    """`text` as part of an identifier (every non-word character becomes ``_``)."""
    return re.sub(r"\W", "_", str(text), flags=re.ASCII)


def _points_for(needed, n_runs):
    """Evaluation points (run by run) from needed (run, time, species) triples.

    Returns
    -------
    observation : Observation
        Only run_times, run_slices, time_index and species_index matter.
    index : dict of (run, time, species) to int
    """
    run_times, run_slices, time_index, species_index = [], [], [], []
    index, start = {}, 0
    for r in range(n_runs):
        pairs = sorted(needed[r])
        times = np.array([t for t, _ in pairs], dtype=float)
        species = np.array([s for _, s in pairs], dtype=int)
        grid = np.unique(times)
        run_times.append(grid)
        time_index.append(np.searchsorted(grid, times))
        species_index.append(species)
        index.update({(r, t, s): start + i for i, (t, s) in enumerate(pairs)})
        run_slices.append(slice(start, start + len(pairs)))
        start += len(pairs)
    obs = Observation(run_times=tuple(run_times), run_slices=tuple(run_slices),
                      time_index=np.concatenate(time_index).astype(int),
                      species_index=np.concatenate(species_index).astype(int),
                      values=np.zeros(start), sigma=None, traces=())
    return obs, index


def _columns(channel, absorbers, spec, runs_here, run_names, kinds):
    """Linear unknowns of a block: unknown absorptivities, offsets, drifts."""
    cols = []
    label = _ident(channel)
    for a, species in enumerate(absorbers):
        kind = kinds[species]
        if kind == "unknown":
            cols.append(Column(KIND_ABSORPTIVITY, a, -1, f"eps_{species}_{label}"))
        elif kind == "per run":
            cols += [Column(KIND_ABSORPTIVITY, a, r, f"eps_{species}_{label}_"
                            f"{_ident(run_names[r])}") for r in runs_here]
    for kind, how in ((KIND_OFFSET, spec.offset), (KIND_DRIFT, spec.drift)):
        if how == "shared":
            cols.append(Column(kind, -1, -1, f"{kind}_{label}"))
        elif how == "per run":
            cols += [Column(kind, -1, r, f"{kind}_{label}_{_ident(run_names[r])}")
                     for r in runs_here]
    return tuple(cols)


def _coef(columns, rows_run, rows_time, path):
    """Block.coef [n_rows, n_columns]: ℓ for absorptivities, t for drifts, 1 for
    offsets, zero in the rows of other runs for per-run columns."""
    coef = np.zeros((rows_run.size, len(columns)))
    for j, col in enumerate(columns):
        mask = np.ones(rows_run.size) if col.run < 0 else (rows_run == col.run).astype(float)
        if col.kind == KIND_ABSORPTIVITY:
            mask = mask * path
        elif col.kind == KIND_DRIFT:
            mask = mask * rows_time
        coef[:, j] = mask
    return coef
