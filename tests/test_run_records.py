"""Tests of fitdrag.run.records: numbering, transactions, immutability, replacement, export."""

from __future__ import annotations

import csv
import multiprocessing as mp
import sqlite3
import time
from datetime import UTC, datetime
from pathlib import Path

import pytest

from fitdrag._files import temporary_path
from fitdrag.run.records import (
    PendingFile,
    Records,
    format_number,
    parse_number,
)

WHEN = datetime(2026, 3, 4, 10, 0, tzinfo=UTC)
RESULT = {"success": True, "drag_coefficient": {"value": 0.47}}
HASHES = {"/data/throw1.csv": "ab" * 32}


def _issue(db: Records, **kw):
    kw.setdefault("result", RESULT)
    kw.setdefault("input_hashes", HASHES)
    kw.setdefault("issued_at", WHEN)
    return db.issue(**kw)


def test_numbers_are_sequential_per_year_and_prefix(tmp_path):
    """regression: gap-free numbering PREFIX-YYYY-NNNNNN, restarting each year."""
    db = Records(tmp_path / "r.sqlite")
    nums = [_issue(db).number for _ in range(3)]
    assert nums == ["FD-2026-000001", "FD-2026-000002", "FD-2026-000003"]
    assert _issue(db, issued_at=datetime(2027, 1, 2, tzinfo=UTC)).number == ("FD-2027-000001")
    assert _issue(db, prefix="LAB2").number == "LAB2-2026-000001"
    assert parse_number("FD-2026-000123") == ("FD", 2026, 123)
    assert format_number("FD", 2026, 123) == "FD-2026-000123"
    with pytest.raises(ValueError, match=r"certificate number: 'FD-26-1' is not of the form"):
        parse_number("FD-26-1")
    with pytest.raises(ValueError, match=r"number_prefix: 'fd' must be 1 to 8 capital letters"):
        _issue(db, prefix="fd")


def test_record_round_trip(tmp_path):
    """regression: everything stored comes back unchanged."""
    db = Records(tmp_path / "r.sqlite")
    rec = _issue(
        db,
        job_text="[specimen]\nmass = 0.0027\n",
        job_path="/jobs/a.toml",
        summary={
            "customer": "Synthetic Sports Ltd",
            "drag_coefficient": 0.47,
            "expanded_uncertainty": 0.018,
            "coverage_factor": 2.0,
            "decision": "pass",
            "specimen_id": "SYN-1",
            "software_version": "0.1.0",
        },
    )
    back = Records(tmp_path / "r.sqlite").get(rec.number)
    assert back == rec
    assert back.job_text == "[specimen]\nmass = 0.0027\n"
    assert back.input_hashes == HASHES and back.result == RESULT
    assert back.issued_at == "2026-03-04T10:00:00+00:00"
    assert back.drag_coefficient == 0.47 and back.decision == "pass"
    with pytest.raises(ValueError, match=r"summary: unknown field\(s\) \['cd'\]"):
        _issue(db, summary={"cd": 1})


def test_records_are_never_changed_or_deleted(tmp_path):
    """regression: triggers refuse UPDATE and DELETE even from a raw SQLite connection."""
    path = tmp_path / "r.sqlite"
    db = Records(path)
    _issue(db)
    con = sqlite3.connect(path)
    with pytest.raises(sqlite3.IntegrityError, match="never changed"):
        con.execute("UPDATE certificates SET decision = 'pass'")
    with pytest.raises(sqlite3.IntegrityError, match="never deleted"):
        con.execute("DELETE FROM certificates")
    with pytest.raises(sqlite3.IntegrityError, match="UNIQUE"):
        con.execute(
            "INSERT INTO certificates (number, prefix, year, seq, issued_at, input_hashes, "
            "result_json, outputs) VALUES ('FD-2026-000001', 'FD', 2026, 1, 'x', '{}', '{}', "
            "'{}')"
        )
    con.close()
    assert len(db) == 1


def test_failed_render_rolls_back_and_leaves_no_gap(tmp_path):
    """regression: a failure while rendering leaves no record, no file, and the next
    certificate takes the number that was not used."""
    db = Records(tmp_path / "r.sqlite")
    _issue(db)
    seen = []

    def bad_render(number, when):
        seen.append(number)
        temporary_path(tmp_path / f"{number}.pdf").write_text("half")
        raise RuntimeError("matplotlib crashed")

    with pytest.raises(RuntimeError, match="matplotlib crashed"):
        _issue(db, render=bad_render)
    assert seen == ["FD-2026-000002"]
    assert len(db) == 1
    assert _issue(db).number == "FD-2026-000002"


def test_files_are_published_after_commit(tmp_path):
    """regression: render writes temporary files; they get their final names after the commit
    and the final (absolute) paths are stored."""
    db = Records(tmp_path / "r.sqlite")

    def render(number, when):
        final = tmp_path / f"{number}.pdf"
        tmp = temporary_path(final)
        tmp.write_text(f"certificate {number}")
        assert not final.exists()
        return {"pdf": PendingFile(tmp, final)}

    rec = _issue(db, render=render)
    final = tmp_path / "FD-2026-000001.pdf"
    assert final.read_text() == "certificate FD-2026-000001"
    assert not temporary_path(final).exists()
    assert rec.outputs == {"pdf": str(final.resolve())}


def test_replacement_chain(tmp_path):
    """regression: a re-issued certificate references the one it replaces; a certificate is
    replaced once; unknown numbers are refused."""
    db = Records(tmp_path / "r.sqlite")
    a = _issue(db)
    b = _issue(db, replaces=a.number)
    assert b.replaces == a.number
    assert db.get(a.number).replaced_by == b.number
    with pytest.raises(
        ValueError,
        match=r"replaces: certificate 'FD-2026-000001' was already replaced by 'FD-2026-000002'",
    ):
        _issue(db, replaces=a.number)
    with pytest.raises(ValueError, match=r"replaces: no certificate 'FD-2026-000099'"):
        _issue(db, replaces="FD-2026-000099")
    assert len(db) == 2  # the refused issues used no number
    assert _issue(db, replaces=b.number).number == "FD-2026-000003"


def test_export_csv(tmp_path):
    """regression: CSV export has one row per record, refuses to overwrite without force."""
    db = Records(tmp_path / "r.sqlite")
    a = _issue(db, summary={"drag_coefficient": 0.47, "decision": "fail"})
    _issue(db, replaces=a.number)
    out = tmp_path / "all.csv"
    db.export_csv(out)
    rows = list(csv.DictReader(out.open()))
    assert [r["number"] for r in rows] == ["FD-2026-000001", "FD-2026-000002"]
    assert rows[0]["replaced_by"] == "FD-2026-000002" and rows[1]["replaces"] == a.number
    assert rows[0]["drag_coefficient"] == "0.47"
    with pytest.raises(ValueError, match=r"export: '.*all.csv' already exists; choose another"):
        db.export_csv(out)
    db.export_csv(out, force=True)


def test_bad_database_paths(tmp_path):
    """regression: missing database (when not creating) and a non-database file."""
    with pytest.raises(FileNotFoundError, match=r"records: no records database at"):
        Records(tmp_path / "none.sqlite", create=False)
    junk = tmp_path / "junk.sqlite"
    junk.write_bytes(b"this is not a database at all" * 100)
    with pytest.raises(ValueError, match=r"is not a usable SQLite database"):
        Records(junk)
    with pytest.raises(FileNotFoundError, match=r"records: the folder .* does not exist"):
        Records(tmp_path / "nope" / "r.sqlite")


def _worker(args):
    path, n = args
    db = Records(path)
    out = []
    for _ in range(n):

        def render(number, when):
            time.sleep(0.005)  # widen the window in which a racing writer could interfere
            return {}

        out.append(db.issue(render, result=RESULT, input_hashes=HASHES, issued_at=WHEN).number)
    return out


def test_concurrent_runs_never_share_a_number(tmp_path):
    """regression: 4 processes × 6 issues on one database: 24 distinct, gap-free numbers."""
    path = tmp_path / "shared.sqlite"
    with mp.get_context("fork").Pool(4) as pool:
        results = pool.map(_worker, [(str(path), 6)] * 4)
    numbers = [n for r in results for n in r]
    assert len(numbers) == 24
    assert len(set(numbers)) == 24
    assert sorted(parse_number(n)[2] for n in numbers) == list(range(1, 25))
    assert len(Records(Path(path))) == 24
