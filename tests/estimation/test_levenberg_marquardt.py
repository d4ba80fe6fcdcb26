"""The bounded Levenberg–Marquardt loop against NIST certified values, and its bounds."""

from __future__ import annotations

import math

import numpy as np
import pytest
from conftest import write

from kinfit.estimation.levenberg_marquardt import local_fit, trust_region_fit
from kinfit.estimation.scale import ScaledProblem, fit_scale
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import mechanism_from_text
from kinfit.numerics.problem import build_problem

# NIST/ITL Statistical Reference Datasets, Nonlinear Least Squares Regression, dataset
# BoxBOD (Box et al. 1978): y = b1 (1 - exp(-b2 x)); data, start 2 and certified values
# copied from the NIST file BoxBOD.dat. As kinetics: A -> P first order, P observed,
# b1 = [A]0 and b2 = k.
BOXBOD_X = [1, 2, 3, 5, 7, 10]
BOXBOD_Y = [109, 149, 149, 191, 213, 224]
BOXBOD_B1, BOXBOD_B2 = 2.1380940889e02, 5.4723748542e-01
BOXBOD_RSS = 1.1680088766e03


def boxbod(folder, k_max=None):
    rows = "\n".join(f"bod,{x},P,{y}" for x, y in zip(BOXBOD_X, BOXBOD_Y))
    write(folder, "traces.csv", "run,time,species,value\n" + rows + "\n")
    write(folder, "e.toml", """
        [data]
        file = "traces.csv"
        [[runs]]
        name = "bod"
        initial = { A = { value = 100.0, vary = true, min = 0 } }
    """)
    k = "value = 0.75, min = 0" if k_max is None else f"value = 0.2, min = 0, max = {k_max}"
    mech = mechanism_from_text('[[steps]]\nreaction = "A -> P"\nrate = "k * [A]"\n'
                               f'[parameters]\nk = {{ {k} }}\n')
    problem = build_problem(mech, load_experiment(folder / "e.toml"))
    return ScaledProblem(problem, fit_scale(problem))


def test_boxbod_certified_values(tmp_path):
    scaled = boxbod(tmp_path)
    u, chi2, success, message, failed = local_fit(scaled, scaled.scale.start, None)
    assert success and failed == 0 and message.startswith("converged")
    k, a0 = scaled.scale.to_natural(u)[0]
    assert a0 == pytest.approx(BOXBOD_B1, rel=2e-6)
    assert k == pytest.approx(BOXBOD_B2, rel=5e-6)
    assert chi2 == pytest.approx(BOXBOD_RSS, rel=1e-9)
    # scipy's trust-region fallback, started there, stays at the certified optimum
    u2, chi2_2, ok, message2, _ = trust_region_fit(scaled, u, 200)
    assert ok and message2.startswith("trust-region fallback")
    assert chi2_2 == pytest.approx(BOXBOD_RSS, rel=1e-9)
    np.testing.assert_allclose(scaled.scale.to_natural(u2)[0], [BOXBOD_B2, BOXBOD_B1],
                               rtol=5e-6)


def test_a_bound_below_the_optimum_holds(tmp_path):
    # with k ≤ 0.3 (below the certified 0.547) the fit ends on the bound, and no
    # unbounded fit point with k ≤ 0.3 does better (a scan of A0 at k = 0.3)
    scaled = boxbod(tmp_path, k_max=0.3)
    u, chi2, success, _, _ = local_fit(scaled, scaled.scale.start, None)
    assert success and u[0] == pytest.approx(math.log10(0.3), abs=1e-12)
    a0 = np.linspace(150, 300, 3001)
    x = np.array(BOXBOD_X, dtype=float)
    rss = [np.sum((a * (1 - np.exp(-0.3 * x)) - BOXBOD_Y) ** 2) for a in a0]
    assert chi2 == pytest.approx(min(rss), rel=1e-6)
    assert chi2 > BOXBOD_RSS
