"""Benchmark: does the test planner's predicted u(Cd) match what fits achieve?

For a planned test (specimen, launch, frame rate, frames, position noise, throws) the
planner predicts u(Cd) from the Fisher information (the Cramér–Rao bound).  Here the same
test is "run" many times on synthetic tracks with that noise (white, and AR(1) with the
planner told the coefficient), each replicate is fitted with fitdrag's defaults, and the
empirical standard deviation of the fitted Cd and the mean reported u(Cd) are printed beside
the prediction.  Target (issue 6): agreement within 15 %.

Usage: python benchmarks/bench_plan.py [--replicates 200] [--workers 2] [--seed 11]
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


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--replicates", type=int, default=200)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--seed", type=int, default=11)
    a = ap.parse_args()
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


if __name__ == "__main__":
    main()
