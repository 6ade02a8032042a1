"""Re-solve a finished fit with changed inputs (:func:`refit`): the measurement model behind
the sensitivity coefficients and the Monte Carlo trials of the uncertainty budget.

Only the final weighted (prewhitened) least-squares problem of the original fit is solved
again, with its rejected frames, noise levels and AR(1) coefficients kept, from its optimum.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from fitdrag.errors import InputError
from fitdrag.fit._solver_steps import GAUSS_NEWTON, normal_step
from fitdrag.fit.problem import Problem, as_tracks
from fitdrag.fit.results import FitResult
from fitdrag.fit.solvers import gauss_newton, trust_region
from fitdrag.physics.air import Air
from fitdrag.physics.forces import Conditions
from fitdrag.physics.registry import get_drag_model
from fitdrag.tracks.track import Track


@dataclass(frozen=True)
class Refit:
    """Outcome of :func:`refit`: the drag coefficient and all parameters after re-solving.

    Attributes
    ----------
    cd : float
        Drag coefficient (at the original fit's median Reynolds number for Re-dependent
        models). [-]
    values : ndarray
        All fitted parameters, in the order of ``FitResult.parameter_names``.
    success : bool
    """

    cd: float
    values: np.ndarray
    success: bool


def conditions_with(c: Conditions, air: Air | None = None,
                    gravity: float | None = None) -> Conditions:  # fmt: skip
    """``c`` with its air [kg/m³, Pa s] and gravity [m/s²] replaced where given."""
    return Conditions(
        air=c.air if air is None else air,
        gravity=c.gravity if gravity is None else gravity,
        wind=c.wind,
        buoyancy=c.buoyancy,
    )


def refit(
    result: FitResult,
    *,
    tracks: Sequence[Track] | None = None,
    specimen=None,
    air: Air | None = None,
    gravity: float | None = None,
    model: str | None = None,
    lift_coefficient: float | None = None,
    max_nfev: int = 60,
) -> Refit:
    """Re-solve a finished fit with changed inputs, for sensitivity coefficients and Monte Carlo.

    The rejection mask, noise levels and AR(1) coefficients of ``result`` are kept, the
    start is its optimum, and only the final weighted (prewhitened) least-squares problem is
    solved again — a few evaluations instead of the full robust pipeline.  Tracks passed
    here must have the same number of samples as the original ones (e.g. rescaled
    positions or times).

    Parameters
    ----------
    result : FitResult
        A converged fit.
    tracks : sequence of Track, optional
        Replacement tracks (same lengths). Default: the original tracks.
    specimen : Sphere or Body, optional
        Replacement specimen (e.g. a perturbed mass [kg] or diameter [m]).
    air : Air, optional
        Replacement air (density [kg/m³], viscosity [Pa s]).
    gravity : float, optional
        Replacement acceleration of free fall. [m/s²]
    model : str, optional
        Another drag law with the same fitted parameters (e.g. the scaled smooth-sphere
        curve of another correlation); its first parameter starts where it gives the
        original fit's Cd at the median Reynolds number.
    lift_coefficient : float, optional
        A lift coefficient held fixed in a fit without lift (e.g. the largest the data
        allow). [-]
    max_nfev : int
        Evaluation budget.

    Returns
    -------
    Refit
    """
    old: Problem = result._state["problem"]
    tracks = list(old.tracks) if tracks is None else as_tracks(tracks)
    if len(tracks) != len(old.tracks) or any(len(a) != len(b) for a, b in zip(tracks, old.tracks)):
        raise InputError(
            "tracks: refit needs tracks with the same number of throws and samples as the "
            "original fit; run fit_tracks for new data."
        )
    conditions = conditions_with(result.conditions, air, gravity)
    sp = result.specimen if specimen is None else specimen
    dm = get_drag_model(result.model)
    re_med = result.diagnostics["reynolds_median"]
    theta0 = np.array(result._state["theta"], float)
    if model is not None:
        new = get_drag_model(model)
        if new.parameters != dm.parameters or new.constants != dm.constants:
            raise InputError(
                f"model: {new.name!r} has parameters {new.parameters} and constants "
                f"{new.constants}, the fit's {dm.name!r} {dm.parameters} and {dm.constants}; "
                f"a re-fit changes the law only between laws of the same parameters."
            )
        p_old = np.concatenate((theta0[: len(dm.parameters)], result.constants))
        p_new = p_old.copy()
        p_new[0] = 1.0
        g = np.zeros(max(p_old.size, 1))
        c_old = dm.kernel(re_med, p_old, g)[0]
        c_unit = new.kernel(re_med, p_new, g)[0]
        if c_unit > 0:
            theta0[0] = c_old / c_unit
        dm = new
    fixed_lift = 0.0
    if lift_coefficient is not None:
        if result.lift:
            raise InputError(
                "lift_coefficient: the fit has a fitted lift coefficient; a fixed one applies "
                "to a fit without lift."
            )
        fixed_lift = float(lift_coefficient)
    problem = Problem(tracks, sp, conditions, dm, result.constants, result.lift, fixed_lift)
    problem.names = old.names
    problem.bounds = old.bounds
    problem.set_state(masks=old.masks, sigmas=old.sigmas, phi=old.phi)
    theta, ok = gauss_newton(problem, theta0, old.bounds)
    if not ok:
        theta, ok, _msg, _n = trust_region(problem, theta0, old.bounds, max_nfev=max_nfev)
    n_fit = len(dm.parameters)
    p_full = np.concatenate((theta[:n_fit], result.constants)).astype(float)
    cd, _ = dm.kernel(re_med, p_full, np.zeros(max(p_full.size, 1)))
    return Refit(cd=float(cd), values=theta, success=bool(ok))


def chord_matrices(jac: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The chord (fixed-Jacobian Gauss–Newton) step's matrix ``(J₀ᵀJ₀)⁻¹J₀ᵀ`` of a whitened
    Jacobian ``jac`` (m, p), by its QR factors, and each parameter's standard uncertainty
    at unit noise, ``sqrt(diag((J₀ᵀJ₀)⁻¹))``: the least-squares solution and its covariance
    by QR (Björck 1996, Numerical Methods for Least Squares Problems, SIAM, ch. 1-2)."""
    q, rr = np.linalg.qr(jac)
    rinv = np.linalg.solve(rr, np.eye(rr.shape[0]))
    return np.linalg.solve(rr, q.T), np.sqrt(np.sum(rinv * rinv, axis=1))


class RefitSession:
    """A finished fit prepared for many re-solves with a fixed Jacobian (Monte Carlo trials).

    The problem (flight models, kept samples, weights, AR(1) coefficients) is built once;
    each :meth:`solve` only replaces what a trial changes — the specimen's and the air's
    coefficients, gravity, a held lift coefficient, the sample times and the observed
    positions — and re-solves by chord (simplified Gauss–Newton) steps
    θ ← θ − (J₀ᵀJ₀)⁻¹J₀ᵀ r(θ) with J₀ the whitened Jacobian at the original optimum and r
    from flights integrated without sensitivities [1, §10.2].  The fixed point solves
    J₀ᵀ r(θ) = 0 instead of J(θ)ᵀ r(θ) = 0: for the small changes of an uncertainty budget the
    two optima differ by a second-order amount, (J₀ᵀJ₀)⁻¹ (J − J₀)ᵀ r, a small fraction of
    the parameters' own standard uncertainties (verified against full re-fits in the tests
    and in ``benchmarks/bench_budget.py``).  :meth:`solve` returns None when the chord
    iteration does not settle within ``max_iter`` steps, leaves the bounds or a flight cannot
    be simulated; the caller then re-fits in full (:func:`refit`).

    References
    ----------
    1. J. E. Dennis and R. B. Schnabel, *Numerical Methods for Unconstrained Optimization and
       Nonlinear Equations*, SIAM 1996 (chord method: Newton's method with the derivative
       held at the starting point, linearly convergent near the solution).

    Parameters
    ----------
    result : FitResult
        A converged fit.
    exact_step : bool
        Finish each re-solve with one Gauss–Newton step at the exact Jacobian (one
        integration with sensitivities), which removes that offset; False leaves the chord
        iteration's fixed point.
    """

    def __init__(self, result: FitResult, exact_step: bool = True):
        old: Problem = result._state["problem"]
        self.result = result
        self.dm = get_drag_model(result.model)
        self.theta0 = np.array(result._state["theta"], float)
        self.re_med = result.diagnostics["reynolds_median"]
        problem = Problem(list(old.tracks), result.specimen, result.conditions, self.dm,
                          result.constants, result.lift, 0.0)  # fmt: skip
        problem.names = old.names
        problem.bounds = old.bounds
        problem.set_state(masks=old.masks, sigmas=old.sigmas, phi=old.phi)
        _r, jac, _sims, ok = problem.evaluate(self.theta0)
        if not ok:
            raise InputError("result: the fit's flights cannot be simulated at its optimum.")
        #: (J₀ᵀJ₀)⁻¹J₀ᵀ, the chord step's matrix, and each parameter's standard uncertainty
        #: scale (unit noise), for the stopping rule
        self.step_matrix, self.scale = chord_matrices(jac)
        self.lo = np.array([b[0] for b in old.bounds], float)
        self.hi = np.array([b[1] for b in old.bounds], float)
        self.problem = problem
        self.n_fit = len(self.dm.parameters)
        #: finish every re-solve with one Gauss–Newton step at the exact Jacobian
        self.exact_step = exact_step

    def solve(self, *, times=None, positions=None, specimen=None, air: Air | None = None,
              gravity: float | None = None, lift_coefficient: float | None = None,
              max_iter: int = 12, tol: float = 0.3) -> Refit | None:  # fmt: skip
        """Re-solve with changed inputs; None when the fixed-Jacobian iteration fails.

        Parameters
        ----------
        times : sequence of ndarray, optional
            Each throw's sample times (same number of samples). [s]
        positions : sequence of (ndarray, ndarray), optional
            Each throw's observed (x, y). [m]
        specimen, air, gravity, lift_coefficient :
            As for :func:`refit`.
        max_iter : int
            Chord steps before giving up.
        tol : float
            Stop once no parameter moves by more than ``tol`` of its standard uncertainty. [-]
        """
        from fitdrag.physics.simulate import flight_coefficients

        result = self.result
        problem = self.problem
        conditions = conditions_with(result.conditions, air, gravity)
        sp = result.specimen if specimen is None else specimen
        k, g_net, re_fac = flight_coefficients(sp, conditions)
        for i, fm in enumerate(problem.models):
            fm.k, fm.g_net, fm.re_fac = k, g_net, re_fac
            fm.conditions = conditions
            fm.t = np.array(problem.tracks[i].t if times is None else times[i], float)
        if positions is None:
            positions = [(tr.x, tr.y) for tr in problem.tracks]
        for i, (x, y) in enumerate(positions):
            problem.set_observations(i, x, y)
        problem.fixed_lift = 0.0 if lift_coefficient is None else float(lift_coefficient)
        problem.forget()
        theta = self.theta0.copy()
        for _ in range(max_iter):
            res, ok = problem.residuals(theta)
            if not ok:
                return None
            step = -(self.step_matrix @ res)
            theta += step
            if np.any(theta < self.lo) or np.any(theta > self.hi):
                return None
            if np.all(np.abs(step) <= tol * self.scale):
                break
        else:
            return None
        if self.exact_step:
            # one Gauss–Newton step with the exact Jacobian at the chord's point removes the
            # fixed Jacobian's second-order offset (quadratic convergence from there)
            res, jac, _sims, ok = problem.evaluate(theta)
            if not ok:
                return None
            step = normal_step(jac, res, GAUSS_NEWTON)
            if step is None:
                return None
            theta = theta + step
            if np.any(theta < self.lo) or np.any(theta > self.hi):
                return None
        p_full = np.concatenate((theta[: self.n_fit], result.constants)).astype(float)
        cd, _ = self.dm.kernel(self.re_med, p_full, np.zeros(max(p_full.size, 1)))
        return Refit(cd=float(cd), values=theta, success=True)
