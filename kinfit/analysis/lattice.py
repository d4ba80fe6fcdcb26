"""The order search: a grid of order values turned into fixed-order candidates.

``--orders m=0,0.5,1 n=1,2`` is parsed by :func:`parse_order_grid`; the first
model that has every named order parameter is the template
(:func:`template_for`); :func:`order_lattice` fixes those orders of the
template at every combination of the listed values, each combination one
:class:`~kinfit.analysis.candidates.Candidate` that names the template, so that
its fit starts from the template's (:func:`kinfit.analysis.candidates.warm_start`).
"""

from __future__ import annotations

import math
from itertools import product

from kinfit.analysis.candidates import MAX_CANDIDATES, Candidate
from kinfit.core.defaults import LATTICE_STARTS
from kinfit.core.errors import KinfitError
from kinfit.inputs.mechanism import with_fixed
from kinfit.inputs.parameters import Role

__all__ = ["parse_order_grid", "template_for", "order_lattice"]


def parse_order_grid(items):
    """Parse ``NAME=V1,V2,...`` strings into a grid of order values.

    Parameters
    ----------
    items : sequence of str
        e.g. ``["m=0,0.5,1,1.5,2", "n=0,1,2"]``.

    Returns
    -------
    dict of str to tuple of float
        In the order given; values in the order given, repeats removed.

    Raises
    ------
    KinfitError
        For anything that is not NAME=NUMBER[,NUMBER...], or a name given
        twice.
    """
    grid = {}
    for item in items or ():
        if not isinstance(item, str):
            raise KinfitError(f"--orders {item!r}: expected NAME=V1,V2,... like m=0,0.5,1")
        name, sep, rest = item.partition("=")
        name = name.strip()
        if not sep or not name.isidentifier() or not name.isascii():
            raise KinfitError(f"--orders {item!r}: expected NAME=V1,V2,... like m=0,0.5,1")
        if name in grid:
            raise KinfitError(f"--orders {name} is given twice; list all its values once, "
                              f"like {name}=0,1,2")
        values = []
        for part in rest.split(","):
            text = part.strip()
            try:
                value = float(text)
            except ValueError:
                value = math.nan
            if not text or not math.isfinite(value):
                raise KinfitError(f"--orders {item!r}: {text!r} is not a number; expected "
                                  f"{name}=V1,V2,... like {name}=0,0.5,1")
            if value not in values:
                values.append(value)
        grid[name] = tuple(values)
    return grid


def template_for(mechanisms, grid):
    """Index of the first mechanism that has every grid name as an order parameter.

    Parameters
    ----------
    mechanisms : sequence of Mechanism
    grid : mapping of str to sequence of float

    Returns
    -------
    int

    Raises
    ------
    KinfitError
        When no mechanism has them all.
    """
    for i, mech in enumerate(mechanisms):
        params = mech.parameters
        if all(n in params and params[n].role == Role.ORDER for n in grid):
            return i
    orders = sorted({n for m in mechanisms for n in m.orders})
    raise KinfitError(f"--orders {', '.join(grid)}: no model given has order parameter(s) "
                      f"named {', '.join(grid)}; their order parameters are "
                      f"{', '.join(orders) or 'none'}")


def order_lattice(template, grid, name=None, starts=LATTICE_STARTS):
    """Candidates fixing the named orders of `template` at every combination of values.

    Fixed-order candidates have only their rate constants (and per-run
    nuisances) free and start from the template's best fit, rescaled (see
    :func:`kinfit.analysis.candidates.warm_start`); one start is enough there
    (checked against four in tests/benchmarks/bench_rank.py).

    Parameters
    ----------
    template : Mechanism
    grid : mapping of str to sequence of float
        Order parameter -> values; orders not named stay free.
    name : str, optional
        The template candidate's name (default: the model's name).
    starts : int
        Starting points for each fixed-order fit.

    Returns
    -------
    list of Candidate
        Named ``"<template> [m=1, n=0]"``, with ``template`` set to `name`.
    """
    name = name or template.name
    for pname in grid:
        p = template.parameters.get(pname)
        if p is None or p.role != Role.ORDER:
            raise KinfitError(f"{template.source}: {pname!r} is not an order parameter of "
                              f"'{template.name}'; its orders are "
                              f"{', '.join(template.orders) or 'none'}")
        if not grid[pname]:
            raise KinfitError(f"--orders {pname}: give at least one value")
    size = math.prod(len(v) for v in grid.values())
    if size > MAX_CANDIDATES:
        raise KinfitError(f"the order search has {size} combinations; kinfit fits at most "
                          f"{MAX_CANDIDATES}; use fewer values")
    out = []
    for combo in product(*grid.values()):
        fixed = dict(zip(grid, combo))
        label = ", ".join(f"{k}={v:g}" for k, v in fixed.items())
        mech = with_fixed(template, fixed, name=f"{template.name} [{label}]")
        out.append(Candidate(f"{name} [{label}]", mech, template=name, starts=starts))
    return out
