"""Tests of fitdrag.fit.view_budget_model: Cd of a 3-D measurement as a function of its
inputs (specimen, air, cameras' calibrations), by re-fit; the weighted mean over throws.

Synthetic observations from tests/views_reference.py (invented lab scenario, synthetic).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
import views_reference as ref

from fitdrag.errors import InputError
from fitdrag.fit.image_fit import fit_views
from fitdrag.fit.image_refit import refit_views
from fitdrag.fit.view_budget_model import (
    CameraCalibration,
    ViewRefitModel,
    ViewThrow,
    _with_focal,
    combine_throws,
)
from fitdrag.geometry.camera import rotation_from_vector
from fitdrag.geometry.pose import MarkerBoard

POSE_COV = np.diag([2e-4**2] * 3 + [1e-3**2] * 3)  # 0.2 mrad, 1 mm (invented)
BOARD = MarkerBoard(0.10, {0: (0.0, 0.0), 1: (2.4, 0.0), 2: (2.4, 1.8), 3: (0.0, 1.8)})


def _corners(cam):
    """The board's marker corners as the camera records them (exact projection)."""
    return {k: cam.project(BOARD.corners(k)).pixels for k in BOARD.positions}


@pytest.fixture(scope="module")
def throw():
    rng = np.random.default_rng(3)
    th = ref.launch(1.0)
    views = [ref.observe(ref.camera_at(y, readout=1e-3), th, offset=4e-4 * i, rng=rng,
                         sigma=0.1, diameter_sigma=0.1, name=f"cam {i + 1}")
             for i, y in enumerate((-20.0, 20.0))]  # fmt: skip
    r = fit_views(views, ref.BALL, ref.AIR, noise="white")
    assert r.success, r.message
    return views, r


def _model(throw, *, corners=False, cov=POSE_COV, focal=1.0):
    views, r = throw
    cals = [CameraCalibration(f"lens {k}", cov, focal_length_uncertainty=focal,
                              marker_corners=_corners(v.camera) if corners else None,
                              board=BOARD if corners else None)
            for k, v in enumerate(views)]  # fmt: skip
    nominal = {"mass": ref.BALL.mass, "diameter": ref.BALL.diameter,
               "air_density": ref.AIR.density, "frame_rate": ref.FPS, "length_scale": 1.0}  # fmt: skip
    return ViewRefitModel([ViewThrow(views, cals, r, "1")], nominal)


def test_nominal_value_and_input_names(throw):
    """regression: at the nominal inputs the model gives the fit's Cd; the camera inputs are
    one pose line per view, a focal length and a readout per camera id."""
    m = _model(throw)
    assert m({}) == pytest.approx(throw[1].cd, rel=1e-10)
    assert list(m.camera_names) == [
        "pose_1_1",
        "focal_length_1",
        "readout_time_1",
        "centroid_u_1_1",
        "centroid_v_1_1",
        "pose_1_2",
        "focal_length_2",
        "readout_time_2",
        "centroid_u_1_2",
        "centroid_v_1_2",
    ]  # fmt: skip (two cameras: the fit leaves the diameters out, so no diameter drift)
    u = m.camera_uncertainties()
    assert u["pose_1_1"] == 1.0 and u["readout_time_1"] == 0.0
    assert u["focal_length_2"] == pytest.approx(1.0 / 900.0)
    assert u["centroid_v_1_2"] == 0.1  # the tracker's validated systematic error [px]
    assert m.nominal["readout_time_1"] == pytest.approx(1e-3)


def test_fixed_jacobian_model_agrees_with_full_refits(throw):
    """closed-form/independent: the model's default fixed-Jacobian re-solves
    (ViewRefitSession) give the Cd of full re-fits (``full``) within 1e-4 u(Cd) for a pose
    line, a focal length, the air density and the frame rate moved by their standard
    uncertainties (chord method, Dennis and Schnabel, SIAM 1996, sec. 10.2)."""
    m = _model(throw)
    u = throw[1].u_cd
    for values in ({"pose_1_1": 1.0}, {"focal_length_2": 1.0 + 1.0 / 900.0},
                   {"air_density": ref.AIR.density * 1.003}, {"frame_rate": ref.FPS * 1.0001}):  # fmt: skip
        assert abs(m(values) - m.full(values)) <= 1e-4 * u
    assert m.fixed_jacobian  # restored after full()


def test_pose_line_carries_the_whole_pose_covariance(throw):
    """closed-form/independent: the one pose line (direction d = Σg/√(gᵀΣg)) gives, by
    central difference, the same contribution as the six eigen-directions of Σ evaluated
    independently by re-fit and added in quadrature (JCGM 100:2008 eq. 13 with the
    covariance): within 5 %."""
    m = _model(throw)
    views, r = throw
    line = (m({"pose_1_1": 1.0}) - m({"pose_1_1": -1.0})) / 2.0
    w, vecs = np.linalg.eigh(POSE_COV)
    total = 0.0
    for lam, e in zip(w, vecs.T):
        step = math.sqrt(lam) * e
        cds = []
        for sgn in (1.0, -1.0):
            cam = views[0].camera
            moved = cam.with_pose(rotation_from_vector(cam.rvec + sgn * step[:3]),
                                  cam.translation + sgn * step[3:])  # fmt: skip
            cds.append(refit_views(r, [replace(views[0], camera=moved), views[1]]).cd)
        total += ((cds[0] - cds[1]) / 2.0) ** 2
    assert abs(line) == pytest.approx(math.sqrt(total), rel=0.05)
    assert abs(line) > 0.1 * r.u_cd  # resolved, not noise


def test_focal_length_with_the_board_resolves_the_pose(throw):
    """closed-form/independent: a focal length 0.1 % longer with the pose re-solved from the
    board's corners moves the camera 0.1 % further away (PnP: the image of the board fixes
    f/Z; pinhole model, Hartley and Zisserman 2004, eq. 6.1), so Cd moves far less than with
    the pose held (which puts the flight at the wrong scale)."""
    held = _model(throw)
    solved = _model(throw, corners=True)
    d_held = abs(held({"focal_length_1": 1.001}) - held({}))
    d_solved = abs(solved({"focal_length_1": 1.001}) - solved({}))
    assert d_solved < 0.5 * d_held
    cam = throw[0][0].camera
    cal = solved.throws[0].calibrations[0]
    new = _with_focal(cam, 1.001, cal)
    middle = np.array([1.25, 0.95, 0.0])  # the board's middle
    z_old = np.linalg.norm(cam.centre - middle)
    z_new = np.linalg.norm(new.centre - middle)
    assert z_new / z_old == pytest.approx(1.001, abs=2e-4)


def test_combine_throws_weighted_mean_and_birge_ratio():
    """closed-form/independent: weights 1/u² (u = 0.01, 0.02: w = 0.8, 0.2), internal
    uncertainty (Σu⁻²)^-½ = 0.008944; consistent throws keep it, scattered ones
    (R_B = 3.578) multiply it by R_B with n − 1 dof (Birge 1932)."""
    w, mean, u, dof, rb = combine_throws([0.50, 0.51], [0.01, 0.02], [100, 100])
    assert w == pytest.approx([0.8, 0.2]) and mean == pytest.approx(0.502)
    assert u == pytest.approx(1 / math.sqrt(1e4 + 2500)) and rb < 1 and dof > 100
    w, mean, u, dof, rb = combine_throws([0.50, 0.58], [0.01, 0.02], [100, 100])
    chi2 = (0.50 - 0.516) ** 2 / 1e-4 + (0.58 - 0.516) ** 2 / 4e-4
    assert rb == pytest.approx(math.sqrt(chi2)) and dof == 1
    assert u == pytest.approx(rb / math.sqrt(1e4 + 2500))


def test_bad_input(throw):
    """regression: a pose covariance that is not 6x6, an unknown nominal input."""
    with pytest.raises(InputError, match=r"^pose_covariance: expected a finite 6x6 matrix"):
        CameraCalibration("a", np.eye(3))
    views, r = throw
    cals = [CameraCalibration("a", POSE_COV)] * 2
    with pytest.raises(InputError, match=r"^nominal: unknown input name\(s\) \['roll'\]"):
        ViewRefitModel([ViewThrow(views, cals, r)], {"roll": 0.0})
    with pytest.raises(InputError, match=r"^calibrations: one per view is needed, got 1 for 2"):
        ViewThrow(views, cals[:1], r)


def test_air_speed_is_a_wind_along_the_fitted_flight():
    """closed-form/independent: two cameras see a throw through air moving at 0.3 m/s along
    the flight's own chord (simulate_3d with that wind, itself checked against scipy's DOP853
    in tests/test_physics_flight3d.py; the chord found by iterating); fitted as if in still
    air Cd is off by more than 0.01, and the model re-fitted with air_speed = 0.3 m/s gives the
    truth 0.50 back within 3 u(Cd); its direction is the chord.  With another correlation the
    re-fit agrees with a full fit (within u/2)."""
    from fitdrag.physics.flight3d import simulate_3d
    from fitdrag.physics.forces import Conditions

    th = ref.launch(1.0)
    t = np.arange(200) / ref.FPS
    w = 0.3
    e = np.array([1.0, 0.0, 0.0])
    for _ in range(5):
        fl = simulate_3d(t, th, ref.BALL, Conditions(ref.AIR), drag_params=(ref.CD,),
                         t0=ref.T_LAUNCH, wind=tuple(w * e))  # fmt: skip
        d = fl.position[-1] - fl.position[0]
        e = d / np.linalg.norm(d)
    rng = np.random.default_rng(5)
    views = [ref.observe(ref.camera_at(y), th, rng=rng, sigma=0.05, diameter_sigma=0.05,
                         time_offset="true", name=f"cam {i}", wind=tuple(w * e))
             for i, y in enumerate((-20.0, 20.0))]  # fmt: skip
    r = fit_views(views, ref.BALL, ref.AIR, noise="white")
    assert r.success, r.message
    assert abs(r.cd - ref.CD) > 0.01
    cals = [CameraCalibration(f"lens {k}", POSE_COV) for k in range(2)]
    model = ViewRefitModel([ViewThrow(views, cals, r, "1")], {"air_speed": 0.0, "drag_law": 0.0})
    # the views are seen from the first observed frame on: the chord is nearly the same
    assert np.allclose(model.directions[0], e, atol=0.02)
    assert abs(model({"air_speed": w}) - ref.CD) < 3 * r.u_cd
    assert model({"drag_law": 0.002}) == pytest.approx(r.cd + 0.002, rel=1e-9)
    other = "sphere-scaled:clift-gauvin"
    scaled = fit_views(views, ref.BALL, ref.AIR, model="sphere-scaled", noise="white")
    m2 = ViewRefitModel([ViewThrow(views, cals, scaled, "1")], {})
    full = fit_views(views, ref.BALL, ref.AIR, model=other, noise="white")
    assert abs(m2.cd_with_model(other) - full.cd) < 0.5 * scaled.u_cd


def test_tracker_systematic_lines(throw):
    """closed-form/independent: a constant shift of every centroid of one camera moves Cd only
    through perspective (a shift of both cameras' images by the same pixels is not a rigid
    motion of the flight), so its line is resolved but small against the pose's; with one
    camera the diameters are used and a diameter drift line appears, whose effect on Cd is
    of the order the validation study found (4.5-7.9 % per 0.1 px)."""
    m = _model(throw)
    cd0 = m({})
    shift = abs(m({"centroid_v_1_1": 0.1}) - cd0)
    assert 0 < shift < 0.01 * cd0
    views, r = throw
    one = fit_views(views[:1], ref.BALL, ref.AIR, noise="white")
    assert one.success and one.views[0].diameter_used
    cal = CameraCalibration("lens 0", POSE_COV)
    nominal = {"mass": ref.BALL.mass, "diameter": ref.BALL.diameter}
    m1 = ViewRefitModel([ViewThrow(views[:1], [cal], one, "1")], nominal)
    assert "diameter_drift_1_1" in m1.camera_names
    drift = (m1({"diameter_drift_1_1": 0.1}) - m1({})) / m1({})
    assert 0.005 < abs(drift) < 0.2
