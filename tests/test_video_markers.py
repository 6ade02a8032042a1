"""Tests of fitdrag.video.markers: ArUco markers and their refined corners.

Independent reference used here: synthetic marker images from
:func:`fitdrag.video.synthetic.render_marker_board`, which shares no code with the marker
finder under test: the DICT_4X4_50 bit pattern from ``cv2.aruco.generateImageMarker``
area-sampled (12 x 12 samples per pixel) through a known plane homography, with a Gaussian
point-spread function applied before pixel integration and Gaussian noise.  The exact corner
positions follow from the homography, so the found corners and sides can be checked against
them.
"""

from __future__ import annotations

import math

import cv2
import numpy as np
import pytest

from fitdrag.video.markers import detect_markers, marker_scale_bias_bound
from fitdrag.video.synthetic import render_marker_board

SIZE = 0.05  # marker side [m]


# ------------------------------------------------------------------------------------------
# Marker renderer (independent of the marker code)
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


# ------------------------------------------------------------------------------------------
# Markers
# ------------------------------------------------------------------------------------------


def test_markers_corners_match_the_render(flat_scene):
    """closed-form/independent: refined corners within 0.1 px of the exact corners."""
    img, h = flat_scene
    obs = detect_markers(img)
    assert [o.id for o in obs] == sorted(LAYOUT)
    for o in obs:
        assert o.refinement == "edge-lines"
        err = o.corners - true_corners(h, *LAYOUT[o.id])
        assert np.max(np.abs(err)) < 0.06
        # the stated corner precision is of the size of the actual errors
        assert 0.003 < float(np.sqrt(np.mean(o.corner_sigma_px**2))) < 0.1


def test_cornersubpix_bias_and_its_removal():
    """closed-form/independent: cornerSubPix alone shortens the sides of ~40 px markers by
    several tenths of a percent; the edge-line refinement removes it (truth: the render)."""
    h = similarity_w2i(800.0, 5.0, (60.4, 300.7))  # 40 px markers
    layout = {0: (0.0, 0.0), 1: (0.15, 0.0), 2: (0.30, 0.0), 4: (0.45, 0.0)}
    img = render_markers((360, 520), layout, SIZE, h, blur=1.0, seed=5)
    sub = np.array([o.side_px for o in detect_markers(img, refine="subpix")]) / 40.0 - 1
    edge = np.array([o.side_px for o in detect_markers(img)]) / 40.0 - 1
    assert sub.size == edge.size == 4
    assert np.mean(sub) < -3e-3  # measured: about -1 %
    assert abs(np.mean(edge)) < 5e-4
    # the stated bounds cover what is seen
    assert abs(np.mean(edge)) < marker_scale_bias_bound(40.0) + 3 * np.std(edge)
    assert abs(np.mean(sub)) < marker_scale_bias_bound(40.0, "subpix")
