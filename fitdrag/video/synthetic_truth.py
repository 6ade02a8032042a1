"""The exact truth that comes with synthetic footage (see :mod:`fitdrag.video.synthetic`).

Per frame: where the ball is (at mid-exposure and averaged over the exposure), how much of it
the frame shows, its apparent diameter and the image rows its outline spans, the camera
tremble, whether a hand still holds it, and the same for a second ball of the same look.
All footage it describes is synthetic.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import IntEnum

import numpy as np


class Visibility(IntEnum):
    """How much of a ball a frame shows (codes of ``SyntheticTruth.visibility``)."""

    #: No part of the ball's footprint over the exposure is inside the image.
    OUTSIDE = 0
    #: Cut by the image edge (or within 1 px of it), or partly hidden behind an occluder.
    PARTLY = 1
    #: Clear of the outermost pixel rows and columns and not hidden at all.
    FULLY = 2
    #: Inside the image but wholly behind occluders.
    HIDDEN = 3


@dataclass(frozen=True, eq=False)
class SyntheticTruth:
    """Exact truth of a synthetic flight, one entry per frame.

    Attributes
    ----------
    t : ndarray
        Mid-exposure time of each frame. [s]
    x_px, y_px : ndarray
        Ball centre at mid-exposure, image coordinates, y down. [px]
    x_mean_px, y_mean_px : ndarray
        Ball centre averaged over the exposure (equals the mid-exposure centre to within
        ``a * exposure**2 / 24`` for acceleration ``a``). [px]
    edge_distance_px : ndarray
        Smallest distance from the ball's footprint over the exposure to the image boundary;
        negative when the ball is cut by the frame edge. [px]
    inside : ndarray of bool
        The footprint stays clear of the outermost pixel rows and columns
        (``edge_distance_px >= 1``): a ball that reaches those pixels cannot be told apart
        from one the frame edge cuts.
    hidden_fraction : ndarray
        Fraction of the ball's exposure-integrated image hidden behind occluders (0..1).
    visible : ndarray of bool
        ``inside`` and not hidden at all.
    gain : ndarray
        Flicker gain applied to the frame, averaged over the exposure (1 = none).
    blur_px : ndarray
        Length of the centre's path during the exposure. [px]
    radius_px : float
        Ball radius. [px]
    marker_corners : dict
        Marker id -> (4, 2) array of its black square's image corners in the order a detector
        reports them for an upright marker: top-left, top-right, bottom-right, bottom-left.
        Without camera tremble; frame ``k`` shows them moved by ``(shift_x_px[k],
        shift_y_px[k])``. [px]
    visibility : ndarray of int8
        :class:`Visibility` code per frame: FULLY (= ``visible``),
        PARTLY (cut by the frame edge or partly hidden), HIDDEN (wholly behind occluders) or
        OUTSIDE (no part of the footprint in the image).
    diameter_px : ndarray
        Apparent diameter of the ball perpendicular to its motion, ``2 * radius_px`` (exposure
        blur lengthens the blob along the motion only). [px]
    top_px, bottom_px : ndarray
        Highest and lowest image y the ball's outline reaches over the exposure (y down). [px]
    row_first, row_last : ndarray of int
        First and last image row with any part of the ball's footprint over the exposure
        (row ``i`` covers ``i - 0.5 <= y < i + 0.5``), clipped to the image; -1 when outside.
    shift_x_px, shift_y_px : ndarray
        Whole-scene shift of each frame (camera tremble; zero without it).  The positions
        above are image positions and include it; ``x_px - shift_x_px`` is the position in
        the still scene. [px]
    held : ndarray of bool
        The ball is in the hand (frames before the hand's release; all False without a hand).
    second : SecondBallTruth or None
        Truth of the second ball, when there is one.
    """

    t: np.ndarray
    x_px: np.ndarray
    y_px: np.ndarray
    x_mean_px: np.ndarray
    y_mean_px: np.ndarray
    edge_distance_px: np.ndarray
    inside: np.ndarray
    hidden_fraction: np.ndarray
    visible: np.ndarray
    gain: np.ndarray
    blur_px: np.ndarray
    radius_px: float
    marker_corners: dict
    visibility: np.ndarray
    diameter_px: np.ndarray
    top_px: np.ndarray
    bottom_px: np.ndarray
    row_first: np.ndarray
    row_last: np.ndarray
    shift_x_px: np.ndarray
    shift_y_px: np.ndarray
    held: np.ndarray
    second: SecondBallTruth | None = None


@dataclass(frozen=True, eq=False)
class SecondBallTruth:
    """Exact truth of the second ball (a distractor of the same look), one entry per frame.

    Attributes
    ----------
    x_px, y_px : ndarray
        Its centre at mid-exposure, image coordinates, y down (camera tremble included). [px]
    x_mean_px, y_mean_px : ndarray
        Its centre averaged over the exposure. [px]
    visibility : ndarray of int8
        :class:`Visibility` code per frame (it passes behind the
        specimen: frames where the two overlap count as PARTLY).
    overlap : ndarray of bool
        The footprints of the two balls over the exposure touch or overlap in this frame.
    """

    x_px: np.ndarray
    y_px: np.ndarray
    x_mean_px: np.ndarray
    y_mean_px: np.ndarray
    visibility: np.ndarray
    overlap: np.ndarray


def visibility_codes(
    edge_distance: np.ndarray, outside: np.ndarray, hidden: np.ndarray
) -> np.ndarray:
    """Per-frame :class:`Visibility` codes from the edge distance [px], the all-outside flags
    and the hidden fractions."""
    code = np.full(len(edge_distance), int(Visibility.PARTLY), np.int8)
    code[(edge_distance >= 1.0) & (hidden <= 0.0)] = int(Visibility.FULLY)
    code[(hidden >= 1.0) & ~outside] = int(Visibility.HIDDEN)
    code[outside] = int(Visibility.OUTSIDE)
    return code
