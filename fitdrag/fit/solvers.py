"""The optimisers that solve the fit's least-squares problem (:class:`fitdrag.fit.problem.Problem`).

* :func:`levenberg_marquardt` — a compact Levenberg–Marquardt for the first, Gaussian pass
  from the drag-free start;
* :func:`robust_solve` — the soft-L1 robust stage by iteratively reweighted Gauss–Newton;
* :func:`gauss_newton` and :func:`polish` — re-convergence from a nearby optimum;
* :func:`trust_region` — scipy's trust-region-reflective ``least_squares``, the fallback of
  every stage above;
* :func:`lmfit_stage` — lmfit's ``Minimizer.leastsq`` (MINPACK's Levenberg–Marquardt with
  the analytic Jacobian, bounds mapped by lmfit), for the analyst.

How lmfit is used: it is not a stage of the fit (re-converging an already converged point
cost 40 % of a fit and moved Cd by < 1e-11 u).  ``FitResult.minimizer_result`` runs
:func:`lmfit_stage` from the fitted values on first access and keeps lmfit's
``MinimizerResult`` (fit report, parameter correlations and information criteria of the
whitened, weighted problem); the reported values and covariance are fitdrag's own (see
:mod:`fitdrag.fit.fitting`).

All solvers take and return parameter vectors in the problem's layout; none changes the
problem's weights, masks or noise model.
"""

from __future__ import annotations

import warnings

import numpy as np

from fitdrag.fit._solver_steps import GAUSS_NEWTON, MARQUARDT, REWEIGHTED, normal_step


def _limits(bounds) -> tuple[np.ndarray, np.ndarray]:
    return np.array([b[0] for b in bounds]), np.array([b[1] for b in bounds])


def trust_region(problem, theta, bounds, loss="linear", f_scale=1.0, max_nfev=200, tol=1e-8):
    """One trust-region-reflective stage (scipy ``least_squares``); (theta, success, message,
    nfev).

    Parameters
    ----------
    problem : Problem
    theta : ndarray
        Start, clipped into ``bounds``.
    bounds : sequence of (float, float)
        Lower and upper bound of every parameter.
    loss : str
        scipy loss ("linear" or "soft_l1").
    f_scale : float
        Soft margin of the robust loss, in noise units. [-]
    max_nfev : int
        Evaluation budget.
    tol : float
        ``ftol``, ``xtol`` and ``gtol`` of ``least_squares``.
    """
    from scipy.optimize import least_squares

    lo, hi = (a.astype(float) for a in _limits(bounds))
    x0 = np.clip(np.asarray(theta, float), lo, hi)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        out = least_squares(
            lambda th: problem.evaluate(th)[0], x0, jac=lambda th: problem.evaluate(th)[1],
            bounds=(lo, hi), method="trf", loss=loss, f_scale=f_scale, x_scale="jac",
            ftol=tol, xtol=tol, gtol=tol, max_nfev=max_nfev,
        )  # fmt: skip
    success = bool(out.success) and out.status > 0 and problem.evaluate(out.x)[3]
    return out.x, success, str(out.message), int(out.nfev)


class _LmfitObjective:
    """Residuals and Jacobian of ``problem`` as lmfit calls them (a picklable object, so a
    fit carrying lmfit's result can still be sent to worker processes)."""

    def __init__(self, problem):
        self.problem = problem

    def _theta(self, params) -> np.ndarray:
        return np.array([params[n].value for n in self.problem.names])

    def residual(self, params):
        return self.problem.evaluate(self._theta(params))[0]

    def jacobian(self, params):
        # a copy: MINPACK scales the Jacobian it is handed in place, and the problem caches it
        return self.problem.evaluate(self._theta(params))[1].copy()


def lmfit_parameters(problem, theta, bounds):
    """lmfit ``Parameters`` named after ``problem.names``, at ``theta`` clipped into ``bounds``."""
    import lmfit

    p = lmfit.Parameters()
    for j, name in enumerate(problem.names):
        lo, hi = bounds[j]
        p.add(name, value=float(np.clip(theta[j], lo, hi)), min=lo, max=hi)
    return p


def lmfit_stage(problem, theta, bounds, max_nfev=200):
    """lmfit from a converged point: (theta, success, message, nfev, MinimizerResult).

    MINPACK's Levenberg–Marquardt (``Minimizer.leastsq``) with the analytic Jacobian, at tight
    tolerances (``ftol`` 1e-14, ``xtol`` 1e-12).
    """
    import lmfit

    names = problem.names
    objective = _LmfitObjective(problem)
    mini = lmfit.Minimizer(
        objective.residual, lmfit_parameters(problem, theta, bounds), nan_policy="raise"
    )
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        # MINPACK's Levenberg–Marquardt with the analytic Jacobian (lmfit maps the bounds)
        out = mini.leastsq(Dfun=objective.jacobian, col_deriv=0, max_nfev=max_nfev, ftol=1e-14,
                           xtol=1e-12)  # fmt: skip
    th = np.array([out.params[n].value for n in names])
    success = bool(out.success) and not out.aborted and problem.evaluate(th)[3]
    return th, success, str(out.message), out.nfev, out


def levenberg_marquardt(problem, theta, bounds, max_iter: int = 60, tol: float = 1e-6):
    """A compact Levenberg–Marquardt (Marquardt 1963 diagonal scaling) from the first guess.

    Only for the first, Gaussian pass from the drag-free start; bounds are kept by
    projection.  It has converged when a step taken with little damping (λ at most its
    start, 1e-3, i.e. nearly a Gauss–Newton step) lowers the cost by less than ``tol``
    relative; a small gain from a heavily damped step after rejected ones does not count.
    Reports failure (and the caller falls back to the trust-region solver) when it does
    not settle within ``max_iter`` iterations; (theta, converged).

    References: D. W. Marquardt, "An algorithm for least-squares estimation of nonlinear
    parameters", J. SIAM 11 (1963) 431–441.
    """
    lo, hi = _limits(bounds)
    theta = np.clip(np.array(theta, float), lo, hi)
    res, jac, _s, ok = problem.evaluate(theta)
    if not ok:
        return theta, False
    cost = float(res @ res)
    lam = 1e-3
    for _ in range(max_iter):
        step = normal_step(jac, res, MARQUARDT, lam)
        if step is None:
            return theta, False
        new = np.minimum(np.maximum(theta + step, lo), hi)
        r2, j2, _s, ok2 = problem.evaluate(new)
        c2 = float(r2 @ r2) if ok2 else np.inf
        if c2 < cost:
            rel = (cost - c2) / max(cost, 1e-300)
            theta, res, jac, cost = new, r2, j2, c2
            if rel < tol and lam <= 1e-3:
                return theta, True
            lam = max(lam / 3.0, 1e-12)
        else:
            lam *= 4.0
            if lam > 1e12:
                return theta, cost < np.inf
    return theta, False


def robust_solve(problem, theta, bounds, max_nfev, f_scale: float = 3.0, tol: float = 1e-7):
    """Soft-L1 robust fit by iteratively reweighted Gauss–Newton, else the trust region.

    Minimises Σ ρ((r/c)²) with ρ(s) = 2(√(1+s) − 1) (the soft-L1 loss, c = ``f_scale``
    noise units) by Gauss–Newton steps on the residuals weighted with √ρ′ = (1+s)^(−1/4)
    [Holland & Welsch 1977]; falls back to scipy's trust-region solver with the same loss
    if the iteration does not settle.  Returns (theta, success, message, nfev).

    It stops when a step lowers the robust cost by less than ``tol`` relative.  The
    iteration converges linearly (each step about a third of the last on correlated noise),
    and the fit uses its optimum only to judge outliers and as the start of the plain
    re-solve, so 1e-7 (parameters settled to about 1e-3 of their standard uncertainty) is
    enough; the plain re-solve converges to its own tolerance from there.

    References: P. W. Holland and R. E. Welsch, "Robust regression using iteratively
    reweighted least-squares", Commun. Stat. Theory Methods 6 (1977) 813–827.
    """
    before = problem.n_evaluations
    lo, hi = _limits(bounds)
    th = np.clip(np.array(theta, float), lo, hi)

    def robust_cost(r):
        return float(np.sum(2.0 * (np.sqrt(1.0 + (r / f_scale) ** 2) - 1.0)))

    res, jac, _s, ok = problem.evaluate(th)
    cost = robust_cost(res) if ok else np.inf
    converged = False
    for _ in range(30):
        if not ok or problem.n_evaluations - before >= max_nfev:
            break
        w = (1.0 + (res / f_scale) ** 2) ** -0.25
        step = normal_step(jac, res, REWEIGHTED, w=w)
        if step is None:
            break
        # halve the step until the robust cost falls (IRLS steps can overshoot)
        for _half in range(6):
            new = np.clip(th + step, lo, hi)
            r2, j2, _s, ok2 = problem.evaluate(new)
            c2 = robust_cost(r2) if ok2 else np.inf
            if c2 <= cost:
                break
            step = step / 2.0
        if not c2 <= cost:
            break
        rel = (cost - c2) / max(cost, 1e-300)
        th, res, jac, cost, ok = new, r2, j2, c2, ok2
        if rel < tol or np.all(np.abs(step) <= 1e-10 * (np.abs(th) + 1e-3)):
            converged = True
            break
    if converged:
        return th, True, "converged (iteratively reweighted)", problem.n_evaluations - before
    th2, ok2, msg, nfev = trust_region(problem, theta, bounds, loss="soft_l1", f_scale=f_scale,
                                       max_nfev=max_nfev)  # fmt: skip
    return th2, ok2, msg, problem.n_evaluations - before


def gauss_newton(problem, theta, bounds, max_iter: int = 12, tol: float = 1e-9):
    """Undamped Gauss–Newton from a nearby optimum; (theta, converged).

    Used only to re-solve a converged problem after a small change of its inputs; any sign
    of trouble (cost increase, bound crossed, no convergence) reports failure so that the
    caller falls back to the trust-region solver.
    """
    theta = np.array(theta, float)
    lo, hi = _limits(bounds)
    res, jac, _sims, ok = problem.evaluate(theta)
    cost = float(res @ res)
    for _ in range(max_iter):
        if not ok:
            return theta, False
        # normal equations with column scaling (P is small; J is well scaled after it)
        step = normal_step(jac, res, GAUSS_NEWTON)
        if step is None:
            return theta, False
        if np.all(np.abs(step) <= tol * (np.abs(theta) + 1e-3)):
            # the next step would be below the tolerance: theta is the optimum to within it
            # (no integration spent on confirming a step that changes nothing)
            return theta, True
        new = theta + step
        if np.any(new < lo) or np.any(new > hi):
            return theta, False
        res, jac, _sims, ok = problem.evaluate(new)
        new_cost = float(res @ res)
        if not ok or new_cost > cost * (1.0 + 1e-8) + 1e-300:
            return theta, False
        theta, cost = new, new_cost
    return theta, False


def polish(problem, theta, bounds, max_nfev):
    """Re-converge from a nearby point: Gauss–Newton, else the trust-region solver;
    (theta, success, message, nfev)."""
    before = problem.n_evaluations
    th, ok = gauss_newton(problem, theta, bounds)
    if ok:
        return (
            th,
            True,
            "converged (Gauss-Newton from a nearby optimum)",
            problem.n_evaluations - before,
        )
    return trust_region(problem, theta, bounds, max_nfev=max_nfev)
