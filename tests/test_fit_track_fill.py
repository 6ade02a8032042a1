"""Tests of fitdrag.fit._track_fill: one throw's weighted, prewhitened residual and Jacobian
rows filled by one compiled loop.

The whitening is checked against the dense AR(1) covariance (the Cholesky factor of the
stationary AR(1) correlation φ^|Δframe|, Box & Jenkins 1970, §3.2.4, whose inverse is the
Prais–Winsten transform, Prais & Winsten 1954), not against fitdrag's own transform.

Labels: closed-form/independent, regression.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.linalg import cholesky, solve_triangular

from fitdrag.fit._track_fill import NO_JAC, NO_SENS, compiled_fill


def _case(seed=4, n=30, n_shared=2):
    """Simulated positions and sensitivities of n frames, kept frames with gaps, noise levels."""
    rng = np.random.default_rng(seed)
    pos = rng.normal(0.0, 1.0, (n, 2))
    sens = rng.normal(0.0, 1.0, (n, 2, 4 + n_shared))
    frames = np.flatnonzero(rng.random(n) > 0.25)  # about a quarter dropped: gaps of 2-3
    obs = pos[frames] + rng.normal(0.0, 0.01, (frames.size, 2))
    inv = 1.0 / rng.uniform(0.005, 0.02, (frames.size, 2))
    return pos, sens, frames, obs, inv


def _dense_whitening(frames, phi):
    """L⁻¹ for Σ = LLᵀ, Σᵢⱼ = φ^|fᵢ − fⱼ| (unit-variance stationary AR(1) with gaps)."""
    cov = phi ** np.abs(frames[:, None] - frames[None, :]).astype(float)
    low = cholesky(cov, lower=True)
    return solve_triangular(low, np.eye(frames.size), lower=True)


@pytest.mark.parametrize("phi", [(0.0, 0.0), (0.7, -0.4)])
def test_rows_equal_the_dense_ar1_whitening_of_the_weighted_rows(phi):
    """closed-form/independent: residual rows are L⁻¹((obs − pos)/σ) and Jacobian rows
    L⁻¹(−sens/σ) per axis, L the Cholesky factor of the AR(1) correlation with the frame
    gaps; the launch-state columns land at ``base``, the shared ones in the first columns,
    every other column stays zero."""
    pos, sens, frames, obs, inv = _case()
    m, n_sim = frames.size, sens.shape[2]
    base, n_cols = 6, 12
    res = np.full(2 * m, np.nan)
    jac = np.zeros((2 * m, n_cols))
    ok = compiled_fill()(obs[:, 0].copy(), obs[:, 1].copy(), inv[:, 0].copy(), inv[:, 1].copy(),
                         pos, sens, frames, phi[0], phi[1], np.diff(frames), base, True, res,
                         jac)  # fmt: skip
    assert ok
    for axis in (0, 1):
        rows = slice(axis * m, (axis + 1) * m)
        w = _dense_whitening(frames, phi[axis]) if phi[axis] else np.eye(m)
        r = (obs[:, axis] - pos[frames, axis]) * inv[:, axis]
        j = -sens[frames, axis, :] * inv[:, axis, None]
        np.testing.assert_allclose(res[rows], w @ r, rtol=1e-11, atol=1e-11)
        np.testing.assert_allclose(jac[rows, base : base + 4], w @ j[:, :4], rtol=1e-11,
                                   atol=1e-11)  # fmt: skip
        np.testing.assert_allclose(jac[rows, : n_sim - 4], w @ j[:, 4:], rtol=1e-11, atol=1e-11)
    untouched = np.ones(n_cols, bool)
    untouched[base : base + 4] = False
    untouched[: n_sim - 4] = False
    assert np.all(jac[:, untouched] == 0.0)


def test_residuals_only_fill_matches_the_full_fill():
    """regression: the residuals-only fill (stand-in sensitivities, no Jacobian) writes the
    same residuals as the full fill."""
    pos, sens, frames, obs, inv = _case(seed=7)
    m = frames.size
    args = (obs[:, 0].copy(), obs[:, 1].copy(), inv[:, 0].copy(), inv[:, 1].copy(), pos)
    full = np.empty(2 * m)
    cheap = np.empty(2 * m)
    fill = compiled_fill()
    assert fill(*args, sens, frames, 0.5, 0.2, np.diff(frames), 2, True, full,
                np.zeros((2 * m, 8)))  # fmt: skip
    assert fill(*args, NO_SENS, frames, 0.5, 0.2, np.diff(frames), 2, False, cheap, NO_JAC)
    np.testing.assert_array_equal(cheap, full)


def test_a_non_finite_simulated_position_writes_nothing():
    """regression: a NaN anywhere in the simulated flight (even at a rejected frame) makes the
    fill report failure before it writes a row."""
    pos, sens, frames, obs, inv = _case(seed=9)
    dropped = int(np.setdiff1d(np.arange(pos.shape[0]), frames)[0])
    pos[dropped, 1] = np.nan
    m = frames.size
    res = np.full(2 * m, 7.0)
    jac = np.full((2 * m, 8), 7.0)
    ok = compiled_fill()(obs[:, 0].copy(), obs[:, 1].copy(), inv[:, 0].copy(), inv[:, 1].copy(),
                         pos, sens, frames, 0.0, 0.0, np.diff(frames), 2, True, res,
                         jac)  # fmt: skip
    assert not ok
    assert np.all(res == 7.0) and np.all(jac == 7.0)
