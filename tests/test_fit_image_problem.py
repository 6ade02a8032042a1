"""Tests of fitdrag.fit.image_problem: the image-space residuals and their Jacobian."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
import views_reference as ref

from fitdrag.fit.image_problem import ImageProblem
from fitdrag.physics.forces import Conditions
from fitdrag.physics.registry import get_drag_model


def _problem(phi=0.0, diameter=False):
    th = ref.launch(2.0)
    cams = [ref.camera_at(-20.0, readout=1e-3), ref.camera_at(20.0, readout=0.6e-3)]
    cams[1] = replace(cams[1], distortion=(-0.1, 0.05, 0.0, 0.0, 0.0))
    views = [ref.observe(c, th, n=60, offset=1e-3 * i, rng=np.random.default_rng(i))
             for i, c in enumerate(cams)]  # fmt: skip
    measures, scales = ([None, 0.3], [1.02, None]) if diameter else (None, None)
    p = ImageProblem(views, ref.BALL, Conditions(ref.AIR), get_drag_model("constant"), (),
                     True, np.array([0.3, 0.0, -0.2]), np.array([0.1, 0.2, 1.0]) / 1.025,
                     [True, True], [0.0, None], -0.01, measures, scales)  # fmt: skip
    p.set_noise(levels=[0.3, 0.4, 0.5, 0.3, 0.3, 0.2], phis=[phi, -phi, phi / 2, phi, 0, phi])
    theta = np.concatenate(([0.48, 0.05], th.as_array() + 0.01, [1.1e-3]))
    if diameter:  # lam of view 1, scale of view 2
        theta = np.concatenate((theta, [0.6, 0.98]))
    return p, theta


#: Central-difference steps of the diameter problem's parameters (launch 2, state 6, Cd,
#: diameter measure and scale).
_DIAMETER_STEPS = [1e-6, 1e-6, 1e-7, 1e-7, 1e-7, 1e-6, 1e-6, 1e-6, 1e-8, 1e-6, 1e-6]


def _columns_match_central_differences(p, theta, jac):
    """Each Jacobian column against central differences of the residuals, to 1e-5 of the
    column's scale."""
    for j, h in enumerate(_DIAMETER_STEPS):
        e = np.zeros_like(theta)
        e[j] = h
        fd = (p.evaluate(theta + e)[0] - p.evaluate(theta - e)[0]) / (2 * h)
        scale = np.abs(jac[:, j]).max()
        assert scale > 0
        np.testing.assert_allclose(fd, jac[:, j], atol=1e-5 * scale, err_msg=p.parameter_names()[j])


@pytest.mark.parametrize("phi", [0.0, 0.6])
def test_jacobian_matches_finite_differences_of_the_residuals(phi):
    """closed-form/independent: the analytic Jacobian (outline centre and width derivatives
    times the simulator's sensitivities, velocity for the time offset; rolling shutter,
    distortion, wind, lift about a tilted axis, AR(1) whitening) against central
    differences of the residual function, to 1e-5 of each column's scale."""
    p, theta = _problem(phi)
    _r, jac, _s, ok = p.evaluate(theta)
    assert ok and jac.shape == (p.n_resid, 2 + 6 + 1)
    steps = [1e-6, 1e-6, 1e-7, 1e-7, 1e-7, 1e-6, 1e-6, 1e-6, 1e-8]
    for j, h in enumerate(steps):
        e = np.zeros_like(theta)
        e[j] = h
        fd = (p.evaluate(theta + e)[0] - p.evaluate(theta - e)[0]) / (2 * h)
        scale = np.abs(jac[:, j]).max()
        assert scale > 0
        np.testing.assert_allclose(fd, jac[:, j], atol=1e-5 * scale, err_msg=p.parameter_names()[j])


def test_residuals_vanish_at_the_truth_without_noise():
    """closed-form/independent: noise-free observations made by the independent outline route
    of tests/views_reference.py (sphere_outline, row times iterated) are reproduced by the
    problem at the true parameters: centres to 1e-6 px; diameters to 0.01 px (the fit
    measures the width across the observed direction of motion, differenced over 4 frames
    either side, the reference across the true one; the outline is slightly elliptic)."""
    th = ref.launch(3.0)
    cams = [ref.camera_at(0.0, readout=1e-3), ref.camera_at(25.0)]
    views = [ref.observe(c, th, offset=-2e-3 * i, sigma=0.0, diameter_sigma=0.0, n=80)
             for i, c in enumerate(cams)]  # fmt: skip
    p = ImageProblem(views, ref.BALL, Conditions(ref.AIR), get_drag_model("constant"), (),
                     False, np.zeros(3), np.array([0.0, 0.0, 1.0]), [True, True], [0.0, None],
                     ref.T_LAUNCH)  # fmt: skip
    raw = p.raw_residuals(np.concatenate(([ref.CD], th.as_array(), [-2e-3])))
    names = [ch.name for ch in p.channels]
    assert names == ["u", "v", "diameter"] * 2
    for name, r in zip(names, raw):
        assert float(np.abs(r).max()) < (1e-6 if name != "diameter" else 0.01)
    assert p.parameter_names() == ["cd", "x0", "y0", "z0", "vx0", "vy0", "vz0", "time_offset_2"]


def test_jacobian_of_the_diameter_measure_and_scale():
    """closed-form/independent: with the diameters' measure lam (between the width across the
    motion and the equal-area diameter) fitted for one view and their scale for the other,
    the analytic Jacobian (every column, AR(1) whitening on) against central differences of
    the residual function, to 1e-5 of each column's scale."""
    p, theta = _problem(0.4, diameter=True)
    assert p.parameter_names()[-2:] == ["diameter_measure_1", "diameter_scale_2"]
    assert p.measures(theta) == [0.6, 0.3] and p.scales(theta) == [1.02, 0.98]
    _r, jac, _s, ok = p.evaluate(theta)
    assert ok and jac.shape == (p.n_resid, 2 + 6 + 1 + 2)
    _columns_match_central_differences(p, theta, jac)
    # the new columns touch only the diameter rows of their own view
    diameter_rows = [ch.rows for ch in p.channels if ch.kind == 2]
    lam_col, scale_col = jac[:, -2], jac[:, -1]
    assert np.all(lam_col[diameter_rows[1]] == 0) and np.any(lam_col[diameter_rows[0]] != 0)
    assert np.all(scale_col[diameter_rows[0]] == 0) and np.any(scale_col[diameter_rows[1]] != 0)
    assert np.all(lam_col[p.channels[0].rows] == 0) and np.all(scale_col[p.channels[4].rows] == 0)


def test_equal_area_diameters_are_reproduced_with_lam_one():
    """closed-form/independent: diameters made as 2 sqrt(a b) of the exact conic
    (Camera.sphere_outline, with the rolling shutter's area factor 1 / (1 - (readout / rows)
    dv/dt) from the true image velocity) and scaled by 1.03 are reproduced by the problem at
    lam = 1, s = 1.03, to 2e-3 px (the problem takes dv/dt from the observed track)."""
    th = ref.launch(2.0)
    cam = ref.camera_at(15.0, readout=1e-3)
    view = ref.observe(cam, th, sigma=0.0, diameter_sigma=0.0, n=80)
    p = ImageProblem([view], ref.BALL, Conditions(ref.AIR), get_drag_model("constant"), (),
                     False, np.zeros(3), np.array([0.0, 0.0, 1.0]), [True], [0.0],
                     ref.T_LAUNCH, [1.0], [1.03])  # fmt: skip
    theta = np.concatenate(([ref.CD], th.as_array()))
    sims, ok = p.simulate(theta, sens=True)
    pos, vel = sims[0][0], sims[0][1]
    img_vel = np.einsum("nij,nj->ni", cam.project(pos, jacobians=True).d_point, vel)
    factor = 1.0 / (1.0 - cam.readout_time / cam.rows * img_vel[:, 1])
    area = np.array([np.sqrt(o.semi_major * o.semi_minor)
                     for o in (cam.sphere_outline(q, 0.5 * ref.BALL.diameter) for q in pos)])  # fmt: skip
    made = 1.03 * 2.0 * area * np.sqrt(factor)
    pred, ok = p.predict(theta)
    assert ok
    np.testing.assert_allclose(pred[0][2], made, atol=2e-3)
    # across the motion and equal-area differ by far more than that here
    assert float(np.max(np.abs(made / 1.03 - view.diameter))) > 0.1


@pytest.mark.parametrize("phi", [0.0, 0.6])
def test_diameters_not_measured_are_left_out(phi):
    """closed-form/independent: a view whose diameters are NaN in some frames (the tracker's
    outline fit failed there) gives a diameter channel of the measured frames only: its raw
    residuals are those of the complete view at those frames, its AR(1) whitening runs over
    their frame gaps, and the analytic Jacobian still matches central differences of the
    residuals (to 1e-5 of each column's scale)."""
    p_full, theta = _problem(phi)
    views = list(p_full.views)
    d = np.array(views[1].diameter)
    gone = [0, 7, 8, 9, 30, 59]
    d[gone] = np.nan
    views[1] = replace(views[1], diameter=d)
    p = ImageProblem(views, ref.BALL, Conditions(ref.AIR), get_drag_model("constant"), (),
                     True, np.array([0.3, 0.0, -0.2]), np.array([0.1, 0.2, 1.0]) / 1.025,
                     [True, True], [0.0, None], -0.01)  # fmt: skip
    p.set_noise(levels=[0.3, 0.4, 0.5, 0.3, 0.3, 0.2], phis=[phi, -phi, phi / 2, phi, 0, phi])
    keep = np.setdiff1d(np.arange(60), gone)
    ch = p.channels[5]
    assert ch.observed.size == keep.size == 54 and p.n_resid == p_full.n_resid - len(gone)
    np.testing.assert_array_equal(ch.gaps, np.diff(keep))
    full = p_full.raw_residuals(theta)[5]
    np.testing.assert_allclose(p.raw_residuals(theta)[5], full[keep], rtol=0, atol=1e-12)
    _r, jac, _s, ok = p.evaluate(theta)
    assert ok
    steps = [1e-6, 1e-6, 1e-7, 1e-7, 1e-7, 1e-6, 1e-6, 1e-6, 1e-8]
    for j, h in enumerate(steps):
        e = np.zeros_like(theta)
        e[j] = h
        fd = (p.evaluate(theta + e)[0] - p.evaluate(theta - e)[0]) / (2 * h)
        np.testing.assert_allclose(fd, jac[:, j], atol=1e-5 * np.abs(jac[:, j]).max())


def test_missing_diameters_with_measure_and_scale_fitted():
    """closed-form/independent: a view with diameters missing in some frames and its diameter
    measure fitted, the other view's scale fitted (until this change the measure and scale
    columns were filled with every frame's values and the evaluation failed with a shape
    error): the analytic Jacobian, every column, against central differences of the
    residual function, to 1e-5 of each column's scale."""
    p_full, theta = _problem(0.4, diameter=True)
    views = list(p_full.views)
    for i, gone in ((0, [3, 4, 20]), (1, [0, 7, 8, 9, 30, 59])):
        d = np.array(views[i].diameter)
        d[gone] = np.nan
        views[i] = replace(views[i], diameter=d)
    p = ImageProblem(views, ref.BALL, Conditions(ref.AIR), get_drag_model("constant"), (),
                     True, np.array([0.3, 0.0, -0.2]), np.array([0.1, 0.2, 1.0]) / 1.025,
                     [True, True], [0.0, None], -0.01, [None, 0.3], [1.02, None])  # fmt: skip
    p.set_noise(levels=[0.3, 0.4, 0.5, 0.3, 0.3, 0.2], phis=[0.4, -0.4, 0.2, 0.4, 0, 0.4])
    assert p.n_resid == p_full.n_resid - 9
    _r, jac, _s, ok = p.evaluate(theta)
    assert ok and jac.shape == (p.n_resid, 2 + 6 + 1 + 2)
    _columns_match_central_differences(p, theta, jac)
