"""Arrays in, arrays out: the rate system built from a model, the compiled and scipy
integrators, simulation, the residual problem, variable projection of spectrometer signals
and the singular-value analysis. Reads no files and builds no reports.
"""
