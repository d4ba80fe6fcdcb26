"""A million data points: load and fit, with wall time and peak memory.

Run from the repository root (not part of the test run; about a minute):

    python tests/benchmarks/bench_large.py [--points 1000000] [--runs 10]

Writes a seeded synthetic long-layout table (first-order decay A -> P, both
species measured, 1 % noise) into a temporary folder, then loads and fits it
in a fresh process and prints the times and that process's peak resident
memory (resource.getrusage), so the figure is the fit's own.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]

CHILD = """
import resource, sys, time
import kinfit
t = time.perf_counter()
e = kinfit.load_experiment(sys.argv[1])
load = time.perf_counter() - t
mb_load = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
m = kinfit.load_mechanism(sys.argv[2])
t = time.perf_counter()
r = kinfit.fit(e, m)
fit = time.perf_counter() - t
print(e.n_points, load, mb_load, fit, r.values["k"], r.stderr["k"],
      resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)
"""


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=1_000_000)
    parser.add_argument("--runs", type=int, default=10)
    args = parser.parse_args()
    folder = Path(tempfile.mkdtemp())
    rng = np.random.default_rng(1)
    per_trace = args.points // (2 * args.runs)
    runs = []
    with open(folder / "traces.csv", "w") as handle:
        handle.write("run,time,species,value\n")
        for r in range(args.runs):
            a0 = 1.0 + 0.1 * r
            t = np.linspace(0, 100, per_trace)
            a = a0 * np.exp(-0.05 * t)
            for species, y in (("A", a), ("P", a0 - a)):
                y = y + rng.normal(0, 0.01, t.size)
                handle.writelines(f"r{r},{ti:.6f},{species},{v:.5f}\n" for ti, v in zip(t, y))
            runs.append(f'[[runs]]\nname = "r{r}"\ninitial = {{ A = {a0} }}\n')
    (folder / "e.toml").write_text('[data]\nfile = "traces.csv"\n' + "\n".join(runs))
    size = (folder / "traces.csv").stat().st_size / 2 ** 20
    out = subprocess.run([sys.executable, "-c", CHILD, str(folder / "e.toml"),
                          str(ROOT / "kinfit" / "app" / "templates" / "models" / "first_order.toml")],
                         capture_output=True, text=True, check=True).stdout.split()
    n, load, mb_load, fit, k, se, mb = out
    print(f"{int(n):,} points ({size:.0f} MB of CSV), {args.runs} runs")
    print(f"  load: {float(load):.1f} s, peak memory after loading {float(mb_load):.0f} MB")
    print(f"  fit (8 starts): {float(fit):.1f} s; k = {float(k):.6g} ± {float(se):.2g} "
          f"(true 0.05)")
    print(f"  peak resident memory of the whole process: {float(mb):.0f} MB")


if __name__ == "__main__":
    main()
