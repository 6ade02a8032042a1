"""The demo's invented scene: laboratory, customer, specimen, air, site, the throw, the two
cameras and the marker board, and the footage rendered from them (all synthetic).

:func:`demo_scenario` turns the constants below into a
:class:`fitdrag.run.scenario_3d.Scenario3D`; :func:`make_demo_footage` renders it
(:func:`fitdrag.run.scenario_3d.write_scenario`: each camera's footage through its lens, with
its rolling shutter and time offset, the board, flicker and noise) and returns the truth.
:mod:`fitdrag.run.demo` runs the whole job on it; :mod:`fitdrag.run.planar_footage` shares its
specimen, air and site.  Nothing here was measured.
"""

from __future__ import annotations

import os
from pathlib import Path

__all__ = [
    "AIR",
    "CAMERAS",
    "CUSTOMER",
    "FOOTAGE",
    "LABORATORY",
    "LAUNCH",
    "SEED",
    "SITE",
    "SPECIFICATION",
    "SPECIMEN",
    "TRUE_CD",
    "demo_scenario",
    "make_demo_footage",
]

#: Seed of the synthetic footage (clutter and noise; camera i uses SEED + i).
SEED = 20260715

#: The invented laboratory and customer (fictitious names and addresses).
LABORATORY = {
    "name": "Northmoor Sports Equipment Test Laboratory (fictitious, synthetic demo)",
    "address": "Unit 4, 17 Invented Way, Sampleton SA1 0XX (fictitious address)",
}
CUSTOMER = {
    "customer": "Brightfield Training Goods Ltd (fictitious)",
    "customer_address": "2 Nowhere Parade, Imaginbury (fictitious address)",
    "order": "BTG-PO-0042 (fictitious)",
    "operator": "J. Example",
    "approved_by": "R. Sample",
}

#: Drag coefficient of the simulated ball (the truth the demo should recover). [-]
TRUE_CD = 0.49

#: The specimen: a 65 mm foam training ball (nominal values and standard uncertainties).
SPECIMEN = {
    "id": "BTG-FB65-LOT2607-S03",
    "description": (
        "Foam training ball, 65 mm, production lot 2607, specimen 3 of 5 (synthetic demo: "
        "simulated, not a real ball)"
    ),
    "mass": 0.02400,  # kg
    "mass_uncertainty": 0.00002,  # kg
    "diameter": 0.06500,  # m
    "diameter_uncertainty": 0.00008,  # m
}

#: Air in the test hall: temperature [°C], pressure [Pa], relative humidity [%].
AIR = {
    "temperature": 21.5,
    "temperature_uncertainty": 0.2,
    "pressure": 100900.0,
    "pressure_uncertainty": 30.0,
    "relative_humidity": 48.0,
    "relative_humidity_uncertainty": 3.0,
}

#: Site of the (fictitious) laboratory: latitude [deg] and height [m] for normal gravity.
SITE = {"latitude": 51.5, "height": 60.0}

#: The throw, 10 ms before the first camera's frame 0 (board frame: origin at marker 0's
#: lower-left corner, x along the board, y up, z towards the cameras): speed [m/s],
#: elevation above the horizontal [deg], angle out of the board's plane towards the cameras
#: [deg], launch point [m].
LAUNCH = {"speed": 9.0, "elevation": 28.0, "out_of_plane": 0.8, "start": (-0.05, 0.35, 0.03)}

#: The two cameras: name, angle of the line of sight from the board's normal [deg], distance
#: from the middle of the flight [m], focal length [px], rolling-shutter readout and its
#: data-sheet standard uncertainty [s], start of frame 0 after the first camera's [s].
CAMERAS = (
    {"name": "left", "yaw": -20.0, "distance": 3.4, "focal_length": 1100.0,
     "readout_time": 1.0e-3, "readout_time_uncertainty": 0.05e-3, "time_offset": 0.0},
    {"name": "right", "yaw": 20.0, "distance": 3.4, "focal_length": 1100.0,
     "readout_time": 1.0e-3, "readout_time_uncertainty": 0.05e-3, "time_offset": 0.42e-3},
)  # fmt: skip

#: The footage and the marker board.
FOOTAGE = {
    "fps": 500.0,  # Hz, capture rate (shared by the cameras)
    "fps_uncertainty": 0.005,  # Hz (10 ppm crystal)
    "frames": 160,
    "width_px": 960,
    "height_px": 600,
    "marker_side": 0.100,  # m, side of the markers' black square
    "marker_side_relative_uncertainty": 0.001,  # print tolerance, relative
    # marker id -> board position of its lower-left corner [m]
    "markers": {0: (0.0, 0.0), 1: (2.2, 0.0), 2: (0.0, 1.3), 3: (2.2, 1.3)},
    "noise_sigma": 3.0,  # grey levels
    "flicker": 0.06,  # relative amplitude of the lamps' flicker
    "jpeg_quality": 92,
}

#: The customer's specification.
SPECIFICATION = {
    "drag_coefficient": 0.50,
    "tolerance": 0.05,
    "decision_rule": "guarded",
    "reference": "Brightfield drawing FB65 rev. C, clause 4.2 (fictitious)",
}


# ---------------------------------------------------------------------------------------------
# footage
# ---------------------------------------------------------------------------------------------


def _air_and_gravity() -> tuple:
    """(Air, gravity [m/s²]) of the demo's hall and site."""
    from fitdrag.physics.air import Air, local_gravity

    air = Air.from_conditions(AIR["temperature"], AIR["pressure"], AIR["relative_humidity"])
    return air, float(local_gravity(SITE["latitude"], SITE["height"]))


def demo_scenario(seed: int = SEED):
    """The demo's scene as a :class:`fitdrag.run.scenario_3d.Scenario3D`: the specimen,
    the hall's air (CIPM-2007 density, Sutherland viscosity) and the site's gravity, the
    throw, the cameras and the board."""
    from fitdrag.run.scenario_3d import CameraPlacement, Scenario3D

    air, g = _air_and_gravity()
    return Scenario3D(
        cameras=[CameraPlacement(**c) for c in CAMERAS],
        cd=TRUE_CD,
        mass=SPECIMEN["mass"],
        diameter=SPECIMEN["diameter"],
        air_density=air.density,
        viscosity=air.viscosity,
        gravity=g,
        speed=LAUNCH["speed"],
        elevation=LAUNCH["elevation"],
        out_of_plane=LAUNCH["out_of_plane"],
        start=tuple(LAUNCH["start"]),
        frames=FOOTAGE["frames"],
        fps=FOOTAGE["fps"],
        image_size=(FOOTAGE["width_px"], FOOTAGE["height_px"]),
        marker_side=FOOTAGE["marker_side"],
        markers=dict(FOOTAGE["markers"]),
        noise_sigma=FOOTAGE["noise_sigma"],
        flicker=FOOTAGE["flicker"],
        quality=FOOTAGE["jpeg_quality"],
        seed=seed,
    )


def _sha256(path: Path) -> str:
    from fitdrag.tracks.track import file_sha256

    return file_sha256(path)


def make_demo_footage(folder: str | os.PathLike, *, seed: int = SEED,
                      force: bool = False) -> dict:  # fmt: skip
    """Render the demo's footage into ``folder`` and return the scene's truth.

    Writes, per camera, ``<camera>.avi`` (Motion-JPEG), ``<camera>_truth.json`` and
    ``<camera>_lens.json``, and ``board_layout.csv``
    (:func:`fitdrag.run.scenario_3d.write_scenario` on :func:`demo_scenario`).

    Parameters
    ----------
    folder : str or path-like
        Where the files go (created if missing).
    seed : int
        Seed of the clutter and the noise; the same seed gives the same frames.
    force : bool
        Replace files already there.

    Returns
    -------
    dict
        The truth: true Cd, launch (time, position, velocity), specimen, air, gravity,
        cameras (placement, readout, time offset, their files) and the SHA-256 of every
        file written (by name in ``folder``).

    Raises
    ------
    ValueError
        A file exists (without ``force``).
    """
    from fitdrag.physics.flight3d import Launch3D
    from fitdrag.run.scenario_3d import T_LAUNCH, write_scenario

    folder = Path(folder)
    sc = demo_scenario(seed)
    files = write_scenario(sc, folder, force=force)
    launch = Launch3D.from_speed_angles(sc.speed, sc.elevation, sc.out_of_plane, *sc.start)
    written = [*files.footage, *files.truth, *files.lenses, files.layout]
    cams = []
    for c, v, t, lens in zip(CAMERAS, files.footage, files.truth, files.lenses):
        cams.append({**c, "footage": v.name, "truth": t.name, "lens": lens.name})
    return {
        "synthetic": True,
        "note": "Synthetic footage of a simulated 3-D flight rendered by fitdrag.run.demo "
        "(fitdrag.run.scenario_3d); no real ball was filmed.",
        "seed": seed,
        "true_cd": TRUE_CD,
        "drag_model": "constant",
        "launch": {
            "time_s": T_LAUNCH,
            "speed_m_s": sc.speed,
            "elevation_deg": sc.elevation,
            "out_of_plane_deg": sc.out_of_plane,
            "position_m": [launch.x0, launch.y0, launch.z0],
            "velocity_m_s": [launch.vx0, launch.vy0, launch.vz0],
        },
        "specimen": {k: SPECIMEN[k] for k in ("mass", "diameter")},
        "air_density": sc.air_density,
        "air_viscosity": sc.viscosity,
        "gravity": sc.gravity,
        "buoyancy": True,
        "added_mass_coefficient": 0.5,
        "fps": sc.fps,
        "frames": sc.frames,
        "image_size_px": list(sc.image_size),
        "marker_side_m": sc.marker_side,
        "markers_lower_left_m": {str(k): list(v) for k, v in sc.markers.items()},
        "cameras": cams,
        "sha256": {p.name: _sha256(p) for p in written},
    }
