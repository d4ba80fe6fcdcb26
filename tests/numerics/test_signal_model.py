"""Beer–Lambert signals by variable projection (kinfit.numerics.signal_model):
the absorbance law, the least-squares solution of a block, the projected
Jacobian and the profiled likelihood, against certified data, closed forms and
reference libraries."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import write
from signal_cases import ab_signal_case, dead_time_case

from kinfit.estimation.least_squares import fit
from kinfit.estimation.likelihood import gaussian_log_likelihood
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import mechanism_from_text
from kinfit.numerics.problem import build_problem
from kinfit.numerics.signal_model import (
    KIND_ABSORPTIVITY,
    KIND_DRIFT,
    KIND_OFFSET,
    Block,
    Column,
    absorbance,
    solve_block,
)

# --------------------------------------------------------------- NIST Lanczos
#
# NIST/ITL Statistical Reference Datasets, Nonlinear Least Squares Regression,
# datasets Lanczos1 and Lanczos2 ("average level of difficulty"; generated
# data, Lanczos 1956). Model y = b1 exp(-b2 x) + b3 exp(-b4 x) + b5 exp(-b6 x);
# data, both starting points and certified values copied from the NIST files
# Lanczos1.dat and Lanczos2.dat. In kinetic terms: three parallel first-order
# decays A -> P1 (k1 = b2), B -> P2 (k2 = b4), C -> P3 (k3 = b6), each starting
# at 1, seen through one signal channel whose absorptivities are the
# amplitudes b1, b3, b5 (linear unknowns, path length 1, no offset).
LANCZOS_X = [0.0, 0.05, 0.1, 0.15, 0.2, 0.25, 0.3, 0.35, 0.4, 0.45, 0.5, 0.55, 0.6, 0.65,
             0.7, 0.75, 0.8, 0.85, 0.9, 0.95, 1.0, 1.05, 1.1, 1.15]
LANCZOS1_Y = [
    2.5134, 2.044333373291, 1.668404436564, 1.366418021208, 1.123232487372, 0.9268897180037,
    0.7679338563728, 0.6388775523106, 0.5337835317402, 0.4479363617347, 0.377584788435,
    0.3197393199326, 0.2720130773746, 0.2324965529032, 0.1996589546065, 0.1722704126914,
    0.1493405660168, 0.1300700206922, 0.1138119324644, 0.1000415587559, 0.0883320908454,
    0.0783354401935, 0.06976693743449, 0.06239312536719]
LANCZOS2_Y = [
    2.5134, 2.04433, 1.6684, 1.36642, 1.12323, 0.92689, 0.767934, 0.638878, 0.533784,
    0.447936, 0.377585, 0.319739, 0.272013, 0.232497, 0.199659, 0.17227, 0.149341, 0.13007,
    0.113812, 0.100042, 0.0883321, 0.0783354, 0.0697669, 0.0623931]
LANCZOS_START1 = (0.3, 5.5, 7.6)          # b2, b4, b6 (the amplitudes need no start)
LANCZOS_START2 = (0.7, 4.2, 6.3)
LANCZOS1_CERTIFIED = {"b1": 9.5100000027e-02, "b2": 1.0000000001e00, "b3": 8.6070000013e-01,
                      "b4": 3.0000000002e00, "b5": 1.5575999998e00, "b6": 5.0000000001e00}
LANCZOS2_CERTIFIED = {"b1": 9.6251029939e-02, "b2": 1.0057332849e00, "b3": 8.6424689056e-01,
                      "b4": 3.0078283915e00, "b5": 1.5529016879e00, "b6": 5.0028798100e00}
LANCZOS2_SD = {"b1": 6.6770575477e-04, "b2": 3.3989646176e-03, "b3": 1.7185846685e-03,
               "b4": 4.1707005856e-03, "b5": 2.3744381417e-03, "b6": 1.3958787284e-03}
LANCZOS2_RSS = 2.2299428125e-11


LANCZOS_EXPERIMENT = """
    [signals]
    offset = "none"
    [signals.channels]
    y = { A = "unknown", B = "unknown", C = "unknown" }
    [[runs]]
    name = "nist"
    file = "data.csv"
    initial = { A = 1, B = 1, C = 1 }
"""


def lanczos_fit(folder, y, start):
    rows = "\n".join(f"{x!r},{v!r}" for x, v in zip(LANCZOS_X, y))
    write(folder, "data.csv", "time,y\n" + rows + "\n")
    write(folder, "e.toml", LANCZOS_EXPERIMENT)
    steps = "".join(f'[[steps]]\nreaction = "{s} -> P{i}"\nrate = "k{i} * [{s}]"\n'
                    for i, s in enumerate("ABC", start=1))
    params = "".join(f"k{i} = {v}\n" for i, v in enumerate(start, start=1))
    mech = mechanism_from_text(steps + "[parameters]\n" + params)
    result = fit(load_experiment(folder / "e.toml"), mech, starts=1)
    sig = result.signals
    fitted = {"b1": sig.coefficient("eps_A_y").value, "b2": result.values["k1"],
              "b3": sig.coefficient("eps_B_y").value, "b4": result.values["k2"],
              "b5": sig.coefficient("eps_C_y").value, "b6": result.values["k3"]}
    stderr = {"b1": sig.coefficient("eps_A_y").stderr, "b2": result.stderr["k1"],
              "b3": sig.coefficient("eps_B_y").stderr, "b4": result.stderr["k2"],
              "b5": sig.coefficient("eps_C_y").stderr, "b6": result.stderr["k3"]}
    return result, fitted, stderr


@pytest.mark.parametrize("start", [LANCZOS_START1, LANCZOS_START2], ids=["start1", "start2"])
@pytest.mark.parametrize("name", ["Lanczos1", "Lanczos2"])
def test_nist_lanczos_by_variable_projection(tmp_path, name, start):
    # Source: NIST StRD Lanczos1/Lanczos2 certified values (copied above).
    # Digits: 5 significant digits of every certified value (relative 1e-5). The
    # limit is the integrator's relative tolerance (1e-8), not the data: the
    # model's exponentials come from integrating the rate equations, which is
    # what kinfit is for; Lanczos1's 13-digit data would support more.
    y = LANCZOS1_Y if name == "Lanczos1" else LANCZOS2_Y
    certified = LANCZOS1_CERTIFIED if name == "Lanczos1" else LANCZOS2_CERTIFIED
    result, fitted, stderr = lanczos_fit(tmp_path, y, start)
    assert result.success
    assert result.n_free == 6                           # 3 rate constants + 3 amplitudes
    for key, value in certified.items():
        assert fitted[key] == pytest.approx(value, rel=1e-5), key
    if name == "Lanczos2":
        # certified standard deviations (σ² = RSS/(N - p), all six parameters
        # together): the full-Jacobian standard errors to 3 significant digits
        for key, sd in LANCZOS2_SD.items():
            assert stderr[key] == pytest.approx(sd, rel=2e-4), key
        assert result.chi2 == pytest.approx(LANCZOS2_RSS, rel=5e-4)
    else:
        # Lanczos1's certified RSS (1.4e-25) is below what the integrator can
        # resolve; the fit's RSS is at the level of its 1e-8 tolerance
        assert result.chi2 < 1e-15


# ------------------------------------------- the Beer–Lambert law, by hand

def test_beer_lambert_worked_example():
    # Handbook-style worked example of our own (not from a source): a dye with
    # ε = 1.20e4 M^-1 cm^-1 at 2.50e-5 M in a 1.00 cm cell absorbs
    # A = ε ℓ c = 1.20e4 × 1.00 × 2.50e-5 = 0.300. A second species with
    # ε = 8.0e3 at 1.0e-5 M adds 0.080 (absorbances add): 0.380; in a 0.20 cm
    # cell the mixture reads 0.380 × 0.20 = 0.076.
    assert absorbance([1.2e4], 1.0, [2.5e-5]) == pytest.approx(0.300, rel=1e-12)
    assert absorbance([1.2e4, 8.0e3], 1.0, [2.5e-5, 1.0e-5]) == pytest.approx(0.380, rel=1e-12)
    assert absorbance([1.2e4, 8.0e3], 0.2, [2.5e-5, 1.0e-5]) == pytest.approx(0.076, rel=1e-12)


def test_known_absorptivities_give_the_hand_computed_signal(files):
    # Same worked example through a fit: A -> B first order, ε_A = 1.20e4 and
    # ε_B = 8.0e3 M^-1 cm^-1 known, 2.50e-5 M of A in a "2 mm" cell (pint: 0.2 cm).
    # At t = 0 the model must read ε_A ℓ [A]0 = 0.06 exactly (worked example of
    # our own); later readings follow the closed form [A] = [A]0 exp(-k t)
    # (textbook first-order integrated rate law).
    t = np.linspace(0, 50, 26)
    a = 2.5e-5 * np.exp(-0.05 * t)
    y = 0.2 * (1.2e4 * a + 8.0e3 * (2.5e-5 - a))
    write(files.folder, "r1.csv", "time,A410\n" + "\n".join(
        f"{ti:g},{float(yi)!r}" for ti, yi in zip(t, y)) + "\n")
    files("e.toml", """
        [signals]
        offset = "none"
        path_length = "2 mm"
        [signals.channels]
        A410 = { A = 12000.0, B = 8000.0 }
        [[runs]]
        name = "r1"
        file = "r1.csv"
        initial = { A = 2.5e-5 }
    """)
    mech = mechanism_from_text('[[steps]]\nreaction = "A -> B"\nrate = "k * [A]"\n'
                               '[parameters]\nk = 0.02\n')
    result = fit(load_experiment(files.folder / "e.toml"), mech, starts=1)
    assert result.values["k"] == pytest.approx(0.05, rel=1e-6)
    assert result.predicted[0] == pytest.approx(0.06, rel=1e-9)
    assert result.signals.coefficients == ()             # nothing was unknown
    assert result.n_free == 1


# ------------------------------------------- one block, solved directly

def test_solve_block_matches_numpy_lstsq():
    # Reference: numpy.linalg.lstsq (general-purpose library) on the weighted
    # design written out by hand: y − ℓ ε_C [C] = ℓ ε_A [A] + ℓ ε_B [B] + o_r + d t
    # with ε_C known, per-run offsets, one shared drift, two runs with path
    # lengths 1 and 0.5 cm, and rows weighted 1/σ. Two parameter sets at once.
    rng = np.random.default_rng(4)
    rows_run = np.repeat([0, 1], 6)
    rows_time = np.tile(np.linspace(0.0, 50.0, 6), 2)
    path = np.where(rows_run == 0, 1.0, 0.5)
    weight = 1.0 / rng.uniform(0.5, 2.0, rows_run.size)
    conc = rng.uniform(0.0, 1.0, (2, rows_run.size, 3))          # [sets, rows, A B C]
    eps_c = 0.4
    columns = (Column(KIND_ABSORPTIVITY, 0, -1, "eps_A"), Column(KIND_ABSORPTIVITY, 1, -1, "eps_B"),
               Column(KIND_OFFSET, -1, 0, "offset_r0"), Column(KIND_OFFSET, -1, 1, "offset_r1"),
               Column(KIND_DRIFT, -1, -1, "drift"))
    offsets = np.column_stack([rows_run == 0, rows_run == 1]).astype(float)
    coef = np.column_stack([path, path, offsets, rows_time])
    values = rng.normal(0.0, 1.0, (1, rows_run.size))
    block = Block(label="A480", channels=("A480",), absorbers=("A", "B", "C"), columns=columns,
                  rows_run=rows_run, rows_time=rows_time, path=path,
                  conc_index=np.zeros((rows_run.size, 3), dtype=int), coef=coef,
                  feature=np.array([0, 1, -1, -1, -1]), known=np.array([[0.0, 0.0, eps_c]]),
                  values=values, row_weight=weight, flat=np.arange(rows_run.size)[None],
                  nonneg=np.zeros(5, dtype=bool))
    sol = solve_block(block, conc, nonnegative=False)
    for s in range(2):
        x = np.column_stack([path * conc[s, :, 0], path * conc[s, :, 1], offsets, rows_time])
        y = values[0] - path * eps_c * conc[s, :, 2]
        beta, *_ = np.linalg.lstsq(x * weight[:, None], y * weight, rcond=None)
        np.testing.assert_allclose(sol.beta[s, 0], beta, rtol=1e-9, atol=1e-12)
        np.testing.assert_allclose(sol.resid[s, 0], weight * (y - x @ beta), atol=1e-12)
    assert not sol.active.any() and sol.special == {}


# ------------------------------------------- the projected residual and its derivative

def test_projected_jacobian_matches_finite_differences(tmp_path):
    # The exact (Golub–Pereyra) derivative of the projected residual, against
    # central differences (common practice), away from the optimum.
    exp, mech = ab_signal_case(tmp_path)
    problem = build_problem(mech, exp)
    values = problem.values_array({"k": 0.03})
    _, jac, ok, _ = problem.residuals_jacobian(values)
    assert ok
    h = 1e-4 * values[0, 0]
    up, down = values.copy(), values.copy()
    up[0, 0] += h
    down[0, 0] -= h
    numeric = (problem.residuals(up)[0] - problem.residuals(down)[0]) / (2 * h)
    # central differences carry O(h²) and the integrator's 1e-8 relative error / h
    np.testing.assert_allclose(jac[:, 0], numeric, rtol=1e-4, atol=1e-5 * np.abs(numeric).max())


def test_sampler_sees_profiled_likelihood(tmp_path):
    # Problem.residuals profiles the linear unknowns: the log-likelihood of a
    # batch equals that of each row alone, and is highest at the fit.
    exp, mech = ab_signal_case(tmp_path)
    result = fit(exp, mech, starts=1)
    problem = build_problem(mech, exp)
    k = result.values["k"]
    rows = np.array([[k], [k * 1.02], [k * 0.98]])
    sigma = problem.observation.sigma
    batch = gaussian_log_likelihood(problem.residuals(rows), sigma)
    single = [gaussian_log_likelihood(problem.residuals(r[None]), sigma)[0] for r in rows]
    np.testing.assert_allclose(batch, single, rtol=1e-12)
    assert batch[0] > batch[1] and batch[0] > batch[2]
    # (the fit integrates with sensitivities, whose step control differs slightly)
    assert batch[0] == pytest.approx(result.log_likelihood, abs=1e-5)


def test_posterior_with_profiled_absorptivities(tmp_path):
    # The sampler works through Problem.residuals, so the absorptivities and
    # the offsets are profiled, not sampled; for this nearly linear problem the
    # posterior spread of k matches the fit's standard error from the full
    # Jacobian (Gaussian approximation of the posterior, common practice).
    from kinfit.estimation.posterior import sample

    exp, mech = ab_signal_case(tmp_path)
    post = sample(exp, mech, walkers=16, steps=600, seed=3, starts=1, profile=False,
                  bands=False)
    assert not any(name.startswith(("eps_", "offset_", "drift_")) for name in post.names)
    k = post.samples[:, post.names.index("k")]
    assert np.std(k) == pytest.approx(post.fit.stderr["k"], rel=0.25)
    assert abs(np.median(k) - post.fit.values["k"]) < 0.5 * post.fit.stderr["k"]


# ------------------------------------------------------- dead time, start

def test_dead_time_and_start(files):
    # With ε known, the dead time t0 shows in the amplitude and is fitted; the
    # readings before start = 0 are left out.
    exp, mech = dead_time_case(files, 0.5)
    assert exp.runs[0].traces[0].times[0] == 0.0 and exp.n_points == 60
    result = fit(exp, mech, starts=1)
    assert abs(result.values["t0_r1"] - 0.8) < 3 * result.stderr["t0_r1"]
    assert abs(result.values["k"] - 0.1) < 3 * result.stderr["k"]
