"""Tests of fitdrag.fit.track_views: one throw's camera track files fitted in 3-D, as JSON.

Track files: synthetic camera views of tests/views_reference.py (simulate_3d projected through
Camera with the outline of Camera.sphere_outline, seeded noise; true Cd 0.50, 2° out of the
board plane) written as fitdrag track writes them with a camera (track_csv_text and the
camera_ header lines).
"""

from __future__ import annotations

import json
import math
from dataclasses import replace

import numpy as np
import pytest
import views_reference as ref

from fitdrag.fit.image_fit import fit_views
from fitdrag.fit.track_views import fit_track_views, view_fit_dict
from fitdrag.geometry.footage_view import camera_header, views_from_tracks
from fitdrag.tracks.csv_file import read_track
from fitdrag.video.tracking import track_csv_text


@pytest.fixture(scope="module")
def tracks(tmp_path_factory):
    d = tmp_path_factory.mktemp("views")
    rng = np.random.default_rng(11)
    th = ref.launch(2.0)
    out = []
    for i, yaw in enumerate((-20.0, 20.0)):
        v = ref.observe(ref.camera_at(yaw), th, offset=0.9e-3 * i, rng=rng, sigma=0.3)
        world = v.camera.pixel_to_plane(v.pixels, 0.0, undistorted=False)
        n = len(v)
        meta = {"fps": v.fps, **camera_header(v.camera, 0, np.eye(6) * 1e-10).to_lines()}
        path = d / f"cam{i}.csv"
        path.write_text(track_csv_text(meta, v.frames, v.frames / v.fps, world[:, 0],
                                       world[:, 1], v.u, v.v, np.full(n, 0.9),
                                       np.full(n, 0.3)), encoding="utf-8")  # fmt: skip
        out.append(read_track(path))
    return out


def test_fit_track_views_is_fit_views_of_the_files(tracks):
    """closed-form/independent: the front door gives what fit_views gives on the files'
    views (same Cd, bit for bit), and recovers the true Cd within U and the offset of 0.45
    frame within 0.05 frame; a given offset is kept."""
    r = fit_track_views(tracks, ref.BALL, ref.AIR)
    direct = fit_views(views_from_tracks(tracks), ref.BALL, ref.AIR)
    assert r.success and r.cd == direct.cd
    assert abs(r.cd - ref.CD) <= r.expanded_uncertainty
    assert abs(r.views[1].time_offset - 0.9e-3) * ref.FPS < 0.05
    given = fit_track_views(tracks, ref.BALL, ref.AIR, time_offsets=[0.9e-3])
    assert given.views[1].time_offset == 0.9e-3 and not given.views[1].offset_estimated


def test_view_fit_dict_is_json_with_the_result(tracks):
    """regression: the dictionary holds the result's numbers under plain keys, turns NaN
    into None (strict JSON) and names each input file with its SHA-256."""
    r = fit_track_views(tracks, ref.BALL, ref.AIR)
    d = json.loads(json.dumps(view_fit_dict(r, tracks), allow_nan=False))
    assert d["drag_coefficient"]["value"] == r.cd
    assert d["drag_coefficient"]["expanded_uncertainty"] == r.expanded_uncertainty
    assert d["drag_coefficient"]["coverage_factor"] == r.coverage_factor
    assert d["out_of_plane_angle_deg"]["value"] == r.out_of_plane_angle
    assert d["depth_range_m"] == list(r.depth_range)
    assert [v["residual_rms_px"] for v in d["views"]] == [v.residual_rms for v in r.views]
    assert d["views"][1]["time_offset_estimated"] is True
    assert d["parameters"]["cd"]["value"] == r.cd
    assert d["launch"]["time"] == 0.0 and set(d["launch"]) >= {"x0", "z0", "vz0"}
    assert [i["sha256"] for i in d["inputs"]] == [t.meta["sha256"] for t in tracks]
    broken = replace(r, u_cd=math.nan)
    assert view_fit_dict(broken)["drag_coefficient"]["standard_uncertainty"] is None
