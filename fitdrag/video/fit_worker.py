"""The model fits of a track's detections, in a helper process that gets ready early.

The blob model fit (:mod:`fitdrag.video.ball_fit`) is compiled with numba.  Its compiled
code is cached on disk, but the first compiled call in a process still costs most of a
second of set-up (importing numba and preparing its compiler), as long as tracking a short
clip.  :func:`prepare_fits` starts a helper process that does that set-up while this process
reads and searches the frames; :func:`fit_blobs` then sends it the detections and receives
the fits.  A separate process rather than a thread: the set-up is Python code that holds the
interpreter lock, and the frame loop would wait for it at every call into OpenCV or numpy.

The helper is one per process, kept for later calls (several clips in one run) and ended
when this process ends (it stops at the end of its input).  Where it cannot be used (it
fails to start or dies), or where numba is already loaded in this process, the fits run
here: the same code, so the results are the same.
"""

from __future__ import annotations

import os
import pickle
import subprocess
import sys
import threading

__all__ = ["fit_blobs", "prepare_fits"]

_LOCK = threading.Lock()
_HELPER: subprocess.Popen | None = None
_OWNER = 0  # the process that started the helper (a forked child must not share its pipes)


def _in_process() -> bool:
    """Whether to fit here: numba is loaded already (its set-up is paid), or fits are asked
    for from inside the helper itself."""
    return "numba" in sys.modules or os.environ.get("FITDRAG_FIT_HELPER") == "1"


def prepare_fits() -> None:
    """Start the helper process (once per process) unless the fits will run here."""
    global _HELPER, _OWNER
    with _LOCK:
        if _in_process() or (_owned(_HELPER) and _HELPER.poll() is None):
            return
        _HELPER, _OWNER = _start(), os.getpid()


def _owned(helper: subprocess.Popen | None) -> bool:
    return helper is not None and _OWNER == os.getpid()


def _start() -> subprocess.Popen | None:
    import atexit

    import fitdrag

    root = os.path.dirname(os.path.dirname(os.path.abspath(fitdrag.__file__)))
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join(p for p in (root, env.get("PYTHONPATH")) if p)
    env["FITDRAG_FIT_HELPER"] = "1"
    # The fits use no BLAS: a thread pool of numpy's (and scipy's, which numba's set-up
    # imports) BLAS would only cost start-up time.
    for name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
        env[name] = "1"
    try:
        helper = subprocess.Popen(
            [sys.executable, "-m", "fitdrag.video.fit_worker"],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            stderr=subprocess.DEVNULL,
            env=env,
        )
    except (OSError, ValueError):
        return None
    atexit.register(_stop, helper, os.getpid())  # not left running after this process ends
    return helper


def fit_blobs(blobs, frames, angles, maps=None, lamps=None) -> list:
    """Model fits of a track's detections in frame order
    (:func:`fitdrag.video.blobs.fit_blob_sequence`), by the helper process when one is
    running and numba is not loaded here, else here; the results are the same either
    way."""
    global _HELPER
    from fitdrag.video.blobs import fit_blob_sequence

    frames = [int(k) for k in frames]
    angles = [None if a is None else float(a) for a in angles]
    with _LOCK:
        helper = _HELPER if _owned(_HELPER) and not _in_process() else None
        if helper is not None:
            if helper.poll() is None:
                try:
                    pickle.dump((list(blobs), frames, angles, maps, lamps), helper.stdin,
                                protocol=5)  # fmt: skip
                    helper.stdin.flush()
                    fits = pickle.load(helper.stdout)
                    if isinstance(fits, list) and len(fits) == len(blobs):
                        return fits
                except (OSError, EOFError, pickle.PickleError, ValueError, AttributeError):
                    pass
            _stop(helper)  # it failed or has ended: fit here from now on
            _HELPER = None
    return fit_blob_sequence(blobs, frames, angles, maps, lamps)


def _stop(helper: subprocess.Popen, owner: int | None = None) -> None:
    if owner is not None and owner != os.getpid():
        return  # a forked copy of the process that started it
    try:
        helper.kill()
        helper.wait(timeout=5)
    except (OSError, subprocess.TimeoutExpired):
        pass


def _serve() -> None:
    """The helper: make the compiled fit ready, then answer requests until the input ends."""
    # The replies go through a private copy of the standard output; anything printed by a
    # library goes to the standard error instead and cannot garble them.
    out = os.fdopen(os.dup(sys.stdout.fileno()), "wb")
    os.dup2(sys.stderr.fileno(), sys.stdout.fileno())
    inp = sys.stdin.buffer
    _light_blas_check()
    from fitdrag.video.ball_fit import warm_up
    from fitdrag.video.blobs import fit_blob_sequence

    warm_up()
    while True:
        try:
            blobs, frames, angles, maps, lamps = pickle.load(inp)
        except EOFError:
            return
        pickle.dump(fit_blob_sequence(blobs, frames, angles, maps, lamps), out, protocol=5)
        out.flush()


def _light_blas_check() -> None:
    """Let numba's set-up check for BLAS without importing all of scipy.linalg (helper only).

    numba's set-up imports ``scipy.linalg.cython_blas`` to learn that a BLAS is there for its
    own linear algebra, which the fit does not use; the import runs the whole
    ``scipy.linalg`` package first (a fifth of the helper's start-up).  Here the package is
    registered without running its ``__init__`` and only ``cython_blas`` is loaded, so the
    check passes at a fraction of the cost.  Nothing in the helper uses scipy.linalg itself;
    on any failure everything is undone and the normal import happens later.
    """
    import importlib
    import importlib.util

    if "scipy.linalg" in sys.modules:
        return
    try:
        spec = importlib.util.find_spec("scipy.linalg")
        if spec is None or spec.submodule_search_locations is None:
            return
        sys.modules["scipy.linalg"] = importlib.util.module_from_spec(spec)
        importlib.import_module("scipy.linalg.cython_blas")
    except Exception:
        for name in [
            m for m in sys.modules if m == "scipy.linalg" or m.startswith("scipy.linalg.")
        ]:
            del sys.modules[name]


if __name__ == "__main__":
    _serve()
