"""Calibration study: do kinfit's 95 % intervals contain the truth 95 % of the time?

Run from the repository root (slow; not part of the test run):

    python tests/benchmarks/study_coverage.py --replicates 100 --jobs 2

Each replicate is a synthetic data set of a two-reactant power-law reaction,
A + B -> P with rate k [A]^m [B]^n, made from known parameters with seeded
Gaussian noise of realistic size (σ = sqrt(0.002² + (0.02 y)²) M, declared
in the experiment file): four runs with different starting [A] and [B],
[A] and [P] read 12 times each. For every replicate kinfit fits, profiles
the likelihood and samples the posterior; the script counts how often the
covariance, profile and posterior 95 % intervals of k, m and n contain the
true values, with a 95 % binomial (Clopper-Pearson) interval on each
coverage from scipy.stats.binomtest. Calibrated intervals give 90-99 %.

A small version for a quick look: --replicates 6 --steps 300.
"""

from __future__ import annotations

import argparse
import json
import sys
import tempfile
import time
from multiprocessing import Pool
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

TRUTH = {"k": 8.0, "m": 1.5, "n": 1.0}
RUNS = [(0.10, 0.10), (0.20, 0.10), (0.10, 0.30), (0.05, 0.20)]   # [A]0, [B]0 in M
TIMES = np.linspace(0.0, 30.0, 12)                                 # s
NOISE = (0.002, 0.02)                                              # absolute M, relative
MODEL = """
# A + B -> P with free orders (coverage study)
name = "A + B -> P, free orders"
[[steps]]
reaction = "A + B -> P"
rate = "k * [A]^m * [B]^n"
[parameters]
k = { value = 1.0, min = 0 }
m = { value = 1.0, min = 0, max = 3 }
n = { value = 1.0, min = 0, max = 3 }
"""


def make_replicate(folder, seed):
    """Write model, experiment and noisy data of one replicate into `folder`."""
    from kinfit.inputs.mechanism import mechanism_from_text
    from kinfit.numerics.integrate import simulate

    mech = mechanism_from_text(MODEL)
    rng = np.random.default_rng(seed)
    rows, runs = [], []
    for i, (a0, b0) in enumerate(RUNS):
        traj = simulate(mech, {"A": a0, "B": b0}, TRUTH, TIMES)
        for species in ("A", "P"):
            true = traj[species]
            sd = np.sqrt(NOISE[0] ** 2 + (NOISE[1] * true) ** 2)
            y = true + rng.normal(0.0, 1.0, true.size) * sd
            rows += [f"r{i},{t:.6g},{species},{v:.8g}" for t, v in zip(TIMES, y)]
        runs.append(f'[[runs]]\nname = "r{i}"\ninitial = {{ A = {a0}, B = {b0} }}\n')
    (folder / "traces.csv").write_text("run,time,species,value\n" + "\n".join(rows) + "\n")
    (folder / "experiment.toml").write_text(
        '[units]\ntime = "s"\nconcentration = "M"\n[data]\nfile = "traces.csv"\n'
        f'[noise]\ndefault = {{ absolute = {NOISE[0]}, relative = {NOISE[1]} }}\n'
        + "\n".join(runs))
    (folder / "model.toml").write_text(MODEL.lstrip())


def one_replicate(args):
    seed, walkers, steps, starts = args
    import warnings

    from kinfit.estimation.posterior import compare_intervals, sample
    from kinfit.inputs.experiment import load_experiment
    from kinfit.inputs.mechanism import load_mechanism

    warnings.simplefilter("ignore")
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        make_replicate(folder, seed)
        exp = load_experiment(folder / "experiment.toml")
        mech = load_mechanism(folder / "model.toml")
        t0 = time.perf_counter()
        post = sample(exp, mech, walkers=walkers, steps=steps, seed=seed, starts=starts,
                      bands=False)
        elapsed = time.perf_counter() - t0
    out = {"seed": seed, "converged": post.converged, "seconds": elapsed,
           "tau_multiple": post.diagnostics.tau_multiple,
           "max_rhat": max(post.diagnostics.rhat.values())}
    for row in compare_intervals(post):
        name, truth = row["name"], TRUTH[row["name"]]
        for kind in ("covariance", "profile", "posterior"):
            iv = row[kind]
            lo = -np.inf if iv is None or iv[0] is None else iv[0]
            hi = np.inf if iv is None or iv[1] is None else iv[1]
            out[f"{name}_{kind}"] = bool(lo <= truth <= hi)
    return out


def summarise(results, label):
    """Print the coverage table of a list of replicate outcomes."""
    from scipy.stats import binomtest

    n = len(results)
    print(f"Coverage of the true k, m, n by 95 % intervals over {n} replicates ({label})")
    print(f"  {'interval':<11} {'k':>20} {'m':>20} {'n':>20}")
    for kind in ("covariance", "profile", "posterior"):
        cells = []
        for name in TRUTH:
            hits = sum(r[f"{name}_{kind}"] for r in results)
            ci = binomtest(hits, n).proportion_ci(0.95)
            cells.append(f"{100 * hits / n:5.1f}% [{100 * ci.low:4.1f}, {100 * ci.high:5.1f}]")
        print(f"  {kind:<11} " + " ".join(f"{c:>20}" for c in cells))
    converged = sum(r["converged"] for r in results)
    print("  (in brackets: 95 % Clopper-Pearson interval of the coverage)")
    print(f"  chains converged: {converged} of {n}; median chain/τ "
          f"{np.median([r['tau_multiple'] for r in results]):.0f}, median largest R-hat "
          f"{np.median([r['max_rhat'] for r in results]):.3f}; median "
          f"{np.median([r['seconds'] for r in results]):.1f} s per replicate")


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--replicates", type=int, default=100)
    parser.add_argument("--jobs", type=int, default=1)
    parser.add_argument("--walkers", type=int, default=16)
    parser.add_argument("--steps", type=int, default=1200)
    parser.add_argument("--starts", type=int, default=2)
    parser.add_argument("--first-seed", type=int, default=1000)
    parser.add_argument("--json", type=Path, help="Write every replicate's outcome here "
                        "(rewritten after each replicate).")
    parser.add_argument("--summarise", type=Path, help="Only print the table of a --json file.")
    args = parser.parse_args(argv)
    if args.summarise:
        summarise(json.loads(args.summarise.read_text()), f"from {args.summarise.name}")
        return
    tasks = [(args.first_seed + i, args.walkers, args.steps, args.starts)
             for i in range(args.replicates)]
    results = []
    t0 = time.perf_counter()
    with Pool(args.jobs) as pool:
        for i, r in enumerate(pool.imap_unordered(one_replicate, tasks), 1):
            results.append(r)
            if args.json:
                args.json.write_text(json.dumps(sorted(results, key=lambda x: x["seed"]),
                                                indent=1))
            print(f"  {i}/{len(tasks)} replicates ({time.perf_counter() - t0:.0f} s)",
                  file=sys.stderr, flush=True)
    summarise(results, f"{args.walkers} walkers x {args.steps} steps; seeds "
                       f"{args.first_seed}..{args.first_seed + len(results) - 1}")


if __name__ == "__main__":
    main()
