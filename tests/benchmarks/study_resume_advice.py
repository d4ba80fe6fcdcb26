"""Does the sampler's advice "--steps N --resume", followed once, reach the criterion?

For each demo study (the thiol addition and the temperature study) and each
seed, one long chain is sampled (32 walkers, ``--steps``), then cut after
each of ``--cuts`` steps as if the run had stopped there. Where the cut chain
is not converged, the advice N is computed with several margins (the formula
of :mod:`kinfit.estimation.diagnostics`, margin 1.5 by default), and the chain
cut at N is diagnosed again: converged or not. The earlier rule (63 τ, or
the R-hat scaling with a margin of 1.2, from the kept part's τ) is shown for
comparison.

Prints one line per study, cut and rule: how often one resume sufficed and
the median N. Target: the default margin reaches the criterion in at least
nine cases of ten.

    python tests/benchmarks/study_resume_advice.py --seeds 12 --steps 6000
"""

from __future__ import annotations

import argparse
import math
from pathlib import Path

import numpy as np

from kinfit.estimation.diagnostics import (
    BURN_TAU_MULTIPLE,
    MAX_RHAT,
    RHAT_TAU_MULTIPLE,
    autocorr_time,
    diagnose,
)
from kinfit.estimation.posterior import sample
from kinfit.inputs.experiment import load_experiment
from kinfit.inputs.mechanism import load_mechanism

ROOT = Path(__file__).resolve().parents[2]
STUDIES = {"thiol addition": ("demo/experiment.toml", "demo/thiol_addition.toml"),
           "temperature": ("demo/temperature/experiment.toml",
                           "demo/temperature/ester_hydrolysis.toml")}


def advised(diag, chain, margin):
    """N of the advice with a given margin (the diagnostics module's formula)."""
    tau = max(max(diag.autocorr_time.values()), float(np.max(autocorr_time(chain))))
    worst = max(diag.rhat.values())
    kept = RHAT_TAU_MULTIPLE * tau
    if worst > MAX_RHAT:
        kept = max(kept, diag.n_kept * (worst - 1.0) / (MAX_RHAT - 1.0))
    return max(math.ceil(margin * (BURN_TAU_MULTIPLE * tau + kept)), diag.n_steps + 1)


def earlier_rule(diag):
    """The advice before: 63 τ of the kept part, or the R-hat scaling × 1.2."""
    tau = max(diag.autocorr_time.values())
    n = math.ceil((BURN_TAU_MULTIPLE + 1.2 * 50) * tau)
    worst = max(diag.rhat.values())
    if worst > MAX_RHAT:
        n = max(n, math.ceil(diag.burn_in + 1.2 * diag.n_kept * (worst - 1.0)
                             / (MAX_RHAT - 1.0)))
    return max(n, diag.n_steps + 1)


def accepted(chain):
    """Accepted proposals of each walker: steps where it moved."""
    return np.concatenate([np.zeros((1, chain.shape[1])),
                           np.any(chain[1:] != chain[:-1], axis=2)]).sum(axis=0)


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, default=12)
    parser.add_argument("--steps", type=int, default=6000)
    parser.add_argument("--cuts", type=int, nargs="+", default=[200, 400, 800, 1200])
    parser.add_argument("--margins", type=float, nargs="+", default=[1.0, 1.25, 1.5])
    args = parser.parse_args()
    for study, (exp_file, model_file) in STUDIES.items():
        exp, mech = load_experiment(ROOT / exp_file), load_mechanism(ROOT / model_file)
        tally = {}
        for seed in range(args.seeds):
            post = sample(exp, mech, walkers=32, steps=args.steps, seed=seed, starts=1,
                          profile=False, bands=False)
            chain, names = post.state.chain, list(post.names)
            for cut in args.cuts:
                diag = diagnose(chain[:cut], names, accepted(chain[:cut]))
                if diag.converged:
                    continue
                rules = {f"margin {m:g}": advised(diag, chain[:cut], m) for m in args.margins}
                rules["earlier rule"] = earlier_rule(diag)
                for rule, n in rules.items():
                    ok = n <= chain.shape[0] and diagnose(chain[:n], names,
                                                          accepted(chain[:n])).converged
                    tally.setdefault((cut, rule), []).append((ok, n))
        for (cut, rule), rows in sorted(tally.items()):
            ok = sum(r[0] for r in rows)
            print(f"{study:15s} cut {cut:5d}  {rule:13s} one resume sufficed {ok:3d} of "
                  f"{len(rows):3d}; median N {int(np.median([r[1] for r in rows]))}")


if __name__ == "__main__":
    main()
