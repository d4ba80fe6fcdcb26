"""Speed of fitting spectrometer signals, and the effect of the SVD reduction.

Run from the repository root (not part of the test run):

    python tests/benchmarks/bench_spectra.py [--repeats 3]

Prints, from one run of this script (machines are shared and noisy; the cases
are interleaved and medians reported):

1. a diode-array data set of 6 runs x 200 times x 300 wavelengths (seeded,
   invented): wall time of `kinfit.fit` (default 8 starting points, reading
   the files excluded) fitting the leading singular vectors ("auto") and every
   wavelength ("all"), and what the reduction changes: the rate constants in
   units of their standard errors, their standard errors, the share of the
   data's sum of squares left out against the share noise alone would leave;
2. a single-wavelength absorbance fit against the same fit on concentrations
   (same mechanism, runs and times): median wall times and their ratio, and
   the cost of one evaluation with its Jacobian.

Figures from one earlier run on a shared two-core machine: 0.39 s with the
reduction, 3.96 s at every wavelength (target under 20 s); the reduction moved
the rate constants by 2e-5 standard errors and the spectra by 2e-6.
Absorbance 0.190 s against concentrations 0.224 s (ratio 0.85, target at most
2). One evaluation with its Jacobian cost 1.4-2.7 times the concentration one
(about 0.4 ms of projection in numpy on top of the integration), but the
projected problem needs no more evaluations.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_fit import POWER_LAW  # noqa: E402  (the power-law case of the fit benchmark)

from kinfit.estimation.least_squares import fit  # noqa: E402
from kinfit.inputs.experiment import load_experiment  # noqa: E402
from kinfit.inputs.mechanism import mechanism_from_text  # noqa: E402
from kinfit.numerics.integrate import simulate  # noqa: E402
from kinfit.numerics.problem import build_problem  # noqa: E402

DYE = """
name = "P + R -> I -> D"
[[steps]]
reaction = "P + R -> I"
rate = "k1 * [P] * [R]"
[[steps]]
reaction = "I -> D"
rate = "k2 * [I]"
[parameters]
k1 = { value = 0.005, min = 0 }
k2 = { value = 0.01, min = 0 }
"""
DYE_TRUTH = {"k1": 0.02, "k2": 0.05}


def diode_array_case(folder, n_runs=6, n_times=200, n_wavelengths=300, noise=0.002):
    """Seeded synthetic spectra of P + R -> I -> D (R in excess, transparent)."""
    mech = mechanism_from_text(DYE)
    rng = np.random.default_rng(20261216)
    wl = np.linspace(350, 700, n_wavelengths)

    def band(c, w, h):
        return h * np.exp(-0.5 * ((wl - c) / w) ** 2)

    eps = np.array([band(400, 35, 9) + band(470, 30, 1.5), band(485, 40, 7),
                    band(565, 38, 11) + band(420, 30, 2)])
    times = np.linspace(0, 120, n_times)
    runs = []
    for r in range(n_runs):
        reagent = 5.0 * 2 ** (r / 1.5)
        traj = simulate(mech, {"P": 0.05, "R": reagent}, DYE_TRUTH, times)
        conc = np.column_stack([traj["P"], traj["I"], traj["D"]])
        y = conc @ eps + rng.normal(0, noise, (n_times, n_wavelengths))
        lines = ["time," + ",".join(f"{w:.4g}" for w in wl)]
        lines += [f"{t:.6g}," + ",".join(f"{v:.5f}" for v in row) for t, row in zip(times, y)]
        (folder / f"s{r}.csv").write_text("\n".join(lines) + "\n")
        runs.append(f'[[runs]]\nname = "s{r}"\nspectrum = "s{r}.csv"\n'
                    f'initial = {{ P = 0.05, R = {reagent:.6g} }}\n')
    (folder / "spectra.toml").write_text(
        '[units]\ntime = "s"\nconcentration = "mM"\n[signals]\noffset = "none"\n'
        '[signals.spectra]\nabsorbers = ["P", "I", "D"]\n'
        f'noise = {noise}\n' + "\n".join(runs))
    return load_experiment(folder / "spectra.toml"), mech


def absorbance_case(folder):
    """Seeded power-law runs (6 x 60 times): [A] as concentrations, and the same runs
    seen as absorbance = 0.01 + 0.8 [A] + 0.3 [P] at one wavelength."""
    mech = mechanism_from_text(POWER_LAW)
    rng = np.random.default_rng(1)
    times = np.linspace(0, 120, 60)
    starts = [(1.0, 1.0), (2.0, 1.0), (1.0, 2.0), (0.5, 1.5), (1.5, 0.5), (1.0, 3.0)]
    conc_rows, abs_rows, runs = [], [], []
    for i, (a0, b0) in enumerate(starts):
        traj = simulate(mech, {"A": a0, "B": b0}, {"k": 0.02, "m": 1.0, "n": 2.0}, times)
        a = traj["A"] + rng.normal(0, 0.005, times.size)
        y = 0.01 + 0.8 * traj["A"] + 0.3 * traj["P"] + rng.normal(0, 0.004, times.size)
        conc_rows += [f"r{i},{t:.6g},A,{v:.6f}" for t, v in zip(times, a)]
        abs_rows += [f"r{i},{t:.6g},A480,{v:.6f}" for t, v in zip(times, y)]
        runs.append(f'[[runs]]\nname = "r{i}"\ninitial = {{ A = {a0}, B = {b0} }}\n')
    head = "run,time,species,value\n"
    (folder / "conc.csv").write_text(head + "\n".join(conc_rows) + "\n")
    (folder / "abs.csv").write_text(head + "\n".join(abs_rows) + "\n")
    (folder / "conc.toml").write_text('[data]\nfile = "conc.csv"\n' + "\n".join(runs))
    (folder / "abs.toml").write_text(
        '[data]\nfile = "abs.csv"\n[signals]\noffset = "shared"\n[signals.channels]\n'
        'A480 = { A = "unknown", P = "unknown" }\n' + "\n".join(runs))
    return (load_experiment(folder / "conc.toml"), load_experiment(folder / "abs.toml"), mech)


def timed(function):
    t = time.perf_counter()
    out = function()
    return time.perf_counter() - t, out


def evaluation_cost(exp, mech, values, repeats=50):
    problem = build_problem(mech, exp)
    row = problem.values_array(values)
    problem.residuals_jacobian(row)
    t = time.perf_counter()
    for _ in range(repeats):
        problem.residuals_jacobian(row)
    return (time.perf_counter() - t) / repeats


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        t_load, (spectra, dye) = timed(lambda: diode_array_case(folder))
        conc, absorb, power = absorbance_case(folder)
        fit(conc, power, starts=1)                 # compile and warm up
        fit(absorb, power, starts=1)
        cases = {
            "diode array, leading singular vectors": lambda: fit(spectra, dye),
            "diode array, every wavelength": lambda: fit(spectra, dye, components="all"),
            "one wavelength, absorbance": lambda: fit(absorb, power),
            "same runs, concentrations": lambda: fit(conc, power),
        }
        times = {name: [] for name in cases}
        results = {}
        for _ in range(args.repeats):          # interleaved repeats
            for name, run in cases.items():
                elapsed, results[name] = timed(run)
                times[name].append(elapsed)
    median = {name: statistics.median(v) for name, v in times.items()}
    print(f"Diode array: 6 runs x 200 times x 300 wavelengths (360,000 readings); writing and "
          f"reading the files took {t_load:.1f} s")
    for name in list(cases)[:2]:
        r = results[name]
        print(f"  {name:<40} {median[name]:6.2f} s (median of {args.repeats}; 8 starts; "
              f"{r.n_integrations} integrations; N = {r.n_points}, p = {r.n_free})")
    red, full = results["diode array, leading singular vectors"], results[
        "diode array, every wavelength"]
    comps = red.signals.components
    print(f"  SVD: {comps.n_significant} significant components; the reduced fit used "
          f"{comps.n_used}, leaving out {100 * comps.left_out:.4f} % of the sum of squares "
          f"(noise alone: {100 * comps.noise_share:.4f} %)")
    for k in ("k1", "k2"):
        shift = (red.values[k] - full.values[k]) / full.stderr[k]
        print(f"  {k}: reduced {red.values[k]:.6g} ± {red.stderr[k]:.3g}, every wavelength "
              f"{full.values[k]:.6g} ± {full.stderr[k]:.3g} (shift {shift:+.2e} standard "
              f"errors; truth {DYE_TRUTH[k]})")
    spread = np.nanmax(np.abs(red.signals.spectra.values - full.signals.spectra.values)
                       / full.signals.spectra.stderr)
    print(f"  resolved spectra: largest difference {spread:.2e} standard errors")
    print(f"  speed-up of the reduction: {median[list(cases)[1]] / median[list(cases)[0]]:.2f}x")
    a, c = median["one wavelength, absorbance"], median["same runs, concentrations"]
    print("Single wavelength against concentrations (power law, 6 runs x 60 times, 8 starts)")
    print(f"  absorbance (2 unknown absorptivities and an offset solved in each evaluation) "
          f"{a:.3f} s, concentrations {c:.3f} s: ratio {a / c:.2f} (target at most 2)")
    values = {"k": 0.02, "m": 1.0, "n": 2.0}
    ea, ec = evaluation_cost(absorb, power, values), evaluation_cost(conc, power, values)
    print(f"  one evaluation with its Jacobian: absorbance {1e3 * ea:.2f} ms, concentrations "
          f"{1e3 * ec:.2f} ms (ratio {ea / ec:.2f})")
    ra, rc = results["one wavelength, absorbance"], results["same runs, concentrations"]
    print(f"  integrations per fit: absorbance {ra.n_integrations}, concentrations "
          f"{rc.n_integrations}; k = {ra.values['k']:.5g} ± {ra.stderr['k']:.2g} and "
          f"{rc.values['k']:.5g} ± {rc.stderr['k']:.2g}")


if __name__ == "__main__":
    main()
