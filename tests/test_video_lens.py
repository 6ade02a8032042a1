"""Tests of fitdrag.video.lens: lens model, undistortion, checkerboard calibration.

Independent reference: OpenCV's ``cv2.projectPoints`` (OpenCV 5 documentation, calib3d,
radial-tangential distortion model) projects board corners through a known camera matrix and
known distortion; the synthetic checkerboard views are rendered in this file from the same
model (each supersampled pixel is traced back through the inverse distortion to the board
plane), so the true lens is known exactly.
"""

from __future__ import annotations

import json
import re

import cv2
import numpy as np
import pytest

from fitdrag.errors import OutputExistsError
from fitdrag.video.lens import (
    LensModel,
    calibrate_lens,
    find_board_corners,
    load_lens,
    parse_board,
)

K_TRUE = np.array([[610.0, 0.0, 322.5], [0.0, 608.0, 236.5], [0.0, 0.0, 1.0]])
D_TRUE = np.array([-0.27, 0.085, 0.0007, -0.0004, 0.0])
SIZE = (640, 480)
BOARD = (9, 6)
SQUARE = 0.03  # [m]


def board_poses(n, seed=4):
    """Board poses spread over the frame (centre and corners), tilted up to 35 deg."""
    rng = np.random.default_rng(seed)
    centre = np.array([(BOARD[0] - 1) / 2 * SQUARE, (BOARD[1] - 1) / 2 * SQUARE, 0.0])
    targets = [(0, 0), (-1, -1), (1, -1), (-1, 1), (1, 1), (0, -1), (0, 1), (-1, 0), (1, 0)]
    poses = []
    for i in range(n):
        tx, ty = targets[i % len(targets)]
        rvec = np.radians([rng.uniform(-35, 35), rng.uniform(-35, 35), rng.uniform(-20, 20)])
        r, _ = cv2.Rodrigues(rvec)
        z = rng.uniform(0.55, 0.7)
        target = np.array([0.16 * tx * z / 0.6, 0.11 * ty * z / 0.6, z])
        poses.append((rvec.reshape(3, 1), (target - r @ centre).reshape(3, 1)))
    return poses


def render_board_views(poses, ss=4, noise=1.5, seed=0):
    """Grey views of a 10 x 7 square board (9 x 6 inner corners) on a white card.

    Each of ``ss`` x ``ss`` samples per pixel is traced back through the inverse distortion
    (cv2.undistortPoints on every pixel, cubic-spline interpolated between pixels: the map is
    smooth) and the camera pose to the board plane; samples are averaged (pixel area).
    """
    from scipy.ndimage import map_coordinates

    w, h = SIZE
    gu, gv = np.meshgrid(np.arange(-2, w + 2, dtype=float), np.arange(-2, h + 2, dtype=float))
    pts = np.stack([gu.ravel(), gv.ravel()], 1).reshape(-1, 1, 2)
    crit = (cv2.TERM_CRITERIA_COUNT | cv2.TERM_CRITERIA_EPS, 100, 1e-14)
    grid = cv2.undistortPoints(pts, K_TRUE, D_TRUE, criteria=crit).reshape(gu.shape + (2,))
    su, sv = np.meshgrid((np.arange(w * ss) + 0.5) / ss - 0.5, (np.arange(h * ss) + 0.5) / ss - 0.5)
    where = [sv.ravel() + 2, su.ravel() + 2]
    nx, ny = (map_coordinates(grid[..., k], where, order=3) for k in (0, 1))
    rng = np.random.default_rng(seed)
    cols, rows = BOARD
    views = []
    for rvec, tvec in poses:
        r, _ = cv2.Rodrigues(rvec)
        a = np.linalg.inv(np.column_stack([r[:, 0], r[:, 1], tvec.ravel()]))  # camera -> board
        den = a[2, 0] * nx + a[2, 1] * ny + a[2, 2]
        i = np.floor((a[0, 0] * nx + a[0, 1] * ny + a[0, 2]) / (den * SQUARE)) + 1
        j = np.floor((a[1, 0] * nx + a[1, 1] * ny + a[1, 2]) / (den * SQUARE)) + 1
        on_board = (i >= 0) & (i <= cols) & (j >= 0) & (j <= rows)
        card = (i >= -1) & (i <= cols + 1) & (j >= -1) & (j <= rows + 1)
        val = np.full(i.shape, 110.0, np.float32)
        val[card] = 215.0
        val[on_board & ((i + j) % 2 == 0)] = 30.0
        img = val.reshape(h, ss, w, ss).mean(axis=(1, 3))
        img = img + rng.normal(0.0, noise, img.shape)
        views.append(np.clip(img, 0, 255).astype(np.uint8))
    return views


def board_object_points():
    obj = np.zeros((BOARD[0] * BOARD[1], 3))
    obj[:, :2] = np.mgrid[0 : BOARD[0], 0 : BOARD[1]].T.reshape(-1, 2) * SQUARE
    return obj


@pytest.fixture(scope="module")
def views():
    poses = board_poses(10)
    return poses, render_board_views(poses)


@pytest.fixture(scope="module")
def lens(views):
    return calibrate_lens(views[1], BOARD, SQUARE)


def test_undistort_points_recovers_pinhole_points():
    """closed-form/independent: cv2.projectPoints with and without distortion gives the
    recorded and the ideal image of the same 3-D points; undistort_points maps one to the
    other (and distort_points back)."""
    model = LensModel(K_TRUE, D_TRUE, SIZE, 0.0)
    rng = np.random.default_rng(7)
    obj = np.column_stack([rng.uniform(-0.45, 0.45, 200), rng.uniform(-0.35, 0.35, 200)])
    obj = np.column_stack([obj, np.ones(200)])
    rec, _ = cv2.projectPoints(obj, np.zeros(3), np.zeros(3), K_TRUE, D_TRUE)
    ideal, _ = cv2.projectPoints(obj, np.zeros(3), np.zeros(3), K_TRUE, np.zeros(5))
    rec, ideal = rec.reshape(-1, 2), ideal.reshape(-1, 2)
    ux, uy = model.undistort_points(rec[:, 0], rec[:, 1])
    np.testing.assert_allclose(np.column_stack([ux, uy]), ideal, atol=1e-6)
    dx, dy = model.distort_points(ideal[:, 0], ideal[:, 1])
    np.testing.assert_allclose(np.column_stack([dx, dy]), rec, atol=1e-9)
    # shapes are kept
    a, b = model.undistort_points(rec[:6, 0].reshape(2, 3), rec[:6, 1].reshape(2, 3))
    assert a.shape == b.shape == (2, 3)


def test_board_corners_found_where_projectpoints_puts_them(views):
    """closed-form/independent: sub-pixel board corners within 0.06 px RMS of the true
    (cv2.projectPoints) positions."""
    poses, imgs = views
    obj = board_object_points()
    errs = []
    for (rvec, tvec), img in zip(poses, imgs):
        found = find_board_corners(img, BOARD)
        if found is None:
            continue
        true, _ = cv2.projectPoints(obj, rvec, tvec, K_TRUE, D_TRUE)
        true = true.reshape(-1, 2)
        if np.linalg.norm(found[0] - true[0]) > np.linalg.norm(found[0] - true[-1]):
            found = found[::-1]  # the detector may number the board from the other end
        errs.append(found - true)
    assert len(errs) >= 8
    assert float(np.sqrt(np.mean(np.square(errs)))) < 0.06


def test_calibration_recovers_the_known_lens(lens, views):
    """closed-form/independent: camera matrix and distortion recovered from 10 synthetic
    views; compared through the distortion displacement field over the image, evaluated
    with cv2.projectPoints for the true and the recovered model."""
    assert lens.n_views >= 8
    assert lens.rms < 0.12
    k = lens.camera_matrix
    assert k[0, 0] == pytest.approx(K_TRUE[0, 0], rel=3e-3)
    assert k[1, 1] == pytest.approx(K_TRUE[1, 1], rel=3e-3)
    assert k[0, 2] == pytest.approx(K_TRUE[0, 2], abs=1.5)
    assert k[1, 2] == pytest.approx(K_TRUE[1, 2], abs=1.5)
    assert lens.dist_coeffs[0] == pytest.approx(D_TRUE[0], abs=0.01)
    # What matters downstream: undistorted points agree with the true pinhole image up to a
    # plane homography (which the world calibration absorbs, together with any change of
    # camera matrix).  Residual after the best homography, inside the area the boards
    # covered (k3 free) and over the whole frame (k3 held at its true value, zero):
    worst, rms = _residual_after_homography(lens, (60, 580, 50, 430))
    assert worst < 0.15 and rms < 0.05
    fixed = calibrate_lens(views[1], BOARD, SQUARE, fix_k3=True)
    assert fixed.dist_coeffs[4] == 0.0
    assert fixed.dist_coeffs[1] == pytest.approx(D_TRUE[1], abs=0.01)
    worst, rms = _residual_after_homography(fixed, (20, 620, 20, 460))
    assert worst < 0.3 and rms < 0.08


def _residual_after_homography(model, box):
    """Max and RMS distance [px] between the model's undistorted grid points and the true
    pinhole points after the best plane homography; also checks the distortion is large."""
    uu, vv = np.meshgrid(np.linspace(box[0], box[1], 13), np.linspace(box[2], box[3], 9))
    pts = np.column_stack([uu.ravel(), vv.ravel()]).reshape(-1, 1, 2)
    crit = (cv2.TERM_CRITERIA_COUNT | cv2.TERM_CRITERIA_EPS, 100, 1e-12)
    p_true = cv2.undistortPoints(pts, K_TRUE, D_TRUE, P=K_TRUE, criteria=crit).reshape(-1, 2)
    assert float(np.max(np.hypot(*(p_true - pts[:, 0, :]).T))) > 15.0  # a strong lens
    ex, ey = model.undistort_points(pts[:, 0, 0], pts[:, 0, 1])
    p_est = np.column_stack([ex, ey])
    h, _ = cv2.findHomography(p_est, p_true, 0)
    err = np.hypot(*(cv2.perspectiveTransform(p_est[None], h)[0] - p_true).T)
    return float(np.max(err)), float(np.sqrt(np.mean(err**2)))


def test_undistorted_board_corners_are_projective(lens, views):
    """closed-form/independent: after undistortion with the recovered model, the corners of
    one flat board view obey a single plane homography (pinhole camera) to < 0.08 px RMS
    (the corner noise), while the recorded corners miss it by > 0.3 px."""
    poses, imgs = views
    obj = board_object_points()[:, :2]
    worst = 0.0
    for img in imgs[:4]:
        found = find_board_corners(img, BOARD)
        if found is None:
            continue
        ux, uy = lens.undistort_points(found[:, 0], found[:, 1])
        und = np.column_stack([ux, uy])
        h, _ = cv2.findHomography(obj, und, 0)
        back = cv2.perspectiveTransform(obj[None], h)[0]
        worst = max(worst, float(np.sqrt(np.mean(np.sum((back - und) ** 2, axis=1)))))
        # without undistortion the same test fails by far
        h2, _ = cv2.findHomography(obj, found, 0)
        raw = cv2.perspectiveTransform(obj[None], h2)[0]
        assert float(np.sqrt(np.mean(np.sum((raw - found) ** 2, axis=1)))) > 0.3
    assert 0 < worst < 0.08


def test_save_load_round_trip_and_no_overwrite(tmp_path, lens):
    """regression: the lens file reads back exactly; an existing file is kept."""
    p = tmp_path / "lens.json"
    lens.save(p)
    back = load_lens(p)
    np.testing.assert_array_equal(back.camera_matrix, lens.camera_matrix)
    np.testing.assert_array_equal(back.dist_coeffs, lens.dist_coeffs)
    assert back.image_size == lens.image_size
    assert back.rms == lens.rms
    assert back.n_views == lens.n_views
    data = json.loads(p.read_text())
    assert data["format"] == "fitdrag lens model"
    assert data["board_inner_corners"] == [9, 6]
    with pytest.raises(OutputExistsError, match=re.escape(f"{p}: file exists; pass --force")):
        lens.save(p)
    lens.save(p, force=True)
    assert [q.name for q in tmp_path.iterdir()] == ["lens.json"]  # no temporary left over


def test_missing_or_foreign_lens_file(tmp_path):
    """regression: exact messages for a missing lens file and for another JSON file."""
    missing = tmp_path / "none.json"
    msg = (
        f"lens file: {str(missing)!r} does not exist; create one with 'fitdrag calibrate-lens "
        f"IMAGES... --board 9x6 --square M -o lens.json'."
    )
    with pytest.raises(FileNotFoundError, match=re.escape(msg)):
        load_lens(missing)
    other = tmp_path / "other.json"
    other.write_text('{"fx": 600}')
    with pytest.raises(ValueError, match=r"not a fitdrag lens file"):
        load_lens(other)
    other.write_text("{not json")
    with pytest.raises(ValueError, match=r"is not valid JSON"):
        load_lens(other)


def test_calibration_input_errors(views):
    """regression: exact messages for too few views, a bad square and a bad board text."""
    imgs = views[1]
    blank = [np.full((480, 640), 128, np.uint8)] * 3
    with pytest.raises(
        ValueError,
        match=re.escape(
            "images: the 9x6 board was found in 0 of 3 image(s), at least 3 are needed; check "
            "--board (inner corners, e.g. 9x6 for 10 x 7 squares), focus and lighting."
        ),
    ):
        calibrate_lens(blank, BOARD, SQUARE)
    with pytest.raises(ValueError, match=re.escape("square: the board's square side must be")):
        calibrate_lens(imgs, BOARD, 0.0)
    with pytest.raises(ValueError, match=r"images: image 1 is 320x240 px but the first image"):
        calibrate_lens([imgs[0], imgs[1][::2, ::2]], BOARD, SQUARE)
    assert parse_board("9x6") == (9, 6)
    assert parse_board("7X5") == (7, 5)
    with pytest.raises(
        ValueError,
        match=re.escape(
            "--board: expected the inner corners as COLSxROWS (two whole numbers >= 2), got "
            "'9-6'; a board of 10 x 7 squares has 9x6 inner corners."
        ),
    ):
        parse_board("9-6")


def test_lens_model_validation():
    """regression: a bad camera matrix is refused with its values."""
    with pytest.raises(ValueError, match=r"camera_matrix: focal lengths must be > 0 px"):
        LensModel(np.diag([0.0, 600.0, 1.0]), D_TRUE, SIZE, 0.1)
    with pytest.raises(ValueError, match=r"dist_coeffs: expected 4, 5, 8, 12 or 14"):
        LensModel(K_TRUE, [0.1, 0.2, 0.3], SIZE, 0.1)
