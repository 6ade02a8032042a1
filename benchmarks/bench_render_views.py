"""Benchmark: synthetic perspective footage (fitdrag.geometry.render_views), the issue's case.

A 65 mm, 24 g foam ball (C_d 0.50) thrown at 9 m/s, 1.5 deg out of the board plane, 0.1 m in
front of it, simulated by ``simulate_3d``; two cameras 3.4 m away, 40 deg apart (+-20 deg off
the board normal), 1280 x 800, f = 1500 px with barrel distortion, 1 ms rolling-shutter
readout, 500 frames/s, 200 frames, 1 ms exposure, camera 2 late by 0.37 frame; ten ArUco
markers of 12 cm on the board.  Printed per camera:

* set-up time (undistortion map, scene, marker board, truth) and render time per frame
  (noise, flicker and quantisation included);
* the centroid of the ball in noise-free, flat-shaded frames against the truth's centre
  (mean and largest error over all frames where the ball is visible) [px];
* the camera pose recovered from frame 0 by ``detect_markers`` and
  ``camera_pose_from_markers``: centre error [mm] and axis-angle error [deg] next to their
  stated standard uncertainties.

Run:  python benchmarks/bench_render_views.py [--frames 200]
"""

from __future__ import annotations

import argparse
import math
import time

import numpy as np

from fitdrag.geometry.camera import Camera
from fitdrag.geometry.pose import MarkerBoard, camera_pose_from_markers
from fitdrag.geometry.render_views import ViewRenderer, camera_looking_at
from fitdrag.physics.air import Air
from fitdrag.physics.flight3d import Launch3D, simulate_3d
from fitdrag.physics.forces import Conditions
from fitdrag.physics.specimen import Sphere
from fitdrag.video.markers import detect_markers

FPS = 500.0
RADIUS = 0.0325


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--frames", type=int, default=200)
    n = ap.parse_args().frames
    offset = 0.37 / FPS
    t = np.linspace(-0.001, (n + 2) / FPS, 4 * n)
    launch = Launch3D.from_speed_angles(9.0, 10.0, 1.5)  # degrees
    launch = Launch3D(0.0, 0.7, 0.1, launch.vx0, launch.vy0, launch.vz0)
    flight = simulate_3d(t, launch, Sphere(0.024, 0.065), Conditions(Air(1.2)), drag_params=0.5,
                         t0=t[0])  # fmt: skip
    base = Camera(1500.0, 1500.0, 640.0, 400.0, (-0.08, 0.05, 0.0005, -0.0003, 0.0),
                  (1280, 800), readout_time=1e-3)  # fmt: skip
    board = MarkerBoard(0.12, {i: (0.1 + 0.45 * (i % 5), 0.1 + 0.9 * (i // 5)) for i in range(10)})
    target = np.array([1.0, 0.75, 0.0])
    for i, ang in enumerate((-20.0, 20.0)):
        a = math.radians(ang)
        cam = camera_looking_at(base, target + 3.4 * np.array([math.sin(a), 0, math.cos(a)]),
                                target)  # fmt: skip
        off = offset * i
        t0 = time.perf_counter()
        r = ViewRenderer(flight, cam, n, FPS, radius=RADIUS, board=board, exposure=1e-3,
                         time_offset=off, seed=i)  # fmt: skip
        t1 = time.perf_counter()
        first = r.frame(0)
        for k in range(1, n):
            r.frame(k)
        t2 = time.perf_counter()
        clean = ViewRenderer(flight, cam, n, FPS, radius=RADIUS, exposure=1e-3, time_offset=off,
                             ambient=1.0, noise_sigma=0.0, flicker=0.0, clutter=0)  # fmt: skip
        errs = []
        for k in np.nonzero(clean.truth.visible)[0]:
            w = (clean.clean_frame(k) - clean.scene) / (clean.ball_level - clean.scene)
            v, u = np.indices(w.shape)
            c = np.array([(w * u).sum(), (w * v).sum()]) / w.sum()
            errs.append(np.hypot(c[0] - clean.truth.u_mean_px[k], c[1] - clean.truth.v_mean_px[k]))
        pose = camera_pose_from_markers(detect_markers(first), board, base)
        e_c = np.linalg.norm(pose.centre - cam.centre)
        e_a = abs(pose.axis_angle - abs(a))
        print(f"camera {i + 1} ({ang:+.0f} deg, time offset {off * 1e3:.2f} ms): set-up "
              f"{t1 - t0:.2f} s, {(t2 - t1) / n * 1e3:.1f} ms/frame, {n} frames in "
              f"{t2 - t0:.1f} s; ball visible in {int(r.truth.visible.sum())} frames")  # fmt: skip
        print(f"  centroid - truth (noise-free): mean {np.mean(errs):.4f} px, max "
              f"{np.max(errs):.4f} px over {len(errs)} frames")  # fmt: skip
        print(f"  pose from frame 0 ({len(pose.ids)} markers, rms {pose.reprojection_rms_px:.3f}"
              f" px): centre error {e_c * 1e3:.2f} mm (u {math.sqrt(np.trace(pose.centre_covariance)) * 1e3:.2f} mm),"
              f" axis angle error {math.degrees(e_a):.4f} deg (u "
              f"{math.degrees(pose.axis_angle_uncertainty):.4f} deg)")  # fmt: skip


if __name__ == "__main__":
    main()
