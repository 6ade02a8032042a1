"""Fit the drag model and the launch state to one or many throws, with honest uncertainty.

The fit is a weighted nonlinear least-squares problem solved with lmfit (scipy's
trust-region-reflective ``least_squares`` underneath) using the simulator's exact
sensitivities as the Jacobian.  Every throw has its own launch state (x0, y0, vx0, vy0);
all throws share the drag parameters (and the lift coefficient when fitted).

Stages (each reported in the result):

1. **Start** — per throw, a quadratic polynomial through the first samples gives the
   launch position and velocity (a drag-free, finite-difference first guess).
2. **Robust stage** (``robust=True``) — a fit with the soft-L1 loss, scaled by a robust
   noise estimate (median absolute deviation [4]), followed by explicit rejection of the
   frames whose residual exceeds a limit set so that a clean track of N residuals loses a
   frame by chance with probability ≈ 1 % (a Bonferroni bound, limit ≥ 4 σ).  Rejected frames
   are listed with the size of their residual.
3. **Noise model** — the lag-1 autocorrelation of the residuals is tested (z = r₁ √m);
   when significant (p < 0.01), or when ``noise="ar1"``, the residuals are modelled as a
   first-order autoregressive process per axis, its coefficient estimated by restricted
   maximum likelihood (which removes most of the downward bias of residual
   autocorrelation [7]), and the problem is re-solved by feasible generalised least
   squares, i.e. Prais–Winsten prewhitening iterated to convergence [1, 2]; gaps between kept frames are honoured (φ^d for a gap of d frames).  Plain
   least squares under AR(1) noise with φ = 0.8 understates u(Cd) about threefold; the
   prewhitened fit is efficient and its covariance is correct under that model [1].
4. **Covariance** — (J̃ᵀ J̃)⁻¹ of the whitened, weighted Jacobian at the optimum, i.e. the
   Cramér–Rao bound of the noise model with the estimated noise level [3].  With
   per-point sigmas from the track it is scaled by max(1, χ²_ν) (Birge ratio).

Coverage factor: k = 2 (JCGM 100:2008 G.6.6) unless the degrees of freedom are fewer
than 30, then the Student-t factor for 95.45 % coverage (JCGM 100:2008 G.3, Table G.2); the
switch at 30 (where t differs from 2 by 4 %) is common practice, no source.
Under AR(1) noise the degrees of freedom are those of the effective number of independent
residuals, N (1 − φ)/(1 + φ) [8], so short, strongly correlated tracks get a larger k.

References
----------
1. S. J. Prais and C. B. Winsten, "Trend estimators and serial correlation", Cowles
   Commission Discussion Paper 383 (1954).
2. J. Durbin and G. S. Watson, "Testing for serial correlation in least squares
   regression I", Biometrika 37 (1950) 409–428; G. M. Ljung and G. E. P. Box, "On a
   measure of lack of fit in time series models", Biometrika 65 (1978) 297–303.
3. S. M. Kay, *Fundamentals of Statistical Signal Processing: Estimation Theory*,
   Prentice Hall 1993, ch. 3 (Cramér–Rao bound for Gaussian noise, eq. 3.31).
4. P. J. Rousseeuw and C. Croux, "Alternatives to the median absolute deviation",
   J. Am. Stat. Assoc. 88 (1993) 1273–1283 (MAD consistency factor 1.4826).
5. JCGM 100:2008, *Evaluation of measurement data — Guide to the expression of
   uncertainty in measurement* (GUM), Annex G.
6. A. Wald and J. Wolfowitz, "On a test whether two samples are from the same
   population", Ann. Math. Stat. 11 (1940) 147–162 (runs of residual sign).
7. W.-K. Cheang and G. C. Reinsel, "Bias reduction of autoregressive estimates in time
   series regression model through restricted maximum likelihood", J. Am. Stat. Assoc.
   95 (2000) 1173–1184.
8. A. Zięba, "Effective number of observations and unbiased estimators of variance for
   autocorrelated data — an overview", Metrol. Meas. Syst. 17 (2010) 3–16
   (n_eff = n (1 − ρ)/(1 + ρ) for an AR(1) process).
"""

from __future__ import annotations

import functools
import math
import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from fitdrag._version import __version__
from fitdrag.physics.air import STANDARD_GRAVITY, Air
from fitdrag.physics.forces import Conditions, effective_mass
from fitdrag.physics.registry import get_drag_model
from fitdrag.physics.simulate import LAUNCH_NAMES, FlightModel, Launch
from fitdrag.tracks.track import Track

#: Default coverage probability for the expanded uncertainty (k = 2 for large ν).
COVERAGE_PROBABILITY = 0.9545
#: Relative standard uncertainty of Cd above which drag is reported as not measurable.
IDENTIFIABILITY_LIMIT = 0.25
#: Integrator tolerance inside fits: positions to ~1e-8 m, far below any tracking noise.
FIT_RTOL = 1e-9
#: Residual RMS, as a fraction of the flight's extent, above which a fit is called a failure.
ADEQUACY_LIMIT = 0.02
#: Fraction of frames rejected as outliers above which the fit is called a failure.
REJECTION_LIMIT = 0.2
_MAD = 1.4826
_FAIL_RESIDUAL = 1e6


# ----------------------------------------------------------------------------- results


@dataclass(frozen=True, eq=False)
class ThrowResult:
    """Per-throw part of a fit.

    Attributes
    ----------
    source : str
        File or label of the throw.
    t : ndarray
        All sample times of the throw. [s]
    labels : ndarray
        Frame numbers (or row indices) of all samples.
    used : ndarray of bool
        Samples kept in the final fit.
    residual_x, residual_y : ndarray
        Observed minus fitted position at every sample (rejected ones included). [m]
    fitted_x, fitted_y : ndarray
        Fitted positions at the sample times. [m]
    launch : Launch
        Fitted launch state at ``t[0]`` ([m], [m/s]).
    launch_covariance : ndarray
        4×4 covariance of (x0, y0, vx0, vy0). [SI²]
    speed, speed_uncertainty : float
        Launch speed and its standard uncertainty. [m/s]
    angle, angle_uncertainty : float
        Launch angle above the horizontal and its standard uncertainty. [deg]
    rejection_reasons : dict
        Frame label -> reason, for rejected samples.
    sigma : (float, float)
        Noise standard deviation used for x and y (estimated or from the track). [m]
    reynolds_range : (float, float)
        Smallest and largest Reynolds number over the fitted flight. [-]
    """

    source: str
    t: np.ndarray
    labels: np.ndarray
    used: np.ndarray
    residual_x: np.ndarray
    residual_y: np.ndarray
    fitted_x: np.ndarray
    fitted_y: np.ndarray
    launch: Launch
    launch_covariance: np.ndarray
    speed: float
    speed_uncertainty: float
    angle: float
    angle_uncertainty: float
    rejection_reasons: dict
    sigma: tuple[float, float]
    reynolds_range: tuple[float, float]
    sha256: str | None = None

    @property
    def residual_rms(self) -> float:
        """RMS of the kept residuals over both axes. [m]"""
        r = np.concatenate((self.residual_x[self.used], self.residual_y[self.used]))
        return float(np.sqrt(np.mean(r**2)))

    @property
    def rejected(self) -> list[int]:
        return [int(v) for v in self.labels[~self.used]]


@dataclass(frozen=True, eq=False)
class FitResult:
    """Outcome of :func:`fit_tracks`.

    Attributes
    ----------
    success : bool
        False when the optimiser did not converge (the numbers are then not to be used).
    message : str
    model : str
        Drag model name.
    parameter_names : tuple of str
        Names of all fitted parameters (shared first, then per-throw launch states).
    values : ndarray
        Fitted parameter values (SI).
    covariance : ndarray
        Parameter covariance (SI²).
    constants : tuple of float
        The drag model's fixed constants (e.g. its reference Reynolds number).
    cd : float
        Drag coefficient (at the median Reynolds number for Re-dependent models). [-]
    u_cd : float
        Statistical standard uncertainty of ``cd``. [-]
    dof : int
        Degrees of freedom of the fit (residuals minus parameters).
    coverage_factor : float
    throws : tuple of ThrowResult
    noise : dict
        Noise model used and its estimates.
    diagnostics : dict
        Residual statistics, identifiability, Reynolds numbers, terminal speed.
    specimen, conditions :
        The inputs.
    """

    success: bool
    message: str
    model: str
    parameter_names: tuple[str, ...]
    values: np.ndarray
    covariance: np.ndarray
    constants: tuple[float, ...]
    cd: float
    u_cd: float
    dof: int
    coverage_factor: float
    throws: tuple[ThrowResult, ...]
    noise: dict
    diagnostics: dict
    specimen: Any
    conditions: Conditions
    lift: bool = False
    options: dict = field(default_factory=dict)
    _state: dict = field(default_factory=dict, repr=False)

    @property
    def expanded_uncertainty(self) -> float:
        """U = k u(Cd). [-]"""
        return self.coverage_factor * self.u_cd

    @property
    def coverage_probability(self) -> float:
        return COVERAGE_PROBABILITY

    def parameter(self, name: str) -> tuple[float, float]:
        """(value, standard uncertainty) of a fitted parameter by name."""
        i = self.parameter_names.index(name)
        return float(self.values[i]), float(math.sqrt(max(self.covariance[i, i], 0.0)))

    @property
    def shared_names(self) -> tuple[str, ...]:
        m = get_drag_model(self.model)
        return m.parameters + (("lift_coefficient",) if self.lift else ())

    def flight(self, index: int = 0, t=None):
        """Fitted flight of throw ``index`` at times ``t`` (default: its sample times)."""
        from fitdrag.physics.simulate import simulate

        th = self.throws[index]
        tt = th.t if t is None else np.asarray(t, float)
        m = get_drag_model(self.model)
        dp = [self.parameter(n)[0] for n in m.parameters] + list(self.constants)
        cl = self.parameter("lift_coefficient")[0] if self.lift else 0.0
        return simulate(tt, th.launch, self.specimen, self.conditions, model=m,
                        drag_params=dp, lift_coefficient=cl)  # fmt: skip

    def cd_at(self, re) -> tuple[np.ndarray, np.ndarray]:
        """Drag coefficient at stated Reynolds numbers ``re`` [-] and its standard uncertainty.

        The covariance of the drag parameters is propagated through the drag law to first
        order (JCGM 100:2008, eq. 13).
        """
        r = np.atleast_1d(np.asarray(re, dtype=float))
        if not np.all(np.isfinite(r)) or np.any(r <= 0):
            raise ValueError(
                f"re: Reynolds numbers must be finite and > 0, got {r.tolist()!r}; pass the "
                f"Reynolds numbers at which to state Cd."
            )
        dm = get_drag_model(self.model)
        out = [_cd_and_gradient(dm, self.values, self.constants, float(x)) for x in r]
        cd = np.array([c for c, _ in out])
        u = np.array([math.sqrt(max(float(g @ self.covariance @ g), 0.0)) for _, g in out])
        return cd, u

    def to_dict(self) -> dict:
        """The JSON-ready summary (see the README for its fields)."""
        return _result_dict(self)


# ----------------------------------------------------------------------------- helpers


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


def _cd_and_gradient(dm, theta, constants, re: float) -> tuple[float, np.ndarray]:
    """C_d at ``re`` and its gradient with respect to all fitted parameters θ."""
    n_fit = len(dm.parameters)
    p_full = np.concatenate((np.asarray(theta[:n_fit], float), constants)).astype(float)
    grad = np.zeros(max(p_full.size, 1))
    cd, _ = dm.kernel(float(re), p_full, grad)
    g = np.zeros(len(theta))
    g[:n_fit] = grad[:n_fit]
    return float(cd), g


def _sign_runs(r: np.ndarray) -> tuple[int, float, float]:
    """Runs of residual sign: (runs, expected, z) per Wald & Wolfowitz [6]."""
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


def _lag1(series: list[np.ndarray]) -> tuple[float, int]:
    """Pooled lag-1 autocorrelation of several residual series and the number of pairs."""
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


def _ljung_box(series: list[np.ndarray], lags: int = 10) -> tuple[float, float]:
    """Ljung–Box Q over pooled series [2]: (Q, p-value)."""
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
    from scipy import stats

    return q, float(stats.chi2.sf(q, dof))


def _durbin_watson(series: list[np.ndarray]) -> float:
    num = sum(float(np.sum(np.diff(r) ** 2)) for r in series if r.size > 1)
    den = sum(float(np.dot(r, r)) for r in series)
    return num / den if den > 0 else float("nan")


def _coverage_factor(dof: float, k: float | None) -> float:
    if k is not None:
        return float(k)
    if dof >= 30:
        return 2.0
    from scipy import stats

    return float(stats.t.ppf(0.5 + COVERAGE_PROBABILITY / 2.0, max(dof, 1)))


def _robust_sigma(r: np.ndarray) -> float:
    r = r[np.isfinite(r)]
    if r.size == 0:
        return float("nan")
    return _MAD * float(np.median(np.abs(r - np.median(r))))


def _initial_launch(track: Track, g: float) -> np.ndarray:
    """Quadratic fit to the first samples: a drag-free, finite-difference launch guess."""
    n = len(track)
    m = min(n, max(8, n // 5))
    tau = track.t[:m] - track.t[0]
    out = []
    for pos in (track.x[:m], track.y[:m]):
        c = np.polyfit(tau, pos, 2)
        out.append((c[2], c[1]))
    return np.array([out[0][0], out[1][0], out[0][1], out[1][1]], dtype=float)


def _noise_floor(track: Track) -> tuple[float, float]:
    """Robust first noise estimate per axis from second differences of position."""
    res = []
    for pos in (track.x, track.y):
        d2 = pos[2:] - 2.0 * pos[1:-1] + pos[:-2]
        s = _robust_sigma(d2 - np.median(d2)) / math.sqrt(6.0)
        span = float(np.ptp(pos)) or 1.0
        res.append(max(s, 1e-9 * span, 1e-12))
    return res[0], res[1]


# ----------------------------------------------------------------------------- problem


class _Problem:
    """Residuals and Jacobian for the global fit, with caching of the last evaluation."""

    def __init__(self, tracks, specimen, conditions, model, constants, lift):
        self.tracks = tracks
        self.model = model
        self.lift = lift
        self.n_shared = len(model.parameters) + (1 if lift else 0)
        self.models = [
            FlightModel(
                tr.t,
                specimen,
                conditions,
                model,
                constants,
                fit_lift=lift,
                rtol=FIT_RTOL,
                atol=FIT_RTOL,
            )  # fmt: skip
            for tr in tracks
        ]
        self.n_params = self.n_shared + 4 * len(tracks)
        # weighting and whitening state
        self.masks = [np.ones(len(tr), bool) for tr in tracks]
        self.sigmas = [np.ones((len(tr), 2)) for tr in tracks]
        self.phi = (0.0, 0.0)
        self._refresh_layout()
        self._cache_theta = None
        self._cache = None
        self.n_evaluations = 0

    def _refresh_layout(self):
        self.index = []
        self.gaps = []
        for tr, mask in zip(self.tracks, self.masks):
            idx = np.flatnonzero(mask)
            self.index.append(idx)
            self.gaps.append(frame_gaps(tr.t, idx))
        self.n_resid = 2 * sum(i.size for i in self.index)
        # per throw: the kept samples (a slice when all are kept), and per axis the kept
        # observations and inverse sigmas, so that evaluate() does no repeated indexing
        self._pre = []
        for i, (tr, idx) in enumerate(zip(self.tracks, self.index)):
            sel = slice(None) if idx.size == len(tr) else idx
            axes = []
            for axis, obs in ((0, tr.x), (1, tr.y)):
                axes.append((np.ascontiguousarray(obs[sel]), 1.0 / self.sigmas[i][sel, axis]))
            self._pre.append((sel, idx.size, self.n_shared + 4 * i, axes))
        self._cache_theta = None

    def set_state(self, masks=None, sigmas=None, phi=None):
        if masks is not None:
            self.masks = [np.asarray(m, bool) for m in masks]
        if sigmas is not None:
            self.sigmas = sigmas
        if phi is not None:
            self.phi = (float(phi[0]), float(phi[1]))
        self._refresh_layout()

    def throw_theta(self, theta, i):
        base = self.n_shared + 4 * i
        return np.concatenate((theta[base : base + 4], theta[: self.n_shared]))

    def simulate_all(self, theta, sens=True):
        out = []
        for i, fm in enumerate(self.models):
            status, pos, vel, jac, _ = fm.run(self.throw_theta(theta, i), sens)
            out.append((status, pos, vel, jac))
        return out

    def evaluate(self, theta):
        theta = np.asarray(theta, float)
        if self._cache_theta is not None and np.array_equal(theta, self._cache_theta):
            return self._cache
        sims = self.simulate_all(theta, True)
        self.n_evaluations += 1
        res = np.empty(self.n_resid)
        jac = np.zeros((self.n_resid, self.n_params))
        row = 0
        ok = True
        ns = self.n_shared
        for i, (sel, m, base, axes) in enumerate(self._pre):
            status, pos, _vel, sj = sims[i]
            if status != 0 or not np.all(np.isfinite(pos)):
                ok = False
                res[row : row + 2 * m] = _FAIL_RESIDUAL
                row += 2 * m
                continue
            for axis, (obs, inv_s) in enumerate(axes):
                r = (obs - pos[sel, axis]) * inv_s
                j = sj[sel, axis, :] * (-inv_s)[:, None]
                f = self.phi[axis]
                if f != 0.0:
                    r = prais_winsten(r, self.gaps[i], f)
                    j = prais_winsten(j, self.gaps[i], f)
                res[row : row + m] = r
                # columns: the throw's launch state, then the shared parameters
                jac[row : row + m, base : base + 4] = j[:, :4]
                jac[row : row + m, :ns] = j[:, 4:]
                row += m
        self._cache_theta = theta.copy()
        self._cache = (res, jac, sims, ok)
        return self._cache


def _reml_ar1(problem: _Problem, theta) -> tuple[float, float]:
    """AR(1) coefficients (x, y) by restricted maximum likelihood at the current fit.

    The lag-1 autocorrelation of least-squares residuals underestimates φ (the fitted
    launch state and drag absorb part of the slow, correlated error); the restricted
    likelihood of the linearised model removes most of that bias [7]:

        −2 ℓ_R(φ) = (N − P) ln S(φ) + Σ ln(1 − φ^(2d)) + ln det(J̃ᵀ J̃),

    with S the minimum whitened sum of squares of the linearised problem, d the frame gap
    of each whitened row and J̃ the whitened Jacobian (noise levels held at their current
    estimates).  Minimised per axis in turn over φ ∈ (−0.98, 0.98).  One variance is
    profiled over both axes while φ is per axis — an approximation to the full restricted
    likelihood, adequate because the weights already equalise the axes' noise levels.
    """
    from scipy.optimize import minimize_scalar

    saved = problem.phi
    problem.set_state(phi=(0.0, 0.0))
    r0, j0, _sims, ok = problem.evaluate(theta)
    problem.set_state(phi=saved)
    if not ok:
        return saved
    blocks = []  # (rows, axis, gaps)
    row = 0
    for i, idx in enumerate(problem.index):
        m = idx.size
        for axis in (0, 1):
            blocks.append((slice(row, row + m), axis, problem.gaps[i]))
            row += m
    n, p = j0.shape
    phi = list(saved)

    def objective(value, axis):
        trial = list(phi)
        trial[axis] = value
        r = np.empty_like(r0)
        j = np.empty_like(j0)
        logdet = 0.0
        for rows, ax, gaps in blocks:
            f = trial[ax]
            r[rows] = prais_winsten(r0[rows], gaps, f)
            j[rows] = prais_winsten(j0[rows], gaps, f)
            if f != 0.0:
                logdet += float(np.sum(np.log1p(-(f ** (2 * gaps)))))
        q, rr = np.linalg.qr(j)
        resid = r - q @ (q.T @ r)
        ss = float(resid @ resid)
        sign, ld = np.linalg.slogdet(rr.T @ rr)
        if ss <= 0 or sign <= 0:
            return np.inf
        return (n - p) * math.log(ss) + logdet + ld

    for _round in range(2):
        for axis in (0, 1):
            out = minimize_scalar(
                objective, bounds=(-0.98, 0.98), args=(axis,), method="bounded",
                options={"xatol": 1e-4},
            )  # fmt: skip
            phi[axis] = float(out.x)
    return phi[0], phi[1]


def _params(problem: _Problem, theta, bounds):
    import lmfit

    p = lmfit.Parameters()
    for j, name in enumerate(problem.names):
        lo, hi = bounds[j]
        p.add(name, value=float(np.clip(theta[j], lo, hi)), min=lo, max=hi)
    return p


def _solve(problem: _Problem, theta, bounds, loss="linear", f_scale=1.0, max_nfev=200,
           engine="scipy", tol=1e-8):  # fmt: skip
    """One optimiser stage; (theta, success, message, nfev).

    The intermediate stages call scipy's trust-region-reflective ``least_squares``
    directly; the final stage goes through lmfit (``engine="lmfit"``), which wraps the very
    same solver and whose result object is kept for the analyst.
    """
    if engine == "scipy":
        return _solve_scipy(problem, theta, bounds, loss, f_scale, max_nfev, tol)
    names = problem.names

    def resid(params):
        th = np.array([params[n].value for n in names])
        return problem.evaluate(th)[0]

    def jacobian(params):
        th = np.array([params[n].value for n in names])
        return problem.evaluate(th)[1]

    import lmfit

    mini = lmfit.Minimizer(resid, _params(problem, theta, bounds), nan_policy="raise")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        if loss == "linear":
            # MINPACK's Levenberg–Marquardt with the analytic Jacobian (lmfit maps the bounds)
            out = mini.leastsq(Dfun=jacobian, col_deriv=0, max_nfev=max_nfev, ftol=1e-14,
                               xtol=1e-12)  # fmt: skip
        else:
            out = mini.least_squares(jac=jacobian, loss=loss, f_scale=f_scale, max_nfev=max_nfev,
                                     x_scale="jac", ftol=1e-10, xtol=1e-10, gtol=1e-10)  # fmt: skip
    th = np.array([out.params[n].value for n in names])
    success = bool(out.success) and not out.aborted and problem.evaluate(th)[3]
    return th, success, str(out.message), out.nfev


def _levenberg_marquardt(problem: _Problem, theta, bounds, max_iter: int = 60,
                         tol: float = 1e-6):  # fmt: skip
    """A compact Levenberg–Marquardt (Marquardt 1963 diagonal scaling) from the first guess.

    Only for the first, Gaussian pass from the drag-free start; bounds are kept by
    projection.  Reports failure (and the caller falls back to the trust-region solver)
    when it does not settle within ``max_iter`` iterations.

    References: D. W. Marquardt, "An algorithm for least-squares estimation of nonlinear
    parameters", J. SIAM 11 (1963) 431–441.
    """
    lo = np.array([b[0] for b in bounds])
    hi = np.array([b[1] for b in bounds])
    theta = np.clip(np.array(theta, float), lo, hi)
    res, jac, _s, ok = problem.evaluate(theta)
    if not ok:
        return theta, False
    cost = float(res @ res)
    lam = 1e-3
    for _ in range(max_iter):
        jtj = jac.T @ jac
        g = jac.T @ res
        d = np.diag(jtj).copy()
        d[d <= 0] = 1.0
        try:
            step = np.linalg.solve(jtj + lam * np.diag(d), -g)
        except np.linalg.LinAlgError:
            return theta, False
        new = np.clip(theta + step, lo, hi)
        r2, j2, _s, ok2 = problem.evaluate(new)
        c2 = float(r2 @ r2) if ok2 else np.inf
        if c2 < cost:
            rel = (cost - c2) / max(cost, 1e-300)
            theta, res, jac, cost = new, r2, j2, c2
            lam = max(lam / 3.0, 1e-12)
            if rel < tol:
                return theta, True
        else:
            lam *= 4.0
            if lam > 1e12:
                return theta, cost < np.inf
    return theta, False


def _robust_solve(problem: _Problem, theta, bounds, max_nfev, f_scale: float = 3.0):
    """Soft-L1 robust fit by iteratively reweighted Gauss–Newton, else the trust region.

    Minimises Σ ρ((r/c)²) with ρ(s) = 2(√(1+s) − 1) (the soft-L1 loss, c = ``f_scale``
    noise units) by Gauss–Newton steps on the residuals weighted with √ρ′ = (1+s)^(−1/4)
    [Holland & Welsch 1977]; falls back to scipy's trust-region solver with the same loss
    if the iteration does not settle.

    References: P. W. Holland and R. E. Welsch, "Robust regression using iteratively
    reweighted least-squares", Commun. Stat. Theory Methods 6 (1977) 813–827.
    """
    before = problem.n_evaluations
    lo = np.array([b[0] for b in bounds])
    hi = np.array([b[1] for b in bounds])
    th = np.clip(np.array(theta, float), lo, hi)

    def robust_cost(r):
        return float(np.sum(2.0 * (np.sqrt(1.0 + (r / f_scale) ** 2) - 1.0)))

    res, jac, _s, ok = problem.evaluate(th)
    cost = robust_cost(res) if ok else np.inf
    converged = False
    for _ in range(30):
        if not ok or problem.n_evaluations - before >= max_nfev:
            break
        w = (1.0 + (res / f_scale) ** 2) ** -0.25
        jw = jac * w[:, None]
        scale = np.linalg.norm(jw, axis=0)
        scale[scale == 0] = 1.0
        js = jw / scale
        try:
            step = np.linalg.solve(js.T @ js, -(js.T @ (w * res))) / scale
        except np.linalg.LinAlgError:
            break
        # halve the step until the robust cost falls (IRLS steps can overshoot)
        for _half in range(6):
            new = np.clip(th + step, lo, hi)
            r2, j2, _s, ok2 = problem.evaluate(new)
            c2 = robust_cost(r2) if ok2 else np.inf
            if c2 <= cost:
                break
            step = step / 2.0
        if not c2 <= cost:
            break
        rel = (cost - c2) / max(cost, 1e-300)
        th, res, jac, cost, ok = new, r2, j2, c2, ok2
        if rel < 1e-9 or np.all(np.abs(step) <= 1e-10 * (np.abs(th) + 1e-3)):
            converged = True
            break
    if converged:
        return th, True, "converged (iteratively reweighted)", problem.n_evaluations - before
    th2, ok2, msg, nfev = _solve(problem, theta, bounds, loss="soft_l1", f_scale=f_scale,
                                 max_nfev=max_nfev)  # fmt: skip
    return th2, ok2, msg, problem.n_evaluations - before


def _polish(problem: _Problem, theta, bounds, max_nfev):
    """Re-converge from a nearby point: Gauss–Newton, else the trust-region solver."""
    before = problem.n_evaluations
    th, ok = _gauss_newton(problem, theta, bounds)
    if ok:
        return (
            th,
            True,
            "converged (Gauss-Newton from a nearby optimum)",
            problem.n_evaluations - before,
        )
    return _solve(problem, theta, bounds, max_nfev=max_nfev)


def _solve_scipy(problem: _Problem, theta, bounds, loss, f_scale, max_nfev, tol=1e-8):
    from scipy.optimize import least_squares

    lo = np.array([b[0] for b in bounds], float)
    hi = np.array([b[1] for b in bounds], float)
    x0 = np.clip(np.asarray(theta, float), lo, hi)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        out = least_squares(
            lambda th: problem.evaluate(th)[0], x0, jac=lambda th: problem.evaluate(th)[1],
            bounds=(lo, hi), method="trf", loss=loss, f_scale=f_scale, x_scale="jac",
            ftol=tol, xtol=tol, gtol=tol, max_nfev=max_nfev,
        )  # fmt: skip
    success = bool(out.success) and out.status > 0 and problem.evaluate(out.x)[3]
    return out.x, success, str(out.message), int(out.nfev)


# ----------------------------------------------------------------------------- front door


@functools.lru_cache(maxsize=1)
def _blas_controller():
    from threadpoolctl import ThreadpoolController

    return ThreadpoolController()


def _as_tracks(tracks) -> list[Track]:
    if isinstance(tracks, Track):
        return [tracks]
    tracks = list(tracks)
    if not tracks:
        raise ValueError("tracks: no track given; pass one Track or a list of Tracks.")
    for i, tr in enumerate(tracks):
        if not isinstance(tr, Track):
            raise ValueError(
                f"tracks[{i}]: expected a fitdrag.Track, got {type(tr).__name__}; build one "
                f"with fitdrag.Track(t, x, y) or fitdrag.read_track(path)."
            )
    return tracks


def fit_tracks(
    tracks: Track | Sequence[Track],
    specimen,
    air: Air,
    *,
    gravity: float = STANDARD_GRAVITY,
    model: str = "constant",
    lift: bool = False,
    wind: float = 0.0,
    buoyancy: bool = True,
    robust: bool = True,
    noise: str = "auto",
    coverage_factor: float | None = None,
    initial: dict | None = None,
    max_nfev: int = 300,
) -> FitResult:
    """Fit the drag model and every throw's launch state.

    Parameters
    ----------
    tracks : Track or sequence of Track
        One or several throws of the same specimen in the same air.
    specimen : Sphere or Body
        The specimen (mass [kg], size).
    air : Air
        Air density [kg/m³] and viscosity [Pa s].
    gravity : float
        Acceleration of free fall. [m/s²]
    model : str
        Drag model name (see :func:`fitdrag.physics.forces.drag_model_names`).
    lift : bool
        Also fit a constant lift coefficient (spinning specimen).
    wind : float
        Known constant horizontal wind along +x. [m/s]
    buoyancy : bool
        Include buoyancy (switch off only to study its effect).
    robust : bool
        Robust loss plus explicit rejection of gross outliers.
    noise : {"auto", "white", "ar1"}
        Noise model: "auto" uses AR(1) when the residuals' lag-1 autocorrelation is
        significant (p < 0.01).
    coverage_factor : float, optional
        Force k; default 2, or the Student-t factor for fewer than 30 degrees of freedom.
    initial : dict, optional
        Starting values by parameter name (e.g. ``{"cd": 0.4}``).
    max_nfev : int
        Evaluation budget of each optimiser stage.

    Returns
    -------
    FitResult
        ``success`` is False (with a message) when the optimiser did not converge.
    """
    # the linear algebra here is on small matrices: extra BLAS threads only contend
    with _blas_controller().limit(limits=1, user_api="blas"):
        return _fit_tracks(
            tracks, specimen, air, gravity=gravity, model=model, lift=lift, wind=wind,
            buoyancy=buoyancy, robust=robust, noise=noise, coverage_factor=coverage_factor,
            initial=initial, max_nfev=max_nfev,
        )  # fmt: skip


def _fit_tracks(tracks, specimen, air, *, gravity, model, lift, wind, buoyancy, robust, noise,
                coverage_factor, initial, max_nfev) -> FitResult:  # fmt: skip
    tracks = _as_tracks(tracks)
    if not all(hasattr(specimen, a) for a in ("mass", "area", "volume", "length")):
        raise ValueError(
            f"specimen: expected a fitdrag.Sphere or fitdrag.Body, got {specimen!r}; build one "
            f"with fitdrag.Sphere(mass, diameter) or fitdrag.Body(mass, area, volume)."
        )
    if coverage_factor is not None and not (
        isinstance(coverage_factor, (int, float)) and math.isfinite(coverage_factor)
        and coverage_factor > 0
    ):  # fmt: skip
        raise ValueError(
            f"coverage_factor: must be a finite number > 0, got {coverage_factor!r}; leave it "
            f"out for k = 2 (or the Student-t factor for few points)."
        )
    if not isinstance(max_nfev, int) or max_nfev < 1:
        raise ValueError(
            f"max_nfev: must be a whole number >= 1, got {max_nfev!r}; the default 300 suits "
            f"every ordinary track."
        )
    if noise not in ("auto", "white", "ar1"):
        raise ValueError(f"noise: unknown noise model {noise!r}; use 'auto', 'white' or 'ar1'.")
    if not isinstance(air, Air):
        raise ValueError(
            f"air: expected a fitdrag.Air, got {type(air).__name__}; use fitdrag.Air(density) "
            f"or fitdrag.Air.from_conditions(temperature, pressure, relative_humidity)."
        )
    dm = get_drag_model(model)
    conditions = Conditions(air=air, gravity=gravity, wind=wind, buoyancy=buoyancy)
    starts = [_initial_launch(tr, conditions.gravity) for tr in tracks]

    # constants of the drag model (e.g. reference Re) from the first-guess speeds
    constants: tuple[float, ...] = ()
    if dm.constants:
        re_first = []
        for tr in tracks:
            v = np.hypot(np.gradient(tr.x, tr.t) - wind, np.gradient(tr.y, tr.t))
            re_first.append(air.density * v * specimen.length / air.viscosity)
        constants = dm.constants_for(np.concatenate(re_first))

    problem = _Problem(tracks, specimen, conditions, dm, constants, lift)
    shared_names = dm.parameters + (("lift_coefficient",) if lift else ())
    names = list(shared_names)
    for i in range(len(tracks)):
        names += [f"{n}_{i + 1}" for n in LAUNCH_NAMES]
    problem.names = names
    bounds = [tuple(b) for b in dm.bounds] + ([(-5.0, 5.0)] if lift else [])
    bounds += [(-np.inf, np.inf)] * (4 * len(tracks))
    problem.bounds = bounds
    theta = np.concatenate([np.array(dm.initial, float), [0.0] if lift else np.zeros(0)] + starts)
    if initial:
        for k, v in initial.items():
            if k not in names:
                raise ValueError(f"initial: unknown parameter {k!r}; valid: {', '.join(names)}.")
            theta[names.index(k)] = float(v)

    given_sigma = all(tr.sigma is not None for tr in tracks)
    floors = [_noise_floor(tr) for tr in tracks]

    def set_sigmas(per_axis):
        sig = []
        for tr, (sx, sy) in zip(tracks, per_axis):
            if given_sigma:
                sig.append(np.column_stack((tr.sigma, tr.sigma)))
            else:
                sig.append(np.column_stack((np.full(len(tr), sx), np.full(len(tr), sy))))
        problem.set_state(sigmas=sig)

    def raw_residuals(th):
        th = np.asarray(th, float)
        if problem._cache_theta is not None and np.array_equal(th, problem._cache_theta):
            sims = problem._cache[2]  # the last evaluation: the same flight, already computed
        else:
            sims = problem.simulate_all(th, False)
        out = []
        for tr, (status, pos, _v, _j) in zip(tracks, sims):
            if status != 0:
                out.append((np.full(len(tr), np.inf), np.full(len(tr), np.inf)))
            else:
                out.append((tr.x - pos[:, 0], tr.y - pos[:, 1]))
        return out

    total_nfev = 0
    messages = []
    set_sigmas(floors)
    # a guarded start: the drag-free guess first with the shared parameters at their initial
    # values; if that fails, try a few drag levels
    success = False
    best = None
    for cd_try in (None, 0.1, 2.0, 0.02):
        th0 = theta.copy()
        if cd_try is not None:
            if dm.name != "constant" and cd_try is not None:
                th0[0] = dm.initial[0] * cd_try / 0.5
            else:
                th0[0] = cd_try
        # a quick Gaussian pass brings the drag-free guess close; the robust loss then
        # discounts gross outliers from there
        before = problem.n_evaluations
        th, ok = _levenberg_marquardt(problem, th0, bounds, max_iter=max(max_nfev // 4, 1))
        msg = "converged" if ok else "the first Gaussian pass did not converge"
        if not ok:
            th, ok, msg, _ = _solve(problem, th0, bounds, max_nfev=max(max_nfev // 4, 1),
                                    tol=1e-4)  # fmt: skip
        total_nfev += problem.n_evaluations - before
        if robust and np.all(np.isfinite(th)):
            th1, ok, msg, nfev = _robust_solve(problem, th if ok else th0, bounds, max_nfev)
            total_nfev += nfev
            th = th1
        cost = float(np.sum(problem.evaluate(th)[0] ** 2))
        if best is None or (ok and (not best[1] or cost < best[2])):
            best = (th, ok, cost, msg)
        if ok:
            break
    theta, success, _, msg = best
    if not success:
        messages.append(f"the first fit from the drag-free start did not converge ({msg})")

    rejection: list[dict] = [dict() for _ in tracks]
    masks = [np.ones(len(tr), bool) for tr in tracks]
    n_resid_total = 2 * sum(len(tr) for tr in tracks)
    from scipy import stats

    z_limit = max(4.0, float(stats.norm.isf(0.01 / (2.0 * n_resid_total))))

    if robust and success:
        for _round in range(4):
            raw = raw_residuals(theta)
            scales = []
            changed = False
            for i, ((rx, ry), tr) in enumerate(zip(raw, tracks)):
                mask = masks[i]
                if given_sigma:
                    # stated sigmas may understate the noise: never reject on a scale
                    # smaller than the residuals' own robust spread
                    nx, ny = rx / tr.sigma, ry / tr.sigma
                    bx = max(1.0, _robust_sigma(nx[mask]))
                    by = max(1.0, _robust_sigma(ny[mask]))
                    zx, zy = np.abs(nx) / bx, np.abs(ny) / by
                else:
                    fl = floors[i]
                    sx = max(_robust_sigma(rx[mask]), fl[0] * 1e-3)
                    sy = max(_robust_sigma(ry[mask]), fl[1] * 1e-3)
                    scales.append((sx, sy))
                    zx, zy = np.abs(rx) / sx, np.abs(ry) / sy
                z = np.maximum(zx, zy)
                new_mask = z <= z_limit
                if new_mask.sum() < 8:
                    new_mask = z <= np.sort(z)[7]
                if not np.array_equal(new_mask, mask):
                    changed = True
                masks[i] = new_mask
                rejection[i] = {
                    int(tr.labels[j]): f"residual {z[j]:.1f} sigma exceeds the {z_limit:.1f} "
                    f"sigma limit ({'x' if zx[j] >= zy[j] else 'y'})"
                    for j in np.flatnonzero(~new_mask)
                }
            if not changed:
                break
            problem.set_state(masks=masks)
            if not given_sigma:
                set_sigmas(scales)
            th, ok, msg, nfev = _robust_solve(problem, theta, bounds, max_nfev)
            total_nfev += nfev
            if ok:
                theta = th

    # plain (Gaussian) fit on kept points, noise re-estimated, AR(1) if called for
    problem.set_state(masks=masks)

    def estimate_sigmas(th):
        raw = raw_residuals(th)
        if given_sigma:
            return None
        out = []
        n_par_share = problem.n_params / max(problem.n_resid, 1)
        for (rx, ry), mask in zip(raw, masks):
            m = max(mask.sum(), 1)
            corr = 1.0 / math.sqrt(max(1.0 - n_par_share, 0.05))
            out.append(
                (
                    max(float(np.sqrt(np.mean(rx[mask] ** 2))) * corr, 1e-12),
                    max(float(np.sqrt(np.mean(ry[mask] ** 2))) * corr, 1e-12),
                )
            )
            del m
        return out

    phi = (0.0, 0.0)
    noise_model = "white"
    previous = np.array([[np.median(sg[:, 0]), np.median(sg[:, 1])] for sg in problem.sigmas])
    for _it in range(4):
        th, ok, msg, nfev = _polish(problem, theta, bounds, max_nfev)
        total_nfev += nfev
        if not ok:
            success = False
            messages.append(msg)
            break
        theta = th
        sig = estimate_sigmas(theta)
        if sig is None:
            break
        set_sigmas(sig)
        arr = np.asarray(sig)
        # the weights only matter relative to each other: stop once their ratios settle
        if np.max(np.abs((arr / arr.flat[0]) / (previous / previous.flat[0]) - 1.0)) < 0.02:
            break
        previous = arr
    sig_white = estimate_sigmas(theta)

    # residual series of kept points, per throw and axis, normalised by sigma
    def normalised_series(th):
        raw = raw_residuals(th)
        series = {0: [], 1: []}
        for i, ((rx, ry), mask) in enumerate(zip(raw, masks)):
            s = problem.sigmas[i]
            series[0].append(rx[mask] / s[mask, 0])
            series[1].append(ry[mask] / s[mask, 1])
        return series

    series = normalised_series(theta)
    r1_all, pairs = _lag1(series[0] + series[1])
    z_r1 = r1_all * math.sqrt(max(pairs, 1))
    p_r1 = float(2.0 * stats.norm.sf(abs(z_r1)))
    lb_q, lb_p = _ljung_box(series[0] + series[1])
    use_ar1 = noise == "ar1" or (noise == "auto" and p_r1 < 0.01)
    if use_ar1 and success:
        noise_model = "ar1"
        for _it in range(8):
            new_phi = _reml_ar1(problem, theta)
            problem.set_state(phi=new_phi)
            th, ok, msg, nfev = _polish(problem, theta, bounds, max_nfev)
            total_nfev += nfev
            if not ok:
                success = False
                messages.append(msg)
                break
            theta = th
            sig = estimate_sigmas(theta)
            if sig is not None:
                set_sigmas(sig)
            if max(abs(new_phi[0] - phi[0]), abs(new_phi[1] - phi[1])) < 1e-3:
                phi = new_phi
                break
            phi = new_phi
        phi = problem.phi

    # the final, reported stage through lmfit, from the converged point
    if success:
        th, ok, msg, nfev = _solve(problem, theta, bounds, max_nfev=max_nfev, engine="lmfit")
        total_nfev += nfev
        if ok:
            # a last Gauss–Newton step settles the optimum to ~1e-10 (MINPACK stops on its
            # own tolerances, lmfit's bound mapping adds round-off), so that re-fits for the
            # uncertainty budget start from, and return to, the same point
            th2, ok2 = _gauss_newton(problem, th, bounds)
            theta = th2 if ok2 else th
        else:
            success = False
            messages.append(msg)

    # covariance: sigma of whitened residuals, J~^T J~ inverse
    res, jac, sims, ok_eval = problem.evaluate(theta)
    n_par = problem.n_params
    dof = int(problem.n_resid - n_par)
    if dof < 1:
        raise ValueError(
            f"tracks: {problem.n_resid} residuals for {n_par} parameters leave no degrees of "
            f"freedom; use longer tracks or fewer throws."
        )
    chi2 = float(np.dot(res, res))
    chi2_red = chi2 / dof
    # whitened-residual scale: 1 by construction with estimated sigmas; re-normalise exactly
    scale = chi2_red if not given_sigma else max(1.0, chi2_red)
    try:
        jtj = jac.T @ jac
        cov = np.linalg.inv(jtj) * scale
        if not np.all(np.isfinite(cov)):
            raise np.linalg.LinAlgError
    except np.linalg.LinAlgError:
        cov = np.full((n_par, n_par), np.nan)
        success = False
        messages.append("the Jacobian is singular: parameters are not determined by the data")

    if not ok_eval:
        success = False
        messages.append("the simulator failed at the fitted parameters")

    result = _assemble(
        tracks, specimen, conditions, dm, constants, lift, theta, cov, dof, coverage_factor,
        success, messages, masks, rejection, problem, sims, noise_model, phi, given_sigma,
        sig_white, chi2_red, r1_all, p_r1, lb_q, lb_p, z_limit, total_nfev, robust, noise,
    )  # fmt: skip
    return result


# ----------------------------------------------------------------------------- assembly


def _assemble(tracks, specimen, conditions, dm, constants, lift, theta, cov, dof, k_user,
              success, messages, masks, rejection, problem, sims, noise_model, phi,
              given_sigma, sig_white, chi2_red, r1_all, p_r1, lb_q, lb_p, z_limit,
              total_nfev, robust, noise_opt):  # fmt: skip
    names = tuple(problem.names)
    n_shared = problem.n_shared
    air = conditions.air
    # drag coefficient: the parameter itself, or Cd at the median Reynolds number
    throws = []
    re_all = []
    for i, (tr, (_status, pos, vel, _)) in enumerate(zip(tracks, sims)):
        base = n_shared + 4 * i
        launch = Launch(*theta[base : base + 4])
        lc = cov[base : base + 4, base : base + 4]
        vx, vy = launch.vx0, launch.vy0
        sp = math.hypot(vx, vy)
        gs = np.array([vx / sp, vy / sp]) if sp > 0 else np.zeros(2)
        ga = np.array([-vy / sp**2, vx / sp**2]) if sp > 0 else np.zeros(2)
        u_sp = math.sqrt(max(gs @ lc[2:, 2:] @ gs, 0.0))
        u_an = math.degrees(math.sqrt(max(ga @ lc[2:, 2:] @ ga, 0.0)))
        q = np.hypot(vel[:, 0] - conditions.wind, vel[:, 1])
        re = air.density * q * specimen.length / air.viscosity
        re_all.append(re)
        sx = float(np.median(problem.sigmas[i][:, 0]))
        sy = float(np.median(problem.sigmas[i][:, 1]))
        throws.append(
            ThrowResult(
                source=str(tr.meta.get("source", f"track {i + 1}")),
                t=tr.t,
                labels=tr.labels,
                used=masks[i].copy(),
                residual_x=tr.x - pos[:, 0],
                residual_y=tr.y - pos[:, 1],
                fitted_x=pos[:, 0].copy(),
                fitted_y=pos[:, 1].copy(),
                launch=launch,
                launch_covariance=lc.copy(),
                speed=sp,
                speed_uncertainty=u_sp,
                angle=launch.angle,
                angle_uncertainty=u_an,
                rejection_reasons=rejection[i],
                sigma=(sx, sy),
                reynolds_range=(float(re.min()), float(re.max())),
                sha256=tr.meta.get("sha256"),
            )
        )
    re_cat = np.concatenate(re_all)
    re_med = float(np.median(re_cat))
    # refuse a flight outside the drag law's validity (e.g. the drag crisis of a sphere)
    dm.check_re_range(float(re_cat.min()), float(re_cat.max()))
    # Cd at the median Re and its uncertainty (gradient through the drag law)
    n_fit = len(dm.parameters)
    cd_med, g = _cd_and_gradient(dm, theta, constants, re_med)
    u_cd = float(math.sqrt(max(g @ cov @ g, 0.0))) if np.all(np.isfinite(cov)) else float("nan")
    cd = float(cd_med)
    # degrees of freedom for k: under AR(1) noise the residuals carry fewer independent
    # pieces of information, N_eff = N (1 - φ) / (1 + φ) per axis [8]
    if noise_model == "ar1":
        # every kept frame contributes one x and one y residual (one mask per frame)
        n_axis = problem.n_resid / 2.0
        n_eff = sum(n_axis * min(1.0, (1.0 - f) / (1.0 + f)) for f in phi)
        dof_k = max(1, int(n_eff - len(theta)))
    else:
        dof_k = dof
    k = _coverage_factor(dof_k, k_user)

    # identifiability: relative uncertainty and correlation of Cd with launch speed
    corr_speed = float("nan")
    if np.all(np.isfinite(cov)) and u_cd > 0:
        best = 0.0
        for i, th in enumerate(throws):
            base = n_shared + 4 * i
            sp = th.speed
            if sp <= 0:
                continue
            gs = np.zeros(len(theta))
            gs[base + 2] = th.launch.vx0 / sp
            gs[base + 3] = th.launch.vy0 / sp
            c = (g @ cov @ gs) / (u_cd * max(th.speed_uncertainty, 1e-300))
            if abs(c) >= abs(best):
                best = float(c)
        corr_speed = best
    rel = u_cd / abs(cd) if cd != 0 else float("inf")
    at_bound = any(
        abs(theta[j] - dm.bounds[j][0]) < 1e-9 or abs(theta[j] - dm.bounds[j][1]) < 1e-9
        for j in range(n_fit)
    )
    identifiable = bool(np.isfinite(rel) and rel <= IDENTIFIABILITY_LIMIT and not at_bound)
    at_upper = [
        dm.parameters[j] for j in range(n_fit)
        if np.isfinite(dm.bounds[j][1]) and abs(theta[j] - dm.bounds[j][1]) < 1e-9
    ]  # fmt: skip
    if success and at_upper:
        success = False
        messages.append(
            f"{', '.join(at_upper)} reached its upper bound "
            f"({', '.join(f'{dm.bounds[dm.parameters.index(n)][1]:g}' for n in at_upper)}): the "
            f"drag needed to follow the track is implausible; check the mass [kg] and size [m] "
            f"(a unit slip such as grams for kilograms?), the frame rate and the calibration"
        )
    if identifiable:
        ident_msg = (
            f"drag measured: relative standard uncertainty {100 * rel:.2g} %, correlation "
            f"with launch speed {corr_speed:+.2f}"
        )
    else:
        why = (
            "the fitted value sits on its bound"
            if at_bound
            else (
                f"relative standard uncertainty {100 * rel:.3g} % exceeds "
                f"{100 * IDENTIFIABILITY_LIMIT:.0f} %"
            )
        )
        ident_msg = (
            f"DRAG NOT MEASURABLE from these data: {why}; correlation of Cd with launch speed "
            f"{corr_speed:+.2f}. The drag is too weak over this flight (heavy specimen, short or "
            f"slow flight): use a longer flight, more frames or throws, or a lighter specimen."
        )

    # residual diagnostics on raw (unwhitened) kept residuals
    rx_all = np.concatenate([t.residual_x[t.used] for t in throws])
    ry_all = np.concatenate([t.residual_y[t.used] for t in throws])
    series = [t.residual_x[t.used] for t in throws] + [t.residual_y[t.used] for t in throws]
    runs, runs_exp, runs_z = 0, 0.0, 0.0
    for s in series:
        r_, e_, _ = _sign_runs(s)
        runs += r_
        runs_exp += e_ if np.isfinite(e_) else 0.0
    runs_z = _sign_runs(np.concatenate(series))[2]
    dw = _durbin_watson(series)
    lag1 = _lag1(series)[0]

    # terminal speed v_t = sqrt(2 (m - rho V) g / (rho Cd A)) (no lift)
    m_eff = effective_mass(specimen, air.density)
    del m_eff
    weight = specimen.mass - (air.density * specimen.volume if conditions.buoyancy else 0.0)
    if cd > 0 and weight > 0:
        vt = math.sqrt(2.0 * weight * conditions.gravity / (air.density * cd * specimen.area))
        u_vt = 0.5 * vt * u_cd / cd
    else:
        vt, u_vt = float("inf"), float("nan")

    # adequacy: a ballistic flight of one specimen follows a good track to a small fraction of
    # its extent; a fit that "converges" far from the data is reported as a failure
    rms_all = float(np.sqrt(np.mean(np.concatenate((rx_all, ry_all)) ** 2)))
    extent = max(
        float(np.hypot(np.ptp(t.fitted_x + t.residual_x), np.ptp(t.fitted_y + t.residual_y)))
        for t in throws
    )
    if success and extent > 0 and rms_all > ADEQUACY_LIMIT * extent:
        success = False
        messages.append(
            f"the model cannot follow the track: residual RMS {rms_all:.3g} m is "
            f"{100 * rms_all / extent:.3g} % of the flight's extent (limit "
            f"{100 * ADEQUACY_LIMIT:.0f} %); check that the track is one free flight, and its "
            f"time base, units and calibration"
        )
    n_used = sum(int(t.used.sum()) for t in throws)
    n_total = sum(len(t.t) for t in throws)
    if success and n_used < (1.0 - REJECTION_LIMIT) * n_total:
        success = False
        messages.append(
            f"the model does not describe the track: {n_total - n_used} of {n_total} frames "
            f"({100 * (n_total - n_used) / n_total:.0f} %) were rejected as outliers (limit "
            f"{100 * REJECTION_LIMIT:.0f} %); check the tracking and that this is one free flight"
        )
    if success and noise_model == "ar1" and max(abs(phi[0]), abs(phi[1])) >= 0.979:
        success = False
        messages.append(
            "the residuals are almost perfectly correlated (AR(1) coefficient at its 0.98 limit): "
            "the model does not follow the track; check the time base, units and calibration"
        )
    message = "fit converged" if success else "; ".join(m for m in messages if m) or "failed"
    diagnostics = {
        "reduced_chi_square": chi2_red,
        "residual_rms": float(np.sqrt(np.mean(np.concatenate((rx_all, ry_all)) ** 2))),
        "residual_rms_x": float(np.sqrt(np.mean(rx_all**2))),
        "residual_rms_y": float(np.sqrt(np.mean(ry_all**2))),
        "lag1_autocorrelation": float(lag1),
        "lag1_p_value": p_r1,
        "lag1_before_noise_model": float(r1_all),
        "durbin_watson": dw,
        "ljung_box_q": lb_q,
        "ljung_box_p": lb_p,
        "sign_runs": int(runs),
        "sign_runs_expected": float(runs_exp),
        "sign_runs_z": float(runs_z),
        "reynolds_min": float(re_cat.min()),
        "reynolds_max": float(re_cat.max()),
        "reynolds_median": re_med,
        "terminal_speed": vt,
        "terminal_speed_uncertainty": u_vt,
        "identifiable": identifiable,
        "identifiability_message": ident_msg,
        "relative_uncertainty": rel,
        "correlation_cd_speed": corr_speed,
        "rejection_limit_sigma": z_limit,
        "function_evaluations": int(total_nfev),
    }
    noise = {
        "model": noise_model,
        "ar1_coefficient_x": float(phi[0]),
        "ar1_coefficient_y": float(phi[1]),
        "sigma_source": "track" if given_sigma else "estimated from residuals",
        "sigma_x": [t.sigma[0] for t in throws],
        "sigma_y": [t.sigma[1] for t in throws],
    }
    options = {"robust": robust, "noise": noise_opt, "model": dm.name, "lift": lift}
    state = {"theta": theta.copy(), "problem": problem}
    return FitResult(
        success=bool(success),
        message=message,
        model=dm.name,
        parameter_names=names,
        values=theta.copy(),
        covariance=cov,
        constants=tuple(float(c) for c in constants),
        cd=cd,
        u_cd=u_cd,
        dof=dof_k,
        coverage_factor=k,
        throws=tuple(throws),
        noise=noise,
        diagnostics=diagnostics,
        specimen=specimen,
        conditions=conditions,
        lift=lift,
        options=options,
        _state=state,
    )


def _vu(value, u) -> dict:
    return {"value": _f(value), "standard_uncertainty": _f(u)}


def _f(v):
    v = float(v)
    return v if math.isfinite(v) else None


def _result_dict(r: FitResult) -> dict:
    dm = get_drag_model(r.model)
    d = r.diagnostics
    params = {n: _vu(*r.parameter(n)) for n in dm.parameters}
    for n, c in zip(dm.constants, r.constants):
        params[n] = {"value": c, "standard_uncertainty": 0.0, "fixed": True}
    first = r.throws[0]
    rejected = []
    reasons = {}
    multi = len(r.throws) > 1
    for i, th in enumerate(r.throws):
        for lab in th.rejected:
            rejected.append(f"{i + 1}:{lab}" if multi else lab)
            reasons[f"{i + 1}:{lab}" if multi else str(lab)] = th.rejection_reasons[lab]
    cond = r.conditions
    out = {
        "success": r.success,
        "message": r.message,
        "software_version": __version__,
        "drag_coefficient": {
            "value": _f(r.cd),
            "standard_uncertainty": _f(r.u_cd),
            "expanded_uncertainty": _f(r.expanded_uncertainty),
            "coverage_factor": r.coverage_factor,
            "coverage_probability": COVERAGE_PROBABILITY,
            "degrees_of_freedom": r.dof,
            "relative_uncertainty": _f(d["relative_uncertainty"]),
            "at_reynolds_number": _f(d["reynolds_median"]),
            "uncertainty_kind": "statistical (fit) only; see the uncertainty budget for the "
            "combined uncertainty",
        },
        "drag_model": {"name": r.model, "parameters": params},
        "points": {
            "used": int(sum(int(t.used.sum()) for t in r.throws)),
            "total": int(sum(len(t.t) for t in r.throws)),
            "rejected": rejected,
            "rejection_reasons": reasons,
        },
        "residuals": {
            "rms": d["residual_rms"],
            "rms_x": d["residual_rms_x"],
            "rms_y": d["residual_rms_y"],
            "lag1_autocorrelation": d["lag1_autocorrelation"],
            "durbin_watson": d["durbin_watson"],
            "ljung_box_p": _f(d["ljung_box_p"]),
            "reduced_chi_square": d["reduced_chi_square"],
            "sign_runs": d["sign_runs"],
            "sign_runs_expected": d["sign_runs_expected"],
            "noise_model": r.noise["model"],
            "ar1_coefficient": {
                "x": r.noise["ar1_coefficient_x"],
                "y": r.noise["ar1_coefficient_y"],
            },
            "sigma_source": r.noise["sigma_source"],
        },
        "reynolds_number": {
            "min": d["reynolds_min"],
            "max": d["reynolds_max"],
            "median": d["reynolds_median"],
        },
        "launch": {
            "speed": _vu(first.speed, first.speed_uncertainty),
            "angle": _vu(first.angle, first.angle_uncertainty),
            "x0": first.launch.x0,
            "y0": first.launch.y0,
            "vx0": first.launch.vx0,
            "vy0": first.launch.vy0,
        },
        "terminal_speed": _vu(d["terminal_speed"], d["terminal_speed_uncertainty"]),
        "identifiability": {
            "identifiable": d["identifiable"],
            "message": d["identifiability_message"],
            "correlation_cd_speed": _f(d["correlation_cd_speed"]),
            "relative_uncertainty": _f(d["relative_uncertainty"]),
        },
        "throws": [
            {
                "source": th.source,
                "points_used": int(th.used.sum()),
                "points_total": int(len(th.t)),
                "rejected": th.rejected,
                "residual_rms": th.residual_rms,
                "sigma": {"x": th.sigma[0], "y": th.sigma[1]},
                "reynolds_number": {"min": th.reynolds_range[0], "max": th.reynolds_range[1]},
                "launch": {
                    "speed": _vu(th.speed, th.speed_uncertainty),
                    "angle": _vu(th.angle, th.angle_uncertainty),
                    "x0": th.launch.x0,
                    "y0": th.launch.y0,
                    "vx0": th.launch.vx0,
                    "vy0": th.launch.vy0,
                },
            }
            for th in r.throws
        ],
        "inputs": {"sha256": {th.source: th.sha256 for th in r.throws if th.sha256}},
        "conditions": {
            "air_density": cond.air.density,
            "air_viscosity": cond.air.viscosity,
            "gravity": cond.gravity,
            "wind": cond.wind,
            "buoyancy": cond.buoyancy,
            "temperature": cond.air.temperature,
            "pressure": cond.air.pressure,
            "relative_humidity": cond.air.relative_humidity,
        },
        "specimen": r.specimen.to_dict(),
        "fit": {
            "robust": r.options.get("robust"),
            "noise_option": r.options.get("noise"),
            "function_evaluations": d["function_evaluations"],
            "rejection_limit_sigma": d["rejection_limit_sigma"],
            "method": "weighted nonlinear least squares with the simulator's analytic "
            "sensitivities: a Levenberg-Marquardt pass from a drag-free start, a robust "
            "soft-L1 stage (iteratively reweighted) with outlier rejection, Gauss-Newton "
            "re-solves with the noise re-estimated, AR(1) prewhitening when the residuals "
            "are serially correlated, and a final lmfit (MINPACK) stage",
            "integrator": f"adaptive Dormand-Prince RK5(4) with forward sensitivities, rtol "
            f"{FIT_RTOL:g}, quartic dense output at the sample times",
        },
    }
    if r.lift:
        out["lift_coefficient"] = _vu(*r.parameter("lift_coefficient"))
    if dm.name != "constant":
        res = [d["reynolds_min"], d["reynolds_median"], d["reynolds_max"]]
        cds, us = r.cd_at(res)
        out["drag_coefficient"]["at_reynolds"] = [
            {"reynolds_number": re_, "value": _f(c), "standard_uncertainty": _f(u)}
            for re_, c, u in zip(res, cds, us)
        ]
    return out


# ----------------------------------------------------------------------------- re-fit


@dataclass(frozen=True)
class Refit:
    """Outcome of :func:`refit`: the drag coefficient and all parameters after re-solving.

    Attributes
    ----------
    cd : float
        Drag coefficient (at the original fit's median Reynolds number for Re-dependent
        models). [-]
    values : ndarray
        All fitted parameters, in the order of ``FitResult.parameter_names``.
    success : bool
    """

    cd: float
    values: np.ndarray
    success: bool


def _gauss_newton(problem: _Problem, theta, bounds, max_iter: int = 12, tol: float = 1e-9):
    """Undamped Gauss–Newton from a nearby optimum; (theta, converged).

    Used only to re-solve a converged problem after a small change of its inputs; any sign
    of trouble (cost increase, bound crossed, no convergence) reports failure so that the
    caller falls back to the trust-region solver.
    """
    theta = np.array(theta, float)
    lo = np.array([b[0] for b in bounds])
    hi = np.array([b[1] for b in bounds])
    res, jac, _sims, ok = problem.evaluate(theta)
    cost = float(res @ res)
    for _ in range(max_iter):
        if not ok:
            return theta, False
        # normal equations with column scaling (P is small; J is well scaled after it)
        scale = np.linalg.norm(jac, axis=0)
        scale[scale == 0] = 1.0
        js = jac / scale
        try:
            step = np.linalg.solve(js.T @ js, -(js.T @ res)) / scale
        except np.linalg.LinAlgError:
            return theta, False
        new = theta + step
        if np.any(new < lo) or np.any(new > hi):
            return theta, False
        res, jac, _sims, ok = problem.evaluate(new)
        new_cost = float(res @ res)
        if not ok or new_cost > cost * (1.0 + 1e-8) + 1e-300:
            return theta, False
        theta, cost = new, new_cost
        if np.all(np.abs(step) <= tol * (np.abs(theta) + 1e-3)):
            return theta, True
    return theta, False


def refit(
    result: FitResult,
    *,
    tracks: Sequence[Track] | None = None,
    specimen=None,
    air: Air | None = None,
    gravity: float | None = None,
    max_nfev: int = 60,
) -> Refit:
    """Re-solve a finished fit with changed inputs, for sensitivity coefficients and Monte Carlo.

    The rejection mask, noise levels and AR(1) coefficients of ``result`` are kept, the
    start is its optimum, and only the final weighted (prewhitened) least-squares problem is
    solved again — a few evaluations instead of the full robust pipeline.  Tracks passed
    here must have the same number of samples as the original ones (e.g. rescaled
    positions or times).

    Parameters
    ----------
    result : FitResult
        A converged fit.
    tracks : sequence of Track, optional
        Replacement tracks (same lengths). Default: the original tracks.
    specimen : Sphere or Body, optional
        Replacement specimen (e.g. a perturbed mass [kg] or diameter [m]).
    air : Air, optional
        Replacement air (density [kg/m³], viscosity [Pa s]).
    gravity : float, optional
        Replacement acceleration of free fall. [m/s²]
    max_nfev : int
        Evaluation budget.

    Returns
    -------
    Refit
    """
    old: _Problem = result._state["problem"]
    tracks = list(old.tracks) if tracks is None else _as_tracks(tracks)
    if len(tracks) != len(old.tracks) or any(len(a) != len(b) for a, b in zip(tracks, old.tracks)):
        raise ValueError(
            "tracks: refit needs tracks with the same number of throws and samples as the "
            "original fit; run fit_tracks for new data."
        )
    c = result.conditions
    conditions = Conditions(
        air=c.air if air is None else air,
        gravity=c.gravity if gravity is None else gravity,
        wind=c.wind,
        buoyancy=c.buoyancy,
    )
    sp = result.specimen if specimen is None else specimen
    dm = get_drag_model(result.model)
    problem = _Problem(tracks, sp, conditions, dm, result.constants, result.lift)
    problem.names = old.names
    problem.bounds = old.bounds
    problem.set_state(masks=old.masks, sigmas=old.sigmas, phi=old.phi)
    theta, ok = _gauss_newton(problem, result._state["theta"], old.bounds)
    if not ok:
        theta, ok, _msg, _n = _solve(problem, result._state["theta"], old.bounds, max_nfev=max_nfev)
    n_fit = len(dm.parameters)
    re_med = result.diagnostics["reynolds_median"]
    p_full = np.concatenate((theta[:n_fit], result.constants)).astype(float)
    cd, _ = dm.kernel(re_med, p_full, np.zeros(max(p_full.size, 1)))
    return Refit(cd=float(cd), values=theta, success=bool(ok))
