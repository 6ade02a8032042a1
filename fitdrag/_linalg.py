"""Compiled small dense linear algebra shared by the compiled kernels: the Cholesky
factorisation of a symmetric positive definite matrix and the solve with it.

For the few-by-few systems of the fit's solvers, the restricted likelihood of the AR(1)
noise model and the tracker's ball model, where a LAPACK call through numpy costs more
than the arithmetic.  The factorisation is Golub and Van Loan [1]_ Algorithm 4.2.1 (the
"gaxpy" Cholesky, column by column); a pivot that is not positive (a singular or indefinite
matrix, or a NaN) stops it and reports failure.  Compiled on first use without
``fastmath`` (numba's disk cache).

References
----------
.. [1] G. H. Golub and C. F. Van Loan, *Matrix Computations*, 4th ed., Johns Hopkins
   University Press, 2013, sec. 4.2.
"""

from __future__ import annotations

import math

import numba
import numpy as np


@numba.njit(cache=True)
def cholesky_lower(a, p):
    """Factor the leading ``p`` × ``p`` block of ``a`` in place: its lower triangle becomes
    L with ``a = L Lᵀ`` (the strict upper triangle is left alone).  False, part-way, when a
    pivot is not positive."""
    for j in range(p):
        d = a[j, j]
        for k in range(j):
            d -= a[j, k] * a[j, k]
        if not d > 0.0:
            return False
        ljj = math.sqrt(d)
        a[j, j] = ljj
        for i in range(j + 1, p):
            t = a[i, j]
            for k in range(j):
                t -= a[i, k] * a[j, k]
            a[i, j] = t / ljj
    return True


@numba.njit(cache=True)
def solve_spd(a, b, out):
    """Solve ``a x = b`` into ``out`` for a symmetric positive definite ``a`` (only its lower
    triangle is read; ``a`` and ``b`` are not changed).  False when ``a`` is not positive
    definite."""
    m = a.shape[0]
    lo = a.copy()
    if not cholesky_lower(lo, m):
        return False
    z = np.empty(m)
    for i in range(m):
        s = b[i]
        for k in range(i):
            s -= lo[i, k] * z[k]
        z[i] = s / lo[i, i]
    for i in range(m - 1, -1, -1):
        s = z[i]
        for k in range(i + 1, m):
            s -= lo[k, i] * out[k]
        out[i] = s / lo[i, i]
    return True
