"""``fitdrag lot LOT.toml``: every specimen of a lot, the lot's statistics, decision, report
and record.

A thin layer over :mod:`fitdrag.run.lot`: load the lot file
(:func:`fitdrag.run.lot_file.load_lot`), measure the specimens as tasks on Dask
(:func:`fitdrag.run.lot.measure_lot`: local processes by default, a running cluster with
``--scheduler``), print each specimen and the lot, issue the lot report and its record
(:func:`fitdrag.run.lot.issue_lot`).
"""

from __future__ import annotations

import argparse
import sys

from fitdrag.errors import EXIT_BAD_INPUT, exit_code_for_decision

EXAMPLE = """\
Example:
  fitdrag lot sample_tracks/training_ball_lot.toml
  fitdrag lot lot.toml --workers 2                        # 2 local processes
  fitdrag lot lot.toml --scheduler tcp://10.0.0.5:8786    # the lab's Dask cluster

Tracking each footage file and fitting each specimen are tasks.  Without --scheduler they run
on a cluster of local processes started for the run (--workers 0: in this process, without
Dask).  With --scheduler they run on a dask.distributed cluster that is already running (its
scheduler prints its address); its workers need fitdrag installed and the lot's files at the
same paths.  Writes NUMBER.pdf (the lot report), NUMBER.png (its first page) and NUMBER.json
to the base job's output directory and adds one record to its records database.
Exit codes:
  0  lot report issued; the lot decision is PASS, or no [specification] is stated
  1  a bug: an unexpected error, printed with its traceback
  2  bad lot file, base job or input, or a specimen failed on bad input (no report)
  3  a specimen's fit did not converge (no report; the others are printed)
  4  lot report issued; the lot decision is FAIL
  5  lot report issued; conditional pass (guarded acceptance)
  6  lot report issued; conditional fail (guarded acceptance)
"""


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "lot",
        help="measure every specimen of a lot file: lot statistics, decision, report, record",
        description=(
            "Measure the specimens of a lot (a lot file: [lot] with a base job, one "
            "[[specimens]] table per specimen), then the lot's mean, the spread between "
            "specimens, a statistical tolerance interval, the fraction outside the "
            "specification and the lot decision; issue a lot report (PDF, PNG, JSON) and one "
            "record."
        ),
        epilog=EXAMPLE,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("lot", metavar="LOT.toml", help="lot file")
    p.add_argument(
        "--scheduler", metavar="ADDRESS", default=None,
        help="address of a running dask.distributed scheduler, e.g. tcp://10.0.0.5:8786 "
        "(default: local processes)",
    )  # fmt: skip
    p.add_argument(
        "--workers", type=int, default=None, metavar="N",
        help="local processes (default: the CPUs available); 0 runs every task in this process",
    )  # fmt: skip
    p.add_argument(
        "--records", metavar="PATH", default=None,
        help="records database to use (default: the base job's)",
    )  # fmt: skip
    p.add_argument("--force", action="store_true", help="overwrite existing output files")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    return p


def run(args) -> int:
    from fitdrag.errors import InputError
    from fitdrag.run.lot import issue_lot, lot_summary, measure_lot
    from fitdrag.run.lot_file import load_lot

    if args.workers is not None and args.workers < 0:
        raise InputError(f"--workers: must be >= 0, got {args.workers}; 0 runs in this process.")
    if args.scheduler is not None and args.workers is not None:
        raise InputError(
            "--workers: the cluster at --scheduler has its own workers; give one of the two."
        )
    lot = load_lot(args.lot)
    progress = (not args.quiet) and sys.stderr.isatty()
    m = measure_lot(lot, scheduler=args.scheduler, workers=args.workers, progress=progress)
    print(lot_summary(m))
    if m.failures:
        for f in m.failures:
            print(f"fitdrag lot: {f.task}: {f.message}", file=sys.stderr)
        print(f"fitdrag lot: {len(m.failures)} of {len(lot.specimens)} specimen(s) failed; "
              f"no lot report issued.", file=sys.stderr)  # fmt: skip
        return max(f.exit_code for f in m.failures) if m.failures else EXIT_BAD_INPUT
    rec, db_path = issue_lot(m, records_path=args.records, force=args.force)
    print(f"lot report {rec.number} issued")
    for kind, path in rec.outputs.items():
        print(f"  {kind:<16} {path}")
    print(f"  {'record':<16} {db_path}")
    if lot.first_job.test.check_standard:
        from fitdrag.run.check_standard import check_standard_warning

        note = check_standard_warning(lot.first_job, db_path)
        if note:
            print(f"fitdrag lot: WARNING: {note}", file=sys.stderr)
    return exit_code_for_decision(m.decision)
