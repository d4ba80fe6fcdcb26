"""Formatting shared by several layers: values with errors, and the cautions text.

Text for people is built here so that results (estimation, analysis) and the
outputs above them word a value and its uncertainty the same way.
"""

from __future__ import annotations

import math

__all__ = ["CAUTIONS", "format_value"]

CAUTIONS = (
    "A rate law and its rate constants hold only over the conditions they were measured "
    "in (concentrations, temperature, solvent, mixing); do not extrapolate them far outside. "
    "Kinetics measured at bench scale must not alone decide the thermal safety of a "
    "scaled-up process (heat release, cooling failure, thermal runaway): defer to reaction "
    "calorimetry, a process-safety review, local codes and licensed professional practice."
)


def format_value(value, stderr=None, digits=4):
    """A value with its standard error, rounded to the error's second digit.

    >>> format_value(1.4887e-4, 6.11e-6)
    '1.489e-04 ± 6.1e-06'
    >>> format_value(1.00374, 0.00567)
    '1.0037 ± 0.0057'
    """
    if value is None or not math.isfinite(value):
        return str(value)
    use_exp = value != 0 and (abs(value) < 1e-3 or abs(value) >= 1e5)
    if stderr is None or not math.isfinite(stderr) or stderr <= 0:
        return f"{value:.{digits}g}" if not use_exp else f"{value:.{digits - 1}e}"
    err_exp = math.floor(math.log10(stderr))
    if use_exp:
        val_exp = math.floor(math.log10(abs(value)))
        decimals = max(0, val_exp - err_exp + 1)
        return f"{value:.{decimals}e} ± {stderr:.1e}"
    decimals = max(0, 1 - err_exp)
    if abs(stderr) >= 1e5 or abs(stderr) < 1e-3:
        return f"{value:.{decimals}f} ± {stderr:.1e}"
    return f"{value:.{decimals}f} ± {stderr:.{decimals}f}"
