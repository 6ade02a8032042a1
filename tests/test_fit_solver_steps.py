"""Tests of fitdrag.fit._solver_steps: the compiled normal-equation step of the solvers.

Each mode is checked against numpy's LAPACK-backed least squares and linear solves (the
reference library), not against fitdrag's own solvers.

Labels: closed-form/independent, regression.
"""

from __future__ import annotations

import numpy as np
import pytest

from fitdrag.fit._solver_steps import GAUSS_NEWTON, MARQUARDT, REWEIGHTED, normal_step


def _case(seed, n=60, p=5, spread=1e3):
    """A Jacobian with columns of very different scales (as drag and launch state have)."""
    rng = np.random.default_rng(seed)
    jac = rng.normal(size=(n, p)) * np.logspace(0.0, np.log10(spread), p)
    return jac, rng.normal(size=n)


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_gauss_newton_step_is_the_least_squares_solution(seed):
    """closed-form/independent: the Gauss–Newton step solves min |J δ + r| (numpy lstsq)."""
    jac, res = _case(seed)
    expected = np.linalg.lstsq(jac, -res, rcond=None)[0]
    np.testing.assert_allclose(normal_step(jac, res, GAUSS_NEWTON), expected, rtol=1e-9)


@pytest.mark.parametrize("lam", [1e-3, 1.0, 1e4])
def test_marquardt_step_solves_the_damped_normal_equations(lam):
    """closed-form/independent: (JᵀJ + λ diag(JᵀJ)) δ = −Jᵀr (Marquardt 1963), a zero column
    damped with 1 in place of its zero diagonal (numpy solve)."""
    jac, res = _case(7)
    jac[:, 2] = 0.0
    jtj = jac.T @ jac
    d = np.diag(jtj).copy()
    d[d <= 0] = 1.0
    expected = np.linalg.solve(jtj + lam * np.diag(d), -(jac.T @ res))
    np.testing.assert_allclose(normal_step(jac, res, MARQUARDT, lam), expected, rtol=1e-9,
                               atol=1e-15)  # fmt: skip


def test_reweighted_step_is_the_weighted_least_squares_solution():
    """closed-form/independent: with row weights w the step solves min |w (J δ + r)| (numpy
    lstsq on the weighted rows), as one iteratively reweighted step (Holland & Welsch 1977)."""
    jac, res = _case(11)
    w = (1.0 + (res / 3.0) ** 2) ** -0.25
    expected = np.linalg.lstsq(jac * w[:, None], -(w * res), rcond=None)[0]
    np.testing.assert_allclose(normal_step(jac, res, REWEIGHTED, w=w), expected, rtol=1e-9)


def test_a_singular_system_gives_no_step():
    """regression: a zero column (an undetermined parameter) leaves the undamped system
    singular: no step (numpy's solve raises LinAlgError there); a NaN entry gives no step
    either (numpy's solve would return a NaN step)."""
    jac, res = _case(5)
    jac[:, 1] = 0.0
    assert normal_step(jac, res, GAUSS_NEWTON) is None
    assert normal_step(jac, res, REWEIGHTED, w=np.ones(res.size)) is None
    jac, res = _case(5)
    jac[3, 3] = np.nan
    assert normal_step(jac, res, GAUSS_NEWTON) is None
