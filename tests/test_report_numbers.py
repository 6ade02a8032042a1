"""Tests of fitdrag.report.numbers: rounding a value with its uncertainty (GUM 7.2)."""

from __future__ import annotations

import pytest

from fitdrag.report.numbers import format_sig, format_with_uncertainty, formatter_for


@pytest.mark.parametrize(
    "value, u, expected",
    [
        # GUM (JCGM 100:2008) 7.2.2: m_S = 100.02147 g with u_c = 0.35 mg
        (100.02147, 0.00035, ("100.02147", "0.00035")),
        # GUM 7.2.4: m_S = (100.02147 ± 0.00079) g with U = 0.79 mg
        (100.02147, 0.00079, ("100.02147", "0.00079")),
        # common practice, no source: two significant digits in U, value to the same place
        (0.4700475, 0.011843, ("0.470", "0.012")),
        (0.47004, 0.00996, ("0.470", "0.010")),  # rounding carries into a new digit
        (0.4705, 0.012, ("0.471", "0.012")),  # half up
        (-0.0001, 0.01, ("0.000", "0.010")),  # no negative zero
        (12345.0, 1234.0, ("12300", "1200")),
        (1.5, 0.0, ("1.50000", "0")),
    ],
)
def test_rounding_to_uncertainty(value, u, expected):
    """published-value (GUM 7.2.2, 7.2.4) and closed-form rounding cases."""
    assert format_with_uncertainty(value, u) == expected


def test_format_helpers():
    """regression: significant-digit formatting and the shared formatter."""
    assert format_sig(0.0022009, 2) == "0.0022"
    assert format_sig(16331183.0, 2) == "1.6e+07"
    assert format_sig(float("inf")) == "∞"
    assert formatter_for(0.0118)(0.44) == "0.440"


def test_format_probability_never_claims_certainty():
    """regression: 0.99997 and 1.0 read "> 99.9 %", 0.0004 "< 0.1 %", others to 0.1 %."""
    from fitdrag.report.numbers import format_probability

    assert format_probability(1.0) == "> 99.9 %"
    assert format_probability(0.99997) == "> 99.9 %"
    assert format_probability(0.999) == "99.9 %"
    assert format_probability(0.5) == "50.0 %"
    assert format_probability(0.0004) == "< 0.1 %"
