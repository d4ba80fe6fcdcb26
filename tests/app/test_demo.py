"""The demo's committed inputs are what its seeded generator writes."""

from __future__ import annotations

import numpy as np
import pandas as pd
from conftest import DEMO

from kinfit.app import demo


def test_committed_demo_files_match_the_generator(tmp_path):
    paths = demo.write_inputs(tmp_path)
    for key in ("model", "experiment", "truth"):
        assert paths[key].read_text() == (DEMO / paths[key].name).read_text(), key
    fresh = pd.read_csv(paths["data"])
    kept = pd.read_csv(DEMO / "traces.csv")
    assert fresh[["run", "time", "species"]].equals(kept[["run", "time", "species"]])
    # values are printed to 0.001 mM; allow one unit in the last place for
    # integrator differences between library versions
    np.testing.assert_allclose(fresh["value"], kept["value"], atol=0.0011)


def test_demo_noise_is_realistic():
    kept = pd.read_csv(DEMO / "traces.csv")
    assert len(kept) == 6 * 25 * 2
    assert (kept["value"] > -2).all()
