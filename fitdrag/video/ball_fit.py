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
The five linear coefficients ``a_j, k`` are eliminated for each trial of the five non-linear
ones (centre x, y, radius, blur length) by variable projection [2]; the non-linear
ones are solved with :func:`scipy.optimize.least_squares` (Levenberg-Marquardt, forward
differences of the projected residual computed in one compiled call).

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
``A^-1 J^T V J A^-1`` with ``A = J^T J`` and ``J`` the Jacobian of the projected residual
(the Schur complement of the full problem, [2] sec. 3), and the noise covariance ``V = s^2 R``
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
2. G. H. Golub and V. Pereyra, "The differentiation of pseudo-inverses and nonlinear least
   squares problems whose variables separate", SIAM J. Numer. Anal. 10, 413-432 (1973);
   L. Kaufman, "A variable projection method for solving separable nonlinear least squares
   problems", BIT 15, 49-57 (1975).
3. G. A. F. Seber and C. J. Wild, *Nonlinear Regression*, Wiley (1989), sec. 2.1.4 and 6.1
   (least squares under correlated errors: covariance ``(J^T J)^-1 J^T V J (J^T J)^-1``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numba
import numpy as np

from fitdrag.errors import InputError

__all__ = [
    "CORRELATION_LAGS",
    "MODEL_ERROR_CENTRE",
    "MODEL_ERROR_DIAMETER",
    "BallFit",
    "BallGuess",
    "fit_ball",
    "render_ball",
]

#: Largest pixel lag (both axes) at which the residual correlation enters the uncertainty.
CORRELATION_LAGS = 3
# Samples per pixel near the outline (an N-rooks pattern) and its column stride.
_N_SAMPLES = 12
_ROOK_STRIDE = 5
# Shortest blur rendered. [px]
_MIN_BLUR = 0.25
# Shading basis functions: 1, n_x, n_y, n_z.
_N_BASIS = 4
# Linear coefficients: the shading basis and the gain correction.
_N_LIN = _N_BASIS + 1
# Non-linear parameters: centre x, y, radius, blur length.
_N_PAR = 4
# Largest residual RMS, in measured noise levels, of a fit that is accepted.
_MAX_RESIDUAL = 4.0
# Model error of the centre and of the diameter, added in quadrature to the statistical
# uncertainty: the largest bias left by the shading basis on synthetic footage whose lamp
# puts a crescent of the ball in shadow (lamp 20 degrees off the camera axis; benchmarks and
# tests/test_video_ball_fit.py). [px]
MODEL_ERROR_CENTRE = 0.015
MODEL_ERROR_DIAMETER = 0.03
# Largest move of the centre from the first guess. [px]
_MAX_SHIFT = 2.0


@dataclass(frozen=True)
class BallGuess:
    """First guess for :func:`fit_ball`, image coordinates (y down).

    Parameters
    ----------
    x, y : float
        Centre of the blob (e.g. its weighted centroid). [px]
    radius : float
        Apparent radius of the ball. [px]
    blur_length : float
        Length of the centre's path over the exposure. [px]
    blur_angle : float
        Direction of that path, from +x towards +y (down). [rad]
    """

    x: float
    y: float
    radius: float
    blur_length: float = 0.0
    blur_angle: float = 0.0


@dataclass(frozen=True)
class BallFit:
    """Result of :func:`fit_ball`, image coordinates (x right, y down, pixel centres at
    integers).

    Attributes
    ----------
    x, y : float
        Centre of the ball averaged over the exposure (midpoint of the blur segment). [px]
    u_x, u_y : float
        Their standard uncertainties. [px]
    diameter : float
        Apparent diameter of the ball, ``2 r``: the blob's width perpendicular to the
        motion. [px]
    u_diameter : float
        Its standard uncertainty. [px]
    blur_length : float
        Length of the centre's path over the exposure. [px]
    blur_angle : float
        Its direction from +x towards +y, in (-pi/2, pi/2]. [rad]
    top, bottom : float
        Smallest and largest y the ball's outline reaches during the exposure. [px]
    row_first, row_last : int
        First and last image rows the blob spans (the rows holding ``top`` and ``bottom``).
    residual_rms : float
        RMS of the fit's residuals in units of the given noise level. [1]
    noise_inflation : float
        Factor by which the measured noise correlation enlarges the centre's uncertainty
        over the white-noise value (1 for white noise). [1]
    n_pixels : int
        Pixels fitted.
    n_evaluations : int
        Model evaluations used (residuals and Jacobians).
    success : bool
        The fit converged to a plausible ball; when False the other figures (except
        ``reason``) are not to be used.
    reason : str or None
        Why the fit failed, else None.
    """

    x: float
    y: float
    u_x: float
    u_y: float
    diameter: float
    u_diameter: float
    blur_length: float
    blur_angle: float
    top: float
    bottom: float
    row_first: int
    row_last: int
    residual_rms: float
    noise_inflation: float
    n_pixels: int
    n_evaluations: int
    success: bool
    reason: str | None = None

    @property
    def sigma(self) -> float:
        """Standard uncertainty of one centre coordinate: RMS of ``u_x`` and ``u_y``. [px]"""
        return math.sqrt(0.5 * (self.u_x**2 + self.u_y**2))


# ------------------------------------------------------------------------------ rendering


@numba.njit(cache=True, fastmath=True, inline="always")
def _sample(qx, qy, ux, uy, half, r, inv_l, acc):
    """Add the exposure average at point q (relative to the segment midpoint) to acc[0:4]:
    coverage and coverage times n_x, n_y, n_z."""
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


@numba.njit(cache=True, fastmath=True)
def _render(h, w, cx, cy, r, blen, ux, uy, maskimg, out):
    """Coverage and shading integrals (see :func:`_sample`) of each masked pixel into
    out[0:9, h, w]; cx, cy relative to the centre of the crop's pixel (0, 0); the blur is
    ``blen`` along the unit vector (ux, uy)."""
    length = max(abs(blen), _MIN_BLUR)
    half = 0.5 * length
    inv_l = 1.0 / length
    e1x, e1y = cx - half * ux, cy - half * uy
    e2x, e2y = cx + half * ux, cy + half * uy
    band = 0.75
    reach = r + half + 1.0
    acc = np.zeros(_N_BASIS)
    step = 1.0 / _N_SAMPLES
    off = 0.5 * step - 0.5
    norm = 1.0 / _N_SAMPLES
    for i in range(h):
        for j in range(w):
            for k in range(_N_BASIS):
                out[k, i, j] = 0.0
            if not maskimg[i, j]:
                continue
            px = j - cx
            py = i - cy
            if abs(px) > reach or abs(py) > reach:
                continue
            # Distance to the segment and to its end points.
            s = px * ux + py * uy
            sc = min(max(s, -half), half)
            dseg = math.hypot(px - sc * ux, py - sc * uy)
            if dseg > r + band:
                continue
            d1 = math.hypot(j - e1x, i - e1y)
            d2 = math.hypot(j - e2x, i - e2y)
            for k in range(_N_BASIS):
                acc[k] = 0.0
            if abs(dseg - r) < band or abs(d1 - r) < band or abs(d2 - r) < band:
                # N-rooks pattern: each sample in its own sub-row and sub-column, so edges
                # along the rows or the columns are resolved in _N_SAMPLES steps.
                for a in range(_N_SAMPLES):
                    qy = py + off + a * step
                    qx = px + off + ((a * _ROOK_STRIDE) % _N_SAMPLES) * step
                    _sample(qx, qy, ux, uy, half, r, inv_l, acc)
                for k in range(_N_BASIS):
                    out[k, i, j] = acc[k] * norm
            else:
                _sample(px, py, ux, uy, half, r, inv_l, acc)
                for k in range(_N_BASIS):
                    out[k, i, j] = acc[k]


@numba.njit(cache=True)
def _project(p, u, d, gb, maskimg, mask_idx, h, w, basis, res, coef):
    """Projected residual of parameters p = (cx, cy, r, blur length) with the blur along the
    unit vector u: the linear coefficients are solved by least squares (normal equations,
    Cholesky); returns False if singular."""
    _render(h, w, p[0], p[1], p[2], p[3], u[0], u[1], maskimg, basis)
    n = mask_idx.shape[0]
    m = _N_LIN
    nb = _N_BASIS
    ata = np.zeros((m, m))
    aty = np.zeros(m)
    col = np.empty(m)
    for q in range(n):
        idx = mask_idx[q]
        i = idx // w
        j = idx - i * w
        c = basis[0, i, j]
        g = gb[i, j]
        for k in range(nb):
            col[k] = basis[k, i, j]
        col[nb] = g * (1.0 - c)
        y = d[i, j] + g * c
        for a in range(m):
            aty[a] += col[a] * y
            for b in range(a + 1):
                ata[a, b] += col[a] * col[b]
    # Cholesky of ata with a relative ridge on its diagonal (lower triangle).
    lo = np.zeros((m, m))
    for a in range(m):
        for b in range(a + 1):
            s = ata[a, b] + ((1e-10 * ata[a, a] + 1e-300) if a == b else 0.0)
            for k in range(b):
                s -= lo[a, k] * lo[b, k]
            if a == b:
                if s <= 0.0:
                    return False
                lo[a, a] = math.sqrt(s)
            else:
                lo[a, b] = s / lo[b, b]
    z = np.empty(m)
    for a in range(m):
        s = aty[a]
        for k in range(a):
            s -= lo[a, k] * z[k]
        z[a] = s / lo[a, a]
    for a in range(m - 1, -1, -1):
        s = z[a]
        for k in range(a + 1, m):
            s -= lo[k, a] * coef[k]
        coef[a] = s / lo[a, a]
    for q in range(n):
        idx = mask_idx[q]
        i = idx // w
        j = idx - i * w
        c = basis[0, i, j]
        g = gb[i, j]
        model = coef[nb] * g * (1.0 - c) - g * c
        for k in range(nb):
            model += coef[k] * basis[k, i, j]
        res[q] = d[i, j] - model
    return True


@numba.njit(cache=True)
def _jacobian(p, u, d, gb, maskimg, mask_idx, h, w, basis, r0, steps, jac, coef):
    """Forward-difference Jacobian of the projected residual (r0 the residual at p)."""
    n = mask_idx.shape[0]
    res = np.empty(n)
    pp = p.copy()
    ok = True
    for k in range(p.shape[0]):
        pp[k] = p[k] + steps[k]
        if not _project(pp, u, d, gb, maskimg, mask_idx, h, w, basis, res, coef):
            ok = False
        for q in range(n):
            jac[q, k] = (res[q] - r0[q]) / steps[k]
        pp[k] = p[k]
    return ok


@numba.njit(cache=True)
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
        Length [px] and direction [rad, from +x towards +y] of the centre's path.

    Returns
    -------
    ndarray
        ``(4, h, w)``: coverage ``C`` (0..1) and the averages of coverage times the surface
        normal's components ``n_x, n_y, n_z``.
    """
    h, w = (int(v) for v in shape)
    out = np.zeros((_N_BASIS, h, w))
    ux, uy = math.cos(blur_angle), math.sin(blur_angle)
    full = np.ones((h, w), np.bool_)
    _render(h, w, float(x), float(y), float(radius), float(blur_length), ux, uy, full, out)
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
    from scipy.optimize import least_squares

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
    h, w = d.shape
    gb = np.ascontiguousarray(float(gain) * bg)
    maskimg = np.ones((h, w), np.bool_) if valid is None else np.asarray(valid, np.bool_)
    if maskimg.shape != d.shape:
        raise InputError(f"valid: shape {maskimg.shape} differs from diff's {d.shape}.")
    mask_idx = np.flatnonzero(maskimg.ravel()).astype(np.int64)
    n = mask_idx.size
    ox, oy = origin
    r0 = float(guess.radius)
    if n < 4 * (_N_LIN + _N_PAR):
        return _failed(f"too few pixels to fit ({n})", guess, n, 0)
    bl = max(float(guess.blur_length), 0.0)
    ang = float(guess.blur_angle)
    u = np.array([math.cos(ang), math.sin(ang)])
    p0 = np.array([guess.x - ox, guess.y - oy, r0, bl])
    basis = np.zeros((_N_BASIS, h, w))
    coef = np.zeros(_N_LIN)
    res = np.empty(n)
    jac = np.empty((n, _N_PAR))
    steps = np.full(_N_PAR, 1e-4)
    count = [0]

    last = {"p": None, "r": None}

    def fun(p):
        count[0] += 1
        if p[2] <= 0.2 or not np.all(np.isfinite(p)):
            return np.full(n, 1e6)
        _project(p, u, d, gb, maskimg, mask_idx, h, w, basis, res, coef)
        last["p"], last["r"] = p.copy(), res.copy()
        return last["r"]

    def jacf(p):
        count[0] += 1
        r_at = last["r"] if last["p"] is not None and np.array_equal(p, last["p"]) else fun(p)
        _jacobian(p, u, d, gb, maskimg, mask_idx, h, w, basis, r_at, steps, jac, coef)
        return jac.copy()

    try:
        sol = least_squares(fun, p0, jac=jacf, method="lm", xtol=1e-6, ftol=1e-6, max_nfev=60)
    except (ValueError, np.linalg.LinAlgError) as exc:  # pragma: no cover - defensive
        return _failed(f"least squares failed ({exc})", guess, n, count[0])
    p = sol.x
    nfev = count[0]
    if not sol.success:
        return _failed(f"fit did not converge ({sol.message})", guess, n, nfev)
    cx, cy, rr, blen = (float(v) for v in p)
    blen = abs(blen)
    if not (0.5 * r0 <= rr <= 2.0 * r0 + 1.0):
        return _failed(
            f"fitted radius {rr:.2f} px is far from the blob's {r0:.2f} px", guess, n, nfev
        )
    shift = math.hypot(cx + ox - guess.x, cy + oy - guess.y)
    if shift > _MAX_SHIFT:
        return _failed(f"fitted centre moved {shift:.2f} px from the blob's", guess, n, nfev)
    ok = _project(p, u, d, gb, maskimg, mask_idx, h, w, basis, res, coef)
    if not ok:
        return _failed("shading basis is singular at the solution", guess, n, nfev)
    rss = float(res @ res)
    dof = max(n - _N_PAR - _N_LIN, 1)
    s_res = math.sqrt(rss / dof)
    resid_rms = s_res / noise_sigma
    if resid_rms > _MAX_RESIDUAL:
        return _failed(
            f"the ball model does not match the blob (residual {resid_rms:.1f} noise levels)",
            guess,
            n,
            nfev,
        )
    _jacobian(p, u, d, gb, maskimg, mask_idx, h, w, basis, res, steps, jac, coef)
    a = jac.T @ jac
    try:
        ainv = np.linalg.pinv(a, rcond=1e-12)
    except np.linalg.LinAlgError:  # pragma: no cover - defensive
        return _failed("singular normal matrix at the solution", guess, n, nfev)
    s2 = max(s_res, noise_floor * noise_sigma) ** 2
    # Sandwich: row k of A^-1 J^T is the sensitivity of parameter k to each pixel's value;
    # its variance is s^2 v_k^T R v_k with v_k = J A^-1 e_k.
    v = jac @ ainv[:, :3]  # (n, 3): centre x, y and radius
    vimg = np.zeros((3, h * w))
    vimg[:, mask_idx] = v.T
    resimg = np.zeros(h * w)
    resimg[mask_idx] = res
    quad, _rho = _correlated_variance(resimg.reshape(h, w), maskimg, vimg.reshape(3, h, w), _LAGS)
    var = s2 * quad
    white = s2 * np.einsum("nk,nk->k", v, v)
    if not np.all(np.isfinite(var)) or np.any(var <= 0):
        return _failed("uncertainty could not be computed", guess, n, nfev)
    inflation = math.sqrt(float(var[0] + var[1]) / float(white[0] + white[1]))
    by = blen * u[1]
    ang = math.atan2(u[1], u[0])
    if ang > 0.5 * math.pi:
        ang -= math.pi
    elif ang <= -0.5 * math.pi:
        ang += math.pi
    top = cy + oy - 0.5 * abs(by) - rr
    bottom = cy + oy + 0.5 * abs(by) + rr
    return BallFit(
        x=cx + ox,
        y=cy + oy,
        u_x=math.sqrt(var[0] + MODEL_ERROR_CENTRE**2),
        u_y=math.sqrt(var[1] + MODEL_ERROR_CENTRE**2),
        diameter=2.0 * rr,
        u_diameter=math.sqrt(4.0 * var[2] + MODEL_ERROR_DIAMETER**2),
        blur_length=blen,
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
    )
