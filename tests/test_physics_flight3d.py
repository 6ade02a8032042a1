"""Tests of fitdrag.physics.flight3d: the 3-D simulator and its forward sensitivities.

Oracles (named beside each test):

* closed forms: the vacuum parabola in 3-D (Galilean projectile, any mechanics textbook); the
  1-D fall from rest with quadratic drag, y(t) = y0 − (v_t²/g) ln cosh(g t/v_t),
  v_t = √(2 m g / (ρ C_d A)) (P. Timmerman and J. P. van der Weele, "On the rise and fall of a
  ball with linear or quadratic drag", Am. J. Phys. 67, 538 (1999));
* an independent reference integration: scipy.integrate.solve_ivp, method DOP853 (Hairer,
  Nørsett & Wanner, Solving ODEs I, 2nd ed., 1993, §II.10), rtol = atol = 1e-12, of the
  vector equation of motion of the fitdrag.physics.flight3d docstring, written out again here
  with numpy's cross product; drag ½ ρ C_d A |u|² and lift ½ ρ C_L A |u| ŝ × u (B. R. Munson
  et al., Fundamentals of Fluid Mechanics), buoyancy and the added mass ½ρV of a sphere
  (H. Lamb, Hydrodynamics, 6th ed., 1932, §92);
* Reynolds-dependent drag in the reference from the ``fluids`` library (C. Bell, fluids 1.3,
  ``fluids.drag.drag_sphere(Re, Method="Clift_Gauvin")``: R. Clift and W. H. Gauvin,
  Proc. Chemeca '70, 1 (1970) 14–28) and from the power law written out here;
* central finite differences of that reference integration for the sensitivities (forward
  sensitivity equations: Hairer, Nørsett & Wanner 1993, §I.14);
* the planar simulator fitdrag.physics.simulate (itself checked against DOP853 and closed
  forms in tests/test_physics_simulate.py) for the planar special case;
* the isotropy of the equation about the vertical: rotating launch, wind and spin axis about
  y rotates the flight (the equation has no preferred horizontal direction).
"""

from __future__ import annotations

import math
import re

import fluids.drag
import numpy as np
import pytest
from scipy.integrate import solve_ivp

from fitdrag.physics.air import STANDARD_GRAVITY, Air
from fitdrag.physics.flight3d import Flight3D, FlightModel3D, Launch3D, simulate_3d
from fitdrag.physics.forces import Conditions
from fitdrag.physics.simulate import Launch, simulate
from fitdrag.physics.specimen import Sphere

G = STANDARD_GRAVITY
AIR = Air(1.2, 1.8e-5)

# ----------------------------------------------------------------------------- reference


def _cd_law(law, values):
    """C_d(Re) for the reference: ``law`` is "constant" (cd,), "power" (cd_ref, n, re_ref)
    or "clift" (scale,) with the fluids library's Clift_Gauvin sphere curve (the Barati et
    al. 2014 listing of the Clift–Gauvin form)."""
    if law == "constant":
        (cd,) = values
        return lambda _re: cd
    if law == "power":
        cd_ref, n, re_ref = values
        return lambda re_: cd_ref * (re_ / re_ref) ** n
    if law == "clift":
        (scale,) = values
        return lambda re_: scale * fluids.drag.drag_sphere(re_, Method="Clift_Gauvin")
    raise AssertionError(law)


def reference_3d(t, state0, *, specimen, air, cd_law, cl=0.0, wind=(0.0, 0.0, 0.0),
                 axis=(0.0, 0.0, 1.0), g=G, buoyancy=True, t0=None, rtol=1e-12,
                 atol=1e-12):  # fmt: skip
    """Independent DOP853 integration of

        (m + C_a ρV) dv/dt = (m − ρV) g⃗ − ½ ρ A |u| (C_d u − C_L ŝ × u),  u = v − w,

    g⃗ = (0, −g, 0), ŝ the unit spin axis.  Returns (x, y, z, vx, vy, vz) at t, shape (6, n).
    """
    mass, area, volume = specimen.mass, specimen.area, specimen.volume
    rho, mu, length = air.density, air.viscosity, specimen.length
    m_eff = mass + specimen.added_mass_coefficient * rho * volume
    weight = (mass - (rho * volume if buoyancy else 0.0)) * g
    w = np.asarray(wind, float)
    s_hat = np.asarray(axis, float) / np.linalg.norm(axis)

    def rhs(_, s):
        u = s[3:] - w
        q = math.sqrt(u @ u)
        cd = cd_law(rho * q * length / mu)
        force = -0.5 * rho * area * q * (cd * u - cl * np.cross(s_hat, u))
        force[1] -= weight
        return np.concatenate((s[3:], force / m_eff))

    t_unique, back = np.unique(np.asarray(t, float), return_inverse=True)  # repeats allowed
    start = t_unique[0] if t0 is None else t0
    sol = solve_ivp(rhs, (start, t_unique[-1]), np.asarray(state0, float), method="DOP853",
                    t_eval=t_unique, rtol=rtol, atol=atol)  # fmt: skip
    assert sol.success, sol.message
    return sol.y[:, back]


# ----------------------------------------------------------------------------- Launch3D


def test_launch3d_from_speed_angles_and_planar():
    """closed-form/independent: v = s (cos e cos a, sin e, cos e sin a); |v| = s."""
    launch = Launch3D.from_speed_angles(10.0, 30.0, 2.0, x0=0.1, y0=1.2, z0=0.05)
    e, a = math.radians(30.0), math.radians(2.0)
    np.testing.assert_allclose(
        launch.as_array(),
        [0.1, 1.2, 0.05, 10 * math.cos(e) * math.cos(a), 5.0, 10 * math.cos(e) * math.sin(a)],
        rtol=1e-15,
    )
    assert launch.speed == pytest.approx(10.0, rel=1e-15)
    planar = Launch3D.from_planar(Launch(1.0, 2.0, 3.0, 4.0), z0=0.5, vz0=-0.1)
    assert planar == Launch3D(1.0, 2.0, 0.5, 3.0, 4.0, -0.1)


# ----------------------------------------------------------------------------- closed forms


@pytest.mark.parametrize(("speed", "elevation", "azimuth"), [(15.0, 30.0, 1.0), (9.0, -20.0, -40.0),
                                                             (30.0, 75.0, 90.0)])  # fmt: skip
def test_vacuum_parabola_3d(speed, elevation, azimuth):
    """closed-form/independent: with C_d = 0, no buoyancy and no added mass the flight is the
    parabola r = r0 + v0 τ − ½ g τ² ŷ, τ = t − t0 (Galilean projectile); the launch Jacobian is
    ∂r/∂r0 = I, ∂r/∂v0 = τ I, ∂v/∂v0 = I.  Uneven times with repeats and a launch before the
    first sample."""
    s = Sphere(0.0027, 0.04, added_mass_coefficient=0.0)
    c = Conditions(Air(1.2), buoyancy=False)
    t = 0.3 + np.sort(np.r_[np.linspace(0.0, 1.5, 90) ** 1.4, [0.2, 0.2, 0.7]])
    t0 = 0.1
    launch = Launch3D.from_speed_angles(speed, elevation, azimuth, x0=0.3, y0=1.0, z0=-0.2)
    f = simulate_3d(t, launch, s, c, drag_params=0.0, t0=t0, sensitivities=True)
    assert f.success
    tau = (t - t0)[:, None]
    r0, v0 = launch.as_array()[:3], launch.as_array()[3:]
    gvec = np.array([0.0, -G, 0.0])
    np.testing.assert_allclose(f.position, r0 + v0 * tau + 0.5 * gvec * tau**2, rtol=0,
                               atol=1e-11)  # fmt: skip
    np.testing.assert_allclose(f.velocity, v0 + gvec * tau, rtol=0, atol=1e-11)
    eye = np.broadcast_to(np.eye(3), (t.size, 3, 3))
    np.testing.assert_allclose(f.jacobian[:, :, :3], eye, rtol=0, atol=1e-11)
    np.testing.assert_allclose(f.jacobian[:, :, 3:6], eye * tau[:, :, None], rtol=0, atol=1e-11)
    np.testing.assert_allclose(f.velocity_jacobian[:, :, 3:6], eye, rtol=0, atol=1e-11)
    np.testing.assert_allclose(f.velocity_jacobian[:, :, :3], 0.0, rtol=0, atol=1e-11)


@pytest.mark.parametrize(("mass", "diameter", "cd"), [(0.0027, 0.040, 0.47), (0.024, 0.065, 0.5),
                                                      (0.145, 0.073, 0.35)])  # fmt: skip
def test_fall_from_rest_quadratic_drag(mass, diameter, cd):
    """closed-form/independent: fall from rest with quadratic drag, no buoyancy, no added mass:
    y = y0 − (v_t²/g) ln cosh(g t/v_t), v_y = −v_t tanh(g t/v_t), v_t = √(2 m g/(ρ C_d A))
    (Timmerman & van der Weele, Am. J. Phys. 67, 538 (1999)); x and z stay put, and a spin
    axis along the fall gives no lift (ŝ × u = 0)."""
    s = Sphere(mass, diameter, added_mass_coefficient=0.0)
    c = Conditions(Air(1.2), buoyancy=False)
    t = np.linspace(0.0, 3.0, 120)
    f = simulate_3d(t, Launch3D(0.2, 10.0, -0.3, 0.0, 0.0, 0.0), s, c, drag_params=cd,
                    lift_coefficient=0.3, spin_axis=(0.0, -2.0, 0.0))  # fmt: skip
    vt = math.sqrt(2 * mass * G / (1.2 * cd * s.area))
    assert f.success
    # 1e-8 m (and m/s): ten times finer than the 1e-7 m bar; the quartic dense output at the
    # default rtol = 1e-10 leaves a few 1e-9 m on a 10 m fall.
    np.testing.assert_allclose(f.y, 10.0 - vt**2 / G * np.log(np.cosh(G * t / vt)), rtol=0,
                               atol=1e-8)  # fmt: skip
    np.testing.assert_allclose(f.velocity[:, 1], -vt * np.tanh(G * t / vt), rtol=0, atol=1e-8)
    np.testing.assert_array_equal(f.x, 0.2)
    np.testing.assert_array_equal(f.z, -0.3)


# ----------------------------------------------------------------------------- vs DOP853

# (name, mass [kg], diameter [m], launch (x0, y0, z0, vx0, vy0, vz0), duration [s],
#  law, drag values, C_L, wind [m/s], spin axis)
CASES = [
    ("foam-24g", 0.024, 0.065, (0.0, 1.0, 0.02, 9.0, 2.0, 0.16), 0.6, "constant", (0.5,), 0.0,
     (0.0, 0.0, 0.0), (0.0, 0.0, 1.0)),
    ("foam-2.7g-lift", 0.0027, 0.040, (0.1, 1.5, 0.0, 12.0, 6.0, -0.5), 1.2, "constant",
     (0.47,), 0.15, (1.0, 0.0, 0.0), (0.0, 0.0, 1.0)),
    ("very-light-rises", 0.0005, 0.120, (0.0, 0.0, 0.0, 1.0, 0.2, 0.3), 2.0, "constant",
     (0.05,), -0.3, (-2.0, 0.0, 1.0), (0.0, 0.0, 1.0)),
    ("heavy-145g", 0.145, 0.073, (0.0, 1.8, 0.1, 38.0, 9.0, 1.5), 1.5, "constant", (0.35,),
     0.1, (0.0, 0.0, 0.0), (0.0, 0.0, 1.0)),
    ("wind-3d", 0.0027, 0.040, (0.0, 1.0, 0.0, 8.0, 5.0, 0.0), 1.0, "constant", (0.6,), 0.0,
     (2.5, -0.8, 1.7), (0.0, 0.0, 1.0)),
    ("lift-tilted-axis", 0.058, 0.0667, (0.0, 1.0, 0.0, 25.0, 8.0, 2.0), 1.5, "constant",
     (0.55,), 0.25, (0.5, 0.0, -1.0), (0.3, 0.8, 0.5)),
    ("power-law", 0.0027, 0.040, (0.0, 1.0, 0.05, 15.0, 6.0, 0.4), 1.0, "power",
     (0.45, -0.2, 3e4), 0.1, (0.0, 0.0, 0.5), (0.0, 0.2, 1.0)),
    ("clift-gauvin", 0.024, 0.065, (0.0, 1.0, 0.0, 10.0, 3.0, 0.3), 1.0, "clift", (1.1,), 0.05,
     (1.0, 0.0, -0.5), (0.1, 0.0, 1.0)),
]  # fmt: skip
_REGISTRY_NAME = {
    "constant": "constant",
    "power": "power-law",
    "clift": "sphere-scaled:clift-gauvin-barati",
}


def _ours(case, t, **kw):
    _, mass, diameter, state0, _, law, values, cl, wind, axis = case
    return simulate_3d(t, Launch3D(*state0), Sphere(mass, diameter), Conditions(AIR),
                       model=_REGISTRY_NAME[law], drag_params=values, lift_coefficient=cl,
                       wind=wind, spin_axis=axis, **kw)  # fmt: skip


@pytest.mark.parametrize("case", CASES, ids=[c[0] for c in CASES])
def test_matches_dop853_reference(case):
    """closed-form/independent: positions against scipy solve_ivp DOP853 at rtol = atol =
    1e-12 of the equation written out in reference_3d (drag laws from the power law or the
    fluids library); max position error ≤ 1e-7 m, velocity ≤ 1e-6 m/s.  Samples uneven, with
    an interleaved second "camera" 0.4 ms behind and equal times."""
    name, mass, diameter, state0, duration, law, values, cl, wind, axis = case
    base = np.linspace(0.0, duration, 150)
    t = np.sort(np.r_[base, base[:-1] + 4e-4, base[10:20]])
    f = _ours(case, t)
    assert f.success and f.message == "integration completed"
    ref = reference_3d(t, state0, specimen=Sphere(mass, diameter), air=AIR,
                       cd_law=_cd_law(law, values), cl=cl, wind=wind, axis=axis)  # fmt: skip
    err = np.max(np.abs(f.position - ref[:3].T))
    assert err <= 1e-7, f"{name}: max position error {err:.3e} m"
    np.testing.assert_allclose(f.velocity, ref[3:].T, rtol=0, atol=1e-6)


# ----------------------------------------------------------------------------- sensitivities


def _reference_positions(case, t, theta, fit_lift):
    """(x, y, z, vx, vy, vz) of the reference for θ = (state0, fitted drag values[, C_L])."""
    _, mass, diameter, _, _, law, values, cl, wind, axis = case
    n_fit = {"constant": 1, "power": 2, "clift": 1}[law]
    drag = tuple(theta[6 : 6 + n_fit]) + tuple(values[n_fit:])
    return reference_3d(t, theta[:6], specimen=Sphere(mass, diameter), air=AIR,
                        cd_law=_cd_law(law, drag), cl=theta[6 + n_fit] if fit_lift else cl,
                        wind=wind, axis=axis, rtol=1e-13, atol=1e-13)  # fmt: skip


@pytest.mark.parametrize("index", [0, 2, 4, 5, 6, 7], ids=lambda i: CASES[i][0])
def test_sensitivities_match_finite_differences(index):
    """closed-form/independent: ∂(position, velocity)/∂(x0, y0, z0, vx0, vy0, vz0, drag
    parameters, C_L) from the forward sensitivity equations (Hairer, Nørsett & Wanner 1993,
    §I.14) against central finite differences of whole reference runs (DOP853, 1e-13), to
    1e-7 of each column's scale (the differences' own truncation is about 1e-8)."""
    case = CASES[index]
    _, _, _, state0, duration, law, values, cl, _, _ = case
    n_fit = {"constant": 1, "power": 2, "clift": 1}[law]
    t = np.linspace(0.0, duration, 40)
    f = _ours(case, t, sensitivities=True, fit_lift=True)
    theta = np.array([*state0, *values[:n_fit], cl])
    assert f.parameter_names[:6] == ("x0", "y0", "z0", "vx0", "vy0", "vz0")
    assert f.parameter_names[-1] == "lift_coefficient" and len(f.parameter_names) == theta.size
    ours = np.concatenate((f.jacobian, f.velocity_jacobian), axis=1)  # (n, 6, p)
    for j, pname in enumerate(f.parameter_names):
        # steps: 1e-4 (m, m/s) on the launch state, 1e-5 on C_d, the drag parameters and C_L
        # (their O(h²) truncation then stays near 1e-8 of the scale even for C_d = 0.05)
        h = 1e-4 * max(1.0, abs(theta[j])) if j < 6 else 1e-5 * max(1.0, abs(theta[j]))
        tp, tm = theta.copy(), theta.copy()
        tp[j] += h
        tm[j] -= h
        fd = _reference_positions(case, t, tp, True) - _reference_positions(case, t, tm, True)
        fd = fd.T / (2 * h)
        scale = max(np.max(np.abs(fd)), 1.0)
        err = np.max(np.abs(ours[:, :, j] - fd))
        assert err <= 1e-7 * scale, f"∂s/∂{pname}: error {err:.3e} (scale {scale:.3g})"


# ----------------------------------------------------------------------------- planar case


@pytest.mark.parametrize(
    ("model", "drag", "cl", "wind", "speed", "angle", "mass", "diameter"),
    [("constant", (0.47,), 0.0, 0.0, 15.0, 30.0, 0.0027, 0.040),
     ("constant", (0.5,), 0.2, 2.0, 9.0, 20.0, 0.024, 0.065),
     ("constant", (0.3,), -0.1, -3.0, 35.0, 15.0, 0.145, 0.073),
     ("power-law", (0.45, -0.2, 3e4), 0.1, 1.0, 18.0, 35.0, 0.0027, 0.040),
     ("sphere-scaled:clift-gauvin-barati", (1.05,), 0.05, 0.5, 12.0, 40.0, 0.058, 0.0667)],
)  # fmt: skip
def test_planar_case_equals_planar_simulator(model, drag, cl, wind, speed, angle, mass, diameter):
    """closed-form/independent: with z0 = vz0 = 0, w_z = 0 and the spin axis along +z the 3-D
    flight is the planar simulator's (fitdrag.physics.simulate) to 1e-9 m, z stays 0, and the
    in-plane Jacobian columns agree (to 1e-7 relative to their scale)."""
    s = Sphere(mass, diameter)
    c = Conditions(AIR, wind=wind)
    t = np.linspace(0.0, 1.0, 120)
    launch = Launch.from_speed_angle(speed, angle, x0=0.1, y0=1.2)
    kw = {"model": model, "drag_params": drag, "lift_coefficient": cl, "sensitivities": True,
          "fit_lift": True}  # fmt: skip
    f2 = simulate(t, launch, s, c, **kw)
    f3 = simulate_3d(t, Launch3D.from_planar(launch), s, c, **kw)
    assert f2.success and f3.success
    err = max(np.max(np.abs(f3.x - f2.x)), np.max(np.abs(f3.y - f2.y)))
    assert err <= 1e-9, f"planar difference {err:.3e} m"
    np.testing.assert_array_equal(f3.z, 0.0)
    in_plane = [0, 1, 3, 4] + list(range(6, len(f3.parameter_names)))
    assert tuple(f3.parameter_names[i] for i in in_plane) == f2.parameter_names
    jac = f3.jacobian[:, :2][:, :, in_plane]
    scale = np.max(np.abs(f2.jacobian), axis=(0, 1))
    assert np.all(np.abs(jac - f2.jacobian) <= 1e-7 * np.maximum(scale, 1.0))


def test_rotation_about_vertical_rotates_the_flight():
    """closed-form/independent: the equation has no preferred horizontal direction, so turning
    launch, wind and spin axis by 37° about y turns the whole flight by 37° (to 1e-8 m)."""
    case = CASES[5]
    _, mass, diameter, state0, duration, _, values, cl, wind, axis = case
    a = math.radians(37.0)
    rot = np.array([[math.cos(a), 0, math.sin(a)], [0, 1, 0], [-math.sin(a), 0, math.cos(a)]])
    t = np.linspace(0.0, duration, 100)
    s, c = Sphere(mass, diameter), Conditions(AIR)
    kw = {"drag_params": values, "lift_coefficient": cl}
    f = simulate_3d(t, Launch3D(*state0), s, c, wind=wind, spin_axis=axis, **kw)
    r0, v0 = np.array(state0[:3]), np.array(state0[3:])
    g = simulate_3d(t, Launch3D(*(rot @ r0), *(rot @ v0)), s, c, wind=rot @ np.array(wind),
                    spin_axis=rot @ np.array(axis), **kw)  # fmt: skip
    np.testing.assert_allclose(g.position, f.position @ rot.T, rtol=0, atol=1e-8)


# ----------------------------------------------------------------------------- sample times


def test_interleaved_cameras_equal_separate_runs():
    """regression: one run over the merged, sorted times of two cameras (one 1.3 ms behind,
    rows spread by a rolling shutter) gives each camera's samples as its own run does (from the
    same launch time t0), to the integrator's tolerance (1e-9 m)."""
    case = CASES[1]
    cam1 = np.arange(200) / 500.0 + np.linspace(0, 1e-3, 200)
    cam2 = np.arange(200) / 500.0 + 1.3e-3
    t = np.concatenate((cam1, cam2))
    order = np.argsort(t, kind="stable")
    merged = _ours(case, t[order], t0=0.0)
    back = np.empty_like(merged.position)
    back[order] = merged.position
    for cam, rows in ((cam1, slice(0, 200)), (cam2, slice(200, 400))):
        alone = _ours(case, cam, t0=0.0)
        np.testing.assert_allclose(back[rows], alone.position, rtol=0, atol=1e-9)


def test_flight_model_run_matches_simulate_3d():
    """regression: FlightModel3D.run (the fit's hot path) gives what simulate_3d gives, and
    its Jacobian holds the position rows then the velocity rows."""
    t = np.linspace(0.0, 0.8, 50)
    s, c = Sphere(0.0027, 0.04), Conditions(AIR)
    fm = FlightModel3D(t, s, c, fit_lift=True, wind=(0.5, 0.0, 0.2), spin_axis=(0, 1, 1))
    assert fm.n_params == 8
    theta = [0.0, 0.0, 0.1, 12.0, 6.0, 0.3, 0.5, 0.1]
    status, pos, vel, jac, steps = fm.run(theta)
    f = simulate_3d(t, Launch3D(*theta[:6]), s, c, drag_params=0.5, lift_coefficient=0.1,
                    wind=(0.5, 0.0, 0.2), spin_axis=(0, 1, 1), sensitivities=True,
                    fit_lift=True)  # fmt: skip
    assert isinstance(f, Flight3D) and status == 0 and steps == f.steps > 0
    np.testing.assert_array_equal(pos, f.position)
    np.testing.assert_array_equal(vel, f.velocity)
    np.testing.assert_array_equal(jac[:, :3], f.jacobian)
    np.testing.assert_array_equal(jac[:, 3:], f.velocity_jacobian)
    assert fm.run(theta, sensitivities=False)[3] is None


def test_single_time_returns_launch_state():
    """regression: samples only at the launch time give the launch state and unit launch
    sensitivities, with no step taken."""
    f = simulate_3d([0.5, 0.5], Launch3D(1.0, 2.0, 3.0, 4.0, 5.0, 6.0), Sphere(0.0027, 0.04),
                    Conditions(AIR), sensitivities=True)  # fmt: skip
    assert f.success and f.steps == 0
    np.testing.assert_array_equal(f.position, [[1.0, 2.0, 3.0]] * 2)
    np.testing.assert_array_equal(f.jacobian[0], np.eye(3, 7))


def test_nonfinite_state_reports_failure():
    """regression: a non-finite θ on the hot path is status 1, not an exception."""
    fm = FlightModel3D(np.linspace(0, 1, 10), Sphere(0.0027, 0.04), Conditions(AIR))
    status, *_ = fm.run([0.0, 0.0, 0.0, math.nan, 1.0, 0.0, 0.5])
    assert status == 1


# ----------------------------------------------------------------------------- bad input

_ARGS = (Sphere(0.0027, 0.04), Conditions(AIR))
_LAUNCH = Launch3D(0.0, 1.0, 0.0, 5.0, 2.0, 0.1)


@pytest.mark.parametrize(
    ("t", "message"),
    [([0.0, 0.2, 0.1], "t: sample times must be finite and in non-decreasing order; t[2] = 0.1; "
                       "sort the samples by time (equal times are allowed)."),
     ([0.0, math.nan, 0.3], "t: sample times must be finite and in non-decreasing order; "
                            "t[1] = nan; sort the samples by time (equal times are allowed)."),
     ([], "t: expected a non-empty 1-D array of sample times in seconds, got shape (0,); "
          "pass one time per sample.")],
)  # fmt: skip
def test_bad_times(t, message):
    """regression: unsorted, non-finite or empty sample times raise the exact message."""
    with pytest.raises(ValueError, match="^" + re.escape(message) + "$"):
        simulate_3d(t, _LAUNCH, *_ARGS)


def test_bad_launch():
    """regression: a NaN or non-numeric launch state and a planar Launch are refused."""
    msg = "vy0: must be a finite number in m/s, got nan; give the launch state as finite numbers."
    with pytest.raises(ValueError, match="^" + re.escape(msg) + "$"):
        Launch3D(0.0, 1.0, 0.0, 5.0, math.nan, 0.0)
    msg = "z0: expected a number in m, got 'a'; give the launch state as finite numbers."
    with pytest.raises(ValueError, match="^" + re.escape(msg) + "$"):
        Launch3D(0.0, 1.0, "a", 5.0, 1.0, 0.0)
    msg = ("launch: expected a Launch3D, got Launch; build one with Launch3D(x0, y0, z0, vx0, "
           "vy0, vz0) or Launch3D.from_planar(launch).")  # fmt: skip
    with pytest.raises(ValueError, match="^" + re.escape(msg) + "$"):
        simulate_3d([0.0, 1.0], Launch(0.0, 1.0, 5.0, 2.0), *_ARGS)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [({"spin_axis": (0.0, 0.0, 0.0)},
      "spin_axis: must be a non-zero vector, got [0.0, 0.0, 0.0]; give the direction of the "
      "spin axis, e.g. (0, 0, 1) for lift in the x–y plane."),
     ({"spin_axis": (0.0, 1.0)},
      "spin_axis: expected 3 finite numbers in [-], got [0.0, 1.0]; give the direction of the "
      "spin axis, e.g. (0, 0, 1) for lift in the x–y plane."),
     ({"wind": (1.0, math.inf, 0.0)},
      "wind: expected 3 finite numbers in m/s, got [1.0, inf, 0.0]; give the wind velocity "
      "(w_x, w_y, w_z), (0, 0, 0) for still air."),
     ({"t0": 0.2},
      "t0: the launch time must be finite and no later than the first sample time 0.0 s, got "
      "0.2; give the launch time at or before the first sample.")],
)  # fmt: skip
def test_bad_options(kwargs, message):
    """regression: a zero or short spin axis, a non-finite wind, a launch after the first
    sample raise the exact message."""
    with pytest.raises(ValueError, match="^" + re.escape(message) + "$"):
        simulate_3d([0.0, 0.5, 1.0], _LAUNCH, *_ARGS, **kwargs)


def test_wind_given_twice():
    """regression: a wind vector together with a non-zero Conditions.wind is refused."""
    msg = ("wind: given both as a vector [0.0, 0.0, 1.0] m/s and as Conditions.wind = 2.0 m/s; "
           "give it once (the vector, with Conditions(wind=0)).")  # fmt: skip
    with pytest.raises(ValueError, match="^" + re.escape(msg) + "$"):
        simulate_3d([0.0, 1.0], _LAUNCH, _ARGS[0], Conditions(AIR, wind=2.0), wind=(0, 0, 1))
