"""Text summaries and output folders.

``format_*`` functions return text; ``write_*`` functions write files, each
atomically (see :mod:`kinfit.atomic`), after everything to be written has
been computed, so that a failure leaves no half-written output.
"""

from __future__ import annotations

import io
import math
import textwrap
from pathlib import Path

import numpy as np

from kinfit.core.atomic import write_bytes, write_json, write_text
from kinfit.core.errors import KinfitError
from kinfit.core.formatting import CAUTIONS, format_value

__all__ = ["CAUTIONS", "format_value", "format_fit", "write_fit", "write_simulation",
           "figure_bytes", "temperature_cautions", "format_activation", "temperature_outputs",
           "format_prediction", "write_prediction", "format_ranking", "format_cross_check",
           "write_ranking", "format_posterior", "write_posterior", "format_signals",
           "signal_outputs", "format_components"]

def _table(rows, header):
    widths = [max(len(str(r[i])) for r in [header] + rows) for i in range(len(header))]
    lines = ["  " + "  ".join(str(h).ljust(w) for h, w in zip(header, widths)).rstrip()]
    for r in rows:
        lines.append("  " + "  ".join(str(c).ljust(w) for c, w in zip(r, widths)).rstrip())
    return lines


def format_fit(result, cautions=True):
    """Readable summary of a :class:`~kinfit.fit.FitResult` for the terminal.

    Shows each rate law with fitted orders and its overall order, every
    parameter with its standard error and unit, the fit statistics, strong
    correlations, warnings and (by default) the cautions on using the result.
    """
    exp, mech = result.experiment, result.mechanism
    out = [f"Global fit of {len(exp.runs)} runs ({result.n_points} points) to "
           f"'{mech.name}'",
           f"  experiment: {exp.source}", f"  model:      {mech.source}", ""]
    out.append("Rate law (IUPAC rate of reaction: d[X]/dt = ν_X × rate)")
    for row in result.rate_laws():
        direction = " (reverse)" if row["direction"] == "reverse" else ""
        out.append(f"  {row['reaction']}{direction}")
        order = row["overall_order"]
        out.append(f"    rate = {row['rate']}    overall order {order:.3g}")
    out.append("")
    out.append("Parameters")
    rows = []
    for name, value in result.values.items():
        se = result.stderr.get(name)
        vary = result.bounds.get(name, (0, 0, True))[2]
        shown = format_value(value, se) if vary else f"{format_value(value)} (fixed)"
        flag = "  at a bound" if name in result.at_bounds else ""
        rows.append((name, shown, result.units.get(name) or "", result.roles.get(name, "")
                     + flag))
    out += _table(rows, ("name", "value ± standard error", "unit", "role"))
    out.append("")
    noise_unit = exp.units.concentration
    if getattr(result, "signals", None) is not None:
        noise_unit = "(concentration or signal units)" if any(
            t.species in mech.species for r in exp.runs for t in r.traces) else (
            result.signals.unit or "(signal units)")
    noise = ("declared noise" if result.noise_declared
             else f"noise estimated from the fit: σ = {result.sigma:.3g} {noise_unit}")
    out.append(f"Fit: χ² = {result.chi2:.6g}, N = {result.n_points}, p = {result.n_free}, "
               f"χ²/(N−p) = {result.reduced_chi2:.3g} ({noise})")
    out.append(f"     AIC = {result.aic:.6g}, AICc = {result.aicc:.6g}, BIC = {result.bic:.6g}")
    out.append(f"     {result.starts_at_best} of {result.starts} starting point(s) reached the "
               f"best fit; {'converged' if result.success else 'NOT converged'}; "
               f"{result.n_integrations} integrations")
    out += textwrap.wrap(f"integrators: {result.method}", 88, initial_indent="     ",
                         subsequent_indent="       ")
    if result.correlation is not None:
        strong = []
        names = result.free_names
        for i in range(len(names)):
            for j in range(i + 1, len(names)):
                c = result.correlation[i, j]
                if abs(c) >= 0.9:
                    strong.append(f"{names[i]}–{names[j]} {c:+.3f}")
        if strong:
            out.append(f"     strong correlations: {', '.join(strong)}")
    return "\n".join(out + _warnings_and_cautions(result.warnings, cautions))


def _warnings_and_cautions(warnings, cautions):
    """The closing lines of a summary: its warnings and (optionally) the cautions."""
    out = []
    if warnings:
        out += ["", "Warnings"]
        for w in warnings:
            out += textwrap.wrap(w, 88, initial_indent="  - ", subsequent_indent="    ",
                                 break_on_hyphens=False)
    if cautions:
        out += ["", "Caution"] + textwrap.wrap(CAUTIONS, 88, initial_indent="  ",
                                               subsequent_indent="  ",
                                               break_on_hyphens=False)
    return out


def figure_bytes(fig, fmt="png", dpi=150):
    """Render a matplotlib figure to bytes in memory."""
    buffer = io.BytesIO()
    fig.savefig(buffer, format=fmt, dpi=dpi)
    return buffer.getvalue()


def _curves_csv(result):
    lines = ["run,time," + ",".join(result.mechanism.species)]
    for run, curve in zip(result.experiment.runs, result.curves):
        for t, row in zip(curve.times, curve.conc):
            lines.append(f"{run.name},{t:.10g}," + ",".join(f"{v:.10g}" for v in row))
    return "\n".join(lines) + "\n"


def _prepare(out_dir):
    out_dir = Path(out_dir)
    if out_dir.exists() and not out_dir.is_dir():
        raise KinfitError(f"--out {out_dir}: exists and is not a folder")
    return out_dir


def write_fit(out_dir, result, extra_files=None, extra_summary=None, provenance=None):
    """Write a fit's outputs into `out_dir`.

    Files: ``result.json`` (see :meth:`FitResult.to_dict`), ``summary.txt``,
    ``fit.png``/``fit.svg`` (data and fitted curves), ``residuals.png``/
    ``residuals.svg`` and ``fitted_curves.csv``.

    Parameters
    ----------
    out_dir : str or os.PathLike
    result : FitResult
    extra_files : dict of str to bytes or str, optional
        More files to write beside them (already computed), e.g. from
        :func:`temperature_outputs`.
    extra_summary : str, optional
        Text appended to ``summary.txt``.
    provenance : dict, optional
        Written as ``provenance.json`` (see :func:`kinfit.provenance.collect`).

    Returns
    -------
    list of pathlib.Path
        The files written.
    """
    from kinfit.figures.plots import plot_residuals, plot_traces

    out_dir = _prepare(out_dir)
    figures = {"fit": plot_traces(result), "residuals": plot_residuals(result)}
    payload = {f"{name}.{fmt}": figure_bytes(fig, fmt)
               for name, fig in figures.items() for fmt in ("png", "svg")}
    summary = format_fit(result)
    if extra_summary:
        summary += "\n\n" + extra_summary
    payload.update({name: blob.encode("utf-8") if isinstance(blob, str) else blob
                    for name, blob in (extra_files or {}).items()})
    if provenance is not None:
        import json

        payload["provenance.json"] = (json.dumps(provenance, indent=2, ensure_ascii=False)
                                      + "\n").encode("utf-8")
    curves = _curves_csv(result)
    data = result.to_dict()
    out_dir.mkdir(parents=True, exist_ok=True)
    written = []
    for name, blob in payload.items():
        write_bytes(out_dir / name, blob)
        written.append(out_dir / name)
    write_text(out_dir / "summary.txt", summary + "\n")
    write_text(out_dir / "fitted_curves.csv", curves)
    write_json(out_dir / "result.json", data)
    return written + [out_dir / "summary.txt", out_dir / "fitted_curves.csv",
                      out_dir / "result.json"]


def write_simulation(out_dir, trajectory, units=None, title=None):
    """Write ``simulation.csv`` and ``simulation.png``/``.svg`` for a trajectory.

    Returns
    -------
    list of pathlib.Path
    """
    from kinfit.figures.plots import plot_trajectory

    out_dir = _prepare(out_dir)
    fig = plot_trajectory(trajectory, units, title)
    images = {f"simulation.{fmt}": figure_bytes(fig, fmt) for fmt in ("png", "svg")}
    lines = ["time," + ",".join(trajectory.species)]
    for t, row in zip(trajectory.times, np.asarray(trajectory.conc)):
        lines.append(f"{t:.10g}," + ",".join(f"{v:.10g}" for v in row))
    out_dir.mkdir(parents=True, exist_ok=True)
    write_text(out_dir / "simulation.csv", "\n".join(lines) + "\n")
    for name, blob in images.items():
        write_bytes(out_dir / name, blob)
    return [out_dir / "simulation.csv"] + [out_dir / name for name in images]


# ------------------------------------------------------------ temperature

def _celsius(kelvin):
    from scipy.constants import convert_temperature

    return float(convert_temperature(kelvin, "K", "C"))


def _kelvin_celsius(kelvin):
    return f"{kelvin:.2f} K ({_celsius(kelvin):.1f} °C)"


def temperature_cautions(temperature_range=None):
    """The cautions shown with every temperature fit and prediction.

    Parameters
    ----------
    temperature_range : (float, float), optional
        The measured range, kelvin, quoted in the text.
    """
    measured = ("the measured temperature range" if temperature_range is None else
                f"the measured range, {_kelvin_celsius(temperature_range[0])} to "
                f"{_kelvin_celsius(temperature_range[1])}")
    return (
        f"Activation parameters and the rate constants predicted from them hold only within "
        f"{measured}, and for the concentrations, solvent and mixing of the runs. "
        f"Extrapolation beyond the measured range is unsafe: the mechanism, the "
        f"rate-limiting step or the phase behaviour may change, and a small error in Ea "
        f"grows fast with distance in 1/T. Rate laws measured at bench scale over a limited "
        f"temperature range must not alone decide the thermal safety of a scaled-up process "
        f"(heat release, cooling failure, thermal runaway): defer to reaction calorimetry, "
        f"a process-safety review, local codes and licensed professional practice."
    )


def _interval(pair, digits=4):
    if pair is None:
        return "—"
    return f"{pair[0]:.{digits}g} – {pair[1]:.{digits}g}"


def _law_text(act):
    if act.law == "arrhenius":
        return "Arrhenius, k(T) = k_ref exp[−Ea/R (1/T − 1/T_ref)]"
    return ("Eyring, k(T) = (κ k_B T/h) exp(ΔS‡/R) exp(−ΔH‡/RT), fitted as "
            f"k_ref (T/T_ref) exp[−ΔH‡/R (1/T − 1/T_ref)], κ = {act.kappa:g}")


def format_activation(activations, two_stage=None, cautions=True):
    """Text summary of the activation parameters (and the two-stage analysis beside them).

    Parameters
    ----------
    activations : sequence of Activation
    two_stage : TwoStage, optional
        With its ``order_warnings`` when it was given the global fit.
    cautions : bool
        Append :func:`temperature_cautions`.
    """
    out = ["Temperature dependence (global fit of all runs at all temperatures)"]
    level = 100 * (activations[0].level if activations else 0.95)
    for act in activations:
        lo, hi = act.temperature_range
        out.append(f"  {act.constant}: {_law_text(act)}")
        out.append(f"    T_ref = {_kelvin_celsius(act.reference)}, where {act.constant} "
                   f"= k_ref; {len(act.rates)} temperatures")
        out.append(f"    runs from {_kelvin_celsius(lo)} to {_kelvin_celsius(hi)}")
        rows = []
        for e in act.estimates:
            label = e.label + (" (fitted)" if e.fitted else "")
            rows.append((label, format_value(e.value, e.stderr), e.unit, _interval(e.interval),
                         _interval(e.profile_interval), _interval(e.posterior_interval)))
        out += _table(rows, ("quantity", "value ± standard error", "unit",
                             f"{level:g} % interval", "profile", "posterior"))
        out.append("    ΔS‡ and ΔG‡ for a standard state of 1 mol/L; profile and posterior "
                   "intervals")
        out.append("    appear when those analyses are run")
        out.append(f"  {act.constant} at each measured temperature ({act.unit or ''})")
        rows = [(f"{r.temperature:.2f}", f"{_celsius(r.temperature):.1f}",
                 format_value(r.value, r.stderr), _interval(r.interval))
                for r in act.rates]
        out += ["  " + line for line in _table(rows, ("T (K)", "T (°C)",
                                                       "k ± standard error",
                                                       f"{level:g} % interval"))]
        for note in act.notes:
            out += textwrap.wrap(note, 88, initial_indent="  note: ", subsequent_indent="    ")
    if two_stage is not None:
        out += [""] + _format_two_stage(two_stage, activations)
    if cautions:
        span = activations[0].temperature_range if activations else None
        out += ["", "Caution (temperature)"] + textwrap.wrap(
            temperature_cautions(span), 88, initial_indent="  ", subsequent_indent="  ",
            break_on_hyphens=False)
    return "\n".join(out)


def _format_two_stage(two_stage, activations):
    how = ("its own orders" if two_stage.orders == "free"
           else "orders fixed at the global fit's values")
    out = textwrap.wrap(f"Two-stage analysis (k fitted at each temperature with {how}, then "
                        f"weighted straight lines of ln k and ln(k/T) against 1/T)", 88,
                        subsequent_indent="  ")
    names = [n for n in two_stage.groups[0].values]
    rows = []
    for g in two_stage.groups:
        rows.append((f"{g.temperature:.2f}", ", ".join(g.runs),
                     *[format_value(g.values[n], g.stderr.get(n)) for n in names]))
    out += _table(rows, ("T (K)", "runs", *names))
    level = 100 * two_stage.level
    for law in two_stage.laws:
        act = next((a for a in activations if a.constant == law.constant), None)
        rows = []
        for e in law.estimates:
            glob = act.estimate(e.name) if act is not None else None
            rows.append((e.label, format_value(e.value, e.stderr), e.unit,
                         _interval(e.interval),
                         _interval(glob.interval) if glob is not None else "—"))
        out.append(f"  {law.constant}: {law.arrhenius.n} temperatures")
        out += _table(rows, ("quantity", "two-stage value ± s.e.", "unit",
                             f"two-stage {level:g} %", f"global fit {level:g} %"))
        for note in law.notes:
            out += textwrap.wrap(note, 88, initial_indent="  note: ", subsequent_indent="    ")
    for message in two_stage.order_warnings:
        out += textwrap.wrap(message, 88, initial_indent="  warning: ", subsequent_indent="    ")
    return out


def temperature_outputs(activations, two_stage=None, basis=None):
    """Files and summary text of a temperature fit, computed but not written.

    Returns
    -------
    files : dict of str to bytes or str
        ``temperature.json``, ``arrhenius.png``/``.svg`` and
        ``eyring.png``/``.svg``; pass to :func:`write_fit` as `extra_files`.
    summary : str
        :func:`format_activation` with the cautions.

    Notes
    -----
    ``temperature.json`` holds ``activation`` (one entry per rate constant,
    see :meth:`Activation.to_dict`), ``two_stage`` (see
    :meth:`TwoStage.to_dict`, or null), ``order_warnings``,
    ``prediction_basis`` (see :func:`kinfit.prediction.basis_to_dict`; read
    by ``kinfit simulate --fit``) and ``cautions``.
    """
    import json

    from kinfit.figures.plots import plot_arrhenius, plot_eyring
    from kinfit.inputs.fit_basis import basis_to_dict
    span = activations[0].temperature_range if activations else None
    data = {
        "activation": [a.to_dict() for a in activations],
        "two_stage": None if two_stage is None else two_stage.to_dict(),
        "order_warnings": [] if two_stage is None else list(two_stage.order_warnings),
        "prediction_basis": None if basis is None else basis_to_dict(basis),
        "cautions": temperature_cautions(span),
    }
    files = {"temperature.json": json.dumps(_plain(data), indent=2, ensure_ascii=False) + "\n"}
    for name, plot in (("arrhenius", plot_arrhenius), ("eyring", plot_eyring)):
        fig = plot(activations, two_stage)
        for fmt in ("png", "svg"):
            files[f"{name}.{fmt}"] = figure_bytes(fig, fmt)
    return files, format_activation(activations, two_stage)


def _plain(value):
    """JSON-ready copy: numpy numbers to float, non-finite numbers to null."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, (np.floating, float)):
        return float(value) if math.isfinite(value) else None
    if isinstance(value, np.integer):
        return int(value)
    return value


def format_prediction(prediction, title=None):
    """Text summary of a :class:`~kinfit.prediction.Prediction`, flags first."""
    units = prediction.units
    out = []
    if prediction.extrapolated:
        out.append("EXTRAPOLATED: this prediction lies outside the conditions the fit was "
                   "measured in:")
        out += [f"  - {flag}" for flag in prediction.flags]
        out.append("")
    if not prediction.range_known:
        out.append("Not checked for extrapolation: no fitted range is known (predict from a "
                   "fit with --fit to check it).")
        out.append("")
    head = title or "Prediction"
    if prediction.temperature is not None:
        head += f" at {_kelvin_celsius(prediction.temperature)}"
    out.append(head)
    for name, rate in prediction.rates:
        line = f"  {name}({rate.temperature:.2f} K) = {format_value(rate.value, rate.stderr)}"
        if rate.interval is not None:
            line += f", {100 * prediction.level:g} % interval {_interval(rate.interval)}"
        out.append(line)
    t = prediction.times[-1]
    out.append(f"  at t = {t:g} {units.time}:")
    for i, s in enumerate(prediction.species):
        line = f"    [{s}] = {prediction.conc[-1, i]:.4g} {units.concentration}"
        if prediction.lower is not None:
            line += (f"  ({100 * prediction.level:g} % band {prediction.lower[-1, i]:.4g} – "
                     f"{prediction.upper[-1, i]:.4g})")
        out.append(line)
    if prediction.lower is not None:
        out.append(f"  band from {prediction.draws} parameter draws ({prediction.uncertainty})"
                   + (f"; {prediction.failed} could not be integrated" if prediction.failed
                      else ""))
    else:
        out.append("  no uncertainty: predict from a fit (--fit) to get a band")
    if prediction.temperature is not None:
        out += ["", "Caution (temperature)"] + textwrap.wrap(
            temperature_cautions(prediction.fitted_temperature), 88, initial_indent="  ", subsequent_indent="  ",
            break_on_hyphens=False)
    return "\n".join(out)


def write_prediction(out_dir, prediction, title=None):
    """Write ``simulation.csv``, ``simulation.png``/``.svg`` and ``prediction.json``.

    ``simulation.csv`` has a time column, one column per species and, with a
    band, ``<species>_lower`` and ``<species>_upper``. ``prediction.json``
    holds :meth:`Prediction.to_dict` (with ``extrapolated`` and ``flags``)
    and the cautions.

    Returns
    -------
    list of pathlib.Path
    """
    import json

    from kinfit.figures.plots import plot_prediction

    out_dir = _prepare(out_dir)
    fig = plot_prediction(prediction, title)
    png = figure_bytes(fig)
    header = ["time", *prediction.species]
    columns = [prediction.times] + [prediction.conc[:, i] for i in range(len(prediction.species))]
    if prediction.lower is not None:
        for i, s in enumerate(prediction.species):
            header += [f"{s}_lower", f"{s}_upper"]
            columns += [prediction.lower[:, i], prediction.upper[:, i]]
    table = np.column_stack(columns)
    lines = [",".join(header)] + [",".join(f"{v:.10g}" for v in row) for row in table]
    data = prediction.to_dict()
    data["cautions"] = temperature_cautions(prediction.fitted_temperature) \
        if prediction.temperature is not None else CAUTIONS
    text = json.dumps(_plain(data), indent=2, ensure_ascii=False) + "\n"
    svg = figure_bytes(fig, "svg")
    out_dir.mkdir(parents=True, exist_ok=True)
    write_text(out_dir / "simulation.csv", "\n".join(lines) + "\n")
    write_bytes(out_dir / "simulation.png", png)
    write_bytes(out_dir / "simulation.svg", svg)
    write_text(out_dir / "prediction.json", text)
    return [out_dir / "simulation.csv", out_dir / "simulation.png", out_dir / "simulation.svg",
            out_dir / "prediction.json"]


# ----------------------------------------------------------------- signals

def format_components(components, n_absorbers=None):
    """Text summary of the SVD of stacked spectra (see :class:`kinfit.spectra.Components`)."""
    s = components.singular_values
    shown = ", ".join(f"{v:.4g}" for v in s[:8]) + (", ..." if s.size > 8 else "")
    out = [f"SVD of the spectra ({s.size} singular values): {shown}",
           f"  threshold {components.threshold:.4g} ({components.criterion}; noise "
           f"σ = {components.noise:.3g}{'' if components.noise_declared else ', estimated'})",
           f"  significant components: {components.n_significant}"
           + (f" (the model has {n_absorbers} absorbing species; a baseline that differs "
              f"between runs adds components)" if n_absorbers is not None else "")]
    if components.n_used is not None:
        out.append(f"  the fit used the leading {components.n_used} component(s); they leave out "
                   f"{100 * components.left_out:.3g} % of the data's sum of squares, noise "
                   f"alone would leave out {100 * components.noise_share:.3g} %")
    return "\n".join(out)


def format_signals(result, wavelengths=None):
    """Text summary of the signal part of a fit: linear unknowns, spectra, SVD.

    Parameters
    ----------
    result : FitResult
        With ``result.signals`` set.
    wavelengths : sequence of float, optional
        Wavelengths at which to quote the resolved spectra.
    """
    from kinfit.figures.wavelengths import choose_wavelengths

    sig = result.signals
    out = ["Signals (Beer–Lambert: signal = offset + drift·t + ℓ Σ ε_X [X]; absorptivities, "
           "offsets and",
           "drifts solved by linear least squares in every evaluation; standard errors from "
           "the full Jacobian)"]
    if sig.coefficients:
        rows = []
        for c in sig.coefficients:
            shown = "0 (held at the bound)" if c.at_bound else format_value(c.value, c.stderr)
            rows.append((c.name, shown, c.unit, c.kind))
        out += _table(rows, ("name", "value ± standard error", "unit", "kind"))
        strong = [f"{c.name}–{name} {r:+.3f}" for c in sig.coefficients
                  for name, r in c.correlation.items() if abs(r) >= 0.9]
        if strong:
            more = f" and {len(strong) - 6} more (result.json)" if len(strong) > 6 else ""
            out += textwrap.wrap(f"strong correlations with kinetic parameters: "
                                 f"{', '.join(strong[:6])}{more}", 88, initial_indent="  ",
                                 subsequent_indent="    ", break_on_hyphens=False)
    spectra = sig.spectra
    if spectra is not None:
        wl = spectra.wavelengths
        out.append(f"  spectra of {', '.join(spectra.species)} resolved at {wl.size} "
                   f"wavelengths, {wl[0]:g}–{wl[-1]:g} {spectra.wavelength_unit} "
                   f"({spectra.unit}); see spectra.csv")
        picks = choose_wavelengths(spectra, wavelengths)
        rows = []
        for w in picks:
            col = int(np.argmin(np.abs(wl - w)))
            rows.append((f"{w:g}", *[format_value(spectra.values[i, col], spectra.stderr[i, col])
                                     for i in range(len(spectra.species))]))
        out += ["  " + line for line in _table(rows, (f"λ ({spectra.wavelength_unit})",
                                                      *spectra.species))]
        if spectra.sigma is None:
            fit_text = (f"χ² = {spectra.residual_sum:.6g} over {spectra.n_points} readings "
                        f"(χ²/N = {spectra.residual_sum / spectra.n_points:.3g})")
        else:
            fit_text = (f"Σ residual² = {spectra.residual_sum:.6g} over {spectra.n_points} "
                        f"readings, σ̂ = {spectra.sigma:.3g}")
        out.append(f"  full data at the fitted values: {fit_text}")
    if sig.components is not None:
        n_abs = len(spectra.species) if spectra is not None else None
        out += ["  " + line for line in format_components(sig.components, n_abs).split("\n")]
    return "\n".join(out)


def _spectra_csv(spectra):
    header = [f"wavelength_{spectra.wavelength_unit}"]
    columns = [spectra.wavelengths]
    for i, s in enumerate(spectra.species):
        header += [s, f"{s}_stderr"]
        columns += [spectra.values[i], spectra.stderr[i]]
    for name, values in spectra.baselines.items():
        header.append(f"baseline {name}")
        columns.append(values)
    lines = [",".join(header)]
    lines += [",".join("" if not math.isfinite(v) else f"{v:.8g}" for v in row)
              for row in np.column_stack(columns)]
    return "\n".join(lines) + "\n"


def _matrix_csv(times, wavelengths, values):
    lines = ["time," + ",".join(f"{w:g}" for w in wavelengths)]
    lines += [f"{t:.10g}," + ",".join(f"{v:.6g}" for v in row) for t, row in zip(times, values)]
    return "\n".join(lines) + "\n"


def signal_outputs(result, wavelengths=None):
    """Files and summary text of the signal part of a fit, computed but not written.

    Returns
    -------
    files : dict of str to bytes or str
        ``spectra.json`` (:meth:`SignalFit.to_dict` without the warnings,
        which ``result.json`` holds; read by the HTML report). With full
        spectra also ``spectra.csv`` (wavelength, each species' ε and
        its standard error, baselines), ``spectra.png``/``.svg``,
        ``wavelength_traces.png``/``.svg`` (data and fit at chosen
        wavelengths), ``residual_map.png`` and ``residual_map_<run>.csv``
        (fit − data, time down and wavelength across, as the input files) and
        ``components.png`` (singular values). Pass to :func:`write_fit` as
        `extra_files`.
    summary : str
        :func:`format_signals`.
    """
    from kinfit.figures.plots import plot_components, plot_residual_map, plot_spectra, plot_wavelength_traces
    from kinfit.figures.wavelengths import choose_wavelengths

    import json

    sig = result.signals
    data = sig.to_dict()
    data.pop("warnings")          # already in result.json, with the fit's other warnings
    files = {"spectra.json": json.dumps(_plain(data), indent=2, ensure_ascii=False) + "\n"}
    spectra = sig.spectra
    if spectra is not None:
        files["spectra.csv"] = _spectra_csv(spectra)
        picks = choose_wavelengths(spectra, wavelengths)
        figures = {"spectra": plot_spectra(spectra),
                   "wavelength_traces": plot_wavelength_traces(result, picks)}
        for name, fig in figures.items():
            for fmt in ("png", "svg"):
                files[f"{name}.{fmt}"] = figure_bytes(fig, fmt)
        residual_map = plot_residual_map(result)
        for fmt in ("png", "svg"):
            files[f"residual_map.{fmt}"] = figure_bytes(residual_map, fmt)
        for run in result.experiment.runs:
            if run.name in spectra.runs:
                fitted = spectra.fitted[spectra.runs.index(run.name)]
                safe = "".join(c if c.isalnum() or c in "-_" else "_" for c in run.name)
                files[f"residual_map_{safe}.csv"] = _matrix_csv(
                    run.spectrum.times, spectra.wavelengths, fitted - run.spectrum.values)
    if sig.components is not None:
        n_abs = len(spectra.species) if spectra is not None else None
        components = plot_components(sig.components, n_abs)
        for fmt in ("png", "svg"):
            files[f"components.{fmt}"] = figure_bytes(components, fmt)
    return files, format_signals(result, wavelengths)
# ------------------------------------------------------------------ ranking

def _number(value, fmt=".2f"):
    return "—" if value is None or not math.isfinite(value) else format(value, fmt)


def _short(text, width=48):
    return text if len(text) <= width else text[:width - 1] + "…"


def format_ranking(comparison, top=10, cautions=True):
    """Readable summary of a :class:`~kinfit.compare.Comparison` for the terminal.

    Shows the ranked table (the first `top` rows), the verdict, the nested
    tests that involve the leading candidates, model-averaged parameters, the
    initial-rates cross-check, warnings, the evidence scales' sources and (by
    default) the cautions.
    """
    rows = comparison.candidates
    best = rows[0]
    exp = best.fit.experiment
    crit = {"aicc": "AICc", "aic": "AIC", "bic": "BIC"}[comparison.criterion]
    noise = "declared noise" if comparison.noise_declared else "noise estimated"
    out = [f"Ranking of {len(rows)} candidates fitted to '{exp.name}' "
           f"({comparison.n_points} points, {noise}), sorted by {crit}", ""]
    table = []
    for i, r in enumerate(rows[:top], start=1):
        table.append((str(i), _short(r.label), str(r.n_params), f"{r.chisqr:.6g}",
                      _number(r.delta_aicc), f"{r.akaike_weight:.3f}", _number(r.delta_bic),
                      f"{r.bic_weight:.3f}", r.evidence_aicc))
    out += _table(table, ("#", "candidate", "p", "χ²", "ΔAICc", "weight", "ΔBIC",
                          "BIC weight", "support (ΔAICc)"))
    if len(rows) > top:
        out.append(f"  ... {len(rows) - top} more in ranking.json")
    templates = sorted({r.template for r in rows if r.template})
    for t in templates:
        out.append(f"  Rows such as 'm=1' are '{t}' with those orders fixed.")
    out.append("  weight: Akaike weight from AICc; BIC weight: from BIC (each sums to 1).")

    out += ["", "Verdict"]
    for line in comparison.verdict:
        out += textwrap.wrap(line, 88, initial_indent="  - ", subsequent_indent="    ",
                             break_on_hyphens=False)
    # pairs that say whether a simpler candidate will do: a leading candidate
    # against what contains it, and what the best contains
    leading = {r.name for r in rows[:3]}
    shown = [t for t in comparison.nested if t.smaller in leading or t.larger == best.name]
    if shown:
        out += ["", "Nested pairs (smaller = larger with parameters fixed): F-test and "
                    "likelihood ratio"]
        nested_rows = [(_short(_label(comparison, t.smaller), 30),
                        _short(_label(comparison, t.larger), 30), str(t.extra_params),
                        f"{t.f_statistic:.4g}", f"{t.f_pvalue:.3g}", f"{t.lr_statistic:.4g}",
                        f"{t.lr_pvalue:.3g}", "yes" if t.on_boundary else "")
                       for t in shown[:8]]
        out += _table(nested_rows, ("smaller", "larger", "extra", "F", "p (F)", "LR",
                                    "p (LR)", "on a bound"))
        if len(shown) > 8:
            out.append(f"  ... {len(shown) - 8} more in ranking.json")
        if any(t.on_boundary for t in shown[:8]):
            out.append("  on a bound: the smaller model fixes a value on a bound of the "
                       "larger one, so the p-values are conservative (too large)")
    if comparison.averages:
        out += ["", "Model-averaged parameters (Akaike weights; unconditional standard "
                    "error)"]
        out += _table([(a.name, format_value(a.value, a.stderr), a.unit, f"{a.weight:.3f}",
                        str(a.n_candidates)) for a in comparison.averages],
                      ("name", "value ± standard error", "unit", "weight covered",
                       "candidates"))
    if comparison.cross_check is not None:
        out += [""] + format_cross_check(comparison.cross_check)
    if comparison.warnings:
        out += ["", "Warnings"]
        for w in comparison.warnings:
            out += textwrap.wrap(w, 88, initial_indent="  - ", subsequent_indent="    ",
                                 break_on_hyphens=False)
    from kinfit.analysis.criteria import SOURCES

    out += ["", "Evidence scales"]
    for key in ("aicc", "bic"):
        out += textwrap.wrap(SOURCES[key], 88, initial_indent="  - ",
                             subsequent_indent="    ", break_on_hyphens=False)
    if cautions:
        out += ["", "Caution"] + textwrap.wrap(
            "A ranking says which candidates these data support, not that the best is the "
            "true mechanism; a model not among the candidates may be better still. "
            + CAUTIONS, 88, initial_indent="  ", subsequent_indent="  ",
            break_on_hyphens=False)
    return "\n".join(out)


def _label(comparison, name):
    for r in comparison.candidates:
        if r.name == name:
            return r.label
    return name


def format_cross_check(check):
    """Lines describing the initial-rates cross-check."""
    ir = check.initial_rates
    out = [f"Initial-rates cross-check ({ir.reaction}; slope at t = 0 of a degree-{ir.degree} "
           f"polynomial over the first {100 * ir.max_conversion:.0f} % conversion)"]
    species = []
    for r in ir.rates:
        for s in r.conc0:
            if s not in species:
                species.append(s)
    rows = []
    for r in ir.rates:
        rate = format_value(r.rate, r.stderr) if r.rate is not None else "—"
        points = ", ".join(f"{t.species} {t.n_points}" for t in r.traces)
        rows.append((r.run, *[f"{r.conc0.get(s, 0):g}" for s in species], rate, points))
    out += _table(rows, ("run", *[f"[{s}]0" for s in species],
                         f"r0 ({ir.rate_unit})", "points used"))
    reg = ir.regression
    if reg is not None:
        out += ["", f"  Orders, beside the time-course fit of '{check.candidate}'"]
        order_rows = []
        for c in check.orders:
            diff = "—" if c.z is None else f"{abs(c.z):.1f} se " + (
                "(agree)" if c.agrees else "(DISAGREE)")
            fitted = format_value(c.time_course, c.time_course_stderr or None) + (
                " (fixed)" if c.time_course_stderr == 0 else "")
            order_rows.append((c.species, format_value(c.initial_rates, c.initial_rates_stderr),
                               fitted, diff))
        out += _table(order_rows, ("species", "initial rates", "time course", "difference"))
        out.append(f"  k from the regression: {format_value(reg.k, reg.k_stderr)} "
                   f"{ir.k_unit or ''} (its orders, {reg.dof} degree(s) of freedom)")
        k = check.rate_constant
        if k is not None:
            diff = "" if k["z"] is None else f"; {abs(k['z']):.1f} se on ln k " + (
                "(agree)" if k["agrees"] else "(DISAGREE)")
            out.append(f"  {k['name']} at the fitted orders: initial rates "
                       f"{format_value(k['initial_rates'], k['initial_rates_stderr'])}, time "
                       f"course {format_value(k['time_course'], k['time_course_stderr'])} "
                       f"{k['unit'] or ''}{diff}")
    for note in ir.notes:
        out += textwrap.wrap(note, 88, initial_indent="  note: ", subsequent_indent="    ",
                             break_on_hyphens=False)
    return out


def _initial_rates_csv(check):
    ir = check.initial_rates
    species = []
    for r in ir.rates:
        for s in r.conc0:
            if s not in species:
                species.append(s)
    lines = ["run," + ",".join(f"{s}0" for s in species) + ",rate,stderr,note"]
    for r in ir.rates:
        note = r.note.replace('"', "'")
        lines.append(f"{r.run}," + ",".join(f"{r.conc0.get(s, 0):.10g}" for s in species)
                     + f",{'' if r.rate is None else f'{r.rate:.10g}'},"
                       f"{'' if r.stderr is None else f'{r.stderr:.10g}'},\"{note}\"")
    return "\n".join(lines) + "\n"


def write_ranking(out_dir, comparison, top=10, provenance=None):
    """Write a ranking's outputs into `out_dir`.

    Files: ``ranking.json`` (see :meth:`Comparison.to_dict`), ``ranking.txt``,
    ``weights.png``/``.svg``; with the initial-rates cross-check
    ``initial_rates.png``/``.svg`` and ``initial_rates.csv``; the best
    candidate's fit in ``best/`` (as :func:`write_fit`); and, when given,
    ``provenance.json`` (see :func:`kinfit.provenance.collect`).

    Returns
    -------
    list of pathlib.Path
        The files written.
    """
    from kinfit.figures.plots import plot_initial_rates, plot_weights

    out_dir = _prepare(out_dir)
    figures = {"weights": plot_weights(comparison)}
    check = comparison.cross_check
    if check is not None:
        figures["initial_rates"] = plot_initial_rates(check)
    payload = {f"{name}.{fmt}": figure_bytes(fig, fmt)
               for name, fig in figures.items() for fmt in ("png", "svg")}
    texts = {"ranking.txt": format_ranking(comparison, top) + "\n"}
    if check is not None:
        texts["initial_rates.csv"] = _initial_rates_csv(check)
    data = comparison.to_dict()
    out_dir.mkdir(parents=True, exist_ok=True)
    written = write_fit(out_dir / "best", comparison.best.fit, provenance=provenance)
    if provenance is not None:
        write_json(out_dir / "provenance.json", provenance)
        written.append(out_dir / "provenance.json")
    for name, blob in payload.items():
        write_bytes(out_dir / name, blob)
        written.append(out_dir / name)
    for name, text in texts.items():
        write_text(out_dir / name, text)
        written.append(out_dir / name)
    write_json(out_dir / "ranking.json", data)
    return written + [out_dir / "ranking.json"]


# ----------------------------------------------------------------- posterior

def _interval_text(pair, digits=4):
    if pair is None:
        return "—"
    ends = ["open" if v is None else f"{v:.{digits}g}" for v in pair]
    return f"[{ends[0]}, {ends[1]}]"


def format_posterior(post, cautions=True):
    """Readable summary of a :class:`~kinfit.posterior.Posterior` for the terminal.

    States whether the chain converged (and what to do if not), shows every
    parameter's posterior beside its three kinds of 95 % interval
    (covariance, profile likelihood, posterior) with flags, the convergence
    figures, the correlation of each rate constant with each order, the
    priors and the cautions.
    """
    fit, diag, settings = post.fit, post.diagnostics, post.settings
    exp, mech = fit.experiment, fit.mechanism
    out = [f"Posterior of '{mech.name}' given {len(exp.runs)} runs ({fit.n_points} points)",
           f"  emcee, {settings.walkers} walkers × {diag.n_steps} steps ({settings.moves} "
           f"moves, seed {settings.seed}); noise: {post.noise}; "
           f"{post.n_evaluations} evaluations in {post.elapsed:.1f} s", ""]
    if diag.converged:
        out.append(f"CONVERGED: chain after burn-in = {diag.tau_multiple:.0f} autocorrelation "
                   f"times (50 wanted), largest R-hat {max(diag.rhat.values()):.3f} "
                   f"(≤ 1.01 wanted)")
    else:
        out.append("NOT CONVERGED — do not report these numbers yet:")
        for reason in diag.reasons:
            out += textwrap.wrap(reason, 88, initial_indent="  - ", subsequent_indent="    ")
        out += textwrap.wrap(diag.advice, 88, initial_indent="  ", subsequent_indent="  ")
    out += ["", "Parameters: posterior median ± sd, and 95 % intervals of three kinds",
            "  (covariance = fit ± 1.96 SE; profile likelihood; posterior 2.5–97.5 %)"]
    rows = []
    for row in post.intervals:
        name = row["name"]
        s = post.summary[name]
        rows.append((name, post.units.get(name) or "", format_value(s["median"], s["sd"]),
                     _interval_text(row["covariance"]), _interval_text(row["profile"]),
                     _interval_text(row["posterior"]), ", ".join(row["flags"])))
    out += _table(rows, ("name", "unit", "posterior", "covariance 95 %", "profile 95 %",
                         "posterior 95 %", "flags"))
    flagged = [r for r in rows if r[-1]]
    if flagged:
        out.append("  flags: 'intervals disagree' = the model is non-linear in this parameter "
                   "here (or the prior matters):")
        out.append("  prefer the profile or posterior interval to ± SE; 'not identifiable' = "
                   "the data cannot pin it down.")
    out += ["", "Convergence (after burn-in)"]
    out.append("  autocorrelation time τ (steps): " + ", ".join(
        f"{n} {t:.1f}" for n, t in diag.autocorr_time.items()))
    out.append("  effective sample size: " + ", ".join(
        f"{n} {e:.0f}" for n, e in diag.ess.items()))
    out.append("  R-hat: " + ", ".join(f"{n} {r:.3f}" for n, r in diag.rhat.items()))
    out.append(f"  acceptance fraction {diag.acceptance_fraction:.2f} (walkers "
               f"{diag.acceptance_range[0]:.2f}–{diag.acceptance_range[1]:.2f}); burn-in "
               f"{diag.burn_in} steps discarded; thin {diag.thin}; {post.samples.shape[0]} "
               f"samples kept")
    pairs = post.rate_order_correlations()
    if pairs:
        out += ["", "Correlation of rate constants with orders (posterior; fit covariance)"]
        for a, b, rho, rho_fit in pairs:
            fit_text = f"{rho_fit:+.3f}" if rho_fit is not None else "—"
            strength = "strong" if abs(rho) >= 0.9 else "moderate" if abs(rho) >= 0.5 else "weak"
            out.append(f"  {a}–{b}: {rho:+.3f} ({fit_text}), {strength}")
    out += ["", "Priors"]
    for name in post.names:
        prior = post.priors[name]
        src = " (from the model file)" if prior.source == "model file" else ""
        out.append(f"  {name}: {prior.describe(post.units.get(name) or '')}{src}")
    return "\n".join(out + _warnings_and_cautions(post.warnings, cautions))


def write_posterior(out_dir, post):
    """Write a posterior's outputs into `out_dir`.

    Files: ``posterior.json`` (see :meth:`Posterior.to_dict`),
    ``posterior_summary.txt``, ``corner.png``, ``bands.png`` (each run's data
    with posterior bands), ``profiles.png``, and ``chain.npz`` (the whole
    chain; left as it is when the sampler already wrote it there).

    Returns
    -------
    list of pathlib.Path
    """
    from kinfit.figures.plots import plot_bands, plot_corner, plot_profiles
    from kinfit.estimation.chains import CHAIN_FILE, write_chain

    out_dir = _prepare(out_dir)
    figures = {"corner": plot_corner(post), "bands": plot_bands(post),
               "profiles": plot_profiles(post)}
    payload = {f"{name}.{fmt}": figure_bytes(fig, fmt) for name, fig in figures.items()
               for fmt in ("png", "svg")}
    summary = format_posterior(post)
    data = post.to_dict()
    out_dir.mkdir(parents=True, exist_ok=True)
    written = []
    chain_path = out_dir / CHAIN_FILE
    if post.chain_file is None or Path(post.chain_file).resolve() != chain_path.resolve():
        write_chain(chain_path, post.state, post.chain_meta)
    written.append(chain_path)
    for name, blob in payload.items():
        write_bytes(out_dir / name, blob)
        written.append(out_dir / name)
    write_text(out_dir / "posterior_summary.txt", summary + "\n")
    write_json(out_dir / "posterior.json", data)
    return written + [out_dir / "posterior_summary.txt", out_dir / "posterior.json"]


# ------------------------------------------------------------ notebook tables

