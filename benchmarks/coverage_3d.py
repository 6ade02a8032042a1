"""Coverage of the image-space 3-D fit: does Cd ± U (k from the fit) hold the true Cd?

Random synthetic throws (tests/views_reference.py: a 65 mm, 24 g foam ball, true Cd 0.50,
200 frames at 500 frames/s, cameras 3 m away, f = 900 px, 1280 x 800): each throw draws
its out-of-plane angle (0-3°, either side), its launch depth off the board (0-5 cm), the
cameras' rolling-shutter readout (0-1 ms, modelled), the pixel noise (0.15-0.5 px per
coordinate, the same for the apparent diameter), the launch speed (8-10 m/s) and elevation
(20-40°); with two cameras (40° apart) the second camera's frame 0 is 0-3 ms off the
first's and the fit estimates it.  Every throw is fitted by ``fitdrag.fit.image_fit.fit_views``
with its defaults.

Printed per set-up (one camera with the outline diameter, two cameras): the fraction of
throws whose interval holds the truth with its Clopper–Pearson 95 % interval, the mean
U/Cd, the RMS of (Cd − truth)/u, and for two cameras the RMS error of the estimated time
offset in frames.  Target (issue 13): coverage 93–97 %.

Usage::

    python benchmarks/coverage_3d.py [--throws 50] [--seed 13] [--cameras 1,2]
"""

from __future__ import annotations

import os
import sys

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import math  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
from scipy import stats  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

import views_reference as ref  # noqa: E402

from fitdrag.fit.image_fit import fit_views  # noqa: E402


def one_throw(n_cameras: int, rng: np.random.Generator):
    """(fit result, true offset [s]) of one random throw."""
    angle = rng.uniform(0.0, 3.0) * rng.choice((-1.0, 1.0))
    throw = ref.launch(angle, speed=rng.uniform(8.0, 10.0), elevation=rng.uniform(20.0, 40.0),
                       z0=rng.uniform(0.0, 0.05))  # fmt: skip
    readout = rng.uniform(0.0, 1e-3)
    sigma = rng.uniform(0.15, 0.5)
    yaws = (0.0,) if n_cameras == 1 else (-20.0, 20.0)
    offset = rng.uniform(-3e-3, 3e-3) if n_cameras == 2 else 0.0
    views = [
        ref.observe(ref.camera_at(yaw, readout=readout), throw, offset=offset if i else 0.0,
                    sigma=sigma, diameter_sigma=sigma, rng=rng, name=f"camera {i + 1}")
        for i, yaw in enumerate(yaws)
    ]  # fmt: skip
    return fit_views(views, ref.BALL, ref.AIR), offset


def clopper_pearson(k: int, n: int) -> tuple[float, float]:
    lo = stats.beta.ppf(0.025, k, n - k + 1) if k > 0 else 0.0
    hi = stats.beta.ppf(0.975, k + 1, n - k) if k < n else 1.0
    return float(lo), float(hi)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--throws", type=int, default=50)
    ap.add_argument("--seed", type=int, default=13)
    ap.add_argument("--cameras", default="1,2")
    args = ap.parse_args()
    for n_cam in (int(c) for c in args.cameras.split(",")):
        seeds = np.random.SeedSequence([args.seed, n_cam]).spawn(args.throws)
        t0 = time.perf_counter()
        hits, rel_u, zs, off_err, failed = 0, [], [], [], 0
        for s in seeds:
            r, offset = one_throw(n_cam, np.random.default_rng(s))
            if not r.success:
                failed += 1
                continue
            err = r.cd - ref.CD
            hits += abs(err) <= r.expanded_uncertainty
            rel_u.append(r.expanded_uncertainty / r.cd)
            zs.append(err / r.u_cd)
            if n_cam == 2:
                off_err.append((r.views[1].time_offset - offset) * ref.FPS)
        n = args.throws - failed
        lo, hi = clopper_pearson(hits, n)
        print(f"{n_cam} camera(s): {n} throws fitted ({failed} failed), "
              f"{time.perf_counter() - t0:.0f} s")  # fmt: skip
        print(f"  coverage of Cd ± U: {hits}/{n} = {100 * hits / n:.1f} % "
              f"(95 % CI {100 * lo:.1f}-{100 * hi:.1f} %)")  # fmt: skip
        print(f"  U/Cd: mean {100 * np.mean(rel_u):.2f} %, max {100 * np.max(rel_u):.2f} %")
        print(f"  (Cd - truth)/u: RMS {math.sqrt(np.mean(np.square(zs))):.2f}, "
              f"mean {np.mean(zs):+.2f}")  # fmt: skip
        if off_err:
            print(f"  time offset error: RMS {math.sqrt(np.mean(np.square(off_err))):.4f} "
                  f"frames, max {np.max(np.abs(off_err)):.4f} frames")  # fmt: skip


if __name__ == "__main__":
    main()
