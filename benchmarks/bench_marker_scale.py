"""Scale bias and corner precision of ArUco marker calibration, measured on synthetic renders.

Renders upright DICT_4X4_50 markers of known side into images through a known homography
(12 x 12 samples per pixel, a Gaussian point-spread function of standard deviation ``blur``
[px] applied before the pixels integrate, Gaussian noise of 2 grey levels on a 25..200
contrast), then finds them with
:func:`fitdrag.video.markers.detect_markers` with corner refinement "subpix"
(cv2.cornerSubPix only) and "edges" (edge-line refinement).  Prints, per marker side in
pixels and blur: markers found, mean and spread of the relative side error, the RMS corner
error against the exact corners and the corner precision the edge fits predict; then how the
stated scale uncertainty compares with the actual scale error (similarity and homography).

All images are synthetic.  Run:  python -P benchmarks/bench_marker_scale.py [--quick]
(``-P``: keep the benchmarks folder off the import path.)
"""

from __future__ import annotations

import argparse
import time

import cv2
import numpy as np

from fitdrag.video.calibration import calibration_from_markers
from fitdrag.video.markers import detect_markers, marker_scale_bias_bound
from fitdrag.video.synthetic import render_marker_board as render_markers


def scene(side_px, trial, perspective):
    """A row of 4 markers 0.05 m wide with random roll, sub-pixel offset and tilt."""
    rng = np.random.default_rng(1000 * trial + int(side_px))
    size = 0.05
    k = side_px / size
    ang = np.radians(rng.uniform(-8, 8))
    c, s = np.cos(ang), np.sin(ang)
    layout = {i: (i * 3 * size, (i % 2) * 2 * size) for i in range(4)}
    o = (40 + 1.5 * side_px + rng.uniform(0, 1), 40 + 3.5 * side_px + rng.uniform(0, 1))
    h = np.array([[k * c, -k * s, o[0]], [-k * s, -k * c, o[1]], [0, 0, 1.0]])
    if perspective:  # the plane turned a few degrees about the vertical axis
        h = h @ np.array([[1, 0, 0], [0, 1, 0], [rng.uniform(-0.6, 0.6), 0, 1.0]])
    shape = (int(6 * side_px + 80), int(14 * side_px + 80))
    return layout, size, h, shape, rng


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="fewer trials")
    args = ap.parse_args()
    trials = 4 if args.quick else 12
    print("side_px blur refine  found  bias%    sd%   corner_rms_px  predicted_px  bound%")
    t0 = time.perf_counter()
    for side in (20, 30, 50, 80, 120):
        for blur in (0.0, 0.7, 1.0, 1.5):
            res = {"subpix": [], "edges": []}
            err = {"subpix": [], "edges": []}
            pred = []
            fallback = 0
            for trial in range(trials):
                layout, size, h, shape, rng = scene(side, trial, perspective=trial % 2 == 1)
                img = render_markers(shape, layout, size, h, blur=blur, noise=2.0, rng=rng)
                for how in ("subpix", "edges"):
                    for ob in detect_markers(img, refine=how):
                        if how == "edges" and ob.refinement != "edge-lines":
                            fallback += 1  # at the image border: cornerSubPix corners kept
                            continue
                        x0, y0 = layout[ob.id]
                        world = np.array(
                            [[x0, y0 + size], [x0 + size, y0 + size], [x0 + size, y0], [x0, y0]]
                        )
                        true = cv2.perspectiveTransform(world[None], h)[0]
                        side_true = np.mean(np.linalg.norm(np.roll(true, -1, 0) - true, axis=1))
                        side_meas = np.mean(
                            np.linalg.norm(np.roll(ob.corners, -1, 0) - ob.corners, axis=1)
                        )
                        res[how].append(side_meas / side_true - 1)
                        err[how].append(ob.corners - true)
                        if how == "edges":
                            pred.append(ob.corner_sigma_px)
            for how in ("subpix", "edges"):
                r = np.array(res[how])
                if r.size == 0:
                    print(f"{side:7d} {blur:4.1f} {how:7s} {0:5d}   (none found)")
                    continue
                e = np.array(err[how])
                p = f"{np.sqrt(np.mean(np.square(pred))):12.3f}" if how == "edges" else " " * 12
                bound = 100 * float(
                    marker_scale_bias_bound(side, "edge-lines" if how == "edges" else "subpix")
                )
                fb = f"  ({fallback} at the border left out)" if how == "edges" and fallback else ""
                print(
                    f"{side:7d} {blur:4.1f} {how:7s} {r.size:5d} {100 * r.mean():7.3f} "
                    f"{100 * r.std():6.3f} {np.sqrt(np.mean(e**2)):14.3f} {p}  {bound:6.3f}"
                    f"{fb}"
                )
    print()
    print("scale uncertainty check: z = (scale - true) / u, 4 markers, no perspective")
    print("side_px blur  method      n  max|z|  share |z|<2")
    for side in (25, 40, 70):
        for blur in (0.7, 1.2):
            z = {"markers": [], "homography": []}
            for trial in range(trials):
                layout, size, h, shape, rng = scene(side, trial, perspective=False)
                img = render_markers(shape, layout, size, h, blur=blur, noise=2.0, rng=rng)
                try:
                    sim = calibration_from_markers(img, size)
                    hom = calibration_from_markers(img, size, layout=layout)
                except ValueError:
                    continue
                true = 1.0 / np.hypot(h[0, 0], h[1, 0])  # similarity: same scale everywhere
                for cal in (sim, hom):
                    z[cal.method].append((cal.scale / true - 1) / cal.scale_relative_uncertainty)
            for method, v in z.items():
                a = np.abs(v)
                print(
                    f"{side:7d} {blur:4.1f}  {method:10s} {a.size:3d}  {a.max():6.2f}  "
                    f"{np.mean(a < 2):6.2f}"
                )
    print(f"elapsed {time.perf_counter() - t0:.0f} s")


if __name__ == "__main__":
    main()
