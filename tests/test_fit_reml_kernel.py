"""Tests of fitdrag.fit._reml_kernel (the compiled REML AR(1) estimate and its bounded
minimiser).

The kernel replaces Python code that called scipy.optimize.minimize_scalar(method="bounded")
on a likelihood built with LAPACK; it must give the same answers.  Its minimiser is checked
step for step against scipy's (SciPy 1.17, ``scipy.optimize.minimize_scalar`` with
``method="bounded"``, Brent's golden-section and parabolic method: R. P. Brent,
*Algorithms for Minimization without Derivatives*, 1973, ch. 5); its per-φ likelihood
against the restricted likelihood evaluated the direct way (Prais–Winsten rows of the whole
residual vector and Jacobian, a QR factorisation, Cheang & Reinsel, J. Am. Stat. Assoc. 95
(2000) 1173–1184); the whole estimate against a reference written here with scipy.  Labels:
closed-form/independent, regression.  Noise is synthetic, from fixed seeds.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import reference as ref
from scipy.optimize import minimize_scalar

from fitdrag.fit import _reml_kernel as K
from fitdrag.fit.noise import reml_ar1

# smooth functions on an interval: minimum inside, at the lower or the upper bound, flat
# near the minimum (quartic), several local minima, +inf on part of the interval
FUNCTIONS = [
    ("parabola", lambda x: (x - 0.3) ** 2 + 1.0, (-0.98, 0.98)),
    ("cosine", math.cos, (0.0, 5.0)),
    ("quartic", lambda x: x**4 - 3.0 * x**3 + 2.0, (0.0, 4.0)),
    ("exponential, minimum at the lower bound", math.exp, (-1.0, 2.0)),
    ("falling line, minimum at the upper bound", lambda x: -3.0 * x + 1.0, (0.0, 1.0)),
    ("parabola just outside the lower bound", lambda x: (x + 0.99) ** 2, (-0.98, 0.98)),
    ("two minima", lambda x: math.sin(3.0 * x) + 0.1 * x * x, (-3.0, 3.0)),
    ("flat quartic", lambda x: (x - 0.55) ** 4, (-0.98, 0.98)),
    ("+inf below 0.2", lambda x: math.inf if x < 0.2 else (x - 0.5) ** 2, (-0.98, 0.98)),
]


@pytest.mark.parametrize("name, func, bounds", FUNCTIONS, ids=[f[0] for f in FUNCTIONS])
@pytest.mark.parametrize("xatol", [1e-4, 1e-5, 1e-8])
def test_bounded_minimiser_takes_scipys_steps(name, func, bounds, xatol):
    """closed-form/independent: scipy.optimize.minimize_scalar(method="bounded") (SciPy
    1.17) on the same function, interval and xatol evaluates the same points in the same
    order and returns the same minimiser and value, bit for bit (the same arithmetic).
    Another SciPy version may step differently: the check is skipped there, and
    test_bounded_minimiser_known_minima keeps checking the results."""
    import scipy

    if tuple(int(v) for v in scipy.__version__.split(".")[:2]) != (1, 17):
        pytest.skip(f"the steps were checked against SciPy 1.17, this is {scipy.__version__}")
    seen_ref, seen = [], []
    with np.errstate(invalid="ignore"):  # scipy's parabola through +inf values
        ref = minimize_scalar(lambda x: seen_ref.append(x) or func(x), bounds=bounds,
                              method="bounded", options={"xatol": xatol})  # fmt: skip
    x, fx, nfev, status = K.minimise_bounded(
        lambda x: seen.append(x) or func(x), *bounds, xatol=xatol
    )
    assert seen == [float(v) for v in seen_ref]
    assert (x, fx, nfev, status) == (float(ref.x), float(ref.fun), ref.nfev, ref.status)
    assert status == 0


def test_bounded_minimiser_known_minima():
    """closed-form/independent: the minima of cos on [0, 5] (π), of x⁴ − 3x³ + 2 on [0, 4]
    (x = 9/4, where 4x³ = 9x²) and of eˣ on [−1, 2] (the lower bound) within the stopping
    tolerance xatol (Brent 1973, ch. 5: |x − x*| ≤ 2 tol1 at the end)."""
    for func, bounds, best in ((math.cos, (0.0, 5.0), math.pi),
                               (lambda x: x**4 - 3.0 * x**3 + 2.0, (0.0, 4.0), 2.25),
                               (math.exp, (-1.0, 2.0), -1.0)):  # fmt: skip
        x, _fx, _n, status = K.minimise_bounded(func, *bounds, xatol=1e-6)
        assert status == 0
        assert x == pytest.approx(best, abs=3e-6)


def test_bounded_minimiser_evaluation_budget_as_scipy():
    """closed-form/independent: with maxiter = 5 scipy stops after 5 evaluations with
    status 1; the compiled minimiser stops at the same point with the same status."""
    func = lambda x: (x - 0.123456) ** 2  # noqa: E731
    ref = minimize_scalar(func, bounds=(-0.98, 0.98), method="bounded",
                          options={"xatol": 1e-10, "maxiter": 5})  # fmt: skip
    x, _fx, nfev, status = K.minimise_bounded(func, -0.98, 0.98, xatol=1e-10, maxiter=5)
    assert (x, nfev, status) == (pytest.approx(float(ref.x), abs=1e-15), ref.nfev, ref.status)
    assert status == 1


@pytest.mark.parametrize("lo, hi", [(1.0, 0.0), (math.nan, 1.0), (0.0, math.inf)])
def test_bounded_minimiser_bad_bounds(lo, hi):
    """closed-form/independent: bounds that are not a finite increasing interval are
    refused (scipy refuses them too) with a message naming them and the fix."""
    with pytest.raises(ValueError) as err:
        K.minimise_bounded(math.cos, lo, hi)
    assert str(err.value) == (
        f"minimise_bounded: bounds must be finite with lo <= hi; got lo = {float(lo)!r}, "
        f"hi = {float(hi)!r}; give a finite interval in increasing order"
    )


# -- the restricted likelihood --------------------------------------------------------------


def _ar1(rng, gaps, phi):
    """Stationary unit-variance AR(1) samples at frame gaps ``gaps``: e_i = φ^d e_(i−1) +
    √(1 − φ^(2d)) w_i (Box & Jenkins, Time Series Analysis, 1970, §3.2.4: the process
    seen every d frames is AR(1) with coefficient φ^d)."""
    e = np.empty(gaps.size + 1)
    e[0] = rng.normal()
    for i, d in enumerate(gaps):
        pd = phi**d
        e[i + 1] = pd * e[i] + math.sqrt(1.0 - pd * pd) * rng.normal()
    return e


def _problem(seed=4, phis=(0.7, -0.3, 0.0, 0.5), lengths=(150, 110)):
    """Residuals of a least-squares fit through AR(1) noise: ``len(phis)`` channels, each
    seen in ``len(lengths)`` blocks (throws) with gaps of 1, 2 and 3 frames; a Jacobian
    with columns scaled over six decades, shared columns and per-channel columns; the
    residuals are those of the least-squares fit (orthogonal to the Jacobian's columns)."""
    rng = np.random.default_rng(seed)
    blocks, noise, rows = [], [], 0
    for m in lengths:
        for ch, phi in enumerate(phis):
            gaps = np.ones(m - 1, dtype=int)
            gaps[::11] = 2
            gaps[5::17] = 3
            noise.append(_ar1(rng, gaps, phi))
            blocks.append((slice(rows, rows + m), ch, gaps))
            rows += m
    n_ch = len(phis)
    p = 4 + n_ch
    j0 = np.zeros((rows, p))
    t = np.linspace(-1.0, 1.0, rows)
    j0[:, 0] = 1.0
    j0[:, 1] = t
    j0[:, 2] = t**2
    j0[:, 3] = np.sin(7.0 * t)
    for sl, ch, _g in blocks:
        j0[sl, 4 + ch] = np.cos(3.0 * t[sl] + ch)
    j0 *= np.logspace(-3.0, 3.0, p)
    e = np.concatenate(noise)
    coef, *_ = np.linalg.lstsq(j0, e, rcond=None)
    return e - j0 @ coef, j0, blocks


def _dense(r0, j0, blocks, phis):
    """−2ℓ_R the direct way (tests/reference.py: dense AR(1) covariance, scipy's Cholesky,
    numpy's QR)."""
    return ref.ar1_restricted_likelihood(r0, j0, blocks, phis)


def _kernel_inputs(r0, j0, blocks):
    n = j0.shape[0]
    idx = [np.arange(n)[sl] for sl, _c, _g in blocks]
    rows = np.concatenate(idx).astype(np.int64)
    meta = np.array([(c, i.size, len(g)) for (_s, c, g), i in zip(blocks, idx)], np.int64)
    gaps = np.concatenate([g for _s, _c, g in blocks]).astype(np.int64)
    return np.ascontiguousarray(j0, float), np.ascontiguousarray(r0, float), rows, meta, gaps


def _kernel_objective(r0, j0, blocks, phis, axis):
    """The kernel's −2ℓ_R of channel ``axis`` at phis[axis], the others held at theirs."""
    j, r, rows, meta, gaps = _kernel_inputs(r0, j0, blocks)
    n_ch = len(phis)
    first, s00, s01, s11, count, gapv = K._products(j, r, rows, meta, gaps, n_ch)
    q = j.shape[1] + 1
    fixed = np.zeros((q, q))
    tmp = np.zeros((q, q))
    fixed_logdet = 0.0
    for other in range(n_ch):
        if other != axis:
            fixed_logdet += K._channel(first, s00, s01, s11, count, gapv, other, phis[other], tmp)
            fixed += np.tril(tmp)
    return K._objective(phis[axis], axis, first, s00, s01, s11, count, gapv, fixed,
                        fixed_logdet, float(j.shape[0] - j.shape[1]), np.zeros((q, q)))  # fmt: skip


def test_likelihood_equals_the_dense_restricted_likelihood_up_to_a_constant():
    """closed-form/independent: the kernel's −2ℓ_R from lagged products and a Cholesky
    factor differs from the direct evaluation (Prais–Winsten rows, QR) by the constant
    ln det D² of the column scaling only, at every φ of every channel (four channels, gaps
    of 1–3 frames, columns over six decades): the same likelihood, to 1e-8."""
    r0, j0, blocks = _problem()
    const = -2.0 * float(np.sum(np.log(np.linalg.norm(j0, axis=0))))
    base = [0.6, -0.2, 0.1, 0.4]
    for axis in range(4):
        for f in (-0.9, -0.35, 0.0, 0.25, 0.8, 0.97):
            phis = list(base)
            phis[axis] = f
            got = _kernel_objective(r0, j0, blocks, phis, axis)
            assert got == pytest.approx(_dense(r0, j0, blocks, phis) + const, abs=1e-8)


def test_likelihood_is_inf_where_the_cross_product_is_singular_or_the_residuals_vanish():
    """closed-form/independent: a zero Jacobian column makes J̃ᵀJ̃ singular (a zero pivot
    of its Cholesky factor, which LAPACK's dpotrf reports as not positive definite) and
    zero residuals make S = 0: both give −2ℓ_R = +inf at every φ."""
    r0, j0, blocks = _problem(phis=(0.5, 0.2), lengths=(60,))
    j_zero = j0.copy()
    j_zero[:, 2] = 0.0
    for f in (-0.5, 0.0, 0.5):
        assert _kernel_objective(r0, j_zero, blocks, [f, 0.1], 0) == math.inf
        assert _kernel_objective(np.zeros_like(r0), j0, blocks, [f, 0.1], 0) == math.inf
        assert math.isfinite(_kernel_objective(r0, j0, blocks, [f, 0.1], 0))


def _reference(r0, j0, blocks, start):
    """reml_ar1's documented search written with scipy and the direct likelihood: rounds
    over the channels (at most 12) until none moves by more than 2e-4; each channel by
    scipy's bounded minimiser (xatol 1e-4) within ± 0.1 of a non-zero start, over
    (−0.98, 0.98) from zero or when the minimum lands within 1e-3 of that window's edge."""
    phi = list(start)
    for _round in range(12):
        before = list(phi)
        for axis in range(len(phi)):

            def f(v, axis=axis):
                trial = list(phi)
                trial[axis] = v
                return _dense(r0, j0, blocks, trial)

            lo, hi = max(-0.98, phi[axis] - 0.1), min(0.98, phi[axis] + 0.1)
            x = None
            if phi[axis] != 0.0:
                x = minimize_scalar(f, bounds=(lo, hi), method="bounded",
                                    options={"xatol": 1e-4}).x  # fmt: skip
                if (x - lo < 1e-3 and lo > -0.98) or (hi - x < 1e-3 and hi < 0.98):
                    x = None
            if x is None:
                x = minimize_scalar(f, bounds=(-0.98, 0.98), method="bounded",
                                    options={"xatol": 1e-4}).x  # fmt: skip
            phi[axis] = float(x)
        if max(abs(a - b) for a, b in zip(phi, before)) <= 2e-4:
            break
    return phi


@pytest.mark.parametrize("phis", [(0.7, -0.3, 0.0, 0.5), (0.85, 0.8)])
def test_reml_ar1_agrees_with_a_scipy_reference(phis):
    """closed-form/independent: reml_ar1 (compiled) against the same search done with
    scipy's bounded minimiser on the restricted likelihood evaluated the direct way
    (Prais–Winsten rows, QR), four channels or two, gaps of 1–3 frames, from zero, from
    near the answer (the ± 0.1 window), from 0.15 away (the window's edge sends the search
    to the whole range) and from 0.0995 away (the minimum inside the window but within
    1e-3 of its edge: the whole range again): |Δφ| <= 2e-4 on every channel.  The two
    likelihoods differ by a constant and rounding only, so both minimisers compare the
    same values the same way and the coefficients agree to 1e-8 (about 1e-10 seen)."""
    r0, j0, blocks = _problem(phis=phis)
    ref0 = _reference(r0, j0, blocks, [0.0] * len(phis))
    assert np.all(np.abs(np.subtract(ref0, phis)) < 0.25)  # a sensible estimate
    starts = [
        [0.0] * len(phis),
        [f + 0.03 for f in ref0],
        [f - 0.15 for f in ref0],
        [f + 0.0995 for f in ref0],
    ]
    for start in starts:
        got = reml_ar1(r0, j0, blocks, start)
        assert isinstance(got, tuple) and all(type(v) is float for v in got)
        ref = ref0 if start[0] == 0.0 else _reference(r0, j0, blocks, start)
        np.testing.assert_allclose(got, ref, atol=2e-4, rtol=0.0)
        np.testing.assert_allclose(got, ref, atol=1e-8, rtol=0.0)


#: reml_ar1 of the implementation before the compiled kernel (scipy's minimize_scalar over a
#: LAPACK Cholesky likelihood, fitdrag commit d2b991e) on ``_problem()`` from zero.
PREVIOUS = (0.6850188381368775, -0.37624968615950294, -0.12212593329999676, 0.485271848260524)


def test_reml_ar1_kernel_is_the_previous_implementation():
    """regression: on ``_problem()`` (four channels, gaps of 1–3 frames) the coefficients of
    the implementation before the compiled kernel to 1e-9 (they differ by about 1e-10, the
    rounding of the products summed in another order): the compiled minimiser takes the
    same steps."""
    r0, j0, blocks = _problem()
    got = reml_ar1(r0, j0, blocks, (0.0, 0.0, 0.0, 0.0))
    np.testing.assert_allclose(got, PREVIOUS, atol=1e-9, rtol=0.0)
