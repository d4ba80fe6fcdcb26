"""Seeded synthetic cases shared by several test files."""

from __future__ import annotations

import numpy as np
from conftest import write

from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import mechanism_from_text


def zero_order_case(folder, noise=""):
    """A -> P at zero order with [A]0 fitted: [A] = A0 - k t is a straight line.

    Seeded synthetic data; the reference answers come from statsmodels OLS.
    """
    rng = np.random.default_rng(7)
    t = np.arange(0.0, 11.0)
    y = 1.0 - 0.05 * t + rng.normal(0.0, 0.01, t.size)
    rows = "\n".join(f"r1,{ti:g},A,{yi:.6f}" for ti, yi in zip(t, y))
    write(folder, "traces.csv", "run,time,species,value\n" + rows + "\n")
    write(folder, "e.toml", f"""
        [data]
        file = "traces.csv"
        [[runs]]
        name = "r1"
        initial = {{ A = {{ value = 0.9, vary = true, min = 0 }} }}
        {noise}
    """)
    mech = mechanism_from_text('[[steps]]\nreaction = "A -> P"\nrate = "k"\n'
                               '[parameters]\nk = { value = 0.01, min = 0 }\n')
    y = np.round(y, 6)
    return load_experiment(folder / "e.toml"), mech, t, y
