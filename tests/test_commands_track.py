"""Tests of the ``fitdrag track`` command: footage -> calibrated track CSV.

Footage is synthetic (fitdrag.video.synthetic renders a ball along a trajectory we give in
world metres through a known world -> image homography, with ArUco markers of known size
painted into the scene).  Independent references: the closed-form trajectory itself
(x = x0 + vx t, y = y0 + vy t - g t^2 / 2) and the homography it was drawn through, so the
track's world positions can be checked against truth that does not come from the code
under test.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

from fitdrag.cli import main
from fitdrag.tracks import read_track
from fitdrag.video.footage_files import write_frames, write_video
from fitdrag.video.synthetic import MarkerPlacement, render_flight
from fitdrag.video.tracking import parse_origin, parse_reference

FPS = 500.0
PX_PER_M = 800.0
ORIGIN_PX = (40.0, 260.0)  # image point of the world origin
H_W2I = np.array([[PX_PER_M, 0.0, ORIGIN_PX[0]], [0.0, -PX_PER_M, ORIGIN_PX[1]], [0, 0, 1.0]])
MARKERS = [MarkerPlacement(0, 0.0, -0.12, 0.05), MarkerPlacement(1, 0.40, -0.12, 0.05)]
N_FRAMES = 40


def trajectory(t):
    """Vacuum parabola [m] (closed form), world y up."""
    t = np.asarray(t, dtype=float)
    return 0.05 + 3.0 * t, 0.05 + 2.0 * t - 0.5 * 9.80665 * t**2


@pytest.fixture(scope="module")
def footage(tmp_path_factory):
    d = tmp_path_factory.mktemp("footage")
    flight = render_flight(
        trajectory,
        N_FRAMES,
        FPS,
        shape=(400, 480),
        radius_px=7.0,
        homography=H_W2I,
        trajectory_in_world=True,
        markers=MARKERS,
        seed=11,
    )
    video = write_video(flight.frames, d / "throw.avi", 30.0)  # playback rate in the file
    folder = d / "frames"
    write_frames(flight.frames, folder, ext="png")
    return {"video": video, "folder": folder, "truth": flight.truth}


def _run(args, capsys):
    rc = main(args)
    out, err = capsys.readouterr()
    return rc, out, err


def test_markers_track_matches_the_true_flight(footage, tmp_path, capsys):
    """closed-form/independent: world positions from the marker calibration agree with the
    closed-form trajectory (origin: marker 0's lower-left corner at world (0, -0.12) m) to
    0.3 mm; t = frame / fps; the CSV loads with read_track."""
    out = tmp_path / "track.csv"
    png = tmp_path / "preview.png"
    rc, text, err = _run(
        ["track", str(footage["video"]), "--fps", str(FPS), "--markers", "0.05",
         "-o", str(out), "--preview", str(png)],
        capsys,
    )  # fmt: skip
    assert rc == 0, err
    tr = read_track(out)
    assert len(tr) >= N_FRAMES - 2
    np.testing.assert_allclose(tr.t, tr.frame / FPS, rtol=0, atol=1e-15)
    xt, yt = trajectory(tr.t)
    # the markers' frame has its origin at marker 0's lower-left corner: world (0, -0.12)
    assert np.max(np.abs(tr.x - xt)) < 3e-4
    assert np.max(np.abs(tr.y - (yt + 0.12))) < 3e-4
    meta = tr.meta["header"]
    assert meta["calibration_method"] == "markers"
    assert float(meta["scale_m_per_px"]) == pytest.approx(1 / PX_PER_M, rel=1e-3)
    u = float(tr.meta["scale_relative_uncertainty"])
    assert 0 < u < 2e-3
    assert meta["marker_ids"] == "0 1"
    # pixel columns are the image coordinates (y down) of the same points
    import csv

    with open(out, encoding="utf-8") as fh:
        rows = list(csv.DictReader(line for line in fh if not line.startswith("#")))
    assert list(rows[0]) == [
        "frame", "t", "x", "y", "x_px", "y_px", "quality", "sigma_px",
        "outline_diameter_px", "u_outline_diameter_px", "row_first", "row_last",
    ]  # fmt: skip
    u_px = np.array([float(r["x_px"]) for r in rows])
    v_px = np.array([float(r["y_px"]) for r in rows])
    truth = footage["truth"]
    np.testing.assert_allclose(u_px, truth.x_mean_px[tr.frame], atol=0.15)
    np.testing.assert_allclose(v_px, truth.y_mean_px[tr.frame], atol=0.15)
    assert png.stat().st_size > 10_000
    assert "calibration: markers (markers 0, 1)" in text
    assert "reprojection RMS" in text
    assert f"wrote {out}" in text


def test_scale_origin_on_an_image_folder_and_frame_range(footage, tmp_path, capsys):
    """closed-form/independent: --scale with --origin gives x = s (u - u0), y = -s (v - v0)
    of the true image centroids, i.e. the true world positions; --start/--stop cut the
    range."""
    out = tmp_path / "t.csv"
    rc, _, err = _run(
        ["track", str(footage["folder"]), "--fps", "500", "--scale", str(1 / PX_PER_M),
         "--origin", f"{ORIGIN_PX[0]},{ORIGIN_PX[1]}", "--start", "5", "--stop", "35",
         "-o", str(out)],
        capsys,
    )  # fmt: skip
    assert rc == 0, err
    tr = read_track(out)
    assert tr.frame[0] >= 5 and tr.frame[-1] <= 34
    xt, yt = trajectory(tr.frame / FPS)
    assert np.max(np.abs(tr.x - xt)) < 3e-4
    assert np.max(np.abs(tr.y - yt)) < 3e-4
    assert tr.meta["header"]["calibration_method"] == "scale"


def test_layout_homography_from_the_command_line(footage, tmp_path, capsys):
    """closed-form/independent: with a layout file the world frame is the layout's."""
    layout = tmp_path / "wall.csv"
    layout.write_text("id,x_m,y_m\n0,0.0,-0.12\n1,0.40,-0.12\n")
    out = tmp_path / "h.csv"
    rc, text, err = _run(
        ["track", str(footage["video"]), "--fps", "500", "--markers", "0.05",
         "--marker-layout", str(layout), "-o", str(out), "--no-progress"],
        capsys,
    )  # fmt: skip
    assert rc == 0, err
    tr = read_track(out)
    xt, yt = trajectory(tr.t)
    assert np.max(np.abs(tr.x - xt)) < 3e-4
    assert np.max(np.abs(tr.y - yt)) < 3e-4
    assert "calibration: homography" in text


def test_playback_rate_needs_fps(footage, tmp_path, capsys):
    """regression: the container's 30 frames/s is refused without --fps; no CSV written."""
    out = tmp_path / "x.csv"
    rc, _, err = _run(["track", str(footage["video"]), "--scale", "0.001", "-o", str(out)], capsys)
    assert rc == 2
    assert "a playback rate" in err
    assert not out.exists()


def test_existing_output_is_kept_without_force(footage, tmp_path, capsys):
    """regression: never overwrite without --force."""
    out = tmp_path / "keep.csv"
    out.write_text("precious\n")
    rc, _, err = _run(
        ["track", str(footage["video"]), "--fps", "500", "--scale", "0.001", "-o", str(out)],
        capsys,
    )
    assert rc == 2
    assert f"-o/--output: {out} exists; pass --force to overwrite it." in err
    assert out.read_text() == "precious\n"


def test_missing_and_unreadable_footage_leave_nothing(tmp_path, capsys):
    """regression: missing file / unreadable video -> exit 2, no CSV, no temporary file."""
    out = tmp_path / "out.csv"
    rc, _, err = _run(
        ["track", str(tmp_path / "nope.avi"), "--fps", "500", "--scale", "0.001",
         "-o", str(out)],
        capsys,
    )  # fmt: skip
    assert rc == 2
    assert "nope.avi: no such file or folder" in err
    junk = tmp_path / "junk.avi"
    junk.write_bytes(b"this is not a video" * 100)
    rc, _, err = _run(
        ["track", str(junk), "--fps", "500", "--scale", "0.001", "-o", str(out)], capsys
    )
    assert rc == 2
    assert "junk.avi" in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["junk.avi"]


def test_no_markers_in_footage(tmp_path, capsys):
    """regression: footage without markers and --markers: clear error, no CSV."""
    flight = render_flight(trajectory, 12, FPS, shape=(200, 320), homography=H_W2I,
                           trajectory_in_world=True, seed=2)  # fmt: skip
    write_frames(flight.frames, tmp_path / "f", ext="png")
    out = tmp_path / "o.csv"
    rc, _, err = _run(
        ["track", str(tmp_path / "f"), "--fps", "500", "--markers", "0.05", "-o", str(out)],
        capsys,
    )
    assert rc == 2
    assert (
        "markers: no DICT_4X4_50 marker found in the image (320x200 px); check the dictionary"
        in err
    )
    assert "(looked in frame 0 of" in err
    assert not out.exists()


def test_bad_reference_text(footage, tmp_path, capsys):
    """regression: exact message for a malformed --reference."""
    msg = (
        "--reference: expected X1,Y1,X2,Y2,METRES (five numbers separated by commas: two "
        "image points in px and their distance apart in m), got '10,20,30,1.0'; e.g. "
        "--reference 102.5,640,1180,655.5,1.000."
    )
    with pytest.raises(ValueError, match=re.escape(msg)):
        parse_reference("10,20,30,1.0")
    out = tmp_path / "r.csv"
    rc, _, err = _run(
        ["track", str(footage["video"]), "--fps", "500", "--reference", "10,20,30,1.0",
         "-o", str(out)],
        capsys,
    )  # fmt: skip
    assert rc == 2
    assert msg in err
    assert not out.exists()
    assert parse_reference("1,2,3,4,0.5") == (1.0, 2.0, 3.0, 4.0, 0.5)
    assert parse_origin("12,790") == (12.0, 790.0)
    with pytest.raises(ValueError, match=re.escape("--origin: expected X_PX,Y_PX")):
        parse_origin("12")


def test_reference_calibration_end_to_end(footage, tmp_path, capsys):
    """closed-form/independent: two image points 0.4 m apart (true homography) give the
    true scale; the origin is set with --origin at the world origin's image point."""
    (u1, v1), (u2, v2) = ORIGIN_PX, (ORIGIN_PX[0] + 0.4 * PX_PER_M, ORIGIN_PX[1])
    out = tmp_path / "ref.csv"
    rc, _, err = _run(
        ["track", str(footage["video"]), "--fps", "500",
         "--reference", f"{u1},{v1},{u2},{v2},0.4", "-o", str(out)],
        capsys,
    )  # fmt: skip
    assert rc == 0, err
    tr = read_track(out)
    xt, yt = trajectory(tr.t)
    assert np.max(np.hypot(tr.x - xt, tr.y - yt)) < 3e-4
    # 0.5 px picking uncertainty on each point, 320 px apart
    expected_u = np.sqrt(2) * 0.5 / 320.0
    assert float(tr.meta["scale_relative_uncertainty"]) == pytest.approx(expected_u)


def test_zero_scale_and_missing_lens(footage, tmp_path, capsys):
    """regression: exact messages for --scale 0 and a missing lens file."""
    out = tmp_path / "z.csv"
    rc, _, err = _run(
        ["track", str(footage["video"]), "--fps", "500", "--scale", "0", "-o", str(out)], capsys
    )
    assert rc == 2
    assert (
        "scale: must be a finite number > 0 m/px, got 0.0; measure a known length in the "
        "image and divide its metres by its pixels." in err
    )
    lens = tmp_path / "lens.json"
    rc, _, err = _run(
        ["track", str(footage["video"]), "--fps", "500", "--scale", "0.001", "--lens",
         str(lens), "-o", str(out)],
        capsys,
    )  # fmt: skip
    assert rc == 2
    assert (
        f"lens file: {str(lens)!r} does not exist; create one with 'fitdrag calibrate-lens "
        f"IMAGES... --board 9x6 --square M -o lens.json'." in err
    )
    assert not out.exists()


def test_origin_with_markers_is_refused(footage, tmp_path, capsys):
    """regression: --origin only goes with --scale/--reference."""
    rc, _, err = _run(
        ["track", str(footage["video"]), "--fps", "500", "--markers", "0.05", "--origin",
         "1,2", "-o", str(tmp_path / "m.csv")],
        capsys,
    )  # fmt: skip
    assert rc == 2
    assert "--origin/--rotation: they apply to --scale and --reference only" in err


def test_help_has_an_example(capsys):
    """regression: the help text shows examples."""
    with pytest.raises(SystemExit):
        main(["track", "--help"])
    out = capsys.readouterr().out
    assert "Example" in out and "fitdrag track throw1.avi --fps 1000 --markers 0.050" in out


def test_lens_file_is_applied_and_checked(footage, tmp_path, capsys):
    """closed-form/independent: with a lens file without distortion (the undistortion is the
    identity) the track still finds the generator's exact mid-exposure centres (oracle:
    fitdrag.video.synthetic) within 0.15 px, RMS 0.07 px, as the track without it does,
    though the tracker now fits the outline this camera would give a sphere (an ellipse a
    few per cent long off the axis, under a lamp it estimates) to the footage's shaded
    circles; the lens is recorded in the header with the depth diameters' line; a lens file
    for another image size is refused."""
    from fitdrag.video.lens import LensModel

    k = np.array([[900.0, 0.0, 239.5], [0.0, 900.0, 199.5], [0.0, 0.0, 1.0]])
    LensModel(k, np.zeros(5), (480, 400), 0.05).save(tmp_path / "lens.json")
    LensModel(k, np.zeros(5), (640, 480), 0.05).save(tmp_path / "other.json")
    base = ["track", str(footage["video"]), "--fps", "500", "--scale", str(1 / PX_PER_M),
            "--origin", f"{ORIGIN_PX[0]},{ORIGIN_PX[1]}"]  # fmt: skip
    rc, _, err = _run(base + ["-o", str(tmp_path / "a.csv")], capsys)
    assert rc == 0, err
    rc, text, err = _run(
        base + ["--lens", str(tmp_path / "lens.json"), "-o", str(tmp_path / "b.csv")], capsys
    )
    assert rc == 0, err
    a, b = read_track(tmp_path / "a.csv"), read_track(tmp_path / "b.csv")
    truth = footage["truth"]
    for tr in (a, b):
        k = tr.frame.astype(int)
        ex = tr.x * PX_PER_M + ORIGIN_PX[0] - truth.x_mean_px[k]  # world y up, image y down
        ey = ORIGIN_PX[1] - tr.y * PX_PER_M - truth.y_mean_px[k]
        assert np.hypot(ex, ey).max() < 0.15
        assert math.sqrt(np.mean(ex**2 + ey**2)) < 0.07
    assert b.meta["header"]["lens_file"] == str(tmp_path / "lens.json")
    assert b.meta["header"]["outline_measure"] == "depth"
    assert "outline_measure" not in a.meta["header"]
    assert "lens: " in text
    rc, _, err = _run(
        base + ["--lens", str(tmp_path / "other.json"), "-o", str(tmp_path / "c.csv")], capsys
    )
    assert rc == 2
    assert (
        "--lens: the lens model is for 640x480 px images but the footage is 480x400 px; "
        "calibrate the lens at the footage's resolution." in err
    )
    assert not (tmp_path / "c.csv").exists()


def test_camera_in_the_header_with_markers_layout_and_lens(footage, tmp_path, capsys):
    """closed-form/independent: the footage was drawn through H = 800 px/m (square on, no
    roll); with a lens of f = 900 px that is a camera looking square at the board from
    Z = f / 800 = 1.125 m (H = K [r1 r2 t], Hartley and Zisserman sec. 8.1.1) whose
    principal point sees world ((cx - 40) / 800, (260 - cy) / 800).  --lens with the markers
    and their layout writes that camera in the header: the lens's matrix, the pose (centre
    within 3 mm), the readout time and its uncertainty as given (units parsed); the summary
    says where the camera stands.  Readout options without markers, layout and lens, or a
    negative readout time, are refused before any tracking."""
    from fitdrag.geometry.camera import rotation_from_vector
    from fitdrag.video.lens import LensModel

    k = np.array([[900.0, 0.0, 239.5], [0.0, 900.0, 199.5], [0.0, 0.0, 1.0]])
    LensModel(k, np.zeros(5), (480, 400), 0.05).save(tmp_path / "lens.json")
    layout = tmp_path / "wall.csv"
    layout.write_text("id,x_m,y_m\n0,0.0,-0.12\n1,0.40,-0.12\n")
    base = ["track", str(footage["video"]), "--fps", "500", "--markers", "0.05",
            "--no-progress", "--marker-layout", str(layout)]  # fmt: skip
    out = tmp_path / "cam.csv"
    rc, text, err = _run(base + ["--lens", str(tmp_path / "lens.json"), "--readout-time",
                                 "1.2ms", "--readout-time-uncertainty", "100us", "-o",
                                 str(out)], capsys)  # fmt: skip
    assert rc == 0, err
    cam = read_track(out).meta["camera"]
    np.testing.assert_array_equal(cam.camera_matrix, k)
    assert cam.image_size == (480, 400) and cam.marker_frame == 0
    assert cam.readout_time == pytest.approx(1.2e-3, rel=1e-12)
    assert cam.readout_time_uncertainty == pytest.approx(1e-4, rel=1e-12)
    centre = -rotation_from_vector(cam.rotation_vector).T @ cam.translation
    expected = [(239.5 - 40.0) / 800.0, (260.0 - 199.5) / 800.0, 900.0 / 800.0]
    assert np.linalg.norm(centre - expected) < 3e-3
    assert cam.pose_covariance.shape == (6, 6) and np.all(np.diag(cam.pose_covariance) > 0)
    assert "camera: pose from 2 marker(s)" in text and "m from the board" in text
    assert "rolling shutter, readout 1.2 ms ± 0.1 ms" in text
    rc, _, err = _run(["track", str(footage["video"]), "--fps", "500", "--markers", "0.05",
                       "--readout-time", "1ms", "-o", str(tmp_path / "x.csv")], capsys)  # fmt: skip
    assert rc == 2 and (
        "--readout-time: it describes the camera, which is measured from --markers with "
        "--marker-layout and --lens; give those too, or leave --readout-time out." in err
    )
    rc, _, err = _run(base + ["--lens", str(tmp_path / "lens.json"), "--readout-time=-1ms",
                              "-o", str(tmp_path / "y.csv")], capsys)  # fmt: skip
    assert rc == 2 and "--readout-time: expected a time >= 0 s, got -0.001 s." in err
    assert not (tmp_path / "x.csv").exists() and not (tmp_path / "y.csv").exists()


def test_folder_of_videos_each_file_a_task(tmp_path, capsys):
    """regression: a folder of video files is tracked file by file (here in this process,
    --workers 0): one CSV per video, identical to tracking that file alone; a file that cannot
    be read is named and the others finish; exit 2."""
    import shutil
    from pathlib import Path

    clip = Path(__file__).resolve().parents[1] / "sample_tracks" / "foam_ball_clip.avi"
    src, out = tmp_path / "day3", tmp_path / "tracks"
    src.mkdir()
    out.mkdir()
    for name in ("a.avi", "b.avi"):
        shutil.copy(clip, src / name)
    (src / "c.avi").write_text("not a video", encoding="utf-8")
    opts = ["--fps", "500", "--markers", "0.16", "--no-progress"]
    rc, text, err = _run(["track", str(src), *opts, "-o", str(out), "--workers", "0"], capsys)
    assert rc == 2
    assert sorted(p.name for p in out.iterdir()) == ["a.csv", "b.csv"]
    assert "2 of 3 file(s) tracked into" in text
    assert err.startswith(f"fitdrag track: file c.avi: footage {src / 'c.avi'}: not a video")
    rc, _, _ = _run(["track", str(src / "a.avi"), *opts, "-o", str(tmp_path / "one.csv")],
                    capsys)  # fmt: skip
    assert rc == 0
    assert read_track(tmp_path / "one.csv").y.tolist() == read_track(out / "a.csv").y.tolist()
    rc, _, err = _run(["track", str(src / "a.avi"), *opts, "-o", str(tmp_path / "x.csv"),
                       "--workers", "2"], capsys)  # fmt: skip
    assert rc == 2
    assert "--scheduler, --workers: only for a folder of video files" in err
