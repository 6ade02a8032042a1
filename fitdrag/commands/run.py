"""``fitdrag run JOB.toml``: fit, uncertainty budget, conformity decision, certificate, record.

A thin layer over :mod:`fitdrag.run.pipeline`, whose steps are:

1. :func:`fitdrag.run.job_file.load_job` — read and validate the job file (nothing is written if it
   is wrong);
2. read every throw's track, fit them together (:func:`fitdrag.fit.fitting.fit_tracks`);
3. the GUM uncertainty budget with sensitivities from re-fits
   (:func:`fitdrag.uncertainty.gum.budget_from_model` over :class:`fitdrag.fit.budget_model.DragRefitModel`),
   and optionally the Monte Carlo check (:func:`fitdrag.uncertainty.monte_carlo.monte_carlo`);
4. the conformity decision (:func:`fitdrag.uncertainty.decision.decide`);
5. in one records transaction: allocate the certificate number, render the PDF, PNG and
   JSON to temporary files, store the record, then give the files their final names.
"""

from __future__ import annotations

import argparse
import sys

from fitdrag.errors import ConvergenceError, InputError, exit_code_for_decision

EXAMPLE = """\
Example:
  fitdrag new-job ball.toml        # write a commented job file, then edit it
  fitdrag run ball.toml --draft    # a draft for review: DRAFT-ball-....pdf/.png/.json
  fitdrag release certificates/DRAFT-ball-20260304T101500.json --approved-by "B. Reviewer"
  fitdrag run ball.toml            # or issue at once: the job names [test] approved_by

Writes NUMBER.pdf (the certificate), NUMBER.png (its first page) and NUMBER.json (the full
result) to the job's output directory and adds the record to the laboratory's records
database (FITDRAG_RECORDS, or the settings file, or the user's data folder; run says where).
Issued certificate files are never overwritten.
Exit codes:
  0  certificate (or draft) issued; the decision is PASS, or the job states no [specification]
  1  a bug: an unexpected error, printed with its traceback
  2  bad job file or input (nothing is written)
  3  the fit, or a re-fit of the uncertainty budget, did not converge (nothing is written)
  4  certificate issued; the decision is FAIL
  5  certificate issued; the decision is a conditional pass (guarded acceptance)
  6  certificate issued; the decision is a conditional fail (guarded acceptance)
"""


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "run",
        help="run a job file: fit, uncertainty budget, decision, certificate (or draft) and record",
        description=(
            "Run the measurement described by a job file: fit the drag coefficient to the "
            "throws, build the uncertainty budget, decide conformity with the stated "
            "specification, and issue a numbered certificate (PDF and PNG) with its JSON "
            "result and a record in the records database; or, with --draft, a draft for "
            "review that 'fitdrag release' turns into the certificate."
        ),
        epilog=EXAMPLE,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("job", metavar="JOB.toml", help="job file")
    add_measure_options(p)
    p.add_argument(
        "--draft", action="store_true",
        help="write a draft for review (marked DRAFT, no number, no record); release it with "
        "'fitdrag release'",
    )  # fmt: skip
    add_issue_options(p)
    p.add_argument("--force", action="store_true", help="overwrite an existing draft")
    p.add_argument("--quiet", action="store_true", help="no progress bars")
    return p


def add_measure_options(p) -> None:
    p.add_argument(
        "--monte-carlo", type=int, metavar="N", default=None,
        help="also propagate the input distributions by N Monte Carlo re-fits (JCGM 101); "
        "overrides [uncertainty] monte_carlo",
    )  # fmt: skip
    p.add_argument(
        "--adaptive", action="store_true",
        help="Monte Carlo: stop early once the results are stable (JCGM 101 7.9); N is the cap",
    )  # fmt: skip
    p.add_argument("--seed", type=int, default=None, help="Monte Carlo random seed")
    p.add_argument(
        "--workers", type=int, default=None, metavar="N",
        help="processes for the Monte Carlo re-fits (default: up to 2)",
    )  # fmt: skip


def add_issue_options(p) -> None:
    p.add_argument(
        "--records", metavar="PATH", default=None,
        help="records database to use (default: the laboratory's: FITDRAG_RECORDS, the "
        "settings file, or records.sqlite in the user's data folder)",
    )  # fmt: skip
    p.add_argument(
        "--replaces", metavar="NUMBER", default=None,
        help="this certificate replaces (withdraws) the certificate NUMBER; needs --reason",
    )  # fmt: skip
    p.add_argument(
        "--reason", metavar="TEXT", default=None,
        help="why the certificate named by --replaces is replaced (kept in both records)",
    )  # fmt: skip


# ---------------------------------------------------------------------------------------------
# measurement (no files written)
# ---------------------------------------------------------------------------------------------


def check_replacement(args) -> None:
    """--replaces and --reason go together (checked before any work)."""
    if args.replaces and not (args.reason or "").strip():
        raise InputError(
            f'--replaces {args.replaces}: give the reason with --reason "..." (kept in the '
            f"records with both certificates)."
        )
    if args.reason and not args.replaces:
        raise InputError("--reason: only with --replaces NUMBER (the certificate replaced).")


def measure_job(job, args, *, seed=None):
    """Measure ``job`` with the command line's options; None (after printing why) when the fit
    did not converge."""
    from fitdrag.run.pipeline import measure

    if args.monte_carlo is not None and args.monte_carlo < 0:
        raise InputError(f"--monte-carlo: must be >= 0 trials, got {args.monte_carlo}.")
    progress = (not args.quiet) and sys.stderr.isatty()
    try:
        return measure(
            job, monte_carlo=args.monte_carlo, adaptive=args.adaptive or None,
            seed=args.seed if seed is None else seed, workers=args.workers, progress=progress,
        )  # fmt: skip
    except ConvergenceError as exc:
        print(f"fitdrag {args.command}: {exc}; no certificate issued.", file=sys.stderr)
        return None


def print_issued(rec, where) -> None:
    print(f"certificate {rec.number} issued, approved by {rec.approved_by}"
          + (f", replacing {rec.replaces}" if rec.replaces else ""))  # fmt: skip
    for kind, path in rec.outputs.items():
        print(f"  {kind:<16} {path}")
    print(f"  {'record':<16} {where.path} ({where.source})")
    print(f"  {'record hash':<16} {rec.record_hash}")


def run(args) -> int:
    from fitdrag.run.job_file import load_job
    from fitdrag.run.pipeline import (
        approver,
        check_drawable,
        check_edited,
        issue,
        summary,
        write_draft,
    )

    check_replacement(args)
    if args.draft and (args.replaces or args.records):
        raise InputError("--draft: a draft takes no number and has no record; give --replaces, "
                         "--reason and --records to 'fitdrag release'.")  # fmt: skip
    job = load_job(args.job)
    check_edited(job)
    check_drawable(job, {"--reason": args.reason})
    if not args.draft:
        approver(job)  # a job without approved_by is refused before any work
    seed = args.seed
    n_mc = job.uncertainty.monte_carlo if args.monte_carlo is None else args.monte_carlo
    if args.draft and n_mc and seed is None and job.uncertainty.seed is None:
        import secrets

        seed = secrets.randbelow(2**31)  # kept in the draft: the release draws the same
    meas = measure_job(job, args, seed=seed)
    if meas is None:
        return ConvergenceError.exit_code
    print(summary(meas))
    if args.draft:
        opts = {"monte_carlo": args.monte_carlo, "adaptive": bool(args.adaptive),
                "seed": seed if seed is not None else job.uncertainty.seed}  # fmt: skip
        paths = write_draft(meas, options=opts, force=args.force)
        print("draft written (no number, no record); review it, then release it:")
        for kind, path in paths.items():
            print(f"  {kind:<16} {path}")
        print(f"  fitdrag release {paths['result_json']} --approved-by NAME")
        return exit_code_for_decision(meas.decision)
    rec, where = issue(meas, records_path=args.records, replaces=args.replaces,
                       reason=args.reason)  # fmt: skip
    print_issued(rec, where)
    if job.test.check_standard:
        from fitdrag.run.check_standard import check_standard_warning

        note = check_standard_warning(job, where.path)
        if note:
            print(f"fitdrag run: WARNING: {note}", file=sys.stderr)
    return exit_code_for_decision(None if meas.verdict is None else meas.verdict.decision)
