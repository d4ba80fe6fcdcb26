"""A posterior in words and files: convergence, three kinds of interval, the chain.

:func:`format_posterior` words a :class:`~kinfit.estimation.posterior.Posterior`;
:func:`posterior_bundle` gives the files of ``kinfit sample`` (``posterior.json``,
``posterior_summary.txt``, corner, band and profile figures, ``chain.npz``);
:func:`write_posterior` writes them.
"""

from __future__ import annotations

import tempfile
import textwrap
from pathlib import Path

from kinfit.core.formatting import format_value
from kinfit.core.schema import schema_json
from kinfit.estimation.diagnostics import format_rhat
from kinfit.output.bundle import Bundle, figure_files, write_bundle
from kinfit.output.text import closing_lines, text_table

__all__ = ["format_posterior", "chain_bytes", "posterior_bundle", "write_posterior"]


def _interval_text(pair, digits=4):
    if pair is None:
        return "—"
    ends = ["open" if v is None else f"{v:.{digits}g}" for v in pair]
    return f"[{ends[0]}, {ends[1]}]"


def format_posterior(post, cautions=True):
    """Readable summary of a :class:`~kinfit.estimation.posterior.Posterior` for the terminal.

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
    out += _status_lines(diag)
    out += ["", "Parameters: posterior median ± sd, and 95 % intervals of three kinds",
            "  (covariance = the fit's 95 % interval; profile likelihood; posterior 2.5–97.5 %)"]
    rows = []
    for row in post.intervals:
        name = row["name"]
        s = post.summary[name]
        rows.append((name, post.units.get(name) or "", format_value(s["median"], s["sd"]),
                     _interval_text(row["covariance"]), _interval_text(row["profile"]),
                     _interval_text(row["posterior"]), ", ".join(row["flags"])))
    out += text_table(rows, ("name", "unit", "posterior", "covariance 95 %", "profile 95 %",
                             "posterior 95 %", "flags"))
    flagged = [r for r in rows if r[-1]]
    if flagged:
        out.append("  flags: 'intervals disagree' = the model is non-linear in this parameter "
                   "here (or the prior matters):")
        out.append("  prefer the profile or posterior interval to ± SE; 'not identifiable' = "
                   "the data cannot pin it down.")
    out += _convergence_lines(diag, post.samples.shape[0])
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
    return "\n".join(out + closing_lines(post.warnings, cautions))


def _status_lines(diag):
    """Whether the chain converged, and if not why and what to do."""
    if diag.converged:
        return [f"CONVERGED: chain after burn-in = {diag.tau_multiple:.0f} autocorrelation "
                f"times (50 wanted), largest R-hat {format_rhat(max(diag.rhat.values()))} "
                f"(≤ 1.01 wanted)"]
    out = ["NOT CONVERGED — do not report these numbers yet:"]
    for reason in diag.reasons:
        out += textwrap.wrap(reason, 88, initial_indent="  - ", subsequent_indent="    ")
    return out + textwrap.wrap(diag.advice, 88, initial_indent="  ", subsequent_indent="  ")


def _convergence_lines(diag, n_kept):
    return ["", "Convergence (after burn-in)",
            "  autocorrelation time τ (steps): " + ", ".join(
                f"{n} {t:.1f}" for n, t in diag.autocorr_time.items()),
            "  effective sample size: " + ", ".join(f"{n} {e:.0f}" for n, e in diag.ess.items()),
            "  R-hat: " + ", ".join(f"{n} {format_rhat(r)}" for n, r in diag.rhat.items()),
            f"  acceptance fraction {diag.acceptance_fraction:.2f} (walkers "
            f"{diag.acceptance_range[0]:.2f}–{diag.acceptance_range[1]:.2f}); burn-in "
            f"{diag.burn_in} steps discarded; thin {diag.thin}; {n_kept} samples kept"]


def chain_bytes(post):
    """The whole chain of `post` as the bytes of a ``chain.npz`` file.

    :func:`kinfit.estimation.posterior.write_chain` owns the file format and
    writes only to a path, so the file is written to a temporary folder and
    read back.
    """
    from kinfit.estimation.chains import CHAIN_FILE, write_chain

    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / CHAIN_FILE
        write_chain(path, post.state, post.chain_meta)
        return path.read_bytes()


def posterior_bundle(post):
    """The files of a posterior's output folder, computed but not written.

    Files, in order: ``chain.npz`` (the whole chain, see
    :func:`~kinfit.estimation.chains.load_chain`), ``corner.png``/``.svg``,
    ``bands.png``/``.svg`` (each run's data with posterior bands; left out when
    no run has a band, as for spectrometer signals only), ``profiles.png``/``.svg``, ``posterior_summary.txt`` and
    ``posterior.json`` (schema ``kinfit.posterior/1``: :meth:`Posterior.to_dict`).

    Returns
    -------
    Bundle
    """
    from kinfit.estimation.chains import CHAIN_FILE
    from kinfit.figures.posterior import plot_bands, plot_corner, plot_profiles

    figures = {"corner": plot_corner(post)}
    if post.bands:
        figures["bands"] = plot_bands(post)
    figures["profiles"] = plot_profiles(post)
    return (Bundle({CHAIN_FILE: chain_bytes(post)})
            | figure_files(figures)
            | {"posterior_summary.txt": format_posterior(post) + "\n",
               "posterior.json": schema_json("posterior", post.to_dict())})


def write_posterior(out_dir, post):
    """Write a posterior's outputs into `out_dir` (the files of :func:`posterior_bundle`).

    Returns
    -------
    list of pathlib.Path
    """
    return write_bundle(out_dir, posterior_bundle(post))
