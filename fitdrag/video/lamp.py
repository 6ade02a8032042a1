"""The lamp's direction from a track's blobs, and the blobs fitted again under it.

A specimen lit by one lamp (plus diffuse light) is brighter where its surface faces the lamp
and evenly lit beyond the shadow's edge (Lambert's cosine law, ``a_0 + a_4 max(n . L, 0)``);
a polynomial shading basis follows that edge only roughly, and where the edge lies near the
outline the misfit moves the fitted outline by a few hundredths of a pixel, differently as
the ball crosses the field.  The lamp is fixed in the camera's axes for the whole flight:
:func:`lamp_refits` finds its direction once, from the first fits' shading (the first-order
coefficients point along ``L`` in each blob's circle frame,
:func:`fitdrag.video.sphere_outline.disc_axes` turns them into camera axes) refined by the
least total misfit of a few blobs spread over the flight (Nelder–Mead over the direction's
two angles [1], started from the best of that guess and of lamps tilted towards the camera
along it; a lamp that explains the shading worse than the polynomial is not kept), then fits
every blob again with that lamp
(:func:`fitdrag.video.ball_fit.fit_ball` ``lamp=``): the brightness model is then exact for a
Lambertian ball under a distant lamp.

References
----------
1. J. A. Nelder and R. Mead, "A simplex method for function minimization", Comput. J. 7,
   308-313 (1965).
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["LAMP_PROBES", "dark_limb_explained", "lamp_refits"]

#: Blobs, spread over the flight, whose total misfit decides the lamp's direction.
LAMP_PROBES = 24

#: Angles of the lamp from the optical axis (towards the camera) tried as starting points
#: besides the first-order guess. [deg]
START_TILTS = (15.0, 35.0, 55.0, 75.0)

#: The lamp is kept only if the probes' total misfit under it is at most this multiple of
#: their misfit with the first fits' second-order shading (which has four more parameters
#: per blob, so a little lower on a truly Lambertian ball). [1]  Common practice, no source.
WORSE_THAN_PLAIN = 1.1


def _direction(angles) -> np.ndarray:
    """Unit vector of (azimuth about z from x, elevation from the x-y plane) [rad]."""
    az, el = angles
    return np.array([math.cos(el) * math.cos(az), math.cos(el) * math.sin(az), math.sin(el)])


def _angles(v: np.ndarray) -> tuple[float, float]:
    v = v / np.linalg.norm(v)
    return math.atan2(v[1], v[0]), math.asin(max(-1.0, min(1.0, v[2])))


def lamp_refits(blobs, frames, angles, maps, axes, fits, fit_blobs):
    """The fits again under the lamp's direction found from them (see the module notes).

    ``blobs``, ``frames``, ``angles``, ``maps`` as given to ``fit_blobs`` (the function that
    fits blobs, :func:`fitdrag.video.fit_worker.fit_blobs`); ``axes`` (n, 3, 3) the circle
    frames' axes in camera axes; ``fits`` the first fits (second-order shading).  Returns
    (the fits, with each blob's lamp fit where it succeeded and the first fit elsewhere; the
    lamp's direction in camera axes, or None when fewer than three first fits succeeded).
    """
    ok = [i for i, f in enumerate(fits) if f.success and len(f.shading) >= 4]
    if len(ok) < 3:
        return list(fits), None
    # first guess: the first-order shading coefficients, in camera axes, averaged
    dirs = []
    for i in ok:
        c = np.asarray(fits[i].shading[1:4], dtype=float)
        norm = float(np.linalg.norm(c))
        if norm > 0:
            dirs.append(axes[i] @ (c / norm))
    if not dirs:
        return list(fits), None
    mean = np.mean(dirs, axis=0)
    start = mean if np.linalg.norm(mean) > 1e-6 else np.array([0.0, 0.0, -1.0])
    probes = [ok[int(round(k))] for k in np.linspace(0, len(ok) - 1, min(LAMP_PROBES, len(ok)))]
    probes = sorted(set(probes))

    def misfit(ang) -> float:
        lamp = _direction(ang)
        got = fit_blobs([blobs[i] for i in probes], [frames[i] for i in probes],
                        [angles[i] for i in probes], [maps[i] for i in probes],
                        [axes[i].T @ lamp for i in probes])  # fmt: skip
        if not all(f.success for f in got):
            return math.inf
        return float(sum(f.residual_rms**2 * f.n_pixels for f in got))

    from scipy.optimize import minimize

    # The first-order coefficients show the lamp's direction across the image well, its
    # component along the optical axis poorly (long blur, rolling shutter): start from the
    # best of that guess and of lamps at START_TILTS from the axis on the camera's side,
    # in the guess's direction across the image.
    az = math.atan2(start[1], start[0])
    starts = [start / np.linalg.norm(start)] + [
        np.array([math.sin(t) * math.cos(az), math.sin(t) * math.sin(az), -math.cos(t)])
        for t in np.radians(START_TILTS)
    ]
    first = min((_angles(v) for v in starts), key=misfit)
    best = minimize(misfit, first, method="Nelder-Mead",
                    options={"xatol": 2e-3, "fatol": 0.5, "maxfev": 60})  # fmt: skip
    # A lamp that explains the probes' shading worse than the first fits' polynomial does
    # is not the lamp (e.g. light from several sides): keep the first fits.
    plain = float(sum(fits[i].residual_rms ** 2 * fits[i].n_pixels for i in probes))
    if not best.fun <= WORSE_THAN_PLAIN * plain:
        return list(fits), None
    lamp = _direction(best.x)
    again = fit_blobs(blobs, frames, angles, maps, [axes[i].T @ lamp for i in range(len(blobs))])
    return [g if g.success else f for f, g in zip(fits, again, strict=True)], lamp


def dark_limb_explained(blob, fit, outline_map, lamp, drop: float, seen: float) -> bool:
    """Whether the lamp's shading explains the unseen part of a blob's outline.

    A blob kept with an unseen dark limb (``blob.dark_limb``: where its outline is unseen,
    its shading extrapolated from its core has darkened it towards the background; the
    patch's ``unseen`` pixels) is checked again once the lamp is known.  The fitted
    Lambertian ball (``fit``, under ``lamp``, the unit direction towards the lamp in the
    blob's circle frame) has at its outline in direction ``n = (cos phi, sin phi, 0)`` the
    brightness ``a_0 + a_1 n_x + a_2 n_y + a_4 max(n . L, 0)`` (Lambert's cosine law, see
    the module notes), at its centre (``n = (0, 0, 1)``) ``a_0 + a_3 + a_4 max(L_z, 0)``.
    At the unseen pixels' directions (median over them) the outline is

    * seen after all when that brightness differs from the background behind those pixels
      by at least ``seen`` [grey levels] (the extrapolated shading was wrong: the pixels are
      background and the outline ends before them);
    * explained by the shading when the brightness there has moved from the centre's
      towards the background by at least ``drop`` of the centre's contrast against the
      background behind the centre (:data:`fitdrag.video.blobs.DARK_LIMB_DROP`);
    * otherwise not explained: a lit part of the ball against a background as bright as
      itself, or something as bright in front of it.

    ``outline_map`` (2, 2) takes image offsets to the circle frame. [1]  A fit without the
    lamp's term (its lamp fit failed) explains nothing.
    """
    pt = blob.patch
    if pt is None or pt.unseen is None or not fit.success or len(fit.shading) != 6:
        return False
    rows, cols = np.nonzero(pt.unseen)
    if rows.size == 0:
        return False
    ox, oy = pt.origin
    off = np.vstack([cols + ox - fit.x, rows + oy - fit.y])
    disc = np.asarray(outline_map, dtype=float) @ off
    phi = np.arctan2(disc[1], disc[0])
    nx, ny = np.cos(phi), np.sin(phi)
    a = fit.shading
    lam = np.asarray(lamp, dtype=float)
    limb = float(np.median(a[0] + a[1] * nx + a[2] * ny
                           + a[4] * np.maximum(nx * lam[0] + ny * lam[1], 0.0)))  # fmt: skip
    centre = a[0] + a[3] + a[4] * max(float(lam[2]), 0.0)
    behind = float(np.median(pt.gain * pt.background[rows, cols]))
    if abs(limb - behind) >= seen:
        return True
    h, w = pt.background.shape
    i = min(max(int(round(fit.y - oy)), 1), h - 2)
    j = min(max(int(round(fit.x - ox)), 1), w - 2)
    contrast = centre - float(np.median(pt.gain * pt.background[i - 1 : i + 2, j - 1 : j + 2]))
    if contrast == 0.0:
        return False
    return math.copysign(1.0, contrast) * (centre - limb) >= drop * abs(contrast)
