"""Compiled kernel: a sphere's outline centre and depth diameter, with d/d(point), for n points.

The formulas of :func:`fitdrag.geometry.views.outline_centre` and
:func:`fitdrag.geometry.views.outline_depth_diameter` (pose ``X_c = R X_w + t``, the outline
centre's normalised coordinates ``(a, b) c / (c^2 - rho^2)`` and the depth diameter
``2 f rho / sqrt(c^2 - rho^2)`` from the cone of tangent rays, Hartley and Zisserman [2]_
sec. 8.3), then OpenCV's lens model [1]_ (radial ``k1..k6``, tangential ``p1, p2``, thin
prism ``s1..s4``) and ``u = fx x'' + cx``, ``v = fy y'' + cy``, written as one loop over the
points instead of a dozen numpy passes.  The operations are those of the numpy code in the
same order, compiled without ``fastmath``, so the results agree with it to rounding (the
pose product may differ in the last bit from a BLAS product).

Lens parameters arrive as one flat array (a :class:`~fitdrag.geometry.camera.Camera`'s
``_lens``, built with it): ``fx, fy, cx, cy``, the 12 distortion coefficients in OpenCV's
order ``k1, k2, p1, p2, k3, k4, k5, k6, s1, s2, s3, s4`` (zero where not given, as in
OpenCV), the rotation ``R`` row by row and the translation ``t``.

numba compiles the kernel on first use (not at import) and keeps it in its on-disk cache.

References
----------
.. [1] OpenCV 5 documentation, "Camera Calibration and 3D Reconstruction" (calib3d module):
   the pinhole camera model and its distortion model; ``projectPoints``.
.. [2] R. Hartley and A. Zisserman, *Multiple View Geometry in Computer Vision*, 2nd ed.,
   Cambridge University Press, 2004, sec. 8.3 (the cone of rays tangent to a quadric).
"""

from __future__ import annotations

import functools
import math

import numba
import numpy as np
from numba import types

#: Bits of the kernel's ``mode``: centre, its Jacobian, depth diameter, its Jacobian.
CENTRE, CENTRE_JAC, DEPTH, DEPTH_JAC = 1, 2, 4, 8


def _outline(lens, radius, pw, mode, pix, jpix, depth, diam, jdiam):
    """Fill ``pix`` (n, 2), ``jpix`` (n, 2, 3), ``depth`` (n,), ``diam`` (n,), ``jdiam``
    (n, 3) as ``mode`` asks; returns False when a point is not finite (nothing else done)."""
    n = pw.shape[0]
    for i in range(n):
        for k in range(3):
            if not math.isfinite(pw[i, k]):
                return False
    fx, fy, cx, cy = lens[0], lens[1], lens[2], lens[3]
    k1, k2, p1, p2, k3 = lens[4], lens[5], lens[6], lens[7], lens[8]
    k4, k5, k6 = lens[9], lens[10], lens[11]
    s1, s2, s3, s4 = lens[12], lens[13], lens[14], lens[15]
    r00, r01, r02 = lens[16], lens[17], lens[18]
    r10, r11, r12 = lens[19], lens[20], lens[21]
    r20, r21, r22 = lens[22], lens[23], lens[24]
    t0, t1, t2 = lens[25], lens[26], lens[27]
    # groups of coefficients that are all zero add exact zeros: left out (same numbers)
    radial = k1 != 0.0 or k2 != 0.0 or k3 != 0.0
    rational = k4 != 0.0 or k5 != 0.0 or k6 != 0.0
    tangential = p1 != 0.0 or p2 != 0.0
    prism = s1 != 0.0 or s2 != 0.0 or s3 != 0.0 or s4 != 0.0
    lensed = radial or rational or tangential or prism
    want_c = (mode & CENTRE) != 0
    want_cj = (mode & CENTRE_JAC) != 0
    want_d = (mode & DEPTH) != 0
    want_dj = (mode & DEPTH_JAC) != 0
    rho = radius
    rho2 = radius**2
    f = math.sqrt(fx * fy)
    nan = math.nan
    for i in range(n):
        xw, yw, zw = pw[i, 0], pw[i, 1], pw[i, 2]
        a = xw * r00 + yw * r01 + zw * r02 + t0
        b = xw * r10 + yw * r11 + zw * r12 + t1
        c = xw * r20 + yw * r21 + zw * r22 + t2
        depth[i] = c
        ok = c > rho
        if want_d:
            if ok:
                q = c * c - rho * rho
                diam[i] = 2.0 * f * rho / math.sqrt(q)
                dz = -2.0 * f * rho * c / q**1.5
            else:
                diam[i] = nan
                dz = nan
            if want_dj:
                jdiam[i, 0] = dz * r20
                jdiam[i, 1] = dz * r21
                jdiam[i, 2] = dz * r22
        if not want_c:
            continue
        den = c * c - rho2
        g = c / den if ok else nan
        x = a * g
        y = b * g
        r2 = x * x + y * y
        num = 1.0 + r2 * (k1 + r2 * (k2 + r2 * k3)) if radial else 1.0
        dn = 1.0 + r2 * (k4 + r2 * (k5 + r2 * k6)) if rational else 1.0
        qq = num / dn if rational else num
        xd = x * qq
        yd = y * qq
        if tangential:
            xd = xd + 2.0 * p1 * x * y + p2 * (r2 + 2.0 * x * x)
            yd = yd + p1 * (r2 + 2.0 * y * y) + 2.0 * p2 * x * y
        if prism:
            xd = xd + r2 * (s1 + s2 * r2)
            yd = yd + r2 * (s3 + s4 * r2)
        pix[i, 0] = fx * xd + cx
        pix[i, 1] = fy * yd + cy
        if not want_cj:
            continue
        if lensed:  # d(x'', y'') / d(x', y')
            dnum = k1 + r2 * (2.0 * k2 + 3.0 * k3 * r2)
            dden = k4 + r2 * (2.0 * k5 + 3.0 * k6 * r2)
            dq = (dnum * dn - num * dden) / dn**2
            sx = s1 + 2.0 * s2 * r2
            sy = s3 + 2.0 * s4 * r2
            e00 = qq + 2.0 * x * x * dq + 2.0 * p1 * y + 6.0 * p2 * x + 2.0 * x * sx
            e01 = 2.0 * x * y * dq + 2.0 * p1 * x + 2.0 * p2 * y + 2.0 * y * sx
            e10 = 2.0 * x * y * dq + 2.0 * p1 * x + 2.0 * p2 * y + 2.0 * x * sy
            e11 = qq + 2.0 * y * y * dq + 6.0 * p1 * y + 2.0 * p2 * x + 2.0 * y * sy
        else:
            e00 = 1.0 + 0.0 * r2
            e11 = e00
            e01 = 0.0 * r2
            e10 = e01
        d00, d01, d10, d11 = e00 * fx, e01 * fx, e10 * fy, e11 * fy
        gp = -(c * c + rho2) / (den * den) if ok else nan
        # d(pixel)/d(a, b, c) = dd @ [[g, 0, a g'], [0, g, b g']], then times R
        ag, bg = a * gp, b * gp
        j00, j01, j02 = d00 * g, d01 * g, d00 * ag + d01 * bg
        j10, j11, j12 = d10 * g, d11 * g, d10 * ag + d11 * bg
        jpix[i, 0, 0] = j00 * r00 + j01 * r10 + j02 * r20
        jpix[i, 0, 1] = j00 * r01 + j01 * r11 + j02 * r21
        jpix[i, 0, 2] = j00 * r02 + j01 * r12 + j02 * r22
        jpix[i, 1, 0] = j10 * r00 + j11 * r10 + j12 * r20
        jpix[i, 1, 1] = j10 * r01 + j11 * r11 + j12 * r21
        jpix[i, 1, 2] = j10 * r02 + j11 * r12 + j12 * r22
    return True


_VEC = types.float64[::1]
_MAT = types.float64[:, ::1]
_SIGNATURE = types.boolean(
    _VEC, types.float64, _MAT, types.int64, _MAT, types.float64[:, :, ::1], _VEC, _VEC, _MAT
)


@functools.cache
def compiled_outline():
    """The kernel compiled for its one signature (from numba's disk cache if present)."""
    return numba.njit(_SIGNATURE, cache=True)(_outline)


def outline(lens, radius, points, mode):
    """(ok, pixels (n, 2) [px], d pixels/d point (n, 2, 3) [px/m], depth (n,) [m], depth
    diameter (n,) [px], d diameter/d point (n, 3) [px/m]) of sphere centres ``points``
    (n, 3) [m] of radius ``radius`` [m]; the Jacobian arrays have no rows, and the pixels
    or diameters are left unset, where ``mode`` does not ask for them; ``ok`` is False
    (nothing computed) when a point is not finite."""
    pw = np.ascontiguousarray(points, dtype=float)
    n = pw.shape[0]
    pix = np.empty((n, 2))
    jpix = np.empty((n if mode & CENTRE_JAC else 0, 2, 3))
    depth = np.empty(n)
    diam = np.empty(n if mode & DEPTH else 0)
    jdiam = np.empty((n if mode & DEPTH_JAC else 0, 3))
    ok = compiled_outline()(lens, float(radius), pw, mode, pix, jpix, depth, diam, jdiam)
    return ok, pix, jpix, depth, diam, jdiam
