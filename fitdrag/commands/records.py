"""``fitdrag records``: list, show, export and verify the certificates on record."""

from __future__ import annotations

import argparse
import json
import math
import re
from pathlib import Path

from fitdrag.errors import EXIT_RECORDS_NOT_INTACT, InputError

#: The default records database: fitdrag.run.records.DEFAULT_FILENAME, written out so that
#: building the parser does not load the records module (a test checks that the two agree).
DEFAULT_FILENAME = "records.sqlite"


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "records",
        help="list, show, export or verify issued certificates in a records database",
        description=(
            "Read the records database that 'fitdrag run' keeps: every certificate issued, "
            "who released it, its job file, input hashes, result and output files.  Records "
            "are never changed; a corrected certificate is a new record that names the one it "
            "replaces and why.  'verify' re-computes the records' hash chain and the "
            "certificate files' hashes and names every record altered or deleted and every "
            "file changed."
        ),
        epilog=(
            "Example: fitdrag records list\n"
            "         fitdrag records show FD-2026-000001\n"
            "         fitdrag records export all.csv\n"
            "         fitdrag records verify\n"
            "         fitdrag records --records out/records.sqlite list\n\n"
            "The database is the laboratory's (FITDRAG_RECORDS, the settings file, or the "
            "user's data folder) unless --records names another.\n"
            "Exit codes: 0 done (verify: all intact), 1 a bug (with a traceback), 2 bad "
            "arguments, no such database or certificate, or an existing CSV without --force, "
            "7 verify found records altered or deleted or files changed."
        ),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument(
        "--records",
        metavar="PATH",
        default=None,
        help="records database file (default: the laboratory's: FITDRAG_RECORDS, the "
        f"settings file, or {DEFAULT_FILENAME} in the user's data folder)",
    )
    # --records may also follow the action ("fitdrag records list --records PATH")
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument("--records", metavar="PATH", default=argparse.SUPPRESS,
                        help="records database file")  # fmt: skip
    sub = p.add_subparsers(dest="action", metavar="ACTION", required=True)
    sub.add_parser("list", parents=[common], help="one line per certificate, oldest first")
    show = sub.add_parser("show", parents=[common], help="everything stored for one certificate")
    show.add_argument("number", metavar="NUMBER", help="certificate number, e.g. FD-2026-000001")
    show.add_argument("--job", action="store_true", help="also print the stored job file text")
    show.add_argument("--json", action="store_true", help="print only the stored result JSON")
    exp = sub.add_parser("export", parents=[common], help="write a CSV summary of every record")
    exp.add_argument("csv", metavar="CSV", help="output CSV file")
    exp.add_argument("--force", action="store_true", help="overwrite an existing CSV file")
    wd = sub.add_parser(
        "withdraw", parents=[common],
        help="withdraw a certificate without a replacement (a withdrawal record with the reason)",
    )  # fmt: skip
    wd.add_argument("number", metavar="NUMBER", help="certificate to withdraw")
    wd.add_argument("--reason", metavar="TEXT", required=True, help="why (kept in the records)")
    wd.add_argument("--approved-by", metavar="NAME", required=True,
                    help="who decided the withdrawal")  # fmt: skip
    ver = sub.add_parser(
        "verify", parents=[common],
        help="re-compute the hash chain and the files' hashes; exit 7 naming what was altered",
    )  # fmt: skip
    ver.add_argument("--no-files", action="store_true",
                     help="check the records' chain only, not the certificate files")  # fmt: skip
    return p


_CONTROL = re.compile(r"[\x00-\x1f\x7f-\x9f\u200e\u200f\u202a-\u202e\u2066-\u2069]")


def shown(text) -> str:
    """Text from the database made safe for a terminal: control characters (escape codes)
    and bidirectional overrides are shown as ``\\uXXXX``."""
    if text is None:
        return "-"
    return _CONTROL.sub(lambda m: f"\\u{ord(m.group()):04x}", str(text))


def _num(x, fmt="{:.4g}") -> str:
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "-"
    return fmt.format(x)


def run(args) -> int:
    from fitdrag.run.records import Records, lab_records

    where = lab_records(args.records)
    db = Records(where.path, create=False)
    if args.action == "list":
        recs = db.list()
        if not recs:
            print(f"no certificates on record in {where.path}")
            return 0
        print(f"records: {where.path} ({where.source})")
        head = (f"{'number':<16} {'issued':<25} {'approved by':<16} {'specimen':<16} "
                f"{'Cd':>8} {'U':>8}  decision")  # fmt: skip
        print(head)
        for r in recs:
            verb = "withdraws" if r.kind == "withdrawal" else "replaces"
            note = f" ({verb} {r.replaces}: {shown(r.reason)})" if r.replaces else ""
            note += f" [replaced by {r.replaced_by}]" if r.replaced_by else ""
            print(
                f"{r.number:<16} {shown(r.issued_at):<25} {shown(r.approved_by):<16} "
                f"{shown(r.specimen_id):<16} {_num(r.drag_coefficient):>8} "
                f"{_num(r.expanded_uncertainty):>8}  {shown(r.decision)}{note}"
            )
        return 0
    if args.action == "show":
        r = db.get(args.number)
        if args.json:
            print(json.dumps(r.result, indent=2, sort_keys=True))
            return 0
        print(f"certificate      {r.number} ({shown(r.kind)})")
        print(f"issued           {shown(r.issued_at)}")
        print(f"approved by      {shown(r.approved_by)}")
        if r.draft_sha256:
            print(f"released from    draft with SHA-256 {r.draft_sha256}")
        if r.replaces:
            print(f"replaces         {r.replaces} (reason: {shown(r.reason)})")
        if r.replaced_by:
            print(f"replaced by      {r.replaced_by}")
        print(f"customer         {shown(r.customer)}")
        print(f"specimen         {shown(r.specimen_id)}")
        print(f"drag coefficient {_num(r.drag_coefficient, '{:.6g}')}")
        print(
            f"expanded unc. U  {_num(r.expanded_uncertainty, '{:.2g}')} "
            f"(k = {_num(r.coverage_factor, '{:.2f}')})"
        )
        print(f"decision         {shown(r.decision)}")
        print(f"software         {shown(r.software_version)}")
        print(f"job file         {shown(r.job_path)}")
        print(f"record hash      {r.record_hash}")
        print("input files (SHA-256):")
        for path, digest in sorted(r.input_hashes.items()):
            print(f"  {shown(digest)}  {shown(path)}")
        print("outputs (SHA-256):")
        for kind, path in sorted(r.outputs.items()):
            print(f"  {kind:<16} {r.file_hashes.get(kind, '-')}  {shown(path)}")
        if args.job:
            print("job file text:")
            print(shown_block(r.job_text or ""))
        return 0
    if args.action == "withdraw":
        for name, text in (("--reason", args.reason), ("--approved-by", args.approved_by)):
            if not (text or "").strip() or shown(text) != text:
                raise InputError(f"{name}: give plain text (no control characters), got "
                                 f"{shown(text)!r}.")  # fmt: skip
        rec = db.withdraw(args.number, reason=args.reason.strip(), approved_by=args.approved_by)
        print(f"certificate {args.number} withdrawn by {rec.approved_by} (withdrawal record "
              f"{rec.number}, record hash {rec.record_hash})")  # fmt: skip
        return 0
    if args.action == "verify":
        v = db.verify(check_files=not args.no_files)
        what = f"{v.records} record(s)" + ("" if args.no_files else f", {v.files} file(s)")
        if v.ok:
            print(f"records intact: {what} in {where.path}; the chain's last seal is "
                  f"{v.last_seal}")  # fmt: skip
            return 0
        print(f"records NOT intact: {len(v.findings)} problem(s) in {what} of {where.path}:")
        for f in v.findings:
            print(f"  {shown(f.subject)}: {shown(f.problem)}")
        return EXIT_RECORDS_NOT_INTACT
    out = db.export_csv(Path(args.csv), force=args.force)
    print(f"wrote {len(db)} record(s) to {out}")
    return 0


def shown_block(text: str) -> str:
    """A multi-line text made safe line by line (line ends kept)."""
    return "\n".join(shown(line) for line in text.split("\n"))
