"""The first guess and the result of the blob model fit (:func:`fitdrag.video.ball_fit.fit_ball`).

Kept apart from the compiled fit so that code handling fits (e.g. receiving them from the
helper process of :mod:`fitdrag.video.fit_worker`) does not load the compiler.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

__all__ = ["BallFit", "BallGuess"]


@dataclass(frozen=True)
class BallGuess:
    """First guess for :func:`fitdrag.video.ball_fit.fit_ball`, image coordinates (y down).

    Parameters
    ----------
    x, y : float
        Centre of the blob (e.g. its weighted centroid). [px]
    radius : float
        Apparent radius of the ball. [px]
    blur_length : float
        Length of the centre's path over the exposure. [px]
    blur_angle : float
        Direction of that path, from +x towards +y (down). [rad]
    """

    x: float
    y: float
    radius: float
    blur_length: float = 0.0
    blur_angle: float = 0.0


@dataclass(frozen=True)
class BallFit:
    """Result of :func:`fitdrag.video.ball_fit.fit_ball`, image coordinates (x right, y down, pixel centres at
    integers).

    Attributes
    ----------
    x, y : float
        Centre of the ball averaged over the exposure (midpoint of the blur segment). [px]
    u_x, u_y : float
        Their standard uncertainties. [px]
    diameter : float
        Apparent diameter of the ball, ``2 r``: the blob's width perpendicular to the
        motion. [px]
    u_diameter : float
        Its standard uncertainty. [px]
    blur_length : float
        Length of the centre's path over the exposure. [px]
    blur_angle : float
        Its direction from +x towards +y, in (-pi/2, pi/2]. [rad]
    top, bottom : float
        Smallest and largest y the ball's outline reaches during the exposure. [px]
    row_first, row_last : int
        First and last image rows the blob spans (the rows holding ``top`` and ``bottom``).
    residual_rms : float
        RMS of the fit's residuals in units of the given noise level. [1]
    noise_inflation : float
        Factor by which the measured noise correlation enlarges the centre's uncertainty
        over the white-noise value (1 for white noise). [1]
    n_pixels : int
        Pixels fitted.
    n_evaluations : int
        Model evaluations used (residuals and Jacobians).
    success : bool
        The fit converged to a plausible ball; when False the other figures (except
        ``reason``) are not to be used.
    reason : str or None
        Why the fit failed, else None.
    shading : tuple of float
        The linear coefficients of the fitted brightness: those of the shading basis
        (``1, n_x, n_y, n_z``, then the second-order or lamp terms) and the gain correction.
        [grey levels, the last 1]
    """

    x: float
    y: float
    u_x: float
    u_y: float
    diameter: float
    u_diameter: float
    blur_length: float
    blur_angle: float
    top: float
    bottom: float
    row_first: int
    row_last: int
    residual_rms: float
    noise_inflation: float
    n_pixels: int
    n_evaluations: int
    success: bool
    reason: str | None = None
    shading: tuple[float, ...] = ()

    @property
    def sigma(self) -> float:
        """Standard uncertainty of one centre coordinate: RMS of ``u_x`` and ``u_y``. [px]"""
        return math.sqrt(0.5 * (self.u_x**2 + self.u_y**2))
