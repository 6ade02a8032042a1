"""Tests of fitdrag.uncertainty.control_chart: limits, the Shewhart tests, the EWMA chart."""

from __future__ import annotations

import math

import numpy as np
import pytest

from fitdrag.uncertainty.control_chart import (
    D2,
    ChartLimits,
    control_chart,
    limits_from_baseline,
)

LIM = ChartLimits(0.0, 1.0, "stated")


def test_d2_is_the_mean_range_of_two_normals():
    """closed-form/independent: for two independent N(0, σ²) values E|X1 − X2| = 2σ/√π, the
    d₂ of subgroups of 2 (ISO 7870-2:2023 tabulates 1.128)."""
    assert D2 == pytest.approx(2 / math.sqrt(math.pi), abs=5e-4)


def test_limits_from_baseline_by_hand():
    """closed-form/independent: centre = mean of the first n, σ = mean |x_i − x_(i−1)| / d₂
    (chart for individual values, ISO 7870-2:2023)."""
    x = [0.470, 0.472, 0.469, 0.471, 0.468, 0.999]
    lim = limits_from_baseline(x, 5)
    assert lim.centre == pytest.approx(np.mean(x[:5]), rel=1e-12)
    assert lim.sigma == pytest.approx((0.002 + 0.003 + 0.002 + 0.003) / 4 / 1.128, rel=1e-12)
    assert lim.baseline == 5


@pytest.mark.parametrize(
    "values,rule,index",
    [
        # Nelson (1984) tests, constructed series (σ = 1, centre 0)
        ([0, 0.5, -0.5, 3.2], "1", 3),
        ([0.5] * 9, "2", 8),
        ([-1.0, -0.8, -0.6, -0.4, -0.2, 0.0], "3", 5),
        ([0.0, 2.5, 0.0, 2.2], "5", 3),
        ([1.5, 0.0, 1.5, 1.5, 1.5], "6", 4),
    ],
)
def test_shewhart_tests_signal_where_they_complete(values, rule, index):
    """closed-form/independent: each test signals first at the point that completes its
    pattern (Nelson 1984, J. Quality Technology 16(4); ISO 7870-2 lists the same tests in an
    annex — from memory), and not before."""
    ch = control_chart(values, LIM, lam=1.0, L=100.0)
    hits = [s.index for s in ch.signals if s.rule == rule]
    assert hits and hits[0] == index


def test_in_control_series_gives_no_signal():
    """closed-form/independent: a series alternating ±0.5σ breaks every test (no run of one
    sign longer than 1, nothing beyond 1σ, no trend)."""
    ch = control_chart([0.5, -0.5] * 10, LIM)
    assert ch.signals == () and not ch.latest_out_of_control


def test_ewma_limits_match_the_series_variance():
    """closed-form/independent: Var(z_i) = σ² λ² Σ_(j<i) (1 − λ)^(2j) for z_0 = μ₀ (Roberts
    1959), summed here term by term; the chart's half-width is L times its square root."""
    lam, L = 0.2, 3.0
    ch = control_chart(np.zeros(12), LIM, lam=lam, L=L)
    for i, hw in enumerate(ch.ewma_halfwidth, start=1):
        var = lam**2 * sum((1 - lam) ** (2 * j) for j in range(i))
        assert hw == pytest.approx(L * math.sqrt(var), rel=1e-12)


def test_ewma_recursion():
    """closed-form/independent: z_i = λ x_i + (1 − λ) z_(i−1), z_0 = μ₀ (ISO 7870-6:2016),
    written as the weighted sum Σ λ (1 − λ)^(i−j) x_j + (1 − λ)^i μ₀."""
    x = np.array([0.3, -1.2, 0.8, 2.0, 0.1])
    lam = 0.3
    ch = control_chart(x, ChartLimits(0.5, 1.0, "stated"), lam=lam)
    for i in range(x.size):
        expect = sum(lam * (1 - lam) ** (i - j) * x[j] for j in range(i + 1))
        expect += (1 - lam) ** (i + 1) * 0.5
        assert ch.ewma[i] == pytest.approx(expect, rel=1e-12)


def test_shifted_standard_is_flagged_at_the_first_point_beyond_the_limits():
    """closed-form/independent: 20 in-control results of N(0.47, 0.002²) then a 4σ shift;
    limits from the first 10. The first out-of-control point is the first result after the
    shift that lies beyond centre ± 3σ (checked against the limits directly), and nothing
    before the shift is flagged by test 1."""
    rng = np.random.default_rng(7)
    x = 0.47 + 0.002 * rng.standard_normal(30)
    x[20:] += 0.008
    lim = limits_from_baseline(x, 10)
    ch = control_chart(x, lim)
    beyond = [i for i, v in enumerate(x) if abs(v - lim.centre) > 3 * lim.sigma]
    assert beyond[0] >= 20
    first_1 = min(s.index for s in ch.signals if s.rule == "1")
    assert first_1 == beyond[0]
    assert min(ch.out_of_control) >= 20
    assert ch.latest_out_of_control


def test_bad_inputs():
    """regression: bad input names the argument, the value and the fix."""
    with pytest.raises(ValueError) as e:
        ChartLimits(0.47, 0.0, "stated")
    assert str(e.value) == (
        "sigma: must be > 0, got 0.0; give the check standard's standard deviation, or "
        "estimate it from more results."
    )
    with pytest.raises(ValueError) as e:
        limits_from_baseline([0.47, 0.48], 5)
    assert str(e.value) == (
        "baseline: 5 results asked for, but only 2 on record; give a smaller --baseline or "
        "state --centre and --sigma."
    )
    with pytest.raises(ValueError) as e:
        limits_from_baseline([0.47, 0.47, 0.47], 3)
    assert str(e.value) == (
        "baseline: the first 3 results are all equal (0.47); no spread to set limits from: "
        "state --centre and --sigma."
    )
    with pytest.raises(ValueError) as e:
        control_chart([0.47], LIM, lam=1.5)
    assert str(e.value) == "lambda: the EWMA weight must be in (0, 1], got 1.5; e.g. 0.2."
