"""Tests of fitdrag.physics.forces: conditions, effective mass, net gravity, drag factor, Reynolds
number and the NumPy right-hand side (the registry is tested in test_physics_registry.py).

Oracles: Archimedes' buoyancy and Lamb's added mass of a sphere (H. Lamb, Hydrodynamics,
6th ed., 1932, §92, coefficient ½), the quadratic drag and lift forces F = ½ ρ C A |u|²
(Munson et al., Fundamentals of Fluid Mechanics, drag and lift definitions), the ``fluids``
library's Reynolds number (fluids.core.Reynolds), and the equation of motion of the
fitdrag.physics.forces module docstring written out again here in vector form.
"""

from __future__ import annotations

import math
import re

import fluids.core
import numpy as np
import pytest

from fitdrag.physics.air import STANDARD_GRAVITY, Air
from fitdrag.physics.forces import (
    Conditions,
    acceleration,
    drag_factor,
    effective_mass,
    net_gravity,
    reynolds_number,
)
from fitdrag.physics.specimen import Body, Sphere

G = STANDARD_GRAVITY


def _exact(message: str) -> str:
    return "^" + re.escape(message) + "$"


# ----------------------------------------------------------------------------- conditions


def test_conditions_defaults():
    """published-value: standard gravity 9.80665 m/s² (3rd CGPM, 1901); still air, buoyancy on
    (regression for the defaults)."""
    c = Conditions(Air(1.2))
    assert c.gravity == 9.80665
    assert c.wind == 0.0
    assert c.buoyancy is True


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        (
            {"gravity": 0},
            "gravity: must be a finite number > 0 m/s², got 0; use 9.80665 or the local value.",
        ),
        (
            {"gravity": -9.81},
            "gravity: must be a finite number > 0 m/s², got -9.81; use 9.80665 or the local value.",
        ),
        (
            {"gravity": math.nan},
            "gravity: must be a finite number > 0 m/s², got nan; use 9.80665 or the local value.",
        ),
        (
            {"wind": math.inf},
            "wind: must be a finite speed in m/s, got inf; give the "
            "horizontal wind speed, 0 for still air.",
        ),
        (
            {"wind": math.nan},
            "wind: must be a finite speed in m/s, got nan; give the "
            "horizontal wind speed, 0 for still air.",
        ),
    ],
)
def test_conditions_validation_messages(kwargs, message):
    """regression: bad conditions raise ValueError naming the input, the value and the fix."""
    with pytest.raises(ValueError, match=_exact(message)):
        Conditions(Air(1.2), **kwargs)


@pytest.mark.parametrize("kwargs", [{"gravity": "abc"}, {"wind": "calm"}])
def test_conditions_non_numeric_names_the_input(kwargs):
    """regression (project rule: the message names the bad input): a non-numeric gravity or
    wind should raise ValueError starting with its name, as Sphere and Air do."""
    name = next(iter(kwargs))
    with pytest.raises(ValueError, match=f"^{name}: "):
        Conditions(Air(1.2), **kwargs)


def test_conditions_converts_to_float():
    """regression: integer gravity and wind are stored as floats."""
    c = Conditions(Air(1.2), gravity=10, wind=-3)
    assert isinstance(c.gravity, float) and c.gravity == 10.0
    assert isinstance(c.wind, float) and c.wind == -3.0


# ----------------------------------------------------------------------------- mass terms


@pytest.mark.parametrize(
    ("mass", "diameter", "rho"),
    [(0.0027, 0.040, 1.2), (0.002, 0.100, 1.2), (0.058, 0.0667, 1.18), (0.45, 0.22, 1.225)],
)
def test_acceleration_from_rest_lamb(mass, diameter, rho):
    """closed-form/independent: a sphere released from rest in a still fluid accelerates at
    g (m − ρV)/(m + ½ρV): weight less Archimedes' buoyancy over mass plus added mass ½ρV
    (Lamb 1932, §92; Timmerman & van der Weele, Am. J. Phys. 67, 538 (1999), eq. of motion).
    Checked on net_gravity and on the full right-hand side at zero velocity."""
    s = Sphere(mass, diameter)
    v = math.pi * diameter**3 / 6.0
    expected = G * (mass - rho * v) / (mass + 0.5 * rho * v)
    c = Conditions(Air(rho))
    assert net_gravity(s, c) == pytest.approx(expected, rel=1e-14)
    ax, ay = acceleration(0.0, 0.0, s, c, (0.47,))
    assert float(ax) == 0.0
    assert float(ay) == pytest.approx(-expected, rel=1e-14)


def test_light_sphere_buoyancy_about_a_third_of_weight():
    """closed-form/independent (design note's example): on a 100 mm sphere of 2 g in air of
    1.2 kg/m³ the displaced air weighs ρ π d³/6 = 0.628 g, about a third of its weight, and the
    net downward acceleration is g (2 − 0.628)/(2 + 0.314) = 0.593 g (hand arithmetic)."""
    s = Sphere(0.002, 0.100)
    rho = 1.2
    assert rho * s.volume / s.mass == pytest.approx(0.314, abs=1e-3)
    assert net_gravity(s, Conditions(Air(rho))) / G == pytest.approx(0.5929, abs=2e-4)
    # without buoyancy and added mass the acceleration is plain g
    bare = Sphere(0.002, 0.100, added_mass_coefficient=0.0)
    assert net_gravity(bare, Conditions(Air(rho), buoyancy=False)) == G


def test_massless_sphere_rises_at_twice_g():
    """closed-form/independent: a sphere of negligible mass (an air-filled bubble in water is the
    classic case) accelerates upward at 2 g from rest, since (0 − ρV)/(0 + ½ρV) = −2
    (Lamb 1932, §92 added mass; from memory as a textbook exercise)."""
    s = Sphere(1e-12, 0.05)
    water = Air(998.0, 1.0e-3)  # any fluid: Air only carries ρ and μ
    assert net_gravity(s, Conditions(water)) == pytest.approx(-2.0 * G, rel=1e-9)


def test_neutral_buoyancy_gives_zero_net_gravity():
    """closed-form/independent: m = ρV (Archimedes) gives no net force at rest."""
    rho = 1.2
    s = Sphere(1.0, 1.0)
    c = Conditions(Air(rho))
    s_neutral = Sphere(rho * s.volume, 1.0)
    assert net_gravity(s_neutral, c) == pytest.approx(0.0, abs=1e-15)


def test_buoyancy_switch_keeps_added_mass():
    """closed-form/independent: with buoyancy off the weight is m g but the inertia is still
    m + C_a ρ V (added mass is set by the specimen's coefficient alone)."""
    s = Body(0.01, 2e-3, 4e-4, added_mass_coefficient=0.8)
    rho = 1.2
    m_eff = 0.01 + 0.8 * rho * 4e-4
    assert effective_mass(s, rho) == pytest.approx(m_eff, rel=1e-15)
    assert net_gravity(s, Conditions(Air(rho), buoyancy=False)) == pytest.approx(
        G * 0.01 / m_eff, rel=1e-15
    )
    assert net_gravity(s, Conditions(Air(rho), buoyancy=True)) == pytest.approx(
        G * (0.01 - rho * 4e-4) / m_eff, rel=1e-15
    )


def test_drag_factor():
    """closed-form/independent: the drag deceleration ½ρC_dA|u|²/(m + C_aρV) (Munson et al.,
    drag definition; Lamb §92) equals K C_d |u|² with K = ρA/(2(m + C_aρV))."""
    s = Sphere(0.0027, 0.04)
    rho = 1.2
    area = math.pi * 0.02**2
    m_eff = 0.0027 + 0.5 * rho * 4 / 3 * math.pi * 0.02**3
    assert drag_factor(s, rho) == pytest.approx(rho * area / (2 * m_eff), rel=1e-14)


@pytest.mark.parametrize(("speed", "d", "rho", "mu"), [(1.0, 0.04, 1.2, 1.81e-5),
                                                      (40.0, 0.22, 1.225, 1.789e-5),
                                                      (0.01, 0.002, 998.0, 1.0e-3)])  # fmt: skip
def test_reynolds_number_matches_fluids(speed, d, rho, mu):
    """closed-form/independent: Re = ρ V D / μ, against fluids.core.Reynolds (fluids 1.3)."""
    s = Sphere(0.01, d)
    air = Air(rho, mu)
    assert reynolds_number(speed, s, air) == pytest.approx(
        fluids.core.Reynolds(V=speed, D=d, rho=rho, mu=mu), rel=1e-14
    )
    re_arr = reynolds_number(np.array([speed, 2 * speed]), s, air)
    np.testing.assert_allclose(re_arr[1], 2 * re_arr[0], rtol=1e-15)


def test_reynolds_uses_body_reference_length():
    """closed-form/independent: for a Body, L defaults to sqrt(4A/π) and Re = ρ V L / μ."""
    b = Body(0.01, 3e-3, 1e-5)
    air = Air(1.2, 1.8e-5)
    assert reynolds_number(10.0, b, air) == pytest.approx(
        fluids.core.Reynolds(V=10.0, D=math.sqrt(4 * 3e-3 / math.pi), rho=1.2, mu=1.8e-5),
        rel=1e-14,
    )


# ----------------------------------------------------------------------------- right-hand side


def _reference_acceleration(v, m, area, volume, ca, rho, g, cd, cl, wind, buoyancy=True):
    """The forces-module equation written out in vectors:
    (m + C_a ρV) dv/dt = (m − ρV) g⃗ − ½ρA|u|(C_d u − C_L P u),  u = v − w,  P u = (−u_y, u_x).
    Drag ½ρC_dA|u|² against u and lift ½ρC_LA|u|² along P u (Munson et al.)."""
    u = np.array([v[0] - wind, v[1]])
    q = np.linalg.norm(u)
    pu = np.array([-u[1], u[0]])
    weight = (m - (rho * volume if buoyancy else 0.0)) * np.array([0.0, -g])
    drag = -0.5 * rho * area * q * cd * u
    lift = 0.5 * rho * area * q * cl * pu
    return (weight + drag + lift) / (m + ca * rho * volume)


@pytest.mark.parametrize("buoyancy", [True, False])
@pytest.mark.parametrize(
    ("v", "wind", "cl"),
    [((12.0, 5.0), 0.0, 0.0), ((12.0, 5.0), 3.0, 0.2), ((-4.0, -30.0), -2.5, -0.15),
     ((0.0, 0.0), 1.0, 0.3), ((1e-3, -2e-3), 0.0, 0.1)],
)  # fmt: skip
def test_acceleration_matches_written_out_equation(v, wind, cl, buoyancy):
    """closed-form/independent: acceleration() against the equation of motion written out in
    vector form above (Lamb §92; Munson et al. drag and lift; Timmerman & van der Weele 1999)."""
    s = Body(0.0583, 3.49e-3, 1.55e-4, added_mass_coefficient=0.45)
    rho, g, cd = 1.19, 9.79, 0.55
    c = Conditions(Air(rho), gravity=g, wind=wind, buoyancy=buoyancy)
    ax, ay = acceleration(v[0], v[1], s, c, (cd,), lift_coefficient=cl)
    ref = _reference_acceleration(v, s.mass, s.area, s.volume, 0.45, rho, g, cd, cl, wind,
                                  buoyancy)  # fmt: skip
    np.testing.assert_allclose([float(ax), float(ay)], ref, rtol=1e-13, atol=1e-15)


def test_backspin_lift_points_up_for_motion_along_plus_x():
    """closed-form/independent: a positive C_L lifts a specimen moving in +x (sign convention of
    the forces module docstring): vertical acceleration exceeds −g_net by ½ρC_LA u²/M."""
    s = Sphere(0.0027, 0.04)
    c = Conditions(Air(1.2))
    _, ay0 = acceleration(10.0, 0.0, s, c, (0.0,), lift_coefficient=0.0)
    _, ay1 = acceleration(10.0, 0.0, s, c, (0.0,), lift_coefficient=0.2)
    m_eff = effective_mass(s, 1.2)
    assert float(ay1 - ay0) == pytest.approx(0.5 * 1.2 * 0.2 * s.area * 100.0 / m_eff, rel=1e-13)


def test_acceleration_vectorised():
    """regression: arrays of velocities give arrays equal to element-wise evaluation."""
    s = Sphere(0.0027, 0.04)
    c = Conditions(Air(1.2), wind=1.5)
    vx = np.array([1.0, -3.0, 20.0, 0.0])
    vy = np.array([2.0, 7.0, -5.0, 0.0])
    ax, ay = acceleration(vx, vy, s, c, (0.5,), lift_coefficient=0.1)
    assert ax.shape == ay.shape == (4,)
    for i in range(4):
        axi, ayi = acceleration(vx[i], vy[i], s, c, (0.5,), lift_coefficient=0.1)
        assert ax[i] == pytest.approx(float(axi), rel=1e-15)
        assert ay[i] == pytest.approx(float(ayi), rel=1e-15)


def test_acceleration_with_power_law_model():
    """closed-form/independent: with the power-law model C_d = C_ref (Re/Re_ref)^n the drag
    deceleration is K C_d(Re) |u| u, Re = ρ|u|L/μ (the law as its model states it)."""
    s = Sphere(0.0027, 0.04)
    air = Air(1.2, 1.8e-5)
    c = Conditions(air)
    cd_ref, n, re_ref = 0.5, -0.3, 2.0e4
    vx, vy = 9.0, -4.0
    q = math.hypot(vx, vy)
    re_ = 1.2 * q * 0.04 / 1.8e-5
    cd = cd_ref * (re_ / re_ref) ** n
    ax, ay = acceleration(vx, vy, s, c, (cd_ref, n, re_ref), model="power-law")
    ref = _reference_acceleration((vx, vy), s.mass, s.area, s.volume, 0.5, 1.2, G, cd, 0.0, 0.0)
    np.testing.assert_allclose([float(ax), float(ay)], ref, rtol=1e-13)
