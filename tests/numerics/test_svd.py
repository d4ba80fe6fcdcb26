"""SVD of stacked spectra (kinfit.numerics.svd): the number of components
above the noise, against the threshold of Gavish & Donoho (2014)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from signal_cases import spectra_case

from kinfit.numerics.svd import significant_components


def test_svd_counts_absorbing_species(tmp_path):
    # Three species with independent spectra and concentration profiles give
    # three significant singular values, two give two (rank of C·E; threshold
    # of Gavish & Donoho 2014, from memory).
    (tmp_path / "abc").mkdir()
    (tmp_path / "ab").mkdir()
    exp3, _ = spectra_case(tmp_path / "abc")
    exp2, _ = spectra_case(tmp_path / "ab", species=("A", "B"))
    for exp, count in ((exp3, 3), (exp2, 2)):
        data = np.concatenate([run.spectrum.values for run in exp.runs])
        assert significant_components(data, 0.003).n_significant == count
        assert significant_components(data).n_significant == count     # noise estimated


def test_noise_threshold_of_a_square_matrix():
    # Gavish & Donoho (2014): for a square n × n matrix with known noise σ the
    # optimal hard threshold is (4/√3) √n σ (from memory); pure noise then has
    # no significant component.
    rng = np.random.default_rng(2)
    comps = significant_components(rng.normal(0, 0.5, (200, 200)), 0.5)
    assert comps.threshold == pytest.approx(4 / math.sqrt(3) * math.sqrt(200) * 0.5, rel=1e-12)
    assert comps.n_significant == 0
