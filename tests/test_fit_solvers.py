"""Tests of fitdrag.fit.solvers: each optimiser on a linear least-squares problem against
numpy's ``lstsq`` and scipy's robust ``least_squares``, and lmfit's result kept on a fit.

Labels: closed-form/independent (numpy / scipy / lmfit as the reference), regression.
"""

from __future__ import annotations

import functools
import json

import lmfit
import numpy as np
import pytest
import reference as ref
from scipy.optimize import least_squares

from fitdrag import Air, Sphere, Track, fit_tracks
from fitdrag.fit.solvers import (
    gauss_newton,
    levenberg_marquardt,
    lmfit_stage,
    polish,
    robust_solve,
    trust_region,
)


class LinearProblem:
    """r(θ) = A θ − b, with the attributes the solvers use (a stand-in for fit.problem)."""

    def __init__(self, a, b):
        self.a, self.b = a, b
        self.names = [f"p{j}" for j in range(a.shape[1])]
        self.n_evaluations = 0

    def evaluate(self, theta):
        self.n_evaluations += 1
        return self.a @ np.asarray(theta, float) - self.b, self.a, None, True


def linear_case(outliers: bool = False):
    rng = np.random.default_rng(12)
    t = np.linspace(0.0, 1.0, 60)
    a = np.column_stack((np.ones_like(t), t, t**2))
    b = a @ np.array([1.0, -2.0, 0.5]) + rng.normal(0.0, 1.0, t.size)
    if outliers:
        b[[5, 17, 40]] += 30.0
    return a, b


BOUNDS = [(-np.inf, np.inf)] * 3
START = np.array([0.3, 0.1, -0.2])


@pytest.mark.parametrize(
    "solve",
    [
        lambda p: levenberg_marquardt(p, START, BOUNDS, tol=1e-14)[0],
        lambda p: gauss_newton(p, START, BOUNDS)[0],
        lambda p: trust_region(p, START, BOUNDS, tol=1e-12)[0],
        lambda p: polish(p, START, BOUNDS, 100)[0],
        lambda p: lmfit_stage(p, START, BOUNDS, 200)[0],
    ],
    ids=["levenberg-marquardt", "gauss-newton", "trust-region", "polish", "lmfit"],
)
def test_solvers_reach_the_linear_least_squares_solution(solve):
    """closed-form/independent: on a linear problem every Gaussian solver reaches numpy's
    ``lstsq`` solution (the unique minimiser of ‖Aθ − b‖²)."""
    a, b = linear_case()
    expected = np.linalg.lstsq(a, b, rcond=None)[0]
    np.testing.assert_allclose(solve(LinearProblem(a, b)), expected, rtol=1e-7, atol=1e-7)


def test_robust_solve_matches_scipy_soft_l1():
    """closed-form/independent: with three gross outliers, the iteratively reweighted soft-L1
    fit minimises the same convex loss as scipy's ``least_squares(loss="soft_l1",
    f_scale=3)``: stopped on a 1e-9 relative change of the loss it reaches scipy's solution
    to 1e-5, at its default 1e-7 to 1e-3 (the parameters' standard errors here are of order
    1, so about 1e-3 of them); plain least squares is pulled away."""
    a, b = linear_case(outliers=True)
    ref_fit = least_squares(lambda th: a @ th - b, START, loss="soft_l1", f_scale=3.0,
                            ftol=1e-14, xtol=1e-14, gtol=1e-14)  # fmt: skip
    cov = np.linalg.inv(a.T @ a)
    assert 0.1 < np.sqrt(np.diag(cov)).min() and np.sqrt(np.diag(cov)).max() < 10.0
    tight, ok, _msg, nfev = robust_solve(LinearProblem(a, b), START, BOUNDS, 200, tol=1e-9)
    assert ok and nfev > 0
    np.testing.assert_allclose(tight, ref_fit.x, rtol=0.0, atol=1e-5)
    th, ok, _msg, nfev_default = robust_solve(LinearProblem(a, b), START, BOUNDS, 200)
    assert ok and 0 < nfev_default < nfev
    np.testing.assert_allclose(th, ref_fit.x, rtol=0.0, atol=1e-3)
    plain = np.linalg.lstsq(a, b, rcond=None)[0]
    assert np.max(np.abs(plain - ref_fit.x)) > 100 * np.max(np.abs(th - ref_fit.x))


def test_lmfit_stage_returns_lmfit_result_with_its_best_values():
    """closed-form/independent: the final stage hands back lmfit's own MinimizerResult,
    whose parameters are named after the problem's and hold the returned θ."""
    a, b = linear_case()
    th, ok, _msg, nfev, out = lmfit_stage(LinearProblem(a, b), START, BOUNDS, 200)
    assert ok and nfev == out.nfev
    assert isinstance(out, lmfit.minimizer.MinimizerResult)
    assert list(out.params) == ["p0", "p1", "p2"]
    np.testing.assert_array_equal([out.params[n].value for n in out.params], th)


@functools.cache
def fitted():
    sc = ref.Scenario(n=200)
    xy = sc.truth() + np.random.default_rng(4).normal(0.0, sc.sigma, (sc.n, 2))
    return fit_tracks(Track(sc.t, xy[:, 0], xy[:, 1]), Sphere(sc.mass, sc.diameter),
                      Air(ref.RHO, ref.MU))  # fmt: skip


def test_fit_result_carries_lmfit_minimizer_result():
    """closed-form/independent: a converged fit hands out lmfit's MinimizerResult of its
    problem (run from the fitted values on first access, then kept); its best values equal
    the reported ones within 1e-3 of each standard uncertainty (both are converged optima of
    the same problem), and lmfit's own standard error of
    Cd (MINPACK covariance scaled by χ²_ν) equals the reported u(Cd) for estimated noise.
    It is not part of the JSON summary."""
    r = fitted()
    assert r.success
    m = r.minimizer_result
    assert isinstance(m, lmfit.minimizer.MinimizerResult) and m.success
    assert tuple(m.params) == r.parameter_names
    best = np.array([m.params[n].value for n in r.parameter_names])
    u = np.sqrt(np.diag(r.covariance))
    assert np.all(np.abs(best - r.values) <= 1e-3 * u)
    assert m.params["cd"].stderr == pytest.approx(r.u_cd, rel=1e-4)
    assert r.minimizer_result is m  # kept, not run again
    d = r.to_dict()
    assert "minimizer_result" not in d
    json.dumps(d)
