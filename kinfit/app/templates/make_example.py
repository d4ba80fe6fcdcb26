"""Regenerate the worked example of the README in this folder (seed fixed).

Invented scenario, made up for kinfit: A + B -> P followed by the
concentration of A in three runs at 25 °C, with orders 1 in A and 1 in B and
k = 0.5 M^-1 s^-1. Run r2's starting [A] is not known exactly (fitted). The
traces come from the closed form of a mixed second-order reaction,
[A] = [A]0 ([B]0 − [A]0) / ([B]0 exp(([B]0 − [A]0) k t) − [A]0)
(physical-chemistry textbooks), with Gaussian noise of
σ = sqrt(0.002² + (0.01 [A])²) M. Run from anywhere:

    python make_example.py
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

K = 0.5                                                     # M^-1 s^-1
RUNS = {"r1": (0.10, 0.20), "r2": (0.19, 0.20), "r3": (0.10, 0.40)}   # [A]0, [B]0 (M)
TIMES = np.linspace(0.0, 60.0, 16)                          # s
SEED = 20240611


def concentration_a(a0, b0, t):
    """[A] of A + B -> P with rate k[A][B], [A]0 ≠ [B]0 (closed form)."""
    growth = np.exp((b0 - a0) * K * t)
    return a0 * (b0 - a0) / (b0 * growth - a0)


def write(folder):
    rng = np.random.default_rng(SEED)
    rows = ["run,time,species,value"]
    for run, (a0, b0) in RUNS.items():
        a = concentration_a(a0, b0, TIMES)
        noisy = a + rng.normal(0.0, np.sqrt(0.002 ** 2 + (0.01 * a) ** 2))
        rows += [f"{run},{t:g},A,{v:.5f}" for t, v in zip(TIMES, noisy)]
    path = Path(folder) / "traces.csv"
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    return path


if __name__ == "__main__":
    print(f"wrote {write(Path(__file__).parent)}")
