"""One throw's track files, one per camera, fitted in 3-D; the result as JSON-ready data.

:func:`fit_track_views` is the front door for track files written by ``fitdrag track`` with
a camera (``camera_`` header lines, :class:`fitdrag.tracks.camera_header.CameraHeader`): each
file is one camera's view of the same throw (:func:`fitdrag.geometry.footage_view.
views_from_tracks`), and the views are fitted together by
:func:`fitdrag.fit.image_fit.fit_views` (the 3-D flight projected through each camera at each
observation's own row time, residuals in each camera's pixels).  :func:`view_fit_dict` turns
the :class:`~fitdrag.fit.image_fit.ViewFitResult` into plain data for JSON (SI units; NaN as
None).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from fitdrag._version import __version__
from fitdrag.fit.image_fit import ViewFitResult, fit_views
from fitdrag.geometry.footage_view import views_from_tracks
from fitdrag.physics.air import STANDARD_GRAVITY, Air
from fitdrag.tracks.track import Track

__all__ = ["fit_track_views", "view_fit_dict"]


def fit_track_views(
    tracks: Sequence[Track],
    specimen: Any,
    air: Air,
    *,
    time_offsets: Sequence[float | None] | None = None,
    gravity: float = STANDARD_GRAVITY,
    model: str = "constant",
    lift: bool = False,
    wind: Sequence[float] = (0.0, 0.0, 0.0),
    buoyancy: bool = True,
    noise: str = "auto",
    coverage_factor: float | None = None,
) -> ViewFitResult:
    """Fit the drag law and the 3-D flight to one throw's track files, one per camera.

    Parameters
    ----------
    tracks : sequence of Track
        From :func:`fitdrag.tracks.csv_file.read_track` of files written by ``fitdrag track``
        with a camera; the first is the time reference.  A file without a camera among them
        is refused.
    specimen : Sphere or Body
        The specimen (mass [kg], diameter [m]).
    air : Air
        Air density [kg/m³] and viscosity [Pa s].
    time_offsets : sequence of float or None, optional
        One per file after the first: its frame 0 minus the first file's [s], or None to
        estimate it; default all estimated.
    gravity : float
        Acceleration of free fall. [m/s²]
    model, lift, wind, buoyancy, noise, coverage_factor
        As :func:`fitdrag.fit.image_fit.fit_views` (wind [m/s] as (w_x, w_y, w_z)).

    Returns
    -------
    ViewFitResult
        ``success`` False (with a message) when the fit did not converge.
    """
    views = views_from_tracks(tracks, time_offsets=time_offsets)
    return fit_views(
        views, specimen, air, gravity=gravity, model=model, lift=lift, wind=wind,
        buoyancy=buoyancy, noise=noise, coverage_factor=coverage_factor,
    )  # fmt: skip


def _f(v: Any) -> float | None:
    v = float(v)
    return v if math.isfinite(v) else None


def _vu(value: Any, u: Any) -> dict:
    return {"value": _f(value), "standard_uncertainty": _f(u)}


def view_fit_dict(result: ViewFitResult, tracks: Sequence[Track] | None = None) -> dict:
    """The JSON-ready summary of a 3-D fit (SI units: m, m/s, s, px, deg for angles).

    Parameters
    ----------
    result : ViewFitResult
    tracks : sequence of Track, optional
        The files fitted, in view order: their names and SHA-256 go into ``inputs``.
    """
    r = result
    k = r.coverage_factor
    params = {
        n: _vu(v, math.sqrt(max(c, 0.0)) if math.isfinite(c) else math.nan)
        for n, v, c in zip(r.parameter_names, r.values, np.diag(r.covariance))
    }
    lu = r.launch_uncertainty
    names = ("x0", "y0", "z0", "vx0", "vy0", "vz0")
    launch = {n: _vu(getattr(r.launch, n), u) for n, u in zip(names, lu)}
    launch["time"] = r.launch_time
    cond = r.conditions
    out = {
        "success": r.success,
        "message": r.message,
        "software_version": __version__,
        "method": "3-D flight fitted in each camera's pixels (outline centre and width across "
        "the motion of the sphere's image, rolling-shutter row times)",
        "drag_coefficient": {
            "value": _f(r.cd),
            "standard_uncertainty": _f(r.u_cd),
            "expanded_uncertainty": _f(r.expanded_uncertainty),
            "coverage_factor": k,
            "coverage_probability": r.coverage_probability,
            "degrees_of_freedom": r.dof,
            "uncertainty_kind": "statistical (fit) only; the camera poses, the readout times "
            "and the specimen's size are not in it",
        },
        "drag_model": {"name": r.model, "constants": list(r.constants)},
        "parameters": params,
        "launch": launch,
        "out_of_plane_angle_deg": _vu(r.out_of_plane_angle, r.out_of_plane_angle_uncertainty),
        "depth_range_m": [_f(r.depth_range[0]), _f(r.depth_range[1])],
        "reynolds_number": {"min": _f(r.reynolds_range[0]), "max": _f(r.reynolds_range[1])},
        "noise_model": r.noise_model,
        "iterations": r.iterations,
        "views": [
            {
                "name": v.name,
                "time_offset_s": _vu(v.time_offset, v.time_offset_uncertainty),
                "time_offset_estimated": v.offset_estimated,
                "observations": int(v.t.size),
                "residual_rms_px": _f(v.residual_rms),
                "sigma_u_px": _f(v.sigma_u),
                "sigma_v_px": _f(v.sigma_v),
                "diameter_used": v.diameter_used,
                "sigma_diameter_px": None if v.sigma_diameter is None else _f(v.sigma_diameter),
                "ar1_coefficients": list(v.ar1_coefficients),
                "distance_m": _f(v.distance),
            }
            for v in r.views
        ],
        "conditions": {
            "air_density": cond.air.density,
            "air_viscosity": cond.air.viscosity,
            "gravity": cond.gravity,
            "wind": list(r.options.get("wind", (0.0, 0.0, 0.0))),
            "buoyancy": cond.buoyancy,
        },
        "specimen": r.specimen.to_dict(),
    }
    if tracks is not None:
        out["inputs"] = [
            {"source": t.meta.get("source"), "sha256": t.meta.get("sha256")} for t in tracks
        ]
    return out
