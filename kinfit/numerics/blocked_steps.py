"""Steps that cannot proceed in a run: a species they need is never there.

A species left out of a run's ``initial`` starts at zero. If a step needs it
and no step can form it, that step stays at rate zero for the whole run: the
run cannot react the way the model says, and a fit still "converges" to
whatever the other runs allow. :func:`blocked_steps` finds such steps from
the specifications alone (no integration).

When does a direction need a species? Exactly when the rate equations of
:mod:`kinfit.numerics.rate_system` make its rate zero while that species is
at zero: r_j = factor_j k_j Π_s max([s], 0)^e_js is zero when a species
written in the rate law with order e ≥ 0 is at zero (an order between 0 and
1 is linearised to zero below a small floor, order 0 included), and a
direction also stops when a species it consumes runs out, whatever its order.
A negative order does not stop it (the power is taken of max([s], ε)).
Held-constant species stay at their starting concentration and are formed by
no step.

A species is available in a run when it starts above zero (a fitted
starting concentration counts at its current value) or when a direction
that can proceed forms it; a direction can proceed when every species it
needs is available. Repeating this until nothing changes also covers
chains: a species formed only by a blocked step is never formed, so what
needs it is blocked too.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["BlockedStep", "blocked_steps", "blocked_step_warnings"]


@dataclass(frozen=True)
class BlockedStep:
    """One direction of a step that cannot proceed in one run.

    Attributes
    ----------
    run : str
    step : str
        The step's label.
    reaction : str
        The reaction as written.
    direction : {"forward", "reverse"}
    missing : tuple of str
        The species it needs that are zero throughout the run.
    """

    run: str
    step: str
    reaction: str
    direction: str
    missing: tuple[str, ...]

    def message(self):
        """The warning in words, naming the run, the step and the species."""
        side = ", reverse direction" if self.direction == "reverse" else ""
        one = len(self.missing) == 1
        return (f"run {self.run!r}: {self.step} ({self.reaction}{side}) cannot proceed: "
                f"{', '.join(self.missing)} {'starts' if one else 'start'} at zero and no "
                f"step forms {'it' if one else 'them'} (left out of the run's initial?)")


def _needs(reaction, law, sign, held, values):
    """Species whose absence stops one direction (see the module docstring)."""
    needed = {s for s, order in law.orders if order.value(values) >= 0.0}
    consumed = reaction.reactants if sign > 0 else reaction.products
    needed.update(s for s, _ in consumed if s not in held)
    return needed


def _forms(reaction, sign, held):
    """Species one direction forms (net stoichiometry of its sign), held ones excepted."""
    return {s for s, nu in reaction.net().items() if sign * nu > 0 and s not in held}


def blocked_steps(mechanism, run, values=None):
    """The directions of `mechanism` that cannot proceed in `run`.

    Parameters
    ----------
    mechanism : Mechanism
    run : Run
    values : mapping of str to float, optional
        Parameter values (orders, the run's fitted starting concentrations);
        missing ones take their starting values.

    Returns
    -------
    tuple of BlockedStep
        In the order of the mechanism's directions; empty when every
        direction can proceed.
    """
    current = mechanism.values()
    current.update({p.name: p.value for p in run.fitted_initial.values()})
    current.update(values or {})
    held = set(mechanism.held_constant)
    available = {s for s, c in run.initial.items() if c > 0.0}
    available.update(s for s, p in run.fitted_initial.items() if current[p.name] > 0.0)
    directions = [(mechanism.steps[i], sign,
                   _needs(mechanism.steps[i].reaction, law, sign, held, current))
                  for i, law, sign in mechanism.directions]
    changed = True
    while changed:
        changed = False
        for step, sign, needs in directions:
            if needs <= available:
                formed = _forms(step.reaction, sign, held) - available
                if formed:
                    available |= formed
                    changed = True
    return tuple(
        BlockedStep(run=run.name, step=step.label, reaction=step.reaction.text,
                    direction="forward" if sign > 0 else "reverse",
                    missing=tuple(s for s in mechanism.species if s in needs - available))
        for step, sign, needs in directions if not needs <= available)


def blocked_step_warnings(mechanism, experiment, values=None):
    """One warning per blocked direction of every run of `experiment`.

    Parameters
    ----------
    mechanism : Mechanism
    experiment : Experiment
    values : mapping of str to float, optional
        See :func:`blocked_steps`.

    Returns
    -------
    list of str
    """
    return [b.message() for run in experiment.runs
            for b in blocked_steps(mechanism, run, values)]
