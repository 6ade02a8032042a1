"""Tests of fitdrag.video.ball_fit (model fit of a blurred ball; all footage synthetic).

Oracles: the synthetic generator's exact truth (fitdrag.video.synthetic renders the ball
independently, by supersampling and stepping the centre through the exposure, and reports
the centre averaged over the exposure and the radius), closed-form areas of a disc and of a
disc swept along a segment, and the statistical definition of a standard uncertainty (the
RMS of error / stated sigma over many independent frames is 1).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from fitdrag.video.ball_fit import BallGuess, fit_ball, render_ball
from fitdrag.video.synthetic import render_flight

R = 8.0
FPS = 1000.0
EXPOSURE = 0.6e-3
SHAPE = (120, 260)


def _traj(t):
    return 40 + 3000 * t, 60 + 1500 * t - 0.5 * 5000 * np.asarray(t) ** 2


def _flight(noise, seed=3, n=60):
    return render_flight(
        _traj, n, FPS, shape=SHAPE, radius_px=R, exposure=EXPOSURE, noise_sigma=noise,
        flicker=0.0, clutter=12, seed=seed,
    )  # fmt: skip


def _fits(sf, noise_level, frames_override=None, jitter=0.2, seed=1):
    """Fit every fully visible frame; return (truth x, y, fits)."""
    tr = sf.truth
    rng = np.random.default_rng(seed)
    frames = sf.frames if frames_override is None else frames_override
    out = []
    for k in np.flatnonzero(tr.visible):
        xt, yt = tr.x_mean_px[k], tr.y_mean_px[k]
        half = int(R + tr.blur_px[k] / 2 + 4)
        x0, y0 = int(round(xt)) - half, int(round(yt)) - half
        x1, y1 = x0 + 2 * half + 1, y0 + 2 * half + 1
        if x0 < 0 or y0 < 0 or x1 > SHAPE[1] or y1 > SHAPE[0]:
            continue
        f = frames[k, y0:y1, x0:x1].astype(float)
        b = sf.scene[y0:y1, x0:x1].astype(float)
        # Direction of motion from the neighbouring truth positions, as the tracker gives it.
        k0, k1 = max(k - 1, 0), min(k + 1, len(tr.x_px) - 1)
        ang = math.atan2(tr.y_px[k1] - tr.y_px[k0], tr.x_px[k1] - tr.x_px[k0])
        guess = BallGuess(
            xt + rng.normal(0, jitter), yt + rng.normal(0, jitter), R * 1.05,
            1.2 * tr.blur_px[k], ang,
        )  # fmt: skip
        fit = fit_ball(f - b, b, 1.0, noise_level, guess, origin=(x0, y0))
        out.append((k, xt, yt, fit))
    return out


@pytest.fixture(scope="module")
def white():
    return _flight(3.0)


def test_centre_against_generator_truth(white):
    """closed-form/independent: the fitted centre matches the generator's exposure-averaged
    centre (oracle: fitdrag.video.synthetic truth) to RMS < 0.04 px with noise 3 grey
    levels, and the mean offset stays within 0.03 px."""
    res = _fits(white, 3.0)
    assert len(res) >= 30
    assert all(f.success for *_, f in res)
    ex = np.array([f.x - xt for _, xt, _, f in res])
    ey = np.array([f.y - yt for _, _, yt, f in res])
    rms = math.sqrt(np.mean(np.r_[ex, ey] ** 2))
    assert rms < 0.04
    assert abs(ex.mean()) < 0.03 and abs(ey.mean()) < 0.03


def test_outline_diameter_and_rows_against_truth(white):
    """closed-form/independent: the apparent diameter (perpendicular to the motion) matches
    the generator's 2 * radius_px within 0.08 px on average; the rows spanned are those of
    the ball's outline at the two ends of the exposure (oracle: the trajectory the generator
    was given, top = min(y(t +- T/2)) - r)."""
    res = _fits(white, 3.0)
    d = np.array([f.diameter for *_, f in res])
    assert abs(d.mean() - 2 * R) < 0.08
    assert np.all(np.abs(d - 2 * R) < 0.3)
    for k, _, _, f in res:
        t = white.truth.t[k] + np.array([-0.5, 0.5]) * EXPOSURE
        _, y = _traj(t)
        top, bottom = float(y.min()) - R, float(y.max()) + R
        assert abs(f.top - top) < 0.2 and abs(f.bottom - bottom) < 0.2
        # Pixel row k covers k - 0.5 <= y < k + 0.5; near a row boundary either row will do.
        for got, edge in ((f.row_first, top), (f.row_last, bottom)):
            near_boundary = abs((edge - 0.5) - round(edge - 0.5)) < 0.2
            assert got == math.floor(edge + 0.5) or (near_boundary and abs(got - edge) < 0.7)


def test_sigma_honest_white_noise():
    """closed-form/independent: with white noise the RMS of (error / stated sigma) over
    about 90 frames (x and y pooled) lies within 0.8-1.25 (oracle: definition of a standard
    uncertainty; truth from the generator)."""
    res = []
    for seed in (3, 4):
        res += _fits(_flight(3.0, seed=seed), 3.0, seed=seed)
    z = np.array([[(f.x - xt) / f.u_x, (f.y - yt) / f.u_y] for _, xt, yt, f in res]).ravel()
    assert len(z) >= 120
    assert 0.8 <= math.sqrt(np.mean(z**2)) <= 1.25


def test_sigma_honest_correlated_noise():
    """closed-form/independent: with spatially correlated noise (white noise smoothed by a
    Gaussian of 0.8 px, rescaled to 3 grey levels: neighbouring pixels correlate about 0.7,
    like compressed video) the RMS of (error / stated sigma) stays within 0.8-1.25, and the
    stated sigma is inflated over the white-noise value (oracle: definition of a standard
    uncertainty; truth from the generator)."""
    import cv2

    sf = _flight(0.0, n=60)
    rng = np.random.default_rng(11)
    noisy = np.empty(sf.frames.shape, np.float64)
    for k in range(len(noisy)):
        w = cv2.GaussianBlur(rng.standard_normal(SHAPE), (0, 0), 0.8)
        noisy[k] = sf.frames[k] + 3.0 * w / w.std()
    res = _fits(sf, 3.0, frames_override=noisy)
    z = np.array([[(f.x - xt) / f.u_x, (f.y - yt) / f.u_y] for _, xt, yt, f in res]).ravel()
    assert len(z) >= 60
    assert 0.8 <= math.sqrt(np.mean(z**2)) <= 1.25
    assert np.median([f.noise_inflation for *_, f in res]) > 1.3


def test_static_ball_no_blur():
    """closed-form/independent: a ball without motion blur (exposure 0) is fitted to within
    0.05 px of the generator's centre and 0.12 px of its diameter (the model renders blur
    below 0.25 px as 0.25 px) (oracle: generator truth)."""
    sf = render_flight(
        _traj, 8, FPS, shape=SHAPE, radius_px=6.0, exposure=0.0, noise_sigma=2.0,
        flicker=0.0, clutter=0, seed=5,
    )  # fmt: skip
    tr = sf.truth
    for k in range(1, 7):
        xt, yt = tr.x_px[k], tr.y_px[k]
        x0, y0 = int(xt) - 10, int(yt) - 10
        f = sf.frames[k, y0 : y0 + 21, x0 : x0 + 21].astype(float)
        b = sf.scene[y0 : y0 + 21, x0 : x0 + 21].astype(float)
        fit = fit_ball(f - b, b, 1.0, 2.0, BallGuess(xt + 0.2, yt - 0.2, 6.3), origin=(x0, y0))
        assert fit.success
        assert math.hypot(fit.x - xt, fit.y - yt) < 0.05
        assert abs(fit.diameter - 12.0) < 0.12


def test_render_area_closed_form():
    """closed-form/independent: the exposure-averaged coverage integrates to the disc's
    area pi r^2 whatever the blur (each instant covers pi r^2), within 0.5 % (pixels away
    from the outline are sampled once, at their centre); the pixels it
    touches cover at least the swept area pi r^2 + 2 r L; with blur shorter than the ball
    the pixels covered throughout (coverage 1) lie in the intersection of the end discs."""
    for r, length, ang in ((5.0, 0.0, 0.0), (7.3, 3.0, 0.4), (4.2, 6.5, -1.1)):
        img = render_ball((41, 41), 20.3, 19.8, r, length, ang)[0]
        assert abs(img.sum() / (math.pi * r * r) - 1) < 5e-3
        assert img.max() <= 1.0 + 1e-9
        assert np.count_nonzero(img > 0) >= math.pi * r * r + 2 * r * length
        yy, xx = np.indices(img.shape)
        ex, ey = 0.5 * length * math.cos(ang), 0.5 * length * math.sin(ang)
        full = img >= 1.0 - 1e-9
        assert np.all(np.hypot(xx[full] - 20.3 - ex, yy[full] - 19.8 - ey) < r)
        assert np.all(np.hypot(xx[full] - 20.3 + ex, yy[full] - 19.8 + ey) < r)


def test_fit_fails_on_non_ball_and_few_pixels():
    """regression: a square blob is not accepted as a ball (success False with the reason),
    and a crop too small to fit says so; neither raises."""
    b = np.full((31, 31), 90.0)
    d = np.zeros_like(b)
    d[8:23, 8:23] = 120.0
    rng = np.random.default_rng(0)
    d += rng.normal(0, 2.0, d.shape)
    fit = fit_ball(d, b, 1.0, 2.0, BallGuess(15.0, 15.0, 8.5))
    assert not fit.success and fit.reason
    small = fit_ball(d[:5, :5], b[:5, :5], 1.0, 2.0, BallGuess(2.0, 2.0, 1.0))
    assert not small.success and "too few pixels" in small.reason


def test_bad_input_raises():
    """regression: mismatched crops and a non-positive noise level raise InputError naming
    the input."""
    from fitdrag.errors import InputError

    with pytest.raises(InputError, match="same shape"):
        fit_ball(np.zeros((10, 10)), np.zeros((9, 10)), 1.0, 1.0, BallGuess(5, 5, 3))
    with pytest.raises(InputError, match="noise_sigma"):
        fit_ball(np.zeros((10, 10)), np.zeros((10, 10)), 1.0, 0.0, BallGuess(5, 5, 3))


def test_outline_map_and_second_order_shading_closed_forms():
    """closed-form/independent: through an outline map T (image offsets -> the frame where
    the outline is a circle of radius r) the coverage integrates to the ellipse's area
    pi r^2 / |det T| whatever the blur; with the second-order shading the image sums of
    coverage times n_x^2 and n_y^2 are pi r^2 / (4 |det T|) (the integral of x^2 / r^2 over
    a disc is pi r^2 / 4) within 3 % (pixels away from the outline are sampled once, at their
    centre: the midpoint rule misses the pixel's own spread, 1 / (12 r^2) against 1 / 4) and
    those of n_x n_y, n_x n_z, n_y n_z vanish (odd integrands) to 0.5 % of the area; the first
    four images are those of the first-order model."""
    tm = np.array([[0.9, 0.12], [-0.05, 1.08]])
    det = abs(np.linalg.det(tm))
    for r, length, ang in ((6.0, 0.0, 0.0), (7.3, 3.0, 0.4)):
        img = render_ball((45, 45), 22.3, 21.8, r, length, ang, outline_map=tm,
                          shading_order=2)  # fmt: skip
        first = render_ball((45, 45), 22.3, 21.8, r, length, ang, outline_map=tm)
        np.testing.assert_allclose(img[:4], first, rtol=0, atol=1e-12)
        area = math.pi * r * r / det
        assert abs(img[0].sum() / area - 1) < 5e-3
        assert abs(img[4].sum() / (area / 4) - 1) < 0.03
        assert abs(img[5].sum() / (area / 4) - 1) < 0.03
        for k in (6, 7, 8):
            assert abs(img[k].sum()) < 5e-3 * area


def _ellipse_ball(tm, centre, r, blur, shape, level, ambient, light, rng, noise):
    """An independent rendering of a shaded ball whose outline is the ellipse
    {p : |T (p - c)| <= r}, swept along ``blur`` (image vector) over the exposure: 16 x 16
    samples per pixel, 24 time steps, brightness ambient + (1 - ambient) max(n . L, 0) with
    n the normal of the circle's frame (Lambert's cosine law), on a flat background of 80."""
    h, w = shape
    sub = (np.arange(16) + 0.5) / 16 - 0.5
    yy, xx = np.indices(shape, dtype=float)
    px = (xx[:, :, None, None] + sub[None, None, None, :]).reshape(h, w, 1, 16)
    py = (yy[:, :, None, None] + sub[None, None, :, None]).reshape(h, w, 16, 1)
    img = np.zeros(shape)
    for s in (np.arange(24) + 0.5) / 24 - 0.5:
        cx, cy = centre[0] + s * blur[0], centre[1] + s * blur[1]
        qx = (tm[0, 0] * (px - cx) + tm[0, 1] * (py - cy)) / r
        qy = (tm[1, 0] * (px - cx) + tm[1, 1] * (py - cy)) / r
        q2 = qx * qx + qy * qy
        inside = q2 < 1.0
        nz = np.sqrt(np.clip(1.0 - q2, 0.0, 1.0))
        lam = np.clip(qx * light[0] + qy * light[1] + nz * light[2], 0.0, None)
        val = np.where(inside, level * (ambient + (1 - ambient) * lam), 80.0)
        img += val.mean(axis=(2, 3))
    img /= 24
    return img + rng.normal(0.0, noise, shape)


def test_fit_through_an_outline_map_recovers_the_ellipse():
    """closed-form/independent: a ball imaged as an ellipse (15 % elongated, rotated) and
    blurred, rendered independently (noise-free) with a lamp 30 degrees off the line of
    sight: given the outline map, the first-order shading leaves the centre within 0.08 px and
    the circle's radius within 0.05 px, the second-order shading (which follows the lamp's
    shadow better) within 0.045 px and 0.03 px, smaller on both counts; a circular disc
    fitted to the same blob misses the radius by more than 0.2 px.  With sensor noise of 2
    grey levels the second-order fit stays within 3 of its stated sigmas."""
    c, s = math.cos(0.5), math.sin(0.5)
    rot = np.array([[c, -s], [s, c]])
    tm = rot @ np.diag([1 / 1.15, 1.0]) @ rot.T  # image -> circle frame
    light = np.array([math.sin(math.radians(30)) * 0.6, math.sin(math.radians(30)) * 0.8,
                      math.cos(math.radians(30))])  # fmt: skip
    shape, centre, r, blur = (41, 45), (22.4, 20.3), 9.0, (3.0, 1.0)
    bg = np.full(shape, 80.0)
    guess = BallGuess(centre[0] + 0.3, centre[1] - 0.2, r * 1.1, 3.0, math.atan2(blur[1], blur[0]))
    errors = []
    for noise in (0.0, 2.0):
        rng = np.random.default_rng(7)
        img = _ellipse_ball(tm, centre, r, blur, shape, 220.0, 0.6, light, rng, noise)
        for order in (1, 2):
            fit = fit_ball(img - bg, bg, 1.0, 2.0, guess, outline_map=tm, shading_order=order)
            assert fit.success, fit.reason
            assert abs(fit.blur_length - math.hypot(*blur)) < 0.3
            e_c = math.hypot(fit.x - centre[0], fit.y - centre[1])
            errors.append((noise, order, e_c, abs(fit.diameter / 2 - r), fit))
        if noise == 0.0:
            disc = fit_ball(img - bg, bg, 1.0, 2.0, guess)
            assert abs(disc.diameter / 2 - r) > 0.2
    (_, _, c1, r1, _), (_, _, c2, r2, _) = errors[0], errors[1]
    assert c1 < 0.08 and r1 < 0.05 and c2 < 0.045 and r2 < 0.03
    assert c2 < c1 and r2 < r1
    _, _, c_n, r_n, fit = errors[3]
    assert c_n < 3 * math.hypot(fit.u_x, fit.u_y) and r_n < 3 * fit.u_diameter / 2


def test_outline_map_and_shading_order_bad_input():
    """regression: a singular outline map and an unknown shading order raise InputError
    naming the input and the fix."""
    from fitdrag.errors import InputError

    d, b = np.zeros((30, 30)), np.full((30, 30), 80.0)
    with pytest.raises(InputError, match="outline_map: expected a finite, invertible 2x2"):
        fit_ball(d, b, 1.0, 1.0, BallGuess(15, 15, 5), outline_map=np.zeros((2, 2)))
    with pytest.raises(InputError, match="shading_order: expected 1 or 2, got 3"):
        fit_ball(d, b, 1.0, 1.0, BallGuess(15, 15, 5), shading_order=3)


def test_lamp_basis_closed_forms():
    """closed-form/independent: the lamp term max(n . L, 0) equals n_z for a lamp on the line
    of sight (no part of the visible face in shadow), and for a lamp side-on (L = x) its
    image sum is the integral of max(x / r, 0) over the disc, 2 r^2 / 3, whatever the blur
    (each instant of the exposure contributes it), within 0.5 %."""
    img = render_ball((41, 41), 20.3, 19.8, 8.0, 2.0, 0.3, lamp=(0.0, 0.0, 1.0))
    np.testing.assert_allclose(img[4], img[3], rtol=0, atol=1e-12)
    for length in (0.0, 4.0):
        img = render_ball((41, 41), 20.3, 19.8, 8.0, length, 0.7, lamp=(1.0, 0.0, 0.0))
        assert abs(img[4].sum() / (2 * 8.0**2 / 3) - 1) < 5e-3


def test_fit_under_the_lamp_is_unbiased_by_the_shadow():
    """closed-form/independent: the independently rendered ellipse ball of
    test_fit_through_an_outline_map_recovers_the_ellipse, lit by a lamp 30, 45 and 60
    degrees off the line of sight: fitted with the lamp's direction, its centre and radius
    are within 0.005 px of the truth (the second-order shading left up to 0.045 px), and
    within 0.012 px with the direction 3.5 degrees off."""
    c, s = math.cos(0.5), math.sin(0.5)
    rot = np.array([[c, -s], [s, c]])
    tm = rot @ np.diag([1 / 1.15, 1.0]) @ rot.T
    shape, centre, r, blur = (41, 45), (22.4, 20.3), 9.0, (3.0, 1.0)
    bg = np.full(shape, 80.0)
    guess = BallGuess(centre[0] + 0.3, centre[1] - 0.2, r * 1.1, 3.0, math.atan2(blur[1], blur[0]))
    for deg in (30.0, 45.0, 60.0):
        a = math.radians(deg)
        light = np.array([0.6 * math.sin(a), 0.8 * math.sin(a), math.cos(a)])
        img = _ellipse_ball(tm, centre, r, blur, shape, 220.0, 0.6, light,
                            np.random.default_rng(7), 0.0)  # fmt: skip
        for lamp, tol in ((light, 0.005), (light + np.array([0.05, -0.03, 0.0]), 0.012)):
            fit = fit_ball(img - bg, bg, 1.0, 2.0, guess, outline_map=tm, lamp=lamp)
            assert fit.success, fit.reason
            assert math.hypot(fit.x - centre[0], fit.y - centre[1]) < tol, (deg, fit)
            assert abs(fit.diameter / 2 - r) < tol, (deg, fit)
            assert len(fit.shading) == 6


def test_bad_lamp_is_named():
    """regression: a lamp of zero length raises InputError naming the input."""
    from fitdrag.errors import InputError

    d, b = np.zeros((30, 30)), np.full((30, 30), 80.0)
    with pytest.raises(InputError, match=r"lamp: expected a direction \(x, y, z\) towards the"):
        fit_ball(d, b, 1.0, 1.0, BallGuess(15, 15, 5), lamp=(0.0, 0.0, 0.0))
