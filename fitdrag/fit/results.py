"""The fit's result objects: :class:`ThrowResult` (one throw), :class:`FitResult` (the whole
fit) and the JSON-ready summary ``FitResult.to_dict()``.

Built by :func:`fitdrag.fit.fitting.fit_tracks`; the numbers in them are explained in that
module's docstring.  The coverage probability of the stated expanded uncertainty is the one
of the uncertainty layer (:data:`fitdrag.uncertainty.gum.P_K2`, p = 95.45 %), and the
coverage factor is its Student-t factor (:func:`fitdrag.uncertainty.gum.coverage_factor`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from fitdrag._version import __version__
from fitdrag.errors import InputError
from fitdrag.fit.problem import FIT_RTOL
from fitdrag.physics.forces import Conditions
from fitdrag.physics.registry import get_drag_model
from fitdrag.physics.simulate import Launch, simulate
from fitdrag.uncertainty.gum import P_K2

#: Coverage probability of the expanded uncertainty: that of k = 2 for a normal
#: distribution, erf(2/√2) = 95.45 % (JCGM 100:2008 Table G.1), as in the uncertainty budget.
COVERAGE_PROBABILITY = P_K2


@dataclass(frozen=True, eq=False)
class ThrowResult:
    """Per-throw part of a fit.

    Attributes
    ----------
    source : str
        File or label of the throw.
    t : ndarray
        All sample times of the throw. [s]
    labels : ndarray
        Frame numbers (or row indices) of all samples.
    used : ndarray of bool
        Samples kept in the final fit.
    residual_x, residual_y : ndarray
        Observed minus fitted position at every sample (rejected ones included). [m]
    fitted_x, fitted_y : ndarray
        Fitted positions at the sample times. [m]
    launch : Launch
        Fitted launch state at ``t[0]`` ([m], [m/s]).
    launch_covariance : ndarray
        4×4 covariance of (x0, y0, vx0, vy0). [SI²]
    speed, speed_uncertainty : float
        Launch speed and its standard uncertainty. [m/s]
    angle, angle_uncertainty : float
        Launch angle above the horizontal and its standard uncertainty. [deg]
    rejection_reasons : dict
        Frame label -> reason, for rejected samples.
    sigma : (float, float)
        Noise standard deviation used for x and y (estimated or from the track). [m]
    reynolds_range : (float, float)
        Smallest and largest Reynolds number over the fitted flight. [-]
    """

    source: str
    t: np.ndarray
    labels: np.ndarray
    used: np.ndarray
    residual_x: np.ndarray
    residual_y: np.ndarray
    fitted_x: np.ndarray
    fitted_y: np.ndarray
    launch: Launch
    launch_covariance: np.ndarray
    speed: float
    speed_uncertainty: float
    angle: float
    angle_uncertainty: float
    rejection_reasons: dict
    sigma: tuple[float, float]
    reynolds_range: tuple[float, float]
    sha256: str | None = None

    @property
    def residual_rms(self) -> float:
        """RMS of the kept residuals over both axes. [m]"""
        r = np.concatenate((self.residual_x[self.used], self.residual_y[self.used]))
        return float(np.sqrt(np.mean(r**2)))

    @property
    def rejected(self) -> list[int]:
        return [int(v) for v in self.labels[~self.used]]


@dataclass(frozen=True, eq=False)
class FitResult:
    """Outcome of :func:`fit_tracks`.

    Attributes
    ----------
    success : bool
        False when the optimiser did not converge (the numbers are then not to be used).
    message : str
    model : str
        Drag model name.
    parameter_names : tuple of str
        Names of all fitted parameters (shared first, then per-throw launch states).
    values : ndarray
        Fitted parameter values (SI).
    covariance : ndarray
        Parameter covariance (SI²).
    constants : tuple of float
        The drag model's fixed constants (e.g. its reference Reynolds number).
    cd : float
        Drag coefficient (at the median Reynolds number for Re-dependent models). [-]
    u_cd : float
        Statistical standard uncertainty of ``cd``. [-]
    dof : int
        Degrees of freedom of the fit (residuals minus parameters).
    coverage_factor : float
    throws : tuple of ThrowResult
    noise : dict
        Noise model used and its estimates.
    diagnostics : dict
        Residual statistics, identifiability, Reynolds numbers, terminal speed.
    specimen, conditions :
        The inputs.
    minimizer_result : lmfit.minimizer.MinimizerResult or None
        lmfit's own result (MINPACK Levenberg–Marquardt on the whitened, weighted problem,
        run from the fitted values when first asked for, then kept): its fit report
        (``lmfit.fit_report``), parameter correlations and information criteria, for the
        analyst.  Its best values equal ``values`` to a negligible fraction of their standard
        uncertainties (both are converged optima of the same problem); its error bars use
        lmfit's own scaling, the reported ``covariance`` is fitdrag's.  None when the fit
        failed.  Not part of :meth:`to_dict` (not JSON).
    """

    success: bool
    message: str
    model: str
    parameter_names: tuple[str, ...]
    values: np.ndarray
    covariance: np.ndarray
    constants: tuple[float, ...]
    cd: float
    u_cd: float
    dof: int
    coverage_factor: float
    throws: tuple[ThrowResult, ...]
    noise: dict
    diagnostics: dict
    specimen: Any
    conditions: Conditions
    lift: bool = False
    options: dict = field(default_factory=dict)
    _state: dict = field(default_factory=dict, repr=False)

    @property
    def minimizer_result(self):
        """lmfit's ``MinimizerResult`` of the fitted problem, computed on first use (see the
        class docstring); None when the fit failed."""
        if "minimizer_result" not in self._state:
            out = None
            problem = self._state.get("problem")
            if self.success and problem is not None:
                from fitdrag.fit.solvers import lmfit_stage

                out = lmfit_stage(problem, self.values, problem.bounds)[4]
            self._state["minimizer_result"] = out
        return self._state["minimizer_result"]

    @property
    def expanded_uncertainty(self) -> float:
        """U = k u(Cd). [-]"""
        return self.coverage_factor * self.u_cd

    @property
    def coverage_probability(self) -> float:
        return COVERAGE_PROBABILITY

    def parameter(self, name: str) -> tuple[float, float]:
        """(value, standard uncertainty) of a fitted parameter by name."""
        i = self.parameter_names.index(name)
        return float(self.values[i]), float(math.sqrt(max(self.covariance[i, i], 0.0)))

    @property
    def shared_names(self) -> tuple[str, ...]:
        m = get_drag_model(self.model)
        return m.parameters + (("lift_coefficient",) if self.lift else ())

    def flight(self, index: int = 0, t=None):
        """Fitted flight of throw ``index`` at times ``t`` (default: its sample times)."""
        th = self.throws[index]
        tt = th.t if t is None else np.asarray(t, float)
        m = get_drag_model(self.model)
        dp = [self.parameter(n)[0] for n in m.parameters] + list(self.constants)
        cl = self.parameter("lift_coefficient")[0] if self.lift else 0.0
        return simulate(tt, th.launch, self.specimen, self.conditions, model=m,
                        drag_params=dp, lift_coefficient=cl)  # fmt: skip

    def cd_at(self, re) -> tuple[np.ndarray, np.ndarray]:
        """Drag coefficient at stated Reynolds numbers ``re`` [-] and its standard uncertainty.

        The covariance of the drag parameters is propagated through the drag law to first
        order (JCGM 100:2008, eq. 13).
        """
        r = np.atleast_1d(np.asarray(re, dtype=float))
        if not np.all(np.isfinite(r)) or np.any(r <= 0):
            raise InputError(
                f"re: Reynolds numbers must be finite and > 0, got {r.tolist()!r}; pass the "
                f"Reynolds numbers at which to state Cd."
            )
        dm = get_drag_model(self.model)
        out = [cd_and_gradient(dm, self.values, self.constants, float(x)) for x in r]
        cd = np.array([c for c, _ in out])
        u = np.array([math.sqrt(max(float(g @ self.covariance @ g), 0.0)) for _, g in out])
        return cd, u

    def to_dict(self) -> dict:
        """The JSON-ready summary (see the README for its fields)."""
        return result_dict(self)


def cd_and_gradient(dm, theta, constants, re: float) -> tuple[float, np.ndarray]:
    """C_d at ``re`` [-] and its gradient with respect to all fitted parameters θ.

    The drag law's kernel gives ∂C_d/∂p for its own parameters; the launch states do not
    enter C_d, so their entries are zero.
    """
    n_fit = len(dm.parameters)
    p_full = np.concatenate((np.asarray(theta[:n_fit], float), constants)).astype(float)
    grad = np.zeros(max(p_full.size, 1))
    cd, _ = dm.kernel(float(re), p_full, grad)
    g = np.zeros(len(theta))
    g[:n_fit] = grad[:n_fit]
    return float(cd), g


def _vu(value, u) -> dict:
    return {"value": _f(value), "standard_uncertainty": _f(u)}


def _f(v):
    v = float(v)
    return v if math.isfinite(v) else None


def result_dict(r: FitResult) -> dict:
    """The JSON-ready summary of a fit (``minimizer_result`` is not part of it)."""
    dm = get_drag_model(r.model)
    d = r.diagnostics
    params = {n: _vu(*r.parameter(n)) for n in dm.parameters}
    for n, c in zip(dm.constants, r.constants):
        params[n] = {"value": c, "standard_uncertainty": 0.0, "fixed": True}
    first = r.throws[0]
    rejected = []
    reasons = {}
    multi = len(r.throws) > 1
    for i, th in enumerate(r.throws):
        for lab in th.rejected:
            rejected.append(f"{i + 1}:{lab}" if multi else lab)
            reasons[f"{i + 1}:{lab}" if multi else str(lab)] = th.rejection_reasons[lab]
    cond = r.conditions
    out = {
        "success": r.success,
        "message": r.message,
        "software_version": __version__,
        "drag_coefficient": {
            "value": _f(r.cd),
            "standard_uncertainty": _f(r.u_cd),
            "expanded_uncertainty": _f(r.expanded_uncertainty),
            "coverage_factor": r.coverage_factor,
            "coverage_probability": COVERAGE_PROBABILITY,
            "degrees_of_freedom": r.dof,
            "relative_uncertainty": _f(d["relative_uncertainty"]),
            "at_reynolds_number": _f(d["reynolds_median"]),
            "uncertainty_kind": "statistical (fit) only; see the uncertainty budget for the "
            "combined uncertainty",
        },
        "drag_model": {"name": r.model, "parameters": params},
        "points": {
            "used": int(sum(int(t.used.sum()) for t in r.throws)),
            "total": int(sum(len(t.t) for t in r.throws)),
            "rejected": rejected,
            "rejection_reasons": reasons,
        },
        "residuals": {
            "rms": d["residual_rms"],
            "rms_x": d["residual_rms_x"],
            "rms_y": d["residual_rms_y"],
            "lag1_autocorrelation": d["lag1_autocorrelation"],
            "durbin_watson": d["durbin_watson"],
            "ljung_box_p": _f(d["ljung_box_p"]),
            "reduced_chi_square": d["reduced_chi_square"],
            "sign_runs": d["sign_runs"],
            "sign_runs_expected": d["sign_runs_expected"],
            "noise_model": r.noise["model"],
            "ar1_coefficient": {
                "x": r.noise["ar1_coefficient_x"],
                "y": r.noise["ar1_coefficient_y"],
            },
            "sigma_source": r.noise["sigma_source"],
        },
        "reynolds_number": {
            "min": d["reynolds_min"],
            "max": d["reynolds_max"],
            "median": d["reynolds_median"],
        },
        "launch": {
            "speed": _vu(first.speed, first.speed_uncertainty),
            "angle": _vu(first.angle, first.angle_uncertainty),
            "x0": first.launch.x0,
            "y0": first.launch.y0,
            "vx0": first.launch.vx0,
            "vy0": first.launch.vy0,
        },
        "terminal_speed": _vu(d["terminal_speed"], d["terminal_speed_uncertainty"]),
        "identifiability": {
            "identifiable": d["identifiable"],
            "message": d["identifiability_message"],
            "correlation_cd_speed": _f(d["correlation_cd_speed"]),
            "relative_uncertainty": _f(d["relative_uncertainty"]),
        },
        "throws": [
            {
                "source": th.source,
                "points_used": int(th.used.sum()),
                "points_total": int(len(th.t)),
                "rejected": th.rejected,
                "residual_rms": th.residual_rms,
                "sigma": {"x": th.sigma[0], "y": th.sigma[1]},
                "reynolds_number": {"min": th.reynolds_range[0], "max": th.reynolds_range[1]},
                "launch": {
                    "speed": _vu(th.speed, th.speed_uncertainty),
                    "angle": _vu(th.angle, th.angle_uncertainty),
                    "x0": th.launch.x0,
                    "y0": th.launch.y0,
                    "vx0": th.launch.vx0,
                    "vy0": th.launch.vy0,
                },
            }
            for th in r.throws
        ],
        "inputs": {"sha256": {th.source: th.sha256 for th in r.throws if th.sha256}},
        "conditions": {
            "air_density": cond.air.density,
            "air_viscosity": cond.air.viscosity,
            "gravity": cond.gravity,
            "wind": cond.wind,
            "buoyancy": cond.buoyancy,
            "temperature": cond.air.temperature,
            "pressure": cond.air.pressure,
            "relative_humidity": cond.air.relative_humidity,
        },
        "specimen": r.specimen.to_dict(),
        "fit": {
            "robust": r.options.get("robust"),
            "noise_option": r.options.get("noise"),
            "function_evaluations": d["function_evaluations"],
            "rejection_limit_sigma": d["rejection_limit_sigma"],
            "method": "weighted nonlinear least squares with the simulator's analytic "
            "sensitivities: a Levenberg-Marquardt pass from a drag-free start, a robust "
            "soft-L1 stage (iteratively reweighted) with outlier rejection, Gauss-Newton "
            "re-solves with the noise re-estimated, AR(1) prewhitening when the residuals "
            "are serially correlated, and a last Gauss-Newton re-solve under the final noise "
            "levels",
            "integrator": f"adaptive Dormand-Prince RK5(4) with forward sensitivities, rtol "
            f"{FIT_RTOL:g}, quartic dense output at the sample times",
        },
    }
    if r.lift:
        out["lift_coefficient"] = _vu(*r.parameter("lift_coefficient"))
    if dm.name != "constant":
        res = [d["reynolds_min"], d["reynolds_median"], d["reynolds_max"]]
        cds, us = r.cd_at(res)
        out["drag_coefficient"]["at_reynolds"] = [
            {"reynolds_number": re_, "value": _f(c), "standard_uncertainty": _f(u)}
            for re_, c, u in zip(res, cds, us)
        ]
    return out
