"""Records database: one row per issued certificate, in SQLite, chained by hashes.

Every certificate gets a unique, gap-free number ``PREFIX-YYYY-NNNNNN`` (e.g.
``FD-2026-000123``; the sequence restarts each calendar year of issue).  The number is
allocated inside a ``BEGIN IMMEDIATE`` transaction, which takes the database's write lock
before reading the highest number in use, so two runs at once can never draw the same number;
the certificate files are rendered while that lock is held, and the row is inserted in the
same transaction.  If anything fails before the commit, the transaction is rolled back: no
row, no number used, and the sequence stays gap-free.

Files are rendered to temporary names first and given their final names only *after* the
commit, by a hard link that never replaces an existing file: an issued certificate file is
never overwritten.  A crash between the two leaves a committed record with temporary files
beside it (cleaned up by :func:`clean_leftovers` on the next issue, and reported by
:meth:`Records.verify` as missing files), never a finished-looking certificate without a
record.

Tamper evidence (a hash chain, as in RFC 6962 sec. 2.1 and common practice for audit logs):
each record stores

* ``record_hash`` = SHA-256 of the previous record's ``seal`` and of the record's content
  (number, time, job text, input hashes, result, reviewer, ...), in canonical JSON; the
  certificate prints it;
* ``file_hashes``: the SHA-256 of its PDF, PNG and JSON as rendered;
* ``seal`` = SHA-256 of ``record_hash``, the output paths and the file hashes: the link the
  next record is chained to.

The last seal is also kept in a head file beside the database (``NAME.head``), and every
certificate's JSON names the database's identifier: :meth:`Records.verify` re-computes every
hash, checks every file, and compares the chain's end with the head file and with the
certificate files present, so an altered, deleted (including the newest) or re-chained
record, and a changed or deleted file, are each named.  Triggers refuse ``UPDATE`` and
``DELETE``; the chain shows what was done after they were dropped.

A corrected certificate is a new record whose ``replaces`` names the old number and whose
``reason`` says why; a certificate can be replaced once (replace the replacement to correct it
again).  Each record has a ``kind`` (``"certificate"`` for now) so that other kinds of record
can share the chain.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import math
import os
import re
import sqlite3
import uuid
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import Any

from fitdrag._files import write_text_atomic
from fitdrag.errors import InputError, InputFileNotFoundError, OutputExistsError

#: Default file name of a records database.
DEFAULT_FILENAME = "records.sqlite"

#: The ``previous_seal`` of the first record of a chain.
GENESIS = "0" * 64

#: Record kinds this version writes (``kind`` column): an issued certificate, and the notice
#: that withdraws one without a replacement (its ``replaces`` names the certificate).
KINDS = ("certificate", "withdrawal")

_SCHEMA_VERSION = 2

_SCHEMA = (
    """
CREATE TABLE IF NOT EXISTS certificates (
    number TEXT PRIMARY KEY,
    kind TEXT NOT NULL DEFAULT 'certificate',
    chain_index INTEGER NOT NULL UNIQUE,
    prefix TEXT NOT NULL,
    year INTEGER NOT NULL,
    seq INTEGER NOT NULL,
    issued_at TEXT NOT NULL,
    replaces TEXT UNIQUE REFERENCES certificates(number),
    reason TEXT,
    approved_by TEXT,
    draft_sha256 TEXT,
    job_path TEXT,
    job_text TEXT,
    input_hashes TEXT NOT NULL,
    result_json TEXT NOT NULL,
    outputs TEXT NOT NULL,
    file_hashes TEXT NOT NULL,
    customer TEXT,
    specimen_id TEXT,
    drag_coefficient REAL,
    expanded_uncertainty REAL,
    coverage_factor REAL,
    decision TEXT,
    software_version TEXT,
    previous_seal TEXT NOT NULL,
    record_hash TEXT NOT NULL,
    seal TEXT NOT NULL UNIQUE,
    UNIQUE (prefix, year, seq)
)""",
    """
CREATE TABLE IF NOT EXISTS database_info (key TEXT PRIMARY KEY, value TEXT NOT NULL)""",
    """
CREATE TRIGGER IF NOT EXISTS certificates_never_updated BEFORE UPDATE ON certificates
BEGIN
    SELECT RAISE(ABORT, 'certificate records are never changed; issue a replacement instead');
END""",
    """
CREATE TRIGGER IF NOT EXISTS certificates_never_deleted BEFORE DELETE ON certificates
BEGIN
    SELECT RAISE(ABORT, 'certificate records are never deleted; issue a replacement instead');
END""",
)
_TRIGGERS = ("certificates_never_updated", "certificates_never_deleted")

_NUMBER_RE = re.compile(r"^([A-Z][A-Z0-9]{0,7})-(\d{4})-(\d{6})$")
_PREFIX_RE = re.compile(r"^[A-Z][A-Z0-9]{0,7}$")

CSV_COLUMNS = (
    "number",
    "kind",
    "issued_at",
    "approved_by",
    "replaces",
    "replaced_by",
    "reason",
    "customer",
    "specimen_id",
    "drag_coefficient",
    "expanded_uncertainty",
    "coverage_factor",
    "decision",
    "software_version",
    "job_path",
    "input_hashes",
    "outputs",
    "file_hashes",
    "record_hash",
)

#: Text columns of the CSV export (a cell starting with one of ``=+-@`` or a tab or carriage
#: return is read as a formula by spreadsheet programs: such cells get a leading apostrophe,
#: as the OWASP "CSV injection" guidance recommends).
_TEXT_COLUMNS = frozenset(CSV_COLUMNS) - {
    "drag_coefficient",
    "expanded_uncertainty",
    "coverage_factor",
}
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def csv_safe(text: str) -> str:
    """``text`` for a spreadsheet cell: a leading apostrophe before a formula-leading
    character (OWASP, "CSV Injection", common practice)."""
    return "'" + text if text.startswith(_FORMULA_START) else text


def sha256_file(path: str | os.PathLike) -> str:
    """SHA-256 of a file's bytes (hex)."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def canonical_json(value: Any) -> str:
    """The canonical JSON text hashed for the chain: sorted keys, no spaces, UTF-8 text,
    no NaN."""
    return json.dumps(value, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                      allow_nan=False)  # fmt: skip


def record_hash(previous_seal: str, content: Mapping[str, Any]) -> str:
    """SHA-256 over the previous record's seal and this record's content (hex)."""
    text = f"fitdrag record v2\n{previous_seal}\n{canonical_json(dict(content))}"
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def seal_of(rec_hash: str, outputs: Mapping[str, str], file_hashes: Mapping[str, str]) -> str:
    """SHA-256 over a record's hash, its output paths and its files' hashes (hex): the link
    the next record is chained to."""
    text = f"fitdrag seal v2\n{rec_hash}\n{canonical_json(dict(outputs))}\n" + canonical_json(
        dict(file_hashes)
    )
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def format_number(prefix: str, year: int, seq: int) -> str:
    """Certificate number ``PREFIX-YYYY-NNNNNN``."""
    check_prefix(prefix)
    if not 1 <= int(seq) <= 999_999:
        raise InputError(f"seq: certificate sequence {seq!r} is outside 1..999999.")
    return f"{prefix}-{int(year):04d}-{int(seq):06d}"


def parse_number(number: str) -> tuple[str, int, int]:
    """Split a certificate number into (prefix, year, seq)."""
    m = _NUMBER_RE.match(str(number).strip())
    if not m:
        raise InputError(
            f"certificate number: {number!r} is not of the form PREFIX-YYYY-NNNNNN "
            f"(e.g. FD-2026-000123)."
        )
    return m.group(1), int(m.group(2)), int(m.group(3))


def check_prefix(prefix: str) -> str:
    if not isinstance(prefix, str) or not _PREFIX_RE.match(prefix):
        raise InputError(
            f"number_prefix: {prefix!r} must be 1 to 8 capital letters or digits starting with "
            f"a letter (e.g. 'FD')."
        )
    return prefix


@dataclass(frozen=True)
class Record:
    """One issued certificate as stored."""

    number: str
    issued_at: str
    replaces: str | None
    job_path: str | None
    job_text: str | None
    input_hashes: dict
    result: dict
    outputs: dict
    customer: str | None = None
    specimen_id: str | None = None
    drag_coefficient: float | None = None
    expanded_uncertainty: float | None = None
    coverage_factor: float | None = None
    decision: str | None = None
    software_version: str | None = None
    replaced_by: str | None = None
    kind: str = "certificate"
    reason: str | None = None
    approved_by: str | None = None
    draft_sha256: str | None = None
    file_hashes: dict = field(default_factory=dict)
    chain_index: int = 0
    previous_seal: str = GENESIS
    record_hash: str = ""
    seal: str = ""

    def content(self) -> dict:
        """What the record hash covers (everything but the outputs, the file hashes and the
        hashes themselves)."""
        prefix, year, seq = parse_number(self.number)
        return {
            "kind": self.kind,
            "chain_index": self.chain_index,
            "number": self.number,
            "prefix": prefix,
            "year": year,
            "seq": seq,
            "issued_at": self.issued_at,
            "replaces": self.replaces,
            "reason": self.reason,
            "approved_by": self.approved_by,
            "draft_sha256": self.draft_sha256,
            "job_path": self.job_path,
            "job_text": self.job_text,
            "input_hashes": self.input_hashes,
            "result": self.result,
            "customer": self.customer,
            "specimen_id": self.specimen_id,
            "drag_coefficient": self.drag_coefficient,
            "expanded_uncertainty": self.expanded_uncertainty,
            "coverage_factor": self.coverage_factor,
            "decision": self.decision,
            "software_version": self.software_version,
        }

    def to_row(self) -> dict:
        """The record as a CSV row (text cells made safe for spreadsheets)."""
        row = {
            "number": self.number,
            "kind": self.kind,
            "issued_at": self.issued_at,
            "approved_by": self.approved_by or "",
            "replaces": self.replaces or "",
            "replaced_by": self.replaced_by or "",
            "reason": self.reason or "",
            "customer": self.customer or "",
            "specimen_id": self.specimen_id or "",
            "drag_coefficient": ""
            if self.drag_coefficient is None
            else repr(self.drag_coefficient),
            "expanded_uncertainty": (
                "" if self.expanded_uncertainty is None else repr(self.expanded_uncertainty)
            ),
            "coverage_factor": "" if self.coverage_factor is None else repr(self.coverage_factor),
            "decision": self.decision or "",
            "software_version": self.software_version or "",
            "job_path": self.job_path or "",
            "input_hashes": json.dumps(self.input_hashes, sort_keys=True),
            "outputs": json.dumps(self.outputs, sort_keys=True),
            "file_hashes": json.dumps(self.file_hashes, sort_keys=True),
            "record_hash": self.record_hash,
        }
        return {k: csv_safe(v) if k in _TEXT_COLUMNS else v for k, v in row.items()}


@dataclass(frozen=True)
class PendingFile:
    """A file rendered to ``temporary`` that becomes ``final`` once the record is committed."""

    temporary: Path
    final: Path


@dataclass(frozen=True)
class Finding:
    """One thing :meth:`Records.verify` found wrong: the record (or file) and what."""

    subject: str
    problem: str

    def __str__(self) -> str:
        return f"{self.subject}: {self.problem}"


@dataclass(frozen=True)
class Verification:
    """The outcome of :meth:`Records.verify`.

    Attributes
    ----------
    records : int
        Records in the database.
    files : int
        Certificate files checked.
    last_seal : str
        The chain's last seal (note it elsewhere to compare later), or GENESIS.
    findings : tuple of Finding
        Everything found wrong; empty when the records and files are intact.
    """

    records: int
    files: int
    last_seal: str
    findings: tuple[Finding, ...]

    @property
    def ok(self) -> bool:
        return not self.findings


def _json(name: str, value: Any) -> str:
    try:
        return json.dumps(value, sort_keys=True, allow_nan=False)
    except (TypeError, ValueError) as exc:
        raise InputError(f"{name}: cannot be stored as JSON ({exc}).") from None


def head_path(db_path: str | os.PathLike) -> Path:
    """The head file beside a records database: its chain's last seal."""
    p = Path(db_path)
    return p.with_name(p.name + ".head")


_SUMMARY_FIELDS = (
    "customer",
    "specimen_id",
    "drag_coefficient",
    "expanded_uncertainty",
    "coverage_factor",
    "decision",
    "software_version",
)


class Records:
    """A records database file (created on first use).

    Parameters
    ----------
    path : str or Path
        SQLite file.
    timeout : float
        How long to wait for another process's write lock. [s]
    create : bool
        Create the file if missing; otherwise a missing file is an error.
    """

    def __init__(self, path: str | os.PathLike, *, timeout: float = 120.0, create: bool = True):
        self.path = Path(path)
        self.timeout = float(timeout)
        if not self.path.exists():
            if not create:
                raise InputFileNotFoundError(
                    f"records: no records database at {str(self.path)!r}; pass --records PATH, "
                    f"or set FITDRAG_RECORDS to the laboratory's database."
                )
            if not self.path.parent.is_dir():
                raise InputFileNotFoundError(
                    f"records: the folder {str(self.path.parent)!r} does not exist; create it "
                    f"or choose another --records path."
                )
        try:
            with self._connect() as con:
                if self._ensure_schema(con):  # a version-1 database, now chained: its head
                    con.execute("BEGIN IMMEDIATE")
                    self._write_head(con)
                    con.execute("COMMIT")
                row = con.execute("SELECT value FROM database_info WHERE key = 'id'").fetchone()
        except sqlite3.DatabaseError as exc:
            raise InputError(
                f"records: {str(self.path)!r} is not a usable SQLite database ({exc}); choose "
                f"another --records path."
            ) from None
        #: The database's identifier (a random UUID drawn when it was created), written into
        #: every certificate's JSON so that :meth:`verify` recognises its files.
        self.id = row[0] if row else ""

    def _connect(self) -> _Connection:
        return _Connection(self.path, self.timeout)

    @staticmethod
    def _ensure_schema(con: sqlite3.Connection) -> bool:
        """Create the schema, or move a version-1 database to it; True after a move."""
        version = con.execute("PRAGMA user_version").fetchone()[0]
        if version == _SCHEMA_VERSION:
            return False
        if version not in (0, 1, _SCHEMA_VERSION):
            raise InputError(
                f"records: database schema version {version} is not supported (expected "
                f"{_SCHEMA_VERSION}); use the fitdrag version that created it."
            )
        con.execute("BEGIN IMMEDIATE")
        try:
            version = con.execute("PRAGMA user_version").fetchone()[0]
            if version == _SCHEMA_VERSION:
                con.execute("COMMIT")  # another process created it meanwhile
                return False
            if version == 1:
                _migrate_v1(con)
                con.execute(f"PRAGMA user_version = {_SCHEMA_VERSION}")
                con.execute("COMMIT")
                return True
            tables = {
                r[0] for r in con.execute("SELECT name FROM sqlite_master WHERE type='table'")
            }
            if tables:
                raise InputError(
                    "records: the file is an SQLite database of another kind; choose another "
                    "--records path."
                )
            for statement in _SCHEMA:
                con.execute(statement)
            con.execute(
                "INSERT INTO database_info (key, value) VALUES ('id', ?)", (str(uuid.uuid4()),)
            )
            con.execute(f"PRAGMA user_version = {_SCHEMA_VERSION}")
            con.execute("COMMIT")
            return False
        except BaseException:
            con.execute("ROLLBACK")
            raise

    # -- issuing ------------------------------------------------------------------------------

    def issue(
        self,
        render: Callable[[str, datetime, str], Mapping[str, PendingFile]] | None = None,
        *,
        result: Mapping[str, Any],
        input_hashes: Mapping[str, str],
        job_text: str | None = None,
        job_path: str | None = None,
        replaces: str | None = None,
        reason: str | None = None,
        approved_by: str | None = None,
        draft_sha256: str | None = None,
        prefix: str = "FD",
        issued_at: datetime | None = None,
        summary: Mapping[str, Any] | None = None,
        kind: str = "certificate",
    ) -> Record:
        """Allocate the next number, render the files, store the record, then publish files.

        Parameters
        ----------
        render : callable, optional
            ``render(number, issued_at, record_hash) -> {kind: PendingFile}``: writes the
            certificate files to temporary paths (it runs while the write lock is held).
            Each temporary file is hashed, and linked to its final path after the commit; a
            final path that exists already is refused before anything is stored (an issued
            certificate file is never overwritten).
        result : mapping
            Result JSON (the fit, budget and verdict) stored verbatim.
        input_hashes : mapping
            ``{path: sha256}`` of every input file.
        job_text, job_path : str, optional
            The job file's text and where it was.
        replaces : str, optional
            Number of the certificate this one replaces (withdraws).
        reason : str, optional
            Why (required with ``replaces``).
        approved_by : str, optional
            Who reviewed and authorised the release.
        draft_sha256 : str, optional
            SHA-256 of the draft's JSON this certificate was released from.
        prefix : str
            Number prefix (1–8 capital letters/digits).
        issued_at : datetime, optional
            Time of issue (default: now, local time with offset).
        summary : mapping, optional
            Searchable columns: customer, specimen_id, drag_coefficient,
            expanded_uncertainty, coverage_factor, decision, software_version.
        kind : str
            Kind of record (one of :data:`KINDS`).

        Returns
        -------
        Record
        """
        check_prefix(prefix)
        if kind not in KINDS:
            raise InputError(f"kind: {kind!r} is not a record kind; expected one of {KINDS}.")
        when = issued_at or datetime.now().astimezone()
        summary = dict(summary or {})
        unknown = set(summary) - set(_SUMMARY_FIELDS)
        if unknown:
            raise InputError(f"summary: unknown field(s) {sorted(unknown)}.")
        for k in ("drag_coefficient", "expanded_uncertainty", "coverage_factor"):
            # stored as SQLite REAL: hashed as the float it reads back as (2 -> 2.0)
            v = summary.get(k)
            if v is not None:
                v = float(v)
                if not math.isfinite(v):
                    raise InputError(f"summary: {k} must be finite, got {v!r}.")
                summary[k] = v
        result = json.loads(_json("result", dict(result)))
        input_hashes = json.loads(_json("input_hashes", dict(input_hashes)))
        if replaces is not None:
            parse_number(replaces)
            if not (reason or "").strip():
                raise InputError(
                    f"reason: replacing certificate {replaces!r} needs the reason, stated for "
                    f'the record (e.g. --reason "customer\'s address corrected").'
                )
        files: dict[str, PendingFile] = {}
        head_written = False
        with self._connect() as con:
            con.execute("BEGIN IMMEDIATE")
            try:
                self._check_head(con)
                if replaces is not None:
                    self._check_replaceable(con, replaces)
                seq = con.execute(
                    "SELECT COALESCE(MAX(seq), 0) + 1 FROM certificates "
                    "WHERE prefix = ? AND year = ?",
                    (prefix, when.year),
                ).fetchone()[0]
                last = con.execute(
                    "SELECT chain_index, seal FROM certificates ORDER BY chain_index DESC LIMIT 1"
                ).fetchone()
                index, previous = (1, GENESIS) if last is None else (last[0] + 1, last[1])
                number = format_number(prefix, when.year, seq)
                draft = Record(
                    number=number,
                    issued_at=when.isoformat(timespec="seconds"),
                    replaces=replaces,
                    job_path=job_path,
                    job_text=job_text,
                    input_hashes=input_hashes,
                    result=result,
                    outputs={},
                    kind=kind,
                    reason=reason if replaces is not None else None,
                    approved_by=approved_by,
                    draft_sha256=draft_sha256,
                    chain_index=index,
                    previous_seal=previous,
                    **{k: summary.get(k) for k in _SUMMARY_FIELDS},
                )
                rec_hash = record_hash(previous, draft.content())
                if render is not None:
                    files = dict(render(number, when, rec_hash) or {})
                    for k, pf in files.items():
                        if not isinstance(pf, PendingFile):
                            raise TypeError(f"render: {k!r} is not a PendingFile: {pf!r}")
                        if Path(pf.final).exists():
                            raise OutputExistsError(
                                f"{pf.final}: exists already; an issued certificate file is "
                                f"never overwritten (is another records database numbering "
                                f"into this folder? see 'fitdrag records verify')."
                            )
                outputs = {k: str(Path(pf.final).resolve()) for k, pf in files.items()}
                file_hashes = {k: sha256_file(pf.temporary) for k, pf in files.items()}
                seal = seal_of(rec_hash, outputs, file_hashes)
                c = draft.content()
                con.execute(
                    "INSERT INTO certificates (number, kind, chain_index, prefix, year, seq, "
                    "issued_at, replaces, reason, approved_by, draft_sha256, job_path, "
                    "job_text, input_hashes, result_json, outputs, file_hashes, customer, "
                    "specimen_id, drag_coefficient, expanded_uncertainty, coverage_factor, "
                    "decision, software_version, previous_seal, record_hash, seal) "
                    "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, "
                    "?, ?, ?, ?, ?)",
                    (
                        number, kind, index, prefix, when.year, seq, c["issued_at"], replaces,
                        c["reason"], approved_by, draft_sha256, job_path, job_text,
                        _json("input_hashes", input_hashes), _json("result", result),
                        _json("outputs", outputs), _json("file_hashes", file_hashes),
                        *(summary.get(k) for k in _SUMMARY_FIELDS),
                        previous, rec_hash, seal,
                    ),
                )  # fmt: skip
                head_written = True
                self._write_head(con)
                con.execute("COMMIT")
            except BaseException:
                con.execute("ROLLBACK")
                if head_written:  # the commit failed: the head goes back to the chain's end
                    con.execute("BEGIN IMMEDIATE")
                    self._write_head(con)
                    con.execute("COMMIT")
                for pf in files.values():
                    Path(pf.temporary).unlink(missing_ok=True)
                raise
        for pf in files.values():
            _publish(Path(pf.temporary), Path(pf.final))
        return self.get(number)

    def withdraw(self, number: str, *, reason: str, approved_by: str,
                 prefix: str | None = None) -> Record:  # fmt: skip
        """Withdraw certificate ``number`` without a replacement: a withdrawal record (its own
        number, ``replaces`` = ``number``, the reason and who decided), chained like any
        record; the certificate's record stays as it was."""
        if not (approved_by or "").strip():
            raise InputError("approved_by: a withdrawal is decided by a named person; give it.")
        return self.issue(
            result={"withdraws": number, "reason": reason},
            input_hashes={},
            replaces=number,
            reason=reason,
            approved_by=approved_by.strip(),
            prefix=prefix or parse_number(number)[0],
            kind="withdrawal",
        )

    def finish_interrupted(self, folder: str | os.PathLike) -> list[Path]:
        """Give their final names to the files of committed records that a run killed between
        its commit and the renaming left as temporary files in ``folder`` (their SHA-256 must
        be the one recorded), then remove every other leftover of a dead process
        (:func:`clean_leftovers`).  Returns the files completed."""
        folder = Path(folder)
        if not folder.is_dir():
            return []
        wanted: dict[str, str] = {}
        with self._connect() as con:
            for outputs, hashes in con.execute("SELECT outputs, file_hashes FROM certificates"):
                outs, hs = json.loads(outputs), json.loads(hashes)
                for k, path in outs.items():
                    if Path(path).parent == folder.resolve() and k in hs:
                        wanted[Path(path).name] = hs[k]
        done = []
        for tmp in folder.glob(".*.tmp"):
            m = re.match(r"^\.(.+)\.(\d+)\.tmp$", tmp.name)
            if not m or m.group(1) not in wanted or _process_alive(int(m.group(2))):
                continue
            final = folder / m.group(1)
            if not final.exists() and sha256_file(tmp) == wanted[m.group(1)]:
                _publish(tmp, final)
                done.append(final)
        clean_leftovers(folder)
        return done

    def _write_head(self, con: sqlite3.Connection) -> None:
        """Write the head file from the database's last record (inside a transaction that
        holds the write lock, so heads are written in the order of the records)."""
        last = con.execute(
            "SELECT chain_index, number, seal FROM certificates ORDER BY chain_index DESC LIMIT 1"
        ).fetchone()
        head = {"records": 0, "last_number": None, "last_seal": GENESIS}
        if last is not None:
            head = {"records": last[0], "last_number": last[1], "last_seal": last[2]}
        write_text_atomic(head_path(self.path), json.dumps(head, indent=1) + "\n", force=True)

    def _check_head(self, con: sqlite3.Connection) -> None:
        """Refuse to extend a chain whose end no longer matches its head file (the newest
        record deleted or altered): its number would be issued twice."""
        problem = self._head_problem(con)
        if problem:
            raise InputError(
                f"records: {problem}; no certificate is issued until this is resolved: run "
                f"'fitdrag records --records {self.path} verify' and ask the quality manager."
            )

    def _head_problem(self, con: sqlite3.Connection, verifying: bool = False) -> str | None:
        hp = head_path(self.path)
        if not hp.exists():
            n = con.execute("SELECT COUNT(*) FROM certificates").fetchone()[0]
            return f"the head file {hp} is missing (deleted?)" if n and verifying else None
        try:
            head = json.loads(hp.read_text(encoding="utf-8"))
            count, number, seal = head["records"], head["last_number"], head["last_seal"]
        except (ValueError, KeyError, TypeError):
            return f"the head file {hp} is not readable"
        if not count:
            return None
        row = con.execute(
            "SELECT number, seal FROM certificates WHERE chain_index = ?", (count,)
        ).fetchone()
        if row is None:
            return (
                f"{number}: the newest record the head file {hp.name} names (record {count} "
                f"of the chain) is missing from the database: deleted"
            )
        if row[0] != number or row[1] != seal:
            return (
                f"{number}: record {count} of the chain is not the one the head file "
                f"{hp.name} names (seal {seal[:16]}...): altered or replaced"
            )
        return None

    @staticmethod
    def _check_replaceable(con: sqlite3.Connection, number: str) -> None:
        row = con.execute("SELECT number FROM certificates WHERE number = ?", (number,)).fetchone()
        if row is None:
            raise InputError(
                f"replaces: no certificate {number!r} in this records database; check the "
                f"number with 'fitdrag records list'."
            )
        row = con.execute(
            "SELECT number, kind FROM certificates WHERE replaces = ?", (number,)
        ).fetchone()
        if row is not None and row[1] == "withdrawal":
            raise InputError(
                f"replaces: certificate {number!r} was withdrawn (withdrawal record "
                f"{row[0]!r}); issue a new certificate instead, without --replaces."
            )
        if row is not None:
            raise InputError(
                f"replaces: certificate {number!r} was already replaced by {row[0]!r}; "
                f"replace {row[0]!r} instead."
            )

    # -- reading ------------------------------------------------------------------------------

    _SELECT = (
        "SELECT c.number, c.issued_at, c.replaces, c.job_path, c.job_text, c.input_hashes, "
        "c.result_json, c.outputs, c.customer, c.specimen_id, c.drag_coefficient, "
        "c.expanded_uncertainty, c.coverage_factor, c.decision, c.software_version, "
        "(SELECT r.number FROM certificates r WHERE r.replaces = c.number), "
        "c.kind, c.reason, c.approved_by, c.draft_sha256, c.file_hashes, c.chain_index, "
        "c.previous_seal, c.record_hash, c.seal "
        "FROM certificates c"
    )

    @staticmethod
    def _record(row) -> Record:
        return Record(
            number=row[0],
            issued_at=row[1],
            replaces=row[2],
            job_path=row[3],
            job_text=row[4],
            input_hashes=json.loads(row[5]),
            result=json.loads(row[6]),
            outputs=json.loads(row[7]),
            customer=row[8],
            specimen_id=row[9],
            drag_coefficient=row[10],
            expanded_uncertainty=row[11],
            coverage_factor=row[12],
            decision=row[13],
            software_version=row[14],
            replaced_by=row[15],
            kind=row[16],
            reason=row[17],
            approved_by=row[18],
            draft_sha256=row[19],
            file_hashes=json.loads(row[20]),
            chain_index=row[21],
            previous_seal=row[22],
            record_hash=row[23],
            seal=row[24],
        )

    def get(self, number: str) -> Record:
        """The record of certificate ``number``."""
        parse_number(number)
        with self._connect() as con:
            row = con.execute(self._SELECT + " WHERE c.number = ?", (number,)).fetchone()
        if row is None:
            raise InputError(
                f"certificate number: {number!r} is not in {str(self.path)!r}; see "
                f"'fitdrag records list'."
            )
        return self._record(row)

    def list(self) -> list[Record]:
        """All records, oldest first."""
        with self._connect() as con:
            rows = con.execute(self._SELECT + " ORDER BY c.prefix, c.year, c.seq").fetchall()
        return [self._record(r) for r in rows]

    def find_inputs(self, input_hashes: Mapping[str, str], job_text: str | None) -> list[Record]:
        """Records made from the same input files (same SHA-256 digests) and the same job
        text: an identical re-run."""
        want = sorted(input_hashes.values())
        with self._connect() as con:
            rows = con.execute(
                "SELECT number, input_hashes, job_text FROM certificates ORDER BY chain_index"
            ).fetchall()
        same = [n for n, h, text in rows
                if sorted(json.loads(h).values()) == want and (text or "") == (job_text or "")]  # fmt: skip
        return [self.get(n) for n in same]

    def __len__(self) -> int:
        with self._connect() as con:
            return con.execute("SELECT COUNT(*) FROM certificates").fetchone()[0]

    def export_csv(self, path: str | os.PathLike, *, force: bool = False) -> Path:
        """Write every record's summary to a CSV file (atomically; no overwrite unless force).
        Text cells that a spreadsheet would read as a formula get a leading apostrophe."""
        path = Path(path)
        if path.exists() and not force:
            raise InputError(
                f"export: {str(path)!r} already exists; choose another name or pass --force."
            )
        buf = io.StringIO()
        w = csv.DictWriter(buf, fieldnames=CSV_COLUMNS, lineterminator="\n")
        w.writeheader()
        for rec in self.list():
            w.writerow(rec.to_row())
        # checked above; an existing file is replaced only with force
        write_text_atomic(path, buf.getvalue(), force=True)
        return path

    # -- verifying ----------------------------------------------------------------------------

    def verify(self, *, check_files: bool = True) -> Verification:
        """Re-compute the hash chain and the files' hashes; name everything found wrong.

        Checks, in order: the triggers that refuse changes are present; the chain's
        positions run 1, 2, 3, ... (a gap: records deleted); each record's hash matches its
        content and the previous record's seal; its seal matches its outputs and files'
        hashes; the numbers of each prefix and year run without gaps; the chain ends where
        the head file says; every output file is present with the hash recorded; no
        certificate JSON of this database in the output folders is without its record.
        """
        findings: list[Finding] = []
        with self._connect() as con:
            triggers = {
                r[0] for r in con.execute("SELECT name FROM sqlite_master WHERE type='trigger'")
            }
            rows = con.execute(self._SELECT + " ORDER BY c.chain_index").fetchall()
            head_problem = self._head_problem(con, verifying=True)
        for t in _TRIGGERS:
            if t not in triggers:
                findings.append(Finding("database", f"the trigger {t} that refuses changes is "
                                        f"missing (dropped by hand)"))  # fmt: skip
        recs = [self._record(r) for r in rows]
        previous_seal, expected_index, previous_number = GENESIS, 1, None
        for rec in recs:
            if rec.chain_index != expected_index:
                where = f"after {previous_number}" if previous_number else "at the start"
                findings.append(Finding(
                    rec.number,
                    f"chain positions {expected_index} to {rec.chain_index - 1} are missing "
                    f"{where}: record(s) deleted",
                ))  # fmt: skip
            elif rec.previous_seal != previous_seal:
                findings.append(Finding(
                    rec.number,
                    "its link to the previous record "
                    f"({previous_number or 'start of the chain'}) does not match: a record "
                    "before it was altered, or one was deleted and the chain re-computed",
                ))  # fmt: skip
            try:
                h = record_hash(rec.previous_seal, rec.content())
            except (InputError, ValueError, TypeError):
                h = ""
            if h != rec.record_hash:
                findings.append(Finding(rec.number, "altered: its content no longer matches "
                                        "its record hash"))  # fmt: skip
            if seal_of(rec.record_hash, rec.outputs, rec.file_hashes) != rec.seal:
                findings.append(Finding(rec.number, "altered: its output paths or file "
                                        "hashes no longer match its seal"))  # fmt: skip
            previous_seal, expected_index = rec.seal, rec.chain_index + 1
            previous_number = rec.number
        by_series: dict[tuple[str, int], list[int]] = {}
        for rec in recs:
            p, y, q = parse_number(rec.number)
            by_series.setdefault((p, y), []).append(q)
        for (p, y), seqs in sorted(by_series.items()):
            have = set(seqs)
            for q in range(1, max(seqs) + 1):
                if q not in have:
                    findings.append(Finding(format_number(p, y, q), "missing from the numbers "
                                            "issued: its record was deleted"))  # fmt: skip
        if head_problem:
            findings.append(Finding(*_split_subject(head_problem)))
        n_files = 0
        if check_files:
            folders: set[Path] = set()
            known = {r.number for r in recs}
            for rec in recs:
                for k, path in sorted(rec.outputs.items()):
                    folders.add(Path(path).parent)
                    n_files += 1
                    if not Path(path).exists():
                        findings.append(Finding(rec.number, f"its {k} file {path} is missing "
                                                f"(deleted or moved)"))  # fmt: skip
                    elif sha256_file(path) != rec.file_hashes.get(k):
                        findings.append(Finding(rec.number, f"its {k} file {path} was changed "
                                                f"after issue (SHA-256 differs)"))  # fmt: skip
            for folder in sorted(folders):
                for js in sorted(folder.glob("*.json")):
                    stem = js.stem
                    if not _NUMBER_RE.match(stem) or stem in known:
                        continue
                    try:
                        cert = json.loads(js.read_text(encoding="utf-8")).get("certificate", {})
                    except (OSError, ValueError, AttributeError):
                        continue
                    if isinstance(cert, dict) and cert.get("records_id") == self.id:
                        findings.append(Finding(stem, f"its certificate {js} names this "
                                                f"database, which holds no such record: the "
                                                f"record was deleted"))  # fmt: skip
        last = recs[-1].seal if recs else GENESIS
        return Verification(len(recs), n_files, last, tuple(findings))


#: Environment variable naming the laboratory's records database.
ENV_VAR = "FITDRAG_RECORDS"
#: Settings file (TOML) in the user's configuration folder; its key ``records`` names the
#: laboratory's records database.
SETTINGS_NAME = "settings.toml"


@dataclass(frozen=True)
class RecordsLocation:
    """Where the records database is, and why there (for ``fitdrag run`` to say)."""

    path: Path
    source: str


def settings_path() -> Path:
    """The settings file: ``settings.toml`` in the user's configuration folder for fitdrag
    (platformdirs: e.g. ``~/.config/fitdrag`` on Linux)."""
    import platformdirs

    return Path(platformdirs.user_config_dir("fitdrag", appauthor=False)) / SETTINGS_NAME


def lab_records(explicit: str | os.PathLike | None = None,
                job_records: str | os.PathLike | None = None) -> RecordsLocation:  # fmt: skip
    """The records database to use: ``explicit`` (``--records``), else the job's ``[output]
    records``, else the laboratory's: the environment variable ``FITDRAG_RECORDS``, else
    the key ``records`` of the settings file (:func:`settings_path`), else
    ``records.sqlite`` in the user's data folder (platformdirs; created when needed).
    """
    if explicit:
        return RecordsLocation(Path(explicit).expanduser(), "--records")
    if job_records:
        return RecordsLocation(Path(job_records), "the job's [output] records")
    env = os.environ.get(ENV_VAR, "").strip()
    if env:
        return RecordsLocation(Path(env).expanduser(), f"laboratory database, from {ENV_VAR}")
    sp = settings_path()
    if sp.exists():
        import tomllib

        try:
            value = tomllib.loads(sp.read_text(encoding="utf-8")).get("records")
        except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
            raise InputError(f"{sp}: not a readable settings file ({exc}); fix it, e.g. "
                             f"records = \"/srv/lab/records.sqlite\".") from None  # fmt: skip
        if value is not None:
            if not isinstance(value, str) or not value.strip():
                raise InputError(f"{sp}: records: {value!r} is not a path; give e.g. "
                                 f"records = \"/srv/lab/records.sqlite\".")  # fmt: skip
            p = Path(value).expanduser()
            if not p.is_absolute():
                p = sp.parent / p
            return RecordsLocation(p, f"laboratory database, from {sp}")
    import platformdirs

    folder = Path(platformdirs.user_data_dir("fitdrag", appauthor=False))
    folder.mkdir(parents=True, exist_ok=True)
    return RecordsLocation(
        folder / DEFAULT_FILENAME,
        f"laboratory database in the user's data folder; set {ENV_VAR}, or records in {sp}, "
        f"to move it",
    )


_V1_COLUMNS = (
    "number, issued_at, replaces, job_path, job_text, input_hashes, result_json, outputs, "
    "customer, specimen_id, drag_coefficient, expanded_uncertainty, coverage_factor, decision, "
    "software_version"
)


def _migrate_v1(con: sqlite3.Connection) -> None:
    """Move a version-1 database (no hash chain) to version 2 inside the caller's transaction:
    its records are chained in the order they were stored, each with the SHA-256 of its files
    as they are now (a file already missing gets no hash and is reported by verify)."""
    rows = con.execute(f"SELECT {_V1_COLUMNS} FROM certificates ORDER BY rowid").fetchall()
    con.execute("DROP TRIGGER IF EXISTS certificates_never_updated")
    con.execute("DROP TRIGGER IF EXISTS certificates_never_deleted")
    con.execute("ALTER TABLE certificates RENAME TO certificates_v1")
    for statement in _SCHEMA:
        con.execute(statement)
    con.execute("INSERT INTO database_info (key, value) VALUES ('id', ?)", (str(uuid.uuid4()),))
    con.execute(
        "INSERT INTO database_info (key, value) VALUES ('migrated_from_v1', ?)",
        (datetime.now().astimezone().isoformat(timespec="seconds"),),
    )
    previous = GENESIS
    for index, r in enumerate(rows, start=1):
        outputs = json.loads(r[7])
        file_hashes = {k: sha256_file(v) for k, v in outputs.items() if Path(v).is_file()}
        rec = Record(
            number=r[0], issued_at=r[1], replaces=r[2], job_path=r[3], job_text=r[4],
            input_hashes=json.loads(r[5]), result=json.loads(r[6]), outputs=outputs,
            customer=r[8], specimen_id=r[9], drag_coefficient=r[10],
            expanded_uncertainty=r[11], coverage_factor=r[12], decision=r[13],
            software_version=r[14], chain_index=index, previous_seal=previous,
        )  # fmt: skip
        h = record_hash(previous, rec.content())
        seal = seal_of(h, outputs, file_hashes)
        prefix, year, seq = parse_number(rec.number)
        con.execute(
            "INSERT INTO certificates (number, kind, chain_index, prefix, year, seq, issued_at, "
            "replaces, job_path, job_text, input_hashes, result_json, outputs, file_hashes, "
            "customer, specimen_id, drag_coefficient, expanded_uncertainty, coverage_factor, "
            "decision, software_version, previous_seal, record_hash, seal) VALUES "
            "(?, 'certificate', ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
            (rec.number, index, prefix, year, seq, rec.issued_at, rec.replaces, rec.job_path,
             rec.job_text, r[5], r[6], r[7], _json("file_hashes", file_hashes), *r[8:15],
             previous, h, seal),
        )  # fmt: skip
        previous = seal
    con.execute("DROP TABLE certificates_v1")


def _split_subject(text: str) -> tuple[str, str]:
    subject, _, problem = text.partition(": ")
    return (subject, problem) if problem else ("database", text)


def _publish(temporary: Path, final: Path) -> None:
    """Give a committed record's file its final name without replacing an existing file."""
    try:
        os.link(temporary, final)
    except FileExistsError:
        raise OutputExistsError(
            f"{final}: appeared while the certificate was issued; the certificate stays in "
            f"{temporary} (never overwritten); see 'fitdrag records verify'."
        ) from None
    except OSError:  # a file system without hard links
        if final.exists():
            raise OutputExistsError(
                f"{final}: appeared while the certificate was issued; the certificate stays "
                f"in {temporary}; see 'fitdrag records verify'."
            ) from None
        os.replace(temporary, final)
        return
    temporary.unlink()


def clean_leftovers(folder: str | os.PathLike) -> list[Path]:
    """Remove the temporary files (``.NAME.PID.tmp``) that runs killed before finishing left
    in ``folder``, when their process is gone; returns the removed paths."""
    removed = []
    folder = Path(folder)
    if not folder.is_dir():
        return removed
    for p in folder.glob(".*.tmp"):
        m = re.match(r"^\..+\.(\d+)\.tmp$", p.name)
        if not m:
            continue
        pid = int(m.group(1))
        if pid == os.getpid() or _process_alive(pid):
            continue
        try:
            p.unlink()
            removed.append(p)
        except OSError:
            pass
    return removed


def _process_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OSError):
        return True
    return True


class _Connection:
    """Context manager around a connection in autocommit mode (explicit transactions)."""

    def __init__(self, path: Path, timeout: float):
        self.path, self.timeout = path, timeout
        self.con: sqlite3.Connection | None = None

    def __enter__(self) -> sqlite3.Connection:
        try:
            self.con = sqlite3.connect(str(self.path), timeout=self.timeout, isolation_level=None)
            self.con.execute("PRAGMA foreign_keys = ON")
        except sqlite3.DatabaseError as exc:
            raise InputError(
                f"records: {str(self.path)!r} is not a usable SQLite database ({exc}); choose "
                f"another --records path."
            ) from None
        return self.con

    def __exit__(self, *exc) -> None:
        if self.con is not None:
            self.con.close()
