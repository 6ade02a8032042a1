"""Tests of fitdrag.fit.image_refit: re-solving a finished 3-D fit with changed inputs.

Synthetic observations from tests/views_reference.py (simulate_3d through Camera's exact
sphere outline; invented lab scenario, synthetic).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
import views_reference as ref

from fitdrag.errors import InputError
from fitdrag.fit.image_fit import fit_views
from fitdrag.fit.image_refit import ViewRefitSession, refit_views
from fitdrag.physics.air import Air
from fitdrag.physics.specimen import Sphere


@pytest.fixture(scope="module")
def two_views():
    rng = np.random.default_rng(7)
    th = ref.launch(1.5)
    views = [ref.observe(ref.camera_at(y), th, offset=4e-4 * i, rng=rng, sigma=0.1,
                         diameter_sigma=0.1) for i, y in enumerate((-20.0, 20.0))]  # fmt: skip
    r = fit_views(views, ref.BALL, ref.AIR, noise="white")
    assert r.success, r.message
    return views, r


def test_refit_at_the_nominal_inputs_is_the_fit(two_views):
    """regression: unchanged inputs give the fit's own Cd and parameters back."""
    views, r = two_views
    a = refit_views(r, views)
    assert a.success
    assert a.cd == pytest.approx(r.cd, rel=1e-10)
    assert np.allclose(a.values, r.values, rtol=1e-8, atol=1e-12)


@pytest.mark.parametrize(
    "change",
    [
        {"specimen": Sphere(ref.BALL.mass * 1.01, ref.BALL.diameter)},
        {"air": Air(ref.AIR.density * 1.02)},
        {"gravity": 9.80665 * 1.001},
        {"wind": (0.2, 0.0, 0.0)},
    ],
)
def test_refit_agrees_with_a_new_full_fit(two_views, change):
    """closed-form/independent: after a changed mass, air density or gravity, the change of
    the re-solved Cd agrees within 10 % with that of a complete new fit_views run from
    scratch with those inputs (which also re-estimates the noise levels: the only
    difference, 6 % of the change for gravity, 0.1 % for mass and density), and so does a
    wind of 0.2 m/s along +x, so the shortcut
    (noise state kept, start at the old optimum) measures the input's effect."""
    views, r = two_views
    a = refit_views(r, views, **change)
    sp = change.get("specimen", ref.BALL)
    air = change.get("air", ref.AIR)
    g = change.get("gravity", 9.80665)
    wind = change.get("wind", (0.0, 0.0, 0.0))
    full = fit_views(views, sp, air, gravity=g, wind=wind, noise="white")
    assert a.success and full.success
    assert abs(a.cd - full.cd) <= 0.1 * abs(full.cd - r.cd)
    assert abs(full.cd - r.cd) > 0.5 * r.u_cd  # the change itself is resolved


def test_refit_with_a_moved_camera(two_views):
    """closed-form/independent: moving camera 2 by 1 mm and its stated offset are
    replacements the re-fit takes; the time offset stays a fitted parameter."""
    views, r = two_views
    cam = views[1].camera
    moved = replace(views[1], camera=cam.with_pose(cam.rotation, cam.translation + [0, 0, 1e-3]))
    a = refit_views(r, [views[0], moved])
    assert a.success and a.cd != r.cd
    assert "time_offset_2" in r.parameter_names


def test_refit_bad_input(two_views):
    """regression: a re-fit needs the same views (count and observations)."""
    views, r = two_views
    with pytest.raises(InputError, match=r"^views: a re-fit needs the same cameras with the "
                                         r"same number of observations"):  # fmt: skip
        refit_views(r, views[:1])
    with pytest.raises(InputError, match=r"^model: 'power-law' has parameters \('cd_ref', "
                       r"'exponent'\), the fit's 'constant' \('cd',\)"):  # fmt: skip
        refit_views(r, views, model="power-law")


def test_fixed_jacobian_session_agrees_with_full_refits(two_views):
    """closed-form/independent: the chord re-solve with the fit's Jacobian held, finished by
    an exact Gauss–Newton step (Dennis and Schnabel, Numerical Methods for Unconstrained
    Optimization and Nonlinear Equations, SIAM 1996, sec. 10.2; the fixed point is the
    optimum to second order), gives the Cd of full re-fits within 1e-4 u(Cd) on 12 random
    budget-sized changes (air density 0.5 %, mass 0.3 %, both cameras moved by 0.3 mm along
    their axes, new centroid noise of 0.1 px), and the fit's own Cd at unchanged inputs."""
    views, r = two_views
    session = ViewRefitSession(r, views)
    same = session.solve(views)
    assert same is not None and same.cd == pytest.approx(r.cd, rel=1e-10)
    rng = np.random.default_rng(11)
    for _ in range(12):
        air = Air(ref.AIR.density * (1.0 + 0.005 * rng.normal()))
        sp = Sphere(ref.BALL.mass * (1.0 + 0.003 * rng.normal()), ref.BALL.diameter)
        moved = []
        for v in views:
            cam = v.camera
            shift = np.array([0.0, 0.0, 3e-4 * rng.normal()])
            moved.append(replace(v, camera=cam.with_pose(cam.rotation, cam.translation + shift),
                                 u=v.u + 0.1 * rng.normal(size=len(v)),
                                 v=v.v + 0.1 * rng.normal(size=len(v))))  # fmt: skip
        full = refit_views(r, moved, specimen=sp, air=air)
        fast = session.solve(moved, specimen=sp, air=air)
        assert full.success and fast is not None
        assert abs(fast.cd - full.cd) <= 1e-4 * r.u_cd
        assert np.allclose(fast.values, full.values, rtol=1e-6, atol=1e-9)


def test_fixed_jacobian_session_bad_input(two_views):
    """regression: a session needs a converged fit and the same views."""
    views, r = two_views
    with pytest.raises(InputError, match=r"^result: the fit did not converge; a re-fit needs "
                                         r"a converged fit\.$"):  # fmt: skip
        ViewRefitSession(replace(r, success=False), views)
    session = ViewRefitSession(r, views)
    with pytest.raises(InputError, match=r"^views: a re-fit needs the same cameras with the "
                                         r"same number of observations"):  # fmt: skip
        session.solve(views[:1])
