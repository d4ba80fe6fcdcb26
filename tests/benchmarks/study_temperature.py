"""Coverage study: global temperature fit against the two-stage analysis.

Not collected by pytest. Run from the repository root:

    python tests/benchmarks/study_temperature.py --replicates 40

Each replicate makes seeded synthetic runs at four temperatures (A -> P with
a free order, truth m = 1, Ea = 60 kJ/mol, k_ref = 0.02 s^-1; data from the
closed-form first-order decay, Gaussian noise of 0.005 M), fits them
globally and by the two-stage method (orders free at each temperature), and
records whether each 95 % interval for Ea holds the truth and how wide it
is. Printed: the coverage of both intervals (with its binomial standard
error), the median width ratio two-stage/global, and the median wall time
of each analysis.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from conftest import make_arrhenius_study  # noqa: E402  (the same generator as the tests)


def replicate(seed, folder):
    from kinfit.analysis.activation import activation_parameters
    from kinfit.analysis.two_stage import two_stage
    from kinfit.estimation.least_squares import fit
    from kinfit.inputs.experiment import load_experiment
    from kinfit.inputs.mechanism import load_mechanism

    truth, _ = make_arrhenius_study(folder, seed=seed)
    exp = load_experiment(folder / "experiment.toml")
    mech = load_mechanism(folder / "model.toml")
    t0 = time.perf_counter()
    result = fit(exp, mech, starts=1)
    (act,) = activation_parameters(result)
    t1 = time.perf_counter()
    stage = two_stage(exp, mech, result, orders="free", starts=1).law("k")
    t2 = time.perf_counter()
    glob, two = act.estimate("Ea").interval, stage.estimate("Ea").interval
    ea = truth["Ea"]
    return {"global_covers": glob[0] <= ea <= glob[1], "two_covers": two[0] <= ea <= two[1],
            "ratio": (two[1] - two[0]) / (glob[1] - glob[0]),
            "t_global": t1 - t0, "t_two": t2 - t1}


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--replicates", type=int, default=40)
    parser.add_argument("--seed", type=int, default=1000)
    args = parser.parse_args()
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for i in range(args.replicates):
            folder = Path(tmp) / f"r{i}"
            folder.mkdir()
            rows.append(replicate(args.seed + i, folder))
    n = len(rows)
    for key, label in (("global_covers", "global fit"), ("two_covers", "two-stage")):
        p = np.mean([r[key] for r in rows])
        print(f"coverage of the 95 % interval for Ea, {label:<10}: {p:.3f} "
              f"± {np.sqrt(p * (1 - p) / n):.3f} ({n} replicates)")
    ratios = np.array([r["ratio"] for r in rows])
    print(f"width of the Ea interval, two-stage / global: median {np.median(ratios):.2f}, "
          f"min {ratios.min():.2f}, max {ratios.max():.2f}")
    print(f"median wall time: global fit {np.median([r['t_global'] for r in rows]):.2f} s, "
          f"two-stage {np.median([r['t_two'] for r in rows]):.2f} s")


if __name__ == "__main__":
    main()
