"""Tests of fitdrag.run.records: numbering, transactions, immutability, replacement, export."""

from __future__ import annotations

import csv
import dataclasses
import hashlib
import json
import multiprocessing as mp
import os
import sqlite3
import time
from datetime import UTC, datetime
from pathlib import Path

import pytest

from fitdrag._files import temporary_path
from fitdrag.run.records import (
    PendingFile,
    Records,
    canonical_json,
    clean_leftovers,
    csv_safe,
    format_number,
    head_path,
    lab_records,
    parse_number,
    record_hash,
    seal_of,
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
            "INSERT INTO certificates (number, chain_index, prefix, year, seq, issued_at, "
            "input_hashes, result_json, outputs, file_hashes, previous_seal, record_hash, seal) "
            "VALUES ('FD-2026-000001', 2, 'FD', 2026, 1, 'x', '{}', '{}', '{}', '{}', 'a', 'b', "
            "'c')"
        )
    con.close()
    assert len(db) == 1


def test_failed_render_rolls_back_and_leaves_no_gap(tmp_path):
    """regression: a failure while rendering leaves no record, no file, and the next
    certificate takes the number that was not used."""
    db = Records(tmp_path / "r.sqlite")
    _issue(db)
    seen = []

    def bad_render(number, when, record_hash):
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

    def render(number, when, record_hash):
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
    b = _issue(db, replaces=a.number, reason="typo")
    assert b.replaces == a.number
    assert db.get(a.number).replaced_by == b.number
    with pytest.raises(
        ValueError,
        match=r"replaces: certificate 'FD-2026-000001' was already replaced by 'FD-2026-000002'",
    ):
        _issue(db, replaces=a.number, reason="typo")
    with pytest.raises(ValueError, match=r"replaces: no certificate 'FD-2026-000099'"):
        _issue(db, replaces="FD-2026-000099", reason="typo")
    assert len(db) == 2  # the refused issues used no number
    assert _issue(db, replaces=b.number, reason="typo").number == "FD-2026-000003"


def test_export_csv(tmp_path):
    """regression: CSV export has one row per record, refuses to overwrite without force."""
    db = Records(tmp_path / "r.sqlite")
    a = _issue(db, summary={"drag_coefficient": 0.47, "decision": "fail"})
    _issue(db, replaces=a.number, reason="typo")
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

        def render(number, when, record_hash):
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


# -- tamper evidence ---------------------------------------------------------------------------


def _files_render(folder):
    """A render that writes a small PDF/PNG/JSON triple per number (JSON naming the database)."""

    def make(db):
        def render(number, when, record_hash):
            out = {}
            for kind, ext in (("certificate_pdf", "pdf"), ("certificate_png", "png"),
                              ("result_json", "json")):  # fmt: skip
                final = folder / f"{number}.{ext}"
                tmp = temporary_path(final)
                body = {"certificate": {"number": number, "record_hash": record_hash,
                                        "records_id": db.id}}  # fmt: skip
                tmp.write_text(json.dumps(body))
                out[kind] = PendingFile(tmp, final)
            return out

        return render

    return make


def _tamper(path, *sql):
    con = sqlite3.connect(path)
    con.execute("DROP TRIGGER IF EXISTS certificates_never_updated")
    con.execute("DROP TRIGGER IF EXISTS certificates_never_deleted")
    for statement in sql:
        con.execute(statement)
    con.commit()
    con.close()


@pytest.fixture
def chain(tmp_path):
    """Three certificates with files, in one database."""
    path = tmp_path / "r.sqlite"
    db = Records(path)
    make = _files_render(tmp_path)
    recs = [_issue(db, render=make(db), summary={"drag_coefficient": 0.47 + i / 100,
                                                 "decision": "pass"})
            for i in range(3)]  # fmt: skip
    return db, recs


def _problems(db):
    return [str(f) for f in db.verify().findings]


def test_hash_chain_is_sha256_of_the_canonical_content(chain):
    """closed-form/independent: the record hash is hashlib's SHA-256 of the stated text (the
    previous seal and the canonical JSON of the content) and each record links to the seal
    before it; the certificate JSON carries the record hash; an intact chain verifies."""
    db, recs = chain
    first = recs[0]
    text = "fitdrag record v2\n" + "0" * 64 + "\n" + canonical_json(first.content())
    assert first.record_hash == hashlib.sha256(text.encode()).hexdigest()
    assert recs[1].previous_seal == first.seal and recs[2].previous_seal == recs[1].seal
    pdf = Path(first.outputs["certificate_pdf"])
    assert first.file_hashes["certificate_pdf"] == hashlib.sha256(pdf.read_bytes()).hexdigest()
    js = json.loads(Path(first.outputs["result_json"]).read_text())
    assert js["certificate"]["record_hash"] == first.record_hash
    v = db.verify()
    assert v.ok and v.records == 3 and v.files == 9 and v.last_seal == recs[2].seal


def test_verify_names_an_altered_record(chain):
    """regression: a forged Cd (triggers dropped, row updated) is named by verify."""
    db, recs = chain
    _tamper(db.path, "UPDATE certificates SET drag_coefficient = 0.40, decision = 'fail' "
            "WHERE seq = 2")  # fmt: skip
    assert _problems(db) == [
        "database: the trigger certificates_never_updated that refuses changes is missing "
        "(dropped by hand)",
        "database: the trigger certificates_never_deleted that refuses changes is missing "
        "(dropped by hand)",
        f"{recs[1].number}: altered: its content no longer matches its record hash",
    ]


def test_verify_names_a_record_altered_with_its_hashes_recomputed(chain):
    """regression: a forger who also re-computes the altered record's hash and seal breaks
    the next record's link; on the newest record the head file shows it."""
    db, recs = chain
    for victim, follower in ((recs[1], recs[2]), (recs[2], None)):
        forged = dataclasses.replace(db.get(victim.number), drag_coefficient=0.3)
        h = record_hash(forged.previous_seal, forged.content())
        s = seal_of(h, forged.outputs, forged.file_hashes)
        _tamper(db.path, f"UPDATE certificates SET drag_coefficient = 0.3, record_hash = '{h}', "
                f"seal = '{s}' WHERE number = '{victim.number}'")  # fmt: skip
        problems = [p for p in _problems(db) if not p.startswith("database: the trigger")]
        if follower is not None:
            assert problems == [
                f"{follower.number}: its link to the previous record ({victim.number}) does "
                f"not match: a record before it was altered, or one was deleted and the chain "
                f"re-computed"
            ]
        else:
            assert problems[-1] == (
                f"{victim.number}: record 3 of the chain is not the one the head file "
                f"r.sqlite.head names (seal {recs[2].seal[:16]}...): altered or replaced"
            )


def test_verify_names_deleted_records_including_the_newest(chain, tmp_path):
    """regression: a deleted middle record is named (chain gap, number gap); a deleted newest
    record is named by the head file and by its certificate files still present, and its
    number is not issued again."""
    db, recs = chain
    _tamper(db.path, f"DELETE FROM certificates WHERE number = '{recs[1].number}'")
    problems = _problems(db)
    assert (f"{recs[2].number}: chain positions 2 to 2 are missing after {recs[0].number}: "
            f"record(s) deleted") in problems  # fmt: skip
    assert f"{recs[1].number}: missing from the numbers issued: its record was deleted" in problems
    assert any(p.startswith(f"{recs[1].number}: its certificate ") for p in problems)

    db2 = Records(tmp_path / "r2.sqlite")
    make = _files_render(tmp_path / "f2")
    (tmp_path / "f2").mkdir()
    a, b = _issue(db2, render=make(db2)), _issue(db2, render=make(db2))
    _tamper(db2.path, f"DELETE FROM certificates WHERE number = '{b.number}'")
    problems = _problems(db2)
    assert (f"{b.number}: the newest record the head file r2.sqlite.head names (record 2 of the "
            f"chain) is missing from the database: deleted") in problems  # fmt: skip
    with pytest.raises(ValueError, match=rf"records: {b.number}: the newest record .* no "
                       r"certificate is issued until this is resolved"):  # fmt: skip
        _issue(db2, render=make(db2))
    head_path(db2.path).unlink()  # the forger removes the head too: the files still tell
    problems = _problems(db2)
    assert f"database: the head file {head_path(db2.path)} is missing (deleted?)" in problems
    assert any(p.startswith(f"{b.number}: its certificate ") and "names this database" in p
               for p in problems)  # fmt: skip
    with pytest.raises(FileExistsError, match=r"exists already; an issued certificate file is "
                       r"never overwritten"):  # fmt: skip
        _issue(db2, render=make(db2))
    assert len(db2) == 1 and a.number == "FD-2026-000001"


def test_verify_names_changed_and_deleted_files(chain):
    """regression: a changed PDF and a deleted PNG are named with the record."""
    db, recs = chain
    pdf = Path(recs[0].outputs["certificate_pdf"])
    pdf.write_text(pdf.read_text().replace("0", "1"))
    Path(recs[2].outputs["certificate_png"]).unlink()
    assert _problems(db) == [
        f"{recs[0].number}: its certificate_pdf file {pdf} was changed after issue (SHA-256 "
        f"differs)",
        f"{recs[2].number}: its certificate_png file {recs[2].outputs['certificate_png']} is "
        f"missing (deleted or moved)",
    ]
    assert db.verify(check_files=False).ok


def test_issued_files_are_never_overwritten(tmp_path):
    """regression: a final file already present is refused before anything is stored (the
    number stays free)."""
    db = Records(tmp_path / "r.sqlite")
    (tmp_path / "FD-2026-000001.pdf").write_text("an issued certificate")
    with pytest.raises(FileExistsError, match=r"FD-2026-000001.pdf: exists already; an issued "
                       r"certificate file is never overwritten"):  # fmt: skip
        _issue(db, render=_files_render(tmp_path)(db))
    assert len(db) == 0
    assert (tmp_path / "FD-2026-000001.pdf").read_text() == "an issued certificate"
    assert not list(tmp_path.glob(".*.tmp"))


def test_replacement_needs_a_reason(tmp_path):
    """regression: replacing without a reason is refused; the reason is kept."""
    db = Records(tmp_path / "r.sqlite")
    a = _issue(db)
    with pytest.raises(ValueError, match=r"reason: replacing certificate 'FD-2026-000001' needs "
                       r"the reason"):  # fmt: skip
        _issue(db, replaces=a.number)
    b = _issue(db, replaces=a.number, reason="customer's address corrected")
    assert db.get(b.number).reason == "customer's address corrected"
    assert db.get(a.number).replaced_by == b.number


def test_export_escapes_formula_cells(tmp_path):
    """regression: text cells starting with = + - @ get a leading apostrophe (OWASP, "CSV
    Injection"); numbers are left as they are."""
    db = Records(tmp_path / "r.sqlite")
    _issue(db, summary={"customer": "=HYPERLINK(\"http://x\")", "specimen_id": "@SUM(A1)",
                        "drag_coefficient": -0.5})  # fmt: skip
    out = db.export_csv(tmp_path / "x.csv")
    row = next(csv.DictReader(out.open()))
    assert row["customer"] == '\'=HYPERLINK("http://x")'
    assert row["specimen_id"] == "'@SUM(A1)"
    assert row["drag_coefficient"] == "-0.5"
    assert csv_safe("plain") == "plain" and csv_safe("-1") == "'-1"


def test_leftovers_of_killed_runs_are_removed(tmp_path):
    """regression: temporary files of a process that is gone are removed; this process's and
    other names are kept."""
    import subprocess
    import sys

    proc = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True, check=True)  # fmt: skip
    dead = int(proc.stdout)
    gone = tmp_path / f".FD-2026-000007.png.{dead}.tmp"
    mine = temporary_path(tmp_path / "FD-2026-000008.png")
    other = tmp_path / ".hidden.tmp"
    for p in (gone, mine, other):
        p.write_text("x")
    assert clean_leftovers(tmp_path) == [gone]
    assert mine.exists() and other.exists() and not gone.exists()


def test_lab_records_location(tmp_path, monkeypatch):
    """regression: --records, then the job's [output] records, then FITDRAG_RECORDS, then the
    settings file, then the user's data folder."""
    monkeypatch.setenv("FITDRAG_RECORDS", str(tmp_path / "env.sqlite"))
    assert lab_records("a.sqlite", "b.sqlite").path == Path("a.sqlite")
    assert lab_records(None, "b.sqlite").source == "the job's [output] records"
    assert lab_records().path == tmp_path / "env.sqlite"
    monkeypatch.delenv("FITDRAG_RECORDS")
    monkeypatch.setenv("XDG_CONFIG_HOME", str(tmp_path / "cfg"))
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "data"))
    loc = lab_records()
    assert loc.path == tmp_path / "data" / "fitdrag" / "records.sqlite"
    assert "user's data folder" in loc.source
    settings = tmp_path / "cfg" / "fitdrag" / "settings.toml"
    settings.parent.mkdir(parents=True)
    settings.write_text('records = "/srv/lab/records.sqlite"\n')
    assert lab_records().path == Path("/srv/lab/records.sqlite")
    settings.write_text("records = 3\n")
    with pytest.raises(ValueError, match=r"settings.toml: records: 3 is not a path"):
        lab_records()


# The version-1 schema (before the hash chain), as fitdrag 0.1 created it.
_V1_SCHEMA = """
CREATE TABLE certificates (
    number TEXT PRIMARY KEY, prefix TEXT NOT NULL, year INTEGER NOT NULL, seq INTEGER NOT NULL,
    issued_at TEXT NOT NULL, replaces TEXT UNIQUE REFERENCES certificates(number),
    job_path TEXT, job_text TEXT, input_hashes TEXT NOT NULL, result_json TEXT NOT NULL,
    outputs TEXT NOT NULL, customer TEXT, specimen_id TEXT, drag_coefficient REAL,
    expanded_uncertainty REAL, coverage_factor REAL, decision TEXT, software_version TEXT,
    UNIQUE (prefix, year, seq));
CREATE TRIGGER certificates_never_updated BEFORE UPDATE ON certificates
BEGIN SELECT RAISE(ABORT, 'never changed'); END;
CREATE TRIGGER certificates_never_deleted BEFORE DELETE ON certificates
BEGIN SELECT RAISE(ABORT, 'never deleted'); END;
PRAGMA user_version = 1;
"""


def test_version_1_database_is_chained_on_first_use(tmp_path):
    """regression: a database made before the hash chain keeps its records, in the order
    stored, chained with the SHA-256 of their files as found; it verifies and numbers on."""
    path = tmp_path / "old.sqlite"
    pdf = tmp_path / "FD-2026-000001.pdf"
    pdf.write_bytes(b"%PDF old certificate")
    con = sqlite3.connect(path)
    con.executescript(_V1_SCHEMA)
    for seq, replaces in ((1, None), (2, "FD-2026-000001")):
        con.execute(
            "INSERT INTO certificates (number, prefix, year, seq, issued_at, replaces, "
            "input_hashes, result_json, outputs, drag_coefficient) VALUES (?, 'FD', 2026, ?, "
            "'2026-03-04T10:00:00+00:00', ?, '{}', '{}', ?, 0.47)",
            (f"FD-2026-{seq:06d}", seq, replaces,
             json.dumps({"certificate_pdf": str(pdf)}) if seq == 1 else "{}"),
        )  # fmt: skip
    con.commit()
    con.close()
    db = Records(path)
    a, b = db.list()
    assert (a.chain_index, b.chain_index) == (1, 2) and b.previous_seal == a.seal
    assert a.file_hashes == {"certificate_pdf": hashlib.sha256(pdf.read_bytes()).hexdigest()}
    assert a.replaced_by == b.number and a.drag_coefficient == 0.47
    assert db.verify().ok
    assert _issue(db).number == "FD-2026-000003"
    assert db.verify().ok


def _folder_worker(args):
    path, folder, n = args
    Path(folder).mkdir(exist_ok=True)
    db = Records(path)
    make = _files_render(Path(folder))(db)
    return [db.issue(make, result=RESULT, input_hashes=HASHES, issued_at=WHEN).number
            for _ in range(n)]  # fmt: skip


def test_concurrent_runs_from_several_folders_share_one_chain(tmp_path):
    """regression: 4 processes, each issuing 5 certificates with files into its own folder,
    on one laboratory database: 20 distinct gap-free numbers, no file overwritten, and the
    chain and all 60 files verify."""
    path = tmp_path / "lab.sqlite"
    jobs = [(str(path), str(tmp_path / f"folder{i}"), 5) for i in range(4)]
    with mp.get_context("fork").Pool(4) as pool:
        results = pool.map(_folder_worker, jobs)
    numbers = [n for r in results for n in r]
    assert sorted(parse_number(n)[2] for n in numbers) == list(range(1, 21))
    v = Records(path).verify()
    assert v.ok, v.findings
    assert v.records == 20 and v.files == 60


def test_find_inputs_matches_the_same_files_and_job_text(tmp_path):
    """regression: an identical re-run is the same input digests (in any order of paths) and
    the same job text; another job text or another file is not."""
    db = Records(tmp_path / "r.sqlite")
    a = _issue(db, input_hashes={"/a/job.toml": "1" * 64, "/a/t.csv": "2" * 64}, job_text="J")
    _issue(db, input_hashes={"/a/job.toml": "1" * 64, "/a/t.csv": "3" * 64}, job_text="J")
    moved = {"/b/t.csv": "2" * 64, "/b/job.toml": "1" * 64}
    assert [r.number for r in db.find_inputs(moved, "J")] == [a.number]
    assert db.find_inputs(moved, "J edited") == []


def test_whole_numbers_in_the_summary_hash_as_stored(tmp_path):
    """regression: a coverage factor given as the int 2 is stored as REAL 2.0; the record
    hash is of the value read back, so the chain verifies; a non-finite Cd is refused."""
    db = Records(tmp_path / "r.sqlite")
    rec = _issue(db, summary={"coverage_factor": 2, "drag_coefficient": 1})
    assert rec.coverage_factor == 2.0 and db.verify().ok
    with pytest.raises(ValueError, match=r"summary: drag_coefficient must be finite, got nan"):
        _issue(db, summary={"drag_coefficient": float("nan")})


def _die_after_commit(args):
    import fitdrag.run.records as records_module

    path, folder = args
    records_module._publish = lambda tmp, final: os._exit(9)  # killed before the renaming
    db = Records(path)
    db.issue(_files_render(Path(folder))(db), result=RESULT, input_hashes=HASHES, issued_at=WHEN)


def test_files_of_a_run_killed_after_its_commit_are_completed(tmp_path):
    """regression: a run killed between the commit and the renaming leaves a record whose
    files are temporary; verify names them missing; the next run in the folder gives them
    their final names (SHA-256 as recorded) and removes every other leftover."""
    path = tmp_path / "r.sqlite"
    proc = mp.get_context("fork").Process(target=_die_after_commit, args=((path, tmp_path),))
    proc.start()
    proc.join()
    assert proc.exitcode == 9
    db = Records(path)
    (rec,) = db.list()
    assert not Path(rec.outputs["certificate_pdf"]).exists()
    assert len(list(tmp_path.glob(".FD-*.tmp"))) == 3
    assert any("is missing" in str(f) for f in db.verify().findings)
    stray = tmp_path / f".FD-2026-000099.pdf.{proc.pid}.tmp"
    stray.write_text("not a recorded file")
    done = db.finish_interrupted(tmp_path)
    assert sorted(p.name for p in done) == [f"{rec.number}.{e}" for e in ("json", "pdf", "png")]
    assert db.verify().ok and not list(tmp_path.glob(".*.tmp"))
