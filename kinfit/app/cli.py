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
from typing import List, Literal, Optional

import typer

from kinfit.app.options import (
    check_same_units,
    numbers,
    pairs,
    parse_components,
    simulation_units,
)
from kinfit.app.progress import ProgressBar, SamplingBar, compile_first
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
    context_settings={"help_option_names": ["-h", "--help"]},
    help="kinfit: rate laws, orders and rate constants from the whole time course of "
         "every run at once.\n\nShort options mean the same in every command: -m --model, "
         "-o --out, -i --initial, -T --temperature, -h --help.\n\nExample:\n\n\b\n"
         "  kinfit demo --out kinfit-demo\n  kinfit templates --out kinfit-start",
)

# Allowed values of the options with a fixed set (tests check them against the library's).
TWO_STAGE = ("free", "global", "none")
NOISE = ("auto", "declared", "per-species", "shared")
MOVES = ("de", "stretch")
CRITERIA = ("aicc", "aic", "bic")

OVERWRITE_HELP = ("Replace the results of an earlier run in --out: the new files replace "
                  "theirs and the rest of them are removed; other files stay. Without it "
                  "such a folder is refused.")


def _show_version(value: bool):
    if value:
        from kinfit.core.version import __version__

        typer.echo(f"kinfit {__version__}")
        raise typer.Exit()


@app.callback()
def _options(version: bool = typer.Option(False, "--version", callback=_show_version,
                                          is_eager=True, help="Show the version and exit.")):
    """The options every command shares (only --version)."""


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


@app.command("fit")
def fit_command(
    experiment: Path = typer.Argument(..., help="Experiment file (TOML)."),
    model: Path = typer.Option(..., "--model", "-m", help="Model file (TOML)."),
    out: Path = typer.Option(Path("kinfit-fit"), "--out", "-o",
                             help="Folder for result.json, figures and curves."),
    starts: int = typer.Option(DEFAULT_STARTS, "--starts", min=1,
                               help="Starting points refined by least squares."),
    seed: int = typer.Option(DEFAULT_SEED, "--seed", help="Seed of the start screen."),
    noise: Literal["auto", "declared", "per-species", "shared"] = typer.Option(
        "auto", "--noise",
        help="How measurement noise is treated: the experiment's [noise] (declared), one "
             "σ shared by all points estimated from the fit (shared), or one σ per species "
             "estimated (per-species). auto: declared if the experiment declares noise, "
             "else shared."),
    two_stage: Literal["free", "global", "none"] = typer.Option(
        DEFAULT_TWO_STAGE, "--two-stage",
        help="For a model with a [temperature] table: the two-stage analysis beside the "
             "global fit, with free orders at each temperature, orders fixed at the global "
             "fit's values, or none."),
    components: Optional[str] = typer.Option(
        None, "--components", metavar="<auto|all|N>",
        help="For full spectra: fit the leading singular vectors the SVD finds significant "
             "(auto), a given number N of them, or every wavelength (all). Overrides the "
             "experiment file."),
    wavelengths: Optional[str] = typer.Option(
        None, "--wavelengths", metavar="<nm,nm,...>",
        help="For full spectra: wavelengths to show fitted against measured traces at, "
             "comma-separated (default: the peak of each resolved spectrum)."),
    report: bool = typer.Option(True, "--report/--no-report",
                                help="Also write the self-contained report.html."),
    overwrite: bool = typer.Option(False, "--overwrite", help=OVERWRITE_HELP),
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

    Examples (in a folder made by kinfit templates):

    \b
      kinfit fit experiment.toml --model models/power_law_two.toml --out results
      kinfit fit demo/experiment.toml --model demo/thiol_addition.toml --out thiol
      kinfit fit demo/temperature/experiment.toml --model demo/temperature/ester_hydrolysis.toml --out ester
      kinfit fit demo/spectra/spectra.toml --model demo/spectra/dye_formation.toml --wavelengths 420,560 --out dye
    """
    with _handled():
        from kinfit.app.workflows import fit_workflow

        chosen = parse_components(components)
        picks = numbers(wavelengths, "--wavelengths")
        _check_out(out, overwrite)
        exp, mech = _load(experiment, model)
        compile_first()
        outcome = fit_workflow(exp, mech, starts=starts, seed=seed, two_stage=two_stage,
                               components=chosen, wavelengths=picks, noise=noise,
                               command=_command())
        _finish(out, outcome, report, overwrite)


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


def _check_out(out, overwrite=False, resume=False):
    """The rule for an existing --out (see :mod:`kinfit.app.folders`), checked first."""
    from kinfit.app.folders import check_out

    check_out(out, overwrite=overwrite, resume=resume)


def _tidy(out, written, overwrite):
    """With --overwrite, remove the earlier results this run did not replace (before the
    report is built from the folder)."""
    if overwrite:
        from kinfit.app.folders import remove_stale

        remove_stale(out, written)


def _finish(out, outcome, report, overwrite=False):
    """Write a workflow's files (and report.html), then print its summary and the files."""
    written = _write(out, outcome.bundle)
    _tidy(out, written, overwrite)
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
    noise: Literal["auto", "declared", "per-species", "shared"] = typer.Option(
        "auto", "--noise",
        help="How measurement noise is treated: the experiment's [noise] (declared), one σ "
             "per species sampled (per-species), or one σ for all points sampled (shared). "
             "auto: declared if the experiment declares noise, else per-species."),
    moves: Literal["de", "stretch"] = typer.Option(
        DEFAULT_MOVES, "--moves",
        help="emcee's differential-evolution moves (de) or its stretch move (stretch)."),
    starts: int = typer.Option(DEFAULT_STARTS, "--starts", min=1, help="Starting points of the fit."),
    checkpoint_every: int = typer.Option(CHECKPOINT_EVERY, "--checkpoint-every", min=1,
                                         help="Write chain.npz every N steps."),
    resume: bool = typer.Option(False, "--resume", help="Continue the chain in OUT/chain.npz."),
    overwrite: bool = typer.Option(False, "--overwrite", help=OVERWRITE_HELP + " A chain "
                                   "already there is started again."),
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

    Example (in a folder made by kinfit templates):

    \b
      kinfit sample experiment.toml --model models/power_law_two.toml --out posterior --steps 2000
    """
    with _handled():
        from kinfit.app.workflows import sample_workflow
        from kinfit.estimation.chains import CHAIN_FILE

        if max_time is not None and not max_time > 0:
            raise KinfitError(f"--max-time {max_time}: expected a positive number of seconds")
        if resume and overwrite:
            raise KinfitError("--resume and --overwrite cannot be combined: continue the "
                              "chain, or start again")
        chain_file = _fresh_chain(out, CHAIN_FILE, resume, overwrite)
        exp, mech = _load(experiment, model)
        compile_first()
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
        _finish(out, outcome, report, overwrite)


def _fresh_chain(out, name, resume, overwrite):
    """The chain file in --out; refused if one is there and neither --resume nor --overwrite,
    and any other earlier results as for every command."""
    from kinfit.estimation.chains import load_chain

    if out.exists() and not out.is_dir():
        raise KinfitError(f"--out {out}: exists and is not a folder")
    chain_file = out / name
    if chain_file.exists() and not resume and not overwrite:
        state, _ = load_chain(chain_file)
        raise KinfitError(f"{chain_file} already holds a chain ({state.n_done} steps); add "
                          f"--resume to continue it or --overwrite to start again")
    _check_out(out, overwrite, resume=resume and chain_file.exists())
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
    initial: List[str] = typer.Option(..., "--initial", "-i", metavar="<SPECIES=VALUE>",
                                      help="Starting concentration, in the concentration "
                                           "unit; repeat."),
    set_: Optional[List[str]] = typer.Option(None, "--set", metavar="<NAME=VALUE>",
                                             help="Parameter value; repeat. Others take the "
                                                  "model file's values."),
    set_short: Optional[List[str]] = typer.Option(None, "-s", hidden=True),
    until: float = typer.Option(100.0, "--until", help="Last time, in the time unit."),
    points: int = typer.Option(201, "--points", min=2, help="Number of time points."),
    time_unit: Optional[str] = typer.Option(
        None, "--time-unit", metavar="<unit>",
        help="Time unit of --until and of the rate constants (s, min, h, ...). Taken from "
             "the fit with --fit; needed otherwise."),
    concentration_unit: Optional[str] = typer.Option(
        None, "--concentration-unit", metavar="<unit>",
        help="Concentration unit of --initial and of the rate constants (M, mM, ...). "
             "Taken from the fit with --fit; needed otherwise."),
    temperature: Optional[float] = typer.Option(
        None, "--temperature", "-T",
        help="Temperature to predict at, for a model with a [temperature] table."),
    temperature_unit: Literal["K", "degC"] = typer.Option(
        "K", "--temperature-unit", help="Unit of --temperature."),
    fit_file: Optional[Path] = typer.Option(
        None, "--fit",
        help="result.json (or temperature.json) written by kinfit fit: predict from the "
             "fitted values, in the fit's units, with an uncertainty band from its "
             "covariance, and flag conditions outside the fitted range."),
    draws: int = typer.Option(DEFAULT_DRAWS, "--draws", min=0,
                              help="Parameter draws for the uncertainty band (with --fit)."),
    seed: int = typer.Option(DEFAULT_SEED, "--seed", help="Seed of the parameter draws."),
    out: Path = typer.Option(Path("kinfit-simulation"), "--out", "-o",
                             help="Folder for simulation.csv and simulation.png."),
    overwrite: bool = typer.Option(False, "--overwrite", help=OVERWRITE_HELP),
):
    """Predict concentrations over time for given starting concentrations.

    The model file's values carry no units: give --time-unit and
    --concentration-unit, or start from a fit with --fit (its values, units
    and covariance are used). With --fit the prediction carries the fit's
    uncertainty and is flagged EXTRAPOLATED when a starting concentration
    (or, with --temperature, the temperature) lies outside the fitted range;
    prediction.json is written too.

    Examples (in a folder made by kinfit templates; the last one after the
    fits in kinfit fit --help):

    \b
      kinfit simulate models/consecutive.toml -i A=1.0 --set k1=0.5 --set k2=0.1 --until 60 --time-unit s --concentration-unit M
      kinfit simulate models/power_law_two.toml -i A=0.1 -i B=0.3 --fit results/result.json --until 120 --out predicted
      kinfit simulate demo/temperature/ester_hydrolysis.toml -i ester=20 -i hydroxide=40 -T 30 --temperature-unit degC --fit ester/temperature.json --until 60 --out ester-30C
    """
    with _handled():
        import numpy as np

        from kinfit.app.workflows import simulate_workflow
        from kinfit.inputs.mechanism import load_mechanism

        if not until > 0:
            raise KinfitError(f"--until {until}: expected a positive time")
        _check_out(out, overwrite)
        mech = load_mechanism(model)
        initial_conc = pairs(initial, "--initial")
        overrides = pairs(list(set_ or []) + list(set_short or []), "--set")
        times = np.linspace(0.0, until, points)
        units = simulation_units(time_unit, concentration_unit, fit_file)
        compile_first()
        if temperature is not None or fit_file is not None or mech.temperature is not None:
            outcome = _predict(mech, initial_conc, overrides, times, units, temperature,
                               temperature_unit, fit_file, draws, seed, time_unit,
                               concentration_unit)
        else:
            outcome = simulate_workflow(mech, initial_conc, overrides, times, units)
        written = _write(out, outcome.bundle)
        _tidy(out, written, overwrite)
        typer.echo(outcome.summary)
        typer.echo(f"Wrote {', '.join(p.name for p in written)} in {out}")


def _predict(mech, initial, overrides, times, units, temperature, temperature_unit, fit_file,
             draws, seed, time_unit=None, concentration_unit=None):
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
    if fit_file is not None:
        check_same_units(basis.units, time_unit, concentration_unit, fit_file)
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

    Example (in a folder made by kinfit templates):

    \b
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
    overwrite: bool = typer.Option(False, "--overwrite", help=OVERWRITE_HELP),
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

    \b
      kinfit demo --out kinfit-demo
    """
    with _handled():
        import textwrap

        from kinfit.app import demo, demo_spectra, workflows

        _check_out(out, overwrite)
        command = _command()
        compile_first()
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
        names = sorted({p.name for p in written} | {"report.html"})
        typer.echo(f"Inputs in {out / 'inputs'}; results ({', '.join(names)}) in {out}")

        typer.echo("\n" + "=" * 88 + "\n" + textwrap.fill(demo_spectra.SCENARIO, 88) + "\n")
        spectrometer = workflows.spectrometer_demo_workflow(
            demo_spectra.write_inputs(out / "inputs" / "spectrometer"), command)
        _tidy(out, written + _write(out / "spectrometer", spectrometer.bundle), overwrite)
        _report(out)          # the reports last, from the folders as they now are
        for key in ("absorbance", "spectra"):
            _report(out / "spectrometer" / key)
        typer.echo(spectrometer.summary)
        typer.echo(f"\nInputs in {out / 'inputs' / 'spectrometer'}; results (with report.html, "
                   f"spectra.csv, spectra.png, wavelength_traces.png, residual_map.png, "
                   f"components.png) in {out / 'spectrometer'}")


@app.command("rank")
def rank_command(
    experiment: Path = typer.Argument(..., help="Experiment file (TOML)."),
    model: List[Path] = typer.Option(..., "--model", "-m", metavar="<path>",
                                     help="Candidate model file (TOML); repeat for each."),
    orders: Optional[List[str]] = typer.Option(
        None, "--orders", metavar="<NAME=V1,V2,...>",
        help="Order search; repeat. Fixes these order parameters of the "
             "first model that has them to every combination of the values; that model's "
             "free-order fit is ranked alongside."),
    out: Path = typer.Option(Path("kinfit-rank"), "--out", "-o",
                             help="Folder for ranking.json, ranking.txt and figures."),
    starts: int = typer.Option(DEFAULT_STARTS, "--starts", min=1,
                               help="Starting points for each model given."),
    fixed_order_starts: int = typer.Option(
        LATTICE_STARTS, "--fixed-order-starts", min=1,
        help="Starting points for each candidate of the order search, whose orders are "
             "fixed (they start from the free-order fit)."),
    lattice_starts: Optional[int] = typer.Option(None, "--lattice-starts", min=1,
                                                 hidden=True),
    criterion: Literal["aicc", "aic", "bic"] = typer.Option(
        DEFAULT_CRITERION, "--criterion", case_sensitive=False,
        help="Sort by AICc, AIC or BIC."),
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
    overwrite: bool = typer.Option(False, "--overwrite", help=OVERWRITE_HELP),
):
    """Fit several candidate rate laws to every run and rank them.

    Ranks by AICc (Akaike and BIC weights), tests nested pairs (F-test,
    likelihood ratio), averages shared parameters over the candidates, and
    sets the initial-rates method beside the best one-step rate law. Writes
    ranking.json, ranking.txt, weights.png, initial_rates.png/.csv,
    provenance.json, report.html and the best candidate's fit (best/) into --out.

    Example (in a folder made by kinfit templates):

    \b
      kinfit rank demo/experiment.toml --model demo/thiol_addition.toml --orders m_thiol=0,0.5,1,1.5,2 --orders m_acrylate=0,0.5,1,1.5,2 --out ranking
    """
    with _handled():
        from kinfit.analysis.lattice import parse_order_grid
        from kinfit.app.workflows import rank_workflow
        from kinfit.inputs.experiment import load_experiment
        from kinfit.inputs.mechanism import load_mechanism

        grid = parse_order_grid(orders)
        if not 0 < conversion <= 1:
            raise KinfitError(f"--conversion {conversion}: expected a fraction in (0, 1]")
        _check_out(out, overwrite)
        exp = load_experiment(experiment)
        mechanisms = [load_mechanism(m) for m in model]
        compile_first()       # once, here, rather than in every worker process
        bar = ProgressBar("fitting candidates") if sys.stderr.isatty() else None
        try:
            outcome = rank_workflow(exp, mechanisms, grid, top=top, seed=seed,
                                    command=_command(), starts=starts,
                                    lattice_starts=lattice_starts or fixed_order_starts,
                                    workers=workers, criterion=criterion.lower(),
                                    cross_check=initial_rates, max_conversion=conversion,
                                    progress=bar)
        finally:
            if bar is not None:
                bar.close()
        written = _write(out, outcome.bundle)
        _tidy(out, written, overwrite)
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

    \b
      kinfit report kinfit-demo
    """
    with _handled():
        path = _report(folder)
        typer.echo(f"Wrote {path}")


@app.command("templates")
def templates_command(
    out: Path = typer.Option(Path("kinfit-start"), "--out", "-o",
                             help="Folder to copy the files into (created if missing)."),
    overwrite: bool = typer.Option(False, "--overwrite",
                                   help="Replace files of the same names already there. "
                                        "Without it such a folder is refused."),
):
    """Copy model files, a worked example and the demo studies into a folder to start from.

    Writes models/ (one-, two- and three-reactant power laws, zero-, first-
    and second-order decay, reversible, consecutive, parallel,
    pre-equilibrium, autocatalytic, catalysed, and two with temperature
    dependence), the README's worked example (experiment.toml, traces.csv)
    and demo/ (the invented studies the --help examples use: demo/ an HPLC
    study, demo/temperature/ runs at four temperatures, demo/spectra/
    absorbance and diode-array spectra). Every example in the README and in
    --help runs as written inside that folder.

    Example:

    \b
      kinfit templates --out kinfit-start
      cd kinfit-start
      kinfit fit experiment.toml --model models/power_law_two.toml --out results
    """
    with _handled():
        from kinfit.app.folders import copy_templates

        written = copy_templates(out, overwrite=overwrite)
        folders = sorted({p.relative_to(out).parts[0] for p in written
                          if len(p.relative_to(out).parts) > 1})
        typer.echo(f"Copied {len(written)} files into {out}: "
                   f"{', '.join(f'{name}/' for name in folders)} and the worked example "
                   f"(experiment.toml, traces.csv)")
        typer.echo(f"Next: cd {out} and, for example,\n  kinfit fit experiment.toml --model "
                   f"models/power_law_two.toml --out results")


def main():
    """Entry point of the ``kinfit`` console script."""
    app()


if __name__ == "__main__":
    main()
