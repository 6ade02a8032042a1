"""Regenerate every synthetic sample in sample_tracks/ (fixed seeds, so the same files).

Run from anywhere:  python sample_tracks/make_samples.py [--force]

Everything made here is synthetic: simulated flights of invented specimens of an invented
laboratory (see README.md in this folder for each file's true parameters).  Tracks that a
plain ``fitdrag simulate`` command can make are made by that very command (the SIMULATE
table below is what README.md quotes); the track with outliers and the Reynolds-dependent
throws need a few lines of library code, below.  The two-camera throw is rendered as footage
(fitdrag.run.scenario_3d) into a temporary folder, tracked there by ``fitdrag track --lens
... --readout-time ...``, and only the track files and lens files are kept (the footage is
about 50 MB per camera).
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import sys
import tempfile
from datetime import UTC
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent

AIR_TB = ["--temperature", "21", "--pressure", "100800", "--humidity", "45"]

#: file -> arguments of `fitdrag simulate` (without -o).
SIMULATE = {
    "training_ball_throw1.csv": [
        "--mass", "0.0027", "--diameter", "0.040", "--cd", "0.47", "--speed", "9",
        "--angle", "32", "--fps", "500", "--frames", "300", "--noise", "0.0004",
        "--seed", "20261201", *AIR_TB,
    ],
    "training_ball_throw2.csv": [
        "--mass", "0.0027", "--diameter", "0.040", "--cd", "0.47", "--speed", "8",
        "--angle", "38", "--fps", "500", "--frames", "300", "--noise", "0.0004",
        "--seed", "20261202", *AIR_TB,
    ],
    "training_ball_throw3.csv": [
        "--mass", "0.0027", "--diameter", "0.040", "--cd", "0.47", "--speed", "10",
        "--angle", "26", "--fps", "500", "--frames", "280", "--noise", "0.0004",
        "--seed", "20261203", *AIR_TB,
    ],
    "ultralight_ball.csv": [
        "--mass", "0.002", "--diameter", "0.100", "--cd", "0.50", "--speed", "6",
        "--angle", "35", "--y0", "1.0", "--fps", "250", "--frames", "150",
        "--noise", "0.0005", "--seed", "20261206",
        "--temperature", "22", "--pressure", "101000", "--humidity", "40",
    ],
    # the clean track that practice_ball_outliers.csv starts from (not kept)
    "practice_ball_outliers.csv": [
        "--mass", "0.030", "--diameter", "0.072", "--cd", "0.52", "--speed", "11",
        "--angle", "20", "--y0", "1.2", "--fps", "400", "--frames", "200",
        "--noise", "0.0006", "--seed", "20261204",
        "--temperature", "19.5", "--pressure", "99800", "--humidity", "60",
    ],
}  # fmt: skip

#: Outliers of practice_ball_outliers.csv: seed of their draw and how many.
OUTLIER_SEED = 20261205
OUTLIERS = 6

#: Ribbed ball: Cd(Re) = CD_REF (Re / RE_REF)^EXPONENT, two throws.
RIBBED = {
    "mass": 0.012,
    "diameter": 0.060,
    "cd_ref": 0.55,
    "exponent": -0.30,
    "re_ref": 40000.0,
    "air": (20.0, 100500.0, 50.0),
    "fps": 400.0,
    "frames": 160,
    "noise": 0.0005,
    "throws": {
        "ribbed_ball_throw1.csv": {"speed": 16.0, "angle": 12.0, "y0": 1.0, "seed": 20261207},
        "ribbed_ball_throw2.csv": {"speed": 8.0, "angle": 30.0, "y0": 1.0, "seed": 20261208},
    },
}

#: The footage clip: the planar scene of fitdrag.run.planar_footage (the demo's specimen,
#: air and site, flying in the markers' plane) made smaller.
CLIP = "foam_ball_clip.avi"
CLIP_FRAMES = 80
CLIP_SCENE = {
    "width_px": 480,
    "height_px": 300,
    "metres_per_px": 0.005,
    "origin_px": (30.0, 270.0),
    "marker_side": 0.16,
    "markers": {0: (0.0, 0.0), 1: (1.95, 0.0), 2: (0.0, 1.08), 3: (1.95, 1.08)},
    "noise_sigma": 2.0,
    "jpeg_quality": 80,
}
CLIP_TRACK = "foam_ball_clip_track.csv"
#: `fitdrag track` arguments for the clip.
TRACK_ARGS = ["--fps", "500", "--markers", "0.16", "--scale-uncertainty", "0.001"]


def _cli(args: list[str]) -> None:
    from fitdrag.cli import main

    code = main(args)
    if code:
        raise SystemExit(f"fitdrag {' '.join(args)} failed with exit code {code}")


def make_simulated(force: bool) -> None:
    for name, args in SIMULATE.items():
        _cli(["simulate", *args, "-o", str(HERE / name), *(["--force"] if force else [])])


def add_outliers() -> list[dict]:
    """Replace OUTLIERS rows of the practice-ball track by gross tracker errors."""
    from fitdrag.tracks.csv_file import read_track, write_track
    from fitdrag.tracks.track import Track

    p = HERE / "practice_ball_outliers.csv"
    tr = read_track(p)
    rng = np.random.default_rng(OUTLIER_SEED)
    n = len(tr)
    rows = np.sort(rng.choice(np.arange(10, n - 10), size=OUTLIERS, replace=False))
    x, y = tr.x.copy(), tr.y.copy()
    done = []
    for r in rows:
        dx, dy = rng.uniform(0.015, 0.040, 2) * rng.choice([-1.0, 1.0], 2)
        x[r] += dx
        y[r] += dy
        done.append({"row": int(r), "t": float(tr.t[r]), "dx": float(dx), "dy": float(dy)})
    meta = dict(tr.meta.get("header", {}))
    for k in ("format", "written_by"):
        meta.pop(k, None)
    meta["outlier_rows"] = " ".join(str(d["row"]) for d in done)
    meta["outlier_seed"] = OUTLIER_SEED
    write_track(Track(tr.t, x, y, meta=meta), p, force=True)
    return done


def make_ribbed(force: bool) -> None:
    from fitdrag.physics.air import Air
    from fitdrag.physics.forces import Conditions
    from fitdrag.physics.simulate import Launch, simulate
    from fitdrag.physics.specimen import Sphere
    from fitdrag.tracks.csv_file import write_track
    from fitdrag.tracks.track import Track

    rb = RIBBED
    air = Air.from_conditions(*rb["air"])
    cond = Conditions(air=air)
    sphere = Sphere(rb["mass"], rb["diameter"])
    t = np.arange(rb["frames"]) / rb["fps"]
    for name, th in rb["throws"].items():
        launch = Launch.from_speed_angle(th["speed"], th["angle"], 0.0, th["y0"])
        f = simulate(t, launch, sphere, cond, model="power-law",
                     drag_params=(rb["cd_ref"], rb["exponent"], rb["re_ref"]))  # fmt: skip
        rng = np.random.default_rng(th["seed"])
        x = f.x + rng.normal(0.0, rb["noise"], t.size)
        y = f.y + rng.normal(0.0, rb["noise"], t.size)
        meta = {
            "synthetic": "yes",
            "true_drag_model": "power-law",
            "true_cd_ref": rb["cd_ref"],
            "true_exponent": rb["exponent"],
            "true_re_ref": rb["re_ref"],
            "true_speed": th["speed"],
            "true_angle": th["angle"],
            "noise": rb["noise"],
            "seed": th["seed"],
            "air_density": air.density,
            "air_viscosity": air.viscosity,
            "gravity": cond.gravity,
        }
        write_track(Track(t, x, y, meta=meta), HERE / name, force=force)


def make_clip(force: bool) -> None:
    """Render the clip and track it with `fitdrag track`."""
    from fitdrag.run.planar_footage import make_planar_footage

    truth = make_planar_footage(HERE / CLIP, frames=CLIP_FRAMES, scene=CLIP_SCENE,
                                overwrite=force)  # fmt: skip
    (HERE / "foam_ball_clip_truth.json").write_text(json.dumps(truth, indent=1) + "\n")
    cwd = os.getcwd()
    os.chdir(HERE)  # relative names in the track's header
    try:
        _cli(["track", CLIP, *TRACK_ARGS, "-o", CLIP_TRACK, "--no-progress",
              *(["--force"] if force else [])])  # fmt: skip
    finally:
        os.chdir(cwd)
    _label_synthetic(HERE / CLIP_TRACK)


#: The two-camera throw: a 65 mm foam ball 1.2° out of the board's plane and 5 cm in front of
#: it, seen by two cameras 40° apart with a 1 ms rolling shutter, the second one 0.73 ms late
#: (not stated in the job: the fit estimates it).  Air and site as in the job file.
TWO_CAMERA = {
    "cd": 0.51,
    "mass": 0.024,
    "diameter": 0.065,
    "air": (20.0, 100200.0, 55.0),  # degC, Pa, % RH
    "site": (51.5, 60.0),  # latitude [deg], height [m]
    "speed": 8.0,
    "elevation": 30.0,
    "out_of_plane": 1.2,
    "start": (-0.05, 0.30, 0.05),
    "frames": 200,
    "fps": 500.0,
    "image_size": (1280, 800),
    "seed": 20261209,
    "cameras": (
        {"name": "two_camera_left", "yaw": -22.0, "distance": 3.4, "focal_length": 1500.0,
         "readout_time": 1.0e-3, "readout_time_uncertainty": 0.05e-3, "time_offset": 0.0},
        {"name": "two_camera_right", "yaw": 18.0, "distance": 3.6, "focal_length": 1500.0,
         "readout_time": 1.0e-3, "readout_time_uncertainty": 0.05e-3, "time_offset": 0.73e-3},
    ),
}  # fmt: skip


def two_camera_scenario():
    """The two-camera throw as a fitdrag.run.scenario_3d.Scenario3D."""
    from fitdrag.physics.air import Air, local_gravity
    from fitdrag.run.scenario_3d import CameraPlacement, Scenario3D

    tc = TWO_CAMERA
    air = Air.from_conditions(*tc["air"])
    return Scenario3D(
        cameras=[CameraPlacement(**c) for c in tc["cameras"]], cd=tc["cd"], mass=tc["mass"],
        diameter=tc["diameter"], air_density=air.density, viscosity=air.viscosity,
        gravity=float(local_gravity(*tc["site"])), speed=tc["speed"],
        elevation=tc["elevation"], out_of_plane=tc["out_of_plane"], start=tc["start"],
        frames=tc["frames"], fps=tc["fps"], image_size=tc["image_size"], seed=tc["seed"],
    )  # fmt: skip


def two_camera_track_args(camera: dict) -> list[str]:
    """`fitdrag track` arguments (run in the footage's folder) for one camera's footage."""
    n = camera["name"]
    return [
        "track", f"{n}.avi", "--fps", "500", "--markers", "0.1",
        "--marker-layout", "board_layout.csv", "--lens", f"{n}_lens.json",
        "--scale-uncertainty", "0.001", "--readout-time", "1ms",
        "--readout-time-uncertainty", "0.05ms", "-o", f"{n}_track.csv", "--no-progress",
    ]  # fmt: skip


def make_two_camera(force: bool) -> None:
    """Render the two cameras' footage to a temporary folder, track each with `fitdrag track
    --lens`, keep the track and lens files and a truth file."""
    from fitdrag.run.scenario_3d import T_LAUNCH, write_scenario

    sc = two_camera_scenario()
    names = [c["name"] for c in TWO_CAMERA["cameras"]]
    keep = [f"{n}_track.csv" for n in names] + [f"{n}_lens.json" for n in names]
    there = [k for k in keep if (HERE / k).exists()]
    if there and not force:
        raise SystemExit(f"{HERE / there[0]}: exists; pass --force to overwrite it.")
    with tempfile.TemporaryDirectory(prefix="fitdrag-two-camera-") as tmp:
        files = write_scenario(sc, tmp)
        cwd = os.getcwd()
        os.chdir(tmp)  # the track files' headers name the footage and lens without a folder
        try:
            for cam in TWO_CAMERA["cameras"]:
                _cli(two_camera_track_args(cam))
        finally:
            os.chdir(cwd)
        for k in keep:
            shutil.copyfile(Path(tmp) / k, HERE / k)
        cams = [json.loads(p.read_text()) for p in files.truth]
    for n in names:
        _label_synthetic(HERE / f"{n}_track.csv")
    tc = TWO_CAMERA
    truth = {
        "synthetic": True,
        "note": "Truth of the two-camera sample: a simulated 3-D flight rendered as footage "
        "by sample_tracks/make_samples.py (fitdrag.run.scenario_3d); no ball was filmed.",
        "true_cd": tc["cd"],
        "drag_model": "constant",
        "specimen": {"mass": tc["mass"], "diameter": tc["diameter"]},
        "air_density": sc.air_density,
        "air_viscosity": sc.viscosity,
        "gravity": sc.gravity,
        "launch": {"time_s": T_LAUNCH, "speed_m_s": tc["speed"],
                   "elevation_deg": tc["elevation"], "out_of_plane_deg": tc["out_of_plane"],
                   "position_m": list(tc["start"])},
        "fps": tc["fps"],
        "frames": tc["frames"],
        "seed": tc["seed"],
        "cameras": [
            {**c, "rvec_rad": v["camera"]["rvec_rad"],
             "translation_m": v["camera"]["translation_m"], "centre_m": v["camera"]["centre_m"]}
            for c, v in zip(tc["cameras"], cams)
        ],
        "marker_side_m": sc.marker_side,
        "markers_lower_left_m": {str(k): list(v) for k, v in sc.markers.items()},
    }  # fmt: skip
    (HERE / "two_camera_truth.json").write_text(json.dumps(truth, indent=1) + "\n")


SYNTHETIC_LINE = "# synthetic: yes (tracked from rendered footage; see sample_tracks/README.md)\n"


def _label_synthetic(path) -> None:
    """Add a `# synthetic: yes` header line to a track CSV made from rendered footage."""
    lines = path.read_text(encoding="utf-8").splitlines(keepends=True)
    if SYNTHETIC_LINE not in lines:
        lines.insert(1, SYNTHETIC_LINE)
        path.write_text("".join(lines), encoding="utf-8")


# ------------------------------------------------------------------------------- job files

_LAB = """\
[laboratory]
name = "Northmoor Sports Equipment Test Laboratory (fictitious, synthetic sample)"
address = "Unit 4, 17 Invented Way, Sampleton SA1 0XX (fictitious address)"

[test]
customer = "Brightfield Training Goods Ltd (fictitious)"
operator = "J. Example"
approved_by = "R. Sample"
date = 2026-07-15
"""

_OUT = """
[output]
directory = "certificates"        # relative to this file: sample_tracks/certificates/
number_prefix = "SAMPLE"
"""


def _job(title: str, body: str) -> str:
    return (
        f"# {title}\n"
        "# SYNTHETIC sample (sample_tracks/README.md): invented laboratory, customer and\n"
        "# specimen; simulated tracks.  Run:  fitdrag run sample_tracks/<this file>\n\n"
        + _LAB
        + body
        + _OUT
    )


def job_files() -> dict[str, str]:
    """Text of each sample job file."""
    return {
        "training_ball.toml": _job("Three throws of one 40 mm training ball (TB-40).", """\
notes = "Three throws by hand in still air (synthetic)."

[specimen]
id = "TB-40-0007"
description = "Training ball, 40 mm, smooth plastic shell (synthetic sample)"
mass = "2.70 g"
mass_uncertainty = "0.01 g"
diameter = "40.00 mm"
diameter_uncertainty = "0.05 mm"

[air]
temperature = 21.0
temperature_uncertainty = 0.3
pressure = 100800
pressure_uncertainty = 50
relative_humidity = 45
relative_humidity_uncertainty = 3
air_speed_uncertainty = 0.02       # m/s, room air along the flight (anemometer)

[site]
gravity = 9.80665                 # the tracks were simulated with standard gravity
gravity_uncertainty = 0.0005

[camera]
fps = 500
fps_uncertainty = 0.005
scale_relative_uncertainty = 0.001
distance = 3.0                    # m, camera to the flight plane (tape measure)
distance_uncertainty = 0.05
out_of_plane_uncertainty = 0.5    # deg, hand throws: the flight's angle to the image plane

[[throws]]
track = "training_ball_throw1.csv"
label = "throw 1"

[[throws]]
track = "training_ball_throw2.csv"
label = "throw 2"

[[throws]]
track = "training_ball_throw3.csv"
label = "throw 3"

[specification]
drag_coefficient = 0.47
tolerance = 0.03
decision_rule = "guarded"
reference = "product data sheet TB-40 (fictitious)"

[uncertainty]
monte_carlo = 0
"""),
        "practice_ball_outliers.toml": _job("A 72 mm practice ball; the track has 6 gross "
                                            "tracker errors (PB-72).", """\
notes = "One throw; the tracker jumped to a wrong blob in six frames (synthetic)."

[specimen]
id = "PB-72-0112"
description = "Practice ball, 72 mm, textured foam (synthetic sample)"
mass = 0.030
mass_uncertainty = 0.00002
diameter = 0.072
diameter_uncertainty = 0.0001

[air]
temperature = 19.5
temperature_uncertainty = 0.3
pressure = 99800
pressure_uncertainty = 50
relative_humidity = 60
relative_humidity_uncertainty = 3
air_speed_uncertainty = 0.02       # m/s, room air along the flight (anemometer)

[site]
gravity = 9.80665
gravity_uncertainty = 0.0005

[camera]
fps = 400
fps_uncertainty = 0.004
scale_relative_uncertainty = 0.001
distance = 3.0                    # m, camera to the flight plane (tape measure)
distance_uncertainty = 0.05
out_of_plane_uncertainty = 0.5    # deg, hand throw: the flight's angle to the image plane

[[throws]]
track = "practice_ball_outliers.csv"

[specification]
drag_coefficient = 0.52
tolerance = 0.04
decision_rule = "simple"
reference = "customer order PB-72 (fictitious)"

[fit]
robust = true                     # rejects the six gross errors
"""),
        "ultralight_ball.toml": _job("A 100 mm ball of 2 g: buoyancy carries about a third "
                                     "of its weight (UL-100).", """\
notes = "One gentle throw (synthetic)."

[specimen]
id = "UL-100-0003"
description = "Ultralight practice ball, 100 mm, 2 g, thin hollow shell (synthetic sample)"
mass = "2.000 g"
mass_uncertainty = "0.002 g"
diameter = "100.0 mm"
diameter_uncertainty = "0.1 mm"

[air]
temperature = 22.0
temperature_uncertainty = 0.3
pressure = 101000
pressure_uncertainty = 50
relative_humidity = 40
relative_humidity_uncertainty = 3
air_speed_uncertainty = 0.02       # m/s, room air along the flight (anemometer)

[site]
gravity = 9.80665
gravity_uncertainty = 0.0005

[camera]
fps = 250
fps_uncertainty = 0.0025
scale_relative_uncertainty = 0.001
distance = 2.5                    # m, camera to the flight plane (tape measure)
distance_uncertainty = 0.05
out_of_plane_uncertainty = 0.5    # deg, gentle hand throw: the flight's angle to the image plane

[[throws]]
track = "ultralight_ball.csv"

[specification]
drag_coefficient = 0.50
tolerance = 0.05
decision_rule = "guarded"
reference = "product data sheet UL-100 (fictitious)"
"""),
        "ribbed_ball.toml": _job("Two throws of a 60 mm ribbed ball whose Cd falls with "
                                 "the Reynolds number (RB-60).", """\
notes = "A fast and a slow throw, to cover a range of Reynolds numbers (synthetic)."

[specimen]
id = "RB-60-0021"
description = "Ribbed ball, 60 mm, 12 g (synthetic sample)"
mass = 0.012
mass_uncertainty = 0.00001
diameter = 0.060
diameter_uncertainty = 0.00005

[air]
temperature = 20.0
temperature_uncertainty = 0.3
pressure = 100500
pressure_uncertainty = 50
relative_humidity = 50
relative_humidity_uncertainty = 3
air_speed_uncertainty = 0.02       # m/s, room air along the flight (anemometer)

[site]
gravity = 9.80665
gravity_uncertainty = 0.0005

[camera]
fps = 400
fps_uncertainty = 0.004
scale_relative_uncertainty = 0.001
distance = 4.0                    # m, camera to the flight plane (tape measure)
distance_uncertainty = 0.05
out_of_plane_uncertainty = 0.5    # deg, hand throws, wider field: the flight's angle to the image plane

[[throws]]
track = "ribbed_ball_throw1.csv"
label = "fast throw"

[[throws]]
track = "ribbed_ball_throw2.csv"
label = "slow throw"

# no [specification]: a characterisation, no conformity decision

[fit]
model = "power-law"               # Cd = cd_ref (Re / Re_ref)^exponent
"""),
        "foam_ball_clip.toml": _job("The 65 mm foam training ball of the demo, filmed in "
                                    "the clip foam_ball_clip.avi (FB-65).", f"""\
notes = "One throw filmed at 500 frames/s in front of four ArUco markers (synthetic)."

[specimen]
id = "BTG-FB65-LOT2607-S03"
description = "Foam training ball, 65 mm (synthetic sample: simulated, not a real ball)"
mass = 0.0240
mass_uncertainty = 0.00002
diameter = 0.0650
diameter_uncertainty = 0.00008

[air]
temperature = 21.5
temperature_uncertainty = 0.2
pressure = 100900
pressure_uncertainty = 30
relative_humidity = 48
relative_humidity_uncertainty = 3
air_speed_uncertainty = 0.02       # m/s, room air along the flight (anemometer)

[site]
latitude = 51.5
height = 60

[camera]
fps = 500                         # the capture rate (the file claims 30, a playback rate)
fps_uncertainty = 0.005
# the length scale and its uncertainty come from the markers in the footage

[[throws]]
footage = "{CLIP}"   # fitdrag run tracks it, as `fitdrag track` does
markers = 0.16                    # m, side of the ArUco markers' black square
scale_uncertainty = 0.001         # relative standard uncertainty of the marker side

[specification]
drag_coefficient = 0.50
tolerance = 0.05
decision_rule = "guarded"
reference = "Brightfield drawing FB65 rev. C, clause 4.2 (fictitious)"
"""),
    }  # fmt: skip


def two_camera_job() -> str:
    """The two-camera sample's job file."""
    return _job(
        "One throw of a 65 mm foam training ball seen by two cameras 40° apart, "
        "measured in 3-D (FB-65).",
        """\
notes = "One hand throw, about 1 degree out of the board's plane; two unsynchronised cameras with a rolling shutter (synthetic)."

[specimen]
id = "BTG-FB65-LOT2607-S04"
description = "Foam training ball, 65 mm (synthetic sample: simulated, not a real ball)"
mass = 0.0240
mass_uncertainty = 0.00002
diameter = 0.0650
diameter_uncertainty = 0.00008

[air]
temperature = 20.0
temperature_uncertainty = 0.2
pressure = 100200
pressure_uncertainty = 30
relative_humidity = 55
relative_humidity_uncertainty = 3
air_speed_uncertainty = 0.02       # m/s, room air along the flight (anemometer)

[site]
latitude = 51.5
height = 60

[camera]
fps = 500                         # shared by the two cameras
fps_uncertainty = 0.005

[[throws]]
label = "throw 1"

# each view: the track file written by `fitdrag track --lens ... --readout-time ...` (its
# header states the camera: intrinsics, pose from the markers with its covariance, readout)
# and the lens file (for the uncertainty of the focal length)
[[throws.views]]
label = "left"
track = "two_camera_left_track.csv"
lens = "two_camera_left_lens.json"

[[throws.views]]
label = "right"
track = "two_camera_right_track.csv"
lens = "two_camera_right_lens.json"
# no time_offset: the cameras are not synchronised; the fit estimates it

[specification]
drag_coefficient = 0.50
tolerance = 0.05
decision_rule = "guarded"
reference = "Brightfield drawing FB65 rev. C, clause 4.2 (fictitious)"
""",
    )


#: The synthetic lot in lot/: five training balls with a true spread of Cd, two throws each
#: (fitdrag.run.lot_scene; the truth in lot/training_ball_lot_truth.json).
LOT_SCENE = {"specimens": 5, "throws": 2, "cd_mean": 0.47, "cd_spread": 0.012,
             "seed": 20261217}  # fmt: skip


def make_lot(force: bool) -> None:
    from fitdrag.run.lot_scene import LotScene, write_lot

    folder = HERE / "lot"
    if folder.exists() and any(folder.iterdir()) and not force:
        raise SystemExit(f"{folder}: exists; pass --force to overwrite it.")
    folder.mkdir(exist_ok=True)
    out = write_lot(folder, LotScene(**LOT_SCENE), output="../certificates")
    print(f"wrote the lot {out.lot_file} (true Cd {out.true_cd})")


#: The check standard REF-40-A measured once a day: 30 results drawn from N(0.470, 0.002²),
#: the last 8 shifted by +0.008 (4 sigma: the set-up drifted; synthetic).
CHECK_STANDARD = {"id": "REF-40-A", "days": 30, "centre": 0.470, "sigma": 0.002,
                  "shift_from": 22, "shift": 0.008, "U": 0.006, "seed": 20261218}  # fmt: skip


def make_check_standard(force: bool) -> None:
    """The check standard's history as records (no certificate files: a records database of
    synthetic results) and as CSV."""
    from datetime import datetime, timedelta

    from fitdrag.run.records import Records

    cs = CHECK_STANDARD
    folder = HERE / "check_standard"
    folder.mkdir(exist_ok=True)
    db_path = folder / "records.sqlite"
    if db_path.exists():
        if not force:
            raise SystemExit(f"{db_path}: exists; pass --force to overwrite it.")
        db_path.unlink()
    rng = np.random.default_rng(cs["seed"])
    db = Records(db_path)
    start = datetime(2026, 6, 1, 9, 0, tzinfo=UTC)
    rows = ["date,number,drag_coefficient,expanded_uncertainty"]
    for i in range(cs["days"]):
        cd = cs["centre"] + cs["sigma"] * rng.standard_normal()
        cd += cs["shift"] if i >= cs["shift_from"] else 0.0
        cd = round(float(cd), 5)
        rec = db.issue(
            result={"synthetic": True, "note": "synthetic check-standard history (no "
                    "certificate files)", "drag_coefficient": cd},
            input_hashes={}, job_text=None, job_path=None, prefix="REF",
            issued_at=start + timedelta(days=i),
            summary={"customer": "internal check (synthetic)", "specimen_id": cs["id"],
                     "drag_coefficient": cd, "expanded_uncertainty": cs["U"],
                     "coverage_factor": 2.0},
        )  # fmt: skip
        rows.append(f"{rec.issued_at[:10]},{rec.number},{cd!r},{cs['U']!r}")
    (folder / "history.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    print(f"wrote {db_path} ({cs['days']} results of {cs['id']})")


#: What --only may name.
PARTS = ("simulated", "ribbed", "clip", "two-camera", "jobs", "lot", "check-standard")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description="Regenerate the synthetic samples in this folder.")
    ap.add_argument("--force", action="store_true", help="overwrite the existing files")
    ap.add_argument("--only", choices=PARTS, action="append",
                    help="make only this part (repeatable; default: everything)")  # fmt: skip
    args = ap.parse_args(argv)
    parts = set(args.only or PARTS)
    if "simulated" in parts:
        make_simulated(args.force)
        for d in add_outliers():
            print(f"outlier at row {d['row']} (t = {d['t']:.4f} s): dx = "
                  f"{1e3 * d['dx']:+.1f} mm, dy = {1e3 * d['dy']:+.1f} mm")  # fmt: skip
    if "ribbed" in parts:
        make_ribbed(args.force)
    if "clip" in parts:
        make_clip(args.force)
    if "two-camera" in parts:
        make_two_camera(args.force)
    if "lot" in parts:
        make_lot(args.force)
    if "check-standard" in parts:
        make_check_standard(args.force)
    jobs = {**job_files(), "two_camera.toml": two_camera_job()} if "jobs" in parts else {}
    for name, text in jobs.items():
        p = HERE / name
        if p.exists() and not args.force:
            raise SystemExit(f"{p}: exists; pass --force to overwrite it.")
        p.write_text(text, encoding="utf-8")
        print(f"wrote {p}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
