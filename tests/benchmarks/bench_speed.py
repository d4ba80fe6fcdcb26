"""kinfit's evaluation, fit and sampling speed against a hand-written scipy approach.

Run from the repository root (not part of the test run; a few minutes):

    python tests/benchmarks/bench_speed.py [--repeats 7] [--quick]

Everything is measured in one process with interleaved repeats and medians,
so the ratios hold on a shared, noisy machine. The problem: 6 runs of
A + B -> P with rate k [A]^m [B]^n, [A] and [P] each measured at 30 times
(60 points per run), seeded synthetic data. The "hand-written approach" is
written here the way one would without kinfit: one solve_ivp (RK45) call per
run with a Python right-hand side, and scipy's least_squares with
finite-difference Jacobians; emcee with one log-probability call per walker.
Both use the same tolerances (rtol 1e-9) so that they reach the same optimum.

Printed: the ratios of fit time, evaluations per second and chain time; the
model evaluations and integrations of each fit; one evaluation's cost
relative to evaluating a closed-form integrated rate law on the same grid;
first-fit time in a fresh process (compilation included) and `kinfit --help`
time; a scaling table over runs and points per run; peak memory of a fit and
a chain on the demo.
"""

from __future__ import annotations

import argparse
import math
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import least_squares

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from kinfit.estimation.least_squares import fit  # noqa: E402
from kinfit.estimation.likelihood import gaussian_log_likelihood  # noqa: E402
from kinfit.inputs.experiment import load_experiment  # noqa: E402
from kinfit.inputs.mechanism import mechanism_from_text  # noqa: E402
from kinfit.numerics.integrate import simulate  # noqa: E402
from kinfit.numerics.problem import build_problem  # noqa: E402

RTOL, ATOL = 1e-8, 1e-12     # the same tolerances as kinfit's defaults
SIGMA = 0.005                 # declared noise of the synthetic data
TRUTH = {"k": 0.02, "m": 1.0, "n": 2.0}
START = {"k": 0.05, "m": 1.3, "n": 1.6}
STARTS = [(1.0, 1.0), (2.0, 1.0), (1.0, 2.0), (0.5, 1.5), (1.5, 0.5), (1.0, 3.0)]
MODEL = """
name = "A + B -> P, free orders"
[[steps]]
reaction = "A + B -> P"
rate = "k * [A]^m * [B]^n"
[parameters]
k = { value = %(k)r, min = 0 }
m = { value = %(m)r, min = 0, max = 3 }
n = { value = %(n)r, min = 0, max = 3 }
"""


def make_case(folder, n_runs=6, n_times=30, seed=1):
    """Seeded synthetic data (benchmark input only) and the experiment file."""
    mech = mechanism_from_text(MODEL % START)
    rng = np.random.default_rng(seed)
    times = np.linspace(0, 120, n_times)
    rows, runs, data = [], [], []
    for i in range(n_runs):
        a0, b0 = STARTS[i % len(STARTS)]
        a0 *= 1 + 0.1 * (i // len(STARTS))
        traj = simulate(mech, {"A": a0, "B": b0}, TRUTH, times)
        ya = traj["A"] + rng.normal(0, 0.005, times.size)
        yp = traj["P"] + rng.normal(0, 0.005, times.size)
        rows += [f"r{i},{float(t)!r},A,{v:.6f}" for t, v in zip(times, ya)]
        rows += [f"r{i},{float(t)!r},P,{v:.6f}" for t, v in zip(times, yp)]
        runs.append(f'[[runs]]\nname = "r{i}"\ninitial = {{ A = {a0}, B = {b0} }}\n')
        data.append((a0, b0, times, np.round(ya, 6), np.round(yp, 6)))
    folder = Path(folder)
    (folder / "traces.csv").write_text("run,time,species,value\n" + "\n".join(rows) + "\n")
    (folder / "e.toml").write_text('[data]\nfile = "traces.csv"\n'
                                   f'[noise]\ndefault = {{ absolute = {SIGMA} }}\n'
                                   + "\n".join(runs))
    return load_experiment(folder / "e.toml"), mech, data


# ------------------------------------------------------------ hand-written

class HandWritten:
    """The straightforward scipy approach: one solve_ivp per run, FD Jacobians."""

    def __init__(self, data):
        self.data = data
        self.integrations = 0

    @staticmethod
    def rhs(t, y, k, m, n):
        a, b = max(y[0], 0.0), max(y[1], 0.0)
        r = k * a ** m * b ** n
        return [-r, -r, r]

    def residuals(self, theta):
        k, m, n = theta
        out = []
        for a0, b0, times, ya, yp in self.data:
            self.integrations += 1
            sol = solve_ivp(self.rhs, (0, times[-1]), [a0, b0, 0.0], t_eval=times,
                            args=(k, m, n), rtol=RTOL, atol=ATOL * max(a0, b0))
            out.append(sol.y[0] - ya)
            out.append(sol.y[2] - yp)
        return np.concatenate(out)

    def fit(self):
        x0 = [START["k"], START["m"], START["n"]]
        return least_squares(self.residuals, x0, bounds=([0, 0, 0], [np.inf, 3, 3]),
                             method="trf", x_scale="jac", ftol=1e-10, xtol=1e-10, gtol=1e-10)

    def log_prob(self, theta, sigma):
        if theta[0] <= 0 or not (0 <= theta[1] <= 3 and 0 <= theta[2] <= 3):
            return -np.inf
        r = self.residuals(theta)
        return -0.5 * np.sum(r * r) / sigma ** 2 - 0.5 * r.size * math.log(2 * math.pi
                                                                           * sigma ** 2)


def closed_form(data, k):
    """A + B -> P, first order in each (Laidler; Espenson): [A](t) on every run's grid."""
    out = []
    for a0, b0, times, _, _ in data:
        e = np.exp((b0 - a0) * k * times)
        a = a0 * (b0 - a0) / (b0 * e - a0) if a0 != b0 else a0 / (1 + k * a0 * times)
        out.append(a)
        out.append(a0 - a)
    return np.concatenate(out)


def median_time(fn, repeats):
    ts = []
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        ts.append(time.perf_counter() - t)
    return statistics.median(ts)


def interleaved(fns, repeats, inner=1):
    """Median seconds per call of each function, repeats interleaved."""
    times = {name: [] for name in fns}
    for _ in range(repeats):
        for name, fn in fns.items():
            t = time.perf_counter()
            for _ in range(inner):
                fn()
            times[name].append((time.perf_counter() - t) / inner)
    return {name: statistics.median(v) for name, v in times.items()}


def section(title):
    print(f"\n== {title}")


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=7)
    parser.add_argument("--quick", action="store_true", help="smaller scaling and chain")
    parser.add_argument("--hand-steps", type=int, default=300,
                        help="steps of the (slow) hand-written chain")
    args = parser.parse_args()
    tmp = Path(tempfile.mkdtemp())
    exp, mech, data = make_case(tmp)
    hand = HandWritten(data)
    problem = build_problem(mech, exp)
    theta = np.array([TRUTH["k"], TRUTH["m"], TRUTH["n"]])
    problem.residuals(theta)                     # compile outside the timings
    fit(exp, mech, starts=1)

    section("one model evaluation (all 6 runs, 360 points)")
    t1 = np.array([TRUTH["k"], 1.0, 1.0])
    cost = interleaved({
        "hand-written": lambda: hand.residuals(t1),
        "kinfit": lambda: problem.residuals(t1),
        "closed form": lambda: closed_form(data, TRUTH["k"]),
    }, args.repeats, inner=20)
    np.testing.assert_allclose(problem.predict(t1)[0][0], closed_form(data, TRUTH["k"]),
                               rtol=1e-6, atol=1e-9)
    for name, sec in cost.items():
        print(f"  {name:<14} {sec * 1e6:10.1f} µs")
    print(f"  kinfit / closed form: {cost['kinfit'] / cost['closed form']:.1f}x   "
          f"(target <= 5x);  hand-written / kinfit: {cost['hand-written'] / cost['kinfit']:.0f}x")

    section("global fit, one start (equal work)")
    hand.integrations = 0
    ref = hand.fit()
    hand_integrations = hand.integrations
    result = fit(exp, mech, starts=1)
    ours = np.array([result.values[n] for n in ("k", "m", "n")])
    rel = np.max(np.abs(ours - ref.x) / np.abs(ref.x))
    fits = interleaved({"hand-written": hand.fit, "kinfit": lambda: fit(exp, mech, starts=1)},
                       args.repeats)
    print(f"  hand-written   {fits['hand-written'] * 1e3:9.1f} ms  ({ref.nfev} residual + "
          f"{ref.njev} Jacobian evaluations, {hand_integrations} solve_ivp calls = "
          f"{hand_integrations / 6:.0f} integrations of all runs)")
    print(f"  kinfit         {fits['kinfit'] * 1e3:9.1f} ms  ({result.n_evaluations} evaluations, "
          f"{result.n_integrations} integrations of all runs, {result.method})")
    print(f"  speed-up {fits['hand-written'] / fits['kinfit']:.0f}x (target >= 150x); same "
          f"optimum: max relative difference {rel:.1e} (target <= 1e-4)")
    t8 = median_time(lambda: fit(exp, mech), max(3, args.repeats // 2))
    r8 = fit(exp, mech)
    print(f"  kinfit default ({r8.starts} starts): {t8 * 1e3:.1f} ms, {r8.n_integrations} "
          f"integrations, {r8.starts_at_best} starts at the best fit")

    section("log-probability evaluations for sampling (32 walkers)")
    rng = np.random.default_rng(0)
    walkers = ref.x * (1 + 1e-3 * rng.standard_normal((32, 3)))

    def kinfit_batch():
        return gaussian_log_likelihood(problem.residuals(walkers), problem.observation.sigma)

    def hand_batch():
        return [hand.log_prob(w, SIGMA) for w in walkers]

    lp = interleaved({"hand-written": hand_batch, "kinfit": kinfit_batch},
                     max(3, args.repeats // 2))
    np.testing.assert_allclose(kinfit_batch(), hand_batch(), rtol=1e-6)
    print(f"  hand-written   {32 / lp['hand-written']:10.0f} evaluations/s (one walker per call)")
    print(f"  kinfit         {32 / lp['kinfit']:10.0f} evaluations/s (all walkers in one call)")
    print(f"  ratio {lp['hand-written'] / lp['kinfit']:.0f}x (target >= 100x)")

    import emcee

    from kinfit.estimation.posterior import sample

    n_steps = 500 if args.quick else 2000
    t = time.perf_counter()
    post = sample(exp, mech, walkers=32, steps=n_steps, seed=0, profile=False, bands=False)
    chain_s = time.perf_counter() - t
    print(f"  kinfit.sample, 32 walkers x {n_steps} steps, everything included (fit, start, "
          f"sampling, diagnostics): {chain_s:.1f} s (target < 10 s for 2000 steps); "
          f"{post.n_evaluations / post.elapsed:.0f} evaluations/s while sampling; converged: "
          f"{post.converged}")

    # the hand-written chain: emcee with one log-probability call per walker, on the
    # same scale (log10 k, m, n), priors and moves; short, since it is slow
    hand_steps = args.hand_steps
    start = np.column_stack([np.log10(walkers[:, 0]), walkers[:, 1:]])
    sampler = emcee.EnsembleSampler(32, 3, lambda u: hand.log_prob(
        np.array([10.0 ** u[0], u[1], u[2]]), SIGMA), moves=emcee.moves.DEMove())
    t = time.perf_counter()
    sampler.run_mcmc(start, hand_steps)
    hand_s = time.perf_counter() - t
    hand_chain = sampler.get_chain(discard=hand_steps // 3, flat=True)
    ours = post.samples.copy()
    names = list(post.names)
    ours_cols = [np.log10(ours[:, names.index("k")]), ours[:, names.index("m")],
                 ours[:, names.index("n")]]
    worst = 0.0
    for col, label, theirs in zip(ours_cols, ("log10 k", "m", "n"), hand_chain.T):
        worst = max(worst, abs(col.mean() - theirs.mean()) / col.std())
    print(f"  hand-written chain: {hand_steps} steps in {hand_s:.0f} s "
          f"({32 * hand_steps / hand_s:.0f} evaluations/s); a {n_steps}-step chain would take "
          f"about {n_steps * hand_s / hand_steps:.0f} s")
    print(f"  same posterior: largest difference of means {worst:.3f} sd (target <= 0.1)")

    section("start-up")
    code = ("import time; t = time.perf_counter(); import kinfit; "
            f"e = kinfit.load_experiment({str(tmp / 'e.toml')!r}); "
            f"m = kinfit.mechanism_from_text({MODEL % START!r}); kinfit.fit(e, m, starts=1); "
            "print(time.perf_counter() - t)")
    with tempfile.TemporaryDirectory() as cache:
        cold = float(subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                                    env={"NUMBA_CACHE_DIR": cache, "PATH": ""},
                                    check=True).stdout)
        warm = float(subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                                    env={"NUMBA_CACHE_DIR": cache, "PATH": ""},
                                    check=True).stdout)
    print(f"  first fit in a new process: {cold:.1f} s with compilation (target < 10 s), "
          f"{warm:.1f} s with the compiled code cached on disk")
    helps = [median_time(lambda: subprocess.run([sys.executable, "-m", "kinfit.app.cli", "--help"],
                                                capture_output=True, check=True), 1)
             for _ in range(5)]
    print(f"  kinfit --help: {statistics.median(helps):.2f} s (target < 1 s)")

    section("scaling: time per fit and per evaluation")
    run_counts = (1, 6, 24, 48) if not args.quick else (1, 6, 48)
    point_counts = (50, 500, 5000) if not args.quick else (50, 5000)
    print(f"  {'runs':>5} {'points/run':>10} {'fit ms':>9} {'eval ms':>9} {'µs/point':>9}")
    rows = []
    for n_runs in run_counts:
        for n_points in point_counts:
            folder = Path(tempfile.mkdtemp())
            e2, m2, _ = make_case(folder, n_runs=n_runs, n_times=n_points // 2)
            p2 = build_problem(m2, e2)
            ev = median_time(lambda: p2.residuals(theta), 5)
            ft = median_time(lambda: fit(e2, m2, starts=1), 3)
            rows.append((n_runs, n_points, ft, ev))
            print(f"  {n_runs:>5} {n_points:>10} {ft * 1e3:9.1f} {ev * 1e3:9.2f} "
                  f"{ev / (n_runs * n_points) * 1e6:9.3f}")
    _plot_scaling(rows, tmp / "scaling.png")
    print(f"  (plot: {tmp / 'scaling.png'})")

    section("peak memory on the demo (fresh processes)")
    for label, code in (
            ("fit", "import kinfit; e = kinfit.load_experiment('kinfit/app/templates/demo/experiment.toml'); "
                    "m = kinfit.load_mechanism('kinfit/app/templates/demo/thiol_addition.toml'); kinfit.fit(e, m)"),
            ("kinfit.sample, 32 x 2000", "import kinfit; "
             "e = kinfit.load_experiment('kinfit/app/templates/demo/experiment.toml'); "
             "m = kinfit.load_mechanism('kinfit/app/templates/demo/thiol_addition.toml'); "
             "kinfit.sample(e, m, walkers=32, steps=2000, seed=0)")):
        code += "; import resource; print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)"
        for _ in range(2):   # the first run may still compile (its memory is the compiler's)
            out = subprocess.run([sys.executable, "-c", code], cwd=ROOT, check=True,
                                 capture_output=True, text=True).stdout.split()[-1]
        print(f"  {label:<16} peak resident memory {int(out) / 1024:.0f} MB (target < 300 MB)")


def _plot_scaling(rows, path):
    from matplotlib.figure import Figure

    fig = Figure(figsize=(5, 3.5), layout="constrained")
    ax = fig.subplots()
    for n_runs in sorted({r[0] for r in rows}):
        pts = [(r[1], r[3] * 1e3) for r in rows if r[0] == n_runs]
        ax.loglog(*zip(*pts), marker="o", label=f"{n_runs} runs")
    ax.set_xlabel("points per run")
    ax.set_ylabel("one evaluation (ms)")
    ax.legend(frameon=False)
    fig.savefig(path, dpi=120)


if __name__ == "__main__":
    main()
