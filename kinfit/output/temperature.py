"""Temperature dependence in words and files: activation parameters, two-stage, cautions.

:func:`format_activation` words the activation parameters of a global fit
beside the two-stage analysis; :func:`temperature_bundle` gives the files a
temperature fit adds to its folder (``temperature.json``, Arrhenius and
Eyring plots). Extrapolation in temperature is where kinetics can hurt
someone, so every summary and file here carries :func:`temperature_cautions`.
"""

from __future__ import annotations

import textwrap

from kinfit.core.formatting import format_value
from kinfit.core.schema import schema_json
from kinfit.output.bundle import Bundle, figure_files
from kinfit.output.text import (
    celsius,
    interval_text,
    kelvin_celsius,
    text_table,
    wrapped,
)

__all__ = ["temperature_cautions", "format_activation", "temperature_bundle"]


def temperature_cautions(temperature_range=None):
    """The cautions shown with every temperature fit and prediction.

    Parameters
    ----------
    temperature_range : (float, float), optional
        The measured range, kelvin, quoted in the text.
    """
    measured = ("the measured temperature range" if temperature_range is None else
                f"the measured range, {kelvin_celsius(temperature_range[0])} to "
                f"{kelvin_celsius(temperature_range[1])}")
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


def _law_text(act):
    if act.law == "arrhenius":
        return "Arrhenius, k(T) = k_ref exp[−Ea/R (1/T − 1/T_ref)]"
    return ("Eyring, k(T) = (κ k_B T/h) exp(ΔS‡/R) exp(−ΔH‡/RT), fitted as "
            f"k_ref (T/T_ref) exp[−ΔH‡/R (1/T − 1/T_ref)], κ = {act.kappa:g}")


def _notes(notes, label="note"):
    out = []
    for note in notes:
        out += textwrap.wrap(note, 88, initial_indent=f"  {label}: ", subsequent_indent="    ")
    return out


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
        out.append(f"    T_ref = {kelvin_celsius(act.reference)}, where {act.constant} "
                   f"= k_ref; {len(act.rates)} temperatures")
        out.append(f"    runs from {kelvin_celsius(lo)} to {kelvin_celsius(hi)}")
        rows = []
        for e in act.estimates:
            label = e.label + (" (fitted)" if e.fitted else "")
            rows.append((label, format_value(e.value, e.stderr), e.unit,
                         interval_text(e.interval), interval_text(e.profile_interval),
                         interval_text(e.posterior_interval)))
        # the profile and posterior columns only where those analyses were run
        keep = [i for i in range(6) if i < 4 or any(r[i] != "—" for r in rows)]
        header = ("quantity", "value ± standard error", "unit", f"{level:g} % interval",
                  "profile", "posterior")
        out += text_table([[r[i] for i in keep] for r in rows], [header[i] for i in keep])
        out.append("    ΔS‡ and ΔG‡ for a standard state of 1 mol/L")
        out.append(f"  {act.constant} at each measured temperature ({act.unit or ''})")
        rows = [(f"{r.temperature:.2f}", f"{celsius(r.temperature):.1f}",
                 format_value(r.value, r.stderr), interval_text(r.interval))
                for r in act.rates]
        out += ["  " + line for line in text_table(rows, ("T (K)", "T (°C)",
                                                           "k ± standard error",
                                                           f"{level:g} % interval"))]
        out += _notes(act.notes)
    if two_stage is not None:
        out += [""] + _format_two_stage(two_stage, activations)
    if cautions:
        span = activations[0].temperature_range if activations else None
        out += ["", "Caution (temperature)"] + wrapped(temperature_cautions(span), "  ", "  ")
    return "\n".join(out)


def _format_two_stage(two_stage, activations):
    how = ("its own orders, so that k has the unit of each temperature's own overall order"
           if two_stage.orders == "free" else "orders fixed at the global fit's values")
    out = textwrap.wrap(f"Two-stage analysis (k fitted at each temperature with {how}, then "
                        f"weighted straight lines of ln k and ln(k/T) against 1/T)", 88,
                        subsequent_indent="  ")
    names = [n for n in two_stage.groups[0].values]
    constants = [n for n in two_stage.groups[0].units]
    rows = []
    for g in two_stage.groups:
        rows.append((f"{g.temperature:.2f}", ", ".join(g.runs),
                     *[format_value(g.values[n], g.stderr.get(n)) for n in names],
                     *[g.units.get(n) or "" for n in constants]))
    out += text_table(rows, ("T (K)", "runs", *names, *[f"unit of {n}" for n in constants]))
    level = 100 * two_stage.level
    for law in two_stage.laws:
        act = next((a for a in activations if a.constant == law.constant), None)
        rows = []
        for e in law.estimates:
            glob = act.estimate(e.name) if act is not None else None
            rows.append((e.label, format_value(e.value, e.stderr), e.unit,
                         interval_text(e.interval),
                         interval_text(glob.interval) if glob is not None else "—"))
        out.append(f"  {law.constant}: {law.arrhenius.n} temperatures")
        out += text_table(rows, ("quantity", "two-stage value ± s.e.", "unit",
                                 f"two-stage {level:g} %", f"global fit {level:g} %"))
        out += _notes(law.notes)
    out += _notes(two_stage.order_warnings, "warning")
    return out


def temperature_bundle(activations, two_stage=None, basis=None):
    """The files a temperature fit adds to its folder, computed but not written.

    Files, in order: ``temperature.json``, ``arrhenius.png``/``.svg`` and
    ``eyring.png``/``.svg``.

    Notes
    -----
    ``temperature.json`` (schema ``kinfit.temperature/1``) holds
    ``activation`` (one entry per rate constant, see
    :meth:`Activation.to_dict`), ``two_stage`` (see :meth:`TwoStage.to_dict`,
    or null), ``order_warnings``, ``prediction_basis`` (see
    :func:`kinfit.inputs.fit_basis.basis_to_dict`; read by ``kinfit
    simulate --fit``) and ``cautions``.

    Returns
    -------
    Bundle
    """
    from kinfit.figures.temperature import plot_arrhenius, plot_eyring
    from kinfit.inputs.fit_basis import basis_to_dict

    span = activations[0].temperature_range if activations else None
    data = {
        "activation": [a.to_dict() for a in activations],
        "two_stage": None if two_stage is None else two_stage.to_dict(),
        "order_warnings": [] if two_stage is None else list(two_stage.order_warnings),
        "prediction_basis": None if basis is None else basis_to_dict(basis),
        "cautions": temperature_cautions(span),
    }
    return Bundle({"temperature.json": schema_json("temperature", data)}) | figure_files(
        {"arrhenius": plot_arrhenius(activations, two_stage),
         "eyring": plot_eyring(activations, two_stage)})
