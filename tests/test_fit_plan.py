"""Tests of fitdrag.fit.plan: the Cramér–Rao prediction of u(Cd) for a planned test.

Oracle: an independent Fisher information built here from central finite differences of a
scipy ``solve_ivp`` integration (not fitdrag's simulator or its sensitivities), and fits of
replicate synthetic throws.  Scenario: an invented lab's 40 mm, 2.7 g training ball
(synthetic).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from fitdrag.fit.fitting import fit_tracks
from fitdrag.fit.plan import fisher_information, plan_test
from fitdrag.physics.air import Air
from fitdrag.physics.forces import Conditions
from fitdrag.physics.simulate import Launch
from fitdrag.physics.specimen import Sphere
from fitdrag.tracks.track import Track

AIR = Air(density=1.20, viscosity=1.81e-5)
BALL = Sphere(mass=0.0027, diameter=0.040)
COND = Conditions(AIR)
LAUNCH = Launch.from_speed_angle(12.0, 30.0, y0=1.0)
FPS, FRAMES, NOISE = 200.0, 120, 1e-3
G = 9.80665


def reference_positions(theta, t, law="constant", re_ref=3.0e4):
    """solve_ivp (DOP853) of (m + ½ρV) dv/dt = (m − ρV) g − ½ ρ A |u| (C_d u − C_L P u)
    (Timmerman & van der Weele, Am. J. Phys. 67, 1999); θ = (x0, y0, vx0, vy0, drag…[, C_L])."""
    m, d, rho, mu = BALL.mass, BALL.diameter, AIR.density, AIR.viscosity
    vol, area = math.pi * d**3 / 6, math.pi * d**2 / 4
    m_eff = m + 0.5 * rho * vol
    if law == "constant":
        cd_of = lambda re: theta[4]  # noqa: E731
        cl = theta[5] if len(theta) > 5 else 0.0
    else:
        cd_of = lambda re: theta[4] * (re / re_ref) ** theta[5]  # noqa: E731
        cl = 0.0

    def rhs(_t, s):
        ux, uy = s[2], s[3]
        q = math.hypot(ux, uy)
        cd = cd_of(rho * q * d / mu)
        f = 0.5 * rho * area * q
        return [s[2], s[3], -f * (cd * ux + cl * uy) / m_eff,
                (-(m - rho * vol) * G - f * (cd * uy - cl * ux)) / m_eff]  # fmt: skip

    sol = solve_ivp(rhs, (t[0], t[-1]), theta[:4], method="DOP853", t_eval=t, rtol=1e-12,
                    atol=1e-12)  # fmt: skip
    assert sol.success
    return np.concatenate((sol.y[0], sol.y[1])), sol.y[2], sol.y[3]


def fd_jacobian(theta, t, **kw):
    """Central differences of the reference positions (x stacked over y) in each parameter."""
    theta = np.asarray(theta, float)
    cols = []
    for j in range(theta.size):
        h = 1e-5 * max(abs(theta[j]), 1.0)
        up, dn = theta.copy(), theta.copy()
        up[j] += h
        dn[j] -= h
        cols.append(
            (reference_positions(up, t, **kw)[0] - reference_positions(dn, t, **kw)[0]) / (2 * h)
        )
    return np.column_stack(cols)


T = np.arange(FRAMES) / FPS
THETA = np.r_[LAUNCH.as_array(), 0.45]


def test_fisher_matches_independent_finite_differences_white():
    """closed-form/independent: planner's J^T J/σ² (simulator sensitivities) against the
    Fisher information from central differences of a solve_ivp integration (Kay 1993 eq.
    3.31); u(Cd) within 0.1 %."""
    names, info, _ = fisher_information(T, BALL, COND, LAUNCH, drag_params=(0.45,), noise=NOISE)
    assert names == ("x0", "y0", "vx0", "vy0", "cd")
    j = fd_jacobian(THETA, T)
    info_ref = j.T @ j / NOISE**2
    cov, cov_ref = np.linalg.inv(info), np.linalg.inv(info_ref)
    np.testing.assert_allclose(np.sqrt(np.diag(cov)), np.sqrt(np.diag(cov_ref)), rtol=1e-3)
    plan = plan_test(BALL, COND, LAUNCH, fps=FPS, frames=FRAMES, noise=NOISE, drag_params=(0.45,))
    assert plan.u_cd == pytest.approx(math.sqrt(cov_ref[4, 4]), rel=1e-3)
    assert plan.u_cd_per_throw == plan.u_cd


def test_fisher_with_ar1_noise_and_lift_matches_explicit_covariance():
    """closed-form/independent: AR(1) noise Σ_ij = σ² φ^|i−j| and a fitted lift coefficient;
    the planner's Prais–Winsten form equals J^T Σ⁻¹ J with Σ built and solved explicitly."""
    phi = 0.6
    theta = np.r_[THETA, 0.1]
    names, info, _ = fisher_information(T, BALL, COND, LAUNCH, drag_params=(0.45,),
                                        lift_coefficient=0.1, fit_lift=True, noise=NOISE,
                                        ar1=phi)  # fmt: skip
    assert names[-1] == "lift_coefficient"
    j = fd_jacobian(theta, T)
    n = T.size
    idx = np.arange(n)
    sig = NOISE**2 * phi ** np.abs(idx[:, None] - idx[None, :])
    info_ref = np.zeros_like(info)
    for axis in (0, 1):
        ja = j[axis * n : (axis + 1) * n]
        info_ref += ja.T @ np.linalg.solve(sig, ja)
    cov, cov_ref = np.linalg.inv(info), np.linalg.inv(info_ref)
    np.testing.assert_allclose(np.sqrt(np.diag(cov)), np.sqrt(np.diag(cov_ref)), rtol=1e-3)
    plan = plan_test(BALL, COND, LAUNCH, fps=FPS, frames=FRAMES, noise=NOISE, drag_params=(0.45,),
                     lift_coefficient=0.1, fit_lift=True, ar1=phi)  # fmt: skip
    assert plan.u_cd == pytest.approx(math.sqrt(cov_ref[4, 4]), rel=1e-3)


def test_several_throws_share_cd():
    """closed-form/independent: three throws, each with its own launch state and one shared
    Cd; the full block Fisher matrix assembled and inverted here gives u(Cd) = u_1/√3."""
    j = fd_jacobian(THETA, T)
    n_thr = 3
    big = np.zeros((2 * T.size * n_thr, 1 + 4 * n_thr))
    for i in range(n_thr):
        rows = slice(i * 2 * T.size, (i + 1) * 2 * T.size)
        big[rows, 0] = j[:, 4]
        big[rows, 1 + 4 * i : 5 + 4 * i] = j[:, :4]
    u_ref = math.sqrt(np.linalg.inv(big.T @ big / NOISE**2)[0, 0])
    plan = plan_test(BALL, COND, LAUNCH, fps=FPS, frames=FRAMES, noise=NOISE, throws=3,
                     drag_params=(0.45,))  # fmt: skip
    assert plan.u_cd == pytest.approx(u_ref, rel=1e-3)
    assert plan.u_cd == pytest.approx(plan.u_cd_per_throw / math.sqrt(3), rel=1e-12)


def test_power_law_plan_propagates_to_cd_at_median_re():
    """closed-form/independent: for the power law, u(Cd) at the flight's median Re from the
    finite-difference Fisher matrix and the gradient of C_ref (Re/Re_ref)^n (GUM eq. 13)."""
    dp = (0.5, -0.3, 3.0e4)
    theta = np.r_[LAUNCH.as_array(), dp[:2]]
    j = fd_jacobian(theta, T, law="power-law", re_ref=dp[2])
    cov_ref = np.linalg.inv(j.T @ j / NOISE**2)
    _, vx, vy = reference_positions(theta, T, law="power-law", re_ref=dp[2])
    re_med = float(np.median(AIR.density * np.hypot(vx, vy) * BALL.diameter / AIR.viscosity))
    x = re_med / dp[2]
    g = np.zeros(6)
    g[4], g[5] = x ** dp[1], dp[0] * x ** dp[1] * math.log(x)
    plan = plan_test(BALL, COND, LAUNCH, fps=FPS, frames=FRAMES, noise=NOISE, model="power-law",
                     drag_params=dp)  # fmt: skip
    assert plan.cd == pytest.approx(dp[0] * x ** dp[1], rel=1e-6)
    assert plan.u_cd == pytest.approx(math.sqrt(g @ cov_ref @ g), rel=2e-3)


def test_planner_agrees_with_achieved_uncertainty_of_fits():
    """closed-form/independent: 25 replicate throws (solve_ivp positions + white noise of the
    planned σ) fitted with fit_tracks' defaults: the mean reported u(Cd) agrees with the plan
    within 15 % (issue target), and the scatter of the fitted Cd within 40 % (25 replicates
    give the scatter only to about ±14 %)."""
    pos = reference_positions(THETA, T)[0]
    plan = plan_test(BALL, COND, LAUNCH, fps=FPS, frames=FRAMES, noise=NOISE, drag_params=(0.45,))
    rng = np.random.default_rng(2024)
    cds, us = [], []
    for _ in range(25):
        noisy = pos + rng.normal(0.0, NOISE, pos.size)
        fit = fit_tracks(Track(T, noisy[: T.size], noisy[T.size :]), BALL, AIR)
        assert fit.success
        cds.append(fit.cd)
        us.append(fit.u_cd)
    assert np.mean(us) / plan.u_cd == pytest.approx(1.0, abs=0.15)
    assert np.std(cds, ddof=1) / plan.u_cd == pytest.approx(1.0, abs=0.40)


def test_target_answers_are_consistent():
    """closed-form/independent: throws needed = ceil((u_1/target)²) and the frame rate found
    reaches the target over the same time in view while 2 % less does not."""
    p = plan_test(BALL, COND, LAUNCH, fps=FPS, frames=FRAMES, noise=NOISE, throws=2,
                  drag_params=(0.45,))  # fmt: skip
    target = p.u_cd / 2.5
    q = plan_test(BALL, COND, LAUNCH, fps=FPS, frames=FRAMES, noise=NOISE, throws=2,
                  drag_params=(0.45,), target=target)  # fmt: skip
    assert q.throws_needed == math.ceil((q.u_cd_per_throw / target) ** 2)
    dur = (FRAMES - 1) / FPS
    assert q.frames_needed == math.floor(dur * q.fps_needed + 1e-9) + 1
    at = plan_test(BALL, COND, LAUNCH, fps=q.fps_needed, frames=q.frames_needed, noise=NOISE,
                   throws=2, drag_params=(0.45,))  # fmt: skip
    assert at.u_cd <= target
    f_lo = q.fps_needed / 1.02
    below = plan_test(BALL, COND, LAUNCH, fps=f_lo, frames=math.floor(dur * f_lo + 1e-9) + 1,
                      noise=NOISE, throws=2, drag_params=(0.45,))  # fmt: skip
    assert below.u_cd > target
    # white noise: u ∝ 1/√(frames) roughly, so about 2.5² = 6.25 times the frame rate
    assert 5.0 < q.fps_needed / FPS < 7.5
    assert f"To reach u(Cd) = {target:.2g}: {q.throws_needed} throws at 200 frames/s" in q.message
    met = plan_test(BALL, COND, LAUNCH, fps=FPS, frames=FRAMES, noise=NOISE, drag_params=(0.45,),
                    target=10 * p.u_cd)  # fmt: skip
    assert met.throws_needed == 1 and met.fps_needed == FPS
    assert "is met" in met.message


def test_plan_dict():
    """regression: the JSON-ready dictionary carries the prediction."""
    p = plan_test(BALL, COND, LAUNCH, fps=FPS, frames=FRAMES, noise=NOISE, throws=4,
                  drag_params=(0.45,), target=1e-4)  # fmt: skip
    d = p.to_dict()
    assert d["drag_coefficient"]["standard_uncertainty"] == p.u_cd
    assert d["drag_coefficient"]["per_throw_standard_uncertainty"] == p.u_cd_per_throw
    assert d["throws"] == 4 and d["camera"]["frames"] == FRAMES
    assert d["target"]["throws_needed"] == p.throws_needed
    assert set(d["parameters_per_throw"]) == {"x0", "y0", "vx0", "vy0", "cd"}


def test_weak_drag_flagged():
    """regression: a heavy specimen on a short flight is reported as not measurable."""
    steel = Sphere(mass=0.25, diameter=0.040)
    p = plan_test(steel, COND, Launch.from_speed_angle(3.0, 45.0), fps=100, frames=20,
                  noise=2e-3, drag_params=(0.45,))  # fmt: skip
    assert p.u_cd / p.cd > 0.25
    assert "DRAG NOT MEASURABLE with this plan" in p.message


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"fps": 0}, r"^fps: must be a finite number > 0 Hz, got 0; give the camera frame rate\."),
        ({"noise": -1e-3}, r"^noise: must be a finite number > 0 m, got -0\.001"),
        ({"frames": 5}, r"^frames: need a whole number of at least 8 frames in view, got 5"),
        ({"throws": 0}, r"^throws: need a whole number >= 1, got 0\.$"),
        ({"ar1": 1.0}, r"^ar1: the lag-1 noise correlation must lie strictly between -1 and 1"),
        ({"target": 0.0}, r"^target: must be a finite number > 0"),
        ({"drag_params": (0.5, 0.1)}, r"^drag_params: model 'constant' takes 1 value\(s\)"),
    ],
)
def test_bad_input(kwargs, message):
    """regression: exact error messages for bad planning inputs."""
    base = dict(fps=FPS, frames=FRAMES, noise=NOISE, drag_params=(0.45,))
    base.update(kwargs)
    with pytest.raises(ValueError, match=message):
        plan_test(BALL, COND, LAUNCH, **base)
