"""The bundled demonstration: the whole job, from footage to certificate, on synthetic data.

An invented laboratory (see :data:`LABORATORY`) checks one specimen from a production lot
of 65 mm foam training balls against the customer's stated drag coefficient, Cd = 0.50 ±
0.05 under guarded acceptance.  Nothing here was measured: the footage is rendered by
:mod:`fitdrag.video.synthetic` from a simulated flight with a known Cd (:data:`TRUE_CD`),
with a fixed seed, so every run on every machine sees the same frames.

:func:`run_demo` does, inside one directory ``DIR``:

1. renders the footage (ArUco markers in the plane of flight, sensor noise, lamp flicker,
   background clutter, motion blur) to ``DIR/footage/demo_throw.avi`` with its exact truth
   in ``DIR/footage/demo_throw_truth.json`` — only on the first run (or with ``force``);
2. tracks it as ``fitdrag track`` does (:func:`fitdrag.video.tracking.track_footage`): finds
   the markers and calibrates the image to metres (``fitdrag.video.calibration``), detects
   the ball in every frame (``fitdrag.video.detect``) and writes the track
   ``DIR/demo_track.csv`` and a picture of it over one frame, ``DIR/demo_track_preview.png``
   (:func:`fitdrag.report.track_preview.track_preview_figure`);
3. writes the job file ``DIR/demo_job.toml`` that describes the measurement (its throw
   names the footage and its marker calibration, so the certificate lists the footage's
   SHA-256);
4. runs that job through the machinery of ``fitdrag run``, which tracks the footage again
   exactly as ``fitdrag track`` did (:func:`fitdrag.run.pipeline.measure`
   and :func:`fitdrag.run.pipeline.issue`): fit, GUM budget, Monte Carlo check, conformity
   decision, certificate PDF/PNG and JSON in ``DIR/certificates/``, and a record in
   ``DIR/certificates/records.sqlite``.

Running it again reuses the footage (after checking its SHA-256 against the truth file),
recomputes the track, its picture and the job file and checks that they match the files
already there, and issues a *new* certificate number that replaces the previous demo certificate (the records
database keeps both, the old one marked as replaced).  If a file in ``DIR`` was changed by
hand the run stops and says which; ``force=True`` regenerates and overwrites everything the
demo writes.  Nothing is written outside ``DIR``.
"""

from __future__ import annotations

import datetime as _dt
import json
import math
import os
import sys
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from fitdrag._files import write_atomic, write_text_atomic
from fitdrag.errors import ConvergenceError, InputError

__all__ = [
    "DEFAULT_DIRECTORY",
    "DemoResult",
    "FOOTAGE",
    "LABORATORY",
    "TRUE_CD",
    "make_demo_footage",
    "run_demo",
]

#: Default directory of ``fitdrag demo``.
DEFAULT_DIRECTORY = "fitdrag-demo"

#: Seed of the synthetic footage (clutter and noise).
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

#: The launch at frame 0: position [m] (world, origin at marker 0), speed [m/s], angle [deg].
LAUNCH = {"x0": -0.16, "y0": 0.25, "speed": 9.0, "angle": 28.0}

#: Camera and scene of the synthetic footage.
FOOTAGE = {
    "fps": 500.0,  # Hz, capture rate
    "fps_uncertainty": 0.005,  # Hz (10 ppm crystal)
    "container_fps": 30.0,  # Hz, playback rate written into the AVI (as high-speed cameras do)
    "frames": 160,
    "height_px": 600,
    "width_px": 960,
    "metres_per_px": 0.0025,  # m/px
    "origin_px": (60.0, 540.0),  # image point of world (0, 0), px, y down
    "roll_deg": 0.4,  # camera roll about its axis, deg
    "marker_side": 0.100,  # m, side of the markers' black square
    "marker_side_relative_uncertainty": 0.001,  # print tolerance, relative
    # marker id -> world position of its lower-left corner [m]
    "markers": {0: (0.0, 0.0), 1: (2.05, 0.0), 2: (0.0, 1.16), 3: (2.05, 1.16)},
    "noise_sigma": 3.0,  # grey levels
    "flicker": 0.06,  # relative amplitude of the lamps' flicker
    "jpeg_quality": 90,
}

#: The customer's specification.
SPECIFICATION = {
    "drag_coefficient": 0.50,
    "tolerance": 0.05,
    "decision_rule": "guarded",
    "reference": "Brightfield drawing FB65 rev. C, clause 4.2 (fictitious)",
}

#: Monte Carlo trials of the demo's check of the GUM budget (kept modest so it stays fast).
MONTE_CARLO_TRIALS = 1000

#: Prefix of the demo's certificate numbers.
NUMBER_PREFIX = "DEMO"

FOOTAGE_NAME = "footage/demo_throw.avi"
TRUTH_NAME = "footage/demo_throw_truth.json"
TRACK_NAME = "demo_track.csv"
PREVIEW_NAME = "demo_track_preview.png"
JOB_NAME = "demo_job.toml"
CERTIFICATES = "certificates"


@dataclass(frozen=True)
class DemoResult:
    """What :func:`run_demo` produced and where.

    Attributes
    ----------
    directory : Path
        The demo directory.
    footage, truth, track, preview, job : Path
        Synthetic footage (AVI), its exact truth (JSON), the track found in it (CSV), a
        picture of the detected track over one frame (PNG) and the job file run.
    certificate_number : str
        Number of the certificate issued by this run.
    replaces : str or None
        The earlier demo certificate it replaces (second and later runs).
    certificate_pdf, certificate_png, result_json, records : Path
        The certificate, its first page as PNG, the full result and the records database.
    drag_coefficient : float
        Fitted Cd. [-]
    expanded_uncertainty : float
        Expanded uncertainty U of Cd. [-]
    coverage_factor : float
        k of U. [-]
    decision : str or None
        The conformity decision.
    true_cd : float
        The Cd the footage was rendered with. [-]
    footage_reused : bool
        The footage of an earlier run was used (not rendered again).
    summary : str
        The printed summary of the measurement.
    elapsed : float
        Wall time of the run. [s]
    timings : dict
        Wall time of each step. [s]
    """

    directory: Path
    footage: Path
    truth: Path
    track: Path
    preview: Path
    job: Path
    certificate_number: str
    replaces: str | None
    certificate_pdf: Path
    certificate_png: Path
    result_json: Path
    records: Path
    drag_coefficient: float
    expanded_uncertainty: float
    coverage_factor: float
    decision: str | None
    true_cd: float
    footage_reused: bool
    summary: str
    elapsed: float
    timings: dict


# ---------------------------------------------------------------------------------------------
# footage
# ---------------------------------------------------------------------------------------------


def _world_to_image(scene: dict) -> np.ndarray:
    """Homography world (m, y up) -> image (px, y down) of the demo camera."""
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


def _sha256(path: Path) -> str:
    from fitdrag.tracks.track import file_sha256

    return file_sha256(path)


def make_demo_footage(
    path: str | os.PathLike,
    *,
    frames: int | None = None,
    seed: int = SEED,
    scene: dict | None = None,
    progress: bool = False,
    overwrite: bool = False,
) -> dict:
    """Render the demo's synthetic footage to a Motion-JPEG AVI file and return its truth.

    The flight is simulated with :func:`fitdrag.physics.simulate.simulate` (buoyancy, added mass,
    quadratic drag with Cd = :data:`TRUE_CD`) in the demo's air and gravity, mapped into the
    image of a camera perpendicular to the plane of flight (scale, roll and origin from
    :data:`FOOTAGE`) and rendered with :class:`fitdrag.video.synthetic.FlightRenderer`,
    together with four ArUco markers at known places in the plane of flight.

    Parameters
    ----------
    path : str or path-like
        Output AVI file (its folder must exist).
    frames : int, optional
        Number of frames (default ``FOOTAGE["frames"]``).
    seed : int
        Seed of the clutter and the noise; the same seed gives the same frames.
    scene : dict, optional
        Entries of :data:`FOOTAGE` to change (image size, metres per pixel, origin, markers,
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
    """
    from fitdrag.physics.simulate import Launch, simulate
    from fitdrag.physics.specimen import Sphere
    from fitdrag.video.footage_files import write_video
    from fitdrag.video.synthetic import FlightRenderer, MarkerPlacement

    path = Path(path)
    if path.exists() and not overwrite:
        raise InputError(f"{path}: already exists; pass --force to render the footage again.")
    sc = {**FOOTAGE, **(scene or {})}
    unknown = sorted(set(sc) - set(FOOTAGE))
    if unknown:
        raise InputError(f"scene: unknown key(s) {unknown}; use keys of fitdrag.run.demo.FOOTAGE.")
    n = int(sc["frames"] if frames is None else frames)
    fps = sc["fps"]
    cond = _conditions()
    sphere = Sphere(SPECIMEN["mass"], SPECIMEN["diameter"])
    launch = Launch.from_speed_angle(LAUNCH["speed"], LAUNCH["angle"], LAUNCH["x0"], LAUNCH["y0"])
    t = np.arange(n) / fps
    flight = simulate(t, launch, sphere, cond, drag_params=TRUE_CD)
    if not flight.success:  # pragma: no cover - fixed, well-posed inputs
        raise RuntimeError(f"demo flight simulation failed: {flight.message}")
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
        "note": "Synthetic footage rendered by fitdrag.run.demo; no real ball was filmed.",
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
        "sha256": _sha256(path),
    }


# ---------------------------------------------------------------------------------------------
# footage -> track
# ---------------------------------------------------------------------------------------------


def track_command(footage: str, output: str, preview: str | None = None) -> list[str]:
    """Arguments of the ``fitdrag track`` command that turns the demo footage into a track."""
    args = [
        "track", footage, "--fps", f"{FOOTAGE['fps']:g}",
        "--markers", f"{FOOTAGE['marker_side']:g}",
        "--scale-uncertainty", f"{FOOTAGE['marker_side_relative_uncertainty']:g}",
        "-o", output,
    ]  # fmt: skip
    if preview:
        args += ["--preview", preview]
    return args


def _track_footage(
    footage: Path, track_path: Path, preview_path: Path, *, progress: bool = False
) -> str:
    """Track the demo footage as :func:`track_command` would; write the track CSV and the
    preview picture (atomically, replacing files there); return the tracking summary."""
    from fitdrag.report.track_preview import track_preview_figure
    from fitdrag.tracks.csv_file import read_track
    from fitdrag.video.sources import open_source
    from fitdrag.video.tracking import footage_track_csv_text, track_footage

    ft = track_footage(
        footage, fps=FOOTAGE["fps"], markers=FOOTAGE["marker_side"],
        scale_uncertainty=FOOTAGE["marker_side_relative_uncertainty"], progress=progress,
    )  # fmt: skip
    text = footage_track_csv_text(ft)
    write_atomic(track_path, lambda p: Path(p).write_text(text, encoding="utf-8"), force=True,
                 check=read_track)  # fmt: skip
    with open_source(footage) as source:
        image = source.read(ft.preview_frame)
    fig = track_preview_figure(ft, image)
    write_atomic(preview_path, lambda p: fig.savefig(p, dpi=100, format="png"), force=True)
    return ft.summary()


# ---------------------------------------------------------------------------------------------
# the job file
# ---------------------------------------------------------------------------------------------


def _toml_str(s: str) -> str:
    return json.dumps(s, ensure_ascii=False)


def job_text(test_date: str, footage_name: str = FOOTAGE_NAME) -> str:
    """The demo's job file (TOML): one footage throw, calibrated by its ArUco markers."""
    lab, cu, sp, air, sp_ = LABORATORY, CUSTOMER, SPECIMEN, AIR, SPECIFICATION
    lines = [
        "# fitdrag demo job: written by `fitdrag demo` (fitdrag.run.demo).",
        "# SYNTHETIC: the laboratory, customer and specimen are invented and the footage was",
        "# rendered from a simulated flight; nothing here was measured.",
        "# Run it on its own with:  fitdrag run demo_job.toml",
        "",
        "[laboratory]",
        f"name = {_toml_str(lab['name'])}",
        f"address = {_toml_str(lab['address'])}",
        "",
        "[test]",
        *(f"{k} = {_toml_str(v)}" for k, v in cu.items()),
        f"date = {test_date}",
        'location = "flight hall 1 (fictitious)"',
        'notes = "Synthetic demonstration: one throw filmed at 500 frames/s in front of four '
        'ArUco markers in the plane of flight."',
        "",
        "[specimen]",
        f"id = {_toml_str(sp['id'])}",
        f"description = {_toml_str(sp['description'])}",
        f"mass = {sp['mass']!r}                  # kg",
        f"mass_uncertainty = {sp['mass_uncertainty']!r}       # kg, standard uncertainty",
        f"diameter = {sp['diameter']!r}               # m",
        f"diameter_uncertainty = {sp['diameter_uncertainty']!r}   # m",
        "",
        "[air]",
        f"temperature = {air['temperature']!r}             # degrees C",
        f"temperature_uncertainty = {air['temperature_uncertainty']!r}   # K",
        f"pressure = {air['pressure']!r}              # Pa",
        f"pressure_uncertainty = {air['pressure_uncertainty']!r}     # Pa",
        f"relative_humidity = {air['relative_humidity']!r}       # %",
        f"relative_humidity_uncertainty = {air['relative_humidity_uncertainty']!r}   # %",
        "air_speed_uncertainty = 0.02     # m/s, room air along the flight (anemometer)",
        "",
        "[site]",
        f"latitude = {SITE['latitude']!r}                # degrees",
        f"height = {SITE['height']!r}                  # m",
        "",
        "[camera]",
        f"fps = {FOOTAGE['fps']!r}                    # Hz",
        f"fps_uncertainty = {FOOTAGE['fps_uncertainty']!r}        # Hz",
        "# the length scale and its uncertainty come from the markers in the footage",
        "",
        "[[throws]]",
        f"footage = {_toml_str(footage_name)}   # tracked by fitdrag run, as fitdrag track does",
        f"markers = {FOOTAGE['marker_side']!r}                  # m, side of the ArUco markers",
        f"scale_uncertainty = {FOOTAGE['marker_side_relative_uncertainty']!r}        "
        "# relative standard uncertainty of the marker side (print tolerance)",
        'label = "throw 1"',
        "",
        "[specification]",
        f"drag_coefficient = {sp_['drag_coefficient']!r}",
        f"tolerance = {sp_['tolerance']!r}",
        f"decision_rule = {_toml_str(sp_['decision_rule'])}",
        f"reference = {_toml_str(sp_['reference'])}",
        "",
        "[fit]",
        'model = "constant"',
        "robust = true",
        'noise = "auto"',
        "",
        "[uncertainty]",
        f"monte_carlo = {MONTE_CARLO_TRIALS}",
        "seed = 1",
        "",
        "[output]",
        f"directory = {_toml_str(CERTIFICATES)}",
        f"number_prefix = {_toml_str(NUMBER_PREFIX)}",
        "",
    ]
    return "\n".join(lines)


# ---------------------------------------------------------------------------------------------
# run
# ---------------------------------------------------------------------------------------------


def _place_text(path: Path, text: str, force: bool, hint: str) -> None:
    """Write ``text`` to ``path`` unless the same text is there; a different file needs force."""
    if path.exists():
        if path.read_text(encoding="utf-8") == text:
            return
        if not force:
            raise InputError(
                f"{path}: differs from what the demo writes there ({hint}); pass --force to "
                f"overwrite it, or give another directory."
            )
    write_text_atomic(path, text, force=True)


def _place_file(new: Path, path: Path, force: bool, hint: str) -> None:
    """Move ``new`` to ``path`` unless ``path`` has the same bytes; a different file needs force."""
    if path.exists():
        if path.read_bytes() == new.read_bytes():
            new.unlink()
            return
        if not force:
            raise InputError(
                f"{path}: differs from what the demo writes there ({hint}); pass --force to "
                f"overwrite it, or give another directory."
            )
    os.replace(new, path)


def display_path(path: str | os.PathLike) -> str:
    """``path`` relative to the working directory when it lies inside it, else absolute."""
    p = Path(path).resolve()
    try:
        return str(p.relative_to(Path.cwd().resolve())) or "."
    except ValueError:
        return str(p)


def _latest_unreplaced(records_path: Path) -> str | None:
    from fitdrag.run.records import Records

    if not records_path.exists():
        return None
    recs = [r for r in Records(records_path).list() if not r.replaced_by]
    return recs[-1].number if recs else None


def run_demo(
    directory: str | os.PathLike = DEFAULT_DIRECTORY,
    *,
    force: bool = False,
    progress: bool = True,
    log: Callable[[str], None] | None = None,
) -> DemoResult:
    """Run the whole job on synthetic data inside ``directory`` (see the module notes).

    Parameters
    ----------
    directory : str or path-like
        Where everything goes; created if missing.
    force : bool
        Render the footage again and overwrite the track and job file even if they were
        changed by hand.
    progress : bool
        Report each step on stderr, with progress bars when stderr is a terminal.
    log : callable, optional
        Where step messages go (default: stderr when ``progress``, else nowhere).

    Returns
    -------
    DemoResult

    Raises
    ------
    ValueError
        ``directory`` is a file; a file in it was changed by hand (without ``force``).
    ConvergenceError
        The fit did not converge (not expected on the demo's data; a RuntimeError).
    """
    from fitdrag.run.job_file import load_job
    from fitdrag.run.pipeline import issue, measure
    from fitdrag.run.pipeline import summary as _summary

    t_start = time.perf_counter()
    if log is None:
        log = (lambda s: print(s, file=sys.stderr, flush=True)) if progress else (lambda s: None)
    bars = progress and sys.stderr.isatty()
    d = Path(directory).expanduser().resolve()
    if d.exists() and not d.is_dir():
        raise InputError(f"{d}: is a file, not a directory; give a directory for the demo.")
    (d / "footage").mkdir(parents=True, exist_ok=True)
    footage, truth_path = d / FOOTAGE_NAME, d / TRUTH_NAME
    track_path, job_path = d / TRACK_NAME, d / JOB_NAME
    preview_path = d / PREVIEW_NAME
    timings: dict[str, float] = {}

    def step(n, what):
        log(f"[{n}/5] {what}")
        return time.perf_counter()

    # 1. footage --------------------------------------------------------------------------
    t0 = step(1, "synthetic footage")
    reused = False
    truth = None
    if footage.exists() and truth_path.exists() and not force:
        truth = json.loads(truth_path.read_text(encoding="utf-8"))
        if truth.get("sha256") != _sha256(footage):
            raise InputError(
                f"{footage}: differs from the footage the demo rendered (its SHA-256 does not "
                f"match {truth_path.name}); pass --force to render it again."
            )
        reused = True
        when = truth.get("rendered_on")
        log(f"      reusing {display_path(footage)} (rendered on {when}, SHA-256 checked)")
    else:
        if (footage.exists() or truth_path.exists()) and not force:
            missing = truth_path if footage.exists() else footage
            raise InputError(
                f"{missing}: missing, so the footage in {d} cannot be checked; pass --force to "
                f"render the footage again."
            )
        log(f"      rendering {FOOTAGE['frames']} frames of "
            f"{FOOTAGE['width_px']}x{FOOTAGE['height_px']} px (seed {SEED}) ...")  # fmt: skip
        truth = make_demo_footage(footage, progress=bars, overwrite=True)
        truth["rendered_on"] = _dt.date.today().isoformat()
        write_text_atomic(truth_path, json.dumps(truth, indent=1) + "\n", force=True)
        log(f"      wrote {display_path(footage)} and {truth_path.name}")
    timings["footage"] = time.perf_counter() - t0

    # 2. track ----------------------------------------------------------------------------
    t0 = step(2, "markers, calibration and ball detection (fitdrag track: a CSV and a picture)")
    shown = track_command(FOOTAGE_NAME, TRACK_NAME, PREVIEW_NAME)
    log(f"      the same as, inside {display_path(d)}:  fitdrag {' '.join(shown)}")
    tmp_track = d / f".{TRACK_NAME}.new.csv"
    tmp_preview = d / f".{PREVIEW_NAME}.new.png"
    try:
        printed = _track_footage(footage, tmp_track, tmp_preview, progress=bars)
        for line in printed.splitlines():
            log(f"      {line.replace(str(footage), FOOTAGE_NAME)}")
        hint = (
            "this version of fitdrag finds another track in the footage: edited by hand, or "
            "made by another version?"
        )
        _place_file(tmp_track, track_path, force, hint)
        _place_file(tmp_preview, preview_path, force, hint)
    finally:
        tmp_track.unlink(missing_ok=True)
        tmp_preview.unlink(missing_ok=True)
    timings["track"] = time.perf_counter() - t0

    # 3. job file -------------------------------------------------------------------------
    t0 = step(3, "job file")
    text = job_text(truth["rendered_on"])
    _place_text(job_path, text, force, "the demo's job file; run an edited copy with "
                "'fitdrag run'")  # fmt: skip
    job = load_job(job_path)
    timings["job"] = time.perf_counter() - t0

    # 4. measurement ----------------------------------------------------------------------
    t0 = step(
        4,
        "fitdrag run: track the footage named in the job, fit, uncertainty budget, Monte Carlo "
        f"check ({MONTE_CARLO_TRIALS} trials), decision",
    )
    try:
        meas = measure(job, progress=bars)
    except ConvergenceError as exc:  # pragma: no cover - the demo's data fit
        raise ConvergenceError(f"demo: {exc}") from exc
    summary = _summary(meas)
    timings["measure"] = time.perf_counter() - t0

    # 5. certificate and record -----------------------------------------------------------
    t0 = step(5, "fitdrag run: certificate and record")
    previous = _latest_unreplaced(job.records_path)
    rec, db_path = issue(meas, replaces=previous, force=force)
    timings["issue"] = time.perf_counter() - t0

    r = meas.content.result
    out = {k: Path(v) for k, v in rec.outputs.items()}
    return DemoResult(
        directory=d,
        footage=footage,
        truth=truth_path,
        track=track_path,
        preview=preview_path,
        job=job_path,
        certificate_number=rec.number,
        replaces=rec.replaces,
        certificate_pdf=out["certificate_pdf"],
        certificate_png=out["certificate_png"],
        result_json=out["result_json"],
        records=Path(db_path),
        drag_coefficient=float(r.drag_coefficient),
        expanded_uncertainty=float(r.expanded_uncertainty),
        coverage_factor=float(r.coverage_factor),
        decision=meas.decision,
        true_cd=float(truth["true_cd"]),
        footage_reused=reused,
        summary=summary,
        elapsed=time.perf_counter() - t_start,
        timings=timings,
    )
