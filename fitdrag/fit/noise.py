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

from fitdrag.errors import InputError

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
    QR of the whole whitened Jacobian; the result is the same likelihood.  The products,
    every trial φ, the bounded scalar minimiser (Brent's golden-section and parabolic steps
    as scipy's ``fminbound`` takes them, xatol 1e-4) and the rounds over the channels run in
    one compiled call (:mod:`fitdrag.fit._reml_kernel`); only the rows' bookkeeping is done
    here.

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

    Raises
    ------
    InputError
        ``start`` empty, ``r0`` not one residual per row of ``j0``, or a frame gap below 1.
    IndexError
        A block's channel without a starting coefficient, or more gaps than pairs of rows.
    """
    from fitdrag.fit._reml_kernel import compiled_reml

    j0 = np.ascontiguousarray(j0, dtype=np.float64)
    n, p = j0.shape
    r0 = np.ascontiguousarray(r0, dtype=np.float64).reshape(-1)
    if r0.shape[0] != n:
        raise InputError(
            f"reml_ar1: {r0.shape[0]} residuals for {n} Jacobian rows; give one residual per "
            "row of the Jacobian"
        )
    n_ch = len(start)
    channels = list(range(n_ch))
    rows_all = np.arange(n)
    meta, rows_parts, gap_parts = [], [], []
    for rows, ch, gaps in blocks:
        idx = rows_all[rows]
        m = idx.shape[0]
        if m == 0:
            continue
        try:
            if ch < 0:
                raise IndexError
            c = channels[ch]
        except IndexError:
            raise IndexError(
                f"reml_ar1: a block's channel is {ch}, but start has {n_ch} coefficient(s); "
                "give one starting coefficient per channel"
            ) from None
        g = np.asarray(gaps).astype(np.int64).ravel() if m > 1 else np.empty(0, np.int64)
        if g.size >= m:
            raise IndexError(
                f"reml_ar1: {g.size} frame gaps for a block of {m} rows (channel {ch}); give "
                "one gap per pair of consecutive rows"
            )
        if g.size and g.min() < 1:
            raise InputError(
                f"reml_ar1: frame gap {int(g.min())} in a block of channel {ch}; the gaps "
                "between kept samples are whole frames >= 1 (see frame_gaps)"
            )
        meta.append((c, m, g.size))
        rows_parts.append(idx)
        gap_parts.append(g)
    if n_ch == 0:
        raise InputError("reml_ar1: start is empty; give one starting coefficient per channel")
    phi = compiled_reml()(
        j0, r0,
        np.concatenate(rows_parts).astype(np.int64, copy=False) if meta else np.empty(0, np.int64),
        np.array(meta, dtype=np.int64).reshape(-1, 3),
        np.concatenate(gap_parts) if meta else np.empty(0, np.int64),
        np.array(start, dtype=np.float64),
    )  # fmt: skip
    return tuple(float(v) for v in phi)


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
    """Median of a non-empty 1-D array: numpy.median's numbers (the middle element, or the
    mean of the two middle ones; NaN when any element is NaN), by one partial sort without
    its other checks."""
    if np.isnan(a).any():
        return float("nan")
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
