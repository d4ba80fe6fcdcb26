"""kinfit: rate laws, orders and rate constants from whole time courses.

The public names are re-exported here and imported on first use, so that
``import kinfit`` (and ``kinfit --help``) stays fast::

    import kinfit
    exp = kinfit.load_experiment("demo/experiment.toml")
    mech = kinfit.load_mechanism("demo/thiol_addition.toml")
    result = kinfit.fit(exp, mech)
    print(result.values, result.stderr)
"""

import sys
from importlib import import_module

from kinfit.core.version import __version__

_EXPORTS = {
    "KinfitError": "core.errors",
    "KinfitWarning": "core.errors",
    "Mechanism": "inputs.mechanism",
    "Step": "inputs.mechanism",
    "Parameter": "inputs.parameters",
    "Role": "inputs.parameters",
    "load_mechanism": "inputs.mechanism",
    "mechanism_from_text": "inputs.mechanism",
    "with_fixed": "inputs.mechanism",
    "Experiment": "inputs.experiment",
    "Run": "inputs.experiment",
    "Trace": "inputs.tables",
    "load_experiment": "inputs.experiment",
    "simulate": "numerics.integrate",
    "Trajectory": "numerics.integrate",
    "residuals": "numerics.problem",
    "log_likelihood": "estimation.likelihood",
    "fit": "estimation.least_squares",
    "FitResult": "estimation.fit_result",
    "rank": "analysis.ranking",
    "compare": "analysis.ranking",
    "Comparison": "analysis.ranking",
    "Candidate": "analysis.candidates",
    "order_lattice": "analysis.lattice",
    "InitialRates": "analysis.initial_rates",
    "regress_orders": "analysis.initial_rates",
    "initial_rates": "analysis.initial_rates",
    "sample": "estimation.posterior",
    "Posterior": "estimation.posterior",
    "profile_intervals": "estimation.profile",
    "Profiles": "estimation.profile",
    "format_value": "core.formatting",
    "format_posterior": "output.posterior",
    "write_posterior": "output.posterior",
    "plot_corner": "figures.posterior",
    "plot_bands": "figures.posterior",
    "plot_profiles": "figures.posterior",
    "format_fit": "output.fit",
    "write_fit": "output.fit",
    "format_ranking": "output.ranking",
    "write_ranking": "output.ranking",
    "plot_traces": "figures.fit",
    "plot_residuals": "figures.fit",
    "plot_trajectory": "figures.fit",
    "make_figures": "figures.overview",
    "plot_weights": "figures.ranking",
    "plot_initial_rates": "figures.ranking",
    "plot_arrhenius": "figures.temperature",
    "plot_eyring": "figures.temperature",
    "plot_prediction": "figures.temperature",
    "rate_constant": "numerics.temperature_laws",
    "activation_parameters": "analysis.activation",
    "Activation": "analysis.activation",
    "with_posterior": "analysis.activation",
    "with_profile": "analysis.activation",
    "TwoStage": "analysis.two_stage",
    "predict": "analysis.prediction",
    "two_stage": "analysis.two_stage",
    "Prediction": "analysis.prediction",
    "basis_from_fit": "analysis.prediction",
    "format_activation": "output.temperature",
    "read_table": "inputs.instrument",
    "absorbance": "numerics.signal_model",
    "significant_components": "numerics.svd",
    "SignalFit": "estimation.linear_unknowns",
    "format_signals": "output.signals",
    "plot_spectra": "figures.spectra",
    "plot_wavelength_traces": "figures.spectra",
    "plot_residual_map": "figures.spectra",
    "plot_components": "figures.spectra",
}

__all__ = sorted(_EXPORTS) + ["__version__", "register_notebook_display"]


def __getattr__(name):
    if name in _EXPORTS:
        value = getattr(import_module(f".{_EXPORTS[name]}", __name__), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'kinfit' has no attribute {name!r}")


def __dir__():
    return __all__


# Notebook display: IPython's HTML formatter learns the result types by name,
# so results carry no rendering code and no layer below output imports it.
_DISPLAYS = (
    ("kinfit.estimation.fit_result", "FitResult", "fit_html"),
    ("kinfit.estimation.posterior", "Posterior", "posterior_html"),
    ("kinfit.analysis.ranking", "Comparison", "ranking_html"),
)


def register_notebook_display(shell=None):
    """Show kinfit results as HTML tables in IPython and Jupyter.

    Called on ``import kinfit`` inside IPython; call it again with a shell
    started later. Each formatter imports :mod:`kinfit.output.notebook` on
    first display, so importing kinfit stays light.

    Parameters
    ----------
    shell : IPython InteractiveShell or None
        ``None`` uses the running shell, if there is one.

    Returns
    -------
    bool
        Whether a shell was found and the formatters registered.
    """
    if shell is None:
        ipython = sys.modules.get("IPython")
        shell = ipython.get_ipython() if ipython is not None else None
    if shell is None:
        return False
    formatter = shell.display_formatter.formatters["text/html"]
    for module, cls, function in _DISPLAYS:
        formatter.for_type_by_name(module, cls, _display(function))
    return True


def _display(function):
    def show(result):
        return getattr(import_module("kinfit.output.notebook"), function)(result)
    return show


register_notebook_display()
