"""``fitdrag track``: footage -> calibrated track CSV (frame, t, x, y in metres, y up)."""

from __future__ import annotations

import argparse
import math
import os
import sys
import tempfile
from pathlib import Path

import numpy as np

NAME = "track"

EXAMPLE = """\
Examples:
  fitdrag track throw1.avi --fps 1000 --markers 0.050 -o throw1.csv --preview throw1.png
  fitdrag track frames/ --fps 2000 --scale 0.00125 --origin 12,790 -o throw2.csv
  fitdrag track throw3.mkv --fps 500 --reference 102.5,640,1180,655.5,1.000 -o throw3.csv
  fitdrag track throw4.avi --fps 1000 --markers 0.08 --marker-layout wall.csv \\
      --lens lens.json -o throw4.csv

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
uncertainty, reprojection RMS); it loads straight into `fitdrag fit`.
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
    p.add_argument("footage", metavar="FOOTAGE", help="video file or folder of numbered frames")
    p.add_argument("--fps", type=float, metavar="HZ",
                   help="capture frame rate [frames/s] (overrides the container's rate)")  # fmt: skip
    p.add_argument("-o", "--output", required=True, metavar="TRACK.csv", help="track CSV to write")
    p.add_argument("--preview", metavar="PREVIEW.png",
                   help="write a picture of one frame with the track and markers drawn on it")  # fmt: skip
    p.add_argument("--start", type=int, default=0, metavar="N", help="first frame (default 0)")
    p.add_argument("--stop", type=int, default=None, metavar="N",
                   help="frame to stop before (default: the end)")  # fmt: skip
    p.add_argument("--force", action="store_true", help="overwrite existing output files")
    p.add_argument("--no-progress", action="store_true", help="no progress bar")
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
                   "corners are undistorted with it")  # fmt: skip
    return p


# ------------------------------------------------------------------------------------------
# Parsing of option texts
# ------------------------------------------------------------------------------------------


def _numbers(text: str) -> list[float] | None:
    try:
        vals = [float(v) for v in str(text).replace(";", ",").split(",")]
    except ValueError:
        return None
    return vals if all(math.isfinite(v) for v in vals) else None


def parse_reference(text: str) -> tuple[float, float, float, float, float]:
    """Parse ``--reference X1,Y1,X2,Y2,METRES`` (pixels y down, distance in metres)."""
    vals = _numbers(text)
    if vals is None or len(vals) != 5:
        raise ValueError(
            f"--reference: expected X1,Y1,X2,Y2,METRES (five numbers separated by commas: two "
            f"image points in px and their distance apart in m), got {text!r}; e.g. "
            f"--reference 102.5,640,1180,655.5,1.000."
        )
    return vals[0], vals[1], vals[2], vals[3], vals[4]


def parse_origin(text: str) -> tuple[float, float]:
    """Parse ``--origin X_PX,Y_PX``."""
    vals = _numbers(text)
    if vals is None or len(vals) != 2:
        raise ValueError(
            f"--origin: expected X_PX,Y_PX (two numbers separated by a comma, image pixels, "
            f"y down), got {text!r}; e.g. --origin 12,790."
        )
    return vals[0], vals[1]


def _ranges(frames) -> str:
    """Compact text of frame numbers: '3-7 12 15-16'."""
    frames = sorted(int(f) for f in frames)
    out = []
    i = 0
    while i < len(frames):
        j = i
        while j + 1 < len(frames) and frames[j + 1] == frames[j] + 1:
            j += 1
        out.append(str(frames[i]) if i == j else f"{frames[i]}-{frames[j]}")
        i = j + 1
    return " ".join(out)


# ------------------------------------------------------------------------------------------
# Output
# ------------------------------------------------------------------------------------------


def _check_output(path: str | None, option: str, force: bool) -> Path | None:
    from fitdrag.tracks import OutputExistsError

    if not path:
        return None
    p = Path(path)
    if p.is_dir():
        raise ValueError(f"{option}: {p} is a folder; give a file name.")
    parent = p.parent if str(p.parent) else Path(".")
    if not parent.is_dir():
        raise FileNotFoundError(
            f"{option}: the folder {str(parent)!r} does not exist; create it or choose another "
            f"path."
        )
    if p.exists() and not force:
        raise OutputExistsError(f"{option}: {p} exists; pass --force to overwrite it.")
    return p


def _header_value(v) -> str | None:
    if isinstance(v, bool):
        return str(v).lower()
    if isinstance(v, int | np.integer):
        return str(int(v))
    if isinstance(v, float | np.floating):
        return repr(float(v)) if math.isfinite(v) else None
    if isinstance(v, str):
        return " ".join(v.splitlines()).strip()
    return None


def track_csv_text(meta: dict, frame, t, x, y, x_px, y_px, quality, sigma_px) -> str:
    """The track CSV: ``# key: value`` header lines, then frame,t,x,y,x_px,y_px,quality,
    sigma_px (t [s]; x, y [m], world, y up; x_px, y_px, sigma_px [px], image, y down)."""
    from fitdrag import __version__

    head = {
        "format": "fitdrag track; t [s]; x, y [m]; world frame, y up; x_px, y_px, sigma_px "
        "[px], image, y down",
        "written_by": f"fitdrag {__version__} (fitdrag track)",
    }
    for k, v in meta.items():
        sv = _header_value(v)
        if sv is not None and ":" not in k and k not in head:
            head[k] = sv
    lines = [f"# {k}: {v}".rstrip() for k, v in head.items()]
    lines.append("frame,t,x,y,x_px,y_px,quality,sigma_px")
    for row in zip(frame, t, x, y, x_px, y_px, quality, sigma_px):
        f, tt, xx, yy, u, v, q, s = row
        lines.append(
            f"{int(f)},{float(tt)!r},{float(xx)!r},{float(yy)!r},{u:.4f},{v:.4f},{q:.3f},{s:.4f}"
        )
    return "\n".join(lines) + "\n"


def _write_atomic(path: Path, write, force: bool, check=None) -> None:
    """Write through a temporary file in the same folder (``check(tmp)`` may refuse it
    before it replaces ``path``); never leave a partial file behind."""
    from fitdrag.tracks import OutputExistsError

    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=path.suffix, dir=path.parent)
    os.close(fd)
    try:
        write(tmp)
        if check is not None:
            check(tmp)
        mask = os.umask(0o022)
        os.umask(mask)
        os.chmod(tmp, 0o666 & ~mask)
        if path.exists() and not force:
            raise OutputExistsError(f"{path}: exists; pass --force to overwrite it.")
        os.replace(tmp, path)
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)


def _stretch(img: np.ndarray) -> np.ndarray:
    f = np.asarray(img, dtype=float)
    lo, hi = np.percentile(f, [0.5, 99.5])
    if not hi > lo:
        hi = lo + 1.0
    return np.clip((f - lo) / (hi - lo), 0.0, 1.0)


def preview_figure(image, det, cal, frame_number: int, summary: str):
    """Figure of one frame with the detected track, markers and world axes drawn on it."""
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure

    h, w = image.shape[:2]
    width = min(14.0, 3.0 + w / 100.0)
    fig = Figure(figsize=(width, 1.0 + 0.85 * width * h / w))
    ax = fig.add_subplot(1, 1, 1)
    ax.imshow(_stretch(image), cmap="gray", vmin=0, vmax=1, interpolation="nearest")
    if len(det):
        sc = ax.scatter(det.x_px, det.y_px, c=det.frame, s=9, cmap="viridis", marker="o",
                        linewidths=0, label="detected centroid")  # fmt: skip
        cb = fig.colorbar(sc, ax=ax, fraction=0.03, pad=0.01)
        cb.set_label("frame")
        here = np.flatnonzero(det.frame == frame_number)
        if here.size:
            i = int(here[0])
            ax.plot(det.x_px[i], det.y_px[i], marker="+", ms=16, mew=1.5, color="tab:red",
                    label=f"frame {frame_number}")  # fmt: skip
    corners = cal.details.get("corners_px", {})
    for mid, c in corners.items():
        c = np.asarray(c)
        used = mid in cal.details.get("ids", ())
        colour = "tab:orange" if used else "tab:gray"
        ax.plot(*np.vstack([c, c[:1]]).T, color=colour, lw=1.2)
        ax.plot(c[3, 0], c[3, 1], "s", ms=4, color=colour)
        ax.text(c[:, 0].mean(), c[:, 1].min() - 4, str(mid), color=colour, ha="center",
                va="bottom", fontsize=8)  # fmt: skip
    # world axes at the origin, a tenth of the frame width long
    length = 0.1 * w * cal.scale
    ox, oy = cal.world_to_pixel([0.0, length, 0.0], [0.0, 0.0, length])
    if np.all(np.isfinite(ox)) and np.all(np.isfinite(oy)):
        for k, name in ((1, "x"), (2, "y")):
            ax.annotate("", xy=(ox[k], oy[k]), xytext=(ox[0], oy[0]),
                        arrowprops={"arrowstyle": "->", "color": "tab:cyan", "lw": 1.5})  # fmt: skip
            ax.text(ox[k], oy[k], f" {name}", color="tab:cyan", fontsize=9)
    ax.set_xlim(-0.5, w - 0.5)
    ax.set_ylim(h - 0.5, -0.5)
    ax.set_xlabel("image x [px]")
    ax.set_ylabel("image y [px] (down)")
    ax.set_title(summary, fontsize=8, loc="left")
    if len(det):
        ax.legend(loc="upper right", fontsize=7, framealpha=0.7)
    fig.tight_layout()
    return fig


# ------------------------------------------------------------------------------------------
# The command
# ------------------------------------------------------------------------------------------


def _calibration(args, source, lens):
    from fitdrag.video.calibration import (
        calibration_from_markers,
        calibration_from_reference,
        calibration_from_scale,
        load_marker_layout,
    )

    h, _w = source.shape
    u = args.scale_uncertainty
    if args.markers is not None:
        if args.origin is not None or args.rotation:
            raise ValueError(
                "--origin/--rotation: they apply to --scale and --reference only; with "
                "--markers the markers set the origin and the horizontal (give a "
                "--marker-layout for a world frame of your own)."
            )
        layout = load_marker_layout(args.marker_layout) if args.marker_layout else None
        n = args.start if args.marker_frame is None else args.marker_frame
        image = source.read(n)
        try:
            cal = calibration_from_markers(
                image,
                args.markers,
                args.marker_dictionary,
                layout=layout,
                lens=lens,
                size_relative_uncertainty=u,
            )
        except ValueError as exc:
            if str(exc).startswith("markers: no "):
                raise ValueError(
                    f"{exc} (looked in frame {n} of {source.name}; choose another with "
                    f"--marker-frame)"
                ) from None
            raise
        return cal, n
    if args.marker_layout or args.marker_frame is not None:
        raise ValueError(
            "--marker-layout/--marker-frame: they apply to --markers only; drop them or "
            "calibrate with --markers SIZE_M."
        )
    origin = parse_origin(args.origin) if args.origin is not None else None
    if args.reference is not None:
        x1, y1, x2, y2, d = parse_reference(args.reference)
        cal = calibration_from_reference(
            x1, y1, x2, y2, d, origin=origin, lens=lens, rotation_deg=args.rotation,
            distance_relative_uncertainty=u,
        )  # fmt: skip
        return cal, None
    if origin is None:
        origin = (0.0, float(h - 1))  # the image's lower-left pixel
    cal = calibration_from_scale(
        args.scale, origin=origin, rotation_deg=args.rotation, lens=lens,
        scale_relative_uncertainty=u,
    )  # fmt: skip
    return cal, None


def run(args) -> int:
    from fitdrag.tracks import MIN_POINTS, Track, read_track
    from fitdrag.video.detect import detect_specimen
    from fitdrag.video.lens import load_lens
    from fitdrag.video.sources import check_frame_rate, open_source

    out = _check_output(args.output, "-o/--output", args.force)
    preview = _check_output(args.preview, "--preview", args.force)
    if preview is not None and preview.resolve() == out.resolve():
        raise ValueError("--preview: the same file as --output; give the picture its own name.")
    if args.scale_uncertainty is None or not (0.0 <= args.scale_uncertainty < 1.0):
        raise ValueError(
            f"--scale-uncertainty: a relative standard uncertainty must be >= 0 and < 1, got "
            f"{args.scale_uncertainty!r}; e.g. 0.001 for 0.1 %."
        )
    lens = load_lens(args.lens) if args.lens else None
    source = open_source(args.footage)
    try:
        fps = check_frame_rate(source, args.fps)
        h, w = source.shape
        if lens is not None and tuple(lens.image_size) != (w, h):
            raise ValueError(
                f"--lens: the lens model is for {lens.image_size[0]}x{lens.image_size[1]} px "
                f"images but the footage is {w}x{h} px; calibrate the lens at the footage's "
                f"resolution."
            )
        cal, marker_frame = _calibration(args, source, lens)
        n_frames = source.n_frames
        progress = not args.no_progress and (n_frames is None or n_frames > 200)
        det = detect_specimen(source, start=args.start, stop=args.stop, progress=progress)
        n_found = len(det)
        if n_found < MIN_POINTS:
            raise ValueError(
                f"{source.name}: the specimen was found in {n_found} frame(s), at least "
                f"{MIN_POINTS} are needed for a track; check the frame range (--start/--stop) "
                f"and that the specimen moves against a steady background."
            )
        x, y = cal.pixel_to_world(det.x_px, det.y_px)
        t = np.asarray(det.frame, dtype=float) / fps
        missing = det.missing_frames
        meta = {
            "footage": str(source.name),
            "fps": float(fps),
            "frame_range": f"{int(det.frame[0])}-{int(det.frame[-1])}",
            "frames_detected": int(n_found),
            "frames_missing": int(missing.size),
        }
        if missing.size:
            text = _ranges(missing)
            meta["missing_frames"] = text if len(text) <= 400 else text[:400] + " ..."
        meta.update(cal.to_meta())
        if args.lens:
            meta["lens_file"] = str(args.lens)
        if marker_frame is not None:
            meta["marker_frame"] = int(marker_frame)
        Track(t, x, y, frame=det.frame, meta=meta)  # validates before anything is written
        text = track_csv_text(
            meta, det.frame, t, x, y, det.x_px, det.y_px, det.quality, det.sigma_px
        )
        _write_atomic(
            out,
            lambda p: Path(p).write_text(text, encoding="utf-8"),
            args.force,
            check=read_track,  # the file must load as a track
        )
        summary = _summary(args, source, det, cal, fps)
        if preview is not None:
            n_show = marker_frame if marker_frame is not None else int(det.frame[n_found // 2])
            image = source.read(n_show)
            fig = preview_figure(image, det, cal, n_show, summary.replace("\n  ", "\n"))
            _write_atomic(preview, lambda p: fig.savefig(p, dpi=100, format="png"), args.force)
    finally:
        source.close()
    print(summary)
    print(f"wrote {out}")
    if preview is not None:
        print(f"wrote {preview}")
    return 0


def _summary(args, source, det, cal, fps) -> str:
    n_found = len(det)
    missing = det.missing_frames
    lines = [
        f"{source.name}: {n_found} frame(s) with the specimen, {missing.size} missing, "
        f"frames {int(det.frame[0])}-{int(det.frame[-1])} at {fps:g} frames/s",
    ]
    if missing.size:
        reasons: dict[str, int] = {}
        for _, why in det.missing:
            key = why.split(" (")[0]
            reasons[key] = reasons.get(key, 0) + 1
        top = sorted(reasons.items(), key=lambda kv: -kv[1])[:3]
        txt = _ranges(missing)
        if len(txt) > 120:
            txt = txt[:120] + " ..."
        lines.append(f"  missing: {txt}")
        lines.append("  reasons: " + "; ".join(f"{k} ({n})" for k, n in top))
    u = cal.scale_relative_uncertainty
    cal_txt = f"calibration: {cal.method}"
    if "ids" in cal.details:
        cal_txt += f" (markers {', '.join(map(str, cal.details['ids']))})"
    lines.append(
        f"  {cal_txt}; scale {cal.scale:.6g} m/px ± {100 * u:.3g} % (standard uncertainty)"
    )
    if cal.reprojection_rms_px is not None:
        lines.append(f"  reprojection RMS {cal.reprojection_rms_px:.3g} px")
    if cal.lens is not None:
        lines.append(f"  lens: {args.lens} (calibration RMS {cal.lens.rms:.3g} px)")
    return "\n".join(lines)


if __name__ == "__main__":  # pragma: no cover
    sys.exit("run as: fitdrag track ...")
