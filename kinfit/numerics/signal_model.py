"""Spectrometer signals as a projection: the Beer–Lambert design solved by variable projection.

This module owns the arithmetic of one model evaluation: the absorbance law,
the layout of a signal's linear unknowns (:class:`Column`, :class:`Block`),
their least-squares solution for a batch of parameter sets
(:func:`solve_block`), the derivative of the projected residual
(:func:`project_jacobian`, :func:`raw_jacobian`) and :class:`SignalModel`,
which turns the model's concentrations into the measured signals. The model is
built by :mod:`kinfit.numerics.signal_build`; the linear unknowns at the
fitted values, with their standard errors, are resolved by
:mod:`kinfit.estimation.linear_unknowns`.

A signal channel (one wavelength) reads, at time t of run r,

    y(t) = o_r + d_r t + ℓ_r Σ_X ε_X [X](t; θ)                     (Beer–Lambert)

The model is linear in the absorptivities ε, the offsets o and the drifts d
(the linear unknowns β) and non-linear only in the kinetic parameters θ.
Variable projection (Golub & Pereyra 1973) therefore solves β by linear
least squares inside every model evaluation, so the optimiser moves θ alone:
with X(θ) the design (one column per linear unknown, built from the model's
concentrations) and W the weights 1/σ,

    β̂(θ) = argmin ||W (y − f₀(θ) − X(θ) β)||,    r(θ) = W (y − f₀ − X β̂)

where f₀ holds the contributions of known absorptivities. Optionally the
absorptivities are constrained non-negative (bounded-variable least squares,
offsets and drifts free).

Measured signals are grouped into blocks that share rows and linear
unknowns: each single-wavelength channel is a block of one channel, and all
full spectra form one block whose channels are the wavelengths. A block's
design is X = coef × feature (``feature`` the absorber's concentration, or 1
for offsets and drifts; ``coef`` the path length, run mask and time), so one
SVD of the column-scaled weighted design per parameter set serves every
channel of the block. The linear algebra runs on one BLAS thread
(:func:`kinfit.numerics.threads.one_blas_thread`).

Jacobian
--------
The derivative of the projected residual is built from the concentration
sensitivities the integrator already computes (∂X/∂θ and ∂f₀/∂θ). The
optimiser gets the exact derivative of Golub & Pereyra (1973),

    ∂r/∂θ = P⊥ W ∂(f₀ + X β̂)/∂θ − (A⁺)ᵀ (W ∂X/∂θ)ᵀ r,      A = W X,

with P⊥ = I − A A⁺; the first term alone is Kaufman's approximation (Kaufman
1975). Both cost one small projection per evaluation. The exact form is used
for the steps because Kaufman's, which drops a term proportional to the
residual, can steer a fit from a poor start into a valley where two decays
merge (seen on NIST's Lanczos2 from its first starting point: Kaufman stalls
at k1 = k2, the exact form reaches the certified values). Standard errors use
Kaufman's form: its JᵀJ equals exactly the Schur complement of the full
normal matrix of (θ, β), so they are the standard errors of the full
Jacobian of all parameters, as a plain non-linear fit of every parameter
gives them (tested against scipy's least_squares).

Full spectra
------------
Each wavelength is a channel whose design X is the same (same times and
runs), so one factorisation serves every wavelength. A reduced fit (see
:mod:`kinfit.numerics.svd` and :mod:`kinfit.numerics.signal_build`) uses the
data projected on the leading right singular vectors in place of the
wavelengths: the same block with fewer channels.

The sampler works with these problems unchanged: :meth:`Problem.residuals`
returns the projected residuals, so a posterior sampled through it is over θ
with β profiled out (β at its conditional optimum for each θ).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import TYPE_CHECKING

import numpy as np

from kinfit.numerics.threads import one_blas_thread

if TYPE_CHECKING:
    from kinfit.core.units import Units
    from kinfit.inputs.signals import SignalSpec
    from kinfit.numerics.svd import Components

__all__ = ["SignalModel", "Block", "Column", "Factors", "Solution", "absorbance", "solve_block",
           "project_jacobian", "raw_jacobian",
           "KIND_ABSORPTIVITY", "KIND_OFFSET", "KIND_DRIFT"]

KIND_ABSORPTIVITY = "absorptivity"
KIND_OFFSET = "offset"
KIND_DRIFT = "drift"
_RCOND = 1e-10           # singular values of the column-scaled design below this are zero
_CHUNK = 2_000_000       # largest sets x channels x rows handled at once
def absorbance(epsilon, path_length, conc):
    """Beer–Lambert law: A = ε ℓ c, summed over absorbers.

    Parameters
    ----------
    epsilon : array_like [n_species]
        Absorptivities (per concentration unit per cm).
    path_length : float
        cm.
    conc : array_like [..., n_species]

    Returns
    -------
    ndarray [...]
    """
    return path_length * np.asarray(conc, dtype=float) @ np.asarray(epsilon, dtype=float)


# ----------------------------------------------------------------- layout

@dataclass(frozen=True)
class Column:
    """One linear unknown of a block: its kind, absorber and run (-1: shared)."""

    kind: str
    absorber: int
    run: int
    name: str


@dataclass(frozen=True)
class Block:
    """Channels measured at the same rows with the same linear unknowns.

    A single wavelength channel is a block of one channel; full spectra are
    one block whose channels are the wavelengths (or, reduced, the leading
    singular vectors).

    Attributes
    ----------
    label : str
    channels : tuple of str
    absorbers : tuple of str
    columns : tuple of Column
    rows_run : ndarray [n_rows] of int
    rows_time : ndarray [n_rows]
        Data-clock times.
    path : ndarray [n_rows]
        Path length of each row's run, cm.
    conc_index : ndarray [n_rows, n_absorbers]
        Position of [X](t) among the model's evaluation points.
    coef : ndarray [n_rows, n_columns]
        X = coef × ([X] for absorptivity columns, 1 otherwise).
    feature : ndarray [n_columns] of int
        Absorber of each column, -1 for offsets and drifts.
    known : ndarray [n_channels, n_absorbers]
        Known absorptivities (0 where unknown).
    values : ndarray [n_channels, n_rows]
    row_weight : ndarray [n_rows]
        1/σ of each row when declared (constant across channels), else 1.
    flat : ndarray [n_channels, n_rows] of int
        Positions in the measured vector.
    nonneg : ndarray [n_columns] of bool
    wavelengths : ndarray [n_channels] or None
    basis : ndarray [n_wavelengths, n_channels] or None
        For a reduced block, the right singular vectors V_k.
    """

    label: str
    channels: tuple
    absorbers: tuple
    columns: tuple
    rows_run: np.ndarray
    rows_time: np.ndarray
    path: np.ndarray
    conc_index: np.ndarray
    coef: np.ndarray
    feature: np.ndarray
    known: np.ndarray
    values: np.ndarray
    row_weight: np.ndarray
    flat: np.ndarray
    nonneg: np.ndarray
    wavelengths: np.ndarray | None = None
    basis: np.ndarray | None = None

    @property
    def n_linear(self):
        return len(self.columns) * len(self.channels)

    def design(self, conc):
        """X [n_sets, n_rows, n_columns] from absorber concentrations [n_sets, n_rows, n_abs]."""
        feat = np.ones(conc.shape[:2] + (len(self.columns),))
        cols = np.flatnonzero(self.feature >= 0)
        feat[:, :, cols] = conc[:, :, self.feature[cols]]
        return feat * self.coef[None]


@dataclass(frozen=True)
class Factors:
    """SVD of a column-scaled weighted design A = U S Vᵀ diag(norms).

    Attributes
    ----------
    u : ndarray [..., n_rows, k]
        Left singular vectors (zeroed where the singular value is negligible).
    inv : ndarray [..., k]
        1/s, zero where negligible.
    vt : ndarray [..., k, n_columns]
    norms : ndarray [..., n_columns]
        Column norms (1 for zero columns).
    free : ndarray [n_columns] of bool or None
        The columns these factors cover (None: all).
    """

    u: np.ndarray
    inv: np.ndarray
    vt: np.ndarray
    norms: np.ndarray
    free: np.ndarray | None = None


@dataclass(frozen=True)
class Solution:
    """Linear least squares of one block for a batch of parameter sets.

    Attributes
    ----------
    beta : ndarray [n_sets, n_channels, n_columns]
    resid : ndarray [n_sets, n_channels, n_rows]
        Weighted residual W (y − f₀ − X β̂).
    factors : Factors
        Of the weighted design of each set.
    special : dict of (set, channel) to Factors
        Own factors where non-negativity holds columns at zero.
    active : ndarray [n_sets, n_channels, n_columns] of bool
        Columns held at zero by the non-negativity constraint.
    scaled : ndarray [n_sets, n_rows, n_columns]
        The weighted design W X.
    """

    beta: np.ndarray
    resid: np.ndarray
    factors: Factors
    special: dict
    active: np.ndarray
    scaled: np.ndarray


def _factor(a, free=None):
    """Column-scaled SVD of a [..., rows, cols] (see :class:`Factors`)."""
    norms = np.linalg.norm(a, axis=-2)
    safe = np.where(norms > 0, norms, 1.0)
    u, s, vt = np.linalg.svd(a / safe[..., None, :], full_matrices=False)
    top = s[..., :1] if s.shape[-1] else s
    mask = s > _RCOND * np.maximum(top, 1e-300)
    inv = np.where(mask, 1.0 / np.where(mask, s, 1.0), 0.0)
    return Factors(u=u * mask[..., None, :], inv=inv, vt=vt, norms=safe, free=free)


def solve_block(block, conc, nonnegative=True):
    """Solve the linear unknowns of `block` for every parameter set.

    Parameters
    ----------
    block : Block
    conc : ndarray [n_sets, n_rows, n_absorbers]
    nonnegative : bool
        Apply the block's non-negativity constraints (bounded-variable least
        squares where the free solution is negative).

    Returns
    -------
    Solution
    """
    w = block.row_weight
    xw = block.design(conc) * w[None, :, None]
    f0 = (conc @ block.known.T) * block.path[None, :, None]                  # [S, R, C]
    target = ((block.values.T[None] - f0) * w[None, :, None]).transpose(0, 2, 1)
    fac = _factor(xw)
    utt = target @ fac.u                                                      # [S, C, K]
    beta = ((utt * fac.inv[:, None, :]) @ fac.vt) / fac.norms[:, None, :]     # [S, C, J]
    resid = target - utt @ fac.u.transpose(0, 2, 1)                           # [S, C, R]
    active = np.zeros(beta.shape, dtype=bool)
    special = {}
    if nonnegative and block.nonneg.any():
        bad = np.argwhere((beta[..., block.nonneg] < 0).any(axis=-1))
        for s_i, c in bad:
            b, act, own, r = _bounded(xw[s_i], target[s_i, c], block.nonneg)
            beta[s_i, c], active[s_i, c], resid[s_i, c] = b, act, r
            special[(int(s_i), int(c))] = own
    return Solution(beta=beta, resid=resid, factors=fac, special=special, active=active,
                    scaled=xw)


def _bounded(a, b, nonneg):
    """Least squares with the `nonneg` columns ≥ 0 (scipy's bounded-variable
    least squares); returns (β, active columns, factors of the free columns,
    weighted residual)."""
    from scipy.optimize import lsq_linear

    norms = np.linalg.norm(a, axis=0)
    safe = np.where(norms > 0, norms, 1.0)
    lower = np.where(nonneg, 0.0, -np.inf)
    out = lsq_linear(a / safe, b, bounds=(lower, np.inf), method="bvls", tol=1e-12)
    beta = out.x / safe
    active = nonneg & (out.x <= 0.0)
    beta[active] = 0.0
    free = ~active
    fac = _factor(a[:, free], free)
    resid = b - fac.u @ (fac.u.T @ b)
    return beta, active, fac, resid


def _design_derivative(block, conc_sens):
    """W ∂X/∂θ [n_sets, n_rows, n_columns, n_params] (zero for offsets and drifts)."""
    n_sets, n_rows, _, n_par = conc_sens.shape
    out = np.zeros((n_sets, n_rows, len(block.columns), n_par))
    cols = np.flatnonzero(block.feature >= 0)
    out[:, :, cols, :] = conc_sens[:, :, block.feature[cols], :] * (
        block.coef[None, :, cols, None] * block.row_weight[None, :, None, None])
    return out


def _pinv_t(fac, g):
    """(A⁺)ᵀ g for A = U S Vᵀ diag(norms); g [..., n_columns, n_params]."""
    t = np.einsum("kj,jp->kp", fac.vt, g / fac.norms[:, None]) * fac.inv[:, None]
    return fac.u @ t


def project_jacobian(block, sol, conc_sens, exact=True):
    """∂r/∂θ of the projected weighted residual r = W(f₀ + X β̂ − y).

    Kaufman's part P⊥·W∂(f₀ + Xβ)/∂θ at fixed β̂ always; with `exact`, also
    the Golub–Pereyra term −(A⁺)ᵀ (W∂X/∂θ)ᵀ r, which makes it the exact
    derivative (A = W X). Matrix products over all channels at once.

    Returns
    -------
    ndarray [n_sets, n_rows, n_channels, n_params]
    """
    raw = raw_jacobian(block, conc_sens, sol.beta)
    n_sets, n_rows, n_ch, n_par = raw.shape
    u = sol.factors.u                                                  # [S, R, K]
    flat = raw.reshape(n_sets, n_rows, n_ch * n_par)
    proj = flat - u @ (u.transpose(0, 2, 1) @ flat)
    dxw = _design_derivative(block, conc_sens) if exact else None     # [S, R, J, P]
    if exact:
        n_col = dxw.shape[2]
        g = (-sol.resid) @ dxw.reshape(n_sets, n_rows, n_col * n_par)   # [S, C, J·P]
        g = g.reshape(n_sets, n_ch, n_col, n_par) / sol.factors.norms[:, None, :, None]
        t = (sol.factors.vt[:, None] @ g) * sol.factors.inv[:, None, :, None]   # [S, C, K, P]
        k = t.shape[2]
        proj -= u @ t.transpose(0, 2, 1, 3).reshape(n_sets, k, n_ch * n_par)
    proj = proj.reshape(n_sets, n_rows, n_ch, n_par)
    for (s_i, c), fac in sol.special.items():
        own = raw[s_i, :, c] - fac.u @ (fac.u.T @ raw[s_i, :, c])
        if exact:
            g = np.tensordot(-sol.resid[s_i, c], dxw[s_i][:, fac.free], axes=(0, 0))
            own -= _pinv_t(fac, g)
        proj[s_i, :, c] = own
    return proj


def raw_jacobian(block, conc_sens, beta):
    """W ∂(f₀ + Xβ)/∂θ at fixed β [n_sets, n_rows, n_channels, n_params]."""
    n_sets, n_ch = beta.shape[:2]
    n_rows, n_abs = conc_sens.shape[1], conc_sens.shape[2]
    # effective ℓ·ε of each absorber in each row and channel: known plus solved
    eff = np.empty((n_sets, n_rows, n_ch, n_abs))
    for a in range(n_abs):
        cols = np.flatnonzero(block.feature == a)
        eff[..., a] = (block.path[:, None] * block.known[None, :, a])[None] + (
            block.coef[None][:, :, cols] @ beta[:, :, cols].transpose(0, 2, 1))
    eff *= block.row_weight[None, :, None, None]
    return eff @ conc_sens                                     # [S, R, C, P]


# ------------------------------------------------------------------ model

@dataclass(frozen=True)
class SignalModel:
    """How model concentrations become the measured signals of an experiment.

    Attributes
    ----------
    blocks : tuple of Block
        What the fit sees (reduced spectra, when reduced).
    full_blocks : tuple of Block
        The same on the full data (identical unless spectra are reduced).
    conc_flat, conc_inner : ndarray of int
        Measured concentration points and their evaluation points.
    n_points : int
        Length of the measured vector.
    components : Components or None
        SVD of the spectra (:mod:`kinfit.numerics.svd`).
    spec : SignalSpec
    units : Units
    run_names : tuple of str
    notes : tuple of str
        Cautions found while building the model (too few significant
        components for the absorbers), reported with the fit's warnings.
    exact : bool
        Whether :meth:`project` returns the exact (Golub–Pereyra) derivative,
        used for the optimiser's steps, or Kaufman's projection (the
        standard errors; see the module notes).
    """

    blocks: tuple
    full_blocks: tuple
    conc_flat: np.ndarray
    conc_inner: np.ndarray
    n_points: int
    components: Components | None
    spec: SignalSpec
    units: Units
    run_names: tuple
    notes: tuple = ()
    exact: bool = True

    def kaufman(self):
        """The same model with Kaufman's projected Jacobian (for standard errors)."""
        return replace(self, exact=False)

    @property
    def n_linear(self):
        """Linear unknowns solved inside each evaluation."""
        return sum(b.n_linear for b in self.blocks)

    @property
    def reduced(self):
        return any(b.basis is not None for b in self.blocks)

    def project(self, inner_pred, inner_dpred, ok):
        """Measured-point predictions from the model's concentrations.

        Parameters
        ----------
        inner_pred : ndarray [n_sets, n_inner]
            Concentrations at the evaluation points.
        inner_dpred : ndarray [n_sets, n_inner, n_params] or None
        ok : ndarray [n_sets] of bool

        Returns
        -------
        pred : ndarray [n_sets, n_points]
            f₀ + X β̂ at each measured point (β̂ profiled for each set).
        dpred : ndarray [n_sets, n_points, n_params] or None
            The derivative of the projected weighted residual divided by the
            weights, so that dpred/σ is its Jacobian: exact (Golub–Pereyra),
            or Kaufman's projection when ``exact`` is false.
        """
        with one_blas_thread():
            return self._project(inner_pred, inner_dpred, ok)

    def _project(self, inner_pred, inner_dpred, ok):
        n_sets = inner_pred.shape[0]
        inner_pred = np.where(ok[:, None], np.nan_to_num(inner_pred), 0.0)
        pred = np.empty((n_sets, self.n_points))
        pred[:, self.conc_flat] = inner_pred[:, self.conc_inner]
        dpred = None
        if inner_dpred is not None:
            inner_dpred = np.where(ok[:, None, None], np.nan_to_num(inner_dpred), 0.0)
            dpred = np.empty((n_sets, self.n_points, inner_dpred.shape[2]))
            dpred[:, self.conc_flat] = inner_dpred[:, self.conc_inner]
        for block in self.blocks:
            step = max(1, _CHUNK // max(1, block.values.size))
            for lo in range(0, n_sets, step):
                sl = slice(lo, min(n_sets, lo + step))
                conc = inner_pred[sl][:, block.conc_index]
                sol = solve_block(block, conc)
                w = block.row_weight
                flat = _as_slice(block.flat)
                pred[sl, flat] = (block.values[None] - sol.resid / w[None, None, :]).reshape(
                    pred[sl, flat].shape)
                if dpred is not None:
                    sens = inner_dpred[sl][:, block.conc_index]
                    jac = project_jacobian(block, sol, sens, self.exact)
                    jac = jac.transpose(0, 2, 1, 3) / w[None, None, :, None]
                    dpred[sl, flat] = jac.reshape(dpred[sl, flat].shape)
        return pred, dpred


def _as_slice(flat):
    """A slice when the positions [C, R] are one contiguous run, else the array."""
    first = int(flat.flat[0])
    if np.array_equal(flat.ravel(), np.arange(first, first + flat.size)):
        return slice(first, first + flat.size)
    return flat

