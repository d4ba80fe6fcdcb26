"""Beer–Lambert signals by variable projection, full spectra and their SVD,
against certified data, closed forms and reference libraries."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import least_squares, lsq_linear, nnls

from conftest import write
from kinfit.inputs.experiment import load_experiment
from kinfit.core.errors import KinfitError
from kinfit.estimation.least_squares import fit
from kinfit.estimation.likelihood import gaussian_log_likelihood
from kinfit.inputs.mechanism import mechanism_from_text
from kinfit.numerics.problem import build_problem
from kinfit.numerics.spectra import absorbance, significant_components

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


# ------------------------------------- variable projection = plain fit

def closed_form_ab(t, a0, k):
    """[A] and [B] of A -> B, first order: A0 e^{-kt}, A0 (1 - e^{-kt}) (textbook)."""
    a = a0 * np.exp(-k * t)
    return a, a0 - a


AB_RUNS = {"r1": 1.0, "r2": 2.0, "r3": 0.5}              # [A]0, mM
AB_TRUTH = dict(k=0.05, eps_a=0.9, eps_b=0.25, offset=0.02, drift={"r1": 1e-4, "r2": -2e-4,
                                                                     "r3": 5e-5})


def ab_signal_case(folder, seed=3, extra=""):
    """Seeded single-wavelength absorbance of A -> B in three runs (synthetic)."""
    rng = np.random.default_rng(seed)
    t = np.linspace(0, 80, 41)
    runs = []
    for name, a0 in AB_RUNS.items():
        a, b = closed_form_ab(t, a0, AB_TRUTH["k"])
        y = (AB_TRUTH["offset"] + AB_TRUTH["drift"][name] * t + AB_TRUTH["eps_a"] * a
             + AB_TRUTH["eps_b"] * b + rng.normal(0, 0.004, t.size))
        write(folder, f"{name}.csv", "time,A300\n" + "\n".join(
            f"{ti:g},{yi:.6f}" for ti, yi in zip(t, y)) + "\n")
        runs.append(f'[[runs]]\nname = "{name}"\nfile = "{name}.csv"\ninitial = {{ A = {a0} }}\n')
    write(folder, "e.toml", f"""
        [units]
        time = "s"
        concentration = "mM"
        [signals]
        offset = "shared"
        drift = "per run"
        [signals.channels]
        A300 = {{ A = "unknown", B = "unknown" }}
        {extra}
    """ + "\n".join(runs))
    mech = mechanism_from_text('[[steps]]\nreaction = "A -> B"\nrate = "k * [A]"\n'
                               '[parameters]\nk = 0.02\n')
    return load_experiment(folder / "e.toml"), mech


def test_variable_projection_equals_a_plain_fit_of_all_parameters(tmp_path):
    # Reference: scipy.optimize.least_squares fitting every parameter (k, both
    # absorptivities, the offset, three drifts) on the same data with the
    # closed-form concentrations; covariance s² (JᵀJ)⁻¹ with s² = RSS/(N - p).
    exp, mech = ab_signal_case(tmp_path)
    result = fit(exp, mech, starts=1)
    t = exp.runs[0].traces[0].times
    y = np.concatenate([run.traces[0].values for run in exp.runs])

    def model(q):
        k, ea, eb, off, *drifts = q
        out = []
        for (name, a0), d in zip(AB_RUNS.items(), drifts):
            a, b = closed_form_ab(t, a0, k)
            out.append(off + d * t + ea * a + eb * b)
        return np.concatenate(out) - y

    ref = least_squares(model, [0.02, 0.5, 0.5, 0.0, 0.0, 0.0, 0.0], method="lm",
                        xtol=1e-15, ftol=1e-15, gtol=1e-15)
    s2 = float(ref.fun @ ref.fun) / (y.size - ref.x.size)
    se = np.sqrt(np.diag(np.linalg.inv(ref.jac.T @ ref.jac)) * s2)
    sig = result.signals
    ours = [result.values["k"], sig.coefficient("eps_A_A300").value,
            sig.coefficient("eps_B_A300").value, sig.coefficient("offset_A300").value,
            *[sig.coefficient(f"drift_A300_{r}").value for r in AB_RUNS]]
    ours_se = [result.stderr["k"], sig.coefficient("eps_A_A300").stderr,
               sig.coefficient("eps_B_A300").stderr, sig.coefficient("offset_A300").stderr,
               *[sig.coefficient(f"drift_A300_{r}").stderr for r in AB_RUNS]]
    np.testing.assert_allclose(ours, ref.x, rtol=2e-6, atol=1e-9)
    np.testing.assert_allclose(ours_se, se, rtol=2e-4)
    # correlation of each absorptivity with k, from the same full covariance
    cov = np.linalg.inv(ref.jac.T @ ref.jac) * s2
    corr = cov / np.outer(se, se)
    assert sig.coefficient("eps_A_A300").correlation["k"] == pytest.approx(corr[1, 0], abs=1e-4)
    assert sig.coefficient("eps_B_A300").correlation["k"] == pytest.approx(corr[2, 0], abs=1e-4)
    assert result.chi2 == pytest.approx(float(ref.fun @ ref.fun), rel=1e-7)
    assert result.n_free == 7 and result.n_points == 123
    # and the truth the data were made from lies within 3 standard errors
    assert abs(result.values["k"] - AB_TRUTH["k"]) < 3 * result.stderr["k"]
    # units: absorbance per (mM cm), drift per s
    assert sig.coefficient("eps_A_A300").unit == "mM^-1 cm^-1"
    assert sig.coefficient("drift_A300_r1").unit == "s^-1"


def test_per_run_absorptivities_and_two_channels(files):
    # A -> B in two solvents: ε_A at 300 nm differs by run ("per run"), B absorbs
    # at both wavelengths with one ε each; seeded closed-form data (textbook
    # first-order law), truth recovered within 3 standard errors.
    rng = np.random.default_rng(8)
    t = np.linspace(0, 60, 31)
    truth = {"eps_A_A300_s1": 0.9, "eps_A_A300_s2": 1.3, "eps_B_A300": 0.2, "eps_B_A400": 0.6}
    for run, a0 in (("s1", 1.0), ("s2", 0.8)):
        a, b = closed_form_ab(t, a0, 0.05)
        y300 = truth[f"eps_A_A300_{run}"] * a + truth["eps_B_A300"] * b
        y400 = truth["eps_B_A400"] * b
        noise = rng.normal(0, 0.003, (2, t.size))
        files(f"{run}.csv", "time,A300,A400\n" + "\n".join(
            f"{ti:g},{u:.5f},{v:.5f}" for ti, u, v in zip(t, y300 + noise[0], y400 + noise[1])))
    files("e.toml", """
        [signals]
        offset = "none"
        [signals.channels]
        A300 = { A = "per run", B = "unknown" }
        A400 = { B = "unknown" }
        [[runs]]
        name = "s1"
        file = "s1.csv"
        initial = { A = 1.0 }
        [[runs]]
        name = "s2"
        file = "s2.csv"
        initial = { A = 0.8 }
    """)
    mech = mechanism_from_text('[[steps]]\nreaction = "A -> B"\nrate = "k * [A]"\n'
                               '[parameters]\nk = 0.02\n')
    result = fit(load_experiment(files.folder / "e.toml"), mech, starts=1)
    assert abs(result.values["k"] - 0.05) < 3 * result.stderr["k"]
    assert {c.name for c in result.signals.coefficients} == set(truth)
    for name, true in truth.items():
        c = result.signals.coefficient(name)
        assert abs(c.value - true) < 3 * c.stderr, name
    assert result.signals.coefficient("eps_A_A300_s2").run == "s2"


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


def test_nonnegative_absorptivities_match_scipy_nnls(files):
    # B does not absorb (true ε_B = 0); with the constraint, the solved ε at the
    # fitted k equals scipy.optimize.nnls (Lawson-Hanson) on the same design.
    rng = np.random.default_rng(11)
    t = np.linspace(0, 60, 31)
    a, b = closed_form_ab(t, 1.0, 0.04)
    y = 0.8 * a + rng.normal(0, 0.01, t.size)
    files("r1.csv", "time,A500\n" + "\n".join(f"{ti:g},{yi:.5f}" for ti, yi in zip(t, y)))
    files("e.toml", """
        [signals]
        offset = "none"
        nonnegative = true
        [signals.channels]
        A500 = { A = "unknown", B = "unknown" }
        [[runs]]
        name = "r1"
        file = "r1.csv"
        initial = { A = 1.0 }
    """)
    mech = mechanism_from_text('[[steps]]\nreaction = "A -> B"\nrate = "k * [A]"\n'
                               '[parameters]\nk = 0.02\n')
    result = fit(load_experiment(files.folder / "e.toml"), mech, starts=1)
    a, b = closed_form_ab(t, 1.0, result.values["k"])
    reference, _ = nnls(np.column_stack([a, b]), y)
    sig = result.signals
    assert [sig.coefficient("eps_A_A500").value, sig.coefficient("eps_B_A500").value] == \
        pytest.approx(reference, abs=1e-6)
    free = lsq_linear(np.column_stack([a, b]), y).x        # unconstrained, for contrast
    if free[1] < 0:
        assert sig.coefficient("eps_B_A500").at_bound
        assert sig.coefficient("eps_B_A500").stderr is None


# ------------------------------------------------------- dead time, start

def dead_time_case(files, epsilon):
    """A -> P seen by the absorbance of A; the instrument clock starts t0 = 0.8 s
    after mixing and records from -2 s (closed form A0 e^{-k (t + t0)},
    textbook first-order law; seeded noise)."""
    rng = np.random.default_rng(21)
    t = np.arange(-2.0, 30.0, 0.5)
    conc = np.exp(-0.1 * (np.clip(t, 0, None) + 0.8))
    y = 0.5 * np.where(t >= 0, conc, 1.0) + 0.01 + rng.normal(0, 0.002, t.size)
    files("r1.csv", "Time (s);A350\n" + "\n".join(
        f"{ti:g};{yi:.5f}".replace(".", ",") for ti, yi in zip(t, y)))
    files("e.toml", f"""
        [signals]
        [signals.channels]
        A350 = {{ A = {epsilon} }}
        [[runs]]
        name = "r1"
        file = "r1.csv"
        start = 0
        initial = {{ A = 1.0 }}
        time_offset = {{ value = 0.2, vary = true, min = 0, max = 3 }}
    """)
    mech = mechanism_from_text('[[steps]]\nreaction = "A -> P"\nrate = "k * [A]"\n'
                               '[parameters]\nk = 0.05\n')
    return load_experiment(files.folder / "e.toml"), mech


def test_dead_time_and_start(files):
    # With ε known, the dead time t0 shows in the amplitude and is fitted; the
    # readings before start = 0 are left out.
    exp, mech = dead_time_case(files, 0.5)
    assert exp.runs[0].traces[0].times[0] == 0.0 and exp.n_points == 60
    result = fit(exp, mech, starts=1)
    assert abs(result.values["t0_r1"] - 0.8) < 3 * result.stderr["t0_r1"]
    assert abs(result.values["k"] - 0.1) < 3 * result.stderr["k"]


def test_dead_time_with_unknown_absorptivity_is_flagged(files):
    # For a first-order decay A0 e^{-k(t + t0)} = (A0 e^{-k t0}) e^{-kt}: with ε
    # unknown, t0 only rescales the amplitude (algebra of the closed form), so
    # the data cannot give it; kinfit says so.
    exp, mech = dead_time_case(files, '"unknown"')
    result = fit(exp, mech, starts=1)
    assert any("t0_r1" in w and "linear unknowns" in w for w in result.warnings)
    assert abs(result.values["k"] - 0.1) < 3 * result.stderr["k"]


# ----------------------------------------------------------- full spectra

WAVELENGTHS = np.linspace(300.0, 600.0, 61)


def band(centre, width, height):
    return height * np.exp(-0.5 * ((WAVELENGTHS - centre) / width) ** 2)


SPECTRA = {  # overlapping bands (invented), absorptivity per mM per cm
    "A": band(350, 40, 1.2) + band(480, 30, 0.3),
    "B": band(420, 50, 0.9),
    "C": band(470, 45, 0.7) + band(330, 30, 0.2),
}


def closed_form_abc(t, a0, k1, k2):
    """A -> B -> C first order (textbook consecutive-reaction solution, k1 ≠ k2)."""
    a = a0 * np.exp(-k1 * t)
    b = a0 * k1 / (k2 - k1) * (np.exp(-k1 * t) - np.exp(-k2 * t))
    return np.column_stack([a, b, a0 - a - b])


def spectra_case(folder, species=("A", "B", "C"), seed=5, components='"auto"', noise=0.003,
                 truth=(0.08, 0.02)):
    """Seeded synthetic diode-array runs of A -> B -> C (or A -> B), offsets none."""
    rng = np.random.default_rng(seed)
    t = np.linspace(0, 150, 50)
    eps = np.array([SPECTRA[s] for s in species])
    runs = []
    for r, a0 in enumerate((1.0, 1.5, 0.7)):
        if len(species) == 3:
            conc = closed_form_abc(t, a0, *truth)
        else:
            conc = np.column_stack(closed_form_ab(t, a0, truth[0]))
        y = conc @ eps + rng.normal(0, noise, (t.size, WAVELENGTHS.size))
        lines = ["time," + ",".join(f"{w:g}" for w in WAVELENGTHS)]
        lines += [f"{ti:g}," + ",".join(f"{v:.6f}" for v in row) for ti, row in zip(t, y)]
        write(folder, f"s{r}.csv", "\n".join(lines) + "\n")
        runs.append(f'[[runs]]\nname = "s{r}"\nspectrum = "s{r}.csv"\ninitial = {{ A = {a0} }}\n')
    listed = ", ".join(f'"{s}"' for s in species)
    write(folder, "e.toml", f"""
        [units]
        time = "s"
        concentration = "mM"
        [signals]
        offset = "none"
        [signals.spectra]
        absorbers = [{listed}]
        components = {components}
        noise = {noise}
    """ + "\n".join(runs))
    if len(species) == 3:
        text = ('[[steps]]\nreaction = "A -> B"\nrate = "k1 * [A]"\n[[steps]]\n'
                'reaction = "B -> C"\nrate = "k2 * [B]"\n[parameters]\nk1 = 0.05\nk2 = 0.01\n')
    else:
        text = '[[steps]]\nreaction = "A -> B"\nrate = "k1 * [A]"\n[parameters]\nk1 = 0.05\n'
    return load_experiment(folder / "e.toml"), mechanism_from_text(text)


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


def test_consecutive_spectra_recovered(tmp_path):
    # Synthetic A -> B -> C with overlapping spectra: rate constants within 3
    # standard errors of the truth, and the resolved spectra within their
    # standard errors (about 95 % of points within 2, common practice).
    exp, mech = spectra_case(tmp_path)
    result = fit(exp, mech, starts=1)
    assert result.signals.components.n_significant == 3
    assert result.signals.components.n_used == 3 and result.signals.reduced
    for name, true in (("k1", 0.08), ("k2", 0.02)):
        assert abs(result.values[name] - true) < 3 * result.stderr[name], name
    spectra = result.signals.spectra
    z = (spectra.values - np.array([SPECTRA[s] for s in spectra.species])) / spectra.stderr
    assert np.isfinite(z).all()
    assert np.mean(np.abs(z) < 2) > 0.9
    assert np.sqrt(np.mean(z ** 2)) < 1.3
    assert [f.shape for f in spectra.fitted] == [(50, 61)] * 3


def test_reduced_fit_matches_the_full_fit(tmp_path):
    # Fitting the leading singular vectors changes the rate constants by a
    # small fraction of their standard errors; the reduction's left-out share
    # of the data matches what noise alone would leave (common practice).
    exp, mech = spectra_case(tmp_path)
    reduced = fit(exp, mech, starts=1)
    full = fit(exp, mech, starts=1, components="all")
    assert full.signals.components.n_used is None and not full.signals.reduced
    assert full.n_points == 3 * 50 * 61
    for name in ("k1", "k2"):
        assert abs(reduced.values[name] - full.values[name]) < 0.05 * full.stderr[name]
        assert reduced.stderr[name] == pytest.approx(full.stderr[name], rel=0.05)
    comps = reduced.signals.components
    assert comps.left_out == pytest.approx(comps.noise_share, rel=0.1)
    np.testing.assert_allclose(reduced.signals.spectra.values, full.signals.spectra.values,
                               atol=1e-3)


def test_slow_fast_ambiguity_of_consecutive_steps(tmp_path):
    # A -> B -> C seen only through absorbance: swapping k1 and k2 fits equally
    # well, with the spectra of A and C unchanged and that of B moved to
    # ε_B' = ε_A + (ε_B - ε_A) k1/k2 (the slow-fast ambiguity of consecutive
    # first-order reactions; the closed form of [B] makes k2/k1 [B] the swapped
    # [B]; physical chemistry texts, from memory). kinfit finds either, by its
    # start.
    exp, mech = spectra_case(tmp_path, components='"all"')
    right = fit(exp, mech, starts=1)
    swapped_mech = mechanism_from_text(
        '[[steps]]\nreaction = "A -> B"\nrate = "k1 * [A]"\n[[steps]]\n'
        'reaction = "B -> C"\nrate = "k2 * [B]"\n[parameters]\nk1 = 0.015\nk2 = 0.1\n')
    swapped = fit(exp, swapped_mech, starts=1)
    assert swapped.chi2 == pytest.approx(right.chi2, rel=1e-6)
    assert swapped.values["k1"] == pytest.approx(right.values["k2"], rel=1e-5)
    e = right.signals.spectra.values
    e_swapped = swapped.signals.spectra.values
    ratio = right.values["k1"] / right.values["k2"]
    np.testing.assert_allclose(e_swapped[[0, 2]], e[[0, 2]], atol=1e-5)
    np.testing.assert_allclose(e_swapped[1] - e[0], (e[1] - e[0]) * ratio, atol=1e-5)


# ------------------------------------------------------------- bad input

@pytest.mark.parametrize("extra, message", [
    ('[signals.channels]\nA300 = { Z = "unknown" }\n', r"signals\.channels\.A300.*no species 'Z'"),
    ('[signals.channels]\nA = { A = "unknown" }\n', r"'A' is a species of the model"),
    ('[signals.channels]\nA300 = { A = "unknown" }\nA999 = { A = "unknown" }\n',
     r"no run measured the channel 'A999'"),
])
def test_signal_declarations_are_checked_against_the_model(files, extra, message):
    t = np.linspace(0, 10, 6)
    files("r1.csv", "time,A300\n" + "\n".join(f"{ti:g},{0.5 * math.exp(-ti / 5):.4f}"
                                              for ti in t))
    files("e.toml", '[signals]\n' + extra + '[[runs]]\nname = "r1"\nfile = "r1.csv"\n'
          'initial = { A = 1 }\n')
    mech = mechanism_from_text('[[steps]]\nreaction = "A -> B"\nrate = "k * [A]"\n'
                               '[parameters]\nk = 0.1\n')
    with pytest.raises(KinfitError, match=message):
        fit(load_experiment(files.folder / "e.toml"), mech, starts=1)


def test_one_estimated_noise_cannot_span_signals_and_concentrations(files):
    files("r1.csv", "time,A300,B\n0,0.5,0\n5,0.3,0.4\n10,0.2,0.6\n")
    files("e.toml", '[signals]\n[signals.channels]\nA300 = { A = "unknown" }\n'
          '[[runs]]\nname = "r1"\nfile = "r1.csv"\ninitial = { A = 1 }\n')
    mech = mechanism_from_text('[[steps]]\nreaction = "A -> B"\nrate = "k * [A]"\n'
                               '[parameters]\nk = 0.1\n')
    with pytest.raises(KinfitError, match="different units"):
        build_problem(mech, load_experiment(files.folder / "e.toml"))


def test_spectra_on_different_wavelengths_are_refused(tmp_path):
    exp, mech = spectra_case(tmp_path)
    text = (tmp_path / "s1.csv").read_text().split("\n")
    text[0] = text[0].replace("300,", "301,", 1)
    (tmp_path / "s1.csv").write_text("\n".join(text))
    with pytest.raises(KinfitError, match=r"s1\.csv: the wavelengths differ"):
        build_problem(mech, load_experiment(tmp_path / "e.toml"))


def test_a_closed_system_with_per_run_offsets_is_flagged(tmp_path):
    # [A] + [B] = [A]0 in every run, so a per-run offset cannot be told apart
    # from the absorptivities (linear algebra; common practice to warn).
    exp, mech = ab_signal_case(tmp_path, extra="")
    text = (tmp_path / "e.toml").read_text().replace('offset = "shared"', 'offset = "per run"')
    (tmp_path / "e.toml").write_text(text)
    result = fit(load_experiment(tmp_path / "e.toml"), mech, starts=1)
    assert any("cannot tell apart" in w for w in result.warnings)


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
