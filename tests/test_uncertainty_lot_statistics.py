"""Tests of fitdrag.uncertainty.lot_statistics: random-effects spread, tolerance intervals,
fraction outside the specification, the lot decision."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from fitdrag.uncertainty.lot_statistics import (
    SpecimenValue,
    ToleranceInterval,
    decide_lot,
    dersimonian_laird_tau2,
    fraction_outside,
    lot_statistics,
    one_sided_tolerance_factor,
    paule_mandel_tau2,
    q_profile_interval,
    random_effects,
    tolerance_interval,
    two_sided_tolerance_factor,
)

Y = [0.462, 0.471, 0.455, 0.480, 0.468, 0.474, 0.459, 0.466]
V_EQUAL = [0.004**2] * len(Y)
V = [0.004**2, 0.003**2, 0.005**2, 0.004**2, 0.002**2, 0.006**2, 0.003**2, 0.004**2]


def test_equal_variances_closed_form():
    """closed-form/independent: with equal variances v, Q(τ²) = (n − 1) s²/(v + τ²), so the
    Paule–Mandel and DerSimonian–Laird estimates are both max(0, s² − v) (Paule and Mandel
    1982, eq. (9); DerSimonian and Laird 1986, eq. (3)), and the Q-profile bounds are
    (n − 1) s²/χ²_q − v (Viechtbauer 2007, sec. 3.6)."""
    s2 = float(np.var(Y, ddof=1))
    v = V_EQUAL[0]
    assert paule_mandel_tau2(Y, V_EQUAL) == pytest.approx(s2 - v, rel=1e-9)
    assert dersimonian_laird_tau2(Y, V_EQUAL) == pytest.approx(s2 - v, rel=1e-9)
    lo, hi = q_profile_interval(Y, V_EQUAL, 0.95)
    n1 = len(Y) - 1
    assert lo == pytest.approx(max(0.0, n1 * s2 / stats.chi2.ppf(0.975, n1) - v), rel=1e-8)
    assert hi == pytest.approx(n1 * s2 / stats.chi2.ppf(0.025, n1) - v, rel=1e-8)


def test_no_spread_gives_zero():
    """closed-form/independent: values scattering less than their variances explain give
    τ² = 0 with either estimator (truncation at 0, both papers)."""
    y = [0.47, 0.4701, 0.4699, 0.47]
    v = [0.01**2] * 4
    assert paule_mandel_tau2(y, v) == 0.0
    assert dersimonian_laird_tau2(y, v) == 0.0
    re = random_effects(y, v)
    assert re.tau == 0.0 and re.mean == pytest.approx(np.mean(y), rel=1e-12)


def test_dersimonian_laird_by_hand():
    """closed-form/independent: DerSimonian and Laird (1986), eq. (3)–(4), written out with
    numpy."""
    y, v = np.array(Y), np.array(V)
    w = 1 / v
    mu = np.sum(w * y) / np.sum(w)
    q = np.sum(w * (y - mu) ** 2)
    expect = max(0.0, (q - (len(y) - 1)) / (np.sum(w) - np.sum(w**2) / np.sum(w)))
    assert dersimonian_laird_tau2(Y, V) == pytest.approx(expect, rel=1e-12)


def test_paule_mandel_solves_its_equation():
    """closed-form/independent: at the Paule–Mandel τ², Σ (y − μ̂)²/(v + τ²) = n − 1 with μ̂
    the weighted mean (Paule and Mandel 1982, eq. (9)–(11)), evaluated here with numpy."""
    t2 = paule_mandel_tau2(Y, V)
    assert t2 > 0
    w = 1 / (np.array(V) + t2)
    mu = np.sum(w * Y) / np.sum(w)
    assert np.sum(w * (np.array(Y) - mu) ** 2) == pytest.approx(len(Y) - 1, rel=1e-9)
    re = random_effects(Y, V)
    assert re.mean == pytest.approx(mu, rel=1e-12)
    assert re.tau == pytest.approx(math.sqrt(t2), rel=1e-12)
    assert re.tau_interval[0] <= re.tau <= re.tau_interval[1]


def test_random_effects_recovers_spread_monte_carlo():
    """closed-form/independent: over 400 simulated lots (τ = 0.01, v_i known) the mean of
    the Paule–Mandel τ² is within 4 standard errors of τ² (the estimator is close to
    unbiased for τ² well above the v_i: Paule and Mandel 1982), and the 95 % Q-profile
    interval covers τ² in 95 % ± 4.4 % of them (exact coverage: Viechtbauer 2007, sec. 3.6)."""
    rng = np.random.default_rng(20261203)
    tau, v = 0.01, np.array(V)
    est, cover = [], 0
    for _ in range(400):
        y = 0.47 + rng.normal(0, tau, v.size) + rng.normal(0, np.sqrt(v))
        est.append(paule_mandel_tau2(y, v))
        lo, hi = q_profile_interval(y, v, 0.95)
        cover += lo <= tau**2 <= hi
    est = np.array(est)
    assert abs(est.mean() - tau**2) < 4 * est.std() / math.sqrt(est.size)
    assert abs(cover / 400 - 0.95) < 4 * math.sqrt(0.95 * 0.05 / 400)


@pytest.mark.parametrize("n,p,g", [(5, 0.95, 0.95), (10, 0.90, 0.95), (16, 0.95, 0.95)])
def test_two_sided_factor_monte_carlo_coverage(n, p, g):
    """closed-form/independent: the factor's defining property (ISO 16269-6:2014, 3.1):
    x̄ ± k s covers at least the proportion p of N(0, 1) in a fraction γ of samples; checked
    over 200 000 simulated samples (4 standard errors)."""
    k = two_sided_tolerance_factor(n, p, g)
    rng = np.random.default_rng(n)
    x = rng.standard_normal((200_000, n))
    m, s = x.mean(1), x.std(1, ddof=1)
    cov = stats.norm.cdf(m + k * s) - stats.norm.cdf(m - k * s)
    frac = np.mean(cov >= p)
    assert abs(frac - g) < 4 * math.sqrt(g * (1 - g) / x.shape[0])


@pytest.mark.parametrize("n", [20, 40, 100])
def test_two_sided_factor_near_howe_approximation(n):
    """published-value: Howe's approximation k ≈ √(ν (1 + 1/n) z²_((1+p)/2) / χ²_(ν, 1−γ))
    (Howe, W. G. (1969), J. Amer. Statist. Assoc. 64, 610–620, eq. (5)) agrees with the exact
    factor to better than 1 % for n >= 20 (ISO 16269-6:2014, Annex F, notes its accuracy)."""
    nu = n - 1
    z = stats.norm.ppf(0.975)
    howe = math.sqrt(nu * (1 + 1 / n) * z * z / stats.chi2.ppf(0.05, nu))
    assert two_sided_tolerance_factor(n, 0.95, 0.95) == pytest.approx(howe, rel=0.01)


def test_factors_tend_to_normal_quantiles():
    """closed-form/independent: as n grows, x̄ and s tend to μ and σ, so the two-sided factor
    tends to z_((1+p)/2) and the one-sided to z_p (ISO 16269-6:2014, clause 5)."""
    assert two_sided_tolerance_factor(100_000, 0.95, 0.95) == pytest.approx(1.96, abs=0.01)
    assert one_sided_tolerance_factor(100_000, 0.95, 0.95) == pytest.approx(1.645, abs=0.01)


def test_one_sided_factor_monte_carlo_coverage():
    """closed-form/independent: x̄ + k s exceeds the p-quantile of N(0, 1) in a fraction γ of
    samples (ISO 16269-6:2014, 3.1), 200 000 simulated samples of n = 8."""
    k = one_sided_tolerance_factor(8, 0.90, 0.95)
    rng = np.random.default_rng(8)
    x = rng.standard_normal((200_000, 8))
    frac = np.mean(x.mean(1) + k * x.std(1, ddof=1) >= stats.norm.ppf(0.90))
    assert abs(frac - 0.95) < 4 * math.sqrt(0.95 * 0.05 / x.shape[0])


def test_tolerance_interval_bounds():
    """closed-form/independent: the interval is x̄ ± k s with numpy's mean and SD
    (ISO 16269-6:2014, clause 5); a one-sided one has an infinite other bound."""
    ti = tolerance_interval(Y, 0.95, 0.95)
    k = two_sided_tolerance_factor(len(Y))
    m, s = np.mean(Y), np.std(Y, ddof=1)
    assert (ti.low, ti.high) == pytest.approx((m - k * s, m + k * s), rel=1e-12)
    lo = tolerance_interval(Y, 0.95, 0.95, sides="lower")
    assert lo.high == math.inf and lo.low == pytest.approx(
        m - one_sided_tolerance_factor(len(Y)) * s, rel=1e-12
    )


def test_fraction_outside_closed_form():
    """closed-form/independent: Φ((T_L − μ)/σ) + Φ((μ − T_U)/σ) from scipy's normal CDF."""
    f = fraction_outside(0.47, 0.01, 0.45, 0.50)
    assert f == pytest.approx(stats.norm.cdf(-2.0) + stats.norm.cdf(-3.0), rel=1e-12)
    assert fraction_outside(0.47, 0.0, 0.45, 0.50) == 0.0
    assert fraction_outside(0.52, 0.0, 0.45, 0.50) == 1.0
    assert fraction_outside(0.47, 0.01, None, 0.50) == pytest.approx(stats.norm.cdf(-3.0))


def test_shared_part_does_not_shrink_with_count():
    """closed-form/independent: an input shared by every specimen with the same contribution
    c enters the weighted mean with sensitivity Σ w_i = 1, so u(mean) keeps c whatever the
    number of specimens (JCGM 100:2008 eq. (13), r = 1), while the independent part falls as
    1/√n."""
    out = []
    for n in (4, 16):
        sp = [SpecimenValue(f"S{i}", 0.47 + 0.001 * (i % 3), 0.004,
                            {"air_density": 0.003, "gravity": -0.001}) for i in range(n)]  # fmt: skip
        out.append(lot_statistics(sp))
    for st in out:
        assert st.u_mean_shared == pytest.approx(math.hypot(0.003, 0.001), rel=1e-12)
        assert st.shared_contributions["air_density"] == pytest.approx(0.003, rel=1e-12)
    assert out[1].u_mean_independent < 0.6 * out[0].u_mean_independent


def test_lot_statistics_fraction_and_sides():
    """regression: a one-limit specification gives a one-sided interval towards it, and the
    fraction outside is the normal tail beyond the limit at the lot mean and τ."""
    sp = [SpecimenValue(f"S{i}", y, math.sqrt(v)) for i, (y, v) in enumerate(zip(Y, V))]
    st = lot_statistics(sp, lower=0.44)
    assert st.tolerance.sides == 1 and st.tolerance.high == math.inf
    assert st.fraction_outside == pytest.approx(
        stats.norm.cdf((0.44 - st.mean) / st.standard_deviation), rel=1e-12
    )


def _ti(lo, hi):
    return ToleranceInterval(lo, hi, 0.95, 0.95, 3.0, 2, 0.5 * (lo + hi), 0.01, 10)


@pytest.mark.parametrize(
    "lo,hi,rule,decision",
    [
        # limits 0.25 .. 0.75, w = 0.125 (binary fractions: exact) -- ILAC-G8:09/2019 4.2.1-4.2.3
        (0.375, 0.625, "guarded", "pass"),
        (0.375, 0.6875, "guarded", "conditional pass"),
        (0.25, 0.75, "guarded", "conditional pass"),
        (0.25, 0.8125, "guarded", "conditional fail"),
        (0.25, 0.9375, "guarded", "fail"),
        (0.25, 0.75, "simple", "pass"),
        (0.25, 0.8125, "simple", "fail"),
    ],
)
def test_decide_lot(lo, hi, rule, decision):
    """closed-form/independent: constructed intervals against limits 0.25 and 0.75 with guard
    band 0.125: the four outcomes of ILAC-G8:09/2019 4.2.3 (guarded) and the two of 4.2.1
    (simple), a bound on a limit counting as inside (common practice, no source)."""
    v = decide_lot(_ti(lo, hi), 0.25, 0.75, rule, 0.125)
    assert v.decision == decision


def test_bad_inputs():
    """regression: bad input names the argument, the value and the fix."""
    with pytest.raises(ValueError) as e:
        random_effects([0.4], [0.01])
    assert str(e.value) == (
        "values: a lot needs at least 2 specimens for its spread, got 1; add specimens."
    )
    with pytest.raises(ValueError) as e:
        random_effects(Y, V, method="median")
    assert str(e.value) == (
        "method: unknown estimator 'median'; use one of 'paule-mandel', 'dersimonian-laird'."
    )
    with pytest.raises(ValueError) as e:
        two_sided_tolerance_factor(10, 1.2)
    assert str(e.value) == "coverage: must be between 0 and 1, got 1.2; e.g. 0.95."
    with pytest.raises(ValueError) as e:
        lot_statistics([SpecimenValue("A", 0.4, 0.01), SpecimenValue("A", 0.41, 0.01)])
    assert str(e.value) == "specimens: id 'A' appears more than once; give unique ids."
    with pytest.raises(ValueError) as e:
        decide_lot(_ti(0.3, 0.6), None, None)
    assert str(e.value) == "lower, upper: a lot decision needs at least one specification limit."
