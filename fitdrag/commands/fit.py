"""``fitdrag fit``: fit the drag coefficient and launch state to one or many tracks."""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from fitdrag.commands._import_options import read_tracks_from_args
from fitdrag.commands._options import (
    add_track_fit_inputs,
    conditions_from_args,
    quantity,
    specimen_from_args,
)
from fitdrag.errors import InputError, OutputExistsError

NAME = "fit"

EXAMPLE = """\
Examples:
  fitdrag fit throw1.csv --mass 2.7g --diameter 40mm --temperature 21 --pressure 100800 \\
      --humidity 45 --json result.json --plot fit.png
  fitdrag fit throw1.csv throw2.csv throw3.csv --mass 0.0027 --diameter 0.040 \\
      --air-density 1.19          # three throws sharing one Cd
  fitdrag fit left.csv right.csv --mass 24g --diameter 65mm --air-density 1.2 \\
      --time-offset 1.1ms         # one throw seen by two cameras, fitted in 3-D

Track files from `fitdrag track` with --markers, --marker-layout and --lens state their
camera (camera_ header lines): such files are the views of ONE throw, one per camera (the
first is the time reference), fitted in 3-D in each camera's pixels; --time-offset gives each
further view's frame 0 minus the first's (repeat it per view; 'estimate' to leave one to the
fit; default all estimated). Files with and without a camera cannot be mixed.

Exit codes: 0 fitted, 1 a bug (with a traceback), 2 bad arguments or input, 3 the fit did
not converge (the JSON is still written, with "success": false).
"""


def register(sub) -> argparse.ArgumentParser:
    p = sub.add_parser(
        NAME,
        help="fit Cd and the launch state to one or many tracks",
        description="Fit the drag model and each throw's launch state to track CSV files "
        "(several files share one Cd). Prints a summary; --json writes the full result, "
        "--plot the trajectory and residuals. The uncertainty printed here is the fit's "
        "statistical part only; `fitdrag run` adds the input uncertainties.",
        epilog=EXAMPLE,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    add_track_fit_inputs(p)
    f = p.add_argument_group("fit")
    f.add_argument("--robust", action=argparse.BooleanOptionalAction, default=True,
                   help="robust loss and rejection of gross outliers (default on; planar "
                   "tracks only)")  # fmt: skip
    f.add_argument("--noise", choices=("auto", "white", "ar1"), default="auto",
                   help="noise model: auto detects serially correlated residuals (default)")  # fmt: skip
    f.add_argument("--model", default="constant", metavar="NAME",
                   help="drag model: constant (default), sphere-scaled, power-law, ...")  # fmt: skip
    f.add_argument("--lift", action="store_true", help="also fit a constant lift coefficient")
    f.add_argument("--wind", type=quantity("m/s"), default=0.0, metavar="M/S",
                   help="known constant horizontal wind along +x [m/s] (default still air)")  # fmt: skip
    f.add_argument("--coverage-factor", type=float, default=None, metavar="K",
                   help="force the coverage factor k (default 2, Student-t for few points)")  # fmt: skip
    f.add_argument("--time-offset", action="append", type=_offset, default=None, metavar="S",
                   help="track files with a camera: frame 0 of the next view minus that of "
                   "the first [s] (or e.g. 1.1ms, or 'estimate'); once per view after the "
                   "first, in order (default: estimated from the data)")  # fmt: skip
    o = p.add_argument_group("output")
    o.add_argument("--json", metavar="OUT.json", help="write the result as JSON")
    o.add_argument("--plot", metavar="OUT.png",
                   help="write trajectory and residual plots; with a Reynolds-dependent model "
                   "also OUT_cd_vs_re.png (Cd against Re with its band)")  # fmt: skip
    o.add_argument("--force", action="store_true", help="overwrite existing output files")
    return p


def _offset(text: str) -> float | None:
    """--time-offset: a time [s] (with a unit or not), or 'estimate' (None)."""
    if text.strip().lower() == "estimate":
        return None
    return quantity("s")(text)


_offset.__name__ = "time [s] or 'estimate'"


def _cd_plot_path(plot: str) -> Path:
    p = Path(plot)
    return p.with_name(f"{p.stem}_cd_vs_re{p.suffix or '.png'}")


def _check_outputs(args) -> None:
    paths = [("json", args.json), ("plot", args.plot)]
    if args.plot and args.model != "constant":
        paths.append(("plot", str(_cd_plot_path(args.plot))))
    for opt, path in paths:
        if path and Path(path).exists() and not args.force:
            raise OutputExistsError(f"--{opt}: {path} exists; pass --force to overwrite it.")


def _write_atomic(path: Path, write) -> None:
    from fitdrag._files import write_atomic

    write_atomic(path, write, force=True)  # existence was checked before the work began


def format_failure(result, tracks) -> str:
    """What a fit that did not converge prints: the diagnosis and the most likely cause, and
    no Cd value (its numbers are not to be used)."""
    from fitdrag.fit.diagnose import likely_cause

    cause = likely_cause(tracks) or (
        "no usual slip found in the tracks (their curvature shows gravity as expected); check "
        "the specimen's mass and size, and try --model constant or fewer points"
    )
    return (
        f"fit DID NOT CONVERGE ({result.message}); model: {result.model}; no drag coefficient "
        f"is reported.\n  most likely cause: {cause}"
    )


def format_summary(result) -> str:
    """A readable text summary of a fit (for the terminal)."""
    d = result.to_dict()
    dc = d["drag_coefficient"]
    lines = []
    status = "converged" if result.success else f"DID NOT CONVERGE ({result.message})"
    lines.append(f"fit {status}; model: {result.model}; throws: {len(result.throws)}")
    at_re = "" if result.model == "constant" else f" at Re {dc['at_reynolds_number']:.3g}"
    lines.append(
        f"  drag coefficient Cd{at_re} = {dc['value']:.5g}   u = "
        f"{dc['standard_uncertainty']:.2g}   U = {dc['expanded_uncertainty']:.2g} "
        f"(k = {dc['coverage_factor']:.3g}, statistical only)"
    )
    for name, pv in d["drag_model"]["parameters"].items():
        if result.model != "constant":
            lines.append(f"  {name} = {pv['value']:.5g} ± {pv['standard_uncertainty']:.2g}")
    if "lift_coefficient" in d:
        lc = d["lift_coefficient"]
        lines.append(
            f"  lift coefficient CL = {lc['value']:.4g} ± {lc['standard_uncertainty']:.2g}"
        )
    ident = d["identifiability"]
    if not ident["identifiable"]:
        lines.append(f"  WARNING: {ident['message']}")
    pts = d["points"]
    lines.append(f"  points used {pts['used']} of {pts['total']}; rejected: "
                 f"{', '.join(map(str, pts['rejected'])) or 'none'}")  # fmt: skip
    r = d["residuals"]
    noise = r["noise_model"]
    ar = r["ar1_coefficient"]
    noise_txt = "white" if noise == "white" else f"AR(1), phi x {ar['x']:.2f}, y {ar['y']:.2f}"
    lines.append(
        f"  residual RMS {1e3 * r['rms']:.3g} mm; lag-1 autocorrelation {r['lag1_autocorrelation']:+.2f}; "
        f"Durbin-Watson {r['durbin_watson']:.2f}; sign runs {r['sign_runs']} "
        f"(expected {r['sign_runs_expected']:.0f}); noise model {noise_txt}"
    )
    re = d["reynolds_number"]
    lines.append(
        f"  Reynolds number {re['min']:.3g} to {re['max']:.3g} (median {re['median']:.3g})"
    )
    for i, th in enumerate(d["throws"]):
        la = th["launch"]
        lines.append(
            f"  throw {i + 1} ({th['source']}): launch {la['speed']['value']:.4g} ± "
            f"{la['speed']['standard_uncertainty']:.2g} m/s at {la['angle']['value']:.4g} ± "
            f"{la['angle']['standard_uncertainty']:.2g} deg; residual RMS "
            f"{1e3 * th['residual_rms']:.3g} mm"
        )
    ts = d["terminal_speed"]
    if ts["value"] is not None:
        lines.append(f"  terminal speed {ts['value']:.4g} ± {ts['standard_uncertainty']:.2g} m/s")
    return "\n".join(lines)


def format_view_summary(result) -> str:
    """A readable text summary of a 3-D fit of one throw's camera views (for the terminal)."""
    r = result
    status = "converged" if r.success else f"DID NOT CONVERGE ({r.message})"
    lines = [
        f"3-D fit {status}; model: {r.model}; views: {len(r.views)}; noise model "
        f"{'AR(1)' if r.noise_model == 'ar1' else 'white'}",
        f"  drag coefficient Cd = {r.cd:.5g}   u = {r.u_cd:.2g}   U = "
        f"{r.expanded_uncertainty:.2g} (k = {r.coverage_factor:.3g}, statistical only)",
        f"  flight {r.out_of_plane_angle:+.3g}° ± {r.out_of_plane_angle_uncertainty:.2g}° out of "
        f"the board plane (towards the camera +); depth z {r.depth_range[0]:.4g} to "
        f"{r.depth_range[1]:.4g} m",
        f"  Reynolds number {r.reynolds_range[0]:.3g} to {r.reynolds_range[1]:.3g}",
    ]
    if "lift_coefficient" in r.parameter_names:
        lc, u = r.parameter("lift_coefficient")
        lines.append(f"  lift coefficient CL = {lc:.4g} ± {u:.2g}")
    for i, v in enumerate(r.views):
        if i == 0:
            off = "time reference"
        elif v.offset_estimated:
            off = (f"time offset {1e3 * v.time_offset:.4g} ms ± "
                   f"{1e3 * v.time_offset_uncertainty:.2g} ms (estimated)")  # fmt: skip
        else:
            off = f"time offset {1e3 * v.time_offset:.4g} ms (given)"
        diam = "diameters used" if v.diameter_used else "no diameters"
        lines.append(
            f"  view {i + 1} ({v.name}): residual RMS {v.residual_rms:.3g} px; {off}; {diam}; "
            f"{v.distance:.3g} m from the flight"
        )
    return "\n".join(lines)


def _run_views(args, tracks, specimen, conditions) -> int:
    from fitdrag.fit.track_views import fit_track_views, view_fit_dict

    if args.plot:
        raise InputError(
            "--plot: not available for track files with a camera (the 3-D fit); leave it out "
            "and use --json."
        )
    if args.time_offset is not None and len(args.time_offset) != len(tracks) - 1:
        raise InputError(
            f"--time-offset: given {len(args.time_offset)} time(s) for {len(tracks) - 1} "
            f"view(s) after the first; give one per further track file, in order ('estimate' "
            f"for one the fit should find), or leave it out."
        )
    result = fit_track_views(
        tracks, specimen, conditions.air, time_offsets=args.time_offset,
        gravity=conditions.gravity, model=args.model, lift=args.lift,
        wind=(args.wind, 0.0, 0.0), buoyancy=conditions.buoyancy, noise=args.noise,
        coverage_factor=args.coverage_factor,
    )  # fmt: skip
    print(format_view_summary(result))
    if args.json:
        path = Path(args.json)
        text = json.dumps(view_fit_dict(result, tracks), indent=2, allow_nan=False)
        _write_atomic(path, lambda p: p.write_text(text + "\n", encoding="utf-8"))
        print(f"wrote {path}")
    if not result.success:
        print(f"fitdrag fit: the fit failed: {result.message}", file=sys.stderr)
        return 3
    return 0


def run(args) -> int:
    from fitdrag.fit.fitting import fit_tracks
    from fitdrag.geometry.footage_view import track_has_camera

    _check_outputs(args)
    specimen = specimen_from_args(args)
    conditions = conditions_from_args(args, wind=args.wind)
    tracks = read_tracks_from_args(args.tracks, args)
    if any(track_has_camera(t) for t in tracks):
        return _run_views(args, tracks, specimen, conditions)
    if args.time_offset is not None:
        raise InputError(
            "--time-offset: it applies to track files with a camera (the views of one throw); "
            "these files state none; leave it out."
        )
    result = fit_tracks(
        tracks, specimen, conditions.air, gravity=conditions.gravity, model=args.model,
        lift=args.lift, wind=args.wind, buoyancy=conditions.buoyancy, robust=args.robust,
        noise=args.noise, coverage_factor=args.coverage_factor,
    )  # fmt: skip
    if not result.success:
        print(format_failure(result, tracks))
    else:
        print(format_summary(result))
    if args.json:
        path = Path(args.json)
        text = json.dumps(result.to_dict(), indent=2, allow_nan=False)
        _write_atomic(path, lambda p: p.write_text(text + "\n", encoding="utf-8"))
        print(f"wrote {path}")
    if args.plot and result.success:
        from fitdrag.report.plots import plot_fit

        path = Path(args.plot)
        title = (
            f"Cd = {result.cd:.4g} ± {result.expanded_uncertainty:.2g} (k = "
            f"{result.coverage_factor:.3g}, statistical only), model: {result.model}"
        )
        fig = plot_fit(result, title=title)
        _write_atomic(path, lambda p: fig.savefig(p, dpi=120, format="png"))
        print(f"wrote {path}")
        if result.model != "constant":
            from fitdrag.report.cd_plot import plot_cd_vs_re

            cd_path = _cd_plot_path(args.plot)
            fig2 = plot_cd_vs_re(result)
            _write_atomic(cd_path, lambda p: fig2.savefig(p, dpi=120, format="png"))
            print(f"wrote {cd_path}")
    if not result.success:
        print(f"fitdrag fit: the fit failed: {result.message}", file=sys.stderr)
        return 3
    return 0
