"""What each command does, as plain functions: loaded inputs in; result, files and text out.

The CLI parses its options, calls one of these, writes the returned
:class:`~kinfit.output.bundle.Bundle` with
:func:`~kinfit.output.bundle.write_bundle` and prints the returned text; a
script or notebook can call them the same way. Nothing here writes a file or
prints, except that an analysis skipped on the way is reported as a
:class:`~kinfit.core.errors.KinfitWarning`.

A fit's folder is assembled in one place, :func:`fit_folder`: the fit
command, the fit beside a posterior, the best candidate of a ranking
(``best/``) and the demos all use it.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import TYPE_CHECKING

from kinfit.core.defaults import (
    DEFAULT_CRITERION,
    DEFAULT_MAX_CONVERSION,
    DEFAULT_MOVES,
    DEFAULT_SEED,
    DEFAULT_STARTS,
    DEFAULT_STEPS,
    DEFAULT_TWO_STAGE,
    DEFAULT_WALKERS,
    LATTICE_STARTS,
)
from kinfit.core.errors import KinfitError, KinfitWarning
from kinfit.core.formatting import format_value
from kinfit.output.bundle import Bundle

if TYPE_CHECKING:
    from kinfit.analysis.prediction import Prediction, PredictionBasis
    from kinfit.analysis.ranking import Comparison
    from kinfit.estimation.fit_result import FitResult
    from kinfit.estimation.posterior import Posterior
    from kinfit.numerics.integrate import Trajectory

__all__ = ["Outcome", "FitFolder", "provenance_of", "fit_folder", "fit_workflow",
           "sample_workflow", "rank_workflow", "simulate_workflow", "prediction_basis",
           "predict_workflow", "demo_fit_workflow", "demo_ranking_workflow",
           "demo_posterior_workflow", "spectrometer_demo_workflow", "DEMO_ORDERS",
           "DEMO_RANKING_COPIES"]


@dataclass(frozen=True)
class Outcome:
    """What a workflow produced.

    Attributes
    ----------
    result : FitResult, Posterior, Comparison, Prediction, Trajectory or tuple of FitResult
    bundle : Bundle
        The files to write, not yet written.
    summary : str
        The text to show.
    """

    result: (FitResult | Posterior | Comparison | Prediction | Trajectory
             | tuple[FitResult, ...])
    bundle: Bundle
    summary: str


@dataclass(frozen=True)
class FitFolder:
    """A fit's output folder, assembled but not written.

    Attributes
    ----------
    bundle : Bundle
        The files of :func:`kinfit.output.fit.fit_bundle`, with the signal
        and temperature files.
    summary : str
        The text of ``summary.txt``: the fit, then the signal and temperature parts.
    signals, temperature : str or None
        Those two parts on their own (None when the fit has none).
    """

    bundle: Bundle
    summary: str
    signals: str | None = None
    temperature: str | None = None


def provenance_of(experiment, mechanism=None, seed=None, settings=None, command=None,
                  candidates=()):
    """The provenance record of a run (see :func:`kinfit.output.provenance.collect`).

    Parameters
    ----------
    experiment : Experiment
    mechanism : Mechanism, optional
        The model, recorded as ``model``.
    seed : int, optional
    settings : dict, optional
    command : sequence of str, optional
        The command line (default: ``sys.argv``).
    candidates : sequence of Mechanism
        Models of a ranking, recorded as ``model 1``, ``model 2`` ...
    """
    from kinfit.output.provenance import collect, experiment_inputs

    inputs = experiment_inputs(experiment, mechanism)
    inputs.update({f"model {i}": m.source for i, m in enumerate(candidates, start=1)})
    return collect(inputs, seed=seed, settings=settings, command=command)


def _temperature_analysis(result, two_stage, seed, posterior):
    """Activation parameters of a fit (with the posterior's intervals) and the two-stage
    analysis, or None for it when it is not wanted or cannot run."""
    from kinfit.analysis.activation import (
        activation_parameters,
        with_posterior,
        with_profile,
    )
    from kinfit.analysis.two_stage import two_stage as run_two_stage

    activations = activation_parameters(result)
    if posterior is not None:      # the sampler's intervals beside the delta-method ones
        activations = with_posterior(activations, posterior.samples, posterior.names)
        if posterior.profiles is not None:
            activations = with_profile(activations, {
                name: p.intervals.get(0.95) for name, p in posterior.profiles.parameters.items()
                if p.intervals.get(0.95) and None not in p.intervals.get(0.95)})
    analysis = None
    if two_stage != "none":
        try:
            analysis = run_two_stage(result.experiment, result.mechanism, result,
                                     orders=two_stage, starts=1, seed=seed)
        except KinfitError as exc:   # the global fit stands on its own
            warnings.warn(f"the two-stage analysis was skipped: {exc}", KinfitWarning,
                          stacklevel=2)
    return activations, analysis


def fit_folder(result, *, two_stage=DEFAULT_TWO_STAGE, seed=DEFAULT_SEED, wavelengths=None,
               posterior=None, provenance=None):
    """Assemble the output folder of a fit: the one place this is done.

    Parameters
    ----------
    result : FitResult
    two_stage : {"free", "global", "none"}
        For a temperature-dependent model: the two-stage analysis beside the
        global fit (see :func:`kinfit.analysis.two_stage.two_stage`).
    seed : int
        Seed of the two-stage fits.
    wavelengths : sequence of float, optional
        For full spectra: where to show fitted against measured traces.
    posterior : Posterior, optional
        Adds posterior (and profile) intervals to the activation parameters.
    provenance : dict, optional
        Written as ``provenance.json``.

    Returns
    -------
    FitFolder
    """
    from kinfit.analysis.prediction import basis_from_fit
    from kinfit.output.fit import fit_bundle, format_fit

    extra, signals, temperature = Bundle(), None, None
    basis = basis_from_fit(result)
    if result.mechanism.temperature is not None:
        from kinfit.output.temperature import format_activation, temperature_bundle

        activations, analysis = _temperature_analysis(result, two_stage, seed, posterior)
        extra = temperature_bundle(activations, analysis, basis)
        temperature = format_activation(activations, analysis)
    if result.signals is not None:
        from kinfit.output.signals import format_signals, signals_bundle

        extra = extra | signals_bundle(result, wavelengths)
        signals = format_signals(result, wavelengths)
    parts = "\n\n".join(text for text in (signals, temperature) if text) or None
    bundle = fit_bundle(result, extra=extra, extra_summary=parts, provenance=provenance,
                        basis=basis)
    summary = format_fit(result) + (f"\n\n{parts}" if parts else "")
    return FitFolder(bundle=bundle, summary=summary, signals=signals, temperature=temperature)


def fit_workflow(experiment, mechanism, *, starts=DEFAULT_STARTS, seed=DEFAULT_SEED,
                 two_stage=DEFAULT_TWO_STAGE, components=None, wavelengths=None, noise="auto",
                 command=None):
    """Fit a model to every run of an experiment; the ``kinfit fit`` command.

    Parameters are those of :func:`kinfit.fit` and :func:`fit_folder`;
    `command` is recorded in ``provenance.json``.

    Returns
    -------
    Outcome
        The FitResult, its folder and its summary.
    """
    from kinfit.estimation.least_squares import fit

    result = fit(experiment, mechanism, starts=starts, seed=seed, components=components,
                 noise=noise)
    folder = fit_folder(result, two_stage=two_stage, seed=seed, wavelengths=wavelengths,
                        provenance=provenance_of(experiment, mechanism, seed,
                                                 {"starts": starts, "noise": noise}, command))
    return Outcome(result=result, bundle=folder.bundle, summary=folder.summary)


def sample_workflow(experiment, mechanism, *, seed=DEFAULT_SEED, chain_file=None,
                    with_fit=True, command=None, **options):
    """Sample the posterior; the ``kinfit sample`` command.

    Parameters
    ----------
    experiment : Experiment
    mechanism : Mechanism
    seed : int
    chain_file : path, optional
        Where the sampler checkpoints the chain (and resumes it from).
    with_fit : bool
        Also assemble the fit's folder (:func:`fit_folder`, with the
        posterior's intervals on any activation parameters) beside the
        posterior's files.
    command : sequence of str, optional
        Recorded in ``provenance.json``.
    **options
        Passed to :func:`kinfit.sample` (walkers, steps, noise, moves, burn,
        thin, checkpoint_every, resume, max_time, starts, profile, progress).

    Returns
    -------
    Outcome
        The Posterior, its files (and the fit's) and its summary, followed by
        the activation parameters for a temperature-dependent model.
    """
    from kinfit.estimation.posterior import sample
    from kinfit.output.posterior import format_posterior, posterior_bundle

    post = sample(experiment, mechanism, seed=seed, checkpoint=chain_file, **options)
    bundle, summary = posterior_bundle(post), format_posterior(post)
    if with_fit:
        settings = {"walkers": options.get("walkers", DEFAULT_WALKERS),
                    "steps": options.get("steps", DEFAULT_STEPS),
                    "noise": options.get("noise", "auto"),
                    "moves": options.get("moves", DEFAULT_MOVES),
                    "starts": options.get("starts", DEFAULT_STARTS)}
        folder = fit_folder(post.fit, two_stage=DEFAULT_TWO_STAGE, seed=seed, posterior=post,
                            provenance=provenance_of(post.fit.experiment, post.fit.mechanism,
                                                     seed, settings, command))
        bundle = folder.bundle | bundle
        if folder.temperature:
            summary += "\n\n" + folder.temperature
    return Outcome(result=post, bundle=bundle, summary=summary)


def rank_workflow(experiment, mechanisms, orders=None, *, top=10, seed=DEFAULT_SEED,
                  command=None, **options):
    """Fit candidate models and rank them; the ``kinfit rank`` command.

    Parameters
    ----------
    experiment : Experiment
    mechanisms : sequence of Mechanism
    orders : dict of str to sequence of float, optional
        The order search (see :func:`kinfit.rank`).
    top : int
        Candidates shown in the summary and ``ranking.txt``.
    seed : int
    command : sequence of str, optional
        Recorded in ``provenance.json``.
    **options
        Passed to :func:`kinfit.rank` (starts, lattice_starts, workers,
        criterion, cross_check, max_conversion, progress).

    Returns
    -------
    Outcome
        The Comparison, its files (the best candidate's fit folder in
        ``best/``, assembled by :func:`fit_folder`) and its summary.
    """
    from kinfit.analysis.ranking import rank
    from kinfit.output.ranking import format_ranking, ranking_bundle

    comparison = rank(experiment, mechanisms, orders, seed=seed, **options)
    settings = {"starts": options.get("starts", DEFAULT_STARTS),
                "lattice_starts": options.get("lattice_starts", LATTICE_STARTS),
                "orders": {k: list(v) for k, v in (orders or {}).items()},
                "criterion": options.get("criterion", DEFAULT_CRITERION),
                "max_conversion": options.get("max_conversion", DEFAULT_MAX_CONVERSION)}
    provenance = provenance_of(experiment, None, seed, settings, command, mechanisms)
    best = fit_folder(comparison.best.fit, seed=seed, provenance=provenance)
    return Outcome(result=comparison,
                   bundle=ranking_bundle(comparison, top, provenance, best=best.bundle),
                   summary=format_ranking(comparison, top=top))


def simulate_workflow(mechanism, initial, values, times, units=None):
    """Integrate a model from given starting concentrations; ``kinfit simulate``.

    Returns
    -------
    Outcome
        The Trajectory, ``simulation.csv`` and its figure, and a line with
        the concentrations at the last time.

    Raises
    ------
    KinfitError
        If the rate equations cannot be integrated with these values.
    """
    from kinfit.numerics.integrate import simulate
    from kinfit.output.prediction import simulation_bundle

    traj = simulate(mechanism, initial, values, times)
    if not traj.success:
        raise KinfitError(f"{mechanism.source}: the rate equations could not be integrated "
                          f"with these values: {traj.message}")
    last = ", ".join(f"[{s}] = {v:.4g}" for s, v in zip(traj.species, traj.conc[-1]))
    time_unit, conc_unit = (units.time, units.concentration) if units else ("", "")
    return Outcome(result=traj, bundle=simulation_bundle(traj, units, mechanism.name),
                   summary=f"{mechanism.name}: at t = {times[-1]:g} {time_unit}: {last} "
                           f"{conc_unit}")


def prediction_basis(mechanism, units, fit_file=None, overrides=None):
    """What a prediction starts from: a fit's saved basis, or the model's own values.

    Parameters
    ----------
    mechanism : Mechanism
    units : Units
        Of a prediction from the model's values.
    fit_file : path, optional
        ``result.json`` (or ``temperature.json``) written by ``kinfit fit``;
        its schema version is checked first (see :mod:`kinfit.core.schema`).
    overrides : dict of str to float, optional
        Parameter values replacing the model file's (without `fit_file`).

    Returns
    -------
    (PredictionBasis, str or None)
        The basis, and a line saying which fit is used.
    """
    from kinfit.inputs.fit_basis import FittedRange, PredictionBasis, load_basis

    if fit_file is not None:
        basis = load_basis(fit_file, mechanism)
        return basis, (f"Using the fit in {fit_file}: times in {basis.units.time}, "
                       f"concentrations in {basis.units.concentration}")
    spec = mechanism.temperature
    basis = PredictionBasis(mechanism=mechanism, values=mechanism.values(overrides),
                            free_names=(), covariance=None,
                            reference=None if spec is None else spec.reference,
                            fitted=FittedRange(None, {}), units=units,
                            source=str(mechanism.source))
    return basis, None


def predict_workflow(basis: PredictionBasis, initial, times, kelvin=None, *,
                     draws=None, seed=DEFAULT_SEED):
    """Predict from a basis, with a band and extrapolation flags; ``kinfit simulate -T``.

    Returns
    -------
    Outcome
        The Prediction, its files (``simulation.*``, ``prediction.json``)
        and its summary.
    """
    from kinfit.analysis.prediction import predict
    from kinfit.output.prediction import format_prediction, prediction_bundle

    more = {} if draws is None else {"draws": draws}
    prediction = predict(basis, initial, times, kelvin, seed=seed, **more)
    title = basis.mechanism.name
    return Outcome(result=prediction, bundle=prediction_bundle(prediction, title),
                   summary=format_prediction(prediction, title))


# ------------------------------------------------------------------ demos

DEMO_ORDERS = {"m_thiol": [0.5, 1.0, 1.5, 2.0], "m_acrylate": [0.5, 1.0, 1.5, 2.0]}
# ranking files the demo's combined report reads beside the fit
DEMO_RANKING_COPIES = ("ranking.json", "weights.png", "weights.svg", "initial_rates.png",
                       "initial_rates.svg")


def _truth_lines(rows, name_width, value_width, true_format):
    return [f"  {name:<{name_width}} true {true:<{true_format}} fitted "
            f"{format_value(value, se):<{value_width}} ({z:+.1f} standard errors)"
            for name, true, value, se, z in rows]


def demo_fit_workflow(paths, command=None):
    """The demo's fit, beside the true values used to make its data.

    Parameters
    ----------
    paths : dict of str to path
        From :func:`kinfit.app.demo.write_inputs`.
    command : sequence of str, optional
    """
    from kinfit.app import demo
    from kinfit.estimation.least_squares import fit
    from kinfit.inputs.experiment import load_experiment
    from kinfit.inputs.mechanism import load_mechanism
    from kinfit.output.fit import format_fit

    exp, mech = load_experiment(paths["experiment"]), load_mechanism(paths["model"])
    result = fit(exp, mech)
    folder = fit_folder(result, seed=0,
                        provenance=provenance_of(exp, mech, 0, {"starts": 8}, command))
    lines = [format_fit(result), "", "Recovered against the true values used to make the data"]
    lines += _truth_lines(demo.compare_with_truth(result), 11, 24, "8g")
    return Outcome(result=result, bundle=folder.bundle, summary="\n".join(lines))


def demo_ranking_workflow(result):
    """Rank the demo's free-order fit against fixed orders in thiol and acrylate.

    The files go into ``ranking/``, and copies of :data:`DEMO_RANKING_COPIES`
    beside the fit for the combined report.
    """
    from kinfit.analysis.ranking import rank
    from kinfit.output.ranking import format_ranking, ranking_bundle

    comparison = rank(result.experiment, [result.mechanism], DEMO_ORDERS, seed=0, workers=1)
    files = ranking_bundle(comparison, best=fit_folder(comparison.best.fit, seed=0).bundle)
    return Outcome(result=comparison, bundle=files.within("ranking") | files.only(
                       DEMO_RANKING_COPIES),
                   summary=format_ranking(comparison, top=5, cautions=False) + "\n")


def demo_posterior_workflow(result, progress=None):
    """Sample the demo's posterior starting from its fit (`progress` as for sample)."""
    from kinfit.estimation.posterior import sample
    from kinfit.output.posterior import format_posterior, posterior_bundle

    post = sample(result.experiment, result.mechanism, walkers=32, steps=3000, seed=0,
                  fit_result=result, progress=progress)
    return Outcome(result=post, bundle=posterior_bundle(post),
                   summary=format_posterior(post) + "\n")


def spectrometer_demo_workflow(paths, command=None):
    """The demo's spectrometer part: absorbance at one wavelength, then full spectra.

    Parameters
    ----------
    paths : dict of str to path
        From :func:`kinfit.app.demo_spectra.write_inputs`.
    command : sequence of str, optional

    Returns
    -------
    Outcome
        The two fits, their folders (``absorbance/`` and ``spectra/``) and
        the summary with the truth beside them.
    """
    from kinfit.app import demo_spectra
    from kinfit.estimation.least_squares import fit
    from kinfit.inputs.experiment import load_experiment
    from kinfit.inputs.mechanism import load_mechanism
    from kinfit.output.fit import format_fit

    mech = load_mechanism(paths["model"])
    fits, bundle, lines = [], Bundle(), []
    for key in ("absorbance", "spectra"):
        exp = load_experiment(paths[key])
        result = fit(exp, mech)
        folder = fit_folder(result, seed=0, provenance=provenance_of(
            exp, mech, 0, {"starts": 8}, command))
        bundle = bundle | folder.bundle.within(key)
        fits.append(result)
        lines += [format_fit(result, cautions=False), folder.signals, ""]
    lines.append("Recovered against the true values used to make the data")
    lines += _truth_lines(demo_spectra.compare_with_truth(*fits), 24, 22, "8.4g")
    return Outcome(result=tuple(fits), bundle=bundle, summary="\n".join(lines))
