"""Numbers with their uncertainty, as every summary shows them."""

from __future__ import annotations

import pytest

from kinfit.core.formatting import format_value


@pytest.mark.parametrize("value, se, text", [
    (1.4887e-4, 6.11e-6, "1.489e-04 ± 6.1e-06"),
    (1.00374, 0.00567, "1.0037 ± 0.0057"),
    (213.809, 12.35, "214 ± 12"),
    (0.54724, 0.10456, "0.55 ± 0.10"),
    (2.5, None, "2.5"),
])
def test_format_value(value, se, text):
    assert format_value(value, se) == text


def test_superscripts_turn_plain_powers_into_superscripts():
    from kinfit.core.formatting import superscripts

    assert superscripts("mM^-2 min^-1") == "mM⁻² min⁻¹"
    assert superscripts("M^-0.5 s^-1") == "M⁻⁰·⁵ s⁻¹"
    assert superscripts("(mol/L)^-1 s^-1") == "(mol/L)⁻¹ s⁻¹"
    assert superscripts("mol/dm^3") == "mol/dm³" and superscripts("mM**2") == "mM²"
    assert superscripts("J/(mol K)") == "J/(mol K)" and superscripts(None) == ""


def test_intervals_are_rounded_like_their_estimate():
    from kinfit.core.formatting import format_interval

    assert format_interval((1.369e-4, 1.609e-4), 6.11e-6) == "1.369e-04 – 1.609e-04"
    assert format_interval((0.99263, 1.01484), 0.00567) == "0.9926 – 1.0148"
    assert format_interval(None) == "—"


def test_interval_quantiles():
    from kinfit.core.formatting import covariance_interval, interval_quantile

    # NIST/SEMATECH e-Handbook of Statistical Methods, tables of the normal distribution
    # (1.960) and of upper critical values of Student's t (ν = 10: 2.228) (from memory)
    assert interval_quantile(0.95) == pytest.approx(1.960, abs=5e-4)
    assert interval_quantile(0.95, 10) == pytest.approx(2.228, abs=5e-4)
    assert covariance_interval(2.0, 0.5, 2.0) == [1.0, 3.0]
    assert covariance_interval(2.0, None, 2.0) is None
