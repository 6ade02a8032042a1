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
            "         fitdrag records --records out/records.sqlite export all.csv\n"
            "         fitdrag records --records out/records.sqlite chart REF-40-A -o chart.png\n\n"
            "Exit codes: 0 done, 1 a bug (with a traceback), 2 bad arguments, no such "
            "database or certificate, or an existing output file without --force; 7 (chart) "
            "the latest result is out of control."
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
    ch = sub.add_parser(
        "chart", parents=[common],
        help="control chart of one specimen's Cd over time (a check standard)",
        description="Control chart of one specimen's results on record, oldest first: the "
        "Shewhart tests for special causes (1, 2, 3, 5, 6) and an EWMA chart; the centre line "
        "and sigma from its first results (--baseline) or as stated (--centre, --sigma). "
        "Prints every out-of-control point; exits 7 when the latest one is out of control.",
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


def _num(x, fmt="{:.4g}") -> str:
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "-"
    return fmt.format(x)


def _chart(args) -> int:
    from fitdrag.errors import EXIT_OK, EXIT_OUT_OF_CONTROL
    from fitdrag.run.check_standard import chart_from_records, write_chart

    sc = chart_from_records(args.records, args.specimen, baseline=args.baseline,
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
    from fitdrag.run.records import Records

    if args.action == "chart":
        return _chart(args)
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
