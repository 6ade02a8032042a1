"""Benchmark: from rendered perspective footage to Cd in 3-D through the command line.

The issue's case, synthetic: a 65 mm, 24 g foam ball (C_d 0.50) thrown at 9 m/s, 10 deg up,
1.5 deg out of the board plane, 0.1 m in front of it (``simulate_3d``); two cameras 3.4 m
away, 40 deg apart (+-20 deg off the board normal), 1280 x 800, f = 1500 px with barrel
distortion, 1 ms rolling-shutter readout, 500 frames/s, 200 frames, 1 ms exposure, camera 2
late by 0.37 frame; ten ArUco markers of 12 cm on the board (``render_views``).  For each
seed (scene, noise):

1. each camera's footage is written as PNG frames and tracked by ``fitdrag track`` with the
   markers, their layout, the lens file and ``--readout-time 1ms
   --readout-time-uncertainty 0.05ms`` (the camera goes into the CSV header);
2. ``fitdrag fit left.csv right.csv`` fits the throw in 3-D from the two files (time offset
   estimated);
3. each file alone is fitted too (one camera, depth from the apparent diameter).

Printed: the pose error of each camera against the true one (centre [mm], and the pose's
chi-square against its stated covariance, 6 degrees of freedom), and for the two-camera and
each one-camera fit Cd, U, (Cd - 0.50) / U, the out-of-plane angle and the time offset.
``--show`` prints the commands' own output for the first seed; ``--keep DIR`` keeps the files.

Run:  python -P benchmarks/bench_footage_views.py [--seeds 3] [--frames 200] [--show]
"""

from __future__ import annotations

import argparse
import contextlib
import io
import math
import os
import shutil
import tempfile
import time
from pathlib import Path

import numpy as np

from fitdrag.cli import main as cli
from fitdrag.fit.track_views import fit_track_views
from fitdrag.geometry.camera import Camera, rotation_from_vector
from fitdrag.geometry.pose import MarkerBoard
from fitdrag.geometry.render_views import ViewRenderer, camera_looking_at
from fitdrag.physics.air import Air
from fitdrag.physics.flight3d import Launch3D, simulate_3d
from fitdrag.physics.forces import Conditions
from fitdrag.physics.specimen import Sphere
from fitdrag.tracks.csv_file import read_track
from fitdrag.video.footage_files import write_frames
from fitdrag.video.lens import LensModel

FPS = 500.0
CD = 0.5
BALL = Sphere(0.024, 0.065)
AIR = Air(1.2)
DIST = (-0.08, 0.05, 0.0005, -0.0003, 0.0)
BOARD = MarkerBoard(0.12, {i: (0.1 + 0.45 * (i % 5), 0.1 + 0.9 * (i // 5)) for i in range(10)})


def same_rotation(rvec, near):
    """The rotation vector of the same rotation as ``rvec`` nearest to ``near`` (a rotation
    by theta about n is also one by theta - 2 pi about n)."""
    theta = float(np.linalg.norm(rvec))
    if theta == 0:
        return rvec
    other = rvec * (1.0 - 2.0 * math.pi / theta)
    return rvec if np.linalg.norm(rvec - near) <= np.linalg.norm(other - near) else other


def _run(args: list[str], folder: Path) -> tuple[int, str]:
    """Run a fitdrag command in ``folder``; its exit code and what it printed."""
    out = io.StringIO()
    here = os.getcwd()
    try:
        os.chdir(folder)
        with contextlib.redirect_stdout(out):
            rc = cli(args)
    finally:
        os.chdir(here)
    return rc, out.getvalue()


def one_seed(seed: int, n: int, folder: Path, show: bool) -> None:
    t = np.linspace(-0.002, (n + 2) / FPS, 4 * n)
    launch = Launch3D.from_speed_angles(9.0, 10.0, 1.5, x0=0.0, y0=0.7, z0=0.1)  # [deg]
    flight = simulate_3d(t, launch, BALL, Conditions(AIR), drag_params=CD, t0=t[0])
    base = Camera(1500.0, 1500.0, 640.0, 400.0, DIST, (1280, 800), readout_time=1e-3)
    LensModel(base.camera_matrix, np.array(DIST), (1280, 800), 0.1).save(folder / "lens.json")
    (folder / "board.csv").write_text(
        "id,x_m,y_m\n" + "".join(f"{k},{x!r},{y!r}\n" for k, (x, y) in BOARD.positions.items())
    )
    target = np.array([1.0, 0.75, 0.0])
    offset = 0.37 / FPS
    files, cams = [], []
    t0 = time.perf_counter()
    for i, (name, ang) in enumerate((("left", -20.0), ("right", 20.0))):
        a = math.radians(ang)
        cam = camera_looking_at(base, target + 3.4 * np.array([math.sin(a), 0, math.cos(a)]),
                                target)  # fmt: skip
        r = ViewRenderer(flight, cam, n, FPS, radius=BALL.diameter / 2, board=BOARD,
                         exposure=1e-3, time_offset=offset * i, seed=seed * 10 + i)  # fmt: skip
        write_frames(r.iter_frames(), folder / name, ext="png")
        args = ["track", name, "--fps", "500", "--markers", "0.12", "--marker-layout",
                "board.csv", "--lens", "lens.json", "--readout-time", "1ms",
                "--readout-time-uncertainty", "0.05ms", "-o", f"{name}.csv"]  # fmt: skip
        rc, text = _run(args + ["--no-progress", "--force"], folder)
        if rc != 0:
            print(f"seed {seed}: fitdrag track {name} failed (exit {rc})")
            return
        if show and seed == 0:
            print(f"$ fitdrag {' '.join(args)}\n{text}")
        files.append(folder / f"{name}.csv")
        cams.append(cam)
    t1 = time.perf_counter()
    tracks = [read_track(f) for f in files]
    for name, tr, cam in zip(("left", "right"), tracks, cams):
        h = tr.meta["camera"]
        err = np.concatenate([h.rotation_vector - same_rotation(cam.rvec, h.rotation_vector),
                              h.translation - cam.translation])  # fmt: skip
        chi2 = float(err @ np.linalg.solve(h.pose_covariance, err))
        centre = -rotation_from_vector(h.rotation_vector).T @ h.translation
        print(f"seed {seed} {name}: {len(tr)} frames tracked; pose centre error "
              f"{1e3 * np.linalg.norm(centre - cam.centre):.2f} mm, chi-square {chi2:.2f} "
              f"(6 dof)")  # fmt: skip
    args = ["fit", "left.csv", "right.csv", "--mass", "24g", "--diameter", "65mm",
            "--air-density", "1.2"]  # fmt: skip
    rc, text = _run(args, folder)
    if show and seed == 0:
        print(f"$ fitdrag {' '.join(args)}\n{text}")
    t2 = time.perf_counter()
    fits = [("two cameras", fit_track_views(tracks, BALL, AIR))]
    fits += [(f"{name} alone", fit_track_views([tr], BALL, AIR))
             for name, tr in zip(("left", "right"), tracks)]  # fmt: skip
    for label, r in fits:
        off = ""
        if len(r.views) > 1:
            off = (f", offset {(r.views[1].time_offset - offset) * FPS:+.3f} frame from the "
                   f"truth")  # fmt: skip
        print(f"seed {seed} {label}: Cd {r.cd:.4f}, U {r.expanded_uncertainty:.4f} "
              f"({100 * r.expanded_uncertainty / r.cd:.2f} %), (Cd - 0.50) / U "
              f"{(r.cd - CD) / r.expanded_uncertainty:+.2f}, out of plane "
              f"{r.out_of_plane_angle:.3f} +- {r.out_of_plane_angle_uncertainty:.3f} deg "
              f"(truth 1.5){off}{'' if r.success else ' FAILED: ' + r.message}")  # fmt: skip
    print(f"seed {seed}: render + track {t1 - t0:.1f} s, fit (command) {t2 - t1:.1f} s")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=3)
    ap.add_argument("--frames", type=int, default=200)
    ap.add_argument("--show", action="store_true", help="print the commands' output")
    ap.add_argument("--keep", type=Path, default=None, help="keep the files in this folder")
    args = ap.parse_args()
    for seed in range(args.seeds):
        folder = (args.keep / f"seed{seed}" if args.keep else Path(tempfile.mkdtemp())).resolve()
        folder.mkdir(parents=True, exist_ok=True)
        try:
            one_seed(seed, args.frames, folder, args.show)
        finally:
            if args.keep is None:
                shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
