"""Wall time and work of kinfit.fit on the demo and on a 6-run power-law case.

Run from the repository root (not part of the test run):

    python tests/benchmarks/bench_fit.py [--repeats 5]

Prints, for each case and number of starting points, the median wall time
over interleaved repeats, the model evaluations (parameter sets integrated)
and the integrator calls of one fit. Machines are shared and noisy: compare
figures from one run of this script, not across runs.
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

from kinfit.estimation.least_squares import fit  # noqa: E402
from kinfit.inputs.experiment import load_experiment  # noqa: E402
from kinfit.inputs.mechanism import load_mechanism, mechanism_from_text  # noqa: E402
from kinfit.numerics.integrate import simulate  # noqa: E402

POWER_LAW = """
name = "A + B -> P, free orders"
[[steps]]
reaction = "A + B -> P"
rate = "k * [A]^m * [B]^n"
[parameters]
k = { value = 0.1, min = 0 }
m = { value = 1.5, min = 0, max = 3 }
n = { value = 1.5, min = 0, max = 3 }
"""


def power_law_case(folder):
    """6 runs x 60 times, [A] and [P] observed, seeded noise (synthetic benchmark data)."""
    mech = mechanism_from_text(POWER_LAW)
    rng = np.random.default_rng(1)
    times = np.linspace(0, 120, 60)
    starts = [(1.0, 1.0), (2.0, 1.0), (1.0, 2.0), (0.5, 1.5), (1.5, 0.5), (1.0, 3.0)]
    rows, runs = [], []
    for i, (a0, b0) in enumerate(starts):
        traj = simulate(mech, {"A": a0, "B": b0}, {"k": 0.02, "m": 1.0, "n": 2.0}, times)
        for species in ("A", "P"):
            y = traj[species] + rng.normal(0, 0.005, times.size)
            rows += [f"r{i},{t:.6g},{species},{v:.6f}" for t, v in zip(times, y)]
        runs.append(f'[[runs]]\nname = "r{i}"\ninitial = {{ A = {a0}, B = {b0} }}\n')
    (folder / "traces.csv").write_text("run,time,species,value\n" + "\n".join(rows) + "\n")
    (folder / "e.toml").write_text('[data]\nfile = "traces.csv"\n' + "\n".join(runs))
    return load_experiment(folder / "e.toml"), mech


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        cases = {
            "demo (6 runs x 50 points, 4 parameters)": (
                load_experiment(ROOT / "kinfit" / "app" / "templates" / "demo" / "experiment.toml"),
                load_mechanism(ROOT / "kinfit" / "app" / "templates" / "demo" / "thiol_addition.toml")),
            "power law (6 runs x 120 points, 3 parameters)": power_law_case(Path(tmp)),
        }
        t0 = time.perf_counter()
        first = fit(*cases["power law (6 runs x 120 points, 3 parameters)"], starts=1)
        print(f"first fit in this process (imports included): {time.perf_counter() - t0:.2f} s")
        times = {(c, s): [] for c in cases for s in (1, 8)}
        work = {}
        for _ in range(args.repeats):          # interleaved repeats
            for (case, starts), bucket in times.items():
                t = time.perf_counter()
                result = fit(*cases[case], starts=starts)
                bucket.append(time.perf_counter() - t)
                work[case, starts] = (result.n_evaluations, result.n_integrations)
        print(f"\n{'case':<48} {'starts':>6} {'median s':>9} {'evaluations':>12} "
              f"{'integrations':>13}")
        for (case, starts), bucket in times.items():
            ev, integ = work[case, starts]
            print(f"{case:<48} {starts:>6} {statistics.median(bucket):>9.3f} {ev:>12} "
                  f"{integ:>13}")
        print(f"\n(single-start power-law fit reached χ² = {first.chi2:.6g})")


if __name__ == "__main__":
    main()
