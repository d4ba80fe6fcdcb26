"""The public API: what the package root and every module promise exists."""

from __future__ import annotations

import importlib
import pkgutil

import kinfit


def _modules():
    return [importlib.import_module(m.name)
            for m in pkgutil.walk_packages(kinfit.__path__, "kinfit.")]


def test_every_name_in_all_exists():
    missing = [(m.__name__, n) for m in _modules() for n in getattr(m, "__all__", ())
               if not hasattr(m, n)]
    assert missing == []


def test_root_exports_resolve_to_their_layer_module():
    # kinfit.<name> is the object its layer module defines (nothing is copied)
    for name in kinfit.__all__:
        value = getattr(kinfit, name)
        assert value is not None, name
    assert kinfit.fit is importlib.import_module("kinfit.estimation.least_squares").fit
    assert kinfit.load_experiment is importlib.import_module(
        "kinfit.inputs.experiment").load_experiment


def test_layer_packages_only_describe_their_layer():
    # a layer's __init__ holds its docstring (and at most re-exports): no code of its own
    for layer in ("core", "inputs", "numerics", "estimation", "analysis", "figures", "output",
                  "app"):
        module = importlib.import_module(f"kinfit.{layer}")
        assert module.__doc__ and len(module.__doc__.strip()) > 20, layer
        defined = [n for n, v in vars(module).items() if callable(v)
                   and getattr(v, "__module__", "") == module.__name__]
        assert defined == [], (layer, defined)
