"""Forward simulation of a flight in three dimensions, with exact parameter sensitivities.

The world frame is the marker board's: x along the board, y up, z towards the camera.  The
equation of motion of :mod:`fitdrag.physics.forces`, written for vectors, is

    (m + C_a ρ V) dv/dt = (m − ρ V) g − ½ ρ A |u| (C_d u − C_L ŝ × u),    u = v − w,

with g = (0, −g, 0), a constant wind vector w, a unit spin axis ŝ (the lift acts along
ŝ × u, perpendicular to the air speed; ŝ = +z gives the planar simulator's lift, a positive
C_L lifting a specimen moving in +x) and C_d from any registered drag model of the Reynolds
number Re = ρ |u| L / μ [1–3].  Buoyancy, added mass and the drag factor come from
:func:`~fitdrag.physics.forces.net_gravity`, :func:`~fitdrag.physics.forces.effective_mass`
and :func:`~fitdrag.physics.forces.drag_factor`.

The state s = (x, y, z, v_x, v_y, v_z) is integrated from the launch time to every sample
time by the Dormand–Prince RK5(4) pair with adaptive steps [4] (the tableau and the step
control shared with :mod:`fitdrag.physics.simulate`), and with it, when asked, the forward
sensitivity equations [5]

    d/dt S = (∂f/∂s) S + ∂f/∂θ,   S(t0) = ∂s(t0)/∂θ,

for θ = (x0, y0, z0, vx0, vy0, vz0, drag parameters[, C_L]), so that ∂(position,
velocity)/∂θ comes from the same integration, with the same error control, as the state.
Sample times need only be sorted (equal times allowed: several cameras, rolling-shutter row
times); inside a step they come from the pair's quartic continuous extension [6].

References
----------
1. P. Timmerman and J. P. van der Weele, "On the rise and fall of a ball with linear or
   quadratic drag", Am. J. Phys. 67, 538 (1999): the equation with buoyancy and added mass.
2. H. Lamb, *Hydrodynamics*, 6th ed., 1932, §92: added mass ½ ρ V of a sphere.
3. B. R. Munson et al., *Fundamentals of Fluid Mechanics*, Wiley: drag ½ ρ C_d A |u|², lift
   ½ ρ C_L A |u|² perpendicular to the air speed.
4. J. R. Dormand and P. J. Prince, J. Comput. Appl. Math. 6 (1980) 19–26; step control after
   E. Hairer, S. P. Nørsett, G. Wanner, *Solving Ordinary Differential Equations I*,
   2nd ed., Springer 1993, §II.4.
5. Hairer, Nørsett, Wanner (1993), §I.14 (variational equations / forward sensitivities).
6. L. F. Shampine, "Some practical Runge-Kutta formulas", Math. Comp. 46 (1986) 135–150.
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
from fitdrag.physics.forces import Conditions
from fitdrag.physics.simulate import (
    Launch,
    drag_values,
    flight_coefficients,
    model_and_constants,
)

__all__ = ["LAUNCH_NAMES_3D", "Flight3D", "FlightModel3D", "Launch3D", "simulate_3d"]

LAUNCH_NAMES_3D = ("x0", "y0", "z0", "vx0", "vy0", "vz0")


@numba.njit(cache=True)
def _rhs3(cd_fn, y, p, n_fit, cl, fit_lift, k, g_net, w, ax_, re_fac, n_par, grad, dre, out):
    ux = y[3] - w[0]
    uy = y[4] - w[1]
    uz = y[5] - w[2]
    sx = ax_[0]
    sy = ax_[1]
    sz = ax_[2]
    q = math.sqrt(ux * ux + uy * uy + uz * uz)
    re = re_fac * q
    cd = call_law(cd_fn, re, p, grad, dre)
    dcd_dre = dre[0]
    # c = ŝ × u
    cx = sy * uz - sz * uy
    cy = sz * ux - sx * uz
    cz = sx * uy - sy * ux
    out[0] = y[3]
    out[1] = y[4]
    out[2] = y[5]
    out[3] = -k * q * (cd * ux - cl * cx)
    out[4] = -g_net - k * q * (cd * uy - cl * cy)
    out[5] = -k * q * (cd * uz - cl * cz)
    if n_par == 0:
        return
    # ∂a/∂v = −k dG/du,  G = q C_d u − C_L q S u  (S u = ŝ × u):
    # dG/du = C_d q I + (C_d + Re C_d') u uᵀ / q − C_L (q S + (S u) uᵀ / q)
    if q > 1e-300:
        c1 = (cd + re * dcd_dre) / q
        c2 = cl / q
    else:
        c1 = 0.0
        c2 = 0.0
    clq = cl * q
    j00 = -k * (cd * q + c1 * ux * ux - c2 * cx * ux)
    j01 = -k * (c1 * ux * uy + clq * sz - c2 * cx * uy)
    j02 = -k * (c1 * ux * uz - clq * sy - c2 * cx * uz)
    j10 = -k * (c1 * uy * ux - clq * sz - c2 * cy * ux)
    j11 = -k * (cd * q + c1 * uy * uy - c2 * cy * uy)
    j12 = -k * (c1 * uy * uz + clq * sx - c2 * cy * uz)
    j20 = -k * (c1 * uz * ux + clq * sy - c2 * cz * ux)
    j21 = -k * (c1 * uz * uy - clq * sx - c2 * cz * uy)
    j22 = -k * (cd * q + c1 * uz * uz - c2 * cz * uz)
    kq = k * q
    for j in range(n_par):
        b = 6 + 6 * j
        svx = y[b + 3]
        svy = y[b + 4]
        svz = y[b + 5]
        out[b] = svx
        out[b + 1] = svy
        out[b + 2] = svz
        a0 = j00 * svx + j01 * svy + j02 * svz
        a1 = j10 * svx + j11 * svy + j12 * svz
        a2 = j20 * svx + j21 * svy + j22 * svz
        m = j - 6
        if 0 <= m < n_fit:
            a0 -= kq * ux * grad[m]
            a1 -= kq * uy * grad[m]
            a2 -= kq * uz * grad[m]
        elif fit_lift and m == n_fit:
            a0 += kq * cx
            a1 += kq * cy
            a2 += kq * cz
        out[b + 3] = a0
        out[b + 4] = a1
        out[b + 5] = a2


_F64 = types.float64
_VEC = types.float64[::1]
_MAT = types.float64[:, ::1]
_INTEGRATE3_SIGNATURE = types.UniTuple(types.int64, 2)(
    types.int64, _F64, _VEC, _VEC, _VEC, types.int64, _F64, types.boolean, _F64, _F64, _VEC,
    _VEC, _F64, types.int64, _F64, _F64, types.int64, _MAT, _MAT, types.float64[:, :, ::1],
    _MAT, _VEC, _MAT,
)  # fmt: skip


# As in fitdrag.physics.simulate: the drag law arrives as the address of its fixed-signature
# C callback, so the integrator is compiled once (on first use, see _compiled_integrator_3d)
# and cached on disk for every drag model.
def _integrate3(
    cd_fn, t0, t_out, s0, p, n_fit, cl, fit_lift, k, g_net, wind, axis, re_fac, n_par,
    rtol, atol, max_steps, pos, vel, sens, A, E, P,
):  # fmt: skip
    n = t_out.shape[0]
    dim = 6 + 6 * n_par
    y = np.zeros(dim)
    y[:6] = s0
    for j in range(min(n_par, 6)):
        y[6 + 6 * j + j] = 1.0
    grad = np.zeros(max(p.shape[0], 1))
    dre = np.zeros(1)
    ks = np.zeros((7, dim))
    ytmp = np.zeros(dim)
    ynew = np.zeros(dim)
    ys = np.zeros(dim)

    def record(i, yy):
        for c in range(3):
            pos[i, c] = yy[c]
            vel[i, c] = yy[3 + c]
        for j in range(n_par):
            for c in range(6):
                sens[i, c, j] = yy[6 + 6 * j + c]

    i_next = 0
    while i_next < n and t_out[i_next] == t0:
        record(i_next, y)
        i_next += 1
    if i_next == n:
        return 0, 0
    _rhs3(cd_fn, y, p, n_fit, cl, fit_lift, k, g_net, wind, axis, re_fac, n_par, grad, dre, ks[0])
    t = t0
    t_end = t_out[n - 1]
    h = min(_dp.initial_step(y, ks[0], rtol, atol), t_end - t)
    steps = 0
    while i_next < n:
        last = False
        h_try = h
        if t + h_try >= t_end - 1e-14 * abs(t_end):
            h_try = t_end - t
            last = True
        for s in range(1, 7):
            _dp.stage_state(y, ks, s, h_try, A, ytmp)
            _rhs3(
                cd_fn, ytmp, p, n_fit, cl, fit_lift, k, g_net, wind, axis, re_fac, n_par, grad,
                dre, ks[s],
            )  # fmt: skip
        # ks[6] is f(t + h, y_new) since A[6] == B (FSAL)
        for i in range(dim):
            ynew[i] = ytmp[i]
        err = _dp.error_norm(y, ynew, ks, h_try, E, rtol, atol)
        steps += 1
        if steps > max_steps or not math.isfinite(err):
            return 1, steps
        if err <= 1.0:
            t_new = t_end if last else t + h_try
            # samples inside (t, t_new): the step's quartic continuous extension
            while i_next < n and t_out[i_next] < t_new:
                _dp.dense_output(y, ks, h_try, (t_out[i_next] - t) / h_try, P, ys)
                record(i_next, ys)
                i_next += 1
            while i_next < n and t_out[i_next] == t_new:
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
def _compiled_integrator_3d():
    """The 3-D integrator compiled for its one signature (from numba's disk cache if present)."""
    return numba.njit(_INTEGRATE3_SIGNATURE, cache=True)(_integrate3)


# --------------------------------------------------------------------------- inputs


def _vector3(name: str, value, unit: str, fix: str) -> np.ndarray:
    try:
        v = np.array(value, dtype=float).reshape(-1)
    except (TypeError, ValueError):
        raise InputError(f"{name}: expected 3 numbers in {unit}, got {value!r}; {fix}") from None
    if v.size != 3 or not np.all(np.isfinite(v)):
        raise InputError(
            f"{name}: expected 3 finite numbers in {unit}, got {np.asarray(value).tolist()!r}; "
            f"{fix}"
        )
    return v


def _spin_axis(value) -> np.ndarray:
    fix = "give the direction of the spin axis, e.g. (0, 0, 1) for lift in the x–y plane."
    v = _vector3("spin_axis", value, "[-]", fix)
    norm = math.sqrt(float(v @ v))
    if norm == 0.0:
        raise InputError(f"spin_axis: must be a non-zero vector, got {v.tolist()!r}; {fix}")
    return v / norm


def _sample_times(t) -> np.ndarray:
    t = np.array(t, dtype=float)  # a writable copy (numba's signature wants one)
    if t.ndim != 1 or t.size < 1:
        raise InputError(
            f"t: expected a non-empty 1-D array of sample times in seconds, got shape "
            f"{t.shape}; pass one time per sample."
        )
    bad = ~np.isfinite(t) | np.r_[False, np.diff(t) < 0]
    if np.any(bad):
        i = int(np.flatnonzero(bad)[0])
        raise InputError(
            f"t: sample times must be finite and in non-decreasing order; t[{i}] = "
            f"{float(t[i])!r}; sort the samples by time (equal times are allowed)."
        )
    return t


@dataclass(frozen=True)
class Launch3D:
    """Launch state at the launch time, world frame (x along the board, y up, z to the camera).

    Parameters
    ----------
    x0, y0, z0 : float
        Position. [m]
    vx0, vy0, vz0 : float
        Velocity. [m/s]
    """

    x0: float
    y0: float
    z0: float
    vx0: float
    vy0: float
    vz0: float

    def __post_init__(self) -> None:
        for name in LAUNCH_NAMES_3D:
            value = getattr(self, name)
            unit = "m" if name.endswith("0") and not name.startswith("v") else "m/s"
            try:
                v = float(value)
            except (TypeError, ValueError):
                raise InputError(
                    f"{name}: expected a number in {unit}, got {value!r}; give the launch state "
                    f"as finite numbers."
                ) from None
            if not math.isfinite(v):
                raise InputError(
                    f"{name}: must be a finite number in {unit}, got {value!r}; give the launch "
                    f"state as finite numbers."
                )
            object.__setattr__(self, name, v)

    @classmethod
    def from_speed_angles(cls, speed: float, elevation: float, azimuth: float = 0.0,
                          x0: float = 0.0, y0: float = 0.0, z0: float = 0.0) -> Launch3D:  # fmt: skip
        """Launch from a speed, an elevation and an azimuth out of the board plane.

        v = speed (cos e cos a, sin e, cos e sin a).

        Parameters
        ----------
        speed : float
            Launch speed. [m/s]
        elevation : float
            Angle of the velocity above the horizontal plane (x–z). [deg]
        azimuth : float
            Angle of the horizontal velocity out of the board plane (x–y), positive towards
            the camera (+z). [deg]
        x0, y0, z0 : float
            Launch position. [m]
        """
        e = math.radians(elevation)
        a = math.radians(azimuth)
        return cls(x0, y0, z0, speed * math.cos(e) * math.cos(a), speed * math.sin(e),
                   speed * math.cos(e) * math.sin(a))  # fmt: skip

    @classmethod
    def from_planar(cls, launch: Launch, z0: float = 0.0, vz0: float = 0.0) -> Launch3D:
        """The planar launch (x0, y0, vx0, vy0) [m, m/s] with depth z0 [m] and vz0 [m/s]."""
        return cls(launch.x0, launch.y0, z0, launch.vx0, launch.vy0, vz0)

    @property
    def speed(self) -> float:
        """Launch speed. [m/s]"""
        return math.sqrt(self.vx0**2 + self.vy0**2 + self.vz0**2)

    def as_array(self) -> np.ndarray:
        return np.array([getattr(self, n) for n in LAUNCH_NAMES_3D], dtype=float)


@dataclass(frozen=True, eq=False)
class Flight3D:
    """Result of :func:`simulate_3d`.

    Attributes
    ----------
    t : ndarray
        Sample times. [s]
    position : ndarray
        (x, y, z) at each sample, shape (n, 3). [m]
    velocity : ndarray
        (v_x, v_y, v_z) at each sample, shape (n, 3). [m/s]
    jacobian : ndarray or None
        ∂position/∂θ, shape (n, 3, n_params); None unless asked for.
    velocity_jacobian : ndarray or None
        ∂velocity/∂θ, shape (n, 3, n_params); None unless asked for.
    parameter_names : tuple of str
        Names of θ in the order of the Jacobians' last axis.
    success : bool
        False when the integrator failed (step too small, too many steps, overflow).
    message : str
    steps : int
        Accepted and rejected steps taken.
    """

    t: np.ndarray
    position: np.ndarray
    velocity: np.ndarray
    jacobian: np.ndarray | None
    velocity_jacobian: np.ndarray | None
    parameter_names: tuple[str, ...]
    success: bool
    message: str
    steps: int

    @property
    def x(self) -> np.ndarray:
        """Position along the board. [m]"""
        return self.position[:, 0]

    @property
    def y(self) -> np.ndarray:
        """Height. [m]"""
        return self.position[:, 1]

    @property
    def z(self) -> np.ndarray:
        """Depth, towards the camera. [m]"""
        return self.position[:, 2]


class FlightModel3D:
    """A prepared 3-D simulation: fixed times, specimen, conditions, wind, spin axis, drag model.

    Calling :meth:`run` with θ = (x0, y0, z0, vx0, vy0, vz0, drag parameters[, C_L])
    integrates once; this is the fit's hot path, so it does no validation.

    Parameters
    ----------
    t : array_like
        Sample times, sorted (equal times allowed). [s]
    specimen : Sphere or Body
        The specimen.
    conditions : Conditions
        Air, gravity, buoyancy (and a wind along +x when ``wind`` is not given).
    model : str or DragModel
        Drag model name or object.
    constants : sequence of float
        Values of the drag model's constants (e.g. the reference Reynolds number).
    fit_lift : bool
        Include the lift coefficient C_L as the last parameter of θ.
    wind : sequence of 3 float, optional
        Constant wind velocity (w_x, w_y, w_z); default (conditions.wind, 0, 0). Give it
        only with ``conditions.wind == 0``. [m/s]
    spin_axis : sequence of 3 float
        Direction of the spin axis ŝ (normalised here); lift acts along ŝ × u. [-]
    t0 : float, optional
        Launch time, at or before ``t[0]``; default ``t[0]``. [s]
    rtol, atol : float
        Integrator tolerances: relative [-], and absolute in the SI unit of each state and
        sensitivity component. [-], [SI]
    max_steps : int
        Steps (accepted and rejected) before the run is reported as failed.
    """

    def __init__(self, t, specimen, conditions: Conditions, model="constant", constants=(),
                 fit_lift: bool = False, *, wind=None, spin_axis=(0.0, 0.0, 1.0), t0=None,
                 rtol: float = 1e-10, atol: float = 1e-10,
                 max_steps: int = 2_000_000):  # fmt: skip
        self.t = _sample_times(t)
        if t0 is None:
            self.t0 = float(self.t[0])
        else:
            self.t0 = float(t0)
            if not (math.isfinite(self.t0) and self.t0 <= self.t[0]):
                raise InputError(
                    f"t0: the launch time must be finite and no later than the first sample "
                    f"time {float(self.t[0])!r} s, got {t0!r}; give the launch time at or "
                    f"before the first sample."
                )
        self.model, self.constants = model_and_constants(model, constants)
        if wind is None:
            self.wind = np.array([conditions.wind, 0.0, 0.0])
        else:
            self.wind = _vector3(
                "wind", wind, "m/s", "give the wind velocity (w_x, w_y, w_z), (0, 0, 0) for "
                "still air."
            )  # fmt: skip
            if conditions.wind != 0.0:
                raise InputError(
                    f"wind: given both as a vector {self.wind.tolist()!r} m/s and as "
                    f"Conditions.wind = {conditions.wind!r} m/s; give it once (the vector, "
                    f"with Conditions(wind=0))."
                )
        self.spin_axis = _spin_axis(spin_axis)
        self.specimen = specimen
        self.conditions = conditions
        self.fit_lift = bool(fit_lift)
        self.n_fit = len(self.model.parameters)
        self.parameter_names = (
            LAUNCH_NAMES_3D + self.model.parameters + (("lift_coefficient",) if fit_lift else ())
        )
        self.k, self.g_net, self.re_fac = flight_coefficients(specimen, conditions)
        self.rtol = float(rtol)
        self.atol = float(atol)
        self.max_steps = int(max_steps)

    @property
    def n_params(self) -> int:
        return len(self.parameter_names)

    def run(self, theta, sensitivities: bool = True, lift_coefficient: float = 0.0):
        """Integrate with θ.

        Returns (status, positions (n, 3) [m], velocities (n, 3) [m/s], jacobian, steps);
        ``jacobian`` is ∂(x, y, z, v_x, v_y, v_z)/∂θ, shape (n, 6, n_params), or None.
        ``lift_coefficient`` is used when C_L is not part of θ. Status 0 is success.
        """
        theta = np.asarray(theta, dtype=float)
        s0 = np.array(theta[:6], dtype=float)
        p = np.concatenate((theta[6 : 6 + self.n_fit], self.constants))
        cl = float(theta[6 + self.n_fit]) if self.fit_lift else float(lift_coefficient)
        n = self.t.size
        n_par = self.n_params if sensitivities else 0
        pos = np.empty((n, 3))
        vel = np.empty((n, 3))
        sens = np.empty((n, 6, max(n_par, 1)))
        status, steps = _compiled_integrator_3d()(
            self.model.callback.address, self.t0, self.t, s0, p, self.n_fit, cl, self.fit_lift, self.k,
            self.g_net, self.wind, self.spin_axis, self.re_fac, n_par, self.rtol, self.atol,
            self.max_steps, pos, vel, sens, _dp.A, _dp.E, _dp.P,
        )  # fmt: skip
        return status, pos, vel, (sens[:, :, :n_par] if sensitivities else None), steps


_STATUS = {
    0: "integration completed",
    1: "integration failed: too many steps or a non-finite state (diverging flight?)",
    2: "integration failed: step size underflow (stiff or singular flight)",
}


def simulate_3d(t, launch: Launch3D, specimen, conditions: Conditions, *, model="constant",
                drag_params=(0.47,), lift_coefficient: float = 0.0, spin_axis=(0.0, 0.0, 1.0),
                wind=None, t0=None, sensitivities: bool = False, fit_lift: bool = False,
                rtol: float = 1e-10, atol: float = 1e-10) -> Flight3D:  # fmt: skip
    """Positions and velocities (and optionally their sensitivities) of a 3-D flight.

    Parameters
    ----------
    t : array_like
        Sample times, sorted (equal times allowed). [s]
    launch : Launch3D
        Position [m] and velocity [m/s] at the launch time ``t0``.
    specimen : Sphere or Body
        The specimen.
    conditions : Conditions
        Air, gravity, buoyancy (and a wind along +x when ``wind`` is not given).
    model : str or DragModel
        Drag model (default constant C_d).
    drag_params : float or sequence of float
        The drag model's fitted parameters followed by its constants (for ``constant``: C_d).
    lift_coefficient : float
        Lift coefficient C_L; lift ½ ρ C_L A |u| ŝ × u. [-]
    spin_axis : sequence of 3 float
        Direction of the spin axis ŝ, normalised here; (0, 0, 1) is the planar case. [-]
    wind : sequence of 3 float, optional
        Constant wind velocity (w_x, w_y, w_z); default (conditions.wind, 0, 0). [m/s]
    t0 : float, optional
        Launch time, at or before ``t[0]``; default ``t[0]``. [s]
    sensitivities : bool
        Also return ∂position/∂θ and ∂velocity/∂θ, θ = (x0, y0, z0, vx0, vy0, vz0, drag
        parameters[, C_L]).
    fit_lift : bool
        Include C_L in θ (for the Jacobians).
    rtol, atol : float
        Integrator tolerances: relative [-] and absolute [SI unit of each state component].

    Returns
    -------
    Flight3D
    """
    if not isinstance(launch, Launch3D):
        raise InputError(
            f"launch: expected a Launch3D, got {type(launch).__name__}; build one with "
            f"Launch3D(x0, y0, z0, vx0, vy0, vz0) or Launch3D.from_planar(launch)."
        )
    m, dp = drag_values(model, drag_params)
    n_fit = len(m.parameters)
    fm = FlightModel3D(t, specimen, conditions, m, dp[n_fit:], fit_lift, wind=wind,
                       spin_axis=spin_axis, t0=t0, rtol=rtol, atol=atol)  # fmt: skip
    theta = np.concatenate((launch.as_array(), dp[:n_fit], [lift_coefficient] if fit_lift else []))
    status, pos, vel, jac, steps = fm.run(theta, sensitivities, lift_coefficient)
    return Flight3D(
        t=fm.t.copy(), position=pos, velocity=vel,
        jacobian=None if jac is None else np.ascontiguousarray(jac[:, :3]),
        velocity_jacobian=None if jac is None else np.ascontiguousarray(jac[:, 3:]),
        parameter_names=fm.parameter_names, success=status == 0, message=_STATUS[status],
        steps=steps,
    )  # fmt: skip
