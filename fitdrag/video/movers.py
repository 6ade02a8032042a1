"""Following moving blobs through footage: acquisition, locked tracks, leaving the field.

Step 3 of the specimen detector (:mod:`fitdrag.video.detect`), as a small state machine fed
one frame at a time (:class:`Follower`):

- **Searching** (no track followed): the whole frame is searched at the search resolution
  (:meth:`fitdrag.video.blobs.BlobFinder.candidates`: the best few candidates, no
  full-resolution measurement).  Candidates are chained into short *tracklets* frame by frame:
  a one-point tracklet takes every candidate within reach in the next frame, a longer one only
  the candidate nearest to its prediction (constant velocity from two points, constant
  acceleration from three or more) within a tolerance.  A tracklet of three points that moves
  is confirmed; one that does not move is a resting specimen or a flaw of the background
  model.  The work per frame is bounded: at most ``KEEP_CANDIDATES`` candidates and
  ``_MAX_TRACKLETS`` tracklets, never a search over candidate triples.
- **Locked** (one or more tracks followed): each track is predicted from its last few
  detections (least-squares constant acceleration) and measured at full resolution in a window
  around the prediction only; the whole frame is still searched every few frames (at the
  search resolution) so another moving object is noticed.  On confirmation the track is also
  followed *backwards* through the last frames kept in memory, so it starts at the first frame
  where the specimen is fully visible rather than at the third frame of its confirmation.
- **Left the field**: a track whose prediction lies wholly outside the image has left; its
  later frames cost one whole-frame search at the search resolution each (to re-acquire the
  specimen if it comes back).  A track without a detection for ``max_gap`` frames is lost;
  so is one whose blob keeps a new size for three frames (a hand letting go of the specimen,
  two objects parting), and the parts are then found afresh; when the blob shrank, the part
  it still follows (the specimen going on along the hand's path, at 30 frames/s soon far
  from the hand) becomes a track of its own from those three frames at once.
- **Overlap**: when two followed tracks come within their sizes of each other, neither is
  measured in that frame (the blobs merge or could be swapped); the frames are recorded.

At the end (:meth:`Follower.finish`) the specimen is chosen among the tracks by its motion:
a free flight (constant acceleration, pointing down the image, significant against the fit's
scatter) before a straight line or an irregular path, then the longest.  Other tracks of the
same size and free flight that do not overlap it in time (the specimen leaving and coming
back) join it;
the rest are reported as other moving objects, with where and when they were seen and the
frames where they overlapped the specimen.
"""

from __future__ import annotations

import math
from collections import deque
from dataclasses import dataclass

import numpy as np

from fitdrag.video.blobs import KEEP_CANDIDATES, Blob, BlobFinder

__all__ = ["OtherMover", "Follower", "FollowResult", "frame_ranges"]

# Least displacement of a confirmed tracklet over its three frames. [px]
_MIN_MOTION_PX = 2.0
# Most tracklets kept while searching (bounded work per frame).
_MAX_TRACKLETS = 48
# Confirmed tracklets checked at full resolution per frame, at most.
_MAX_CONFIRM = 3
# Frames kept in memory for following a new track backwards.
_BUFFER = 40
# While locked, the whole frame is searched every this many frames.
_WATCH_EVERY = 3
# Most tracks followed at once.
_MAX_TRACKS = 4
# Fewest detections for another track to be reported as a moving object.
_MIN_REPORTED = 5
# Consecutive frames in which the followed blob keeps one new size before the track ends.
_RESIZED = 3

NO_BLOB = "no blob stands out from the background"
NOT_CONFIRMED = "blob not confirmed by consistent motion over three frames"
STILL = (
    "blob does not move over three frames (a specimen at rest becomes part of the background "
    "model: start after the release)"
)
LEFT = "the specimen has left the field of view"
OVERLAP = "another moving object overlaps the specimen"
OTHER_ONLY = (
    "only another moving object was followed here (not of the specimen's size or free flight; "
    "listed in the summary)"
)


def frame_ranges(frames) -> str:
    """Compact text of frame numbers: ``'3-7 12 15-16'``."""
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


@dataclass(frozen=True)
class OtherMover:
    """Another moving object seen in the footage (not the specimen).

    Attributes
    ----------
    first_frame, last_frame : int
        Frames it was followed from and to.
    start_px, end_px : (float, float)
        Where it was first and last seen (image x, y; y down). [px]
    frames_seen : int
        Frames it was detected in.
    motion : str
        ``"free flight"``, ``"straight line"`` or ``"irregular"`` (see :func:`motion_kind`).
    overlap_frames : tuple of int
        Frames where it overlapped the specimen (the specimen is not measured there).
    """

    first_frame: int
    last_frame: int
    start_px: tuple[float, float]
    end_px: tuple[float, float]
    frames_seen: int
    motion: str
    overlap_frames: tuple[int, ...] = ()

    def describe(self) -> str:
        """One line for people: where and when it was seen."""
        (x0, y0), (x1, y1) = self.start_px, self.end_px
        txt = (
            f"another moving object ({self.motion}) in frames {self.first_frame}-"
            f"{self.last_frame}, from ({x0:.0f}, {y0:.0f}) to ({x1:.0f}, {y1:.0f}) px"
        )
        if self.overlap_frames:
            txt += f"; it overlaps the specimen in frames {frame_ranges(self.overlap_frames)}"
        return txt


def motion_kind(frames: np.ndarray, xs: np.ndarray, ys: np.ndarray) -> str:
    """How a track moves: ``"free flight"``, ``"straight line"``, ``"irregular"`` or
    ``"too short"`` (fewer than six detections).

    A least-squares quadratic in time is fitted to x and y; its acceleration ``(ax, ay)`` is
    compared with its standard error (from the fit's residual scatter, at least 0.05 px).  A
    free flight accelerates down the image (``ay > 4`` standard errors and ``ay > |ax|/2``),
    a straight line has no significant acceleration (below 4 standard errors); anything else,
    or a path a cubic does not follow within 2 px RMS, is irregular.
    """
    n = len(frames)
    if n < 6:
        return "too short"
    t = np.asarray(frames, float) - float(np.mean(frames))
    a = np.column_stack([np.ones_like(t), t, t * t])
    cx, *_ = np.linalg.lstsq(a, xs, rcond=None)
    cy, *_ = np.linalg.lstsq(a, ys, rcond=None)
    res = np.concatenate([xs - a @ cx, ys - a @ cy])
    r = max(float(np.sqrt(np.sum(res**2) / max(2 * n - 6, 1))), 0.05)
    cov = np.linalg.inv(a.T @ a)
    sa = 2.0 * r * math.sqrt(float(cov[2, 2]))
    ax, ay = 2.0 * float(cx[2]), 2.0 * float(cy[2])
    a3 = np.column_stack([a, t**3])
    c3x, *_ = np.linalg.lstsq(a3, xs, rcond=None)
    c3y, *_ = np.linalg.lstsq(a3, ys, rcond=None)
    r3 = float(np.sqrt(np.mean(np.concatenate([xs - a3 @ c3x, ys - a3 @ c3y]) ** 2)))
    if r3 > 2.0:
        return "irregular"
    if ay > 4.0 * sa and ay > 0.5 * abs(ax):
        return "free flight"
    if math.hypot(ax, ay) < 4.0 * sa:
        return "straight line"
    return "irregular"


class _Tracklet:
    """A short chain of candidates in consecutive (or nearly) frames, while searching."""

    __slots__ = ("f", "x", "y", "a", "box")

    def __init__(self, f, x, y, a, box):
        self.f, self.x, self.y, self.a, self.box = [f], [x], [y], [a], [box]

    def extended(self, f, x, y, a, box) -> _Tracklet:
        t = _Tracklet.__new__(_Tracklet)
        t.f, t.x, t.y = self.f + [f], self.x + [x], self.y + [y]
        t.a, t.box = self.a + [a], self.box + [box]
        return t

    def predict(self, n: int, s: int) -> tuple[float, float, float]:
        """Predicted position at frame ``n`` and the tolerance around it. [px]"""
        k = len(self.f)
        gap = n - self.f[-1]
        dt = self.f[-1] - self.f[-2]
        vx, vy = (self.x[-1] - self.x[-2]) / dt, (self.y[-1] - self.y[-2]) / dt
        speed = math.hypot(vx, vy)
        if k == 2:
            return self.x[-1] + vx * gap, self.y[-1] + vy * gap, 2.0 * s + 0.2 * speed * gap
        f = np.array(self.f[-6:], float) - n
        a = np.vander(f, 3)
        coef = np.linalg.lstsq(a, np.column_stack([self.x[-6:], self.y[-6:]]), rcond=None)[0]
        return float(coef[-1, 0]), float(coef[-1, 1]), 2.0 * s + 0.05 * speed * gap


class _Track:
    """Recent detections of one followed object and a constant-acceleration prediction."""

    def __init__(self, ident: int):
        self.ident = ident
        self.frames: list[int] = []
        self.xs: list[float] = []
        self.ys: list[float] = []
        self.areas: list[float] = []
        self.extent = 0.0
        self.state = "locked"  # "locked", "left" or "lost"
        self.ended = -1  # frame after which it was no longer followed
        self.accepted: dict[int, tuple[Blob, float]] = {}
        self.miss: dict[int, str] = {}
        self.overlap: dict[int, set[int]] = {}  # other track id -> frames
        self.resized: list[float] = []  # area ratios of recent blobs refused for their size
        self.parted: list[tuple[int, Blob]] = []  # and those blobs, with their frames

    def add(self, n: int, b: Blob, g: float) -> None:
        self.accepted[n] = (b, g)
        self.miss.pop(n, None)
        self.frames.append(n)
        self.xs.append(b.x)
        self.ys.append(b.y)
        self.areas.append(b.area)
        self.extent = b.extent
        late = len(self.frames) > 1 and self.frames[-1] < self.frames[-2]
        order = np.argsort(self.frames) if late else None
        if order is not None:  # added backwards or in between: keep ascending order
            for name in ("frames", "xs", "ys", "areas"):
                lst = getattr(self, name)
                setattr(self, name, [lst[i] for i in order])
        if len(self.frames) > 15:
            for lst in (self.frames, self.xs, self.ys, self.areas):
                del lst[0]

    @property
    def last(self) -> int:
        return self.frames[-1]

    @property
    def ref_area(self) -> float:
        return float(np.median(self.areas))

    def predict(self, n: int, frames=None, xs=None, ys=None) -> tuple[float, float, float]:
        """Position predicted at frame ``n`` from the five detections nearest in time (a
        least-squares quadratic: constant acceleration) and the search radius. [px]"""
        if frames is None:
            frames, xs, ys = self.frames[-5:], self.xs[-5:], self.ys[-5:]
        f = np.array(frames, dtype=float) - n
        x = np.array(xs)
        y = np.array(ys)
        deg = min(2, len(f) - 1)
        near = int(np.argmin(np.abs(f)))
        if deg == 0:
            px, py, speed = x[-1], y[-1], 0.0
        else:
            # least-squares polynomial in time through both coordinates at once; its constant
            # term is the position at frame n
            a = np.vander(f, deg + 1)
            coef = np.linalg.lstsq(a, np.column_stack([x, y]), rcond=None)[0]
            px, py = float(coef[-1, 0]), float(coef[-1, 1])
            speed = float(np.hypot(x[-1] - x[-2], y[-1] - y[-2]) / max(abs(f[-1] - f[-2]), 1.0))
        gap = abs(int(round(f[near])))
        allowance = 3.0 + 0.5 * (gap - 1) ** 2 + 0.1 * speed * gap
        if len(f) < 3:
            allowance += 0.5 * speed * gap + 4.0
        return px, py, min(allowance, 200.0)

    def predict_back(self, n: int) -> tuple[float, float, float]:
        """As :meth:`predict`, from the five earliest detections (following backwards)."""
        fr = sorted(self.accepted)[:5]
        b = [self.accepted[k][0] for k in fr]
        return self.predict(n, fr, [v.x for v in b], [v.y for v in b])

    def arrays(self):
        fr = np.array(sorted(self.accepted), dtype=np.int64)
        b = [self.accepted[int(k)][0] for k in fr]
        return fr, np.array([v.x for v in b]), np.array([v.y for v in b])


@dataclass(frozen=True, eq=False)
class FollowResult:
    """What :class:`Follower` found: the specimen's detections ``{frame: (blob, gain)}``,
    the reason for each other frame read, and the other moving objects."""

    accepted: dict
    missing: dict
    others: tuple[OtherMover, ...]


class Follower:
    """Frame-by-frame state machine following the specimen (see the module notes).

    Parameters
    ----------
    finder : BlobFinder
        Per-frame blob search and measurement.
    size_tolerance : float
        Largest relative departure of a blob's coverage from its track's.
    max_gap : int
        Frames without detection after which a track is lost.
    region : (x0, y0, x1, y1), optional
        Only candidates centred inside it start a track. [px]
    """

    def __init__(self, finder: BlobFinder, *, size_tolerance: float, max_gap: int, region=None):
        self.det = finder
        self.h, self.w = finder.h, finder.w
        self.size_tol = size_tolerance
        self.max_gap = max_gap
        self.region = region
        self.max_step = 0.25 * math.hypot(self.h, self.w)
        self.buffer: deque = deque(maxlen=_BUFFER)
        self.tracklets: list[_Tracklet] = []
        self.tracks: list[_Track] = []
        self.search_reason: dict[int, str] = {}
        self.last_reason = NO_BLOB
        self.read: list[int] = []
        self._since_search = 0
        self._scale = finder.scale
        self._reduced_seen: list[bool] = []  # reduced frames: did they need a whole read
        self._reread_pause = 0

    # -- per frame ------------------------------------------------------------------------
    def step(self, n: int, raw: np.ndarray, g: float, sigma: float) -> None:
        """Take frame ``n`` (grey, native dtype) with its gain and noise level."""
        self.read.append(n)
        self.buffer.append((n, raw, g, sigma))
        active = [t for t in self.tracks if t.state == "locked"]
        preds = {}
        for tr in active:
            px, py, allow = tr.predict(n)
            r = 0.5 * tr.extent
            if px < -r or py < -r or px > self.w - 1 + r or py > self.h - 1 + r:
                tr.state, tr.ended = "left", n
                continue
            if n - tr.last > self.max_gap:
                tr.state, tr.ended = "lost", n
                continue
            preds[tr.ident] = (tr, px, py, allow)
        # Tracks close enough to swap or merge: neither is measured in this frame.
        clash: set[int] = set()
        items = list(preds.values())
        for i, (ta, xa, ya, aa) in enumerate(items):
            for tb, xb, yb, ab in items[i + 1 :]:
                if math.hypot(xa - xb, ya - yb) <= 0.5 * (ta.extent + tb.extent) + min(aa, ab):
                    clash.update((ta.ident, tb.ident))
                    ta.overlap.setdefault(tb.ident, set()).add(n)
                    tb.overlap.setdefault(ta.ident, set()).add(n)
        for tr, px, py, allow in preds.values():
            if tr.ident in clash:
                tr.miss[n] = f"{OVERLAP} (frames listed in the summary)"
                continue
            self._measure_track(tr, n, raw, g, sigma, px, py, allow, forward=True)
        following = [t for t in self.tracks if t.state == "locked"]
        self._since_search += 1
        if not following or self._since_search >= _WATCH_EVERY:
            self._since_search = 0
            exclude = tuple((px, py, 0.5 * tr.extent + allow + 4.0) for tr, px, py, allow in
                            preds.values())  # fmt: skip
            self._search(n, raw, g, exclude)
        else:
            self.search_reason[n] = self.last_reason

    def wanted_reduction(self) -> int:
        """How many times smaller frames may be decoded: while nothing is followed after the
        specimen has left (or been lost), the coarsest resolution that still shows it 3.5
        pixels across; 1 (whole frames) otherwise, or when reduced frames kept needing a
        second, whole read (clutter that stands out at low resolution)."""
        if self.det.scale < 2 or any(t.state == "locked" for t in self.tracks):
            return 1
        sizes = [t.extent for t in self.tracks if t.extent > 0]
        if not sizes or self._reread_pause > 0:
            self._reread_pause = max(self._reread_pause - 1, 0)
            return 1
        r = 2
        while r < 4 and min(sizes) / (2 * r) >= 3.5:
            r *= 2
        return r

    def step_reduced(self, n: int, small: np.ndarray, scale: int) -> bool:
        """Take frame ``n`` decoded ``scale`` times smaller; True if that was enough (nothing
        followed and no candidate in it), False if the frame must be read whole."""
        self._reduced_seen.append(False)
        if any(t.state == "locked" for t in self.tracks):
            self._reduced_seen[-1] = True
            return False
        det = self.det
        g = det.gain_reduced(small, scale)
        c = det.candidates(small, g, keep=KEEP_CANDIDATES, region=self.region, scale=scale,
                           reduced=small)  # fmt: skip
        if len(c):
            self._reduced_seen[-1] = True
            recent = self._reduced_seen[-20:]
            if len(recent) == 20 and sum(recent) > 6:
                self._reread_pause = 50
                self._reduced_seen.clear()
            return False
        self.read.append(n)
        reason = c.refused[0].reason if c.refused else NO_BLOB
        self.search_reason[n] = self.last_reason = reason
        return True

    def _measure_track(self, tr, n, raw, g, sigma, px, py, allow, forward=False) -> bool:
        det = self.det
        half = 0.5 * tr.extent + allow + 4.0
        blobs: list[Blob] = []
        for _attempt in range(3):
            blobs = det.analyse(raw, g, sigma, int(px - half), int(py - half),
                                int(px + half) + 2, int(py + half) + 2)  # fmt: skip
            if not any(b.touches_window for b in blobs):
                break
            half *= 2.0
        near = [b for b in blobs if math.hypot(b.x - px, b.y - py) <= allow + 0.5 * b.extent]
        held = [t.accepted[n][0] for t in self.tracks if t is not tr and n in t.accepted]
        near = [b for b in near if all(math.hypot(b.x - o.x, b.y - o.y) > 2.0 for o in held)]
        near.sort(key=lambda b: math.hypot(b.x - px, b.y - py))
        chosen = near[0] if near else None
        if chosen is None:
            tr.miss[n] = (
                f"no blob near the predicted position ({px:.0f}, {py:.0f}) within {allow:.0f} px"
            )
            return False
        if chosen.reason is not None:
            tr.miss[n] = chosen.reason
            return False
        ref = tr.ref_area
        dev = abs(chosen.area / ref - 1.0)
        if dev > self.size_tol:
            tr.miss[n] = (
                f"blob size {chosen.area:.0f} px differs by {100 * dev:.0f} % from the "
                f"track's {ref:.0f} px (partly hidden or merged with clutter)"
            )
            tr.resized.append(chosen.area / ref)
            tr.parted.append((n, chosen))
            # The blob followed has changed size for good (a hand letting go of the
            # specimen, two objects parting): end the track so the parts are found afresh.
            last = tr.resized[-_RESIZED:]
            if len(last) == _RESIZED and max(last) / min(last) < 1.0 + self.size_tol:
                tr.state, tr.ended = "lost", n
                if forward and max(last) < 1.0:
                    # It shrank: a part went on along the track's path (the specimen let go
                    # of): follow that part as a track of its own from those frames.
                    self._start_part(tr.parted[-_RESIZED:])
            return False
        tr.resized.clear()
        tr.parted.clear()
        tr.add(n, chosen, g)
        return True

    def _search(self, n, raw, g, exclude) -> None:
        det = self.det
        # Once the specimen's size is known, search at the coarsest resolution that still
        # shows it at least 3.5 pixels across (fewer pixels to search).
        s = det.scale
        sizes = [t.extent for t in self.tracks if t.extent > 0]
        if sizes and det.scale > 1:
            while s < 4 and min(sizes) / (2 * s) >= 3.5:
                s *= 2
        self._scale = s
        c = det.candidates(raw, g, keep=KEEP_CANDIDATES, exclude=exclude, region=self.region,
                           scale=s)  # fmt: skip
        if len(c) == 0:
            reason = c.refused[0].reason if c.refused else NO_BLOB
        else:
            reason = NOT_CONFIRMED
        self.search_reason[n] = self.last_reason = reason
        new: list[_Tracklet] = []
        confirmed: list[_Tracklet] = []
        for tl in self.tracklets:
            gap = n - tl.f[-1]
            if gap > 3:
                continue
            if len(tl.f) == 1:
                if gap <= 2:
                    new.append(tl)
                for j in range(len(c)):
                    d = math.hypot(c.x[j] - tl.x[0], c.y[j] - tl.y[0])
                    if d <= self.max_step * gap and _same_size(c.area[j], tl.a[0]):
                        new.append(tl.extended(n, c.x[j], c.y[j], c.area[j], c.box[j]))
                continue
            new.append(tl)
            if len(c) == 0:
                continue
            px, py, tol = tl.predict(n, s)
            d = np.hypot(c.x - px, c.y - py)
            j = int(np.argmin(d))
            if d[j] > tol or not _same_size(c.area[j], tl.a[-1]):
                continue
            tl.f.append(n)
            tl.x.append(float(c.x[j]))
            tl.y.append(float(c.y[j]))
            tl.a.append(float(c.area[j]))
            tl.box.append(c.box[j])
            if len(tl.f) >= 3:
                moved = math.hypot(tl.x[-1] - tl.x[0], tl.y[-1] - tl.y[0])
                if moved >= _MIN_MOTION_PX:
                    confirmed.append(tl)
                else:
                    for k in tl.f:
                        if self.search_reason.get(k) == NOT_CONFIRMED:
                            self.search_reason[k] = STILL
                    if self.last_reason == NOT_CONFIRMED:
                        self.last_reason = STILL
                    del tl.f[:-2], tl.x[:-2], tl.y[:-2], tl.a[:-2], tl.box[:-2]
        for j in range(len(c)):
            new.append(_Tracklet(n, float(c.x[j]), float(c.y[j]), float(c.area[j]), c.box[j]))
        # Longest and most recent first; bounded.
        new.sort(key=lambda t: (-min(len(t.f), 3), -t.f[-1]))
        self.tracklets = new[:_MAX_TRACKLETS]
        # At most _MAX_CONFIRM full-resolution checks per frame; a tracklet that fails its
        # check is dropped (it would be checked again in every later frame).
        tried = 0
        for tl in sorted(confirmed, key=lambda t: -len(t.f)):
            if tl not in self.tracklets or tried >= _MAX_CONFIRM:
                continue
            tried += 1
            if self._start_track(tl):
                ex, ey = tl.x[-1], tl.y[-1]
                self.tracklets = [
                    t for t in self.tracklets if math.hypot(t.x[-1] - ex, t.y[-1] - ey) > 4.0 * s
                ]
            else:
                self.tracklets.remove(tl)

    def _start_track(self, tl: _Tracklet) -> bool:
        """Measure a confirmed tracklet at full resolution and, if it holds, follow it as a
        track, also backwards through the frames kept in memory."""
        if sum(t.state == "locked" for t in self.tracks) >= _MAX_TRACKS:
            return False
        frames = {k: (raw, g, sig) for k, raw, g, sig in self.buffer}
        s = self._scale
        found = []
        for k, x, y, box in zip(tl.f, tl.x, tl.y, tl.box, strict=True):
            if k not in frames:
                return False
            raw, g, sig = frames[k]
            blobs = self.det.measure_near(raw, g, sig, tuple(box))
            near = [b for b in blobs if math.hypot(b.x - x, b.y - y) <= 2.0 * s + 0.25 * b.extent]
            near.sort(key=lambda b: math.hypot(b.x - x, b.y - y))
            found.append((k, near[0] if near else None, g))
        good = [(k, b, g) for k, b, g in found if b is not None and b.reason is None]
        if len(good) < 2 or found[-1][1] is None or found[-1][1].reason is not None:
            return False
        areas = np.array([b.area for _, b, _ in good])
        if areas.max() / areas.min() > 1 + self.size_tol:
            return False
        tr = _Track(len(self.tracks))
        for k, b, g in good:
            tr.add(k, b, g)
        for k, b, _ in found:
            if b is None:
                tr.miss[k] = NOT_CONFIRMED
            elif b.reason is not None:
                tr.miss[k] = b.reason
        self.tracks.append(tr)
        self._fill_between(tr, frames)
        self._follow_back(tr, frames)
        return True

    def _start_part(self, parted: list[tuple[int, Blob]]) -> None:
        """Start a track from the blobs of consecutive frames in which a followed blob had
        shrunk to a new size (confirmed at full resolution as any tracklet)."""
        frames = [k for k, _ in parted]
        if frames != list(range(frames[0], frames[0] + len(frames))):
            return
        if any(b.reason is not None for _, b in parted):
            return
        tl = None
        for k, b in parted:
            r = 0.5 * b.extent + 2.0
            box = (b.x - r, b.y - r, b.x + r + 1.0, b.y + r + 1.0)
            tl = _Tracklet(k, b.x, b.y, b.area, box) if tl is None else tl.extended(
                k, b.x, b.y, b.area, box)  # fmt: skip
        moved = math.hypot(tl.x[-1] - tl.x[0], tl.y[-1] - tl.y[0])
        if moved >= _MIN_MOTION_PX:
            self._start_track(tl)

    def _fill_between(self, tr: _Track, frames: dict) -> None:
        """Measure the frames between the confirming detections (searched only every few
        frames while another track was followed) around the interpolated position."""
        lo, hi = min(tr.accepted), max(tr.accepted)
        for k in range(lo + 1, hi):
            if k in tr.accepted or k not in frames:
                continue
            fr = sorted(tr.accepted)
            b = [tr.accepted[j][0] for j in fr]
            px, py, allow = tr.predict(k, fr, [v.x for v in b], [v.y for v in b])
            raw, g, sig = frames[k]
            self._measure_track(tr, k, raw, g, sig, px, py, allow)

    def _follow_back(self, tr: _Track, frames: dict) -> None:
        fails = 0
        k = min(tr.accepted) - 1
        while k in frames and fails < 3:
            px, py, allow = tr.predict_back(k)
            r = 0.5 * tr.extent
            if px < -r or py < -r or px > self.w - 1 + r or py > self.h - 1 + r:
                break
            raw, g, sig = frames[k]
            if self._measure_track(tr, k, raw, g, sig, px, py, allow):
                fails = 0
            else:
                fails += 1
            k -= 1

    # -- the end --------------------------------------------------------------------------
    def finish(self) -> FollowResult:
        """Choose the specimen among the tracks and give the detections, reasons, others."""
        tracks = [t for t in self.tracks if len(t.accepted) >= 3]
        kinds = {t.ident: motion_kind(*t.arrays()) for t in tracks}
        rank = {"free flight": 3, "too short": 1, "straight line": 1, "irregular": 0}
        order = sorted(tracks, key=lambda t: (rank[kinds[t.ident]], len(t.accepted)), reverse=True)
        chosen: list[_Track] = []
        for t in order:
            if not chosen:
                chosen.append(t)
                continue
            lo, hi = min(t.accepted), max(t.accepted)
            apart = all(hi < min(c.accepted) or lo > max(c.accepted) for c in chosen)
            # The same specimen has the same size (a hand still holding it does not).
            same = abs(_median_area(t) / _median_area(chosen[0]) - 1.0) <= 2.0 * self.size_tol
            if apart and same and (kinds[t.ident] == "free flight" or self._continues(chosen, t)):
                chosen.append(t)
        ids = {t.ident for t in chosen}
        accepted: dict = {}
        for t in chosen:
            accepted.update(t.accepted)
        others = []
        for t in tracks:
            if t.ident in ids or len(t.accepted) < _MIN_REPORTED:
                continue
            fr, xs, ys = t.arrays()
            over = set()
            for c in chosen:
                over |= c.overlap.get(t.ident, set())
            others.append(
                OtherMover(
                    first_frame=int(fr[0]),
                    last_frame=int(fr[-1]),
                    start_px=(float(xs[0]), float(ys[0])),
                    end_px=(float(xs[-1]), float(ys[-1])),
                    frames_seen=len(fr),
                    motion=kinds[t.ident],
                    overlap_frames=tuple(sorted(over)),
                )
            )
        missing: dict[int, str] = {}
        spans = sorted((min(t.accepted), t.ended if t.state == "left" else -1) for t in chosen)
        for n in self.read:
            if n in accepted:
                continue
            why = None
            for t in chosen:
                if n in t.miss:
                    why = t.miss[n]
                    break
            if why is None and any(0 <= left <= n for _, left in spans):
                why = LEFT
            if why is None and any(n in t.accepted for t in tracks if t.ident not in ids):
                why = OTHER_ONLY
            if why is None:
                why = self.search_reason.get(n, NO_BLOB)
            missing[n] = why
        return FollowResult(accepted=accepted, missing=missing, others=tuple(others))

    def _continues(self, chosen: list[_Track], t: _Track) -> bool:
        """Whether track ``t`` lies on the extrapolated path of the chosen tracks (the
        specimen coming back into view)."""
        fr = np.concatenate([c.arrays()[0] for c in chosen])
        xs = np.concatenate([c.arrays()[1] for c in chosen])
        ys = np.concatenate([c.arrays()[2] for c in chosen])
        tf, tx, ty = t.arrays()
        near = np.argsort(np.abs(fr - tf.mean()))[:15]
        if len(near) < 6:
            return False
        f0 = fr[near].astype(float)
        cx = np.polyfit(f0, xs[near], 2)
        cy = np.polyfit(f0, ys[near], 2)
        gap = float(np.min(np.abs(fr[near][:, None] - tf[None, :])))
        r = np.hypot(np.polyval(cx, tf) - tx, np.polyval(cy, tf) - ty)
        return bool(np.median(r) <= 4.0 + 0.1 * gap)


def _median_area(t: _Track) -> float:
    return float(np.median([b.area for b, _ in t.accepted.values()]))


def _same_size(a: float, b: float) -> bool:
    """Candidate areas at the search resolution agree within a factor 1.8 (coarse)."""
    lo, hi = min(a, b), max(a, b)
    return lo > 0 and hi / lo <= 1.8
