"""The ``kinfit`` command: a thin layer over the Python API.

Each command parses its arguments, calls the library and prints. A
:class:`~kinfit.errors.KinfitError` becomes one clear line on stderr and exit
code 2; anything else is a bug and keeps its traceback (exit code 1). Heavy
libraries are imported inside the commands so that ``kinfit --help`` is fast.
"""

from __future__ import annotations

import sys
import warnings
from contextlib import contextmanager
from pathlib import Path
from typing import List, Optional

import typer

from kinfit.core.defaults import (CHECKPOINT_EVERY, DEFAULT_CRITERION, DEFAULT_DRAWS,
                                  DEFAULT_MAX_CONVERSION, DEFAULT_MOVES, DEFAULT_SEED,
                                  DEFAULT_STARTS, DEFAULT_STEPS, DEFAULT_WALKERS, LATTICE_STARTS)
from kinfit.app.progress import ProgressBar, SamplingBar
from kinfit.core.errors import KinfitError, KinfitWarning

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    rich_markup_mode=None,
    pretty_exceptions_enable=False,
    help="kinfit: rate laws, orders and rate constants from the whole time course of "
         "every run at once.\n\nExample:\n\n  kinfit demo --out kinfit-demo",
)


@contextmanager
def _handled():
    """Turn KinfitError into one line and exit code 2; show kinfit warnings plainly."""
    def show(message, category, filename, lineno, file=None, line=None):
        typer.echo(f"warning: {message}", err=True)

    previous = warnings.showwarning
    warnings.showwarning = show
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("always", KinfitWarning)
            warnings.simplefilter("ignore", RuntimeWarning)
            yield
    except KinfitError as exc:
        typer.echo(f"error: {exc}", err=True)
        raise typer.Exit(code=2) from None
    finally:
        warnings.showwarning = previous


def _pairs(items, what):
    out = {}
    for item in items or []:
        name, sep, value = item.partition("=")
        try:
            if not sep:
                raise ValueError
            out[name.strip()] = float(value)
        except ValueError:
            raise KinfitError(f"{what} {item!r}: expected NAME=NUMBER, like A=0.1") from None
    return out


@app.command("fit")
def fit_command(
    experiment: Path = typer.Argument(..., help="Experiment file (TOML)."),
    model: Path = typer.Option(..., "--model", "-m", help="Model file (TOML)."),
    out: Path = typer.Option(Path("kinfit-fit"), "--out", "-o",
                             help="Folder for result.json, figures and curves."),
    starts: int = typer.Option(DEFAULT_STARTS, "--starts", min=1,
                               help="Starting points refined by least squares."),
    seed: int = typer.Option(DEFAULT_SEED, "--seed", help="Seed of the start screen."),
    two_stage: str = typer.Option("free", "--two-stage",
                                  help="For a model with a [temperature] table: the two-stage "
                                       "analysis beside the global fit, with 'free' orders at "
                                       "each temperature, orders fixed at the 'global' fit's "
                                       "values, or 'none'."),
    components: Optional[str] = typer.Option(
        None, "--components",
        help="For full spectra: fit the leading singular vectors the SVD finds significant "
             "('auto'), a given number of them, or every wavelength ('all'). Overrides the "
             "experiment file."),
    wavelengths: Optional[str] = typer.Option(
        None, "--wavelengths",
        help="For full spectra: wavelengths to show fitted against measured traces at, "
             "comma-separated (default: the peak of each resolved spectrum)."),
    report: bool = typer.Option(True, "--report/--no-report",
                                help="Also write the self-contained report.html."),
):
    """Fit a model to every run of an experiment at once.

    Prints the rate law with fitted orders, each rate constant with its unit
    and standard error, and the fit statistics; writes result.json, fit.png,
    residuals.png, fitted_curves.csv and summary.txt into --out.

    When the model's rate constants depend on temperature (a [temperature]
    table), all runs at all temperatures are fitted together and the
    activation parameters (Ea, A, ΔH‡, ΔS‡, ΔG‡) are printed beside a
    two-stage analysis; temperature.json, arrhenius.png and eyring.png are
    written too.

    When the experiment measures spectrometer signals (a [signals] table),
    the absorptivities, offsets and drifts are solved along the way and
    printed with their standard errors; for full spectra the resolved
    spectra (spectra.csv, spectra.png), traces at chosen wavelengths, a
    residual map and the SVD of the data (components.png) are written too.

    Example:

      kinfit fit demo/experiment.toml --model demo/thiol_addition.toml --out results

      kinfit fit demo/temperature/experiment.toml --model demo/temperature/ester_hydrolysis.toml --out results

      kinfit fit demo/spectra/spectra.toml --model demo/spectra/dye_formation.toml --wavelengths 420,560 --out results
    """
    with _handled():
        from kinfit.inputs.experiment import load_experiment
        from kinfit.estimation.least_squares import fit
        from kinfit.inputs.mechanism import load_mechanism
        from kinfit.output.report import format_fit, write_fit

        if two_stage not in ("free", "global", "none"):
            raise KinfitError(f"--two-stage {two_stage}: expected free, global or none")
        chosen = _components(components)
        picks = _numbers(wavelengths, "--wavelengths")
        exp = load_experiment(experiment)
        mech = load_mechanism(model)
        result = fit(exp, mech, starts=starts, seed=seed, components=chosen)
        files, summary = {}, None
        if mech.temperature is not None:
            files, summary = _temperature_outputs(exp, mech, result, two_stage, seed)
        if result.signals is not None:
            from kinfit.output.report import signal_outputs

            more, text = signal_outputs(result, picks)
            files = {**files, **more}
            summary = text if summary is None else f"{text}\n\n{summary}"
        written = write_fit(out, result, extra_files=files, extra_summary=summary,
                            provenance=_provenance(exp, mech, seed, {"starts": starts}))
        if report:
            written.append(_report(out))
        typer.echo(format_fit(result))
        if summary:
            typer.echo("\n" + summary)
        typer.echo(f"\nWrote {', '.join(p.name for p in written)} in {out}")


def _components(text):
    """--components: None, "auto", "all" or a whole number."""
    if text is None or text in ("auto", "all"):
        return text
    try:
        value = int(text)
    except ValueError:
        value = 0
    if value < 1:
        raise KinfitError(f"--components {text}: expected auto, all or a whole number of at "
                          f"least 1")
    return value


def _numbers(text, option):
    """A comma-separated list of numbers, or None."""
    if not text:
        return None
    try:
        return [float(part) for part in text.split(",") if part.strip()]
    except ValueError:
        raise KinfitError(f"{option} {text}: expected numbers separated by commas, like "
                          f"420,560") from None


def _provenance(exp, mech, seed, settings):
    from kinfit.output.provenance import collect, experiment_inputs

    return collect(experiment_inputs(exp, mech), seed=seed, settings=settings,
                   command=["kinfit"] + sys.argv[1:])


def _report(out):
    from kinfit.output.html import build_report

    return build_report(out)


def _temperature_outputs(exp, mech, result, two_stage, seed, posterior=None):
    from kinfit.analysis.activation import activation_parameters, with_posterior, with_profile
    from kinfit.analysis.prediction import basis_from_fit
    from kinfit.output.report import temperature_outputs
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
            analysis = run_two_stage(exp, mech, result, orders=two_stage, starts=1, seed=seed)
        except KinfitError as exc:   # the global fit stands on its own
            typer.echo(f"warning: the two-stage analysis was skipped: {exc}", err=True)
    return temperature_outputs(activations, analysis, basis_from_fit(result))


@app.command("sample")
def sample_command(
    experiment: Path = typer.Argument(..., help="Experiment file (TOML)."),
    model: Path = typer.Option(..., "--model", "-m", help="Model file (TOML)."),
    out: Path = typer.Option(Path("kinfit-posterior"), "--out", "-o",
                             help="Folder for posterior.json, chain.npz and figures."),
    walkers: int = typer.Option(DEFAULT_WALKERS, "--walkers", min=2, help="Walkers of the ensemble (even, "
                                "at least twice the sampled parameters)."),
    steps: int = typer.Option(DEFAULT_STEPS, "--steps", min=1, help="Steps of each walker (a resumed "
                              "chain continues up to this total)."),
    seed: int = typer.Option(DEFAULT_SEED, "--seed", help="Seed of the fit's start screen, the walkers' "
                             "start and the sampler."),
    burn: Optional[int] = typer.Option(None, "--burn", min=0, help="Steps to discard "
                                       "[default: 3 autocorrelation times]."),
    thin: int = typer.Option(1, "--thin", min=1, help="Keep every N-th step in the summary."),
    noise: str = typer.Option("auto", "--noise", help="auto, declared, per-species or shared "
                              "(auto: the experiment's [noise] if declared, else one σ per "
                              "species, sampled)."),
    moves: str = typer.Option(DEFAULT_MOVES, "--moves", help="de (emcee's differential evolution) or "
                              "stretch (emcee's own default)."),
    starts: int = typer.Option(DEFAULT_STARTS, "--starts", min=1, help="Starting points of the fit."),
    checkpoint_every: int = typer.Option(CHECKPOINT_EVERY, "--checkpoint-every", min=1,
                                         help="Write chain.npz every N steps."),
    resume: bool = typer.Option(False, "--resume", help="Continue the chain in OUT/chain.npz."),
    overwrite: bool = typer.Option(False, "--overwrite", help="Replace a chain already in OUT."),
    max_time: Optional[float] = typer.Option(None, "--max-time", help="Stop sampling after "
                                             "this many seconds (resume later)."),
    profile: bool = typer.Option(True, "--profile/--no-profile",
                                 help="Also compute profile-likelihood intervals."),
    report: bool = typer.Option(True, "--report/--no-report",
                                help="Also write the fit's outputs and report.html."),
):
    """Sample the posterior of the orders and rate constants with emcee.

    Fits first, starts the walkers around the fit, checkpoints the chain to
    OUT/chain.npz every --checkpoint-every steps, says whether the chain
    converged, and prints each parameter's covariance, profile-likelihood
    and posterior 95 % intervals side by side. Writes posterior.json,
    posterior_summary.txt, chain.npz, corner.png, bands.png, profiles.png.
    If the process stops, run the same command with --resume.

    Example:

      kinfit sample demo/experiment.toml --model demo/thiol_addition.toml --out post --steps 2000
    """
    with _handled():
        import signal

        from kinfit.inputs.experiment import load_experiment
        from kinfit.inputs.mechanism import load_mechanism
        from kinfit.estimation.chains import CHAIN_FILE, load_chain
        from kinfit.estimation.posterior import sample
        from kinfit.output.report import format_posterior, write_posterior

        if max_time is not None and not max_time > 0:
            raise KinfitError(f"--max-time {max_time}: expected a positive number of seconds")
        if out.exists() and not out.is_dir():
            raise KinfitError(f"--out {out}: exists and is not a folder")
        chain_file = out / CHAIN_FILE
        if chain_file.exists() and not resume and not overwrite:
            state, _ = load_chain(chain_file)
            raise KinfitError(f"{chain_file} already holds a chain ({state.n_done} steps); add "
                              f"--resume to continue it or --overwrite to start again")
        exp = load_experiment(experiment)
        mech = load_mechanism(model)

        def stop(signum, frame):
            raise KeyboardInterrupt

        previous = signal.signal(signal.SIGTERM, stop)
        bar = SamplingBar() if sys.stderr.isatty() else None
        try:
            post = sample(exp, mech, walkers=walkers, steps=steps, seed=seed, noise=noise,
                          moves=moves, burn=burn, thin=thin, checkpoint=chain_file,
                          checkpoint_every=checkpoint_every, resume=resume, max_time=max_time,
                          starts=starts, profile=profile, progress=bar)
        finally:
            signal.signal(signal.SIGTERM, previous)
            if bar is not None:
                bar.close()
        written = write_posterior(out, post)
        temp_summary = None
        if report:
            from kinfit.output.report import write_fit

            exp_used = post.fit.experiment
            files, summaries = {}, []
            if post.fit.signals is not None:    # the solved absorptivities and spectra too
                from kinfit.output.report import signal_outputs

                signal_files, signal_summary = signal_outputs(post.fit)
                files.update(signal_files)
                summaries.append(signal_summary)
            if post.fit.mechanism.temperature is not None:   # activation parameters with
                temp_files, temp_summary = _temperature_outputs(   # posterior intervals
                    exp_used, post.fit.mechanism, post.fit, "free", seed, post)
                files.update(temp_files)
                summaries.append(temp_summary)
            provenance = _provenance(exp_used, post.fit.mechanism, seed,
                                     {"walkers": walkers, "steps": steps, "noise": noise,
                                      "moves": moves, "starts": starts})
            written = write_fit(out, post.fit, extra_files=files,
                                extra_summary="\n\n".join(summaries) or None,
                                provenance=provenance) + written
            written.append(_report(out))
        typer.echo(format_posterior(post))
        if temp_summary:
            typer.echo("\n" + temp_summary)
        typer.echo(f"\nWrote {', '.join(p.name for p in written)} in {out}")


@app.command("simulate")
def simulate_command(
    model: Path = typer.Argument(..., help="Model file (TOML)."),
    initial: List[str] = typer.Option(..., "--initial", "-i",
                                      help="Starting concentration, SPECIES=VALUE; repeat."),
    set_: Optional[List[str]] = typer.Option(None, "--set", "-s",
                                             help="Parameter value, NAME=VALUE; repeat. "
                                                  "Others take the model file's values."),
    until: float = typer.Option(100.0, "--until", help="Last time."),
    points: int = typer.Option(201, "--points", min=2, help="Number of time points."),
    time_unit: str = typer.Option("s", "--time-unit", help="Time unit, for labels."),
    concentration_unit: str = typer.Option("M", "--concentration-unit",
                                           help="Concentration unit, for labels."),
    temperature: Optional[float] = typer.Option(
        None, "--temperature", "-T",
        help="Temperature to predict at, for a model with a [temperature] table."),
    temperature_unit: str = typer.Option("K", "--temperature-unit",
                                         help="Unit of --temperature: K or degC."),
    fit_file: Optional[Path] = typer.Option(
        None, "--fit",
        help="temperature.json written by 'kinfit fit': predict from the fitted values with "
             "an uncertainty band, and flag conditions outside the fitted range."),
    draws: int = typer.Option(DEFAULT_DRAWS, "--draws", min=0,
                              help="Parameter draws for the uncertainty band (with --fit)."),
    seed: int = typer.Option(DEFAULT_SEED, "--seed", help="Seed of the parameter draws."),
    out: Path = typer.Option(Path("kinfit-simulation"), "--out", "-o",
                             help="Folder for simulation.csv and simulation.png."),
):
    """Predict concentrations over time for given starting concentrations.

    With --temperature (for a model whose rate constants depend on it) and
    --fit, the prediction carries the fit's uncertainty and is flagged
    EXTRAPOLATED when the temperature or a starting concentration lies
    outside the fitted range; prediction.json is written too.

    Example:

      kinfit simulate models/consecutive.toml -i A=1.0 --set k1=0.5 --set k2=0.1 --until 60

      kinfit simulate demo/temperature/ester_hydrolysis.toml -i ester=20 -i hydroxide=40 -T 30 --temperature-unit degC --fit results/temperature.json --until 60
    """
    with _handled():
        import numpy as np

        from kinfit.inputs.mechanism import load_mechanism
        from kinfit.output.report import write_simulation
        from kinfit.numerics.integrate import simulate
        from kinfit.core.units import Units, check_unit

        if not until > 0:
            raise KinfitError(f"--until {until}: expected a positive time")
        units = Units(check_unit(time_unit, "time", "--time-unit"),
                      check_unit(concentration_unit, "concentration", "--concentration-unit"))
        mech = load_mechanism(model)
        if temperature is not None or fit_file is not None or mech.temperature is not None:
            _predict(mech, model, _pairs(initial, "--initial"), _pairs(set_, "--set"),
                     np.linspace(0.0, until, points), units, temperature, temperature_unit,
                     fit_file, draws, seed, out)
            return
        traj = simulate(mech, _pairs(initial, "--initial"), _pairs(set_, "--set"),
                        np.linspace(0.0, until, points))
        if not traj.success:
            raise KinfitError(f"{model}: the rate equations could not be integrated with these "
                              f"values: {traj.message}")
        written = write_simulation(out, traj, units, mech.name)
        last = ", ".join(f"[{s}] = {v:.4g}" for s, v in zip(traj.species, traj.conc[-1]))
        typer.echo(f"{mech.name}: at t = {until:g} {units.time}: {last} "
                   f"{units.concentration}")
        typer.echo(f"Wrote {', '.join(p.name for p in written)} in {out}")


def _predict(mech, model, initial, overrides, times, units, temperature, temperature_unit,
             fit_file, draws, seed, out):
    """The prediction path of ``simulate``: temperature, fit basis, band and flags."""
    from kinfit.analysis.prediction import predict
    from kinfit.inputs.fit_basis import FittedRange, PredictionBasis, load_basis
    from kinfit.output.report import format_prediction, write_prediction
    from kinfit.core.units import check_unit, to_kelvin

    kelvin = None
    if temperature is not None:
        unit = check_unit(temperature_unit, "temperature", "--temperature-unit")
        kelvin = to_kelvin(temperature, unit)
        if not kelvin > 0:
            raise KinfitError(f"--temperature {temperature:g} {unit}: at or below absolute zero")
    if mech.temperature is not None and kelvin is None:
        raise KinfitError(f"{model}: the model's rate constants depend on temperature; give "
                          f"--temperature (and --temperature-unit degC for °C)")
    if fit_file is not None:
        if overrides:
            raise KinfitError("--set and --fit cannot be combined: with --fit the fitted "
                              "values and their uncertainty are used")
        basis = load_basis(fit_file, mech)
        typer.echo(f"Using the fit in {fit_file} (units {basis.units.time} and "
                   f"{basis.units.concentration})")
    else:
        spec = mech.temperature
        basis = PredictionBasis(mechanism=mech, values=mech.values(overrides), free_names=(),
                                covariance=None,
                                reference=None if spec is None else spec.reference,
                                fitted=FittedRange(None, {}), units=units, source=str(model))
    prediction = predict(basis, initial, times, kelvin, draws=draws, seed=seed)
    written = write_prediction(out, prediction, mech.name)
    typer.echo(format_prediction(prediction, mech.name))
    typer.echo(f"Wrote {', '.join(p.name for p in written)} in {out}")


@app.command("components")
def components_command(
    experiment: Path = typer.Argument(..., help="Experiment file (TOML) with full spectra."),
):
    """How many absorbing components full-spectrum data show, before choosing a model.

    Stacks the spectra of every run (time down, wavelength across), prints the
    singular values and counts those above the noise (optimal hard threshold
    of Gavish and Donoho; the noise is the experiment's [signals.spectra]
    noise, or estimated from the median singular value). A mechanism needs
    about that many absorbing species; a baseline that differs between runs
    adds components.

    Example:

      kinfit components demo/spectra/spectra.toml
    """
    with _handled():
        from kinfit.inputs.experiment import load_experiment
        from kinfit.output.report import format_components
        from kinfit.numerics.svd import significant_components, stacked_spectra

        exp = load_experiment(experiment)
        data = stacked_spectra(exp)
        if data is None:
            raise KinfitError(f"{experiment}: no run gives a spectrum file; components are "
                              f"counted for full-spectrum data")
        comps = significant_components(data, exp.signals.spectra.noise)
        typer.echo(f"{len(exp.runs)} run(s), {data.shape[0]} spectra of {data.shape[1]} "
                   f"wavelengths")
        typer.echo(format_components(comps))


@app.command("demo")
def demo_command(
    out: Path = typer.Option(Path("kinfit-demo"), "--out", "-o",
                             help="Folder for the demo's inputs and results."),
    full: bool = typer.Option(False, "--full",
                              help="Also sample the posterior (about half a minute more), so "
                                   "that the report shows every section."),
):
    """Run the whole pipeline on the bundled, invented demo study.

    Writes the demo's model, experiment and synthetic data into OUT/inputs,
    fits them, prints the recovered rate law beside the true values used to
    make the data, ranks the free-order fit against fixed orders, and writes
    the results and report.html into OUT. Its spectrometer part (an invented
    dye synthesis followed by absorbance at one wavelength and by full
    spectra) goes to OUT/inputs/spectrometer and OUT/spectrometer. With
    --full the posterior is sampled too.

    Example:

      kinfit demo --out kinfit-demo
    """
    with _handled():
        from kinfit.app import demo
        from kinfit.inputs.experiment import load_experiment
        from kinfit.estimation.least_squares import fit
        from kinfit.inputs.mechanism import load_mechanism
        from kinfit.core.formatting import format_value
        from kinfit.output.report import format_fit, write_fit

        import textwrap

        typer.echo(textwrap.fill(demo.SCENARIO, 88) + "\n")
        paths = demo.write_inputs(out / "inputs")
        exp, mech = load_experiment(paths["experiment"]), load_mechanism(paths["model"])
        result = fit(exp, mech)
        written = write_fit(out, result, provenance=_provenance(exp, mech, 0, {"starts": 8}))
        typer.echo(format_fit(result))
        typer.echo("\nRecovered against the true values used to make the data")
        for name, true, value, se, z in demo.compare_with_truth(result):
            typer.echo(f"  {name:<11} true {true:<8g} fitted {format_value(value, se):<24} "
                       f"({z:+.1f} standard errors)")
        typer.echo("\n" + "=" * 88 + "\n")
        written += _demo_ranking(out, exp, mech)
        if full:
            written += _demo_posterior(out, exp, mech, result)
        written.append(_report(out))
        typer.echo(f"Inputs in {out / 'inputs'}; results "
                   f"({', '.join(sorted({p.name for p in written}))}) in {out}")
        _spectrometer_demo(out)


def _demo_ranking(out, exp, mech):
    """Rank the demo's free-order fit against fixed orders in thiol and acrylate."""
    from kinfit.core.atomic import write_bytes
    from kinfit.analysis.ranking import rank
    from kinfit.output.report import format_ranking, write_ranking

    grid = {"m_thiol": [0.5, 1.0, 1.5, 2.0], "m_acrylate": [0.5, 1.0, 1.5, 2.0]}
    comparison = rank(exp, [mech], grid, seed=0, workers=1)
    written = write_ranking(out / "ranking", comparison)
    for name in ("ranking.json", "weights.png", "weights.svg", "initial_rates.png",
                 "initial_rates.svg"):
        source = out / "ranking" / name
        if source.exists():                # the combined report reads them beside the fit
            write_bytes(out / name, source.read_bytes())
    typer.echo(format_ranking(comparison, top=5, cautions=False) + "\n")
    return written


def _demo_posterior(out, exp, mech, result):
    """Sample the demo's posterior starting from its fit."""
    from kinfit.estimation.posterior import sample
    from kinfit.output.report import format_posterior, write_posterior

    bar = SamplingBar() if sys.stderr.isatty() else None
    try:
        post = sample(exp, mech, walkers=32, steps=3000, seed=0, fit_result=result, progress=bar)
    finally:
        if bar is not None:
            bar.close()
    typer.echo(format_posterior(post) + "\n")
    return write_posterior(out, post)


def _spectrometer_demo(out):
    """The demo's spectrometer part: absorbance at one wavelength, then full spectra."""
    import textwrap

    from kinfit.app import demo_spectra
    from kinfit.inputs.experiment import load_experiment
    from kinfit.estimation.least_squares import fit
    from kinfit.inputs.mechanism import load_mechanism
    from kinfit.core.formatting import format_value
    from kinfit.output.report import format_fit, signal_outputs, write_fit

    typer.echo("\n" + "=" * 88 + "\n" + textwrap.fill(demo_spectra.SCENARIO, 88) + "\n")
    paths = demo_spectra.write_inputs(out / "inputs" / "spectrometer")
    mech = load_mechanism(paths["model"])
    fits = {}
    for key in ("absorbance", "spectra"):
        exp = load_experiment(paths[key])
        result = fit(exp, mech)
        files, summary = signal_outputs(result)
        folder = out / "spectrometer" / key
        write_fit(folder, result, extra_files=files, extra_summary=summary,
                  provenance=_provenance(exp, mech, 0, {"starts": 8}))
        _report(folder)
        fits[key] = result
        typer.echo(format_fit(result, cautions=False))
        typer.echo(summary + "\n")
    typer.echo("Recovered against the true values used to make the data")
    for name, true, value, se, z in demo_spectra.compare_with_truth(fits["absorbance"],
                                                                    fits["spectra"]):
        typer.echo(f"  {name:<24} true {true:<8.4g} fitted {format_value(value, se):<22} "
                   f"({z:+.1f} standard errors)")
    typer.echo(f"\nInputs in {out / 'inputs' / 'spectrometer'}; results (with report.html, "
               f"spectra.csv, spectra.png, wavelength_traces.png, residual_map.png, "
               f"components.png) in {out / 'spectrometer'}")


@app.command("rank")
def rank_command(
    experiment: Path = typer.Argument(..., help="Experiment file (TOML)."),
    model: List[Path] = typer.Option(..., "--model", "-m",
                                     help="Candidate model file (TOML); repeat for each."),
    orders: Optional[List[str]] = typer.Option(
        None, "--orders",
        help="Order search NAME=V1,V2,...; repeat. Fixes these order parameters of the "
             "first model that has them to every combination of the values; that model's "
             "free-order fit is ranked alongside."),
    out: Path = typer.Option(Path("kinfit-rank"), "--out", "-o",
                             help="Folder for ranking.json, ranking.txt and figures."),
    starts: int = typer.Option(DEFAULT_STARTS, "--starts", min=1,
                               help="Starting points for each model given."),
    lattice_starts: int = typer.Option(LATTICE_STARTS, "--lattice-starts", min=1,
                                       help="Starting points for each fixed-order candidate "
                                            "(they start from the free-order fit)."),
    criterion: str = typer.Option(DEFAULT_CRITERION, "--criterion",
                                  help="Sort by aicc, aic or bic."),
    workers: Optional[int] = typer.Option(None, "--workers", min=1,
                                          help="Processes for the fits (default: all CPUs)."),
    initial_rates: bool = typer.Option(True, "--initial-rates/--no-initial-rates",
                                       help="Run the initial-rates cross-check."),
    conversion: float = typer.Option(DEFAULT_MAX_CONVERSION, "--conversion",
                                     help="Initial-rates window: fraction of the limiting "
                                          "reactant used up."),
    top: int = typer.Option(10, "--top", min=1, help="Candidates shown in the table."),
    seed: int = typer.Option(DEFAULT_SEED, "--seed", help="Seed of the start screens."),
    report: bool = typer.Option(True, "--report/--no-report",
                                help="Also write the self-contained report.html."),
):
    """Fit several candidate rate laws to every run and rank them.

    Ranks by AICc (Akaike and BIC weights), tests nested pairs (F-test,
    likelihood ratio), averages shared parameters over the candidates, and
    sets the initial-rates method beside the best one-step rate law. Writes
    ranking.json, ranking.txt, weights.png, initial_rates.png/.csv,
    provenance.json, report.html and the best candidate's fit (best/) into --out.

    Example:

      kinfit rank demo/experiment.toml --model demo/thiol_addition.toml
      --orders m_thiol=0,0.5,1,1.5,2 --orders m_acrylate=0,0.5,1,1.5,2 --out ranking
    """
    with _handled():
        from kinfit.analysis.lattice import parse_order_grid
        from kinfit.analysis.ranking import rank
        from kinfit.inputs.experiment import load_experiment
        from kinfit.inputs.mechanism import load_mechanism
        from kinfit.output.report import format_ranking, write_ranking

        grid = parse_order_grid(orders)
        if not 0 < conversion <= 1:
            raise KinfitError(f"--conversion {conversion}: expected a fraction in (0, 1]")
        exp = load_experiment(experiment)
        mechanisms = [load_mechanism(m) for m in model]
        bar = ProgressBar("fitting candidates") if sys.stderr.isatty() else None
        try:
            comparison = rank(exp, mechanisms, grid, starts=starts, lattice_starts=lattice_starts,
                              seed=seed, workers=workers, criterion=criterion.lower(),
                              cross_check=initial_rates, max_conversion=conversion,
                              progress=bar)
        finally:
            if bar is not None:
                bar.close()
        from kinfit.output.provenance import collect, experiment_inputs

        inputs = experiment_inputs(exp)
        inputs.update({f"model {i}": m.source for i, m in enumerate(mechanisms, start=1)})
        provenance = collect(inputs, seed=seed, command=["kinfit"] + sys.argv[1:],
                             settings={"starts": starts, "lattice_starts": lattice_starts,
                                       "orders": {k: list(v) for k, v in grid.items()},
                                       "criterion": criterion.lower(),
                                       "max_conversion": conversion})
        written = write_ranking(out, comparison, top=top, provenance=provenance)
        if report:
            written.append(_report(out))
        typer.echo(format_ranking(comparison, top=top))
        typer.echo(f"\nWrote {', '.join(p.name for p in written if p.parent == out)} and "
                   f"best/ in {out}")


@app.command("report")
def report_command(
    folder: Path = typer.Argument(..., help="An output folder of kinfit fit, sample or rank."),
):
    """Build one self-contained report.html from the results in a folder.

    The report holds every section whose results the folder has: the rate law,
    parameters with their intervals, each run's fit and residual checks,
    posteriors, ranking, temperature analysis, warnings, cautions and
    provenance, with figures embedded so that it opens anywhere offline.

    Example:

      kinfit report kinfit-demo
    """
    with _handled():
        path = _report(folder)
        typer.echo(f"Wrote {path}")


def main():
    """Entry point of the ``kinfit`` console script."""
    app()


if __name__ == "__main__":
    main()
