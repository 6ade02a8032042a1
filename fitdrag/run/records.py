"""Records database: one row per issued certificate, in SQLite.

Every certificate gets a unique, gap-free number ``PREFIX-YYYY-NNNNNN`` (e.g.
``FD-2026-000123``; the sequence restarts each calendar year of issue).  The number is
allocated inside a ``BEGIN IMMEDIATE`` transaction, which takes the database's write lock
before reading the highest number in use, so two runs at once can never draw the same number;
the certificate files are rendered while that lock is held, and the row is inserted in the
same transaction.  If anything fails before the commit, the transaction is rolled back: no
row, no number used, and the sequence stays gap-free.

Files are rendered to temporary names first and renamed to their final names only *after* the
commit.  A crash between the two leaves a committed record with temporary files beside it (its
number is never reused), never a finished-looking certificate without a record.

Records are never changed or deleted: triggers refuse ``UPDATE`` and ``DELETE``.  A corrected
certificate is a new record whose ``replaces`` names the old number; a certificate can be
replaced once (replace the replacement to correct it again).
"""

from __future__ import annotations

import csv
import io
import json
import os
import re
import sqlite3
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import Any

from fitdrag._files import write_text_atomic
from fitdrag.errors import InputError, InputFileNotFoundError

#: Default file name of the records database in a job's output directory.
DEFAULT_FILENAME = "records.sqlite"

_SCHEMA_VERSION = 1

_SCHEMA = (
    """
CREATE TABLE IF NOT EXISTS certificates (
    number TEXT PRIMARY KEY,
    prefix TEXT NOT NULL,
    year INTEGER NOT NULL,
    seq INTEGER NOT NULL,
    issued_at TEXT NOT NULL,
    replaces TEXT UNIQUE REFERENCES certificates(number),
    job_path TEXT,
    job_text TEXT,
    input_hashes TEXT NOT NULL,
    result_json TEXT NOT NULL,
    outputs TEXT NOT NULL,
    customer TEXT,
    specimen_id TEXT,
    drag_coefficient REAL,
    expanded_uncertainty REAL,
    coverage_factor REAL,
    decision TEXT,
    software_version TEXT,
    UNIQUE (prefix, year, seq)
)""",
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

_NUMBER_RE = re.compile(r"^([A-Z][A-Z0-9]{0,7})-(\d{4})-(\d{6})$")
_PREFIX_RE = re.compile(r"^[A-Z][A-Z0-9]{0,7}$")

CSV_COLUMNS = (
    "number",
    "issued_at",
    "replaces",
    "replaced_by",
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
)


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

    def to_row(self) -> dict:
        return {
            "number": self.number,
            "issued_at": self.issued_at,
            "replaces": self.replaces or "",
            "replaced_by": self.replaced_by or "",
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
        }


@dataclass(frozen=True)
class PendingFile:
    """A file rendered to ``temporary`` that becomes ``final`` once the record is committed."""

    temporary: Path
    final: Path


@dataclass
class _Issue:
    number: str
    issued_at: datetime
    files: dict[str, PendingFile] = field(default_factory=dict)


def _json(name: str, value: Any) -> str:
    try:
        return json.dumps(value, sort_keys=True, allow_nan=False)
    except (TypeError, ValueError) as exc:
        raise InputError(f"{name}: cannot be stored as JSON ({exc}).") from None


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
                    f"records: no records database at {str(self.path)!r}; pass --records PATH "
                    f"(fitdrag run keeps one, {DEFAULT_FILENAME}, in the job's output directory)."
                )
            if not self.path.parent.is_dir():
                raise InputFileNotFoundError(
                    f"records: the folder {str(self.path.parent)!r} does not exist; create it "
                    f"or choose another --records path."
                )
        try:
            with self._connect() as con:
                self._ensure_schema(con)
        except sqlite3.DatabaseError as exc:
            raise InputError(
                f"records: {str(self.path)!r} is not a usable SQLite database ({exc}); choose "
                f"another --records path."
            ) from None

    def _connect(self) -> _Connection:
        return _Connection(self.path, self.timeout)

    @staticmethod
    def _ensure_schema(con: sqlite3.Connection) -> None:
        version = con.execute("PRAGMA user_version").fetchone()[0]
        if version == _SCHEMA_VERSION:
            return
        if version not in (0, _SCHEMA_VERSION):
            raise InputError(
                f"records: database schema version {version} is not supported (expected "
                f"{_SCHEMA_VERSION}); use the fitdrag version that created it."
            )
        con.execute("BEGIN IMMEDIATE")
        try:
            if con.execute("PRAGMA user_version").fetchone()[0] == _SCHEMA_VERSION:
                con.execute("COMMIT")  # another process created it meanwhile
                return
            tables = {
                r[0] for r in con.execute("SELECT name FROM sqlite_master WHERE type='table'")
            }
            if tables - {"certificates"}:
                raise InputError(
                    "records: the file is an SQLite database of another kind; choose another "
                    "--records path."
                )
            for statement in _SCHEMA:
                con.execute(statement)
            con.execute(f"PRAGMA user_version = {_SCHEMA_VERSION}")
            con.execute("COMMIT")
        except BaseException:
            con.execute("ROLLBACK")
            raise

    # -- issuing ------------------------------------------------------------------------------

    def issue(
        self,
        render: Callable[[str, datetime], Mapping[str, PendingFile]] | None = None,
        *,
        result: Mapping[str, Any],
        input_hashes: Mapping[str, str],
        job_text: str | None = None,
        job_path: str | None = None,
        replaces: str | None = None,
        prefix: str = "FD",
        issued_at: datetime | None = None,
        summary: Mapping[str, Any] | None = None,
    ) -> Record:
        """Allocate the next number, render the files, store the record, then publish files.

        Parameters
        ----------
        render : callable, optional
            ``render(number, issued_at) -> {kind: PendingFile}``: writes the certificate files
            to temporary paths (it runs while the write lock is held).  Each temporary file is
            renamed to its final path after the commit; the final paths are stored.
        result : mapping
            Result JSON (the fit, budget and verdict) stored verbatim.
        input_hashes : mapping
            ``{path: sha256}`` of every input file.
        job_text, job_path : str, optional
            The job file's text and where it was.
        replaces : str, optional
            Number of the certificate this one replaces.
        prefix : str
            Number prefix (1–8 capital letters/digits).
        issued_at : datetime, optional
            Time of issue (default: now, local time with offset).
        summary : mapping, optional
            Searchable columns: customer, specimen_id, drag_coefficient,
            expanded_uncertainty, coverage_factor, decision, software_version.

        Returns
        -------
        Record
        """
        check_prefix(prefix)
        when = issued_at or datetime.now().astimezone()
        summary = dict(summary or {})
        unknown = set(summary) - {
            "customer",
            "specimen_id",
            "drag_coefficient",
            "expanded_uncertainty",
            "coverage_factor",
            "decision",
            "software_version",
        }
        if unknown:
            raise InputError(f"summary: unknown field(s) {sorted(unknown)}.")
        result_text = _json("result", dict(result))
        hashes_text = _json("input_hashes", dict(input_hashes))
        if replaces is not None:
            parse_number(replaces)
        files: dict[str, PendingFile] = {}
        with self._connect() as con:
            con.execute("BEGIN IMMEDIATE")
            try:
                if replaces is not None:
                    self._check_replaceable(con, replaces)
                seq = con.execute(
                    "SELECT COALESCE(MAX(seq), 0) + 1 FROM certificates "
                    "WHERE prefix = ? AND year = ?",
                    (prefix, when.year),
                ).fetchone()[0]
                number = format_number(prefix, when.year, seq)
                if render is not None:
                    files = dict(render(number, when) or {})
                    for kind, pf in files.items():
                        if not isinstance(pf, PendingFile):
                            raise TypeError(f"render: {kind!r} is not a PendingFile: {pf!r}")
                outputs = {k: str(Path(pf.final).resolve()) for k, pf in files.items()}
                con.execute(
                    "INSERT INTO certificates (number, prefix, year, seq, issued_at, replaces, "
                    "job_path, job_text, input_hashes, result_json, outputs, customer, "
                    "specimen_id, drag_coefficient, expanded_uncertainty, coverage_factor, "
                    "decision, software_version) "
                    "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                    (
                        number,
                        prefix,
                        when.year,
                        seq,
                        when.isoformat(timespec="seconds"),
                        replaces,
                        job_path,
                        job_text,
                        hashes_text,
                        result_text,
                        _json("outputs", outputs),
                        summary.get("customer"),
                        summary.get("specimen_id"),
                        summary.get("drag_coefficient"),
                        summary.get("expanded_uncertainty"),
                        summary.get("coverage_factor"),
                        summary.get("decision"),
                        summary.get("software_version"),
                    ),
                )
                con.execute("COMMIT")
            except BaseException:
                con.execute("ROLLBACK")
                for pf in files.values():
                    Path(pf.temporary).unlink(missing_ok=True)
                raise
        for pf in files.values():
            os.replace(pf.temporary, pf.final)
        return self.get(number)

    @staticmethod
    def _check_replaceable(con: sqlite3.Connection, number: str) -> None:
        row = con.execute("SELECT number FROM certificates WHERE number = ?", (number,)).fetchone()
        if row is None:
            raise InputError(
                f"replaces: no certificate {number!r} in this records database; check the "
                f"number with 'fitdrag records list'."
            )
        row = con.execute(
            "SELECT number FROM certificates WHERE replaces = ?", (number,)
        ).fetchone()
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
        "(SELECT r.number FROM certificates r WHERE r.replaces = c.number) "
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

    def __len__(self) -> int:
        with self._connect() as con:
            return con.execute("SELECT COUNT(*) FROM certificates").fetchone()[0]

    def export_csv(self, path: str | os.PathLike, *, force: bool = False) -> Path:
        """Write every record's summary to a CSV file (atomically; no overwrite unless force)."""
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
