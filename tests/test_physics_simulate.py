"""Tests of fitdrag.physics.simulate: the compiled RK5(4) integrator and its forward sensitivities.

Oracles (named beside each test):

* closed forms: the vacuum parabola; the 1-D fall from rest and the vertical throw with
  quadratic drag, y(t) = −(v_t²/g) ln cosh(g t/v_t), v(t) = −v_t tanh(g t/v_t), apex time
  (v_t/g) arctan(v0/v_t), apex height (v_t²/2g) ln(1 + v0²/v_t²) (P. Timmerman and
  J. P. van der Weele, "On the rise and fall of a ball with linear or quadratic drag",
  Am. J. Phys. 67, 538 (1999); any mechanics textbook), and their form with buoyancy and the
  added mass ½ρV of a sphere (H. Lamb, Hydrodynamics, 6th ed., 1932, §92);
* an independent reference integration: scipy.integrate.solve_ivp, method DOP853
  (Hairer, Nørsett & Wanner, Solving ODEs I, 1993), rtol = atol = 1e-12, of the equation of
  motion of the fitdrag.physics.forces module docstring, written out again in this file;
* central finite differences of that reference integration for the sensitivities;
* mechanical-energy balance of the effective equation (drag does negative work, lift none);
* common practice (no source): room air about 1.2 kg/m³, range-maximising angle below 45°.
"""

from __future__ import annotations

import math
import re

import numba
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import solve_ivp

from fitdrag.physics.air import STANDARD_GRAVITY, Air
from fitdrag.physics.drag_model import DragModel
from fitdrag.physics.forces import Conditions
from fitdrag.physics.simulate import Flight, FlightModel, Launch, simulate
from fitdrag.physics.specimen import Body, Sphere

G = STANDARD_GRAVITY

# ----------------------------------------------------------------------------- reference


def reference_solve(t, theta, *, mass, area, volume, ca, rho, g=G, wind=0.0, buoyancy=True,
                    length=None, mu=1.8e-5, cd_law=None, rtol=1e-12, atol=1e-12):  # fmt: skip
    """Independent DOP853 integration of the fitdrag.physics.forces equation of motion

        (m + C_a ρV) dv/dt = (m − ρV) g⃗ − ½ ρ A |u| (C_d u − C_L P u),  u = v − w,
        P u = (−u_y, u_x),

    theta = (x0, y0, vx0, vy0, C_d, C_L), or with ``cd_law(re, a, b)`` the drag parameters
    (a, b) replace C_d: theta = (x0, y0, vx0, vy0, a, b, C_L).  Returns (x, y, vx, vy) at t.
    """
    theta = [float(v) for v in theta]
    m_eff = mass + ca * rho * volume
    weight = (mass - (rho * volume if buoyancy else 0.0)) * g
    half_rho_a = 0.5 * rho * area
    if cd_law is None:
        cd_const, cl = theta[4], theta[5]
    else:
        a, b, cl = theta[4], theta[5], theta[6]

    def rhs(_, s):
        ux = s[2] - wind
        uy = s[3]
        q = math.hypot(ux, uy)
        cd = cd_const if cd_law is None else cd_law(rho * q * length / mu, a, b)
        fx = -half_rho_a * q * (cd * ux + cl * uy)
        fy = -weight - half_rho_a * q * (cd * uy - cl * ux)
        return [s[2], s[3], fx / m_eff, fy / m_eff]

    t = np.asarray(t, float)
    sol = solve_ivp(rhs, (t[0], t[-1]), theta[:4], method="DOP853", t_eval=t, rtol=rtol,
                    atol=atol)  # fmt: skip
    assert sol.success, sol.message
    return sol.y


def _spec_kwargs(specimen, air):
    return {
        "mass": specimen.mass,
        "area": specimen.area,
        "volume": specimen.volume,
        "ca": specimen.added_mass_coefficient,
        "rho": air.density,
        "length": specimen.length,
        "mu": air.viscosity,
    }


# ----------------------------------------------------------------------------- Launch


def test_launch_from_speed_angle():
    """closed-form/independent: v = (s cos α, s sin α); speed and angle invert it."""
    launch = Launch.from_speed_angle(15.0, 30.0, x0=0.5, y0=1.25)
    assert launch.vx0 == pytest.approx(15.0 * math.sqrt(3) / 2, rel=1e-15)
    assert launch.vy0 == pytest.approx(7.5, rel=1e-15)
    assert launch.speed == pytest.approx(15.0, rel=1e-15)
    assert launch.angle == pytest.approx(30.0, rel=1e-14)
    np.testing.assert_array_equal(launch.as_array(), [0.5, 1.25, launch.vx0, launch.vy0])


# ----------------------------------------------------------------------------- closed forms


@pytest.mark.parametrize("t0", [0.0, 0.37, -1.0])
@pytest.mark.parametrize(("speed", "angle"), [(15.0, 30.0), (40.0, 80.0), (1.0, -45.0)])
def test_vacuum_parabola(speed, angle, t0):
    """closed-form/independent: with C_d = 0, no buoyancy and no added mass the flight is the
    parabola x = x0 + vx0 τ, y = y0 + vy0 τ − g τ²/2, τ = t − t0 (Galilean projectile); the
    launch-state Jacobian is ∂x/∂x0 = ∂y/∂y0 = 1, ∂x/∂vx0 = ∂y/∂vy0 = τ, others 0."""
    s = Sphere(0.0027, 0.04, added_mass_coefficient=0.0)
    c = Conditions(Air(1.2), buoyancy=False)
    t = t0 + np.linspace(0.0, 2.0, 150) ** 1.3  # uneven sample spacing
    launch = Launch.from_speed_angle(speed, angle, x0=0.3, y0=-2.0)
    f = simulate(t, launch, s, c, drag_params=0.0, sensitivities=True)
    tau = t - t0
    assert f.success
    np.testing.assert_allclose(f.x, 0.3 + launch.vx0 * tau, rtol=0, atol=1e-11)
    np.testing.assert_allclose(f.y, -2.0 + launch.vy0 * tau - 0.5 * G * tau**2, rtol=0,
                               atol=1e-11)  # fmt: skip
    np.testing.assert_allclose(f.vy, launch.vy0 - G * tau, rtol=0, atol=1e-11)
    jac = f.jacobian
    assert f.parameter_names == ("x0", "y0", "vx0", "vy0", "cd")
    np.testing.assert_allclose(jac[:, 0, 0], 1.0, atol=1e-12)
    np.testing.assert_allclose(jac[:, 1, 1], 1.0, atol=1e-12)
    np.testing.assert_allclose(jac[:, 0, 2], tau, atol=1e-11)
    np.testing.assert_allclose(jac[:, 1, 3], tau, atol=1e-11)
    for i, j in [(0, 1), (0, 3), (1, 0), (1, 2)]:
        np.testing.assert_allclose(jac[:, i, j], 0.0, atol=1e-12)


def _fall_closed_form(t, g, vt):
    """1-D fall from rest, quadratic drag: y = −(v_t²/g) ln cosh(g t/v_t), v = −v_t tanh(g t/v_t)
    (Timmerman & van der Weele 1999; ln cosh written overflow-free)."""
    z = g * t / vt
    log_cosh = z + np.log1p(np.exp(-2 * z)) - math.log(2.0)
    return -(vt**2 / g) * log_cosh, -vt * np.tanh(z)


@pytest.mark.parametrize(
    ("mass", "diameter", "cd", "duration"),
    [(0.0027, 0.040, 0.47, 2.0), (0.058, 0.0667, 0.55, 2.0), (0.0005, 0.030, 2.0, 1.0),
     (1.0, 0.10, 0.05, 2.0), (0.45, 0.22, 0.25, 5.0)],
)  # fmt: skip
# Tolerance 1e-8 m (and m/s): ten times finer than the 1e-7 m bar; the integrator's
# quartic dense output leaves errors of a few 1e-9 here.
def test_fall_from_rest_quadratic_drag(mass, diameter, cd, duration):
    """closed-form/independent: 1-D fall from rest with quadratic drag, no buoyancy, no added
    mass: y(t) = −(v_t²/g) ln cosh(g t/v_t), v(t) = −v_t tanh(g t/v_t),
    v_t = sqrt(2 m g/(ρ C_d A)) (Timmerman & van der Weele, Am. J. Phys. 67, 538 (1999))."""
    rho = 1.2
    s = Sphere(mass, diameter, added_mass_coefficient=0.0)
    c = Conditions(Air(rho), buoyancy=False)
    vt = math.sqrt(2 * mass * G / (rho * cd * math.pi * diameter**2 / 4))
    t = np.linspace(0.0, duration, 200)
    f = simulate(t, Launch(0.0, 0.0, 0.0, 0.0), s, c, drag_params=cd)
    y_ref, v_ref = _fall_closed_form(t, G, vt)
    np.testing.assert_allclose(f.y, y_ref, rtol=0, atol=1e-8)
    np.testing.assert_allclose(f.vy, v_ref, rtol=0, atol=1e-8)
    np.testing.assert_array_equal(f.x, 0.0)


def test_fall_closed_form_with_launch_at_later_sample_time():
    """closed-form/independent: the launch state holds at t[0]; a fall released at t0 = 0.25 s
    follows the closed form in t − t0 (Timmerman & van der Weele 1999)."""
    rho, mass, d, cd = 1.2, 0.0027, 0.04, 0.47
    s = Sphere(mass, d, added_mass_coefficient=0.0)
    c = Conditions(Air(rho), buoyancy=False)
    vt = math.sqrt(2 * mass * G / (rho * cd * math.pi * d**2 / 4))
    t = 0.25 + np.linspace(0.0, 1.5, 120)
    f = simulate(t, Launch(1.0, 3.0, 0.0, 0.0), s, c, drag_params=cd)
    y_ref, v_ref = _fall_closed_form(t - 0.25, G, vt)
    np.testing.assert_allclose(f.y, 3.0 + y_ref, rtol=0, atol=1e-8)
    np.testing.assert_allclose(f.vy, v_ref, rtol=0, atol=1e-8)
    assert f.t[0] == 0.25


def _apex(t, vy):
    """Apex time from the first downward sign change of vy on a fine grid (linear root)."""
    i = int(np.flatnonzero((vy[:-1] > 0) & (vy[1:] <= 0))[0])
    return t[i] + vy[i] / (vy[i] - vy[i + 1]) * (t[i + 1] - t[i])


@pytest.mark.parametrize(
    ("mass", "diameter", "cd", "v0"),
    [(0.0027, 0.040, 0.47, 15.0), (0.058, 0.0667, 0.55, 25.0), (0.0005, 0.030, 1.5, 40.0),
     (1.0, 0.10, 0.1, 10.0)],
)  # fmt: skip
def test_vertical_throw_apex(mass, diameter, cd, v0):
    """closed-form/independent: a vertical throw at v0 with quadratic drag peaks at
    t = (v_t/g) arctan(v0/v_t), height (v_t²/2g) ln(1 + v0²/v_t²)
    (Timmerman & van der Weele, Am. J. Phys. 67, 538 (1999)).  The apex is located from the
    simulated vy on a 0.1 ms grid; the height is the simulated y at that time."""
    rho = 1.2
    s = Sphere(mass, diameter, added_mass_coefficient=0.0)
    c = Conditions(Air(rho), buoyancy=False)
    vt = math.sqrt(2 * mass * G / (rho * cd * math.pi * diameter**2 / 4))
    t_apex = vt / G * math.atan(v0 / vt)
    h_apex = vt**2 / (2 * G) * math.log1p(v0**2 / vt**2)
    t = np.arange(0.0, 1.5 * t_apex, 1e-4)
    launch = Launch(0.0, 0.0, 0.0, v0)
    f = simulate(t, launch, s, c, drag_params=cd)
    t_found = _apex(t, f.vy)
    assert t_found == pytest.approx(t_apex, abs=1e-8)
    y_at = simulate([0.0, t_found], launch, s, c, drag_params=cd).y[1]
    assert y_at == pytest.approx(h_apex, abs=1e-9)
    assert f.y.max() == pytest.approx(h_apex, abs=1e-6)  # sample nearest the apex


@pytest.mark.parametrize(
    ("mass", "diameter", "ca", "cd"),
    [(0.0027, 0.040, 0.5, 0.47), (0.002, 0.100, 0.5, 0.5), (0.0008, 0.080, 0.5, 0.8),
     (0.01, 0.05, 1.2, 0.3)],
)  # fmt: skip
def test_fall_with_buoyancy_and_added_mass(mass, diameter, ca, cd):
    """closed-form/independent: with buoyancy and added mass the 1-D equation (v up) is
    M dv/dt = −(m − ρV) g − ½ρC_dA|v|v, M = m + C_aρV (Lamb 1932 §92; Timmerman & van der
    Weele 1999).  Dividing by M gives the drag-only form with g' = g (m − ρV)/M and
    v_t' = sqrt(2 (m − ρV) g/(ρ C_d A)), so y = −(v_t'²/g') ln cosh(g' t/v_t') still holds.
    The initial acceleration g (m − ρV)/(m + ½ρV) (Lamb's coefficient ½) is checked too."""
    rho = 1.2
    s = Sphere(mass, diameter, added_mass_coefficient=ca)
    c = Conditions(Air(rho))
    area = math.pi * diameter**2 / 4
    vol = math.pi * diameter**3 / 6
    m_eff = mass + ca * rho * vol
    g1 = G * (mass - rho * vol) / m_eff
    vt1 = math.sqrt(2 * (mass - rho * vol) * G / (rho * cd * area))
    t = np.linspace(0.0, 2.0, 200)
    f = simulate(t, Launch(0.0, 0.0, 0.0, 0.0), s, c, drag_params=cd)
    y_ref, v_ref = _fall_closed_form(t, g1, vt1)
    np.testing.assert_allclose(f.y, y_ref, rtol=0, atol=1e-8)
    np.testing.assert_allclose(f.vy, v_ref, rtol=0, atol=1e-8)
    if ca == 0.5:
        # initial acceleration from the first 10 µs: v(t) = −g' t (1 + O(t²))
        f0 = simulate([0.0, 1e-5], Launch(0.0, 0.0, 0.0, 0.0), s, c, drag_params=cd)
        a0 = -f0.vy[1] / 1e-5
        assert a0 == pytest.approx(G * (mass - rho * vol) / (mass + 0.5 * rho * vol), rel=1e-8)


def test_buoyant_specimen_rises():
    """closed-form/independent: a specimen lighter than the air it displaces (m < ρV) rises from
    rest to the terminal speed v_t' = sqrt(2 (ρV − m) g/(ρ C_d A)) with the same tanh law
    (Archimedes; Lamb §92; Timmerman & van der Weele 1999), here a 0.5 g, 150 mm sphere."""
    rho, mass, d, cd = 1.2, 0.0005, 0.15, 0.5
    s = Sphere(mass, d)
    vol = math.pi * d**3 / 6
    m_eff = mass + 0.5 * rho * vol
    g1 = G * (rho * vol - mass) / m_eff
    vt1 = math.sqrt(2 * (rho * vol - mass) * G / (rho * cd * math.pi * d**2 / 4))
    t = np.linspace(0.0, 2.0, 100)
    f = simulate(t, Launch(0.0, 0.0, 0.0, 0.0), s, Conditions(Air(rho)), drag_params=cd)
    y_ref, v_ref = _fall_closed_form(t, g1, vt1)
    np.testing.assert_allclose(f.y, -y_ref, rtol=0, atol=1e-8)
    np.testing.assert_allclose(f.vy, -v_ref, rtol=0, atol=1e-8)


# ----------------------------------------------------------------------------- vs solve_ivp


def _grid_cases():
    """Flights spanning 0.1–2 s, 1–40 m/s, C_d 0.05–2, 0.5 g–1 kg (issue 2 item 5), with
    buoyancy and added mass on, wind and lift; the corners first, then seeded random draws."""
    cases = [
        # duration, speed, angle, cd, mass, diameter, wind, cl
        (2.0, 40.0, 35.0, 2.0, 0.0005, 0.040, 3.0, 0.25),  # lightest, fastest, most drag
        (2.0, 1.0, 10.0, 0.05, 0.0005, 0.120, -2.0, -0.3),  # lighter than its air: rises
        (2.0, 40.0, 45.0, 0.05, 1.0, 0.020, 5.0, 0.1),  # heavy, near-vacuum, 80 m range
        (0.1, 1.0, -60.0, 2.0, 1.0, 0.250, -5.0, 0.3),
        (0.1, 40.0, 80.0, 2.0, 0.0005, 0.250, 0.0, -0.2),  # extreme deceleration
        (2.0, 15.0, 90.0, 0.47, 0.0027, 0.040, 0.0, 0.0),  # vertical: passes |u| = 0 at apex
        (1.0, 3.0, 0.0, 0.5, 0.0027, 0.040, 3.0, 0.0),  # starts at rest relative to the air
    ]
    rng = np.random.default_rng(20250214)
    for _ in range(25):
        cases.append(
            (
                float(np.exp(rng.uniform(np.log(0.1), np.log(2.0)))),
                float(np.exp(rng.uniform(0.0, np.log(40.0)))),
                float(rng.uniform(-80.0, 85.0)),
                float(np.exp(rng.uniform(np.log(0.05), np.log(2.0)))),
                float(np.exp(rng.uniform(np.log(5e-4), np.log(1.0)))),
                float(np.exp(rng.uniform(np.log(0.015), np.log(0.25)))),
                float(rng.uniform(-5.0, 5.0)),
                float(rng.uniform(-0.3, 0.3)),
            )
        )
    return cases


def _case_id(c):
    return (
        f"T{c[0]:.2f}-v{c[1]:.1f}-a{c[2]:.0f}-cd{c[3]:.2f}-m{c[4] * 1e3:.2f}g-d{c[5] * 1e3:.0f}mm"
    )


@pytest.mark.parametrize("case", _grid_cases(), ids=_case_id)
def test_matches_dop853_reference(case):
    """closed-form/independent: positions against scipy solve_ivp DOP853, rtol = atol = 1e-12,
    of the equation written out in reference_solve; max position error ≤ 1e-7 m (issue 2 bar).
    Buoyancy and added mass on (½ for a sphere, Lamb §92), wind and lift included."""
    duration, speed, angle, cd, mass, diameter, wind, cl = case
    air = Air(1.2, 1.8e-5)
    s = Sphere(mass, diameter)
    c = Conditions(air, wind=wind)
    t = np.linspace(0.0, duration, 200)
    launch = Launch.from_speed_angle(speed, angle, x0=0.1, y0=1.5)
    f = simulate(t, launch, s, c, drag_params=cd, lift_coefficient=cl)
    assert f.success and f.message == "integration completed"
    ref = reference_solve(t, (*launch.as_array(), cd, cl), wind=wind, **_spec_kwargs(s, air))
    err = max(np.max(np.abs(f.x - ref[0])), np.max(np.abs(f.y - ref[1])))
    assert err <= 1e-7, f"max position error {err:.3e} m"
    np.testing.assert_allclose(f.vx, ref[2], rtol=0, atol=1e-6)
    np.testing.assert_allclose(f.vy, ref[3], rtol=0, atol=1e-6)


def test_body_and_local_gravity_match_reference():
    """closed-form/independent: a non-spherical Body (own area, volume, added-mass coefficient
    0.9) under non-standard gravity and dense air, against the DOP853 reference."""
    air = Air(1.35, 1.7e-5)
    b = Body(0.012, 2.5e-3, 9e-5, added_mass_coefficient=0.9)
    c = Conditions(air, gravity=9.7803, wind=-1.5)
    t = np.linspace(0.0, 1.2, 150)
    launch = Launch.from_speed_angle(22.0, 40.0)
    f = simulate(t, launch, b, c, drag_params=0.9, lift_coefficient=0.12)
    ref = reference_solve(t, (*launch.as_array(), 0.9, 0.12), g=9.7803, wind=-1.5,
                          **_spec_kwargs(b, air))  # fmt: skip
    assert max(np.abs(f.x - ref[0]).max(), np.abs(f.y - ref[1]).max()) <= 1e-7


def test_buoyancy_off_matches_reference():
    """closed-form/independent: buoyancy switched off, added mass kept, against DOP853."""
    air = Air(1.2)
    s = Sphere(0.002, 0.1)
    c = Conditions(air, buoyancy=False)
    t = np.linspace(0.0, 1.5, 100)
    launch = Launch.from_speed_angle(12.0, 50.0)
    f = simulate(t, launch, s, c, drag_params=0.5)
    ref = reference_solve(t, (*launch.as_array(), 0.5, 0.0), buoyancy=False,
                          **_spec_kwargs(s, air))  # fmt: skip
    assert max(np.abs(f.x - ref[0]).max(), np.abs(f.y - ref[1]).max()) <= 1e-7


# ----------------------------------------------------------------------------- sensitivities


def _fd_jacobian(t, theta, steps, **kwargs):
    """Central finite differences of the reference integration: (n, 2, len(theta))."""
    cols = []
    for j, h in enumerate(steps):
        tp = np.array(theta, float)
        tm = np.array(theta, float)
        tp[j] += h
        tm[j] -= h
        yp = reference_solve(t, tp, rtol=1e-13, atol=1e-13, **kwargs)
        ym = reference_solve(t, tm, rtol=1e-13, atol=1e-13, **kwargs)
        cols.append((yp[:2] - ym[:2]).T / (2 * h))
    return np.stack(cols, axis=-1)


def _assert_jacobian_close(jac, fd, names):
    for j, name in enumerate(names):
        scale = max(np.max(np.abs(fd[:, :, j])), 1.0)
        err = np.max(np.abs(jac[:, :, j] - fd[:, :, j]))
        assert err <= 2e-6 * scale, f"∂(x, y)/∂{name}: error {err:.3e} (scale {scale:.3g})"


@pytest.mark.parametrize(
    ("duration", "speed", "angle", "cd", "cl", "mass", "diameter", "wind", "fit_lift"),
    [(1.0, 15.0, 30.0, 0.47, 0.0, 0.0027, 0.040, 0.0, False),
     (1.0, 15.0, 30.0, 0.47, 0.15, 0.0027, 0.040, 2.0, True),
     (2.0, 35.0, 20.0, 0.3, -0.1, 0.058, 0.0667, -3.0, True),
     (0.5, 5.0, 70.0, 1.5, 0.2, 0.0005, 0.060, 1.0, True),
     (2.0, 40.0, 45.0, 0.05, 0.05, 1.0, 0.10, 4.0, True),
     (0.3, 2.0, -30.0, 2.0, 0.0, 0.01, 0.20, 0.0, False)],
)  # fmt: skip
def test_sensitivities_match_finite_differences(duration, speed, angle, cd, cl, mass, diameter,
                                                wind, fit_lift):  # fmt: skip
    """closed-form/independent: the Jacobian ∂(x, y)/∂(x0, y0, vx0, vy0, C_d[, C_L]) from the
    forward sensitivity equations (Hairer, Nørsett & Wanner 1993, §I.14) against central
    finite differences of the independent DOP853 reference integration (rtol = atol = 1e-13)."""
    air = Air(1.2, 1.8e-5)
    s = Sphere(mass, diameter)
    c = Conditions(air, wind=wind)
    t = np.linspace(0.0, duration, 60)
    launch = Launch.from_speed_angle(speed, angle, x0=0.2, y0=1.0)
    f = simulate(t, launch, s, c, drag_params=cd, lift_coefficient=cl, sensitivities=True,
                 fit_lift=fit_lift)  # fmt: skip
    names = ("x0", "y0", "vx0", "vy0", "cd") + (("lift_coefficient",) if fit_lift else ())
    assert f.parameter_names == names
    assert f.jacobian.shape == (60, 2, len(names))
    theta = (*launch.as_array(), cd, cl)
    steps = [1e-4, 1e-4, 1e-4 * max(1.0, speed), 1e-4 * max(1.0, speed), 1e-4 * cd, 1e-4]
    fd = _fd_jacobian(t, theta, steps[: len(names)], wind=wind, **_spec_kwargs(s, air))
    _assert_jacobian_close(f.jacobian, fd, names)
    # the sensitivities do not change the positions
    plain = simulate(t, launch, s, c, drag_params=cd, lift_coefficient=cl)
    np.testing.assert_allclose(f.x, plain.x, rtol=0, atol=1e-8)
    np.testing.assert_allclose(f.y, plain.y, rtol=0, atol=1e-8)
    assert plain.jacobian is None


@numba.njit(cache=False)
def _linear_re_kernel(re, p, grad):
    # test law C_d = a + b Re / Re0, p = (a, b, Re0)
    grad[0] = 1.0
    grad[1] = re / p[2]
    return p[0] + p[1] * re / p[2], p[1] / p[2]


LINEAR_RE = DragModel(
    name="test-linear-re",
    parameters=("a", "b"),
    initial=(0.5, 0.0),
    bounds=((0.0, 5.0), (-1.0, 1.0)),
    kernel=_linear_re_kernel,
    constants=("re0",),
)


def test_reynolds_dependent_model_and_its_sensitivities():
    """closed-form/independent: a drag law C_d(Re) = a + b Re/Re0 plugged in as a DragModel
    object: positions against the DOP853 reference of the same law, and ∂(x, y)/∂(a, b) (which
    exercise the dC_d/dRe term of the variational equation) against finite differences."""
    air = Air(1.2, 1.8e-5)
    s = Sphere(0.0027, 0.04)
    c = Conditions(air, wind=1.0)
    re0 = 4e4
    t = np.linspace(0.0, 1.0, 80)
    launch = Launch.from_speed_angle(18.0, 35.0)
    a, b, cl = 0.45, 0.12, 0.1
    f = simulate(t, launch, s, c, model=LINEAR_RE, drag_params=(a, b, re0), lift_coefficient=cl,
                 sensitivities=True, fit_lift=True)  # fmt: skip
    assert f.parameter_names == ("x0", "y0", "vx0", "vy0", "a", "b", "lift_coefficient")

    def law(re, a_, b_):
        return a_ + b_ * re / re0

    kw = {"wind": 1.0, "cd_law": law, **_spec_kwargs(s, air)}
    theta = (*launch.as_array(), a, b, cl)
    ref = reference_solve(t, theta, **kw)
    assert max(np.abs(f.x - ref[0]).max(), np.abs(f.y - ref[1]).max()) <= 1e-7
    fd = _fd_jacobian(t, theta, [1e-4, 1e-4, 1e-3, 1e-3, 1e-4, 1e-4, 1e-4], **kw)
    _assert_jacobian_close(f.jacobian, fd, f.parameter_names)


def test_flight_model_run_matches_simulate():
    """regression: FlightModel.run (the fit's hot path) gives what simulate gives."""
    air = Air(1.2)
    s = Sphere(0.0027, 0.04)
    c = Conditions(air, wind=0.5)
    t = np.linspace(0.0, 0.8, 50)
    fm = FlightModel(t, s, c, fit_lift=True)
    assert fm.n_params == 6
    theta = [0.0, 0.0, 12.0, 6.0, 0.5, 0.1]
    status, pos, vel, jac, steps = fm.run(theta)
    f = simulate(t, Launch(0.0, 0.0, 12.0, 6.0), s, c, drag_params=0.5, lift_coefficient=0.1,
                 sensitivities=True, fit_lift=True)  # fmt: skip
    assert status == 0 and steps == f.steps > 0
    np.testing.assert_array_equal(pos[:, 0], f.x)
    np.testing.assert_array_equal(vel[:, 1], f.vy)
    np.testing.assert_array_equal(jac, f.jacobian)
    _, _, _, no_jac, _ = fm.run(theta, sensitivities=False)
    assert no_jac is None


# ----------------------------------------------------------------------------- properties


@pytest.mark.parametrize(("wind", "cl"), [(0.0, 0.0), (2.5, 0.2), (-4.0, -0.1)])
def test_mirror_symmetry(wind, cl):
    """closed-form/independent: the equation is symmetric under x → −x when the wind and the lift
    coefficient change sign too (P u rotates with u); so the mirrored launch gives −x."""
    air = Air(1.2)
    s = Sphere(0.0027, 0.04)
    t = np.linspace(0.0, 1.0, 60)
    f1 = simulate(t, Launch(0.0, 0.0, 10.0, 5.0), s, Conditions(air, wind=wind), drag_params=0.5,
                  lift_coefficient=cl)  # fmt: skip
    f2 = simulate(t, Launch(0.0, 0.0, -10.0, 5.0), s, Conditions(air, wind=-wind),
                  drag_params=0.5, lift_coefficient=-cl)  # fmt: skip
    np.testing.assert_allclose(f2.x, -f1.x, rtol=0, atol=1e-12)
    np.testing.assert_allclose(f2.y, f1.y, rtol=0, atol=1e-12)


def _mechanical_energy(f, specimen, conditions):
    """Energy per unit effective mass of the effective equation M dv/dt = (m − ρV) g⃗ − D:
    e = ½|v|² + g' y with g' = g (m − ρV)/M; de/dt = −v·D/M ≤ 0 in still air (lift ⟂ v)."""
    rho = conditions.air.density
    m_eff = specimen.mass + specimen.added_mass_coefficient * rho * specimen.volume
    g1 = conditions.gravity * (specimen.mass - rho * specimen.volume) / m_eff
    return 0.5 * (f.vx**2 + f.vy**2) + g1 * f.y


@settings(max_examples=60, deadline=None)
@given(
    mass=st.floats(5e-4, 1.0),
    diameter=st.floats(0.015, 0.25),
    cd=st.floats(0.0, 2.0),
    cl=st.floats(-0.4, 0.4),
    speed=st.floats(0.0, 40.0),
    angle=st.floats(-90.0, 90.0),
    duration=st.floats(0.1, 2.0),
    ca=st.sampled_from([0.0, 0.5, 1.0]),
)
def test_energy_never_increases_in_still_air(mass, diameter, cd, cl, speed, angle, duration, ca):
    """closed-form/independent (work–energy theorem): for the effective equation (Lamb §92
    added mass, Archimedes buoyancy) in still air the energy ½M|v|² + (m − ρV) g y changes at
    the rate −v·D ≤ 0; lift, perpendicular to v, does no work.  So it never increases, and
    with C_d = 0 it is conserved.  Tolerance: the integrator's relative 1e-10 per step on the
    scale, summed over its steps (a local error bound accumulates along the flight: a very
    light ball that loops under lift takes thousands of steps)."""
    air = Air(1.2)
    s = Sphere(mass, diameter, added_mass_coefficient=ca)
    c = Conditions(air)
    t = np.linspace(0.0, duration, 100)
    f = simulate(t, Launch.from_speed_angle(speed, angle), s, c, drag_params=cd,
                 lift_coefficient=cl)  # fmt: skip
    assert f.success
    e = _mechanical_energy(f, s, c)
    scale = 0.5 * speed**2 + G * 2.0 * np.max(np.abs(f.y)) + 1.0
    tol = 1e-10 * max(f.steps, 10) * scale
    assert np.all(np.diff(e) <= tol)
    if cd == 0.0:
        assert np.max(np.abs(e - e[0])) <= tol


# ----------------------------------------------------------------------------- common practice


def test_room_air_density_in_a_flight():
    """regression (common practice, no source): still room air near 20 °C, 101 325 Pa, 50 % RH has a density
    of about 1.2 kg/m³; a long fall of a table-tennis ball in that air reaches the terminal
    speed sqrt(2 (m − ρV) g/(ρ C_d A)) computed with ρ = 1.2 to within 1 %."""
    air = Air.from_conditions(20.0, 101325.0, 50.0)
    assert air.density == pytest.approx(1.2, abs=0.01)
    s = Sphere(0.0027, 0.04)
    cd = 0.47
    f = simulate(np.linspace(0.0, 10.0, 11), Launch(0.0, 0.0, 0.0, 0.0), s, Conditions(air),
                 drag_params=cd)  # fmt: skip
    vt_12 = math.sqrt(2 * (s.mass - 1.2 * s.volume) * G / (1.2 * cd * s.area))
    assert -f.vy[-1] == pytest.approx(vt_12, rel=0.01)


def _range(specimen, conditions, speed, angle, cd):
    """Horizontal distance travelled when the flight returns to its launch height."""
    t = np.arange(0.0, 2 * speed / G + 0.1, 1e-3)
    f = simulate(t, Launch.from_speed_angle(speed, angle), specimen, conditions, drag_params=cd)
    i = int(np.flatnonzero((f.y[1:] < 0.0) & (f.vy[1:] < 0.0))[0]) + 1
    a = f.y[i - 1] / (f.y[i - 1] - f.y[i])
    return f.x[i - 1] + a * (f.x[i] - f.x[i - 1])


def test_range_maximising_angle_in_vacuum_is_45_degrees():
    """closed-form/independent: in vacuum R = v² sin 2α / g, largest at 45° (Galilean)."""
    s = Sphere(0.0027, 0.04, added_mass_coefficient=0.0)
    c = Conditions(Air(1.2), buoyancy=False)
    angles = np.arange(30.0, 61.0, 1.0)
    ranges = np.array([_range(s, c, 15.0, a, 0.0) for a in angles])
    np.testing.assert_allclose(ranges, 15.0**2 * np.sin(np.radians(2 * angles)) / G, atol=1e-4)
    assert angles[np.argmax(ranges)] == 45.0


@pytest.mark.parametrize(("mass", "diameter", "cd"), [(0.0027, 0.04, 0.47), (0.058, 0.0667, 0.55),
                                                      (0.45, 0.22, 0.25)])  # fmt: skip
def test_range_maximising_angle_with_drag_is_below_45_degrees(mass, diameter, cd):
    """closed-form/independent (common practice, no source): with air drag the launch angle of greatest range (returning
    to launch height) is below 45°, and the range is shorter than in vacuum."""
    s = Sphere(mass, diameter)
    c = Conditions(Air(1.2))
    angles = np.arange(25.0, 56.0, 1.0)
    ranges = np.array([_range(s, c, 15.0, a, cd) for a in angles])
    best = angles[np.argmax(ranges)]
    assert 25.0 < best < 45.0
    assert ranges.max() < 15.0**2 / G


# ----------------------------------------------------------------------------- failures, inputs


def test_nonfinite_launch_reports_failure():
    """regression: a non-finite state makes success False with a message, not an exception."""
    f = simulate(np.linspace(0, 1, 10), Launch(0.0, 0.0, math.nan, 1.0), Sphere(0.0027, 0.04),
                 Conditions(Air(1.2)), drag_params=0.5)  # fmt: skip
    assert isinstance(f, Flight)
    assert not f.success
    assert f.message == (
        "integration failed: too many steps or a non-finite state (diverging flight?)"
    )


def test_too_few_steps_reports_failure():
    """regression: running out of steps is reported as status 1 by FlightModel.run."""
    t = np.linspace(0.0, 2.0, 5)
    fm = FlightModel(t, Sphere(0.0027, 0.04), Conditions(Air(1.2)), max_steps=3)
    status, *_ = fm.run([0.0, 0.0, 30.0, 10.0, 0.5])
    assert status == 1


def test_single_sample_returns_launch_state():
    """regression: one sample time gives the launch state and unit launch sensitivities."""
    f = simulate([0.5], Launch(1.0, 2.0, 3.0, 4.0), Sphere(0.0027, 0.04), Conditions(Air(1.2)),
                 sensitivities=True)  # fmt: skip
    assert f.success and (f.x[0], f.y[0], f.vx[0], f.vy[0]) == (1.0, 2.0, 3.0, 4.0)
    np.testing.assert_array_equal(f.jacobian[0], [[1, 0, 0, 0, 0], [0, 1, 0, 0, 0]])


@pytest.mark.parametrize(
    ("t", "message"),
    [([], "t: expected a non-empty 1-D array of sample times in seconds, got shape (0,); "
          "pass one time per sample."),
     ([[0.0, 1.0]], "t: expected a non-empty 1-D array of sample times in seconds, got shape "
                    "(1, 2); pass one time per sample."),
     ([0.0, 0.1, 0.1], "t: sample times must be finite and strictly increasing; t[2] = 0.1; "
                       "sort the samples and drop repeated or missing times."),
     ([0.0, 0.2, 0.1], "t: sample times must be finite and strictly increasing; t[2] = 0.1; "
                       "sort the samples and drop repeated or missing times."),
     ([0.0, math.nan], "t: sample times must be finite and strictly increasing; t[1] = nan; "
                       "sort the samples and drop repeated or missing times.")],
)  # fmt: skip
def test_bad_times(t, message):
    """regression: bad sample times raise ValueError with the exact message."""
    with pytest.raises(ValueError, match="^" + re.escape(message) + "$"):
        simulate(t, Launch(0, 0, 1, 1), Sphere(0.0027, 0.04), Conditions(Air(1.2)))


def test_bad_drag_params():
    """regression: wrong number or non-finite drag parameters raise exact errors."""
    args = (np.linspace(0, 1, 10), Launch(0, 0, 1, 1), Sphere(0.0027, 0.04), Conditions(Air(1.2)))
    with pytest.raises(ValueError, match=r"^drag_params: model 'constant' takes 1 value\(s\) "
                                         r"\('cd',\), got 2; give the fitted parameters, "
                                         r"then the constants, in that order\.$"):  # fmt: skip
        simulate(*args, drag_params=(0.5, 0.1))
    with pytest.raises(ValueError, match=r"^drag_params: must be finite, got \[nan\]; check "
                                         r"the drag coefficient given\.$"):  # fmt: skip
        simulate(*args, drag_params=math.nan)
    with pytest.raises(ValueError, match=r"^drag model: unknown name 'nope'; valid names: "):
        simulate(*args, model="nope")
    with pytest.raises(ValueError, match=r"^constants: drag model 'test-linear-re' needs 1 "
                                         r"constant\(s\) \('re0',\), got 0; pass them"):  # fmt: skip
        FlightModel(args[0], args[2], args[3], model=LINEAR_RE)
