"""The linear unknowns of a signal fit, resolved at the fitted parameters.

The absorptivities, offsets and drifts of a Beer–Lambert signal are solved
inside every evaluation by variable projection
(:mod:`kinfit.numerics.signal_model`), so the optimiser never sees them. They
are estimated parameters all the same: this module solves them once more at
the fitted values (on the full data when a reduced fit used the leading
singular vectors) and gives their standard errors, their correlations with
the kinetic parameters, and warnings where the data cannot separate them.
:func:`resolve_signals` returns a :class:`SignalFit` (coefficients of single
channels, :class:`ResolvedSpectra` of full spectra, :class:`ChannelModel`
curves).

Standard errors
---------------
Standard errors of β come from the full Jacobian [J_θ, W X] by the block
inverse: Cov(β) = s² (AᵀA)⁻¹ + K Cov(θ) Kᵀ with A = W X, K = (AᵀA)⁻¹ Aᵀ J_θ,
and Cov(θ, β) = −Cov(θ) Kᵀ, so the correlation of linear and non-linear
parameters is honoured without forming the full matrix (one block per
channel). J_θ is Kaufman's projected Jacobian, whose JᵀJ is the Schur
complement of the full normal matrix (see :mod:`kinfit.numerics.signal_model`).

Warnings
--------
Columns of a design that the data cannot separate (e.g. per-run offsets and
absorptivities when every species of a closed system absorbs: the
concentrations then sum to a constant) are named, and so is a kinetic
parameter whose effect the projection removes, ‖P⊥ J_p‖ < 1e-6 ‖J_p‖ (the
dead time of a first-order decay, or a fitted starting concentration, when
the absorptivity is unknown).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from kinfit.core.errors import KinfitError
from kinfit.numerics.signal_model import (
    KIND_ABSORPTIVITY,
    KIND_DRIFT,
    KIND_OFFSET,
    project_jacobian,
    raw_jacobian,
    solve_block,
)
from kinfit.numerics.svd import Components
from kinfit.numerics.threads import one_blas_thread

__all__ = ["resolve_signals", "SignalFit", "Coefficient", "ResolvedSpectra", "ChannelModel"]


def resolve_signals(problem, values, covariance, free, scale):
    """Linear unknowns at the fitted values, with standard errors.

    Parameters
    ----------
    problem : Problem
        With a signal model (``problem.signal``).
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
        return _resolve(problem.signal, problem, pred, dpred, covariance, free, scale)


def _resolve(model, problem, pred, dpred, covariance, free, scale):
    """:func:`resolve_signals` on evaluated concentrations and sensitivities."""
    dpred = dpred[:, :, list(free)]
    coefficients, warnings, spectra = [], list(model.notes), None
    channel_models = {}
    # how much of each parameter's effect survives the projection
    sigma = problem.observation.sigma
    conc_w = 1.0 if sigma is None else 1.0 / sigma[model.conc_flat][:, None]
    direct = dpred[0, model.conc_inner] * conc_w
    raw_ss = proj_ss = np.sum(direct ** 2, axis=0)
    for block in model.full_blocks:
        conc = pred[:, block.conc_index]
        sens = dpred[:, block.conc_index]
        sol = solve_block(block, conc, nonnegative=True)
        raw_ss = raw_ss + np.sum(raw_jacobian(block, sens, sol.beta) ** 2, axis=(0, 1, 2))
        proj_ss = proj_ss + np.sum(project_jacobian(block, sol, sens, exact=False) ** 2,
                                   axis=(0, 1, 2))
        s2 = scale
        if model.reduced and block.wavelengths is not None and not _declared(block):
            dof = block.values.size - block.n_linear - len(free)
            s2 = float(np.sum(sol.resid ** 2)) / max(dof, 1)
        var, cross = _linear_covariance(block, sol, sens, covariance, s2)
        warnings += _rank_warnings(block, sol)
        if block.wavelengths is None:
            corr = _correlations(var[0], cross[0], covariance,
                                 [problem.names[i] for i in free])
            coefficients += _coefficients(block, sol, var, model, corr)
            channel_models.update(_channel_models(block, sol, model))
        else:
            spectra = _resolved(block, sol, var, model, s2)
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
                     components=model.components, warnings=tuple(warnings),
                     channel_models=channel_models, unit=model.spec.unit,
                     reduced=model.reduced, n_linear=model.n_linear)


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
    raw = raw_jacobian(block, sens, sol.beta)[0]             # [rows, n_ch, n_free]
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
