"""Fit the physical 3-D flight directly to what each camera saw: the front door
:func:`fit_views` and its result :class:`ViewFitResult`.

The unknowns are the drag law's parameters (and C_L when asked), the 3-D launch state and
the time offset of every camera whose offset is not given; the data are the blob centroids
(and, where used, the apparent diameters) in every camera's own pixels.  The residuals and
their exact Jacobian are those of :class:`fitdrag.fit.image_problem.ImageProblem` (the flight
integrated in 3-D, projected through each camera at each observation's own row time), solved
by the optimisers of :mod:`fitdrag.fit.solvers` as in the planar fit (bundle adjustment of
the flight's physical parameters, in the sense of Triggs et al. [1]).

Stages:

1. **Start** — a rough 3-D track (:mod:`fitdrag.fit.image_start`: rays triangulated between
   two cameras, Hartley and Zisserman [2] sec. 12.2, or taken to the depth of the apparent
   diameter with one); unknown time offsets start at the whole-frame lag that brings the
   rays closest and may move by 1.5 frames either way.
2. **Gaussian fit** — Levenberg–Marquardt from the start (the trust-region solver as its
   fallback), with a few drag levels tried if the first start fails.
3. **Noise** — per camera the noise level of the centroids (u and v share one level, as
   CameraView states one sigma per frame) and of the diameters is estimated from the
   residuals (a stated sigma is a floor: the level is never set below it) and the problem
   re-solved until the levels settle; the lag-1 autocorrelation of the normalised
   residuals is tested and, when significant (p < 0.01) or with ``noise="ar1"``, every
   channel gets its own AR(1) coefficient by restricted maximum likelihood with
   Prais–Winsten prewhitening (:mod:`fitdrag.fit.noise`, as in the planar fit).
4. **Covariance** — (J̃ᵀ J̃)⁻¹ of the whitened Jacobian at the optimum, scaled by the reduced
   chi-square; the launch state is reported at the time of the first camera's first frame,
   its covariance carried there by the simulator's sensitivities (first-order propagation,
   JCGM 100:2008 5.1.2 [3]).  Coverage factor: the Student-t factor of the effective
   degrees of freedom, :func:`fitdrag.uncertainty.gum.coverage_factor` (the rule shared with
   the budget); under AR(1) noise the effective number of residuals of each channel is
   n (1 − φ)/(1 + φ) (Zięba [4]).

One camera: the depth along the optical axis is weakly determined by the perspective of the
parabola alone; the apparent diameter of the specimen, an extra observation with its own
estimated noise, measures it (``use_outline``).  What a tracker's diameter measures (between
the outline's width across the motion and its equal-area diameter) and its scale are fitted
by default, so a constant diameter bias and the specimen's size do not move the depth: the
depth then rests on the diameter's relative change along the flight (which measures v_z / Z)
and on gravity.  A drift of the diameters along the flight is read as depth: with one
camera 3 m away (f = 900 px, 200 frames) a drift of 0.1 px from the first frame to the last
moves C_d by 4-8 % (benchmarks/coverage_3d.py --bound), so the diameters must be free of drift
to about 0.02 px for a U/C_d of a few per cent; that systematic part is not in this
covariance.  With two or more cameras the diameters add almost no information (triangulation
measures the depth) and are left out by default (``use_outline="auto"``).

References
----------
1. B. Triggs, P. F. McLauchlan, R. I. Hartley and A. W. Fitzgibbon, "Bundle adjustment — a
   modern synthesis", in *Vision Algorithms: Theory and Practice*, LNCS 1883, Springer 2000,
   298–372.
2. R. Hartley and A. Zisserman, *Multiple View Geometry in Computer Vision*, 2nd ed.,
   Cambridge University Press, 2004: sec. 12.2 (linear triangulation), sec. 5.2.3
   (covariance of estimated parameters).
3. JCGM 100:2008, *Evaluation of measurement data — Guide to the expression of uncertainty
   in measurement* (GUM): 5.1.2, G.3, G.4.
4. A. Zięba, "Effective number of observations and unbiased estimators of variance for
   autocorrelated data — an overview", Metrol. Meas. Syst. 17 (2010) 3–16.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from fitdrag.errors import InputError
from fitdrag.fit.image_problem import ImageProblem
from fitdrag.fit.image_start import launch_from_track, start_track
from fitdrag.fit.noise import lag1, noise_floor
from fitdrag.fit.results import COVERAGE_PROBABILITY, cd_and_gradient
from fitdrag.fit.solvers import gauss_newton, levenberg_marquardt, polish, trust_region
from fitdrag.geometry.views import CameraView
from fitdrag.physics.air import STANDARD_GRAVITY, Air
from fitdrag.physics.flight3d import Launch3D, _spin_axis, _vector3
from fitdrag.physics.forces import Conditions
from fitdrag.physics.registry import get_drag_model
from fitdrag.uncertainty.gum import coverage_factor as student_t_factor

__all__ = ["ViewFitResult", "ViewResult", "fit_views"]

#: How far an estimated time offset may move from its whole-frame start. [frames]
OFFSET_RANGE_FRAMES = 1.5
#: Range of a fitted diameter measure lam (0 = width across the motion, 1 = equal-area
#: diameter; a circle fitted to the blob lies between). [1]
MEASURE_RANGE = (-1.0, 2.0)
#: Range of a fitted diameter scale. [1]
SCALE_RANGE = (0.5, 2.0)
#: The named diameter measures of :func:`fit_views`.
DIAMETER_MEASURES = {"across_motion": 0.0, "equal_area": 1.0, "estimate": None}


@dataclass(frozen=True, eq=False)
class ViewResult:
    """One camera's part of a 3-D fit.

    Attributes
    ----------
    name : str
    time_offset, time_offset_uncertainty : float
        The view's time offset (given or fitted) and its standard uncertainty (0 when
        given). [s]
    offset_estimated : bool
    t : ndarray
        Time at which each observation was seen (frame, offset, row delay). [s]
    fitted_u, fitted_v, residual_u, residual_v : ndarray
        Predicted outline centre and observed minus predicted. [px]
    fitted_diameter, residual_diameter : ndarray or None
        Predicted width across the motion and observed minus predicted (None without
        diameters). [px]
    diameter_used : bool
        Whether the diameters entered the fit.
    noise_model : str
        "white" or "ar1".
    sigma_u, sigma_v : float
        Median noise standard deviation used for u and v. [px]
    sigma_diameter : float or None
        That of the diameter, when used. [px]
    ar1_coefficients : tuple of float
        AR(1) coefficient of each channel (u, v[, diameter]); zeros under white noise. [-]
    residual_rms : float
        RMS of the u and v residuals. [px]
    distance : float
        Median distance from the camera centre to the fitted flight. [m]
    diameter_measure, diameter_measure_uncertainty : float
        What the diameters measured, lam (0 = the outline's width across the motion, 1 = its
        equal-area diameter), and its standard uncertainty (0 when given); NaN without
        diameters. [1]
    diameter_measure_estimated : bool
    diameter_scale, diameter_scale_uncertainty : float
        Scale of the diameters against the specimen's size (given or fitted) and its
        standard uncertainty (0 when given); NaN without diameters. [1]
    """

    name: str
    time_offset: float
    time_offset_uncertainty: float
    offset_estimated: bool
    t: np.ndarray
    fitted_u: np.ndarray
    fitted_v: np.ndarray
    residual_u: np.ndarray
    residual_v: np.ndarray
    fitted_diameter: np.ndarray | None
    residual_diameter: np.ndarray | None
    diameter_used: bool
    noise_model: str
    sigma_u: float
    sigma_v: float
    sigma_diameter: float | None
    ar1_coefficients: tuple[float, ...]
    residual_rms: float
    distance: float
    diameter_measure: float = math.nan
    diameter_measure_uncertainty: float = math.nan
    diameter_measure_estimated: bool = False
    diameter_scale: float = math.nan
    diameter_scale_uncertainty: float = math.nan


@dataclass(frozen=True, eq=False)
class ViewFitResult:
    """Outcome of :func:`fit_views`.

    Attributes
    ----------
    success : bool
        False when the fit did not converge (the numbers are then not to be used).
    message : str
    model : str
        Drag model name.
    parameter_names : tuple of str
        Fitted parameters: drag law's (then ``lift_coefficient``), the launch state at
        ``reference_time``, then ``time_offset_<view number>`` for each estimated offset,
        then ``diameter_measure_<view number>`` for each view whose diameter measure is
        fitted, then ``diameter_scale_<view number>`` for each fitted diameter scale.
    values : ndarray
        Their values (SI). The launch state here is at ``reference_time``.
    covariance : ndarray
        Their covariance (SI²).
    constants : tuple of float
        The drag law's fixed constants.
    cd, u_cd : float
        Drag coefficient (at the median Reynolds number for Re-dependent laws) and its
        standard uncertainty. [-]
    launch : Launch3D
        Position [m] and velocity [m/s] at ``launch_time``.
    launch_time : float
        Time of the first view's first frame (row 0). [s]
    launch_covariance : ndarray, shape (6, 6)
        Covariance of (x0, y0, z0, vx0, vy0, vz0) at ``launch_time``. [SI²]
    reference_time : float
        Time of the fitted launch state (at or before every observation). [s]
    out_of_plane_angle, out_of_plane_angle_uncertainty : float
        Angle of the launch's horizontal heading (vx, vz) from the board's x axis, positive
        towards the camera (+z), and its standard uncertainty. [deg]
    depth_range : (float, float)
        Smallest and largest z along the fitted flight over the observations. [m]
    views : tuple of ViewResult
    noise_model : str
        "white" or "ar1" (then every channel has its own coefficient).
    iterations : int
        Evaluations of the residuals and Jacobian.
    dof : int
        Effective degrees of freedom for the coverage factor.
    coverage_factor : float
        k (Student t at p = 95.45 %).
    reynolds_range : (float, float)
        Reynolds numbers over the fitted flight. [-]
    specimen, conditions : the inputs
    options : dict
        The options of the call (wind, spin axis, lift, noise, use_outline as resolved,
        diameter_measure, diameter_scale).
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
    launch: Launch3D
    launch_time: float
    launch_covariance: np.ndarray
    reference_time: float
    out_of_plane_angle: float
    out_of_plane_angle_uncertainty: float
    depth_range: tuple[float, float]
    views: tuple[ViewResult, ...]
    noise_model: str
    iterations: int
    dof: int
    coverage_factor: float
    reynolds_range: tuple[float, float]
    specimen: Any
    conditions: Conditions
    options: dict = field(default_factory=dict)

    @property
    def expanded_uncertainty(self) -> float:
        """U = k u(Cd). [-]"""
        return self.coverage_factor * self.u_cd

    @property
    def coverage_probability(self) -> float:
        return COVERAGE_PROBABILITY

    @property
    def launch_uncertainty(self) -> tuple[float, ...]:
        """Standard uncertainties of (x0, y0, z0, vx0, vy0, vz0) at ``launch_time``. [SI]"""
        return tuple(float(math.sqrt(max(c, 0.0))) for c in np.diag(self.launch_covariance))

    @property
    def time_offsets(self) -> tuple[float, ...]:
        """Every view's time offset (the first view's is 0). [s]"""
        return tuple(v.time_offset for v in self.views)

    def parameter(self, name: str) -> tuple[float, float]:
        """(value, standard uncertainty) of a fitted parameter by name."""
        if name not in self.parameter_names:
            raise InputError(
                f"name: unknown parameter {name!r}; valid: {', '.join(self.parameter_names)}."
            )
        i = self.parameter_names.index(name)
        return float(self.values[i]), float(math.sqrt(max(self.covariance[i, i], 0.0)))

    def as_initial(self) -> dict[str, float]:
        """The fitted values by name, to start a re-fit (``fit_views(..., initial=...)``)."""
        return {n: float(v) for n, v in zip(self.parameter_names, self.values)}


# ----------------------------------------------------------------------------- inputs


def _check_views(views) -> list[CameraView]:
    if isinstance(views, CameraView):
        views = [views]
    try:
        views = list(views)
    except TypeError:
        views = [views]
    if not views:
        raise InputError("views: no view given; pass one CameraView per camera.")
    for i, v in enumerate(views):
        if not isinstance(v, CameraView):
            raise InputError(
                f"views[{i}]: expected a fitdrag.CameraView, got {type(v).__name__}; build one "
                f"per camera with CameraView(camera, frames, fps, u, v)."
            )
    fps = {v.fps for v in views}
    if len(fps) > 1:
        raise InputError(
            f"views: the cameras must share the frame rate, got {sorted(fps)} frames/s; "
            f"resample the tracks to one frame rate."
        )
    if views[0].time_offset not in (None, 0.0):
        raise InputError(
            f"views[0].time_offset: the first view is the time reference (offset 0), got "
            f"{views[0].time_offset!r} s; give the other views' offsets relative to it."
        )
    return views


def _diameter_measure(value) -> float | None:
    if isinstance(value, str):
        if value not in DIAMETER_MEASURES:
            raise InputError(
                f"diameter_measure: unknown measure {value!r}; use 'estimate', "
                f"'across_motion', 'equal_area' or a number between them (0 to 1)."
            )
        return DIAMETER_MEASURES[value]
    if isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value):
        return float(value)
    raise InputError(
        f"diameter_measure: expected 'estimate', 'across_motion', 'equal_area' or a finite "
        f"number, got {value!r}."
    )


def _pooled(problem: ImageProblem, sums, counts) -> list[float]:
    """Noise level of every channel from its sum of squared scaled residuals ``sums`` over
    ``counts`` residuals, a view's u and v pooled (one centroid sigma per frame)."""
    out = []
    for ch in problem.channels:
        group = [
            c for c, other in enumerate(problem.channels)
            if other.view_index == ch.view_index
            and (other.kind == ch.kind or (other.kind < 2 and ch.kind < 2))
        ]  # fmt: skip
        out.append(math.sqrt(sum(sums[c] for c in group) / sum(counts[c] for c in group)))
    return out


def _diameter_scale(value) -> float | None:
    if isinstance(value, str) and value == "estimate":
        return None
    if (
        isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)
        and value > 0
    ):  # fmt: skip
        return float(value)
    raise InputError(
        f"diameter_scale: expected 'estimate' or a finite number > 0 (1 = the diameters' "
        f"absolute size is right), got {value!r}."
    )


# ----------------------------------------------------------------------------- front door


def fit_views(
    views: CameraView | Sequence[CameraView],
    specimen,
    air: Air,
    *,
    gravity: float = STANDARD_GRAVITY,
    model: str = "constant",
    lift: bool = False,
    spin_axis: Sequence[float] = (0.0, 0.0, 1.0),
    wind: Sequence[float] = (0.0, 0.0, 0.0),
    buoyancy: bool = True,
    noise: str = "auto",
    use_outline: bool | str = "auto",
    coverage_factor: float | None = None,
    initial: dict | None = None,
    max_nfev: int = 300,
    diameter_measure: str | float = "estimate",
    diameter_scale: str | float = "estimate",
) -> ViewFitResult:
    """Fit the drag law and the 3-D flight to one throw seen by one or more cameras.

    Parameters
    ----------
    views : CameraView or sequence of CameraView
        One per camera; the first is the time reference. The cameras share the frame rate.
    specimen : Sphere or Body
        The specimen (mass [kg]; its ``length`` is the diameter of the sphere whose outline
        the cameras see [m]).
    air : Air
        Air density [kg/m³] and viscosity [Pa s].
    gravity : float
        Acceleration of free fall (along −y). [m/s²]
    model : str
        Drag model name.
    lift : bool
        Also fit a constant lift coefficient about ``spin_axis``.
    spin_axis : sequence of 3 float
        Direction of the spin axis (lift along axis × air velocity). [-]
    wind : sequence of 3 float
        Known constant wind velocity (w_x, w_y, w_z). [m/s]
    buoyancy : bool
        Include buoyancy (switch off only to study its effect).
    noise : {"auto", "white", "ar1"}
        Noise model of every channel; "auto" uses AR(1) when the residuals' lag-1
        autocorrelation is significant (p < 0.01).
    use_outline : bool or "auto"
        Fit the apparent diameters of the views that have them (needed with one camera for
        the depth; they add almost nothing with two or more, and their systematic errors
        would only enter).  "auto" (default): with one view only.
    coverage_factor : float, optional
        Force k; default the Student-t factor at p = 95.45 % for the effective degrees of
        freedom.
    initial : dict, optional
        Starting values by parameter name (e.g. ``ViewFitResult.as_initial()``; the launch
        state there is at the reference time).
    max_nfev : int
        Evaluation budget of each optimiser stage.
    diameter_measure : {"estimate", "across_motion", "equal_area"} or float
        What the views' apparent diameters measure: the outline's width across the motion
        (``"across_motion"``, lam = 0), its equal-area diameter (``"equal_area"``, lam = 1),
        a given ``lam`` in between, or ``"estimate"``: lam fitted per view (a circle fitted
        to the elliptic blob of a sphere seen off the optical axis lands between the two,
        depending on the blur; :mod:`fitdrag.fit.image_problem`). [1]
    diameter_scale : "estimate" or float
        Scale of the views' diameters against the specimen's size: ``"estimate"`` (a fitted
        scale per view: a constant bias of the tracker's diameters and the specimen's
        diameter uncertainty then do not move the depth, which follows from the diameter's
        relative change along the flight and from gravity) or a given scale (1 = trust the
        diameters' absolute size). [1]

    Returns
    -------
    ViewFitResult
        ``success`` is False (with a message) when the fit did not converge.
    """
    views = _check_views(views)
    if not all(hasattr(specimen, a) for a in ("mass", "area", "volume", "length")):
        raise InputError(
            f"specimen: expected a fitdrag.Sphere or fitdrag.Body, got {specimen!r}; build one "
            f"with fitdrag.Sphere(mass, diameter)."
        )
    if not isinstance(air, Air):
        raise InputError(
            f"air: expected a fitdrag.Air, got {type(air).__name__}; use fitdrag.Air(density) "
            f"or fitdrag.Air.from_conditions(temperature, pressure, relative_humidity)."
        )
    if noise not in ("auto", "white", "ar1"):
        raise InputError(f"noise: unknown noise model {noise!r}; use 'auto', 'white' or 'ar1'.")
    if coverage_factor is not None and not (
        isinstance(coverage_factor, (int, float)) and math.isfinite(coverage_factor)
        and coverage_factor > 0
    ):  # fmt: skip
        raise InputError(
            f"coverage_factor: must be a finite number > 0, got {coverage_factor!r}; leave it "
            f"out for the Student-t factor at p = 95.45 %."
        )
    if not isinstance(max_nfev, int) or max_nfev < 1:
        raise InputError(f"max_nfev: must be a whole number >= 1, got {max_nfev!r}.")
    wind_v = _vector3("wind", wind, "m/s", "give the wind velocity (w_x, w_y, w_z) [m/s].")
    axis = _spin_axis(spin_axis)
    dm = get_drag_model(model)
    conditions = Conditions(air=air, gravity=gravity, wind=0.0, buoyancy=buoyancy)
    radius = 0.5 * float(specimen.length)
    if use_outline == "auto":
        use_outline = len(views) == 1
    elif not isinstance(use_outline, bool):
        raise InputError(
            f"use_outline: expected True, False or 'auto', got {use_outline!r}; 'auto' fits the "
            f"apparent diameters with one camera only."
        )
    outline = [use_outline and v.diameter is not None for v in views]
    given = [0.0] + [v.time_offset for v in views[1:]]
    lam = _diameter_measure(diameter_measure)
    scale = _diameter_scale(diameter_scale)

    # start: a rough 3-D track, the offsets' whole-frame starts, the reference time
    t_start, pts, off_start = start_track(views, radius, outline, given)
    fps = views[0].fps
    t_first = float(views[0].frame_times[0])
    lows = []
    for v, g, s in zip(views, given, off_start):
        low = s - OFFSET_RANGE_FRAMES / fps if g is None else g
        lows.append(float(v.camera.row_time(v.frame_times[0] + low, 0.0)))
    t_ref = min(t_first, *lows)
    measures = [lam] * len(views)
    scales = [scale] * len(views)
    problem = ImageProblem(views, specimen, conditions, dm, (), lift, wind_v, axis, outline,
                           given, t_ref, measures, scales)  # fmt: skip
    constants: tuple[float, ...] = ()
    if dm.constants:
        speed = np.linalg.norm(np.gradient(pts, t_start, axis=0) - wind_v, axis=1)
        constants = dm.constants_for(air.density * speed * specimen.length / air.viscosity)
        problem = ImageProblem(views, specimen, conditions, dm, constants, lift, wind_v, axis,
                               outline, given, t_ref, measures, scales)  # fmt: skip
    names = problem.parameter_names()
    problem.names = names
    bounds = [tuple(b) for b in dm.bounds] + ([(-5.0, 5.0)] if lift else [])
    bounds += [(-np.inf, np.inf)] * 6
    for g, s in zip(given, off_start):
        if g is None:
            bounds.append((s - OFFSET_RANGE_FRAMES / fps, s + OFFSET_RANGE_FRAMES / fps))
    n_measures = sum(j is not None for j in problem.measure_index)
    n_scales = sum(j is not None for j in problem.scale_index)
    bounds += [MEASURE_RANGE] * n_measures + [SCALE_RANGE] * n_scales
    problem.bounds = bounds
    theta = np.concatenate(
        [np.array(dm.initial, float), [0.0] if lift else np.zeros(0),
         launch_from_track(t_start, pts, t_ref), [s for g, s in zip(given, off_start) if g is None],
         [0.5] * n_measures, [1.0] * n_scales]
    )  # fmt: skip
    if initial:
        for k, val in initial.items():
            if k not in names:
                raise InputError(f"initial: unknown parameter {k!r}; valid: {', '.join(names)}.")
            theta[names.index(k)] = float(val)

    # noise levels: a robust first estimate per channel (second differences), stated = floor;
    # a view's u and v share one level (one centroid sigma per frame, as CameraView states)
    levels = []
    for ch in problem.channels:
        if ch.stated is not None:
            levels.append(1.0)
        else:
            levels.append(noise_floor(ch.observed, ch.observed)[0])
    problem.set_noise(levels=_pooled(problem, [lv * lv for lv in levels], [1] * len(levels)))

    messages: list[str] = []
    best = None
    for cd_try in (None, 0.1, 2.0):
        th0 = theta.copy()
        if cd_try is not None:
            th0[0] = dm.initial[0] * cd_try / 0.5 if dm.name != "constant" else cd_try
        th, ok = levenberg_marquardt(problem, th0, bounds, max_iter=max(max_nfev // 3, 1))
        msg = "converged"
        if not ok:
            th, ok, msg, _ = trust_region(problem, th0, bounds, max_nfev=max_nfev)
        cost = float(np.sum(problem.evaluate(th)[0] ** 2))
        if best is None or (ok and (not best[1] or cost < best[2])):
            best = (th, ok, cost, msg)
        if ok:
            break
    theta, success, _cost, msg = best
    if not success:
        messages.append(f"the first fit from the start did not converge ({msg})")

    n_par = problem.n_params
    corr = 1.0 / math.sqrt(max(1.0 - n_par / max(problem.n_resid, 1), 0.05))

    def estimate_levels(th):
        raw = problem.raw_residuals(th)
        if raw is None:
            return None
        sums = [float(np.sum((r / ch.relative) ** 2)) * corr * corr for ch, r in
                zip(problem.channels, raw)]  # fmt: skip
        out = _pooled(problem, sums, [ch.observed.size for ch in problem.channels])
        return [
            max(lv, 1.0) if ch.stated is not None else max(lv, 1e-9)
            for ch, lv in zip(problem.channels, out)
        ]

    previous = np.array([ch.level for ch in problem.channels])
    for _it in range(5):
        if not success:
            break
        th, ok, msg, _ = polish(problem, theta, bounds, max_nfev)
        if not ok:
            success = False
            messages.append(msg)
            break
        theta = th
        lv = estimate_levels(theta)
        if lv is None:
            break
        problem.set_noise(levels=lv)
        arr = np.asarray(lv)
        if np.max(np.abs(arr / previous - 1.0)) < 0.02:
            break
        previous = arr

    noise_model = "white"
    raw = problem.raw_residuals(theta) if success else None
    p_r1 = float("nan")
    if raw is not None:
        series = [r / ch.sigma for ch, r in zip(problem.channels, raw)]
        r1, pairs = lag1(series)
        from scipy import stats

        p_r1 = float(2.0 * stats.norm.sf(abs(r1 * math.sqrt(max(pairs, 1)))))
    if success and (noise == "ar1" or (noise == "auto" and p_r1 < 0.01)):
        noise_model = "ar1"
        phi = np.zeros(len(problem.channels))
        for _it in range(8):
            new_phi = np.asarray(problem.reml_ar1(theta))
            problem.set_noise(phis=new_phi)
            th, ok, msg, _ = polish(problem, theta, bounds, max_nfev)
            if not ok:
                success = False
                messages.append(msg)
                break
            theta = th
            lv = estimate_levels(theta)
            if lv is not None:
                problem.set_noise(levels=lv)
            done = float(np.max(np.abs(new_phi - phi))) < 1e-3
            phi = new_phi
            if done:
                break
    if success:
        th, ok = gauss_newton(problem, theta, bounds)
        if ok:
            theta = th

    res, jac, sims, ok_eval = problem.evaluate(theta)
    dof = int(problem.n_resid - n_par)
    if dof < 1:
        raise InputError(
            f"views: {problem.n_resid} residuals for {n_par} parameters leave no degrees of "
            f"freedom; track more frames."
        )
    chi2_red = float(res @ res) / dof
    all_stated = all(ch.stated is not None for ch in problem.channels)
    scale = max(1.0, chi2_red) if all_stated else chi2_red
    cov = np.full((n_par, n_par), np.nan)
    if ok_eval:
        try:
            cov = np.linalg.inv(jac.T @ jac) * scale
            if not np.all(np.isfinite(cov)):
                raise np.linalg.LinAlgError
        except np.linalg.LinAlgError:
            cov = np.full((n_par, n_par), np.nan)
            success = False
            messages.append("the Jacobian is singular: the data do not determine the flight")
    else:
        success = False
        messages.append("the flight cannot be simulated or projected at the fitted parameters")
    return _assemble(problem, theta, cov, sims if ok_eval else None, success, messages,
                     noise_model, coverage_factor, t_first, noise, use_outline, dof,
                     diameter_measure, diameter_scale)  # fmt: skip


# ----------------------------------------------------------------------------- assembly


def _launch_at(problem: ImageProblem, theta, t: float):
    """Launch state at ``t`` and its Jacobian (6, n_params) with respect to θ."""
    fm = problem.flight_model(np.array([t]))
    status, pos, vel, jac, _ = fm.run(problem.sim_theta(theta), True)
    a = np.zeros((6, problem.n_params))
    ns = problem.n_shared
    a[:, ns : ns + 6] = jac[0][:, :6]
    a[:, :ns] = jac[0][:, 6:]
    return np.concatenate((pos[0], vel[0])), a, status == 0


def _assemble(problem, theta, cov, sims, success, messages, noise_model, k_user, t_first,
              noise_opt, use_outline, dof_plain, measure_opt,
              scale_opt) -> ViewFitResult:  # fmt: skip
    dm = problem.model
    air = problem.conditions.air
    finite = bool(np.all(np.isfinite(cov)))
    state, a, ok = _launch_at(problem, theta, t_first)
    if not ok:
        success = False
        messages.append("the flight cannot be simulated back to the first frame")
    lcov = a @ cov @ a.T if finite else np.full((6, 6), np.nan)
    launch = Launch3D(*state) if np.all(np.isfinite(state)) else Launch3D(*([0.0] * 6))
    vx, vz = float(state[3]), float(state[5])
    h2 = vx * vx + vz * vz
    psi = math.degrees(math.atan2(vz, vx))
    gpsi = np.array([-vz / h2, vx / h2]) if h2 > 0 else np.zeros(2)
    sub = lcov[np.ix_([3, 5], [3, 5])]
    u_psi = math.degrees(math.sqrt(max(float(gpsi @ sub @ gpsi), 0.0))) if finite else math.nan

    # per view results, Reynolds numbers and depth range
    offsets = problem.offsets(theta)
    lams = problem.measures(theta)
    scales = problem.scales(theta)
    times = problem.observation_times(theta)
    pred, _ok = problem.predict(theta)
    re_all, z_all, view_results = [], [], []
    for i, v in enumerate(problem.views):
        chans = [(c, ch) for c, ch in enumerate(problem.channels) if ch.view_index == i]
        col = problem.offset_index[i]
        u_off = math.sqrt(max(cov[col, col], 0.0)) if (col is not None and finite) else 0.0
        mcol = problem.measure_index[i]
        u_lam = math.sqrt(max(cov[mcol, mcol], 0.0)) if (mcol is not None and finite) else 0.0
        scol = problem.scale_index[i]
        u_s = math.sqrt(max(cov[scol, scol], 0.0)) if (scol is not None and finite) else 0.0
        if pred is not None and sims is not None:
            pu, pv, pd = pred[i]
            pos, vel = sims[i][0], sims[i][1]
        else:
            pu = pv = np.full(len(v), np.nan)
            pd = None if v.diameter is None else np.full(len(v), np.nan)
            pos = vel = None
        if pos is not None:
            re_all.append(air.density * np.linalg.norm(vel - problem.wind, axis=1)
                          * problem.specimen.length / air.viscosity)  # fmt: skip
            z_all.append(pos[:, 2])
            dist = float(np.median(np.linalg.norm(pos - v.camera.centre, axis=1)))
        else:
            dist = math.nan
        ru, rv = v.u - pu, v.v - pv
        by_kind = {ch.kind: ch for _c, ch in chans}
        view_results.append(
            ViewResult(
                name=v.name or f"view {i + 1}",
                time_offset=float(offsets[i]),
                time_offset_uncertainty=float(u_off),
                offset_estimated=col is not None,
                t=times[i],
                fitted_u=pu,
                fitted_v=pv,
                residual_u=ru,
                residual_v=rv,
                fitted_diameter=pd,
                residual_diameter=None if pd is None else v.diameter - pd,
                diameter_used=2 in by_kind,
                noise_model=noise_model,
                sigma_u=float(np.median(by_kind[0].sigma)),
                sigma_v=float(np.median(by_kind[1].sigma)),
                sigma_diameter=float(np.median(by_kind[2].sigma)) if 2 in by_kind else None,
                ar1_coefficients=tuple(float(ch.phi) for _c, ch in chans),
                residual_rms=float(np.sqrt(np.mean(np.concatenate((ru, rv)) ** 2))),
                distance=dist,
                diameter_measure=float(lams[i]) if 2 in by_kind else math.nan,
                diameter_measure_uncertainty=float(u_lam) if 2 in by_kind else math.nan,
                diameter_measure_estimated=mcol is not None,
                diameter_scale=float(scales[i]) if 2 in by_kind else math.nan,
                diameter_scale_uncertainty=float(u_s) if 2 in by_kind else math.nan,
            )
        )
    if re_all:
        re_cat = np.concatenate(re_all)
        re_range = (float(re_cat.min()), float(re_cat.max()))
        re_med = float(np.median(re_cat))
        dm.check_re_range(*re_range)
        z_cat = np.concatenate(z_all)
        depth_range = (float(z_cat.min()), float(z_cat.max()))
    else:
        re_range = (math.nan, math.nan)
        re_med = 1.0
        depth_range = (math.nan, math.nan)
    cd, g = cd_and_gradient(dm, theta, np.asarray(problem.constants, float), re_med)
    u_cd = float(math.sqrt(max(g @ cov @ g, 0.0))) if finite else math.nan
    if noise_model == "ar1":
        n_eff = sum(
            ch.observed.size * min(1.0, (1.0 - ch.phi) / (1.0 + ch.phi)) for ch in problem.channels
        )
        dof = max(1, int(n_eff - problem.n_params))
    else:
        dof = dof_plain
    k = float(k_user) if k_user is not None else student_t_factor(dof, COVERAGE_PROBABILITY)
    n_fit = len(dm.parameters)
    at_upper = [
        dm.parameters[j] for j in range(n_fit)
        if np.isfinite(dm.bounds[j][1]) and abs(theta[j] - dm.bounds[j][1]) < 1e-9
    ]  # fmt: skip
    if success and at_upper:
        success = False
        messages.append(
            f"{', '.join(at_upper)} reached its upper bound: the drag needed to follow the "
            f"observations is implausible; check the mass [kg], size [m], frame rate and cameras"
        )
    at_diameter_bound = [
        problem.names[j] for j in problem.measure_index + problem.scale_index
        if j is not None and min(abs(theta[j] - b) for b in problem.bounds[j]) < 1e-9
    ]  # fmt: skip
    if success and at_diameter_bound:
        success = False
        messages.append(
            f"{', '.join(at_diameter_bound)} reached the edge of its range (measure "
            f"{MEASURE_RANGE}, scale {SCALE_RANGE}): the apparent diameters do not follow the "
            f"sphere's outline; check the diameters, the specimen's size [m] and the camera, or "
            f"fit without them (use_outline=False)"
        )
    at_offset_bound = [
        problem.names[j] for j in problem.offset_index
        if j is not None and min(abs(theta[j] - b) for b in problem.bounds[j]) < 1e-9
    ]  # fmt: skip
    if success and at_offset_bound:
        success = False
        messages.append(
            f"{', '.join(at_offset_bound)} reached the edge of its search range "
            f"(±{OFFSET_RANGE_FRAMES} frames around its start): the cameras' frames could not "
            f"be matched; give the time offset"
        )
    message = "fit converged" if success else "; ".join(m for m in messages if m) or "failed"
    return ViewFitResult(
        success=bool(success),
        message=message,
        model=dm.name,
        parameter_names=tuple(problem.names),
        values=np.asarray(theta, float).copy(),
        covariance=cov,
        constants=tuple(float(c) for c in problem.constants),
        cd=float(cd),
        u_cd=u_cd,
        launch=launch,
        launch_time=float(t_first),
        launch_covariance=lcov,
        reference_time=problem.t_ref,
        out_of_plane_angle=psi,
        out_of_plane_angle_uncertainty=u_psi,
        depth_range=depth_range,
        views=tuple(view_results),
        noise_model=noise_model,
        iterations=int(problem.n_evaluations),
        dof=int(dof),
        coverage_factor=k,
        reynolds_range=re_range,
        specimen=problem.specimen,
        conditions=problem.conditions,
        options={
            "model": dm.name, "lift": problem.lift, "spin_axis": tuple(problem.spin_axis),
            "wind": tuple(problem.wind), "noise": noise_opt, "use_outline": bool(use_outline),
            "diameter_measure": measure_opt, "diameter_scale": scale_opt,
        },
    )  # fmt: skip
