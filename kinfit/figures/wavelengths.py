"""Which wavelengths of full-spectrum data to draw traces at.

Owns :func:`choose_wavelengths`, shared by the spectra figures and the text
and file outputs of a signal fit.
"""

from __future__ import annotations

import numpy as np

__all__ = ["choose_wavelengths"]


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
