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
            "         fitdrag records chart REF-40-A -o chart.png\n"
            "         fitdrag records --records out/records.sqlite list\n\n"
            "The database is the laboratory's (FITDRAG_RECORDS, the settings file, or the "
            "user's data folder) unless --records names another.\n"
            "Exit codes: 0 done (verify: all intact; chart: the latest result in control), "
            "1 a bug (with a traceback), 2 bad arguments, no such database or certificate, or "
            "an existing output file without --force, 7 verify found records altered or "
            "deleted or files changed, 8 (chart) the latest result is out of control."
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
    ch = sub.add_parser(
        "chart", parents=[common],
        help="control chart of one specimen's Cd over time (a check standard)",
        description="Control chart of one specimen's results on record, oldest first: the "
        "Shewhart tests for special causes (1, 2, 3, 5, 6) and an EWMA chart; the centre line "
        "and sigma from its first results (--baseline) or as stated (--centre, --sigma). "
        "Prints every out-of-control point; exits 8 when the latest one is out of control.",
    )  # fmt: skip
    ch.add_argument("specimen", metavar="SPECIMEN_ID", help="the specimen's id, e.g. REF-40-A")
    ch.add_argument("-o", "--output", metavar="PNG", default=None, help="write the chart here")
    ch.add_argument("--baseline", type=int, default=None, metavar="N",
                    help="estimate the centre line and sigma from the first N results "
                    "(default: 10, or all when fewer)")  # fmt: skip
    ch.add_argument("--centre", type=float, default=None, help="stated centre line (Cd)")
    ch.add_argument("--sigma", type=float, default=None,
                    help="stated standard deviation of the check standard's results")  # fmt: skip
    ch.add_argument("--lambda", dest="lam", type=float, default=0.2,
                    help="EWMA weight of the newest result (default 0.2)")  # fmt: skip
    ch.add_argument("--force", action="store_true", help="overwrite an existing PNG file")
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


def _chart(args, path) -> int:
    from fitdrag.errors import EXIT_OK, EXIT_OUT_OF_CONTROL
    from fitdrag.run.check_standard import chart_from_records, write_chart

    sc = chart_from_records(path, args.specimen, baseline=args.baseline,
                            centre=args.centre, sigma=args.sigma, lam=args.lam)  # fmt: skip
    ch = sc.chart
    lim = ch.limits
    print(f"check standard {args.specimen}: {len(ch.values)} result(s), oldest first")
    print(f"  centre line {lim.centre:.4g}, sigma {lim.sigma:.2g}: {lim.source}")
    print(f"  EWMA: lambda {ch.lam:g}, limits at L = {ch.L:g}")
    lines = sc.report_lines()
    print(f"{len(lines)} point(s) out of control" + (":" if lines else ""))
    for ln in lines:
        print(ln)
    for ln in sc.legend():
        print(ln)
    if args.output:
        print(f"chart written to {write_chart(sc, args.output, force=args.force)}")
    if ch.latest_out_of_control:
        print(f"the latest result ({sc.numbers[-1]}) is out of control")
        return EXIT_OUT_OF_CONTROL
    return EXIT_OK


def run(args) -> int:
    from fitdrag.run.records import Records, lab_records

    where = lab_records(args.records)
    if args.action == "chart":
        return _chart(args, where.path)
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
