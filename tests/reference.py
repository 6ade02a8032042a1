"""Independent reference for tests and benchmarks: the equation of motion integrated by scipy.

Written from the equation in the :mod:`fitdrag.physics.forces` docstring only (none of fitdrag's code
is used here), so that synthetic "truth" does not come from the simulator under test:

    (m + C_a ρ V) dv/dt = (m − ρ V) g − ½ ρ A |u| (C_d u − C_L P u),   u = v − w,

with g = (0, −g), w = (wind, 0) or a vector ``wind = (w_x, w_y)``, and P u = (−u_y, u_x).
With ``buoyancy=False`` the ρ V term
in the weight is dropped (added mass is set separately by ``added_mass_coefficient``).

Sources
-------
- Equation: P. Timmerman and J. P. van der Weele, "On the rise and fall of a ball with
  linear or quadratic drag", Am. J. Phys. 67, 538 (1999), eq. (1) with buoyancy and added
  mass; added mass ½ ρ V of a sphere: H. Lamb, *Hydrodynamics*, 6th ed. (1932), §92.
- Integrator: scipy.integrate.solve_ivp, method "DOP853" (Hairer, Nørsett, Wanner,
  *Solving Ordinary Differential Equations I*, 2nd ed., Springer 1993, §II.10), run at
  rtol = atol = 1e-12 and evaluated exactly at the sample times (``t_eval``).
- Cramér–Rao bound for Gaussian noise with known σ: S. M. Kay, *Fundamentals of Statistical
  Signal Processing: Estimation Theory*, Prentice Hall 1993, eq. (3.31): cov ≥ σ² (JᵀJ)⁻¹;
  for AR(1) noise with covariance Σ: (Jᵀ Σ⁻¹ J)⁻¹ (Kay 1993, eq. 3.32 / §15).
- AR(1) process: G. E. P. Box, G. M. Jenkins, *Time Series Analysis*, 1970, §3.2.4
  (stationary variance σ_e² / (1 − φ²), autocorrelation φ^k).

Everything is SI: metres, seconds, kilograms.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.integrate import solve_ivp

#: Standard acceleration of free fall, by definition (CGPM 1901). [m/s²]
G0 = 9.80665


@dataclass(frozen=True)
class Body:
    """Plain physical description of a specimen for the reference integration.

    Parameters
    ----------
    mass : float
        Specimen mass. [kg]
    area : float
        Frontal area. [m²]
    volume : float
        Volume. [m³]
    added_mass_coefficient : float
        Added mass as a fraction of the displaced air's mass (0.5 for a sphere). [-]
    """

    mass: float
    area: float
    volume: float
    added_mass_coefficient: float = 0.5

    @classmethod
    def sphere(cls, mass: float, diameter: float, added_mass_coefficient: float = 0.5):
        """Sphere: area π d²/4, volume π d³/6 (mass [kg], diameter [m])."""
        return cls(mass, math.pi * diameter**2 / 4.0, math.pi * diameter**3 / 6.0,
                   added_mass_coefficient)  # fmt: skip


def rhs(state, body: Body, rho: float, cd: float, *, gravity: float = G0, wind=0.0,
        lift: float = 0.0, buoyancy: bool = True):  # fmt: skip
    """Time derivative of (x, y, vx, vy) [m, m/s] from the equation of motion above."""
    _x, _y, vx, vy = state
    m_inertial = body.mass + body.added_mass_coefficient * rho * body.volume
    weight = (body.mass - (rho * body.volume if buoyancy else 0.0)) * gravity
    wx, wy = (wind, 0.0) if np.isscalar(wind) else wind
    ux, uy = vx - wx, vy - wy
    q = math.hypot(ux, uy)
    half = 0.5 * rho * body.area * q
    # drag −½ρA|u|C_d u ; lift +½ρA|u|C_L P u with P u = (−u_y, u_x)
    fx = -half * cd * ux + half * lift * (-uy)
    fy = -weight - half * cd * uy + half * lift * ux
    return np.array([vx, vy, fx / m_inertial, fy / m_inertial])


def flight(t, launch, body: Body, rho: float, cd: float, *, gravity: float = G0,
           wind=0.0, lift: float = 0.0, buoyancy: bool = True, rtol: float = 1e-12,
           atol: float = 1e-12, method: str = "DOP853"):  # fmt: skip
    """Positions and velocities at the sample times ``t`` [s] from ``launch`` at ``t[0]``.

    ``launch`` = (x0 [m], y0 [m], vx0 [m/s], vy0 [m/s]).  Returns an array of shape (n, 4):
    columns x, y, vx, vy.
    """
    t = np.asarray(t, dtype=float)
    sol = solve_ivp(
        lambda _t, s: rhs(s, body, rho, cd, gravity=gravity, wind=wind, lift=lift,
                          buoyancy=buoyancy),  # fmt: skip
        (t[0], t[-1]), np.asarray(launch, dtype=float), method=method, t_eval=t,
        rtol=rtol, atol=atol,
    )  # fmt: skip
    if not sol.success:  # pragma: no cover - a broken test scenario
        raise RuntimeError(f"reference integration failed: {sol.message}")
    return sol.y.T


def positions(theta, t, body: Body, rho: float, **kw) -> np.ndarray:
    """Stacked (x, y) model positions for θ = (cd, x0, y0, vx0, vy0), shape (2n,): x then y."""
    s = flight(t, theta[1:5], body, rho, theta[0], **kw)
    return np.concatenate((s[:, 0], s[:, 1]))


def fd_jacobian(theta, t, body: Body, rho: float, rel_step: float = 1e-5, **kw) -> np.ndarray:
    """Central finite-difference Jacobian of :func:`positions` w.r.t. θ, shape (2n, 5).

    Steps: ``rel_step`` × max(|θ_j|, 1) for the velocities and Cd, ``rel_step`` m for the
    positions (truncation error O(h²) ≈ 1e-10, far below what a 10 % check needs).
    """
    theta = np.asarray(theta, dtype=float)
    cols = []
    for j in range(theta.size):
        h = rel_step * max(abs(theta[j]), 1.0)
        tp = theta.copy()
        tm = theta.copy()
        tp[j] += h
        tm[j] -= h
        cols.append((positions(tp, t, body, rho, **kw) - positions(tm, t, body, rho, **kw))
                    / (2.0 * h))  # fmt: skip
    return np.column_stack(cols)


def cramer_rao_white(jac: np.ndarray, sigma: float) -> np.ndarray:
    """σ² (JᵀJ)⁻¹: the Cramér–Rao bound for white Gaussian noise of known σ [m]."""
    return sigma**2 * np.linalg.inv(jac.T @ jac)


def ar1_covariance(n: int, sigma: float, phi: float) -> np.ndarray:
    """Covariance of a stationary AR(1) series: σ² φ^|i−j| (σ the marginal std) [m²]."""
    k = np.arange(n)
    return sigma**2 * phi ** np.abs(k[:, None] - k[None, :])


def cramer_rao_ar1(jac: np.ndarray, n: int, sigma: float, phi: float) -> np.ndarray:
    """(Jᵀ Σ⁻¹ J)⁻¹ with Σ block-diagonal over the x and y series (each AR(1), σ, φ)."""
    s_inv = np.linalg.inv(ar1_covariance(n, sigma, phi))
    jx, jy = jac[:n], jac[n:]
    fisher = jx.T @ s_inv @ jx + jy.T @ s_inv @ jy
    return np.linalg.inv(fisher)


def ar1_noise(rng: np.random.Generator, n: int, sigma: float, phi: float) -> np.ndarray:
    """A stationary AR(1) series of length n with marginal std σ [m] and coefficient φ."""
    e = np.empty(n)
    e[0] = rng.normal(0.0, sigma)
    innov = rng.normal(0.0, sigma * math.sqrt(1.0 - phi * phi), n)
    for k in range(1, n):
        e[k] = phi * e[k - 1] + innov[k]
    return e


# ---------------------------------------------------------------------------- scenarios
# An invented test lab's specimens (synthetic): a 40 mm foam-core training ball of 2.7 g
# filmed at 400 frames per second.  Air: ISA sea level, ρ = 1.225 kg/m³, μ = 1.789e-5 Pa s
# (US Standard Atmosphere 1976).

RHO = 1.225
MU = 1.789e-5


@dataclass(frozen=True)
class Scenario:
    """A synthetic flight: specimen, true Cd and launch, sampling and noise level."""

    mass: float = 0.0027  # [kg]
    diameter: float = 0.040  # [m]
    cd: float = 0.47  # [-]
    launch: tuple = (0.0, 1.0, 7.0, 4.0)  # (x0 [m], y0 [m], vx0 [m/s], vy0 [m/s])
    fps: float = 400.0  # [Hz]
    n: int = 400  # samples
    sigma: float = 5e-4  # position noise [m]
    added_mass_coefficient: float = 0.5  # [-]
    buoyancy: bool = True

    @property
    def t(self) -> np.ndarray:
        return np.arange(self.n) / self.fps

    @property
    def body(self) -> Body:
        return Body.sphere(self.mass, self.diameter, self.added_mass_coefficient)

    @property
    def theta(self) -> np.ndarray:
        return np.array((self.cd,) + tuple(self.launch), dtype=float)

    def truth(self) -> np.ndarray:
        """Noise-free (x, y) at the sample times, shape (n, 2). [m]"""
        s = flight(self.t, self.launch, self.body, RHO, self.cd, buoyancy=self.buoyancy)
        return s[:, :2]

    def jacobian(self) -> np.ndarray:
        """Finite-difference Jacobian of the stacked positions w.r.t. (cd, x0, y0, vx0, vy0)."""
        return fd_jacobian(self.theta, self.t, self.body, RHO, buoyancy=self.buoyancy)


def ar1_restricted_likelihood(r0, j0, blocks, phis) -> float:
    """−2 × the restricted log-likelihood of a linear model with AR(1) errors, up to a
    constant, the direct way (Cheang & Reinsel 2000, J. Am. Stat. Assoc. 95, 1173):
    (N − P) ln S + ln det Σ + ln det J̃ᵀJ̃, with Σ per block the unit-variance AR(1)
    correlation φ^|Δframe| (frames from the gaps), J̃ = L⁻¹J and r̃ = L⁻¹r for Σ = L Lᵀ
    (scipy's Cholesky and triangular solve, not fitdrag's transform), S the least-squares
    sum of squares of r̃ on J̃ (numpy's QR).

    ``blocks``: (slice of rows, channel, gaps between consecutive rows) as fitdrag's
    ``reml_ar1`` takes them; ``phis``: one coefficient per channel.
    """
    from scipy.linalg import cholesky, solve_triangular

    n, p = j0.shape
    r = np.empty_like(r0)
    j = np.empty_like(j0)
    logdet = 0.0
    for rows, ch, gaps in blocks:
        frames = np.concatenate(([0], np.cumsum(gaps)))
        cov = float(phis[ch]) ** np.abs(frames[:, None] - frames[None, :]).astype(float)
        low = cholesky(cov, lower=True)
        r[rows] = solve_triangular(low, r0[rows], lower=True)
        j[rows] = solve_triangular(low, j0[rows], lower=True)
        logdet += 2.0 * float(np.sum(np.log(np.diag(low))))
    q, rr = np.linalg.qr(j)
    e = r - q @ (q.T @ r)
    return (n - p) * math.log(float(e @ e)) + logdet + np.linalg.slogdet(rr.T @ rr)[1]


#: Python source that, run first in a fresh interpreter (``exec``), collects in ``compiled``
#: every function numba's compiler runs a pass on: numba.core.event broadcasts
#: "numba:run_pass" for each compiler pass and never for a load from the disk cache.
NUMBA_PASSES = """
from numba.core import event
compiled = set()

class _Passes(event.Listener):
    def on_start(self, ev):
        compiled.add(ev.data["qualname"])

    def on_end(self, ev):
        pass

event.register("numba:run_pass", _Passes())
"""
