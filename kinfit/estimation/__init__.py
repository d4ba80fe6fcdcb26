"""From a residual problem to estimates: least squares, the fitting scale, the likelihood
and information criteria, profile likelihood, posterior sampling and its chains, convergence
diagnostics, residual checks and the linear unknowns of spectrometer fits.
"""
