"""Track CSV files: import from a tracker's CSV and export that reads back exactly.

* :func:`read_track` reads a tracker's CSV (column names, units, pixel scale and origin,
  image-style y-down input, comment lines, delimiters) and returns a validated
  :class:`~fitdrag.tracks.track.Track`.  This is the one place where CSV input is converted
  from y-down to y-up.
* :func:`write_track` writes a track as CSV (SI units, y up) that :func:`read_track` reads
  back exactly.
"""

from __future__ import annotations

import csv
import hashlib
import math
import os
import warnings
from collections.abc import Mapping, Sequence
from pathlib import Path
from types import MappingProxyType
from typing import Any

import numpy as np

from fitdrag._files import check_output, write_text_atomic
from fitdrag.errors import InputError
from fitdrag.tracks.camera_header import CAMERA_KEYS, CameraHeader
from fitdrag.tracks.track import MIN_POINTS, Track, TrackImportWarning, check_input_file

__all__ = ["UNITS", "read_track", "write_track"]

#: Length units accepted by :func:`read_track`, with their size in metres ("px" needs a scale).
UNITS: Mapping[str, float | None] = MappingProxyType({"m": 1.0, "mm": 1e-3, "cm": 1e-2, "px": None})

#: Cell texts read as "no value" (the row is dropped), compared case-insensitively.
#: Largest track file read (bytes), unless the environment variable
#: ``FITDRAG_MAX_TRACK_BYTES`` lifts it: a throw's track is a few hundred to a few thousand
#: rows (a few hundred kB); far larger files are not one throw, and would take minutes and
#: gigabytes to fit.  [byte]
MAX_TRACK_BYTES = 20_000_000
#: Largest number of data rows, unless ``FITDRAG_MAX_TRACK_ROWS`` lifts it (100 s of flight at
#: 1000 frames/s). [1]
MAX_TRACK_ROWS = 100_000
#: Longest line of a track file (characters): a row of numbers is far shorter. [1]
MAX_LINE_CHARS = 10_000
#: Largest |position| [m] and |time| [s] taken as a measurement of a throw.
MAX_ABS_POSITION = 1e5
MAX_ABS_TIME = 1e7


def _limit(name: str, default: int) -> int:
    """A size limit: ``default``, or the whole number in the environment variable ``name``."""
    text = os.environ.get(name, "").strip()
    if not text:
        return default
    try:
        value = int(text)
    except ValueError:
        raise InputError(f"{name}: {text!r} is not a whole number; set it to a limit such as "
                         f"{default} or unset it.") from None  # fmt: skip
    if value <= 0:
        raise InputError(f"{name}: must be > 0, got {value}; unset it for the default {default}.")
    return value


_MISSING_TEXTS = frozenset({"", "nan", "-nan", "+nan", "na", "n/a", "null", "none"})

#: Delimiters tried by the automatic detection, in order of preference on ties.
_DELIMITER_CANDIDATES = (",", ";", "\t")

#: ``delimiter`` value meaning "runs of spaces or tabs".
_WHITESPACE = "whitespace"

_DELIMITER_ALIASES = {
    "tab": "\t",
    "\\t": "\t",
    "comma": ",",
    "semicolon": ";",
    "space": _WHITESPACE,
    "spaces": _WHITESPACE,
    "whitespace": _WHITESPACE,
    " ": _WHITESPACE,
}


# --------------------------------------------------------------------------------------------
# Import
# --------------------------------------------------------------------------------------------


def _fmt_lines(lines: Sequence[int], limit: int = 20) -> str:
    shown = ", ".join(str(n) for n in lines[:limit])
    if len(lines) > limit:
        shown += f" and {len(lines) - limit} more"
    return shown


def _check_number(src: str, name: str, value: Any, option: str, *, unit: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(
            f"{src}: {name} must be a number [{unit}], got {value!r}; set {option}."
        ) from None
    if not math.isfinite(v):
        raise InputError(
            f"{src}: {name} must be a finite number [{unit}], got {v!r}; set {option}."
        )
    return v


def _resolve_delimiter(src: str, delimiter: str | None) -> str | None:
    if delimiter is None:
        return None
    if not isinstance(delimiter, str) or delimiter == "":
        raise InputError(
            f"{src}: delimiter must be one character (or 'tab', 'whitespace'), got "
            f"{delimiter!r}; set --delimiter (delimiter=) or leave it out to detect it."
        )
    d = _DELIMITER_ALIASES.get(delimiter.lower(), delimiter)
    if d != _WHITESPACE and len(d) != 1:
        raise InputError(
            f"{src}: delimiter must be one character (or 'tab', 'whitespace'), got "
            f"{delimiter!r}; set --delimiter (delimiter=) or leave it out to detect it."
        )
    if d in ("\n", "\r", '"'):
        raise InputError(
            f"{src}: delimiter {delimiter!r} cannot separate columns; use ',', ';', 'tab' or "
            f"'whitespace'."
        )
    return d


def _detect_delimiter(header: str, samples: Sequence[str]) -> str:
    """Pick the delimiter from the header line and a few data lines.

    A candidate that appears in the header, and the same number of times in every sampled
    data line, wins (the most frequent such one); otherwise the candidate most frequent in
    the header; otherwise runs of whitespace.
    """
    best, best_count = None, 0
    for d in _DELIMITER_CANDIDATES:
        n = header.count(d)
        if n > best_count and all(s.count(d) == n for s in samples):
            best, best_count = d, n
    if best is not None:
        return best
    counts = [(header.count(d), d) for d in _DELIMITER_CANDIDATES]
    n, d = max(counts, key=lambda c: c[0])
    return d if n > 0 else _WHITESPACE


def _split(line: str, delimiter: str, where: str = "track file") -> list[str]:
    if delimiter == _WHITESPACE:
        return line.split()
    try:
        return [c.strip() for c in next(csv.reader([line], delimiter=delimiter))]
    except csv.Error as exc:
        raise InputError(
            f"{where}: not a row of CSV cells ({exc}): {line[:40]!r}...; correct or delete the "
            f"line."
        ) from None


def _delimiter_name(d: str) -> str:
    return {"\t": "tab", _WHITESPACE: "whitespace"}.get(d, d)


def _find_column(
    src: str, header: list[str], name: str, option: str, *, header_line: int
) -> int | None:
    key = name.strip().lower()
    hits = [i for i, h in enumerate(header) if h.strip().lower() == key]
    if len(hits) > 1:
        raise InputError(
            f"{src}, line {header_line}: column name {name!r} matches {len(hits)} columns "
            f"(columns {', '.join(str(i + 1) for i in hits)}); rename one of them in the file "
            f"or choose another column with {option}."
        )
    return hits[0] if hits else None


def _missing_column(src: str, name: str, header: list[str], option: str, kwarg: str) -> str:
    found = ", ".join(repr(h) for h in header)
    return (
        f"{src}: no column named {name!r} (columns found: {found}); set {option} "
        f"({kwarg}=) to the name of the column."
    )


def _no_times_message(
    src: str, header: list[str], t_col: str | None, have_frames: bool, fps: float | None
) -> str:
    found = ", ".join(repr(h) for h in header)
    if t_col is None:
        if not have_frames:
            return (
                f"{src}: times are to come from frame numbers (t_col=None) but there is no "
                f"frame column (columns found: {found}); name it with --frame-column "
                f"(frame_col=)."
            )
        return (
            f"{src}: times are to come from frame numbers (t_col=None) but no frame rate was "
            f"given; set --frame-rate (fps=) in Hz."
        )
    head = (
        f"{src}: no column named {t_col!r} (columns found: {found}); set --t-column "
        f"(t_col=) to the name of the time column, or, to compute times as frame / frame rate, "
    )
    if have_frames:
        return head + "give the frame rate in Hz with --frame-rate (fps=)."
    if fps is not None:
        return head + "name the frame-number column with --frame-column (frame_col=)."
    return (
        head + "name the frame-number column with --frame-column (frame_col=) and give the "
        "frame rate in Hz with --frame-rate (fps=)."
    )


def _to_metres(v: np.ndarray, units: str, factor: float) -> np.ndarray:
    """Convert lengths to metres; division by 1000 or 100 is correctly rounded for mm, cm."""
    if units == "m":
        return v
    if units == "mm":
        return v / 1000.0
    if units == "cm":
        return v / 100.0
    return v * factor


def _parse_cell(text: str) -> float | None:
    """A cell's number, ``nan`` for a missing value, ``None`` if it is not a number."""
    s = text.strip()
    if s.lower() in _MISSING_TEXTS:
        return math.nan
    if "_" in s:  # float() accepts "1_000"; a tracker never writes that
        return None
    try:
        return float(s)
    except ValueError:
        return None


def read_track(
    path: str | os.PathLike,
    *,
    t_col: str | None = "t",
    x_col: str = "x",
    y_col: str = "y",
    frame_col: str | None = None,
    sigma_col: str | None = None,
    fps: float | None = None,
    units: str = "m",
    scale: float | None = None,
    origin: Sequence[float] = (0.0, 0.0),
    y_down: bool = False,
    delimiter: str | None = None,
    comment: str | None = "#",
    strict: bool = False,
    encoding: str = "utf-8",
    physical: bool = True,
) -> Track:
    """Read a track from a CSV file written by a tracker (or by :func:`write_track`).

    The first line that is neither blank nor a comment holds the column names; names are
    matched case-insensitively with surrounding whitespace ignored.  Positions are converted
    to the world frame in metres::

        x_world = (x - origin[0]) * f
        y_world = (y - origin[1]) * f        (y_down=False)
        y_world = -(y - origin[1]) * f       (y_down=True, image-style input)
        sigma_world = sigma * f

    with ``f`` = 1 for "m", 1e-3 for "mm", 1e-2 for "cm" and ``scale`` for "px".

    Parameters
    ----------
    path : str or path-like
        The CSV file.
    t_col : str or None
        Name of the time column [s].  ``None``: compute times from ``frame_col`` and ``fps``.
        If the named column is absent and a frame column and ``fps`` are available, times
        are computed from the frames too.
    x_col, y_col : str
        Names of the position columns [``units``].
    frame_col : str, optional
        Name of the frame-number column [1].  A column literally named "frame" is used when
        this is not given.
    sigma_col : str, optional
        Name of a column with each point's position standard uncertainty [``units``].  A
        column literally named "sigma" is used when this is not given.
    fps : float, optional
        Frame rate, used to compute times as ``frame / fps`` (not shifted to start at zero)
        when there is no time column. [Hz]
    units : {"m", "mm", "cm", "px"}
        Unit of x, y and sigma in the file.  "px" needs ``scale``.
    scale : float, optional
        Image scale for ``units="px"``. [m/px]
    origin : (float, float)
        Point subtracted from (x, y) before conversion: the world origin in the file's
        coordinates. [``units``]
    y_down : bool
        The file's y axis points down (image rows); y is flipped to point up.
    delimiter : str, optional
        Column separator: one character, or "tab", or "whitespace" (runs of spaces/tabs).
        Detected among ``,``, ``;``, tab and whitespace when not given.
    comment : str or None
        Lines starting with this text (after leading whitespace) are skipped anywhere.  Leading
        comment lines of the form ``# key: value`` are kept in ``meta["header"]``.  ``None``
        turns comment handling off.
    physical : bool
        Refuse positions beyond ±:data:`MAX_ABS_POSITION` m and times beyond
        ±:data:`MAX_ABS_TIME` s (not a throw; such numbers overflow the fit).  False reads
        any finite number (for files that are not a throw's track).
    strict : bool
        Raise instead of dropping rows with blank or NaN cells.
    encoding : str
        Text encoding of the file (a UTF-8 byte-order mark is ignored).

    Returns
    -------
    Track
        With ``meta`` holding ``source`` (path), ``sha256`` (of the file's bytes), ``import``
        (the options used), ``dropped_rows`` (1-based line numbers), ``header`` (key/value
        comment lines), if the header states them, ``scale_relative_uncertainty`` [1]
        and ``roll_uncertainty_deg`` [deg] (floats), and, when the file has any of the
        columns in :data:`PER_POINT_COLUMNS` (footage tracks), ``per_point``: a mapping from
        each such column's name to a read-only float array with one value per point of the
        track (NaN where the cell is blank or NaN; such cells do not drop the row).  When the
        header states the camera that took the footage (``camera_`` lines of ``fitdrag
        track``), ``camera``: a :class:`~fitdrag.tracks.camera_header.CameraHeader`, and
        ``per_point`` holds the :data:`PIXEL_COLUMNS` (x_px, y_px, sigma_px) as well.

    Raises
    ------
    FileNotFoundError
        If the file does not exist.
    ValueError
        For a directory, an empty file, bad options, a missing column, a cell that is not a
        number, times that do not increase strictly, fewer than ``MIN_POINTS`` usable rows,
        or (with ``strict``) any blank/NaN cell.  Every message names the file.

    Warns
    -----
    TrackImportWarning
        When rows with blank or NaN cells are dropped (naming their line numbers).
    """
    p = Path(path)
    src = str(p)
    check_input_file(p)

    # ---- options ---------------------------------------------------------------------------
    if not isinstance(units, str) or units.strip().lower() not in UNITS:
        raise InputError(
            f"{src}: unknown units {units!r}; choose one of {', '.join(UNITS)} (--units)."
        )
    units = units.strip().lower()
    for name, value, option in (
        ("x_col", x_col, "--x-column"),
        ("y_col", y_col, "--y-column"),
    ):
        if not isinstance(value, str) or not value.strip():
            raise InputError(f"{src}: {name} must be a column name, got {value!r}; set {option}.")
    for name, value, option in (
        ("t_col", t_col, "--t-column"),
        ("frame_col", frame_col, "--frame-column"),
        ("sigma_col", sigma_col, "--sigma-column"),
    ):
        if value is not None and (not isinstance(value, str) or not value.strip()):
            raise InputError(
                f"{src}: {name} must be a column name or None, got {value!r}; set {option}."
            )
    if fps is not None:
        fps = _check_number(src, "frame rate", fps, "--frame-rate (fps=)", unit="Hz")
        if fps <= 0:
            raise InputError(
                f"{src}: frame rate must be > 0 Hz, got {fps!r}; set --frame-rate (fps=) to the "
                f"camera's frames per second."
            )
    if units == "px":
        if scale is None:
            raise InputError(
                f"{src}: units 'px' need an image scale in m/px; set --scale (scale=), e.g. "
                f"--scale 0.0005 for 0.5 mm per pixel."
            )
        scale = _check_number(src, "scale", scale, "--scale (scale=)", unit="m/px")
        if scale == 0:
            raise InputError(
                f"{src}: zero scale (0 m/px) would put every point at the origin; set --scale "
                f"(scale=) to the image scale in m/px (> 0)."
            )
        if scale < 0:
            raise InputError(
                f"{src}: scale must be > 0 m/px, got {scale!r}; set --scale (scale=) to the "
                f"image scale in m/px."
            )
        factor = scale
    else:
        if scale is not None:
            raise InputError(
                f"{src}: a scale ({scale!r} m/px) was given but units are {units!r}; set "
                f"--units px (units='px') for pixel input, or leave the scale out."
            )
        factor = UNITS[units]
    try:
        ox, oy = origin
    except (TypeError, ValueError):
        raise InputError(
            f"{src}: origin must be two numbers (x, y) in the file's units, got {origin!r}; "
            f"set --origin X,Y."
        ) from None
    ox = _check_number(src, "origin x", ox, "--origin X,Y", unit=units)
    oy = _check_number(src, "origin y", oy, "--origin X,Y", unit=units)
    delim = _resolve_delimiter(src, delimiter)
    if comment is not None and (not isinstance(comment, str) or comment.strip() == ""):
        raise InputError(
            f"{src}: comment must be a non-blank prefix such as '#', or None, got {comment!r}."
        )

    # ---- bytes, hash, text -----------------------------------------------------------------
    max_bytes = _limit("FITDRAG_MAX_TRACK_BYTES", MAX_TRACK_BYTES)
    size = p.stat().st_size
    if size > max_bytes:
        raise InputError(
            f"{src}: {size} bytes is more than the limit of {max_bytes} bytes for a track file "
            f"(a throw is a few hundred to a few thousand rows); cut the file to the flight, or "
            f"lift the limit with the environment variable FITDRAG_MAX_TRACK_BYTES={size}."
        )
    raw = p.read_bytes()
    sha256 = hashlib.sha256(raw).hexdigest()
    enc = "utf-8-sig" if encoding.lower().replace("_", "-") in ("utf-8", "utf8") else encoding
    try:
        text = raw.decode(enc)
    except UnicodeDecodeError as exc:
        raise InputError(
            f"{src}: cannot decode byte {raw[exc.start]:#04x} at offset {exc.start} as "
            f"{encoding}; pass the file's encoding (encoding=..., e.g. 'latin-1')."
        ) from None
    except LookupError:
        raise InputError(
            f"{src}: unknown text encoding {encoding!r}; use e.g. 'utf-8' or 'latin-1'."
        ) from None
    lines = text.replace("\r\n", "\n").replace("\r", "\n").split("\n")
    longest = max(range(len(lines)), key=lambda i: len(lines[i]))
    if len(lines[longest]) > MAX_LINE_CHARS:
        raise InputError(
            f"{src}, line {longest + 1}: {len(lines[longest])} characters long, more than the "
            f"limit of {MAX_LINE_CHARS} for a line of a track file; this is not a row of "
            f"numbers: correct or delete the line."
        )

    def is_comment(s: str) -> bool:
        return comment is not None and s.lstrip().startswith(comment)

    # ---- header comments and the header line -----------------------------------------------
    header_meta: dict[str, str] = {}
    header_idx = None
    for i, line in enumerate(lines):
        if not line.strip():
            continue
        if is_comment(line):
            body = line.lstrip()[len(comment) :].strip()
            key, sep, value = body.partition(":")
            if sep and key.strip():
                header_meta[key.strip()] = value.strip()
            continue
        header_idx = i
        break
    if header_idx is None:
        raise InputError(
            f"{src}: the file is empty (no header line and no data); export the track again "
            f"with a header line such as 't,x,y'."
        )
    data_idx = [
        i
        for i in range(header_idx + 1, len(lines))
        if lines[i].strip() and not is_comment(lines[i])
    ]
    header_line = header_idx + 1
    max_rows = _limit("FITDRAG_MAX_TRACK_ROWS", MAX_TRACK_ROWS)
    if len(data_idx) > max_rows:
        raise InputError(
            f"{src}: {len(data_idx)} data rows, more than the limit of {max_rows} for one throw "
            f"(100 s of flight at 1000 frames/s); cut the file to the flight, or lift the limit "
            f"with the environment variable FITDRAG_MAX_TRACK_ROWS={len(data_idx)}."
        )
    if delim is None:
        delim = _detect_delimiter(lines[header_idx], [lines[i] for i in data_idx[:5]])
    header = _split(lines[header_idx], delim, f"{src}, line {header_idx + 1}")
    if header and all(_parse_cell(h) is not None and h.strip() for h in header):
        raise InputError(
            f"{src}, line {header_line}: the first line holds numbers, not column names; add a "
            f"header line such as 't,x,y' naming the columns."
        )

    # ---- columns ---------------------------------------------------------------------------
    def need(name: str, option: str, kwarg: str) -> int:
        j = _find_column(src, header, name, option, header_line=header_line)
        if j is None:
            raise InputError(_missing_column(src, name, header, option, kwarg))
        return j

    jx = need(x_col, "--x-column", "x_col")
    jy = need(y_col, "--y-column", "y_col")
    if frame_col is not None:
        jf = need(frame_col, "--frame-column", "frame_col")
    else:
        jf = _find_column(src, header, "frame", "--frame-column", header_line=header_line)
    if sigma_col is not None:
        js = need(sigma_col, "--sigma-column", "sigma_col")
    else:
        js = _find_column(src, header, "sigma", "--sigma-column", header_line=header_line)
    jt = None
    if t_col is not None:
        jt = _find_column(src, header, t_col, "--t-column", header_line=header_line)
    if jt is None:
        if jf is None or fps is None:
            raise InputError(_no_times_message(src, header, t_col, jf is not None, fps))
        time_from = "frames"
    else:
        time_from = "column"
        if fps is not None:
            warnings.warn(
                f"{src}: the frame rate ({fps!r} Hz) is not used because the file has a time "
                f"column {header[jt]!r}; pass t_col=None (--t-column none) to compute times "
                f"from frame numbers instead.",
                TrackImportWarning,
                stacklevel=2,
            )

    columns: list[tuple[str, int]] = []  # (role, index)
    if jt is not None:
        columns.append(("t", jt))
    if jf is not None:
        columns.append(("frame", jf))
    columns += [("x", jx), ("y", jy)]
    if js is not None:
        columns.append(("sigma", js))

    # ---- data rows -------------------------------------------------------------------------
    values: dict[str, list[float]] = {role: [] for role, _ in columns}
    kept_lines: list[int] = []
    dropped: list[int] = []
    dropped_cols: set[str] = set()
    for i in data_idx:
        lineno = i + 1
        cells = _split(lines[i], delim, f"{src}, line {i + 1}")
        row: dict[str, float] = {}
        missing = False
        for role, j in columns:
            text_ = cells[j] if j < len(cells) else ""
            v = _parse_cell(text_)
            if v is None:
                raise InputError(
                    f"{src}, line {lineno}, column {header[j]!r}: {text_!r} is not a number; "
                    f"correct the cell, or delete the row."
                )
            if math.isinf(v):
                raise InputError(
                    f"{src}, line {lineno}, column {header[j]!r}: {text_!r} is not a finite "
                    f"number; correct the cell, or delete the row."
                )
            if physical and role == "t" and abs(v) > MAX_ABS_TIME:
                raise InputError(
                    f"{src}, line {lineno}, column {header[j]!r}: {text_!r} s is beyond "
                    f"±{MAX_ABS_TIME:g} s, not a time of a throw; correct the cell, or delete "
                    f"the row."
                )
            if physical and role in ("x", "y", "sigma") and abs(v) * factor > MAX_ABS_POSITION:
                raise InputError(
                    f"{src}, line {lineno}, column {header[j]!r}: {text_!r} {units} is beyond "
                    f"±{MAX_ABS_POSITION:g} m, not a position of a throw; correct the cell, or "
                    f"delete the row."
                )
            if math.isnan(v):
                missing = True
                dropped_cols.add(header[j])
            row[role] = v
        if missing:
            dropped.append(lineno)
            continue
        if "frame" in row and row["frame"] != round(row["frame"]):
            raise InputError(
                f"{src}, line {lineno}, column {header[jf]!r}: frame number {cells[jf]!r} is not "
                f"a whole number; check that --frame-column names the frame-number column."
            )
        if "sigma" in row and row["sigma"] <= 0:
            raise InputError(
                f"{src}, line {lineno}, column {header[js]!r}: position uncertainty "
                f"{cells[js]!r} must be > 0; correct the cell, or leave --sigma-column out to "
                f"estimate the noise from the fit."
            )
        kept_lines.append(lineno)
        for role, v in row.items():
            values[role].append(v)

    if dropped:
        cols = ", ".join(repr(c) for c in sorted(dropped_cols))
        if strict:
            raise InputError(
                f"{src}: {len(dropped)} row(s) with blank or NaN cells (in {cols}) at line(s) "
                f"{_fmt_lines(dropped)}; fill in or delete those rows, or leave out --strict "
                f"(strict=False) to drop them."
            )
        warnings.warn(
            f"{src}: dropped {len(dropped)} row(s) with blank or NaN cells (in {cols}) at "
            f"line(s) {_fmt_lines(dropped)}.",
            TrackImportWarning,
            stacklevel=2,
        )

    n = len(kept_lines)
    if n < MIN_POINTS:
        extra = f" ({len(dropped)} row(s) with blank or NaN cells dropped)" if dropped else ""
        raise InputError(
            f"{src}: {n} usable point(s){extra}, at least {MIN_POINTS} are needed for a fit; "
            f"use a longer stretch of the flight."
        )

    frame = np.asarray(values["frame"], dtype=float) if jf is not None else None
    if jt is not None:
        t = np.asarray(values["t"], dtype=float)
        t_name = f"column {header[jt]!r}"
    else:
        t = frame / fps
        t_name = f"frame {header[jf]!r} / {fps!r} Hz"

    dt = np.diff(t)
    bad = np.flatnonzero(dt <= 0)
    if bad.size:
        k = int(bad[0])
        kind = "repeats" if dt[k] == 0 else "is earlier than"
        more = f" ({bad.size} such places in all)" if bad.size > 1 else ""
        if jt is not None:
            a, b = f"t = {float(t[k + 1])!r} s", f"t = {float(t[k])!r} s"
        else:
            a, b = f"frame {int(frame[k + 1])}", f"frame {int(frame[k])}"
        raise InputError(
            f"{src}: times ({t_name}) must increase strictly, but line {kept_lines[k + 1]} "
            f"has {a}, which {kind} line {kept_lines[k]} with {b}{more}; sort the rows by "
            f"time and remove repeated rows."
        )

    x = np.asarray(values["x"], dtype=float)
    y = np.asarray(values["y"], dtype=float)
    if ox != 0.0:
        x = x - ox
    if oy != 0.0:
        y = y - oy
    x, y = _to_metres(x, units, factor), _to_metres(y, units, factor)
    if y_down:
        y = -y + 0.0  # "+ 0.0" turns -0.0 into 0.0
    sigma = None
    if js is not None:
        sigma = _to_metres(np.asarray(values["sigma"], dtype=float), units, factor)

    meta: dict[str, Any] = {
        "source": src,
        "sha256": sha256,
        "import": {
            "t_col": header[jt] if jt is not None else None,
            "x_col": header[jx],
            "y_col": header[jy],
            "frame_col": header[jf] if jf is not None else None,
            "sigma_col": header[js] if js is not None else None,
            "time_from": time_from,
            "fps": fps,
            "units": units,
            "scale": scale,
            "origin": [ox, oy],
            "y_down": bool(y_down),
            "delimiter": _delimiter_name(delim),
            "comment": comment,
            "strict": bool(strict),
            "encoding": encoding,
        },
        "dropped_rows": dropped,
        "header": header_meta,
    }
    # calibration uncertainties stated in the header travel as numbers
    for key, unit in (("scale_relative_uncertainty", "1"), ("roll_uncertainty_deg", "deg")):
        if key in header_meta:
            text_ = header_meta[key]
            v = _parse_cell(text_)
            if v is None or not math.isfinite(v) or v < 0:
                raise InputError(
                    f"{src}: header entry '{key}' must be a number >= 0 [{unit}], got "
                    f"{text_!r}; correct that comment line or delete it."
                )
            meta[key] = v
    camera = CameraHeader.from_lines(header_meta, src)
    per_point = _per_point_columns(src, header, header_line, lines, kept_lines, delim)
    if camera is not None:
        pixels = _per_point_columns(src, header, header_line, lines, kept_lines, delim,
                                    PIXEL_COLUMNS)  # fmt: skip
        lacking = [c for c in PIXEL_COLUMNS[:2] if c not in pixels]
        if lacking:
            raise InputError(
                f"{src}: the header states a camera but the file has no {' or '.join(lacking)} "
                f"column (the image position the camera saw); write the track again with "
                f"fitdrag track, or delete every camera_ line to use it as a planar track."
            )
        per_point.update(pixels)
        meta["camera"] = camera
    if per_point:
        meta["per_point"] = per_point
    return Track(t=t, x=x, y=y, sigma=sigma, frame=frame, meta=meta)


#: Optional per-point columns of the footage track CSV (``fitdrag track``) that
#: :func:`read_track` keeps in ``meta["per_point"]``: the model fit's apparent diameter of
#: the specimen perpendicular to its motion and its standard uncertainty [px], and the first
#: and last image rows its outline spans.
PER_POINT_COLUMNS = ("outline_diameter_px", "u_outline_diameter_px", "row_first", "row_last")

#: Per-point columns also kept in ``meta["per_point"]`` when the header states a camera
#: (:class:`~fitdrag.tracks.camera_header.CameraHeader`): the specimen's centroid in the
#: recorded image (x right, y down) and its standard uncertainty [px].
PIXEL_COLUMNS = ("x_px", "y_px", "sigma_px")


def _per_point_columns(src, header, header_line, lines, kept_lines, delim,
                       names=PER_POINT_COLUMNS) -> dict:  # fmt: skip
    """The optional per-point columns ``names`` present in the file, as read-only float
    arrays aligned with the track's points (NaN for a blank or NaN cell)."""
    out: dict[str, np.ndarray] = {}
    for name in names:
        j = _find_column(src, header, name, name, header_line=header_line)
        if j is None:
            continue
        vals = np.empty(len(kept_lines))
        for k, lineno in enumerate(kept_lines):
            cells = _split(lines[lineno - 1], delim, f"{src}, line {lineno}")
            text_ = cells[j] if j < len(cells) else ""
            v = _parse_cell(text_) if text_.strip() else float("nan")
            if v is None or math.isinf(v):
                raise InputError(
                    f"{src}, line {lineno}, column {header[j]!r}: {text_!r} is not a number; "
                    f"correct the cell, or leave it blank."
                )
            vals[k] = v
        vals.setflags(write=False)
        out[name] = vals
    return out


# --------------------------------------------------------------------------------------------
# Export
# --------------------------------------------------------------------------------------------

#: Metadata entries that describe one particular import and are not written as header lines.
_NOT_WRITTEN = frozenset({"header", "import", "dropped_rows", "source", "sha256", "per_point"})


def _header_key_ok(key: Any) -> bool:
    return (
        isinstance(key, str)
        and key.strip() != ""
        and ":" not in key
        and "\n" not in key
        and "\r" not in key
    )


def _header_value(value: Any) -> str | None:
    if isinstance(value, bool):
        return str(value).lower()
    if isinstance(value, int | np.integer):
        return str(int(value))
    if isinstance(value, float | np.floating):
        return repr(float(value)) if math.isfinite(value) else None
    if isinstance(value, str):
        return " ".join(value.splitlines()).strip()
    return None


def write_track(track: Track, path: str | os.PathLike, *, force: bool = False) -> Path:
    """Write a track as CSV that :func:`read_track` reads back exactly.

    Columns: ``frame`` (if known), ``t`` [s], ``x`` [m], ``y`` [m] (world frame, y up),
    ``sigma`` [m] (if known); floats are written with ``repr`` so they round-trip exactly.
    Leading comment lines ``# key: value`` carry scalar metadata: the format, the writing
    software, the track's source file and its SHA-256 (``source``, ``source_sha256``), the
    entries of ``meta["header"]`` and the other scalar ``meta`` entries (for example
    ``scale_relative_uncertainty``).  A camera's ``camera_`` lines are not written: they
    belong with the image columns of a footage track, which this file does not hold.

    The file is written to a temporary file in the same directory and moved into place, so a
    reader never sees a half-written file.

    Parameters
    ----------
    track : Track
        The track to write.
    path : str or path-like
        Output file.
    force : bool
        Overwrite an existing file.

    Returns
    -------
    pathlib.Path
        The path written.

    Raises
    ------
    OutputExistsError
        (a FileExistsError and ValueError) if the file exists and ``force`` is false.
    FileNotFoundError
        If the output directory does not exist.
    ValueError
        If ``track`` is not a Track or ``path`` is a directory.
    """
    from fitdrag._version import __version__

    if not isinstance(track, Track):
        raise InputError(
            f"track: expected a fitdrag Track, got {type(track).__name__}; build one with "
            f"Track(t, x, y) or read_track(path)."
        )
    p = check_output(path, force=force)

    meta = dict(track.meta)
    items: dict[str, str] = {}
    hdr = meta.get("header")
    if isinstance(hdr, Mapping):
        for k, v in hdr.items():
            sv = _header_value(v)
            if _header_key_ok(k) and sv is not None and k.strip() not in CAMERA_KEYS:
                items[k.strip()] = sv
    for k, v in meta.items():
        if k in _NOT_WRITTEN:
            continue
        sv = _header_value(v)
        if _header_key_ok(k) and sv is not None:
            items[k.strip()] = sv
    for k_meta, k_file in (("source", "source"), ("sha256", "source_sha256")):
        sv = _header_value(meta.get(k_meta))
        if sv:
            items[k_file] = sv
    fixed = {
        "format": "fitdrag track; t [s]; x, y, sigma [m]; world frame, y up",
        "written_by": f"fitdrag {__version__}",
    }
    for k in fixed:
        items.pop(k, None)
    out = [f"# {k}: {v}".rstrip() for k, v in {**fixed, **items}.items()]

    cols: list[tuple[str, np.ndarray, bool]] = []
    if track.frame is not None:
        cols.append(("frame", track.frame, True))
    cols += [("t", track.t, False), ("x", track.x, False), ("y", track.y, False)]
    if track.sigma is not None:
        cols.append(("sigma", track.sigma, False))
    out.append(",".join(name for name, _, _ in cols))
    as_text = [
        [str(int(v)) for v in arr] if is_int else [repr(float(v)) for v in arr]
        for _, arr, is_int in cols
    ]
    out.extend(",".join(row) for row in zip(*as_text))
    text = "\n".join(out) + "\n"

    return write_text_atomic(p, text, force=force)
