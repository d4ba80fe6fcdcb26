"""Wall time of ranking 25 fixed-order candidates on the demo, and whether one start is enough.

Run from the repository root (not part of the test run):

    python tests/benchmarks/bench_rank.py [--repeats 3] [--skip-starts-check]

1. Fits the demo's free-order model once (8 starting points), the template of
   the order search m_thiol, m_acrylate in {0, 0.5, 1, 1.5, 2} (25 candidates,
   m_amine left free).
2. Times the 25 fixed-order fits, warm-started from the template as
   ``kinfit rank`` does, on 1 and on 2 worker processes, interleaved, and
   prints the median of each and their ratio (the target is under 10 s on 2
   cores).
3. Times one whole ``kinfit.rank`` call (template + 25 candidates + the
   initial-rates cross-check) on 2 workers.
4. Unless --skip-starts-check: refits every candidate cold from 4 starting
   points and counts how many reach the same χ² (relative 1e-6) as the
   single warm start, which is the evidence for ``--lattice-starts 1``.

Machines are shared and noisy: compare figures from one run of this script.
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import time
from dataclasses import replace
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from kinfit.analysis.candidates import fit_candidates, warm_start  # noqa: E402
from kinfit.analysis.lattice import order_lattice  # noqa: E402
from kinfit.analysis.ranking import rank  # noqa: E402
from kinfit.estimation.least_squares import fit  # noqa: E402
from kinfit.inputs.experiment import load_experiment  # noqa: E402
from kinfit.inputs.mechanism import load_mechanism  # noqa: E402

GRID = {"m_thiol": (0, 0.5, 1, 1.5, 2), "m_acrylate": (0, 0.5, 1, 1.5, 2)}


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--skip-starts-check", action="store_true")
    args = parser.parse_args()
    try:
        cpus = len(os.sched_getaffinity(0))
    except AttributeError:
        cpus = os.cpu_count()
    exp = load_experiment(ROOT / "kinfit" / "app" / "templates" / "demo" / "experiment.toml")
    mech = load_mechanism(ROOT / "kinfit" / "app" / "templates" / "demo" / "thiol_addition.toml")
    print(f"CPUs available: {cpus}; load average: {os.getloadavg()[0]:.2f}")

    t = time.perf_counter()
    template = fit(exp, mech, starts=8)
    print(f"template (free orders, 8 starts): {time.perf_counter() - t:.2f} s, "
          f"χ² = {template.chi2:.6g}")
    lattice = order_lattice(mech, GRID)
    warm = [replace(c, mechanism=warm_start(c.mechanism, template, exp), template=None)
            for c in lattice]

    times = {1: [], 2: []}
    fits = None
    for _ in range(args.repeats):                 # interleaved repeats
        for workers in (1, 2):
            t = time.perf_counter()
            fits = fit_candidates(exp, warm, starts=1, workers=workers)
            times[workers].append(time.perf_counter() - t)
    one, two = statistics.median(times[1]), statistics.median(times[2])
    print(f"\n25 fixed-order candidates, 1 warm start each (median of {args.repeats}):")
    print(f"  1 worker : {one:7.2f} s")
    print(f"  2 workers: {two:7.2f} s   (target < 10 s; {'met' if two < 10 else 'NOT met'})")
    print(f"  speed-up 1 -> 2 workers: {one / two:.2f}x")

    t = time.perf_counter()
    comparison = rank(exp, mech, GRID, workers=2)
    print(f"\nwhole rank call (template + 25 + cross-check, 2 workers): "
          f"{time.perf_counter() - t:.2f} s")
    best = comparison.best
    print(f"  best: {best.name}  Akaike weight {best.akaike_weight:.3f}")

    if not args.skip_starts_check:
        t = time.perf_counter()
        cold = fit_candidates(exp, [replace(c, template=None, starts=4) for c in lattice],
                              workers=2)
        same = sum(abs(a.chi2 - b.chi2) <= 1e-6 * b.chi2 for a, b in zip(fits, cold))
        better = sum(b.chi2 < a.chi2 * (1 - 1e-6) for a, b in zip(fits, cold))
        print(f"\none warm start against 4 cold starts ({time.perf_counter() - t:.1f} s): same "
              f"χ² in {same} of {len(cold)}; 4 cold starts better in {better}")


if __name__ == "__main__":
    main()
