"""Why a fit did not converge: the most likely cause, read from the tracks themselves.

A free flight under gravity and drag has, over a short stretch, a vertical position close to
a parabola ``y(t) = a + b t + c t²`` with ``2 c`` near ``−g`` (drag adds a little to it on the
way up and takes a little on the way down).  The second-order coefficient of a least-squares
parabola through each track therefore tells apart the usual slips before any drag fit:

* ``2 c > 0``: the track's y axis points downwards (image rows), so gravity appears upwards;
* ``|2 c|`` near 1000 g, 100 g or g/1000: positions in mm, in cm, or times in ms (read as m
  and s);
* ``|2 c|`` far from g otherwise: positions in pixels or a wrong scale.

References
----------
1. Closed form: under constant gravity alone ``y(t) = y0 + vy0 t − g t²/2`` (Newton's second
   law), so the quadratic coefficient is −g/2; the drag terms change it by a fraction of the
   order of (speed / terminal speed)², small for a dense ball over a short track.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["apparent_gravity", "likely_cause"]

#: Standard gravity (CGPM 1901, by definition). [m/s²]
_G = 9.80665


def apparent_gravity(t, y) -> float:
    """−2 c of the least-squares parabola ``y = a + b t + c t²`` through the points: the
    downward acceleration the track shows (about g for a track in m and s, y up). [m/s²]

    Parameters
    ----------
    t : array_like
        Times. [s]
    y : array_like
        Vertical positions. [m]
    """
    t = np.asarray(t, dtype=float)
    y = np.asarray(y, dtype=float)
    if t.size < 3 or not np.all(np.isfinite(t)) or not np.all(np.isfinite(y)):
        return math.nan
    tc = t - t.mean()  # centred for a well-conditioned fit
    c = np.polyfit(tc, y, 2)[0]
    return float(-2.0 * c)


def likely_cause(tracks) -> str:
    """The most likely cause of a failed fit of ``tracks`` (Track objects, positions in m,
    times in s, y up), in words with the evidence; "" when the tracks look like a free flight
    (the apparent gravity of every track within 30 % of g)."""
    for i, tr in enumerate(tracks):
        g_app = apparent_gravity(tr.t, tr.y)
        name = tr.meta.get("source") or f"track {i + 1}"
        if not math.isfinite(g_app):
            continue
        if g_app < 0:
            angle = _launch_angle(tr)
            at = "" if angle is None else f"; launch angle as read {angle:+.1f}°"
            return (
                f"{name}: the points curve upwards (apparent gravity {g_app:+.3g} m/s², "
                f"pulling towards +y{at}): the track's y axis most likely points downwards "
                f"(image rows); set y_down = true in the throw (--y-down)."
            )
        ratio = g_app / _G
        for factor, what in ((1000.0, "positions in mm read as m: set units = \"mm\""),
                             (100.0, "positions in cm read as m: set units = \"cm\""),
                             (1e-6, "times in ms read as s: give times in s"),
                             (1e-3, "positions in mm and times in ms, or a scale 1000 times "
                              "too small: check units and the time column")):  # fmt: skip
            if abs(math.log10(ratio / factor)) < 0.15:
                return (
                    f"{name}: apparent gravity {g_app:.3g} m/s² (about {factor:g} g): most "
                    f"likely {what}."
                )
        if not 0.7 < ratio < 1.3:
            return (
                f"{name}: apparent gravity {g_app:.3g} m/s² where about {_G} m/s² is expected: "
                f"most likely the positions are not in metres (pixels, or a wrong scale): check "
                f"units and scale."
            )
    return ""


def _launch_angle(tr) -> float | None:
    """Direction of the first points' motion above the horizontal [deg], or None."""
    n = min(len(tr.t), 5)
    if n < 2:
        return None
    dt = float(tr.t[n - 1] - tr.t[0])
    if not dt > 0:
        return None
    vx = float(tr.x[n - 1] - tr.x[0]) / dt
    vy = float(tr.y[n - 1] - tr.y[0]) / dt
    return math.degrees(math.atan2(vy, abs(vx)))
