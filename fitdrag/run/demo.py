"""The bundled demonstration: the whole job, from footage to certificate, on synthetic data.

An invented laboratory (the scene is in :mod:`fitdrag.run.demo_scene`) checks one specimen from a production lot
of 65 mm foam training balls against the customer's stated drag coefficient, Cd = 0.50 ±
0.05 under guarded acceptance.  Nothing here was measured: the footage is rendered by
:mod:`fitdrag.run.scenario_3d` from a simulated 3-D flight with a known Cd
(:data:`~fitdrag.run.demo_scene.TRUE_CD`), with a fixed seed, so every run on every machine sees the same frames.

The throw is as a hand or a launcher makes it: it leaves 3 cm in front of the marker board
and flies 0.8° out of the board's plane, towards the cameras (:data:`~fitdrag.run.demo_scene.LAUNCH`).  Two
cameras 40° apart film it (:data:`~fitdrag.run.demo_scene.CAMERAS`) through distorting lenses, each with a rolling shutter
(1 ms readout, ± 0.05 ms from its data sheet); the second starts its frames 0.42 ms after
the first, which the job does not state (the fit estimates it).  A measurement in the
board's plane would be off by several per cent here; the demo measures in 3-D.

:func:`run_demo` does, inside one directory ``DIR``:

1. renders each camera's footage to ``DIR/footage/<camera>.avi``, with the lens file a
   lens calibration would give (``<camera>_lens.json``), the board's layout
   (``board_layout.csv``), each view's exact truth (``<camera>_truth.json``) and the truth
   of the whole scene with the SHA-256 of every file (``demo_truth.json``) — only on the
   first run (or with ``force``);
2. tracks each camera's footage as ``fitdrag track --lens ... --readout-time ...`` does
   (:func:`track_command`): finds the markers, solves the camera's pose from them, detects
   the ball in every frame and writes ``DIR/demo_<camera>_track.csv`` (the camera in its
   header) and a picture of the track over one frame, ``DIR/demo_<camera>_preview.png``;
3. writes the job file ``DIR/demo_job.toml``: one throw with a ``[[throws.views]]`` per
   camera naming its footage, lens, board and readout (so the certificate lists the
   footage's SHA-256); the time offset is left to the fit;
4. runs that job through the machinery of ``fitdrag run``
   (:func:`fitdrag.run.pipeline.measure`, which measures in 3-D: each view tracked and
   calibrated again, the 3-D flight fitted to both cameras' pixels, GUM budget by re-fit,
   Monte Carlo check with :data:`MONTE_CARLO_TRIALS` trials, conformity decision);
5. issues the certificate (PDF/PNG, JSON) in ``DIR/certificates/`` and records it in
   ``DIR/certificates/records.sqlite`` (:func:`fitdrag.run.pipeline.issue`);

and, for comparison, fits the first camera's track in the board's plane, as a planar
measurement would (statistical uncertainty only).

Running it again reuses the footage (after checking every file's SHA-256 against the truth
file), recomputes the tracks, their pictures and the job file and checks that they match the
files already there, and issues a *new* certificate number that replaces the previous demo
certificate (the records database keeps both, the old one marked as replaced).  If a file in
``DIR`` was changed by hand the run stops and says which; ``force=True`` regenerates and
overwrites everything the demo writes.  Nothing is written outside ``DIR``.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import json
import math
import os
import sys
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from fitdrag._files import write_atomic, write_text_atomic
from fitdrag.errors import ConvergenceError, InputError
from fitdrag.run.demo_scene import (
    AIR,
    CAMERAS,
    CUSTOMER,
    FOOTAGE,
    LABORATORY,
    SEED,
    SITE,
    SPECIFICATION,
    SPECIMEN,
    make_demo_footage,
)

__all__ = [
    "DEFAULT_DIRECTORY",
    "DemoResult",
    "MONTE_CARLO_TRIALS",
    "job_text",
    "run_demo",
    "track_command",
]

#: Default directory of ``fitdrag demo``.
DEFAULT_DIRECTORY = "fitdrag-demo"

#: Monte Carlo trials of the demo's check of the GUM budget.  Each trial re-fits the 3-D
#: flight to both cameras (about 40 ms of CPU, ten times a planar re-fit), so the demo runs
#: 300 rather than the 1000 of a planar measurement, to stay near half a minute on two cores.
MONTE_CARLO_TRIALS = 300

#: Prefix of the demo's certificate numbers.
NUMBER_PREFIX = "DEMO"

FOOTAGE_DIR = "footage"
TRUTH_NAME = "footage/demo_truth.json"
LAYOUT_NAME = "footage/board_layout.csv"
JOB_NAME = "demo_job.toml"
CERTIFICATES = "certificates"


def footage_name(camera: str) -> str:
    """The camera's footage inside the demo directory."""
    return f"{FOOTAGE_DIR}/{camera}.avi"


def lens_name(camera: str) -> str:
    """The camera's lens file inside the demo directory."""
    return f"{FOOTAGE_DIR}/{camera}_lens.json"


def track_name(camera: str) -> str:
    """The camera's track CSV inside the demo directory."""
    return f"demo_{camera}_track.csv"


def preview_name(camera: str) -> str:
    """The picture of the camera's track inside the demo directory."""
    return f"demo_{camera}_preview.png"


@dataclass(frozen=True)
class DemoResult:
    """What :func:`run_demo` produced and where.

    Attributes
    ----------
    directory : Path
        The demo directory.
    footage, lenses, tracks, previews : tuple of Path
        Per camera: the synthetic footage (AVI), its lens file, the track found in it (CSV,
        the camera in its header) and a picture of the track over one frame (PNG).
    truth : Path
        The scene's exact truth (JSON: flight, cameras, SHA-256 of every rendered file).
    layout, job : Path
        The marker board's layout (CSV) and the job file run.
    certificate_number : str
        Number of the certificate issued by this run.
    replaces : str or None
        The earlier demo certificate it replaces (second and later runs).
    certificate_pdf, certificate_png, result_json, records : Path
        The certificate, its first page as PNG, the full result and the records database.
    drag_coefficient : float
        Measured Cd. [-]
    expanded_uncertainty : float
        Expanded uncertainty U of Cd. [-]
    coverage_factor : float
        k of U. [-]
    decision : str or None
        The conformity decision.
    true_cd : float
        The Cd the footage was rendered with. [-]
    true_out_of_plane : float
        The flight's true angle out of the board's plane. [deg]
    out_of_plane_angle, out_of_plane_angle_uncertainty : float
        The angle measured by the 3-D fit and its standard uncertainty. [deg]
    true_time_offset : float
        The second camera's true time offset. [s]
    time_offset, time_offset_uncertainty : float
        The offset estimated by the fit and its standard uncertainty. [s]
    planar_drag_coefficient, planar_expanded_uncertainty : float
        Cd of the first camera's track fitted in the board's plane (the flight assumed in
        it) and the planar fit's statistical expanded uncertainty; nan if that fit failed.
        [-]
    planar_refusal : str
        Why the planar fit with the default noise model refused the track ("" if it did
        not; the planar figures are then from the fit forced to white noise).
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
    footage: tuple[Path, ...]
    lenses: tuple[Path, ...]
    tracks: tuple[Path, ...]
    previews: tuple[Path, ...]
    truth: Path
    layout: Path
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
    true_out_of_plane: float
    out_of_plane_angle: float
    out_of_plane_angle_uncertainty: float
    true_time_offset: float
    time_offset: float
    time_offset_uncertainty: float
    planar_drag_coefficient: float
    planar_expanded_uncertainty: float
    planar_refusal: str
    footage_reused: bool
    summary: str
    elapsed: float
    timings: dict

    @property
    def camera_names(self) -> tuple[str, ...]:
        """The cameras' names, in the order of :attr:`footage`."""
        return tuple(p.stem for p in self.footage)


# ---------------------------------------------------------------------------------------------
# footage -> tracks
# ---------------------------------------------------------------------------------------------


def _ms(seconds: float) -> str:
    return f"{1e3 * seconds:g}ms"


def track_command(camera: dict) -> list[str]:
    """Arguments of the ``fitdrag track`` command, run inside the demo directory, that turns
    ``camera``'s footage (an entry of :data:`CAMERAS`) into its track and picture."""
    name = camera["name"]
    return [
        "track", footage_name(name), "--fps", f"{FOOTAGE['fps']:g}",
        "--markers", f"{FOOTAGE['marker_side']:g}", "--marker-layout", LAYOUT_NAME,
        "--lens", lens_name(name),
        "--scale-uncertainty", f"{FOOTAGE['marker_side_relative_uncertainty']:g}",
        "--readout-time", _ms(camera["readout_time"]),
        "--readout-time-uncertainty", _ms(camera["readout_time_uncertainty"]),
        "-o", track_name(name), "--preview", preview_name(name),
    ]  # fmt: skip


def _track_camera(d: Path, camera: dict, track_path: Path, preview_path: Path, *,
                  progress: bool = False) -> str:  # fmt: skip
    """Track one camera's footage as :func:`track_command` would inside ``d``; write the
    track CSV (with the camera in its header) and the picture (atomically, replacing files
    there); return the tracking summary."""
    from fitdrag.geometry.footage_view import (
        camera_from_footage,
        camera_header,
        pose_focal_derivative,
    )
    from fitdrag.report.track_preview import track_preview_figure
    from fitdrag.tracks.csv_file import read_track
    from fitdrag.video.sources import open_source
    from fitdrag.video.tracking import footage_track_csv_text, track_footage

    name = camera["name"]
    # inside d, with the command's relative names, so the CSV header is the command's
    with contextlib.chdir(d):
        ft = track_footage(
            footage_name(name), fps=FOOTAGE["fps"], markers=FOOTAGE["marker_side"],
            marker_layout=LAYOUT_NAME, lens=lens_name(name),
            scale_uncertainty=FOOTAGE["marker_side_relative_uncertainty"], progress=progress,
            readout_time=camera["readout_time"],
        )  # fmt: skip
        cam, pose = camera_from_footage(
            ft, readout_time=camera["readout_time"],
            readout_time_uncertainty=camera["readout_time_uncertainty"],
        )  # fmt: skip
        header = camera_header(pose, ft.marker_frame,
                               focal_derivative=pose_focal_derivative(ft, cam))  # fmt: skip
        text = footage_track_csv_text(ft, camera=header)
        with open_source(footage_name(name)) as source:
            image = source.read(ft.preview_frame)
    write_atomic(track_path, lambda p: Path(p).write_text(text, encoding="utf-8"), force=True,
                 check=read_track)  # fmt: skip
    fig = track_preview_figure(ft, image)
    write_atomic(preview_path, lambda p: fig.savefig(p, dpi=100, format="png"), force=True)
    return (
        f"{ft.summary()}\ncamera: pose from {len(pose.ids)} marker(s), "
        f"{pose.distance_to_board:.4g} m from the board, optical axis "
        f"{math.degrees(pose.axis_angle):.3g}° from its normal"
    )


def _planar_fit(job, track_path: Path) -> tuple[float, float, str]:
    """``track_path`` fitted in the board's plane, as a planar measurement of the track
    would: (Cd, its statistical expanded uncertainty, the refusal of the default fit or "").

    The default fit (noise model "auto") refuses a track whose residuals are almost perfectly
    correlated, as an out-of-plane flight's are; the figures are then those of the fit forced
    to white noise.  (nan, nan, message) when that fails too.
    """
    from fitdrag.fit.fitting import fit_tracks
    from fitdrag.tracks.csv_file import read_track

    track = read_track(track_path)
    model = job.fit_options().get("model", "constant")
    refusal = ""
    for noise in ("auto", "white"):
        r = fit_tracks(track, job.make_specimen(), job.make_air(), gravity=job.gravity(),
                       model=model, noise=noise)  # fmt: skip
        if r.success:
            return float(r.cd), float(r.coverage_factor * r.u_cd), refusal
        refusal = refusal or r.message
    return math.nan, math.nan, refusal


# ---------------------------------------------------------------------------------------------
# the job file
# ---------------------------------------------------------------------------------------------


def _toml_str(s: str) -> str:
    return json.dumps(s, ensure_ascii=False)


def job_text(test_date: str) -> str:
    """The demo's job file (TOML): one throw seen by two cameras (``[[throws.views]]``),
    each with its footage, lens file, marker board and rolling-shutter readout."""
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
        'notes = "Synthetic demonstration: one throw filmed at 500 frames/s by two cameras '
        '40 degrees apart, in front of a board of four ArUco markers; measured in 3-D."',
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
        f"fps = {FOOTAGE['fps']!r}                    # Hz, shared by the two cameras",
        f"fps_uncertainty = {FOOTAGE['fps_uncertainty']!r}        # Hz",
        "",
        "[[throws]]",
        'label = "throw 1"',
    ]
    for cam in CAMERAS:
        name = cam["name"]
        lines += [
            "",
            "[[throws.views]]          # one camera; fitdrag run tracks its footage and "
            "solves its pose from the markers",
            f"label = {_toml_str(name)}",
            f"footage = {_toml_str(footage_name(name))}",
            f"lens = {_toml_str(lens_name(name))}   # from the lens calibration",
            f"markers = {FOOTAGE['marker_side']!r}                  # m, side of the ArUco markers",
            f"marker_layout = {_toml_str(LAYOUT_NAME)}   # where each marker is on the board",
            f"scale_uncertainty = {FOOTAGE['marker_side_relative_uncertainty']!r}        "
            "# relative standard uncertainty of the marker side (print tolerance)",
            f'readout_time = "{1e3 * cam["readout_time"]:g} ms"      # rolling shutter, '
            "camera data sheet",
            f'readout_time_uncertainty = "{1e3 * cam["readout_time_uncertainty"]:g} ms"',
        ]
    lines += [
        "# no time_offset: the cameras are not synchronised; the fit estimates the offset",
        "",
        "[specification]",
        f"drag_coefficient = {sp_['drag_coefficient']!r}",
        f"tolerance = {sp_['tolerance']!r}",
        f"decision_rule = {_toml_str(sp_['decision_rule'])}",
        f"reference = {_toml_str(sp_['reference'])}",
        "",
        "[fit]",
        'model = "constant"',
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


def _rendered_files() -> list[str]:
    """Names (in the demo directory) of every file the rendering step writes."""
    names = [LAYOUT_NAME]
    for c in CAMERAS:
        n = c["name"]
        names += [footage_name(n), f"{FOOTAGE_DIR}/{n}_truth.json", lens_name(n)]
    return names


def _reuse_footage(d: Path) -> dict:
    """The truth of footage rendered earlier in ``d``, after checking every rendered file's
    SHA-256 against it."""
    from fitdrag.tracks.track import file_sha256

    truth_path = d / TRUTH_NAME
    truth = json.loads(truth_path.read_text(encoding="utf-8"))
    recorded = truth.get("sha256") or {}
    for name in _rendered_files():
        p = d / name
        if not p.exists():
            raise InputError(
                f"{p}: missing, so the footage in {d} is incomplete; pass --force to render "
                f"it again."
            )
        if recorded.get(p.name) != file_sha256(p):
            raise InputError(
                f"{p}: differs from the file the demo rendered (its SHA-256 does not match "
                f"{truth_path.name}); pass --force to render the footage again."
            )
    return truth


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
        Render the footage again and overwrite the tracks and job file even if they were
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
    (d / FOOTAGE_DIR).mkdir(parents=True, exist_ok=True)
    truth_path, job_path = d / TRUTH_NAME, d / JOB_NAME
    names = [c["name"] for c in CAMERAS]
    timings: dict[str, float] = {}

    def step(n, what):
        log(f"[{n}/5] {what}")
        return time.perf_counter()

    # 1. footage --------------------------------------------------------------------------
    t0 = step(1, "synthetic footage of two cameras")
    reused = False
    if truth_path.exists() and not force:
        truth = _reuse_footage(d)
        reused = True
        when = truth.get("rendered_on")
        log(f"      reusing the footage in {display_path(d / FOOTAGE_DIR)} (rendered on {when}, "
            f"SHA-256 of every file checked)")  # fmt: skip
    else:
        there = [n for n in _rendered_files() if (d / n).exists()]
        if there and not force:
            raise InputError(
                f"{truth_path}: missing, so the footage in {d / FOOTAGE_DIR} ({there[0]}, ...) "
                f"cannot be checked; pass --force to render the footage again."
            )
        log(f"      rendering {FOOTAGE['frames']} frames of {FOOTAGE['width_px']}x"
            f"{FOOTAGE['height_px']} px per camera (seed {SEED}) ...")  # fmt: skip
        truth = make_demo_footage(d / FOOTAGE_DIR, force=True)
        truth["rendered_on"] = _dt.date.today().isoformat()
        write_text_atomic(truth_path, json.dumps(truth, indent=1) + "\n", force=True)
        log(f"      wrote {', '.join(footage_name(n) for n in names)}, the lens files, the "
            f"board layout and {TRUTH_NAME}")  # fmt: skip
    timings["footage"] = time.perf_counter() - t0

    # 2. tracks ---------------------------------------------------------------------------
    t0 = step(2, "markers, camera pose and ball detection per camera (fitdrag track --lens: "
              "a CSV and a picture each)")  # fmt: skip
    hint = (
        "this version of fitdrag finds another track in the footage: edited by hand, or "
        "made by another version?"
    )
    for cam in CAMERAS:
        name = cam["name"]
        log(f"      the same as, inside {display_path(d)}:  fitdrag {' '.join(track_command(cam))}")
        tmp_track = d / f".{track_name(name)}.new.csv"
        tmp_preview = d / f".{preview_name(name)}.new.png"
        try:
            printed = _track_camera(d, cam, tmp_track, tmp_preview, progress=bars)
            for line in printed.splitlines():
                log(f"      {line}")
            _place_file(tmp_track, d / track_name(name), force, hint)
            _place_file(tmp_preview, d / preview_name(name), force, hint)
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
        "fitdrag run: track the footage of both cameras, fit the flight in 3-D, uncertainty "
        f"budget, Monte Carlo check ({MONTE_CARLO_TRIALS} trials), decision",
    )
    try:
        meas = measure(job, progress=bars)
    except ConvergenceError as exc:  # pragma: no cover - the demo's data fit
        raise ConvergenceError(f"demo: {exc}") from exc
    summary = _summary(meas)
    timings["measure"] = time.perf_counter() - t0

    # 5. certificate and record -----------------------------------------------------------
    t0 = step(5, "fitdrag run: certificate and record")
    # the demo keeps its own records database beside its certificates (not the laboratory's)
    db_path = job.output.records or job.output_directory / "records.sqlite"
    previous = _latest_unreplaced(db_path)
    rec, _ = issue(meas, records_path=db_path, replaces=previous,
                   reason="the demo run again" if previous else None)  # fmt: skip
    timings["issue"] = time.perf_counter() - t0

    # the same flight measured in the board's plane, for comparison ------------------------
    t0 = time.perf_counter()
    planar_cd, planar_u, planar_refusal = _planar_fit(job, d / track_name(names[0]))
    timings["planar"] = time.perf_counter() - t0

    r = meas.content.result
    fit3d = meas.fit.throws[0].result
    late = fit3d.views[1]
    out = {k: Path(v) for k, v in rec.outputs.items()}
    return DemoResult(
        directory=d,
        footage=tuple(d / footage_name(n) for n in names),
        lenses=tuple(d / lens_name(n) for n in names),
        tracks=tuple(d / track_name(n) for n in names),
        previews=tuple(d / preview_name(n) for n in names),
        truth=truth_path,
        layout=d / LAYOUT_NAME,
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
        true_out_of_plane=float(truth["launch"]["out_of_plane_deg"]),
        out_of_plane_angle=float(fit3d.out_of_plane_angle),
        out_of_plane_angle_uncertainty=float(fit3d.out_of_plane_angle_uncertainty),
        true_time_offset=float(truth["cameras"][1]["time_offset"]),
        time_offset=float(late.time_offset),
        time_offset_uncertainty=float(late.time_offset_uncertainty),
        planar_drag_coefficient=planar_cd,
        planar_expanded_uncertainty=planar_u,
        planar_refusal=planar_refusal,
        footage_reused=reused,
        summary=summary,
        elapsed=time.perf_counter() - t_start,
        timings=timings,
    )
