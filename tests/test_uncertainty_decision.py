"""Tests of fitdrag.uncertainty.decision: ILAC-G8:09/2019 decision rules on constructed cases.

The limits are binary fractions (0.25, 0.375, ...) so "at the limit" is exact in floating point.
"""

from __future__ import annotations

import math

import pytest
from scipy import stats

from fitdrag.uncertainty.decision import (
    CONDITIONAL_FAIL,
    CONDITIONAL_PASS,
    FAIL,
    PASS,
    Specification,
    decide,
    probability_of_conformity,
)

EPS = 2.0**-20

# Stated value 0.5 ± 0.25 -> tolerance limits 0.25 and 0.75; U = 0.125 -> with w = U the
# acceptance limits are 0.375 and 0.625 and the outer bounds of "conditional fail" 0.125, 0.875.
SPEC = Specification.from_tolerance(0.5, 0.25, reference="synthetic customer spec S-1")
U = 0.125

GUARDED_CASES = [
    # (value, decision) -- ILAC-G8:09/2019 §4.2.3, Figure of the four non-binary outcomes
    (0.5, PASS),
    (0.625, PASS),  # on the upper acceptance limit: inside
    (0.625 + EPS, CONDITIONAL_PASS),
    (0.75, CONDITIONAL_PASS),  # on the upper tolerance limit: inside
    (0.75 + EPS, CONDITIONAL_FAIL),
    (0.875, CONDITIONAL_FAIL),  # on T_U + w
    (0.875 + EPS, FAIL),
    (0.375, PASS),
    (0.375 - EPS, CONDITIONAL_PASS),
    (0.25, CONDITIONAL_PASS),
    (0.25 - EPS, CONDITIONAL_FAIL),
    (0.125, CONDITIONAL_FAIL),
    (0.125 - EPS, FAIL),
    (3.0, FAIL),
]


@pytest.mark.parametrize("value, expected", GUARDED_CASES)
def test_guarded_acceptance_two_sided(value, expected):
    """closed-form/independent: ILAC-G8:09/2019 §4.2.2-4.2.3 zones with w = U, constructed
    around each limit (boundary counted inside: common practice, no source)."""
    v = decide(value, U, SPEC, "guarded")
    assert v.decision == expected
    assert v.guard_band == U
    assert (v.acceptance_lower, v.acceptance_upper) == (0.375, 0.625)


@pytest.mark.parametrize(
    "value, expected",
    [
        (0.5, PASS),
        (0.75, PASS),
        (0.75 + EPS, FAIL),
        (0.25, PASS),
        (0.25 - EPS, FAIL),
        (0.74, PASS),
        (-1.0, FAIL),
    ],
)
def test_simple_acceptance_two_sided(value, expected):
    """closed-form/independent: ILAC-G8:09/2019 §4.2.1, acceptance limits = tolerance limits;
    U does not move the limits."""
    v = decide(value, U, SPEC, "simple")
    assert v.decision == expected
    assert v.guard_band == 0.0
    assert (v.acceptance_lower, v.acceptance_upper) == (0.25, 0.75)


@pytest.mark.parametrize(
    "value, rule, expected",
    [
        (0.5, "guarded", PASS),
        (0.375, "guarded", PASS),
        (0.375 - EPS, "guarded", CONDITIONAL_PASS),
        (0.25, "guarded", CONDITIONAL_PASS),
        (0.25 - EPS, "guarded", CONDITIONAL_FAIL),
        (0.125, "guarded", CONDITIONAL_FAIL),
        (0.125 - EPS, "guarded", FAIL),
        (100.0, "guarded", PASS),  # no upper limit
        (0.25, "simple", PASS),
        (0.25 - EPS, "simple", FAIL),
    ],
)
def test_one_sided_lower_limit(value, rule, expected):
    """closed-form/independent: one-sided lower limit T_L = 0.25, w = U = 0.125."""
    spec = Specification(lower=0.25, upper=None)
    assert decide(value, U, spec, rule).decision == expected


@pytest.mark.parametrize(
    "value, rule, expected",
    [
        (0.5, "guarded", PASS),
        (0.625, "guarded", PASS),
        (0.625 + EPS, "guarded", CONDITIONAL_PASS),
        (0.75, "guarded", CONDITIONAL_PASS),
        (0.75 + EPS, "guarded", CONDITIONAL_FAIL),
        (0.875, "guarded", CONDITIONAL_FAIL),
        (0.875 + EPS, "guarded", FAIL),
        (-5.0, "guarded", PASS),  # no lower limit
        (0.75 + EPS, "simple", FAIL),
    ],
)
def test_one_sided_upper_limit(value, rule, expected):
    """closed-form/independent: one-sided upper limit T_U = 0.75, w = U = 0.125."""
    spec = Specification(lower=None, upper=0.75)
    assert decide(value, U, spec, rule).decision == expected


def test_guard_bands_wider_than_tolerance():
    """closed-form/independent: when 2U exceeds the tolerance interval no value can pass;
    the centre is only a conditional pass."""
    v = decide(0.5, 0.3, SPEC, "guarded")
    assert v.decision == CONDITIONAL_PASS
    assert v.conforms  # a conditional pass is inside the tolerance limits


def test_probability_of_conformity_normal_model():
    """closed-form/independent: JCGM 106:2012 clause 7, normal model.  At the limit p = 0.5;
    at U = 2u inside a one-sided limit p = Φ(2) = 0.97725; centred in ±2u, p = 0.9545."""
    assert probability_of_conformity(0.75, 0.1, 0.25, 0.75) == pytest.approx(
        0.5 - stats.norm.sf(5.0), abs=1e-12
    )
    assert probability_of_conformity(0.5, 0.125, 0.25, None) == pytest.approx(
        stats.norm.cdf(2.0), abs=1e-12
    )
    assert probability_of_conformity(0.5, 0.125, 0.25, 0.75) == pytest.approx(
        stats.norm.cdf(2.0) - stats.norm.cdf(-2.0), abs=1e-12
    )
    assert probability_of_conformity(0.8, 0.0, 0.25, 0.75) == 0.0
    assert probability_of_conformity(0.7, 0.0, 0.25, 0.75) == 1.0
    v = decide(0.625, U, SPEC, "guarded", coverage_factor=2.0)
    assert v.standard_uncertainty == pytest.approx(0.0625)
    assert v.probability_of_conformity == pytest.approx(
        stats.norm.cdf(2.0) - stats.norm.cdf(-6.0), abs=1e-12
    )


def test_statement_names_specification_result_and_rule():
    """regression: ISO/IEC 17025:2017 §7.8.6.2 asks for the specification, the result covered
    and the decision rule; all three appear with the decision."""
    v = decide(0.7, U, SPEC, "guarded", result_label="specimen SYN-BALL-1")
    s = v.statement()
    assert "Specification: stated value 0.5 ± 0.25, i.e. 0.25 ≤ drag coefficient ≤ 0.75" in s
    assert "synthetic customer spec S-1" in s
    assert "Result covered: drag coefficient = 0.7 (specimen SYN-BALL-1)" in s
    assert "U = 0.125 (k = 2.00" in s
    assert "guarded acceptance with guard band w = U (ILAC-G8:09/2019, 4.2.2 and 4.2.3)" in s
    assert "Decision: CONDITIONAL PASS." in s
    s2 = decide(0.3, U, Specification(lower=0.25, upper=None), "simple").statement("{:.3f}".format)
    assert "one-sided lower limit: drag coefficient ≥ 0.250" in s2
    assert "simple acceptance (ILAC-G8:09/2019, 4.2.1)" in s2 and "Decision: PASS." in s2
    d = v.to_dict()
    assert d["decision"] == "conditional pass" and d["specification"]["tolerance"] == 0.25


def test_statement_never_states_certainty():
    """closed-form/independent: Cd 0.5 in 0.25..0.75 with u_c = 0.0625 is 4 u_c from each
    limit: the normal model's probability of conformity is 1 − 2 Φ(−4) = 0.99994 (scipy),
    stated as "> 99.9 %", not "100.0 %"; 2 u_c outside a limit gives Φ(−2) = 2.3 %."""
    v = decide(0.5, U, SPEC, "simple")
    assert v.probability_of_conformity == pytest.approx(1 - 2 * stats.norm.cdf(-4.0))
    assert "Probability of conformity under a normal model: > 99.9 %." in v.statement()
    w = decide(0.875, U, SPEC, "simple")
    assert w.probability_of_conformity == pytest.approx(stats.norm.cdf(-2.0), rel=1e-6)
    assert "Probability of conformity under a normal model: 2.3 %." in w.statement()


def test_specification_errors():
    """regression: bad specifications raise ValueError naming the problem and the fix."""
    with pytest.raises(ValueError, match=r"^tolerance: must be > 0, got -0.1"):
        Specification.from_tolerance(0.5, -0.1)
    with pytest.raises(ValueError, match=r"^specification: lower limit 0.6 must be below upper"):
        Specification(0.6, 0.4)
    with pytest.raises(ValueError, match=r"^specification: neither a lower nor an upper limit"):
        Specification(None, None)
    with pytest.raises(ValueError, match=r"^specification: stated value 0.9 lies outside"):
        Specification(0.4, 0.6, nominal=0.9)
    with pytest.raises(ValueError, match=r"^decision_rule: unknown rule 'strict'; use one of"):
        decide(0.5, 0.1, SPEC, "strict")
    with pytest.raises(ValueError, match=r"^expanded_uncertainty: must be >= 0, got -1"):
        decide(0.5, -1, SPEC)
    with pytest.raises(ValueError, match=r"^value: must be finite, got nan"):
        decide(math.nan, 0.1, SPEC)
