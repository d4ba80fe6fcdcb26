"""Spectrometer signals fitted directly: Beer–Lambert law by variable projection.

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

Standard errors of β come from the full Jacobian [J_θ, W X] by the block
inverse: Cov(β) = s² (AᵀA)⁻¹ + K Cov(θ) Kᵀ with A = W X, K = (AᵀA)⁻¹ Aᵀ J_θ,
and Cov(θ, β) = −Cov(θ) Kᵀ, so the correlation of linear and non-linear
parameters is honoured without forming the full matrix (one block per
channel).

Full spectra
------------
Each wavelength is a channel whose design X is the same (same times and
runs), so one factorisation serves every wavelength. The stacked data Y
[times of all runs × wavelengths] are decomposed by SVD; the number of
singular values above the noise (Gavish & Donoho 2014, optimal hard threshold,
from memory) is reported as the number of significant components, a check on
how many absorbing species the mechanism needs. With ``components`` other
than "all", the fit uses Y V_k (the data projected on the leading k right
singular vectors) in place of Y: the same least-squares problem restricted to
spectra in the span of V_k, k channels instead of hundreds. The spectra are
then resolved at the fitted θ from the full data, and the share of the data's
sum of squares that the reduction left out is reported beside what noise
alone would leave.

The sampler works with these problems unchanged: :meth:`Problem.residuals`
returns the projected residuals, so a posterior sampled through it is over θ
with β profiled out (β at its conditional optimum for each θ).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field, replace

import numpy as np

from kinfit.core.errors import KinfitError
from kinfit.numerics.observation import Observation, build_observation

__all__ = ["SignalModel", "SignalFit", "Coefficient", "ResolvedSpectra", "Components",
           "build_signal_model", "significant_components", "absorbance", "choose_wavelengths",
           "stacked_spectra",
           "KIND_ABSORPTIVITY", "KIND_OFFSET", "KIND_DRIFT"]

KIND_ABSORPTIVITY = "absorptivity"
KIND_OFFSET = "offset"
KIND_DRIFT = "drift"
_RCOND = 1e-10           # singular values of the column-scaled design below this are zero
_CHUNK = 2_000_000       # largest sets x channels x rows handled at once
_CONTROLLER = []


def one_blas_thread():
    """A context running BLAS/LAPACK on one thread (threadpoolctl).

    The matrices here are small (a design of a few columns, spectra of a few
    hundred wavelengths); on a shared two-core machine the multi-threaded SVD
    of a 1200 x 300 matrix was measured at 0.4-2.4 s against 0.03 s on one
    thread (tests/benchmarks/bench_spectra.py).
    """
    if not _CONTROLLER:
        from threadpoolctl import ThreadpoolController

        _CONTROLLER.append(ThreadpoolController())
    return _CONTROLLER[0].limit(limits=1, user_api="blas")


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


def _project_jacobian(block, sol, conc_sens, exact=True):
    """∂r/∂θ of the projected weighted residual r = W(f₀ + X β̂ − y).

    Kaufman's part P⊥·W∂(f₀ + Xβ)/∂θ at fixed β̂ always; with `exact`, also
    the Golub–Pereyra term −(A⁺)ᵀ (W∂X/∂θ)ᵀ r, which makes it the exact
    derivative (A = W X). Matrix products over all channels at once.

    Returns
    -------
    ndarray [n_sets, n_rows, n_channels, n_params]
    """
    raw = _raw_jacobian(block, conc_sens, sol.beta)
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


def _raw_jacobian(block, conc_sens, beta):
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
        SVD of the spectra.
    spec : SignalSpec
    units : Units
    run_names : tuple of str
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
    components: object
    spec: object
    units: object
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
                    jac = _project_jacobian(block, sol, sens, self.exact)
                    jac = jac.transpose(0, 2, 1, 3) / w[None, None, :, None]
                    dpred[sl, flat] = jac.reshape(dpred[sl, flat].shape)
        return pred, dpred

    def resolve(self, problem, values, covariance, free, scale):
        """Linear unknowns at the fitted values, with standard errors.

        Parameters
        ----------
        problem : Problem
        values : ndarray [n_params]
            Fitted values (natural scale).
        covariance : ndarray [n_free, n_free] or None
            Natural-scale covariance of the free non-linear parameters.
        free : sequence of int
            Their columns in the parameter vector.
        scale : float
            s²: 1 with declared noise, σ̂² otherwise.

        Returns
        -------
        SignalFit
        """
        inner = replace(problem, signal=None)
        pred, ok, dpred, _ = inner.evaluate(np.atleast_2d(values), jacobian=True)
        with one_blas_thread():
            return self._resolve(problem, pred, dpred, covariance, free, scale)

    def _resolve(self, problem, pred, dpred, covariance, free, scale):
        dpred = dpred[:, :, list(free)]
        coefficients, warnings, spectra = [], list(self.notes), None
        channel_models = {}
        # how much of each parameter's effect survives the projection
        sigma = problem.observation.sigma
        conc_w = 1.0 if sigma is None else 1.0 / sigma[self.conc_flat][:, None]
        direct = dpred[0, self.conc_inner] * conc_w
        raw_ss = proj_ss = np.sum(direct ** 2, axis=0)
        for block in self.full_blocks:
            conc = pred[:, block.conc_index]
            sens = dpred[:, block.conc_index]
            sol = solve_block(block, conc, nonnegative=True)
            raw_ss = raw_ss + np.sum(_raw_jacobian(block, sens, sol.beta) ** 2, axis=(0, 1, 2))
            proj_ss = proj_ss + np.sum(_project_jacobian(block, sol, sens, exact=False) ** 2,
                                       axis=(0, 1, 2))
            s2 = scale
            if self.reduced and block.wavelengths is not None and not _declared(block):
                dof = block.values.size - block.n_linear - len(free)
                s2 = float(np.sum(sol.resid ** 2)) / max(dof, 1)
            var, cross = _linear_covariance(block, sol, sens, covariance, s2)
            warnings += _rank_warnings(block, sol)
            if block.wavelengths is None:
                corr = _correlations(var[0], cross[0], covariance,
                                     [problem.names[i] for i in free])
                coefficients += _coefficients(block, sol, var, self, corr)
                channel_models.update(_channel_models(block, sol, self))
            else:
                spectra = _resolved(block, sol, var, self, s2)
        names = [problem.names[i] for i in free]
        with np.errstate(invalid="ignore", divide="ignore"):
            kept = np.sqrt(proj_ss / raw_ss)
        for name, share in zip(names, kept):
            if np.isfinite(share) and share < 1e-6:
                warnings.append(
                    f"{name} changes the signals only in ways the linear unknowns "
                    f"(absorptivities, offsets, drifts) take up, so the data cannot determine "
                    f"it (e.g. the time offset of a first-order decay, or a starting "
                    f"concentration, when the absorptivity is unknown); fix it or make an "
                    f"absorptivity known")
        return SignalFit(coefficients=tuple(coefficients), spectra=spectra,
                         components=self.components, warnings=tuple(warnings),
                         channel_models=channel_models, unit=self.spec.unit,
                         reduced=self.reduced, n_linear=self.n_linear)


def _as_slice(flat):
    """A slice when the positions [C, R] are one contiguous run, else the array."""
    first = int(flat.flat[0])
    if np.array_equal(flat.ravel(), np.arange(first, first + flat.size)):
        return slice(first, first + flat.size)
    return flat


def _declared(block):
    return not np.all(block.row_weight == 1.0)


def _linear_covariance(block, sol, sens, covariance, s2):
    """Variances of the block's linear unknowns from the full Jacobian.

    Returns
    -------
    var : ndarray [n_channels, n_columns]
        NaN where a column is held at a bound or cannot be separated.
    cross : list of ndarray [n_columns, n_free] per channel
        Cov(β, θ) (for single channels).
    """
    n_ch, n_col = block.values.shape[0], len(block.columns)
    var = np.full((n_ch, n_col), np.nan)
    cross = [None] * n_ch
    raw = _raw_jacobian(block, sens, sol.beta)[0]             # [rows, n_ch, n_free]
    a_all = sol.scaled[0]
    shared = not sol.special
    if shared:
        g_inv = _pinv_or_none(a_all.T @ a_all)
        if g_inv is None:
            return var, cross
        h = np.tensordot(a_all, raw, axes=(0, 0))               # [n_col, n_ch, n_free]
        k = (g_inv @ h.reshape(n_col, -1)).reshape(h.shape).transpose(1, 0, 2)
        var[:] = s2 * np.diag(g_inv)[None, :]
        if covariance is not None:
            var += np.einsum("cip,pq,ciq->ci", k, covariance, k)
            cross = [-(k[c] @ covariance) for c in range(n_ch)]
        return var, cross
    for c in range(n_ch):
        freecols = ~sol.active[0, c]
        a = a_all[:, freecols]
        g_inv = _pinv_or_none(a.T @ a)
        if g_inv is None:
            continue
        k = g_inv @ a.T @ raw[:, c]
        v = s2 * np.diag(g_inv)
        if covariance is not None:
            v = v + np.einsum("ip,pq,iq->i", k, covariance, k)
            full = np.zeros((n_col, covariance.shape[0]))
            full[freecols] = -(k @ covariance)
            cross[c] = full
        var[c, freecols] = v
    return var, cross


def _pinv_or_none(g):
    """Inverse of a normal matrix, or None when its columns are not separable."""
    d = np.sqrt(np.diag(g))
    if g.size == 0 or np.any(d == 0):
        return None
    scaled = g / np.outer(d, d)
    if np.linalg.cond(scaled) > 1e12:
        return None
    return np.linalg.inv(scaled) / np.outer(d, d)


def _correlations(var, cross, covariance, names):
    """Correlation of each linear unknown with each kinetic parameter [n_columns] of dicts."""
    if cross is None or covariance is None:
        return [{} for _ in var]
    se_theta = np.sqrt(np.clip(np.diag(covariance), 0.0, None))
    out = []
    for v, row in zip(var, cross):
        if not np.isfinite(v) or v <= 0:
            out.append({})
            continue
        out.append({n: float(c / (math.sqrt(v) * s)) for n, c, s in zip(names, row, se_theta)
                    if s > 0})
    return out


def _rank_warnings(block, sol):
    """Columns the data cannot tell apart (a near-singular design)."""
    keep = ~sol.active[0].any(axis=0)
    a = sol.scaled[0][:, keep]
    names = [c.name for c, k in zip(block.columns, keep) if k]
    if a.shape[1] == 0:
        return []
    norms = np.linalg.norm(a, axis=0)
    zero = [n for n, v in zip(names, norms) if v == 0]
    if zero:
        return [f"{block.label}: {', '.join(zero)} do(es) not affect the signal (the species' "
                f"concentration stays zero); its value is not determined"]
    _, s, vt = np.linalg.svd(a / norms, full_matrices=False)
    if s[-1] > 1e-6 * s[0]:
        return []
    involved = [n for n, v in zip(names, vt[-1]) if abs(v) > 0.1]
    return [f"{block.label}: the data cannot tell apart {', '.join(involved)} (their "
            f"columns in the Beer–Lambert design are nearly dependent, e.g. a species whose "
            f"concentration is a constant minus another's, with a per-run offset); fix one "
            f"of them (a known absorptivity) or change the offsets"]


# ----------------------------------------------------------------- results

@dataclass(frozen=True)
class Coefficient:
    """One solved linear unknown of a signal channel.

    Attributes
    ----------
    name : str
        ``eps_B_A480``, ``eps_B_A480_r1`` (per run), ``offset_A480_r1``,
        ``drift_A480``.
    kind : str
        "absorptivity", "offset" or "drift".
    channel : str
    species, run : str or None
    value : float
    stderr : float or None
        From the full Jacobian (linear and non-linear parameters together).
    unit : str
    at_bound : bool
        Held at zero by the non-negativity constraint.
    correlation : dict of str to float
        Correlation with each fitted kinetic parameter (full Jacobian).
    """

    name: str
    kind: str
    channel: str
    species: str | None
    run: str | None
    value: float
    stderr: float | None
    unit: str
    at_bound: bool = False
    correlation: dict = field(default_factory=dict)


@dataclass(frozen=True)
class ResolvedSpectra:
    """Species spectra resolved from full-spectrum data at the fitted parameters.

    Attributes
    ----------
    wavelengths : ndarray [n_wavelengths]
    wavelength_unit : str
    species : tuple of str
    values, stderr : ndarray [n_species, n_wavelengths]
        Absorptivity spectra ε(λ) and their standard errors (NaN where held
        at zero or not separable).
    baselines : dict of str to ndarray [n_wavelengths]
        Offset spectra (per run or ``"shared"``) and drift spectra
        (``"drift <run>"``).
    runs : tuple of str
        Runs with spectra.
    fitted : tuple of ndarray [n_times, n_wavelengths]
        The model at each run's data times.
    residual_sum : float
        Σ of squared (weighted) residuals of the full data.
    n_points : int
    sigma : float or None
        Estimated noise of one reading (unknown noise), or None.
    unit : str
    """

    wavelengths: np.ndarray
    wavelength_unit: str
    species: tuple
    values: np.ndarray
    stderr: np.ndarray
    baselines: dict
    runs: tuple
    fitted: tuple
    residual_sum: float
    n_points: int
    sigma: float | None
    unit: str

    def to_dict(self):
        return {"wavelength_unit": self.wavelength_unit, "species": list(self.species),
                "wavelengths": self.wavelengths.tolist(), "unit": self.unit,
                "spectra": {s: self.values[i].tolist() for i, s in enumerate(self.species)},
                "stderr": {s: self.stderr[i].tolist() for i, s in enumerate(self.species)},
                "baselines": {k: v.tolist() for k, v in self.baselines.items()},
                "runs": list(self.runs), "residual_sum_full": self.residual_sum,
                "n_points_full": self.n_points, "sigma_full": self.sigma}


@dataclass(frozen=True)
class Components:
    """SVD of the stacked spectra [times of all runs × wavelengths].

    Attributes
    ----------
    singular_values : ndarray [min(n_rows, n_wavelengths)]
    threshold : float
        Singular values above it are significant.
    n_significant : int
    n_used : int or None
        Components the fit used; None when it used every wavelength.
    left_out : float
        Share of the data's sum of squares outside the components used.
    noise_share : float
        The share that noise alone would leave out (from the noise level).
    noise : float
        σ of one reading: declared, or estimated from the median singular value.
    noise_declared : bool
    criterion : str
    """

    singular_values: np.ndarray
    threshold: float
    n_significant: int
    n_used: int | None
    left_out: float
    noise_share: float
    noise: float
    noise_declared: bool
    criterion: str

    def to_dict(self):
        return {"singular_values": self.singular_values.tolist(), "threshold": self.threshold,
                "n_significant": self.n_significant, "n_used": self.n_used,
                "left_out_share": self.left_out, "noise_share": self.noise_share,
                "noise": self.noise, "noise_declared": self.noise_declared,
                "criterion": self.criterion}


@dataclass(frozen=True)
class ChannelModel:
    """Everything needed to draw one channel of one run: offset + drift·t + ℓ Σ ε [X]."""

    offset: float
    drift: float
    path: float
    epsilon: dict

    def signal(self, trajectory):
        """Predicted signal on a trajectory's times [n_times]."""
        out = self.offset + self.drift * np.asarray(trajectory.times, dtype=float)
        for species, eps in self.epsilon.items():
            out = out + self.path * eps * trajectory[species]
        return out


@dataclass(frozen=True)
class SignalFit:
    """The signal part of a fit: solved linear unknowns, spectra and SVD.

    Attributes
    ----------
    coefficients : tuple of Coefficient
        Single-wavelength channels' absorptivities, offsets and drifts.
    spectra : ResolvedSpectra or None
    components : Components or None
    warnings : tuple of str
    channel_models : dict of (run, channel) to ChannelModel
    unit : str
        Signal unit ("" for absorbance).
    reduced : bool
        Whether the fit used the leading singular vectors.
    n_linear : int
        Linear unknowns counted as fitted parameters.
    """

    coefficients: tuple
    spectra: ResolvedSpectra | None
    components: Components | None
    warnings: tuple
    channel_models: dict = field(repr=False)
    unit: str = ""
    reduced: bool = False
    n_linear: int = 0

    def coefficient(self, name):
        for c in self.coefficients:
            if c.name == name:
                return c
        raise KinfitError(f"no signal coefficient named {name!r}; they are "
                          f"{', '.join(c.name for c in self.coefficients)}")

    def curve(self, run, channel, trajectory):
        """The fitted signal of `channel` in `run` on a trajectory's times."""
        return self.channel_models[(run, channel)].signal(trajectory)

    def to_dict(self):
        return {
            "coefficients": {c.name: {"value": c.value, "stderr": c.stderr, "unit": c.unit,
                                      "kind": c.kind, "channel": c.channel,
                                      "species": c.species, "run": c.run,
                                      "at_bound": c.at_bound, "correlation": c.correlation}
                             for c in self.coefficients},
            "spectra": None if self.spectra is None else self.spectra.to_dict(),
            "components": None if self.components is None else self.components.to_dict(),
            "reduced": self.reduced,
            "linear_unknowns": self.n_linear,
            "method": ("variable projection: linear unknowns solved by least squares in each "
                       "evaluation; Kaufman's projected Jacobian; standard errors from the "
                       "full Jacobian"),
            "warnings": list(self.warnings),
        }


def _units_of(kind, model):
    from kinfit.core.units import format_power

    conc, time = model.units.concentration, model.units.time
    signal = model.spec.unit
    if kind == KIND_ABSORPTIVITY:
        return " ".join(p for p in (signal, format_power(conc, -1), "cm^-1") if p)
    if kind == KIND_DRIFT:
        return " ".join(p for p in (signal, format_power(time, -1)) if p)
    return signal


def _coefficients(block, sol, var, model, correlations):
    out = []
    for j, col in enumerate(block.columns):
        se = var[0, j]
        out.append(Coefficient(
            name=col.name, kind=col.kind, channel=block.label,
            species=block.absorbers[col.absorber] if col.absorber >= 0 else None,
            run=model.run_names[col.run] if col.run >= 0 else None,
            value=float(sol.beta[0, 0, j]),
            stderr=float(math.sqrt(se)) if np.isfinite(se) and se >= 0 else None,
            unit=_units_of(col.kind, model), at_bound=bool(sol.active[0, 0, j]),
            correlation=correlations[j]))
    return out


def _channel_models(block, sol, model):
    out = {}
    beta = sol.beta[0, 0]
    for r in np.unique(block.rows_run):
        eps = {s: float(block.known[0, a]) for a, s in enumerate(block.absorbers)}
        offset = drift = 0.0
        for j, col in enumerate(block.columns):
            if col.run not in (-1, r):
                continue
            if col.kind == KIND_ABSORPTIVITY:
                eps[block.absorbers[col.absorber]] += float(beta[j])
            elif col.kind == KIND_OFFSET:
                offset += float(beta[j])
            else:
                drift += float(beta[j])
        path = float(block.path[block.rows_run == r][0])
        out[(model.run_names[r], block.label)] = ChannelModel(offset, drift, path, eps)
    return out


def _resolved(block, sol, var, model, s2):
    beta = sol.beta[0]                                   # [n_w, n_col]
    species = block.absorbers
    values = np.zeros((len(species), beta.shape[0]))
    stderr = np.full_like(values, np.nan)
    baselines = {}
    with np.errstate(invalid="ignore"):
        se = np.sqrt(var)
    for j, col in enumerate(block.columns):
        if col.kind == KIND_ABSORPTIVITY:
            values[col.absorber] = beta[:, j]
            stderr[col.absorber] = se[:, j]
        else:
            run = "shared" if col.run < 0 else model.run_names[col.run]
            key = run if col.kind == KIND_OFFSET else f"drift {run}"
            baselines[key] = beta[:, j]
    runs = tuple(model.run_names[r] for r in dict.fromkeys(block.rows_run.tolist()))
    model_values = block.values - sol.resid[0] / block.row_weight[None, :]
    fitted = tuple(model_values[:, block.rows_run == model.run_names.index(r)].T for r in runs)
    rss = float(np.sum(sol.resid ** 2))
    sigma = None if _declared(block) else math.sqrt(s2)
    return ResolvedSpectra(wavelengths=block.wavelengths, wavelength_unit=
                           model.spec.spectra.wavelength_unit, species=species, values=values,
                           stderr=stderr, baselines=baselines, runs=runs, fitted=fitted,
                           residual_sum=rss, n_points=block.values.size, sigma=sigma,
                           unit=_units_of(KIND_ABSORPTIVITY, model))


def choose_wavelengths(spectra, requested=None, most=4):
    """Wavelengths of the data to show traces at.

    Parameters
    ----------
    spectra : ResolvedSpectra
    requested : sequence of float, optional
        Wanted wavelengths; each is moved to the nearest measured one.
    most : int
        Without a request: the peak of each species' spectrum, at most this many.

    Returns
    -------
    list of float
    """
    wl = spectra.wavelengths
    if requested:
        picks = [float(wl[int(np.argmin(np.abs(wl - w)))]) for w in requested]
    else:
        picks = [float(wl[int(np.argmax(np.abs(v)))]) for v in spectra.values]
    return list(dict.fromkeys(picks))[:max(most, len(requested or ()))]


def stacked_spectra(experiment):
    """The spectra of all runs stacked [times of all runs, wavelengths], or None."""
    parts = [run.spectrum.values for run in experiment.runs if run.spectrum is not None]
    return np.concatenate(parts, axis=0) if parts else None


# -------------------------------------------------------------------- SVD

def _marchenko_factor(beta):
    """λ*(β) of Gavish & Donoho (2014), known noise: τ = λ*(β) √n σ (from memory)."""
    return math.sqrt(2 * (beta + 1) + 8 * beta / (beta + 1 + math.sqrt(beta ** 2 + 14 * beta
                                                                        + 1)))


def _median_factor(beta):
    """ω(β) ≈ 0.56β³ − 0.95β² + 1.82β + 1.43 of Gavish & Donoho (2014), unknown noise:
    τ = ω(β) · median singular value (their cubic approximation, from memory)."""
    return 0.56 * beta ** 3 - 0.95 * beta ** 2 + 1.82 * beta + 1.43


def significant_components(data, sigma=None, n_used=None, singular_values=None):
    """Singular values of a data matrix and how many stand above the noise.

    Parameters
    ----------
    data : ndarray [n_rows, n_columns]
        Spectra of all runs stacked: one row per time, one column per wavelength.
    sigma : float, optional
        Noise of one reading; estimated from the median singular value when
        not given.
    n_used : int, optional
        Components a reduced fit keeps (for the share left out).
    singular_values : ndarray, optional
        Those of `data`, when already computed.

    Returns
    -------
    Components

    Notes
    -----
    Gavish & Donoho (2014), "The optimal hard threshold for singular values is
    4/√3": for an m × n matrix (m ≤ n, β = m/n) of white noise σ plus a
    low-rank signal, singular values above τ = λ*(β) √n σ belong to the
    signal; with σ unknown, τ = ω(β) · median(s). For a square matrix
    λ*(1) = 4/√3.
    """
    data = np.asarray(data, dtype=float)
    if singular_values is None:
        with one_blas_thread():
            singular_values = np.linalg.svd(data, compute_uv=False)
    s = singular_values
    m, n = sorted(data.shape)
    beta = m / n
    if sigma is not None:
        threshold = _marchenko_factor(beta) * math.sqrt(n) * sigma
        noise = float(sigma)
        criterion = "Gavish-Donoho optimal hard threshold, declared noise"
    else:
        threshold = _median_factor(beta) * float(np.median(s))
        # the median singular value of noise alone is about √n σ √μ_β; μ_β ≈ the
        # Marchenko-Pastur median, here approximated from ω(β) = λ*(β)/√μ_β
        noise = threshold / (_marchenko_factor(beta) * math.sqrt(n))
        criterion = "Gavish-Donoho optimal hard threshold, noise estimated from the median"
    count = int(np.sum(s > threshold))
    total = float(np.sum(s ** 2)) or 1.0
    used = count if n_used is None else n_used
    left = float(np.sum(s[used:] ** 2)) / total
    dof_left = max(data.size - used * (m + n - used), 0)
    noise_share = min(1.0, noise ** 2 * dof_left / total)
    return Components(singular_values=s, threshold=float(threshold), n_significant=count,
                      n_used=n_used, left_out=left, noise_share=noise_share, noise=noise,
                      noise_declared=sigma is not None, criterion=criterion)


# ------------------------------------------------------------------- build

def _ident(text):
    return re.sub(r"\W", "_", str(text), flags=re.ASCII)


def _points_for(needed, n_runs):
    """Evaluation points (run by run) from needed (run, time, species) triples.

    Returns
    -------
    observation : Observation
        Only run_times, run_slices, time_index and species_index matter.
    index : dict of (run, time, species) to int
    """
    run_times, run_slices, time_index, species_index = [], [], [], []
    index, start = {}, 0
    for r in range(n_runs):
        pairs = sorted(needed[r])
        times = np.array([t for t, _ in pairs], dtype=float)
        species = np.array([s for _, s in pairs], dtype=int)
        grid = np.unique(times)
        run_times.append(grid)
        time_index.append(np.searchsorted(grid, times))
        species_index.append(species)
        index.update({(r, t, s): start + i for i, (t, s) in enumerate(pairs)})
        run_slices.append(slice(start, start + len(pairs)))
        start += len(pairs)
    obs = Observation(run_times=tuple(run_times), run_slices=tuple(run_slices),
                      time_index=np.concatenate(time_index).astype(int),
                      species_index=np.concatenate(species_index).astype(int),
                      values=np.zeros(start), sigma=None, traces=())
    return obs, index


def _columns(channel, absorbers, spec, runs_here, run_names, kinds):
    """Linear unknowns of a block: unknown absorptivities, offsets, drifts."""
    cols = []
    label = _ident(channel)
    for a, species in enumerate(absorbers):
        kind = kinds[species]
        if kind == "unknown":
            cols.append(Column(KIND_ABSORPTIVITY, a, -1, f"eps_{species}_{label}"))
        elif kind == "per run":
            cols += [Column(KIND_ABSORPTIVITY, a, r, f"eps_{species}_{label}_"
                            f"{_ident(run_names[r])}") for r in runs_here]
    for kind, how in ((KIND_OFFSET, spec.offset), (KIND_DRIFT, spec.drift)):
        if how == "shared":
            cols.append(Column(kind, -1, -1, f"{kind}_{label}"))
        elif how == "per run":
            cols += [Column(kind, -1, r, f"{kind}_{label}_{_ident(run_names[r])}")
                     for r in runs_here]
    return tuple(cols)


def _coef(columns, rows_run, rows_time, path):
    coef = np.zeros((rows_run.size, len(columns)))
    for j, col in enumerate(columns):
        mask = np.ones(rows_run.size) if col.run < 0 else (rows_run == col.run).astype(float)
        if col.kind == KIND_ABSORPTIVITY:
            mask = mask * path
        elif col.kind == KIND_DRIFT:
            mask = mask * rows_time
        coef[:, j] = mask
    return coef


def build_signal_model(mechanism, experiment, components=None):
    """Join an experiment's signals to a mechanism.

    Parameters
    ----------
    mechanism : Mechanism
    experiment : Experiment
        With ``experiment.signals`` set.
    components : int or str, optional
        Overrides ``[signals.spectra] components`` ("auto", "all" or a number).

    Returns
    -------
    observation : Observation
        The measured points: concentration and channel traces (run by run,
        trace by trace), then the spectra (or their leading components).
    points : Observation
        The concentration points the model is evaluated at (run by run).
    model : SignalModel

    Raises
    ------
    KinfitError
        For absorbers the model lacks, channel names that are species,
        spectra on different wavelength grids, or undeclared noise shared by
        concentrations and signals.
    """
    spec = experiment.signals
    src = experiment.source
    species_index = {s: i for i, s in enumerate(mechanism.species)}
    run_names = tuple(r.name for r in experiment.runs)
    n_runs = len(run_names)
    for name in spec.channels:
        if name in species_index:
            raise KinfitError(f"{src} (signals.channels.{name}): {name!r} is a species of the "
                              f"model '{mechanism.name}'; a signal channel needs its own name "
                              f"(like A480)")
    absorber_lists = [(f"signals.channels.{c.name}", list(c.absorbers))
                      for c in spec.channels.values()]
    if spec.spectra is not None:
        absorber_lists.append(("signals.spectra.absorbers", list(spec.spectra.absorbers)))
    for loc, names in absorber_lists:
        for s in names:
            if s not in species_index:
                raise KinfitError(f"{src} ({loc}): the model '{mechanism.name}' has no species "
                                  f"{s!r}; its species are {', '.join(mechanism.species)}")

    measured = build_observation(mechanism, experiment)
    _check_noise(experiment, measured)
    paths = np.array([r.path_length if r.path_length is not None else spec.path_length
                      for r in experiment.runs])
    needed = [set() for _ in range(n_runs)]
    conc_flat, conc_triples = [], []
    channel_rows = {c: [] for c in spec.channels}
    for r, name, sl in measured.traces:
        if name in spec.channels:
            channel_rows[name].append((r, sl))
        else:
            times = measured.run_times[r][measured.time_index[sl]]
            s = species_index[name]
            for k, t in zip(range(sl.start, sl.stop), times):
                conc_flat.append(k)
                conc_triples.append((r, float(t), s))
                needed[r].add((float(t), s))
    for c, parts in channel_rows.items():
        if not parts:
            raise KinfitError(f"{src} (signals.channels.{c}): no run measured the channel "
                              f"{c!r}; no data column has that name")

    # single-wavelength channels: one block each
    pending = []
    for c, chan in spec.channels.items():
        parts = channel_rows[c]
        rows_run = np.concatenate([np.full(sl.stop - sl.start, r) for r, sl in parts])
        flat = np.concatenate([np.arange(sl.start, sl.stop) for _, sl in parts])
        rows_time = np.concatenate([measured.run_times[r][measured.time_index[sl]]
                                    for r, sl in parts])
        absorbers = tuple(chan.absorbers)
        kinds = {s: (v if isinstance(v, str) else "known") for s, v in chan.absorbers.items()}
        known = np.array([[v if isinstance(v, float) else 0.0 for v in chan.absorbers.values()]])
        weight = np.ones(flat.size) if measured.sigma is None else 1.0 / measured.sigma[flat]
        runs_here = sorted(set(rows_run.tolist()))
        pending.append(dict(label=c, channels=(c,), absorbers=absorbers, kinds=kinds,
                            known=known, rows_run=rows_run, rows_time=rows_time, flat=flat[None],
                            values=measured.values[flat][None], weight=weight,
                            runs_here=runs_here))
    spectral = _spectral_rows(experiment, spec, measured.n_points)
    if spectral is not None:
        pending.append(spectral)
    for p in pending:
        for r, t in zip(p["rows_run"], p["rows_time"]):
            for s in p["absorbers"]:
                needed[r].add((float(t), species_index[s]))

    points, index = _points_for(needed, n_runs)
    blocks = []
    for p in pending:
        abs_idx = [species_index[s] for s in p["absorbers"]]
        conc_index = np.array([[index[(r, float(t), s)] for s in abs_idx]
                               for r, t in zip(p["rows_run"], p["rows_time"])], dtype=int)
        columns = _columns(p["label"], p["absorbers"], spec, p["runs_here"], run_names,
                           p["kinds"])
        rows_path = paths[p["rows_run"]]
        blocks.append(Block(
            label=p["label"], channels=p["channels"], absorbers=p["absorbers"],
            columns=columns, rows_run=p["rows_run"], rows_time=p["rows_time"], path=rows_path,
            conc_index=conc_index, coef=_coef(columns, p["rows_run"], p["rows_time"], rows_path),
            feature=np.array([c.absorber if c.kind == KIND_ABSORPTIVITY else -1
                              for c in columns], dtype=int),
            known=p["known"], values=p["values"], row_weight=p["weight"], flat=p["flat"],
            nonneg=np.array([spec.nonnegative and c.kind == KIND_ABSORPTIVITY
                             for c in columns], dtype=bool),
            wavelengths=p.get("wavelengths")))
    names = set(mechanism.parameters)
    for b in blocks:
        for col in b.columns:
            if b.wavelengths is None and col.name in names:
                raise KinfitError(f"{src}: kinfit names a signal coefficient {col.name!r}, but "
                                  f"the model has a parameter of that name; rename it")

    conc_inner = np.array([index[t] for t in conc_triples], dtype=int)
    conc_flat = np.array(conc_flat, dtype=int)
    full_blocks = tuple(blocks)
    fit_blocks, observation, comps, notes = _reduce(blocks, measured, spec, components)
    model = SignalModel(blocks=tuple(fit_blocks), full_blocks=full_blocks, conc_flat=conc_flat,
                        conc_inner=conc_inner, n_points=observation.n_points,
                        components=comps, spec=spec, units=experiment.units,
                        run_names=run_names, notes=tuple(notes))
    return observation, points, model


def _check_noise(experiment, measured):
    """Spectra need files; one estimated noise level cannot span different units."""
    spec = experiment.signals
    has_spectra = any(r.spectrum is not None for r in experiment.runs)
    if spec.spectra is not None and not has_spectra:
        raise KinfitError(f"{experiment.source} (signals.spectra): no run gives a spectrum "
                          f"file; add spectrum = \"run1_spectra.csv\" to the runs")
    n_traces = len(measured.traces)
    declared = experiment.noise is not None
    if has_spectra and n_traces and (spec.spectra.noise is not None) != declared:
        raise KinfitError(
            f"{experiment.source}: noise is declared for "
            f"{'the traces' if declared else 'the spectra'} but not for "
            f"{'the spectra' if declared else 'the traces'}; declare both "
            f"([noise] for traces, noise in [signals.spectra]) or neither")
    if not declared and n_traces:
        signal = {name in spec.channels for _, name, _ in measured.traces}
        if len(signal) > 1 or (has_spectra and False in signal):
            raise KinfitError(
                f"{experiment.source}: concentrations and signals are measured in different "
                f"units, so they cannot share one noise level estimated from the fit; declare "
                f"[noise] for each measured column (and noise in [signals.spectra])")


def _spectral_rows(experiment, spec, offset):
    """The spectra of all runs as one block's rows (None without spectra)."""
    runs = [(r, run) for r, run in enumerate(experiment.runs) if run.spectrum is not None]
    if not runs:
        return None
    first = runs[0][1].spectrum
    for r, run in runs[1:]:
        wl = run.spectrum.wavelengths
        if wl.shape != first.wavelengths.shape or not np.allclose(wl, first.wavelengths,
                                                                  rtol=0, atol=1e-9):
            raise KinfitError(f"{run.spectrum.source}: the wavelengths differ from those of "
                              f"{first.source} ({wl.size} from {wl[0]:g} to {wl[-1]:g} against "
                              f"{first.wavelengths.size} from {first.wavelengths[0]:g} to "
                              f"{first.wavelengths[-1]:g}); every run's spectra need the same "
                              f"wavelengths")
    rows_run = np.concatenate([np.full(run.spectrum.times.size, r) for r, run in runs])
    rows_time = np.concatenate([run.spectrum.times for _, run in runs])
    values = np.concatenate([run.spectrum.values for _, run in runs], axis=0).T  # [n_w, rows]
    n_w, n_rows = values.shape
    flat = offset + np.arange(n_rows)[None, :] + n_rows * np.arange(n_w)[:, None]
    sigma = spec.spectra.noise
    absorbers = spec.spectra.absorbers
    return dict(label="spectra", channels=tuple(f"{w:g}" for w in first.wavelengths),
                absorbers=absorbers, kinds={s: "unknown" for s in absorbers},
                known=np.zeros((n_w, len(absorbers))), rows_run=rows_run, rows_time=rows_time,
                flat=flat, values=values,
                weight=np.full(n_rows, 1.0 if sigma is None else 1.0 / sigma),
                runs_here=sorted({r for r, _ in runs}), wavelengths=first.wavelengths)


def _reduce(blocks, measured, spec, components):
    """The blocks and measured observation the fit sees; SVD of the spectra.

    Returns
    -------
    blocks, observation, components (Components or None), notes (tuple of str)
    """
    spectral = [b for b in blocks if b.wavelengths is not None]
    if not spectral:
        return blocks, measured, None, []
    block = spectral[0]
    setting = spec.spectra.components if components is None else components
    data = block.values.T                                          # [rows, n_w]
    sigma = spec.spectra.noise
    with one_blas_thread():
        _, singular, vt = np.linalg.svd(data, full_matrices=False)
    comps = significant_components(data, sigma, singular_values=singular)
    notes = []
    n_abs = len(block.absorbers)
    if comps.n_significant < n_abs:
        notes.append(f"the SVD of the spectra finds {comps.n_significant} significant "
                     f"component(s) but the model has {n_abs} absorbing species; their spectra "
                     f"may not be separable from these data")
    if setting == "all":
        used = None
    else:
        used = comps.n_significant if setting == "auto" else int(setting)
        used = max(1, min(used, min(data.shape)))
        if used >= data.shape[1]:
            used = None
    comps = significant_components(data, sigma, used, singular)
    if used is None:
        values = np.concatenate([measured.values, block.values.ravel()])
        sigma_vec = None if measured.sigma is None and sigma is None else np.concatenate(
            [measured.sigma if measured.sigma is not None else np.empty(0),
             np.full(block.values.size, sigma)])
        return blocks, _with_points(measured, values, sigma_vec), comps, notes
    basis = vt[:used].T                                            # [n_w, k]
    reduced_values = (data @ basis).T                              # [k, rows]
    n_rows = data.shape[0]
    offset = measured.n_points
    flat = offset + np.arange(n_rows)[None, :] + n_rows * np.arange(used)[:, None]
    # every spectrum is unknown, so no known part to project; the reduced
    # coefficients B V_k are unconstrained (non-negativity applies to spectra)
    red = replace(block, channels=tuple(f"component {i + 1}" for i in range(used)),
                  known=np.zeros((used, n_abs)), values=reduced_values, flat=flat,
                  nonneg=np.zeros_like(block.nonneg), wavelengths=None, basis=basis)
    values = np.concatenate([measured.values, reduced_values.ravel()])
    sigma_vec = None if sigma is None else np.concatenate(
        [measured.sigma if measured.sigma is not None else np.empty(0),
         np.full(reduced_values.size, sigma)])
    out = [red if b is block else b for b in blocks]
    return out, _with_points(measured, values, sigma_vec), comps, notes


def _with_points(measured, values, sigma):
    """The measured observation with the spectral points appended."""
    extra = values.size - measured.n_points
    return replace(measured, values=values, sigma=sigma,
                   time_index=np.concatenate([measured.time_index, np.zeros(extra, int)]),
                   species_index=np.concatenate([measured.species_index,
                                                 np.full(extra, -1, dtype=int)]))
