"""A synthetic 3-D measurement, written as a lab would bring it: each camera's footage, its
lens file, the marker board's layout, and the job file (all invented, labelled synthetic).

The flight is :func:`fitdrag.physics.flight3d.simulate_3d` of a known Cd, a little out of the
board plane (as real throws are); each camera renders it through its own lens and pose with
:class:`fitdrag.geometry.render_views.ViewRenderer` (exact sphere outline, lens distortion,
motion blur, rolling shutter row by row, its time offset, the marker board, flicker, noise)
and writes Motion-JPEG footage (:func:`fitdrag.geometry.view_truth.write_view`) with the
exact truth beside it.  :func:`write_scenario` returns what it wrote; the job file is ready
for ``fitdrag run``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from fitdrag._files import write_text_atomic

__all__ = ["CameraPlacement", "Scenario3D", "ScenarioFiles", "write_scenario"]

#: Time of the launch state, before the first camera's frame 0 (t = 0). [s]
T_LAUNCH = -0.01


@dataclass(frozen=True)
class CameraPlacement:
    """One synthetic camera: where it stands and its lens.

    Parameters
    ----------
    name : str
        Label of the view.
    yaw : float
        Angle of the camera's line of sight from the board normal, about the vertical. [deg]
    distance : float
        Distance from the middle of the flight. [m]
    focal_length : float
        fx = fy. [px]
    distortion : sequence of float
        OpenCV's (k1, k2, p1, p2, k3). [1]
    readout_time : float
        Rolling-shutter readout, first to last row (0 = global shutter). [s]
    readout_time_uncertainty : float
        Its standard uncertainty as a data sheet would state it. [s]
    time_offset : float
        Its frame 0 minus the first camera's. [s]
    focal_length_uncertainty : float
        Standard uncertainty written into its lens file. [px]
    """

    name: str
    yaw: float = 0.0
    distance: float = 3.4
    focal_length: float = 1500.0
    distortion: tuple[float, ...] = (-0.08, 0.05, 0.0005, -0.0003, 0.0)
    readout_time: float = 0.0
    readout_time_uncertainty: float = 0.0
    time_offset: float = 0.0
    focal_length_uncertainty: float = 1.5


@dataclass(frozen=True)
class Scenario3D:
    """A throw seen by cameras (invented; every default is an invented value).

    Parameters
    ----------
    cameras : sequence of CameraPlacement
    cd : float
        True drag coefficient. [-]
    mass, diameter : float
        The ball. [kg], [m]
    air_density, viscosity : float
        [kg/m³], [Pa s]
    gravity : float
        Acceleration of free fall. [m/s²]
    speed, elevation, out_of_plane : float
        Launch speed [m/s], angle above the horizontal [deg], angle of the flight out of the
        board plane towards the cameras [deg].
    start : (float, float, float)
        Launch position at :data:`T_LAUNCH` (board frame, origin at marker 0). [m]
    frames, fps : int, float
        Footage length and frame rate. [1], [1/s]
    image_size : (int, int)
        Width and height. [px]
    marker_side : float
        Side of the markers' black square. [m]
    markers : mapping
        Marker id -> its lower-left corner on the board. [m]
    noise_sigma, flicker : float
        Sensor noise (grey levels) and lamp flicker (relative).
    quality : int
        JPEG quality of the footage.
    seed : int
        Seed of clutter and noise.
    """

    cameras: Sequence[CameraPlacement]
    cd: float = 0.49
    mass: float = 0.024
    diameter: float = 0.065
    air_density: float = 1.19
    viscosity: float = 1.82e-5
    gravity: float = 9.80665
    speed: float = 9.0
    elevation: float = 28.0
    out_of_plane: float = 0.8
    start: tuple[float, float, float] = (-0.05, 0.35, 0.03)
    frames: int = 200
    fps: float = 500.0
    image_size: tuple[int, int] = (1280, 800)
    marker_side: float = 0.10
    markers: dict = field(
        default_factory=lambda: {0: (0.0, 0.0), 1: (2.2, 0.0), 2: (0.0, 1.3), 3: (2.2, 1.3)}
    )
    noise_sigma: float = 3.0
    flicker: float = 0.06
    quality: int = 92
    seed: int = 20261202


@dataclass(frozen=True)
class ScenarioFiles:
    """What :func:`write_scenario` wrote (paths) and the true flight."""

    footage: tuple[Path, ...]
    truth: tuple[Path, ...]
    lenses: tuple[Path, ...]
    layout: Path
    cameras: tuple  # the true Camera of each view


def _board(sc: Scenario3D):
    from fitdrag.geometry.pose import MarkerBoard

    return MarkerBoard(sc.marker_side, dict(sc.markers))


def true_cameras(sc: Scenario3D) -> list:
    """The scenario's cameras (intrinsics, pose, readout), looking at the flight's middle."""
    from fitdrag.geometry.camera import Camera
    from fitdrag.geometry.render_views import camera_looking_at

    w, h = sc.image_size
    target = np.array([1.1, 0.75, 0.0])
    out = []
    for c in sc.cameras:
        base = Camera(c.focal_length, c.focal_length, w / 2.0 + 3.0, h / 2.0 - 2.0,
                      tuple(c.distortion), (w, h), readout_time=c.readout_time,
                      readout_time_uncertainty=c.readout_time_uncertainty)  # fmt: skip
        a = math.radians(c.yaw)
        centre = target + c.distance * np.array([math.sin(a), 0.05, math.cos(a)])
        out.append(camera_looking_at(base, centre, target))
    return out


def flight(sc: Scenario3D, t_end: float):
    """The true flight (simulate_3d) from its launch at :data:`T_LAUNCH` to ``t_end`` [s],
    densely sampled."""
    from fitdrag.physics.air import Air
    from fitdrag.physics.flight3d import Launch3D, simulate_3d
    from fitdrag.physics.forces import Conditions
    from fitdrag.physics.specimen import Sphere

    launch = Launch3D.from_speed_angles(sc.speed, sc.elevation, sc.out_of_plane, *sc.start)
    t = np.linspace(T_LAUNCH, t_end, int((t_end - T_LAUNCH) * sc.fps * 8) + 2)
    return simulate_3d(t, launch, Sphere(sc.mass, sc.diameter),
                       Conditions(Air(sc.air_density, viscosity=sc.viscosity),
                                  gravity=sc.gravity),
                       drag_params=(sc.cd,), t0=T_LAUNCH)  # fmt: skip


def write_scenario(sc: Scenario3D, folder: str | Path, *, force: bool = False) -> ScenarioFiles:
    """Render and write every camera's footage, lens file and the board layout into
    ``folder`` (``<name>.avi``, ``<name>_truth.json``, ``<name>_lens.json``,
    ``board_layout.csv``)."""
    from fitdrag.geometry.render_views import ViewRenderer
    from fitdrag.geometry.view_truth import write_view
    from fitdrag.video.lens import LensModel

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    cams = true_cameras(sc)
    t_end = (sc.frames + 2) / sc.fps + max(c.time_offset for c in sc.cameras) + 0.01
    fl = flight(sc, t_end)
    board = _board(sc)
    layout = write_text_atomic(
        folder / "board_layout.csv",
        "id,x_m,y_m\n" + "".join(f"{k},{x!r},{y!r}\n" for k, (x, y) in sc.markers.items()),
        force=force,
    )
    videos, truths, lenses = [], [], []
    for i, (c, cam) in enumerate(zip(sc.cameras, cams)):
        lens = LensModel(
            camera_matrix=cam.camera_matrix, dist_coeffs=np.asarray(cam.distortion),
            image_size=cam.image_size, rms=0.15, n_views=25,
            details={"std_dev": {"fx_px": c.focal_length_uncertainty,
                                 "fy_px": c.focal_length_uncertainty},
                     "note": "synthetic lens file of an invented camera"},
        )  # fmt: skip
        lenses.append(lens.save(folder / f"{c.name}_lens.json", force=force))
        r = ViewRenderer(
            fl, cam, sc.frames, sc.fps, radius=sc.diameter / 2, board=board,
            time_offset=c.time_offset, noise_sigma=sc.noise_sigma, flicker=sc.flicker,
            seed=sc.seed + i,
        )  # fmt: skip
        v, t = write_view(r, folder / f"{c.name}.avi", folder / f"{c.name}_truth.json",
                          quality=sc.quality, force=force)  # fmt: skip
        videos.append(v)
        truths.append(t)
    return ScenarioFiles(tuple(videos), tuple(truths), tuple(lenses), layout, tuple(cams))


#: The invented laboratory, customer and specimen of the synthetic 3-D samples.
SAMPLE_JOB = {
    "laboratory": {
        "name": "Northmoor Sports Equipment Test Laboratory (fictitious, synthetic sample)",
        "address": "Unit 4, 17 Invented Way, Sampleton SA1 0XX (fictitious address)",
    },
    "test": {
        "customer": "Brightfield Training Goods Ltd (fictitious)",
        "order": "BTG-PO-0057 (fictitious)",
        "operator": "J. Example",
        "approved_by": "R. Sample",
    },
    "specimen_id": "BTG-FB65-LOT2607-S04",
    "description": "Foam training ball, 65 mm, lot 2607, specimen 4 (synthetic: simulated, "
    "not a real ball)",
}


def _q(s: str) -> str:
    import json

    return json.dumps(s, ensure_ascii=False)


def job_text(sc: Scenario3D, files: ScenarioFiles, *, test_date: str = "2026-12-02",
             folder: str | Path | None = None, monte_carlo: int = 0,
             stated_offsets: bool = False, specification: bool = True,
             number_prefix: str = "SAMPLE3D") -> str:  # fmt: skip
    """A job file (TOML) for the scenario: one throw with a ``[[throws.views]]`` per camera
    (or, with one camera, a footage throw with its lens), paths relative to ``folder``
    (default: the footage's folder); ``stated_offsets`` writes the true time offsets (else
    the fit estimates them)."""
    base = Path(folder) if folder is not None else files.footage[0].parent
    lab, test = SAMPLE_JOB["laboratory"], SAMPLE_JOB["test"]

    def rel(p: Path) -> str:
        try:
            return _q(str(Path(p).resolve().relative_to(base.resolve())))
        except ValueError:
            return _q(str(p))

    lines = [
        "# fitdrag job: a throw measured in 3-D (SYNTHETIC: invented laboratory, customer and",
        "# specimen; the footage was rendered from a simulated flight, nothing was measured).",
        "",
        "[laboratory]",
        f"name = {_q(lab['name'])}",
        f"address = {_q(lab['address'])}",
        "",
        "[test]",
        *(f"{k} = {_q(v)}" for k, v in test.items()),
        f"date = {test_date}",
        "",
        "[specimen]",
        f"id = {_q(SAMPLE_JOB['specimen_id'])}",
        f"description = {_q(SAMPLE_JOB['description'])}",
        f"mass = {sc.mass!r}               # kg",
        "mass_uncertainty = 2e-5       # kg, standard uncertainty",
        f"diameter = {sc.diameter!r}           # m",
        "diameter_uncertainty = 8e-5   # m",
        "",
        "[air]",
        f"density = {sc.air_density!r}            # kg/m^3",
        "density_uncertainty = 0.004   # kg/m^3",
        f"viscosity = {sc.viscosity!r}        # Pa s",
        "viscosity_uncertainty = 0.0   # Pa s (synthetic: exact)",
        "air_speed_uncertainty = 0.02  # m/s, room air along the flight (anemometer)",
        "",
        *(
            [
                "[site]",
                f"gravity = {sc.gravity!r}        # m/s^2, as simulated",
                "gravity_uncertainty = 0.0005  # m/s^2",
                "",
            ]
            if sc.gravity != 9.80665
            else []
        ),
        "[camera]",
        f"fps = {sc.fps!r}                 # Hz, shared by the cameras",
        "fps_uncertainty = 0.005       # Hz",
        *(
            [
                f'readout_time = "{1e3 * sc.cameras[0].readout_time!r} ms"    # data sheet',
                f'readout_time_uncertainty = "{1e3 * sc.cameras[0].readout_time_uncertainty!r} ms"',
            ]
            if len(sc.cameras) == 1 and sc.cameras[0].readout_time > 0
            else []
        ),
        "",
        "[[throws]]",
        'label = "throw 1"',
    ]
    one = len(sc.cameras) == 1
    for i, c in enumerate(sc.cameras):
        head = [] if one else ["", "[[throws.views]]"]
        lines += head + [
            f"footage = {rel(files.footage[i])}",
            *([] if one else [f"label = {_q(c.name)}"]),
            f"lens = {rel(files.lenses[i])}",
            f"markers = {sc.marker_side!r}              # m, side of the ArUco markers",
            f"marker_layout = {rel(files.layout)}",
            "scale_uncertainty = 0.001     # relative standard uncertainty of the marker side",
        ]
        if c.readout_time > 0 and not one:
            lines += [
                f'readout_time = "{1e3 * c.readout_time!r} ms"    # camera data sheet',
                f'readout_time_uncertainty = "{1e3 * c.readout_time_uncertainty!r} ms"',
            ]
        if i > 0 and stated_offsets:
            lines += [f'time_offset = "{1e3 * c.time_offset!r} ms"',
                      'time_offset_uncertainty = "0.01 ms"']  # fmt: skip
    if one:
        # a single footage throw: the key is footage = ..., as for planar footage
        lines = [ln for ln in lines if ln != "[[throws.views]]"]
    if specification:
        lines += [
            "",
            "[specification]",
            "drag_coefficient = 0.50",
            "tolerance = 0.05",
            'decision_rule = "guarded"',
            'reference = "Brightfield drawing FB65 rev. C, clause 4.2 (fictitious)"',
        ]
    lines += [
        "",
        "[uncertainty]",
        f"monte_carlo = {int(monte_carlo)}",
        "seed = 1",
        "",
        "[output]",
        f"number_prefix = {_q(number_prefix)}",
        "",
    ]
    return "\n".join(lines)
