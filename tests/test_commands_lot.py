"""Tests of ``fitdrag lot``: lot file -> specimens -> lot statistics -> report -> record."""

from __future__ import annotations

import json

import pytest

from fitdrag.cli import main
from fitdrag.run.lot_scene import LotScene, write_lot
from fitdrag.run.records import Records


@pytest.fixture
def lot_file(tmp_path):
    return write_lot(tmp_path, LotScene(specimens=3, throws=2, frames=80)).lot_file


def test_lot_in_this_process(lot_file, lab_db, capsys):
    """regression: prints every specimen and the lot, writes the report, JSON and one record;
    the exit code follows the lot decision."""
    code = main(["lot", str(lot_file), "--workers", "0", "--quiet"])
    out = capsys.readouterr().out
    for sid in ("TB-01", "TB-02", "TB-03"):
        assert sid in out
    assert "between-specimen SD" in out and "tolerance interval" in out
    assert "lot report LOT-" in out
    db = Records(lab_db, create=False)  # the laboratory's database (tests/conftest.py)
    (rec,) = db.list()
    assert rec.approved_by == "R. Sample"
    data = json.loads(open(rec.outputs["result_json"], encoding="utf-8").read())
    assert {"specimens", "summary"} <= set(data)
    assert set(data["summary"]) >= {"mean", "standard_deviation", "tolerance_interval"}
    assert (
        code
        == {"pass": 0, "fail": 4, "conditional pass": 5, "conditional fail": 6}[
            data["summary"]["decision"]
        ]
    )


def test_failed_specimen_exit_code(lot_file, tmp_path, lab_db, capsys):
    """regression: a specimen whose throw cannot be read: the others are printed, the failure
    names the specimen and the file, no report, exit 2."""
    (tmp_path / "training_ball_lot_tb03_throw2.csv").write_text("t,x\n0,1\n", encoding="utf-8")
    code = main(["lot", str(lot_file), "--workers", "0", "--quiet"])
    cap = capsys.readouterr()
    assert code == 2
    assert "TB-01" in cap.out and "FAILED" in cap.out
    assert "fitdrag lot: specimen TB-03, files training_ball_lot_tb03_throw1.csv, " in cap.err
    assert "1 of 3 specimen(s) failed; no lot report issued." in cap.err
    assert not lab_db.exists()


def test_option_errors(lot_file, capsys):
    """regression: exact messages for bad options (exit 2)."""
    assert main(["lot", str(lot_file), "--workers", "-1"]) == 2
    assert "--workers: must be >= 0, got -1; 0 runs in this process." in capsys.readouterr().err
    assert main(["lot", str(lot_file), "--workers", "2", "--scheduler", "tcp://x:1"]) == 2
    assert (
        "--workers: the cluster at --scheduler has its own workers; give one of the two."
        in capsys.readouterr().err
    )


def test_readme_lot_example_prints_what_the_readme_shows(tmp_path, capsys):
    """regression: the README's `fitdrag lot` example on sample_tracks/lot (copied to a
    temporary folder, so its report goes there) prints the lines the README shows, before
    the report's number and paths."""
    import os
    import shutil
    from pathlib import Path

    root = Path(__file__).resolve().parents[1]
    text = (root / "README.md").read_text(encoding="utf-8")
    block = text.split("$ cd sample_tracks/lot && fitdrag lot training_ball_lot.toml\n", 1)[1]
    shown = block.split("```\n", 1)[0]
    shutil.copytree(root / "sample_tracks" / "lot", tmp_path / "lot")
    cwd = os.getcwd()
    os.chdir(tmp_path / "lot")
    try:
        code = main(["lot", "training_ball_lot.toml", "--workers", "0", "--quiet"])
    finally:
        os.chdir(cwd)
    out = capsys.readouterr().out
    assert code == 4
    assert out.split("lot report ", 1)[0] == shown


def test_lot_warns_when_the_check_standard_is_out_of_control(lot_file, tmp_path, lab_db,
                                                             capsys):  # fmt: skip
    """regression: a base job naming its check standard makes `fitdrag lot` warn when the
    standard's latest result on record lies beyond 3 sigma of its first 10 results."""
    from datetime import UTC, datetime, timedelta

    db = Records(lab_db)
    vals = [0.4712, 0.4695, 0.4701, 0.4688, 0.4720, 0.4703, 0.4690, 0.4709, 0.4698, 0.4705,
            0.4800]  # fmt: skip
    for i, v in enumerate(vals):
        db.issue(result={}, input_hashes={}, prefix="REF",
                 issued_at=datetime(2026, 6, 1, tzinfo=UTC) + timedelta(days=i),
                 summary={"specimen_id": "REF-40-A", "drag_coefficient": v})  # fmt: skip
    base = tmp_path / "training_ball_lot_base.toml"
    base.write_text(base.read_text().replace("[test]\n", '[test]\ncheck_standard = "REF-40-A"\n'))
    main(["lot", str(lot_file), "--workers", "0", "--quiet"])
    err = capsys.readouterr().err
    assert "fitdrag lot: WARNING: check standard 'REF-40-A' is out of control" in err
