"""Only the figures layer imports matplotlib."""

from __future__ import annotations


def test_layers_below_figures_do_not_import_matplotlib():
    # Only kinfit.figures may import matplotlib (house rule): every module of
    # the layers below it is imported and matplotlib must still be absent.
    import subprocess
    import sys

    code = ("import sys, pkgutil, importlib, kinfit\n"
            "for layer in ('core', 'inputs', 'numerics', 'estimation', 'analysis'):\n"
            "    pkg = importlib.import_module('kinfit.' + layer)\n"
            "    for info in pkgutil.walk_packages(pkg.__path__, pkg.__name__ + '.'):\n"
            "        importlib.import_module(info.name)\n"
            "print('matplotlib' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
