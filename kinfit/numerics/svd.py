"""SVD of stacked spectra: how many components stand above the noise.

This module owns :class:`Components`, :func:`stacked_spectra` and
:func:`significant_components`. The stacked data Y [times of all runs ×
wavelengths] are decomposed by SVD; the number of singular values above the
noise (Gavish & Donoho 2014, optimal hard threshold, from memory) is reported
as the number of significant components, a check on how many absorbing
species the mechanism needs. With ``components`` other than "all", a fit uses
Y V_k (the data projected on the leading k right singular vectors) in place
of Y (:mod:`kinfit.numerics.signal_build`): the same least-squares problem
restricted to spectra in the span of V_k, k channels instead of hundreds.
The reduced fit carries no non-negativity (a constraint on B V_k is not one
on the spectra B). The spectra are then resolved at the fitted θ from the
full data (with non-negativity where it was asked for), and the share
of the data's sum of squares that the reduction left out
(:attr:`Components.left_out`) is reported beside what noise alone would leave
(:attr:`Components.noise_share`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from kinfit.numerics.threads import one_blas_thread

__all__ = ["Components", "stacked_spectra", "significant_components"]


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


def stacked_spectra(experiment):
    """The spectra of all runs stacked [times of all runs, wavelengths], or None."""
    parts = [run.spectrum.values for run in experiment.runs if run.spectrum is not None]
    return np.concatenate(parts, axis=0) if parts else None


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
