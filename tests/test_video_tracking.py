"""Tests of fitdrag.video.tracking: footage -> calibrated track (track_footage), its CSV text
and the footage's SHA-256.

Footage is synthetic (fitdrag.video.synthetic renders a ball along a trajectory given in
world metres through a world -> image homography we choose, with ArUco markers of known
size painted into the scene).  Independent references: the closed-form vacuum parabola the
ball follows (x = x0 + vx t, y = y0 + vy t - g t^2 / 2) and the homography it was drawn
through, so world positions are checked against truth that does not come from the code
under test; hashes are checked against hashlib.
"""

from __future__ import annotations

import hashlib
import math
import re

import numpy as np
import pytest

from fitdrag.tracks.csv_file import read_track
from fitdrag.tracks.track import MIN_POINTS
from fitdrag.video.footage_files import write_frames, write_video
from fitdrag.video.synthetic import MarkerPlacement, render_flight
from fitdrag.video.tracking import (
    FootageTrack,
    footage_sha256,
    footage_track_csv_text,
    frame_ranges,
    track_footage,
)

FPS = 500.0
PX_PER_M = 800.0
ORIGIN_PX = (40.0, 200.0)  # image point of the world origin
H_W2I = np.array([[PX_PER_M, 0.0, ORIGIN_PX[0]], [0.0, -PX_PER_M, ORIGIN_PX[1]], [0, 0, 1.0]])
MARKER_Y = -0.10  # world y of both markers' lower-left corners [m]
MARKERS = [MarkerPlacement(0, 0.0, MARKER_Y, 0.05), MarkerPlacement(1, 0.35, MARKER_Y, 0.05)]
LAYOUT = {0: (0.0, MARKER_Y), 1: (0.35, MARKER_Y)}
N_FRAMES = 40
SHAPE = (300, 400)  # (height, width) [px]
G = 9.80665  # standard gravity (CGPM 1901) [m/s^2]


def trajectory(t):
    """Vacuum parabola [m] (closed form), world y up."""
    t = np.asarray(t, dtype=float)
    return 0.05 + 3.0 * t, 0.05 + 2.0 * t - 0.5 * G * t**2


@pytest.fixture(scope="module")
def clip(tmp_path_factory):
    d = tmp_path_factory.mktemp("clip")
    flight = render_flight(
        trajectory, N_FRAMES, FPS, shape=SHAPE, radius_px=7.0, homography=H_W2I,
        trajectory_in_world=True, markers=MARKERS, seed=5,
    )  # fmt: skip
    video = write_video(flight.frames, d / "throw.avi", 30.0)  # a playback rate in the file
    folder = d / "frames"
    write_frames(flight.frames, folder, ext="png")
    return {"video": video, "folder": folder, "truth": flight.truth}


@pytest.fixture(scope="module")
def markers_track(clip):
    return track_footage(clip["video"], fps=FPS, markers=0.05)


# rolled camera: the true horizontal appears ROLL degrees counter-clockwise on screen
ROLL = 4.0
ROLL_ORIGIN_PX = (60.0, 180.0)


def _rolled_w2i() -> np.ndarray:
    """World (m, y up) -> image (px, y down) for a camera rolled by ROLL: world x maps to
    the screen direction (cos r, sin r) (y up), so u = u0 + (c x - s y) k and
    v = v0 - (s x + c y) k with k px per m."""
    c, s = math.cos(math.radians(ROLL)), math.sin(math.radians(ROLL))
    k = PX_PER_M
    return np.array([[c * k, -s * k, ROLL_ORIGIN_PX[0]], [-s * k, -c * k, ROLL_ORIGIN_PX[1]],
                     [0.0, 0.0, 1.0]])  # fmt: skip


@pytest.fixture(scope="module")
def rolled(tmp_path_factory):
    d = tmp_path_factory.mktemp("rolled")
    flight = render_flight(
        trajectory, 24, FPS, shape=(240, 320), radius_px=6.0, homography=_rolled_w2i(),
        trajectory_in_world=True, seed=8,
    )  # fmt: skip
    write_frames(flight.frames, d / "f", ext="png")
    return d / "f"


def test_markers_recover_the_true_flight(clip, markers_track):
    """closed-form/independent: with the markers' calibration (origin: marker 0's lower-left
    corner, world (0, -0.10) m) the track's world positions agree with the closed-form
    parabola to 0.3 mm (0.24 px); t = frame / fps; the centroids agree with the generator's
    exposure-averaged truth to 0.15 px; the scale is 1/800 m/px to 0.1 %."""
    ft = markers_track
    assert isinstance(ft, FootageTrack)
    tr = ft.track
    assert len(tr) >= N_FRAMES - 2
    np.testing.assert_allclose(tr.t, tr.frame / FPS, rtol=0, atol=1e-15)
    xt, yt = trajectory(tr.t)
    assert np.max(np.abs(tr.x - xt)) < 3e-4
    assert np.max(np.abs(tr.y - (yt - MARKER_Y))) < 3e-4
    truth = clip["truth"]
    np.testing.assert_allclose(ft.detections.x_px, truth.x_mean_px[tr.frame], atol=0.15)
    np.testing.assert_allclose(ft.detections.y_px, truth.y_mean_px[tr.frame], atol=0.15)
    cal = ft.calibration
    assert cal.method == "markers"
    assert cal.scale == pytest.approx(1 / PX_PER_M, rel=1e-3)
    assert tr.meta["scale_relative_uncertainty"] == cal.scale_relative_uncertainty
    assert 0 < cal.scale_relative_uncertainty < 2e-3
    assert tr.meta["calibration_method"] == "markers" and tr.meta["marker_ids"] == "0 1"
    assert ft.marker_frame == 0 and tr.meta["marker_frame"] == 0 and ft.preview_frame == 0
    assert ft.fps == FPS and tr.meta["fps"] == FPS
    assert ft.source == str(clip["video"]) == tr.meta["footage"]
    assert tr.sigma is None
    assert tr.meta["frames_detected"] == len(tr)
    assert tr.meta["frames_missing"] == len(ft.detections.missing)
    text = ft.summary()
    assert text.startswith(f"{clip['video']}: {len(tr)} frame(s) with the specimen")
    assert "calibration: markers (markers 0, 1)" in text and "reprojection RMS" in text


def test_layout_as_mapping_or_file(clip, tmp_path):
    """closed-form/independent: with the markers' layout (their true world positions) the
    plane homography puts the track in the layout's world frame: the parabola itself; a
    layout file (markers found in frame 5) gives the same track as the mapping."""
    ft = track_footage(clip["video"], fps=FPS, markers=0.05, marker_layout=LAYOUT)
    assert ft.calibration.method == "homography"
    xt, yt = trajectory(ft.track.t)
    assert np.max(np.abs(ft.track.x - xt)) < 3e-4
    assert np.max(np.abs(ft.track.y - yt)) < 3e-4
    layout = tmp_path / "wall.csv"
    layout.write_text("id,x_m,y_m\n0,0.0,-0.10\n1,0.35,-0.10\n")
    ft2 = track_footage(clip["video"], fps=FPS, markers=0.05, marker_layout=layout,
                        marker_frame=5)  # fmt: skip
    assert ft2.marker_frame == 5 and ft2.track.meta["marker_frame"] == 5
    # another frame's noise moves the corners a little: 0.1 mm = 0.08 px
    np.testing.assert_allclose(ft2.track.x, ft.track.x, atol=1e-4)
    np.testing.assert_allclose(ft2.track.y, ft.track.y, atol=1e-4)
    assert np.max(np.abs(ft2.track.x - xt)) < 3e-4


def test_scale_and_origin_on_an_image_folder(clip):
    """closed-form/independent: a known scale with the world origin's image point gives
    x = s (u - u0), y = -s (v - v0) of the true centroids, i.e. the parabola; start/stop cut
    the range; the scale's relative uncertainty is the one given (GUM 5.1: the only input);
    the origin may be text or two numbers."""
    ft = track_footage(
        clip["folder"], fps=FPS, scale=1 / PX_PER_M, origin=ORIGIN_PX, start=5, stop=35,
        scale_uncertainty=0.001,
    )  # fmt: skip
    tr = ft.track
    assert tr.frame[0] >= 5 and tr.frame[-1] <= 34 and len(tr) >= 28
    xt, yt = trajectory(tr.frame / FPS)
    assert np.max(np.abs(tr.x - xt)) < 3e-4
    assert np.max(np.abs(tr.y - yt)) < 3e-4
    assert ft.calibration.method == "scale" and ft.marker_frame is None
    assert tr.meta["scale_relative_uncertainty"] == 0.001
    assert ft.preview_frame == int(tr.frame[len(tr) // 2])
    ft2 = track_footage(clip["folder"], fps=FPS, scale=1 / PX_PER_M,
                        origin=f"{ORIGIN_PX[0]},{ORIGIN_PX[1]}", start=5, stop=35)  # fmt: skip
    np.testing.assert_array_equal(ft2.track.x, tr.x)
    np.testing.assert_array_equal(ft2.track.y, tr.y)


def test_rolled_camera_by_scale_and_by_reference(rolled):
    """closed-form/independent: footage from a camera rolled 4° (world -> image built in
    the test from the roll's definition) is put back into the world frame by scale, origin
    and rotation, and by two reference points 0.3 m apart along the true horizontal (their
    image points from the same homography; origin: the first point, the world origin)."""
    ft = track_footage(rolled, fps=FPS, scale=1 / PX_PER_M, origin=ROLL_ORIGIN_PX,
                       rotation=ROLL)  # fmt: skip
    xt, yt = trajectory(ft.track.t)
    assert np.max(np.hypot(ft.track.x - xt, ft.track.y - yt)) < 3e-4
    h = _rolled_w2i()
    p2 = h @ np.array([0.3, 0.0, 1.0])
    ref = (ROLL_ORIGIN_PX[0], ROLL_ORIGIN_PX[1], p2[0] / p2[2], p2[1] / p2[2], 0.3)
    fr = track_footage(rolled, fps=FPS, reference=ref, rotation=ROLL)
    assert fr.calibration.method == "reference"
    assert fr.calibration.scale == pytest.approx(1 / PX_PER_M, rel=1e-12)
    assert np.max(np.hypot(fr.track.x - xt, fr.track.y - yt)) < 3e-4
    text = ",".join(repr(float(v)) for v in ref)
    fr2 = track_footage(rolled, fps=FPS, reference=text, rotation=ROLL)
    np.testing.assert_array_equal(fr2.track.x, fr.track.x)


def test_csv_text_loads_back_exactly(markers_track, tmp_path):
    """regression: the CSV text loads with read_track into the same t, x, y (floats written
    with repr) and carries the calibration in its header."""
    text = footage_track_csv_text(markers_track)
    p = tmp_path / "t.csv"
    p.write_text(text, encoding="utf-8")
    back = read_track(p)
    tr = markers_track.track
    np.testing.assert_array_equal(back.t, tr.t)
    np.testing.assert_array_equal(back.x, tr.x)
    np.testing.assert_array_equal(back.y, tr.y)
    np.testing.assert_array_equal(back.frame, tr.frame)
    assert back.meta["scale_relative_uncertainty"] == tr.meta["scale_relative_uncertainty"]
    assert back.meta["header"]["calibration_method"] == "markers"
    assert text.splitlines()[0].startswith("# format: fitdrag track; t [s]; x, y [m]")
    assert "frame,t,x,y,x_px,y_px,quality,sigma_px" in text
    assert frame_ranges([3, 4, 5, 7, 9, 10]) == "3-5 7 9-10"


def test_footage_sha256(clip):
    """closed-form/independent: a video's digest is hashlib's of its bytes; a folder's is
    hashlib's of the sha256sum-style listing of its frame files, sorted by name."""
    video = clip["video"]
    assert footage_sha256(video) == hashlib.sha256(video.read_bytes()).hexdigest()
    files = sorted(clip["folder"].glob("*.png"), key=lambda f: f.name)
    listing = "".join(f"{hashlib.sha256(f.read_bytes()).hexdigest()}  {f.name}\n" for f in files)
    assert footage_sha256(clip["folder"]) == hashlib.sha256(listing.encode()).hexdigest()
    with pytest.raises(FileNotFoundError, match=r"footage .*nope\.avi: no such file or folder"):
        footage_sha256(video.parent / "nope.avi")


@pytest.mark.parametrize(
    "kwargs, message",
    [
        (
            {},
            "calibration: give exactly one of scale (m/px, with origin), reference "
            "(X1,Y1,X2,Y2,METRES) or markers (the markers' side in m); got none.",
        ),
        (
            {"scale": 0.001, "markers": 0.05},
            "or markers (the markers' side in m); got scale and markers.",
        ),  # fmt: skip
        (
            {"markers": 0.05, "origin": "1,2"},
            "--origin/--rotation: they apply to --scale and --reference only; with --markers "
            "the markers set the origin and the horizontal",
        ),
        (
            {"scale": 0.001, "marker_frame": 3},
            "--marker-layout/--marker-frame: they apply to --markers only; drop them or "
            "calibrate with --markers SIZE_M.",
        ),
        (
            {"scale": 0.001, "scale_uncertainty": 1.0},
            "--scale-uncertainty: a relative standard uncertainty must be >= 0 and < 1, got "
            "1.0; e.g. 0.001 for 0.1 %.",
        ),
        (
            {"reference": "10,20,30,1.0"},
            "--reference: expected X1,Y1,X2,Y2,METRES (five numbers separated by commas: two "
            "image points in px and their distance apart in m), got '10,20,30,1.0'",
        ),
        (
            {"scale": 0.001, "origin": "12"},
            "--origin: expected X_PX,Y_PX (two numbers separated by a comma, image pixels, "
            "y down), got '12'; e.g. --origin 12,790.",
        ),
        (
            {"scale": 0.0},
            "scale: must be a finite number > 0 m/px, got 0.0; measure a known length in the "
            "image and divide its metres by its pixels.",
        ),
    ],
)
def test_bad_options(clip, kwargs, message):
    """regression: exact messages for bad or conflicting options."""
    kw = {"fps": FPS, **kwargs}
    with pytest.raises(ValueError, match=re.escape(message)):
        track_footage(clip["video"], **kw)


def test_bad_footage_and_files(clip, rolled, tmp_path):
    """regression: missing footage, missing lens file, a lens for another image size, the
    container's playback rate without fps, no markers in the footage, too few frames."""
    from fitdrag.video.lens import LensModel

    with pytest.raises(FileNotFoundError, match=r"footage .*nope\.avi: no such file or folder; "
                       r"check the path and the file name\."):  # fmt: skip
        track_footage(tmp_path / "nope.avi", fps=FPS, scale=0.001)
    lens = tmp_path / "lens.json"
    with pytest.raises(FileNotFoundError, match=re.escape(
            f"lens file: {str(lens)!r} does not exist; create one with 'fitdrag calibrate-lens "
            f"IMAGES... --board 9x6 --square M -o lens.json'.")):  # fmt: skip
        track_footage(clip["video"], fps=FPS, scale=0.001, lens=lens)
    k = np.array([[900.0, 0.0, 319.5], [0.0, 900.0, 239.5], [0.0, 0.0, 1.0]])
    other = LensModel(k, np.zeros(5), (640, 480), 0.05)
    with pytest.raises(ValueError, match=re.escape(
            "--lens: the lens model is for 640x480 px images but the footage is 400x300 px; "
            "calibrate the lens at the footage's resolution.")):  # fmt: skip
        track_footage(clip["video"], fps=FPS, scale=0.001, lens=other)
    with pytest.raises(ValueError, match=r"fps: .*throw\.avi says 30 frames/s, a playback rate"):
        track_footage(clip["video"], scale=0.001)
    with pytest.raises(ValueError, match=re.escape(
            "markers: no DICT_4X4_50 marker found in the image (320x240 px); check the "
            "dictionary")) as info:  # fmt: skip
        track_footage(rolled, fps=FPS, markers=0.05)
    assert f"(looked in frame 0 of {rolled}; choose another with --marker-frame)" in str(info.value)
    # 7 frames in the range, the specimen in all of them: one short of MIN_POINTS
    with pytest.raises(ValueError, match=rf"frames: the specimen was found in 7 frame\(s\), "
                       rf"at least {MIN_POINTS} are needed for a track; check the frame range "
                       r"\(--start/--stop\)") as info:  # fmt: skip
        track_footage(clip["folder"], fps=FPS, scale=0.001, start=10, stop=17)
    # the reasons by frame range, then what to change (issue 12)
    assert "Frames without it: " in str(info.value) and "To change: " in str(info.value)
    with pytest.raises(ValueError, match=re.escape(
            "--region: expected X0,Y0,X1,Y1 (four numbers separated by commas: the upper-left "
            "and lower-right corners of the region in image pixels), got '1,2,3'; e.g. "
            "--region 200,0,1280,800.")):  # fmt: skip
        track_footage(clip["folder"], fps=FPS, scale=0.001, region="1,2,3")


def test_other_moving_object_in_summary_and_csv_header(tmp_path):
    """closed-form/independent: a second ball crossing the specimen's flight in a straight
    line (composited with numpy from two renderers on one scene): the summary and the CSV
    header say another moving object was seen, where and when, and the CSV's rows are all
    on the specimen."""
    from fitdrag.video.detect import reasons_by_range
    from fitdrag.video.synthetic import FlightRenderer

    def flight(t):
        t = np.asarray(t, dtype=float)
        return -12.0 + 2900.0 * t, 70.0 - 400.0 * t + 9000.0 * t * t

    def line(t):
        t = np.asarray(t, dtype=float)
        return 330.0 - 2600.0 * t, 30.1 + 800.0 * t

    opts = dict(shape=(240, 320), radius_px=7.0, exposure=1e-3, noise_sigma=0.0, seed=21)
    ra, rb = FlightRenderer(flight, 60, FPS, **opts), FlightRenderer(line, 60, FPS, **opts)
    frames = []
    rng = np.random.default_rng(4)
    for k in range(60):
        img = (ra.clean_frame(k) + rb.clean_frame(k) - rb.scene) * ra.truth.gain[k]
        img = img + rng.normal(0.0, 3.0, img.shape)
        frames.append(np.clip(np.rint(img), 0, 255).astype(np.uint8))
    write_frames(np.stack(frames), tmp_path / "f", ext="png")
    ft = track_footage(tmp_path / "f", fps=FPS, scale=0.001)
    other = ft.detections.other_movers[0]
    assert f"  {other.describe()} (not tracked)" in ft.summary().splitlines()
    text = footage_track_csv_text(ft)
    assert f"# other_moving_objects: {other.describe()}" in text.splitlines()
    d = np.hypot(ft.detections.x_px - ra.truth.x_px[ft.detections.frame],
                 ft.detections.y_px - ra.truth.y_px[ft.detections.frame])  # fmt: skip
    assert d.max() < 0.5
    assert reasons_by_range({3: "a", 4: "a", 9: "b"}) == "frames 3-4 (2): a; frame 9: b"


def test_track_csv_outline_columns_round_trip(tmp_path):
    """regression: the outline columns written by track_csv_text (diameter, its
    uncertainty, rows spanned; blank where the model fit failed) are read back by read_track
    into meta['per_point'], aligned with the points, blanks as NaN without dropping rows."""
    from fitdrag.tracks.csv_file import read_track
    from fitdrag.video.tracking import track_csv_text

    n = 10
    frame = np.arange(n)
    t = frame / 1000.0
    x = 0.01 * frame
    y = 1.0 - 0.002 * frame
    diam = 16.0 + 0.01 * frame
    diam[3] = np.nan
    ud = np.full(n, 0.03)
    ud[3] = np.nan
    r0 = 50 + frame
    r1 = 66 + frame
    r0[3] = r1[3] = -1
    text = track_csv_text(
        {"fps": 1000.0}, frame, t, x, y, 10.0 * frame, 20.0 * frame, np.full(n, 0.9),
        np.full(n, 0.02), diam, ud, r0, r1,
    )  # fmt: skip
    header = [ln for ln in text.splitlines() if not ln.startswith("#")][0]
    assert header.endswith("sigma_px,outline_diameter_px,u_outline_diameter_px,row_first,row_last")
    p = tmp_path / "track.csv"
    p.write_text(text)
    tr = read_track(p)
    assert len(tr.t) == n
    pp = tr.meta["per_point"]
    np.testing.assert_allclose(pp["outline_diameter_px"], diam, atol=5e-5)
    np.testing.assert_allclose(pp["u_outline_diameter_px"], ud, atol=5e-5)
    assert np.isnan(pp["row_first"][3]) and np.isnan(pp["row_last"][3])
    np.testing.assert_array_equal(np.delete(pp["row_first"], 3), np.delete(r0, 3))


def test_track_csv_without_outline_columns_loads(tmp_path):
    """regression: a track CSV in the earlier layout (no outline columns) still loads, with
    no per_point entry; track_csv_text without outline arrays writes that layout."""
    from fitdrag.tracks.csv_file import read_track
    from fitdrag.video.tracking import track_csv_text

    n = 10
    frame = np.arange(n)
    text = track_csv_text(
        {}, frame, frame / 1000.0, 0.01 * frame, 1.0 - 0.002 * frame, frame, frame,
        np.full(n, 0.9), np.full(n, 0.02),
    )  # fmt: skip
    assert "outline_diameter_px" not in text
    p = tmp_path / "old.csv"
    p.write_text(text)
    tr = read_track(p)
    assert "per_point" not in tr.meta
    np.testing.assert_allclose(tr.x, 0.01 * frame)
