"""Tests of fitdrag.video.movers: acquisition, leaving and re-entering, other moving objects.

All footage is synthetic (fitdrag.video.synthetic's FlightRenderer), 320x240 px; the flights
are closed-form vacuum parabolas and straight lines written here, so the truth (the ball
centre at mid-exposure) is exact: these checks are closed-form/independent unless labelled
otherwise.  A second ball is composited into the footage with numpy: the clean frame of a
second renderer on the same scene, minus that scene.  The error bounds are ours (common
practice, no source); the benchmark measures the targets.
"""

from __future__ import annotations

import numpy as np
import pytest

from fitdrag.video.detect import detect_specimen
from fitdrag.video.movers import LEFT, OVERLAP, OtherMover, frame_ranges, motion_kind
from fitdrag.video.synthetic import FlightRenderer

FPS = 500.0
SHAPE = (240, 320)
OPTS = dict(shape=SHAPE, radius_px=7.0, exposure=1.0e-3, flicker=0.06, clutter=12, seed=21)


def parabola(t):
    """Vacuum parabola in image pixels (closed form), y down, left to right."""
    t = np.asarray(t, dtype=float)
    return -12.0 + 2900.0 * t, 70.0 - 400.0 * t + 9000.0 * t * t


def crossing_line(t):
    """Straight line at constant velocity (no acceleration), right to left, passing through
    the parabola's position at t = 0.0622 s (both balls meet there)."""
    t = np.asarray(t, dtype=float)
    return 330.0 - 2600.0 * t, 30.1 + 800.0 * t


def composite(ra: FlightRenderer, rb: FlightRenderer, n: int, noise: float = 3.0) -> np.ndarray:
    """Frames with both renderers' balls on ra's scene, ra's flicker and white noise."""
    out = []
    for k in range(n):
        img = (ra.clean_frame(k) + (rb.clean_frame(k) - rb.scene)) * np.float32(ra.truth.gain[k])
        rng = np.random.default_rng([5, k])
        img = img + noise * rng.standard_normal(img.shape).astype(np.float32)
        out.append(np.clip(np.rint(img), 0, 255).astype(np.uint8))
    return np.stack(out)


def errors(det, truth):
    return np.hypot(det.x_px - truth.x_px[det.frame], det.y_px - truth.y_px[det.frame])


def test_acquisition_from_frame_zero():
    """closed-form/independent: a ball fully visible from the first frame is detected from
    frame 0 (followed backwards from its confirmation), in every frame, within bounds."""

    def flight(t):
        t = np.asarray(t, dtype=float)
        return 30.0 + 1500.0 * t, 40.0 + 200.0 * t + 9000.0 * t * t

    r = FlightRenderer(flight, 40, FPS, noise_sigma=3.0, **OPTS)
    assert r.truth.visible.all()
    det = detect_specimen(np.stack(list(r.iter_frames())))
    assert det.frame.tolist() == list(range(40))
    assert errors(det, r.truth).max() < 0.35
    assert det.other_movers == ()


def test_leaving_and_reentering():
    """closed-form/independent: a lob that leaves through the top of the image and comes back
    down: every fully visible frame before and after is detected, nothing while it is out,
    and the frames out of view say so."""

    def lob(t):
        t = np.asarray(t, dtype=float)
        return 40.0 + 1000.0 * t, 150.0 - 4000.0 * t + 16000.0 * t * t  # apex above the image

    r = FlightRenderer(lob, 120, FPS, noise_sigma=3.0, **OPTS)
    vis = r.truth.visible
    out = np.flatnonzero(~r.truth.inside & (r.truth.edge_distance_px < -2 * r.truth.radius_px))
    assert vis[:5].all() and vis[-5:].all() and len(out) > 50  # it does leave and come back
    det = detect_specimen(np.stack(list(r.iter_frames())))
    assert set(det.frame.tolist()) == set(np.flatnonzero(vis).tolist())
    assert errors(det, r.truth).max() < 0.35
    reasons = dict(det.missing)
    assert all(reasons[int(k)] == LEFT for k in out)


def test_crossing_distractor_is_not_followed_and_is_reported():
    """closed-form/independent: a second ball of the same look crossing in a straight line:
    no detection lies on it, the specimen (the free flight) is detected outside the overlap,
    the other object is reported with where and when, and the overlap frames are listed."""
    n = 60
    ra = FlightRenderer(parabola, n, FPS, noise_sigma=0.0, **OPTS)
    rb = FlightRenderer(crossing_line, n, FPS, noise_sigma=0.0, **OPTS)
    det = detect_specimen(composite(ra, rb, n))
    on_other = np.hypot(det.x_px - rb.truth.x_px[det.frame], det.y_px - rb.truth.y_px[det.frame])
    assert on_other.min() > 5.0
    assert errors(det, ra.truth).max() < 0.35
    (other,) = det.other_movers
    assert isinstance(other, OtherMover) and other.motion == "straight line"
    # the balls are less than two diameters apart in the overlap frames (closed form)
    gap = np.hypot(ra.truth.x_px - rb.truth.x_px, ra.truth.y_px - rb.truth.y_px)
    assert set(np.flatnonzero(gap < 14.0).tolist()) <= set(other.overlap_frames)
    assert len(other.overlap_frames) <= 6
    missed = set(np.flatnonzero(ra.truth.visible).tolist()) - set(det.frame.tolist())
    assert missed <= set(other.overlap_frames)
    reasons = dict(det.missing)
    assert all(reasons[k].startswith(OVERLAP) for k in missed)
    x0, y0 = other.start_px
    assert abs(x0 - rb.truth.x_px[other.first_frame]) < 1 and other.last_frame == n - 1
    assert other.describe().startswith(
        f"another moving object (straight line) in frames {other.first_frame}-{n - 1}, from "
    )
    assert other.describe().endswith(
        f"; it overlaps the specimen in frames {frame_ranges(other.overlap_frames)}"
    )


def test_motion_kind_closed_forms():
    """closed-form/independent: a parabola accelerating down the image is a free flight, a
    constant-velocity line a straight line, a circle irregular; five points are too short."""
    f = np.arange(40)
    rng = np.random.default_rng(1)
    e = rng.normal(0, 0.05, (2, 40))
    assert motion_kind(f, 3.0 * f + e[0], 0.02 * f**2 + e[1]) == "free flight"
    assert motion_kind(f, 3.0 * f + e[0], 1.0 * f + e[1]) == "straight line"
    th = f / 6.0
    assert motion_kind(f, 50 * np.cos(th), 50 * np.sin(th)) == "irregular"
    assert motion_kind(f[:5], f[:5], f[:5]) == "too short"


def test_frame_ranges():
    """regression: compact frame lists."""
    assert frame_ranges([7, 3, 4, 5, 12, 15, 16]) == "3-5 7 12 15-16"
    assert frame_ranges([]) == ""


@pytest.mark.parametrize("with_region", [True, False])
def test_region_of_interest(with_region):
    """closed-form/independent: a second object moving on the right of the image only; with
    a region of interest on the left, where the specimen's flight starts, it is not followed
    at all (the region limits where tracks start, not where the specimen may go)."""
    n = 60
    ra = FlightRenderer(parabola, n, FPS, noise_sigma=0.0, **OPTS)
    rb = FlightRenderer(lambda t: (300.0 - 700.0 * t, 200.0 + 0.0 * t), n, FPS,
                        noise_sigma=0.0, **OPTS)  # fmt: skip
    frames = composite(ra, rb, n)
    det = detect_specimen(frames, region=(0, 0, 200, 239) if with_region else None)
    assert len(det.other_movers) == (0 if with_region else 1)
    assert errors(det, ra.truth).max() < 0.35
    assert set(det.frame.tolist()) == set(np.flatnonzero(ra.truth.visible).tolist())


def test_hand_release_at_a_phone_frame_rate():
    """closed-form/independent: at 30 frames/s (a phone), a hand carries the ball and lets go
    at frame 4, then moves away in a straight line while the ball flies on (vacuum
    parabola, 30-45 px per frame): the ball, which the hand-and-ball track still follows
    after the release at its new size, is picked up as a track of its own from those frames
    and followed both ways; every detection lies on the ball (within 0.35 px of the truth),
    at least 12 of its 16 free frames are found, and the hand is reported as another moving
    object (a straight line), never taken for the specimen."""
    from fitdrag.video.synthetic_scene import Hand

    def toss(t):
        t = np.asarray(t, dtype=float)
        return 100.0 + 900.0 * t, 480.0 - 1500.0 * t + 0.5 * 4900.0 * t * t

    hand = Hand(release_frame=4, offset_px=(5.0, 30.0), away_px_per_s=(-100.0, 400.0),
                half_axes_px=(40.0, 28.0))  # fmt: skip
    r = FlightRenderer(toss, 26, 30.0, shape=(600, 900), radius_px=18.0, exposure=2e-3,
                       noise_sigma=4.0, flicker=0.0, clutter=12, seed=11, hand=hand)  # fmt: skip
    det = detect_specimen(np.stack(list(r.iter_frames())))
    assert errors(det, r.truth).max() < 0.35
    free = np.flatnonzero(r.truth.visible & (np.arange(26) > 4))
    assert len(free) == 16 and set(det.frame.tolist()) <= set(free.tolist())
    assert len(det.frame) >= 12
    assert any(o.motion == "straight line" and o.first_frame <= 6 for o in det.other_movers)


def test_hand_release_picks_up_the_specimen_from_its_release():
    """closed-form/independent: a hand carries the ball along its flight and lets go at frame
    15 (fitdrag.video.synthetic's Hand): no detection lies on the hand-and-ball blob, the
    ball is detected from a few frames after the release to the end, the hand-and-ball
    track is reported as another moving object, and its frames say so."""
    from fitdrag.video.movers import OTHER_ONLY
    from fitdrag.video.synthetic_scene import Hand

    def toss(t):
        t = np.asarray(t, dtype=float)
        return 60.0 + 1500.0 * t, 200.0 - 1200.0 * t + 9000.0 * t * t

    r = FlightRenderer(toss, 80, FPS, shape=SHAPE, radius_px=7.0, exposure=1.0e-3, clutter=12,
                       seed=3, hand=Hand(release_frame=15))  # fmt: skip
    det = detect_specimen(np.stack(list(r.iter_frames())))
    assert errors(det, r.truth).max() < 0.35
    free = np.flatnonzero(r.truth.visible & (np.arange(80) >= 15))
    assert det.frame.min() >= 15
    assert len(set(free.tolist()) - set(det.frame.tolist())) <= 4  # parting from the hand
    assert any(o.first_frame == 0 and o.last_frame >= 14 for o in det.other_movers)
    assert dict(det.missing)[5] == OTHER_ONLY
