"""The synthetic samples in sample_tracks/: every file loads, every job parses, and each
track is what sample_tracks/README.md says it is (checked against an independent scipy
integration of the stated true parameters, or against the truth of the rendered footage)."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
import reference
from scipy.integrate import solve_ivp

from fitdrag.run.job_file import load_job
from fitdrag.tracks.csv_file import read_track
from fitdrag.tracks.track import file_sha256

SAMPLES = Path(__file__).resolve().parents[1] / "sample_tracks"
CSVS = sorted(p.name for p in SAMPLES.glob("*.csv"))
JOBS = sorted(p.name for p in SAMPLES.glob("*.toml"))

# The true parameters as sample_tracks/README.md states them:
# file -> (mass [kg], diameter [m], Cd, speed [m/s], angle [deg], x0, y0 [m], noise sigma [m])
CONSTANT_CD = {
    "training_ball_throw1.csv": (0.0027, 0.040, 0.47, 9.0, 32.0, 0.0, 0.0, 0.0004),
    "training_ball_throw2.csv": (0.0027, 0.040, 0.47, 8.0, 38.0, 0.0, 0.0, 0.0004),
    "training_ball_throw3.csv": (0.0027, 0.040, 0.47, 10.0, 26.0, 0.0, 0.0, 0.0004),
    "practice_ball_outliers.csv": (0.030, 0.072, 0.52, 11.0, 20.0, 0.0, 1.2, 0.0006),
    "ultralight_ball.csv": (0.002, 0.100, 0.50, 6.0, 35.0, 0.0, 1.0, 0.0005),
}
OUTLIER_ROWS = [66, 80, 90, 95, 158, 183]
# ribbed ball: Cd = 0.55 (Re / 40000)^-0.30; 12 g, 60 mm; launch (0, 1.0 m)
RIBBED = {"ribbed_ball_throw1.csv": (16.0, 12.0), "ribbed_ball_throw2.csv": (8.0, 30.0)}
# two cameras: the README's truth (Cd, out-of-plane angle [deg], right camera's offset [s])
TWO_CAMERA = ("two_camera_left_track.csv", "two_camera_right_track.csv")
TWO_CAMERA_TRUTH = (0.51, 1.2, 0.73e-3)


def test_the_folder_holds_the_documented_files():
    """regression: the samples README lists every file of the folder, and they all exist."""
    text = (SAMPLES / "README.md").read_text(encoding="utf-8")
    for p in SAMPLES.iterdir():
        if p.is_file() and p.name != "README.md":
            assert p.name in text, f"{p.name} is not described in sample_tracks/README.md"
    assert set(CONSTANT_CD) | set(RIBBED) | {"foam_ball_clip_track.csv", *TWO_CAMERA} == set(CSVS)
    assert len(JOBS) == 6
    # a short clip: a few MB at most
    assert (SAMPLES / "foam_ball_clip.avi").stat().st_size < 4_000_000


@pytest.mark.parametrize("name", CSVS)
def test_every_track_loads_and_says_it_is_synthetic(name):
    """regression: each CSV reads as a track; each states it is synthetic (simulated) or comes
    from the synthetic clip."""
    tr = read_track(SAMPLES / name)
    assert len(tr) >= 50
    head = tr.meta["header"]
    assert (
        head.get("synthetic", "").startswith("yes") or head.get("footage") == "foam_ball_clip.avi"
    )


@pytest.mark.parametrize("name", JOBS)
def test_every_job_file_parses(name):
    """regression: each job file is valid and names files that exist in the folder."""
    job = load_job(SAMPLES / name)
    assert job.throws
    for th in job.throws:
        assert th.path.parent == SAMPLES and th.path.exists()
        for v in th.views:
            assert v.track.parent == SAMPLES and v.track.exists() and v.lens.exists()
    assert "fictitious" in job.laboratory.name


def _air(tr):
    return float(tr.meta["header"]["air_density"]), float(tr.meta["header"]["air_viscosity"])


@pytest.mark.parametrize("name", sorted(CONSTANT_CD))
def test_tracks_match_their_stated_truth(name):
    """closed-form/independent: data minus scipy's DOP853 solution of the equation of motion
    (tests/reference.py: Timmerman & van der Weele, Am. J. Phys. 67, 538 (1999), eq. 1 with
    buoyancy and added mass 0.5) for the README's true parameters leaves white noise of the
    stated sigma: RMS within 15 % of sigma per axis (n >= 150 gives a relative standard error
    of about 6 %), apart from the documented outlier rows, which are all beyond 10 sigma."""
    mass, d, cd, v, ang, x0, y0, sigma = CONSTANT_CD[name]
    tr = read_track(SAMPLES / name)
    rho, _ = _air(tr)
    a = math.radians(ang)
    ref = reference.flight(tr.t, (x0, y0, v * math.cos(a), v * math.sin(a)),
                           reference.Body.sphere(mass, d), rho, cd)  # fmt: skip
    rx, ry = tr.x - ref[:, 0], tr.y - ref[:, 1]
    big = np.flatnonzero((np.abs(rx) > 10 * sigma) | (np.abs(ry) > 10 * sigma))
    assert big.tolist() == (OUTLIER_ROWS if "outliers" in name else [])
    keep = np.setdiff1d(np.arange(len(tr)), big)
    for r in (rx[keep], ry[keep]):
        assert 0.85 < np.sqrt(np.mean(r**2)) / sigma < 1.15
        assert abs(np.mean(r)) < 4 * sigma / math.sqrt(r.size)


def _power_law_flight(t, launch, mass, d, rho, mu, g=reference.G0):
    """Reference integration with Cd = 0.55 (Re/40000)^-0.30, written from the equation of
    motion in the forces docstring (buoyancy, added mass 0.5), scipy DOP853."""
    vol, area = math.pi * d**3 / 6, math.pi * d**2 / 4
    m_in = mass + 0.5 * rho * vol
    w = (mass - rho * vol) * g

    def f(_t, s):
        q = math.hypot(s[2], s[3])
        cd = 0.55 * (rho * q * d / mu / 40000.0) ** -0.30
        k = 0.5 * rho * area * cd * q
        return [s[2], s[3], -k * s[2] / m_in, (-w - k * s[3]) / m_in]

    sol = solve_ivp(f, (t[0], t[-1]), launch, method="DOP853", t_eval=t, rtol=1e-12, atol=1e-12)
    return sol.y.T


@pytest.mark.parametrize("name", sorted(RIBBED))
def test_ribbed_ball_follows_its_power_law(name):
    """closed-form/independent: the ribbed-ball tracks minus a scipy DOP853 integration of the
    README's power law leave white noise of sigma 0.5 mm (RMS within 15 %)."""
    v, ang = RIBBED[name]
    tr = read_track(SAMPLES / name)
    rho, mu = _air(tr)
    a = math.radians(ang)
    ref = _power_law_flight(tr.t, [0.0, 1.0, v * math.cos(a), v * math.sin(a)], 0.012, 0.060,
                            rho, mu)  # fmt: skip
    for r in (tr.x - ref[:, 0], tr.y - ref[:, 1]):
        assert 0.85 < np.sqrt(np.mean(r**2)) / 0.0005 < 1.15


def test_clip_matches_its_truth_file():
    """regression: the clip is the one its truth file describes (SHA-256), and the track made
    from it lies within 2 mm RMS of the true world positions (the calibration's own error
    budget is about 0.1 % of a 2 m field plus a tenth of a pixel, 5 mm/px)."""
    truth = json.loads((SAMPLES / "foam_ball_clip_truth.json").read_text())
    assert truth["synthetic"] is True
    assert file_sha256(SAMPLES / "foam_ball_clip.avi") == truth["sha256"]
    tr = read_track(SAMPLES / "foam_ball_clip_track.csv")
    f = tr.frame
    ex = tr.x - np.asarray(truth["x"])[f]
    ey = tr.y - np.asarray(truth["y"])[f]
    assert np.sqrt(np.mean(ex**2 + ey**2)) < 0.002


def test_training_ball_job_recovers_the_true_cd():
    """closed-form/independent: the three simulated TB-40 throws (true Cd 0.47, checked against
    scipy above) give, through the job machinery of 'fitdrag run', a Cd within its expanded
    uncertainty of 0.47, and a pass against 0.47 ± 0.03 (guarded acceptance)."""
    from fitdrag.run.pipeline import measure

    meas = measure(load_job(SAMPLES / "training_ball.toml"))
    assert abs(meas.fit.cd - 0.47) <= meas.budget.expanded_uncertainty
    assert meas.verdict.decision == "pass"
    assert len(meas.tracks) == 3


def test_two_camera_tracks_state_the_true_cameras():
    """closed-form/independent: each two-camera track file's header states the camera that
    took the footage; its pose (solved by PnP from the rendered markers) agrees with the true
    pose the footage was rendered with (two_camera_truth.json) within its stated covariance:
    the Mahalanobis distance squared of (rotation vector, translation) stays below the 99.9 %
    quantile of chi-squared with 6 degrees of freedom (22.46; JCGM 101:2008 / any table of
    chi-squared). The readout time is the data sheet's 1 ms ± 0.05 ms."""
    from scipy.stats import chi2

    from fitdrag.geometry.footage_view import camera_from_header

    truth = json.loads((SAMPLES / "two_camera_truth.json").read_text())
    assert truth["synthetic"] is True
    for name, cam_truth in zip(TWO_CAMERA, truth["cameras"]):
        head = read_track(SAMPLES / name).meta["camera"]
        cam = camera_from_header(head)
        err = np.r_[cam.rvec - cam_truth["rvec_rad"], cam.translation - cam_truth["translation_m"]]
        cov = np.asarray(head.pose_covariance, float).reshape(6, 6)
        assert err @ np.linalg.solve(cov, err) < chi2.ppf(0.999, 6)
        assert cam.fx == pytest.approx(cam_truth["focal_length"])
        assert head.readout_time == pytest.approx(1e-3)
        assert head.readout_time_uncertainty == pytest.approx(5e-5)


def test_two_camera_job_recovers_the_true_flight():
    """closed-form/independent: the two-camera job (track files with their cameras), run
    through the machinery of 'fitdrag run', measures the throw in 3-D: the true Cd (0.51, of
    the simulated flight) lies within Cd ± U; the flight's angle out of the board's plane
    (1.2°) is recovered within 0.05° and the right camera's unstated time offset (0.73 ms)
    within a tenth of a frame; U/Cd stays below 2 % (the track files carry how their
    poses move with the focal length); the decision against 0.50 ± 0.05 is a pass."""
    from fitdrag.run.pipeline import measure

    cd, angle, offset = TWO_CAMERA_TRUTH
    truth = json.loads((SAMPLES / "two_camera_truth.json").read_text())
    assert (truth["true_cd"], truth["launch"]["out_of_plane_deg"],
            truth["cameras"][1]["time_offset"]) == TWO_CAMERA_TRUTH  # fmt: skip
    meas = measure(load_job(SAMPLES / "two_camera.toml"))
    res = meas.content.result
    assert abs(res.drag_coefficient - cd) <= res.expanded_uncertainty
    assert res.expanded_uncertainty / res.drag_coefficient < 0.02  # two cameras: 1.5 %
    r = meas.fit.throws[0].result
    assert abs(r.out_of_plane_angle - angle) < 0.05
    assert r.views[1].offset_estimated
    assert abs(r.views[1].time_offset - offset) * 500.0 < 0.1
    assert meas.content.method.geometry.startswith("Measured in 3-D (2 cameras")
    assert meas.verdict.decision == "pass"


def test_sample_lot_matches_its_truth():
    """closed-form/independent: the lot file loads; its five specimens' throws follow the
    independent DOP853 integration (tests/reference.py) of the truth JSON's Cd, mass and
    diameter to within 5 noise sigmas, and the README's truth table states them."""
    from fitdrag.physics.air import Air
    from fitdrag.run.lot_file import load_lot

    folder = SAMPLES / "lot"
    lot = load_lot(folder / "training_ball_lot.toml")
    truth = json.loads((folder / "training_ball_lot_truth.json").read_text())
    assert truth["synthetic"] is True
    assert [s.id for s in lot.specimens] == sorted(truth["specimens"])
    rho = Air.from_conditions(21.0, 100800.0, 45.0).density
    readme = (SAMPLES / "README.md").read_text(encoding="utf-8")
    for sp in lot.specimens:
        t = truth["specimens"][sp.id]
        assert f"| {sp.id} | {t['cd']:.4f} | {1e3 * t['mass']:.4f} |" in readme
        for th, (v, a) in zip(sp.job.throws, ((9.0, 32.0), (8.0, 38.0))):
            tr = read_track(th.path)
            ar = math.radians(a)
            xy = reference.flight(tr.t, (0.0, 0.0, v * math.cos(ar), v * math.sin(ar)),
                                  reference.Body.sphere(t["mass"], t["diameter"]), rho,
                                  t["cd"], gravity=9.80665)  # fmt: skip
            assert np.hypot(tr.x - xy[:, 0], tr.y - xy[:, 1]).max() < 5 * 0.0003 * math.sqrt(2)


def test_check_standard_history_is_flagged_at_the_shift():
    """closed-form/independent: limits from the first 10 results of the sample history (mean,
    mean moving range / 1.128, computed here from history.csv); the first result beyond
    3 sigma is the first shifted one (2026-06-23), and the chart of the records database
    flags it and nothing earlier by test 1."""
    from fitdrag.run.check_standard import chart_from_records

    rows = (SAMPLES / "check_standard" / "history.csv").read_text().splitlines()[1:]
    x = np.array([float(r.split(",")[2]) for r in rows])
    c, s = x[:10].mean(), np.mean(np.abs(np.diff(x[:10]))) / 1.128
    beyond = [i for i, v in enumerate(x) if abs(v - c) > 3 * s]
    assert rows[beyond[0]].startswith("2026-06-23")
    sc = chart_from_records(SAMPLES / "check_standard" / "records.sqlite", "REF-40-A")
    assert list(sc.chart.values) == list(x)
    first1 = min(q.index for q in sc.chart.signals if q.rule == "1")
    assert first1 == beyond[0] and sc.chart.latest_out_of_control
