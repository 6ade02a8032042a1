"""Test planning: the drag-coefficient uncertainty a planned series of throws can reach.

Before filming, :func:`plan_test` predicts the standard uncertainty of C_d from the Fisher
information of the flight model [1, 2]

    I = Jᵀ Σ⁻¹ J,

with J = ∂(x, y)/∂θ the sensitivities of the sampled positions to θ = (launch state,
drag parameters[, C_L]) from the simulator's forward sensitivity equations, and Σ the
covariance of the position errors: σ² on the diagonal (white noise) or σ² φ^|i−j| for
first-order autoregressive (AR(1)) tracking noise, applied through the Prais–Winsten
transform [3].  The inverse of I is the Cramér–Rao bound, the smallest covariance an
unbiased fit can reach and the covariance a least-squares fit attains for Gaussian noise;
u(C_d) follows by propagating it through the drag law at the flight's median Reynolds
number (for a constant C_d it is the C_d entry itself).

N throws of the same plan, each with its own launch state and all sharing the drag
parameters, carry N times the information about the shared parameters once each throw's
launch state is eliminated (the Schur complement is additive), so u_N = u_1 / √N exactly.

The planner answers how many throws, or what frame rate over the same time in view, reach
a target u(C_d).  The AR(1) coefficient is taken per frame, unchanged with frame rate.

References
----------
1. H. Cramér, *Mathematical Methods of Statistics*, Princeton University Press 1946,
   §32.3; C. R. Rao, "Information and the accuracy attainable in the estimation of
   statistical parameters", Bull. Calcutta Math. Soc. 37 (1945) 81–91.
2. S. M. Kay, *Fundamentals of Statistical Signal Processing: Estimation Theory*,
   Prentice Hall 1993, eq. (3.31) (Fisher information of a Gaussian model with
   parameter-independent covariance).
3. S. J. Prais and C. B. Winsten, "Trend estimators and serial correlation", Cowles
   Commission Discussion Paper 383 (1954).
4. JCGM 100:2008 (GUM), eq. (13) (propagation of the parameter covariance).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from fitdrag._checks import positive_number as _check_positive
from fitdrag.errors import InputError
from fitdrag.fit.noise import prais_winsten
from fitdrag.physics.forces import Conditions
from fitdrag.physics.registry import get_drag_model
from fitdrag.physics.simulate import FlightModel, Launch
from fitdrag.tracks.track import MIN_POINTS

__all__ = ["PlanResult", "fisher_information", "plan_test"]

_MAX_FPS_FACTOR = 1024.0


def fisher_information(t, specimen, conditions: Conditions, launch: Launch, *,
                       model="constant", drag_params=(0.47,), lift_coefficient: float = 0.0,
                       fit_lift: bool = False, noise: float, ar1: float = 0.0):  # fmt: skip
    """Fisher information of one throw about θ = (x0, y0, vx0, vy0, drag parameters[, C_L]).

    Parameters
    ----------
    t : array_like
        Sample times, equally spaced for AR(1) noise. [s]
    specimen : Sphere or Body
        The specimen.
    conditions : Conditions
        Air, gravity, wind, buoyancy.
    launch : Launch
        Launch position [m] and velocity [m/s] at ``t[0]``.
    model : str or DragModel
        Drag model.
    drag_params : sequence of float
        The model's fitted parameters followed by its constants. [-]
    lift_coefficient : float
        Lift coefficient of the flight. [-]
    fit_lift : bool
        The planned fit also fits C_L.
    noise : float
        Standard deviation of each position coordinate's error. [m]
    ar1 : float
        Lag-1 correlation of successive frames' errors (0 for white noise). [-]

    Returns
    -------
    (tuple of str, ndarray, ndarray)
        Parameter names, the information matrix [1/SI²] and the velocities along the flight
        (n, 2) [m/s].
    """
    m = get_drag_model(model)
    dp = np.atleast_1d(np.asarray(drag_params, dtype=float))
    n_fit = len(m.parameters)
    if dp.size != n_fit + len(m.constants):
        raise InputError(
            f"drag_params: model {m.name!r} takes {n_fit + len(m.constants)} value(s) "
            f"{m.parameters + m.constants}, got {dp.size}."
        )
    fm = FlightModel(t, specimen, conditions, m, dp[n_fit:], fit_lift=fit_lift)
    theta = np.concatenate((launch.as_array(), dp[:n_fit], [lift_coefficient] if fit_lift else []))
    status, _pos, vel, jac, _ = fm.run(theta, True, lift_coefficient)
    if status != 0:
        raise InputError(
            "flight: the planned flight could not be simulated (diverging or stiff); check "
            "the speed, mass and drag coefficient."
        )
    info = np.zeros((fm.n_params, fm.n_params))
    for axis in (0, 1):
        w = prais_winsten(jac[:, axis, :], np.ones(len(jac) - 1, dtype=int), ar1)
        info += w.T @ w
    return fm.parameter_names, info / noise**2, vel


@dataclass(frozen=True, eq=False)
class PlanResult:
    """Predicted uncertainty of a planned test (from :func:`plan_test`).

    Attributes
    ----------
    cd : float
        Drag coefficient of the plan at the flight's median Reynolds number. [-]
    u_cd : float
        Predicted standard uncertainty of C_d for all ``throws``. [-]
    u_cd_per_throw : float
        The same for one throw. [-]
    throws : int
        Number of planned throws.
    noise : float
        Position noise per coordinate. [m]
    ar1 : float
        Lag-1 correlation of successive position errors. [-]
    fps : float
        Frame rate. [Hz]
    frames : int
        Frames in view per throw.
    parameter_names : tuple of str
        Names of θ of one throw.
    covariance : ndarray
        Cramér–Rao covariance of θ for one throw. [SI²]
    reynolds_range : (float, float)
        Reynolds numbers over the planned flight. [-]
    target : float or None
        Target standard uncertainty of C_d. [-]
    throws_needed : int or None
        Throws needed at ``fps`` to reach the target.
    fps_needed : float or None
        Frame rate needed with ``throws`` throws over the same time in view. [Hz]
    frames_needed : int or None
        Frames in view at ``fps_needed``.
    correlation_cd_speed : float
        Correlation of C_d with the launch speed (one throw). [-]
    message : str
        The plan in plain words.
    """

    cd: float
    u_cd: float
    u_cd_per_throw: float
    throws: int
    noise: float
    ar1: float
    fps: float
    frames: int
    parameter_names: tuple[str, ...]
    covariance: np.ndarray = field(repr=False)
    reynolds_range: tuple[float, float]
    target: float | None
    throws_needed: int | None
    fps_needed: float | None
    frames_needed: int | None
    correlation_cd_speed: float
    message: str
    model: str = "constant"
    inputs: dict = field(default_factory=dict, repr=False)

    @property
    def duration(self) -> float:
        """Time in view per throw. [s]"""
        return (self.frames - 1) / self.fps

    @property
    def relative_uncertainty(self) -> float:
        return self.u_cd / abs(self.cd) if self.cd else math.inf

    def standard_uncertainties(self) -> dict[str, float]:
        """Predicted standard uncertainty of every parameter of one throw. [SI]"""
        return {
            n: float(math.sqrt(max(self.covariance[i, i], 0.0)))
            for i, n in enumerate(self.parameter_names)
        }

    def to_dict(self) -> dict:
        def f(v):
            return None if v is None or not math.isfinite(float(v)) else float(v)

        return {
            "synthetic_plan": True,
            "method": "Cramér–Rao bound: inverse Fisher information J^T Σ^-1 J of the flight "
            "model from the simulator's sensitivities",
            "drag_coefficient": {
                "value": f(self.cd),
                "standard_uncertainty": f(self.u_cd),
                "relative_uncertainty": f(self.relative_uncertainty),
                "per_throw_standard_uncertainty": f(self.u_cd_per_throw),
                "at_reynolds_number": f(self.inputs.get("re_median")),
            },
            "drag_model": self.model,
            "throws": self.throws,
            "camera": {"fps": self.fps, "frames": self.frames, "time_in_view": self.duration},
            "noise": {"position": self.noise, "ar1_coefficient": self.ar1},
            "reynolds_number": {"min": self.reynolds_range[0], "max": self.reynolds_range[1]},
            "parameters_per_throw": {
                n: {"standard_uncertainty": u} for n, u in self.standard_uncertainties().items()
            },
            "correlation_cd_speed": f(self.correlation_cd_speed),
            "target": {
                "standard_uncertainty": f(self.target),
                "throws_needed": self.throws_needed,
                "fps_needed": f(self.fps_needed),
                "frames_needed": self.frames_needed,
            },
            "message": self.message,
            "inputs": {k: v for k, v in self.inputs.items() if k != "re_median"},
        }


def _single_throw(specimen, conditions, launch, model, dp, lift_coefficient, fit_lift, noise,
                  ar1, fps, frames):  # fmt: skip
    """(u_cd per throw, cd, names, covariance, Re range, re_median, corr(cd, speed))."""
    t = np.arange(frames) / fps
    names, info, vel = fisher_information(
        t, specimen, conditions, launch, model=model, drag_params=dp,
        lift_coefficient=lift_coefficient, fit_lift=fit_lift, noise=noise, ar1=ar1,
    )  # fmt: skip
    try:
        cov = np.linalg.inv(info)
    except np.linalg.LinAlgError:
        cov = np.full_like(info, np.inf)
    m = get_drag_model(model)
    n_fit = len(m.parameters)
    air = conditions.air
    q = np.hypot(vel[:, 0] - conditions.wind, vel[:, 1])
    re = air.density * q * specimen.length / air.viscosity
    re_med = float(np.median(re))
    grad = np.zeros(max(len(dp), 1))
    cd, _ = m.kernel(re_med, np.asarray(dp, float), grad)
    g = np.zeros(len(names))
    g[4 : 4 + n_fit] = grad[:n_fit]
    var = float(g @ cov @ g)
    u = math.sqrt(var) if math.isfinite(var) and var >= 0 else math.inf
    # correlation of Cd with the launch speed
    sp = launch.speed
    corr = math.nan
    if sp > 0 and math.isfinite(u) and u > 0:
        gs = np.zeros(len(names))
        gs[2], gs[3] = launch.vx0 / sp, launch.vy0 / sp
        us = math.sqrt(max(float(gs @ cov @ gs), 0.0))
        corr = float(g @ cov @ gs) / (u * us) if us > 0 else math.nan
    return u, float(cd), names, cov, (float(re.min()), float(re.max())), re_med, corr


def plan_test(specimen, conditions: Conditions, launch: Launch, *, fps: float, frames: int,
              noise: float, throws: int = 1, model="constant", drag_params: Sequence[float] = (0.47,),
              lift_coefficient: float = 0.0, fit_lift: bool = False, ar1: float = 0.0,
              target: float | None = None) -> PlanResult:  # fmt: skip
    """Predict u(C_d) of a planned series of throws and what reaches a target.

    Parameters
    ----------
    specimen : Sphere or Body
        The specimen.
    conditions : Conditions
        Air, gravity, wind, buoyancy.
    launch : Launch
        Expected launch position [m] and velocity [m/s] (e.g. Launch.from_speed_angle).
    fps : float
        Camera frame rate. [Hz]
    frames : int
        Frames in view per throw, from the launch on.
    noise : float
        Standard deviation of each position coordinate's error; from pixel noise, the
        pixel noise times the scale. [m]
    throws : int
        Number of throws sharing C_d.
    model : str
        Drag model of the planned fit.
    drag_params : sequence of float
        Expected drag parameters followed by the model's constants (constant: C_d). [-]
    lift_coefficient : float
        Expected lift coefficient. [-]
    fit_lift : bool
        The planned fit also fits C_L.
    ar1 : float
        Lag-1 correlation of successive frames' position errors, −1 < ar1 < 1. [-]
    target : float, optional
        Target standard uncertainty of C_d. [-]

    Returns
    -------
    PlanResult
    """
    fps = _check_positive("fps", fps, "Hz", "give the camera frame rate.")
    noise = _check_positive("noise", noise, "m", "give the position noise in metres "
                            "(pixel noise times the scale).")  # fmt: skip
    if isinstance(frames, bool) or int(frames) != frames or frames < MIN_POINTS:
        raise InputError(
            f"frames: need a whole number of at least {MIN_POINTS} frames in view, got "
            f"{frames!r}; film a longer stretch of the flight."
        )
    frames = int(frames)
    if isinstance(throws, bool) or int(throws) != throws or throws < 1:
        raise InputError(f"throws: need a whole number >= 1, got {throws!r}.")
    throws = int(throws)
    ar1 = float(ar1)
    if not (-1.0 < ar1 < 1.0):
        raise InputError(
            f"ar1: the lag-1 noise correlation must lie strictly between -1 and 1, got "
            f"{ar1!r}; use 0 for white noise."
        )
    if target is not None:
        target = _check_positive("target", target, "(Cd units)", "give the wanted u(Cd), "
                                 "e.g. 0.005.")  # fmt: skip
    m = get_drag_model(model)
    dp = tuple(float(v) for v in np.atleast_1d(drag_params))
    args = (specimen, conditions, launch, m, dp, lift_coefficient, fit_lift, noise, ar1)
    u1, cd, names, cov, re_rng, re_med, corr = _single_throw(*args, fps, frames)
    u_n = u1 / math.sqrt(throws)

    throws_needed = fps_needed = frames_needed = None
    if target is not None and math.isfinite(u1):
        throws_needed = max(1, math.ceil((u1 / target) ** 2 - 1e-9))
        duration = (frames - 1) / fps

        def u_at(f):
            n = int(math.floor(duration * f + 1e-9)) + 1
            return _single_throw(*args, f, n)[0] / math.sqrt(throws), n

        if u_n <= target:
            fps_needed, frames_needed = fps, frames
        else:
            lo, hi = fps, None
            f = fps
            while f < fps * _MAX_FPS_FACTOR:
                f *= 2.0
                if u_at(f)[0] <= target:
                    hi = f
                    break
                lo = f
            if hi is not None:
                while hi / lo > 1.005:
                    mid = math.sqrt(lo * hi)
                    if u_at(mid)[0] <= target:
                        hi = mid
                    else:
                        lo = mid
                fps_needed = hi
                frames_needed = u_at(hi)[1]

    message = _message(cd, u_n, u1, throws, fps, frames, noise, ar1, target, throws_needed,
                       fps_needed, frames_needed, corr, m.name)  # fmt: skip
    inputs = {
        "speed": launch.speed, "angle": launch.angle, "x0": launch.x0, "y0": launch.y0,
        "drag_params": list(dp), "lift_coefficient": float(lift_coefficient),
        "fit_lift": bool(fit_lift), "air_density": conditions.air.density,
        "air_viscosity": conditions.air.viscosity, "gravity": conditions.gravity,
        "wind": conditions.wind, "buoyancy": conditions.buoyancy,
        "specimen": specimen.to_dict(), "re_median": re_med,
    }  # fmt: skip
    return PlanResult(
        cd=cd, u_cd=u_n, u_cd_per_throw=u1, throws=throws, noise=noise, ar1=ar1, fps=fps,
        frames=frames, parameter_names=tuple(names), covariance=cov, reynolds_range=re_rng,
        target=target, throws_needed=throws_needed, fps_needed=fps_needed,
        frames_needed=frames_needed, correlation_cd_speed=corr, message=message,
        model=m.name, inputs=inputs,
    )  # fmt: skip


def _message(cd, u_n, u1, throws, fps, frames, noise, ar1, target, throws_needed, fps_needed,
             frames_needed, corr, model) -> str:  # fmt: skip
    dur = (frames - 1) / fps
    noise_txt = f"{1e3 * noise:.3g} mm position noise" + (
        f" (lag-1 correlation {ar1:.2f})" if ar1 else ""
    )
    s = (
        f"predicted u(Cd) = {u_n:.2g} (Cd = {cd:.3g}, relative {100 * u_n / abs(cd):.2g} %) "
        f"for {throws} throw{'s' if throws != 1 else ''} ({u1:.2g} per throw) at "
        f"{fps:.4g} frames/s, {frames} frames ({dur:.3g} s in view), {noise_txt}"
    )
    if model != "constant":
        s += f"; drag model {model}, Cd at the flight's median Reynolds number"
    from fitdrag.fit.fitting import IDENTIFIABILITY_LIMIT

    if not (u_n / abs(cd) <= IDENTIFIABILITY_LIMIT):
        s += (
            f"; DRAG NOT MEASURABLE with this plan (relative uncertainty above "
            f"{100 * IDENTIFIABILITY_LIMIT:.0f} %, correlation of Cd with the launch speed "
            f"{corr:+.2f}): plan a longer or faster flight, more frames or throws, or less noise"
        )
    if target is not None:
        if u_n <= target:
            s += f". The target u(Cd) = {target:.2g} is met"
            if throws_needed is not None and throws_needed < throws:
                s += f" (already with {throws_needed} throw{'s' if throws_needed != 1 else ''})"
        else:
            s += f". To reach u(Cd) = {target:.2g}: {throws_needed} throws at {fps:.4g} frames/s"
            if fps_needed is not None:
                s += (
                    f", or {throws} throw{'s' if throws != 1 else ''} at {fps_needed:.4g} "
                    f"frames/s ({frames_needed} frames over the same {dur:.3g} s)"
                )
            else:
                s += (
                    f"; no frame rate up to {_MAX_FPS_FACTOR:.0f}× the planned one reaches it "
                    f"with {throws} throw{'s' if throws != 1 else ''}"
                )
    return s + "."
