"""Shared command-line options for reading track CSV files.

Used by every command that reads tracks (``fitdrag fit`` and later ones)::

    from fitdrag.commands._import_options import add_import_options, read_tracks_from_args

    add_import_options(parser)                 # in register()
    tracks = read_tracks_from_args(args.tracks, args)   # in run()

The options map one to one onto the keyword arguments of :func:`fitdrag.tracks.read_track`;
their ``dest`` names start with ``import_`` so they never clash with a command's own options
(``fitdrag track`` has its own frame-rate option for footage).
"""

from __future__ import annotations

import argparse
import math
import sys
import warnings
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

from fitdrag.errors import InputError

if TYPE_CHECKING:  # pragma: no cover - annotations only
    from fitdrag.tracks.track import Track

__all__ = ["add_import_options", "import_options_from_args", "read_tracks_from_args"]

#: ``--t-column`` value meaning "no time column: compute times from frame numbers".
NO_TIME_COLUMN = "none"

#: The length units of --units: the keys of fitdrag.tracks.UNITS, written out so that building
#: the parser does not load the track reader (a test checks that the two agree).
UNIT_CHOICES = ("m", "mm", "cm", "px")


def _origin(text: str) -> tuple[float, float]:
    parts = [p.strip() for p in text.replace(";", ",").split(",")]
    try:
        if len(parts) != 2:
            raise ValueError
        x, y = float(parts[0]), float(parts[1])
        if not (math.isfinite(x) and math.isfinite(y)):
            raise ValueError
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"expected two numbers X,Y (e.g. 640,360), got {text!r}"
        ) from None
    return x, y


def _positive_float(unit: str):
    def parse(text: str) -> float:
        try:
            v = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"expected a number in {unit}, got {text!r}") from None
        if not math.isfinite(v) or v <= 0:
            raise argparse.ArgumentTypeError(f"must be a finite number > 0 {unit}, got {text!r}")
        return v

    parse.__name__ = f"number [{unit}]"
    return parse


def add_import_options(parser: argparse.ArgumentParser) -> argparse._ArgumentGroup:
    """Add the "track import" option group to ``parser`` and return the group."""
    g = parser.add_argument_group(
        "track import",
        "How to read the track CSV files: column names, units and axes. Positions are "
        "converted to metres in the world frame (x horizontal, y up).",
    )
    g.add_argument(
        "--t-column",
        dest="import_t_column",
        metavar="NAME",
        default="t",
        help="name of the time column, in seconds [s] (default: t; matched ignoring case); "
        f"'{NO_TIME_COLUMN}' computes times from the frame column and --frame-rate",
    )
    g.add_argument(
        "--x-column",
        dest="import_x_column",
        metavar="NAME",
        default="x",
        help="name of the horizontal position column, in --units (default: x)",
    )
    g.add_argument(
        "--y-column",
        dest="import_y_column",
        metavar="NAME",
        default="y",
        help="name of the vertical position column, in --units (default: y)",
    )
    g.add_argument(
        "--frame-column",
        dest="import_frame_column",
        metavar="NAME",
        default=None,
        help="name of the frame-number column, whole frames [1] (default: a column named "
        "'frame' if there is one)",
    )
    g.add_argument(
        "--sigma-column",
        dest="import_sigma_column",
        metavar="NAME",
        default=None,
        help="name of a column with each point's position standard uncertainty, in --units "
        "(default: a column named 'sigma' if there is one; otherwise the noise is estimated)",
    )
    g.add_argument(
        "--frame-rate",
        dest="import_frame_rate",
        metavar="HZ",
        type=_positive_float("Hz"),
        default=None,
        help="camera frame rate [Hz]; times are frame / HZ (not shifted to zero) when the file "
        f"has no time column, or with --t-column {NO_TIME_COLUMN}",
    )
    g.add_argument(
        "--units",
        dest="import_units",
        choices=list(UNIT_CHOICES),
        default="m",
        help="length unit of x, y and sigma in the file [m, mm, cm or px]; px needs --scale "
        "(default: m)",
    )
    g.add_argument(
        "--scale",
        dest="import_scale",
        metavar="M_PER_PX",
        type=float,
        default=None,
        help="image scale for --units px [m/px], e.g. 0.0005 for 0.5 mm per pixel",
    )
    g.add_argument(
        "--origin",
        dest="import_origin",
        metavar="X,Y",
        type=_origin,
        default=(0.0, 0.0),
        help="world origin in the file's coordinates [--units, e.g. px], subtracted before "
        "scaling (default: 0,0; write --origin=-5,10 when X is negative)",
    )
    g.add_argument(
        "--y-down",
        dest="import_y_down",
        action="store_true",
        help="the file's y axis points down, as image rows do (flag, no unit); y is flipped "
        "to point up",
    )
    g.add_argument(
        "--delimiter",
        dest="import_delimiter",
        metavar="D",
        default=None,
        help="column separator, one character or 'tab' or 'whitespace' (text, no unit; "
        "default: detected among , ; tab and whitespace)",
    )
    g.add_argument(
        "--encoding",
        dest="import_encoding",
        metavar="NAME",
        default="utf-8",
        help="text encoding of the files (text, no unit; default: utf-8)",
    )
    g.add_argument(
        "--strict",
        dest="import_strict",
        action="store_true",
        help="stop with an error at rows with blank or NaN cells instead of dropping them "
        "with a warning (flag, no unit)",
    )
    return g


def import_options_from_args(args: argparse.Namespace) -> dict[str, Any]:
    """The keyword arguments for :func:`fitdrag.tracks.read_track` given by ``args``.

    Options that ``args`` lacks take read_track's defaults, so a command may add only some.
    """
    t_col = getattr(args, "import_t_column", "t")
    if t_col is not None and t_col.strip().lower() == NO_TIME_COLUMN:
        t_col = None
    return {
        "t_col": t_col,
        "x_col": getattr(args, "import_x_column", "x"),
        "y_col": getattr(args, "import_y_column", "y"),
        "frame_col": getattr(args, "import_frame_column", None),
        "sigma_col": getattr(args, "import_sigma_column", None),
        "fps": getattr(args, "import_frame_rate", None),
        "units": getattr(args, "import_units", "m"),
        "scale": getattr(args, "import_scale", None),
        "origin": tuple(getattr(args, "import_origin", (0.0, 0.0))),
        "y_down": bool(getattr(args, "import_y_down", False)),
        "delimiter": getattr(args, "import_delimiter", None),
        "strict": bool(getattr(args, "import_strict", False)),
        "encoding": getattr(args, "import_encoding", "utf-8"),
    }


def read_tracks_from_args(
    paths: Sequence[str], args: argparse.Namespace, *, stderr=None
) -> list[Track]:
    """Read every track file in ``paths`` with the import options in ``args``.

    Warnings about dropped rows are printed to ``stderr`` (default ``sys.stderr``) as one
    line each, ``warning: <message>``; the dropped line numbers are also in each track's
    ``meta["dropped_rows"]``.

    Raises
    ------
    ValueError, FileNotFoundError
        As :func:`fitdrag.tracks.read_track` does; ValueError if ``paths`` is empty.
    """
    from fitdrag.tracks.csv_file import read_track

    if isinstance(paths, str):
        paths = [paths]
    if not paths:
        raise InputError("no track file given; name at least one CSV file.")
    options = import_options_from_args(args)
    out = stderr if stderr is not None else sys.stderr
    tracks = []
    for path in paths:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            tracks.append(read_track(path, **options))
        for w in caught:
            print(f"warning: {w.message}", file=out)
    return tracks
