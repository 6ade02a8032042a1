"""Model fit of one blurred ball in a small crop: centre, apparent diameter and blur.

The image of a ball during one exposure is known in shape: a disc of the ball's apparent
radius ``r`` whose centre moves along a short straight segment (the blur vector ``b``) at
constant speed, shaded by the light on its surface.  :func:`fit_ball` fits that shape to the
background-subtracted pixels of one blob and returns the segment's midpoint (the centre
averaged over the exposure, which is what the track needs), the apparent diameter ``2 r``
(the blob's width perpendicular to the motion), the blur, the image rows the blob spans,
standard uncertainties and residual statistics.

The model of a pixel's background-subtracted value ``d = f - g B`` (``f`` the frame, ``B`` the
background model, ``g`` the local brightness gain) is::

    d = sum_j a_j S_j  +  k g B (1 - C)  -  g B C

where ``C`` is the pixel's coverage by the ball averaged over the exposure and the pixel's area
and ``S_j`` are the same average of the coverage times the shading basis functions
``1, n_x, n_y, n_z`` (the components of the ball's surface normal): a Lambertian ball under a
distant lamp plus ambient light has the radiance ``a_0 + a_1 n_x + a_2 n_y + a_3 n_z`` where no
part of the visible face is in shadow [1].  ``k`` absorbs a small error of the local gain.
The five linear coefficients ``a_j, k`` and the four non-linear ones (centre x, y, radius,
blur length) are solved together by Levenberg-Marquardt with Marquardt's diagonal scaling
[2], compiled: the linear ones first by one exact linear step at the guess (the blob's
weighted centroid, the radius of its area, the blur of its second moments), then all nine;
the Jacobian is analytic (the derivatives of each sample's closed-form integrals below, so
exact for the rendered model).  The loop stops when the centre, radius and blur move less
than :data:`_STEP_TOLERANCE` or the cost falls by less than a hundredth of a noise variance;
a rejected step of a few hundredths of a pixel also ends it (below that the set of finely
sampled pixels, which moves with the outline, not the parameters, decides the cost).
Typically five or six model evaluations.

**Rendering.**  The time average is exact: for a point ``p`` the ball covers it while the
centre is on the part of the segment within ``r`` of ``p``, an interval found in closed form,
and the integrals of ``n_x, n_y, n_z`` over that interval are closed forms too (``n_z`` via
``integral sqrt(h^2 - t^2) dt = (t sqrt(h^2 - t^2) + h^2 asin(t / h)) / 2``).  The pixel
average is a 12-sample N-rooks pattern (each sample in its own sub-row and sub-column) in
pixels within 0.75 px of the outline of the swept disc (the
two end circles and the straight sides), one sample at the pixel centre elsewhere.  Blur
shorter than 0.25 px is rendered as 0.25 px along the fitted direction (keeps the model
continuous in the centre; a static ball's centre is unbiased by symmetry).

**Uncertainty.**  The covariance of the non-linear parameters is the least-squares sandwich
``A^-1 J^T V J A^-1`` with ``A = J^T J`` and ``J`` the Jacobian of all nine parameters (its
block for the non-linear ones equals the inverse of the projected problem's Schur complement,
Golub and Pereyra [2] sec. 3), and the noise covariance ``V = s^2 R``
[3]: ``s^2`` is the residual variance ``RSS / (n - 10)`` of this fit (so misfit of the model
raises the stated uncertainty), never below the frame's measured noise level squared times
``noise_floor``; ``R`` is the spatial correlation of the noise, measured from this fit's
residuals at lags up to :data:`CORRELATION_LAGS` pixels (compressed video has noise that is
correlated over neighbouring pixels; with white noise ``R`` is the identity and the sandwich
is the usual ``s^2 A^-1``).  The residual correlation is taken as stationary over the crop.
A model error (:data:`MODEL_ERROR_CENTRE`, :data:`MODEL_ERROR_DIAMETER`) is added in
quadrature: where the lamp leaves part of the visible face in shadow the four shading
functions cannot follow the shadow's edge exactly.

**Blur direction.**  The direction of the blur is held at the guess (take it from the track's
motion); the fit adjusts the centre, the radius and the blur length.  A wrong direction moves
the model symmetrically about its centre, so the centre is unbiased to first order.

References
----------
1. B. K. P. Horn, *Robot Vision*, MIT Press (1986), ch. 10 (Lambertian reflectance,
   radiance ``rho (n . l)`` under a distant source).
2. D. W. Marquardt, "An algorithm for least-squares estimation of nonlinear parameters",
   J. SIAM 11, 431-441 (1963); G. H. Golub and V. Pereyra, "The differentiation of
   pseudo-inverses and nonlinear least squares problems whose variables separate", SIAM J.
   Numer. Anal. 10, 413-432 (1973);
   L. Kaufman, "A variable projection method for solving separable nonlinear least squares
   problems", BIT 15, 49-57 (1975).
3. G. A. F. Seber and C. J. Wild, *Nonlinear Regression*, Wiley (1989), sec. 2.1.4 and 6.1
   (least squares under correlated errors: covariance ``(J^T J)^-1 J^T V J (J^T J)^-1``).
4. R. Ramamoorthi and P. Hanrahan, "An efficient representation for irradiance environment
   maps", Proc. SIGGRAPH 2001, 497-500 (the light a Lambertian surface reflects is
   represented by the spherical harmonics of order up to two).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from fitdrag._linalg import solve_spd
from fitdrag.errors import InputError
from fitdrag.video.ball_result import BallFit, BallGuess

__all__ = [
    "CORRELATION_LAGS",
    "MODEL_ERROR_CENTRE",
    "MODEL_ERROR_DIAMETER",
    "BallFit",
    "BallGuess",
    "fit_ball",
    "render_ball",
    "warm_up",
]

#: Largest pixel lag (both axes) at which the residual correlation enters the uncertainty.
CORRELATION_LAGS = 3
# Samples per pixel near the outline (an N-rooks pattern) and its column stride.
_N_SAMPLES = 12
_ROOK_STRIDE = 5
# Shortest blur rendered. [px]
_MIN_BLUR = 0.25
# Shading basis functions: 1, n_x, n_y, n_z (first order), then n_x^2, n_y^2, n_x n_y,
# n_x n_z, n_y n_z (second order).
_N_BASIS = 9
_N_FIRST = 4
# With a lamp of known direction: the first-order basis and max(n . L, 0).
_N_LAMP = 5
# Linear coefficients: the shading basis of the first order and the gain correction.
_N_LIN = _N_FIRST + 1
# Non-linear parameters: centre x, y, radius, blur length.
_N_PAR = 4
# Largest residual RMS, in measured noise levels, of a fit that is accepted.
_MAX_RESIDUAL = 4.0
# Model error of the centre and of the diameter, added in quadrature to the statistical
# uncertainty: the largest bias left by the shading basis on synthetic footage whose lamp
# puts a crescent of the ball in shadow (lamp 20 degrees off the camera axis; benchmarks and
# tests/test_video_ball_fit.py). [px]
MODEL_ERROR_CENTRE = 0.018
MODEL_ERROR_DIAMETER = 0.03
# Largest move of the centre from the first guess. [px]
_MAX_SHIFT = 2.0
# Levenberg-Marquardt: most iterations, and the step in the centre, radius and blur below
# which it stops [px] ...
_MAX_ITERATIONS = 30
_STEP_TOLERANCE = 5e-3
# ... or when an accepted step lowers the sum of squares by less than this many noise
# variances (parameters then move by a few per cent of their standard uncertainty). [1]
_COST_TOLERANCE = 0.01


# ------------------------------------------------------------------------------ rendering


@numba.njit(cache=True, fastmath=True, inline="always")
def _lit(a, b, c, h2, t):
    """g(t) = a - b t + c sqrt(h^2 - t^2)."""
    return a - b * t + c * math.sqrt(max(h2 - t * t, 0.0))


@numba.njit(cache=True, fastmath=True, inline="always")
def _lit_root(a, b, c, h2, t, t1, t2):
    """t if it lies strictly inside (t1, t2) and solves a - b t = -c sqrt(h^2 - t^2) (not the
    squared equation's other branch), else NaN."""
    if not (t1 < t < t2):
        return math.nan
    v1 = a - b * t
    v2 = -c * math.sqrt(max(h2 - t * t, 0.0))
    return t if abs(v1 - v2) <= abs(v1 + v2) else math.nan


@numba.njit(cache=True, fastmath=True, inline="always")
def _lamp_integrals(a, b, c, h2, t1, t2):
    """Integrals over [t1, t2] of g(t)+ = max(a - b t + c sqrt(h^2 - t^2), 0) (the lit part of
    a Lambertian ball's brightness along the exposure, n . L times r): returns (the integral
    of g+, the length and the integral of 1 / sqrt(h^2 - t^2) over the lit parts).  The roots
    of g split the interval (squaring gives (b^2 + c^2) t^2 - 2 a b t + a^2 - c^2 h^2 = 0);
    each piece is lit or not as g at its middle."""
    q = b * b + c * c
    ra = math.nan
    rb = math.nan
    if q > 0.0:
        disc = q * h2 - a * a
        if disc >= 0.0:
            sq = abs(c) * math.sqrt(disc)
            ra = _lit_root(a, b, c, h2, (a * b - sq) / q, t1, t2)
            rb = _lit_root(a, b, c, h2, (a * b + sq) / q, t1, t2)
    if math.isnan(ra):
        ra = rb
    if math.isnan(rb):
        rb = ra
    if math.isnan(ra):
        ra = t2
        rb = t2
    if rb < ra:
        ra, rb = rb, ra
    total = 0.0
    length = 0.0
    inv_s = 0.0
    h = math.sqrt(h2)
    lo = t1
    for k in range(3):
        hi = ra if k == 0 else (rb if k == 1 else t2)
        if hi > lo and _lit(a, b, c, h2, 0.5 * (lo + hi)) > 0.0:
            s_lo = math.sqrt(max(h2 - lo * lo, 0.0))
            s_hi = math.sqrt(max(h2 - hi * hi, 0.0))
            dang = math.atan2(hi * s_lo - lo * s_hi, s_lo * s_hi + lo * hi)
            total += a * (hi - lo) - 0.5 * b * (hi * hi - lo * lo)
            total += c * 0.5 * (hi * s_hi - lo * s_lo + h2 * dang)
            length += hi - lo
            if h > 0.0:
                inv_s += dang
        lo = max(lo, hi)
    return total, length, inv_s


@numba.njit(cache=True, fastmath=True, inline="always")
def _sample(qx, qy, ux, uy, half, r, inv_l, nb, lamp, acc):
    """Add the exposure average at point q (relative to the segment midpoint) to acc[0:nb]:
    coverage and coverage times n_x, n_y, n_z (and with nb = 9 times n_x^2, n_y^2, n_x n_y,
    n_x n_z, n_y n_z)."""
    s0 = qx * ux + qy * uy
    wx = qx - s0 * ux
    wy = qy - s0 * uy
    dp2 = wx * wx + wy * wy
    r2 = r * r
    if dp2 >= r2:
        return
    h2 = r2 - dp2
    h = math.sqrt(h2)
    s1 = max(-half, s0 - h)
    s2 = min(half, s0 + h)
    if s2 <= s1:
        return
    t1 = s1 - s0
    t2 = s2 - s0
    ln = t2 - t1
    m2 = 0.5 * (t2 * t2 - t1 * t1)  # integral of t
    z1 = math.sqrt(max(h2 - t1 * t1, 0.0))
    z2 = math.sqrt(max(h2 - t2 * t2, 0.0))
    # integral of sqrt(h^2 - t^2): (t z + h^2 asin(t / h)) / 2, the two arcsines as one atan2
    dang = math.atan2(t2 * z1 - t1 * z2, z1 * z2 + t1 * t2)
    iz = 0.5 * (t2 * z2 - t1 * z1 + h2 * dang)
    ir = 1.0 / r
    acc[0] += ln * inv_l
    acc[1] += (wx * ln - ux * m2) * ir * inv_l
    acc[2] += (wy * ln - uy * m2) * ir * inv_l
    acc[3] += iz * ir * inv_l
    if nb == _N_LAMP:
        lit, _len, _inv = _lamp_integrals(wx * lamp[0] + wy * lamp[1], ux * lamp[0] + uy * lamp[1],
                                          lamp[2], h2, t1, t2)  # fmt: skip
        acc[4] += lit * ir * inv_l
    elif nb > _N_FIRST:
        # (w - u t) and z = sqrt(h^2 - t^2) products: integrals of t^2 and of t z in closed
        # form, integral of t z = -(h^2 - t^2)^(3/2) / 3.
        m3 = (t2 * t2 * t2 - t1 * t1 * t1) / 3.0
        itz = (z1 * z1 * z1 - z2 * z2 * z2) / 3.0
        ir2 = ir * ir * inv_l
        acc[4] += (wx * wx * ln - 2.0 * wx * ux * m2 + ux * ux * m3) * ir2
        acc[5] += (wy * wy * ln - 2.0 * wy * uy * m2 + uy * uy * m3) * ir2
        acc[6] += (wx * wy * ln - (wx * uy + wy * ux) * m2 + ux * uy * m3) * ir2
        acc[7] += (wx * iz - ux * itz) * ir2
        acc[8] += (wy * iz - uy * itz) * ir2


@numba.njit(cache=True, fastmath=True)
def _render(h, w, cx, cy, r, blen, ux, uy, tm, nb, lamp, maskimg, out):
    """Coverage and shading integrals (see :func:`_sample`) of each masked pixel into
    out[0:nb, h, w]; cx, cy relative to the centre of the crop's pixel (0, 0); ``tm`` the
    2x2 map from image offsets to the disc's frame, where the blur is ``blen`` along the
    unit vector (ux, uy)."""
    length = max(abs(blen), _MIN_BLUR)
    half = 0.5 * length
    inv_l = 1.0 / length
    t00, t01, t10, t11 = tm[0, 0], tm[0, 1], tm[1, 0], tm[1, 1]
    band = 0.75 * _largest_stretch(tm)
    reach = r + half + band + 0.5
    acc = np.zeros(_N_BASIS)
    sx, sy = _rook_offsets(tm)
    norm = 1.0 / _N_SAMPLES
    for i in range(h):
        for j in range(w):
            for k in range(nb):
                out[k, i, j] = 0.0
            if not maskimg[i, j]:
                continue
            ix = j - cx
            iy = i - cy
            px = t00 * ix + t01 * iy
            py = t10 * ix + t11 * iy
            if abs(px) > reach or abs(py) > reach:
                continue
            # Distance to the segment and to its end points (in the disc's frame).
            s = px * ux + py * uy
            sc = min(max(s, -half), half)
            dseg = math.hypot(px - sc * ux, py - sc * uy)
            if dseg > r + band:
                continue
            d1 = math.hypot(px + half * ux, py + half * uy)
            d2 = math.hypot(px - half * ux, py - half * uy)
            for k in range(nb):
                acc[k] = 0.0
            if abs(dseg - r) < band or abs(d1 - r) < band or abs(d2 - r) < band:
                # N-rooks pattern: each sample in its own sub-row and sub-column of the
                # image pixel, so edges along the rows or the columns are resolved in
                # _N_SAMPLES steps.
                for a in range(_N_SAMPLES):
                    _sample(px + sx[a], py + sy[a], ux, uy, half, r, inv_l, nb, lamp, acc)
                for k in range(nb):
                    out[k, i, j] = acc[k] * norm
            else:
                _sample(px, py, ux, uy, half, r, inv_l, nb, lamp, acc)
                for k in range(nb):
                    out[k, i, j] = acc[k]


@numba.njit(cache=True, inline="always")
def _largest_stretch(tm):
    """Largest singular value of the 2x2 matrix tm (how much it lengthens a distance)."""
    a, b, c, d = tm[0, 0], tm[0, 1], tm[1, 0], tm[1, 1]
    s = a * a + b * b + c * c + d * d
    det = a * d - b * c
    return math.sqrt(0.5 * (s + math.sqrt(max(s * s - 4.0 * det * det, 0.0))))


@numba.njit(cache=True, inline="always")
def _rook_offsets(tm):
    """The N-rooks sample offsets within a pixel, mapped by tm into the disc's frame."""
    step = 1.0 / _N_SAMPLES
    off = 0.5 * step - 0.5
    sx = np.empty(_N_SAMPLES)
    sy = np.empty(_N_SAMPLES)
    for a in range(_N_SAMPLES):
        qy = off + a * step
        qx = off + ((a * _ROOK_STRIDE) % _N_SAMPLES) * step
        sx[a] = tm[0, 0] * qx + tm[0, 1] * qy
        sy[a] = tm[1, 0] * qx + tm[1, 1] * qy
    return sx, sy


@numba.njit(cache=True, fastmath=True, inline="always")
def _sample_d(qx, qy, ux, uy, half, dhalf, r, inv_l, cq, nb, lamp, acc, dacc):
    """:func:`_sample` with its derivatives: adds d acc[b] / d theta_k to dacc[k, b] for
    theta = (centre x, centre y, radius, blur length); ``dhalf`` is d half / d blur length,
    ``cq`` = (d q / d centre x, d q / d centre y) in the disc's frame (``-tm[:, 0]``,
    ``-tm[:, 1]``)."""
    s0 = qx * ux + qy * uy
    wx = qx - s0 * ux
    wy = qy - s0 * uy
    dp2 = wx * wx + wy * wy
    r2 = r * r
    if dp2 >= r2:
        return
    h2 = r2 - dp2
    h = math.sqrt(h2)
    s1 = max(-half, s0 - h)
    s2 = min(half, s0 + h)
    if s2 <= s1:
        return
    t1 = s1 - s0
    t2 = s2 - s0
    ln = t2 - t1
    m2 = 0.5 * (t2 * t2 - t1 * t1)
    z1 = math.sqrt(max(h2 - t1 * t1, 0.0))
    z2 = math.sqrt(max(h2 - t2 * t2, 0.0))
    dang = math.atan2(t2 * z1 - t1 * z2, z1 * z2 + t1 * t2)
    iz = 0.5 * (t2 * z2 - t1 * z1 + h2 * dang)
    ir = 1.0 / r
    a0 = ln * inv_l
    a1 = (wx * ln - ux * m2) * ir * inv_l
    a2 = (wy * ln - uy * m2) * ir * inv_l
    a3 = iz * ir * inv_l
    acc[0] += a0
    acc[1] += a1
    acc[2] += a2
    acc[3] += a3
    second = nb > _N_LAMP
    lit = lit_len = lit_inv = a4 = 0.0
    la = lb = 0.0
    if nb == _N_LAMP:
        la = wx * lamp[0] + wy * lamp[1]
        lb = ux * lamp[0] + uy * lamp[1]
        lit, lit_len, lit_inv = _lamp_integrals(la, lb, lamp[2], h2, t1, t2)
        a4 = lit * ir * inv_l
        acc[4] += a4
    m3 = itz = ir2 = q4 = q5 = q6 = q7 = q8 = 0.0
    if second:
        m3 = (t2 * t2 * t2 - t1 * t1 * t1) / 3.0
        itz = (z1 * z1 * z1 - z2 * z2 * z2) / 3.0
        ir2 = ir * ir * inv_l
        q4 = wx * wx * ln - 2.0 * wx * ux * m2 + ux * ux * m3
        q5 = wy * wy * ln - 2.0 * wy * uy * m2 + uy * uy * m3
        q6 = wx * wy * ln - (wx * uy + wy * ux) * m2 + ux * uy * m3
        q7 = wx * iz - ux * itz
        q8 = wy * iz - uy * itz
        acc[4] += q4 * ir2
        acc[5] += q5 * ir2
        acc[6] += q6 * ir2
        acc[7] += q7 * ir2
        acc[8] += q8 * ir2
    # q = sample point - centre in the disc's frame: d q / d c_k = cq[k] (for the identity
    # map (-1, 0) and (0, -1)); w . u = 0, so d dp2 / d c = 2 w . dq and d h2 / d c = -2 w . dq.
    inv_h = 1.0 / max(h, 1e-9)
    clip1 = s0 - h <= -half  # t1 = -half - s0, else t1 = -h
    clip2 = s0 + h >= half  # t2 = half - s0, else t2 = h
    for k in range(4):
        if k < 2:
            qa = cq[k, 0]
            qb = cq[k, 1]
            ds0 = qa * ux + qb * uy
            dwx, dwy = qa - ds0 * ux, qb - ds0 * uy
            dh2, dhf, dr, dl = -2.0 * (wx * qa + wy * qb), 0.0, 0.0, 0.0
        elif k == 2:
            ds0, dwx, dwy, dh2, dhf, dr, dl = 0.0, 0.0, 0.0, 2.0 * r, 0.0, 1.0, 0.0
        else:
            ds0, dwx, dwy, dh2, dhf, dr, dl = 0.0, 0.0, 0.0, 0.0, dhalf, 0.0, 2.0 * dhalf
        dh = 0.5 * dh2 * inv_h
        dt1 = (-dhf - ds0) if clip1 else -dh
        dt2 = (dhf - ds0) if clip2 else dh
        dln = dt2 - dt1
        dm2 = t2 * dt2 - t1 * dt1
        diz = z2 * dt2 - z1 * dt1 + 0.5 * dh2 * dang
        rel = dr * ir + dl * inv_l  # d ln(r L)
        dacc[k, 0] += dln * inv_l - a0 * dl * inv_l
        dacc[k, 1] += (dwx * ln + wx * dln - ux * dm2) * ir * inv_l - a1 * rel
        dacc[k, 2] += (dwy * ln + wy * dln - uy * dm2) * ir * inv_l - a2 * rel
        dacc[k, 3] += diz * ir * inv_l - a3 * rel
        if nb == _N_LAMP:
            # d of the lit integral: the ends' values (roots move where g = 0, adding nothing)
            # plus the integrand's own change, d a = dw . L (b and c fixed), d sqrt(h^2 - t^2)
            # = (d h^2 / 2) / sqrt(h^2 - t^2)
            g1 = max(_lit(la, lb, lamp[2], h2, t1), 0.0)
            g2 = max(_lit(la, lb, lamp[2], h2, t2), 0.0)
            dla = dwx * lamp[0] + dwy * lamp[1]
            dlit = g2 * dt2 - g1 * dt1 + dla * lit_len + lamp[2] * 0.5 * dh2 * lit_inv
            dacc[k, 4] += dlit * ir * inv_l - a4 * rel
        if second:
            dm3 = t2 * t2 * dt2 - t1 * t1 * dt1
            ditz = t2 * z2 * dt2 - t1 * z1 * dt1 + 0.5 * dh2 * (z1 - z2)
            rel2 = 2.0 * dr * ir + dl * inv_l  # d ln(r^2 L)
            d4 = 2.0 * wx * dwx * ln + wx * wx * dln - 2.0 * ux * (dwx * m2 + wx * dm2)
            d4 += ux * ux * dm3
            d5 = 2.0 * wy * dwy * ln + wy * wy * dln - 2.0 * uy * (dwy * m2 + wy * dm2)
            d5 += uy * uy * dm3
            d6 = (dwx * wy + wx * dwy) * ln + wx * wy * dln - (dwx * uy + dwy * ux) * m2
            d6 += -(wx * uy + wy * ux) * dm2 + ux * uy * dm3
            d7 = dwx * iz + wx * diz - ux * ditz
            d8 = dwy * iz + wy * diz - uy * ditz
            dacc[k, 4] += d4 * ir2 - q4 * ir2 * rel2
            dacc[k, 5] += d5 * ir2 - q5 * ir2 * rel2
            dacc[k, 6] += d6 * ir2 - q6 * ir2 * rel2
            dacc[k, 7] += d7 * ir2 - q7 * ir2 * rel2
            dacc[k, 8] += d8 * ir2 - q8 * ir2 * rel2


@numba.njit(cache=True, fastmath=True)
def _render_d(h, w, cx, cy, r, blen, ux, uy, tm, nb, lamp, maskimg, out, dout):
    """:func:`_render` and the derivatives of its four images with respect to (centre x,
    centre y, radius, blur length) into dout[0:4, 0:4, h, w] (sample by sample, so they are
    the exact derivatives of the rendered model)."""
    length = max(abs(blen), _MIN_BLUR)
    # d length / d blen: sign(blen) above the shortest rendered blur, else 0.
    dlen = (1.0 if blen >= 0 else -1.0) if abs(blen) > _MIN_BLUR else 0.0
    half = 0.5 * length
    dhalf = 0.5 * dlen
    inv_l = 1.0 / length
    t00, t01, t10, t11 = tm[0, 0], tm[0, 1], tm[1, 0], tm[1, 1]
    cq = np.empty((2, 2))
    cq[0, 0], cq[0, 1], cq[1, 0], cq[1, 1] = -t00, -t10, -t01, -t11
    band = 0.75 * _largest_stretch(tm)
    reach = r + half + band + 0.5
    acc = np.zeros(_N_BASIS)
    dacc = np.zeros((_N_PAR, _N_BASIS))
    sx, sy = _rook_offsets(tm)
    norm = 1.0 / _N_SAMPLES
    for i in range(h):
        for j in range(w):
            for k in range(nb):
                out[k, i, j] = 0.0
                for m in range(_N_PAR):
                    dout[m, k, i, j] = 0.0
            if not maskimg[i, j]:
                continue
            ix = j - cx
            iy = i - cy
            px = t00 * ix + t01 * iy
            py = t10 * ix + t11 * iy
            if abs(px) > reach or abs(py) > reach:
                continue
            s = px * ux + py * uy
            sc = min(max(s, -half), half)
            dseg = math.hypot(px - sc * ux, py - sc * uy)
            if dseg > r + band:
                continue
            d1 = math.hypot(px + half * ux, py + half * uy)
            d2 = math.hypot(px - half * ux, py - half * uy)
            for k in range(nb):
                acc[k] = 0.0
                for m in range(_N_PAR):
                    dacc[m, k] = 0.0
            if abs(dseg - r) < band or abs(d1 - r) < band or abs(d2 - r) < band:
                for a in range(_N_SAMPLES):
                    _sample_d(px + sx[a], py + sy[a], ux, uy, half, dhalf, r, inv_l, cq, nb,
                              lamp, acc, dacc)  # fmt: skip
                for k in range(nb):
                    out[k, i, j] = acc[k] * norm
                    for m in range(_N_PAR):
                        dout[m, k, i, j] = dacc[m, k] * norm
            else:
                _sample_d(px, py, ux, uy, half, dhalf, r, inv_l, cq, nb, lamp, acc, dacc)
                for k in range(nb):
                    out[k, i, j] = acc[k]
                    for m in range(_N_PAR):
                        dout[m, k, i, j] = dacc[m, k]


@numba.njit(cache=True)
def _model_and_jacobian(x, u, tm, lamp, d, gb, maskimg, mask_idx, h, w, basis, dbasis, res,
                        jac):  # fmt: skip
    """Residuals ``d - model`` and the model's Jacobian (n, 9) for all parameters
    x = (cx, cy, r, blur length, a_0..a_{nb-1}, k); returns the sum of squared residuals."""
    nb = x.shape[0] - _N_PAR - 1
    _render_d(h, w, x[0], x[1], x[2], x[3], u[0], u[1], tm, nb, lamp, maskimg, basis, dbasis)
    return _assemble(x, d, gb, mask_idx, w, basis, dbasis, res, jac)


@numba.njit(cache=True)
def _assemble(x, d, gb, mask_idx, w, basis, dbasis, res, jac):
    """Residuals and Jacobian of :func:`_model_and_jacobian` from rendered images."""
    nb = x.shape[0] - _N_PAR - 1
    kk = x[_N_PAR + nb]
    rss = 0.0
    for q in range(mask_idx.shape[0]):
        idx = mask_idx[q]
        i = idx // w
        j = idx - i * w
        c = basis[0, i, j]
        g = gb[i, j]
        model = kk * g * (1.0 - c) - g * c
        for b in range(nb):
            model += x[_N_PAR + b] * basis[b, i, j]
            jac[q, _N_PAR + b] = basis[b, i, j]
        jac[q, _N_PAR + nb] = g * (1.0 - c)
        for m in range(_N_PAR):
            v = -(kk + 1.0) * g * dbasis[m, 0, i, j]
            for b in range(nb):
                v += x[_N_PAR + b] * dbasis[m, b, i, j]
            jac[q, m] = v
        rr = d[i, j] - model
        res[q] = rr
        rss += rr * rr
    return rss


@numba.njit(cache=True, nogil=True)
def _levenberg_marquardt(x, u, tm, lamp, d, gb, maskimg, mask_idx, h, w, max_iter, tol, ftol):
    """Levenberg-Marquardt (Marquardt's diagonal scaling) on all nine parameters, from x
    (the non-linear ones at the guess, the linear ones solved there).  Returns the
    solution, its residuals and Jacobian, the model evaluations used and a status:
    0 converged, 1 too many iterations, 2 singular."""
    n = mask_idx.shape[0]
    npar = x.shape[0]
    basis = np.zeros((_N_BASIS, h, w))
    dbasis = np.zeros((_N_PAR, _N_BASIS, h, w))
    res = np.empty(n)
    jac = np.empty((n, npar))
    res_t = np.empty(n)
    jac_t = np.empty((n, npar))
    rss = _model_and_jacobian(
        x, u, tm, lamp, d, gb, maskimg, mask_idx, h, w, basis, dbasis, res, jac
    )
    nfev = 1
    # The linear coefficients at the guess: one exact linear least-squares step.
    nl = npar - _N_PAR
    al = np.empty((nl, nl))
    gl = np.empty(nl)
    dl = np.empty(nl)
    for i in range(nl):
        s = 0.0
        for q in range(n):
            s += jac[q, _N_PAR + i] * res[q]
        gl[i] = s
        for j in range(i + 1):
            s = 0.0
            for q in range(n):
                s += jac[q, _N_PAR + i] * jac[q, _N_PAR + j]
            al[i, j] = s + ((1e-10 * s + 1e-300) if i == j else 0.0)
            al[j, i] = al[i, j]
    if solve_spd(al, gl, dl):
        for i in range(nl):
            x[_N_PAR + i] += dl[i]
        rss = _assemble(x, d, gb, mask_idx, w, basis, dbasis, res, jac)
    lam = 1e-3
    a = np.empty((npar, npar))
    g = np.empty(npar)
    step = np.empty(npar)
    xt = np.empty(npar)
    status = 1
    for _ in range(max_iter):
        for i in range(npar):
            s = 0.0
            for q in range(n):
                s += jac[q, i] * res[q]
            g[i] = s
            for j in range(i + 1):
                s = 0.0
                for q in range(n):
                    s += jac[q, i] * jac[q, j]
                a[i, j] = s
                a[j, i] = s
        accepted = False
        done = False
        while lam < 1e10:
            ad = a.copy()
            for i in range(npar):
                ad[i, i] = a[i, i] * (1.0 + lam) + 1e-12 * (a[i, i] + 1e-300)
            if not solve_spd(ad, g, step):
                lam *= 10.0
                continue
            small = True
            near = True
            for i in range(_N_PAR):
                if abs(step[i]) > tol:
                    small = False
                if abs(step[i]) > 4.0 * tol:
                    near = False
            for i in range(npar):
                xt[i] = x[i] + step[i]
            if xt[2] <= 0.2:
                lam *= 10.0
                continue
            rss_t = _model_and_jacobian(
                xt, u, tm, lamp, d, gb, maskimg, mask_idx, h, w, basis, dbasis, res_t, jac_t
            )
            nfev += 1
            if rss_t <= rss:
                accepted = True
                break
            pred = 0.0
            for i in range(npar):
                pred += step[i] * g[i]
            if near or pred <= 0.25 * rss / max(n - npar, 1):
                # Rejected, with a step of a few hundredths of a pixel or at most a quarter
                # of a noise variance to gain: from here on the model's pixel sampling (the
                # set of pixels sampled finely moves with the outline), not the parameters,
                # decides the cost.
                done = True
                break
            lam *= 10.0
        if done:
            status = 0
            break
        if not accepted:
            status = 0 if rss > 0 else 2  # no step lowers the cost: at the minimum
            break
        x[:] = xt
        res[:] = res_t
        jac[:] = jac_t
        drop = rss - rss_t
        rss = rss_t
        lam = max(lam * 0.1, 1e-7)
        # Stop when the step is negligible, or the cost fell by less than ftol noise
        # variances (a change that moves no parameter by a noticeable share of its sigma).
        if small or drop <= ftol * rss / max(n - npar, 1):
            status = 0
            break
    return x, res, jac, nfev, status


@numba.njit(cache=True, nogil=True)
def _sensitivities(jac, mask_idx, h, w, nk):
    """Images (nk, h, w) of the pixels' influence on the first nk parameters,
    v_k = J (J^T J)^-1 e_k, and their white-noise quadratic forms v_k^T v_k; False if the
    normal matrix is singular in those parameters."""
    n, npar = jac.shape
    a = np.empty((npar, npar))
    for i in range(npar):
        for j in range(i + 1):
            s = 0.0
            for q in range(n):
                s += jac[q, i] * jac[q, j]
            a[i, j] = s
            a[j, i] = s
    for i in range(npar):
        a[i, i] += 1e-12 * a[i, i] + 1e-300  # a column that is exactly zero stays decoupled
    vimg = np.zeros((nk, h, w))
    white = np.zeros(nk)
    e = np.zeros(npar)
    col = np.empty(npar)
    for k in range(nk):
        e[:] = 0.0
        e[k] = 1.0
        if not solve_spd(a, e, col):
            return vimg, white, False
        for q in range(n):
            v = 0.0
            for i in range(npar):
                v += jac[q, i] * col[i]
            idx = mask_idx[q]
            vimg[k, idx // w, idx % w] = v
            white[k] += v * v
    return vimg, white, True


@numba.njit(cache=True, nogil=True)
def _correlated_variance(resimg, maskimg, vimg, lags):
    """For each image v_k (k = 0, 1, ...) the quadratic form v_k^T R v_k, R the correlation
    matrix of the residuals over the masked pixels: stationary, measured at the given lags
    (and their mirror images), zero beyond them.  Also returns the correlations."""
    nv, h, w = vimg.shape
    out = np.zeros(nv)
    s0 = 0.0
    n0 = 0
    for i in range(h):
        for j in range(w):
            if maskimg[i, j]:
                s0 += resimg[i, j] * resimg[i, j]
                n0 += 1
                for k in range(nv):
                    out[k] += vimg[k, i, j] * vimg[k, i, j]
    var0 = s0 / max(n0, 1)
    rho = np.zeros(lags.shape[0])
    for li in range(lags.shape[0]):
        dy = lags[li, 0]
        dx = lags[li, 1]
        s = 0.0
        cnt = 0
        cross = np.zeros(nv)
        for i in range(max(0, -dy), min(h, h - dy)):
            for j in range(max(0, -dx), min(w, w - dx)):
                if maskimg[i, j] and maskimg[i + dy, j + dx]:
                    s += resimg[i, j] * resimg[i + dy, j + dx]
                    cnt += 1
                    for k in range(nv):
                        cross[k] += vimg[k, i, j] * vimg[k, i + dy, j + dx]
        if cnt < 20 or var0 <= 0.0:
            continue
        rr = s / cnt / var0
        rho[li] = rr
        for k in range(nv):
            out[k] += 2.0 * rr * cross[k]
    return out, rho


def _half_plane_lags(k: int) -> np.ndarray:
    lags = [(0, dx) for dx in range(1, k + 1)]
    lags += [(dy, dx) for dy in range(1, k + 1) for dx in range(-k, k + 1)]
    return np.array(lags, dtype=np.int64)


_LAGS = _half_plane_lags(CORRELATION_LAGS)


def render_ball(
    shape: tuple[int, int],
    x: float,
    y: float,
    radius: float,
    blur_length: float = 0.0,
    blur_angle: float = 0.0,
    outline_map: np.ndarray | None = None,
    shading_order: int = 1,
    lamp: np.ndarray | None = None,
) -> np.ndarray:
    """The model's exposure-averaged coverage and shading integrals on a pixel grid.

    Parameters
    ----------
    shape : (int, int)
        Height and width of the grid. [px]
    x, y : float
        Midpoint of the centre's path, relative to the centre of pixel (0, 0), y down. [px]
    radius : float
        Apparent radius. [px]
    blur_length, blur_angle : float
        Length [px] and direction [rad, from +x towards +y] of the centre's path, in the
        disc's frame (the image when ``outline_map`` is None).
    outline_map : ndarray, optional
        ``(2, 2)`` map from image offsets to the frame where the outline is a circle of
        ``radius`` (see :func:`fit_ball`); default the identity. [1]
    shading_order : int
        1 or 2 (see :func:`fit_ball`).
    lamp : array_like, optional
        Unit direction towards a lamp in the disc's frame (see :func:`fit_ball`); adds the
        image of ``max(n . L, 0)`` after the first-order four. [1]

    Returns
    -------
    ndarray
        ``(4, h, w)``: coverage ``C`` (0..1) and the averages of coverage times the surface
        normal's components ``n_x, n_y, n_z``; with ``shading_order=2`` ``(9, h, w)``, then
        the averages of coverage times ``n_x^2, n_y^2, n_x n_y, n_x n_z, n_y n_z``.
    """
    h, w = (int(v) for v in shape)
    nb = _N_FIRST if shading_order == 1 else _N_BASIS
    lamp_v = np.zeros(3)
    if lamp is not None:
        nb = _N_LAMP
        lamp_v = np.asarray(lamp, dtype=np.float64).reshape(3)
        lamp_v = lamp_v / np.linalg.norm(lamp_v)
    out = np.zeros((nb, h, w))
    ux, uy = math.cos(blur_angle), math.sin(blur_angle)
    full = np.ones((h, w), np.bool_)
    tm = _map("outline_map", outline_map)
    _render(h, w, float(x), float(y), float(radius), float(blur_length), ux, uy, tm, nb, lamp_v,
            full, out)  # fmt: skip
    return out


# ------------------------------------------------------------------------------ the fit


def _failed(reason: str, guess: BallGuess, n_pix: int, nfev: int) -> BallFit:
    nan = float("nan")
    return BallFit(
        x=guess.x, y=guess.y, u_x=nan, u_y=nan, diameter=nan, u_diameter=nan,
        blur_length=nan, blur_angle=nan, top=nan, bottom=nan, row_first=-1, row_last=-1,
        residual_rms=nan, noise_inflation=nan, n_pixels=n_pix, n_evaluations=nfev,
        success=False, reason=reason,
    )  # fmt: skip


def fit_ball(
    diff: np.ndarray,
    background: np.ndarray,
    gain: float,
    noise_sigma: float,
    guess: BallGuess,
    *,
    origin: tuple[int, int] = (0, 0),
    valid: np.ndarray | None = None,
    noise_floor: float = 0.8,
    outline_map: np.ndarray | None = None,
    motion_map: np.ndarray | None = None,
    shading_order: int = 1,
    lamp: np.ndarray | None = None,
) -> BallFit:
    """Fit the blurred-ball model to one blob's background-subtracted crop.

    Parameters
    ----------
    diff : ndarray
        ``(h, w)`` background-subtracted crop ``frame - gain * background`` around the blob,
        with a margin of background pixels (two or three pixels) on every side. [grey levels]
    background : ndarray
        ``(h, w)`` background model over the same crop. [grey levels]
    gain : float
        Brightness gain of the frame against the background near the blob. [1]
    noise_sigma : float
        Measured noise level of the frame (standard deviation of one pixel). [grey levels]
    guess : BallGuess
        First guess, image coordinates. [px]
    origin : (int, int)
        Image column and row of the crop's pixel (0, 0).
    valid : ndarray of bool, optional
        Pixels to fit (default: all); leave out pixels of other objects.
    noise_floor : float
        The noise level used for the uncertainty is at least ``noise_floor * noise_sigma``
        (the residuals of a fit of few pixels may understate it). [1]
    outline_map : ndarray, optional
        ``(2, 2)`` linear map from image offsets (x right, y down, from the ball's centre)
        to the frame in which the ball's outline is a circle of radius ``r`` swept along a
        straight segment (:func:`fitdrag.video.sphere_outline.outline_maps`: the ellipse of
        a sphere seen off the optical axis, the lens's local distortion and the rolling
        shutter's shear); default the identity (a circular disc in the image).  The
        reported ``diameter`` is then ``2 r`` in that frame. [1]
    motion_map : ndarray, optional
        ``(2, 2)`` map of the image direction of motion (``guess.blur_angle``) into that
        frame (without the rolling shutter's part); default ``outline_map``. [1]
    shading_order : int
        1: the ball's brightness is ``a_0 + a_1 n_x + a_2 n_y + a_3 n_z``; 2: plus the five
        products ``n_x^2, n_y^2, n_x n_y, n_x n_z, n_y n_z`` (the spherical harmonics to
        order two: the light a Lambertian ball reflects from any distant lamps, its shadow's
        edge included, to a few per cent [4]).
    lamp : array_like, optional
        Unit direction towards a lamp in the disc's frame (x, y as the frame's axes, z
        towards the camera): the brightness is then the first-order basis plus
        ``a_4 max(n . L, 0)``, a Lambertian ball under that lamp with its shadow's edge
        exact [1] (``shading_order`` is then not used). [1]

    Returns
    -------
    BallFit
        Centre, diameter, blur, rows spanned, uncertainties and residual statistics; a fit
        that does not converge or lands on an implausible ball has ``success=False`` and
        a ``reason``, it does not raise.

    Raises
    ------
    InputError
        Arrays of different shapes, or a non-positive noise level or radius guess.
    """
    d = np.ascontiguousarray(diff, dtype=np.float64)
    bg = np.asarray(background, dtype=np.float64)
    if d.ndim != 2 or bg.shape != d.shape:
        raise InputError(
            f"fit_ball: diff {d.shape} and background {bg.shape} must be 2-D crops of the "
            f"same shape; pass the same window of both."
        )
    if not (math.isfinite(noise_sigma) and noise_sigma > 0):
        raise InputError(f"noise_sigma: expected a positive level, got {noise_sigma!r}.")
    if not (math.isfinite(guess.radius) and guess.radius > 0):
        raise InputError(f"guess.radius: expected a positive radius in px, got {guess.radius!r}.")
    if shading_order not in (1, 2):
        raise InputError(
            f"shading_order: expected 1 or 2, got {shading_order!r}; 2 follows a lamp's "
            f"shadow on the ball better."
        )
    n_lin = (_N_FIRST if shading_order == 1 else _N_BASIS) + 1
    lamp_v = np.zeros(3)
    if lamp is not None:
        lamp_v = np.asarray(lamp, dtype=np.float64).reshape(-1)
        norm = float(np.linalg.norm(lamp_v)) if lamp_v.shape == (3,) else math.nan
        if not (math.isfinite(norm) and norm > 0):
            raise InputError(
                f"lamp: expected a direction (x, y, z) towards the lamp, got {lamp!r}; pass "
                f"None to fit the shading without a lamp."
            )
        lamp_v = lamp_v / norm
        n_lin = _N_LAMP + 1
    h, w = d.shape
    gb = np.ascontiguousarray(float(gain) * bg)
    maskimg = np.ones((h, w), np.bool_) if valid is None else np.asarray(valid, np.bool_)
    if maskimg.shape != d.shape:
        raise InputError(f"valid: shape {maskimg.shape} differs from diff's {d.shape}.")
    mask_idx = np.flatnonzero(maskimg.ravel()).astype(np.int64)
    n = mask_idx.size
    ox, oy = origin
    r0 = float(guess.radius)
    if n < 4 * (n_lin + _N_PAR):
        return _failed(f"too few pixels to fit ({n})", guess, n, 0)
    tm = _map("outline_map", outline_map)
    mm = tm if motion_map is None else _map("motion_map", motion_map)
    back = np.linalg.inv(tm)  # disc frame -> image offsets
    bl = max(float(guess.blur_length), 0.0)
    ang = float(guess.blur_angle)
    u = mm @ np.array([math.cos(ang), math.sin(ang)])
    stretch = float(np.hypot(u[0], u[1]))
    u /= stretch
    p0 = np.array([guess.x - ox, guess.y - oy, r0, bl * stretch])
    x0 = np.concatenate([p0, np.zeros(n_lin)])  # linear coefficients solved in the loop
    x, res, jac, nfev, status = _levenberg_marquardt(
        x0, u, tm, lamp_v, d, gb, maskimg, mask_idx, h, w, _MAX_ITERATIONS, _STEP_TOLERANCE,
        _COST_TOLERANCE,
    )  # fmt: skip
    if status != 0:
        why = "singular normal matrix" if status == 2 else f"{_MAX_ITERATIONS} iterations"
        return _failed(f"fit did not converge ({why})", guess, n, nfev)
    p = x[:_N_PAR]
    cx, cy, rr, blen = (float(v) for v in p)
    blen = abs(blen)
    if not (0.5 * r0 <= rr <= 2.0 * r0 + 1.0):
        return _failed(
            f"fitted radius {rr:.2f} px is far from the blob's {r0:.2f} px", guess, n, nfev
        )
    shift = math.hypot(cx + ox - guess.x, cy + oy - guess.y)
    if shift > _MAX_SHIFT:
        return _failed(f"fitted centre moved {shift:.2f} px from the blob's", guess, n, nfev)
    rss = float(res @ res)
    dof = max(n - _N_PAR - n_lin, 1)
    s_res = math.sqrt(rss / dof)
    resid_rms = s_res / noise_sigma
    if resid_rms > _MAX_RESIDUAL:
        return _failed(
            f"the ball model does not match the blob (residual {resid_rms:.1f} noise levels)",
            guess,
            n,
            nfev,
        )
    s2 = max(s_res, noise_floor * noise_sigma) ** 2
    # Sandwich: row k of A^-1 J^T is the sensitivity of parameter k to each pixel's value;
    # its variance is s^2 v_k^T R v_k with v_k = J A^-1 e_k.  J is the Jacobian of all nine
    # parameters: the block of (J^T J)^-1 belonging to the non-linear ones is the inverse of
    # the projected problem's normal matrix [2].
    vimg, white, ok = _sensitivities(jac, mask_idx, h, w, 3)  # centre x, y and radius
    if not ok:
        return _failed("singular normal matrix at the solution", guess, n, nfev)
    resimg = np.zeros(h * w)
    resimg[mask_idx] = res
    quad, _rho = _correlated_variance(resimg.reshape(h, w), maskimg, vimg, _LAGS)
    var = s2 * quad
    white = s2 * white
    if not np.all(np.isfinite(var)) or np.any(var <= 0):
        return _failed("uncertainty could not be computed", guess, n, nfev)
    inflation = math.sqrt(float(var[0] + var[1]) / float(white[0] + white[1]))
    # The blur and the rows spanned in the image: the disc frame mapped back.
    bx, by = back @ (blen * u)
    ang = math.atan2(by, bx)
    if ang > 0.5 * math.pi:
        ang -= math.pi
    elif ang <= -0.5 * math.pi:
        ang += math.pi
    reach_y = rr * math.hypot(back[1, 0], back[1, 1])
    top = cy + oy - 0.5 * abs(by) - reach_y
    bottom = cy + oy + 0.5 * abs(by) + reach_y
    return BallFit(
        x=cx + ox,
        y=cy + oy,
        u_x=math.sqrt(var[0] + MODEL_ERROR_CENTRE**2),
        u_y=math.sqrt(var[1] + MODEL_ERROR_CENTRE**2),
        diameter=2.0 * rr,
        u_diameter=math.sqrt(4.0 * var[2] + MODEL_ERROR_DIAMETER**2),
        blur_length=math.hypot(bx, by),
        blur_angle=ang,
        top=top,
        bottom=bottom,
        row_first=int(math.floor(top + 0.5)),
        row_last=int(math.floor(bottom + 0.5)),
        residual_rms=resid_rms,
        noise_inflation=inflation,
        n_pixels=n,
        n_evaluations=nfev,
        success=True,
        shading=tuple(float(v) for v in x[_N_PAR:]),
    )


def _map(name: str, value) -> np.ndarray:
    """A 2x2 map, checked: finite and invertible (identity for None)."""
    if value is None:
        return np.eye(2)
    m = np.asarray(value, dtype=np.float64)
    if m.shape != (2, 2) or not np.all(np.isfinite(m)) or abs(np.linalg.det(m)) < 1e-6:
        raise InputError(
            f"{name}: expected a finite, invertible 2x2 matrix, got {value!r}; pass None for "
            f"a circular disc in the image."
        )
    return np.ascontiguousarray(m)


def warm_up() -> bool:
    """Make the compiled kernels of :func:`fit_ball` ready (loaded from numba's cache, or
    compiled) by one fit of a small synthetic ball; True if that fit succeeded.

    Loading the kernels costs most of a second on a first call in a process (numba sets up
    its compiler); a caller can run this in a background thread while it does other work, so
    the fits that follow find the kernels ready.
    """
    h, w = 15, 17
    yy, xx = np.indices((h, w), dtype=np.float64)
    # A disc of radius 4 px (coverage from a 4x4 sub-pixel grid) on a flat background, with
    # a fixed pattern of noise so that the residuals and their correlation are not zero.
    sub = (np.arange(4) + 0.5) / 4 - 0.5
    cover = np.zeros((h, w))
    for sy in sub:
        for sx in sub:
            cover += np.hypot(xx + sx - 8.3, yy + sy - 7.1) < 4.0
    cover /= sub.size**2
    bg = np.full((h, w), 100.0)
    noise = np.sin(3.7 * xx + 1.3 * yy * yy)
    diff = 60.0 * cover + noise
    fit = fit_ball(diff, bg, 1.0, 1.0, BallGuess(8.0, 7.0, 4.2, 0.5, 0.3))
    return fit.success
