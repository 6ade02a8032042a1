"""Tests of fitdrag.video.calibration: pixels (y down) to world metres (y up).

Independent references used here:

* closed-form similarity transforms (scale, rotation, translation) worked by hand;
* synthetic marker images from :func:`fitdrag.video.synthetic.render_marker_board`, which
  shares no code with the calibration under test: the DICT_4X4_50 bit pattern from
  ``cv2.aruco.generateImageMarker`` area-sampled (12 x 12 samples per pixel) through a known
  plane homography, with a Gaussian point-spread function applied before pixel integration
  and Gaussian noise.  The exact corner positions follow from the homography, so the
  recovered scale, origin and mapping can be checked against them.
"""

from __future__ import annotations

import json
import math
import re

import cv2
import numpy as np
import pytest

from fitdrag.video.calibration import (
    Calibration,
    calibration_from_markers,
    calibration_from_reference,
    calibration_from_scale,
    load_marker_layout,
)
from fitdrag.video.lens import LensModel
from fitdrag.video.synthetic import render_marker_board

SIZE = 0.05  # marker side [m]


# ------------------------------------------------------------------------------------------
# Marker renderer (independent of the calibration code)
# ------------------------------------------------------------------------------------------


def render_markers(shape, layout, size, h_w2i, *, ss=12, blur=0.8, noise=2.0, seed=0):
    """Upright markers, lower-left corners at ``layout`` [m], side ``size`` [m], on paper."""
    return render_marker_board(shape, layout, size, h_w2i, ss=ss, blur=blur, noise=noise,
                               rng=np.random.default_rng(seed))  # fmt: skip


def similarity_w2i(px_per_m, roll_deg, origin_px):
    """World (m, y up) -> image (px, y down): x axis at ``roll_deg`` counter-clockwise."""
    r = math.radians(roll_deg)
    c, s = math.cos(r), math.sin(r)
    k = px_per_m
    return np.array([[k * c, -k * s, origin_px[0]], [-k * s, -k * c, origin_px[1]], [0, 0, 1.0]])


def apply(h, x, y):
    x, y = np.asarray(x, float), np.asarray(y, float)
    w = h[2, 0] * x + h[2, 1] * y + h[2, 2]
    return (h[0, 0] * x + h[0, 1] * y + h[0, 2]) / w, (h[1, 0] * x + h[1, 1] * y + h[1, 2]) / w


def true_corners(h_w2i, x0, y0, size=SIZE):
    world = np.array([[x0, y0 + size], [x0 + size, y0 + size], [x0 + size, y0], [x0, y0]])
    return cv2.perspectiveTransform(world[None], h_w2i)[0]


LAYOUT = {3: (0.0, 0.0), 7: (0.40, 0.0), 12: (0.0, 0.25), 20: (0.40, 0.25)}


@pytest.fixture(scope="module")
def flat_scene():
    """Four markers ~ 55 px across, camera rolled by 3 degrees, no perspective."""
    h = similarity_w2i(1100.0, 3.0, (150.37, 480.62))
    img = render_markers((560, 760), LAYOUT, SIZE, h, seed=1)
    return img, h


@pytest.fixture(scope="module")
def tilted_scene():
    """The same markers seen on a plane turned about a vertical axis (perspective)."""
    h = similarity_w2i(1100.0, -2.0, (140.21, 470.83)) @ np.array(
        [[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.35, 0.12, 1.0]]
    )
    img = render_markers((560, 760), LAYOUT, SIZE, h, seed=2)
    return img, h


# ------------------------------------------------------------------------------------------
# Known scale, reference
# ------------------------------------------------------------------------------------------


def test_scale_origin_and_y_up_closed_form():
    """closed-form/independent: x = s (u - u0), y = -s (v - v0) for an unrolled camera."""
    cal = calibration_from_scale(0.002, origin=(100.0, 200.0))
    x, y = cal.pixel_to_world([100.0, 150.0, 100.0, 130.0], [200.0, 200.0, 150.0, 260.0])
    # worked by hand: 50 px right -> +0.1 m; 50 px up the image (smaller row) -> +0.1 m
    np.testing.assert_allclose(x, [0.0, 0.1, 0.0, 0.06], atol=1e-15)
    np.testing.assert_allclose(y, [0.0, 0.0, 0.1, -0.12], atol=1e-15)
    assert cal.method == "scale"
    assert cal.scale == 0.002
    assert cal.reprojection_rms_px is None


def test_rotation_closed_form():
    """closed-form/independent: with the horizontal at +30 deg on screen (camera rolled
    clockwise), a point d px along (cos 30, -sin 30) in image axes lies at (s d, 0)."""
    s, d, r = 0.001, 400.0, math.radians(30.0)
    cal = calibration_from_scale(s, origin=(500.0, 400.0), rotation_deg=30.0)
    u = 500.0 + d * math.cos(r)
    v = 400.0 - d * math.sin(r)  # up the screen = smaller row
    x, y = cal.pixel_to_world(u, v)
    assert float(x) == pytest.approx(s * d, abs=1e-12)
    assert float(y) == pytest.approx(0.0, abs=1e-12)
    # perpendicular, 90 deg further counter-clockwise: world +y
    u2 = 500.0 + d * math.cos(r + math.pi / 2)
    v2 = 400.0 - d * math.sin(r + math.pi / 2)
    x2, y2 = cal.pixel_to_world(u2, v2)
    assert float(x2) == pytest.approx(0.0, abs=1e-12)
    assert float(y2) == pytest.approx(s * d, abs=1e-12)
    # the local scale of a similarity is its scale everywhere
    assert cal.local_scale(12.0, 700.0) == pytest.approx(s, rel=1e-12)


def test_world_to_pixel_inverts_pixel_to_world():
    """closed-form/independent: the two mappings are inverses (to rounding)."""
    cal = calibration_from_scale(0.0015, origin=(321.5, 222.25), rotation_deg=-7.5)
    u = np.array([[0.0, 100.0], [640.0, 333.3]])
    v = np.array([[0.0, 479.0], [12.0, 250.0]])
    x, y = cal.pixel_to_world(u, v)
    assert x.shape == u.shape
    u2, v2 = cal.world_to_pixel(x, y)
    np.testing.assert_allclose(u2, u, atol=1e-9)
    np.testing.assert_allclose(v2, v, atol=1e-9)


def test_reference_scale_uncertainty_and_origin():
    """closed-form/independent: scale = L / |p2 - p1|; u_rel^2 = u_d^2 + 2 u_p^2 / |p2-p1|^2
    (GUM, JCGM 100:2008, eq. 10 for uncorrelated inputs)."""
    cal = calibration_from_reference(
        100.0, 400.0, 700.0, 480.0, 1.21, distance_relative_uncertainty=0.001
    )
    length = math.hypot(600.0, 80.0)
    assert cal.scale == pytest.approx(1.21 / length, rel=1e-14)
    expected_u = math.sqrt(0.001**2 + 2 * (0.5 / length) ** 2)
    assert cal.scale_relative_uncertainty == pytest.approx(expected_u, rel=1e-12)
    x, y = cal.pixel_to_world(100.0, 400.0)  # origin at the first point by default
    assert (float(x), float(y)) == (pytest.approx(0.0, abs=1e-14), pytest.approx(0.0, abs=1e-14))
    x2, y2 = cal.pixel_to_world(700.0, 480.0)
    assert float(np.hypot(x2, y2)) == pytest.approx(1.21, rel=1e-12)
    assert float(y2) < 0  # the second point is lower in the image: world y down from origin
    assert cal.method == "reference"
    meta = cal.to_meta()
    assert meta["calibration_method"] == "reference"
    assert meta["scale_relative_uncertainty"] == pytest.approx(expected_u)


def test_to_meta_scalars():
    """regression: the header keys a track CSV carries."""
    meta = calibration_from_scale(0.002, scale_relative_uncertainty=0.003).to_meta()
    assert meta == {
        "calibration_method": "scale",
        "scale_m_per_px": 0.002,
        "scale_relative_uncertainty": 0.003,
        "rotation_deg": 0.0,
    }


@pytest.mark.parametrize("bad", [0, 0.0, -0.001, float("nan"), float("inf"), "x"])
def test_zero_or_bad_scale_is_refused(bad):
    """regression: exact message for a scale that is not > 0."""
    msg = (
        f"scale: must be a finite number > 0 m/px, got {bad!r}; measure a known length in "
        f"the image and divide its metres by its pixels."
    )
    with pytest.raises(ValueError, match=re.escape(msg)):
        calibration_from_scale(bad)


def test_reference_errors():
    """regression: exact messages for a bad distance and coincident points."""
    with pytest.raises(
        ValueError,
        match=re.escape(
            "reference distance: must be a finite number > 0 m, got 0.0; give the measured "
            "distance between the two points in metres."
        ),
    ):
        calibration_from_reference(0, 0, 100, 0, 0.0)
    with pytest.raises(
        ValueError,
        match=re.escape(
            "--reference: the two points are 0.5 px apart; pick two points at least 1 px "
            "(better: hundreds of px) apart."
        ),
    ):
        calibration_from_reference(10, 10, 10.5, 10, 1.0)


def test_calibration_is_immutable():
    """regression: the homography cannot be changed in place."""
    cal = calibration_from_scale(0.002)
    with pytest.raises(ValueError, match="read-only"):
        cal.homography[0, 0] = 1.0
    with pytest.raises(TypeError):
        cal.details["x"] = 1


def test_lens_undistorts_before_the_homography():
    """closed-form/independent: with a lens, a recorded (distorted) point maps where its
    undistorted image maps without the lens; distorted points from cv2.projectPoints."""
    k = np.array([[800.0, 0, 320.0], [0, 800.0, 240.0], [0, 0, 1]])
    d = np.array([-0.2, 0.05, 0.0, 0.0, 0.0])
    lens = LensModel(k, d, (640, 480), 0.1)
    plain = calibration_from_scale(0.001, origin=(320.0, 240.0))
    with_lens = calibration_from_scale(0.001, origin=(320.0, 240.0), lens=lens)
    ideal = np.array([[600.0, 50.0], [20.0, 460.0], [320.0, 240.0]])
    obj = np.column_stack([(ideal - [320.0, 240.0]) / 800.0, np.ones(3)])
    rec, _ = cv2.projectPoints(obj, np.zeros(3), np.zeros(3), k, d)
    rec = rec.reshape(-1, 2)
    x1, y1 = with_lens.pixel_to_world(rec[:, 0], rec[:, 1])
    x0, y0 = plain.pixel_to_world(ideal[:, 0], ideal[:, 1])
    np.testing.assert_allclose(x1, x0, atol=1e-9)
    np.testing.assert_allclose(y1, y0, atol=1e-9)
    u, v = with_lens.world_to_pixel(x0, y0)
    np.testing.assert_allclose(np.column_stack([u, v]), rec, atol=1e-6)
    assert "lens_distortion" in with_lens.to_meta()


# ------------------------------------------------------------------------------------------
# Markers
# ------------------------------------------------------------------------------------------


def test_markers_similarity_recovers_scale_rotation_origin(flat_scene):
    """closed-form/independent: scale 1/1100 m/px, roll 3 deg, origin at marker 3's
    lower-left corner (the lowest id), y up; all known from the render's homography."""
    img, h = flat_scene
    cal = calibration_from_markers(img, SIZE)
    assert cal.method == "markers"
    assert cal.scale == pytest.approx(1 / 1100.0, rel=3e-4)
    assert cal.details["rotation_deg"] == pytest.approx(3.0, abs=0.03)
    assert cal.details["origin_marker_id"] == 3
    # the scale error lies within 3 standard uncertainties, which stay small
    u = cal.scale_relative_uncertainty
    assert 1e-5 < u < 2e-3
    assert abs(cal.scale * 1100.0 - 1) < 3 * u
    # the world positions of every marker corner (known from the layout, all markers in one
    # plane without perspective) come back to 0.1 mm
    for x0, y0 in LAYOUT.values():
        c = true_corners(h, x0, y0)
        x, y = cal.pixel_to_world(c[:, 0], c[:, 1])
        np.testing.assert_allclose(x, [x0, x0 + SIZE, x0 + SIZE, x0], atol=1e-4)
        np.testing.assert_allclose(y, [y0 + SIZE, y0 + SIZE, y0, y0], atol=1e-4)
    meta = cal.to_meta()
    assert meta["markers_used"] == 4
    assert meta["marker_ids"] == "3 7 12 20"


def test_markers_with_layout_fit_one_homography(tilted_scene):
    """closed-form/independent: with a layout, the fitted homography reproduces the render's
    (perspective) mapping over the whole image, and its local scale at the centre."""
    img, h = tilted_scene
    cal = calibration_from_markers(img, SIZE, layout=LAYOUT)
    assert cal.method == "homography"
    assert cal.reprojection_rms_px < 0.04
    hi = np.linalg.inv(h)
    uu, vv = np.meshgrid(np.linspace(0, 759, 9), np.linspace(0, 559, 7))
    x, y = cal.pixel_to_world(uu, vv)
    xt, yt = apply(hi, uu, vv)
    assert np.max(np.hypot(x - xt, y - yt)) < 2e-4  # 0.2 mm over 0.7 m x 0.5 m
    true_scale = Calibration("homography", hi, 1.0, 0.0).local_scale(379.5, 279.5)
    u = cal.scale_relative_uncertainty
    assert abs(cal.scale / true_scale - 1) < max(3 * u, 1e-4)
    assert 0 < u < 1e-3
    assert cal.details["missing_ids"] == ()
    # a similarity cannot describe this view: the markers disagree on the scale
    flat = calibration_from_markers(img, SIZE)
    assert flat.scale_relative_uncertainty > 5 * u


def test_layout_homography_ignores_unlisted_markers(tilted_scene):
    """regression: markers not in the layout are reported and left out."""
    img, _ = tilted_scene
    part = {3: LAYOUT[3], 7: LAYOUT[7], 20: LAYOUT[20], 33: (1.0, 1.0)}
    cal = calibration_from_markers(img, SIZE, layout=part)
    assert cal.details["ids"] == (3, 7, 20)
    assert cal.details["ignored_ids"] == (12,)
    assert cal.details["missing_ids"] == (33,)


def test_markers_and_layout_are_kept_for_the_pose(tilted_scene):
    """closed-form/independent: the calibration keeps every marker found (their recorded
    corners within 0.1 px of the render's exact corners, the homography applied by
    cv2.perspectiveTransform), the marker side and the whole layout given, so the camera's
    pose can be found from them; a scale calibration keeps none."""
    img, h = tilted_scene
    part = {3: LAYOUT[3], 7: LAYOUT[7], 20: LAYOUT[20], 33: (1.0, 1.0)}
    cal = calibration_from_markers(img, SIZE, layout=part)
    assert sorted(o.id for o in cal.markers) == [3, 7, 12, 20]
    for o in cal.markers:
        np.testing.assert_allclose(o.corners_raw, true_corners(h, *LAYOUT[o.id]), atol=0.1)
    assert cal.marker_size == SIZE
    assert dict(cal.marker_layout) == part
    flat = calibration_from_markers(img, SIZE)
    assert len(flat.markers) == 4 and flat.marker_layout is None
    plain = calibration_from_scale(0.001)
    assert plain.markers == () and plain.marker_size is None and plain.marker_layout is None


def test_markers_seen_through_a_distorting_lens():
    """closed-form/independent: the marker image is warped by a known barrel distortion
    (cv2.remap with the exact inverse map); with the lens model the homography still
    reproduces the true mapping, without it the scale is off."""
    k = np.array([[700.0, 0.0, 379.5], [0.0, 700.0, 279.5], [0.0, 0.0, 1.0]])
    d = np.array([-0.25, 0.06, 0.0, 0.0, 0.0])
    lens = LensModel(k, d, (760, 560), 0.05)
    h = similarity_w2i(1100.0, 1.5, (150.37, 480.62))
    layout = {3: (0.0, 0.0), 7: (0.48, 0.0), 12: (0.0, 0.34), 20: (0.48, 0.34)}
    ideal = render_markers((560, 760), layout, SIZE, h, seed=8, noise=0.0)
    uu, vv = np.meshgrid(np.arange(760.0), np.arange(560.0))
    sx, sy = lens.undistort_points(uu, vv)  # where each recorded pixel looks in the ideal image
    img = cv2.remap(ideal, sx.astype(np.float32), sy.astype(np.float32), cv2.INTER_CUBIC,
                    borderMode=cv2.BORDER_REPLICATE)  # fmt: skip
    img = img + np.random.default_rng(9).normal(0.0, 2.0, img.shape)
    with_lens = calibration_from_markers(img, SIZE, layout=layout, lens=lens)
    without = calibration_from_markers(img, SIZE, layout=layout)
    hi = np.linalg.inv(h)
    # recorded image points of a world grid: ideal points, distorted by the lens
    gx, gy = np.meshgrid(np.linspace(0.0, 0.53, 6), np.linspace(0.0, 0.39, 5))
    iu, iv = apply(h, gx, gy)
    ru, rv = lens.distort_points(iu, iv)
    x, y = with_lens.pixel_to_world(ru, rv)
    assert np.max(np.hypot(x - gx, y - gy)) < 1e-4
    assert with_lens.reprojection_rms_px < 0.05
    assert without.reprojection_rms_px > 0.3
    true_scale = Calibration("homography", hi, 1.0, 0.0).local_scale(379.5, 279.5)
    assert with_lens.scale == pytest.approx(true_scale, rel=3e-4)
    assert abs(without.scale / true_scale - 1) > 0.01


def test_no_markers_found_message():
    """regression: exact message when the image holds no marker."""
    img = np.random.default_rng(0).normal(120, 3, (120, 160))
    msg = (
        "markers: no DICT_4X4_50 marker found in the image (160x120 px); check the dictionary "
        "(--marker-dictionary), that each marker has a white margin and is at least about 20 "
        "px across, or calibrate with --scale or --reference instead."
    )
    with pytest.raises(ValueError, match=re.escape(msg)):
        calibration_from_markers(img, SIZE)


def test_wrong_dictionary_finds_nothing_and_unknown_is_listed(flat_scene):
    """regression: markers of another dictionary are not found; a bad name lists the valid."""
    img, _ = flat_scene
    with pytest.raises(ValueError, match=r"markers: no DICT_6X6_50 marker found"):
        calibration_from_markers(img, SIZE, dictionary="DICT_6X6_50")
    with pytest.raises(
        ValueError, match=r"--marker-dictionary: unknown ArUco dictionary 'DICT_9X9'; choose"
    ):
        calibration_from_markers(img, SIZE, dictionary="DICT_9X9")


def test_layout_naming_no_found_marker(flat_scene):
    """regression: exact message when the layout lists none of the markers found."""
    img, _ = flat_scene
    msg = (
        "--marker-layout: none of the markers found (ids 3, 7, 12, 20) is in the layout "
        "(ids 1, 2); check the layout file and --marker-dictionary."
    )
    with pytest.raises(ValueError, match=re.escape(msg)):
        calibration_from_markers(img, SIZE, layout={1: (0, 0), 2: (1, 0)})


def test_marker_size_must_be_positive(flat_scene):
    """regression: exact message for a marker size of zero."""
    img, _ = flat_scene
    msg = (
        "--markers: must be a finite number > 0 m, got 0.0; give the side of the markers' "
        "black square in metres, e.g. --markers 0.05."
    )
    with pytest.raises(ValueError, match=re.escape(msg)):
        calibration_from_markers(img, 0.0)


def test_size_uncertainty_adds_in_quadrature(flat_scene):
    """closed-form/independent: a relative marker-size uncertainty adds in quadrature."""
    img, _ = flat_scene
    a = calibration_from_markers(img, SIZE)
    b = calibration_from_markers(img, SIZE, size_relative_uncertainty=0.002)
    assert b.scale == a.scale
    assert b.scale_relative_uncertainty == pytest.approx(
        math.sqrt(a.scale_relative_uncertainty**2 + 0.002**2), rel=1e-12
    )


# ------------------------------------------------------------------------------------------
# Layout files
# ------------------------------------------------------------------------------------------


def test_load_layout_csv_and_json(tmp_path):
    """regression: both layout formats give the same mapping."""
    p = tmp_path / "layout.csv"
    p.write_text("# synthetic lab wall\nid,x_m,y_m\n0,0.0,0.0\n5, 1.5 ,0.0\n9,0,1.25\n")
    q = tmp_path / "layout.json"
    q.write_text(json.dumps({"markers": {"0": [0, 0], "5": [1.5, 0.0], "9": [0.0, 1.25]}}))
    expected = {0: (0.0, 0.0), 5: (1.5, 0.0), 9: (0.0, 1.25)}
    assert load_marker_layout(p) == expected
    assert load_marker_layout(q) == expected


def test_load_layout_errors(tmp_path):
    """regression: exact messages for a missing file, a bad header and a duplicate id."""
    with pytest.raises(FileNotFoundError, match=re.escape("--marker-layout: 'nope.csv' does")):
        load_marker_layout("nope.csv")
    p = tmp_path / "bad.csv"
    p.write_text("marker,x,y\n0,0,0\n")
    with pytest.raises(
        ValueError,
        match=re.escape(
            "--marker-layout bad.csv, line 1: expected the header 'id,x_m,y_m', got 'marker,x,y'."
        ),
    ):
        load_marker_layout(p)
    p.write_text("id,x_m,y_m\n0,0,0\n0,1,0\n")
    with pytest.raises(
        ValueError, match=re.escape("--marker-layout bad.csv, line 3: marker id 0 is listed")
    ):
        load_marker_layout(p)
    p.write_text("id,x_m,y_m\n0,zero,0\n")
    with pytest.raises(ValueError, match=r"line 2: expected a whole-number id and two"):
        load_marker_layout(p)


def test_roll_uncertainty_is_stated_and_honest():
    """closed-form/independent: the roll of the marker frame is known from the render (3°);
    over several noise seeds the stated standard uncertainty of the horizontal is small and
    the actual error stays within 4 of it (the budget turns it into a Cd contribution)."""
    h = similarity_w2i(1100.0, 3.0, (150.37, 480.62))
    ratios = []
    for seed in range(3, 9):
        cal = calibration_from_markers(render_markers((560, 760), LAYOUT, SIZE, h, seed=seed), SIZE)
        u = cal.details["roll_uncertainty_deg"]
        assert 0.0 < u < 0.1
        assert cal.to_meta()["roll_uncertainty_deg"] == u
        ratios.append((cal.details["rotation_deg"] - 3.0) / u)
    assert max(abs(r) for r in ratios) < 4.0, ratios
