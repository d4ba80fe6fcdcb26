"""The ``kinfit`` command: a thin layer over the workflows.

Each command parses its arguments, calls a workflow of
:mod:`kinfit.app.workflows`, writes the files it returns with
:func:`~kinfit.output.bundle.write_bundle` and prints its text. A
:class:`~kinfit.core.errors.KinfitError` becomes one clear line on stderr and
exit code 2; anything else is a bug and keeps its traceback (exit code 1).
Heavy libraries are imported inside the commands so that ``kinfit --help`` is
fast.
"""

from __future__ import annotations

import sys
import warnings
from contextlib import contextmanager
from pathlib import Path
from typing import List, Optional

import typer

from kinfit.app.progress import ProgressBar, SamplingBar
from kinfit.core.defaults import (
    CHECKPOINT_EVERY,
    DEFAULT_CRITERION,
    DEFAULT_DRAWS,
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
    two_stage: str = typer.Option(DEFAULT_TWO_STAGE, "--two-stage",
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
        from kinfit.app.workflows import fit_workflow

        if two_stage not in ("free", "global", "none"):
            raise KinfitError(f"--two-stage {two_stage}: expected free, global or none")
        chosen = _components(components)
        picks = _numbers(wavelengths, "--wavelengths")
        exp, mech = _load(experiment, model)
        outcome = fit_workflow(exp, mech, starts=starts, seed=seed, two_stage=two_stage,
                               components=chosen, wavelengths=picks, command=_command())
        _finish(out, outcome, report)


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


def _command():
    """The command line as recorded in provenance.json."""
    return ["kinfit"] + sys.argv[1:]


def _load(experiment, model):
    from kinfit.inputs.experiment import load_experiment
    from kinfit.inputs.mechanism import load_mechanism

    return load_experiment(experiment), load_mechanism(model)


def _report(out):
    from kinfit.output.html import build_report

    return build_report(out)


def _write(out, bundle):
    from kinfit.output.bundle import write_bundle

    return write_bundle(out, bundle)


def _finish(out, outcome, report):
    """Write a workflow's files (and report.html), then print its summary and the files."""
    written = _write(out, outcome.bundle)
    if report:
        written.append(_report(out))
    typer.echo(outcome.summary)
    typer.echo(f"\nWrote {', '.join(p.name for p in written)} in {out}")


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
        from kinfit.app.workflows import sample_workflow
        from kinfit.estimation.chains import CHAIN_FILE

        if max_time is not None and not max_time > 0:
            raise KinfitError(f"--max-time {max_time}: expected a positive number of seconds")
        chain_file = _fresh_chain(out, CHAIN_FILE, resume, overwrite)
        exp, mech = _load(experiment, model)
        bar = SamplingBar() if sys.stderr.isatty() else None
        try:
            with _stopped_by_sigterm():
                outcome = sample_workflow(
                    exp, mech, seed=seed, chain_file=chain_file, with_fit=report,
                    command=_command(), walkers=walkers, steps=steps, noise=noise,
                    moves=moves, burn=burn, thin=thin, checkpoint_every=checkpoint_every,
                    resume=resume, max_time=max_time, starts=starts, profile=profile,
                    progress=bar)
        finally:
            if bar is not None:
                bar.close()
        _finish(out, outcome, report)


def _fresh_chain(out, name, resume, overwrite):
    """The chain file in --out; refused if one is there and neither --resume nor --overwrite."""
    from kinfit.estimation.chains import load_chain

    if out.exists() and not out.is_dir():
        raise KinfitError(f"--out {out}: exists and is not a folder")
    chain_file = out / name
    if chain_file.exists() and not resume and not overwrite:
        state, _ = load_chain(chain_file)
        raise KinfitError(f"{chain_file} already holds a chain ({state.n_done} steps); add "
                          f"--resume to continue it or --overwrite to start again")
    return chain_file


@contextmanager
def _stopped_by_sigterm():
    """SIGTERM stops sampling as Ctrl-C does, so that the chain so far is kept."""
    import signal

    def stop(signum, frame):
        raise KeyboardInterrupt

    previous = signal.signal(signal.SIGTERM, stop)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


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

        from kinfit.app.workflows import simulate_workflow
        from kinfit.core.units import Units, check_unit
        from kinfit.inputs.mechanism import load_mechanism

        if not until > 0:
            raise KinfitError(f"--until {until}: expected a positive time")
        units = Units(check_unit(time_unit, "time", "--time-unit"),
                      check_unit(concentration_unit, "concentration", "--concentration-unit"))
        mech = load_mechanism(model)
        initial_conc, overrides = _pairs(initial, "--initial"), _pairs(set_, "--set")
        times = np.linspace(0.0, until, points)
        if temperature is not None or fit_file is not None or mech.temperature is not None:
            outcome = _predict(mech, initial_conc, overrides, times, units, temperature,
                               temperature_unit, fit_file, draws, seed)
        else:
            outcome = simulate_workflow(mech, initial_conc, overrides, times, units)
        written = _write(out, outcome.bundle)
        typer.echo(outcome.summary)
        typer.echo(f"Wrote {', '.join(p.name for p in written)} in {out}")


def _predict(mech, initial, overrides, times, units, temperature, temperature_unit, fit_file,
             draws, seed):
    """The prediction path of ``simulate``: temperature, fit basis, band and flags."""
    from kinfit.app.workflows import predict_workflow, prediction_basis
    from kinfit.core.units import check_unit, to_kelvin

    kelvin = None
    if temperature is not None:
        unit = check_unit(temperature_unit, "temperature", "--temperature-unit")
        kelvin = to_kelvin(temperature, unit)
        if not kelvin > 0:
            raise KinfitError(f"--temperature {temperature:g} {unit}: at or below absolute zero")
    if mech.temperature is not None and kelvin is None:
        raise KinfitError(f"{mech.source}: the model's rate constants depend on temperature; "
                          f"give --temperature (and --temperature-unit degC for °C)")
    if fit_file is not None and overrides:
        raise KinfitError("--set and --fit cannot be combined: with --fit the fitted "
                          "values and their uncertainty are used")
    basis, note = prediction_basis(mech, units, fit_file, overrides)
    if note:
        typer.echo(note)
    return predict_workflow(basis, initial, times, kelvin, draws=draws, seed=seed)


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
        from kinfit.numerics.svd import significant_components, stacked_spectra
        from kinfit.output.signals import format_components

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
        import textwrap

        from kinfit.app import demo, demo_spectra, workflows

        command = _command()
        typer.echo(textwrap.fill(demo.SCENARIO, 88) + "\n")
        main = workflows.demo_fit_workflow(demo.write_inputs(out / "inputs"), command)
        written = _write(out, main.bundle)
        typer.echo(main.summary)
        typer.echo("\n" + "=" * 88 + "\n")
        ranking = workflows.demo_ranking_workflow(main.result)
        written += _write(out, ranking.bundle)
        typer.echo(ranking.summary)
        if full:
            bar = SamplingBar() if sys.stderr.isatty() else None
            try:
                post = workflows.demo_posterior_workflow(main.result, progress=bar)
            finally:
                if bar is not None:
                    bar.close()
            typer.echo(post.summary)
            written += _write(out, post.bundle)
        written.append(_report(out))
        typer.echo(f"Inputs in {out / 'inputs'}; results "
                   f"({', '.join(sorted({p.name for p in written}))}) in {out}")

        typer.echo("\n" + "=" * 88 + "\n" + textwrap.fill(demo_spectra.SCENARIO, 88) + "\n")
        spectrometer = workflows.spectrometer_demo_workflow(
            demo_spectra.write_inputs(out / "inputs" / "spectrometer"), command)
        _write(out / "spectrometer", spectrometer.bundle)
        for key in ("absorbance", "spectra"):
            _report(out / "spectrometer" / key)
        typer.echo(spectrometer.summary)
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
        from kinfit.app.workflows import rank_workflow
        from kinfit.inputs.experiment import load_experiment
        from kinfit.inputs.mechanism import load_mechanism

        grid = parse_order_grid(orders)
        if not 0 < conversion <= 1:
            raise KinfitError(f"--conversion {conversion}: expected a fraction in (0, 1]")
        exp = load_experiment(experiment)
        mechanisms = [load_mechanism(m) for m in model]
        bar = ProgressBar("fitting candidates") if sys.stderr.isatty() else None
        try:
            outcome = rank_workflow(exp, mechanisms, grid, top=top, seed=seed,
                                    command=_command(), starts=starts,
                                    lattice_starts=lattice_starts, workers=workers,
                                    criterion=criterion.lower(), cross_check=initial_rates,
                                    max_conversion=conversion, progress=bar)
        finally:
            if bar is not None:
                bar.close()
        written = _write(out, outcome.bundle)
        if report:
            written.append(_report(out))
        typer.echo(outcome.summary)
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
