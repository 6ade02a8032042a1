"""Frame sources: video files and folders of numbered image files, one interface.

:func:`open_source` opens either a video file OpenCV can decode (AVI/Motion-JPEG, MP4, MKV,
...) or a folder of numbered PNG/TIFF/JPEG frames, the way high-speed cameras often export.
Frames come out as grey float32 images on their native scale (0..255 for 8-bit footage,
0..65535 for 16-bit), numbered: video frames from 0, image files by the number in their name.

The capture rate of high-speed footage is rarely what the container says: :func:`check_frame_rate`
insists on the real one when the container claims a playback-like rate.
"""

from __future__ import annotations

import math
import os
import queue
import re
import threading
from collections.abc import Iterable, Iterator, Sequence
from concurrent.futures import Future, ThreadPoolExecutor
from pathlib import Path

import numpy as np

from fitdrag.errors import InputError, InputFileNotFoundError

#: File-name extensions read from image folders (case-insensitive).
IMAGE_EXTENSIONS = (".png", ".tif", ".tiff", ".jpg", ".jpeg")

#: Container rates (frames/s) treated as playback rates rather than capture rates.
PLAYBACK_RATE_RANGE = (23.5, 60.5)

_NUMBER = re.compile(r"(\d+)(?!.*\d)")

# Frames read ahead of the consumer by the decoding thread.
_PREFETCH = 6
# Most bytes of sampled frames kept for the sequential read that follows (Motion-JPEG).
_KEEP_BYTES = 64 * 2**20


def _cv2():
    import cv2

    return cv2


def _to_grey(img: np.ndarray) -> np.ndarray:
    """Native-dtype grey image from a grey, BGR or BGRA image."""
    if img.ndim == 2:
        return img
    if img.ndim == 3 and img.shape[2] == 1:
        return img[:, :, 0]
    cv2 = _cv2()
    if img.ndim == 3 and img.shape[2] == 3:
        return cv2.cvtColor(img, cv2.COLOR_BGR2GRAY)
    if img.ndim == 3 and img.shape[2] == 4:
        return cv2.cvtColor(img, cv2.COLOR_BGRA2GRAY)
    raise InputError(f"image of shape {img.shape} is neither grey nor BGR(A)")


def _prefetch(it: Iterator, depth: int = _PREFETCH) -> Iterator:
    """Run ``it`` in a worker thread, ``depth`` items ahead (decoding releases the GIL)."""
    q: queue.Queue = queue.Queue(maxsize=depth)
    stop = threading.Event()
    done = object()

    def work():
        try:
            for item in it:
                while not stop.is_set():
                    try:
                        q.put(("item", item), timeout=0.1)
                        break
                    except queue.Full:
                        continue
                if stop.is_set():
                    return
            q.put(("end", done))
        except BaseException as exc:  # handed to the consumer
            q.put(("error", exc))

    th = threading.Thread(target=work, daemon=True)
    th.start()
    try:
        while True:
            kind, item = q.get()
            if kind == "item":
                yield item
            elif kind == "error":
                raise item
            else:
                return
    finally:
        stop.set()
        while th.is_alive():
            try:
                q.get(timeout=0.05)
            except queue.Empty:
                pass
        th.join()


class FrameSource:
    """Numbered grey frames from footage.

    Attributes
    ----------
    path : Path or None
        File or folder the frames come from (None for frames held in memory).
    n_frames : int or None
        Number of frames, when known.
    shape : (int, int)
        Frame height and width. [px]
    container_fps : float or None
        Frame rate stored in the container, if any (often a playback rate). [1/s]
    bit_depth : int
        8 or 16.
    is_color : bool
        The footage is stored in colour (frames are converted to grey).
    first_frame, last_frame : int
        Numbers of the first and last frame (when known).
    """

    path: Path | None
    n_frames: int | None
    shape: tuple[int, int]
    container_fps: float | None
    bit_depth: int
    is_color: bool
    first_frame: int
    last_frame: int | None
    #: Frames found undecodable while reading (skipped rather than ending the read).
    undecodable: set[int]

    @property
    def name(self) -> str:
        """How error messages name this footage."""
        return str(self.path) if self.path is not None else "<frames in memory>"

    @property
    def full_scale(self) -> float:
        """Largest grey level of the footage's bit depth (255 or 65535)."""
        return float(2**self.bit_depth - 1)

    # -- to implement ---------------------------------------------------------------------
    def _iter_raw(self, start: int, stop: int | None) -> Iterator[tuple[int, np.ndarray]]:
        raise NotImplementedError

    def read_color(self, frame_number: int) -> np.ndarray:
        """Frame ``frame_number`` as stored: BGR (or grey) in its native dtype."""
        raise NotImplementedError

    # -- shared ---------------------------------------------------------------------------
    def _check_range(self, start: int, stop: int | None) -> tuple[int, int | None]:
        if isinstance(start, bool) or not isinstance(start, int | np.integer):
            raise InputError(f"start: expected a frame number, got {start!r}.")
        if stop is not None and (isinstance(stop, bool) or not isinstance(stop, int | np.integer)):
            raise InputError(f"stop: expected a frame number or None, got {stop!r}.")
        start = int(start)
        stop = None if stop is None else int(stop)
        lo = self.first_frame
        hi = self.last_frame
        span = f"{lo}..{hi}" if hi is not None else f"{lo} onwards"
        if start < 0 or (hi is not None and start > hi):
            raise InputError(
                f"start: frame {start} is outside the footage {self.name} (frames {span}); "
                f"choose a start inside that range."
            )
        if stop is not None and stop <= start:
            raise InputError(
                f"stop: {stop} is not after start {start}; stop is the first frame not read, "
                f"so it must be larger than start."
            )
        return start, stop

    def frames_raw(
        self, start: int = 0, stop: int | None = None
    ) -> Iterator[tuple[int, np.ndarray]]:
        """Frames numbered ``start <= n < stop`` as grey images in their native dtype
        (uint8/uint16); a ``start`` below the first frame's number starts at the first frame.

        Decoding runs in a worker thread a few frames ahead.
        """
        start, stop = self._check_range(start, stop)
        return _prefetch(self._iter_raw(start, stop))

    def frames(self, start: int = 0, stop: int | None = None) -> Iterator[tuple[int, np.ndarray]]:
        """Frames ``start <= n < stop`` as ``(frame_number, grey float32 image)``."""
        for n, img in self.frames_raw(start, stop):
            yield n, img.astype(np.float32)

    def __iter__(self):
        return self.frames(self.first_frame)

    #: Weights (B, G, R) of the single channel frames are read as (None: BT.601 grey).
    channel_weights: tuple[float, float, float] | None = None
    #: A hint for the reader: frames may come out this many times smaller (2 or 4; Motion-JPEG
    #: video only, where the decoder scales the image down itself, much faster).  It applies
    #: to frames decoded after it is set; the consumer tells them by their shape.
    reduce_decode: int = 1

    def use_channel(self, weights: tuple[float, float, float] | None) -> None:
        """Read colour frames as the channel ``weights`` (B, G, R; non-negative, summing to 1,
        so a lamp's flicker scales it as it scales grey) instead of grey; None for grey."""
        if weights is not None:
            w = tuple(float(v) for v in weights)
            if len(w) != 3 or min(w) < 0 or abs(sum(w) - 1.0) > 1e-6:
                raise InputError(
                    f"channel weights: expected three non-negative numbers (B, G, R) summing "
                    f"to 1, got {weights!r}."
                )
            weights = w
        self.channel_weights = weights

    def _grey(self, img: np.ndarray) -> np.ndarray:
        """One channel of a stored frame: grey, or the chosen channel of a colour frame."""
        w = self.channel_weights
        if w is None or img.ndim == 2 or img.shape[2] < 3:
            return _to_grey(img)
        m = np.array([w], np.float32)
        return _cv2().transform(np.ascontiguousarray(img[:, :, :3]), m)

    def read_raw(self, frame_number: int) -> np.ndarray:
        """One frame, grey (or the chosen channel), native dtype."""
        return self._grey(self.read_color(frame_number))

    def read(self, frame_number: int) -> np.ndarray:
        """One frame, grey float32, native scale."""
        return self.read_raw(frame_number).astype(np.float32)

    def sample(self, frame_numbers: Sequence[int]) -> list[tuple[int, np.ndarray]]:
        """Grey native-dtype frames at (sorted, distinct) ``frame_numbers``; unreadable ones are
        skipped."""
        out = []
        for n in sorted(set(int(v) for v in frame_numbers)):
            try:
                out.append((n, self.read_raw(n)))
            except (ValueError, FileNotFoundError):
                continue
        return out

    def close(self) -> None:
        """Release open files."""

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
        return False

    def __repr__(self) -> str:
        return (
            f"{type(self).__name__}({self.name!r}, n_frames={self.n_frames}, shape={self.shape}, "
            f"bit_depth={self.bit_depth}, container_fps={self.container_fps})"
        )


class VideoSource(FrameSource):
    """Frames of a video file decoded by OpenCV (``cv2.VideoCapture``), numbered from 0."""

    def __init__(self, path: str | os.PathLike):
        cv2 = _cv2()
        self.path = Path(path)
        if not self.path.is_file():
            raise InputFileNotFoundError(
                f"footage {self.path}: no such file; check the path and the file name."
            )
        cap = cv2.VideoCapture(str(self.path))
        ok, img = (False, None)
        if cap.isOpened():
            ok, img = cap.read()
        if not ok or img is None:
            cap.release()
            raise InputError(
                f"footage {self.path}: not a video OpenCV can decode (no frame could be read); "
                f"convert it to AVI (Motion-JPEG) or MP4, or export the frames as numbered "
                f"PNG/TIFF files into a folder."
            )
        fps = cap.get(cv2.CAP_PROP_FPS)
        count = cap.get(cv2.CAP_PROP_FRAME_COUNT)
        self._cap = cap
        self._next = 1  # the frame _cap.read() returns next
        self.shape = (int(img.shape[0]), int(img.shape[1]))
        self.is_color = img.ndim == 3 and img.shape[2] >= 3
        self.bit_depth = 16 if img.dtype == np.uint16 else 8
        self.container_fps = float(fps) if math.isfinite(fps) and fps > 0 else None
        self.n_frames = int(count) if math.isfinite(count) and count >= 1 else None
        self.first_frame = 0
        self.last_frame = None if self.n_frames is None else self.n_frames - 1
        self._lock = threading.Lock()
        self._first = img
        self._packets = self._probe_packets(img)
        self._pcap = None  # capture used for random access in packet mode
        # Frames decoded by sample(), with the channel weights used, kept for frames_raw().
        self._kept: dict[int, tuple[object, np.ndarray]] = {}
        self.undecodable = set()

    def _probe_packets(self, first: np.ndarray) -> bool:
        """Whether frames can be read as raw JPEG packets and decoded in parallel.

        Motion-JPEG frames are independent JPEG images: reading the packets (cheap, and
        seeking is exact) and decoding them with several threads is much faster than
        letting the demuxer decode one frame at a time.
        """
        cv2 = _cv2()
        fcc = int(self._cap.get(cv2.CAP_PROP_FOURCC))
        code = "".join(chr((fcc >> (8 * i)) & 0xFF) for i in range(4)).upper()
        if code not in ("MJPG", "JPEG", "DMB1", "AVRN"):
            return False
        cap = cv2.VideoCapture(str(self.path), cv2.CAP_FFMPEG)
        try:
            if not cap.isOpened() or not cap.set(cv2.CAP_PROP_FORMAT, -1):
                return False
            ok, pkt = cap.read()
            if not ok or pkt is None:
                return False
            img = cv2.imdecode(pkt, cv2.IMREAD_GRAYSCALE)  # as the frames will be read
            if img is None or img.shape[:2] != first.shape[:2] or img.dtype != first.dtype:
                return False
            return float(cv2.absdiff(img, _to_grey(first)).mean()) < 2.0
        finally:
            cap.release()

    def _open_packets(self, start: int):
        cv2 = _cv2()
        cap = cv2.VideoCapture(str(self.path), cv2.CAP_FFMPEG)
        cap.set(cv2.CAP_PROP_FORMAT, -1)
        if start > 0:
            cap.set(cv2.CAP_PROP_POS_FRAMES, start)
            if int(round(cap.get(cv2.CAP_PROP_POS_FRAMES))) != start:
                cap.release()
                raise InputError(
                    f"footage {self.path}: cannot seek to frame {start}; the file may be "
                    f"shorter than its header says."
                )
        return cap

    def _iter_packets(self, start, stop):
        cv2 = _cv2()
        cap = self._open_packets(start)

        grey_flags = {1: cv2.IMREAD_GRAYSCALE, 2: cv2.IMREAD_REDUCED_GRAYSCALE_2,
                      4: cv2.IMREAD_REDUCED_GRAYSCALE_4}  # fmt: skip
        colour_flags = {1: cv2.IMREAD_UNCHANGED, 2: cv2.IMREAD_REDUCED_COLOR_2,
                        4: cv2.IMREAD_REDUCED_COLOR_4}  # fmt: skip

        def decode(pkt, r):
            # None for a frame that cannot be decoded: it is skipped (and listed by the
            # detector), not a refusal of the whole clip.  r > 1: the JPEG decoder scales the
            # image down itself (much faster than decoding it whole).
            if self.channel_weights is None:
                img = cv2.imdecode(pkt, grey_flags[r])
            else:
                img = cv2.imdecode(pkt, colour_flags[r])
                img = None if img is None else self._grey(img)
            h, w = self.shape
            if img is not None and r > 1:
                if img.shape[:2] != (-(-h // r), -(-w // r)):
                    return None
                return img[: h // r, : w // r]
            if img is not None and img.shape != self.shape:
                img = None
            return img

        try:
            with ThreadPoolExecutor(max_workers=2) as pool:
                pending: list = []
                n = start
                done = False
                while True:
                    while not done and len(pending) < 6 and (stop is None or n < stop):
                        ok, pkt = cap.read()
                        if not ok or pkt is None:
                            done = True
                            break
                        r = self.reduce_decode if self.reduce_decode in (2, 4) else 1
                        kept = self._kept.pop(n, None)
                        if r == 1 and kept is not None and kept[0] == self.channel_weights:
                            ready: Future = Future()
                            ready.set_result(kept[1])  # decoded by sample(): the same image
                            pending.append((n, ready))
                        else:
                            pending.append((n, pool.submit(decode, pkt.copy(), r)))
                        n += 1
                    if stop is not None and n >= stop:
                        done = True
                    if not pending:
                        return
                    k, fut = pending.pop(0)
                    img = fut.result()
                    if img is None:
                        self.undecodable.add(k)
                        continue
                    yield k, img
        finally:
            cap.release()

    def _open(self, start: int):
        cv2 = _cv2()
        cap = cv2.VideoCapture(str(self.path))
        if not cap.isOpened():
            raise InputError(f"footage {self.path}: could not be reopened for reading.")
        pos = 0
        if start > 0:
            # Seek, and fall back to reading from the start when the backend cannot.
            if (
                cap.set(cv2.CAP_PROP_POS_FRAMES, start)
                and int(round(cap.get(cv2.CAP_PROP_POS_FRAMES))) == start
            ):
                pos = start
            else:
                cap.release()
                cap = cv2.VideoCapture(str(self.path))
        while pos < start:
            if not cap.grab():
                break
            pos += 1
        return cap, pos

    def _iter_raw(self, start, stop):
        if self._packets:
            yield from self._iter_packets(start, stop)
            return
        cap, pos = self._open(start)
        try:
            if pos < start:
                return
            n = start
            while stop is None or n < stop:
                ok, img = cap.read()
                if not ok or img is None:
                    return
                yield n, self._grey(img)
                n += 1
        finally:
            cap.release()

    def _check_number(self, frame_number: int) -> int:
        frame_number = int(frame_number)
        if frame_number < 0 or (self.n_frames is not None and frame_number >= self.n_frames):
            raise InputError(
                f"frame: {frame_number} is outside the footage {self.path} "
                f"(frames 0..{self.last_frame}); choose a frame inside that range."
            )
        return frame_number

    def _decode_packet(self, frame_number: int, flag: int) -> np.ndarray:
        """Frame ``frame_number`` decoded from its Motion-JPEG packet with ``flag``."""
        cv2 = _cv2()
        with self._lock:
            if self._pcap is None:
                self._pcap = self._open_packets(0)
            self._pcap.set(cv2.CAP_PROP_POS_FRAMES, frame_number)
            ok, pkt = self._pcap.read()
            pkt = pkt.copy() if ok and pkt is not None else None  # the next read reuses it
        img = cv2.imdecode(pkt, flag) if pkt is not None else None
        if img is None or img.shape[:2] != self.shape:
            raise InputError(
                f"frame: {frame_number} of {self.path} could not be decoded; the file may "
                f"be shorter than its header says."
            )
        return img

    def read_raw(self, frame_number: int) -> np.ndarray:
        if self._packets and self.channel_weights is None:
            # Straight to grey, as the frames are read in sequence (and faster than colour).
            return self._decode_packet(self._check_number(frame_number), _cv2().IMREAD_GRAYSCALE)
        return super().read_raw(frame_number)

    def read_color(self, frame_number: int) -> np.ndarray:
        cv2 = _cv2()
        frame_number = self._check_number(frame_number)
        if frame_number == 0:
            return self._first.copy()
        if self._packets:
            return self._decode_packet(frame_number, cv2.IMREAD_UNCHANGED)
        with self._lock:
            cap = self._cap
            if frame_number != self._next:
                gap = frame_number - self._next
                if 0 < gap <= 12:
                    for _ in range(gap):
                        cap.grab()
                else:
                    cap.set(cv2.CAP_PROP_POS_FRAMES, frame_number)
            ok, img = cap.read()
            self._next = frame_number + 1 if ok else -1
        if not ok or img is None:
            raise InputError(
                f"frame: {frame_number} of {self.path} could not be decoded; the file may be "
                f"shorter than its header says."
            )
        return img

    def sample(self, frame_numbers):
        """Frames at ``frame_numbers``; reads straight through when they are close together
        (cheaper than seeking), seeks otherwise.  Motion-JPEG frames are decoded on two
        threads and kept (up to 64 MB) for the next sequential read (:meth:`frames_raw`),
        which then does not decode them again."""
        nums = sorted(set(int(v) for v in frame_numbers))
        if not nums:
            return []
        if self._packets:

            def one(k):
                try:
                    return k, self.read_raw(k)
                except ValueError:
                    return None

            with ThreadPoolExecutor(max_workers=2) as pool:
                out = [r for r in pool.map(one, nums) if r is not None]
            self._kept.clear()
            size = 0
            for k, img in out:
                size += img.nbytes
                if size > _KEEP_BYTES:
                    break
                self._kept[k] = (self.channel_weights, img)
            return out
        stride = (nums[-1] - nums[0]) / max(len(nums) - 1, 1)
        if stride > 12:
            return super().sample(nums)
        want = set(nums)
        out = []
        cap, pos = self._open(nums[0])
        try:
            n = pos
            while n <= nums[-1]:
                if n in want:
                    ok, img = cap.read()
                    if not ok:
                        break
                    out.append((n, self._grey(img)))
                elif not cap.grab():
                    break
                n += 1
        finally:
            cap.release()
        return out

    def close(self) -> None:
        self._kept.clear()
        self._cap.release()
        if self._pcap is not None:
            self._pcap.release()


def _frame_number(name: str) -> int | None:
    m = _NUMBER.search(Path(name).stem)
    return int(m.group(1)) if m else None


class FolderSource(FrameSource):
    """Frames stored as numbered image files in one folder.

    The frame number is the last run of digits in each file's name (``shot2_000137.tif`` ->
    137), so gaps in the numbering stay gaps in time.  Files are read with
    ``cv2.IMREAD_UNCHANGED``: 8- or 16-bit, grey or colour.
    """

    def __init__(self, path: str | os.PathLike):
        cv2 = _cv2()
        self.path = Path(path)
        if not self.path.is_dir():
            raise InputFileNotFoundError(f"footage {self.path}: no such folder; check the path.")
        images = sorted(
            p for p in self.path.iterdir() if p.is_file() and p.suffix.lower() in IMAGE_EXTENSIONS
        )
        if not images:
            raise InputError(
                f"footage {self.path}: the folder holds no image files "
                f"({', '.join(IMAGE_EXTENSIONS)}); point to the folder the frames were "
                f"exported to."
            )
        numbered: dict[int, Path] = {}
        unnumbered = []
        for p in images:
            k = _frame_number(p.name)
            if k is None:
                unnumbered.append(p.name)
                continue
            if k in numbered:
                raise InputError(
                    f"footage {self.path}: files {numbered[k].name!r} and {p.name!r} both carry "
                    f"frame number {k}; keep one image sequence per folder."
                )
            numbered[k] = p
        if not numbered:
            raise InputError(
                f"footage {self.path}: none of the {len(images)} image files has a frame number "
                f"in its name (e.g. {images[0].name!r}); name them like frame_000123.png."
            )
        self._numbers = np.array(sorted(numbered), dtype=np.int64)
        self._files = [numbered[int(k)] for k in self._numbers]
        self._index = {int(k): i for i, k in enumerate(self._numbers)}
        self.unnumbered_files = tuple(unnumbered)
        first = cv2.imread(str(self._files[0]), cv2.IMREAD_UNCHANGED)
        if first is None:
            raise InputError(
                f"footage {self._files[0]}: not an image OpenCV can read; re-export the frame."
            )
        if first.dtype not in (np.uint8, np.uint16):
            raise InputError(
                f"footage {self._files[0]}: pixels are {first.dtype}; only 8- and 16-bit "
                f"integer images are supported, re-export as 8- or 16-bit."
            )
        self.shape = (int(first.shape[0]), int(first.shape[1]))
        self.is_color = first.ndim == 3 and first.shape[2] >= 3
        self.bit_depth = 16 if first.dtype == np.uint16 else 8
        self._dtype = first.dtype
        self.container_fps = None
        self.n_frames = len(self._files)
        self.first_frame = int(self._numbers[0])
        self.last_frame = int(self._numbers[-1])
        self.undecodable = set()

    @property
    def frame_numbers(self) -> np.ndarray:
        """Numbers of all frames in the folder, ascending."""
        return self._numbers.copy()

    def file_of(self, frame_number: int) -> Path:
        """Image file holding ``frame_number``."""
        try:
            return self._files[self._index[int(frame_number)]]
        except KeyError:
            raise InputError(
                f"frame: {frame_number} is not in {self.path} (frames {self.first_frame}.."
                f"{self.last_frame}, {self.n_frames} files); choose an existing frame number."
            ) from None

    def _load(self, p: Path) -> np.ndarray:
        cv2 = _cv2()
        img = cv2.imread(str(p), cv2.IMREAD_UNCHANGED)
        if img is None:
            raise InputError(f"footage {p}: not an image OpenCV can read; re-export the frame.")
        return self._checked(p, img)

    def _checked(self, p: Path, img: np.ndarray) -> np.ndarray:
        if img.shape[:2] != self.shape or img.dtype != self._dtype:
            raise InputError(
                f"footage {p}: {img.shape[1]}x{img.shape[0]} {img.dtype} differs from the first "
                f"frame's {self.shape[1]}x{self.shape[0]} {self._dtype}; all frames of a "
                f"sequence must match."
            )
        return img

    def read_color(self, frame_number: int) -> np.ndarray:
        return self._load(self.file_of(frame_number))

    def _iter_raw(self, start, stop):
        i0 = int(np.searchsorted(self._numbers, start))
        i1 = len(self._numbers) if stop is None else int(np.searchsorted(self._numbers, stop))
        idx = range(i0, i1)

        def load(i):
            k = int(self._numbers[i])
            img = _cv2().imread(str(self._files[i]), _cv2().IMREAD_UNCHANGED)
            if img is None:  # an unreadable file in the middle is skipped (and listed)
                return k, None
            return k, self._grey(self._checked(self._files[i], img))

        # Image decoding releases the GIL: two workers keep two cores busy.
        with ThreadPoolExecutor(max_workers=2) as pool:
            pending = []
            it = iter(idx)
            for i in it:
                pending.append(pool.submit(load, i))
                if len(pending) >= 4:
                    break
            while pending:
                fut = pending.pop(0)
                nxt = next(it, None)
                if nxt is not None:
                    pending.append(pool.submit(load, nxt))
                k, img = fut.result()
                if img is None:
                    self.undecodable.add(k)
                    continue
                yield k, img


class ArraySource(FrameSource):
    """Frames held in memory: an ``(n, h, w)`` grey or ``(n, h, w, 3)`` BGR uint8/uint16 array
    (or a sequence of such images), numbered from ``first_frame``."""

    def __init__(
        self,
        frames: np.ndarray | Iterable[np.ndarray],
        *,
        fps: float | None = None,
        first_frame: int = 0,
    ):
        arr = frames if isinstance(frames, np.ndarray) else np.stack(list(frames))
        if arr.ndim not in (3, 4) or arr.shape[0] == 0:
            raise InputError(
                f"frames: expected an array of shape (n, h, w) or (n, h, w, 3) with n >= 1, got "
                f"{arr.shape}; stack the frames along the first axis."
            )
        if arr.dtype not in (np.uint8, np.uint16):
            raise InputError(
                f"frames: expected uint8 or uint16 pixels, got {arr.dtype}; convert the frames."
            )
        self._arr = arr
        self.path = None
        self.shape = (int(arr.shape[1]), int(arr.shape[2]))
        self.is_color = arr.ndim == 4
        self.bit_depth = 16 if arr.dtype == np.uint16 else 8
        self.container_fps = None if fps is None else float(fps)
        self.n_frames = int(arr.shape[0])
        self.first_frame = int(first_frame)
        self.last_frame = self.first_frame + self.n_frames - 1
        self.undecodable = set()

    def read_color(self, frame_number: int) -> np.ndarray:
        i = int(frame_number) - self.first_frame
        if not (0 <= i < self.n_frames):
            raise InputError(
                f"frame: {frame_number} is outside the frames in memory ({self.first_frame}.."
                f"{self.last_frame}); choose a frame inside that range."
            )
        return self._arr[i]

    def _iter_raw(self, start, stop):
        i0 = max(start - self.first_frame, 0)
        i1 = self.n_frames if stop is None else min(stop - self.first_frame, self.n_frames)
        for i in range(i0, i1):
            yield self.first_frame + i, self._grey(self._arr[i])

    def frames_raw(self, start=0, stop=None):
        start, stop = self._check_range(start, stop)
        return self._iter_raw(start, stop)


def open_source(path: str | os.PathLike) -> FrameSource:
    """Open footage: a video file or a folder of numbered image files.

    Parameters
    ----------
    path : str or Path
        Video file (anything ``cv2.VideoCapture`` decodes: AVI/Motion-JPEG, MP4, MKV, ...) or a
        folder of numbered PNG/TIFF/JPEG frames (8- or 16-bit, grey or colour).

    Returns
    -------
    FrameSource
        :class:`VideoSource` or :class:`FolderSource`.

    Raises
    ------
    FileNotFoundError
        Nothing exists at ``path``.
    ValueError
        The file is not a readable video, or the folder holds no numbered frames.
    """
    p = Path(path)
    if p.is_dir():
        return FolderSource(p)
    if not p.exists():
        raise InputFileNotFoundError(
            f"footage {p}: no such file or folder; check the path and the file name."
        )
    return VideoSource(p)


def check_frame_rate(source: FrameSource, fps: float | None = None) -> float:
    """The capture rate of ``source``.

    Parameters
    ----------
    source : FrameSource
        The footage.
    fps : float, optional
        Capture rate given by the user (overrides the container). [1/s]

    Returns
    -------
    float
        ``fps`` when given, else the container's rate. [1/s]

    Raises
    ------
    ValueError
        ``fps`` is not a positive number; or it is not given and the container has no rate,
        or claims a playback-like rate (24-60 frames/s), which high-speed footage usually
        carries instead of its capture rate.
    """
    if fps is not None:
        try:
            value = float(fps)
        except (TypeError, ValueError):
            value = float("nan")
        if not math.isfinite(value) or value <= 0:
            raise InputError(
                f"fps: expected the capture rate in frames per second (a positive number), "
                f"got {fps!r}."
            )
        return value
    cf = source.container_fps
    if cf is None:
        raise InputError(
            f"fps: {source.name} carries no frame rate; pass the capture rate "
            f"(--fps on the command line, e.g. --fps 1000)."
        )
    lo, hi = PLAYBACK_RATE_RANGE
    if lo <= cf <= hi:
        raise InputError(
            f"fps: {source.name} says {cf:g} frames/s, a playback rate; high-speed footage is "
            f"usually stored at a playback rate, not at the rate it was captured. Pass the "
            f"capture rate (--fps on the command line, e.g. --fps 1000)."
        )
    return float(cf)
