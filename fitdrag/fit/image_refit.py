"""Re-solve a finished image-space fit with changed inputs (:func:`refit_views`): the
measurement model behind the budget lines and Monte Carlo trials of a 3-D measurement.

The problem of :func:`fitdrag.fit.image_fit.fit_views` is rebuilt from its result — the same
drag law and constants, lift, wind, spin axis, channels, noise levels and AR(1) coefficients,
reference time and estimated time offsets — with the changed views (cameras, frame rate,
known offsets), specimen, air or gravity, and only its final weighted least-squares problem is
solved again, from the fitted optimum.  The noise state is kept so that a sensitivity
coefficient measures the change of the inputs, not a change of weights.
"""

from __future__ import annotations

import copy
from collections.abc import Sequence

import numpy as np

from fitdrag.errors import InputError
from fitdrag.fit._solver_steps import GAUSS_NEWTON, normal_step
from fitdrag.fit.image_problem import ImageProblem
from fitdrag.fit.refit import Refit, chord_matrices, conditions_with
from fitdrag.fit.results import cd_and_gradient
from fitdrag.fit.solvers import gauss_newton, trust_region
from fitdrag.geometry.views import CameraView
from fitdrag.physics.air import Air
from fitdrag.physics.registry import get_drag_model

__all__ = ["ViewRefitSession", "median_reynolds", "rebuild_problem", "refit_views"]


def rebuild_problem(result, views: Sequence[CameraView], *, specimen=None, air=None,
                    gravity=None, wind=None, model=None) -> ImageProblem:  # fmt: skip
    """The final weighted problem of a finished :func:`fit_views`, with replaced inputs.

    Parameters
    ----------
    result : ViewFitResult
        A converged fit.
    views : sequence of CameraView
        The views of that fit, or replacements with the same observations' count per view
        (e.g. other cameras, another frame rate or known time offsets).
    specimen : Sphere or Body, optional
        Replacement specimen (mass [kg], size [m]).
    air : Air, optional
        Replacement air (density [kg/m³], viscosity [Pa s]).
    gravity : float, optional
        Replacement acceleration of free fall. [m/s²]
    wind : array_like, shape (3,), optional
        Replacement wind vector (world frame). [m/s]
    model : str, optional
        Another drag law with the same fitted parameters (a scaled sphere curve of another
        correlation).

    Returns
    -------
    ImageProblem
        With the result's parameter names, noise levels and AR(1) coefficients.
    """
    views = list(views)
    if len(views) != len(result.views) or any(
        len(v) != r.t.size for v, r in zip(views, result.views)
    ):
        raise InputError(
            "views: a re-fit needs the same cameras with the same number of observations as "
            "the original fit; run fit_views for new data."
        )
    conditions = conditions_with(result.conditions, air, gravity)
    opts = result.options
    dm = get_drag_model(result.model if model is None else model)
    if dm.parameters != get_drag_model(result.model).parameters:
        raise InputError(
            f"model: {dm.name!r} has parameters {dm.parameters}, the fit's {result.model!r} "
            f"{get_drag_model(result.model).parameters}; a re-fit changes the law only between "
            f"laws of the same parameters."
        )
    w = np.asarray(opts["wind"] if wind is None else wind, float)
    outline = [r.diameter_used for r in result.views]
    offsets = [None if r.offset_estimated else v.time_offset or 0.0
               for v, r in zip(views, result.views)]  # fmt: skip
    offsets[0] = 0.0
    measures = [
        (None if r.diameter_measure_estimated else float(r.diameter_measure))
        if r.diameter_used else 0.0
        for r in result.views
    ]  # fmt: skip
    scale_fitted = opts.get("diameter_scale", "estimate") == "estimate"
    scales = [
        (None if scale_fitted else float(r.diameter_scale)) if r.diameter_used else 1.0
        for r in result.views
    ]
    problem = ImageProblem(
        views, result.specimen if specimen is None else specimen, conditions, dm,
        result.constants, opts["lift"], w,
        np.asarray(opts["spin_axis"], float), outline, offsets, result.reference_time,
        measures, scales,
    )  # fmt: skip
    problem.names = list(result.parameter_names)
    if problem.parameter_names() != problem.names:
        raise InputError(
            "views: the re-fit's parameters differ from the original fit's "
            f"({problem.parameter_names()} vs {problem.names}); keep the same views and options."
        )
    bounds = [tuple(b) for b in dm.bounds] + ([(-5.0, 5.0)] if opts["lift"] else [])
    problem.bounds = bounds + [(-np.inf, np.inf)] * (problem.n_params - len(bounds))
    levels, phis = [], []
    seen = [0] * len(views)
    for ch in problem.channels:
        r = result.views[ch.view_index]
        sigma = (r.sigma_u, r.sigma_v, r.sigma_diameter)[ch.kind]
        levels.append(float(sigma) / float(np.median(ch.relative)))
        k = seen[ch.view_index]
        seen[ch.view_index] += 1
        phis.append(float(r.ar1_coefficients[k]) if k < len(r.ar1_coefficients) else 0.0)
    problem.set_noise(levels=levels, phis=phis)
    return problem


def median_reynolds(problem: ImageProblem, theta) -> float:
    """Median Reynolds number over the observations of the flight at ``theta``. [-]"""
    sims, ok = problem.flight_at(np.asarray(theta, float))
    if not ok:
        return float("nan")
    air = problem.conditions.air
    speed = np.concatenate([np.linalg.norm(vel - problem.wind, axis=1) for _p, vel, _j in sims])
    return float(np.median(air.density * speed * problem.specimen.length / air.viscosity))


def refit_views(
    result,
    views: Sequence[CameraView],
    *,
    specimen=None,
    air: Air | None = None,
    gravity: float | None = None,
    reynolds: float | None = None,
    wind=None,
    model: str | None = None,
    max_nfev: int = 60,
) -> Refit:
    """Re-solve a finished 3-D fit with changed inputs, for sensitivities and Monte Carlo.

    Parameters
    ----------
    result : ViewFitResult
        A converged fit (:func:`fitdrag.fit.image_fit.fit_views`).
    views : sequence of CameraView
        Replacement views (same cameras and observation counts).
    specimen : Sphere or Body, optional
        Replacement specimen. [kg, m]
    air : Air, optional
        Replacement air. [kg/m³, Pa s]
    gravity : float, optional
        Replacement acceleration of free fall. [m/s²]
    reynolds : float, optional
        Reynolds number at which a Re-dependent law's Cd is stated (default: the median over
        the re-fitted flight). [-]
    wind : array_like, shape (3,), optional
        Replacement wind vector (world frame), e.g. the stated wind plus an air movement
        along the flight. [m/s]
    model : str, optional
        Another drag law of the same parameters; its first parameter starts where it gives
        the fit's Cd at the fit's median Reynolds number.
    max_nfev : int
        Evaluation budget of the fallback solver.

    Returns
    -------
    Refit
        Cd, all parameters (order of ``result.parameter_names``) and success.
    """
    if not result.success:
        raise InputError("result: the fit did not converge; a re-fit needs a converged fit.")
    problem = rebuild_problem(result, views, specimen=specimen, air=air, gravity=gravity,
                              wind=wind, model=model)  # fmt: skip
    theta0 = np.array(result.values, float)
    if model is not None:
        old = get_drag_model(result.model)
        consts = np.asarray(result.constants, float)
        re0 = median_reynolds(rebuild_problem(result, views), theta0)
        p_new = np.concatenate(([1.0], theta0[1 : len(old.parameters)], consts))
        c_unit = problem.model.kernel(re0, p_new, np.zeros(max(p_new.size, 1)))[0]
        if c_unit > 0:
            theta0[0] = float(result.cd) / c_unit
    theta, ok = gauss_newton(problem, theta0, problem.bounds)
    if not ok:
        theta, ok, _msg, _n = trust_region(problem, theta0, problem.bounds, max_nfev=max_nfev)
    dm = problem.model
    re = reynolds if reynolds is not None else median_reynolds(problem, theta)
    cd, _ = cd_and_gradient(dm, theta, np.asarray(problem.constants, float), re)
    return Refit(cd=float(cd), values=np.asarray(theta, float), success=bool(ok))


class ViewRefitSession:
    """A finished 3-D fit prepared for many re-solves with a fixed Jacobian (budget lines and
    Monte Carlo trials).

    The whitened Jacobian J₀ of the fit's final problem at its optimum is factored once;
    each :meth:`solve` rebuilds the problem with the changed inputs (as :func:`refit_views`)
    and re-solves by chord (simplified Gauss–Newton) steps θ ← θ − (J₀ᵀJ₀)⁻¹J₀ᵀ r(θ) with r
    from flights integrated and projected without derivatives (Dennis and Schnabel [1],
    §10.2, as :class:`fitdrag.fit.refit.RefitSession` for planar fits), then takes one
    Gauss–Newton step with the exact Jacobian at the chord's point, which removes the fixed
    Jacobian's offset to second order (up to four while a step still moves a parameter by
    more than 1 % of its standard uncertainty: changes far beyond a budget's).  Against full
    re-fits on the two set-ups of ``benchmarks/bench_fit_3d.py``: |ΔCd| below 5e-6 u(Cd)
    over 40 random budget-sized changes each (air density 0.5 %, mass 0.3 %, camera
    positions 0.01 %, new centroid noise), 2e-5 u(Cd) for changes four to twenty times
    larger.  :meth:`solve` returns None when the chord iteration
    does not settle within ``max_iter`` steps, leaves the bounds or a flight cannot be
    simulated; the caller then re-fits in full (:func:`refit_views`).

    References
    ----------
    1. J. E. Dennis and R. B. Schnabel, *Numerical Methods for Unconstrained Optimization and
       Nonlinear Equations*, SIAM 1996 (chord method).

    Parameters
    ----------
    result : ViewFitResult
        A converged fit.
    views : sequence of CameraView
        Its views.
    """

    def __init__(self, result, views: Sequence[CameraView]):
        if not result.success:
            raise InputError("result: the fit did not converge; a re-fit needs a converged fit.")
        problem = rebuild_problem(result, views)
        self.result = result
        self.views = list(views)
        #: the fit's problem, re-used (with replaced specimen and air) while the views stay
        self.problem = problem
        self.theta0 = np.array(result.values, float)
        _r, jac, _sims, ok = problem.evaluate(self.theta0)
        if not ok:
            raise InputError("result: the fit's flight cannot be simulated at its optimum.")
        #: (J₀ᵀJ₀)⁻¹J₀ᵀ, the chord step's matrix, and each parameter's standard uncertainty
        #: scale (unit noise), for the stopping rule
        self.step_matrix, self.scale = chord_matrices(jac)

    def solve(self, views: Sequence[CameraView], *, specimen=None, air: Air | None = None,
              gravity: float | None = None, wind=None, reynolds: float | None = None,
              max_iter: int = 12, tol: float = 0.3) -> Refit | None:  # fmt: skip
        """Re-solve with changed inputs (as :func:`refit_views`); None when the
        fixed-Jacobian iteration fails.

        Parameters
        ----------
        views, specimen, air, gravity, wind, reynolds :
            As for :func:`refit_views`. [SI]
        max_iter : int
            Chord steps before giving up.
        tol : float
            Stop once no parameter moves by more than ``tol`` of its standard uncertainty
            (unit noise). [-]
        """
        views = list(views)
        if (
            wind is None
            and len(views) == len(self.views)
            and all(a is b for a, b in zip(views, self.views))
        ):
            # the same views: the prepared problem with the specimen and the air replaced
            problem = copy.copy(self.problem)
            problem.specimen = self.result.specimen if specimen is None else specimen
            problem.radius = 0.5 * float(problem.specimen.length)
            problem.conditions = conditions_with(self.result.conditions, air, gravity)
            problem._flight = None
            problem.forget()
        else:
            problem = rebuild_problem(self.result, views, specimen=specimen, air=air,
                                      gravity=gravity, wind=wind)  # fmt: skip
        lo = np.array([b[0] for b in problem.bounds], float)
        hi = np.array([b[1] for b in problem.bounds], float)
        theta = self.theta0.copy()
        for _ in range(max_iter):
            res, ok = problem.residuals(theta)
            if not ok:
                return None
            step = -(self.step_matrix @ res)
            theta = theta + step
            if np.any(theta < lo) or np.any(theta > hi):
                return None
            if np.all(np.abs(step) <= tol * self.scale):
                break
        else:
            return None
        # Gauss–Newton steps with the exact Jacobian from the chord's point (one, unless the
        # change was so large that the chord's offset still moves a parameter by more than
        # 1 % of its standard uncertainty)
        for _ in range(4):
            res, jac, _sims, ok = problem.evaluate(theta)
            if not ok:
                return None
            step = normal_step(jac, res, GAUSS_NEWTON)
            if step is None:
                return None
            theta = theta + step
            if np.any(theta < lo) or np.any(theta > hi):
                return None
            if np.all(np.abs(step) <= 0.01 * self.scale):
                break
        else:
            return None
        dm = problem.model
        re = reynolds if reynolds is not None else median_reynolds(problem, theta)
        cd, _ = cd_and_gradient(dm, theta, np.asarray(problem.constants, float), re)
        return Refit(cd=float(cd), values=np.asarray(theta, float), success=True)
