"""Tests of fitdrag.video.fit_worker (the model fits in a helper process) and of the fit of a
sequence of detections (fitdrag.video.blobs.fit_blob_sequence); all footage synthetic.

Oracles: the synthetic generator's exact mid-exposure centre and radius
(fitdrag.video.synthetic.render_flight), and the same fits computed in this process (the
helper runs the same code; a function compiled afresh in one process and loaded from the
on-disk cache in the other may order its floating-point sums differently under fastmath, so
the two must agree to a few units in the last place, 1e-12 relative, not bit for bit).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

import fitdrag.video.fit_worker as fit_worker
from fitdrag.video.blobs import FIT_PARTS, BlobFinder, fit_blob_sequence
from fitdrag.video.sources import ArraySource
from fitdrag.video.synthetic import render_flight

R = 8.0


def _traj(t):
    return 30 + 3000 * t, 60 + 1500 * t - 0.5 * 5000 * np.asarray(t) ** 2


@pytest.fixture(scope="module")
def track():
    """The blobs of a ball flying through 40 frames (measured at the true position, with the
    true scene as background), their frames, directions of motion and the truth."""
    sf = render_flight(_traj, 40, 1000.0, shape=(160, 320), radius_px=R, exposure=0.6e-3,
                       noise_sigma=3.0, flicker=0.0, clutter=12, seed=5)  # fmt: skip
    tr = sf.truth
    finder = BlobFinder(ArraySource(sf.frames), sf.scene.astype(np.float32),
                        threshold_sigma=5.0, min_area=12.0, max_area=4000.0, min_fill=0.35,
                        max_elongation=8.0, polarity="either", size_tolerance=0.1,
                        max_gap=10)  # fmt: skip
    blobs, frames, angles = [], [], []
    for k in np.flatnonzero(tr.visible):
        raw = sf.frames[k]
        g, sigma = finder.gain_and_noise(raw)
        x, y = tr.x_mean_px[k], tr.y_mean_px[k]
        h = int(R + 10)
        found = finder.analyse(raw, g, sigma, int(x) - h, int(y) - h, int(x) + h, int(y) + h)
        near = [b for b in found if b.reason is None and math.hypot(b.x - x, b.y - y) < 2.0]
        if len(near) != 1:
            continue
        blobs.append(near[0])
        frames.append(int(k))
        k0, k1 = max(k - 1, 0), min(k + 1, len(tr.x_px) - 1)
        angles.append(math.atan2(tr.y_px[k1] - tr.y_px[k0], tr.x_px[k1] - tr.x_px[k0]))
    assert len(blobs) >= 30
    return blobs, frames, angles, tr


def _rows(fits):
    return np.array([[float(v) if v is not None else np.nan
                      for v in dataclasses.astuple(f)[:-2]] for f in fits])  # fmt: skip


def test_sequence_fits_match_the_truth_and_do_not_depend_on_threads(track):
    """closed-form/independent: every fit of the sequence succeeds, centres within 0.1 px and
    diameters within 0.15 px of the generator's truth (oracle: fitdrag.video.synthetic,
    exact mid-exposure centre, radius 8 px); the sequence cut in FIT_PARTS parts gives the
    same numbers on one thread as on two (regression)."""
    blobs, frames, angles, tr = track
    one = fit_blob_sequence(blobs, frames, angles, threads=1)
    two = fit_blob_sequence(blobs, frames, angles, threads=2)
    assert FIT_PARTS == 2 and len(one) == len(blobs)
    assert all(f.success for f in one)
    err = [math.hypot(f.x - tr.x_mean_px[k], f.y - tr.y_mean_px[k]) for f, k in
           zip(one, frames, strict=True)]  # fmt: skip
    assert max(err) < 0.1
    assert max(abs(f.diameter - 2 * R) for f in one) < 0.15
    np.testing.assert_array_equal(_rows(one), _rows(two))


def _same(a, b):
    np.testing.assert_allclose(_rows(a), _rows(b), rtol=1e-12, atol=1e-12, equal_nan=True)


def test_helper_process_gives_the_same_fits(track, monkeypatch):
    """regression: fits made by the helper process equal, number for number (to 1e-12), those
    made in this process; a copy of the process (fork) does not use the helper of the process that
    started it; a helper that has died is replaced by fitting here, with the same result."""
    blobs, frames, angles, _tr = track
    here = fit_blob_sequence(blobs, frames, angles)
    monkeypatch.setattr(fit_worker, "_in_process", lambda: False)
    monkeypatch.setattr(fit_worker, "_HELPER", None)
    fit_worker.prepare_fits()
    helper = fit_worker._HELPER
    assert helper is not None and helper.poll() is None
    try:
        there = fit_worker.fit_blobs(blobs, frames, angles)
        assert fit_worker._HELPER is helper and helper.poll() is None  # it answered
        _same(there, here)
        owner = fit_worker._OWNER
        monkeypatch.setattr(fit_worker, "_OWNER", owner + 1)  # as seen from a forked copy
        fork = fit_worker.fit_blobs(blobs, frames, angles)
        assert fit_worker._HELPER is helper and helper.poll() is None  # left alone
        _same(fork, here)
        monkeypatch.setattr(fit_worker, "_OWNER", owner)
        helper.kill()
        helper.wait(timeout=10)
        again = fit_worker.fit_blobs(blobs, frames, angles)
        assert fit_worker._HELPER is None
        _same(again, here)
    finally:
        if helper.poll() is None:
            helper.kill()


def test_warm_up_makes_the_compiled_fit_ready():
    """regression: the warm-up fit of a synthetic ball succeeds, and afterwards each compiled
    kernel of the fit holds a compiled version."""
    from fitdrag.video import ball_fit

    assert ball_fit.warm_up()
    for kernel in (ball_fit._levenberg_marquardt, ball_fit._sensitivities,
                   ball_fit._correlated_variance):  # fmt: skip
        assert kernel.signatures


def test_helper_start_up_skips_the_scipy_linalg_package():
    """regression: in a fresh interpreter, the helper's light BLAS check loads
    scipy.linalg.cython_blas without running scipy.linalg's __init__ (no solve), and the
    compiled fit then loads and fits as usual."""
    import subprocess
    import sys

    code = (
        "import sys\n"
        "from fitdrag.video.fit_worker import _light_blas_check\n"
        "_light_blas_check()\n"
        "from fitdrag.video.ball_fit import warm_up\n"
        "ok = warm_up()\n"
        "lin = sys.modules['scipy.linalg']\n"
        "print(ok, 'scipy.linalg.cython_blas' in sys.modules, hasattr(lin, 'solve'))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         timeout=300, check=True)  # fmt: skip
    assert out.stdout.split() == ["True", "True", "False"]
