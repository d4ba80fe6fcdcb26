"""Formatting shared by several layers: values with errors, intervals, units, cautions.

Text for people is built here so that results (estimation, analysis) and the
outputs above them word a value and its uncertainty the same way.

Units are kept in plain text wherever a program reads them (JSON, CSV, the
terminal: ``mM^-2 min^-1``); figures and HTML pages show them with
superscripts (``mM⁻² min⁻¹``) through :func:`superscripts`, the one place that
turns one form into the other.
"""

from __future__ import annotations

import math
import re

__all__ = ["CAUTIONS", "format_value", "format_interval", "interval_quantile",
           "covariance_interval", "INTERVAL_NOTE", "superscripts"]

# How a covariance interval is formed; summaries, CSV and HTML quote this.
INTERVAL_NOTE = (
    "95 % interval = value ± q × standard error, q from Student's t with N − p degrees of "
    "freedom when the noise is estimated from the fit, from the normal distribution (1.96) "
    "when it is declared; symmetric in the parameter itself (in k, not in log k, although "
    "rate constants are fitted as log10 k: the standard error is mapped to k by the delta "
    "method)"
)

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


def format_interval(pair, stderr=None, digits=4):
    """An interval's ends at the precision :func:`format_value` gives its estimate.

    >>> format_interval((1.369e-4, 1.609e-4), 6.11e-6)
    '1.369e-04 – 1.609e-04'
    >>> format_interval((0.99263, 1.01484), 0.00567)
    '0.9926 – 1.0148'
    >>> format_interval((-4.1e-4, 2.81e-3), 8e-4)
    '-0.00041 – 0.00281'
    >>> format_interval(None)
    '—'
    """
    if pair is None or pair[0] is None or pair[1] is None:
        return "—"
    lo, hi = float(pair[0]), float(pair[1])
    if not (math.isfinite(lo) and math.isfinite(hi)):
        return f"{lo:.{digits}g} – {hi:.{digits}g}"
    big = max(abs(lo), abs(hi))
    use_exp = big != 0 and (big < 1e-3 or big >= 1e5)
    known = stderr is not None and math.isfinite(stderr) and stderr > 0
    if use_exp:
        exp = math.floor(math.log10(big))
        decimals = max(0, exp - math.floor(math.log10(stderr)) + 1) if known else digits - 1
        return " – ".join(f"{v / 10 ** exp:.{decimals}f}e{exp:+03d}" for v in (lo, hi))
    if not known:
        return f"{lo:.{digits}g} – {hi:.{digits}g}"
    decimals = max(0, 1 - math.floor(math.log10(stderr)))
    return f"{lo:.{decimals}f} – {hi:.{decimals}f}"


def interval_quantile(level=0.95, dof=None):
    """q of a two-sided interval at `level`: value ± q × standard error.

    Student's t with `dof` degrees of freedom, or the normal distribution when
    `dof` is None (scipy.stats.t.ppf and norm.ppf at 0.5 + level/2).

    >>> round(interval_quantile(0.95), 4)
    1.96
    """
    from scipy import stats

    p = 0.5 + level / 2.0
    return float(stats.norm.ppf(p) if dof is None else stats.t.ppf(p, dof))


def covariance_interval(value, stderr, quantile):
    """``[value − q·se, value + q·se]``, or None without a finite standard error."""
    if value is None or stderr is None or not math.isfinite(stderr) or stderr < 0:
        return None
    return [value - quantile * stderr, value + quantile * stderr]


_SUPERSCRIPT = str.maketrans("0123456789-.", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻·")
_POWER = re.compile(r"\^\(?(-?\d+(?:\.\d+)?)\)?|\*\*(-?\d+(?:\.\d+)?)")


def superscripts(text):
    """Plain-text powers written with superscripts, for figures and HTML.

    ``^n`` (or ``**n``) with an integer or decimal n becomes superscript
    digits, a superscript minus and a middle dot for the decimal point;
    everything else is left as it is. ``None`` gives ``""``.

    >>> superscripts("mM^-2 min^-1")
    'mM⁻² min⁻¹'
    >>> superscripts("(mol/L)^-0.5 s^-1")
    '(mol/L)⁻⁰·⁵ s⁻¹'
    >>> superscripts("k [A] [B]^2")
    'k [A] [B]²'
    """
    if not text:
        return ""
    return _POWER.sub(lambda m: (m.group(1) or m.group(2)).translate(_SUPERSCRIPT), str(text))
