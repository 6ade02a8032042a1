"""Noise statistics of fit residuals: frame gaps, the AR(1) (Prais–Winsten) transform and its
restricted-likelihood coefficient, serial-correlation tests and robust noise scales.

Pure functions on arrays; they know nothing of drag or of the fit's problem layout.

References
----------
1. S. J. Prais and C. B. Winsten, "Trend estimators and serial correlation", Cowles
   Commission Discussion Paper 383 (1954).
2. J. Durbin and G. S. Watson, "Testing for serial correlation in least squares
   regression I", Biometrika 37 (1950) 409–428; G. M. Ljung and G. E. P. Box, "On a
   measure of lack of fit in time series models", Biometrika 65 (1978) 297–303.
3. P. J. Rousseeuw and C. Croux, "Alternatives to the median absolute deviation",
   J. Am. Stat. Assoc. 88 (1993) 1273–1283 (MAD consistency factor 1.4826).
4. A. Wald and J. Wolfowitz, "On a test whether two samples are from the same
   population", Ann. Math. Stat. 11 (1940) 147–162 (runs of residual sign).
5. W.-K. Cheang and G. C. Reinsel, "Bias reduction of autoregressive estimates in time
   series regression model through restricted maximum likelihood", J. Am. Stat. Assoc.
   95 (2000) 1173–1184.
"""

from __future__ import annotations

import math

import numpy as np

#: Consistency factor of the median absolute deviation for a normal distribution [3].
MAD = 1.4826


def frame_gaps(t, kept) -> np.ndarray:
    """Gap, in frames, between consecutive kept samples (1 for neighbours).

    Parameters
    ----------
    t : ndarray
        All sample times of a throw; their smallest spacing is one frame. [s]
    kept : ndarray of int
        Indices of the kept samples.
    """
    dt = np.diff(t)
    step = float(np.min(dt)) if dt.size else 1.0
    return np.maximum(np.rint(np.diff(t[kept]) / step).astype(int), 1)


def prais_winsten(a, gaps, phi: float):
    """Prais–Winsten transform along the first axis, with gaps of ``gaps`` frames [1].

    For residuals with AR(1) correlation φ per frame and unit marginal variance, the result
    has independent unit-variance rows: w₀ = a₀, wᵢ = (aᵢ − φ^d aᵢ₋₁) / √(1 − φ^(2d)).
    ``a`` may be 1-D (residuals) or 2-D (Jacobian rows).
    """
    if phi == 0.0 or len(a) < 2:
        return a
    w = np.empty_like(a)
    w[0] = a[0]
    pd = phi**gaps
    scale = 1.0 / np.sqrt(1.0 - pd * pd)
    if a.ndim == 1:
        w[1:] = (a[1:] - pd * a[:-1]) * scale
    else:
        w[1:] = (a[1:] - pd[:, None] * a[:-1]) * scale[:, None]
    return w


def reml_ar1(r0, j0, blocks, start) -> tuple[float, ...]:
    """AR(1) coefficients per noise channel (x, y, ...) by restricted maximum likelihood [5].

    The lag-1 autocorrelation of least-squares residuals underestimates φ (the fitted
    launch state and drag absorb part of the slow, correlated error); the restricted
    likelihood of the linearised model removes most of that bias [5]:

        −2 ℓ_R(φ) = (N − P) ln S(φ) + Σ ln(1 − φ^(2d)) + ln det(J̃ᵀ J̃),

    with S the minimum whitened sum of squares of the linearised problem, d the frame gap
    of each whitened row and J̃ the whitened Jacobian (noise levels held at their current
    estimates).  Minimised per channel in turn over φ ∈ (−0.98, 0.98), in rounds until no
    coefficient moves by more than 2e-4.  One variance is
    profiled over all channels while φ is per channel — an approximation to the full
    restricted likelihood, adequate because the weights already equalise the channels' noise
    levels.  A channel is an axis of a track (x, y) or of a camera's image (u, v, diameter).

    Computation: with a = [J r] the augmented rows, every Prais–Winsten row of gap d is
    (aᵢ − φ^d aᵢ₋₁)/√(1 − φ^(2d)), so the whitened cross-product [J̃ r̃]ᵀ[J̃ r̃] is
    Σ_d (1 − φ^(2d))⁻¹ (S₀₀ − φ^d (S₀₁ + S₀₁ᵀ) + φ^(2d) S₁₁)_d plus the first rows'
    a₀a₀ᵀ, with the lagged products S per channel and gap computed once.  Each trial φ then
    costs a (P+1)×(P+1) Cholesky factorisation (J̃ᵀJ̃ = LLᵀ, S = r̃ᵀr̃ − |L⁻¹J̃ᵀr̃|²), not a
    QR of the whole whitened Jacobian; the result is the same likelihood.

    Parameters
    ----------
    r0 : ndarray
        Weighted, not whitened residuals of the current fit. [-]
    j0 : ndarray
        Their Jacobian with respect to all fitted parameters.
    blocks : sequence of (slice, int, ndarray)
        Per throw and axis: the rows of ``r0``, the channel (0 = x, 1 = y, or any index into
        ``start``) and the frame gaps between the kept samples.
    start : sequence of float
        Starting coefficients, one per channel (x, y for a track). [-]
    """
    from scipy.linalg.lapack import dpotrf as potrf
    from scipy.linalg.lapack import dtrtrs as trtrs
    from scipy.optimize import minimize_scalar

    n, p = j0.shape
    phi = list(start)
    n_ch = len(phi)
    # columns scaled to unit norm (the likelihood's argmin does not depend on the scale; the
    # cross-products stay well conditioned)
    scale = np.linalg.norm(j0, axis=0)
    scale[scale == 0] = 1.0
    aug = np.column_stack((j0 / scale, r0))
    first = [np.zeros((p + 1, p + 1)) for _ in range(n_ch)]
    # per channel: {gap: (count, S00, S01 + S01ᵀ, S11)}
    lagged: list[dict] = [dict() for _ in range(n_ch)]
    for rows, ch, gaps in blocks:
        a = aug[rows]
        if a.shape[0] == 0:
            continue
        first[ch] += np.outer(a[0], a[0])
        if a.shape[0] < 2:
            continue
        gaps = np.asarray(gaps)
        for d in np.unique(gaps):
            sel = np.flatnonzero(gaps == d)
            cur, prev = a[sel + 1], a[sel]
            s01 = cur.T @ prev
            entry = (sel.size, cur.T @ cur, s01 + s01.T, prev.T @ prev)
            old = lagged[ch].get(int(d))
            if old is not None:
                entry = tuple(x + y for x, y in zip(old, entry))
            lagged[ch][int(d)] = entry

    def channel(ch, f):
        """(whitened cross-product, Σ ln(1 − φ^(2d))) of channel ``ch`` at φ = f."""
        m = first[ch].copy()
        logdet = 0.0
        for d, (count, s00, s01, s11) in lagged[ch].items():
            if f == 0.0:
                m += s00
                continue
            pd = f**d
            c = 1.0 - pd * pd
            m += (s00 - pd * s01 + (pd * pd) * s11) / c
            logdet += count * math.log(c)
        return m, logdet

    def objective(value, axis, fixed, fixed_logdet):
        m, logdet = channel(axis, value)
        m += fixed
        # LAPACK's Cholesky factorisation and triangular solve, called directly (numpy's
        # wrappers cost more than the work on a (P+1)×(P+1) matrix)
        low, info = potrf(m[:p, :p], lower=1, clean=0)
        if info != 0:
            return np.inf
        z, info = trtrs(low, m[:p, p], lower=1)
        ss = float(m[p, p] - z @ z)
        if info != 0 or not ss > 0:
            return np.inf
        ld = 2.0 * float(np.sum(np.log(low.diagonal())))
        return (n - p) * math.log(ss) + logdet + fixed_logdet + ld

    for _round in range(12):
        before = list(phi)
        for axis in range(n_ch):
            fixed = np.zeros((p + 1, p + 1))
            fixed_logdet = 0.0
            for other in range(n_ch):
                if other != axis:
                    m, ld = channel(other, phi[other])
                    fixed += m
                    fixed_logdet += ld
            args = (axis, fixed, fixed_logdet)
            # from a non-zero start (a fit's later iterations) first within ± 0.1 of it; the
            # whole range again when the minimum lands on that window's edge
            lo, hi = max(-0.98, phi[axis] - 0.1), min(0.98, phi[axis] + 0.1)
            x = None
            if phi[axis] != 0.0:
                out = minimize_scalar(objective, bounds=(lo, hi), args=args, method="bounded",
                                      options={"xatol": 1e-4})  # fmt: skip
                x = float(out.x)
                if (x - lo < 1e-3 and lo > -0.98) or (hi - x < 1e-3 and hi < 0.98):
                    x = None
            if x is None:
                out = minimize_scalar(objective, bounds=(-0.98, 0.98), args=args,
                                      method="bounded", options={"xatol": 1e-4})  # fmt: skip
                x = float(out.x)
            phi[axis] = x
        # rounds over the channels until none moves by more than 2e-4 (the channels couple
        # through the shared variance, so one round from a distant start is not enough)
        if max(abs(a - b) for a, b in zip(phi, before)) <= 2e-4:
            break
    return tuple(phi)


def sign_runs(r: np.ndarray) -> tuple[int, float, float]:
    """Runs of residual sign: (runs, expected, z) per Wald & Wolfowitz [4].

    E[R] = 2 n₁ n₂ / n + 1, Var[R] = 2 n₁ n₂ (2 n₁ n₂ − n) / (n² (n − 1)).
    """
    s = np.sign(r[r != 0])
    n = s.size
    if n < 2:
        return n, float("nan"), float("nan")
    runs = int(1 + np.count_nonzero(s[1:] != s[:-1]))
    n1 = int(np.count_nonzero(s > 0))
    n2 = n - n1
    if n1 == 0 or n2 == 0:
        return runs, 1.0, float("nan")
    mu = 2.0 * n1 * n2 / n + 1.0
    var = 2.0 * n1 * n2 * (2.0 * n1 * n2 - n) / (n * n * (n - 1.0))
    z = (runs - mu) / math.sqrt(var) if var > 0 else float("nan")
    return runs, mu, z


def lag1(series: list[np.ndarray]) -> tuple[float, int]:
    """Pooled lag-1 autocorrelation of several residual series and the number of pairs.

    r₁ = Σ eᵢ eᵢ₋₁ / Σ eᵢ² over all series (no mean removed: residuals of a fit) [2].
    """
    num = 0.0
    den = 0.0
    pairs = 0
    for r in series:
        if r.size < 2:
            continue
        num += float(np.dot(r[1:], r[:-1]))
        den += float(np.dot(r, r))
        pairs += r.size - 1
    return (num / den if den > 0 else 0.0), pairs


def ljung_box(series: list[np.ndarray], lags: int = 10) -> tuple[float, float]:
    """Ljung–Box Q over pooled series [2]: (Q, p-value).

    Q = n (n + 2) Σₖ r̂ₖ² / (n − k) per series, k up to min(``lags``, n/4); Q summed over the
    series and referred to χ² with the summed number of lags.
    """
    q = 0.0
    dof = 0
    for r in series:
        n = r.size
        h = min(lags, n // 4)
        if h < 1:
            continue
        r = r - r.mean()
        c0 = float(np.dot(r, r))
        if c0 <= 0:
            continue
        for k in range(1, h + 1):
            rk = float(np.dot(r[k:], r[:-k])) / c0
            q += n * (n + 2.0) * rk * rk / (n - k)
        dof += h
    if dof == 0:
        return float("nan"), float("nan")
    from scipy import special

    return q, float(special.chdtrc(dof, q))  # the chi-square survival function


def durbin_watson(series: list[np.ndarray]) -> float:
    """Durbin–Watson statistic d = Σ (eᵢ − eᵢ₋₁)² / Σ eᵢ², pooled over the series [2]."""
    num = sum(float(np.sum(np.diff(r) ** 2)) for r in series if r.size > 1)
    den = sum(float(np.dot(r, r)) for r in series)
    return num / den if den > 0 else float("nan")


def robust_sigma(r: np.ndarray) -> float:
    """Noise standard deviation from the median absolute deviation, 1.4826 MAD [3].

    Non-finite values are ignored; NaN when none is left.
    """
    r = r[np.isfinite(r)]
    if r.size == 0:
        return float("nan")
    return MAD * median(np.abs(r - median(r)))


def median(a: np.ndarray) -> float:
    """Median of a non-empty 1-D array without NaN: numpy.median's numbers (the middle
    element, or the mean of the two middle ones), by one partial sort without its checks."""
    n = a.size
    k = n // 2
    if n % 2:
        return float(np.partition(a, k)[k])
    part = np.partition(a, (k - 1, k))
    return float((part[k - 1] + part[k]) / 2.0)


def noise_floor(x, y) -> tuple[float, float]:
    """Robust first noise estimate per axis from second differences of position.

    For white noise of standard deviation σ the second difference xᵢ₊₁ − 2xᵢ + xᵢ₋₁ has
    standard deviation √6 σ, and a smooth flight adds almost nothing to it; its robust
    spread [3] divided by √6 is the estimate. [m]

    Parameters
    ----------
    x, y : ndarray
        Positions of one throw. [m]
    """
    res = []
    for pos in (x, y):
        d2 = pos[2:] - 2.0 * pos[1:-1] + pos[:-2]
        s = robust_sigma(d2 - median(d2)) / math.sqrt(6.0) if d2.size else float("nan")
        span = float(np.ptp(pos)) or 1.0
        res.append(max(s, 1e-9 * span, 1e-12))
    return res[0], res[1]
