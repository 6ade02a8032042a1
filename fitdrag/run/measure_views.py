"""``fitdrag run`` for throws measured in 3-D: footage seen through calibrated cameras.

For each throw, each camera's footage is tracked (:func:`fitdrag.video.tracking.track_footage`),
the camera is calibrated from its lens file and the marker board
(:func:`fitdrag.geometry.footage_view.camera_from_footage`: intrinsics, pose by PnP with its
covariance, rolling-shutter readout) and its observations become a
:class:`fitdrag.geometry.views.CameraView`; the throw's 3-D flight is fitted to every camera's
pixels (:func:`fitdrag.fit.image_fit.fit_views`).  Throws are combined by their weighted mean
(:func:`fitdrag.fit.view_budget_model.combine_throws`), and the uncertainty budget re-fits every
throw with each input moved (:class:`fitdrag.fit.view_budget_model.ViewRefitModel`): the
specimen, the air, gravity, the frame rate, the board's scale, and each camera's pose, focal
length, readout time and stated time offset.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from fitdrag.errors import ConvergenceError, InputError, InputFileNotFoundError
from fitdrag.report.content import FootageRecord
from fitdrag.run.job import Job, ViewSource

__all__ = ["ViewMeasurementFit", "geometry_text", "read_views"]


@dataclass(frozen=True, eq=False)
class ViewMeasurementFit:
    """The 3-D fits of a job's throws and their combination.

    Attributes
    ----------
    throws : tuple of ViewThrow
        Per throw: its views, the cameras' calibrations and its fit.
    cd : float
        Weighted mean of the throws' Cd. [-]
    u_cd : float
        Its statistical standard uncertainty (Birge-ratio inflated when the throws scatter
        more than their fits say). [-]
    dof : float
        Its effective degrees of freedom.
    weights : ndarray
        The throws' weights. [-]
    birge_ratio : float
        Scatter of the throws against their uncertainties (nan with one throw). [-]
    lift_check : LiftCheck or None
        The lift test, when the job asked for it (``[fit] lift = "auto"``, the default).
    lift_sensitivity : float
        ∂Cd/∂C_L of the fits without lift, to first order (0 when lift is fitted). [-]
    """

    throws: tuple
    cd: float
    u_cd: float
    dof: float
    weights: np.ndarray
    birge_ratio: float
    lift_check: Any = None
    lift_sensitivity: float = 0.0

    @property
    def model(self) -> str:
        return self.throws[0].result.model

    @property
    def lift(self) -> bool:
        return bool(self.throws[0].result.options.get("lift", False))


@dataclass(frozen=True, eq=False)
class ViewInput:
    """One camera's part of a throw, read from its footage.

    Attributes
    ----------
    source : ViewSource
        The job's view.
    footage : FootageTrack
        The tracked footage.
    view : CameraView
        The observations through the calibrated camera.
    calibration : CameraCalibration
        What the budget needs of the camera's calibration.
    pose : BoardPose
        The camera's pose from the board (distance, angle, covariance).
    sha256 : str
        SHA-256 of the footage.
    """

    source: ViewSource
    footage: Any
    view: Any
    calibration: Any
    pose: Any
    sha256: str


def _where(job: Job, i: int, j: int, src: ViewSource) -> str:
    loc = f"{job.path.name}, line {src.line}" if src.line else job.path.name
    th = job.throws[i]
    which = f"[[throws]] #{i + 1}" + (f" view {j + 1}" if th.kind == "views" else "")
    return f"{loc}: {which} footage"


def read_views(job: Job, *, progress: bool = False) -> tuple[list[list[ViewInput]], dict]:
    """Every throw's views (tracked, calibrated), and the SHA-256 of every input file.

    Raises
    ------
    ValueError, FileNotFoundError
        Footage that cannot be tracked or calibrated; the message starts with the job file,
        the line, the throw and the view.
    """
    from fitdrag.fit.view_budget_model import CameraCalibration, tracker_systematics
    from fitdrag.geometry.footage_view import camera_from_footage, view_from_footage
    from fitdrag.run.pipeline import _job_wording
    from fitdrag.tracks.track import file_sha256
    from fitdrag.video.lens import load_lens
    from fitdrag.video.tracking import footage_sha256, track_footage

    hashes = {str(job.path): file_sha256(job.path)}
    fps = job.camera.fps.value
    out = []
    for i, th in enumerate(job.throws):
        views = []
        for j, src in enumerate(th.view_sources(job.camera)):
            offset = None
            if j == 0:
                offset = 0.0
            elif src.time_offset is not None:
                offset = src.time_offset.value
            try:
                lens = load_lens(src.lens)
                if src.track is not None:
                    ft, view, cam, pose = _track_view(src, fps, offset)
                else:
                    readout = src.readout_time or job.camera.readout_time
                    ft = track_footage(src.footage, fps=fps, progress=progress,
                                       readout_time=0.0 if readout is None else readout.value,
                                       **src.tracking_options)  # fmt: skip
                    cam, pose = camera_from_footage(
                        ft, lens,
                        readout_time=0.0 if readout is None else readout.value,
                        readout_time_uncertainty=(
                            0.0 if readout is None else readout.uncertainty
                        ),
                    )  # fmt: skip
                    view = view_from_footage(ft, cam, time_offset=offset, name=src.label)
            except InputError as exc:
                msg = f"{_where(job, i, j, src)}: {_job_wording(str(exc))}"
                if isinstance(exc, FileNotFoundError):
                    raise InputFileNotFoundError(msg) from None
                raise InputError(msg) from None
            std = (lens.details or {}).get("std_dev") or {}
            centroid_sys, drift = tracker_systematics(view.outline_kind)
            cal = CameraCalibration(
                camera_id=src.lens.name,
                centroid_systematic_uncertainty=centroid_sys,
                diameter_drift_uncertainty=drift,
                pose_covariance=pose.covariance,
                focal_length_uncertainty=float(std.get("fx_px", 0.0)),
                time_offset_uncertainty=(
                    src.time_offset.uncertainty if (j > 0 and src.time_offset) else 0.0
                ),
                **(
                    _board_of(ft)
                    if src.track is None
                    else {"pose_focal_derivative": ft.track.meta["camera"].pose_focal_derivative}
                ),
            )
            data = src.footage if src.track is None else src.track
            digest = footage_sha256(data) if src.track is None else file_sha256(data)
            hashes[str(data)] = digest
            if src.track is not None:  # the footage the track's header names, when present
                from fitdrag.run.pipeline import footage_behind

                behind = footage_behind(src.track, ft.track)
                if behind is not None:
                    hashes[str(behind)] = footage_sha256(behind)
            for extra in (src.lens, src.marker_layout):
                if extra is not None:
                    hashes[str(extra)] = file_sha256(extra)
            views.append(ViewInput(src, ft, view, cal, pose, digest))
        out.append(views)
    return out, hashes


@dataclass(frozen=True, eq=False)
class TrackPose:
    """The pose a track file's header states (covariance, and the board distance and axis
    angle computed from the pose)."""

    covariance: np.ndarray
    distance_to_board: float
    distance_to_board_uncertainty: float
    axis_angle: float
    reprojection_rms_px: float


@dataclass(frozen=True, eq=False)
class TrackFootage:
    """A track file standing in for tracked footage (its ``track``)."""

    track: Any


def _track_view(src: ViewSource, fps: float, offset):
    """(TrackFootage, CameraView, Camera, TrackPose) of a view given as a track file."""
    from fitdrag.geometry.camera import rotation_from_vector
    from fitdrag.geometry.footage_view import view_from_track
    from fitdrag.tracks.csv_file import read_track

    tr = read_track(src.track)
    view = view_from_track(tr, time_offset=offset, name=src.label)
    if abs(view.fps / fps - 1.0) > 1e-9:
        raise InputError(
            f"{src.track.name}: its header says {view.fps:g} frames/s but [camera] fps is "
            f"{fps:g}; the cameras share the frame rate: state the same rate."
        )
    cam = view.camera
    cov = np.asarray(tr.meta["camera"].pose_covariance, float).reshape(6, 6)
    centre = cam.centre
    # d z_centre / d (rvec, t) by central differences of centre = -R^T t (small, exact enough)
    grad = np.zeros(6)
    for k in range(6):
        step = np.zeros(6)
        step[k] = 1e-7
        zs = []
        for sgn in (1.0, -1.0):
            r = rotation_from_vector(cam.rvec + sgn * step[:3])
            zs.append(float(-(r.T @ (cam.translation + sgn * step[3:]))[2]))
        grad[k] = (zs[0] - zs[1]) / 2e-7
    axis = cam.optical_axis
    pose = TrackPose(cov, float(centre[2]), float(np.sqrt(max(grad @ cov @ grad, 0.0))),
                     float(np.arccos(min(1.0, abs(float(axis[2]))))), float("nan"))  # fmt: skip
    return TrackFootage(tr), view, cam, pose


def _board_of(ft) -> dict:
    """The marker corners (recorded image) [px] and the board of tracked footage, so that the
    budget can re-solve the pose for a changed focal length; empty when not kept."""
    from fitdrag.geometry.pose import MarkerBoard

    cal = ft.calibration
    obs = getattr(cal, "markers", ())
    layout = getattr(cal, "marker_layout", None)
    if not obs or layout is None:
        return {}
    corners = {int(o.id): o.corners_raw for o in obs if int(o.id) in layout}
    return {"marker_corners": corners, "board": MarkerBoard(cal.marker_size, layout)}


def _scale_uncertainty(v: ViewInput) -> float:
    """Relative standard uncertainty of the board's scale for one view: the stated
    ``scale_uncertainty`` of the marker side; for a track file without it, the header's
    ``scale_relative_uncertainty`` (which also counts the corners' precision, already in the
    pose's covariance: a cautious value)."""
    if v.source.scale_uncertainty is not None:
        return float(v.source.scale_uncertainty)
    if v.source.track is not None:
        header = dict(v.footage.track.meta.get("header") or {})
        try:
            return float(header.get("scale_relative_uncertainty", 0.0))
        except ValueError:
            return 0.0
    return 0.0


def fit_throws(job: Job, inputs: list[list[ViewInput]]):
    """Fit every throw in 3-D and combine them: (ViewMeasurementFit, per-throw ViewThrow).

    Raises
    ------
    ConvergenceError
        A throw's fit did not converge.
    """
    from fitdrag.fit.image_fit import fit_views
    from fitdrag.fit.view_budget_model import ViewThrow, combine_throws

    specimen = job.make_specimen()
    air = job.make_air()
    opts = job.fit_options()
    kw: dict[str, Any] = {}
    for name in ("model", "lift", "noise"):
        if name in opts:
            kw[name] = opts[name]
    if "wind" in opts:
        kw["wind"] = (float(opts["wind"]), 0.0, 0.0)
    check, sensitivity, results = None, 0.0, None
    if job.fit.lift_test:
        from fitdrag.fit.lift_check import check_lift_views

        check, results, sensitivity = check_lift_views(
            [[v.view for v in views] for views in inputs], specimen, air,
            gravity=job.gravity(), **kw,
        )  # fmt: skip
    throws = []
    for i, views in enumerate(inputs):
        label = job.throws[i].label
        if results is not None:
            r = results[i]
        else:
            r = fit_views([v.view for v in views], specimen, air, gravity=job.gravity(), **kw)
        if not r.success:
            raise ConvergenceError(f"the 3-D fit of throw {i + 1} ({label}) did not converge: "
                                   f"{r.message}")  # fmt: skip
        throws.append(ViewThrow([v.view for v in views], [v.calibration for v in views], r,
                                label))  # fmt: skip
    w, mean, u, dof, birge = combine_throws([t.result.cd for t in throws],
                                            [t.result.u_cd for t in throws],
                                            [t.result.dof for t in throws])  # fmt: skip
    if birge > 1.0:
        warnings.warn(
            f"the {len(throws)} throws scatter more than their fits say (Birge ratio "
            f"{birge:.2f}); the statistical uncertainty is enlarged by that factor.",
            stacklevel=2,
        )
    return ViewMeasurementFit(tuple(throws), mean, u, dof, w, birge, check, sensitivity)


def footage_records(job: Job, inputs: list[list[ViewInput]]) -> tuple[FootageRecord, ...]:
    """Per view of every throw: the file, its SHA-256 and how it was tracked and calibrated."""
    out = []
    for i, views in enumerate(inputs):
        for v in views:
            meta = {k: val for k, val in v.footage.track.meta.items()
                    if k != "source" and isinstance(val, str | int | float | bool)}  # fmt: skip
            meta["sha256"] = v.sha256
            meta["camera_distance_to_board_m"] = float(v.pose.distance_to_board)
            meta["camera_axis_angle_deg"] = math.degrees(float(v.pose.axis_angle))
            if math.isfinite(v.pose.reprojection_rms_px):
                meta["pose_reprojection_rms_px"] = float(v.pose.reprojection_rms_px)
            label = job.throws[i].label
            if len(views) > 1:
                label = f"{label} / {v.source.label}"
            path = v.source.footage if v.source.track is None else v.source.track
            out.append(FootageRecord(throw=i + 1, label=label, path=str(path),
                                     tracking=meta))  # fmt: skip
    return tuple(out)


def geometry_text(job: Job, inputs: list[list[ViewInput]], fit: ViewMeasurementFit) -> str:
    """The certificate's account of the cameras and of the flight's measured geometry."""
    from fitdrag.report.numbers import format_sig, format_with_uncertainty

    cams = []
    seen = set()
    for views in inputs:
        for v in views:
            key = str(v.source.footage or v.source.track)
            if key in seen:
                continue
            seen.add(key)
            d, ud = format_with_uncertainty(v.pose.distance_to_board,
                                            v.pose.distance_to_board_uncertainty, 2)  # fmt: skip
            ang = math.degrees(v.pose.axis_angle)
            cam = v.view.camera
            ro = (f"rolling shutter, readout {format_sig(1e3 * cam.readout_time, 3)} ms"
                  f" (u {format_sig(1e3 * cam.readout_time_uncertainty, 2)} ms)"
                  if cam.readout_time > 0 else "global shutter")  # fmt: skip
            cams.append(
                f"{v.source.label} ({v.source.lens.name}): {d} m from the board (u {ud} m), "
                f"axis {ang:.1f}° from its normal, {ro}"
            )
    flights = []
    for k, th in enumerate(fit.throws, start=1):
        r = th.result
        a, ua = format_with_uncertainty(r.out_of_plane_angle, r.out_of_plane_angle_uncertainty)
        z0, z1 = r.depth_range
        rms = ", ".join(f"{format_sig(vr.residual_rms, 2)}" for vr in r.views)
        flights.append(
            f"throw {k}: {a}° out of the board plane (u {ua}°), {1e3 * z0:.0f} to "
            f"{1e3 * z1:.0f} mm in front of it; residual RMS {rms} px"
        )
    n_cam = len(inputs[0])
    how = ("one camera: the depth from the specimen's apparent diameter against its stated "
           "diameter" if n_cam == 1 else f"{n_cam} cameras, time offsets "
           + ("stated" if all(not v.offset_estimated for v in fit.throws[0].result.views[1:])
              else "estimated from the data"))  # fmt: skip
    text = (
        f"Measured in 3-D ({how}). Cameras: "
        + "; ".join(cams)
        + ". Flight: "
        + "; ".join(flights)
        + ". Camera model: pinhole with the radial-tangential "
        "distortion of the lens file (OpenCV's model), pose by PnP on all marker corners "
        "with its covariance (Hartley and Zisserman 2004, ch. 6-7), row r of a frame seen "
        "at t + (r / rows) × readout time; the flight is fitted to each camera's pixels at "
        "each observation's own row time."
    )
    if len(fit.throws) > 1:
        text += (
            f" Throws combined by their weighted mean (Birge ratio "
            f"{format_sig(fit.birge_ratio, 2)}"
            + ("; statistical part enlarged by it" if fit.birge_ratio > 1 else "")
            + ")."
        )
    return text


def measure_in_3d(job: Job, *, monte_carlo=None, adaptive=None, seed=None, workers=None,
                  progress: bool = False):  # fmt: skip
    """:func:`fitdrag.run.pipeline.measure` for a job whose throws are measured in 3-D."""
    from fitdrag.fit.view_budget_model import ViewRefitModel
    from fitdrag.report.content import CameraSettings, FitFacts
    from fitdrag.run.flight_physics import flight_physics_3d, still_air_warning
    from fitdrag.run.pipeline import (
        Measurement,
        _monte_carlo_trials,
        budget_and_checks,
        certificate_content,
    )
    from fitdrag.uncertainty.gum import InputQuantity

    n_mc = _monte_carlo_trials(job, monte_carlo)
    still_air_warning(job)
    inputs_3d, hashes = read_views(job, progress=progress)
    fit = fit_throws(job, inputs_3d)
    air = job.make_air()
    u_scale = max(_scale_uncertainty(v) for views in inputs_3d for v in views)
    quantities = [q for q in job.input_quantities(scale_relative_uncertainty=u_scale,
                                                  roll_uncertainty=0.0) if q.name != "roll"]  # fmt: skip
    quantities = [
        replace(q, description="marker board scale (marker side, relative)")
        if q.name == "length_scale" else q
        for q in quantities
    ]  # fmt: skip
    nominal = {q.name: q.value for q in quantities}
    model = ViewRefitModel(list(fit.throws), nominal, length=job.specimen.length,
                           viscosity=air.viscosity,
                           lift_sensitivity=fit.lift_sensitivity)  # fmt: skip
    u_cam = model.camera_uncertainties()
    for name, (unit, text) in model.camera_names.items():
        if u_cam[name] > 0:
            quantities.append(InputQuantity(name, model.nominal[name], u_cam[name], unit,
                                            description=text))  # fmt: skip
    physics = flight_physics_3d(job, model, fit)
    quantities += physics.inputs()
    stat = (fit.u_cd, fit.dof if fit.dof > 0 else math.inf)
    budget, mc, check = budget_and_checks(
        job, model, quantities, stat, n_mc, adaptive=adaptive, seed=seed, workers=workers,
        progress=progress,
    )  # fmt: skip
    first = fit.throws[0].result
    launch = first.launch
    speed = math.sqrt(launch.vx0**2 + launch.vy0**2 + launch.vz0**2)
    angle = math.degrees(math.atan2(launch.vy0, math.hypot(launch.vx0, launch.vz0)))
    lc = first.launch_covariance
    vel = np.array([launch.vx0, launch.vy0, launch.vz0])
    g_speed = vel / speed
    h = math.hypot(launch.vx0, launch.vz0)
    g_angle = np.array([-launch.vy0 * launch.vx0 / h, h, -launch.vy0 * launch.vz0 / h]) / speed**2
    cov_v = lc[3:, 3:]
    from fitdrag.report.content import Estimate

    re_lo = min(t.result.reynolds_range[0] for t in fit.throws)
    re_hi = max(t.result.reynolds_range[1] for t in fit.throws)
    n_used = sum(len(v) for t in fit.throws for v in t.views)
    facts = FitFacts(
        throws=len(fit.throws),
        drag_model=fit.model,
        reynolds_number=(re_lo, re_hi, _median_reynolds(fit)),
        launch_speed=Estimate(speed, math.sqrt(max(float(g_speed @ cov_v @ g_speed), 0.0))),
        launch_angle=Estimate(
            angle, math.degrees(math.sqrt(max(float(g_angle @ cov_v @ g_angle), 0.0)))
        ),  # fmt: skip
        points_used=n_used,
        points_total=n_used,
        noise_model=first.noise_model,
    )
    summary = {
        "measured_in": "3-D",
        "drag_coefficient": fit.cd,
        "statistical_standard_uncertainty": fit.u_cd,
        "degrees_of_freedom": fit.dof,
        "birge_ratio": None if math.isnan(fit.birge_ratio) else fit.birge_ratio,
        "throws": [_throw_summary(t, w) for t, w in zip(fit.throws, fit.weights)],
    }
    camera = CameraSettings(
        fps=job.camera.fps.estimate(),
        scale_relative_uncertainty=u_scale,
        scale_relative_uncertainty_source="marker side (largest of the views' scale_uncertainty)",
    )
    content = certificate_content(
        job, float(fit.cd), budget, mc, check, air=air, wind=job.fit_options().get("wind", 0.0),
        statistical_u=float(fit.u_cd), camera=camera, footage=footage_records(job, inputs_3d),
        method=replace(_method_3d(fit, budget, mc, geometry_text(job, inputs_3d, fit)),
                       flight_physics=physics.text()),
        fit_facts=facts, fit_summary=summary, hashes=hashes, physics=physics,
    )  # fmt: skip
    verdict = content.conformity.verdict if content.conformity is not None else None
    tracks = [v.footage.track for views in inputs_3d for v in views]
    from fitdrag.report.plots import curves_from_views

    curves = [c for t in fit.throws for c in curves_from_views(t.result, t.views, label=t.label)]
    return Measurement(job, tracks, fit, budget, mc, check, verdict, hashes, content, curves)


def _median_reynolds(fit: ViewMeasurementFit) -> float:
    """Median Reynolds number over the first throw's observations (the certificate's
    figure; each throw's fit states its Cd at its own median). [-]"""
    from fitdrag.fit.image_refit import median_reynolds, rebuild_problem

    th = fit.throws[0]
    return median_reynolds(rebuild_problem(th.result, th.views), th.result.values)


def _throw_summary(th, weight: float) -> dict:
    """A throw's 3-D fit in plain JSON values."""
    r = th.result
    return {
        "label": th.label,
        "weight": float(weight),
        "drag_coefficient": r.cd,
        "standard_uncertainty": r.u_cd,
        "coverage_factor": r.coverage_factor,
        "degrees_of_freedom": r.dof,
        "out_of_plane_angle_deg": r.out_of_plane_angle,
        "out_of_plane_angle_uncertainty_deg": r.out_of_plane_angle_uncertainty,
        "depth_range_m": list(r.depth_range),
        "reynolds_range": list(r.reynolds_range),
        "noise_model": r.noise_model,
        "launch": {
            "time_s": r.launch_time,
            "position_m": [r.launch.x0, r.launch.y0, r.launch.z0],
            "velocity_m_s": [r.launch.vx0, r.launch.vy0, r.launch.vz0],
        },  # fmt: skip
        "views": [
            {
                "name": v.name,
                "observations": int(v.t.size),
                "residual_rms_px": v.residual_rms,
                "sigma_u_px": v.sigma_u,
                "sigma_v_px": v.sigma_v,
                "sigma_diameter_px": v.sigma_diameter,
                "diameter_used": v.diameter_used,
                "time_offset_s": v.time_offset,
                "time_offset_uncertainty_s": v.time_offset_uncertainty,
                "time_offset_estimated": v.offset_estimated,
                "distance_m": v.distance,
            }
            for v in r.views
        ],
    }


def _method_3d(fit: ViewMeasurementFit, budget, mc, geometry: str):
    """The method in words for a 3-D measurement."""
    from fitdrag.physics.registry import get_drag_model
    from fitdrag.report.content import Method

    dm = get_drag_model(fit.model)
    lift = fit.lift
    from fitdrag.report.content import noise_words
    from fitdrag.run.pipeline import drag_model_text, model_equation_text

    eq = model_equation_text(lift, " in three dimensions")
    fit_method = (
        "weighted nonlinear least squares in each camera's pixels (Levenberg–Marquardt): the "
        "predicted centre (and, where used, width) of the sphere's image outline at each "
        "observation's own time against the tracked blob; "
        f"{noise_words(fit.throws[0].result.noise_model)}, each camera's noise level estimated "
        "from its residuals; each throw has its own launch state"
        + (", Cd combined over throws by their weighted mean" if len(fit.throws) > 1 else "")
        + "."
    )
    unc = (
        "JCGM 100:2008 (GUM): law of propagation of uncertainty with sensitivity coefficients "
        "from re-fits (each camera's pose along its direction of greatest effect with its PnP "
        "covariance, focal length with the pose re-solved from the board, readout time, "
        "stated time offsets, board scale), Welch–Satterthwaite effective degrees of "
        f"freedom, coverage factor from the t-distribution at p = "
        f"{100 * budget.coverage_probability:.2f} %"
    )
    if mc is not None:
        unc += f"; checked by the Monte Carlo method of JCGM 101:2008 ({mc.trials} re-fits)"
    return Method(
        model_equation=eq,
        drag_model=dm.name,
        drag_model_text=drag_model_text(dm),
        integrator="explicit Runge–Kutta 5(4) (Dormand and Prince 1980) with forward "
        "sensitivities, in three dimensions",
        fit_method=fit_method,
        uncertainty_method=unc + ".",
        geometry=geometry,
    )
