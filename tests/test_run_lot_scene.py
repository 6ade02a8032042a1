"""Tests of fitdrag.run.lot_scene: the synthetic lot is what it says it is."""

from __future__ import annotations

import json

import numpy as np
import pytest
import reference as ref

from fitdrag.physics.air import Air
from fitdrag.run.lot_scene import LotScene, write_lot
from fitdrag.tracks.csv_file import read_track


def test_tracks_follow_an_independent_integration(tmp_path):
    """closed-form/independent: each throw, integrated again with scipy's DOP853 from the
    truth JSON (true Cd, mass, diameter; tests/reference.py, written from the equation of motion
    alone),
    matches the track to within 5 noise sigmas; the truth records the sample SD of the
    true Cd."""
    sc = LotScene(specimens=2, throws=2, frames=100)
    made = write_lot(tmp_path, sc)
    truth = json.loads(made.truth_file.read_text())
    cds = [s["cd"] for s in truth["specimens"].values()]
    assert truth["true_spread_of_these_specimens"] == pytest.approx(np.std(cds, ddof=1))
    rho = Air.from_conditions(sc.temperature, sc.pressure, sc.relative_humidity).density
    for sid, s in truth["specimens"].items():
        for j, name in enumerate(s["throws"]):
            tr = read_track(tmp_path / name)
            v, a = sc.speeds[j % 2], np.radians(sc.angles[j % 2])
            body = ref.Body.sphere(s["mass"], s["diameter"])
            xy = ref.flight(tr.t, (0.0, 0.0, v * np.cos(a), v * np.sin(a)), body, rho,
                            s["cd"], gravity=sc.gravity)  # fmt: skip
            err = np.hypot(tr.x - xy[:, 0], tr.y - xy[:, 1])
            assert err.max() < 5 * sc.noise * np.sqrt(2), (sid, name)
    text = made.lot_file.read_text()
    assert "SYNTHETIC" in text and made.base_job.read_text().count("synthetic") >= 1
