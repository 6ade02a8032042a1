"""Tests of fitdrag.uncertainty.gum: GUM arithmetic, Welch–Satterthwaite, coverage factors,
input quantities and their sampling, the budget."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from fitdrag.uncertainty.gum import (
    P_K2,
    InputQuantity,
    budget_from_contributions,
    budget_from_model,
    coverage_factor,
    welch_satterthwaite,
)

# ---------------------------------------------------------------------------------------------
# JCGM 100:2008 (GUM) Annex H.1, calibration of an end gauge of nominal length 50 mm.
# Inputs as in GUM H.1.3 / Table H.1 (lengths in nm, temperatures as deviations in °C):
#   l_s   = 50.000623 mm, u = 25 nm, ν = 18          (calibration of the standard)
#   d̄     = 215 nm, u = 5.8 nm, ν = 24              (repeated observations)
#   d1    = 0, u = 3.9 nm, ν = 5                     (random effects of the comparator)
#   d2    = 0, u = 6.7 nm, ν = 8                     (systematic effects of the comparator)
#   α_s   = 11.5e-6 /°C, u = 1.2e-6 /°C (rectangular ±2e-6), ν = ∞
#   θ̄     = -0.1 °C, u = 0.2 °C;  Δ = 0, u = 0.35 °C (arc sine ±0.5 °C)
#   δα    = 0, u = 0.58e-6 /°C (rectangular ±1e-6), ν = 50
#   δθ    = 0, u = 0.029 °C (rectangular ±0.05 °C), ν = 2
# Model (GUM H.1.2): l = l_s + d − l_s (δα θ + α_s δθ), d = d̄ + d1 + d2, θ = θ̄ + Δ.
# Published results (GUM H.1.4–H.1.6): l = 50.000838 mm, u_c = 32 nm, ν_eff = 16,
# t_99(16) = 2.92, U_99 = 93 nm.  Confirmed in the documentation of the GUM Tree Calculator
# (GTC) example "Gauge block measurement (GUM H1)", which prints 50000838(32) and the
# components 25, 16.6, 6.7, 5.8, 3.9, 2.89 nm.
# ---------------------------------------------------------------------------------------------


H1_INPUTS = [
    InputQuantity("l_s", 50_000_623.0, 25.0, "nm", dof=18),
    InputQuantity("d_bar", 215.0, 5.8, "nm", dof=24, kind="A"),
    InputQuantity("d1", 0.0, 3.9, "nm", dof=5),
    InputQuantity("d2", 0.0, 6.7, "nm", dof=8),
    InputQuantity("alpha_s", 11.5e-6, 2e-6 / math.sqrt(3), "1/°C", distribution="rectangular"),
    InputQuantity("theta_bar", -0.1, 0.2, "°C"),
    InputQuantity("Delta", 0.0, 0.5 / math.sqrt(2), "°C", distribution="arcsine"),
    InputQuantity("d_alpha", 0.0, 1e-6 / math.sqrt(3), "1/°C", dof=50, distribution="rectangular"),
    InputQuantity("d_theta", 0.0, 0.05 / math.sqrt(3), "°C", dof=2, distribution="rectangular"),
]


def h1_model(v):
    d = v["d_bar"] + v["d1"] + v["d2"]
    theta = v["theta_bar"] + v["Delta"]
    return v["l_s"] + d - v["l_s"] * (v["d_alpha"] * theta + v["alpha_s"] * v["d_theta"])


def test_gum_h1_end_gauge_budget():
    """published-value: JCGM 100:2008 Annex H.1 (u_c = 32 nm, ν_eff = 16, U_99 = 93 nm)."""
    b = budget_from_model(h1_model, H1_INPUTS, coverage_probability=0.99, unit="nm")
    assert b.value == pytest.approx(50_000_838.0, abs=0.5)  # GUM H.1.5: l = 50.000838 mm
    assert round(b.combined_standard_uncertainty) == 32  # GUM H.1.4: u_c = 32 nm
    assert math.floor(b.effective_dof) == 16  # GUM H.1.6: ν_eff = 16
    assert b.coverage_factor == pytest.approx(2.92, abs=0.005)  # GUM H.1.6: t_99(16) = 2.92
    # GUM H.1.6: U_99 = t_99(16) × 32 nm = 93 nm (it multiplies the rounded u_c; unrounded,
    # u_c = 31.66 nm gives 92.5 nm)
    assert round(b.coverage_factor * round(b.combined_standard_uncertainty)) == 93
    assert b.expanded_uncertainty == pytest.approx(93.0, abs=1.0)
    # Table H.1 contributions |c_i| u(x_i): 25 nm, 16.6 nm (δθ), 2.9 nm (δα), 0 for α_s, θ
    assert abs(b.line("l_s").contribution) == pytest.approx(25.0, rel=1e-9)
    assert abs(b.line("d_theta").contribution) == pytest.approx(16.6, abs=0.05)
    assert abs(b.line("d_alpha").contribution) == pytest.approx(2.9, abs=0.05)
    assert b.line("alpha_s").contribution == 0.0
    assert b.line("theta_bar").contribution == 0.0
    # Table H.1 sensitivity of δθ: c = −l_s α_s = −0.575 µm/°C = −575 nm/°C
    assert b.line("d_theta").sensitivity == pytest.approx(-575.0, rel=1e-3)
    assert sum(ln.share for ln in b.lines) == pytest.approx(1.0)


def test_gum_h1_degrees_of_freedom_of_d():
    """published-value: GUM H.1.3.2, u(d) = 9.7 nm with ν(d) = 25.6 from 5.8 (24), 3.9 (5),
    6.7 (8) nm by eq. (G.2b).  Our figure from the rounded inputs is 25.4; the GUM rounds
    intermediate values, so a tolerance of 0.5 is used."""
    nu = welch_satterthwaite([5.8, 3.9, 6.7], [24, 5, 8])
    assert nu == pytest.approx(25.6, abs=0.5)
    assert math.hypot(5.8, 3.9, 6.7) == pytest.approx(9.7, abs=0.05)


def test_k2_coverage_probability_and_t_table():
    """published-value: JCGM 100:2008 Table G.2, t_p(ν): ν = 16 → 2.12 (95 %), 2.17 (95.45 %),
    2.92 (99 %); ν = ∞ → 1.960 (95 %), 2.000 (95.45 %); ν = 1 → 12.71 (95 %)."""
    assert coverage_factor(math.inf) == pytest.approx(2.0, abs=1e-12)
    assert P_K2 == pytest.approx(0.9545, abs=5e-5)
    assert coverage_factor(16, 0.95) == pytest.approx(2.12, abs=0.005)
    assert coverage_factor(16) == pytest.approx(2.17, abs=0.005)
    assert coverage_factor(16.9, 0.99) == pytest.approx(2.92, abs=0.005)  # truncated to 16
    assert coverage_factor(16.9, 0.99, truncate=False) < coverage_factor(16, 0.99)
    assert coverage_factor(math.inf, 0.95) == pytest.approx(1.960, abs=5e-4)
    assert coverage_factor(1, 0.95) == pytest.approx(12.71, abs=0.005)


def test_welch_satterthwaite_closed_form():
    """closed-form/independent: one finite-ν term of two equal ones gives ν_eff = 4 ν
    (u_c⁴ = 4 u⁴); all-infinite gives ∞."""
    assert welch_satterthwaite([1.0, 1.0], [3.0, math.inf]) == pytest.approx(12.0)
    assert welch_satterthwaite([1.0, 2.0], [math.inf, math.inf]) == math.inf
    assert welch_satterthwaite([0.0, 0.0], [3.0, 3.0]) == math.inf


def test_central_difference_step_and_nonlinearity():
    """closed-form/independent: for y = x³ the central difference with step h gives
    3x² + h² and f(x+h) + f(x−h) − 2f(x) = 6 x h²; for a quadratic it is exact."""
    q = InputQuantity("x", 2.0, 0.1)
    b = budget_from_model(lambda v: v["x"] ** 3, [q])
    assert b.line("x").sensitivity == pytest.approx(3 * 4.0 + 0.01, rel=1e-12)
    assert b.line("x").nonlinearity == pytest.approx(3 * 2.0 * 0.01, rel=1e-9)
    assert b.line("x").step == 0.1
    b2 = budget_from_model(lambda v: v["x"] ** 2 * v["z"], [q, InputQuantity("z", 3.0, 0.5)])
    assert b2.line("x").sensitivity == pytest.approx(2 * 2.0 * 3.0, rel=1e-12)
    assert b2.line("z").sensitivity == pytest.approx(4.0, rel=1e-12)


def test_exact_sensitivity_and_statistical_component():
    """closed-form/independent: an exact sensitivity is used as given (fn is not stepped); the
    statistical part adds in quadrature with c = 1 and its own ν."""
    calls = []

    def fn(v):
        calls.append(dict(v))
        return 1.0 + 2.0 * v["a"]

    b = budget_from_model(
        fn, [InputQuantity("a", 0.0, 0.3, sensitivity=2.0)], statistical=(0.8, 10)
    )
    assert len(calls) == 1
    assert b.combined_standard_uncertainty == pytest.approx(math.hypot(0.6, 0.8))
    assert b.effective_dof == pytest.approx(1.0**4 / (0.8**4 / 10))
    assert b.lines[0].name == "statistical" and b.lines[0].kind == "A"
    assert b.expanded_uncertainty == pytest.approx(
        stats.t.ppf(0.5 * (1 + P_K2), 24) * 1.0, rel=1e-12
    )


def test_one_sided_difference_at_domain_edge():
    """closed-form/independent: when fn fails below the estimate, the forward difference is
    used; for sqrt at x = 1e-4 with u = 1e-4 it is (sqrt(2e-4) − sqrt(1e-4)) / 1e-4."""

    def fn(v):
        if v["x"] <= 0:
            raise ValueError("x must be > 0")
        return math.sqrt(v["x"])

    b = budget_from_model(fn, [InputQuantity("x", 1e-4, 1e-4)])
    assert b.line("x").sensitivity == pytest.approx((math.sqrt(2e-4) - 1e-2) / 1e-4)
    assert math.isnan(b.line("x").nonlinearity)


def test_model_failure_is_reported():
    """regression: a model that fails at the estimates names where."""

    def fn(v):
        raise ArithmeticError("no convergence")

    with pytest.raises(RuntimeError, match=r"model evaluation failed at the input estimates"):
        budget_from_model(fn, [InputQuantity("x", 1.0, 0.1)])


def test_input_validation_messages():
    """regression: bad inputs raise ValueError naming the input and the value."""
    with pytest.raises(ValueError, match=r"^mass: standard_uncertainty must be >= 0, got -0.1"):
        InputQuantity("mass", 1.0, -0.1)
    with pytest.raises(ValueError, match=r"^mass: value must be finite, got nan"):
        InputQuantity("mass", float("nan"), 0.1)
    with pytest.raises(ValueError, match=r"^x: distribution must be one of normal, rect"):
        InputQuantity("x", 1.0, 0.1, distribution="gauss")
    with pytest.raises(ValueError, match=r"^x: kind must be 'A' \(statistical\) or 'B'"):
        InputQuantity("x", 1.0, 0.1, kind="C")
    with pytest.raises(ValueError, match=r"^x: dof \(degrees of freedom\) must be > 0"):
        InputQuantity("x", 1.0, 0.1, dof=0)
    with pytest.raises(ValueError, match=r"inputs: duplicate input name\(s\) \['x'\]"):
        budget_from_model(lambda v: 0.0, [InputQuantity("x", 1, 1), InputQuantity("x", 2, 1)])
    with pytest.raises(ValueError, match=r"^coverage_probability: must be between 0 and 1"):
        coverage_factor(10, 95.0)


def test_sampling_moments():
    """closed-form/independent: each distribution has standard deviation u (JCGM 101 6.4);
    the t input has scale u, hence sd u·sqrt(ν/(ν−2)) (JCGM 101 6.4.9.4)."""
    rng = np.random.default_rng(1)
    n = 200_000
    for dist in ("normal", "rectangular", "triangular", "arcsine"):
        s = InputQuantity("x", 5.0, 0.2, distribution=dist).sample(rng, n)
        assert s.mean() == pytest.approx(5.0, abs=0.003)
        assert s.std() == pytest.approx(0.2, rel=0.01), dist
    s = InputQuantity("x", 0.0, 1.0, dof=6, kind="A").sample(rng, n)
    assert s.std() == pytest.approx(math.sqrt(6 / 4), rel=0.02)
    r = InputQuantity("x", 0.0, 1.0, distribution="rectangular").sample(rng, n)
    assert np.abs(r).max() <= math.sqrt(3.0)


def test_budget_from_contributions_and_dict():
    """regression: to_dict carries every figure and 'inf' for infinite degrees of freedom."""
    b = budget_from_contributions(3.0, [(InputQuantity("x", 1.0, 0.1, "kg"), 2.0)], unit="-")
    d = b.to_dict()
    assert d["expanded_uncertainty"] == pytest.approx(0.4)
    assert d["effective_degrees_of_freedom"] == "inf"
    assert d["lines"][0]["contribution"] == pytest.approx(0.2)
    assert b.relative_uncertainty == pytest.approx(0.2 / 3.0)
