"""Compiled kernel: the step of a Gauss–Newton, Levenberg–Marquardt or iteratively reweighted
least-squares iteration from the residuals and Jacobian.

One call forms the (weighted) normal equations with column scaling and solves them by a
Cholesky factorisation, instead of a dozen numpy calls on a few-by-few matrix; the solvers of
:mod:`fitdrag.fit.solvers` keep their logic (acceptance, damping, bounds) in Python.

* ``mode`` 0, Gauss–Newton: ``(Jᵀ J) δ = −Jᵀ r`` with the columns scaled by
  ``√diag(JᵀJ)`` (Björck [1]_ §2.2, column equilibration; a zero column keeps scale 1);
* ``mode`` 1, Levenberg–Marquardt: ``(Jᵀ J + λ D) δ = −Jᵀ r``, D the diagonal of ``JᵀJ``
  (a non-positive entry taken as 1), Marquardt's scaling [2]_;
* ``mode`` 2, iteratively reweighted: ``(J_wᵀ J_w) δ = −J_wᵀ (w r)`` with ``J_w`` the rows of
  J times ``w`` and the columns scaled by the norms of ``J_w``'s columns (Holland and
  Welsch [3]_).

The symmetric positive definite system is solved by Cholesky (:func:`fitdrag._linalg.solve_spd`,
Golub and Van Loan [4]_ Algorithm 4.2.1); a non-positive pivot (a singular or indefinite
system) reports failure and leaves the step undefined.  Compiled without ``fastmath`` on first use, kept in
numba's on-disk cache.

References
----------
.. [1] Å. Björck, *Numerical Methods for Least Squares Problems*, SIAM, 1996.
.. [2] D. W. Marquardt, "An algorithm for least-squares estimation of nonlinear parameters",
   J. SIAM 11 (1963) 431–441.
.. [3] P. W. Holland and R. E. Welsch, "Robust regression using iteratively reweighted
   least-squares", Commun. Stat. Theory Methods 6 (1977) 813–827.
.. [4] G. H. Golub and C. F. Van Loan, *Matrix Computations*, 4th ed., Johns Hopkins
   University Press, 2013, sec. 4.2.
"""

from __future__ import annotations

import functools
import math

import numba
import numpy as np

from fitdrag._linalg import solve_spd

GAUSS_NEWTON, MARQUARDT, REWEIGHTED = 0, 1, 2


def _normal_step(jac, res, w, lam, mode, step):
    """Fill ``step`` (P,) as ``mode`` says; returns False for a singular system."""
    n, p = jac.shape
    a = np.zeros((p, p))
    g = np.zeros(p)
    for i in range(n):
        wi = w[i] if mode == REWEIGHTED else 1.0
        ri = res[i] * wi
        for j in range(p):
            jij = jac[i, j] * wi
            if jij == 0.0:
                continue
            g[j] += jij * ri
            for k in range(j, p):
                a[j, k] += jij * jac[i, k] * wi
    for j in range(p):
        for k in range(j):
            a[j, k] = a[k, j]
    scale = np.ones(p)
    if mode == MARQUARDT:
        for j in range(p):
            d = a[j, j] if a[j, j] > 0.0 else 1.0
            a[j, j] += lam * d
    else:
        for j in range(p):
            if a[j, j] > 0.0:
                scale[j] = math.sqrt(a[j, j])
        for j in range(p):
            g[j] /= scale[j]
            for k in range(p):
                a[j, k] /= scale[j] * scale[k]
    for j in range(p):
        g[j] = -g[j]
    if not solve_spd(a, g, step):
        return False
    for j in range(p):
        step[j] /= scale[j]
        if not math.isfinite(step[j]):
            return False
    return True


@functools.cache
def compiled_step():
    """The step kernel compiled on first use (numba's disk cache)."""
    return numba.njit(cache=True)(_normal_step)


def normal_step(jac, res, mode, lam=0.0, w=None):
    """The step δ of ``mode`` (see the module notes) for Jacobian ``jac`` (n, P) and
    residuals ``res`` (n,), or None when the system is singular or the step not finite (a
    NaN or inf in ``jac`` or ``res``): the solvers then report failure and fall back, where
    numpy's solve returned a NaN step without complaint."""
    step = np.empty(jac.shape[1])
    weights = w if w is not None else _NO_WEIGHTS
    ok = compiled_step()(jac, res, weights, float(lam), mode, step)
    return step if ok else None


_NO_WEIGHTS = np.ones(1)
