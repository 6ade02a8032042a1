"""Tests of fitdrag.tracks.track (the Track type and its validation).

Each test says what it checks against; all here are regression tests: fixed behaviour
(exact error messages, read-only arrays, pickling) that must not change unnoticed.
"""

from __future__ import annotations

import copy
import pickle
import re

import numpy as np
import pytest

from fitdrag.tracks.track import Track


def exact(msg: str) -> str:
    """Regex matching exactly ``msg`` (the whole message)."""
    return "^" + re.escape(msg) + "$"


# ------------------------------------------------------------------------------------------
# Track validation
# ------------------------------------------------------------------------------------------


def test_track_mismatched_lengths():
    """regression"""
    with pytest.raises(ValueError, match=exact(
        "t, x, y: lengths differ (t has 10, x has 9, y has 10); give one x and one y per time."
    )):  # fmt: skip
        Track(np.arange(10.0), np.arange(9.0), np.arange(10.0))


def test_track_nan():
    """regression"""
    y = np.arange(10.0)
    y[4] = np.nan
    with pytest.raises(ValueError, match=exact(
        "y: 1 non-finite value(s), first at index 4 (value nan); drop or repair those samples "
        "first."
    )):  # fmt: skip
        Track(np.arange(10.0), np.arange(10.0), y)


def test_track_three_points():
    """regression"""
    with pytest.raises(ValueError, match=exact(
        "track: 3 usable point(s), at least 8 are needed for a fit; use a longer stretch of the "
        "flight."
    )):  # fmt: skip
        Track([0.0, 0.1, 0.2], [0.0, 1.0, 2.0], [0.0, 1.0, 2.0])


def test_track_non_monotonic():
    """regression"""
    t = np.arange(10.0)
    t[6] = 4.5
    with pytest.raises(ValueError, match=exact(
        "t: times must increase strictly; decreasing time at index 6 (t[5] = 5.0, t[6] = 4.5); "
        "sort the samples or remove repeated frames."
    )):  # fmt: skip
        Track(t, t, t)
    t[6] = 5.0
    with pytest.raises(ValueError, match=exact(
        "t: times must increase strictly; duplicate time at index 6 (t[5] = 5.0, t[6] = 5.0); "
        "sort the samples or remove repeated frames."
    )):  # fmt: skip
        Track(t, t, t)


def test_track_other_validation():
    """regression: sigma, frame and non-numeric input."""
    k = np.arange(10.0)
    with pytest.raises(ValueError, match=exact(
        "sigma: every position uncertainty must be finite and > 0 m, got min 0.0; leave sigma "
        "out to estimate the noise."
    )):  # fmt: skip
        Track(k, k, k, sigma=0.0)
    with pytest.raises(ValueError, match=exact(
        "frame: frame numbers must be whole numbers."
    )):  # fmt: skip
        Track(k, k, k, frame=k + 0.5)
    with pytest.raises(ValueError, match=r"^x: expected numbers, got list that cannot be read"):
        Track(k, ["a"] * 10, k)
    assert np.array_equal(Track(k, k, k, sigma=0.01).sigma, np.full(10, 0.01))


def test_track_is_read_only_and_picklable():
    """regression: arrays and meta are read-only; pickle/deepcopy keep everything."""
    k = np.arange(10.0)
    tr = Track(k, k, k, frame=np.arange(10), meta={"source": "synthetic"})
    with pytest.raises(ValueError, match="read-only"):
        tr.x[0] = 1.0
    with pytest.raises(TypeError):
        tr.meta["source"] = "other"
    for other in (pickle.loads(pickle.dumps(tr)), copy.deepcopy(tr)):
        assert np.array_equal(other.x, tr.x) and np.array_equal(other.frame, tr.frame)
        assert other.meta["source"] == "synthetic"
