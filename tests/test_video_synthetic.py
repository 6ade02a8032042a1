"""Tests of the synthetic footage generator (fitdrag.video.synthetic).

All footage here is synthetic.  The trajectories are closed-form vacuum parabolas written in
the tests, not project code.
"""

from __future__ import annotations

import math

import cv2
import numpy as np
import pytest
from scipy.integrate import quad

from fitdrag.video.synthetic import (
    FlightRenderer,
    MarkerPlacement,
    marker_corners_in_image,
    render_flight,
)
from fitdrag.video.synthetic_scene import Hand, fabric_texture
from fitdrag.video.synthetic_truth import Visibility

FPS = 500.0
G_PX = 4000.0  # px/s^2, an arbitrary constant acceleration in image pixels (y down)


def parabola(t):
    """Vacuum parabola in image pixels (closed form), y down."""
    t = np.asarray(t, dtype=float)
    return 40.0 + 600.0 * t, 60.0 - 300.0 * t + 0.5 * G_PX * t * t


def still(x, y):
    return lambda t: (np.full_like(np.asarray(t, float), x), np.full_like(np.asarray(t, float), y))


def clean(**kw):
    opts = dict(shape=(120, 160), clutter=0, noise_sigma=0.0, flicker=0.0, ambient=1.0)
    opts.update(kw)
    return opts


def test_same_seed_same_footage():
    """regression: a fixed seed gives identical footage, another seed different noise."""
    a = render_flight(parabola, 6, FPS, shape=(80, 100), seed=4)
    b = render_flight(parabola, 6, FPS, shape=(80, 100), seed=4)
    c = render_flight(parabola, 6, FPS, shape=(80, 100), seed=5)
    assert np.array_equal(a.frames, b.frames)
    assert not np.array_equal(a.frames, c.frames)
    assert a.frames.dtype == np.uint8 and a.frames.shape == (6, 80, 100)


def test_truth_is_the_trajectory_at_mid_exposure():
    """closed-form/independent: truth equals the vacuum parabola at t0 + k/fps; the
    exposure-averaged centre is x(t) + a*tau^2/24 (mean of a quadratic over an interval)."""
    tau = 1.6e-3
    fo = render_flight(parabola, 10, FPS, t0=0.01, exposure=tau, **clean())
    t = 0.01 + np.arange(10) / FPS
    x, y = parabola(t)
    np.testing.assert_allclose(fo.truth.t, t)
    np.testing.assert_allclose(fo.truth.x_px, x, atol=1e-12)
    np.testing.assert_allclose(fo.truth.y_px, y, atol=1e-12)
    # Mean of y(t) over [t - tau/2, t + tau/2] for y'' = G_PX: y(t) + G_PX tau^2 / 24.
    np.testing.assert_allclose(fo.truth.y_mean_px, y + G_PX * tau**2 / 24, atol=1e-9)
    np.testing.assert_allclose(fo.truth.x_mean_px, x, atol=1e-9)
    # Blur length: |v| * tau to first order (v from the derivative of the parabola).
    vx, vy = 600.0, -300.0 + G_PX * t
    np.testing.assert_allclose(fo.truth.blur_px, np.hypot(vx, vy) * tau, rtol=2e-3)


def test_array_trajectory_matches_callable():
    """closed-form/independent: per-frame positions of a parabola, splined, give the same
    frames as the parabola itself (a cubic spline reproduces a quadratic exactly)."""
    n = 8
    t = np.arange(n) / FPS
    a = render_flight(parabola, n, FPS, **clean())
    b = render_flight(parabola(t), n, FPS, **clean())
    assert np.abs(a.frames.astype(int) - b.frames.astype(int)).max() <= 1


def test_disc_area_and_centre():
    """closed-form/independent: a still, evenly lit disc on a flat background integrates to
    pi R^2 and its intensity centroid is its centre (area and centroid of a disc)."""
    r = 7.3
    for x0, y0 in [(60.0, 50.0), (61.37, 48.81)]:
        fo = render_flight(still(x0, y0), 1, FPS, radius_px=r, exposure=0.0, **clean())
        win = np.s_[35:66, 45:78]  # the disc and a margin (rounding elsewhere is not its)
        img = fo.frames[0].astype(float)[win]
        cov = (img - fo.scene[win]) / (230.0 - fo.scene[win])
        assert cov.sum() == pytest.approx(math.pi * r * r, rel=5e-3)
        yy, xx = np.indices(img.shape)
        yy, xx = yy + 35, xx + 45
        assert (cov * xx).sum() / cov.sum() == pytest.approx(x0, abs=0.02)
        assert (cov * yy).sum() / cov.sum() == pytest.approx(y0, abs=0.02)


def test_motion_blur_keeps_area_and_centroid():
    """closed-form/independent: exposure blur spreads the disc along its path but keeps its
    integrated coverage (pi R^2) and puts the centroid at the exposure-averaged centre."""
    r = 6.0
    fo = render_flight(
        lambda t: (30.0 + 8000.0 * t, np.full_like(np.asarray(t, float), 60.0)),
        9,
        FPS,
        radius_px=r,
        exposure=1.0 / FPS,
        **clean(),
    )
    k = 4
    assert fo.truth.blur_px[k] == pytest.approx(8000.0 / FPS, rel=1e-9)
    win = np.s_[50:71, 70:120]  # the blurred blob and a margin
    cov = (fo.frames[k].astype(float)[win] - fo.scene[win]) / (230.0 - fo.scene[win])
    assert cov.sum() == pytest.approx(math.pi * r * r, rel=1e-2)
    xx = np.indices(cov.shape)[1] + 70
    assert (cov * xx).sum() / cov.sum() == pytest.approx(fo.truth.x_mean_px[k], abs=0.03)
    # Along the path a point is covered for overlap([u - R, u + R], path) / L of the exposure:
    # at most 2R/L = 0.75 here, and above 0.05 over a length 2R + L - 2 * 0.05 L = 26.4 px.
    row = cov[10]
    assert row.max() == pytest.approx(2 * r / 16.0, abs=0.01)
    assert np.count_nonzero(row > 0.05) == pytest.approx(26.4, abs=1.5)


def test_flicker_gain_is_the_exposure_average():
    """closed-form/independent: the frame gain is the mean of 1 + A cos(2 pi 2 f t + phi)
    over the exposure, checked against scipy.integrate.quad."""
    amp, mains, phase, tau = 0.06, 50.0, 0.4, 1.2e-3
    opts = clean(flicker=amp)
    r = FlightRenderer(
        still(60.0, 50.0), 12, 730.0, exposure=tau, mains_hz=mains, flicker_phase=phase, **opts
    )
    for k in range(12):
        tm = k / 730.0
        ref = quad(lambda t: 1 + amp * math.cos(2 * math.pi * 2 * mains * t + phase),
                   tm - tau / 2, tm + tau / 2)[0] / tau  # fmt: skip
        assert r.truth.gain[k] == pytest.approx(ref, abs=1e-12)
    # The whole picture is scaled by the gain (noise off): background pixels follow it.
    f0, f3 = r.frame(0).astype(float), r.frame(3).astype(float)
    assert np.median(f3[5:20, 5:20] / f0[5:20, 5:20]) == pytest.approx(
        r.truth.gain[3] / r.truth.gain[0], abs=0.012
    )


def test_noise_level():
    """closed-form/independent: the added noise has the requested standard deviation (frame
    minus clean frame, before rounding: sd of N(0, 3^2) rounded is sqrt(9 + 1/12))."""
    r = FlightRenderer(still(-50.0, -50.0), 1, FPS, **clean(noise_sigma=3.0, shape=(200, 200)))
    d = r.frame(0).astype(float) - r.clean_frame(0)
    assert d.std() == pytest.approx(math.sqrt(9 + 1 / 12), rel=0.02)
    assert abs(d.mean()) < 0.05


def test_edge_distance_and_inside():
    """closed-form/independent: distance from the footprint to the image boundary, which runs
    along x = -0.5 (pixel centres at integers)."""
    r = 5.0
    xs = np.array([3.0, 5.4, 5.5, 20.0])
    fo = render_flight((xs, np.full(4, 60.0)), 4, FPS, radius_px=r, exposure=0.0, **clean())
    np.testing.assert_allclose(fo.truth.edge_distance_px, xs + 0.5 - r)
    assert fo.truth.inside.tolist() == [False, False, True, True]  # inside: >= 1 px clear


def test_occluder_hidden_fraction():
    """closed-form/independent: an opaque edge through the centre of a still disc hides half
    of it (symmetry); a disc clear of the occluder is not hidden; one behind it fully."""
    occ = [(60.0, 0.0, 100.0, 120.0)]
    xs = np.array([60.0, 30.0, 80.0])
    fo = render_flight(
        (xs, np.full(3, 60.0)), 3, FPS, radius_px=6.0, exposure=0.0, occluders=occ, **clean()
    )
    h = fo.truth.hidden_fraction
    assert h[0] == pytest.approx(0.5, abs=0.01)
    assert h[1] == 0.0 and h[2] == pytest.approx(1.0)
    assert fo.truth.visible.tolist() == [False, True, False]
    # The occluder is drawn in front: where it is, the picture does not change with the ball.
    assert np.array_equal(fo.frames[2][:, 62:98], fo.frames[1][:, 62:98])


def test_sixteen_bit_and_colour():
    """closed-form/independent: 16-bit output is the 8-bit picture times 257 (to rounding);
    colour output is BGR whose grey conversion is the tinted grey picture."""
    a = render_flight(parabola, 2, FPS, **clean())
    b = render_flight(parabola, 2, FPS, bit_depth=16, **clean())
    assert b.frames.dtype == np.uint16
    assert np.abs(b.frames.astype(float) / 257.0 - a.frames).max() <= 0.51
    c = render_flight(parabola, 2, FPS, color=True, **clean())
    assert c.frames.shape == (2, 120, 160, 3)
    grey = cv2.cvtColor(c.frames[0], cv2.COLOR_BGR2GRAY).astype(float)
    tint = 0.114 * 0.92 + 0.587 * 1.0 + 0.299 * 1.06  # BT.601 weights of the B, G, R tint
    assert np.abs(grey - tint * a.frames[0]).max() <= 2.0


@pytest.mark.parametrize("homography", [None, "world"])
def test_markers_found_by_opencv_where_the_truth_says(homography):
    """closed-form/independent: OpenCV's ArUco detector (independent reference) finds the
    painted DICT_4X4_50 markers with the right ids, corners within 0.5 px of the truth."""
    if homography is None:
        h = None
        markers = [MarkerPlacement(3, 20.3, 30.6, 48.2), MarkerPlacement(11, 150.25, 60.5, 40.0)]
    else:
        # world (m, y up) -> image (px, y down): 900 px/m, slight perspective
        h = np.array([[900.0, 20.0, 30.0], [-10.0, -880.0, 200.0], [0.05, 0.02, 1.0]])
        markers = [MarkerPlacement(3, 0.0, 0.0, 0.05), MarkerPlacement(11, 0.12, 0.06, 0.045)]
    fo = render_flight(still(-50.0, -50.0), 1, FPS, markers=markers, homography=h,
                       **clean(shape=(240, 320)))  # fmt: skip
    params = cv2.aruco.DetectorParameters()
    params.cornerRefinementMethod = cv2.aruco.CORNER_REFINE_SUBPIX
    det = cv2.aruco.ArucoDetector(cv2.aruco.getPredefinedDictionary(cv2.aruco.DICT_4X4_50), params)
    corners, ids, _ = det.detectMarkers(fo.frames[0])
    assert ids is not None and sorted(ids.ravel().tolist()) == [3, 11]
    for c, i in zip(corners, ids.ravel(), strict=True):
        truth = fo.truth.marker_corners[int(i)]
        assert np.abs(c[0] - truth).max() < 0.5
    # Corner order: top-left, top-right, bottom-right, bottom-left (image y down).
    tl, tr, br, bl = fo.truth.marker_corners[3]
    assert tl[0] < tr[0] and bl[0] < br[0] and tl[1] < bl[1] and tr[1] < br[1]


def test_marker_corners_axis_aligned():
    """closed-form/independent: corners of an axis-aligned square."""
    c = marker_corners_in_image(MarkerPlacement(0, 10.0, 20.0, 30.0))
    np.testing.assert_allclose(c, [[10, 20], [40, 20], [40, 50], [10, 50]])


def test_bad_input_messages():
    """regression: bad input raises ValueError naming the input, the value and the fix."""
    with pytest.raises(ValueError, match=r"^fps: expected a positive number \[1/s\], got 0\.0; "
                                         r"give the capture rate\.$"):  # fmt: skip
        render_flight(parabola, 3, 0.0)
    with pytest.raises(ValueError, match=r"^exposure: 0\.01 s is outside 0\.\.1/fps = 0\.002 s; "):
        render_flight(parabola, 3, FPS, exposure=0.01)
    with pytest.raises(ValueError, match=r"^bit_depth: expected 8 or 16, got 12; choose one\.$"):
        render_flight(parabola, 3, FPS, bit_depth=12)
    with pytest.raises(ValueError, match=r"^trajectory: arrays of shape \(2,\) and \(2,\), "
                                         r"expected \(3,\) each"):  # fmt: skip
        render_flight(([1.0, 2.0], [1.0, 2.0]), 3, FPS)
    with pytest.raises(ValueError, match=r"^markers: id 50 is outside DICT_4X4_50 \(0\.\.49\); "):
        render_flight(parabola, 1, FPS, markers=[MarkerPlacement(50, 1, 1, 20)])
    with pytest.raises(ValueError, match=r"^trajectory_in_world=True needs a homography"):
        render_flight(parabola, 1, FPS, trajectory_in_world=True)


# -- scene elements (issue 12) ----------------------------------------------------------------


def line(x0, y0, vx, vy):
    """Straight line at constant velocity (closed form), image pixels."""
    return lambda t: (x0 + vx * np.asarray(t, float), y0 + vy * np.asarray(t, float))


def coverage(renderer, k, level=230.0):
    """Coverage of an evenly lit ball of grey ``level`` over the scene (clean frame: no
    rounding)."""
    return (renderer.clean_frame(k).astype(float) - renderer.scene) / (level - renderer.scene)


def test_second_ball_area_centre_and_overlap():
    """closed-form/independent: the second ball alone in the frame is a disc of area pi R^2
    centred on its truth; two balls on straight lines overlap exactly in the frames where
    their centres are at most 2R apart (no exposure blur)."""
    r = 6.0
    far = still(-100.0, -100.0)
    fo = FlightRenderer(far, 1, FPS, radius_px=r, exposure=0.0, second_ball=still(70.3, 55.6),
                        **clean())  # fmt: skip
    cov = coverage(fo, 0)[40:72, 55:87]
    assert cov.sum() == pytest.approx(math.pi * r * r, rel=5e-3)
    yy, xx = np.indices(cov.shape)
    assert (cov * (xx + 55)).sum() / cov.sum() == pytest.approx(70.3, abs=0.02)
    assert (cov * (yy + 40)).sum() / cov.sum() == pytest.approx(55.6, abs=0.02)
    assert fo.truth.second.x_px[0] == 70.3 and fo.truth.visibility[0] == Visibility.OUTSIDE
    # Crossing: specimen left to right, second ball top to bottom, meeting at (80, 60) at t = 10/FPS.
    n = 21
    a, b = line(80.0 - 3000.0 * 10 / FPS, 60.0, 3000.0, 0.0), line(80.0, 60.0 - 10.0, 0.0, 500.0)
    fo = render_flight(a, n, FPS, radius_px=r, exposure=0.0, second_ball=b, **clean())
    t = np.arange(n) / FPS
    gap = np.hypot(a(t)[0] - b(t)[0], a(t)[1] - b(t)[1])
    np.testing.assert_array_equal(fo.truth.second.overlap, gap <= 2 * r)
    np.testing.assert_allclose(fo.truth.second.y_px, b(t)[1], atol=1e-12)
    assert (fo.truth.second.visibility[fo.truth.second.overlap] == Visibility.PARTLY).all()


def test_fabric_texture_pitch_angle_and_mean():
    """closed-form/independent: the weave's brightness across a thread is periodic with the
    thread pitch p, so its strongest spatial frequency is 1/p [1/px] along the direction at
    angle_deg to the image axes (numpy FFT); the pattern has zero mean."""
    p, ang = 4.0, 10.0
    tex = fabric_texture((256, 256), 30.0, thread_px=p, angle_deg=ang, seed=1)
    assert abs(float(tex.mean())) < 1e-3
    assert 15.0 < float(np.ptp(tex)) < 80.0  # about the requested peak-to-peak, with variation
    spec = np.abs(np.fft.fft2(tex))
    spec[0, 0] = 0.0
    k = np.fft.fftfreq(256)
    iy, ix = np.unravel_index(np.argmax(spec), spec.shape)
    f = math.hypot(k[ix], k[iy])
    assert f == pytest.approx(1 / p, abs=1.5 / 256)
    direction = math.degrees(math.atan2(abs(k[iy]), abs(k[ix]))) % 90.0
    assert min(abs(direction - ang), abs(direction - (90 - ang))) < 2.0


def _phase_plane_shift(ref, img, kmax=0.08):
    """Shift of ``img`` against ``ref`` by phase correlation, sub-pixel by a least-squares fit
    of the plane -2 pi (kx dx + ky dy) to the phase of the normalised cross-power spectrum at
    low frequencies (Hoge, IEEE Trans. Med. Imaging 22 (2003) 277), Hann-windowed."""
    h, w = ref.shape
    win = np.outer(np.hanning(h), np.hanning(w))
    f0 = np.fft.fft2((ref - ref.mean()) * win)
    f1 = np.fft.fft2((img - img.mean()) * win)
    cross = f1 * np.conj(f0)
    ky, kx = np.meshgrid(np.fft.fftfreq(h), np.fft.fftfreq(w), indexing="ij")
    sel = (np.hypot(kx, ky) < kmax) & (np.hypot(kx, ky) > 0)
    sw = np.sqrt(np.abs(cross[sel]))
    design = np.column_stack([kx[sel], ky[sel]]) * (-2 * np.pi) * sw[:, None]
    return np.linalg.lstsq(design, np.angle(cross[sel]) * sw, rcond=None)[0]


def test_tremble_shifts_the_whole_scene():
    """closed-form/independent: each trembling frame is the still frame moved by the truth's
    shift (phase correlation with a phase-plane fit, see _phase_plane_shift, within 0.015 px);
    shifts stay within +-0.3 px; the ball's truth is the path plus the shift."""
    far = still(-100.0, -100.0)
    opts = clean(shape=(160, 200), clutter=6, texture="fabric", seed=5)
    still_r = FlightRenderer(far, 8, FPS, **opts)
    shaky = FlightRenderer(far, 8, FPS, tremble_px=0.3, **opts)
    ref = still_r.clean_frame(0).astype(float)
    for k in range(8):
        sx, sy = shaky.truth.shift_x_px[k], shaky.truth.shift_y_px[k]
        assert abs(sx) <= 0.3 and abs(sy) <= 0.3
        dx, dy = _phase_plane_shift(ref, shaky.clean_frame(k).astype(float))
        assert dx == pytest.approx(sx, abs=0.015) and dy == pytest.approx(sy, abs=0.015)
    fo = render_flight(parabola, 5, FPS, tremble_px=0.3, exposure=0.0, **clean())
    x, y = parabola(np.arange(5) / FPS)
    np.testing.assert_allclose(fo.truth.x_px - fo.truth.shift_x_px, x, atol=1e-9)
    np.testing.assert_allclose(fo.truth.y_px - fo.truth.shift_y_px, y, atol=1e-9)
    assert np.ptp(fo.truth.shift_x_px) > 0  # it does tremble


def test_coloured_ball_on_grey_scene():
    """closed-form/independent: with ambient light only, the ball's inner pixels are exactly its
    colour and its coverage (from any channel) integrates to pi R^2; the scene stays grey."""
    r, bgr = 7.0, (40.0, 200.0, 90.0)
    fo = render_flight(still(60.0, 50.0), 1, FPS, radius_px=r, exposure=0.0, ball_bgr=bgr,
                       **clean())  # fmt: skip
    img = fo.frames[0].astype(float)
    assert img.shape == (120, 160, 3)
    np.testing.assert_allclose(img[50, 60], bgr, atol=0.51)
    far = img[5:20, 5:20]
    assert (
        np.abs(far[..., 0] - far[..., 2]).max() <= 1
        and np.abs(far[..., 1] - far[..., 2]).max() <= 1
    )
    win = np.s_[38:63, 48:73]
    cov = (img[win][..., 1] - fo.scene[win]) / (bgr[1] - fo.scene[win])
    assert cov.sum() == pytest.approx(math.pi * r * r, rel=5e-3)


def test_hand_holds_then_releases_and_moves_away():
    """closed-form/independent: the hand's blob (symmetric shading) is centred on the ball plus
    its offset while holding and on release point + away velocity x (t - t_release) after;
    `held` is true exactly before the release frame."""
    hand = Hand(release_frame=4, offset_px=(0.0, 20.0), away_px_per_s=(-4000.0, 0.0),
                half_axes_px=(12.0, 8.0))  # fmt: skip
    path = line(80.0, 40.0, 1000.0, 0.0)  # 2 px per frame
    r = FlightRenderer(path, 12, FPS, radius_px=5.0, exposure=0.0, hand=hand, **clean())
    assert r.truth.held.tolist() == [True] * 4 + [False] * 8
    t_rel = 4 / FPS
    for k in (1, 10):
        tk = k / FPS
        if k < 4:
            cx, cy = path(tk)[0] + 0.0, 40.0 + 20.0
        else:
            cx, cy = path(t_rel)[0] - 4000.0 * (tk - t_rel), 60.0
        d = np.abs(r.frame(k).astype(float) - r.scene)[48:73, :]
        d[d < 1.0] = 0.0
        yy, xx = np.indices(d.shape)
        assert (d * xx).sum() / d.sum() == pytest.approx(cx, abs=0.1)
        assert (d * (yy + 48)).sum() / d.sum() == pytest.approx(cy, abs=0.1)


def test_long_clip_ball_leaves_the_field():
    """closed-form/independent: a ball at constant speed is fully visible, then partly (cut by
    the right edge at x = w - 0.5), then outside from the frame where its centre passes
    w - 0.5 + R; frames after that show the still scene only (nothing to draw)."""
    n, r, w = 700, 5.0, 160
    fo_r = FlightRenderer(line(20.0, 60.0, 20000.0, 0.0), n, FPS, radius_px=r, exposure=0.0,
                          **clean())  # fmt: skip
    x = 20.0 + 20000.0 * np.arange(n) / FPS
    vis = fo_r.truth.visibility
    np.testing.assert_array_equal(vis == Visibility.OUTSIDE, x - r >= w - 0.5)
    np.testing.assert_array_equal(vis == Visibility.FULLY, x + r <= w - 1.5)
    last_out = n - 1
    assert np.array_equal(fo_r.clean_frame(last_out), fo_r.scene)
    assert fo_r.truth.row_first[last_out] == -1


def test_diameter_and_rows_of_a_blurred_ball():
    """closed-form/independent: for a disc moving along x, each row's coverage summed along x is
    the chord 2 sqrt(R^2 - (y - yc)^2) whatever the blur; its second moment is pi R^4 / 4, so
    (4 M2 / pi)^(1/4) is R, and the rows with coverage are those the truth lists."""
    r = 6.3
    fo = FlightRenderer(line(40.0, 52.2, 8000.0, 0.0), 9, FPS, radius_px=r, exposure=1.0 / FPS,
                        **clean())  # fmt: skip
    k = 4
    cov = coverage(fo, k)[:, 80:130]
    rows = cov.sum(axis=1)
    rows[rows < 0.02] = 0.0
    yc = fo.truth.y_mean_px[k]
    y = np.arange(len(rows))
    m2 = float(((y - yc) ** 2 * rows).sum())
    assert 2 * (4 * m2 / math.pi) ** 0.25 == pytest.approx(fo.truth.diameter_px[k], abs=0.05)
    assert fo.truth.diameter_px[k] == 2 * r
    assert fo.truth.top_px[k] == pytest.approx(52.2 - r) and fo.truth.bottom_px[k] == 52.2 + r
    hit = np.flatnonzero(rows > 0)
    assert (hit[0], hit[-1]) == (fo.truth.row_first[k], fo.truth.row_last[k]) == (46, 58)


def test_visibility_codes_with_an_occluder():
    """closed-form/independent: a disc behind an opaque rectangle is HIDDEN, half behind it
    PARTLY, clear of it FULLY (symmetry of the disc)."""
    occ = [(60.0, 0.0, 100.0, 120.0)]
    xs = np.array([80.0, 60.0, 30.0])
    fo = render_flight((xs, np.full(3, 60.0)), 3, FPS, radius_px=6.0, exposure=0.0,
                       occluders=occ, **clean())  # fmt: skip
    assert fo.truth.visibility.tolist() == [Visibility.HIDDEN, Visibility.PARTLY, Visibility.FULLY]


def test_new_options_bad_input():
    """regression: bad new options raise ValueError naming the input, the value and the fix."""
    with pytest.raises(ValueError, match=r"^texture: 'felt' is not known; use None or 'fabric'"):
        render_flight(parabola, 1, FPS, texture="felt")
    with pytest.raises(ValueError, match=r"^tremble_px: expected a shift amplitude from 0 to 5"):
        render_flight(parabola, 1, FPS, tremble_px=-1.0)
    with pytest.raises(ValueError, match=r"^ball_bgr: expected three levels"):
        render_flight(parabola, 1, FPS, ball_bgr=(1.0, 2.0))
    with pytest.raises(ValueError, match=r"^thread_px: expected a thread pitch of at least 2 px"):
        fabric_texture((20, 20), 10.0, thread_px=1.0)
