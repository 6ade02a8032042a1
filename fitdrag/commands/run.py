"""``fitdrag run JOB.toml``: fit, uncertainty budget, conformity decision, certificate, record.

A thin layer over :mod:`fitdrag.run.pipeline`, whose steps are:

1. :func:`fitdrag.run.jobs.load_job` — read and validate the job file (nothing is written if it
   is wrong);
2. read every throw's track, fit them together (:func:`fitdrag.fit.fitting.fit_tracks`);
3. the GUM uncertainty budget with sensitivities from re-fits
   (:func:`fitdrag.uncertainty.budget.budget_from_model` over :class:`fitdrag.uncertainty.budget.DragRefitModel`),
   and optionally the Monte Carlo check (:func:`fitdrag.uncertainty.budget.monte_carlo`);
4. the conformity decision (:func:`fitdrag.uncertainty.decision.decide`);
5. in one records transaction: allocate the certificate number, render the PDF, PNG and
   JSON to temporary files, store the record, then give the files their final names.
"""

from __future__ import annotations

import argparse
import sys

# the pipeline's pieces, re-exported for callers that import them from here
from fitdrag.run.pipeline import FitFailed, issue, measure  # noqa: F401
from fitdrag.run.pipeline import summary as _summary  # noqa: F401

EXAMPLE = """\
Example:
  fitdrag new-job ball.toml        # write a commented job file, then edit it
  fitdrag run ball.toml --monte-carlo 10000

Writes NUMBER.pdf (the certificate), NUMBER.png (its first page) and NUMBER.json (the full
result) to the job's output directory and adds the record to its records database.
Exit codes: 0 issued, 2 bad job file or input, 3 the fit (or a re-fit) did not converge.
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

    job = load_job(args.job)
    progress = (not args.quiet) and sys.stderr.isatty()
    try:
        meas = measure(
            job, monte_carlo=args.monte_carlo, adaptive=args.adaptive or None, seed=args.seed,
            workers=args.workers, progress=progress,
        )  # fmt: skip
    except FitFailed as exc:
        print(f"fitdrag run: {exc}; no certificate issued.", file=sys.stderr)
        return 3
    print(_summary(meas))
    rec, db_path = issue(meas, records_path=args.records, replaces=args.replaces,
                         force=args.force)  # fmt: skip
    print(f"certificate {rec.number} issued" + (f", replacing {rec.replaces}" if rec.replaces
                                                 else ""))  # fmt: skip
    for kind, path in rec.outputs.items():
        print(f"  {kind:<16} {path}")
    print(f"  {'record':<16} {db_path}")
    return 0
