"""Tests of fitdrag.commands._import_options (the track import options shared by commands).

Each test says what it checks against:
- closed-form/independent: the expected numbers are worked out by hand in the test (pixel
  conversion, frame/fps);
- regression: fixed behaviour (mostly exact error messages) that must not change unnoticed.
"""

from __future__ import annotations

import argparse
import io
import re
import warnings
from pathlib import Path

import numpy as np
import pytest

from fitdrag.commands._import_options import (
    add_import_options,
    import_options_from_args,
    read_tracks_from_args,
)
from fitdrag.tracks.csv_file import read_track


def exact(msg: str) -> str:
    """Regex matching exactly ``msg`` (the whole message)."""
    return "^" + re.escape(msg) + "$"


def write(tmp_path: Path, text: str, name: str = "track.csv") -> Path:
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def rows(n: int = 10, delim: str = ",", header: str = "t,x,y") -> str:
    """A simple synthetic track: t = k/100 s, x = k, y = 2k (file units)."""
    lines = [header.replace(",", delim)]
    for k in range(n):
        lines.append(delim.join([repr(k / 100), str(k), str(2 * k)]))
    return "\n".join(lines) + "\n"


# ------------------------------------------------------------------------------------------
# CLI import options
# ------------------------------------------------------------------------------------------


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="fitdrag test", exit_on_error=False)
    p.add_argument("tracks", nargs="+")
    add_import_options(p)
    return p


def test_cli_defaults_match_read_track(tmp_path):
    """regression: with no options given, the CLI reads exactly as read_track's defaults."""
    import inspect

    args = _parser().parse_args(["a.csv"])
    opts = import_options_from_args(args)
    sig = inspect.signature(read_track)
    for name, value in opts.items():
        assert sig.parameters[name].default == value, name


def test_cli_options_map_to_read_track(tmp_path):
    """closed-form/independent: pixel conversion by hand, as in the library test."""
    lines = ["# scale_relative_uncertainty: 0.002", "idx;u;v"] + [
        f"{50 + k};{100 + k};{200 - k}" for k in range(10)
    ]
    p = write(tmp_path, "\n".join(lines))
    args = _parser().parse_args([
        str(p), str(p), "--t-column", "none", "--frame-column", "IDX", "--frame-rate", "1000",
        "--x-column", "U", "--y-column", "V", "--units", "px", "--scale", "0.001",
        "--origin", "100,200", "--y-down", "--delimiter", ";", "--strict",
    ])  # fmt: skip
    trs = read_tracks_from_args(args.tracks, args)
    assert len(trs) == 2
    k = np.arange(10)
    assert np.array_equal(trs[0].t, (50 + k) / 1000)
    np.testing.assert_allclose(trs[0].x, k * 0.001, rtol=1e-15, atol=0)
    np.testing.assert_allclose(trs[0].y, k * 0.001, rtol=1e-15, atol=0)
    imp = trs[0].meta["import"]
    assert imp["strict"] is True and imp["y_down"] is True and imp["origin"] == [100.0, 200.0]
    assert trs[1].meta["scale_relative_uncertainty"] == 0.002


def test_cli_warnings_printed_as_lines(tmp_path):
    """regression"""
    lines = rows().splitlines()
    lines[3] = "0.02,,4"
    p = write(tmp_path, "\n".join(lines))
    args = _parser().parse_args([str(p)])
    buf = io.StringIO()
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # nothing escapes as a Python warning
        (tr,) = read_tracks_from_args(args.tracks, args, stderr=buf)
    assert buf.getvalue() == (
        f"warning: {p}: dropped 1 row(s) with blank or NaN cells (in 'x') at line(s) 4.\n"
    )
    assert tr.meta["dropped_rows"] == [4]
    with pytest.raises(ValueError, match=exact("no track file given; name at least one CSV file.")):
        read_tracks_from_args([], args)


@pytest.mark.parametrize(
    ("argv", "msg"),
    [
        (["--origin", "1"], "argument --origin: expected two numbers X,Y (e.g. 640,360), got '1'"),
        (["--frame-rate", "0"], "argument --frame-rate: must be a finite number > 0 Hz, got '0'"),
        (["--units", "in"], "argument --units: invalid choice: 'in' (choose from "),
    ],
)
def test_cli_bad_option_values(argv, msg):
    """regression: argparse rejects malformed values with one clear message."""
    with pytest.raises(argparse.ArgumentError, match="^" + re.escape(msg)):
        _parser().parse_args(["a.csv", *argv])


def test_cli_negative_origin_and_every_help_has_a_unit():
    """regression: --origin=-5,10 parses; each option's help states its unit."""
    args = _parser().parse_args(["a.csv", "--origin=-5.5,10"])
    assert args.import_origin == (-5.5, 10.0)
    p = argparse.ArgumentParser()
    group = add_import_options(p)
    assert len(group._group_actions) == 13
    for action in group._group_actions:
        h = action.help
        assert re.search(r"\[[^\]]+\]|no unit|in --units", h), (action.option_strings, h)
