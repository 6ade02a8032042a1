"""``fitdrag demo [DIR]``: the whole job on synthetic data, from footage to certificate."""

from __future__ import annotations

import argparse
import sys

from fitdrag.errors import ConvergenceError, exit_code_for_decision

NAME = "demo"

#: The demo's default directory: fitdrag.run.demo.DEFAULT_DIRECTORY, written out so that
#: building the parser does not load the demo (a test checks that the two agree).
DEFAULT_DIRECTORY = "fitdrag-demo"

EXAMPLE = """\
Example:
  fitdrag demo                    # everything goes to ./fitdrag-demo
  fitdrag demo /tmp/try-fitdrag   # or to a directory of your choice

An invented laboratory checks a 65 mm foam training ball from a production lot against the
stated Cd = 0.50 +- 0.05 (guarded acceptance).  The footage is synthetic: rendered from a
simulated flight with Cd = 0.49 and a fixed seed, with ArUco markers in the plane of flight.
Steps: footage -> markers and calibration -> ball detection -> track CSV -> job file ->
fit -> GUM budget (+ Monte Carlo check) -> decision -> certificate PDF/PNG + JSON -> record.

Running it again reuses the footage and issues a new certificate number that replaces the
previous demo certificate (both stay on record).  If you edited a file in DIR, the run stops
and names it; --force renders and writes everything again.  Nothing is written outside DIR.

Exit codes: 0 certificate issued with PASS, 1 a bug (with a traceback), 2 bad arguments or
an edited file in DIR, 3 the fit did not converge; 4 FAIL, 5 conditional pass, 6 conditional
fail (the decision on the certificate).
"""


def register(sub) -> argparse.ArgumentParser:
    p = sub.add_parser(
        NAME,
        help="run the whole job on synthetic footage (a demonstration)",
        description="Run the full measurement on bundled synthetic data: render footage of "
        "a simulated throw, track the ball, fit Cd, build the uncertainty budget, decide "
        "conformity, and issue a certificate (PDF/PNG) and a record, all inside DIR. "
        "Takes about half a minute.",
        epilog=EXAMPLE,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument(
        "directory", nargs="?", default=DEFAULT_DIRECTORY, metavar="DIR",
        help=f"directory for every file the demo writes (default: ./{DEFAULT_DIRECTORY})",
    )  # fmt: skip
    p.add_argument(
        "--force", action="store_true",
        help="render the footage again and overwrite the demo's files in DIR",
    )  # fmt: skip
    p.add_argument("--quiet", action="store_true", help="no step messages or progress bars")
    _reject_unknown(p)
    return p


def _reject_unknown(parser: argparse.ArgumentParser) -> None:
    """Make this sub-command report unknown options itself ("fitdrag demo: error: ...").

    With no required argument, argparse would hand unknown options to the top-level parser,
    whose message names no command.
    """
    known = parser.parse_known_args

    def parse_known_args(args=None, namespace=None):
        ns, extras = known(args, namespace)
        if extras:
            parser.error(f"unrecognized arguments: {' '.join(extras)}")
        return ns, extras

    parser.parse_known_args = parse_known_args


def run(args) -> int:
    from fitdrag.run.demo import display_path, run_demo

    print(
        f"fitdrag demo: a synthetic demonstration (invented laboratory, simulated ball) in "
        f"{args.directory}/",
        flush=True,
    )
    try:
        res = run_demo(args.directory, force=args.force, progress=not args.quiet)
    except ConvergenceError as exc:
        print(f"fitdrag demo: {exc}; no certificate issued.", file=sys.stderr)
        return ConvergenceError.exit_code
    print()
    print(res.summary)
    issued = f"certificate {res.certificate_number} issued"
    if res.replaces:
        issued += f", replacing {res.replaces} (an earlier demo run)"
    print(issued)
    rows = [
        ("footage", res.footage, "synthetic" + (", reused" if res.footage_reused else "")),
        ("footage truth", res.truth, "exact positions and parameters"),
        ("track", res.track, "found in the footage by fitdrag track"),
        ("track picture", res.preview, "the detected track over one frame"),
        ("job file", res.job, "rerun it with: fitdrag run"),
        ("certificate", res.certificate_pdf, ""),
        ("certificate page 1", res.certificate_png, ""),
        ("result", res.result_json, "everything, as JSON"),
        (
            "records database",
            res.records,
            f"list it: fitdrag records --records {display_path(res.records)} list",
        ),
    ]
    for label, path, note in rows:
        print(f"  {label:<19} {display_path(path)}" + (f"   ({note})" if note else ""))
    diff = res.drag_coefficient - res.true_cd
    inside = abs(diff) <= res.expanded_uncertainty
    print(
        f"check against the truth: the footage was rendered with Cd = {res.true_cd:g}; "
        f"measured minus true = {diff:+.4f}, "
        + ("inside" if inside else "OUTSIDE")
        + f" the expanded uncertainty U = {res.expanded_uncertainty:.4f}."
    )
    print(f"done in {res.elapsed:.0f} s.")
    return exit_code_for_decision(res.decision)
