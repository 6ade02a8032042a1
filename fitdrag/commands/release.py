"""``fitdrag release DRAFT.json --approved-by NAME``: a reviewed draft becomes the certificate.

Re-checks the SHA-256 of the draft's job file and input files, measures again from them the
way the draft was measured, refuses if anything differs from what the reviewer saw, then
takes the number and writes the final files and the record with the reviewer and the time.
"""

from __future__ import annotations

import argparse

from fitdrag.commands.run import (
    add_issue_options,
    check_replacement,
    measure_job,
    print_issued,
)
from fitdrag.errors import ConvergenceError, InputError, exit_code_for_decision


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "release",
        help="release a reviewed draft as a numbered certificate with its record",
        description=(
            "Release a draft written by 'fitdrag run JOB --draft' after review: its input "
            "files are checked against the draft's SHA-256 digests, the measurement is made "
            "again the same way and must give the draft's result, then the certificate takes "
            "its number and is written with its record, naming the reviewer and the time."
        ),
        epilog=(
            "Example: fitdrag release certificates/DRAFT-ball-20260304T101500.json "
            '--approved-by "B. Reviewer"\n\n'
            "Exit codes: as 'fitdrag run' (0 issued: PASS or no decision, 2 bad input or the "
            "draft's inputs changed, 3 no convergence, 4-6 issued with FAIL or a conditional "
            "decision)."
        ),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("draft", metavar="DRAFT.json", help="the draft's JSON file")
    p.add_argument("--approved-by", metavar="NAME", required=True,
                   help="the reviewer who authorises the release")  # fmt: skip
    add_issue_options(p)
    p.add_argument("--workers", type=int, default=None, metavar="N",
                   help="processes for the Monte Carlo re-fits (default: up to 2)")  # fmt: skip
    p.add_argument("--quiet", action="store_true", help="no progress bars")
    return p


def run(args) -> int:
    from fitdrag.run.job_file import load_job
    from fitdrag.run.pipeline import check_release, issue, read_draft

    check_replacement(args)
    name = (args.approved_by or "").strip()
    if not name:
        raise InputError("--approved-by: give the reviewer's name.")
    draft = read_draft(args.draft)
    job = load_job(draft.job_path)
    opts = draft.options
    args.monte_carlo = opts.get("monte_carlo")
    args.adaptive = bool(opts.get("adaptive"))
    args.seed = opts.get("seed")
    meas = measure_job(job, args)
    if meas is None:
        return ConvergenceError.exit_code
    check_release(draft, meas)
    rec, where = issue(meas, records_path=args.records, replaces=args.replaces,
                       reason=args.reason, approved_by=name,
                       draft_sha256=draft.sha256)  # fmt: skip
    print(f"draft {draft.path.name} released")
    print_issued(rec, where)
    return exit_code_for_decision(meas.decision)
