"""Tests of fitdrag.fit.problem: the fit's least-squares problem (parameter and residual
layout, residuals, exact Jacobian, prewhitening) and the drag-free start.

Truth comes from the independent integration of tests/reference.py (scipy solve_ivp DOP853
at rtol = atol = 1e-12), never from fitdrag's own simulator.

Labels: closed-form/independent, regression.
"""

from __future__ import annotations

import functools

import numpy as np
import pytest
import reference as ref

from fitdrag import Air, Sphere, Track
from fitdrag.fit.noise import prais_winsten
from fitdrag.fit.problem import Problem, initial_launch
from fitdrag.physics.forces import Conditions
from fitdrag.physics.registry import get_drag_model

SC = ref.Scenario(n=120)  # synthetic: 40 mm, 2.7 g training ball, Cd 0.47, 400 Hz


@functools.cache
def truth() -> np.ndarray:
    return SC.truth()


def problem_for(track: Track) -> Problem:
    air = Air(ref.RHO, ref.MU)
    p = Problem([track], Sphere(SC.mass, SC.diameter), Conditions(air=air),
                get_drag_model("constant"), (), False)  # fmt: skip
    p.names = ["cd", "x0_1", "y0_1", "vx0_1", "vy0_1"]
    p.bounds = [(0.0, 50.0)] + [(-np.inf, np.inf)] * 4
    return p


def test_residuals_vanish_at_the_true_parameters():
    """closed-form/independent: on a noise-free track from scipy DOP853, the residuals at the
    true θ = (Cd, x0, y0, vx0, vy0) (shared parameter first, then the launch state) are the
    difference of two integrations of the same equation, below 1e-7 m."""
    xy = truth()
    p = problem_for(Track(SC.t, xy[:, 0], xy[:, 1]))
    res, jac, _sims, ok = p.evaluate(SC.theta)
    assert ok and res.shape == (2 * SC.n,) and jac.shape == (2 * SC.n, 5)
    assert np.max(np.abs(res)) < 1e-7


def test_jacobian_matches_reference_finite_differences():
    """closed-form/independent: with unit weights the Jacobian of the residuals is minus the
    Jacobian of the positions (x block, then y block); compared with central differences of
    the scipy DOP853 reference (tests/reference.py fd_jacobian) to 1e-5 of each column's size."""
    xy = truth()
    p = problem_for(Track(SC.t, xy[:, 0], xy[:, 1]))
    jac = p.evaluate(SC.theta)[1]
    expected = -ref.fd_jacobian(SC.theta, SC.t, SC.body, ref.RHO)
    scale = np.max(np.abs(expected), axis=0)
    assert np.max(np.abs(jac - expected) / scale) < 1e-5


def test_weights_mask_and_prewhitening_layout():
    """closed-form/independent: with a rejected frame, noise levels (σx, σy) and AR(1)
    coefficients (φx, φy), the residual vector is, per axis, the Prais–Winsten transform
    (with the frame gap of 2 where the frame was dropped) of (observed − truth)/σ, the truth
    taken from scipy DOP853 and the observed track a known offset from it."""
    xy = truth()
    ox = 1e-3 * np.sin(np.arange(SC.n))
    oy = 2e-3 * np.cos(np.arange(SC.n))
    p = problem_for(Track(SC.t, xy[:, 0] + ox, xy[:, 1] + oy))
    mask = np.ones(SC.n, bool)
    mask[10] = False
    sig = np.column_stack((np.full(SC.n, 1e-3), np.full(SC.n, 2e-3)))
    p.set_state(masks=[mask], sigmas=[sig], phi=(0.6, -0.3))
    res = p.evaluate(SC.theta)[0]
    gaps = np.ones(SC.n - 2, int)
    gaps[9] = 2
    ex = prais_winsten(ox[mask] / 1e-3, gaps, 0.6)
    ey = prais_winsten(oy[mask] / 2e-3, gaps, -0.3)
    np.testing.assert_allclose(res, np.concatenate((ex, ey)), atol=1e-4)
    assert p.n_resid == 2 * (SC.n - 1)


def test_reml_ar1_leaves_the_problem_state_unchanged():
    """regression: estimating φ evaluates the unwhitened problem but restores the problem's
    own coefficients afterwards."""
    xy = truth()
    p = problem_for(Track(SC.t, xy[:, 0], xy[:, 1] + 1e-3 * np.sin(np.arange(SC.n))))
    p.set_state(phi=(0.2, 0.1))
    phi = p.reml_ar1(SC.theta)
    assert p.phi == (0.2, 0.1)
    assert all(-0.98 <= f <= 0.98 for f in phi)


def test_initial_launch_exact_for_a_drag_free_parabola():
    """closed-form/independent: for x = x0 + vx0 t, y = y0 + vy0 t − g t²/2 (no drag) the
    quadratic through the first samples returns the launch state exactly."""
    t = np.arange(50) / 100.0
    g = 9.80665
    tr = Track(t, 0.3 + 6.0 * t, 1.2 + 4.0 * t - 0.5 * g * t**2)
    np.testing.assert_allclose(initial_launch(tr, g), [0.3, 1.2, 6.0, 4.0], atol=1e-9)


@pytest.mark.parametrize("n", [8, 120, 2000])
def test_initial_launch_equals_numpy_polyfit(n):
    """independent (numpy.polyfit, the reference library): the launch guess is the constant
    and linear coefficient of the quadratic least-squares fit to the first max(8, n/5)
    samples, the same numbers as numpy.polyfit's."""
    rng = np.random.default_rng(n)
    t = 0.25 + np.arange(n) / 500.0
    tr = Track(
        t, 2.0 * t + rng.normal(0.0, 1e-3, n), 1.0 + t - 4.9 * t**2 + rng.normal(0.0, 1e-3, n)
    )
    m = min(n, max(8, n // 5))
    cx = np.polyfit(t[:m] - t[0], tr.x[:m], 2)
    cy = np.polyfit(t[:m] - t[0], tr.y[:m], 2)
    np.testing.assert_array_equal(initial_launch(tr, 9.81), [cx[2], cy[2], cx[1], cy[1]])


@pytest.mark.parametrize("n_throws", [2])
def test_parameter_layout_of_several_throws(n_throws):
    """regression: shared parameters first, then 4 launch-state columns per throw; each
    throw's residual rows depend only on its own launch state."""
    xy = truth()
    tr = Track(SC.t, xy[:, 0], xy[:, 1])
    air = Air(ref.RHO, ref.MU)
    p = Problem([tr] * n_throws, Sphere(SC.mass, SC.diameter), Conditions(air=air),
                get_drag_model("constant"), (), False)  # fmt: skip
    theta = np.concatenate(([SC.cd], SC.launch, SC.launch))
    jac = p.evaluate(theta)[1]
    assert p.n_params == 1 + 4 * n_throws and jac.shape == (2 * SC.n * n_throws, 9)
    assert np.all(jac[: 2 * SC.n, 5:] == 0.0) and np.all(jac[2 * SC.n :, 1:5] == 0.0)
    np.testing.assert_allclose(p.throw_theta(theta, 1), np.concatenate((SC.launch, [SC.cd])))


def test_residual_only_evaluation_matches_the_full_one_under_ar1_and_new_observations():
    """closed-form/independent: the residuals from flights integrated without sensitivities
    (the fixed-Jacobian re-solve's evaluation) equal the full evaluation's, with weights, a
    mask and AR(1) prewhitening, to the integrator's tolerance (1e-5 in noise units, a few
    1e-9 m); after replacing the observations both see the new ones (and the noise-free
    track's residuals vanish, as in test_residuals_vanish_at_the_true_parameters)."""
    xy = truth()
    noisy = xy + np.random.default_rng(2).normal(0.0, SC.sigma, xy.shape)
    p = problem_for(Track(SC.t, noisy[:, 0], noisy[:, 1]))
    mask = np.ones(SC.n, bool)
    mask[[5, 40, 41]] = False
    p.set_state(masks=[mask], sigmas=[np.full((SC.n, 2), SC.sigma)], phi=(0.5, 0.3))
    full = p.evaluate(SC.theta)[0]
    cheap, ok = p.residuals(SC.theta)
    assert ok and np.max(np.abs(cheap - full)) < 1e-5
    p.set_observations(0, xy[:, 0], xy[:, 1])
    p.forget()
    cheap, ok = p.residuals(SC.theta)
    assert ok and np.max(np.abs(cheap)) < 1e-7 / SC.sigma
    assert np.max(np.abs(p.evaluate(SC.theta)[0] - cheap)) < 1e-5
