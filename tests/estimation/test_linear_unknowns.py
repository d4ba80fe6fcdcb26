"""The linear unknowns of a signal fit (kinfit.estimation.linear_unknowns):
absorptivities, offsets and drifts with their standard errors and
correlations, resolved spectra, and the warnings where the data cannot
separate them; against scipy's least squares and nnls and closed forms."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import least_squares, lsq_linear, nnls
from signal_cases import (
    AB_RUNS,
    AB_TRUTH,
    SPECTRA,
    ab_signal_case,
    closed_form_ab,
    dead_time_case,
    spectra_case,
)

from kinfit.estimation.least_squares import fit
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import mechanism_from_text

# ------------------------------------- variable projection = plain fit

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


# ------------------------------------------------- what the data cannot give

def test_dead_time_with_unknown_absorptivity_is_flagged(files):
    # For a first-order decay A0 e^{-k(t + t0)} = (A0 e^{-k t0}) e^{-kt}: with ε
    # unknown, t0 only rescales the amplitude (algebra of the closed form), so
    # the data cannot give it; kinfit says so.
    exp, mech = dead_time_case(files, '"unknown"')
    result = fit(exp, mech, starts=1)
    assert any("t0_r1" in w and "linear unknowns" in w for w in result.warnings)
    assert abs(result.values["k"] - 0.1) < 3 * result.stderr["k"]


def test_a_closed_system_with_per_run_offsets_is_flagged(tmp_path):
    # [A] + [B] = [A]0 in every run, so a per-run offset cannot be told apart
    # from the absorptivities (linear algebra; common practice to warn).
    exp, mech = ab_signal_case(tmp_path, extra="")
    text = (tmp_path / "e.toml").read_text().replace('offset = "shared"', 'offset = "per run"')
    (tmp_path / "e.toml").write_text(text)
    result = fit(load_experiment(tmp_path / "e.toml"), mech, starts=1)
    assert any("cannot tell apart" in w for w in result.warnings)


# ----------------------------------------------------------- full spectra

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
