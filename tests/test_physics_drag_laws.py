"""Tests of fitdrag.physics.drag_laws: the scaled-sphere and power-law models (the
correlations themselves: tests/test_physics_sphere_drag.py).

Oracles: closed forms of the laws, and an independent scipy ``solve_ivp`` integration of
the equation of motion written out in this file.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from fitdrag.physics.air import Air
from fitdrag.physics.drag_laws import (
    POWER_LAW,
    SPHERE_SCALED,
    SUBCRITICAL_RE_LIMIT,
    power_law_reference_re,
    sphere_correlation_names,
    sphere_drag_coefficient,
    sphere_scaled_model,
)
from fitdrag.physics.forces import Conditions
from fitdrag.physics.registry import drag_model_names, get_drag_model
from fitdrag.physics.simulate import Launch, simulate
from fitdrag.physics.specimen import Sphere

# ------------------------------------------------------------------------- the registry


def test_models_registered_by_name():
    """regression: the models are found by name; variants are named after the correlation."""
    names = drag_model_names()
    assert {"sphere-scaled", "power-law", "sphere-scaled:clift-gauvin"} <= set(names)
    for c in sphere_correlation_names():
        assert f"sphere-scaled:{c}" in names
    assert get_drag_model("sphere-scaled") is SPHERE_SCALED
    assert SPHERE_SCALED.parameters == ("scale",)
    assert POWER_LAW.parameters == ("cd_ref", "exponent")
    assert POWER_LAW.constants == ("re_ref",)
    assert sphere_scaled_model("clift-gauvin").name == "sphere-scaled:clift-gauvin"
    assert sphere_scaled_model().kernel is SPHERE_SCALED.kernel
    with pytest.raises(ValueError, match=r"^correlation: unknown sphere drag correlation 'x'"):
        sphere_scaled_model("x")


def test_scaled_kernel_contract():
    """closed-form/independent: C_d = s C_sphere(Re), ∂C_d/∂s = C_sphere, ∂C_d/∂Re = s C'."""
    for name in ("morrison", "clift-gauvin"):
        m = sphere_scaled_model(name)
        grad = np.zeros(1)
        for re in (50.0, 3e3, 4e4):
            cd, dcd = m.kernel(re, np.array([0.8]), grad)
            c, dc = sphere_drag_coefficient(re, name, derivative=True)
            assert cd == pytest.approx(0.8 * c, rel=1e-14)
            assert grad[0] == pytest.approx(c, rel=1e-14)
            assert dcd == pytest.approx(0.8 * dc, rel=1e-14)


def test_power_law_kernel_against_closed_form_and_differences():
    """closed-form/independent: C_d = C_ref (Re/Re_ref)^n and its derivatives, against the
    formula and central differences."""
    p = np.array([0.45, -0.3, 2.5e4])
    grad = np.zeros(3)

    def f(cd_ref, n, re):
        return cd_ref * (re / p[2]) ** n

    for re in (8e3, 2.5e4, 6e4):
        cd, dcd = POWER_LAW.kernel(re, p, grad)
        assert cd == pytest.approx(f(p[0], p[1], re), rel=1e-14)
        h = 1e-6
        assert grad[0] == pytest.approx((f(p[0] + h, p[1], re) - f(p[0] - h, p[1], re)) / (2 * h))
        assert grad[1] == pytest.approx(
            (f(p[0], p[1] + h, re) - f(p[0], p[1] - h, re)) / (2 * h), rel=1e-7
        )
        d = re * 1e-6
        assert dcd == pytest.approx((f(p[0], p[1], re + d) - f(p[0], p[1], re - d)) / (2 * d))
    # at Re = Re_ref the law gives C_ref whatever the exponent
    assert POWER_LAW.cd([2.5e4], p)[0] == pytest.approx(0.45, rel=1e-15)


def test_power_law_reference_is_median_re():
    """closed-form/independent: Re_ref is the median Reynolds number of the flight."""
    assert POWER_LAW.constants_for([1e4, 3e4, 2e4, 5e4]) == (25000.0,)
    assert power_law_reference_re([7.0, np.nan, 9.0, 8.0]) == (8.0,)
    with pytest.raises(
        ValueError, match=r"^re_values: the power-law drag model needs a flight with a positive"
    ):
        power_law_reference_re([])


def test_drag_crisis_refused():
    """published-value: a scaled smooth-sphere curve is refused above Re = 2e5, the lower
    edge of the smooth sphere's drag crisis (E. Achenbach, J. Fluid Mech. 54, 1972, 565) and
    the upper limit stated for most correlations (Barati et al., Powder Technol. 257, 2014)."""
    assert SUBCRITICAL_RE_LIMIT == 2e5
    for name in sphere_correlation_names():
        m = sphere_scaled_model(name)
        assert m.re_range[1] <= 2e5
        m.check_re_range(max(m.re_range[0], 1e3), 1.9e5)  # inside: accepted
    with pytest.raises(
        ValueError,
        match=r"^drag model 'sphere-scaled': the flight spans Re 1e\+05–3\.2e\+05, outside the "
        r"model's validity Re 0–2e\+05; choose another model",
    ):
        SPHERE_SCALED.check_re_range(1e5, 3.2e5)
    with pytest.raises(ValueError, match=r"validity Re 0\.01–2e\+05"):
        sphere_scaled_model("khan-richardson").check_re_range(1e-3, 10.0)
    POWER_LAW.check_re_range(1e3, 5e5)  # the power law has no range of its own


# ------------------------------------------- simulation against an independent integration

AIR = Air(density=1.20, viscosity=1.81e-5)
BALL = Sphere(mass=0.0027, diameter=0.040)  # invented lab specimen, synthetic (40 mm, 2.7 g)
T = np.linspace(0.0, 0.9, 91)
LAUNCH = Launch.from_speed_angle(14.0, 35.0, y0=1.0)


def morrison_2013(re):
    """Morrison (2013) eq. 8.83, written out independently for the reference integration."""
    return (
        24 / re
        + 2.6 * (re / 5) / (1 + (re / 5) ** 1.52)
        + 0.411 * (re / 263000) ** -7.94 / (1 + (re / 263000) ** -8)
        + 0.25 * (re / 1e6) / (1 + re / 1e6)
    )


def reference_positions(cd_of_re, launch=LAUNCH, t=T, wind=0.0, cl=0.0):
    """Independent solve_ivp (DOP853) integration of
    (m + C_a ρ V) dv/dt = (m − ρ V) g − ½ ρ A |u| (C_d u − C_L P u), u = v − w
    (Timmerman & van der Weele, Am. J. Phys. 67, 1999; lift ⟂ u, P u = (−u_y, u_x))."""
    m, d, rho, mu, g = BALL.mass, BALL.diameter, AIR.density, AIR.viscosity, 9.80665
    vol, area = math.pi * d**3 / 6, math.pi * d**2 / 4
    m_eff = m + 0.5 * rho * vol

    def rhs(_t, s):
        ux, uy = s[2] - wind, s[3]
        q = math.hypot(ux, uy)
        cd = cd_of_re(rho * q * d / mu)
        f = 0.5 * rho * area * q
        return [
            s[2],
            s[3],
            (-f * (cd * ux + cl * uy)) / m_eff,
            (-(m - rho * vol) * g - f * (cd * uy - cl * ux)) / m_eff,
        ]

    sol = solve_ivp(rhs, (t[0], t[-1]), launch.as_array(), method="DOP853", t_eval=t,
                    rtol=1e-12, atol=1e-12)  # fmt: skip
    assert sol.success
    return np.column_stack((sol.y[0], sol.y[1]))


@pytest.mark.parametrize(
    ("model", "params", "cd_of_re"),
    [
        ("sphere-scaled", (0.85,), lambda re: 0.85 * morrison_2013(re)),
        ("power-law", (0.5, -0.25, 3.0e4), lambda re: 0.5 * (re / 3.0e4) ** -0.25),
    ],
)
def test_simulated_flight_matches_independent_integration(model, params, cd_of_re):
    """closed-form/independent: fitdrag's compiled flight with the model equals a scipy
    solve_ivp DOP853 integration of the same equation within 1 µm."""
    f = simulate(T, LAUNCH, BALL, Conditions(AIR), model=model, drag_params=params)
    assert f.success
    ref = reference_positions(cd_of_re)
    np.testing.assert_allclose(np.column_stack((f.x, f.y)), ref, atol=1e-6, rtol=0)
    # the flight spans the subcritical range this test is meant for
    re = AIR.density * np.hypot(f.vx, f.vy) * BALL.diameter / AIR.viscosity
    assert 1e4 < re.min() < re.max() < 5e4


@pytest.mark.parametrize(
    ("model", "params", "cd_of"),
    [
        ("sphere-scaled", (0.85,), lambda p: lambda re: p[0] * morrison_2013(re)),
        (
            "power-law",
            (0.5, -0.25, 3.0e4),
            lambda p: lambda re: p[0] * (re / 3.0e4) ** p[1],
        ),
    ],
)
def test_sensitivities_match_finite_differences_of_independent_integration(model, params, cd_of):
    """closed-form/independent: ∂(x, y)/∂p of the drag parameters from the simulator's
    sensitivity equations (which use our analytic dC_d/dRe) against central differences of
    the solve_ivp reference integration."""
    f = simulate(T, LAUNCH, BALL, Conditions(AIR), model=model, drag_params=params,
                 sensitivities=True)  # fmt: skip
    n_fit = len(get_drag_model(model).parameters)
    for j in range(n_fit):
        h = 1e-4
        up = list(params[:n_fit])
        dn = list(params[:n_fit])
        up[j] += h
        dn[j] -= h
        fd = (reference_positions(cd_of(up)) - reference_positions(cd_of(dn))) / (2 * h)
        np.testing.assert_allclose(f.jacobian[:, :, 4 + j], fd, rtol=1e-5, atol=1e-8)


# ------------------------------------------------------ fits to independently made throws


def _noisy(t, pos, sigma, seed):
    from fitdrag.tracks.track import Track

    rng = np.random.default_rng(seed)
    return Track(
        t, pos[:, 0] + rng.normal(0, sigma, t.size), pos[:, 1] + rng.normal(0, sigma, t.size)
    )


@pytest.mark.parametrize(
    ("model", "truth", "cd_of_re", "wind"),
    [
        ("constant", {"cd": 0.45}, lambda re: 0.45, 0.0),
        ("sphere-scaled", {"scale": 0.85}, lambda re: 0.85 * morrison_2013(re), 0.0),
        ("power-law", {"exponent": -0.25}, lambda re: 0.5 * (re / 3.0e4) ** -0.25, 0.0),
        ("power-law", {"exponent": -0.25}, lambda re: 0.5 * (re / 3.0e4) ** -0.25, -3.0),
    ],
)
def test_fit_recovers_model_parameters_from_independent_integration(model, truth, cd_of_re, wind):
    """closed-form/independent: each model fitted (fitdrag.fit.fitting.fit_tracks) to a throw made
    by the solve_ivp reference integration (with 1 mm white noise, and with a known head wind)
    recovers its parameters within 3 standard uncertainties; for the power law also C_ref at
    the fitted Re_ref, C_ref = 0.5 (Re_ref/3e4)^-0.25."""
    from fitdrag.fit.fitting import fit_tracks

    t = np.arange(0.0, 0.8, 1 / 250)
    pos = reference_positions(cd_of_re, t=t, wind=wind)
    fit = fit_tracks(_noisy(t, pos, 1e-3, 21), BALL, AIR, model=model, wind=wind)
    assert fit.success, fit.message
    for name, value in truth.items():
        v, u = fit.parameter(name)
        assert abs(v - value) < 3 * u, (name, v, u)
    if model == "power-law":
        re_ref = fit.constants[0]
        v, u = fit.parameter("cd_ref")
        assert abs(v - cd_of_re(re_ref)) < 3 * u
    d = fit.to_dict()
    assert d["drag_model"]["name"] == model
    assert set(d["drag_model"]["parameters"]) == set(
        get_drag_model(model).parameters + get_drag_model(model).constants
    )
    # drag_coefficient is Cd at the median Re of the fitted flight
    re_med = d["drag_coefficient"]["at_reynolds_number"]
    assert d["drag_coefficient"]["value"] == pytest.approx(cd_of_re(re_med), abs=3 * fit.u_cd)
