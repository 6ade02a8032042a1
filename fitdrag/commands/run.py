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
  fitdrag run ball.toml --monte-carlo 10000

Writes NUMBER.pdf (the certificate), NUMBER.png (its first page) and NUMBER.json (the full
result) to the job's output directory and adds the record to its records database.
Exit codes:
  0  certificate issued; the decision is PASS, or the job states no [specification]
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
        help="run a job file: fit, uncertainty budget, decision, certificate and record",
        description=(
            "Run the measurement described by a job file: fit the drag coefficient to the "
            "throws, build the uncertainty budget, decide conformity with the stated "
            "specification, and issue a numbered certificate (PDF and PNG) with its JSON "
            "result and a record in the records database."
        ),
        epilog=EXAMPLE,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("job", metavar="JOB.toml", help="job file")
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
    p.add_argument(
        "--records", metavar="PATH", default=None,
        help="records database to use (default: records.sqlite in the output directory)",
    )  # fmt: skip
    p.add_argument(
        "--replaces", metavar="NUMBER", default=None,
        help="this certificate replaces (withdraws) the certificate NUMBER",
    )  # fmt: skip
    p.add_argument("--force", action="store_true", help="overwrite existing output files")
    p.add_argument("--quiet", action="store_true", help="no progress bars")
    return p


# ---------------------------------------------------------------------------------------------
# measurement (no files written)
# ---------------------------------------------------------------------------------------------


def run(args) -> int:
    from fitdrag.run.job_file import load_job
    from fitdrag.run.pipeline import issue, measure, summary

    if args.monte_carlo is not None and args.monte_carlo < 0:
        raise InputError(f"--monte-carlo: must be >= 0 trials, got {args.monte_carlo}.")
    job = load_job(args.job)
    progress = (not args.quiet) and sys.stderr.isatty()
    try:
        meas = measure(
            job, monte_carlo=args.monte_carlo, adaptive=args.adaptive or None, seed=args.seed,
            workers=args.workers, progress=progress,
        )  # fmt: skip
    except ConvergenceError as exc:
        print(f"fitdrag run: {exc}; no certificate issued.", file=sys.stderr)
        return ConvergenceError.exit_code
    print(summary(meas))
    rec, db_path = issue(meas, records_path=args.records, replaces=args.replaces,
                         force=args.force)  # fmt: skip
    print(f"certificate {rec.number} issued" + (f", replacing {rec.replaces}" if rec.replaces
                                                 else ""))  # fmt: skip
    for kind, path in rec.outputs.items():
        print(f"  {kind:<16} {path}")
    print(f"  {'record':<16} {db_path}")
    if job.test.check_standard:
        from fitdrag.run.check_standard import check_standard_warning

        note = check_standard_warning(job, db_path)
        if note:
            print(f"fitdrag run: WARNING: {note}", file=sys.stderr)
    return exit_code_for_decision(None if meas.verdict is None else meas.verdict.decision)
