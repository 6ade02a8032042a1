"""Tests of fitdrag.run.lot: every specimen through the one-specimen pipeline, the shared
inputs split off, the lot's statistics, report and record."""

from __future__ import annotations

import json
import math

import pytest

from fitdrag.run.lot import SHARED_INPUTS, issue_lot, lot_summary, measure_lot
from fitdrag.run.lot_file import load_lot
from fitdrag.run.lot_scene import LotScene, write_lot
from fitdrag.run.records import Records


@pytest.fixture(scope="module")
def lot_run(tmp_path_factory):
    d = tmp_path_factory.mktemp("lot")
    made = write_lot(d, LotScene(specimens=4, throws=2, frames=120))
    lot = load_lot(made.lot_file)
    return made, lot, measure_lot(lot, workers=0)


def test_every_specimen_within_its_expanded_uncertainty(lot_run):
    """closed-form/independent: each specimen's simulated true Cd (simulation with its true
    mass and diameter drawn from the stated uncertainties) lies within Cd ± U."""
    made, _, m = lot_run
    assert not m.failures
    for r in m.specimens:
        assert abs(r.drag_coefficient - made.true_cd[r.id]) <= r.expanded_uncertainty, r.id


def test_shared_lines_are_the_common_inputs(lot_run):
    """regression: the air, gravity, frame rate, length scale and camera distance are shared
    (same value and uncertainty in every specimen's job); the mass, diameter and each
    throw's lines are not."""
    _, _, m = lot_run
    assert set(m.shared) == {"temperature", "pressure", "relative_humidity", "gravity",
                             "frame_rate", "length_scale", "camera_distance"}  # fmt: skip
    assert set(m.shared) <= set(SHARED_INPUTS)
    st = m.statistics
    # the shared part of u(mean) is the weighted mean of the specimens' signed contributions
    for name in m.shared:
        expect = sum(w * r.line_contributions()[name][2]
                     for w, r in zip(st.random_effects.weights, m.specimens))  # fmt: skip
        assert st.shared_contributions[name] == pytest.approx(expect, rel=1e-12)
    r = m.specimens[0]
    own = r.combined_standard_uncertainty**2 - sum(
        r.line_contributions()[n][2] ** 2 for n in m.shared
    )
    assert m.to_dict()["specimens"][0]["independent_standard_uncertainty"] == pytest.approx(
        math.sqrt(own), rel=1e-12
    )


def test_issue_writes_report_json_and_one_record(lot_run, tmp_path):
    """regression: the JSON has the keys the issue names; one record, with the lot mean."""
    _, lot, m = lot_run
    db_path = tmp_path / "records.sqlite"
    rec, path = issue_lot(m, records_path=db_path)
    data = json.loads(open(rec.outputs["result_json"], encoding="utf-8").read())
    assert [s["id"] for s in data["specimens"]] == ["TB-01", "TB-02", "TB-03", "TB-04"]
    for s, r in zip(data["specimens"], m.specimens):
        assert s["drag_coefficient"] == r.drag_coefficient
        assert s["expanded_uncertainty"] == r.expanded_uncertainty
    summ = data["summary"]
    assert summ["mean"] == m.statistics.mean
    assert summ["standard_deviation"] == m.statistics.standard_deviation
    assert summ["tolerance_interval"] == [m.statistics.tolerance.low,
                                          m.statistics.tolerance.high]  # fmt: skip
    assert set(data["methods"]) >= {"spread", "tolerance_interval", "decision", "shared_inputs"}
    assert "ISO 16269-6" in data["methods"]["tolerance_interval"]
    assert "Paule" in data["methods"]["spread"]
    db = Records(path, create=False)
    assert len(db) == 1
    got = db.get(rec.number)
    assert got.specimen_id == f"lot {lot.id}" and got.drag_coefficient == m.statistics.mean
    assert got.decision == m.decision
    for k in ("lot_report_pdf", "lot_report_png"):
        assert open(rec.outputs[k], "rb").read(4) in (b"%PDF", b"\x89PNG")
    text = lot_summary(m)
    assert "between-specimen SD" in text and "TB-04" in text


def test_a_failed_specimen_is_named_and_the_others_finish(tmp_path):
    """regression: a throw file that cannot be read fails its specimen's task with a message
    naming the specimen and the file; the other specimens are measured; no statistics."""
    made = write_lot(tmp_path, LotScene(specimens=3, throws=2, frames=60))
    lot = load_lot(made.lot_file)
    bad = tmp_path / "training_ball_lot_tb02_throw1.csv"
    bad.write_text("t,x\n0,1\n", encoding="utf-8")
    m = measure_lot(lot, workers=0)
    assert [r.id for r in m.specimens] == ["TB-01", "TB-03"]
    (f,) = m.failures
    assert f.id == "TB-02" and f.exit_code == 2
    assert "TB-02" in f.task and "training_ball_lot_tb02_throw1.csv" in f.task
    assert f.message.startswith("specimen TB-02: ")
    assert "training_ball_lot_tb02_throw1.csv" in f.message
    assert m.statistics is None
    with pytest.raises(ValueError) as e:
        issue_lot(m, records_path=tmp_path / "r.sqlite")
    assert str(e.value) == (
        "lot TB-40-L2607: 1 specimen(s) failed; no lot report is issued for an incomplete lot. "
        "Fix them and run the lot again."
    )
