"""Tests of fitdrag.tracks.csv_file (CSV import and export of tracks).

Each test says what it checks against:
- closed-form/independent: the expected numbers are worked out by hand in the test (unit
  conversions, frame/fps) or are the input itself (exact round trip);
- published-value: a value printed in a standard;
- regression: fixed behaviour (mostly exact error messages) that must not change unnoticed.
"""

from __future__ import annotations

import hashlib
import math
import os
import re
import tempfile
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from fitdrag.errors import OutputExistsError
from fitdrag.tracks.csv_file import read_track, write_track
from fitdrag.tracks.track import MIN_POINTS, Track, TrackImportWarning, file_sha256


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
# Round trip
# ------------------------------------------------------------------------------------------


def _same_bits(a: np.ndarray, b: np.ndarray) -> bool:
    return a.dtype == b.dtype and a.shape == b.shape and a.tobytes() == b.tobytes()


def test_round_trip_exact_with_frames_and_sigma(tmp_path):
    """closed-form/independent: written values read back bit for bit (identity)."""
    rng = np.random.default_rng(7)
    n = 40
    t = 0.123456789 + np.arange(n) / 487.3
    x = rng.normal(size=n) * 1e-3 + np.linspace(0, 3, n)
    y = -(rng.normal(size=n) ** 3) * 1e7
    sigma = rng.uniform(1e-9, 1e-2, size=n)
    frame = np.arange(n) * 3 + 1000
    tr = Track(t, x, y, sigma=sigma, frame=frame, meta={"scale_relative_uncertainty": 0.0012})
    out = write_track(tr, tmp_path / "out.csv")
    assert out == tmp_path / "out.csv"
    back = read_track(out, physical=False)  # y up to ~1e8 m: any finite number round-trips
    for a, b in ((tr.t, back.t), (tr.x, back.x), (tr.y, back.y), (tr.sigma, back.sigma)):
        assert _same_bits(a, b)
    assert np.array_equal(back.frame, frame)
    assert back.meta["scale_relative_uncertainty"] == 0.0012
    assert back.meta["import"]["frame_col"] == "frame"
    assert back.meta["import"]["sigma_col"] == "sigma"


def test_write_track_layout_and_header(tmp_path):
    """regression: column order, header comment lines and repr-exact floats."""
    src = write(tmp_path, "# lab: synthetic hall B\n" + rows(), "in.csv")
    tr = read_track(src)
    text = write_track(tr, tmp_path / "out.csv").read_text()
    lines = text.splitlines()
    comments = [ln for ln in lines if ln.startswith("#")]
    assert comments[0] == "# format: fitdrag track; t [s]; x, y, sigma [m]; world frame, y up"
    assert comments[1].startswith("# written_by: fitdrag ")
    assert "# lab: synthetic hall B" in comments
    assert f"# source: {src}" in comments
    assert f"# source_sha256: {file_sha256(src)}" in comments
    data = [ln for ln in lines if not ln.startswith("#")]
    assert data[0] == "t,x,y"
    assert data[4] == "0.03,3.0,6.0"
    assert len(data) == 11
    back = read_track(tmp_path / "out.csv")
    assert back.frame is None and back.sigma is None
    assert back.meta["header"]["lab"] == "synthetic hall B"
    assert back.meta["header"]["source"] == str(src)


finite = st.floats(allow_nan=False, allow_infinity=False, width=64)


@st.composite
def tracks(draw):
    n = draw(st.integers(min_value=MIN_POINTS, max_value=30))
    t = sorted(draw(st.sets(finite, min_size=n, max_size=n)))
    x = draw(st.lists(finite, min_size=n, max_size=n))
    y = draw(st.lists(finite, min_size=n, max_size=n))
    sigma = None
    if draw(st.booleans()):
        pos = st.floats(min_value=5e-324, max_value=1e300, allow_nan=False)
        sigma = draw(st.lists(pos, min_size=n, max_size=n))
    frame = None
    if draw(st.booleans()):
        start = draw(st.integers(min_value=-(10**9), max_value=10**9))
        frame = start + np.cumsum(draw(st.lists(st.integers(1, 50), min_size=n, max_size=n)))
    return Track(t, x, y, sigma=sigma, frame=frame)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(tracks())
def test_round_trip_property(tr):
    """closed-form/independent: any valid track round-trips exactly (identity)."""
    with tempfile.TemporaryDirectory() as d:
        back = read_track(write_track(tr, Path(d) / "p.csv"), physical=False)
    assert _same_bits(tr.t, back.t)
    assert _same_bits(tr.x, back.x)
    assert _same_bits(tr.y, back.y)
    if tr.sigma is None:
        assert back.sigma is None
    else:
        assert _same_bits(tr.sigma, back.sigma)
    if tr.frame is None:
        assert back.frame is None
    else:
        assert np.array_equal(tr.frame, back.frame)


# ------------------------------------------------------------------------------------------
# Import options
# ------------------------------------------------------------------------------------------


def test_defaults_meta_and_hash(tmp_path):
    """published-value: SHA-256("abc") from FIPS 180-2 (2002), Appendix B.1; the rest
    closed-form/independent (hashlib on the same bytes, values typed by hand)."""
    abc = tmp_path / "abc.bin"
    abc.write_bytes(b"abc")
    assert file_sha256(abc) == ("ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad")
    p = write(tmp_path, rows())
    tr = read_track(p)
    assert np.array_equal(tr.t, [k / 100 for k in range(10)])
    assert np.array_equal(tr.x, np.arange(10.0))
    assert np.array_equal(tr.y, 2 * np.arange(10.0))
    assert tr.frame is None and tr.sigma is None
    assert tr.meta["source"] == str(p)
    assert tr.meta["sha256"] == hashlib.sha256(p.read_bytes()).hexdigest() == file_sha256(p)
    assert tr.meta["dropped_rows"] == []
    assert tr.meta["header"] == {}
    assert tr.meta["import"] == {
        "t_col": "t",
        "x_col": "x",
        "y_col": "y",
        "frame_col": None,
        "sigma_col": None,
        "time_from": "column",
        "fps": None,
        "units": "m",
        "scale": None,
        "origin": [0.0, 0.0],
        "y_down": False,
        "delimiter": ",",
        "comment": "#",
        "strict": False,
        "encoding": "utf-8",
    }


def test_column_names_case_insensitive_and_stripped(tmp_path):
    """closed-form/independent: values typed by hand."""
    p = write(tmp_path, rows(header=" Time_s , POS X ,pos_y"))
    tr = read_track(p, t_col="time_s", x_col="pos x", y_col=" POS_Y ")
    assert np.array_equal(tr.x, np.arange(10.0))
    assert tr.meta["import"]["x_col"] == "POS X"


def test_times_from_frames_not_shifted(tmp_path):
    """closed-form/independent: t = frame / fps with frames 120..131 at 250 Hz."""
    lines = ["Frame,x,y"] + [f"{120 + k},{k},{k}" for k in range(12)]
    p = write(tmp_path, "\n".join(lines))
    tr = read_track(p, frame_col="frame", fps=250.0)
    assert np.array_equal(tr.t, (120 + np.arange(12)) / 250.0)
    assert tr.t[0] == 0.48
    assert np.array_equal(tr.frame, 120 + np.arange(12))
    assert tr.meta["import"]["time_from"] == "frames"
    # auto-detected "frame" column works too, without naming it
    tr2 = read_track(p, fps=250.0)
    assert np.array_equal(tr2.t, tr.t)


def test_t_col_none_uses_frames_even_with_time_column(tmp_path):
    """closed-form/independent: frame 5..14 at 100 Hz gives 0.05..0.14 s."""
    lines = ["frame,t,x,y"] + [f"{5 + k},{k},{k},{k}" for k in range(10)]
    p = write(tmp_path, "\n".join(lines))
    tr = read_track(p, t_col=None, fps=100)
    assert np.array_equal(tr.t, (5 + np.arange(10)) / 100)
    # with the time column present, the time column wins (frame still read) and fps warns
    with pytest.warns(TrackImportWarning, match="is not used because the file has a time"):
        tr2 = read_track(p, fps=100)
    assert np.array_equal(tr2.t, np.arange(10.0))
    assert np.array_equal(tr2.frame, 5 + np.arange(10))


@pytest.mark.parametrize(("units", "divisor"), [("m", 1.0), ("mm", 1000.0), ("cm", 100.0)])
def test_length_units(tmp_path, units, divisor):
    """closed-form/independent: 1 mm = 1e-3 m, 1 cm = 1e-2 m (SI definitions)."""
    lines = ["t,x,y,sigma"] + [f"{k},{3 * k + 1},{-k},{0.5}" for k in range(10)]
    tr = read_track(write(tmp_path, "\n".join(lines)), units=units)
    assert np.array_equal(tr.x, (3 * np.arange(10) + 1) / divisor)
    assert np.array_equal(tr.y, -np.arange(10.0) / divisor)
    assert np.array_equal(tr.sigma, np.full(10, 0.5) / divisor)


def test_pixels_with_origin_and_y_down(tmp_path):
    """closed-form/independent: x = (x_px - 640) * s, y = -(y_px - 360) * s, s = 0.5 mm/px."""
    s = 0.0005
    lines = ["t,u,v,err"] + [f"{k / 500},{640 + 10 * k},{360 - 4 * k * k},2" for k in range(10)]
    p = write(tmp_path, "\n".join(lines))
    tr = read_track(
        p, x_col="u", y_col="v", sigma_col="err", units="px", scale=s, origin=(640, 360),
        y_down=True,
    )  # fmt: skip
    k = np.arange(10)
    np.testing.assert_allclose(tr.x, 10 * k * s, rtol=1e-15, atol=0)
    np.testing.assert_allclose(tr.y, 4 * k * k * s, rtol=1e-15, atol=0)
    assert tr.y[0] == 0.0 and math.copysign(1.0, tr.y[0]) == 1.0  # no -0.0
    np.testing.assert_allclose(tr.sigma, 2 * s, rtol=1e-15)
    # same file, y axis already up: y = (y_px - 360) * s
    up = read_track(p, x_col="u", y_col="v", units="px", scale=s, origin=(640, 360))
    np.testing.assert_allclose(up.y, -4 * k * k * s, rtol=1e-15, atol=0)
    assert up.sigma is None


def test_y_down_without_pixels(tmp_path):
    """closed-form/independent: y_down with mm flips the sign after the unit conversion."""
    tr = read_track(write(tmp_path, rows()), units="mm", y_down=True)
    assert np.array_equal(tr.y, -2 * np.arange(10) / 1000)


def test_comments_header_meta_and_scale_uncertainty(tmp_path):
    """closed-form/independent: values typed by hand."""
    text = (
        "# tracker: synthetic bench tracker v2\n"
        "  # scale_relative_uncertainty: 0.0012\n"
        "# a free comment line without key\n"
        "\n"
        "t,x,y\n"
        "# a comment between rows\n" + "\n".join(rows().splitlines()[1:6]) + "\n"
        "   # indented comment\n" + "\n".join(rows().splitlines()[6:]) + "\n"
        "# trailing: not header meta\n"
    )
    tr = read_track(write(tmp_path, text))
    assert len(tr) == 10
    assert tr.meta["header"] == {
        "tracker": "synthetic bench tracker v2",
        "scale_relative_uncertainty": "0.0012",
    }
    assert tr.meta["scale_relative_uncertainty"] == 0.0012
    # another comment prefix
    tr2 = read_track(write(tmp_path, text.replace("#", "%"), "b.csv"), comment="%")
    assert tr2.meta["scale_relative_uncertainty"] == 0.0012


@pytest.mark.parametrize(
    ("delim", "given", "name"),
    [
        (",", None, ","),
        (";", None, ";"),
        ("\t", None, "tab"),
        (" ", None, "whitespace"),
        ("   ", None, "whitespace"),
        (";", ";", ";"),
        ("\t", "tab", "tab"),
        ("\t", "\\t", "tab"),
        (" ", "whitespace", "whitespace"),
        ("|", "|", "|"),
    ],
)
def test_delimiters(tmp_path, delim, given, name):
    """closed-form/independent: same values whatever the separator."""
    tr = read_track(write(tmp_path, rows(delim=delim)), delimiter=given)
    assert np.array_equal(tr.y, 2 * np.arange(10.0))
    assert tr.meta["import"]["delimiter"] == name


def test_quoted_header_bom_crlf_and_trailing_delimiter(tmp_path):
    """regression: common spreadsheet export quirks."""
    body = '"t","x","y",\r\n' + "".join(f"{k},{k},{k},\r\n" for k in range(9))
    p = tmp_path / "q.csv"
    p.write_bytes(b"\xef\xbb\xbf" + body.encode())
    tr = read_track(p)
    assert np.array_equal(tr.x, np.arange(9.0))


def test_blank_and_nan_rows_dropped_with_warning(tmp_path):
    """regression: rows with blank/NaN cells are dropped, named by 1-based line number."""
    lines = rows(12).splitlines()
    lines[3] = "0.02,,4"  # line 4
    lines[7] = "0.06,6,NaN"  # line 8
    lines[9] = "0.08,8"  # line 10 (short row)
    p = write(tmp_path, "\n".join(lines))
    msg = f"{p}: dropped 3 row(s) with blank or NaN cells (in 'x', 'y') at line(s) 4, 8, 10."
    with pytest.warns(TrackImportWarning, match=exact(msg)):
        tr = read_track(p)
    assert len(tr) == 9
    assert tr.meta["dropped_rows"] == [4, 8, 10]
    with pytest.raises(ValueError, match=exact(
        f"{p}: 3 row(s) with blank or NaN cells (in 'x', 'y') at line(s) 4, 8, 10; fill in or "
        f"delete those rows, or leave out --strict (strict=False) to drop them."
    )):  # fmt: skip
        read_track(p, strict=True)


def test_unused_columns_are_not_checked(tmp_path):
    """regression: text and blanks in columns not asked for are ignored."""
    lines = ["t,x,y,label"] + [f"{k},{k},{k},{'' if k % 2 else 'ok'}" for k in range(9)]
    tr = read_track(write(tmp_path, "\n".join(lines)))
    assert len(tr) == 9 and tr.meta["dropped_rows"] == []


# ------------------------------------------------------------------------------------------
# Import errors (exact messages)
# ------------------------------------------------------------------------------------------


def test_error_missing_file(tmp_path):
    """regression"""
    p = tmp_path / "nope.csv"
    with pytest.raises(FileNotFoundError, match=exact(
        f"{p}: no such file; check the path of the track file."
    )):  # fmt: skip
        read_track(p)
    with pytest.raises(FileNotFoundError, match=exact(
        f"{p}: no such file; check the path of the track file."
    )):  # fmt: skip
        file_sha256(p)


def test_error_directory(tmp_path):
    """regression"""
    with pytest.raises(ValueError, match=exact(
        f"{tmp_path}: is a directory, not a track file; give the path of a CSV file."
    )):  # fmt: skip
        read_track(tmp_path)


@pytest.mark.parametrize("text", ["", "\n\n  \n", "# only: comments\n# here\n"])
def test_error_empty_file(tmp_path, text):
    """regression"""
    p = write(tmp_path, text)
    with pytest.raises(ValueError, match=exact(
        f"{p}: the file is empty (no header line and no data); export the track again with a "
        f"header line such as 't,x,y'."
    )):  # fmt: skip
        read_track(p)


def test_error_header_only(tmp_path):
    """regression: a header without data rows is 0 usable points."""
    p = write(tmp_path, "t,x,y\n")
    with pytest.raises(ValueError, match=exact(
        f"{p}: 0 usable point(s), at least 8 are needed for a fit; use a longer stretch of "
        f"the flight."
    )):  # fmt: skip
        read_track(p)


def test_error_no_header(tmp_path):
    """regression"""
    p = write(tmp_path, "\n".join(rows().splitlines()[1:]))
    with pytest.raises(ValueError, match=exact(
        f"{p}, line 1: the first line holds numbers, not column names; add a header line such "
        f"as 't,x,y' naming the columns."
    )):  # fmt: skip
        read_track(p)


def test_error_missing_x_column(tmp_path):
    """regression"""
    p = write(tmp_path, rows(header="t,X_px,y"))
    with pytest.raises(ValueError, match=exact(
        f"{p}: no column named 'x' (columns found: 't', 'X_px', 'y'); set --x-column (x_col=) "
        f"to the name of the column."
    )):  # fmt: skip
        read_track(p)


@pytest.mark.parametrize(
    ("kwargs", "option", "kwarg", "name"),
    [
        ({"y_col": "height"}, "--y-column", "y_col", "height"),
        ({"frame_col": "idx"}, "--frame-column", "frame_col", "idx"),
        ({"sigma_col": "u"}, "--sigma-column", "sigma_col", "u"),
    ],
)
def test_error_missing_other_columns(tmp_path, kwargs, option, kwarg, name):
    """regression"""
    p = write(tmp_path, rows())
    with pytest.raises(ValueError, match=exact(
        f"{p}: no column named {name!r} (columns found: 't', 'x', 'y'); set {option} "
        f"({kwarg}=) to the name of the column."
    )):  # fmt: skip
        read_track(p, **kwargs)


def test_error_missing_time_column(tmp_path):
    """regression: the three ways out are named according to what is missing."""
    p = write(tmp_path, rows(header="time,x,y"))
    head = (
        f"{p}: no column named 't' (columns found: 'time', 'x', 'y'); set --t-column (t_col=) "
        f"to the name of the time column, or, to compute times as frame / frame rate, "
    )
    with pytest.raises(ValueError, match=exact(
        head + "name the frame-number column with --frame-column (frame_col=) and give the "
        "frame rate in Hz with --frame-rate (fps=)."
    )):  # fmt: skip
        read_track(p)
    with pytest.raises(ValueError, match=exact(
        head + "name the frame-number column with --frame-column (frame_col=)."
    )):  # fmt: skip
        read_track(p, fps=100)
    p2 = write(tmp_path, rows(header="frame,x,y"), "f.csv")
    with pytest.raises(ValueError, match=exact(
        f"{p2}: no column named 't' (columns found: 'frame', 'x', 'y'); set --t-column (t_col=) "
        f"to the name of the time column, or, to compute times as frame / frame rate, give "
        f"the frame rate in Hz with --frame-rate (fps=)."
    )):  # fmt: skip
        read_track(p2)


def test_error_t_col_none_without_frames_or_rate(tmp_path):
    """regression"""
    p = write(tmp_path, rows())
    with pytest.raises(ValueError, match=exact(
        f"{p}: times are to come from frame numbers (t_col=None) but there is no frame column "
        f"(columns found: 't', 'x', 'y'); name it with --frame-column (frame_col=)."
    )):  # fmt: skip
        read_track(p, t_col=None, fps=100)
    p2 = write(tmp_path, rows(header="frame,x,y"), "f.csv")
    with pytest.raises(ValueError, match=exact(
        f"{p2}: times are to come from frame numbers (t_col=None) but no frame rate was given; "
        f"set --frame-rate (fps=) in Hz."
    )):  # fmt: skip
        read_track(p2, t_col=None)


def test_error_ambiguous_column(tmp_path):
    """regression"""
    p = write(tmp_path, rows(header="t,x,X"))
    with pytest.raises(ValueError, match=exact(
        f"{p}, line 1: column name 'x' matches 2 columns (columns 2, 3); rename one of them in "
        f"the file or choose another column with --x-column."
    )):  # fmt: skip
        read_track(p)


def test_error_non_numeric_cell(tmp_path):
    """regression: names line, column and the text found."""
    lines = ["# comment: line 1", "t,x,y"] + rows().splitlines()[1:]
    lines[6] = "0.04,4,n/a!"  # line 7
    p = write(tmp_path, "\n".join(lines))
    with pytest.raises(ValueError, match=exact(
        f"{p}, line 7, column 'y': 'n/a!' is not a number; correct the cell, or delete the row."
    )):  # fmt: skip
        read_track(p)
    lines[6] = "0.04,1_000,8"
    p = write(tmp_path, "\n".join(lines))
    with pytest.raises(ValueError, match=exact(
        f"{p}, line 7, column 'x': '1_000' is not a number; correct the cell, or delete the row."
    )):  # fmt: skip
        read_track(p)


def test_error_infinite_cell(tmp_path):
    """regression"""
    lines = rows().splitlines()
    lines[2] = "0.01,-inf,2"
    p = write(tmp_path, "\n".join(lines))
    with pytest.raises(ValueError, match=exact(
        f"{p}, line 3, column 'x': '-inf' is not a finite number; correct the cell, or delete "
        f"the row."
    )):  # fmt: skip
        read_track(p)


def test_error_values_beyond_physical_range(tmp_path):
    """regression: a cell of 1e300 (once an OverflowError in the fit) and a time of 1e9 s are
    refused with their line; 1e5 m is still a position (file in m)."""
    lines = rows().splitlines()
    lines[2] = "0.01,1e300,2"
    p = write(tmp_path, "\n".join(lines))
    with pytest.raises(ValueError, match=exact(
        f"{p}, line 3, column 'x': '1e300' m is beyond ±100000 m, not a position of a throw; "
        f"correct the cell, or delete the row."
    )):  # fmt: skip
        read_track(p)
    lines[2] = "1e9,1,2"
    p = write(tmp_path, "\n".join(lines))
    with pytest.raises(ValueError, match=exact(
        f"{p}, line 3, column 't': '1e9' s is beyond ±1e+07 s, not a time of a throw; correct "
        f"the cell, or delete the row."
    )):  # fmt: skip
        read_track(p)
    lines = rows().splitlines()
    lines[-1] = "0.09,1e5,2"
    assert read_track(write(tmp_path, "\n".join(lines))).x[-1] == 1e5


def test_error_size_limits(tmp_path, monkeypatch):
    """regression: an overlong line (a 5 MB field), too many rows and too many bytes are each
    refused at once with the limit and how to lift it; lifting works."""
    import time

    from fitdrag.tracks.csv_file import MAX_LINE_CHARS

    lines = rows().splitlines()
    lines[4] = "0.03," + "9" * 5_000_000 + ",2"
    p = write(tmp_path, "\n".join(lines))
    t0 = time.perf_counter()
    with pytest.raises(ValueError, match=exact(
        f"{p}, line 5: 5000007 characters long, more than the limit of {MAX_LINE_CHARS} for a "
        f"line of a track file; this is not a row of numbers: correct or delete the line."
    )):  # fmt: skip
        read_track(p)
    assert time.perf_counter() - t0 < 5.0  # a refusal, not a long read (generous bound)
    p = write(tmp_path, rows(50))
    monkeypatch.setenv("FITDRAG_MAX_TRACK_ROWS", "40")
    with pytest.raises(ValueError, match=exact(
        f"{p}: 50 data rows, more than the limit of 40 for one throw (100 s of flight at 1000 "
        f"frames/s); cut the file to the flight, or lift the limit with the environment "
        f"variable FITDRAG_MAX_TRACK_ROWS=50."
    )):  # fmt: skip
        read_track(p)
    monkeypatch.setenv("FITDRAG_MAX_TRACK_ROWS", "50")
    assert len(read_track(p).t) == 50
    size = p.stat().st_size
    monkeypatch.setenv("FITDRAG_MAX_TRACK_BYTES", str(size - 1))
    with pytest.raises(ValueError, match=exact(
        f"{p}: {size} bytes is more than the limit of {size - 1} bytes for a track file (a "
        f"throw is a few hundred to a few thousand rows); cut the file to the flight, or lift "
        f"the limit with the environment variable FITDRAG_MAX_TRACK_BYTES={size}."
    )):  # fmt: skip
        read_track(p)
    monkeypatch.setenv("FITDRAG_MAX_TRACK_BYTES", "lots")
    with pytest.raises(ValueError, match=exact(
        "FITDRAG_MAX_TRACK_BYTES: 'lots' is not a whole number; set it to a limit such as "
        "20000000 or unset it."
    )):  # fmt: skip
        read_track(p)


def test_error_control_character_cell(tmp_path):
    """regression: a cell holding a NUL byte names its line and column."""
    lines = rows().splitlines()
    lines[3] = "0.02,\x00,4"
    p = write(tmp_path, "\n".join(lines))
    with pytest.raises(ValueError, match=exact(
        f"{p}, line 4, column 'x': '\\x00' is not a number; correct the cell, or delete the row."
    )):  # fmt: skip
        read_track(p)


def test_error_duplicate_time(tmp_path):
    """regression: line numbers and values of both rows."""
    lines = rows(12).splitlines()
    lines[6] = lines[5]  # line 7 repeats line 6 (t = 0.04)
    lines[9] = lines[8]
    p = write(tmp_path, "\n".join(lines))
    with pytest.raises(ValueError, match=exact(
        f"{p}: times (column 't') must increase strictly, but line 7 has t = 0.04 s, which "
        f"repeats line 6 with t = 0.04 s (2 such places in all); sort the rows by time and "
        f"remove repeated rows."
    )):  # fmt: skip
        read_track(p)


def test_error_decreasing_time_after_dropped_row(tmp_path):
    """regression: line numbers stay those of the file when rows are dropped."""
    lines = rows(12).splitlines()
    lines[4] = "0.03,,6"  # line 5 dropped
    lines[5] = "0.015,4,8"  # line 6, earlier than line 4 (t = 0.02)
    p = write(tmp_path, "\n".join(lines))
    with pytest.raises(ValueError, match=exact(
        f"{p}: times (column 't') must increase strictly, but line 6 has t = 0.015 s, which "
        f"is earlier than line 4 with t = 0.02 s; sort the rows by time and remove repeated rows."
    )):  # fmt: skip
        with pytest.warns(TrackImportWarning):
            read_track(p)


def test_error_repeated_frame(tmp_path):
    """regression"""
    lines = ["frame,x,y"] + [f"{k if k != 5 else 4},{k},{k}" for k in range(10)]
    p = write(tmp_path, "\n".join(lines))
    with pytest.raises(ValueError, match=exact(
        f"{p}: times (frame 'frame' / 200.0 Hz) must increase strictly, but line 7 has frame 4, "
        f"which repeats line 6 with frame 4; sort the rows by time and remove repeated rows."
    )):  # fmt: skip
        read_track(p, fps=200)


def test_error_non_whole_frame(tmp_path):
    """regression"""
    lines = ["frame,x,y"] + [f"{k + (0.5 if k == 3 else 0)},{k},{k}" for k in range(10)]
    p = write(tmp_path, "\n".join(lines))
    with pytest.raises(ValueError, match=exact(
        f"{p}, line 5, column 'frame': frame number '3.5' is not a whole number; check that "
        f"--frame-column names the frame-number column."
    )):  # fmt: skip
        read_track(p, fps=100)


def test_error_too_few_points(tmp_path):
    """regression: counts the usable points after dropping."""
    lines = rows(9).splitlines()
    lines[2] = "0.01,,2"
    lines[3] = "0.02,2,"
    p = write(tmp_path, "\n".join(lines))
    with pytest.raises(ValueError, match=exact(
        f"{p}: 7 usable point(s) (2 row(s) with blank or NaN cells dropped), at least 8 are "
        f"needed for a fit; use a longer stretch of the flight."
    )):  # fmt: skip
        with pytest.warns(TrackImportWarning):
            read_track(p)
    p3 = write(tmp_path, rows(3), "three.csv")
    with pytest.raises(ValueError, match=exact(
        f"{p3}: 3 usable point(s), at least 8 are needed for a fit; use a longer stretch of "
        f"the flight."
    )):  # fmt: skip
        read_track(p3)


def test_error_scale(tmp_path):
    """regression: zero, negative, NaN, missing scale; scale without pixel units."""
    p = write(tmp_path, rows())
    with pytest.raises(ValueError, match=exact(
        f"{p}: zero scale (0 m/px) would put every point at the origin; set --scale (scale=) to "
        f"the image scale in m/px (> 0)."
    )):  # fmt: skip
        read_track(p, units="px", scale=0.0)
    with pytest.raises(ValueError, match=exact(
        f"{p}: scale must be > 0 m/px, got -0.001; set --scale (scale=) to the image scale in "
        f"m/px."
    )):  # fmt: skip
        read_track(p, units="px", scale=-0.001)
    with pytest.raises(ValueError, match=exact(
        f"{p}: scale must be a finite number [m/px], got nan; set --scale (scale=)."
    )):  # fmt: skip
        read_track(p, units="px", scale=float("nan"))
    with pytest.raises(ValueError, match=exact(
        f"{p}: units 'px' need an image scale in m/px; set --scale (scale=), e.g. --scale "
        f"0.0005 for 0.5 mm per pixel."
    )):  # fmt: skip
        read_track(p, units="px")
    with pytest.raises(ValueError, match=exact(
        f"{p}: a scale (0.001 m/px) was given but units are 'm'; set --units px (units='px') "
        f"for pixel input, or leave the scale out."
    )):  # fmt: skip
        read_track(p, scale=0.001)


@pytest.mark.parametrize("fps", [0, -250.0])
def test_error_fps_not_positive(tmp_path, fps):
    """regression"""
    p = write(tmp_path, rows(header="frame,x,y"))
    with pytest.raises(ValueError, match=exact(
        f"{p}: frame rate must be > 0 Hz, got {float(fps)!r}; set --frame-rate (fps=) to the "
        f"camera's frames per second."
    )):  # fmt: skip
        read_track(p, fps=fps)


def test_error_fps_nan(tmp_path):
    """regression"""
    p = write(tmp_path, rows(header="frame,x,y"))
    with pytest.raises(ValueError, match=exact(
        f"{p}: frame rate must be a finite number [Hz], got nan; set --frame-rate (fps=)."
    )):  # fmt: skip
        read_track(p, fps=float("nan"))


def test_error_other_options(tmp_path):
    """regression: units, origin, delimiter, comment, encoding."""
    p = write(tmp_path, rows())
    with pytest.raises(ValueError, match=exact(
        f"{p}: unknown units 'in'; choose one of m, mm, cm, px (--units)."
    )):  # fmt: skip
        read_track(p, units="in")
    with pytest.raises(ValueError, match=exact(
        f"{p}: origin must be two numbers (x, y) in the file's units, got (1.0,); set "
        f"--origin X,Y."
    )):  # fmt: skip
        read_track(p, origin=(1.0,))
    with pytest.raises(ValueError, match=exact(
        f"{p}: delimiter must be one character (or 'tab', 'whitespace'), got '::'; set "
        f"--delimiter (delimiter=) or leave it out to detect it."
    )):  # fmt: skip
        read_track(p, delimiter="::")
    with pytest.raises(ValueError, match=exact(
        f"{p}: comment must be a non-blank prefix such as '#', or None, got ' '."
    )):  # fmt: skip
        read_track(p, comment=" ")
    latin = tmp_path / "latin.csv"
    latin.write_bytes(b"# lab: K\xf6ln\n" + rows().encode())
    with pytest.raises(ValueError, match=exact(
        f"{latin}: cannot decode byte 0xf6 at offset 8 as utf-8; pass the file's encoding "
        f"(encoding=..., e.g. 'latin-1')."
    )):  # fmt: skip
        read_track(latin)
    assert read_track(latin, encoding="latin-1").meta["header"]["lab"] == "K\u00f6ln"


def test_error_sigma_not_positive(tmp_path):
    """regression"""
    lines = ["t,x,y,sigma"] + [f"{k},{k},{k},{0 if k == 2 else 1e-3}" for k in range(9)]
    p = write(tmp_path, "\n".join(lines))
    with pytest.raises(ValueError, match=exact(
        f"{p}, line 4, column 'sigma': position uncertainty '0' must be > 0; correct the cell, "
        f"or leave --sigma-column out to estimate the noise from the fit."
    )):  # fmt: skip
        read_track(p)


def test_error_bad_scale_uncertainty_header(tmp_path):
    """regression"""
    p = write(tmp_path, "# scale_relative_uncertainty: about 1e-3\n" + rows())
    with pytest.raises(ValueError, match=exact(
        f"{p}: header entry 'scale_relative_uncertainty' must be a number >= 0 [1], got "
        f"'about 1e-3'; correct that comment line or delete it."
    )):  # fmt: skip
        read_track(p)


# ------------------------------------------------------------------------------------------
# Export errors and atomicity
# ------------------------------------------------------------------------------------------


def _track(n: int = 10) -> Track:
    k = np.arange(n, dtype=float)
    return Track(k / 100, k, 2 * k)


def test_write_refuses_overwrite_unless_forced(tmp_path):
    """regression"""
    p = tmp_path / "o.csv"
    p.write_text("keep me")
    msg = f"{p}: file exists; pass --force (force=True) to overwrite it."
    with pytest.raises(FileExistsError, match=exact(msg)) as info:
        write_track(_track(), p)
    assert isinstance(info.value, OutputExistsError) and isinstance(info.value, ValueError)
    assert p.read_text() == "keep me"
    write_track(_track(), p, force=True)
    assert np.array_equal(read_track(p).x, np.arange(10.0))
    assert sorted(os.listdir(tmp_path)) == ["o.csv"]  # no temporary file left behind


def test_write_errors(tmp_path):
    """regression"""
    with pytest.raises(ValueError, match=exact(
        f"{tmp_path}: is a directory; give the path of the output file to write."
    )):  # fmt: skip
        write_track(_track(), tmp_path)
    missing = tmp_path / "no" / "o.csv"
    with pytest.raises(FileNotFoundError, match=exact(
        f"{missing}: the directory {str(tmp_path / 'no')!r} does not exist; create it first or "
        f"choose another output path."
    )):  # fmt: skip
        write_track(_track(), missing)
    with pytest.raises(ValueError, match=exact(
        "track: expected a fitdrag Track, got dict; build one with Track(t, x, y) or "
        "read_track(path)."
    )):  # fmt: skip
        write_track({"t": [1]}, tmp_path / "d.csv")


def test_write_file_mode_follows_umask(tmp_path):
    """regression: the temporary file's private mode is not left on the output."""
    p = write_track(_track(), tmp_path / "m.csv")
    mask = os.umask(0o022)
    os.umask(mask)
    assert p.stat().st_mode & 0o777 == 0o666 & ~mask


def test_header_roll_uncertainty_is_a_number(tmp_path):
    """regression: a `# roll_uncertainty_deg: ...` header line (written by `fitdrag track`)
    arrives in meta as a float; a non-number is refused naming the entry."""
    rows = "".join(f"{i * 0.01},{i * 0.1},{i * 0.05}\n" for i in range(9))
    p = tmp_path / "roll.csv"
    p.write_text("# roll_uncertainty_deg: 0.012\nt,x,y\n" + rows, encoding="utf-8")
    assert read_track(p).meta["roll_uncertainty_deg"] == 0.012
    p.write_text("# roll_uncertainty_deg: level\nt,x,y\n" + rows, encoding="utf-8")
    with pytest.raises(ValueError, match=r"header entry 'roll_uncertainty_deg' must be a number"):
        read_track(p)


def _camera_lines() -> str:
    from fitdrag.tracks.camera_header import CameraHeader

    h = CameraHeader((640, 400), [[750.0, 0, 320.5], [0, 750.0, 199.5], [0, 0, 1]],
                     (-0.08, 0.05, 0.0, 0.0, 0.0), [3.1, 0.02, -0.01], [-0.9, 0.7, 3.1],
                     np.eye(6) * 1e-8, 1e-3, 1e-4, 0)  # fmt: skip
    return "".join(f"# {k}: {v}\n" for k, v in h.to_lines().items())


def test_camera_header_read_with_the_image_columns(tmp_path):
    """closed-form/independent: a footage track whose header states its camera reads into
    meta['camera'] (the numbers written) with the image columns x_px, y_px, sigma_px in
    meta['per_point'] aligned with the points; write_track leaves the camera lines out (its
    file has no image columns), so the written file reads back as a planar track."""
    body = "frame,t,x,y,x_px,y_px,quality,sigma_px\n" + "".join(
        f"{i},{i / 500},{0.01 * i},{1 - 0.002 * i},{100 + 4.5 * i},{300 - 2 * i},0.9,0.02\n"
        for i in range(10)
    )
    p = write(tmp_path, "# fps: 500.0\n" + _camera_lines() + body)
    tr = read_track(p)
    cam = tr.meta["camera"]
    assert cam.image_size == (640, 400) and cam.readout_time == 1e-3 and cam.marker_frame == 0
    np.testing.assert_array_equal(cam.translation, [-0.9, 0.7, 3.1])
    np.testing.assert_array_equal(tr.meta["per_point"]["x_px"], 100 + 4.5 * np.arange(10))
    np.testing.assert_array_equal(tr.meta["per_point"]["sigma_px"], np.full(10, 0.02))
    out = write_track(tr, tmp_path / "planar.csv")
    assert "# camera_" not in out.read_text() and "camera" not in read_track(out).meta


def test_camera_header_without_image_columns_is_refused(tmp_path):
    """regression: camera lines without the image columns the camera saw are refused, naming
    the file, what is missing and the fix."""
    p = write(tmp_path, _camera_lines() + rows(10))
    with pytest.raises(ValueError, match=exact(
            f"{p}: the header states a camera but the file has no x_px or y_px column (the "
            f"image position the camera saw); write the track again with fitdrag track, or "
            f"delete every camera_ line to use it as a planar track.")):  # fmt: skip
        read_track(p)
