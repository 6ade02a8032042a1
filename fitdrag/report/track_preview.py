"""The preview picture of a tracked footage: one frame with the track and the markers on it.

:func:`track_preview_figure` draws the result of :func:`fitdrag.video.tracking.track_footage`
over one of its frames: every detected centroid (coloured by frame), the frame shown marked
with a cross, the markers' outlines (those used by the calibration in orange) and the world
axes at the origin, titled with the tracking summary.  Image coordinates are pixels, y down.
Nothing is computed here; the caller reads the frame and writes the figure.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # annotations only
    from matplotlib.figure import Figure

    from fitdrag.video.tracking import FootageTrack

__all__ = ["track_preview_figure"]


def _stretch(img: np.ndarray) -> np.ndarray:
    """Grey levels stretched to 0..1 between the 0.5th and 99.5th percentiles."""
    f = np.asarray(img, dtype=float)
    lo, hi = np.percentile(f, [0.5, 99.5])
    if not hi > lo:
        hi = lo + 1.0
    return np.clip((f - lo) / (hi - lo), 0.0, 1.0)


def track_preview_figure(track: FootageTrack, image: np.ndarray) -> Figure:
    """Figure of one frame with the detected track, markers and world axes drawn on it.

    Parameters
    ----------
    track : FootageTrack
        The result of :func:`fitdrag.video.tracking.track_footage`.
    image : ndarray
        The frame ``track.preview_frame`` of the footage (grey levels, rows down).

    Returns
    -------
    matplotlib.figure.Figure
        Not attached to any window (save it with ``savefig``).
    """
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure

    det, cal = track.detections, track.calibration
    frame_number = track.preview_frame
    summary = track.summary().replace("\n  ", "\n")
    h, w = image.shape[:2]
    width = min(14.0, 3.0 + w / 100.0)
    fig = Figure(figsize=(width, 1.0 + 0.85 * width * h / w))
    ax = fig.add_subplot(1, 1, 1)
    ax.imshow(_stretch(image), cmap="gray", vmin=0, vmax=1, interpolation="nearest")
    if len(det):
        sc = ax.scatter(det.x_px, det.y_px, c=det.frame, s=9, cmap="viridis", marker="o",
                        linewidths=0, label="detected centroid")  # fmt: skip
        cb = fig.colorbar(sc, ax=ax, fraction=0.03, pad=0.01)
        cb.set_label("frame")
        here = np.flatnonzero(det.frame == frame_number)
        if here.size:
            i = int(here[0])
            ax.plot(det.x_px[i], det.y_px[i], marker="+", ms=16, mew=1.5, color="tab:red",
                    label=f"frame {frame_number}")  # fmt: skip
    corners = cal.details.get("corners_px", {})
    for mid, c in corners.items():
        c = np.asarray(c)
        used = mid in cal.details.get("ids", ())
        colour = "tab:orange" if used else "tab:gray"
        ax.plot(*np.vstack([c, c[:1]]).T, color=colour, lw=1.2)
        ax.plot(c[3, 0], c[3, 1], "s", ms=4, color=colour)
        # the id above the marker, or below it when the marker touches the top of the frame
        above = c[:, 1].min() - 4 >= 10
        ax.text(c[:, 0].mean(), c[:, 1].min() - 4 if above else c[:, 1].max() + 4, str(mid),
                color=colour, ha="center", va="bottom" if above else "top", fontsize=8)  # fmt: skip
    # world axes at the origin, a tenth of the frame width long
    length = 0.1 * w * cal.scale
    ox, oy = cal.world_to_pixel([0.0, length, 0.0], [0.0, 0.0, length])
    if np.all(np.isfinite(ox)) and np.all(np.isfinite(oy)):
        for k, name in ((1, "x"), (2, "y")):
            ax.annotate("", xy=(ox[k], oy[k]), xytext=(ox[0], oy[0]),
                        arrowprops={"arrowstyle": "->", "color": "tab:cyan", "lw": 1.5})  # fmt: skip
            ax.text(ox[k], oy[k], f" {name}", color="tab:cyan", fontsize=9)
    ax.set_xlim(-0.5, w - 0.5)
    ax.set_ylim(h - 0.5, -0.5)
    ax.set_xlabel("image x [px]")
    ax.set_ylabel("image y [px] (down)")
    ax.set_title(summary, fontsize=8, loc="left")
    if len(det):
        ax.legend(loc="upper right", fontsize=7, framealpha=0.7)
    fig.tight_layout()
    return fig
