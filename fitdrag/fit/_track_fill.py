"""Compiled kernel: one throw's weighted, prewhitened residuals and Jacobian rows (planar fit).

The rows of :class:`fitdrag.fit.problem.Problem` for one throw, written as one loop over the
kept samples instead of a dozen numpy passes: per axis, ``r = (observed - simulated) / sigma``
and ``d r / d theta = -(d simulated / d theta) / sigma``, then, under AR(1) noise, the
Prais–Winsten transform with frame gaps [1]_ (``w_0 = a_0``,
``w_i = (a_i - phi^d a_(i-1)) / sqrt(1 - phi^(2d))``) applied to residuals and Jacobian rows
alike, as :func:`fitdrag.fit.noise.prais_winsten` does.  The operations are those of the numpy
code in the same order, compiled without ``fastmath``, so the results are the same numbers to
rounding: identical except that a power φ^d for a gap of d ≥ 3 frames (libm's ``pow`` here,
numpy's own power there) may differ in the last bit.

The Jacobian's columns follow the problem's layout: the shared parameters (drag law, lift) in
the first columns, the throw's launch state in ``base .. base + 3``.  The simulator's
sensitivities come launch state first, then the shared parameters.

numba compiles the kernel on first use (not at import) and keeps it in its on-disk cache.

References
----------
.. [1] S. J. Prais and C. B. Winsten, "Trend estimators and serial correlation", Cowles
   Commission Discussion Paper 383 (1954).
"""

from __future__ import annotations

import functools
import math

import numba
import numpy as np


def _fill_throw(obs_x, obs_y, inv_x, inv_y, pos, sens, index, phi_x, phi_y, gaps, base, with_jac,
                r_out, j_out):  # fmt: skip
    """Fill ``r_out`` (2m,) and, when ``with_jac``, ``j_out`` (2m, P) for one throw: the m
    kept samples' x rows, then their y rows.  Returns False, writing nothing, when a simulated
    position (kept or not) is not finite.

    ``obs_*`` and ``inv_*`` are the kept samples' observations [m] and inverse noise levels
    [1/m]; ``pos`` (n, 2) and ``sens`` (n, 2, 4 + ns) the simulated positions [m] and their
    sensitivities; ``index`` the kept samples' rows of ``pos``; ``gaps`` the frame gaps
    between consecutive kept samples; ``phi_*`` the AR(1) coefficients per frame [-].
    ``j_out`` must hold zeros outside the columns written here.
    """
    n = pos.shape[0]
    for i in range(n):
        if not (math.isfinite(pos[i, 0]) and math.isfinite(pos[i, 1])):
            return False
    m = index.shape[0]
    n_sim = sens.shape[2]
    prev = np.zeros(n_sim)
    for axis in range(2):
        obs = obs_x if axis == 0 else obs_y
        inv = inv_x if axis == 0 else inv_y
        phi = phi_x if axis == 0 else phi_y
        row0 = axis * m
        prev_r = 0.0
        for k in range(m):
            i = index[k]
            r = (obs[k] - pos[i, axis]) * inv[k]
            whiten = phi != 0.0 and k > 0
            pd = 0.0
            sc = 1.0
            if whiten:
                pd = phi ** float(gaps[k - 1])
                sc = 1.0 / math.sqrt(1.0 - pd * pd)
                r_out[row0 + k] = (r - pd * prev_r) * sc
            else:
                r_out[row0 + k] = r
            prev_r = r
            if with_jac:
                s = -inv[k]
                for q in range(n_sim):
                    v = sens[i, axis, q] * s
                    col = base + q if q < 4 else q - 4
                    if whiten:
                        j_out[row0 + k, col] = (v - pd * prev[q]) * sc
                    else:
                        j_out[row0 + k, col] = v
                    prev[q] = v
    return True


@functools.cache
def compiled_fill():
    """The fill kernel compiled on first use (numba's disk cache)."""
    return numba.njit(cache=True)(_fill_throw)


#: Stand-ins for the sensitivities and Jacobian of a residuals-only fill (never read).
NO_SENS = np.zeros((1, 2, 1))
NO_JAC = np.zeros((1, 1))
