"""The drag coefficient's measurement model for a 3-D measurement (throws seen through
calibrated cameras): Cd as a function of the input quantities — specimen, air, gravity,
frame rate, and each camera's calibration (pose, focal length, rolling-shutter readout, known
time offset, the marker board's length scale) — evaluated by re-fitting every throw's
finished image-space fit (:func:`fitdrag.fit.image_refit.refit_views`).

With several throws the measurand is the weighted mean of the throws' Cd with the weights of
the statistical fit, ``w_i ∝ 1/u_i²`` held fixed (JCGM 100:2008 4.2: the estimate is a stated
function of the inputs; the weights are part of that function, not inputs).

Handed to :func:`fitdrag.uncertainty.gum.budget_from_model` and
:func:`fitdrag.uncertainty.monte_carlo.monte_carlo`, which know nothing of cameras.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from fitdrag.errors import ConvergenceError, InputError
from fitdrag.fit.budget_model import DRAG_INPUTS, air_from_inputs
from fitdrag.fit.image_refit import ViewRefitSession, refit_views
from fitdrag.geometry.camera import Camera, rotation_from_vector
from fitdrag.geometry.views import CameraView
from fitdrag.physics.specimen import Body, Sphere

__all__ = [
    "CameraCalibration",
    "ViewRefitModel",
    "ViewThrow",
    "combine_throws",
    "tracker_systematics",
    "view_input_names",
]

#: Standard uncertainty of a tracker's systematic centroid error, per image coordinate, as
#: a constant shift over the flight. [px]  Type B, from the tracker's own validation on
#: rendered footage (``benchmarks/coverage_3d.py --source footage``): actual centroid error
#: RMS 0.093-0.104 px per coordinate against a stated 0.03 px, mostly a smooth offset from
#: the ball's shading; a flat 0.1 px is taken.
TRACKER_CENTROID_SYSTEMATIC = 0.1

#: Standard uncertainty of a drift of the tracker's apparent diameters from the first
#: observation to the last (linear). [px]  Type B, from the same study: drift +0.08 ± 0.08 px
#: over the flight after the fit's diameter measure and scale (RMS about 0.11 px); with one
#: camera the depth rests on the diameters' change, so this line carries that error.
TRACKER_DIAMETER_DRIFT = 0.1

#: The same two figures for a tracker that fits the outline the camera gives a sphere
#: (diameters measuring depth, ``CameraView.outline_kind == "depth"``) under the lamp it
#: estimates from the ball's shading. [px]  Type B, from ``benchmarks/coverage_3d.py
#: --source footage`` (50 throws, one lamp about 20 degrees off the camera axis, 0.2-2 ms
#: exposure, rolling shutter on most): centroid error RMS 0.013 px per coordinate against a
#: stated 0.021 px; drift of the diameters over the flight after the fit's scale RMS
#: 0.010 px, mean +0.004 px, largest 0.024 px.  About 1.5 times the measured RMS is taken,
#: for footage lit or rendered otherwise than ours: 0.02 px and 0.015 px.
SPHERE_TRACKER_CENTROID_SYSTEMATIC = 0.02
SPHERE_TRACKER_DIAMETER_DRIFT = 0.015


def tracker_systematics(outline_kind: str) -> tuple[float, float]:
    """(centroid systematic, diameter drift) standard uncertainties [px] of a view's tracker,
    by what its diameters measure (``"depth"``: a tracker fitting the sphere's camera
    outline; otherwise a circular disc)."""
    if outline_kind == "depth":
        return SPHERE_TRACKER_CENTROID_SYSTEMATIC, SPHERE_TRACKER_DIAMETER_DRIFT
    return TRACKER_CENTROID_SYSTEMATIC, TRACKER_DIAMETER_DRIFT


#: Inputs shared by every throw, and their units.
COMMON_INPUTS = {
    name: unit
    for name, unit in DRAG_INPUTS.items()
    if name not in ("roll", "camera_distance", "out_of_plane_angle")  # planar tracks only
}


@dataclass(frozen=True, eq=False)
class CameraCalibration:
    """What the budget needs to know of one camera's calibration in one throw.

    Parameters
    ----------
    camera_id : str
        Names the physical camera and lens (e.g. the lens file's name): views with the same
        id share one focal-length and one readout-time input (the same lens file and data
        sheet), each view keeps its own pose.
    pose_covariance : array_like, shape (6, 6)
        Covariance of the pose ``(rvec, t)`` from the marker board. [rad², rad m, m²]
    focal_length_uncertainty : float
        Standard uncertainty of the focal length ``fx`` (``fy`` moves in proportion), e.g.
        the lens calibration's. [px]
    time_offset_uncertainty : float
        Standard uncertainty of a stated time offset (views after the first whose offset is
        given, not fitted). [s]
    marker_corners : mapping of int to (4, 2) array, optional
        The marker corners the pose was found from (recorded image) [px]; with ``board``,
        a changed focal length re-solves the pose from them, as the calibration would have.
    board : MarkerBoard, optional
        The marker board of ``marker_corners``.
    pose_focal_derivative : array_like, shape (6,), optional
        Without the corners: ``d(rvec, t) / d ln f`` of the re-solved pose (e.g. from a track
        file's header), applied to first order; with neither, the pose is held (which
        overstates the focal length's effect). [rad, m]
    centroid_systematic_uncertainty : float
        Standard uncertainty of the tracker's systematic centroid error, per coordinate, as
        a constant shift (default :data:`TRACKER_CENTROID_SYSTEMATIC`). [px]
    diameter_drift_uncertainty : float
        Standard uncertainty of a linear drift of the apparent diameters over the flight,
        for views whose diameters the fit uses (default :data:`TRACKER_DIAMETER_DRIFT`). [px]
    """

    camera_id: str
    pose_covariance: Any
    focal_length_uncertainty: float = 0.0
    time_offset_uncertainty: float = 0.0
    marker_corners: Mapping[int, Any] | None = None
    board: Any = None
    pose_focal_derivative: Any = None
    centroid_systematic_uncertainty: float = TRACKER_CENTROID_SYSTEMATIC
    diameter_drift_uncertainty: float = TRACKER_DIAMETER_DRIFT

    def __post_init__(self) -> None:
        cov = np.asarray(self.pose_covariance, float)
        if cov.shape != (6, 6) or not np.all(np.isfinite(cov)):
            raise InputError(
                f"pose_covariance: expected a finite 6x6 matrix of (rvec [rad], t [m]), got "
                f"shape {cov.shape}; take it from camera_pose_from_markers(...).covariance."
            )
        object.__setattr__(self, "pose_covariance", 0.5 * (cov + cov.T))
        for name in ("focal_length_uncertainty", "time_offset_uncertainty",
                     "centroid_systematic_uncertainty", "diameter_drift_uncertainty"):  # fmt: skip
            v = getattr(self, name)
            if not (isinstance(v, int | float) and math.isfinite(v) and v >= 0):
                raise InputError(f"{name}: expected a standard uncertainty >= 0, got {v!r}.")


@dataclass(frozen=True, eq=False)
class ViewThrow:
    """One throw of a 3-D measurement: its views, their calibrations and its fit.

    Parameters
    ----------
    views : sequence of CameraView
        The cameras' observations, as fitted.
    calibrations : sequence of CameraCalibration
        One per view.
    result : ViewFitResult
        The converged fit of ``views``.
    label : str
        A name for messages.
    """

    views: Sequence[CameraView]
    calibrations: Sequence[CameraCalibration]
    result: Any
    label: str = ""
    _pose_dirs: list = field(default_factory=list, repr=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "views", tuple(self.views))
        object.__setattr__(self, "calibrations", tuple(self.calibrations))
        if len(self.views) != len(self.calibrations):
            raise InputError(
                f"calibrations: one per view is needed, got {len(self.calibrations)} for "
                f"{len(self.views)} views."
            )
        if not getattr(self.result, "success", False):
            raise InputError(f"result: the fit of throw {self.label!r} did not converge.")


def view_input_names(throws: Sequence[ViewThrow]) -> dict[str, tuple[str, str]]:
    """The camera inputs of a set of throws: name -> (unit, description).

    ``pose_<t>_<v>`` for the pose of view v of throw t (one line along the pose's direction
    of greatest effect, see :class:`ViewRefitModel`), ``focal_length_<c>`` [relative],
    ``readout_time_<c>`` [s] for camera c (numbered in order of first appearance of its
    ``camera_id``), ``time_offset_<t>_<v>`` [s] for a stated offset.
    """
    out: dict[str, tuple[str, str]] = {}
    ids = _camera_ids(throws)
    for t, th in enumerate(throws, start=1):
        for v, (view, cal) in enumerate(zip(th.views, th.calibrations), start=1):
            out[f"pose_{t}_{v}"] = ("", f"pose of camera {view.name or v} in throw {t} "
                                        f"(board PnP covariance; 1 = one standard deviation "
                                        f"along its direction of greatest effect)")  # fmt: skip
            c = ids.index(cal.camera_id) + 1
            out.setdefault(f"focal_length_{c}", ("", f"focal length of {cal.camera_id} "
                                                     f"(relative, nominal 1)"))  # fmt: skip
            out.setdefault(f"readout_time_{c}", ("s", f"rolling-shutter readout of "
                                                      f"{cal.camera_id}"))  # fmt: skip
            if v > 1 and not th.result.views[v - 1].offset_estimated:
                out[f"time_offset_{t}_{v}"] = ("s", f"stated time offset of view {v} in "
                                                    f"throw {t}")  # fmt: skip
            for axis in ("u", "v"):
                out[f"centroid_{axis}_{t}_{v}"] = (
                    "px", f"tracker's systematic centroid error along {axis}, camera "
                          f"{view.name or v} in throw {t} (constant shift)")  # fmt: skip
            if th.result.views[v - 1].diameter_used:
                out[f"diameter_drift_{t}_{v}"] = (
                    "px", f"drift of the tracker's apparent diameters over the flight, camera "
                          f"{view.name or v} in throw {t} (first to last)")  # fmt: skip
    return out


def _camera_ids(throws) -> list[str]:
    ids: list[str] = []
    for th in throws:
        for cal in th.calibrations:
            if cal.camera_id not in ids:
                ids.append(cal.camera_id)
    return ids


def combine_throws(cds: Sequence[float], u_stats: Sequence[float], dofs: Sequence[float]):
    """The weighted mean of the throws' Cd, its statistical standard uncertainty and dof.

    Weights ``w_i = u_i⁻² / Σ u_j⁻²``.  The internal uncertainty ``(Σ u_i⁻²)^-½`` is
    compared with the scatter of the throws by the Birge ratio
    ``R_B = sqrt(Σ (Cd_i − mean)² / u_i² / (n − 1))`` (Birge, Phys. Rev. 40, 207, 1932;
    Kacker et al., Metrologia 45, 512, 2008): when the throws scatter more than their own
    uncertainties say (R_B > 1), the uncertainty is multiplied by R_B with n − 1 degrees of
    freedom; otherwise the dof are those of the fits (Welch–Satterthwaite).

    Parameters
    ----------
    cds, u_stats : sequence of float
        Each throw's Cd and statistical standard uncertainty. [-]
    dofs : sequence of float
        Each throw's effective degrees of freedom.

    Returns
    -------
    (weights, mean, u, dof, birge_ratio)
    """
    cd = np.asarray(cds, float)
    u = np.asarray(u_stats, float)
    if cd.size == 0 or cd.shape != u.shape or not np.all(np.isfinite(u)) or np.any(u <= 0):
        raise InputError(
            f"u_stats: expected one finite uncertainty > 0 per throw, got {u_stats!r}."
        )
    w = u**-2 / np.sum(u**-2)
    mean = float(w @ cd)
    u_int = float(np.sum(u**-2) ** -0.5)
    n = cd.size
    if n < 2:
        return w, mean, u_int, float(dofs[0]), math.nan
    birge = float(math.sqrt(np.sum(((cd - mean) / u) ** 2) / (n - 1)))
    if birge > 1.0:
        return w, mean, u_int * birge, float(n - 1), birge
    nu = np.asarray(dofs, float)
    ws = float(u_int**4 / np.sum((w * u) ** 4 / nu)) if np.all(nu > 0) else math.inf
    return w, mean, u_int, ws, birge


class ViewRefitModel:
    """Cd (the weighted mean over throws) as a function of the inputs, by re-fitting.

    Inputs (missing names take their nominal values):

    * ``mass`` [kg], ``diameter`` [m] (sphere; also the size of the outline the cameras see)
      or ``area`` [m²] and ``volume`` [m³] (body), ``added_mass_coefficient`` [-];
    * ``temperature`` [°C], ``pressure`` [Pa], ``relative_humidity`` [%], or
      ``air_density`` [kg/m³]; ``gravity`` [m/s²];
    * ``frame_rate`` [Hz]: every view's frame rate (frames were timed with the nominal);
    * ``length_scale`` [-]: a factor (nominal 1) on the marker board's size, hence on every
      camera's translation (PnP on a board scaled by s gives t·s, R unchanged);
    * ``pose_<t>_<v>`` [-] (nominal 0, u = 1): the pose of view v of throw t moved by that
      many standard deviations along ``d = Σ g / sqrt(gᵀ Σ g)``, with Σ the pose covariance
      and g the gradient of Cd in the pose (found by re-fits when the model is built).  To
      first order this one line carries the pose's whole contribution ``sqrt(gᵀ Σ g)``
      (JCGM 100:2008 5.2.2 with the covariance), without one line per pose component;
    * ``focal_length_<c>`` [-] (nominal 1): fx and fy of camera c times this factor, each
      pose re-solved from its marker corners when they are known (as the calibration would
      have given it); ``readout_time_<c>`` [s];
    * ``time_offset_<t>_<v>`` [s]: a stated time offset;
    * ``air_viscosity`` [Pa s] (with ``air_density``); ``air_speed`` [m/s] (nominal 0): air
      moving at this speed along each throw's fitted flight (from its first to its last
      observed point), added to the fit's wind vector; ``drag_law`` [-] (nominal 0): an
      additive correction to Cd for the choice of drag law (no re-fit; see
      :mod:`fitdrag.fit.drag_law_choice`); ``lift_coefficient`` [-] (nominal 0): an
      undetected lift, acting on Cd to first order with ``lift_sensitivity``
      (:func:`fitdrag.fit.lift_check.check_lift_views`).

    Parameters
    ----------
    throws : sequence of ViewThrow
    nominal : mapping
        Nominal value of every common input used (names of :data:`COMMON_INPUTS`); the
        camera inputs take their nominal values from the views.
    length : float, optional
        Reynolds reference length of a body (kept fixed). [m]
    viscosity : float, optional
        Air viscosity to use with ``air_density`` (kept fixed). [Pa s]
    weights : sequence of float, optional
        Weights of the throws' Cd (default ``u_i⁻²``, normalised).
    lift_sensitivity : float
        ∂Cd/∂C_L of an undetected lift (the ``lift_coefficient`` input). [-]
    fixed_jacobian : bool
        Re-solve each throw by chord steps with its fit's Jacobian held, from flights
        integrated and projected without derivatives, finished by an exact Gauss–Newton step
        (:class:`fitdrag.fit.image_refit.ViewRefitSession`, built once per process), the full
        re-fit (:func:`fitdrag.fit.image_refit.refit_views`) only where that does not settle;
        False: always the full re-fit (:meth:`full` gives it for checking).
    """

    def __init__(self, throws: Sequence[ViewThrow], nominal: Mapping[str, float], *,
                 length=None, viscosity=None, weights=None,
                 lift_sensitivity: float = 0.0, fixed_jacobian: bool = True):  # fmt: skip
        self.throws = list(throws)
        if not self.throws:
            raise InputError("throws: at least one throw is needed.")
        unknown = sorted(k for k in nominal if k not in COMMON_INPUTS)
        if unknown:
            raise InputError(
                f"nominal: unknown input name(s) {unknown}; use names from "
                f"{', '.join(COMMON_INPUTS)} (camera inputs take their values from the views)."
            )
        self.camera_names = view_input_names(self.throws)
        self.camera_ids = _camera_ids(self.throws)
        self.nominal = dict(nominal)
        for name in self.camera_names:
            self.nominal[name] = self._camera_nominal(name)
        self.length = length
        self.viscosity = viscosity
        self.lift_sensitivity = float(lift_sensitivity)
        self.fixed_jacobian = bool(fixed_jacobian)
        self.directions = [_flight_direction(th) for th in self.throws]
        if weights is None:
            weights, *_ = combine_throws([t.result.cd for t in self.throws],
                                         [t.result.u_cd for t in self.throws],
                                         [t.result.dof for t in self.throws])  # fmt: skip
        self.weights = np.asarray(weights, float)
        self._pose_direction: dict[str, np.ndarray] = {}
        for t, th in enumerate(self.throws, start=1):
            for v in range(1, len(th.views) + 1):
                self._pose_direction[f"pose_{t}_{v}"] = self._direction(t, v)

    # -- nominal values and uncertainties of the camera inputs ---------------------------
    def _camera_nominal(self, name: str) -> float:
        if name.startswith(("pose_", "centroid_", "diameter_drift_")):
            return 0.0
        if name.startswith("focal_length_"):
            return 1.0
        if name.startswith("readout_time_"):
            cam = self._camera_of(int(name.rsplit("_", 1)[1]))
            return float(cam.readout_time)
        t, v = (int(x) for x in name.split("_")[2:4])
        return float(self.throws[t - 1].views[v - 1].time_offset or 0.0)

    def _camera_of(self, c: int) -> Camera:
        cid = self.camera_ids[c - 1]
        for th in self.throws:
            for view, cal in zip(th.views, th.calibrations):
                if cal.camera_id == cid:
                    return view.camera
        raise KeyError(cid)  # pragma: no cover - names come from the same throws

    def camera_uncertainties(self) -> dict[str, float]:
        """Standard uncertainty of every camera input, by name (units of
        :func:`view_input_names`)."""
        out: dict[str, float] = {}
        for name in self.camera_names:
            if name.startswith("pose_"):
                out[name] = 1.0 if np.any(self._pose_direction[name]) else 0.0
            elif name.startswith(("focal_length_", "readout_time_")):
                c = int(name.rsplit("_", 1)[1])
                cam = self._camera_of(c)
                cal = self._calibration_of(c)
                out[name] = (cal.focal_length_uncertainty / cam.fx
                             if name.startswith("focal") else cam.readout_time_uncertainty)  # fmt: skip
            else:
                t, v = (int(x) for x in name.split("_")[2:4])
                cal = self.throws[t - 1].calibrations[v - 1]
                if name.startswith("centroid_"):
                    out[name] = cal.centroid_systematic_uncertainty
                elif name.startswith("diameter_drift_"):
                    out[name] = cal.diameter_drift_uncertainty
                else:
                    out[name] = cal.time_offset_uncertainty
        return out

    def _calibration_of(self, c: int) -> CameraCalibration:
        cid = self.camera_ids[c - 1]
        for th in self.throws:
            for cal in th.calibrations:
                if cal.camera_id == cid:
                    return cal
        raise KeyError(cid)  # pragma: no cover

    # -- the pose's direction of greatest effect -------------------------------------------
    def _direction(self, t: int, v: int) -> np.ndarray:
        """``Σ g / sqrt(gᵀ Σ g)`` for the pose of view v of throw t (zeros if no effect)."""
        th = self.throws[t - 1]
        cov = th.calibrations[v - 1].pose_covariance
        sd = np.sqrt(np.clip(np.diag(cov), 0.0, None))
        if not np.any(sd > 0):
            return np.zeros(6)
        base = self._throw_cd(th, t, self.nominal)
        g = np.zeros(6)
        for k in range(6):
            if sd[k] == 0:
                continue
            step = np.zeros(6)
            step[k] = sd[k]
            up = self._throw_cd(th, t, self.nominal, pose_delta={v: step})
            dn = self._throw_cd(th, t, self.nominal, pose_delta={v: -step})
            g[k] = (up - dn) / (2.0 * sd[k])
        del base
        q = float(g @ cov @ g)
        if not q > 0:
            return np.zeros(6)
        return cov @ g / math.sqrt(q)

    # -- building the changed inputs -------------------------------------------------------
    def specimen(self, v):
        sp0 = self.throws[0].result.specimen
        ca = v.get("added_mass_coefficient", sp0.added_mass_coefficient)
        if "diameter" in v:
            return Sphere(v["mass"], v["diameter"], added_mass_coefficient=ca)
        if "area" in v:
            return Body(v["mass"], v["area"], v["volume"], length=self.length,
                        added_mass_coefficient=ca)  # fmt: skip
        if "mass" in v:
            return replace(sp0, mass=v["mass"], added_mass_coefficient=ca)
        return None

    def air(self, v):
        return air_from_inputs(v, self.viscosity)

    def _views(self, th: ViewThrow, t: int, v: Mapping[str, float], pose_delta=None):
        f0 = self.nominal.get("frame_rate")
        scale = v.get("length_scale", 1.0)
        out = []
        for k, (view, cal) in enumerate(zip(th.views, th.calibrations), start=1):
            c = self.camera_ids.index(cal.camera_id) + 1
            cam = view.camera
            focal = v.get(f"focal_length_{c}", 1.0)
            readout = v.get(f"readout_time_{c}", cam.readout_time)
            if focal != 1.0:
                cam = _with_focal(cam, focal, cal)
            delta = self._pose_direction.get(f"pose_{t}_{k}", np.zeros(6)) * v.get(
                f"pose_{t}_{k}", 0.0
            )
            if pose_delta and k in pose_delta:
                delta = delta + pose_delta[k]
            if np.any(delta) or scale != 1.0:
                rvec = cam.rvec + delta[:3]
                cam = cam.with_pose(
                    rotation_from_vector(rvec), (cam.translation + delta[3:]) * scale
                )
            if readout != cam.readout_time:
                cam = replace(cam, readout_time=max(float(readout), 0.0))
            changes: dict[str, Any] = {}
            if cam is not view.camera:
                changes["camera"] = cam
            if f0 is not None and v.get("frame_rate", f0) != f0:
                changes["fps"] = view.fps * v["frame_rate"] / f0
            off_name = f"time_offset_{t}_{k}"
            if off_name in v and v[off_name] != view.time_offset:
                changes["time_offset"] = v[off_name]
            du, dv = v.get(f"centroid_u_{t}_{k}", 0.0), v.get(f"centroid_v_{t}_{k}", 0.0)
            if du:
                changes["u"] = view.u + du
            if dv:
                changes["v"] = view.v + dv
            drift = v.get(f"diameter_drift_{t}_{k}", 0.0)
            if drift and view.diameter is not None:
                f = view.frames.astype(float)
                ramp = (f - f[0]) / max(f[-1] - f[0], 1.0) - 0.5
                changes["diameter"] = view.diameter + drift * ramp
            out.append(replace(view, **changes) if changes else view)
        return out

    def _throw_cd(self, th: ViewThrow, t: int, v, pose_delta=None, model=None) -> float:
        wind = None
        if v.get("air_speed", 0.0):
            wind = (
                np.asarray(th.result.options["wind"], float)
                + v["air_speed"] * (self.directions[t - 1])
            )
        views = self._views(th, t, v, pose_delta)
        if self.fixed_jacobian and model is None:
            sessions = self.__dict__.setdefault("_sessions", {})
            if t not in sessions:
                sessions[t] = ViewRefitSession(th.result, th.views)
            fast = sessions[t].solve(views, specimen=self.specimen(v), air=self.air(v),
                                     gravity=v.get("gravity"), wind=wind)  # fmt: skip
            if fast is not None:
                return fast.cd
        r = refit_views(
            th.result,
            views,
            specimen=self.specimen(v),
            air=self.air(v),
            gravity=v.get("gravity"),
            wind=wind,
            model=model,
        )
        if not r.success:
            raise ConvergenceError(f"the re-fit of throw {th.label or t} did not converge")
        return r.cd

    def cd_with_model(self, model: str) -> float:
        """The weighted mean Cd at the nominal inputs with another drag law of the same
        parameters (e.g. another correlation's scaled sphere curve). [-]"""
        cds = [self._throw_cd(th, t, self.nominal, model=model)
               for t, th in enumerate(self.throws, start=1)]  # fmt: skip
        return float(self.weights @ np.asarray(cds))

    def full(self, values) -> float:
        """Cd of ``values`` by full re-fits (Gauss–Newton with the exact Jacobian at every
        step), never the fixed-Jacobian re-solve: the reference that checks it."""
        saved = self.fixed_jacobian
        self.fixed_jacobian = False
        try:
            return self(values)
        finally:
            self.fixed_jacobian = saved

    def __getstate__(self):
        state = dict(self.__dict__)
        state.pop("_sessions", None)  # rebuilt in each process on first use
        return state

    def __call__(self, values) -> float:
        v = dict(self.nominal)
        v.update(values)
        cds = [self._throw_cd(th, t, v) for t, th in enumerate(self.throws, start=1)]
        return (
            float(self.weights @ np.asarray(cds))
            + v.get("drag_law", 0.0)
            + self.lift_sensitivity * v.get("lift_coefficient", 0.0)
        )


def _flight_direction(th: ViewThrow) -> np.ndarray:
    """Unit vector from the first to the last observed point of a throw's fitted 3-D flight
    (+x when they coincide or the flight cannot be simulated)."""
    from fitdrag.fit.image_refit import rebuild_problem

    r = th.result
    problem = rebuild_problem(r, th.views)
    sims, ok = problem.simulate(np.asarray(r.values, float), False)
    if not ok:
        return np.array([1.0, 0.0, 0.0])
    times = problem.observation_times(np.asarray(r.values, float))
    t = np.concatenate(times)
    pos = np.concatenate([p for p, _v, _j in sims])
    d = pos[int(np.argmax(t))] - pos[int(np.argmin(t))]
    n = float(np.linalg.norm(d))
    return d / n if n > 0 else np.array([1.0, 0.0, 0.0])


def _with_focal(cam: Camera, factor: float, cal: CameraCalibration) -> Camera:
    """The camera with fx, fy times ``factor``; its pose re-solved from the marker corners
    when they are known (the calibration's own response to a different focal length)."""
    new = replace(cam, fx=cam.fx * factor, fy=cam.fy * factor)
    if cal.marker_corners is not None and cal.board is not None:
        from fitdrag.geometry.pose import camera_pose_from_markers

        return camera_pose_from_markers(cal.marker_corners, cal.board, new).camera
    if cal.pose_focal_derivative is not None:
        d = np.asarray(cal.pose_focal_derivative, float) * math.log(factor)
        return new.with_pose(rotation_from_vector(cam.rvec + d[:3]), cam.translation + d[3:])
    return new
