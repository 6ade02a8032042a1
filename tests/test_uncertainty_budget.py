"""Tests of fitdrag.uncertainty.budget: GUM arithmetic, Welch–Satterthwaite, coverage factors, Monte Carlo."""

from __future__ import annotations

import math
import operator

import numpy as np
import pytest
from scipy import stats

from fitdrag.uncertainty.budget import (
    P_K2,
    InputQuantity,
    budget_from_contributions,
    budget_from_model,
    compare_with_gum,
    coverage_factor,
    monte_carlo,
    numerical_tolerance,
    symmetric_interval,
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


def test_symmetric_interval_rule():
    """closed-form/independent: JCGM 101 7.7 index rule on the values 1..M: M = 100, p = 0.95
    gives q = 95, r = 3 (M − q odd) → [3, 98]; M = 101 gives q = 96, r = 3 → [3, 99]."""
    assert symmetric_interval(np.arange(1, 101), 0.95) == (3.0, 98.0)
    assert symmetric_interval(np.arange(1, 102)[::-1], 0.95) == (3.0, 99.0)
    with pytest.raises(ValueError, match=r"values: 10 model value\(s\) are too few"):
        symmetric_interval(np.arange(10), 0.95)


def test_numerical_tolerance():
    """published-value: JCGM 101 7.9.2 example: u(y) = 1.02 × 10^-3 to two digits → c = 10,
    l = −4, δ = 0.5 × 10^-4 (the standard's own example, from memory)."""
    assert numerical_tolerance(1.02e-3, 2) == pytest.approx(0.5e-4)
    assert numerical_tolerance(0.018, 2) == pytest.approx(0.5e-3)
    assert numerical_tolerance(3.0, 1) == pytest.approx(0.5)


LINEAR_INPUTS = [
    InputQuantity("a", 1.0, 0.02),
    InputQuantity("b", 2.0, 0.05),
    InputQuantity("c", -0.5, 0.03),
]


def linear_model(v):
    return 2.0 * v["a"] - 3.0 * v["b"] + 0.5 * v["c"]


def test_budget_matches_monte_carlo_on_linear_model():
    """closed-form/independent: for a linear model of normal inputs the output is normal with
    u = sqrt(Σ c_i² u_i²) (JCGM 100 eq. (10) exact here); the Monte Carlo interval agrees
    with the GUM one within the JCGM 101 8.2 tolerance."""
    b = budget_from_model(linear_model, LINEAR_INPUTS)
    exact = math.sqrt((2 * 0.02) ** 2 + (3 * 0.05) ** 2 + (0.5 * 0.03) ** 2)
    assert b.combined_standard_uncertainty == pytest.approx(exact, rel=1e-9)
    mc = monte_carlo(linear_model, LINEAR_INPUTS, trials=200_000, seed=3, vectorized=True)
    assert mc.mean == pytest.approx(b.value, abs=3 * exact / math.sqrt(2e5))
    assert mc.standard_uncertainty == pytest.approx(exact, rel=0.01)
    check = compare_with_gum(b, mc)
    assert check.agrees, check
    assert check.gum_interval[1] - check.gum_interval[0] == pytest.approx(
        2 * 1.959964 * exact, rel=1e-6
    )


def test_monte_carlo_detects_non_normal_output():
    """closed-form/independent: y = x with x rectangular of sd u: the exact 95 % interval is
    ±0.95·√3·u = ±1.645 u, not the GUM's ±1.96 u, so the JCGM 101 8.2 check must fail."""
    q = [InputQuantity("x", 0.0, 1.0, distribution="rectangular")]
    b = budget_from_model(lambda v: v["x"], q)
    mc = monte_carlo(lambda v: v["x"], q, trials=100_000, seed=5, vectorized=True)
    assert mc.interval[1] == pytest.approx(0.95 * math.sqrt(3.0), abs=0.01)
    assert mc.interval[0] == pytest.approx(-0.95 * math.sqrt(3.0), abs=0.01)
    assert not compare_with_gum(b, mc).agrees


def test_monte_carlo_statistical_term_is_t_distributed():
    """closed-form/independent: a pure statistical term (u, ν = 5) gives the 95 % interval
    ±u·t_0.975(5) = ±2.571 u (scaled and shifted t, JCGM 101 6.4.9)."""
    mc = monte_carlo(
        lambda v: np.zeros(len(v["x"])),
        [InputQuantity("x", 0.0, 0.0)],
        statistical=(0.5, 5),
        trials=200_000,
        seed=11,
        vectorized=True,
    )
    assert mc.interval[1] == pytest.approx(0.5 * stats.t.ppf(0.975, 5), rel=0.02)


def test_monte_carlo_serial_and_pool_agree():
    """regression: the inputs are drawn up front, so 1 or 2 worker processes give identical
    model values for the same seed; a failed evaluation is counted, not fatal."""
    q = [InputQuantity("x", 1.0, 0.1)]
    fn = operator.itemgetter("x")
    a = monte_carlo(fn, q, trials=600, seed=7, workers=1, keep_values=True)
    b = monte_carlo(fn, q, trials=600, seed=7, workers=2, keep_values=True)
    np.testing.assert_array_equal(a.values, b.values)
    assert b.workers == 2 and a.failures == 0

    def flaky(v):
        if v["x"] > 1.2:
            raise RuntimeError("fit failed")
        return v["x"]

    c = monte_carlo(flaky, q, trials=2000, seed=1)
    expected = 2000 * stats.norm.sf(2.0)
    assert abs(c.failures - expected) < 5 * math.sqrt(expected)
    assert c.trials == 2000 - c.failures


def test_adaptive_monte_carlo_stops():
    """closed-form/independent: for y = x, x ~ N(0, 1), with n_dig = 1 (δ = 0.05) the batch
    means stabilise after a few batches of 2000 (their sd ≈ 0.02/√h), well before a cap of
    10^5; with a cap of two batches it cannot meet n_dig = 3 and says so."""
    q = [InputQuantity("x", 0.0, 1.0)]
    mc = monte_carlo(
        lambda v: v["x"],
        q,
        trials=100_000,
        adaptive=True,
        batch_size=2000,
        n_dig=1,
        seed=2,
        vectorized=True,
    )
    assert mc.converged is True and mc.trials < 100_000 and mc.trials % 2000 == 0
    assert mc.standard_uncertainty == pytest.approx(1.0, abs=0.05)
    mc2 = monte_carlo(
        lambda v: v["x"],
        q,
        trials=4000,
        adaptive=True,
        batch_size=2000,
        n_dig=3,
        seed=2,
        vectorized=True,
    )
    assert mc2.converged is False and mc2.trials == 4000
    with pytest.raises(ValueError, match=r"trials: 10 is too few for a 0.95 coverage interval"):
        monte_carlo(lambda v: v["x"], q, trials=10)


def test_budget_from_contributions_and_dict():
    """regression: to_dict carries every figure and 'inf' for infinite degrees of freedom."""
    b = budget_from_contributions(3.0, [(InputQuantity("x", 1.0, 0.1, "kg"), 2.0)], unit="-")
    d = b.to_dict()
    assert d["expanded_uncertainty"] == pytest.approx(0.4)
    assert d["effective_degrees_of_freedom"] == "inf"
    assert d["lines"][0]["contribution"] == pytest.approx(0.2)
    assert b.relative_uncertainty == pytest.approx(0.2 / 3.0)


def test_gum_check_status_inconclusive_when_monte_carlo_is_noisy():
    """regression: with few trials and a tight tolerance (n_dig = 3) a linear model's GUM and
    Monte Carlo intervals differ only within the Monte Carlo noise: "inconclusive", never
    "differ"; with many trials and n_dig = 1 they agree."""
    b = budget_from_model(linear_model, LINEAR_INPUTS)
    mc = monte_carlo(linear_model, LINEAR_INPUTS, trials=2000, seed=4, vectorized=True)
    s_lo, s_hi = mc.interval_standard_error
    # batch-means standard error of a 2.5 % quantile: about 2.7 u / √M for a normal output
    # (asymptotic quantile variance p(1-p)/(M f²); common practice, no source)
    exact = b.combined_standard_uncertainty
    assert s_lo == pytest.approx(2.7 * exact / math.sqrt(2000), rel=0.6)
    check = compare_with_gum(b, mc, n_dig=3)
    assert check.status == "inconclusive" and not check.agrees
    mc2 = monte_carlo(linear_model, LINEAR_INPUTS, trials=100_000, seed=4, vectorized=True)
    assert compare_with_gum(b, mc2, n_dig=1).status == "agree"
    q = [InputQuantity("x", 0.0, 1.0, distribution="rectangular")]
    mc3 = monte_carlo(lambda v: v["x"], q, trials=100_000, seed=5, vectorized=True)
    assert compare_with_gum(budget_from_model(lambda v: v["x"], q), mc3).status == "differ"


# ---------------------------------------------------------------------------------------------
# The drag measurement model (re-fits) on a synthetic track from an independent integration
# ---------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def heavy_fit():
    """A fit without buoyancy and added mass, where Cd = 2 m k / (ρ A) holds exactly for the
    fitted drag constant k, so ∂Cd/∂m = Cd/m, ∂Cd/∂ρ = −Cd/ρ, ∂Cd/∂d = −2 Cd/d."""
    import reference as ref

    from fitdrag import Air, Sphere, Track, fit_tracks

    sc = ref.Scenario(added_mass_coefficient=0.0, buoyancy=False, n=200)
    xy = sc.truth() + np.random.default_rng(8).normal(0.0, sc.sigma, (sc.n, 2))
    track = Track(sc.t, xy[:, 0], xy[:, 1])
    sp = Sphere(sc.mass, sc.diameter, added_mass_coefficient=0.0)
    air = Air(ref.RHO, ref.MU)
    fit = fit_tracks(track, sp, air, buoyancy=False, robust=False)
    assert fit.success
    return fit, track, sc


def test_drag_model_sensitivities_closed_form(heavy_fit):
    """closed-form/independent: without buoyancy and added mass the data fix
    k = ρ Cd A / (2 m), so Cd ∝ m / (ρ d²): sensitivities Cd/m, −Cd/ρ, −2Cd/d (the last to
    O((u/d)²) from the central difference); data from scipy DOP853 (tests/reference.py)."""
    from fitdrag.uncertainty.budget import DragRefitModel

    fit, track, sc = heavy_fit
    nominal = {"mass": sc.mass, "diameter": sc.diameter, "air_density": 1.225}
    model = DragRefitModel(fit, [track], nominal, viscosity=1.789e-5)
    assert model(nominal) == pytest.approx(fit.cd, rel=1e-8)
    inputs = [
        InputQuantity("mass", sc.mass, 1e-5, "kg"),
        InputQuantity("diameter", sc.diameter, 5e-5, "m"),
        InputQuantity("air_density", 1.225, 0.005, "kg/m³"),
    ]
    b = budget_from_model(model, inputs, statistical=(fit.u_cd, fit.dof))
    cd = fit.cd
    assert b.line("mass").sensitivity == pytest.approx(cd / sc.mass, rel=1e-6)
    assert b.line("air_density").sensitivity == pytest.approx(
        -cd / 1.225 * (1 + (0.005 / 1.225) ** 2),
        rel=1e-6,  # central difference of 1/ρ
    )
    assert b.line("diameter").sensitivity == pytest.approx(-2 * cd / sc.diameter, rel=1e-5)
    assert b.value == pytest.approx(cd, rel=1e-8)
    assert abs(cd - sc.cd) < 3 * b.combined_standard_uncertainty


def test_drag_model_time_and_length_scale(heavy_fit):
    """closed-form/independent: scaling all lengths by s and gravity by s leaves the motion
    self-similar, with the drag constant k → k/s, hence Cd → Cd/s; a frame rate f instead of
    f0 scales times by f0/f, and with gravity scaled by (f/f0)² Cd is unchanged."""
    from fitdrag.uncertainty.budget import DragRefitModel

    fit, track, sc = heavy_fit
    nominal = {"mass": sc.mass, "diameter": sc.diameter, "air_density": 1.225,
               "frame_rate": sc.fps, "length_scale": 1.0, "gravity": 9.80665}  # fmt: skip
    model = DragRefitModel(fit, [track], nominal, viscosity=1.789e-5)
    s = 1.003
    assert model(dict(length_scale=s, gravity=9.80665 * s)) == pytest.approx(fit.cd / s, rel=1e-7)
    f = sc.fps * 1.002
    assert model(dict(frame_rate=f, gravity=9.80665 * (f / sc.fps) ** 2)) == pytest.approx(
        fit.cd, rel=1e-7
    )
    with pytest.raises(ValueError, match=r"nominal: unknown input name\(s\) \['colour'\]"):
        DragRefitModel(fit, [track], {"colour": 1.0})


def test_drag_model_monte_carlo_in_pool(heavy_fit):
    """regression: the re-fit model is picklable and runs in 2 worker processes; its Monte
    Carlo standard deviation matches the GUM u_c of this near-linear model within 15 %
    (200 trials: sampling error of a standard deviation ≈ 1/√(2·200) = 5 %)."""
    from fitdrag.uncertainty.budget import DragRefitModel

    fit, track, sc = heavy_fit
    nominal = {"mass": sc.mass, "diameter": sc.diameter, "air_density": 1.225}
    model = DragRefitModel(fit, [track], nominal, viscosity=1.789e-5)
    inputs = [
        InputQuantity("mass", sc.mass, 2e-5, "kg"),
        InputQuantity("diameter", sc.diameter, 1e-4, "m"),
        InputQuantity("air_density", 1.225, 0.01, "kg/m³"),
    ]
    stat = (fit.u_cd, fit.dof)
    b = budget_from_model(model, inputs, statistical=stat)
    mc = monte_carlo(model, inputs, statistical=stat, trials=200, seed=1, workers=2)
    assert mc.failures == 0 and mc.workers == 2
    assert mc.standard_uncertainty == pytest.approx(b.combined_standard_uncertainty, rel=0.15)


def test_drag_model_roll_is_a_rotated_refit(heavy_fit):
    """closed-form/independent: the 'roll' input turns the track about its first sample; Cd
    from the re-fit equals a fresh fit of the track rotated by hand (rotation matrix), and a
    tilted horizontal moves Cd (a part of gravity appears as horizontal deceleration)."""
    import math

    from fitdrag import Track, fit_tracks
    from fitdrag.uncertainty.budget import DragRefitModel

    fit, track, sc = heavy_fit
    nominal = {"mass": sc.mass, "diameter": sc.diameter, "air_density": 1.225}
    model = DragRefitModel(fit, [track], nominal, viscosity=1.789e-5)
    a = math.radians(0.5)
    dx, dy = track.x - track.x[0], track.y - track.y[0]
    turned = Track(track.t, track.x[0] + math.cos(a) * dx - math.sin(a) * dy,
                   track.y[0] + math.sin(a) * dx + math.cos(a) * dy)  # fmt: skip
    fresh = fit_tracks(turned, fit.specimen, fit.conditions.air, buoyancy=False, robust=False)
    # the re-fit keeps the original noise weights, the fresh fit re-estimates them: the two
    # agree far inside the statistical uncertainty
    assert abs(model({"roll": 0.5}) - fresh.cd) < 0.05 * fit.u_cd
    assert abs(model({"roll": 0.5}) - fit.cd) > 5 * fit.u_cd
