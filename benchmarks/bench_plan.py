"""Benchmark: does the test planner's predicted u(Cd) match what fits achieve?

For a planned test (specimen, launch, frame rate, frames, position noise, throws) the
planner predicts u(Cd) from the Fisher information (the Cramér–Rao bound).  Here the same
test is "run" many times on synthetic tracks with that noise (white, and AR(1) with the
planner told the coefficient), each replicate is fitted with fitdrag's defaults, and the
empirical standard deviation of the fitted Cd and the mean reported u(Cd) are printed beside
the prediction.  Target (issue 6): agreement within 15 %.

Cameras (issue 13): for a planned 3-D set-up (65 mm, 24 g ball at 9 m/s, cameras 3 m away,
f = 900 px, 0.3 px centroid and diameter noise, 200 frames at 500 frames/s, 0.5 ms readout)
the planner's u(Cd) for one camera in the plane, one camera in 3-D (apparent diameter) and
two cameras at ±20° (unknown time offset) is printed beside the scatter of replicate fits
(fit_tracks on the back-projected pixels; fit_views), and the planar fit's bias against the
out-of-plane angle beside the tolerable angle.

Usage: python benchmarks/bench_plan.py [--replicates 200] [--camera-replicates 60]
       [--workers 2] [--seed 11] [--skip-planar]
"""

from __future__ import annotations

import argparse
import time
from multiprocessing import Pool

import numpy as np

SIGMA = 0.0005
FPS = 400.0
FRAMES = 400
CD = 0.47


def _setup():
    from fitdrag import Air, Conditions, Launch, Sphere

    air = Air.standard()
    return Sphere(0.0027, 0.040), Conditions(air), Launch.from_speed_angle(12.0, 35.0), air


def _noise(rng, n, phi):
    if phi == 0.0:
        return rng.normal(0.0, SIGMA, n)
    e = rng.normal(0.0, SIGMA * np.sqrt(1.0 - phi**2), n)
    out = np.empty(n)
    out[0] = rng.normal(0.0, SIGMA)
    for i in range(1, n):
        out[i] = phi * out[i - 1] + e[i]
    return out


def _replicate(args):
    seed, phi, throws = args
    from fitdrag import Track, fit_tracks, simulate

    sp, cond, launch, air = _setup()
    rng = np.random.default_rng(seed)
    t = np.arange(FRAMES) / FPS
    f = simulate(t, launch, sp, cond, drag_params=CD)
    tracks = [
        Track(t, f.x + _noise(rng, FRAMES, phi), f.y + _noise(rng, FRAMES, phi))
        for _ in range(throws)
    ]
    r = fit_tracks(tracks, sp, air)
    return r.cd, r.u_cd


CAM = dict(speed=9.0, elevation=30.0, fps=500.0, frames=200, distance=3.0, focal_length=900.0,
           pixel_noise=0.3, diameter_noise=0.3, pair_angle=20.0, readout_time=5e-4,
           drag_params=(0.5,), target=0.005)  # fmt: skip


def _camera_setup():
    from fitdrag import Air, Conditions, Sphere
    from fitdrag.fit.plan_views import plan_views, planned_views

    ball, air = Sphere(0.024, 0.065), Air(1.2)
    cond = Conditions(air)
    plan = plan_views(ball, cond, **CAM)
    common = dict(fps=CAM["fps"], frames=CAM["frames"], pixel_noise=CAM["pixel_noise"],
                  drag_params=CAM["drag_params"])  # fmt: skip
    one = planned_views(plan.cameras_one, ball, cond, plan.launch,
                        diameter_noise=CAM["diameter_noise"], **common)  # fmt: skip
    two = planned_views(plan.cameras_two, ball, cond, plan.launch, diameter_noise=None, **common)
    return ball, air, plan, one, two


def _camera_replicate(args):
    seed, which = args
    from dataclasses import replace

    from fitdrag import Track, fit_tracks
    from fitdrag.fit.image_fit import fit_views

    ball, air, _plan, one, two = _camera_setup()
    rng = np.random.default_rng(seed)
    s = CAM["pixel_noise"]
    views = one if which != "two" else two
    noisy = []
    for v in views:
        n = len(v)
        d = None if v.diameter is None else v.diameter + rng.normal(0, CAM["diameter_noise"], n)
        noisy.append(replace(v, u=v.u + rng.normal(0, s, n), v=v.v + rng.normal(0, s, n),
                             diameter=d))  # fmt: skip
    if which == "plane":
        v = noisy[0]
        w = v.camera.pixel_to_plane(v.pixels, 0.0, undistorted=False)
        r = fit_tracks(Track(v.frame_times, w[:, 0], w[:, 1]), ball, air, noise="white")
    else:
        r = fit_views(noisy, ball, air, noise="white")
    return (r.cd, r.u_cd) if r.success else (np.nan, np.nan)


def cameras(a) -> None:
    ball, air, plan, _one, _two = _camera_setup()
    print()
    print(plan.message)
    print(f"{'set-up':<24}{'predicted u':>13}{'std of Cd':>12}{'mean u':>12}{'std/pred':>10}"
          f"{'failed':>8}")  # fmt: skip
    t0 = time.perf_counter()
    with Pool(a.workers) as pool:
        for which, pred, label in (("plane", plan.u_cd_plane, "one camera, in plane"),
                                   ("one", plan.u_cd_one, "one camera, 3-D"),
                                   ("two", plan.u_cd_two, "two cameras, 3-D")):  # fmt: skip
            jobs = [(a.seed * 7001 + 31 * i + len(which), which)
                    for i in range(a.camera_replicates)]  # fmt: skip
            res = np.array(pool.map(_camera_replicate, jobs))
            ok = np.isfinite(res[:, 0])
            sd = float(np.std(res[ok, 0], ddof=1))
            mu = float(np.mean(res[ok, 1]))
            print(f"{label:<24}{pred:>13.3e}{sd:>12.3e}{mu:>12.3e}{sd / pred:>10.3f}"
                  f"{int((~ok).sum()):>8}")  # fmt: skip
    se = 1.0 / np.sqrt(2.0 * (a.camera_replicates - 1))
    print(f"(std of {a.camera_replicates} replicates uncertain by about {100 * se:.0f} %; "
          f"target: within 25 %)  {time.perf_counter() - t0:.0f} s")  # fmt: skip
    from fitdrag import Conditions
    from fitdrag.fit.plan_views import planar_bias

    cond = Conditions(air)
    print("planar fit's Cd bias against the out-of-plane angle (one camera, noise-free):")
    for ang in (0.01, 0.03, plan.tolerable_angle, 0.1, 0.3, 1.0, 3.0):
        b = planar_bias(plan.cameras_one[0], ball, cond, plan.launch, ang, fps=CAM["fps"],
                        frames=CAM["frames"], drag_params=CAM["drag_params"])  # fmt: skip
        mark = "  <- tolerable angle (bias = budget)" if ang == plan.tolerable_angle else ""
        print(f"  {ang:7.3f}°  bias {b:+.4f} ({100 * b / plan.cd:+.2f} %){mark}")
    print(f"  budget U_target − 2 u_plane = {plan.bias_budget:.4f}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--replicates", type=int, default=200)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--seed", type=int, default=11)
    ap.add_argument("--camera-replicates", type=int, default=60)
    ap.add_argument("--skip-planar", action="store_true", help="only the camera part")
    a = ap.parse_args()
    if a.skip_planar:
        cameras(a)
        return
    from fitdrag import plan_test

    sp, cond, launch, _air = _setup()
    print(
        f"planned test: 40 mm 2.7 g sphere, Cd {CD}, 12 m/s at 35°, {FRAMES} frames at "
        f"{FPS:.0f} Hz, position noise {SIGMA * 1e3:.1f} mm; {a.replicates} replicates each"
    )
    print(f"{'noise':<14}{'throws':>7}{'predicted u':>14}{'std of Cd':>12}{'mean u':>12}"
          f"{'std/pred':>10}{'u/pred':>9}")  # fmt: skip
    t0 = time.perf_counter()
    with Pool(a.workers) as pool:
        for phi, throws in ((0.0, 1), (0.0, 3), (0.8, 1)):
            plan = plan_test(sp, cond, launch, fps=FPS, frames=FRAMES, noise=SIGMA,
                             throws=throws, drag_params=(CD,), ar1=phi)  # fmt: skip
            jobs = [(a.seed * 100003 + 7919 * i + int(phi * 10) + throws, phi, throws)
                    for i in range(a.replicates)]  # fmt: skip
            res = np.array(pool.map(_replicate, jobs))
            sd, mu = float(np.std(res[:, 0], ddof=1)), float(np.mean(res[:, 1]))
            name = "white" if phi == 0 else f"AR(1) {phi}"
            print(f"{name:<14}{throws:>7}{plan.u_cd:>14.3e}{sd:>12.3e}{mu:>12.3e}"
                  f"{sd / plan.u_cd:>10.3f}{mu / plan.u_cd:>9.3f}")  # fmt: skip
    se = 1.0 / np.sqrt(2.0 * (a.replicates - 1))
    print(f"(the std of {a.replicates} replicates itself is uncertain by about {100 * se:.0f} %;"
          f" target: within 15 %)  {time.perf_counter() - t0:.0f} s")  # fmt: skip
    cameras(a)


if __name__ == "__main__":
    main()
