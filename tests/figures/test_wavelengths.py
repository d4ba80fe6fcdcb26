"""Which wavelengths the spectra figures draw traces at (kinfit.figures.wavelengths)."""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np

from kinfit.figures.wavelengths import choose_wavelengths

# Resolved spectra of three species on a 10 nm grid (invented numbers); only
# the wavelengths and the spectra are read.
SPECTRA = SimpleNamespace(
    wavelengths=np.array([400.0, 410.0, 420.0, 430.0, 440.0]),
    values=np.array([[0.1, 0.9, 0.2, 0.0, 0.0],       # peak at 410
                     [0.0, 0.0, 0.1, 0.3, -0.8],      # largest |ε| at 440 (a negative band)
                     [0.0, 0.7, 0.1, 0.0, 0.0]]))     # peak at 410 again


def test_without_a_request_the_peak_of_each_spectrum_once():
    # worked by hand from the numbers above: peaks 410, 440, 410 -> 410, 440
    assert choose_wavelengths(SPECTRA) == [410.0, 440.0]
    assert choose_wavelengths(SPECTRA, most=1) == [410.0]


def test_requested_wavelengths_move_to_the_nearest_measured_one():
    # worked by hand: 404 -> 400, 426 -> 430, 999 -> 440, 401 -> 400 (already chosen)
    assert choose_wavelengths(SPECTRA, [404.0, 426.0, 999.0, 401.0]) == [400.0, 430.0, 440.0]
    # every request is kept even beyond `most`
    assert choose_wavelengths(SPECTRA, [400.0, 410.0, 420.0], most=2) == [400.0, 410.0, 420.0]
