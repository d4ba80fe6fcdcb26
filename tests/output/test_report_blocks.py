"""Building blocks of report.html: rate laws written out, tables without empty columns."""

from __future__ import annotations

from kinfit.output.report_blocks import (
    interval_cell,
    unit_html,
    without_empty_columns,
    written_rate_law,
)


def test_rate_law_written_out_with_fixed_and_fitted_orders():
    # a ranking's candidate: thiol and acrylate orders fixed at 1, the amine order fitted
    law = {"rate": "k [thiol]^1.000 [acrylate]^1.000 [amine]^0.497",
           "rate_law": "k [thiol]^m_thiol [acrylate]^m_acrylate [amine]^m_amine"}
    params = {"m_thiol": {"value": 1.0, "vary": False},
              "m_acrylate": {"value": 1.0, "vary": False},
              "m_amine": {"value": 0.49741, "vary": True}}
    assert written_rate_law(law, params) == "k [thiol] [acrylate] [amine]⁰·⁴⁹⁷"
    # numbers in the model stay as written; a fitted 1.000 keeps its decimals
    assert written_rate_law({"rate": "k [X] [Y]^2", "rate_law": "k [X] [Y]^2"}, {}) \
        == "k [X] [Y]²"
    assert written_rate_law({"rate": "k [A]^1.000", "rate_law": "k [A]^m"},
                            {"m": {"value": 1.0002, "vary": True}}) == "k [A]¹·⁰⁰⁰"
    # an order given as an expression: the fit's number
    assert written_rate_law({"rate": "k [A]^0.500", "rate_law": "k [A]^(m - 1)"},
                            {"m": {"value": 1.5, "vary": True}}) == "k [A]⁰·⁵⁰⁰"
    # files without the symbolic form: the printed law, with superscripts
    assert written_rate_law({"rate": "k [A]^2"}, {}) == "k [A]²"


def test_columns_of_analyses_not_run_are_left_out():
    header, rows = without_empty_columns(
        ["name", "95 % (covariance)", "95 % (profile)", "unit"],
        [["k", "1 – 2", "–", "s⁻¹"], ["m", "0.9 – 1.1", "—", ""]], {"95 % (profile)"})
    assert header == ["name", "95 % (covariance)", "unit"]
    assert rows == [["k", "1 – 2", "s⁻¹"], ["m", "0.9 – 1.1", ""]]
    header, _ = without_empty_columns(["name", "95 % (profile)"], [["k", "1 – 2"]],
                                      {"95 % (profile)"})
    assert header == ["name", "95 % (profile)"]


def test_cells():
    assert unit_html("M^-1 s^-1") == "M⁻¹ s⁻¹" and unit_html(None) == ""
    assert interval_cell([0.99263, 1.01484], 0.00567) == "0.9926 – 1.0148"
    assert interval_cell([None, 1.01484], 0.00567) == "open – 1.0148"
    assert interval_cell(None) == "–"
