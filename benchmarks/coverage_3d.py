"""Coverage of the image-space 3-D fit: does Cd ± U (k from the fit) hold the true Cd?

Random synthetic throws (tests/views_reference.py: a 65 mm, 24 g foam ball, true Cd 0.50,
200 frames at 500 frames/s, cameras 3 m away, f = 900 px, 1280 x 800): each throw draws
its out-of-plane angle (0-3°, either side), its launch depth off the board (0-5 cm), the
rolling-shutter readout (a global shutter for a quarter of the throws, else 0-1 ms, modelled),
the launch speed (8-10 m/s) and elevation (20-40°); with two cameras (40° apart, ±20° off the
board normal) the second camera's frame 0 is 0-3 ms off the first's and the fit estimates
it.  The same throws are seen by one camera (square to the board) and by two.  Every throw
is fitted by ``fitdrag.fit.image_fit.fit_views`` with its defaults.

Two sources of observations:

* ``--source model`` (default): the exact outline centre and width across the motion (the
  conic of Camera.sphere_outline, not the fit's closed forms) plus white Gaussian noise.  The
  noise levels are drawn per throw from ``--centroid-noise`` (default 0.02-0.10 px per
  coordinate) and ``--diameter-noise`` (default 0.03-0.10 px), and stated to the fit as a
  tracker states them (``CameraView.sigma``, ``diameter_sigma``) unless ``--unstated``.
  These are the levels of fitdrag's blob model fit on rendered footage: its stated sigmas are
  0.02-0.04 px (centroid) and 0.04-0.05 px (diameter), its actual scatter about the truth
  0.04-0.09 px (``--source footage`` prints both).  ``--centroid-noise 0.15,0.5
  --diameter-noise same --unstated --diameter-measure across_motion`` is the earlier set-up.
  The Cramér–Rao u(Cd) of each throw (``fitdrag.fit.plan_views.image_information`` at the
  truth, with the fit's unknowns) is printed beside the fit's u.
* ``--source footage``: perspective footage rendered by ``fitdrag.geometry.render_views``
  (shaded ball, motion blur over a 0.2-2 ms exposure, rolling shutter row by row, sensor
  noise, flicker, clutter) and tracked by ``fitdrag.video.detect.detect_specimen`` (the
  blob model fit): the views carry the tracker's centroids, outline diameters and stated
  sigmas, as the job pipeline's will.  About 5 s per camera and throw.

Printed per set-up, for all throws and split by global and rolling shutter: the fraction of
throws whose interval holds the truth with its Clopper–Pearson 95 % interval, the median and
largest U/Cd, the mean error (Cd − truth)/truth, the RMS and mean of (Cd − truth)/u, the
median ratio of the fit's u to the Cramér–Rao bound (model source), the RMS error of the
estimated time offset in frames (two cameras) and the median fitted diameter measure lam
(0 = width across the motion, 1 = equal-area diameter).  With ``--bound``: the Cramér–Rao
U/Cd of one camera against the centroid and diameter noise, and the diameter noise one
camera needs for U/Cd = 3 %.  Targets (issue 13): coverage 93-97 %; U/Cd <= 3 % with one
camera, <= 1 % (aim 0.5 %) with two.

Usage::

    python benchmarks/coverage_3d.py [--throws 60] [--seed 13] [--cameras 1,2]
        [--source model|footage] [--centroid-noise 0.02,0.1] [--diameter-noise 0.03,0.1]
        [--unstated] [--diameter-measure estimate] [--bound] [--quick]
"""

from __future__ import annotations

import os
import sys

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import math  # noqa: E402
import time  # noqa: E402
from dataclasses import dataclass, replace  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
from scipy import stats  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

import views_reference as ref  # noqa: E402

from fitdrag.fit.image_fit import fit_views  # noqa: E402
from fitdrag.fit.plan_views import image_information  # noqa: E402
from fitdrag.geometry.views import CameraView  # noqa: E402
from fitdrag.physics.forces import Conditions  # noqa: E402

COND = Conditions(ref.AIR)
YAWS = {1: (0.0,), 2: (-20.0, 20.0)}
FRAMES = 200


@dataclass(frozen=True)
class Throw:
    angle: float  # out of the board plane [deg]
    speed: float  # [m/s]
    elevation: float  # [deg]
    z0: float  # launch depth off the board [m]
    readout: float  # rolling-shutter readout [s]
    offset: float  # second camera's frame 0 minus the first's [s]
    sigma: float  # centroid noise per coordinate [px]
    diameter_sigma: float  # diameter noise [px]
    exposure: float  # footage exposure [s]

    @property
    def launch(self):
        return ref.launch(self.angle, speed=self.speed, elevation=self.elevation, z0=self.z0)


@dataclass(frozen=True)
class Row:
    success: bool
    readout: float
    cd: float = math.nan
    u: float = math.nan
    expanded: float = math.nan
    crb: float = math.nan
    offset_error: float = math.nan  # [frames]
    measure: float = math.nan
    tracker: tuple = ()  # footage: centroid RMS error, stated, diameter RMS, drift [px], kept
    expanded_tracker: float = math.nan  # footage: U with the tracker's systematic lines


def draw(rng: np.random.Generator, centroid, diameter) -> Throw:
    angle = rng.uniform(0.0, 3.0) * rng.choice((-1.0, 1.0))
    speed, elevation, z0 = rng.uniform(8.0, 10.0), rng.uniform(20.0, 40.0), rng.uniform(0.0, 0.05)
    readout = 0.0 if rng.uniform() < 0.25 else rng.uniform(0.0, 1e-3)
    offset = rng.uniform(-3e-3, 3e-3)
    sigma = rng.uniform(*centroid)
    d_sigma = sigma if diameter == "same" else rng.uniform(*diameter)
    exposure = rng.uniform(0.2e-3, 2e-3)
    return Throw(angle, speed, elevation, z0, readout, offset, sigma, d_sigma, exposure)


def model_views(th: Throw, n_cam: int, rng, stated: bool) -> list[CameraView]:
    views = []
    for i, yaw in enumerate(YAWS[n_cam]):
        v = ref.observe(ref.camera_at(yaw, readout=th.readout), th.launch, n=FRAMES,
                        offset=th.offset if i else 0.0, sigma=th.sigma,
                        diameter_sigma=th.diameter_sigma, rng=rng, name=f"camera {i + 1}")  # fmt: skip
        if stated:
            v = replace(v, sigma=th.sigma, diameter_sigma=th.diameter_sigma)
        views.append(v)
    return views


def lighting(light, ambient) -> dict:
    """The renderer's lamp direction (camera axes, towards the lamp) and ambient share, where
    given (``--light``, ``--ambient``); otherwise the renderer's defaults."""
    out = {}
    if light is not None:
        out["light"] = light
    if ambient is not None:
        out["ambient"] = ambient
    return out


def footage_views(th: Throw, n_cam: int, seed: int, light=None, ambient=None):
    """Views from rendered and tracked footage, and the tracker's errors against the truth."""
    from fitdrag.geometry.render_views import ViewRenderer
    from fitdrag.physics.flight3d import simulate_3d
    from fitdrag.video.detect import detect_specimen
    from fitdrag.video.lens import LensModel

    t = np.linspace(ref.T_LAUNCH, (FRAMES + 4) / ref.FPS + 3e-3, 8 * FRAMES)
    flight = simulate_3d(t, th.launch, ref.BALL, COND, drag_params=(ref.CD,), t0=ref.T_LAUNCH)
    views, errs = [], []
    for i, yaw in enumerate(YAWS[n_cam]):
        cam = ref.camera_at(yaw, readout=th.readout)
        r = ViewRenderer(flight, cam, FRAMES, ref.FPS, radius=0.5 * ref.BALL.diameter,
                         exposure=th.exposure, time_offset=th.offset if i else 0.0,
                         seed=seed + i, **lighting(light, ambient))  # fmt: skip
        lens = LensModel(cam.camera_matrix, np.array(cam.distortion or (0.0,) * 5),
                         cam.image_size, 0.1)  # fmt: skip
        det = detect_specimen(np.stack([r.frame(k) for k in range(FRAMES)]), lens=lens,
                              readout_time=th.readout, fps=ref.FPS)  # fmt: skip
        ok = np.isfinite(det.outline_diameter_px)
        f = det.frame[ok]
        tr = r.truth
        e = np.hypot(det.x_px[ok] - tr.u_px[f], det.y_px[ok] - tr.v_px[f]) / math.sqrt(2.0)
        d = det.outline_diameter_px[ok]
        rho = 0.5 * ref.BALL.diameter
        depth = 2.0 * math.sqrt(cam.fx * cam.fy) * rho / np.sqrt(tr.depth[f] ** 2 - rho**2)
        res = d - depth * np.sum(d * depth) / np.sum(depth**2)  # after the fit's scale
        drift = np.polyfit(f - f.mean(), res, 1)[0] * float(np.ptp(f))
        errs.append((float(np.sqrt(np.mean(e**2))), float(np.median(det.sigma_px[ok])),
                     float(np.sqrt(np.mean(res**2))), drift,
                     float(np.median(det.u_outline_diameter_px[ok])),
                     float(np.count_nonzero(ok))))  # fmt: skip
        views.append(CameraView(cam, f, ref.FPS, det.x_px[ok], det.y_px[ok],
                                sigma=det.sigma_px[ok], diameter=d,
                                diameter_sigma=det.u_outline_diameter_px[ok],
                                name=f"camera {i + 1}", outline_kind="depth"))  # fmt: skip
    return views, tuple(np.mean(errs, axis=0))


def bound(views, th: Throw, fit_measure: bool, fit_scale: bool) -> float:
    """Cramér–Rao u(Cd) at the truth with the fit's unknowns (offset, lam, scale)."""
    vs = [replace(v, sigma=th.sigma, diameter_sigma=th.diameter_sigma) for v in views]
    offsets = [0.0, th.offset][: len(vs)]
    return image_information(vs, ref.BALL, COND, th.launch, drag_params=(ref.CD,),
                             t0=ref.T_LAUNCH, offsets=offsets, fit_measure=fit_measure,
                             fit_scale=fit_scale)[0]  # fmt: skip


def one_throw(th: Throw, n_cam: int, seed, args) -> Row:
    rng = np.random.default_rng(seed)
    tracker = ()
    if args.source == "footage":
        views, tracker = footage_views(th, n_cam, int(rng.integers(1 << 30)), args.light,
                                       args.ambient)  # fmt: skip
    else:
        views = model_views(th, n_cam, rng, not args.unstated)
    measure = args.diameter_measure
    try:
        measure = float(measure)
    except ValueError:
        pass
    scale = args.diameter_scale if args.diameter_scale == "estimate" else float(args.diameter_scale)
    r = fit_views(views, ref.BALL, ref.AIR, diameter_measure=measure, diameter_scale=scale)
    if not r.success:
        print(f"  failed: {r.message}", flush=True)
        return Row(False, th.readout)
    crb = math.nan
    if args.source == "model":
        crb = bound(views, th, "diameter_measure_1" in r.parameter_names,
                    "diameter_scale_1" in r.parameter_names)  # fmt: skip
    off_err = (r.views[1].time_offset - th.offset) * ref.FPS if n_cam == 2 else math.nan
    lams = [v.diameter_measure for v in r.views if v.diameter_used]
    lam = float(np.median(lams)) if lams else math.nan
    u_tr = math.nan
    if args.source == "footage":
        u_tr = tracker_lines(views, r, measure, scale)
    return Row(True, th.readout, r.cd, r.u_cd, r.expanded_uncertainty, crb, off_err, lam,
               tracker, 2.0 * math.hypot(r.u_cd, u_tr))  # fmt: skip


def tracker_lines(views, r, measure, scale) -> float:
    """The tracker's systematic lines of the job budget, by re-fit (as
    fitdrag.fit.view_budget_model does): per view a constant centroid shift in u and in v
    and, where the diameters are used, a linear drift over the flight, each of the standard
    uncertainty tracker_systematics gives; their root sum of squares of Cd changes."""
    from fitdrag.fit.view_budget_model import tracker_systematics

    total = 0.0
    for i, v in enumerate(views):
        s_c, s_d = tracker_systematics(v.outline_kind)
        changed = [replace(v, u=v.u + s_c), replace(v, v=v.v + s_c)]
        if r.views[i].diameter_used:
            f = v.frames.astype(float)
            ramp = (f - f[0]) / max(f[-1] - f[0], 1.0) - 0.5
            changed.append(replace(v, diameter=v.diameter + s_d * ramp))
        for vv in changed:
            moved = [vv if j == i else w for j, w in enumerate(views)]
            rr = fit_views(moved, ref.BALL, ref.AIR, diameter_measure=measure,
                           diameter_scale=scale)  # fmt: skip
            total += (rr.cd - r.cd) ** 2 if rr.success else math.inf
    return math.sqrt(total)


def clopper_pearson(k: int, n: int) -> tuple[float, float]:
    lo = stats.beta.ppf(0.025, k, n - k + 1) if k > 0 else 0.0
    hi = stats.beta.ppf(0.975, k + 1, n - k) if k < n else 1.0
    return float(lo), float(hi)


def summary(label: str, rows: list[Row]) -> str:
    ok = [r for r in rows if r.success]
    n = len(ok)
    if n == 0:
        return f"{label:18s} {len(rows):4d} throws, all failed"
    cd = np.array([r.cd for r in ok])
    err = cd - ref.CD
    hits = int(np.sum(np.abs(err) <= np.array([r.expanded for r in ok])))
    lo, hi = clopper_pearson(hits, n)
    rel = np.array([r.expanded / r.cd for r in ok]) * 100
    z = err / np.array([r.u for r in ok])
    crb = np.array([r.u / r.crb for r in ok])
    off = np.array([r.offset_error for r in ok])
    lam = np.array([r.measure for r in ok])
    s_tr = ""
    big = np.array([r.expanded_tracker for r in ok])
    if np.all(np.isfinite(big)):
        h2 = int(np.sum(np.abs(err) <= big))
        lo2, hi2 = clopper_pearson(h2, n)
        s_tr = (f"\n{'':18s} with the tracker's systematic lines: coverage "
                f"{100 * h2 / n:5.1f} % ({100 * lo2:4.1f}-{100 * hi2:5.1f}), U/Cd median "
                f"{np.median(big / cd) * 100:.2f} %, largest {np.max(big / cd) * 100:.2f} %")  # fmt: skip
    s = (f"{label:18s} {n:4d} {len(rows) - n:3d}  {100 * hits / n:5.1f} % "
         f"({100 * lo:4.1f}-{100 * hi:5.1f})  {np.median(rel):5.2f} {np.max(rel):6.2f}  "
         f"{100 * np.mean(err) / ref.CD:+6.2f} %  {math.sqrt(np.mean(z**2)):4.2f} "
         f"{np.mean(z):+5.2f}")  # fmt: skip
    s += f"  {np.median(crb):5.2f}" if np.all(np.isfinite(crb)) else "      -"
    s += f"  {math.sqrt(np.mean(off**2)):6.3f}" if np.all(np.isfinite(off)) else "       -"
    s += f"  {np.nanmedian(lam):5.2f}" if np.any(np.isfinite(lam)) else "      -"
    return s + s_tr


HEADER = ("set-up            fits fail  coverage (95 % CI)    U/Cd % med    max  mean err  "
          "(Cd-t)/u RMS mean  u/CRB  offset RMS [fr]  lam")  # fmt: skip


def bound_table(measure_fitted: bool, scale_fitted: bool) -> None:
    """Cramér–Rao U/Cd of one camera (k = 2) against the centroid and diameter noise."""
    th = Throw(1.5, 9.0, 30.0, 0.02, 0.5e-3, 0.0, 0.1, 0.1, 1e-3)
    view = ref.observe(ref.camera_at(0.0, readout=th.readout), th.launch, n=FRAMES, sigma=0.0,
                       diameter_sigma=0.0)  # fmt: skip
    d_levels = (0.01, 0.02, 0.03, 0.05, 0.1, 0.15, 0.3, 0.5)

    def u_rel(sc, sd):
        th2 = replace(th, sigma=sc, diameter_sigma=sd)
        return 200.0 * bound([view], th2, measure_fitted, scale_fitted) / ref.CD

    print(f"\nCramér–Rao U/Cd [%] (k = 2) of one camera, throw 1.5° out of plane, 9 m/s at 30°, "
          f"0.5 ms readout, diameter measure {'fitted' if measure_fitted else 'known'}, "
          f"diameter scale {'fitted' if scale_fitted else 'known'}:")  # fmt: skip
    print("centroid \\ diameter noise [px] " + " ".join(f"{d:6.2f}" for d in d_levels)
          + "   diameter noise for U/Cd = 3 %")  # fmt: skip
    for sc in (0.02, 0.03, 0.05, 0.1, 0.15, 0.3, 0.5):
        row = [u_rel(sc, sd) for sd in d_levels]
        lo, hi = 1e-3, 2.0
        if u_rel(sc, lo) > 3.0:
            need = "not reachable"
        elif u_rel(sc, hi) < 3.0:
            need = "any (below 3 % even without them)"
        else:
            for _ in range(40):
                mid = math.sqrt(lo * hi)
                lo, hi = (mid, hi) if u_rel(sc, mid) < 3.0 else (lo, mid)
            need = f"{lo:.3f} px"
        print(f"{sc:8.2f} px                     " + " ".join(f"{x:6.2f}" for x in row)
              + f"   {need}")  # fmt: skip
    drift_table(view, th)


def drift_table(view: CameraView, th: Throw) -> None:
    """What one camera's depth rests on: the diameter's change along the flight.  Cramér–Rao
    U/Cd with the diameters (lam and scale fitted), without them, and with a free linear
    drift of the diameters over the flight; and the Cd shift a drift of +0.1 px from the first
    frame to the last causes (the least-squares response, first order; a fit of the drifted
    observations gives the same to 0.1 %)."""
    from fitdrag.fit.image_problem import ImageProblem
    from fitdrag.physics.registry import get_drag_model

    print("\none camera, diameter noise 0.05 px: U/Cd [%] (k = 2) with the diameters, without "
          "them, with a free linear drift of the diameters; Cd shift per 0.1 px drift end to end")  # fmt: skip
    print("centroid noise   with   without   free drift   shift per 0.1 px drift")
    t = view.frame_times
    x = (t - t.mean()) / np.ptp(t)
    for sc in (0.02, 0.03, 0.05, 0.1, 0.3):
        v = replace(view, sigma=sc, diameter_sigma=0.05)
        out = []
        for used in (True, False):
            p = ImageProblem([v], ref.BALL, COND, get_drag_model("constant"), (), False,
                             np.zeros(3), np.array([0.0, 0.0, 1.0]), [used], [0.0], ref.T_LAUNCH,
                             [None], [None])  # fmt: skip
            theta = np.concatenate(([ref.CD], th.launch.as_array(), [0.0, 1.0][: 2 * used]))
            _r, jac, _s, _ok = p.evaluate(theta)
            out.append((p, jac))
        (p, jac), (_p0, jac0) = out
        rows = [ch.rows for ch in p.channels if ch.kind == 2][0]
        col = np.zeros(p.n_resid)
        col[rows] = -x / 0.05
        jd = np.column_stack([jac, col])

        def u_of(j):
            return 200.0 * math.sqrt(np.linalg.inv(j.T @ j)[0, 0]) / ref.CD

        dr = np.zeros(p.n_resid)
        dr[rows] = 0.1 * x / 0.05  # observed diameters + 0.1 px drift: residuals change by dr
        shift = np.linalg.lstsq(jac, -dr, rcond=None)[0][0]  # Gauss-Newton step
        print(f"{sc:8.2f} px   {u_of(jac):6.2f}   {u_of(jac0):6.2f}    {u_of(jd):6.2f}"
              f"        {100 * shift / ref.CD:+6.2f} %")  # fmt: skip


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--throws", type=int, default=60)
    ap.add_argument("--seed", type=int, default=13)
    ap.add_argument("--cameras", default="1,2")
    ap.add_argument("--source", choices=("model", "footage"), default="model")
    ap.add_argument("--centroid-noise", default="0.02,0.1")
    ap.add_argument("--diameter-noise", default="0.03,0.1")
    ap.add_argument("--unstated", action="store_true", help="do not state the noise levels")
    ap.add_argument("--diameter-measure", default="estimate")
    ap.add_argument("--diameter-scale", default="estimate")
    ap.add_argument("--bound", action="store_true", help="print the one-camera bound table")
    ap.add_argument("--quick", action="store_true", help="12 throws")
    ap.add_argument("--each", action="store_true", help="print every throw")
    ap.add_argument("--light", default=None, type=lambda v: tuple(float(c) for c in v.split(",")),
                    help="footage: direction towards the lamp in camera axes, e.g. -0.7,-0.3,-0.65 "
                    "(default: the renderer's, about 20 degrees off the axis)")  # fmt: skip
    ap.add_argument("--ambient", default=None, type=float,
                    help="footage: share of the ball's brightness independent of the lamp "
                    "(default: the renderer's 0.7)")  # fmt: skip
    args = ap.parse_args()
    n_throws = 12 if args.quick else args.throws
    centroid = tuple(float(x) for x in args.centroid_noise.split(","))
    diameter = (
        "same" if args.diameter_noise == "same"
        else tuple(float(x) for x in args.diameter_noise.split(","))
    )  # fmt: skip
    seeds = np.random.SeedSequence(args.seed).spawn(n_throws)
    throws = [draw(np.random.default_rng(s.spawn(1)[0]), centroid, diameter) for s in seeds]
    if args.source == "model":
        print(f"source: model observations + white noise, centroid {centroid} px, diameter "
              f"{diameter} px, {'not ' if args.unstated else ''}stated to the fit; "
              f"diameter measure {args.diameter_measure}; {n_throws} throws, seed {args.seed}")  # fmt: skip
    else:
        print(f"source: rendered footage tracked by detect_specimen; diameter measure "
              f"{args.diameter_measure}; {n_throws} throws, seed {args.seed}; lamp "
              f"{args.light or 'default'}, ambient {args.ambient or 'default'}")  # fmt: skip
    table = []
    for n_cam in (int(c) for c in args.cameras.split(",")):
        t0 = time.perf_counter()
        rows = []
        for th, s in zip(throws, seeds):
            rows.append(one_throw(th, n_cam, s, args))
            if args.each and rows[-1].success:
                r = rows[-1]
                drift = (f", diameter drift {r.tracker[3]:+.3f} px, {r.tracker[5]:.0f} of "
                         f"{FRAMES} frames measured" if r.tracker else "")  # fmt: skip
                print(f"  throw {len(rows)}: {th.angle:+.2f} deg, readout {1e3 * th.readout:.2f} "
                      f"ms, exposure {1e3 * th.exposure:.2f} ms: (Cd - t)/u "
                      f"{(r.cd - ref.CD) / r.u:+.2f}, U/Cd {100 * r.expanded / r.cd:.2f} %"
                      f"{drift}", flush=True)  # fmt: skip
        label = "one camera" if n_cam == 1 else f"{n_cam} cameras"
        print(f"\n{label}: {time.perf_counter() - t0:.0f} s")
        print(HEADER)
        lines = [summary(f"{label}", rows),
                 summary("  global shutter", [r for r in rows if r.readout == 0.0]),
                 summary("  rolling shutter", [r for r in rows if r.readout > 0.0])]  # fmt: skip
        print("\n".join(lines))
        table.append(lines[0])
        tr = [r.tracker for r in rows if r.tracker]
        if tr:
            m = np.mean(tr, axis=0)
            drift = np.array([t[3] for t in tr])
            print(f"tracker: centroid RMS error {m[0]:.3f} px per coordinate (stated median "
                  f"{m[1]:.3f}); diameter RMS error against the depth diameter (after a "
                  f"scale) {m[2]:.3f} px (stated median {m[4]:.3f}); its linear drift over "
                  f"the flight: mean {drift.mean():+.3f} px, RMS "
                  f"{np.sqrt(np.mean(drift**2)):.3f} px, largest {np.abs(drift).max():.3f} px; "
                  f"frames measured per camera: mean {m[5]:.1f} of {FRAMES}")  # fmt: skip
    if len(table) > 1:
        print("\none camera vs two cameras (the same throws):")
        print(HEADER)
        print("\n".join(table))
    if args.bound:
        bound_table(args.diameter_measure == "estimate", args.diameter_scale == "estimate")


if __name__ == "__main__":
    main()
