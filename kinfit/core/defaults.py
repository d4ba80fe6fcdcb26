"""Every default the library and the command line share, defined once.

The CLI imports this small module for its option defaults, so that
``kinfit fit --help`` and :func:`kinfit.fit` can never disagree.
"""

from __future__ import annotations

__all__ = ["DEFAULT_STARTS", "DEFAULT_WALKERS", "DEFAULT_STEPS", "CHECKPOINT_EVERY",
           "DEFAULT_MOVES", "LATTICE_STARTS", "DEFAULT_CRITERION", "DEFAULT_MAX_CONVERSION",
           "DEFAULT_DRAWS", "DEFAULT_SEED", "DEFAULT_TWO_STAGE"]

DEFAULT_STARTS = 8            # starting points of a fit (a screen, then the best refined)
DEFAULT_WALKERS = 32          # emcee walkers
DEFAULT_STEPS = 2000          # steps of each walker
CHECKPOINT_EVERY = 100        # steps between chain checkpoints
DEFAULT_MOVES = "de"          # emcee's differential-evolution moves
LATTICE_STARTS = 1            # starts per candidate of an order search
DEFAULT_CRITERION = "aicc"    # the ranking criterion
DEFAULT_MAX_CONVERSION = 0.2  # initial-rate window: fraction of the limiting reactant used
DEFAULT_DRAWS = 200           # parameter draws of a prediction band
DEFAULT_SEED = 0
DEFAULT_TWO_STAGE = "global"  # two-stage Arrhenius analysis: orders fixed at the global fit's
