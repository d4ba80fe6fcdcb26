"""Global fits against certified and textbook answers."""

from __future__ import annotations

import math

import numpy as np
import pytest
from conftest import DEMO, write

from kinfit.app import demo
from kinfit.core.errors import KinfitError
from kinfit.estimation.least_squares import fit
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism, mechanism_from_text
from kinfit.numerics.integrate import simulate

# NIST/ITL Statistical Reference Datasets, Nonlinear Least Squares Regression,
# dataset BoxBOD (Box et al. 1978), "higher level of difficulty".
# Model y = b1 (1 - exp(-b2 x)); data, starting points and certified values
# copied from the NIST file BoxBOD.dat. In kinetic terms: A -> P first order,
# P observed, b1 = [A]0 and b2 = k.
BOXBOD_X = [1, 2, 3, 5, 7, 10]
BOXBOD_Y = [109, 149, 149, 191, 213, 224]
BOXBOD_START1 = {"b1": 1.0, "b2": 1.0}
BOXBOD_START2 = {"b1": 100.0, "b2": 0.75}
BOXBOD_B1, BOXBOD_B2 = 2.1380940889e02, 5.4723748542e-01
BOXBOD_SD1, BOXBOD_SD2 = 1.2354515176e01, 1.0455993237e-01
BOXBOD_RSS = 1.1680088766e03


def sig_digits_equal(a, b, digits):
    return float(f"{a:.{digits - 1}e}") == float(f"{b:.{digits - 1}e}")


@pytest.mark.parametrize("start", [BOXBOD_START1, BOXBOD_START2], ids=["start1", "start2"])
def test_nist_boxbod(tmp_path, start):
    rows = "\n".join(f"bod,{x},P,{y}" for x, y in zip(BOXBOD_X, BOXBOD_Y))
    write(tmp_path, "traces.csv", "run,time,species,value\n" + rows + "\n")
    write(tmp_path, "e.toml", f"""
        [units]
        time = "d"
        concentration = "mg/L"
        [data]
        file = "traces.csv"
        [[runs]]
        name = "bod"
        initial = {{ A = {{ value = {start['b1']}, vary = true, min = 0 }} }}
    """)
    mech = mechanism_from_text('[[steps]]\nreaction = "A -> P"\nrate = "k * [A]"\n'
                               f'[parameters]\nk = {start["b2"]}\n')
    result = fit(load_experiment(tmp_path / "e.toml"), mech, starts=1)
    assert result.success
    # at least 5 significant digits of the certified values (required)
    assert sig_digits_equal(result.values["A_0_bod"], BOXBOD_B1, 5)
    assert sig_digits_equal(result.values["k"], BOXBOD_B2, 5)
    assert result.values["A_0_bod"] == pytest.approx(BOXBOD_B1, rel=2e-6)
    assert result.values["k"] == pytest.approx(BOXBOD_B2, rel=5e-6)
    assert result.chi2 == pytest.approx(BOXBOD_RSS, rel=1e-9)
    # certified standard deviations use σ² = RSS/(N - p), as kinfit does for unknown noise
    assert result.stderr["A_0_bod"] == pytest.approx(BOXBOD_SD1, rel=1e-5)
    assert result.stderr["k"] == pytest.approx(BOXBOD_SD2, rel=1e-5)
    assert result.units["k"] == "d^-1"


def synthetic_ab(folder, seed, truth=(0.02, 1.0, 2.0), noise=0.002):
    """Seeded synthetic data of A + B -> P with rate k [A]^m [B]^n (declared noise)."""
    k, m, n = truth
    mech = load_mechanism(folder / "model.toml") if (folder / "model.toml").exists() else None
    text = """
        name = "A + B -> P, free orders"
        [[steps]]
        reaction = "A + B -> P"
        rate = "k * [A]^m * [B]^n"
        [parameters]
        k = { value = 0.1, min = 0 }
        m = { value = 1.5, min = 0, max = 3 }
        n = { value = 1.5, min = 0, max = 3 }
    """
    write(folder, "model.toml", text)
    mech = load_mechanism(folder / "model.toml")
    rng = np.random.default_rng(seed)
    times = np.linspace(0, 100, 21)
    starts = {"r1": (1.0, 1.0), "r2": (2.0, 1.0), "r3": (1.0, 2.0), "r4": (0.5, 1.5)}
    rows, runs = [], []
    for name, (a0, b0) in starts.items():
        traj = simulate(mech, {"A": a0, "B": b0}, {"k": k, "m": m, "n": n}, times)
        for species in ("A", "P"):
            y = traj[species] + rng.normal(0, noise, times.size)
            rows += [f"{name},{t:g},{species},{v:.6f}" for t, v in zip(times, y)]
        runs.append(f'[[runs]]\nname = "{name}"\ninitial = {{ A = {a0}, B = {b0} }}\n')
    write(folder, "traces.csv", "run,time,species,value\n" + "\n".join(rows) + "\n")
    write(folder, "e.toml", '[data]\nfile = "traces.csv"\n[noise]\n'
                            f'default = {{ absolute = {noise} }}\n' + "\n".join(runs))
    return load_experiment(folder / "e.toml"), mech


def test_seeded_synthetic_power_law_recovered_within_three_standard_errors(tmp_path):
    # Known truth, declared noise: every estimate within 3 standard errors
    # (common practice for a Gaussian estimator; P(|z| > 3) = 0.27 %).
    exp, mech = synthetic_ab(tmp_path, seed=3)
    result = fit(exp, mech, starts=3)
    for name, true in zip(("k", "m", "n"), (0.02, 1.0, 2.0)):
        assert abs(result.values[name] - true) < 3 * result.stderr[name], name
    assert result.overall_orders["k"] == pytest.approx(3.0, abs=0.1)
    unit = result.units["k"]                       # M^(1-n) s^-1 with the fitted n
    assert unit.startswith("M^") and unit.endswith(" s^-1")
    assert float(unit[2:-5]) == pytest.approx(1 - result.overall_orders["k"], abs=1e-3)
    assert 0.5 < result.reduced_chi2 < 1.5
    assert result.noise_declared and result.sigma is None


def test_units_of_k_for_integer_orders(tmp_path):
    # IUPAC Gold Book "rate coefficient" (from memory): overall order 3 -> M^-2 s^-1.
    exp, _ = synthetic_ab(tmp_path, seed=4)
    mech = mechanism_from_text('[[steps]]\nreaction = "A + B -> P"\nrate = "k * [A] * [B]^2"\n'
                               '[parameters]\nk = 0.05\n')
    result = fit(exp, mech, starts=1)
    assert result.units["k"] == "M^-2 s^-1"
    assert result.overall_orders["k"] == 3.0
    assert abs(result.values["k"] - 0.02) < 3 * result.stderr["k"]


def test_unidentifiable_parameters_are_reported(tmp_path):
    # Parallel A -> B, A -> C with only A measured: [A] depends on k1 + k2 alone
    # (textbook: Atkins, parallel reactions; from memory), so the split is unknown.
    write(tmp_path, "traces.csv", "run,time,species,value\n" + "\n".join(
        f"r1,{t},A,{math.exp(-0.15 * t):.6f}" for t in range(0, 30, 2)) + "\n")
    write(tmp_path, "e.toml", '[data]\nfile = "traces.csv"\n[[runs]]\nname = "r1"\n'
                              'initial = { A = 1.0 }\n')
    mech = mechanism_from_text("""
        [[steps]]
        reaction = "A -> B"
        rate = "k1 * [A]"
        [[steps]]
        reaction = "A -> C"
        rate = "k2 * [A]"
        [parameters]
        k1 = 0.1
        k2 = 0.1
    """)
    result = fit(load_experiment(tmp_path / "e.toml"), mech, starts=2)
    assert result.values["k1"] + result.values["k2"] == pytest.approx(0.15, rel=1e-4)
    assert result.covariance is None and result.stderr["k1"] is None
    assert any("cannot pin down" in w for w in result.warnings)


def test_fixed_parameters_and_more_parameters_than_points(tmp_path, small):
    exp = load_experiment(small["experiment"])
    mech = mechanism_from_text('[[steps]]\nreaction = "A -> P"\nrate = "k * [A]"\n'
                               '[parameters]\nk = { value = 0.05, vary = false }\n')
    result = fit(exp, mech)
    assert result.n_free == 0 and result.values["k"] == 0.05 and result.stderr["k"] is None
    many = mechanism_from_text('[[steps]]\nreaction = "A -> P"\nrate = "k * [A]^n * [P]^q"\n'
                               '[parameters]\nk = 0.05\nn = 1\nq = 0\n')
    write(small["folder"], "traces.csv", "run,time,species,value\nr1,0,A,1\nr1,1,A,0.9\n"
                                         "r1,2,A,0.8\n")
    with pytest.raises(KinfitError, match="3 fitted parameters but only 3 data points"):
        fit(load_experiment(small["experiment"]), many)
    with pytest.raises(KinfitError, match="starts must be"):
        fit(exp, mech, starts=0)


@pytest.fixture(scope="module")
def demo_result():
    return fit(load_experiment(DEMO / "experiment.toml"),
               load_mechanism(DEMO / "thiol_addition.toml"))


def test_demo_recovers_the_truth_within_three_standard_errors(demo_result):
    # The demo's data were simulated from demo.TRUTH with declared noise.
    for name, true, value, se, z in demo.compare_with_truth(demo_result):
        assert abs(z) < 3, f"{name}: {value} vs {true} ({z:+.1f} standard errors)"
    assert demo_result.success
    assert demo_result.starts_at_best >= demo_result.starts // 2


def test_result_json_contract(demo_result):
    d = demo_result.to_dict()
    assert d["model"] == "thiol + acrylate -> adduct, free orders"
    assert d["success"] is True
    for name, p in d["parameters"].items():
        assert {"value", "stderr", "unit"} <= set(p)
    assert d["parameters"]["k"]["unit"].endswith("min^-1")
    assert set(d["statistics"]) >= {"n_data", "n_params", "chisqr", "aic", "aicc", "bic"}
    assert d["statistics"]["n_data"] == 300 and d["statistics"]["n_params"] == 4
    assert len(d["correlation"]["matrix"]) == 4


TWO_STEPS = """
    [[steps]]
    reaction = "A -> B"
    rate = "k1 * [A]"
    [[steps]]
    reaction = "B -> C"
    rate = "k2 * [B]"
    [parameters]
    k1 = { value = 0.01, min = 0 }
    k2 = { value = 0.001, min = 0 }
"""


def test_a_rate_constant_consistent_with_zero_is_warned_about(tmp_path):
    # Seeded data of A -> B -> C whose second step is too slow to show (k2 = 1e-5 per
    # minute over an hour): the fit's k2 is consistent with zero, and the warning says
    # so, names k2 and suggests the model without B -> C.
    mech = mechanism_from_text(TWO_STEPS)
    rng = np.random.default_rng(808)
    t = np.linspace(0.0, 60.0, 16)
    rows, runs = [], []
    for run, a0 in (("r1", 1.0), ("r2", 2.0)):
        true = simulate(mech, {"A": a0}, {"k1": 0.05, "k2": 1e-5}, t)
        for s in ("A", "B"):
            rows += [f"{run},{ti:g},{s},{v:.6f}"
                     for ti, v in zip(t, true[s] + rng.normal(0.0, 0.01, t.size))]
        runs.append(f'[[runs]]\nname = "{run}"\ninitial = {{ A = {a0} }}\n')
    write(tmp_path, "t.csv", "run,time,species,value\n" + "\n".join(rows) + "\n")
    write(tmp_path, "e.toml", '[units]\ntime = "min"\nconcentration = "mM"\n[data]\n'
                              'file = "t.csv"\n' + "\n".join(runs))
    result = fit(load_experiment(tmp_path / "e.toml"), mech, starts=4)
    k2, se = result.values["k2"], result.stderr["k2"]
    assert k2 - 1.96 * se < 0
    (warning,) = [w for w in result.warnings if w.startswith("k2 = ")]
    assert "95 % interval" in warning and "min^-1 includes zero" in warning
    assert "without steps[2] (B -> C)" in warning and "kinfit rank" in warning
    assert not any(w.startswith("k1 = ") for w in result.warnings)
    assert warning in result.to_dict()["warnings"]


def test_a_rate_constant_spanning_a_factor_of_ten_is_warned_about():
    # By hand: k = 1, se = 0.45 gives 1 ± 1.96·0.45 = [0.118, 1.882], a factor of 15.9;
    # se = 0.40 gives [0.216, 1.784], a factor of 8.3 (no warning).
    from kinfit.estimation.least_squares import rate_constant_warnings

    mech = mechanism_from_text(TWO_STEPS)
    units = {"k1": "s^-1", "k2": "s^-1"}
    (warning,) = rate_constant_warnings(mech, {"k1": 1.0, "k2": 1.0},
                                        {"k1": 0.45, "k2": 0.40}, units)
    assert warning.startswith("k1 = 1 ± 0.45: its 95 % interval [0.12, 1.9] s^-1 spans a "
                              "factor of 16")
    assert "without steps[1] (A -> B)" in warning
    # a reverse rate constant: the step made irreversible
    reversible = mechanism_from_text('[[steps]]\nreaction = "A <=> B"\nrate = "kf*[A]"\n'
                                     'reverse_rate = "kr*[B]"\n[parameters]\nkf = 1\nkr = 1\n')
    (warning,) = rate_constant_warnings(reversible, {"kf": 1.0, "kr": 0.01},
                                        {"kf": 0.01, "kr": 0.02}, {})
    assert "kr = 0.01 ± 0.02: its 95 % interval [-0.029, 0.049] includes zero" in warning
    assert "with steps[1] (A <=> B) irreversible" in warning
    # a one-step model: no model without the step to suggest
    single = mechanism_from_text('[[steps]]\nreaction = "A -> B"\nrate = "k*[A]"\n'
                                 '[parameters]\nk = 1\n')
    (warning,) = rate_constant_warnings(single, {"k": 1.0}, {"k": 0.6}, {})
    assert "wider range of concentrations" in warning
    # fixed rate constants and those without a standard error are left alone
    assert rate_constant_warnings(single, {"k": 1.0}, {"k": None}, {}) == []
