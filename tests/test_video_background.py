"""Tests of the footage background (fitdrag.video.background) against the generator's truth.

The footage is synthetic (fitdrag.video.synthetic), 320x240 px and 60 frames; the flight is
a closed-form vacuum parabola written here, and the generator returns the clean scene
behind the ball.  The checks are closed-form/independent; the error bounds are ours (common
practice, no source).
"""

from __future__ import annotations

import numpy as np
import pytest

from fitdrag.video.background import _median_of, estimate_background
from fitdrag.video.sources import ArraySource
from fitdrag.video.synthetic import render_flight

FPS = 500.0
SHAPE = (240, 320)
N = 60


def parabola(t):
    """Vacuum parabola in image pixels (closed form), y down: enters at the left edge,
    leaves at the right edge."""
    t = np.asarray(t, dtype=float)
    return -12.0 + 2900.0 * t, 70.0 - 400.0 * t + 9000.0 * t * t


def render(**kw):
    opts = dict(shape=SHAPE, radius_px=7.0, exposure=1.0e-3, noise_sigma=3.0, flicker=0.06,
                clutter=12, seed=21)  # fmt: skip
    opts.update(kw)
    return render_flight(parabola, N, FPS, **opts)


@pytest.fixture(scope="module")
def footage():
    return render()


def test_background_model_removes_ball_and_flicker(footage):
    """closed-form/independent: the background is the clean scene (no ball) times one
    constant brightness, even though every sampled frame flickers."""
    bg = estimate_background(ArraySource(footage.frames))
    gain = float(np.median(bg / footage.scene))
    diff = bg - gain * footage.scene
    # Median of 25 frames with noise sigma 3: standard deviation about 1.2533 * 3 / 5 = 0.75
    # (asymptotic variance of the sample median of a normal sample, common textbook result).
    assert diff.std() == pytest.approx(0.75, rel=0.2)
    path = np.s_[60:110, 40:300]  # where the ball flies
    assert np.abs(diff[path]).max() < 5.0


def test_median_network_matches_numpy():
    """closed-form/independent: the sorting-network median equals numpy's median."""
    rng = np.random.default_rng(0)
    for n in (1, 2, 3, 7, 16, 25):
        imgs = [rng.integers(0, 4000, (5, 6)).astype(np.uint16) for _ in range(n)]
        ref = np.median(np.stack(imgs).astype(float), axis=0)
        got = _median_of(imgs)
        np.testing.assert_array_equal(got, np.floor(ref).astype(np.uint16))
        f = [i.astype(np.float32) for i in imgs]
        np.testing.assert_allclose(_median_of(f), ref)


@pytest.mark.parametrize("k", [3, 4, 5, 8, 16, 17, 24, 25, 31, 32, 33])
def test_pruned_median_network_matches_numpy(k):
    """closed-form/independent: the median network, pruned to the comparators the median
    needs, gives numpy's median (independent implementation) for k images, odd and even,
    integer (mean of the middle two rounded down) and float."""
    rng = np.random.default_rng(k)
    imgs = [rng.integers(0, 65535, (6, 7)).astype(np.uint16) for _ in range(k)]
    ref = np.median(np.stack(imgs).astype(np.float64), axis=0)
    np.testing.assert_array_equal(_median_of(imgs), np.floor(ref).astype(np.uint16))
    flt = [im.astype(np.float32) for im in imgs]
    np.testing.assert_allclose(_median_of(flt), ref, rtol=1e-6)
