"""Coverage of the planar track path with a stated out-of-plane uncertainty (issue 13).

Random synthetic throws of a 65 mm, 24 g foam ball (true Cd 0.50; tests/views_reference.py)
fly in 3-D (fitdrag.physics.flight3d, itself checked against scipy's DOP853): each throw's
out-of-plane angle is drawn from N(0, u²) with u the stated ``out_of_plane_uncertainty``
(0.5° by default), the camera's true distance from N(3.0 m, (0.05 m)²) (the stated distance
and its uncertainty), its aim up to 0.3 m off the middle of the flight, the launch speed
8-10 m/s and elevation 20-40°, and the pixel noise 0.15-0.5 px.  A pinhole camera
(fitdrag.geometry.camera.Camera, f = 900 px, 1280 x 800) images 200 frames at 500 frames/s;
the pixels are mapped to the calibration plane z = 0 as a planar tracker with an exact plane
calibration would, giving a track CSV's positions in metres.

Each track is fitted by ``fit_tracks`` (defaults) and its budget built as ``fitdrag run``
builds it for a track CSV: the inputs ``camera_distance`` (3.0 m, u 0.05 m) and
``out_of_plane_angle`` (0°, u as stated) by re-fit through the perspective model, plus the
fit's statistical part; the specimen, air, gravity and time base are exact here.

Printed: the fraction of throws with |Cd − truth| <= U with its Clopper–Pearson 95 %
interval (target >= 93 %), U/Cd (mean and range), the RMS of (Cd − truth)/u_c, and for
comparison how many plain planar intervals (statistical U only) would have held the truth.

Usage::

    python -P benchmarks/coverage_planar.py [--throws 60] [--seed 13] [--angle-u 0.5]
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

from fitdrag.fit.budget_model import DragRefitModel  # noqa: E402
from fitdrag.fit.fitting import fit_tracks  # noqa: E402
from fitdrag.physics.air import STANDARD_GRAVITY  # noqa: E402
from fitdrag.physics.flight3d import Launch3D, simulate_3d  # noqa: E402
from fitdrag.physics.forces import Conditions  # noqa: E402
from fitdrag.run.pipeline import _perspective_inputs  # noqa: E402
from fitdrag.tracks.track import Track  # noqa: E402
from fitdrag.uncertainty.gum import P_K2, InputQuantity, budget_from_model  # noqa: E402

DISTANCE, U_DISTANCE = 3.0, 0.05  # stated [m]


def planar_track(rng: np.random.Generator, angle_u: float) -> Track:
    """One random 3-D throw as a planar tracker would report it (positions in metres)."""
    angle = rng.normal(0.0, angle_u)
    throw = Launch3D.from_speed_angles(rng.uniform(8.0, 10.0), rng.uniform(20.0, 40.0), angle,
                                       x0=0.0, y0=0.5)  # fmt: skip
    t = np.arange(200) / ref.FPS
    fl = simulate_3d(t, throw, ref.BALL, Conditions(ref.AIR), drag_params=(ref.CD,))
    p = fl.position
    mid = 0.5 * (p.min(axis=0) + p.max(axis=0))
    target = (mid[0] + rng.uniform(-0.3, 0.3), mid[1] + rng.uniform(-0.3, 0.3), 0.0)
    cam = ref.camera_at(0.0, distance=rng.normal(DISTANCE, U_DISTANCE), target=target)
    px = cam.project(p).pixels + rng.uniform(0.15, 0.5) * rng.standard_normal((len(t), 2))
    q = cam.pixel_to_plane(px)
    return Track(t, q[:, 0], q[:, 1])


def measure(track: Track, angle_u: float):
    """(Cd, U, u_c, statistical U) as the pipeline computes them for one track CSV."""
    fit = fit_tracks(track, ref.BALL, ref.AIR, gravity=STANDARD_GRAVITY)
    if not fit.success:
        return None
    nominal = {"mass": ref.BALL.mass, "diameter": ref.BALL.diameter,
               "camera_distance": DISTANCE, "out_of_plane_angle": 0.0}  # fmt: skip
    model = DragRefitModel(fit, [track], nominal)
    inputs = [
        InputQuantity("camera_distance", DISTANCE, U_DISTANCE, "m"),
        InputQuantity("out_of_plane_angle", 0.0, angle_u, "°"),
    ]
    inputs = _perspective_inputs(model, inputs)
    stat = (fit.u_cd, fit.dof if fit.dof > 0 else math.inf)
    b = budget_from_model(model, inputs, statistical=stat, coverage_probability=P_K2)
    return fit.cd, b.expanded_uncertainty, b.combined_standard_uncertainty, fit.expanded_uncertainty


def clopper_pearson(k: int, n: int) -> tuple[float, float]:
    lo = stats.beta.ppf(0.025, k, n - k + 1) if k > 0 else 0.0
    hi = stats.beta.ppf(0.975, k + 1, n - k) if k < n else 1.0
    return float(lo), float(hi)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--throws", type=int, default=60)
    ap.add_argument("--seed", type=int, default=13)
    ap.add_argument("--angle-u", type=float, default=0.5, help="stated u of the angle [deg]")
    args = ap.parse_args()
    seeds = np.random.SeedSequence(args.seed).spawn(args.throws)
    t0 = time.perf_counter()
    hits = plain_hits = failed = 0
    rel_u, zs = [], []
    for s in seeds:
        rng = np.random.default_rng(s)
        out = measure(planar_track(rng, args.angle_u), args.angle_u)
        if out is None:
            failed += 1
            continue
        cd, big_u, uc, u_plain = out
        err = cd - ref.CD
        hits += abs(err) <= big_u
        plain_hits += abs(err) <= u_plain
        rel_u.append(big_u / cd)
        zs.append(err / uc)
    n = args.throws - failed
    lo, hi = clopper_pearson(hits, n)
    print(f"planar track files, out-of-plane u = {args.angle_u:g}°, camera {DISTANCE:g} m "
          f"± {U_DISTANCE:g} m: {n} throws fitted ({failed} failed), "
          f"{time.perf_counter() - t0:.0f} s")  # fmt: skip
    print(f"  coverage of Cd ± U: {hits}/{n} = {100 * hits / n:.1f} % "
          f"(95 % CI {100 * lo:.1f}-{100 * hi:.1f} %; target >= 93 %)")  # fmt: skip
    print(f"  U/Cd: mean {100 * np.mean(rel_u):.1f} %, range {100 * np.min(rel_u):.1f}-"
          f"{100 * np.max(rel_u):.1f} %")  # fmt: skip
    print(f"  (Cd - truth)/u_c: RMS {math.sqrt(np.mean(np.square(zs))):.2f}, "
          f"mean {np.mean(zs):+.2f}")  # fmt: skip
    print(f"  without the perspective lines (statistical U only): {plain_hits}/{n} = "
          f"{100 * plain_hits / n:.1f} % held the truth")  # fmt: skip


if __name__ == "__main__":
    main()
