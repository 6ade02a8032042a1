"""Tests of fitdrag.fit.diagnose: the likely cause of a failed fit, from the tracks.

Labels: closed-form/independent (the vacuum parabola y = y0 + v t − g t²/2, Newton's second
law; the reference DOP853 flight of tests/reference.py), regression (exact messages).
"""

from __future__ import annotations

import numpy as np
import pytest
import reference as ref

from fitdrag import Track
from fitdrag.fit.diagnose import apparent_gravity, likely_cause

G = 9.80665  # standard gravity (CGPM 1901, by definition) [m/s²]


def _parabola(n=200, fps=400.0, vx=8.0, vy=4.0, g=G):
    t = np.arange(n) / fps
    return t, vx * t, 1.0 + vy * t - 0.5 * g * t**2


def test_apparent_gravity_of_a_vacuum_parabola_is_g():
    """closed-form/independent: y = y0 + vy t − g t²/2 gives back g (to rounding)."""
    t, _, y = _parabola()
    assert apparent_gravity(t, y) == pytest.approx(G, rel=1e-9)
    assert np.isnan(apparent_gravity(t[:2], y[:2]))


def test_a_free_flight_has_no_likely_cause():
    """closed-form/independent: the reference flight with quadratic drag (DOP853, Cd 0.47,
    2.7 g 40 mm ball) reads as gravity within 30 %: nothing to blame."""
    sc = ref.Scenario()
    xy = sc.truth()
    assert 0.7 < apparent_gravity(sc.t, xy[:, 1]) / G < 1.3
    assert likely_cause([Track(sc.t, xy[:, 0], xy[:, 1])]) == ""


def test_y_axis_downwards_is_named_with_the_launch_angle():
    """regression: a track with y down (rows of an image) curves upwards: named, with the
    launch angle as read (chord of the first five points at 400 Hz: atan2(−(4 − g·0.01/2), 8)
    = −26.3°) and the fix."""
    t, x, y = _parabola()
    tr = Track(t, x, -y, meta={"source": "throw1.csv"})
    assert likely_cause([tr]) == (
        "throw1.csv: the points curve upwards (apparent gravity -9.81 m/s², pulling towards +y; "
        "launch angle as read -26.3°): the track's y axis most likely points downwards (image "
        "rows); set y_down = true in the throw (--y-down)."
    )


@pytest.mark.parametrize(
    "scale_y, scale_t, words",
    [
        (1000.0, 1.0, 'positions in mm read as m: set units = "mm"'),
        (100.0, 1.0, 'positions in cm read as m: set units = "cm"'),
        (1.0, 1000.0, "times in ms read as s: give times in s"),
    ],
)
def test_unit_slips_are_named(scale_y, scale_t, words):
    """closed-form/independent: positions ×1000 (mm) or ×100 (cm) multiply the apparent
    gravity by that factor; times ×1000 (ms) divide it by 10⁶."""
    t, x, y = _parabola()
    msg = likely_cause([Track(t * scale_t, x * scale_y, y * scale_y)])
    assert msg.startswith("track 1: apparent gravity ") and msg.endswith(f"most likely {words}.")
