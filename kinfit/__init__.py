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

__version__ = "0.1.0"

_EXPORTS = {
    "KinfitError": "errors",
    "KinfitWarning": "errors",
    "Mechanism": "mechanism",
    "Step": "mechanism",
    "Parameter": "mechanism",
    "load_mechanism": "mechanism",
    "mechanism_from_text": "mechanism",
    "with_fixed": "mechanism",
    "Experiment": "data",
    "Run": "data",
    "Trace": "data",
    "load_experiment": "data",
    "simulate": "simulate",
    "Trajectory": "simulate",
    "residuals": "objective",
    "log_likelihood": "objective",
    "fit": "fit",
    "FitResult": "fit",
    "rank": "compare",
    "compare": "compare",
    "Comparison": "compare",
    "Candidate": "compare",
    "order_lattice": "compare",
    "InitialRates": "initial_rates",
    "regress_orders": "initial_rates",
    "initial_rates": "initial_rates",
    "sample": "posterior",
    "Posterior": "posterior",
    "profile_intervals": "profile",
    "Profiles": "profile",
    "format_posterior": "report",
    "write_posterior": "report",
    "plot_corner": "plots",
    "plot_bands": "plots",
    "plot_profiles": "plots",
    "format_fit": "report",
    "write_fit": "report",
    "format_ranking": "report",
    "write_ranking": "report",
    "plot_traces": "plots",
    "plot_residuals": "plots",
    "plot_trajectory": "plots",
    "figures": "plots",
    "plot_weights": "plots",
    "plot_initial_rates": "plots",
    "plot_arrhenius": "plots",
    "plot_eyring": "plots",
    "plot_prediction": "plots",
    "rate_constant": "temperature",
    "activation_parameters": "activation",
    "Activation": "activation",
    "with_posterior": "activation",
    "with_profile": "activation",
    "TwoStage": "two_stage",
    "predict": "prediction",
    "Prediction": "prediction",
    "basis_from_fit": "prediction",
    "format_activation": "report",
    "read_table": "instrument",
    "absorbance": "spectra",
    "significant_components": "spectra",
    "SignalFit": "spectra",
    "format_signals": "report",
    "plot_spectra": "plots",
    "plot_wavelength_traces": "plots",
    "plot_residual_map": "plots",
    "plot_components": "plots",
}

__all__ = sorted(_EXPORTS) + ["__version__"]


def __getattr__(name):
    if name in _EXPORTS:
        value = getattr(import_module(f".{_EXPORTS[name]}", __name__), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'kinfit' has no attribute {name!r}")


def __dir__():
    return __all__


class _Package(type(sys.modules[__name__])):
    """The package module, keeping exported functions ahead of same-named submodules.

    Importing a submodule binds it as an attribute of its package, so once
    ``kinfit.fit`` (the module) is imported, ``kinfit.fit`` would name the
    module rather than the function. Binding such a submodule is skipped here;
    the submodule stays importable through ``sys.modules`` and
    ``from kinfit.fit import ...``.
    """

    def __setattr__(self, name, value):
        if (name in _EXPORTS and isinstance(value, type(sys))
                and value.__name__ == f"{__name__}.{name}"):
            return
        super().__setattr__(name, value)


sys.modules[__name__].__class__ = _Package
