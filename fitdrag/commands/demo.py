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
stated Cd = 0.50 +- 0.05 (guarded acceptance).  The footage is synthetic: a simulated flight
with Cd = 0.49, 0.8 degrees out of the marker board's plane, filmed by two cameras 40 degrees
apart with a rolling shutter and an unknown time offset, rendered with a fixed seed.
Steps: footage -> per camera: markers, camera pose and ball detection -> track CSVs -> job
file -> 3-D fit to both cameras -> GUM budget (+ Monte Carlo check) -> decision ->
certificate PDF/PNG + JSON -> record.  For comparison it also fits one camera's track in
the board's plane, as a planar measurement would.

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
        description="Run the full measurement on bundled synthetic data: render two "
        "cameras' footage of a simulated throw, track the ball and solve each camera's pose, "
        "fit Cd in 3-D, build the uncertainty budget, decide conformity, and issue a "
        "certificate (PDF/PNG) and a record, all inside DIR. Takes about half a minute.",
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
    reused = ", reused" if res.footage_reused else ""
    rows = [
        *((f"footage, {cam}", path, "synthetic" + reused)
          for cam, path in zip(res.camera_names, res.footage)),
        ("lens files", ", ".join(display_path(p) for p in res.lenses), "synthetic"),
        ("marker layout", res.layout, "synthetic board"),
        ("footage truth", res.truth, "the flight, the cameras, each file's SHA-256"),
        *((f"track, {cam}", path, "fitdrag track --lens: the camera in its header")
          for cam, path in zip(res.camera_names, res.tracks)),
        ("track pictures", ", ".join(display_path(p) for p in res.previews), ""),
        ("job file", res.job, "rerun it with: fitdrag run"),
        ("certificate", res.certificate_pdf, ""),
        ("certificate page 1", res.certificate_png, ""),
        ("result", res.result_json, "everything, as JSON"),
        (
            "records database",
            res.records,
            f"list it: fitdrag records --records {display_path(res.records)} list",
        ),
    ]  # fmt: skip
    for label, path, note in rows:
        shown = path if isinstance(path, str) else display_path(path)
        print(f"  {label:<19} {shown}" + (f"   ({note})" if note else ""))
    diff = res.drag_coefficient - res.true_cd
    inside = abs(diff) <= res.expanded_uncertainty
    print(
        f"check against the truth: the footage was rendered with Cd = {res.true_cd:g}; "
        f"measured minus true = {diff:+.4f}, "
        + ("inside" if inside else "OUTSIDE")
        + f" the expanded uncertainty U = {res.expanded_uncertainty:.4f}."
    )
    print(
        f"  flight {res.true_out_of_plane:g}° out of the board's plane: measured "
        f"{res.out_of_plane_angle:.3f}° (u {res.out_of_plane_angle_uncertainty:.1g}°); "
        f"{res.camera_names[1]} camera {1e3 * res.true_time_offset:g} ms late: estimated "
        f"{1e3 * res.time_offset:.3f} ms (u {1e3 * res.time_offset_uncertainty:.1g} ms)."
    )
    planar = res.planar_drag_coefficient
    head = f"the same flight measured in the board's plane ({res.camera_names[0]} camera's track alone)"
    if res.planar_refusal:
        print(f"{head}: refused, {res.planar_refusal.split(': ')[0]};")
        head = "  forced to white noise"
    if planar == planar:  # not nan
        off = 100 * (planar / res.true_cd - 1.0)
        print(
            f"{head}: Cd = {planar:.4f} ± {res.planar_expanded_uncertainty:.4f} (statistical U), "
            f"{abs(off):.0f} % {'below' if off < 0 else 'above'} the truth."
        )
    print(f"done in {res.elapsed:.0f} s.")
    return exit_code_for_decision(res.decision)
