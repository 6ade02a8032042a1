"""Tests of frame sources (fitdrag.video.sources) on small synthetic footage.

Reference values come from OpenCV itself (cv2.VideoCapture / cv2.imread read the same files
independently) and from the arrays written.
"""

from __future__ import annotations

import re

import cv2
import numpy as np
import pytest

from fitdrag.video.footage_files import write_frames, write_video
from fitdrag.video.sources import (
    ArraySource,
    FolderSource,
    VideoSource,
    check_frame_rate,
    open_source,
)
from fitdrag.video.synthetic import render_flight

N = 12


def parabola(t):
    """Vacuum parabola in image pixels (closed form), y down."""
    t = np.asarray(t, dtype=float)
    return 20.0 + 900.0 * t, 30.0 - 200.0 * t + 2000.0 * t * t


@pytest.fixture(scope="module")
def flight():
    return render_flight(parabola, N, 500.0, shape=(72, 96), radius_px=5.0, seed=3)


@pytest.fixture(scope="module")
def video(flight, tmp_path_factory):
    return write_video(flight.frames, tmp_path_factory.mktemp("v") / "clip.avi", 30.0)


def decoded_by_opencv(path):
    """Grey frames as plain cv2.VideoCapture decoding gives them (independent path)."""
    cap = cv2.VideoCapture(str(path))
    out = []
    while True:
        ok, img = cap.read()
        if not ok:
            break
        out.append(cv2.cvtColor(img, cv2.COLOR_BGR2GRAY))
    cap.release()
    return np.stack(out)


def test_video_source_metadata_and_frames(video, flight):
    """closed-form/independent: metadata and frames agree with OpenCV's own decoding."""
    src = open_source(video)
    assert isinstance(src, VideoSource)
    assert src.n_frames == N and src.shape == (72, 96) and src.bit_depth == 8
    assert src.container_fps == pytest.approx(30.0) and src.is_color
    got = list(src.frames())
    assert [n for n, _ in got] == list(range(N))
    imgs = np.stack([img for _, img in got])
    assert imgs.dtype == np.float32 and imgs.shape == (N, 72, 96)
    ref = decoded_by_opencv(video).astype(np.float32)
    assert np.abs(imgs - ref).max() <= 2.0  # decoders may round chroma differently
    assert np.abs(imgs - flight.frames).mean() < 2.0  # JPEG loss only
    np.testing.assert_array_equal(src.read(7), imgs[7])
    assert src.read_color(7).shape == (72, 96, 3)


def test_video_frame_range(video):
    """closed-form/independent: start/stop select frames start <= n < stop."""
    src = open_source(video)
    all_frames = dict(src.frames())
    part = list(src.frames(start=4, stop=9))
    assert [n for n, _ in part] == [4, 5, 6, 7, 8]
    for n, img in part:
        np.testing.assert_array_equal(img, all_frames[n])
    samples = src.sample([10, 2, 2, 6])
    assert [n for n, _ in samples] == [2, 6, 10]
    np.testing.assert_array_equal(samples[1][1].astype(np.float32), all_frames[6])


def test_sampled_frames_are_not_decoded_again(video):
    """regression: Motion-JPEG frames decoded by sample() are handed to the sequential read
    that follows (the same image objects, not decoded again), and they equal the frames a
    fresh source decodes (oracle: a second, independent read of the file); a frame read
    at reduced resolution is decoded afresh."""
    src = open_source(video)
    fresh = dict(open_source(video).frames_raw())
    samples = dict(src.sample([3, 8]))
    seq = dict(src.frames_raw())
    assert seq[3] is samples[3] and seq[8] is samples[8]
    for n, img in seq.items():
        np.testing.assert_array_equal(img, fresh[n])
    assert src._kept == {}  # handed over once
    src.sample([5])
    src.reduce_decode = 2
    small = dict(src.frames_raw(start=4, stop=7))
    assert small[5].shape == (36, 48) and src._kept == {}


def test_folder_natural_order_and_gaps(flight, tmp_path):
    """closed-form/independent: frame numbers come from the digits in the names, ordered
    numerically (frame_2 before frame_10), gaps kept."""
    for k, name in [(0, "shot_2.png"), (1, "shot_10.png"), (2, "shot_1.png"), (3, "shot_11.png")]:
        cv2.imwrite(str(tmp_path / name), flight.frames[k])
    (tmp_path / "notes.txt").write_text("not an image")
    src = open_source(tmp_path)
    assert isinstance(src, FolderSource)
    assert src.frame_numbers.tolist() == [1, 2, 10, 11]
    assert src.n_frames == 4 and src.container_fps is None
    got = dict(src.frames())
    assert list(got) == [1, 2, 10, 11]
    np.testing.assert_array_equal(got[10], flight.frames[1].astype(np.float32))
    np.testing.assert_array_equal(got[1], flight.frames[2].astype(np.float32))
    assert [n for n, _ in src.frames(start=2, stop=11)] == [2, 10]


def test_sixteen_bit_tiff_folder(flight, tmp_path):
    """closed-form/independent: 16-bit TIFF frames keep their 0..65535 values."""
    write_frames(flight.frames, tmp_path, ext="tif", bit_depth=16)
    src = open_source(tmp_path)
    assert src.bit_depth == 16 and src.full_scale == 65535.0 and not src.is_color
    img = src.read(5)
    assert img.dtype == np.float32
    np.testing.assert_array_equal(img, flight.frames[5].astype(np.float32) * 257)


def test_colour_folder_is_read_grey(tmp_path):
    """closed-form/independent: colour frames become grey by OpenCV's BT.601 weights."""
    fo = render_flight(parabola, 3, 500.0, shape=(40, 50), color=True, seed=1)
    write_frames(fo.frames, tmp_path)
    src = open_source(tmp_path)
    assert src.is_color
    ref = cv2.cvtColor(fo.frames[1], cv2.COLOR_BGR2GRAY).astype(np.float32)
    np.testing.assert_array_equal(src.read(1), ref)
    assert src.read_color(1).shape == (40, 50, 3)


def test_array_source(flight):
    """regression: frames in memory, numbered from first_frame."""
    src = ArraySource(flight.frames, fps=500.0, first_frame=100)
    assert src.n_frames == N and src.last_frame == 100 + N - 1
    assert [n for n, _ in src.frames(start=105, stop=108)] == [105, 106, 107]
    np.testing.assert_array_equal(src.read(103), flight.frames[3].astype(np.float32))
    assert check_frame_rate(src) == 500.0


def test_check_frame_rate(video, tmp_path, flight):
    """regression: the user's rate wins; a playback-like container rate without one is an
    error that says why; image folders need a rate."""
    src = open_source(video)
    assert check_frame_rate(src, 2000) == 2000.0
    msg = (
        f"fps: {video} says 30 frames/s, a playback rate; high-speed footage is usually stored "
        "at a playback rate, not at the rate it was captured. Pass the capture rate (--fps on "
        "the command line, e.g. --fps 1000)."
    )
    with pytest.raises(ValueError, match=f"^{re.escape(msg)}$"):
        check_frame_rate(src, None)
    fast = write_video(flight.frames, tmp_path / "fast.avi", 1000.0)
    assert check_frame_rate(open_source(fast)) == pytest.approx(1000.0)
    write_frames(flight.frames[:2], tmp_path / "f")
    msg = (
        f"fps: {tmp_path / 'f'} carries no frame rate; pass the capture rate (--fps on the "
        "command line, e.g. --fps 1000)."
    )
    with pytest.raises(ValueError, match=f"^{re.escape(msg)}$"):
        check_frame_rate(open_source(tmp_path / "f"))
    for bad in (0, -5, "fast", float("nan")):
        with pytest.raises(ValueError, match=r"^fps: expected the capture rate in frames per "
                                             r"second \(a positive number\), got "):  # fmt: skip
            check_frame_rate(src, bad)


def test_error_messages(tmp_path, flight, video):
    """regression: each bad footage gives a clear error naming the path and the fix."""
    missing = tmp_path / "nope.avi"
    msg = f"footage {missing}: no such file or folder; check the path and the file name."
    with pytest.raises(FileNotFoundError, match=f"^{re.escape(msg)}$"):
        open_source(missing)
    junk = tmp_path / "junk.avi"
    junk.write_text("this is not a video")
    msg = (
        f"footage {junk}: not a video OpenCV can decode (no frame could be read); convert it "
        "to AVI (Motion-JPEG) or MP4, or export the frames as numbered PNG/TIFF files into a "
        "folder."
    )
    with pytest.raises(ValueError, match=f"^{re.escape(msg)}$"):
        open_source(junk)
    empty = tmp_path / "empty"
    empty.mkdir()
    msg = (
        f"footage {empty}: the folder holds no image files (.png, .tif, .tiff, .jpg, .jpeg); "
        "point to the folder the frames were exported to."
    )
    with pytest.raises(ValueError, match=f"^{re.escape(msg)}$"):
        open_source(empty)
    nonum = tmp_path / "nonum"
    nonum.mkdir()
    cv2.imwrite(str(nonum / "background.png"), flight.frames[0])
    cv2.imwrite(str(nonum / "ball.png"), flight.frames[1])
    msg = (
        f"footage {nonum}: none of the 2 image files has a frame number in its name (e.g. "
        "'background.png'); name them like frame_000123.png."
    )
    with pytest.raises(ValueError, match=f"^{re.escape(msg)}$"):
        open_source(nonum)
    dup = tmp_path / "dup"
    dup.mkdir()
    cv2.imwrite(str(dup / "a_001.png"), flight.frames[0])
    cv2.imwrite(str(dup / "b_001.png"), flight.frames[1])
    msg = (
        f"footage {dup}: files 'a_001.png' and 'b_001.png' both carry frame number 1; keep "
        "one image sequence per folder."
    )
    with pytest.raises(ValueError, match=f"^{re.escape(msg)}$"):
        open_source(dup)
    mixed = tmp_path / "mixed"
    mixed.mkdir()
    cv2.imwrite(str(mixed / "f_1.png"), flight.frames[0])
    cv2.imwrite(str(mixed / "f_2.png"), flight.frames[1][:50])
    src = open_source(mixed)
    msg = (
        f"footage {mixed / 'f_2.png'}: 96x50 uint8 differs from the first frame's 96x72 uint8; "
        "all frames of a sequence must match."
    )
    with pytest.raises(ValueError, match=f"^{re.escape(msg)}$"):
        list(src.frames())
    src = open_source(video)
    msg = (
        f"start: frame 40 is outside the footage {video} (frames 0..11); choose a start inside "
        "that range."
    )
    with pytest.raises(ValueError, match=f"^{re.escape(msg)}$"):
        list(src.frames(start=40))
    msg = (
        "stop: 3 is not after start 5; stop is the first frame not read, so it must be larger "
        "than start."
    )
    with pytest.raises(ValueError, match=f"^{re.escape(msg)}$"):
        list(src.frames(start=5, stop=3))
    msg = (
        f"frame: 99 is outside the footage {video} (frames 0..11); choose a frame inside that "
        "range."
    )
    with pytest.raises(ValueError, match=f"^{re.escape(msg)}$"):
        src.read(99)


def test_undecodable_frames_are_skipped_and_recorded(flight, video, tmp_path):
    """regression: a Motion-JPEG frame whose JPEG start marker is overwritten, and an image
    file in a folder that is not an image, are skipped by frames() and recorded in
    ``undecodable``; the other frames equal OpenCV's own decoding."""
    data = bytearray(video.read_bytes())
    starts = [i for i in range(len(data) - 1) if data[i] == 0xFF and data[i + 1] == 0xD8]
    assert len(starts) == N
    data[starts[5] : starts[5] + 2] = b"\x00\x00"
    bad = tmp_path / "bad.avi"
    bad.write_bytes(bytes(data))
    src = open_source(bad)
    got = dict(src.frames_raw())
    assert sorted(got) == [k for k in range(N) if k != 5] and src.undecodable == {5}
    ref = decoded_by_opencv(video).astype(np.float32)
    assert np.abs(got[6] - ref[6]).max() <= 2.0  # decoders may round chroma differently
    folder = tmp_path / "frames"
    write_frames(flight.frames, folder, ext="png")
    files = sorted(folder.glob("*.png"))
    files[3].write_bytes(b"not an image")
    src = open_source(folder)
    nums = [n for n, _ in src.frames_raw()]
    assert len(nums) == N - 1 and src.undecodable == {int(src.frame_numbers[3])}
