"""Forward simulation of a flight, with exact parameter sensitivities.

The equation of motion of :mod:`fitdrag.physics.forces` is integrated from the launch state at the
first sample time to every sample time by an embedded Runge–Kutta 5(4) pair with
adaptive step size [1], compiled with numba.  When asked, it integrates the forward sensitivity equations [2]

    d/dt S = (∂f/∂s) S + ∂f/∂θ,   S(t0) = ∂s(t0)/∂θ,

alongside the state s = (x, y, v_x, v_y), so that ∂(x, y)/∂θ for θ = (x0, y0, vx0, vy0,
drag parameters[, C_L]) comes from the same integration, with the same error control, as
the positions themselves — not from finite differences of whole runs.  Steps are chosen by
the error control alone; positions at the sample times inside a step come from the pair's
quartic continuous extension [3], so dense sampling costs little.

References
----------
1. J. R. Dormand and P. J. Prince, "A family of embedded Runge–Kutta formulae",
   J. Comput. Appl. Math. 6 (1980) 19–26 (the RK5(4)7M pair); step-size control after
   E. Hairer, S. P. Nørsett, G. Wanner, *Solving Ordinary Differential Equations I*,
   2nd ed., Springer 1993, §II.4.
2. Hairer, Nørsett, Wanner (1993), §I.14 (variational equations / forward sensitivities).
3. L. F. Shampine, "Some practical Runge-Kutta formulas", Math. Comp. 46 (1986) 135–150
   (continuous extension of the Dormand–Prince pair; Hairer et al. 1993, §II.6).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numba
import numpy as np
from numba import types

from fitdrag.errors import InputError
from fitdrag.physics import _dormand_prince as _dp
from fitdrag.physics.drag_model import call_law
from fitdrag.physics.forces import Conditions, drag_factor, net_gravity
from fitdrag.physics.registry import get_drag_model

LAUNCH_NAMES = ("x0", "y0", "vx0", "vy0")

# The Dormand–Prince RK5(4)7M tableau [1] and continuous extension [3], shared with the 3-D
# simulator (fitdrag.physics.flight3d) together with the step control.
_A, _B, _C, _E, _P = _dp.A, _dp.B, _dp.C, _dp.E, _dp.P


@numba.njit(cache=True)
def _rhs(cd_fn, y, p, n_fit, cl, fit_lift, k, g_net, wind, re_fac, n_par, grad, dre, out):
    ux = y[2] - wind
    uy = y[3]
    q = math.sqrt(ux * ux + uy * uy)
    re = re_fac * q
    cd = call_law(cd_fn, re, p, grad, dre)
    dcd_dre = dre[0]
    out[0] = y[2]
    out[1] = y[3]
    out[2] = -k * q * (cd * ux + cl * uy)
    out[3] = -g_net - k * q * (cd * uy - cl * ux)
    if n_par == 0:
        return
    # Jacobian of the acceleration with respect to velocity: -k dG/du,
    # G = q cd u - cl q P u,  dG/du = cd q I + (cd + Re cd') u u^T / q - cl (q P + P u u^T / q)
    if q > 1e-300:
        c1 = (cd + re * dcd_dre) / q
        c2 = cl / q
    else:
        c1 = 0.0
        c2 = 0.0
    g11 = cd * q + c1 * ux * ux - c2 * (-uy * ux)
    g12 = c1 * ux * uy - cl * (-q) - c2 * (-uy * uy)
    g21 = c1 * uy * ux - cl * q - c2 * (ux * ux)
    g22 = cd * q + c1 * uy * uy - c2 * (ux * uy)
    j11 = -k * g11
    j12 = -k * g12
    j21 = -k * g21
    j22 = -k * g22
    for j in range(n_par):
        b = 4 + 4 * j
        svx = y[b + 2]
        svy = y[b + 3]
        out[b] = svx
        out[b + 1] = svy
        ax = j11 * svx + j12 * svy
        ay = j21 * svx + j22 * svy
        m = j - 4
        if 0 <= m < n_fit:
            ax += -k * q * ux * grad[m]
            ay += -k * q * uy * grad[m]
        elif fit_lift and m == n_fit:
            ax += -k * q * uy
            ay += k * q * ux
        out[b + 2] = ax
        out[b + 3] = ay


_F64 = types.float64
_VEC = types.float64[::1]
_MAT = types.float64[:, ::1]
_INTEGRATE_SIGNATURE = types.UniTuple(types.int64, 2)(
    types.int64, _VEC, _VEC, _VEC, types.int64, _F64, types.boolean, _F64, _F64, _F64, _F64,
    types.int64, _F64, _F64, types.int64, _MAT, _MAT, types.float64[:, :, ::1], _MAT, _VEC,
    _VEC, _VEC, _MAT,
)  # fmt: skip


# The drag law arrives as the address of its C callback of fixed signature (called through
# fitdrag.physics.drag_model.call_law), so that the compiled integrator is cached once on
# disk for every drag model and a call passes only numbers and arrays (no per-call typing of
# a function object).  It is compiled (or loaded from the on-disk cache) on first use, not
# at import: see _compiled_integrator.
def _integrate(
    cd_fn, t_out, s0, p, n_fit, cl, fit_lift, k, g_net, wind, re_fac, n_par,
    rtol, atol, max_steps, pos, vel, sens, A, B, C, E, P,
):  # fmt: skip
    n = t_out.shape[0]
    dim = 4 + 4 * n_par
    y = np.zeros(dim)
    y[:4] = s0
    for j in range(min(n_par, 4)):
        y[4 + 4 * j + j] = 1.0
    grad = np.zeros(max(p.shape[0], 1))
    dre = np.zeros(1)
    ks = np.zeros((7, dim))
    ytmp = np.zeros(dim)
    ynew = np.zeros(dim)
    _rhs(cd_fn, y, p, n_fit, cl, fit_lift, k, g_net, wind, re_fac, n_par, grad, dre, ks[0])

    def record(i, yy):
        pos[i, 0] = yy[0]
        pos[i, 1] = yy[1]
        vel[i, 0] = yy[2]
        vel[i, 1] = yy[3]
        for j in range(n_par):
            sens[i, 0, j] = yy[4 + 4 * j]
            sens[i, 1, j] = yy[4 + 4 * j + 1]

    record(0, y)
    t = t_out[0]
    if n == 1:
        return 0, 0
    # initial step (Hairer et al. 1993, II.4, simplified)
    h = _dp.initial_step(y, ks[0], rtol, atol)
    t_end = t_out[n - 1]
    h = min(h, t_end - t)
    steps = 0
    i_next = 1
    ys = np.zeros(dim)
    while i_next < n:
        last = False
        h_try = h
        if t + h_try >= t_end - 1e-14 * abs(t_end):
            h_try = t_end - t
            last = True
        for s in range(1, 7):
            _dp.stage_state(y, ks, s, h_try, A, ytmp)
            _rhs(
                cd_fn, ytmp, p, n_fit, cl, fit_lift, k, g_net, wind, re_fac, n_par, grad, dre, ks[s]
            )
        # ks[6] is f(t + h, y_new) since A[6] == B (FSAL)
        for i in range(dim):
            ynew[i] = ytmp[i]
        err = _dp.error_norm(y, ynew, ks, h_try, E, rtol, atol)
        steps += 1
        if steps > max_steps or not math.isfinite(err):
            return 1, steps
        if err <= 1.0:
            t_new = t_end if last else t + h_try
            # samples inside (t, t_new]: the step's quartic continuous extension [3]
            while i_next < n and (last or t_out[i_next] < t_new):
                if last and i_next == n - 1:
                    break
                th = (t_out[i_next] - t) / h_try
                _dp.dense_output(y, ks, h_try, th, P, ys)
                record(i_next, ys)
                i_next += 1
            if t_out[i_next] == t_new or (last and i_next == n - 1):
                record(i_next, ynew)
                i_next += 1
            t = t_new
            for i in range(dim):
                y[i] = ynew[i]
                ks[0, i] = ks[6, i]
            h = h_try * _dp.accepted_step_factor(err)
        else:
            h = h_try * _dp.rejected_step_factor(err)
            if h < 1e-14 * max(1.0, abs(t)):
                return 2, steps
    return 0, steps


@functools.cache
def _compiled_integrator():
    """The integrator compiled for its one signature (from numba's disk cache when present)."""
    return numba.njit(_INTEGRATE_SIGNATURE, cache=True)(_integrate)


@dataclass(frozen=True)
class Launch:
    """Launch state at the first sample time.

    Parameters
    ----------
    x0, y0 : float
        Position, world frame, y up. [m]
    vx0, vy0 : float
        Velocity. [m/s]
    """

    x0: float
    y0: float
    vx0: float
    vy0: float

    @classmethod
    def from_speed_angle(cls, speed: float, angle: float, x0: float = 0.0, y0: float = 0.0):
        """Launch from a speed and an angle.

        Parameters
        ----------
        speed : float
            Launch speed. [m/s]
        angle : float
            Launch angle above the horizontal. [deg]
        x0, y0 : float
            Launch position, world frame, y up. [m]
        """
        a = math.radians(angle)
        return cls(float(x0), float(y0), speed * math.cos(a), speed * math.sin(a))

    @property
    def speed(self) -> float:
        """Launch speed. [m/s]"""
        return math.hypot(self.vx0, self.vy0)

    @property
    def angle(self) -> float:
        """Launch angle above the horizontal. [deg]"""
        return math.degrees(math.atan2(self.vy0, self.vx0))

    def as_array(self) -> np.ndarray:
        return np.array([self.x0, self.y0, self.vx0, self.vy0], dtype=float)


@dataclass(frozen=True, eq=False)
class Flight:
    """Result of :func:`simulate`.

    Attributes
    ----------
    t : ndarray
        Sample times. [s]
    x, y : ndarray
        Positions. [m]
    vx, vy : ndarray
        Velocities. [m/s]
    jacobian : ndarray or None
        ∂(x, y)/∂θ at each sample, shape (n, 2, n_params); None unless asked for.
    parameter_names : tuple of str
        Names of θ in the order of the Jacobian's last axis.
    success : bool
        False when the integrator failed (step too small, too many steps, overflow).
    message : str
    steps : int
        Accepted and rejected steps taken.
    """

    t: np.ndarray
    x: np.ndarray
    y: np.ndarray
    vx: np.ndarray
    vy: np.ndarray
    jacobian: np.ndarray | None
    parameter_names: tuple[str, ...]
    success: bool
    message: str
    steps: int


def model_and_constants(model, constants) -> tuple:
    """The registered drag model and its constants as an array, checked to match in number.

    Shared by the planar and the 3-D simulators.
    """
    m = get_drag_model(model)
    c = np.asarray(constants, dtype=float).reshape(-1)
    if c.size != len(m.constants):
        raise InputError(
            f"constants: drag model {m.name!r} needs {len(m.constants)} "
            f"constant(s) {m.constants}, got {c.size}; pass them in "
            f"that order (DragModel.constants_for(re_values) computes them from a flight)."
        )
    return m, c


def flight_coefficients(specimen, conditions: Conditions) -> tuple[float, float, float]:
    """The integrators' constants: drag factor ½ρA/m_eff [1/m], net gravity [m/s²] and the
    Reynolds factor ρL/μ [s/m] (Re = factor × air speed); see :mod:`fitdrag.physics.forces`.

    Shared by the planar and the 3-D simulators.
    """
    air = conditions.air
    return (
        drag_factor(specimen, air.density),
        net_gravity(specimen, conditions),
        air.density * specimen.length / air.viscosity,
    )


class FlightModel:
    """A prepared simulation problem: fixed times, specimen, conditions and drag model.

    Calling :meth:`run` with a parameter vector θ = (x0, y0, vx0, vy0, drag parameters
    [, C_L]) integrates once; this is the fit's hot path, so it does no validation.

    Parameters
    ----------
    t : array_like
        Sample times, strictly increasing; the launch state is given at ``t[0]``. [s]
    specimen : Sphere or Body
        The specimen.
    conditions : Conditions
        Air, gravity, wind, buoyancy.
    model : str or DragModel
        Drag model name or object.
    constants : sequence of float
        Values of the drag model's constants (e.g. the reference Reynolds number).
    fit_lift : bool
        Include the lift coefficient C_L as the last parameter of θ.
    rtol, atol : float
        Integrator tolerances on the state and sensitivities: relative [-], and absolute in
        the SI unit of each component (m, m/s, and m or s per unit parameter). [-], [SI]
    """

    def __init__(self, t, specimen, conditions: Conditions, model="constant", constants=(),
                 fit_lift: bool = False, rtol: float = 1e-10, atol: float = 1e-10,
                 max_steps: int = 2_000_000):  # fmt: skip
        self.t = np.array(t, dtype=float)  # a writable copy (numba's signature wants one)
        if self.t.ndim != 1 or self.t.size < 1:
            raise InputError(
                f"t: expected a non-empty 1-D array of sample times in seconds, got shape "
                f"{self.t.shape}; pass one time per sample."
            )
        if np.any(np.diff(self.t) <= 0) or not np.all(np.isfinite(self.t)):
            bad = int(np.flatnonzero(~np.isfinite(self.t) | np.r_[False, np.diff(self.t) <= 0])[0])
            raise InputError(
                f"t: sample times must be finite and strictly increasing; t[{bad}] = "
                f"{float(self.t[bad])!r}; sort the samples and drop repeated or missing times."
            )
        self.model, self.constants = model_and_constants(model, constants)
        self.specimen = specimen
        self.conditions = conditions
        self.fit_lift = bool(fit_lift)
        self.n_fit = len(self.model.parameters)
        self.parameter_names = (
            LAUNCH_NAMES + self.model.parameters + (("lift_coefficient",) if fit_lift else ())
        )
        self.k, self.g_net, self.re_fac = flight_coefficients(specimen, conditions)
        self.rtol = float(rtol)
        self.atol = float(atol)
        self.max_steps = int(max_steps)

    @property
    def n_params(self) -> int:
        return len(self.parameter_names)

    def run(self, theta, sensitivities: bool = True, lift_coefficient: float = 0.0):
        """Integrate with θ; returns (status, positions (n, 2), velocities (n, 2), jacobian).

        ``lift_coefficient`` is used when C_L is not part of θ.
        """
        theta = np.asarray(theta, dtype=float)
        s0 = np.array(theta[:4], dtype=float)
        p = np.concatenate((theta[4 : 4 + self.n_fit], self.constants))
        cl = float(theta[4 + self.n_fit]) if self.fit_lift else float(lift_coefficient)
        n = self.t.size
        n_par = self.n_params if sensitivities else 0
        pos = np.empty((n, 2))
        vel = np.empty((n, 2))
        sens = np.empty((n, 2, max(n_par, 1)))
        status, steps = _compiled_integrator()(
            self.model.callback.address, self.t, s0, p, self.n_fit, cl, self.fit_lift, self.k,
            self.g_net, self.conditions.wind, self.re_fac, n_par, self.rtol, self.atol,
            self.max_steps, pos, vel, sens, _A, _B, _C, _E, _P,
        )  # fmt: skip
        return status, pos, vel, (sens[:, :, :n_par] if sensitivities else None), steps


_STATUS = {
    0: "integration completed",
    1: "integration failed: too many steps or a non-finite state (diverging flight?)",
    2: "integration failed: step size underflow (stiff or singular flight)",
}


def drag_values(model, drag_params):
    """The drag model and its values (fitted parameters, then constants), checked.

    Parameters
    ----------
    model : str or DragModel
        Drag model name or object.
    drag_params : float or sequence of float
        The model's fitted parameters followed by its constants.

    Returns
    -------
    (DragModel, ndarray)
    """
    m = get_drag_model(model)
    dp = np.atleast_1d(np.asarray(drag_params, dtype=float))
    n_fit = len(m.parameters)
    if dp.size != n_fit + len(m.constants):
        raise InputError(
            f"drag_params: model {m.name!r} takes {n_fit + len(m.constants)} value(s) "
            f"{m.parameters + m.constants}, got {dp.size}; give the fitted parameters, then the "
            f"constants, in that order."
        )
    if not np.all(np.isfinite(dp)):
        raise InputError(
            f"drag_params: must be finite, got {dp.tolist()}; check the drag coefficient given."
        )
    return m, dp


def simulate(t, launch: Launch, specimen, conditions: Conditions, *, model="constant",
             drag_params=(0.47,), lift_coefficient: float = 0.0, sensitivities: bool = False,
             fit_lift: bool = False, rtol: float = 1e-10, atol: float = 1e-10) -> Flight:  # fmt: skip
    """Positions (and optionally their sensitivities) of a flight at the sample times.

    Parameters
    ----------
    t : array_like
        Sample times, strictly increasing; the launch state holds at ``t[0]``. [s]
    launch : Launch
        Position [m] and velocity [m/s] at ``t[0]``.
    specimen : Sphere or Body
        The specimen.
    conditions : Conditions
        Air, gravity, wind, buoyancy.
    model : str or DragModel
        Drag model (default constant C_d).
    drag_params : float or sequence of float
        The drag model's fitted parameters followed by its constants (for ``constant``: C_d).
    lift_coefficient : float
        Lift coefficient C_L (positive lifts a specimen moving in +x). [-]
    sensitivities : bool
        Also return ∂(x, y)/∂θ, θ = (x0, y0, vx0, vy0, drag parameters[, C_L]).
    fit_lift : bool
        Include C_L in θ (for the Jacobian).
    rtol, atol : float
        Integrator tolerances: relative [-] and absolute [SI unit of each state component].

    Returns
    -------
    Flight
    """
    m, dp = drag_values(model, drag_params)
    n_fit = len(m.parameters)
    fm = FlightModel(t, specimen, conditions, m, dp[n_fit:], fit_lift, rtol, atol)
    theta = np.concatenate((launch.as_array(), dp[:n_fit], [lift_coefficient] if fit_lift else []))
    status, pos, vel, jac, steps = fm.run(theta, sensitivities, lift_coefficient)
    return Flight(
        t=fm.t.copy(), x=pos[:, 0], y=pos[:, 1], vx=vel[:, 0], vy=vel[:, 1],
        jacobian=jac, parameter_names=fm.parameter_names, success=status == 0,
        message=_STATUS[status], steps=steps,
    )  # fmt: skip
