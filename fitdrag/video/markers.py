"""ArUco markers [1]_ in one image, their corners refined to a small fraction of a pixel.

:func:`detect_markers` finds the markers of one dictionary and returns one
:class:`MarkerObservation` per marker (corners, side, angle and the corners' precision);
:mod:`fitdrag.video.calibration` turns them into a calibration.

Marker corners
--------------
Markers are found with ``cv2.aruco.ArucoDetector`` with ``CORNER_REFINE_SUBPIX`` (which runs
``cv2.cornerSubPix``).  That alone biases the scale: ``cornerSubPix`` looks for the point
where the image gradient is orthogonal to the lines towards it, which the rounded (blurred,
pixel-integrated) outer corner of a marker satisfies *inside* the true corner, so every side
comes out short.  Measured on synthetic renders (``benchmarks/bench_marker_scale.py``: markers
area-sampled through a known homography, Gaussian optics blur sigma 0-1.5 px applied before
pixel integration, noise sigma 2 grey levels on a 25..200 contrast, random roll, sub-pixel
position and slight perspective; 20-48 markers per cell), relative side error:

    side [px]           20           30           50           80           120
    cornerSubPix   -2.4..-4.2 %  -1.5..-2.5 %  -0.6..-1.5 %  -0.24..-0.74 % -0.16..-0.50 %

Each corner is therefore refined again from the marker's outer edges.  Along the middle 70 %
of each side, intensity profiles across the edge (cubic-spline interpolation) locate the
crossing of the level halfway between the black border and the white surround; each profile
is re-centred on its crossing (so its two ends sit symmetrically about the edge) and measured
again; the black level is read only on profiles whose inner neighbour cells are black (the
marker's own bit pattern tells which), because a white data cell next to the border lifts it.
A symmetric blur does not move the half-level crossing of a straight step edge, so this
removes the rounding bias.  A straight line is fitted to each side's edge points (total least
squares, one 3-sigma rejection pass, points undistorted first when a lens model is given) and
the corners are the intersections of neighbouring lines.  Measured the same way:

    side [px]           20           30           50           80           120
    edge lines     -0.09..+0.10 % -0.00..+0.05 % -0.005..0.00 % -0.002..0.00 % 0.000 %
    corner RMS [px]  0.03-0.14     0.02-0.05     0.016-0.06    0.010-0.03    0.008-0.023
    predicted [px]   0.02-0.06     0.014-0.035   0.011-0.023   0.009-0.019   0.007-0.016

(corner RMS per coordinate against the exact corners; "predicted" is the precision the edge
fits report, used for the uncertainty).  The remaining bias is not corrected (it depends on
the blur, which the calibration does not know and which cannot be told from the data of one
image with confidence); its bound ``b(L) = 1.5e-4 (50 px / L)^3`` (L the side in px; covers
the table) enters the scale uncertainty as a rectangular distribution, ``u = b / sqrt(3)``
(GUM 4.3.7 [2]_), and is reported in the calibration's
``details["scale_bias_bound_relative"]``.  Markers too close to the image border for edge
profiles keep their ``cornerSubPix`` corners (flagged in ``details["corner_refinement"]``)
with the bound ``0.9 px / L``.

References
----------
.. [1] S. Garrido-Jurado, R. Munoz-Salinas, F. J. Madrid-Cuevas and M. J. Marin-Jimenez,
   "Automatic generation and detection of highly reliable fiducial markers under
   occlusion", Pattern Recognition 47(6), 2280-2292, 2014.
.. [2] JCGM 100:2008, *Evaluation of measurement data - Guide to the expression of
   uncertainty in measurement* (GUM): 4.3.7 (rectangular distribution).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from fitdrag.errors import InputError
from fitdrag.video.lens import LensModel

__all__ = [
    "DEFAULT_DICTIONARY",
    "MarkerObservation",
    "aruco_dictionary",
    "as_grey",
    "detect_markers",
    "marker_dictionaries",
    "marker_scale_bias_bound",
]

#: Default ArUco dictionary.
DEFAULT_DICTIONARY = "DICT_4X4_50"

#: Half length of the final edge profiles, in marker cells (3/8: 6 cells -> side / 16).
PROFILE_HALF_CELLS = 0.375


def _cv2():
    import cv2

    return cv2


def marker_dictionaries() -> tuple[str, ...]:
    """Names of the ArUco dictionaries OpenCV offers (e.g. "DICT_4X4_50")."""
    cv2 = _cv2()
    return tuple(sorted(n for n in dir(cv2.aruco) if n.startswith("DICT_")))


def aruco_dictionary(name: str):
    """The OpenCV ArUco dictionary called ``name`` ("DICT_4X4_50" or "4x4_50"), and its full
    name; an unknown name lists the valid ones."""
    cv2 = _cv2()
    key = str(name).strip().upper()
    if not key.startswith("DICT_"):
        key = "DICT_" + key
    names = marker_dictionaries()
    if key not in names:
        raise InputError(
            f"--marker-dictionary: unknown ArUco dictionary {name!r}; choose one of "
            f"{', '.join(names)}."
        )
    return key, cv2.aruco.getPredefinedDictionary(getattr(cv2.aruco, key))


def marker_scale_bias_bound(side_px: Any, refinement: str = "edge-lines") -> np.ndarray:
    """Bound of the relative scale bias of marker corners.

    Edge-line refinement: ``b(L) = 1.5e-4 (50 px / L)^3``; ``cornerSubPix`` alone:
    ``b(L) = 0.9 px / L`` (its corners sit inside the true ones, shortening each side by up
    to about 0.85 px).  Both measured on synthetic renders, see the module notes.

    Parameters
    ----------
    side_px : array_like
        Marker side length in the image. [px]
    refinement : {"edge-lines", "subpix"}
        How the corners were refined.

    Returns
    -------
    ndarray
        Bound of the relative bias (the measured scale may be too large or too small by up
        to this fraction). [1]
    """
    side = np.asarray(side_px, dtype=float)
    if refinement == "subpix":
        return 0.9 / side
    return 1.5e-4 * (50.0 / side) ** 3


@dataclass(frozen=True, eq=False)
class MarkerObservation:
    """One ArUco marker found in an image.

    Parameters
    ----------
    id : int
        Marker id in its dictionary.
    corners : ndarray, shape (4, 2)
        Corners (top-left, top-right, bottom-right, bottom-left, as seen upright) in
        undistorted image pixels, y down. [px]
    corners_raw : ndarray, shape (4, 2)
        The same corners in the recorded image (before lens undistortion). [px]
    corner_sigma_px : ndarray, shape (4,)
        Standard uncertainty of each corner coordinate from the edge fits. [px]
    side_px : float
        Side length from a least-squares square fitted to the corners. [px]
    angle_deg : float
        Direction of the marker's top edge, counter-clockwise on screen from the image's
        rightward axis. [deg]
    square_rms_px : float
        RMS distance of the corners from the fitted square. [px]
    refinement : str
        "edge-lines", or "subpix" where the edge fit could not be made (marker at the image
        border).
    """

    id: int
    corners: np.ndarray
    corners_raw: np.ndarray
    corner_sigma_px: np.ndarray
    side_px: float
    angle_deg: float
    square_rms_px: float
    refinement: str

    @property
    def side_sigma_px(self) -> float:
        """Standard uncertainty of :attr:`side_px` from the corner precision. [px]"""
        # Least-squares similarity fit of a square's 4 corners (unit square: sum |q|^2 = 2):
        # var(side) = sigma^2 / 2.
        return float(np.sqrt(np.mean(self.corner_sigma_px**2) / 2.0))


def as_grey(image: Any) -> np.ndarray:
    """One frame (grey or colour, any bit depth) as a float64 grey image."""
    cv2 = _cv2()
    img = np.asarray(image)
    if img.ndim == 3 and img.shape[2] in (3, 4):
        img = cv2.cvtColor(img[..., :3].astype(np.float32), cv2.COLOR_BGR2GRAY)
    if img.ndim != 2 or img.size == 0:
        raise InputError(
            f"image: expected a 2-D grey image (or colour, HxWx3), got an array of shape "
            f"{np.shape(image)}; pass one frame of the footage."
        )
    return img.astype(np.float64)


def _to_u8(grey: np.ndarray) -> np.ndarray:
    finite = grey[np.isfinite(grey)]
    if finite.size == 0:
        return np.zeros(grey.shape, np.uint8)
    lo, hi = np.percentile(finite, [0.1, 99.9])
    if not hi > lo:
        return np.zeros(grey.shape, np.uint8)
    g = np.nan_to_num(grey, nan=lo)
    return np.clip((g - lo) * (255.0 / (hi - lo)), 0, 255).round().astype(np.uint8)


def _fit_square(corners: np.ndarray) -> tuple[float, float, float]:
    """Least-squares similarity fit of a square to 4 corners (TL, TR, BR, BL; y down).

    Returns side [px], screen angle of the top edge [deg, counter-clockwise] and the RMS
    distance of the corners from the fitted square [px].
    """
    q = np.array([-0.5 - 0.5j, 0.5 - 0.5j, 0.5 + 0.5j, -0.5 + 0.5j])  # unit square, y down
    z = corners[:, 0] + 1j * corners[:, 1]
    zc = z - z.mean()
    c = np.sum(np.conj(q) * zc) / np.sum(np.abs(q) ** 2)
    r = zc - c * q
    # c's argument is the rotation in y-down image axes (clockwise on screen).
    return float(abs(c)), float(-math.degrees(np.angle(c))), float(np.sqrt(np.mean(abs(r) ** 2)))


def _edge_offsets(
    crop: np.ndarray,
    base: np.ndarray,
    nrm: np.ndarray,
    offs: np.ndarray,
    clean: np.ndarray | None = None,
    iterations: int = 3,
) -> np.ndarray:
    """Sub-pixel offsets along ``nrm`` of an edge crossing near each point of ``base``.

    On each profile (cubic-spline samples of the prefiltered ``crop`` at ``base + (c + offs)
    nrm``) the edge is where the intensity crosses the level halfway between the inner and the
    outer level; the profile is re-centred on the crossing and measured again, so its ends sit
    symmetrically about the edge (a symmetric blur then leaves the crossing unbiased).  The
    outer level is each profile's own outer end (white surround).  The inner level is the mean
    inner end of the ``clean`` profiles (those whose neighbouring cells inside the border are
    black): next to a white data cell the inner end is lifted by the blur of that cell's edge.
    Returns NaN where no crossing is found, the crossing runs away by more than twice the
    profile's half length, or the profile leaves the crop.
    """
    from scipy.ndimage import map_coordinates

    n = base.shape[0]
    half = float(offs[-1])
    c = np.zeros(n)
    ok = np.ones(n, dtype=bool)
    mid_idx = offs.size // 2
    rows = np.arange(n)
    hmax, wmax = crop.shape[0] - 1, crop.shape[1] - 1
    for _ in range(iterations):
        t_all = c[:, None] + offs[None, :]
        pts = base[:, None, :] + t_all[..., None] * nrm[None, None, :]
        inside = (
            (pts[..., 0] >= 0) & (pts[..., 0] <= wmax) & (pts[..., 1] >= 0) & (pts[..., 1] <= hmax)
        ).all(axis=1)
        ok &= inside
        prof = map_coordinates(
            crop,
            [pts[..., 1].ravel(), pts[..., 0].ravel()],
            order=3,
            mode="nearest",
            prefilter=False,
        ).reshape(n, offs.size)
        outer = prof[:, -1]
        inner = prof[:, 0]
        if clean is not None and np.count_nonzero(ok & clean) >= 3:
            inner = np.full(n, float(np.mean(inner[ok & clean])))
        sign = np.sign(outer - inner)
        p = (prof - 0.5 * (inner + outer)[:, None]) * sign[:, None]
        cross = (p[:, :-1] < 0) & (p[:, 1:] >= 0)
        dist = np.where(cross, np.abs(np.arange(offs.size - 1) + 0.5 - mid_idx), np.inf)
        j = np.argmin(dist, axis=1)
        found = np.isfinite(dist[rows, j]) & (sign != 0)
        p0, p1 = p[rows, j], p[rows, j + 1]
        with np.errstate(divide="ignore", invalid="ignore"):
            frac = np.where(p1 != p0, -p0 / (p1 - p0), 0.5)
        new_c = t_all[rows, j] + frac * (offs[1] - offs[0])
        ok &= found & (np.abs(new_c) <= 2 * half)
        c = np.where(ok, new_c, c)
    return np.where(ok, c, np.nan)


def _clean_profiles(cells: np.ndarray, side_index: int, f: np.ndarray) -> np.ndarray:
    """Profiles of one side whose inner neighbourhood (cells within half a cell along the side,
    one cell in from the border) is all black; ``cells`` is the marker's cell image (0 black),
    rows top to bottom as seen upright."""
    m = cells.shape[0]
    out = np.ones(f.size, dtype=bool)
    for df in (-0.5 / m, 0.0, 0.5 / m):
        k = np.clip(np.floor((f + df) * m).astype(int), 0, m - 1)
        if side_index == 0:  # top, left to right
            r, c = np.full_like(k, 1), k
        elif side_index == 1:  # right, top to bottom
            r, c = k, np.full_like(k, m - 2)
        elif side_index == 2:  # bottom, right to left
            r, c = np.full_like(k, m - 2), m - 1 - k
        else:  # left, bottom to top
            r, c = m - 1 - k, np.full_like(k, 1)
        out &= cells[r, c] == 0
    return out


def _edge_lines(
    grey: np.ndarray,
    corners: np.ndarray,
    lens: LensModel | None,
    half_cells: float,
    cells: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray] | None:
    """Refine a marker's corners as intersections of lines fitted to its outer edges.

    ``half_cells``: half length of the edge profiles in marker cells; ``cells``: the marker's
    cell image (0 = black) for choosing the profiles that set the inner level.
    Returns (corners (4, 2) undistorted px, per-corner coordinate sigma (4,) px) or None.
    """
    from scipy.ndimage import spline_filter

    h, w = grey.shape
    side = float(np.mean(np.linalg.norm(np.roll(corners, -1, axis=0) - corners, axis=1)))
    n_cells = 6 if cells is None else cells.shape[0]
    half = max(side / n_cells * half_cells, 1.0)
    lo = np.maximum(np.floor(corners.min(axis=0) - 3 * half - 3).astype(int), 0)
    hi = np.minimum(np.ceil(corners.max(axis=0) + 3 * half + 3).astype(int), [w - 1, h - 1])
    if np.any(hi - lo < 4):
        return None
    crop = spline_filter(grey[lo[1] : hi[1] + 1, lo[0] : hi[0] + 1], order=3, mode="nearest")
    n = int(np.clip(round(0.7 * side), 8, 400))
    steps = max(int(math.ceil(half / 0.25)), 4)
    offs = np.linspace(-half, half, 2 * steps + 1)
    centre = corners.mean(axis=0)
    lines = []
    for k in range(4):
        a, b = corners[k], corners[(k + 1) % 4]
        d = (b - a) / np.linalg.norm(b - a)
        nrm = np.array([d[1], -d[0]])
        if np.dot(centre - 0.5 * (a + b), nrm) > 0:
            nrm = -nrm  # outwards
        f = np.linspace(0.15, 0.85, n)
        base = a[None, :] + f[:, None] * (b - a)[None, :]
        clean = None if cells is None else _clean_profiles(cells, k, f)
        pos = _edge_offsets(crop, base - lo[None, :], nrm, offs, clean)
        good = np.isfinite(pos)
        if good.sum() < 6:
            return None
        ep = base[good] + pos[good, None] * nrm[None, :]
        if lens is not None:
            ex, ey = lens.undistort_points(ep[:, 0], ep[:, 1])
            ep = np.stack([ex, ey], axis=1)
        # Robust total-least-squares line: one pass of 3-sigma rejection.
        for _ in range(2):
            c0 = ep.mean(axis=0)
            _, _, vt = np.linalg.svd(ep - c0)
            r = (ep - c0) @ vt[1]
            sd = float(np.sqrt(np.sum(r**2) / max(r.size - 2, 1)))
            keep = np.abs(r) <= max(3.0 * sd, 1e-9)
            if keep.all() or keep.sum() < 6:
                break
            ep = ep[keep]
        c0 = ep.mean(axis=0)
        _, _, vt = np.linalg.svd(ep - c0)
        dirn, nn = vt[0], vt[1]
        r = (ep - c0) @ nn
        s_along = (ep - c0) @ dirn
        sd = float(np.sqrt(np.sum(r**2) / max(r.size - 2, 1)))
        lines.append((c0, dirn, nn, sd, r.size, float(np.sum(s_along**2))))
    out = np.empty((4, 2))
    sig = np.empty(4)
    for k in range(4):
        c1, d1, n1, sd1, m1, ss1 = lines[(k - 1) % 4]
        c2, d2, n2, sd2, m2, ss2 = lines[k]
        a_mat = np.array([d1, -d2]).T
        if abs(np.linalg.det(a_mat)) < 1e-6:
            return None
        t = np.linalg.solve(a_mat, c2 - c1)
        out[k] = c1 + t[0] * d1
        # Perpendicular position variance of each line at the corner (offset + tilt).
        s1 = float(np.dot(out[k] - c1, d1))
        s2 = float(np.dot(out[k] - c2, d2))
        v1 = sd1**2 * (1.0 / m1 + s1**2 / ss1)
        v2 = sd2**2 * (1.0 / m2 + s2**2 / ss2)
        nmat = np.array([n1, n2])
        ninv = np.linalg.inv(nmat)
        cov = ninv @ np.diag([v1, v2]) @ ninv.T
        sig[k] = math.sqrt(0.5 * np.trace(cov))
    return out, sig


def detect_markers(
    image: Any,
    dictionary: str = DEFAULT_DICTIONARY,
    lens: LensModel | None = None,
    *,
    refine: str = "edges",
) -> tuple[MarkerObservation, ...]:
    """Find ArUco markers and their corners to sub-pixel precision.

    Parameters
    ----------
    image : ndarray
        One frame (grey or colour, any bit depth or float range).
    dictionary : str
        ArUco dictionary name, e.g. "DICT_4X4_50".
    lens : LensModel, optional
        Lens model: corners are returned undistorted (``corners``) and as recorded
        (``corners_raw``).
    refine : {"edges", "subpix"}
        "edges": edge-line refinement after ``cornerSubPix`` (see the module notes);
        "subpix": ``cornerSubPix`` only (biased for small markers; kept for comparison).

    Returns
    -------
    tuple of MarkerObservation
        Sorted by id; an id seen twice is an error (markers must be unique).
    """
    cv2 = _cv2()
    if refine not in ("edges", "subpix"):
        raise InputError(f"refine: expected 'edges' or 'subpix', got {refine!r}.")
    name, dic = aruco_dictionary(dictionary)
    grey = as_grey(image)
    u8 = _to_u8(grey)
    params = cv2.aruco.DetectorParameters()
    params.cornerRefinementMethod = cv2.aruco.CORNER_REFINE_SUBPIX
    params.cornerRefinementWinSize = 4
    params.cornerRefinementMaxIterations = 100
    params.cornerRefinementMinAccuracy = 0.001
    detector = cv2.aruco.ArucoDetector(dic, params)
    # The contrast stretch helps dim footage but can cost a marker whose cells it saturates;
    # look in the plain 8-bit rendering too and keep every id found in either.
    full = 255.0 if float(np.nanmax(grey)) <= 255.0 else 65535.0
    plain = np.clip(np.nan_to_num(grey) * (255.0 / full), 0, 255).round().astype(np.uint8)
    by_id: dict[int, np.ndarray] = {}
    for view in (u8, plain):
        found, ids, _ = detector.detectMarkers(view)
        if ids is None or len(ids) == 0:
            continue
        ids = [int(i) for i in np.ravel(ids)]
        seen = {}
        for i in ids:
            seen[i] = seen.get(i, 0) + 1
        dup = sorted(i for i, c in seen.items() if c > 1)
        if dup:
            raise InputError(
                f"markers: id(s) {', '.join(map(str, dup))} of {name} appear more than once in "
                f"the image; every marker in view must have its own id."
            )
        for i, c in zip(ids, found):
            by_id.setdefault(i, c)
    if not by_id:
        return ()
    ids = sorted(by_id)
    found = [by_id[i] for i in ids]
    cells_per_side = int(dic.markerSize) + 2
    obs = []
    for mid, c in sorted(zip(ids, found), key=lambda p: p[0]):
        raw = np.asarray(c, dtype=np.float64).reshape(4, 2)
        res = None
        if refine == "edges":
            cells = cv2.aruco.generateImageMarker(dic, mid, cells_per_side, borderBits=1)
            # Two passes: profiles half a cell long about the cornerSubPix sides, then
            # 3/8 cell about the first pass's sides.
            res = _edge_lines(grey, raw, lens, 0.5, cells)
            if res is not None:
                c1 = res[0]
                if lens is not None:
                    c1 = np.stack(lens.distort_points(c1[:, 0], c1[:, 1]), axis=1)
                res = _edge_lines(grey, c1, lens, PROFILE_HALF_CELLS, cells) or res
        if res is not None:
            corners, sig = res
            raw_ref = np.stack(
                lens.distort_points(corners[:, 0], corners[:, 1]) if lens else corners.T,
                axis=1,
            )
            how = "edge-lines"
        else:
            if lens is not None:
                ux, uy = lens.undistort_points(raw[:, 0], raw[:, 1])
                corners = np.stack([ux, uy], axis=1)
            else:
                corners = raw.copy()
            raw_ref = raw
            _, _, rms0 = _fit_square(corners)
            # No edge fits: 0.3 px, the scatter of cornerSubPix corners on synthetic renders
            # (benchmarks/bench_marker_scale.py), or the square-fit scatter if larger.
            sig = np.full(4, max(rms0, 0.3))
            how = "subpix"
        side, ang, rms = _fit_square(corners)
        for arr in (corners, raw_ref, sig):
            arr.setflags(write=False)
        obs.append(
            MarkerObservation(
                id=mid,
                corners=corners,
                corners_raw=raw_ref,
                corner_sigma_px=sig,
                side_px=side,
                angle_deg=ang,
                square_rms_px=rms,
                refinement=how,
            )
        )
    return tuple(obs)
