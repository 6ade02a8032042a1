"""Tests of fitdrag.geometry.planar: the perspective of a planar track.

The independent reference: a 3-D flight of a 24 g, 65 mm foam ball at 9 m/s (true Cd 0.50)
integrated by scipy's solve_ivp (DOP853) from the equation of motion (Timmerman and van der
Weele 1999, eq. 1, with buoyancy and added mass), imaged by a pinhole camera 3 m from the
calibration plane through OpenCV's ``projectPoints`` and mapped back to the plane z = 0 by the
plane's homography (Hartley and Zisserman, *Multiple View Geometry*, 2nd ed., sec. 2.3,
8.1) — what a planar tracker with an exact plane calibration reports.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from fitdrag.errors import InputError
from fitdrag.geometry.planar import PlanarGeometry, flight_plane_track, project_to_plane

MASS, DIAM, RHO, CD, G = 0.024, 0.065, 1.2, 0.50, 9.80665
T = np.arange(200) / 500.0  # 200 frames at 500 frames/s [s]


def _flight(angle_deg: float, speed=9.0, elevation=30.0) -> np.ndarray:
    """3-D positions [m] (x along the board, y up, z to the camera) by scipy DOP853."""
    area, vol = math.pi * DIAM**2 / 4, math.pi * DIAM**3 / 6
    m_in = MASS + 0.5 * RHO * vol

    def f(_t, s):
        v = s[3:]
        a = -0.5 * RHO * CD * area * np.linalg.norm(v) * v
        a[1] -= (MASS - RHO * vol) * G
        return np.concatenate((v, a / m_in))

    e, a = math.radians(elevation), math.radians(angle_deg)
    v0 = speed * np.array([math.cos(e) * math.cos(a), math.sin(e), math.cos(e) * math.sin(a)])
    sol = solve_ivp(f, (0.0, T[-1]), np.concatenate(([0.0, 0.5, 0.0], v0)), t_eval=T,
                    method="DOP853", rtol=1e-11, atol=1e-12)  # fmt: skip
    return sol.y[:3].T


def _planar_track(points: np.ndarray, distance=3.0) -> np.ndarray:
    """What a planar tracker reports: cv2.projectPoints of a camera ``distance`` [m] from the
    plane (aimed square-on at the middle of the flight), pixels back to z = 0 through the
    homography of the plane (fixed by four plane points)."""
    import cv2

    mid = 0.5 * (points.min(axis=0) + points.max(axis=0))
    rot = np.diag([1.0, -1.0, -1.0])  # square-on: camera x right, y down, looking along -z
    centre = np.array([mid[0], mid[1], distance])
    rvec, _ = cv2.Rodrigues(rot)
    tvec = -rot @ centre
    k = np.array([[900.0, 0, 640.0], [0, 900.0, 400.0], [0, 0, 1]])
    px, _ = cv2.projectPoints(np.ascontiguousarray(points).reshape(-1, 1, 3), rvec, tvec, k,
                              None)  # fmt: skip
    plane = np.array([[0.0, 0, 0], [3, 0, 0], [3, 2, 0], [0, 2, 0]])
    ppx, _ = cv2.projectPoints(plane.reshape(-1, 1, 3), rvec, tvec, k, None)
    h, _ = cv2.findHomography(ppx.reshape(-1, 2), plane[:, :2])
    q = cv2.perspectiveTransform(px.reshape(-1, 1, 2), h).reshape(-1, 2)
    return q


def _cd(x, y) -> float:
    from fitdrag.fit.fitting import fit_tracks
    from fitdrag.physics.air import Air
    from fitdrag.physics.specimen import Sphere
    from fitdrag.tracks.track import Track

    fit = fit_tracks(Track(T, x, y, np.full(T.size, 2e-4)), Sphere(MASS, DIAM), Air(RHO),
                     gravity=G, noise="white")  # fmt: skip
    assert fit.success
    return float(fit.cd)


@pytest.mark.parametrize(("angle", "low", "high"), [(0.1, -4.0, -2.0), (0.3, -11.0, -6.5),
                                                     (1.0, -33.0, -22.0)])  # fmt: skip
def test_planar_fit_of_a_tilted_flight_is_biased_as_the_issue_measured(angle, low, high):
    """closed-form/independent: the planar fit of the projected scipy flight is biased by
    about -3 % at 0.1°, -9 % at 0.3° and -30 % at 1° (issue 13's measurements, within the
    spread of launch geometry: the bias goes as 2 v_x v_z / Z), and the perspective model
    (the track mapped to the flight plane at the true angle and distance) removes it to
    0.2 %."""
    q = _planar_track(_flight(angle))
    bias = 100 * (_cd(q[:, 0], q[:, 1]) / CD - 1)
    assert low < bias < high
    x, y, _ = flight_plane_track(q[:, 0], q[:, 1], PlanarGeometry(3.0, angle))
    assert _cd(x, y) == pytest.approx(CD, rel=2e-3)


def test_bias_is_odd_in_the_angle_and_scales_with_distance():
    """closed-form/independent: the apparent acceleration 2 v_x v_z / Z is odd in v_z and
    goes as 1/Z: a flight away from the camera is biased the other way by the same amount
    (to 10 %), and from 6 m half as much (to 10 %)."""
    b = {}
    for angle, z in ((1.0, 3.0), (-1.0, 3.0), (1.0, 6.0)):
        q = _planar_track(_flight(angle), distance=z)
        b[angle, z] = _cd(q[:, 0], q[:, 1]) / CD - 1
    assert b[-1.0, 3.0] == pytest.approx(-b[1.0, 3.0], rel=0.1)
    assert b[1.0, 6.0] == pytest.approx(0.5 * b[1.0, 3.0], rel=0.1)


def test_flight_plane_track_inverts_the_projection():
    """closed-form/independent: points on the flight plane turned by θ about the vertical
    through the first point, centrally projected from the camera onto z = 0
    (:func:`project_to_plane`, and independently by similar triangles), come back to their
    in-plane coordinates; θ = 0 gives the track back for any distance."""
    rng = np.random.default_rng(3)
    theta = math.radians(2.0)
    s = np.sort(rng.uniform(0.0, 2.5, 30))
    s[0] = 0.0
    y = 0.5 + rng.uniform(0.0, 1.0, 30)
    pts = np.stack([0.2 + s * math.cos(theta), y, s * math.sin(theta)], axis=1)
    q = project_to_plane(pts, [0.0, 0.0, 100.0])  # a provisional centre, to find the middle
    mid_guess = None
    for _ in range(3):  # the centre is on the normal through the middle of the track
        mid = 0.5 * (q.min(axis=0) + q.max(axis=0))
        if mid_guess is not None and np.allclose(mid, mid_guess):
            break
        mid_guess = mid
        centre = np.array([mid[0], mid[1], 3.0])
        q = project_to_plane(pts, centre)
    f = 3.0 / (3.0 - pts[:, 2])  # similar triangles
    assert np.allclose(q, centre[:2] + f[:, None] * (pts[:, :2] - centre[:2]), atol=1e-12)
    sig = np.full(30, 1e-4)
    x2, y2, s2 = flight_plane_track(q[:, 0], q[:, 1], PlanarGeometry(3.0, 2.0), sigma=sig)
    assert np.allclose(x2, 0.2 + s, atol=1e-9)
    assert np.allclose(y2, y, atol=1e-9)
    assert np.allclose(s2, sig / f, rtol=1e-9)
    x0, y0, _ = flight_plane_track(q[:, 0], q[:, 1], PlanarGeometry(1.0, 0.0))
    assert np.array_equal(x0, q[:, 0]) and np.array_equal(y0, q[:, 1])


def test_bad_inputs_name_the_input_value_and_fix():
    """regression: exact messages for a bad distance, angle and camera centre."""
    with pytest.raises(InputError, match=r"^distance: must be a finite number > 0 m, got -3\.0; "
                       r"give the camera's distance"):  # fmt: skip
        PlanarGeometry(-3.0, 0.0)
    with pytest.raises(InputError, match=r"^angle: must be a finite number of degrees between "
                       r"-45 and 45, got 60\.0"):  # fmt: skip
        PlanarGeometry(3.0, 60.0)
    with pytest.raises(InputError, match=r"^centre: expected \(x, y, z\) \[m\] with z above"):
        project_to_plane([[0.0, 0.0, 2.0]], [0.0, 0.0, 1.0])
    x = np.array([0.0, 1.0, 2.0])
    with pytest.raises(InputError, match=r"^out_of_plane_angle: 40° with the camera 0\.5 m "
                       r"away puts the flight plane behind the camera"):  # fmt: skip
        flight_plane_track(x, x, PlanarGeometry(0.5, 40.0))
