"""Tests of fitdrag.physics.sphere_drag: the published smooth-sphere drag correlations.

Oracles: each paper's equation written out again in this file (plain Python, none of
fitdrag's code), Stokes' law, the common-practice subcritical C_d, and, as a second opinion
where it evaluates the same formula, the ``fluids`` library.
"""

from __future__ import annotations

import doctest
import math

import fluids.drag
import numpy as np
import pytest

from fitdrag.physics import sphere_drag
from fitdrag.physics.sphere_drag import (
    DEFAULT_CORRELATION,
    SPHERE_CORRELATIONS,
    correlations_for_flight,
    get_correlation,
    sphere_correlation_names,
    sphere_drag_coefficient,
)

RE_GRID = np.logspace(-3, math.log10(2e5), 60)


def _grid(name):
    lo, hi = SPHERE_CORRELATIONS[name].stated_range
    return RE_GRID[(RE_GRID >= lo) & (RE_GRID <= min(hi, 2e5))]


# Each paper's equation, written out from the paper's printed form (the source named beside
# each one); the Morrison third term is written as printed, with its negative exponents.
PAPERS = {
    # Morrison, An Introduction to Fluid Mechanics, CUP 2013, eq. (8.83) (from memory)
    "morrison": lambda re: (
        24 / re
        + 2.6 * (re / 5.0) / (1 + (re / 5.0) ** 1.52)
        + 0.411 * (re / 263000.0) ** -7.94 / (1 + (re / 263000.0) ** -8.0)
        + 0.25 * (re / 1e6) / (1 + re / 1e6)
    ),
    # Morrison, "Data Correlation for Drag Coefficient for Sphere", MTU 2010, eq. (1)
    "morrison-2010": lambda re: (
        24 / re
        + 2.6 * (re / 5.0) / (1 + (re / 5.0) ** 1.52)
        + 0.411 * (re / 263000.0) ** -7.94 / (1 + (re / 263000.0) ** -8.0)
        + re**0.80 / 461000.0
    ),
    # Clift and Gauvin (1970) as printed in Clift, Grace & Weber, Bubbles, Drops, and
    # Particles, Academic Press 1978, ch. 5 (eq. 5-58, equation number from memory)
    "clift-gauvin": lambda re: 24 / re * (1 + 0.15 * re**0.687) + 0.42 / (1 + 4.25e4 * re**-1.16),
    # the coefficients listed by Barati et al., Powder Technol. 257 (2014) 11-19
    "clift-gauvin-barati": lambda re: (
        24 / re * (1 + 0.152 * re**0.677) + 0.417 / (1 + 5070 * re**-0.94)
    ),
    # Haider & Levenspiel, Powder Technol. 58 (1989) 63-70, eq. (10)
    "haider-levenspiel": lambda re: (
        24 / re * (1 + 0.1806 * re**0.6459) + 0.4251 / (1 + 6880.95 / re)
    ),
    # Khan & Richardson, Chem. Eng. Commun. 62 (1987) 135-150
    "khan-richardson": lambda re: (2.49 * re**-0.328 + 0.34 * re**0.067) ** 3.18,
    # Cheng, Powder Technol. 189 (2009) 395-398, eq. (12)
    "cheng": lambda re: 24 / re * (1 + 0.27 * re) ** 0.43 + 0.47 * (1 - math.exp(-0.04 * re**0.38)),
    # Barati et al., Powder Technol. 257 (2014) 11-19, eq. (22)
    "barati": lambda re: (
        5.4856e9 * math.tanh(4.3774e-9 / re)
        + 0.0709 * math.tanh(700.6574 / re)
        + 0.3894 * math.tanh(74.1539 / re)
        - 0.1198 * math.tanh(7429.0843 / re)
        + 1.7174 * math.tanh(9.9851 / (re + 2.3384))
        + 0.4744
    ),
}


def test_every_correlation_has_its_paper_equation_here():
    """regression: the table of this file covers every correlation of the module."""
    assert set(PAPERS) == set(sphere_correlation_names())


@pytest.mark.parametrize("name", sphere_correlation_names())
def test_correlation_equals_the_papers_equation(name):
    """closed-form/independent: each correlation equals its paper's equation written out
    again in this file (PAPERS: the source and equation named beside each), over its range
    up to Re = 2e5; the public function, the by-name evaluation and the compiled kernel agree."""
    c = SPHERE_CORRELATIONS[name]
    re = _grid(name)
    expected = np.array([PAPERS[name](float(r)) for r in re])
    np.testing.assert_allclose(c.public(re), expected, rtol=1e-12)
    np.testing.assert_allclose(sphere_drag_coefficient(re, name), expected, rtol=1e-12)
    np.testing.assert_allclose([c.function(float(r))[0] for r in re], expected, rtol=1e-12)
    assert isinstance(c.public(3.0e4), float)


@pytest.mark.parametrize("name", sphere_correlation_names())
def test_correlation_derivative_matches_differences_of_the_papers_equation(name):
    """closed-form/independent: the analytic dC_d/dRe against central differences of the
    paper's equation written out in this file."""
    re = _grid(name)
    h = 1e-6 * re
    f = PAPERS[name]
    fd = np.array([(f(r + d) - f(r - d)) / (2 * d) for r, d in zip(re, h)])
    _, ours = sphere_drag_coefficient(re, name, derivative=True)
    np.testing.assert_allclose(ours, fd, rtol=2e-6, atol=1e-9)


@pytest.mark.parametrize("name", [n for n, c in SPHERE_CORRELATIONS.items() if c.fluids_method])
def test_correlation_agrees_with_fluids_where_it_evaluates_the_same_formula(name):
    """closed-form/independent (a second opinion): fluids 1.3 ``drag_sphere(Re, Method=...)``
    evaluates the same formula for these (its "Clift_Gauvin" is the Barati et al. 2014
    listing, its "Morrison" the 2010 handout)."""
    c = SPHERE_CORRELATIONS[name]
    re = _grid(name)
    ref = np.array([fluids.drag.drag_sphere(r, Method=c.fluids_method) for r in re])
    np.testing.assert_allclose(sphere_drag_coefficient(re, name), ref, rtol=1e-12)


def test_fluids_documented_example_of_the_barati_listing():
    """published-value: the fluids documentation's example for its Clift_Gauvin (the Barati
    et al. 2014 listing): C_d(200) = 0.7905400398000133 (fluids 1.3, drag.Clift_Gauvin
    docstring)."""
    assert sphere_drag.clift_gauvin_barati(200.0) == pytest.approx(0.7905400398000133, rel=1e-12)


def test_the_two_clift_gauvin_forms_differ():
    """closed-form/independent: the form printed in Clift, Grace & Weber (1978),
    24/Re (1 + 0.15 Re^0.687) + 0.42/(1 + 4.25e4 Re^-1.16), is not the Barati et al. listing
    (0.152, 0.677, 0.417, 5070, -0.94): at Re = 4.6e4 they differ by 5.5 % (the module's
    docstring states that figure)."""
    re = 4.6e4
    a = 24 / re * (1 + 0.15 * re**0.687) + 0.42 / (1 + 4.25e4 * re**-1.16)
    b = 24 / re * (1 + 0.152 * re**0.677) + 0.417 / (1 + 5070 * re**-0.94)
    assert sphere_drag.clift_gauvin(re) == pytest.approx(a, rel=1e-13)
    assert (a - b) / a == pytest.approx(0.055, abs=0.001)
    assert "5.5 %" in sphere_drag.__doc__


def test_morrison_forms_differ_only_in_the_last_term():
    """closed-form/independent: the 2013 and 2010 Morrison forms differ exactly by
    0.25 (Re/1e6)/(1 + Re/1e6) − Re^0.8/461000, less than 0.004 below Re = 2e5."""
    re = _grid("morrison")
    diff = sphere_drag.morrison_2013(re) - sphere_drag.morrison_2010(re)
    expected = 0.25 * (re / 1e6) / (1 + re / 1e6) - re**0.8 / 461000.0
    np.testing.assert_allclose(diff, expected, rtol=1e-9, atol=1e-12)
    assert np.max(np.abs(diff)) < 0.004
    assert DEFAULT_CORRELATION == "morrison"


@pytest.mark.parametrize("name", sphere_correlation_names())
def test_stokes_limit(name):
    """published-value: C_d = 24/Re for Re << 1 (G. G. Stokes, Trans. Camb. Phil. Soc. 9, 1851);
    at the low end of each correlation's range (Re = 1e-3, or 0.01 for Khan-Richardson)."""
    re = max(1e-3, SPHERE_CORRELATIONS[name].stated_range[0])
    cd = float(sphere_drag_coefficient(re, name))
    assert cd * re / 24.0 == pytest.approx(1.0, rel=0.01)


@pytest.mark.parametrize("name", sphere_correlation_names())
def test_subcritical_plateau_near_047(name):
    """regression (common practice, no source): smooth-sphere C_d ≈ 0.47 in the subcritical
    range; every correlation within ±0.09 over Re 1e3–2e5."""
    re = np.logspace(3, math.log10(2e5), 25)
    cd = sphere_drag_coefficient(re, name)
    assert np.all(np.abs(cd - 0.47) < 0.09)


def test_the_docstring_examples_hold():
    """regression: every public correlation's doctest example (C_d at Re = 1e4) holds; each
    public function states its formula, range and source."""
    res = doctest.testmod(sphere_drag, verbose=False)
    assert res.attempted >= len(SPHERE_CORRELATIONS) and res.failed == 0
    for c in SPHERE_CORRELATIONS.values():
        doc = c.public.__doc__
        assert "C_d =" in doc and "Valid" in doc and "Examples" in doc, c.name


def test_correlations_for_flight_states_why_one_is_left_out():
    """regression: a flight over Re 1e-3–10 leaves out Khan–Richardson (stated from Re 0.01),
    one reaching 2.5e5 leaves out all (every scaled model stops at 2e5, below the drag
    crisis: E. Achenbach, J. Fluid Mech. 54, 1972); bad ranges are refused."""
    valid, out = correlations_for_flight(1e-3, 10.0)
    assert "khan-richardson" not in valid and valid[0] == "morrison"
    assert out == {
        "khan-richardson": "the flight's Re 0.001–10 leaves its range of validity Re 0.01–2e+05"
    }
    valid, out = correlations_for_flight(3.0e4, 4.0e4)
    assert valid == sphere_correlation_names() and out == {}
    valid, out = correlations_for_flight(1e5, 2.5e5)
    assert valid == [] and len(out) == len(SPHERE_CORRELATIONS)
    with pytest.raises(ValueError, match=r"^re_min, re_max: expected 0 < re_min <= re_max, got "
                       r"5\.0, 1\.0; pass the flight's smallest"):  # fmt: skip
        correlations_for_flight(5.0, 1.0)


def test_bad_input():
    """regression: exact error messages for a bad Reynolds number or correlation name."""
    with pytest.raises(
        ValueError, match=r"^re: Reynolds numbers must be finite and > 0, got -1\.0"
    ):
        sphere_drag_coefficient([10.0, -1.0])
    with pytest.raises(ValueError, match=r"^re: Reynolds numbers must be finite and > 0, got nan"):
        sphere_drag.cheng(float("nan"))
    with pytest.raises(
        ValueError,
        match=r"^correlation: unknown sphere drag correlation 'stokes'; valid names: morrison, "
        r"morrison-2010, clift-gauvin, clift-gauvin-barati",
    ):
        get_correlation("stokes")
