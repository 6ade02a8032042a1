"""Tests of fitdrag.uncertainty.monte_carlo: the JCGM 101 Monte Carlo method, its coverage
interval, adaptive procedure and the validation of a GUM budget against it."""

from __future__ import annotations

import math
import operator

import numpy as np
import pytest
from scipy import stats

from fitdrag.uncertainty.gum import InputQuantity, budget_from_model
from fitdrag.uncertainty.monte_carlo import (
    compare_with_gum,
    monte_carlo,
    numerical_tolerance,
    symmetric_interval,
)


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


def test_gum_check_rarely_reports_differ_for_an_exact_gum_interval():
    """closed-form/independent: for a linear model of normal inputs the GUM interval is exact
    (JCGM 100 G.6), so every "differ" is a false alarm of the check; at 1000 trials over 300
    seeds it is at most 3 % (a 2-sigma endpoint rule gave 5.7 %). The endpoint factor is
    scipy's Student t quantile t(1 - 0.05/4; 9)."""
    from scipy.stats import t

    from fitdrag.uncertainty import monte_carlo as mcm

    assert mcm._ENDPOINT_T == pytest.approx(t.ppf(1 - 0.05 / 4, 9), abs=1e-4)
    q = [InputQuantity("a", 1.0, 0.1), InputQuantity("b", 2.0, 0.05),
         InputQuantity("c", 0.5, 0.02)]  # fmt: skip

    def f(v):
        return v["a"] + 3 * v["b"] - 2 * v["c"]

    b = budget_from_model(f, q)
    runs = [monte_carlo(f, q, trials=1000, seed=s, vectorized=True) for s in range(300)]
    false = sum(compare_with_gum(b, mc).status == "differ" for mc in runs)
    assert false / len(runs) <= 0.03


def test_adaptive_monte_carlo_waits_for_its_until_condition():
    """closed-form/independent: y = x, x ~ N(0, 1), batches of 2000 with n_dig = 1
    stabilise after two batches (test_adaptive_monte_carlo_stops); a further condition that
    asks for 8000 values is asked only at stable points, keeps the run going past 8000 to the
    next stable batch, and the values are those of the same seed without the condition (the
    look-ahead batch does not change the draws)."""
    q = [InputQuantity("x", 0.0, 1.0)]
    seen = []

    def enough(so_far):
        seen.append(so_far.trials)
        return so_far.trials >= 8000

    kw = dict(trials=100_000, adaptive=True, batch_size=2000, n_dig=1, seed=2,
              vectorized=True, keep_values=True)  # fmt: skip
    plain = monte_carlo(lambda v: v["x"], q, **kw)
    mc = monte_carlo(lambda v: v["x"], q, until=enough, **kw)
    assert plain.converged is True and plain.trials == seen[0] < 8000
    assert mc.converged is True and mc.trials == seen[-1] >= 8000 and mc.trials % 2000 == 0
    assert all(t < 8000 for t in seen[:-1])
    np.testing.assert_array_equal(mc.values[: plain.trials], plain.values)
