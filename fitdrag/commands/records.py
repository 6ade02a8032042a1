"""``fitdrag records``: list, show and export the certificates on record."""

from __future__ import annotations

import argparse
import json
import math
from pathlib import Path

#: The default records database: fitdrag.run.records.DEFAULT_FILENAME, written out so that
#: building the parser does not load the records module (a test checks that the two agree).
DEFAULT_FILENAME = "records.sqlite"


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "records",
        help="list, show or export issued certificates from a records database",
        description=(
            "Read the records database that 'fitdrag run' keeps: every certificate issued, "
            "with its job file, input hashes, result and output files.  Records are never "
            "changed; a corrected certificate is a new record that names the one it replaces."
        ),
        epilog=(
            "Example: fitdrag records --records out/records.sqlite list\n"
            "         fitdrag records --records out/records.sqlite show FD-2026-000001\n"
            "         fitdrag records --records out/records.sqlite export all.csv\n\n"
            "Exit codes: 0 done, 1 a bug (with a traceback), 2 bad arguments, no such "
            "database or certificate, or an existing CSV without --force."
        ),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument(
        "--records",
        metavar="PATH",
        default=DEFAULT_FILENAME,
        help=f"records database file (default: ./{DEFAULT_FILENAME})",
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
    return p


def _num(x, fmt="{:.4g}") -> str:
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "-"
    return fmt.format(x)


def run(args) -> int:
    from fitdrag.run.records import Records

    db = Records(Path(args.records), create=False)
    if args.action == "list":
        recs = db.list()
        if not recs:
            print(f"no certificates on record in {args.records}")
            return 0
        head = f"{'number':<16} {'issued':<25} {'specimen':<16} {'Cd':>8} {'U':>8}  decision"
        print(head)
        for r in recs:
            note = f" (replaces {r.replaces})" if r.replaces else ""
            note += f" [replaced by {r.replaced_by}]" if r.replaced_by else ""
            print(
                f"{r.number:<16} {r.issued_at:<25} {(r.specimen_id or '-'):<16} "
                f"{_num(r.drag_coefficient):>8} {_num(r.expanded_uncertainty):>8}  "
                f"{r.decision or '-'}{note}"
            )
        return 0
    if args.action == "show":
        r = db.get(args.number)
        if args.json:
            print(json.dumps(r.result, indent=2, sort_keys=True))
            return 0
        print(f"certificate      {r.number}")
        print(f"issued           {r.issued_at}")
        if r.replaces:
            print(f"replaces         {r.replaces}")
        if r.replaced_by:
            print(f"replaced by      {r.replaced_by}")
        print(f"customer         {r.customer or '-'}")
        print(f"specimen         {r.specimen_id or '-'}")
        print(f"drag coefficient {_num(r.drag_coefficient, '{:.6g}')}")
        print(
            f"expanded unc. U  {_num(r.expanded_uncertainty, '{:.2g}')} "
            f"(k = {_num(r.coverage_factor, '{:.2f}')})"
        )
        print(f"decision         {r.decision or '-'}")
        print(f"software         {r.software_version or '-'}")
        print(f"job file         {r.job_path or '-'}")
        print("input files (SHA-256):")
        for path, digest in sorted(r.input_hashes.items()):
            print(f"  {digest}  {path}")
        print("outputs:")
        for kind, path in sorted(r.outputs.items()):
            print(f"  {kind:<12} {path}")
        if args.job:
            print("job file text:")
            print(r.job_text or "")
        return 0
    out = db.export_csv(Path(args.csv), force=args.force)
    print(f"wrote {len(db)} record(s) to {out}")
    return 0
