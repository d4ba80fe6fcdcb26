"""Speed of posterior sampling on the demo: wall time, evaluations per second, ESS.

Run from the repository root (not part of the test run):

    python tests/benchmarks/bench_sample.py [--steps 800] [--moves de stretch] [--repeats 1]

Fits the demo once, then for each move type runs a 32-walker chain of
--steps steps on one core and prints the wall time of the sampling, the
log-posterior evaluations per second (parameter sets integrated), the
smallest effective sample size over the parameters and the autocorrelation
times. The target is at least 1,000 effective samples in under 60 s. With
several move types or repeats the runs are interleaved and medians are
printed, so ratios between move types come from the same run of the
script. Machines are shared and noisy: compare figures from one run only.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from kinfit.estimation.least_squares import fit  # noqa: E402
from kinfit.estimation.posterior import sample  # noqa: E402
from kinfit.inputs.experiment import load_experiment  # noqa: E402
from kinfit.inputs.mechanism import load_mechanism  # noqa: E402


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--steps", type=int, default=800)
    parser.add_argument("--walkers", type=int, default=32)
    parser.add_argument("--moves", nargs="+", default=["de"])
    parser.add_argument("--repeats", type=int, default=1)
    args = parser.parse_args(argv)
    exp = load_experiment(ROOT / "kinfit" / "app" / "templates" / "demo" / "experiment.toml")
    mech = load_mechanism(ROOT / "kinfit" / "app" / "templates" / "demo" / "thiol_addition.toml")
    t0 = time.perf_counter()
    best = fit(exp, mech, starts=1)
    print(f"demo fit (1 start): {time.perf_counter() - t0:.1f} s")
    rows = {m: [] for m in args.moves}
    for rep in range(args.repeats):
        for moves in args.moves:                      # interleaved repeats
            t0 = time.perf_counter()
            post = sample(exp, mech, walkers=args.walkers, steps=args.steps, seed=rep,
                          moves=moves, fit_result=best, profile=False, bands=False)
            wall = time.perf_counter() - t0
            diag = post.diagnostics
            rows[moves].append((wall, post.n_evaluations / post.elapsed,
                                min(diag.ess.values()), max(diag.autocorr_time.values()),
                                diag.converged))
    print(f"{args.walkers} walkers x {args.steps} steps, {args.repeats} repeat(s), medians:")
    print(f"  {'moves':<8} {'wall s':>8} {'evals/s':>9} {'min ESS':>8} {'max τ':>7} "
          f"{'ESS/s':>7}  converged  target (1000 ESS < 60 s)")
    for moves, r in rows.items():
        wall = statistics.median(x[0] for x in r)
        rate = statistics.median(x[1] for x in r)
        ess = statistics.median(x[2] for x in r)
        tau = statistics.median(x[3] for x in r)
        ok = "met" if ess >= 1000 and wall < 60 else "not met"
        print(f"  {moves:<8} {wall:8.1f} {rate:9.0f} {ess:8.0f} {tau:7.1f} {ess / wall:7.1f}  "
              f"{sum(x[4] for x in r)}/{len(r)}        {ok}")


if __name__ == "__main__":
    main()
