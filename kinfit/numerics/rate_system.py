"""The rate equations of a mechanism as arrays: the numpy rate law.

:func:`compile_mechanism` turns a :class:`~kinfit.inputs.mechanism.Mechanism`
(a specification: species, steps, rate laws, parameters) into a
:class:`RateSystem`: the stoichiometry matrix S [n_species, n_directions] and,
for each direction of each step, the rate

    r_j = factor_j k_j Π_s max([s], 0)^e_js

with the exponents e_js an affine function of the order parameters. The rate
equations follow the IUPAC rate of reaction:

    d[X]/dt = Σ_j ν_Xj r_j

so for ``2 A -> P`` with rate ``k [A]^2``, d[A]/dt = −2 k [A]^2 (IUPAC Gold
Book, "rate of reaction"). Stoichiometric coefficients never set orders.

Concentrations are clipped at zero inside a power, so a fractional order
never gives NaN when a concentration touches or crosses zero: the rate of a
step whose reactant is used up is zero. Below 1e-9 of a run's largest
starting concentration a power with order between 0 and 1 is linearised
(see :func:`rates`), so that a reactant of fractional or zero order runs out
smoothly enough to integrate.

The compiled integrators (:mod:`kinfit.numerics.integrators`) evaluate the
same piecewise law in numba loops; ``tests/numerics/test_rate_system.py`` checks that
the two agree. The scipy integrators and the residual problem use the numpy
functions here.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

__all__ = ["RateSystem", "compile_mechanism", "rates", "rhs", "jacobian"]


@dataclass(frozen=True, eq=False)
class RateSystem:
    """The arrays of a mechanism's rate equations.

    Built by :func:`compile_mechanism`; the arrays are read-only and shared
    by every mechanism of the same structure (steps, species and parameter
    names), whatever its parameter values.

    Attributes
    ----------
    species : tuple of str
        The order of the species axis of every array.
    parameter_names : tuple of str
        The order of the parameter axis of :meth:`rate_arrays`' input.
    stoichiometry : ndarray [n_species, n_directions]
        Net stoichiometric numbers ν of each direction (a reversible step has
        two, the reverse with the opposite sign); zero rows for held-constant
        species. The directions are those of
        :attr:`~kinfit.inputs.mechanism.Mechanism.directions`, in order.
    factor : ndarray [n_directions]
        Numeric factor of each direction's rate law.
    constant_index : ndarray [n_directions] of int
        Column of each direction's rate constant among the parameters.
    order_const : ndarray [n_directions, n_species]
        Constant part of each exponent e_js.
    order_coef : ndarray [n_directions, n_species, n_params]
        ∂e_js/∂θ_p: the exponents are order_const + order_coef · θ.
    present : ndarray [n_directions, n_species] of bool
        Whether each species is written in each direction's rate law or is
        consumed by that direction (a zero-order reactant still stops the
        step when it runs out).
    extents : (N [n_species, n_steps], M [n_steps, n_directions]) or None
        When the mechanism has fewer steps than species: the concentrations as
        c = c0 + N z in one extent of reaction z per step, dz/dt = M r, which
        the compiled integrator uses to integrate fewer equations.
    """

    species: tuple[str, ...]
    parameter_names: tuple[str, ...]
    stoichiometry: np.ndarray
    factor: np.ndarray
    constant_index: np.ndarray
    order_const: np.ndarray
    order_coef: np.ndarray
    present: np.ndarray
    extents: tuple[np.ndarray, np.ndarray] | None

    @property
    def n_species(self):
        return self.stoichiometry.shape[0]

    @property
    def n_directions(self):
        return self.stoichiometry.shape[1]

    @property
    def order_entries(self):
        """(direction, species) of every exponent that depends on a parameter.

        Returns
        -------
        tuple of (int, int)
            In row-major order of ``order_coef``.
        """
        coef = self.order_coef
        return tuple((j, s) for j in range(coef.shape[0]) for s in range(coef.shape[1])
                     if np.any(coef[j, s] != 0))

    def rate_arrays(self, values):
        """Per-direction rate constants and orders for one or many parameter sets.

        Parameters
        ----------
        values : ndarray [n_sets, n_params] or [n_params]
            Parameter values in the order of :attr:`parameter_names`.

        Returns
        -------
        k : ndarray [n_sets, n_directions]
            ``factor * k`` of each direction.
        orders : ndarray [n_sets, n_directions, n_species]
        """
        values = np.atleast_2d(np.asarray(values, dtype=float))
        k = self.factor * values[:, self.constant_index]
        orders = self.order_const + np.einsum("np,dsp->nds", values, self.order_coef)
        return k, orders

    def rates(self, conc, k, orders, eps):
        """Rates of all directions [n_sys, n_directions]; see :func:`rates`."""
        return rates(conc, k, orders, self.present, eps)

    def rhs(self, conc, k, orders, eps):
        """Right-hand side d[X]/dt = S r [n_sys, n_species]; see :func:`rhs`."""
        return rhs(conc, k, orders, self.present, eps, self.stoichiometry)

    def jacobian(self, conc, k, orders, eps):
        """Jacobian ∂(d[X]/dt)/∂[Y] [n_sys, n_species, n_species]; see :func:`jacobian`."""
        return jacobian(conc, k, orders, self.present, eps, self.stoichiometry)


def compile_mechanism(mechanism):
    """The :class:`RateSystem` of `mechanism`, built once per structure.

    Parameters
    ----------
    mechanism : Mechanism

    Returns
    -------
    RateSystem
        Cached on the mechanism's structure (species, held-constant species,
        reactions and rate laws of the steps, parameter names in order), so
        that copies differing only in the model's name or its parameters'
        values, bounds and flags (:func:`~kinfit.inputs.mechanism.with_fixed`,
        :func:`~kinfit.inputs.mechanism.with_start`) share one system.
    """
    directions = tuple((i, mechanism.steps[i].reaction, law, sign)
                       for i, law, sign in mechanism.directions)
    key = (mechanism.species, mechanism.held_constant, len(mechanism.steps), directions,
           tuple(mechanism.parameters))
    return _compiled(key)


@lru_cache(maxsize=256)
def _compiled(key):
    species, held, n_steps, directions, names = key
    index = {s: i for i, s in enumerate(species)}
    n_dir, n_species, n_params = len(directions), len(species), len(names)
    stoich = np.zeros((n_species, n_dir))
    factor = np.empty(n_dir)
    constant_index = np.empty(n_dir, dtype=int)
    order_const = np.zeros((n_dir, n_species))
    order_coef = np.zeros((n_dir, n_species, n_params))
    present = np.zeros((n_dir, n_species), dtype=bool)
    for j, (_, reaction, law, sign) in enumerate(directions):
        for s, nu in reaction.net().items():
            if s not in held:
                stoich[index[s], j] = sign * nu
        # a direction cannot consume what is not there: its reactants gate it
        # even when their order is zero (see _powers)
        consumed = reaction.reactants if sign > 0 else reaction.products
        for s, _ in consumed:
            present[j, index[s]] = s not in held
        factor[j] = law.factor
        constant_index[j] = names.index(law.constant)
        for s, affine in law.orders:
            present[j, index[s]] = True
            order_const[j, index[s]] = affine.const
            for pname, c in affine.coef:
                order_coef[j, index[s], names.index(pname)] = c
    # extents of reaction: c = c0 + N z with one extent per step, dz/dt = M r
    net = np.zeros((n_species, n_steps))
    dirmap = np.zeros((n_steps, n_dir))
    for j, (i, _, _, sign) in enumerate(directions):
        net[:, i] = sign * stoich[:, j]
        dirmap[i, j] = sign
    extents = (net, dirmap) if n_steps < n_species else None
    arrays = [stoich, factor, constant_index, order_const, order_coef, present]
    arrays += list(extents or ())
    for arr in arrays:
        arr.flags.writeable = False      # shared by every caller through the cache
    return RateSystem(species=species, parameter_names=names, stoichiometry=stoich,
                      factor=factor, constant_index=constant_index, order_const=order_const,
                      order_coef=order_coef, present=present, extents=extents)


# ------------------------------------------------------------- rate equations

def _powers(conc, orders, present, eps):
    """Factors max(c, 0)^e of every direction and species, and their slopes.

    Below `eps` a power with 0 <= e < 1 (of a species written in the rate
    law) is replaced by its chord eps^e · c/eps: the rate then goes to zero
    linearly as a reactant runs out instead of with an infinite slope, which
    an integrator can follow. Negative orders use max(c, eps), constant below
    eps. Species not in a rate law have e = 0 and factor 1.

    Returns
    -------
    powers, slopes : ndarray [n_sys, n_directions, n_species]
        The factors g and their exact derivatives ∂g/∂c, those of the
        compiled kernels: the chord's slope eps^(e-1), zero on the floor of a
        negative order, e c^(e-1) elsewhere (1 at c = 0 for e = 1).
    """
    c = np.maximum(conc, 0.0)[:, None, :]
    eps = np.broadcast_to(eps, (conc.shape[0],))[:, None, None]
    with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
        low = c < eps
        chord = present & low & (orders >= 0.0) & (orders < 1.0)
        floor = present & low & (orders < 0.0)
        base = np.where(present & (orders < 0.0), np.maximum(c, eps), c)
        powers = np.where(chord, eps ** orders * (c / eps), base ** orders)
        slopes = np.where(chord, eps ** (orders - 1.0),
                          np.where(present & ~floor, orders * base ** (orders - 1.0), 0.0))
    return powers, slopes


def rates(conc, k, orders, present, eps):
    """Rates of all directions.

    Parameters
    ----------
    conc : ndarray [n_sys, n_species]
    k : ndarray [n_sys, n_directions]
    orders : ndarray [n_sys, n_directions, n_species]
    present : ndarray [n_directions, n_species] of bool
        Whether each species is written in each direction's rate law or is
        consumed by that direction (:attr:`RateSystem.present`).
    eps : float or ndarray [n_sys]
        Concentration below which a power of order 0 <= e < 1 is linearised
        (see :func:`_powers`); kinfit uses 1e-9 times a run's largest starting
        concentration.

    Returns
    -------
    ndarray [n_sys, n_directions]
        r_j = k_j Π_s max(c_s, 0)^e_js.
    """
    powers, _ = _powers(conc, orders, present, eps)
    return k * np.prod(powers, axis=-1)


def rhs(conc, k, orders, present, eps, stoichiometry):
    """Right-hand side d[X]/dt = S r of the rate equations.

    Parameters
    ----------
    conc, k, orders, present, eps : see :func:`rates`
    stoichiometry : ndarray [n_species, n_directions]

    Returns
    -------
    ndarray [n_sys, n_species]
    """
    return rates(conc, k, orders, present, eps) @ stoichiometry.T


def jacobian(conc, k, orders, present, eps, stoichiometry):
    """Analytic Jacobian ∂(d[X]/dt)/∂[Y] of the rate equations.

    Parameters
    ----------
    conc, k, orders, present, eps, stoichiometry : see :func:`rhs`

    Returns
    -------
    ndarray [n_sys, n_species, n_species]
    """
    powers, slopes = _powers(conc, orders, present, eps)
    drate = np.empty(powers.shape)
    with np.errstate(over="ignore", invalid="ignore"):
        for s in range(conc.shape[1]):
            factors = powers.copy()
            factors[..., s] = slopes[..., s]
            drate[..., s] = k * np.prod(factors, axis=-1)
    return np.einsum("sd,ndt->nst", stoichiometry, drate)
