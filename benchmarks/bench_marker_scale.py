"""Scale bias and corner precision of ArUco marker calibration, measured on synthetic renders.

Renders upright DICT_4X4_50 markers of known side into images through a known homography
(12 x 12 samples per pixel, a Gaussian point-spread function of standard deviation ``blur``
[px] applied before the pixels integrate, Gaussian noise of 2 grey levels on a 25..200
contrast), then finds them with
:func:`fitdrag.video.calibration.detect_markers` with corner refinement "subpix"
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

from fitdrag.video.calibration import (
    calibration_from_markers,
    detect_markers,
    marker_scale_bias_bound,
)


def render_markers(
    shape,
    layout,
    size,
    h_w2i,
    *,
    ss=12,
    blur=0.0,
    noise=0.0,
    rng=None,
    paper=200.0,
    ink=25.0,
    background=90.0,
    margin=0.5,
):
    """Upright markers (lower-left corners ``layout`` [m], side ``size`` [m]) on white paper.

    Each marker is rendered on a supersampled grid (``ss`` x ``ss`` samples per pixel), blurred
    there with a Gaussian point-spread function of standard deviation ``blur`` [px] (optics act
    before the pixels integrate) and area-averaged into pixels.  The paper's outline is drawn
    coarsely (it is far from the marker edges).
    """
    h, w = shape
    dic = cv2.aruco.getPredefinedDictionary(cv2.aruco.DICT_4X4_50)
    hi = np.linalg.inv(h_w2i)
    img = np.full((h, w), background)
    pad = int(np.ceil(4 * blur)) + 2
    for layer in ("paper", "marker"):
        for mid, (x0, y0) in layout.items():
            m = margin if layer == "paper" else 0.0
            quad = np.array(
                [
                    [x0 - m * size, y0 - m * size],
                    [x0 + (1 + m) * size, y0 - m * size],
                    [x0 + (1 + m) * size, y0 + (1 + m) * size],
                    [x0 - m * size, y0 + (1 + m) * size],
                ]
            )
            q = cv2.perspectiveTransform(quad[None], h_w2i)[0]
            u0, v0 = np.floor(q.min(0)).astype(int) - pad
            u1, v1 = np.ceil(q.max(0)).astype(int) + pad
            u0, v0, u1, v1 = max(u0, 0), max(v0, 0), min(u1, w - 1), min(v1, h - 1)
            if u1 <= u0 or v1 <= v0:
                continue
            s = ss if layer == "marker" else 4
            uu, vv = np.meshgrid(
                u0 + (np.arange((u1 - u0 + 1) * s) + 0.5) / s - 0.5,
                v0 + (np.arange((v1 - v0 + 1) * s) + 0.5) / s - 0.5,
            )
            den = hi[2, 0] * uu + hi[2, 1] * vv + hi[2, 2]
            a = ((hi[0, 0] * uu + hi[0, 1] * vv + hi[0, 2]) / den - x0) / size
            b = ((hi[1, 0] * uu + hi[1, 1] * vv + hi[1, 2]) / den - y0) / size
            inside = (a >= -m) & (a < 1 + m) & (b >= -m) & (b < 1 + m)
            if layer == "paper":
                up = np.repeat(np.repeat(img[v0 : v1 + 1, u0 : u1 + 1], s, 0), s, 1)
                up = np.where(inside, paper, up)
            else:
                bits = cv2.aruco.generateImageMarker(dic, mid, 6, borderBits=1)
                col = np.clip((a * 6).astype(int), 0, 5)
                row = np.clip(((1 - b) * 6).astype(int), 0, 5)
                up = np.where(inside, np.where(bits[row, col] > 0, paper, ink), paper)
                if blur > 0:
                    up = cv2.GaussianBlur(up, (0, 0), blur * s, borderType=cv2.BORDER_REPLICATE)
            img[v0 : v1 + 1, u0 : u1 + 1] = up.reshape(v1 - v0 + 1, s, u1 - u0 + 1, s).mean(
                axis=(1, 3)
            )
        if layer == "paper" and blur > 0:
            img = cv2.GaussianBlur(img, (0, 0), blur)
    if noise > 0:
        img = img + (rng or np.random.default_rng(0)).normal(0, noise, img.shape)
    return np.clip(img, 0, 255)


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
