"""Tests of fitdrag._linalg: the compiled Cholesky factorisation and SPD solve.

Checked against numpy's LAPACK-backed ``cholesky`` and ``solve`` (the reference library).

Labels: closed-form/independent, regression.
"""

from __future__ import annotations

import numpy as np
import pytest

from fitdrag._linalg import cholesky_lower, solve_spd


def _spd(seed, p):
    rng = np.random.default_rng(seed)
    j = rng.normal(size=(3 * p, p)) * np.logspace(0.0, 3.0, p)
    return j.T @ j, rng.normal(size=p)


@pytest.mark.parametrize("p", [1, 2, 5, 9])
def test_cholesky_and_solve_equal_numpy(p):
    """closed-form/independent: L equals numpy.linalg.cholesky's factor on the leading block
    (the rest of the matrix untouched), and the solve equals numpy.linalg.solve."""
    a, b = _spd(p, p)
    big = np.full((p + 1, p + 1), 7.0)
    big[:p, :p] = a
    assert cholesky_lower(big, p)
    np.testing.assert_allclose(np.tril(big[:p, :p]), np.linalg.cholesky(a), rtol=1e-12)
    assert np.all(big[p, :] == 7.0) and np.all(big[:, p] == 7.0)
    np.testing.assert_array_equal(np.triu(big[:p, :p], 1), np.triu(a, 1))
    out = np.empty(p)
    a0, b0 = a.copy(), b.copy()
    assert solve_spd(a, b, out)
    np.testing.assert_allclose(out, np.linalg.solve(a, b), rtol=1e-9)
    np.testing.assert_array_equal(a, a0)
    np.testing.assert_array_equal(b, b0)


@pytest.mark.parametrize("bad", ["singular", "indefinite", "nan"])
def test_not_positive_definite_reports_failure(bad):
    """regression: a singular, an indefinite or a NaN matrix is refused (numpy's cholesky
    raises LinAlgError on the first two)."""
    a, b = _spd(3, 4)
    if bad == "singular":
        a[:, 2] = a[2, :] = 0.0
    elif bad == "indefinite":
        a[1, 1] = -a[1, 1]
    else:
        a[0, 0] = np.nan
    if bad != "nan":
        with pytest.raises(np.linalg.LinAlgError):
            np.linalg.cholesky(a)
    assert not solve_spd(a, b, np.empty(4))
    assert not cholesky_lower(a.copy(), 4)
