"""Tests of fitdrag.run.planar_footage: synthetic footage of a flight in the markers' plane."""

from __future__ import annotations

import numpy as np
import pytest
import reference

from fitdrag.run.planar_footage import LAUNCH, make_planar_footage
from fitdrag.tracks.track import file_sha256

SMALL = {
    "width_px": 480,
    "height_px": 300,
    "metres_per_px": 0.005,
    "origin_px": (30.0, 270.0),
    "marker_side": 0.16,
    "markers": {0: (0.0, 0.0), 1: (1.95, 0.0), 2: (0.0, 1.08), 3: (1.95, 1.08)},
}


@pytest.fixture(scope="module")
def clip(tmp_path_factory):
    path = tmp_path_factory.mktemp("planar") / "clip.avi"
    return path, make_planar_footage(path, frames=30, scene=SMALL)


def test_truth_is_the_equation_of_motion(clip):
    """closed-form/independent: the truth's positions agree with scipy's DOP853 solution
    (tests/reference.py: Timmerman & van der Weele, Am. J. Phys. 67, 538 (1999), eq. 1 with
    buoyancy and added mass) for the stated Cd, launch, specimen, air and gravity, to 1 µm."""
    _, tr = clip
    assert tr["synthetic"] is True
    la = tr["launch"]
    assert la == LAUNCH
    a = np.radians(la["angle"])
    launch = (la["x0"], la["y0"], la["speed"] * np.cos(a), la["speed"] * np.sin(a))
    body = reference.Body.sphere(tr["specimen"]["mass"], tr["specimen"]["diameter"])
    ref = reference.flight(tr["t"], launch, body, tr["air_density"], tr["true_cd"],
                           gravity=tr["gravity"])  # fmt: skip
    np.testing.assert_allclose(tr["x"], ref[:, 0], atol=1e-6, rtol=0)
    np.testing.assert_allclose(tr["y"], ref[:, 1], atol=1e-6, rtol=0)


def test_truth_names_the_file_and_its_image(clip):
    """regression: the truth states the file's SHA-256, the frame count and image size asked
    for, and image positions through its own world-to-image homography."""
    path, tr = clip
    assert tr["sha256"] == file_sha256(path)
    assert tr["frames"] == 30 and tr["image_size_px"] == [480, 300]
    h = np.asarray(tr["world_to_image_homography"])
    w = h @ np.vstack((tr["x"], tr["y"], np.ones(30)))
    np.testing.assert_allclose(w[0] / w[2], tr["x_px"], atol=0.05)


def test_refuses_to_overwrite_and_unknown_scene_keys(clip):
    """regression: an existing file is not replaced without overwrite; an unknown scene key
    is named with the fix."""
    path, _ = clip
    with pytest.raises(ValueError, match=r"clip\.avi: already exists; pass overwrite=True"):
        make_planar_footage(path, frames=30, scene=SMALL)
    with pytest.raises(ValueError, match=r"scene: unknown key\(s\) \['zoom'\]; use keys of "
                       r"fitdrag\.run\.planar_footage\.SCENE\."):  # fmt: skip
        make_planar_footage(path.with_name("other.avi"), scene={"zoom": 2})
