"""``fitdrag track``: footage -> calibrated track CSV (frame, t, x, y in metres, y up).

A thin layer over :func:`fitdrag.video.tracking.track_footage`: parse the options, track,
write the CSV (and the preview picture) atomically, print a summary.
"""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

from fitdrag.commands._options import quantity
from fitdrag.errors import InputError, InputFileNotFoundError, OutputExistsError

NAME = "track"

EXAMPLE = """\
Examples:
  fitdrag track throw1.avi --fps 1000 --markers 0.050 -o throw1.csv --preview throw1.png
  fitdrag track frames/ --fps 2000 --scale 0.00125 --origin 12,790 -o throw2.csv
  fitdrag track throw3.mkv --fps 500 --reference 102.5,640,1180,655.5,1.000 -o throw3.csv
  fitdrag track throw4.avi --fps 1000 --markers 0.08 --marker-layout wall.csv \\
      --lens lens.json --readout-time 1.2ms --readout-time-uncertainty 0.1ms -o throw4.csv
  fitdrag track day3/ --fps 500 --markers 0.16 -o day3_tracks/   # every video in day3/
  fitdrag track day3/ --fps 500 --markers 0.16 -o day3_tracks/ --scheduler tcp://10.0.0.5:8786

A folder holding video files (not numbered frames) is tracked file by file, each file a task
on Dask (local processes by default, --workers N of them; or the dask.distributed cluster at
--scheduler): -o names an existing folder that receives NAME.csv for each NAME.avi; a file that
fails is named and the others finish (exit 2).

Calibration (choose one):
  --scale M_PER_PX      known size of one pixel in the plane of flight; the world origin is at
                        --origin (default: the image's lower-left pixel), --rotation rolls the
                        horizontal (degrees, counter-clockwise on screen)
  --reference ...       two image points a known distance apart (origin: the first point)
  --markers SIZE_M      ArUco markers (default DICT_4X4_50) of that side, upright in the plane
                        of flight; x along the markers' horizontal, y up, origin at the
                        lowest-id marker's lower-left corner; with --marker-layout (CSV
                        id,x_m,y_m of each marker's lower-left corner) one plane homography

The CSV has frame, t [s], x, y [m, y up], x_px, y_px [image px, y down], quality and sigma_px
columns and '# key: value' header lines with the calibration (scale, its relative standard
uncertainty, reprojection RMS) and, when one was seen, the other moving objects (where, when,
and the frames where they overlap the specimen); it loads straight into `fitdrag fit`.

Camera: with --markers, --marker-layout and --lens the header also states the camera that took
the footage (camera_ lines: image size, camera matrix, distortion, pose from all marker
corners with its covariance, --readout-time and its uncertainty, the markers' frame), and
`fitdrag fit` measures the throw in 3-D from it (several such files: one throw seen by
several cameras).

Exit codes: 0 track written, 1 a bug (with a traceback), 2 bad arguments, footage or
calibration (e.g. no markers found, too few frames with the specimen).
"""


def register(sub) -> argparse.ArgumentParser:
    p = sub.add_parser(
        NAME,
        help="track the specimen in footage and write a calibrated track CSV",
        description="Find the flying specimen in every frame of a video file or a folder of "
        "numbered frames, calibrate its sub-pixel centroids to metres (world x horizontal, "
        "y up) and write a track CSV. Frames without a confident detection are left out and "
        "listed.",
        epilog=EXAMPLE,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument(
        "footage",
        metavar="FOOTAGE",
        help="video file, folder of numbered frames, or folder of video files",
    )
    p.add_argument("--fps", type=float, metavar="HZ",
                   help="capture frame rate [frames/s] (overrides the container's rate)")  # fmt: skip
    p.add_argument("-o", "--output", required=True, metavar="TRACK.csv", help="track CSV to write")
    p.add_argument("--preview", metavar="PREVIEW.png",
                   help="write a picture of one frame with the track and markers drawn on it")  # fmt: skip
    p.add_argument("--start", type=int, default=0, metavar="N", help="first frame (default 0)")
    p.add_argument("--stop", type=int, default=None, metavar="N",
                   help="frame to stop before (default: the end)")  # fmt: skip
    p.add_argument("--region", metavar="X0,Y0,X1,Y1",
                   help="region of interest [image px, y down]: only blobs centred inside it "
                   "start a track (leave out a hand or another moving object)")  # fmt: skip
    p.add_argument("--force", action="store_true", help="overwrite existing output files")
    p.add_argument("--no-progress", action="store_true", help="no progress bar")
    p.add_argument("--scheduler", metavar="ADDRESS", default=None,
                   help="FOOTAGE a folder of video files: track them on the dask.distributed "
                   "cluster at this address (default: local processes)")  # fmt: skip
    p.add_argument("--workers", type=int, default=None, metavar="N",
                   help="FOOTAGE a folder of video files: local processes (default: the CPUs "
                   "available; 0: in this process)")  # fmt: skip
    c = p.add_argument_group("calibration (one of --scale, --reference, --markers)")
    how = c.add_mutually_exclusive_group(required=True)
    how.add_argument("--scale", type=float, metavar="M_PER_PX",
                     help="size of one pixel in the plane of flight [m/px]")  # fmt: skip
    how.add_argument("--reference", metavar="X1,Y1,X2,Y2,METRES",
                     help="two image points [px, y down] and their distance apart [m]")  # fmt: skip
    how.add_argument("--markers", type=float, metavar="SIZE_M",
                     help="side of the ArUco markers' black square [m]")  # fmt: skip
    c.add_argument("--origin", metavar="X_PX,Y_PX",
                   help="image point of the world origin (--scale, --reference)")  # fmt: skip
    c.add_argument("--rotation", type=float, default=0.0, metavar="DEG",
                   help="angle of the true horizontal, counter-clockwise on screen, for a "
                   "rolled camera (--scale, --reference) [deg]")  # fmt: skip
    c.add_argument("--scale-uncertainty", type=float, default=0.0, metavar="FRACTION",
                   help="relative standard uncertainty of the known length (the scale, the "
                   "reference distance or the marker side), e.g. 0.001")  # fmt: skip
    c.add_argument("--marker-dictionary", default="DICT_4X4_50", metavar="NAME",
                   help="ArUco dictionary (default DICT_4X4_50)")  # fmt: skip
    c.add_argument("--marker-layout", metavar="FILE",
                   help="CSV (id,x_m,y_m) or JSON of each marker's lower-left corner [m]")  # fmt: skip
    c.add_argument("--marker-frame", type=int, default=None, metavar="N",
                   help="frame to find the markers in (default: --start)")  # fmt: skip
    c.add_argument("--lens", metavar="LENS.json",
                   help="lens model from `fitdrag calibrate-lens`: centroids and marker "
                   "corners are undistorted with it; with --markers and --marker-layout the "
                   "camera's intrinsics and pose are written in the CSV header")  # fmt: skip
    c.add_argument("--readout-time", type=quantity("s"), default=None, metavar="S",
                   help="rolling-shutter readout time of the camera, first row to last, from "
                   "its data sheet [s] (or e.g. 1.2ms; default 0: global shutter)")  # fmt: skip
    c.add_argument("--readout-time-uncertainty", type=quantity("s"), default=None,
                   metavar="S", help="standard uncertainty of --readout-time [s] (or e.g. "
                   "0.1ms; default 0)")  # fmt: skip
    return p


# ------------------------------------------------------------------------------------------
# Output
# ------------------------------------------------------------------------------------------


def _check_output(path: str | None, option: str, force: bool) -> Path | None:
    if not path:
        return None
    p = Path(path)
    if p.is_dir():
        raise InputError(f"{option}: {p} is a folder; give a file name.")
    parent = p.parent if str(p.parent) else Path(".")
    if not parent.is_dir():
        raise InputFileNotFoundError(
            f"{option}: the folder {str(parent)!r} does not exist; create it or choose another "
            f"path."
        )
    if p.exists() and not force:
        raise OutputExistsError(f"{option}: {p} exists; pass --force to overwrite it.")
    return p


def _write_atomic(path: Path, write, force: bool, check=None) -> None:
    """Write through a temporary file in the same folder (``check(tmp)`` may refuse it
    before it replaces ``path``); never leave a partial file behind."""
    from fitdrag._files import write_atomic

    write_atomic(path, write, force=force, check=check)


# ------------------------------------------------------------------------------------------
# The camera
# ------------------------------------------------------------------------------------------


def _camera_wanted(args) -> bool:
    """Whether the CSV gets the camera (markers, layout and lens given); readout options
    without them are refused."""
    wanted = args.markers is not None and bool(args.marker_layout) and bool(args.lens)
    for opt, value in (("--readout-time", args.readout_time),
                       ("--readout-time-uncertainty", args.readout_time_uncertainty)):  # fmt: skip
        if value is None:
            continue
        if not wanted:
            raise InputError(
                f"{opt}: it describes the camera, which is measured from --markers with "
                f"--marker-layout and --lens; give those too, or leave {opt} out."
            )
        if not value >= 0:
            raise InputError(f"{opt}: expected a time >= 0 s, got {value!r} s.")
    return wanted


def _camera_text(pose) -> str:
    """Two lines for people: where the camera stands and how it reads out its rows."""
    import math

    cam = pose.camera
    shutter = (
        "global shutter"
        if cam.readout_time == 0
        else f"rolling shutter, readout {1e3 * cam.readout_time:.4g} ms ± "
        f"{1e3 * cam.readout_time_uncertainty:.2g} ms"
    )
    return (
        f"  camera: pose from {len(pose.ids)} marker(s), reprojection RMS "
        f"{pose.reprojection_rms_px:.3g} px; {pose.distance_to_board:.4g} m ± "
        f"{1e3 * pose.distance_to_board_uncertainty:.2g} mm from the board, optical axis "
        f"{math.degrees(pose.axis_angle):.3g}° ± {math.degrees(pose.axis_angle_uncertainty):.2g}° "
        f"from its normal\n  camera: {shutter}; written in the CSV header (camera_ lines)"
    )


# ------------------------------------------------------------------------------------------
# The command
# ------------------------------------------------------------------------------------------


#: Suffixes of video files: a folder holding such files (and no numbered frames) is a folder
#: of footage, each file tracked on its own.
VIDEO_SUFFIXES = (".avi", ".mp4", ".mkv", ".mov", ".m4v", ".mpg", ".mpeg", ".wmv", ".mjpeg")
_FRAME_SUFFIXES = (".png", ".tif", ".tiff", ".jpg", ".jpeg")


def _videos_in(path: str) -> list[Path] | None:
    """The video files of a folder of footage, or None (a video file, or a folder of
    numbered frames)."""
    p = Path(path)
    if not p.is_dir():
        return None
    files = sorted(q for q in p.iterdir() if q.is_file())
    if any(q.suffix.lower() in _FRAME_SUFFIXES for q in files):
        return None
    videos = [q for q in files if q.suffix.lower() in VIDEO_SUFFIXES]
    return videos or None


def run(args) -> int:
    # Tracking does small linear algebra only: a BLAS thread pool would cost more to start
    # (when numpy loads, just below) than it could save.  A value the user set is kept.
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    videos = _videos_in(args.footage)
    if videos is not None:
        return _run_folder(args, videos)
    if args.scheduler is not None or args.workers is not None:
        raise InputError(
            "--scheduler, --workers: only for a folder of video files (each tracked as a task); "
            "leave them out for one file."
        )
    from fitdrag.video.fit_worker import prepare_fits

    prepare_fits()  # the blob model fit gets ready while the rest loads and runs
    print(track_one(args))
    return 0


def _run_folder(args, videos: list[Path]) -> int:
    """Each video file of a folder tracked by its own task: ``-o`` is the output folder,
    ``NAME.csv`` per ``NAME.avi``."""
    import copy

    from fitdrag.run.tasks import Task, run_tasks

    if args.preview:
        raise InputError("--preview: not with a folder of footage; preview one file at a time.")
    outdir = Path(args.output)
    if not outdir.is_dir():
        raise InputFileNotFoundError(
            f"-o/--output: with a folder of footage, give an existing output folder (one "
            f"track CSV per video file); {str(outdir)!r} is not a folder."
        )
    if args.workers is not None and args.workers < 0:
        raise InputError(f"--workers: must be >= 0, got {args.workers}; 0 runs in this process.")
    tasks = []
    for v in videos:
        ns = copy.copy(args)
        ns.footage, ns.output, ns.no_progress = str(v), str(outdir / (v.stem + ".csv")), True
        _check_output(ns.output, "-o/--output", args.force)
        tasks.append(Task(v.name, track_one, (ns,), f"file {v.name}"))
    out = run_tasks(tasks, scheduler=args.scheduler, workers=args.workers,
                    progress=not args.no_progress and sys.stderr.isatty(),
                    description=f"tracking {len(tasks)} file(s)")  # fmt: skip
    failed = 0
    for t in tasks:
        o = out[t.key]
        if o.ok:
            print(f"{t.key}:\n{o.value}")
        else:
            failed += 1
            print(f"fitdrag track: {o.label}: {o.error}", file=sys.stderr)
    print(f"{len(tasks) - failed} of {len(tasks)} file(s) tracked into {outdir}")
    return 2 if failed else 0


def track_one(args) -> str:
    """Track one footage file as the options say; write its CSV (and preview); the summary.

    Module level, so that it can run as a Dask task (a folder of footage)."""
    from fitdrag.tracks.csv_file import read_track
    from fitdrag.video.sources import open_source
    from fitdrag.video.tracking import footage_track_csv_text, track_footage

    with_camera = _camera_wanted(args)
    out = _check_output(args.output, "-o/--output", args.force)
    preview = _check_output(args.preview, "--preview", args.force)
    if preview is not None and preview.resolve() == out.resolve():
        raise InputError("--preview: the same file as --output; give the picture its own name.")
    ft = track_footage(
        args.footage,
        fps=args.fps,
        start=args.start,
        stop=args.stop,
        scale=args.scale,
        origin=args.origin,
        rotation=args.rotation,
        reference=args.reference,
        markers=args.markers,
        marker_dictionary=args.marker_dictionary,
        marker_layout=args.marker_layout or None,
        marker_frame=args.marker_frame,
        lens=args.lens or None,
        scale_uncertainty=args.scale_uncertainty,
        region=args.region or None,
        progress=not args.no_progress,
        readout_time=args.readout_time or 0.0,
    )
    pose = None
    if with_camera:
        from fitdrag.geometry.footage_view import (
            camera_from_footage,
            camera_header,
            pose_focal_derivative,
        )

        camera, pose = camera_from_footage(
            ft,
            readout_time=args.readout_time or 0.0,
            readout_time_uncertainty=args.readout_time_uncertainty or 0.0,
        )
        focal = pose_focal_derivative(ft, camera)
    header = None if pose is None else camera_header(pose, ft.marker_frame, focal_derivative=focal)
    text = footage_track_csv_text(ft, camera=header)
    _write_atomic(
        out,
        lambda p: Path(p).write_text(text, encoding="utf-8"),
        args.force,
        check=read_track,  # the file must load as a track
    )
    summary = ft.summary()
    if pose is not None:
        summary += "\n" + _camera_text(pose)
    if preview is not None:
        from fitdrag.report.track_preview import track_preview_figure

        n_show = ft.preview_frame
        with open_source(args.footage) as source:
            image = source.read(n_show)
        fig = track_preview_figure(ft, image)
        _write_atomic(preview, lambda p: fig.savefig(p, dpi=100, format="png"), args.force)
    lines = [summary, f"wrote {out}"]
    if preview is not None:
        lines.append(f"wrote {preview}")
    return "\n".join(lines)


if __name__ == "__main__":  # pragma: no cover
    sys.exit("run as: fitdrag track ...")
