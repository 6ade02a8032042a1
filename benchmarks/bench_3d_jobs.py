"""Benchmark: whole 3-D jobs (footage -> certificate numbers) on rendered throws, one camera
and two cameras, against the truth of the simulation (all synthetic).

For each seed a throw is drawn (out-of-plane angle 0-3°, 0-5 cm in front of the board,
readout 0 or 1 ms, true Cd 0.45-0.55), rendered by :mod:`fitdrag.run.scenario_3d` for two
cameras 40° apart (the second late by a random fraction of a frame), and measured by the job
pipeline (:func:`fitdrag.run.pipeline.measure`) twice: with both cameras (`[[throws.views]]`,
offset unknown) and with the left camera alone (a footage throw with its lens).  Printed per
throw and in total: Cd, U (the job's expanded uncertainty: the full budget), (Cd - truth)/U
and U/Cd, the share of throws with |Cd - truth| <= U, and the U/Cd of the measurement's own
lines (fit, cameras, tracker) apart from the lab's stated inputs (specimen, air, gravity).

The defaults are the issue's target conditions: 200 frames at 500 frames/s, 1280 x 800 px.

Run:  python -P benchmarks/bench_3d_jobs.py [--seeds 6] [--frames 200] [--size 1280x800]
      [--keep DIR]
"""

from __future__ import annotations

import argparse
import math
import shutil
import tempfile
import time
from pathlib import Path

import numpy as np

from fitdrag.run.job_file import load_job
from fitdrag.run.pipeline import measure
from fitdrag.run.scenario_3d import CameraPlacement, Scenario3D, job_text, write_scenario

#: Budget lines of the measurement itself (the fit, the cameras and the tracker), as against
#: the lab's stated inputs (specimen, air, gravity, lift allowance).
CAMERA_AND_FIT = ("statistical", "pose_", "focal_length_", "readout_time_", "time_offset_",
                  "centroid_", "diameter_drift_", "length_scale", "frame_rate")  # fmt: skip


def one(seed: int, frames: int, folder: Path, size: tuple[int, int]) -> dict:
    rng = np.random.default_rng(seed)
    readout = float(rng.choice([0.0, 1e-3]))
    cams = [
        CameraPlacement("left", yaw=-20, focal_length=1100, readout_time=readout,
                        readout_time_uncertainty=5e-5 if readout else 0.0),
        CameraPlacement("right", yaw=20, focal_length=1100, readout_time=readout,
                        readout_time_uncertainty=5e-5 if readout else 0.0,
                        time_offset=float(rng.uniform(0.0, 2e-3))),
    ]  # fmt: skip
    cd = float(rng.uniform(0.45, 0.55))
    z0 = float(rng.uniform(0.0, 0.05))
    angle = float(rng.uniform(0.0, 3.0))
    kw = dict(frames=frames, image_size=size, out_of_plane=angle, cd=cd,
              start=(-0.05, 0.35, z0), seed=1000 + seed)  # fmt: skip
    sc = Scenario3D(cameras=cams, **kw)
    files = write_scenario(sc, folder)
    out = {"cd": cd, "angle": angle, "z0": z0, "readout": readout}
    for label, scen in (("two", sc), ("one", Scenario3D(cameras=cams[:1], **kw))):
        path = folder / f"{label}.toml"
        path.write_text(job_text(scen, files, number_prefix=label.upper()), encoding="utf-8")
        m = measure(load_job(path))
        res = m.content.result
        k = res.expanded_uncertainty / m.budget.combined_standard_uncertainty
        camera = math.sqrt(sum(ln.contribution**2 for ln in m.budget.lines
                               if ln.name.startswith(CAMERA_AND_FIT)))  # fmt: skip
        out[label] = (res.drag_coefficient, res.expanded_uncertainty, k * camera)
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=6)
    ap.add_argument("--frames", type=int, default=200)
    ap.add_argument("--size", default="1280x800", help="image width x height [px]")
    ap.add_argument("--keep", metavar="DIR")
    a = ap.parse_args()
    base = Path(a.keep) if a.keep else Path(tempfile.mkdtemp(prefix="bench3d_"))
    size = tuple(int(v) for v in a.size.lower().split("x"))
    t0 = time.perf_counter()
    rows = []
    print(
        "seed  angle  z0[mm] readout  truth   | two: Cd      U       (Cd-t)/U  U/Cd  "
        "| one: Cd      U       (Cd-t)/U  U/Cd"
    )
    for s in range(a.seeds):
        folder = base / f"seed{s}"
        r = one(s, a.frames, folder, size)
        rows.append(r)
        cells = []
        for k in ("two", "one"):
            c, u, _ = r[k]
            cells.append(f"{c:.4f}  {u:.4f}  {(c - r['cd']) / u:+.2f}    {100 * u / c:.2f} %")
        print(
            f"{s:4d}  {r['angle']:4.2f}°  {1e3 * r['z0']:5.1f}  {1e3 * r['readout']:3.0f} ms  "
            f"{r['cd']:.4f}  | {cells[0]} | {cells[1]}",
            flush=True,
        )
        if not a.keep:
            shutil.rmtree(folder, ignore_errors=True)
    for k, name in (("two", "two cameras"), ("one", "one camera")):
        z = np.array([(r[k][0] - r["cd"]) / r[k][1] for r in rows])
        rel = np.array([r[k][1] / r[k][0] for r in rows])
        cam = np.array([r[k][2] / r[k][0] for r in rows])
        print(
            f"{name}: |Cd - truth| <= U in {np.sum(np.abs(z) <= 1)} of {z.size}; "
            f"RMS (Cd - truth)/U {np.sqrt(np.mean(z**2)):.2f}; U/Cd median "
            f"{100 * np.median(rel):.2f} %, max {100 * rel.max():.2f} %; the camera and fit "
            f"lines alone: U/Cd median {100 * np.median(cam):.2f} %, max {100 * cam.max():.2f} %"
        )
    print(f"done in {time.perf_counter() - t0:.0f} s")


if __name__ == "__main__":
    main()
