"""Tables and CSV text."""

from __future__ import annotations

import io

import numpy as np
import pytest
from conftest import MODELS

from kinfit.estimation.least_squares import fit
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism


def test_csv_fields_are_quoted_where_needed(tmp_path):
    # a run name with a comma survives the round trip through a general CSV reader (pandas)
    import pandas as pd

    from kinfit.output.fit import curves_csv

    (tmp_path / "e.toml").write_text('[[runs]]\nname = "cold, 1"\nfile = "a.csv"\n'
                                     'initial = { A = 1 }\n')
    (tmp_path / "a.csv").write_text("time,A\n0,1\n5,0.61\n10,0.37\n20,0.14\n")
    result = fit(load_experiment(tmp_path / "e.toml"),
                 load_mechanism(MODELS / "first_order.toml"), starts=1)
    table = pd.read_csv(io.StringIO(curves_csv(result)))
    assert list(table.columns) == ["run", "time", "A", "P"]
    assert set(table["run"]) == {"cold, 1"}
    # first order, [A] = [A]0 exp(-k t) (closed form): the curve at its last time
    k = result.values["k"]
    last = table.iloc[-1]
    assert last["A"] == pytest.approx(np.exp(-k * last["time"]), rel=1e-5)
