"""Tests of fitdrag.run.measure_views: a job whose throw is measured in 3-D, from each
camera's footage to the certificate.

The footage is rendered by fitdrag.run.scenario_3d (invented lab, synthetic): a flight of
known Cd (0.49, simulate_3d — itself checked against scipy's DOP853 in
tests/test_physics_flight3d.py) 1.5° out of the board plane, seen by two cameras 40° apart
through distorting lenses with a 1 ms rolling shutter, the second 0.37 ms late.
"""

from __future__ import annotations

import math

import pytest

from fitdrag.run.job_file import load_job
from fitdrag.run.pipeline import issue, measure
from fitdrag.run.scenario_3d import CameraPlacement, Scenario3D, job_text, write_scenario

CAMS = [
    CameraPlacement("left", yaw=-20, focal_length=1100, readout_time=1e-3,
                    readout_time_uncertainty=5e-5),
    CameraPlacement("right", yaw=20, focal_length=1100, readout_time=1e-3,
                    readout_time_uncertainty=5e-5, time_offset=0.37e-3),
]  # fmt: skip
SCENARIO = Scenario3D(cameras=CAMS, frames=110, image_size=(960, 600), out_of_plane=1.5)


@pytest.fixture(scope="module")
def rendered(tmp_path_factory):
    folder = tmp_path_factory.mktemp("three_d")
    files = write_scenario(SCENARIO, folder)
    return folder, files


@pytest.fixture(scope="module")
def two_camera(rendered):
    folder, files = rendered
    path = folder / "job.toml"
    path.write_text(job_text(SCENARIO, files), encoding="utf-8")
    job = load_job(path)
    return job, measure(job)


def test_two_cameras_measure_the_tilted_flight(two_camera):
    """closed-form/independent: the true Cd (0.49) lies within Cd ± U, U/Cd <= 2 %; the
    flight's out-of-plane angle (1.5°) is recovered within 0.05° and the second camera's
    unknown offset (0.37 ms) within 0.1 frame — the truth of the simulation, not the fit."""
    job, meas = two_camera
    res = meas.content.result
    assert abs(res.drag_coefficient - SCENARIO.cd) <= res.expanded_uncertainty
    assert res.expanded_uncertainty / res.drag_coefficient <= 0.02
    r = meas.fit.throws[0].result
    assert abs(r.out_of_plane_angle - 1.5) < 0.05
    off = r.views[1]
    assert off.offset_estimated
    assert abs(off.time_offset - 0.37e-3) * SCENARIO.fps < 0.1


def test_two_camera_budget_and_certificate_state_the_geometry(two_camera, tmp_path):
    """regression: the budget carries each camera's pose, focal length and readout (JCGM
    100:2008 5.1.2 by re-fit) and the air movement, the statistical part is the fit's; the
    lift was tested; the certificate's method
    names the cameras, their distance, the measured out-of-plane angle and the camera model;
    both footage files are listed with their SHA-256; the certificate is issued."""
    job, meas = two_camera
    names = [ln.name for ln in meas.budget.lines]
    for n in ("statistical", "mass", "diameter", "air_density", "frame_rate", "length_scale",
              "pose_1_1", "pose_1_2", "focal_length_1", "focal_length_2", "readout_time_1",
              "readout_time_2"):  # fmt: skip
        assert n in names, n
    assert "roll" not in names and "out_of_plane_angle" not in names
    # the flight's physics: the air movement stated in the job (0.02 m/s) is a line; the lift
    # was tested (Wald form) and the certificate says what was done
    assert meas.budget.line("air_speed").standard_uncertainty == 0.02
    assert meas.budget.line("air_speed").sensitivity != 0
    assert meas.content.conditions.air_speed_uncertainty == 0.02
    assert meas.content.flight_physics["lift"]["tested"]
    assert meas.content.method.flight_physics.startswith("Spin (about the board's normal): ")
    geo = meas.content.method.geometry
    assert geo.startswith("Measured in 3-D (2 cameras, time offsets estimated from the data).")
    assert "left (left_lens.json)" in geo and "right (right_lens.json)" in geo
    assert "out of the board plane" in geo and "rolling shutter, readout 1.00 ms" in geo
    foot = meas.content.footage
    assert [f.label for f in foot] == ["throw 1 / left", "throw 1 / right"]
    assert all(len(f.tracking["sha256"]) == 64 for f in foot)
    assert meas.fit.u_cd == pytest.approx(meas.fit.throws[0].result.u_cd)
    rec, _db = issue(meas, records_path=tmp_path / "records.sqlite")
    assert rec.decision == "pass"


def test_one_camera_measures_depth_from_the_outline(rendered):
    """closed-form/independent: the left camera alone (a footage throw with a lens): the
    depth comes from the ball's apparent size; the true Cd lies within Cd ± U."""
    folder, files = rendered
    one = Scenario3D(cameras=CAMS[:1], frames=110, image_size=(960, 600), out_of_plane=1.5)
    path = folder / "one.toml"
    path.write_text(job_text(one, files, number_prefix="ONE"), encoding="utf-8")
    job = load_job(path)
    assert job.throws[0].kind == "footage" and job.measured_in_3d
    meas = measure(job)
    res = meas.content.result
    assert abs(res.drag_coefficient - SCENARIO.cd) <= res.expanded_uncertainty
    assert meas.content.method.geometry.startswith("Measured in 3-D (one camera")
    assert math.isnan(meas.fit.birge_ratio)


def test_footage_without_the_board_names_the_view(rendered, tmp_path):
    """regression: a view whose layout does not match the markers seen is refused with the
    job file, line, throw and view, and the calibration's own reason."""
    folder, files = rendered
    text = job_text(SCENARIO, files, folder=folder)
    bad = tmp_path / "layout.csv"
    bad.write_text("id,x_m,y_m\n40,0.0,0.0\n41,1.0,0.0\n", encoding="utf-8")
    text = text.replace('marker_layout = "board_layout.csv"', f'marker_layout = "{bad}"', 1)
    path = folder / "bad.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ValueError, match=r"^bad\.toml, line \d+: \[\[throws\]\] #1 view 1 "
                                         r"footage: "):  # fmt: skip
        measure(load_job(path))


def test_views_from_track_files(rendered, two_camera):
    """closed-form/independent: the same two cameras given as track files written by
    `fitdrag track --lens --readout-time` (the camera in their headers, with the pose's
    derivative in the focal length): the true Cd lies within Cd ± U, and Cd and U agree
    with the footage job's (same centroids, same cameras, same budget lines)."""
    from fitdrag.cli import main

    folder, files = rendered
    for cam in CAMS:
        code = main(["track", str(folder / f"{cam.name}.avi"), "--fps", "500", "--markers",
                     "0.1", "--marker-layout", str(files.layout), "--lens",
                     str(folder / f"{cam.name}_lens.json"), "--readout-time", "1ms",
                     "--readout-time-uncertainty", "0.05ms", "-o",
                     str(folder / f"{cam.name}.csv"), "--no-progress", "--force"])  # fmt: skip
        assert code == 0
    text = job_text(SCENARIO, files, number_prefix="TRK")
    for cam in CAMS:
        text = text.replace(f'footage = "{cam.name}.avi"', f'track = "{cam.name}.csv"')
    keep = ("markers =", "marker_layout =", "scale_uncertainty =", "readout_time")
    text = "\n".join(ln for ln in text.splitlines() if not ln.startswith(keep)) + "\n"
    path = folder / "tracks.toml"
    path.write_text(text, encoding="utf-8")
    job = load_job(path)
    assert all(v.track is not None for v in job.throws[0].views)
    meas = measure(job)
    res = meas.content.result
    assert abs(res.drag_coefficient - SCENARIO.cd) <= res.expanded_uncertainty
    assert [f.path for f in meas.content.footage] == [str(folder / "left.csv"),
                                                      str(folder / "right.csv")]  # fmt: skip
    # the footage each track's header names is among the input hashes (hashlib's SHA-256)
    import hashlib

    for cam in CAMS:
        avi = (folder / f"{cam.name}.avi").resolve()
        assert meas.hashes[str(avi)] == hashlib.sha256(avi.read_bytes()).hexdigest()
    ref = two_camera[1].content.result
    assert res.drag_coefficient == pytest.approx(
        ref.drag_coefficient, abs=0.1 * ref.statistical_standard_uncertainty
    )
    assert res.expanded_uncertainty == pytest.approx(ref.expanded_uncertainty, rel=0.05)
