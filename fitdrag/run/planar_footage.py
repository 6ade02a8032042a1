"""Synthetic footage of the demo's ball flying in the plane of its markers (a planar clip).

The demo (:mod:`fitdrag.run.demo`) measures its throw in 3-D; this module keeps the simpler
planar scene — a camera square to the plane of flight, four ArUco markers in that plane, the
flight exactly in it — rendered by :class:`fitdrag.video.synthetic.FlightRenderer`.  The
sample clip ``sample_tracks/foam_ball_clip.avi`` (the README's worked example) is made with
it.  Everything here is synthetic: the specimen, air and site are the demo's invented ones
(:data:`fitdrag.run.demo_scene.SPECIMEN`, :data:`~fitdrag.run.demo_scene.AIR`,
:data:`~fitdrag.run.demo_scene.SITE`), the true Cd :data:`fitdrag.run.demo_scene.TRUE_CD`.
"""

from __future__ import annotations

import math
import os
from pathlib import Path

import numpy as np

from fitdrag.errors import InputError
from fitdrag.run.demo_scene import AIR, SEED, SITE, SPECIMEN, TRUE_CD

__all__ = ["LAUNCH", "SCENE", "make_planar_footage"]

#: The launch at frame 0: position [m] (world, origin at marker 0), speed [m/s], angle [deg].
LAUNCH = {"x0": -0.16, "y0": 0.25, "speed": 9.0, "angle": 28.0}

#: Camera and scene of the planar footage.
SCENE = {
    "fps": 500.0,  # Hz, capture rate
    "container_fps": 30.0,  # Hz, playback rate written into the AVI (as high-speed cameras do)
    "frames": 160,
    "height_px": 600,
    "width_px": 960,
    "metres_per_px": 0.0025,  # m/px
    "origin_px": (60.0, 540.0),  # image point of world (0, 0), px, y down
    "roll_deg": 0.4,  # camera roll about its axis, deg
    "marker_side": 0.100,  # m, side of the markers' black square
    # marker id -> world position of its lower-left corner [m]
    "markers": {0: (0.0, 0.0), 1: (2.05, 0.0), 2: (0.0, 1.16), 3: (2.05, 1.16)},
    "noise_sigma": 3.0,  # grey levels
    "flicker": 0.06,  # relative amplitude of the lamps' flicker
    "jpeg_quality": 90,
}


def _world_to_image(scene: dict) -> np.ndarray:
    """Homography world (m, y up) -> image (px, y down) of the planar camera."""
    s = 1.0 / scene["metres_per_px"]
    a = math.radians(scene["roll_deg"])
    c, si = math.cos(a), math.sin(a)
    u0, v0 = scene["origin_px"]
    # rotate the world by the roll, scale, flip y, shift to the origin's image point
    return np.array([[s * c, -s * si, u0], [-s * si, -s * c, v0], [0.0, 0.0, 1.0]])


def _conditions():
    from fitdrag.physics.air import Air, local_gravity
    from fitdrag.physics.forces import Conditions

    air = Air.from_conditions(AIR["temperature"], AIR["pressure"], AIR["relative_humidity"])
    g = float(local_gravity(SITE["latitude"], SITE["height"]))
    return Conditions(air=air, gravity=g)


def make_planar_footage(
    path: str | os.PathLike,
    *,
    frames: int | None = None,
    seed: int = SEED,
    scene: dict | None = None,
    progress: bool = False,
    overwrite: bool = False,
) -> dict:
    """Render the planar footage to a Motion-JPEG AVI file and return its truth.

    The flight is simulated with :func:`fitdrag.physics.simulate.simulate` (buoyancy, added mass,
    quadratic drag with Cd = :data:`fitdrag.run.demo_scene.TRUE_CD`) in the demo's air and gravity,
    mapped into the image of a camera perpendicular to the plane of flight (scale, roll and
    origin from :data:`SCENE`) and rendered with
    :class:`fitdrag.video.synthetic.FlightRenderer`, together with four ArUco markers at
    known places in the plane of flight.

    Parameters
    ----------
    path : str or path-like
        Output AVI file (its folder must exist).
    frames : int, optional
        Number of frames (default ``SCENE["frames"]``).
    seed : int
        Seed of the clutter and the noise; the same seed gives the same frames.
    scene : dict, optional
        Entries of :data:`SCENE` to change (image size, metres per pixel, origin, markers,
        noise, ...), e.g. for a smaller clip.
    progress : bool
        Show a progress bar.
    overwrite : bool
        Replace an existing file.

    Returns
    -------
    dict
        The truth: true Cd, launch, specimen, air, gravity, camera, markers and, per frame,
        the mid-exposure time [s], world position [m] and image position [px].

    Raises
    ------
    ValueError
        The file exists (without ``overwrite``); an unknown ``scene`` key.
    """
    from fitdrag.physics.simulate import Launch, simulate
    from fitdrag.physics.specimen import Sphere
    from fitdrag.tracks.track import file_sha256
    from fitdrag.video.footage_files import write_video
    from fitdrag.video.synthetic import FlightRenderer, MarkerPlacement

    path = Path(path)
    if path.exists() and not overwrite:
        raise InputError(f"{path}: already exists; pass overwrite=True to render it again.")
    sc = {**SCENE, **(scene or {})}
    unknown = sorted(set(sc) - set(SCENE))
    if unknown:
        raise InputError(
            f"scene: unknown key(s) {unknown}; use keys of fitdrag.run.planar_footage.SCENE."
        )
    n = int(sc["frames"] if frames is None else frames)
    fps = sc["fps"]
    cond = _conditions()
    sphere = Sphere(SPECIMEN["mass"], SPECIMEN["diameter"])
    launch = Launch.from_speed_angle(LAUNCH["speed"], LAUNCH["angle"], LAUNCH["x0"], LAUNCH["y0"])
    t = np.arange(n) / fps
    flight = simulate(t, launch, sphere, cond, drag_params=TRUE_CD)
    if not flight.success:  # pragma: no cover - fixed, well-posed inputs
        raise RuntimeError(f"planar flight simulation failed: {flight.message}")
    h = _world_to_image(sc)
    markers = [
        MarkerPlacement(mid, x, y, sc["marker_side"]) for mid, (x, y) in sc["markers"].items()
    ]
    renderer = FlightRenderer(
        (flight.x, flight.y),
        n,
        fps,
        shape=(sc["height_px"], sc["width_px"]),
        radius_px=0.5 * SPECIMEN["diameter"] / sc["metres_per_px"],
        noise_sigma=sc["noise_sigma"],
        flicker=sc["flicker"],
        markers=markers,
        homography=h,
        trajectory_in_world=True,
        seed=seed,
    )
    frames_iter = renderer.iter_frames()
    if progress:
        from tqdm import tqdm

        frames_iter = tqdm(frames_iter, total=n, desc="rendering", unit="frame", leave=False)
    tmp = path.with_name(f".{path.name}.partial.avi")
    try:
        write_video(
            frames_iter, tmp, sc["container_fps"], quality=sc["jpeg_quality"],
            overwrite=True,
        )  # fmt: skip
        os.replace(tmp, path)
    finally:
        tmp.unlink(missing_ok=True)
    tr = renderer.truth
    return {
        "synthetic": True,
        "note": "Synthetic footage rendered by fitdrag.run.planar_footage; no real ball was "
        "filmed.",
        "seed": seed,
        "true_cd": TRUE_CD,
        "drag_model": "constant",
        "launch": dict(LAUNCH),
        "specimen": {k: SPECIMEN[k] for k in ("mass", "diameter")},
        "air_density": cond.air.density,
        "air_viscosity": cond.air.viscosity,
        "gravity": cond.gravity,
        "buoyancy": True,
        "added_mass_coefficient": sphere.added_mass_coefficient,
        "fps": fps,
        "container_fps": sc["container_fps"],
        "frames": n,
        "image_size_px": [sc["width_px"], sc["height_px"]],
        "metres_per_px": sc["metres_per_px"],
        "roll_deg": sc["roll_deg"],
        "ball_radius_px": tr.radius_px,
        "marker_side_m": sc["marker_side"],
        "markers_lower_left_m": {str(k): list(v) for k, v in sc["markers"].items()},
        "world_to_image_homography": h.tolist(),
        "t": tr.t.tolist(),
        "x": flight.x.tolist(),
        "y": flight.y.tolist(),
        "x_px": tr.x_px.tolist(),
        "y_px": tr.y_px.tolist(),
        "visible": tr.visible.tolist(),
        "sha256": file_sha256(path),
    }
