"""The Dormand–Prince RK5(4)7M pair shared by the planar and the 3-D simulators.

The tableau [1], the quartic continuous extension [3] and the pieces of the step control
[2] (initial step, scaled error norm, step-size factors), as small numba functions that the
compiled integrators of :mod:`fitdrag.physics.simulate` and :mod:`fitdrag.physics.flight3d`
call with their own right-hand sides.  Both integrators therefore take the same steps for
the same error.

numba's on-disk cache keys a compiled function on its own source file only: after editing
this module, delete ``fitdrag/physics/__pycache__/*.nb*`` so that the integrators that call
these functions are compiled again.

References
----------
1. J. R. Dormand and P. J. Prince, "A family of embedded Runge–Kutta formulae",
   J. Comput. Appl. Math. 6 (1980) 19–26 (the RK5(4)7M pair).
2. E. Hairer, S. P. Nørsett, G. Wanner, *Solving Ordinary Differential Equations I*,
   2nd ed., Springer 1993, §II.4 (error norm, step-size control, initial step).
3. L. F. Shampine, "Some practical Runge-Kutta formulas", Math. Comp. 46 (1986) 135–150
   (continuous extension of the Dormand–Prince pair; Hairer et al. 1993, §II.6).
"""

from __future__ import annotations

import math

import numba
import numpy as np

# Dormand–Prince RK5(4)7M coefficients [1].
C = np.array([0.0, 1 / 5, 3 / 10, 4 / 5, 8 / 9, 1.0, 1.0])
A = np.array(
    [
        [0, 0, 0, 0, 0, 0],
        [1 / 5, 0, 0, 0, 0, 0],
        [3 / 40, 9 / 40, 0, 0, 0, 0],
        [44 / 45, -56 / 15, 32 / 9, 0, 0, 0],
        [19372 / 6561, -25360 / 2187, 64448 / 6561, -212 / 729, 0, 0],
        [9017 / 3168, -355 / 33, 46732 / 5247, 49 / 176, -5103 / 18656, 0],
        [35 / 384, 0, 500 / 1113, 125 / 192, -2187 / 6784, 11 / 84],
    ]
)
B = np.array([35 / 384, 0, 500 / 1113, 125 / 192, -2187 / 6784, 11 / 84, 0])
# Shampine's quartic continuous extension of the pair [3], as tabulated in
# scipy.integrate.RK45: y(t + θh) = y + h Σ_r k_r Σ_j P[r, j] θ^(j+1).
P = np.array(
    [
        [1, -8048581381 / 2820520608, 8663915743 / 2820520608, -12715105075 / 11282082432],
        [0, 0, 0, 0],
        [0, 131558114200 / 32700410799, -68118460800 / 10900136933, 87487479700 / 32700410799],
        [0, -1754552775 / 470086768, 14199869525 / 1410260304, -10690763975 / 1880347072],
        [0, 127303824393 / 49829197408, -318862633887 / 49829197408,
         701980252875 / 199316789632],
        [0, -282668133 / 205662961, 2019193451 / 616988883, -1453857185 / 822651844],
        [0, 40617522 / 29380423, -110615467 / 29380423, 69997945 / 29380423],
    ]
)  # fmt: skip
E = np.array([71 / 57600, 0, -71 / 16695, 71 / 1920, -17253 / 339200, 22 / 525, -1 / 40])  # b - b*


@numba.njit(cache=True)
def initial_step(y, f0, rtol, atol):
    """First trial step from the scaled norms of y and f(t0, y) [2, §II.4, simplified]. [s]"""
    dim = y.shape[0]
    d0 = 0.0
    d1 = 0.0
    for i in range(dim):
        sc = atol + rtol * abs(y[i])
        d0 += (y[i] / sc) ** 2
        d1 += (f0[i] / sc) ** 2
    d0 = math.sqrt(d0 / dim)
    d1 = math.sqrt(d1 / dim)
    return 1e-6 if (d0 < 1e-5 or d1 < 1e-5) else 0.01 * d0 / d1


@numba.njit(cache=True)
def stage_state(y, ks, s, h, a, out):
    """out = y + h Σ_{r<s} a[s, r] k_r: the argument of stage ``s``."""
    for i in range(y.shape[0]):
        acc = 0.0
        for r in range(s):
            acc += a[s, r] * ks[r, i]
        out[i] = y[i] + h * acc


@numba.njit(cache=True)
def error_norm(y, ynew, ks, h, e_coef, rtol, atol):
    """RMS of the embedded error estimate h Σ_r e_r k_r, scaled by atol + rtol max(|y|, |y_new|)
    [2, §II.4 eq. (4.11)]. [-]"""
    dim = y.shape[0]
    err = 0.0
    for i in range(dim):
        e = 0.0
        for r in range(7):
            e += e_coef[r] * ks[r, i]
        e *= h
        sc = atol + rtol * max(abs(y[i]), abs(ynew[i]))
        err += (e / sc) ** 2
    return math.sqrt(err / dim)


@numba.njit(cache=True)
def accepted_step_factor(err):
    """Growth of the step after an accepted step, 0.9 err^(-1/5) within [0.2, 5] [2]."""
    return 5.0 if err == 0.0 else min(5.0, max(0.2, 0.9 * err**-0.2))


@numba.njit(cache=True)
def rejected_step_factor(err):
    """Shrinking of the step after a rejected step, 0.9 err^(-1/5), at least 0.2 [2]."""
    return max(0.2, 0.9 * err**-0.2)


@numba.njit(cache=True)
def dense_output(y, ks, h, th, p_coef, out):
    """State at t + θh inside an accepted step from the quartic extension [3]."""
    for i in range(y.shape[0]):
        acc = 0.0
        for r in range(7):
            acc += (
                ks[r, i]
                * th
                * (p_coef[r, 0] + th * (p_coef[r, 1] + th * (p_coef[r, 2] + th * p_coef[r, 3])))
            )
        out[i] = y[i] + h * acc
