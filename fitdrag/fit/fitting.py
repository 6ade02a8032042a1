"""Fit the drag model and the launch state to one or many throws, with honest uncertainty:
the front door (:func:`fit_tracks`) that runs the stages below and assembles the
:class:`~fitdrag.fit.results.FitResult`.  Re-solving a finished fit with changed inputs is
:func:`fitdrag.fit.refit.refit`.

The fit is a weighted nonlinear least-squares problem (:mod:`fitdrag.fit.problem`) using the
simulator's exact sensitivities as the Jacobian, solved in stages by the optimisers of
:mod:`fitdrag.fit.solvers` (lmfit's ``MinimizerResult`` of the solved problem is available
on demand as ``FitResult.minimizer_result``).  Every throw has its own launch state
(x0, y0, vx0, vy0); all throws share the drag parameters (and the lift coefficient when
fitted).  The residual statistics come from :mod:`fitdrag.fit.noise`.

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
   squares, i.e. Prais–Winsten prewhitening iterated to convergence [1, 2]; gaps between
   kept frames are honoured (φ^d for a gap of d frames).  Plain least squares under AR(1)
   noise with φ = 0.8 understates u(Cd) about threefold; the prewhitened fit is efficient
   and its covariance is correct under that model [1].
4. **Covariance** — (J̃ᵀ J̃)⁻¹ of the whitened, weighted Jacobian at the optimum, i.e. the
   Cramér–Rao bound of the noise model with the estimated noise level [3].  With
   per-point sigmas from the track it is scaled by max(1, χ²_ν) (Birge ratio).

Coverage factor: k = t_p(ν), the Student-t factor at the stated coverage probability
p = 95.45 % (JCGM 100:2008 G.3, G.4 [5]), from :func:`fitdrag.uncertainty.gum.coverage_factor`
— the one rule shared with the uncertainty budget, so the fit summary and the certificate
state the same k for the same ν (k → 2 as ν → ∞).  Under AR(1) noise the degrees of freedom
are those of the effective number of independent residuals, N (1 − φ)/(1 + φ) [8], so short,
strongly correlated tracks get a larger k.

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
from collections.abc import Sequence

import numpy as np

from fitdrag.errors import InputError
from fitdrag.fit.noise import (
    durbin_watson,
    lag1,
    ljung_box,
    median,
    noise_floor,
    robust_sigma,
    sign_runs,
)
from fitdrag.fit.problem import Problem, as_tracks, initial_launch
from fitdrag.fit.results import (
    COVERAGE_PROBABILITY,
    FitResult,
    ThrowResult,
    cd_and_gradient,
)
from fitdrag.fit.solvers import (
    gauss_newton,
    levenberg_marquardt,
    polish,
    robust_solve,
    trust_region,
)
from fitdrag.physics.air import STANDARD_GRAVITY, Air
from fitdrag.physics.forces import Conditions
from fitdrag.physics.registry import get_drag_model
from fitdrag.physics.simulate import LAUNCH_NAMES, Launch
from fitdrag.tracks.track import Track
from fitdrag.uncertainty.gum import coverage_factor as student_t_factor

__all__ = ["FitResult", "ThrowResult", "fit_tracks"]

#: Relative standard uncertainty of Cd above which drag is reported as not measurable.
IDENTIFIABILITY_LIMIT = 0.25
#: Residual RMS, as a fraction of the flight's extent, above which a fit is called a failure.
ADEQUACY_LIMIT = 0.02
#: Fraction of frames rejected as outliers above which the fit is called a failure.
REJECTION_LIMIT = 0.2


@functools.lru_cache(maxsize=1)
def _blas_controller():
    from threadpoolctl import ThreadpoolController

    return ThreadpoolController()


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
        Force k; default the Student-t factor at p = 95.45 % for the fit's degrees of freedom
        (JCGM 100:2008 G.3, G.4; k → 2 as ν → ∞).
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
    tracks = as_tracks(tracks)
    if not all(hasattr(specimen, a) for a in ("mass", "area", "volume", "length")):
        raise InputError(
            f"specimen: expected a fitdrag.Sphere or fitdrag.Body, got {specimen!r}; build one "
            f"with fitdrag.Sphere(mass, diameter) or fitdrag.Body(mass, area, volume)."
        )
    if coverage_factor is not None and not (
        isinstance(coverage_factor, (int, float)) and math.isfinite(coverage_factor)
        and coverage_factor > 0
    ):  # fmt: skip
        raise InputError(
            f"coverage_factor: must be a finite number > 0, got {coverage_factor!r}; leave it "
            f"out for the Student-t factor at p = 95.45 %."
        )
    if not isinstance(max_nfev, int) or max_nfev < 1:
        raise InputError(
            f"max_nfev: must be a whole number >= 1, got {max_nfev!r}; the default 300 suits "
            f"every ordinary track."
        )
    if noise not in ("auto", "white", "ar1"):
        raise InputError(f"noise: unknown noise model {noise!r}; use 'auto', 'white' or 'ar1'.")
    if not isinstance(air, Air):
        raise InputError(
            f"air: expected a fitdrag.Air, got {type(air).__name__}; use fitdrag.Air(density) "
            f"or fitdrag.Air.from_conditions(temperature, pressure, relative_humidity)."
        )
    dm = get_drag_model(model)
    conditions = Conditions(air=air, gravity=gravity, wind=wind, buoyancy=buoyancy)
    starts = [initial_launch(tr, conditions.gravity) for tr in tracks]

    # constants of the drag model (e.g. reference Re) from the first-guess speeds
    constants: tuple[float, ...] = ()
    if dm.constants:
        re_first = []
        for tr in tracks:
            v = np.hypot(np.gradient(tr.x, tr.t) - wind, np.gradient(tr.y, tr.t))
            re_first.append(air.density * v * specimen.length / air.viscosity)
        constants = dm.constants_for(np.concatenate(re_first))

    problem = Problem(tracks, specimen, conditions, dm, constants, lift)
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
                raise InputError(f"initial: unknown parameter {k!r}; valid: {', '.join(names)}.")
            theta[names.index(k)] = float(v)

    given_sigma = all(tr.sigma is not None for tr in tracks)
    floors = [noise_floor(tr.x, tr.y) for tr in tracks]

    def set_sigmas(per_axis):
        sig = []
        for tr, (sx, sy) in zip(tracks, per_axis):
            if given_sigma:
                sig.append(np.column_stack((tr.sigma, tr.sigma)))
            else:
                sig.append(np.column_stack((np.full(len(tr), sx), np.full(len(tr), sy))))
        problem.set_state(sigmas=sig)

    def raw_residuals(th):
        sims = problem.cached_flights(th)
        out = []
        for tr, (status, pos, _v, _j) in zip(tracks, sims):
            if status != 0:
                out.append((np.full(len(tr), np.inf), np.full(len(tr), np.inf)))
            else:
                out.append((tr.x - pos[:, 0], tr.y - pos[:, 1]))
        return out

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
        th, ok = levenberg_marquardt(problem, th0, bounds, max_iter=max(max_nfev // 4, 1), tol=1e-4)
        msg = "converged" if ok else "the first Gaussian pass did not converge"
        if not ok:
            th, ok, msg, _ = trust_region(problem, th0, bounds, max_nfev=max(max_nfev // 4, 1),
                                          tol=1e-4)  # fmt: skip
        if robust and np.all(np.isfinite(th)):
            th1, ok, msg, _ = robust_solve(problem, th if ok else th0, bounds, max_nfev)
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
    from scipy import special  # the distributions' functions without scipy.stats' overhead

    z_limit = max(4.0, float(-special.ndtri(0.01 / (2.0 * n_resid_total))))  # normal isf

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
                    bx = max(1.0, robust_sigma(nx[mask]))
                    by = max(1.0, robust_sigma(ny[mask]))
                    zx, zy = np.abs(nx) / bx, np.abs(ny) / by
                else:
                    fl = floors[i]
                    sx = max(robust_sigma(rx[mask]), fl[0] * 1e-3)
                    sy = max(robust_sigma(ry[mask]), fl[1] * 1e-3)
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
            th, ok, msg, _ = robust_solve(problem, theta, bounds, max_nfev)
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
    # noise levels first re-estimated at the robust optimum on the kept points (close to the
    # plain one), so that the loop below usually settles after one re-solve
    sig = estimate_sigmas(theta) if success else None
    if sig is not None:
        set_sigmas(sig)

    def settled(sig) -> bool:
        """Whether re-estimated noise levels ``sig`` (per throw: x and y [m]) keep the
        ratios of those set to within 2 % (the loop's stopping rule): the weights only matter
        relative to each other, so theta is left as fitted under the levels set.  An RMS of
        n residuals scatters by about 1/√(2n) of itself (3.5 % for 400 frames); a change of
        the weights' ratio within 2 % moves Cd by a small fraction of its standard
        uncertainty."""
        arr = np.asarray(sig)
        now = np.array([[median(sg[:, 0]), median(sg[:, 1])] for sg in problem.sigmas])
        return bool(np.max(np.abs((arr / arr.flat[0]) / (now / now.flat[0]) - 1.0)) < 0.02)

    for _it in range(4):
        th, ok, msg, _ = polish(problem, theta, bounds, max_nfev)
        if not ok:
            success = False
            messages.append(msg)
            break
        theta = th
        sig = estimate_sigmas(theta)
        if sig is None or settled(sig):
            break
        set_sigmas(sig)
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
    r1_all, pairs = lag1(series[0] + series[1])
    z_r1 = r1_all * math.sqrt(max(pairs, 1))
    p_r1 = float(2.0 * special.ndtr(-abs(z_r1)))  # two-sided normal tail
    lb_q, lb_p = ljung_box(series[0] + series[1])
    use_ar1 = noise == "ar1" or (noise == "auto" and p_r1 < 0.01)
    if use_ar1 and success:
        noise_model = "ar1"
        for _it in range(8):
            new_phi = problem.reml_ar1(theta)
            if _it > 0 and max(abs(new_phi[0] - phi[0]), abs(new_phi[1] - phi[1])) < 1e-3:
                # the coefficients have settled: theta was fitted under ones within 1e-3 of
                # the estimate at theta (no re-solve for a change that small)
                break
            problem.set_state(phi=new_phi)
            th, ok, msg, _ = polish(problem, theta, bounds, max_nfev)
            if not ok:
                success = False
                messages.append(msg)
                break
            theta = th
            sig = estimate_sigmas(theta)
            if sig is not None and not settled(sig):
                set_sigmas(sig)
            phi = new_phi
        phi = problem.phi

    # a last Gauss–Newton re-solve under the final noise levels (when the loops above left
    # theta fitted under the levels set, it stops at once, without an integration)
    if success:
        th, ok = gauss_newton(problem, theta, bounds)
        if ok:
            theta = th
        else:
            th, ok, msg, _ = polish(problem, theta, bounds, max_nfev)
            if ok:
                theta = th
            else:
                success = False
                messages.append(msg)

    # covariance: sigma of whitened residuals, J~^T J~ inverse
    res, jac, sims, ok_eval = problem.evaluate(theta)
    n_par = problem.n_params
    dof = int(problem.n_resid - n_par)
    if dof < 1:
        raise InputError(
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
        sig_white, chi2_red, r1_all, p_r1, lb_q, lb_p, z_limit, problem.n_evaluations, robust,
        noise,
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
        sx = median(problem.sigmas[i][:, 0])
        sy = median(problem.sigmas[i][:, 1])
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
    re_med = median(re_cat)
    # refuse a flight outside the drag law's validity (e.g. the drag crisis of a sphere)
    dm.check_re_range(float(re_cat.min()), float(re_cat.max()))
    # Cd at the median Re and its uncertainty (gradient through the drag law)
    n_fit = len(dm.parameters)
    cd_med, g = cd_and_gradient(dm, theta, constants, re_med)
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
    # one coverage-factor rule with the uncertainty budget: Student t at p (JCGM 100 G.3, G.4)
    k = float(k_user) if k_user is not None else student_t_factor(dof_k, COVERAGE_PROBABILITY)

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
        r_, e_, _ = sign_runs(s)
        runs += r_
        runs_exp += e_ if np.isfinite(e_) else 0.0
    runs_z = sign_runs(np.concatenate(series))[2]
    dw = durbin_watson(series)
    r1_kept = lag1(series)[0]

    # terminal speed v_t = sqrt(2 (m - rho V) g / (rho Cd A)) (no lift)
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
        "residual_rms": rms_all,
        "residual_rms_x": float(np.sqrt(np.mean(rx_all**2))),
        "residual_rms_y": float(np.sqrt(np.mean(ry_all**2))),
        "lag1_autocorrelation": float(r1_kept),
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
