"""Tests of fitdrag.fit.compare: model choice between drag models, with and without lift.

The synthetic throws come from an independent scipy ``solve_ivp`` integration written out
here (not from fitdrag's simulator); scenario: an invented test lab's 40 mm, 2.7 g training
ball and a 10 mm, 0.5 g bead (synthetic).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats
from scipy.integrate import solve_ivp

from fitdrag.fit.compare import compare_models, drag_coefficient_at
from fitdrag.fit.fitting import fit_tracks
from fitdrag.physics.air import Air
from fitdrag.physics.forces import Conditions
from fitdrag.physics.simulate import Launch, simulate
from fitdrag.physics.specimen import Sphere
from fitdrag.tracks.track import Track

AIR = Air(density=1.20, viscosity=1.81e-5)
BALL = Sphere(mass=0.0027, diameter=0.040)
G = 9.80665


def morrison_2013(re):
    """Morrison (2013, An Introduction to Fluid Mechanics, eq. 8.83), written out here."""
    return (
        24 / re
        + 2.6 * (re / 5) / (1 + (re / 5) ** 1.52)
        + 0.411 * (re / 263000) ** -7.94 / (1 + (re / 263000) ** -8)
        + 0.25 * (re / 1e6) / (1 + re / 1e6)
    )


def reference_flight(t, launch, cd_of_re, specimen=BALL, cl=0.0, wind=0.0):
    """Independent solve_ivp (DOP853) integration of
    (m + ½ ρ V) dv/dt = (m − ρ V) g − ½ ρ A |u| (C_d u − C_L P u), u = v − w, P u = (−u_y, u_x)
    (Timmerman & van der Weele, Am. J. Phys. 67, 1999, with lift ⟂ u)."""
    m, d, rho, mu = specimen.mass, specimen.diameter, AIR.density, AIR.viscosity
    vol, area = math.pi * d**3 / 6, math.pi * d**2 / 4
    m_eff = m + 0.5 * rho * vol

    def rhs(_t, s):
        ux, uy = s[2] - wind, s[3]
        q = math.hypot(ux, uy)
        cd = cd_of_re(rho * q * d / mu)
        f = 0.5 * rho * area * q
        return [
            s[2],
            s[3],
            -f * (cd * ux + cl * uy) / m_eff,
            (-(m - rho * vol) * G - f * (cd * uy - cl * ux)) / m_eff,
        ]

    sol = solve_ivp(rhs, (t[0], t[-1]), launch.as_array(), method="DOP853", t_eval=t,
                    rtol=1e-11, atol=1e-11)  # fmt: skip
    assert sol.success
    return sol.y[0], sol.y[1]


def noisy_track(t, x, y, sigma, seed):
    rng = np.random.default_rng(seed)
    return Track(t, x + rng.normal(0, sigma, t.size), y + rng.normal(0, sigma, t.size))


T = np.arange(0.0, 0.8, 1 / 250)
LAUNCH = Launch.from_speed_angle(14.0, 35.0, y0=1.0)
SIGMA = 1e-3


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_constant_cd_flight_not_labelled_re_dependent(seed):
    """closed-form/independent: a constant-Cd flight (solve_ivp) is recommended as constant
    and the power-law exponent is consistent with 0."""
    x, y = reference_flight(T, LAUNCH, lambda re: 0.45)
    cmp = compare_models(noisy_track(T, x, y, SIGMA, seed), BALL, AIR)
    assert cmp.recommended == "constant", cmp.table()
    assert cmp.recommendation.startswith("The data support a constant Cd; Re-dependence not "
                                         "detectable over Re ")  # fmt: skip
    n, un = cmp.candidate("power-law").fit.parameter("exponent")
    assert abs(n) < 3 * un
    cd, ucd = cmp.candidate("constant").fit.parameter("cd")
    assert abs(cd - 0.45) < 3 * ucd
    test = cmp.test("constant", "power-law")
    assert test is not None and test.p_value > cmp.alpha


def test_strong_re_dependence_detected():
    """closed-form/independent: Cd = 0.5 (Re/3e4)^-0.4 data are recommended as power-law and
    the exponent and Cd_ref are recovered within 3 standard uncertainties."""
    law = lambda re: 0.5 * (re / 3.0e4) ** -0.4  # noqa: E731
    x, y = reference_flight(T, LAUNCH, law)
    cmp = compare_models(noisy_track(T, x, y, SIGMA, 7), BALL, AIR)
    assert cmp.recommended == "power-law", cmp.table()
    assert cmp.recommendation.startswith("The data show a Reynolds-number dependence of Cd")
    fit = cmp.candidate("power-law").fit
    n, un = fit.parameter("exponent")
    assert abs(n + 0.4) < 3 * un
    c, uc = fit.parameter("cd_ref")
    assert abs(c - law(fit.constants[0])) < 3 * uc
    assert cmp.test("constant", "power-law").p_value < 1e-6
    # the constant Cd misses these data: reduced chi-square well above 1
    assert cmp.candidate("constant").reduced_chi_square > 3.0
    assert cmp.candidate("power-law").reduced_chi_square == pytest.approx(1.0, abs=0.2)


def test_sphere_curve_recommended_for_a_scaled_sphere_flight():
    """closed-form/independent: a 10 mm bead whose Cd is 1.2 × Morrison (2013) over
    Re ≈ 3800–6000 (where the smooth-sphere curve varies by about 1 %) is recommended as
    sphere-scaled, with the scale recovered within 3 u."""
    bead = Sphere(mass=0.0005, diameter=0.010)
    t = np.arange(0.0, 0.6, 1 / 500)
    launch = Launch.from_speed_angle(9.0, 40.0)
    x, y = reference_flight(t, launch, lambda re: 1.2 * morrison_2013(re), specimen=bead)
    cmp = compare_models(noisy_track(t, x, y, 2e-4, 3), bead, AIR)
    assert cmp.recommended == "sphere-scaled", cmp.table()
    s, us = cmp.candidate("sphere-scaled").fit.parameter("scale")
    assert abs(s - 1.2) < 3 * us
    assert cmp.candidate("sphere-scaled").delta_aic == 0.0
    assert cmp.candidate("constant").aic - cmp.candidate("sphere-scaled").aic > cmp.aic_margin


def test_backspin_flies_higher_and_lift_is_recovered():
    """closed-form/independent: with C_L = 0.15 (backspin) the flight's apex is measurably
    higher than without (fitdrag's simulator and the solve_ivp reference agree), and the
    fitted C_L recovers the truth within 3 u; compare_models detects the lift."""
    cond = Conditions(AIR)
    no_spin = simulate(T, LAUNCH, BALL, cond, drag_params=(0.45,))
    spin = simulate(T, LAUNCH, BALL, cond, drag_params=(0.45,), lift_coefficient=0.15)
    x_ref, y_ref = reference_flight(T, LAUNCH, lambda re: 0.45, cl=0.15)
    np.testing.assert_allclose(spin.y, y_ref, atol=1e-6)
    np.testing.assert_allclose(spin.x, x_ref, atol=1e-6)
    assert spin.y.max() - no_spin.y.max() > 0.05  # 5 cm, fifty times the 1 mm noise
    tr = noisy_track(T, x_ref, y_ref, SIGMA, 11)
    fit = fit_tracks(tr, BALL, AIR, lift=True)
    cl, ucl = fit.parameter("lift_coefficient")
    assert abs(cl - 0.15) < 3 * ucl
    cd, ucd = fit.parameter("cd")
    assert abs(cd - 0.45) < 3 * ucd
    cmp = compare_models(tr, BALL, AIR, models=("constant", "power-law"), lift="both")
    assert cmp.recommended == "constant + lift", cmp.table()
    assert "lift detected: C_L = " in cmp.recommendation


def test_no_lift_on_a_spinless_flight():
    """closed-form/independent: without spin the lift candidate is not recommended."""
    x, y = reference_flight(T, LAUNCH, lambda re: 0.45)
    cmp = compare_models(noisy_track(T, x, y, SIGMA, 5), BALL, AIR, models=("constant",),
                         lift="both")  # fmt: skip
    assert cmp.recommended == "constant"
    assert "no lift detectable (C_L = " in cmp.recommendation
    assert cmp.test("constant", "constant + lift").p_value > cmp.alpha


def test_f_test_and_information_criteria_from_residuals():
    """closed-form/independent: with white noise the F statistic, its p-value (scipy F
    distribution) and AIC/BIC agree with the textbook formulas evaluated here from the
    residuals (Seber & Wild 1989 §5.3; Akaike 1974; Schwarz 1978)."""
    x, y = reference_flight(T, LAUNCH, lambda re: 0.45)
    cmp = compare_models(noisy_track(T, x, y, SIGMA, 9), BALL, AIR,
                         models=("constant", "power-law"), noise="white")  # fmt: skip
    assert cmp.noise_model == "white"
    c, p = cmp.candidate("constant"), cmp.candidate("power-law")

    def groups(fit):
        th = fit.throws[0]
        return [th.residual_x[th.used], th.residual_y[th.used]]

    n_res = sum(r.size for r in groups(c.fit))
    # log-likelihood with each axis' variance at its ML value
    for cand in (c, p):
        ll = sum(
            -0.5 * r.size * (math.log(2 * math.pi * np.mean(r**2)) + 1) for r in groups(cand.fit)
        )
        k = len(cand.fit.values) + 2
        assert cand.aic == pytest.approx(-2 * ll + 2 * k, rel=1e-12)
        assert cand.bic == pytest.approx(-2 * ll + k * math.log(n_res), rel=1e-12)
    # F-test weighted with the fuller fit's per-axis noise
    s2 = [np.mean(r**2) for r in groups(p.fit)]
    rss_f = sum(np.sum(r**2) / v for r, v in zip(groups(p.fit), s2))
    rss_r = sum(np.sum(r**2) / v for r, v in zip(groups(c.fit), s2))
    df2 = n_res - len(p.fit.values)
    f = (rss_r - rss_f) / (rss_f / df2)
    t = cmp.test("constant", "power-law")
    assert t.f_statistic == pytest.approx(max(f, 0.0), rel=1e-9, abs=1e-12)
    assert t.p_value == pytest.approx(stats.f.sf(max(f, 0.0), 1, df2), rel=1e-9)


def test_sphere_scaled_refused_beyond_the_drag_crisis():
    """published-value: a 120 mm ball at 34 m/s reaches Re ≈ 2.7e5, inside the drag crisis
    of a smooth sphere (Achenbach, J. Fluid Mech. 54, 1972); sphere-scaled is not fitted and
    says why."""
    ball = Sphere(mass=0.30, diameter=0.12)
    t = np.arange(0.0, 0.5, 1 / 250)
    launch = Launch.from_speed_angle(34.0, 20.0)
    x, y = reference_flight(t, launch, lambda re: 0.3, specimen=ball)
    cmp = compare_models(noisy_track(t, x, y, SIGMA, 1), ball, AIR,
                         models=("constant", "sphere-scaled"))  # fmt: skip
    sph = cmp.candidate("sphere-scaled")
    assert not sph.applicable and sph.fit is None
    assert "outside the model's validity Re 0–2e+05" in sph.note
    assert cmp.recommended == "constant"
    assert "sphere-scaled not applicable: drag model 'sphere-scaled': the flight spans Re" in (
        cmp.recommendation
    )
    assert "not fitted: drag model 'sphere-scaled'" in cmp.table()


def test_drag_coefficient_at_stated_reynolds_numbers():
    """closed-form/independent: Cd(Re) of a power-law fit equals C_ref (Re/Re_ref)^n with the
    uncertainty propagated by hand (JCGM 100:2008 eq. 13); a constant fit is flat."""
    law = lambda re: 0.5 * (re / 3.0e4) ** -0.3  # noqa: E731
    x, y = reference_flight(T, LAUNCH, law)
    fit = fit_tracks(noisy_track(T, x, y, SIGMA, 4), BALL, AIR, model="power-law")
    re = np.array([1.5e4, fit.constants[0], 3.5e4])
    cd, u = drag_coefficient_at(fit, re)
    c, n = fit.parameter("cd_ref")[0], fit.parameter("exponent")[0]
    i, j = fit.parameter_names.index("cd_ref"), fit.parameter_names.index("exponent")
    cov = fit.covariance[np.ix_([i, j], [i, j])]
    for k, r in enumerate(re):
        x_ = r / fit.constants[0]
        g = np.array([x_**n, c * x_**n * math.log(x_)])
        assert cd[k] == pytest.approx(c * x_**n, rel=1e-12)
        assert u[k] == pytest.approx(math.sqrt(g @ cov @ g), rel=1e-9)
    assert u[1] == pytest.approx(fit.parameter("cd_ref")[1], rel=1e-9)
    const = fit_tracks(noisy_track(T, x, y, SIGMA, 4), BALL, AIR)
    cd_c, u_c = drag_coefficient_at(const, re)
    np.testing.assert_allclose(cd_c, const.cd)
    np.testing.assert_allclose(u_c, const.u_cd)
    with pytest.raises(ValueError, match=r"^re: Reynolds numbers must be finite and > 0"):
        drag_coefficient_at(const, [0.0])


def test_comparison_dict_and_table():
    """regression: the JSON-ready dictionary and the table hold every candidate."""
    x, y = reference_flight(T, LAUNCH, lambda re: 0.45)
    cmp = compare_models(
        noisy_track(T, x, y, SIGMA, 0), BALL, AIR, models=("constant", "power-law")
    )
    d = cmp.to_dict()
    assert d["recommended"] == "constant"
    assert [c["label"] for c in d["candidates"]] == ["constant", "power-law"]
    pl = d["candidates"][1]
    assert set(pl["parameters"]) == {"cd_ref", "exponent", "re_ref"}
    assert pl["parameters"]["re_ref"]["fixed"] is True
    assert d["nested_tests"][0]["simpler"] == "constant"
    assert d["reynolds_number"]["min"] < d["reynolds_number"]["max"]
    table = cmp.table()
    assert table.splitlines()[2].startswith("*constant")
    assert "constant vs power-law: F(1, " in table


def test_bad_options():
    """regression: exact error messages for bad comparison options."""
    tr = Track(T[:20], T[:20], T[:20])
    with pytest.raises(ValueError, match=r"^lift: expected True, False or 'both', got 'maybe'\.$"):
        compare_models(tr, BALL, AIR, lift="maybe")
    with pytest.raises(ValueError, match=r"^alpha: must be between 0 and 1, got 0"):
        compare_models(tr, BALL, AIR, alpha=0)
    with pytest.raises(ValueError, match=r"^models: no candidate model given"):
        compare_models(tr, BALL, AIR, models=())
    with pytest.raises(ValueError, match=r"^models: names repeat in \['constant', 'constant'\]"):
        compare_models(tr, BALL, AIR, models=("constant", "constant"))
    with pytest.raises(ValueError, match=r"^drag model: unknown name 'cubic'; valid names: "):
        compare_models(tr, BALL, AIR, models=("cubic",))
