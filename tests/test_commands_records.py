"""Tests of the ``fitdrag records`` command (list, show, export, verify)."""

from __future__ import annotations

import argparse
import csv
from datetime import UTC, datetime

import pytest

from fitdrag.commands import records as cmd
from fitdrag.run.records import Records


def _run(argv):
    parser = argparse.ArgumentParser(prog="fitdrag")
    sub = parser.add_subparsers(dest="command")
    cmd.register(sub)
    return cmd.run(parser.parse_args(argv))


@pytest.fixture
def db_path(tmp_path):
    path = tmp_path / "records.sqlite"
    db = Records(path)
    when = datetime(2026, 5, 6, 7, 8, 9, tzinfo=UTC)
    a = db.issue(
        result={"drag_coefficient": {"value": 0.4712}},
        input_hashes={"/d/t1.csv": "0" * 64},
        job_text="# synthetic job\n",
        issued_at=when,
        approved_by="R. Checker",
        summary={
            "specimen_id": "SYN-7",
            "drag_coefficient": 0.4712,
            "expanded_uncertainty": 0.018,
            "coverage_factor": 2.0,
            "decision": "pass",
        },
    )
    db.issue(result={}, input_hashes={}, issued_at=when, replaces=a.number, reason="typo")
    return path


def test_list(db_path, capsys):
    """regression: one line per record with the replacement noted."""
    assert _run(["records", "--records", str(db_path), "list"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[0] == f"records: {db_path} (--records)"
    assert out[2].startswith("FD-2026-000001") and "SYN-7" in out[2] and "0.4712" in out[2]
    assert "R. Checker" in out[2]  # who released it
    assert "[replaced by FD-2026-000002]" in out[2]
    assert "(replaces FD-2026-000001: typo)" in out[3]
    assert _run(["records", "list", "--records", str(db_path)]) == 0  # option after the action
    assert capsys.readouterr().out.splitlines() == out


def test_show_and_json(db_path, capsys):
    """regression: show prints the stored fields; --json the stored result."""
    assert _run(["records", "--records", str(db_path), "show", "FD-2026-000001", "--job"]) == 0
    out = capsys.readouterr().out
    assert "certificate      FD-2026-000001" in out
    assert "replaced by      FD-2026-000002" in out
    assert f"{'0' * 64}  /d/t1.csv" in out and "# synthetic job" in out
    assert _run(["records", "--records", str(db_path), "show", "FD-2026-000001", "--json"]) == 0
    assert '"value": 0.4712' in capsys.readouterr().out
    with pytest.raises(ValueError, match=r"certificate number: 'FD-2026-000009' is not in"):
        _run(["records", "--records", str(db_path), "show", "FD-2026-000009"])


def test_export(db_path, tmp_path, capsys):
    """regression: export writes the CSV and refuses to overwrite without --force."""
    out = tmp_path / "x.csv"
    assert _run(["records", "--records", str(db_path), "export", str(out)]) == 0
    assert "wrote 2 record(s)" in capsys.readouterr().out
    assert len(list(csv.DictReader(out.open()))) == 2
    with pytest.raises(ValueError, match=r"already exists; choose another name or pass --force"):
        _run(["records", "--records", str(db_path), "export", str(out)])
    assert _run(["records", "--records", str(db_path), "export", str(out), "--force"]) == 0


def test_missing_database(tmp_path):
    """regression: a missing database is an error, not a new empty file."""
    missing = tmp_path / "none.sqlite"
    with pytest.raises(FileNotFoundError, match=r"records: no records database at"):
        _run(["records", "--records", str(missing), "list"])
    assert not missing.exists()


def test_lab_database_is_the_default(tmp_path, monkeypatch, capsys):
    """regression: without --records the command reads the laboratory's database named by
    FITDRAG_RECORDS."""
    lab = tmp_path / "lab.sqlite"
    Records(lab).issue(result={}, input_hashes={}, approved_by="A")
    monkeypatch.setenv("FITDRAG_RECORDS", str(lab))
    assert _run(["records", "list"]) == 0
    out = capsys.readouterr().out
    assert f"records: {lab} (laboratory database, from FITDRAG_RECORDS)" in out


def test_hostile_text_is_shown_escaped(tmp_path, capsys):
    """regression: terminal escape codes and a right-to-left override stored in a record are
    printed as \\u escapes, never raw (common practice, no source)."""
    path = tmp_path / "r.sqlite"
    Records(path).issue(result={}, input_hashes={},
                        summary={"specimen_id": "X\x1b[2J\u202eevil"})  # fmt: skip
    assert _run(["records", "--records", str(path), "list"]) == 0
    out = capsys.readouterr().out
    assert "\x1b" not in out and "\u202e" not in out
    assert "X\\u001b[2J\\u202eevil" in out
    assert cmd.shown("plain") == "plain" and cmd.shown(None) == "-"


def test_verify_exit_codes(db_path, capsys):
    """regression: verify exits 0 on an intact database and 7 naming the altered record."""
    import sqlite3

    assert _run(["records", "--records", str(db_path), "verify"]) == 0
    assert "records intact: 2 record(s), 0 file(s)" in capsys.readouterr().out
    con = sqlite3.connect(db_path)
    con.execute("DROP TRIGGER certificates_never_updated")
    con.execute("UPDATE certificates SET drag_coefficient = 0.45 WHERE seq = 1")
    con.commit()
    con.close()
    assert _run(["records", "--records", str(db_path), "verify"]) == 7
    out = capsys.readouterr().out
    assert "records NOT intact: 2 problem(s)" in out
    assert "  database: the trigger certificates_never_updated that refuses changes" in out
    assert ("  FD-2026-000001: altered: its content no longer matches its record hash"
            in out)  # fmt: skip


def test_withdraw_keeps_both_records_with_the_reason(tmp_path, capsys):
    """regression: a withdrawal is a record of its own (its number, the reason, who decided),
    chained and verified; the withdrawn certificate can then be neither withdrawn nor replaced
    again; a reason with a control character is refused."""
    path = tmp_path / "r.sqlite"
    db = Records(path)
    a = db.issue(result={}, input_hashes={"/d/t.csv": "1" * 64}, approved_by="R. Checker")
    args = ["records", "--records", str(path), "withdraw", a.number, "--approved-by", "Q. Lead"]
    assert _run([*args, "--reason", "wrong specimen measured"]) == 0
    out = capsys.readouterr().out
    assert out.startswith(f"certificate {a.number} withdrawn by Q. Lead (withdrawal record "
                          f"FD-{a.number[3:7]}-000002, record hash ")  # fmt: skip
    w = db.get(f"FD-{a.number[3:7]}-000002")
    assert (w.kind, w.replaces, w.reason, w.approved_by) == (
        "withdrawal",
        a.number,
        "wrong specimen measured",
        "Q. Lead",
    )
    assert db.get(a.number).replaced_by == w.number
    assert _run(["records", "--records", str(path), "list"]) == 0
    assert f"(withdraws {a.number}: wrong specimen measured)" in capsys.readouterr().out
    with pytest.raises(ValueError, match=rf"replaces: certificate '{a.number}' was withdrawn"):
        _run([*args, "--reason", "again"])
    with pytest.raises(ValueError, match=r"--reason: give plain text \(no control characters\)"):
        _run([*args, "--reason", "x\x1b[2J"])
    assert db.verify().ok


@pytest.fixture
def standard_db(tmp_path):
    """A check standard's history: 12 results of N(0.470, 0.002²) (fixed values), then one
    shifted by +0.012 (6 sigma), plus one result of another specimen."""
    from datetime import timedelta

    path = tmp_path / "standard.sqlite"
    db = Records(path)
    vals = [0.4712, 0.4695, 0.4701, 0.4688, 0.4720, 0.4703, 0.4690, 0.4709, 0.4698, 0.4705,
            0.4711, 0.4693, 0.4820]  # fmt: skip
    start = datetime(2026, 6, 1, 9, 0, tzinfo=UTC)
    for i, v in enumerate(vals):
        db.issue(result={"synthetic": True}, input_hashes={}, prefix="REF",
                 issued_at=start + timedelta(days=i),
                 summary={"specimen_id": "REF-40-A", "drag_coefficient": v})  # fmt: skip
    db.issue(result={}, input_hashes={}, issued_at=start,
             summary={"specimen_id": "OTHER", "drag_coefficient": 0.9})  # fmt: skip
    return path, vals


def test_chart_flags_the_latest_and_exits_8(standard_db, tmp_path, capsys):
    """closed-form/independent: limits from the first 10 results (mean, average moving
    range / 1.128: ISO 7870-2 chart for individual values) computed here; the last result
    lies beyond 3 sigma, so it is printed and the exit code is 8; the PNG is written."""
    import numpy as np

    path, vals = standard_db
    base = np.array(vals[:10])
    centre = base.mean()
    sigma = np.mean(np.abs(np.diff(base))) / 1.128
    assert abs(vals[-1] - centre) > 3 * sigma
    png = tmp_path / "chart.png"
    code = _run(["records", "--records", str(path), "chart", "REF-40-A", "-o", str(png)])
    out = capsys.readouterr().out
    assert code == 8
    assert f"centre line {centre:.4g}, sigma {sigma:.2g}" in out
    assert "point 13 REF-2026-000013 2026-06-13 Cd = 0.482: tests 1" in out
    assert "  test 1: beyond 3 sigma" in out
    assert "the latest result (REF-2026-000013) is out of control" in out
    assert png.read_bytes()[:4] == b"\x89PNG"


def test_chart_with_stated_limits_in_control(standard_db, capsys):
    """closed-form/independent: with a stated centre 0.470 and sigma 0.0041 the first 12
    results lie within 1 sigma on both sides and the last within 3 sigma (0.012 < 0.0123);
    the EWMA stays inside (z_13 - 0.470 < 0.0026 < its limit 0.0041): nothing is flagged."""
    path, _ = standard_db
    code = _run(["records", "--records", str(path), "chart", "REF-40-A", "--centre", "0.470",
                 "--sigma", "0.0041"])  # fmt: skip
    out = capsys.readouterr().out
    assert code == 0
    assert "0 point(s) out of control" in out and "sigma 0.0041: stated" in out


def test_chart_errors(standard_db):
    """regression: an unknown specimen and half-stated limits: exact messages."""
    path, _ = standard_db
    with pytest.raises(ValueError) as e:
        _run(["records", "--records", str(path), "chart", "NOPE"])
    assert str(e.value) == (
        f"specimen 'NOPE': no results on record in '{path}'; see 'fitdrag records list' for "
        f"the specimen ids."
    )
    with pytest.raises(ValueError) as e:
        _run(["records", "--records", str(path), "chart", "REF-40-A", "--centre", "0.47"])
    assert str(e.value) == "--centre, --sigma: give both (stated limits) or neither (estimated)."


def test_readme_chart_example_prints_what_the_readme_shows(capsys):
    """regression: the README's `fitdrag records chart` example on the sample check-standard
    history prints exactly the output the README shows, and exits 8."""
    from pathlib import Path

    root = Path(__file__).resolve().parents[1]
    text = (root / "README.md").read_text(encoding="utf-8")
    cmd_line = (
        "$ fitdrag records --records sample_tracks/check_standard/records.sqlite chart REF-40-A\n"
    )
    shown = text.split(cmd_line, 1)[1].split("```\n", 1)[0]
    db = root / "sample_tracks" / "check_standard" / "records.sqlite"
    assert _run(["records", "--records", str(db), "chart", "REF-40-A"]) == 8
    assert capsys.readouterr().out == shown
