"""The main figures of any result, by name, for a notebook or a script."""

from __future__ import annotations

from kinfit.figures.fit import plot_residuals, plot_traces
from kinfit.figures.posterior import plot_bands, plot_corner, plot_profiles
from kinfit.figures.ranking import plot_initial_rates, plot_weights

__all__ = ["make_figures"]


def make_figures(result):
    """The main figures of a result, by name, for a notebook.

    Parameters
    ----------
    result : FitResult, Posterior or Comparison

    Returns
    -------
    dict of str to matplotlib.figure.Figure
        A fit: ``fit`` and ``residuals``; a posterior adds ``corner``,
        ``bands`` and ``profiles``; a ranking gives ``weights`` and, with the
        cross-check, ``initial_rates``, plus the best candidate's figures.
    """
    from kinfit.analysis.ranking import Comparison
    from kinfit.estimation.posterior import Posterior

    if isinstance(result, Comparison):
        out = {"weights": plot_weights(result)}
        if getattr(result, "cross_check", None) is not None:
            out["initial_rates"] = plot_initial_rates(result.cross_check)
        out.update(make_figures(result.best.fit))
        return out
    if isinstance(result, Posterior):
        out = make_figures(result.fit)
        out["corner"] = plot_corner(result)
        out["bands"] = plot_bands(result)
        if getattr(result, "profiles", None) is not None:
            out["profiles"] = plot_profiles(result)
        return out
    return {"fit": plot_traces(result), "residuals": plot_residuals(result)}
