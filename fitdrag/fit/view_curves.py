"""The fitted 3-D flight and each camera's observations in world metres, for plots.

A camera sees the specimen's outline centre at a pixel; its residual (observed minus
predicted, in pixels) is carried to the specimen as a world displacement in the plane
through the fitted position square to the camera's optical axis (the pinhole model: a pixel
step du at depth Z is Z du / f_x along the camera's x axis; Hartley and Zisserman 2004,
eq. 6.1).  The "observed" world point is then the fitted point plus that displacement —
what the camera says the specimen's position was at the fitted depth.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from fitdrag.fit.image_refit import rebuild_problem
from fitdrag.geometry.views import CameraView

__all__ = ["ViewFlight", "view_flights"]


@dataclass(frozen=True, eq=False)
class ViewFlight:
    """One camera's observations of a throw and the fitted flight, in world metres.

    Attributes
    ----------
    name : str
        The view's name.
    t : ndarray
        Time of each observation (frame, offset, row delay). [s]
    fitted, observed : ndarray, shape (n, 3)
        Fitted position at ``t`` and the observation carried to the fitted depth. [m]
    dense_t : ndarray
        Times of the dense fitted flight. [s]
    dense : ndarray, shape (m, 3)
        The fitted flight at ``dense_t``. [m]
    """

    name: str
    t: np.ndarray
    fitted: np.ndarray
    observed: np.ndarray
    dense_t: np.ndarray
    dense: np.ndarray


def view_flights(result, views: Sequence[CameraView], n: int = 400) -> list[ViewFlight]:
    """Per view of a converged :func:`fitdrag.fit.image_fit.fit_views`, its observations and
    the fitted flight in world metres (see the module notes).

    Parameters
    ----------
    result : ViewFitResult
    views : sequence of CameraView
        The views of that fit.
    n : int
        Points of the dense fitted flight.
    """
    problem = rebuild_problem(result, views)
    theta = np.asarray(result.values, float)
    sims, ok = problem.simulate(theta, False)
    times = problem.observation_times(theta)
    t_all = np.concatenate(times)
    dense_t = np.linspace(float(t_all.min()), float(t_all.max()), int(n))
    status, dense, _vel, _jac, _ = problem.flight_model(dense_t).run(
        problem.sim_theta(theta), False
    )
    out = []
    for v, vr, t, (pos, _vel2, _j) in zip(views, result.views, times, sims):
        cam = v.camera
        depth = cam.to_camera(pos)[:, 2]
        d_cam = np.zeros((pos.shape[0], 3))
        d_cam[:, 0] = vr.residual_u * depth / cam.fx
        d_cam[:, 1] = vr.residual_v * depth / cam.fy
        d_world = d_cam @ cam.rotation  # R^T applied to each row
        out.append(ViewFlight(vr.name, t, pos, pos + d_world, dense_t, np.asarray(dense)))
    del ok, status
    return out
