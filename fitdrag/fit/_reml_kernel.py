"""Compiled kernel of :func:`fitdrag.fit.noise.reml_ar1`: the AR(1) coefficients per noise
channel by restricted maximum likelihood, and the bounded scalar minimiser it uses.

* The lagged cross-products of the augmented rows ``a = [J r]`` per channel and frame gap,
  ``S00 = Σ aᵢaᵢᵀ``, ``S01 + S01ᵀ = Σ (aᵢaᵢ₋₁ᵀ + aᵢ₋₁aᵢᵀ)``, ``S11 = Σ aᵢ₋₁aᵢ₋₁ᵀ`` over the
  pairs of that gap, and the first rows' ``a₀a₀ᵀ``, are summed once (lower triangles only:
  the matrices are symmetric).
* A trial φ of one channel assembles the whitened cross-product
  ``[J̃ r̃]ᵀ[J̃ r̃] = Σ_d (1 − φ^(2d))⁻¹ (S00 − φ^d (S01 + S01ᵀ) + φ^(2d) S11)_d + a₀a₀ᵀ``
  (the Prais–Winsten rows of gap d [1]), adds the other channels' part (held), and takes
  the Cholesky factor ``J̃ᵀJ̃ = LLᵀ`` of its P×P block column by column with LAPACK
  dpotf2's failure rule (a pivot that is not > 0, NaN included, fails: the objective is
  then +inf) [3], the forward solve ``L z = J̃ᵀr̃``, ``S = r̃ᵀr̃ − zᵀz`` (+inf unless > 0)
  and ``−2ℓ_R = (N − P) ln S + Σ ln(1 − φ^(2d)) + 2 Σ ln Lᵢᵢ`` [2].
* Each channel's φ is found by Brent's bounded minimiser — golden-section steps and
  parabolic interpolation — written step for step as scipy's ``fminbound`` (scipy.optimize
  ``_minimize_scalar_bounded``, scipy 1.17) does it [4]: the same first point, the same
  acceptance test of a parabola, the same ``tol1 = √(2.2e-16)·|x| + xatol/3`` stopping
  rule and the same bookkeeping of the three best points, so on the same function values
  it visits the same points and returns the same minimiser.  It is written in reverse
  communication (:func:`bounded_start` gives the first point, :func:`bounded_tell` takes
  each value and gives the next point) so that the compiled REML loop and a Python caller
  (the tests) drive the same compiled code.

All of it runs in one compiled call, without fastmath; numba compiles it on first use (not
at import) and keeps it in its on-disk cache.

References
----------
.. [1] S. J. Prais and C. B. Winsten, "Trend estimators and serial correlation", Cowles
   Commission Discussion Paper 383 (1954).
.. [2] W.-K. Cheang and G. C. Reinsel, "Bias reduction of autoregressive estimates in time
   series regression model through restricted maximum likelihood", J. Am. Stat. Assoc.
   95 (2000) 1173–1184.
.. [3] G. H. Golub and C. F. Van Loan, *Matrix Computations*, 4th ed., Johns Hopkins
   University Press, 2013, sec. 4.2 (Cholesky factorisation); LAPACK 3 routine DPOTF2.
.. [4] R. P. Brent, *Algorithms for Minimization without Derivatives*, Prentice-Hall, 1973,
   ch. 5; G. E. Forsythe, M. A. Malcolm and C. B. Moler, *Computer Methods for
   Mathematical Computations*, Prentice-Hall, 1977 (FMIN); SciPy 1.17
   ``scipy.optimize.fminbound``.
"""

from __future__ import annotations

import functools
import math

import numba
import numpy as np
from numba import types

from fitdrag._linalg import cholesky_lower

#: Golden-section fraction (3 − √5)/2 of the bounded minimiser.
GOLDEN = 0.5 * (3.0 - math.sqrt(5.0))
#: √ε as scipy's bounded minimiser writes it (ε = 2.2e-16).
SQRT_EPS = math.sqrt(2.2e-16)

# The bounded minimiser's state, one float64 array (names as in scipy's code): the bracket
# [a, b]; the best point xf and its value fx; the second and third best nfc, fulc and their
# values; the last two steps e and rat; the point being evaluated x; the evaluation count;
# xatol, the evaluation budget; xm, tol1, tol2; a status (0 running or converged, 1 budget
# spent).
_A, _B, _XF, _FX, _NFC, _FNFC, _FULC, _FFULC, _E, _RAT = range(10)
_X, _NUM, _XATOL, _MAXFUN, _XM, _TOL1, _TOL2, _FLAG = range(10, 18)
#: Length of the minimiser's state array.
STATE_SIZE = 18

#: Window about a non-zero start, whole range, moves that end the rounds, most rounds,
#: and the minimiser's xatol (as fitdrag.fit.noise.reml_ar1 states them).
WINDOW, LIMIT, SETTLED, MAX_ROUNDS, XATOL = 0.1, 0.98, 2e-4, 12, 1e-4
#: Evaluation budget of one bounded minimisation (scipy's default maxiter).
MAXFUN = 500


@numba.njit(cache=True)
def _sign1(v):
    """``np.sign(v) + (v == 0)``: 1 for v ≥ 0 (zero included), −1 for v < 0, NaN for NaN."""
    if v > 0.0:
        return 1.0
    if v < 0.0:
        return -1.0
    if v == 0.0:
        return 1.0
    return math.nan


@numba.njit(cache=True)
def _settle(s):
    """Midpoint and tolerances from the current bracket and best point."""
    s[_XM] = 0.5 * (s[_A] + s[_B])
    s[_TOL1] = SQRT_EPS * abs(s[_XF]) + s[_XATOL] / 3.0
    s[_TOL2] = 2.0 * s[_TOL1]


@numba.njit(cache=True)
def _propose(s):
    """One step of the minimiser up to the next evaluation: a parabola through the three best
    points when acceptable, else a golden-section step; stores the point in ``s[_X]``."""
    a, b, xf, fx = s[_A], s[_B], s[_XF], s[_FX]
    nfc, fnfc, fulc, ffulc = s[_NFC], s[_FNFC], s[_FULC], s[_FFULC]
    e, rat = s[_E], s[_RAT]
    xm, tol1, tol2 = s[_XM], s[_TOL1], s[_TOL2]
    golden = True
    if abs(e) > tol1:
        golden = False
        r = (xf - nfc) * (fx - ffulc)
        q = (xf - fulc) * (fx - fnfc)
        p = (xf - fulc) * q - (xf - nfc) * r
        q = 2.0 * (q - r)
        if q > 0.0:
            p = -p
        q = abs(q)
        r = e
        e = rat
        if abs(p) < abs(0.5 * q * r) and p > q * (a - xf) and p < q * (b - xf):
            rat = (p + 0.0) / q
            x = xf + rat
            if (x - a) < tol2 or (b - x) < tol2:
                rat = tol1 * _sign1(xm - xf)
        else:
            golden = True
    if golden:
        if xf >= xm:
            e = a - xf
        else:
            e = b - xf
        rat = GOLDEN * e
    step = abs(rat)  # np.maximum(|rat|, tol1), NaN kept
    if step < tol1:
        step = tol1
    s[_E] = e
    s[_RAT] = rat
    s[_X] = xf + _sign1(rat) * step


@numba.njit(cache=True)
def bounded_start(s, lo, hi, xatol, maxfun):
    """Start a bounded minimisation on [lo, hi] in state ``s`` (length :data:`STATE_SIZE`);
    returns the first point to evaluate, ``lo + (3 − √5)/2 (hi − lo)``."""
    s[_A] = lo
    s[_B] = hi
    fulc = lo + GOLDEN * (hi - lo)
    s[_FULC] = fulc
    s[_NFC] = fulc
    s[_XF] = fulc
    s[_E] = 0.0
    s[_RAT] = 0.0
    s[_X] = fulc
    s[_NUM] = 0.0
    s[_XATOL] = xatol
    s[_MAXFUN] = maxfun
    s[_FLAG] = 0.0
    return fulc


@numba.njit(cache=True)
def bounded_tell(s, fu):
    """Take the value ``fu`` at the point last given (``s[_X]``); returns True when the
    minimisation has ended (minimiser ``s[_XF]``, its value ``s[_FX]``), else False with
    the next point to evaluate in ``s[_X]``."""
    if s[_NUM] == 0.0:
        s[_FX] = fu
        s[_FFULC] = fu
        s[_FNFC] = fu
        s[_NUM] = 1.0
    else:
        x = s[_X]
        xf, fx = s[_XF], s[_FX]
        s[_NUM] += 1.0
        if fu <= fx:
            if x >= xf:
                s[_A] = xf
            else:
                s[_B] = xf
            s[_FULC], s[_FFULC] = s[_NFC], s[_FNFC]
            s[_NFC], s[_FNFC] = xf, fx
            s[_XF], s[_FX] = x, fu
        else:
            if x < xf:
                s[_A] = x
            else:
                s[_B] = x
            if fu <= s[_FNFC] or s[_NFC] == xf:
                s[_FULC], s[_FFULC] = s[_NFC], s[_FNFC]
                s[_NFC], s[_FNFC] = x, fu
            elif fu <= s[_FFULC] or s[_FULC] == xf or s[_FULC] == s[_NFC]:
                s[_FULC], s[_FFULC] = x, fu
    _settle(s)
    if s[_NUM] > 1.0 and s[_NUM] >= s[_MAXFUN]:
        s[_FLAG] = 1.0
        return True
    if not abs(s[_XF] - s[_XM]) > s[_TOL2] - 0.5 * (s[_B] - s[_A]):
        return True
    _propose(s)
    return False


def minimise_bounded(func, lo, hi, xatol=1e-5, maxiter=500):
    """Minimise ``func`` (any Python callable of one float) on [lo, hi] with the compiled
    bounded minimiser, driven from Python; returns (x, f(x), evaluations, status) with
    status 0 converged, 1 evaluation budget spent.  For tests and checks: the REML kernel
    drives the same compiled steps without Python.

    Raises
    ------
    ValueError
        ``lo`` or ``hi`` not finite, or ``lo > hi``.
    """
    lo, hi = float(lo), float(hi)
    if not (math.isfinite(lo) and math.isfinite(hi)) or lo > hi:
        raise ValueError(
            f"minimise_bounded: bounds must be finite with lo <= hi; got lo = {lo!r}, "
            f"hi = {hi!r}; give a finite interval in increasing order"
        )
    s = np.zeros(STATE_SIZE)
    x = bounded_start(s, lo, hi, float(xatol), float(maxiter))
    while not bounded_tell(s, float(func(x))):
        x = s[_X]
    return float(s[_XF]), float(s[_FX]), int(s[_NUM]), int(s[_FLAG])


@numba.njit(cache=True)
def _channel(first, s00, s01, s11, count, gapv, ch, f, m):
    """Lower triangle of channel ``ch``'s whitened cross-product at φ = ``f`` into ``m``;
    returns its Σ count · ln(1 − φ^(2d))."""
    q = m.shape[0]
    for i in range(q):
        for j in range(i + 1):
            m[i, j] = first[ch, i, j]
    logdet = 0.0
    for k in range(gapv.shape[0]):
        cnt = count[ch, k]
        if cnt == 0:
            continue
        if f == 0.0:
            for i in range(q):
                for j in range(i + 1):
                    m[i, j] += s00[ch, k, i, j]
            continue
        pd = f ** gapv[k]
        pp = pd * pd
        c = 1.0 - pp
        for i in range(q):
            for j in range(i + 1):
                m[i, j] += (s00[ch, k, i, j] - pd * s01[ch, k, i, j] + pp * s11[ch, k, i, j]) / c
        logdet += cnt * math.log(c)
    return logdet


@numba.njit(cache=True)
def _objective(f, axis, first, s00, s01, s11, count, gapv, fixed, fixed_logdet, dof, m):
    """−2ℓ_R at φ = ``f`` for channel ``axis``, the other channels' part ``fixed`` held;
    +inf when J̃ᵀJ̃ is not positive definite or S ≤ 0.  ``m`` is work space."""
    logdet = _channel(first, s00, s01, s11, count, gapv, axis, f, m)
    q = m.shape[0]
    p = q - 1
    for i in range(q):
        for j in range(i + 1):
            m[i, j] += fixed[i, j]
    # Cholesky factor of the P×P block, in place (lower triangle)
    if not cholesky_lower(m, p):
        return math.inf
    # L z = J̃ᵀr̃ (row p of the lower triangle), z kept in row p
    zz = 0.0
    for i in range(p):
        t = m[p, i]
        for k in range(i):
            t -= m[i, k] * m[p, k]
        t = t / m[i, i]
        m[p, i] = t
        zz += t * t
    ss = m[p, p] - zz
    if not ss > 0.0:
        return math.inf
    ld = 0.0
    for i in range(p):
        ld += math.log(m[i, i])
    return dof * math.log(ss) + logdet + fixed_logdet + 2.0 * ld


@numba.njit(cache=True)
def _minimise(lo, hi, s, axis, first, s00, s01, s11, count, gapv, fixed, fixed_logdet, dof, m):
    """Channel ``axis``'s minimiser of −2ℓ_R on [lo, hi] (the bounded minimiser, xatol 1e-4)."""
    x = bounded_start(s, lo, hi, XATOL, MAXFUN)
    while True:
        fu = _objective(x, axis, first, s00, s01, s11, count, gapv, fixed, fixed_logdet, dof, m)
        if bounded_tell(s, fu):
            return s[_XF]
        x = s[_X]


@numba.njit(cache=True)
def _products(j0, r0, rows, meta, gaps, n_ch):
    """The lagged products of every channel and frame gap (lower triangles).

    Returns (first (C, Q, Q), S00, S01 + S01ᵀ, S11 (C, K, Q, Q), pair counts (C, K), the K
    distinct gaps in order of first appearance) of the rows a = [J D r], Q = P + 1, with D
    the diagonal that scales each Jacobian column to unit norm (a zero column kept as it
    is).  The products are taken of the unscaled rows and then scaled, D XᵀX D (the same
    numbers to rounding: every term of an entry has the same factor)."""
    n, p = j0.shape
    q = p + 1
    # 1 / column norm, 1 for the residuals
    inv = np.ones(q)
    sq = np.zeros(p)
    for i in range(n):
        for j in range(p):
            sq[j] += j0[i, j] * j0[i, j]
    for j in range(p):
        norm = math.sqrt(sq[j])
        if norm != 0.0:
            inv[j] = 1.0 / norm
    # the distinct gaps, in order of first appearance, and each pair's slot among them
    n_pairs = gaps.shape[0]
    gapv_all = np.empty(n_pairs)
    slot = np.empty(n_pairs, dtype=np.int64)
    n_gap = 0
    for k in range(n_pairs):
        g = float(gaps[k])
        found = -1
        for u in range(n_gap):
            if gapv_all[u] == g:
                found = u
                break
        if found < 0:
            found = n_gap
            gapv_all[n_gap] = g
            n_gap += 1
        slot[k] = found
    gapv = gapv_all[:n_gap].copy()
    first = np.zeros((n_ch, q, q))
    s00 = np.zeros((n_ch, n_gap, q, q))
    s01 = np.zeros((n_ch, n_gap, q, q))
    s11 = np.zeros((n_ch, n_gap, q, q))
    count = np.zeros((n_ch, n_gap), dtype=np.int64)
    a0 = np.empty(q)
    # first rows; pairs counted per channel and gap
    r_at = 0
    g_at = 0
    for b in range(meta.shape[0]):
        ch, m, ng = meta[b, 0], meta[b, 1], meta[b, 2]
        r = rows[r_at]
        for j in range(p):
            a0[j] = j0[r, j] * inv[j]
        a0[p] = r0[r]
        for i in range(q):
            for j in range(i + 1):
                first[ch, i, j] += a0[i] * a0[j]
        for k in range(ng):
            count[ch, slot[g_at + k]] += 1
        r_at += m
        g_at += ng
    # the pairs' later (X) and earlier (Y) unscaled rows gathered per channel and gap
    at = np.zeros((n_ch, n_gap), dtype=np.int64)
    o = 0
    for ch in range(n_ch):
        for u in range(n_gap):
            at[ch, u] = o
            o += count[ch, u]
    later = np.empty((n_pairs, q))
    earlier = np.empty((n_pairs, q))
    r_at = 0
    g_at = 0
    for b in range(meta.shape[0]):
        ch, m, ng = meta[b, 0], meta[b, 1], meta[b, 2]
        for k in range(ng):
            u = slot[g_at + k]
            w = at[ch, u]
            at[ch, u] = w + 1
            rc = rows[r_at + k + 1]
            rp = rows[r_at + k]
            for j in range(p):
                later[w, j] = j0[rc, j]
                earlier[w, j] = j0[rp, j]
            later[w, p] = r0[rc]
            earlier[w, p] = r0[rp]
        r_at += m
        g_at += ng
    # S00 = XᵀX, S11 = YᵀY, S01 + S01ᵀ = XᵀY + YᵀX per channel and gap, then scaled
    xx = np.zeros((q, q))
    yy = np.zeros((q, q))
    xy = np.zeros((q, q))
    o = 0
    for ch in range(n_ch):
        for u in range(n_gap):
            c = count[ch, u]
            if c == 0:
                continue
            xx[:, :] = 0.0
            yy[:, :] = 0.0
            xy[:, :] = 0.0
            for w in range(o, o + c):
                for i in range(q):
                    xi = later[w, i]
                    yi = earlier[w, i]
                    for j in range(i + 1):
                        xj = later[w, j]
                        yj = earlier[w, j]
                        xx[i, j] += xi * xj
                        yy[i, j] += yi * yj
                        xy[i, j] += xi * yj + yi * xj
            o += c
            for i in range(q):
                for j in range(i + 1):
                    d = inv[i] * inv[j]
                    s00[ch, u, i, j] = xx[i, j] * d
                    s01[ch, u, i, j] = xy[i, j] * d
                    s11[ch, u, i, j] = yy[i, j] * d
    return first, s00, s01, s11, count, gapv


def _reml(j0, r0, rows, meta, gaps, start):
    """AR(1) coefficient per channel (``start.size`` channels) by restricted likelihood.

    ``j0`` (N, P), ``r0`` (N,): Jacobian and residuals; per block ``b`` of rows,
    ``meta[b] = (channel, number of rows m, number of gaps g <= m - 1)``, its rows (the
    next m entries of ``rows``) and its frame gaps (the next g entries of ``gaps``, each
    >= 1; the gap between rows k and k + 1)."""
    n_ch = start.shape[0]
    q = j0.shape[1] + 1
    dof = float(j0.shape[0] - j0.shape[1])
    first, s00, s01, s11, count, gapv = _products(j0, r0, rows, meta, gaps, n_ch)
    phi = start.copy()
    before = np.empty(n_ch)
    m = np.zeros((q, q))
    tmp = np.zeros((q, q))
    fixed = np.zeros((q, q))
    s = np.zeros(STATE_SIZE)
    for _round in range(MAX_ROUNDS):
        for c in range(n_ch):
            before[c] = phi[c]
        for axis in range(n_ch):
            fixed[:, :] = 0.0
            fixed_logdet = 0.0
            for other in range(n_ch):
                if other != axis:
                    ld = _channel(first, s00, s01, s11, count, gapv, other, phi[other], tmp)
                    for i in range(q):
                        for j in range(i + 1):
                            fixed[i, j] += tmp[i, j]
                    fixed_logdet += ld
            # from a non-zero start first within ± 0.1 of it; the whole range again when the
            # minimum lands on that window's edge (Python's max/min: NaN gives the limit)
            v = phi[axis]
            lo = v - WINDOW if v - WINDOW > -LIMIT else -LIMIT
            hi = v + WINDOW if v + WINDOW < LIMIT else LIMIT
            x = 0.0
            done = False
            if v != 0.0:
                x = _minimise(lo, hi, s, axis, first, s00, s01, s11, count, gapv, fixed,
                              fixed_logdet, dof, m)  # fmt: skip
                done = not ((x - lo < 1e-3 and lo > -LIMIT) or (hi - x < 1e-3 and hi < LIMIT))
            if not done:
                x = _minimise(-LIMIT, LIMIT, s, axis, first, s00, s01, s11, count, gapv, fixed,
                              fixed_logdet, dof, m)  # fmt: skip
            phi[axis] = x
        # the largest move, as Python's max over the channels in order (NaN first stays)
        moved = abs(phi[0] - before[0])
        for c in range(1, n_ch):
            d = abs(phi[c] - before[c])
            if d > moved:
                moved = d
        if moved <= SETTLED:
            break
    return phi


_I64 = types.int64[::1]
_SIGNATURE = types.float64[::1](
    types.float64[:, ::1], types.float64[::1], _I64, types.int64[:, ::1], _I64, types.float64[::1]
)


@functools.cache
def compiled_reml():
    """The REML kernel compiled for its one signature (from numba's disk cache if present)."""
    return numba.njit(_SIGNATURE, cache=True)(_reml)
