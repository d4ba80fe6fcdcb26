"""Does the order search rank the true orders first? Seeded replicates of synthetic data.

Run from the repository root (not part of the test run):

    python tests/benchmarks/study_rank_recovery.py [--replicates 10] [--workers 2]

Each replicate simulates A + B -> P with rate k [A]^1 [B]^2 (k = 0.02; 4 runs
varying [A]0 and [B]0; [A] and [P] at 21 times) with 1 % Gaussian noise
(seed = replicate number), then ranks the free-order model together with the
25 fixed-order candidates m in {0, 0.5, 1, 1.5, 2} x n in {1, 1.5, 2, 2.5, 3}.

Prints, per replicate, the place of the true orders among the fixed-order
candidates and among all candidates by AICc and by BIC, and the Akaike weight
of the truth. The check required of kinfit: the true orders rank first among
the fixed-order candidates in at least 9 of 10 replicates. Overall first by
AICc is reported too; it is expected to fail about 13.5 % of the time, because
the free-order template contains the truth and wins whenever its χ² drops by
more than 4 for its two extra orders (P = e^-2 for a χ²(2) variable, Wilks
1938). Exit code 1 if the required check fails.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))

from conftest import synthetic_power_law  # noqa: E402

from kinfit.analysis.ranking import rank  # noqa: E402

TRUTH = {"m": 1.0, "n": 2.0}
GRID = {"m": (0, 0.5, 1, 1.5, 2), "n": (1, 1.5, 2, 2.5, 3)}


def place(rows, predicate):
    return next(i for i, r in enumerate(rows, start=1) if predicate(r))


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--replicates", type=int, default=10)
    parser.add_argument("--workers", type=int, default=None)
    args = parser.parse_args()
    print(f"{'seed':>4} {'among fixed':>11} {'AICc place':>10} {'BIC place':>9} "
          f"{'weight':>7} {'free m':>8} {'free n':>8} {'s':>6}")
    first_fixed = first_aicc = first_bic = 0
    for seed in range(1, args.replicates + 1):
        t = time.perf_counter()
        with tempfile.TemporaryDirectory() as tmp:
            exp, mech = synthetic_power_law(Path(tmp), seed=seed, truth=(0.02, 1.0, 2.0),
                                            relative=0.01)
            by_aicc = rank(exp, mech, GRID, workers=args.workers, cross_check=False)
        is_true = lambda r: r.fixed == TRUTH  # noqa: E731
        fixed = [r for r in by_aicc.candidates if r.template is not None]
        by_bic = sorted(by_aicc.candidates, key=lambda r: r.bic)
        free = next(r for r in by_aicc.candidates if r.template is None).fit
        p_fixed, p_aicc, p_bic = (place(fixed, is_true), place(by_aicc.candidates, is_true),
                                  place(by_bic, is_true))
        first_fixed += p_fixed == 1
        first_aicc += p_aicc == 1
        first_bic += p_bic == 1
        weight = by_aicc[next(r.name for r in by_aicc.candidates if is_true(r))].akaike_weight
        print(f"{seed:>4} {p_fixed:>11} {p_aicc:>10} {p_bic:>9} {weight:>7.3f} "
              f"{free.values['m']:>8.4f} {free.values['n']:>8.4f} "
              f"{time.perf_counter() - t:>6.1f}", flush=True)
    n = args.replicates
    needed = -(-9 * n // 10)
    print(f"\ntrue orders first among the 25 fixed-order candidates: {first_fixed}/{n} "
          f"(required: at least {needed}) -> {'PASS' if first_fixed >= needed else 'FAIL'}")
    print(f"true orders first among all 26 by AICc: {first_aicc}/{n} (expected about "
          f"{0.865 * n:.1f}); by BIC: {first_bic}/{n}")
    return 0 if first_fixed >= needed else 1


if __name__ == "__main__":
    sys.exit(main())
