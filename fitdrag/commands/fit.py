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
from fitdrag.errors import OutputExistsError

NAME = "fit"

EXAMPLE = """\
Examples:
  fitdrag fit throw1.csv --mass 2.7g --diameter 40mm --temperature 21 --pressure 100800 \\
      --humidity 45 --json result.json --plot fit.png
  fitdrag fit throw1.csv throw2.csv throw3.csv --mass 0.0027 --diameter 0.040 \\
      --air-density 1.19          # three throws sharing one Cd

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
                   help="robust loss and rejection of gross outliers (default on)")  # fmt: skip
    f.add_argument("--noise", choices=("auto", "white", "ar1"), default="auto",
                   help="noise model: auto detects serially correlated residuals (default)")  # fmt: skip
    f.add_argument("--model", default="constant", metavar="NAME",
                   help="drag model: constant (default), sphere-scaled, power-law, ...")  # fmt: skip
    f.add_argument("--lift", action="store_true", help="also fit a constant lift coefficient")
    f.add_argument("--wind", type=quantity("m/s"), default=0.0, metavar="M/S",
                   help="known constant horizontal wind along +x [m/s] (default still air)")  # fmt: skip
    f.add_argument("--coverage-factor", type=float, default=None, metavar="K",
                   help="force the coverage factor k (default 2, Student-t for few points)")  # fmt: skip
    o = p.add_argument_group("output")
    o.add_argument("--json", metavar="OUT.json", help="write the result as JSON")
    o.add_argument("--plot", metavar="OUT.png",
                   help="write trajectory and residual plots; with a Reynolds-dependent model "
                   "also OUT_cd_vs_re.png (Cd against Re with its band)")  # fmt: skip
    o.add_argument("--force", action="store_true", help="overwrite existing output files")
    return p


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


def run(args) -> int:
    from fitdrag.fit.fitting import fit_tracks

    _check_outputs(args)
    specimen = specimen_from_args(args)
    conditions = conditions_from_args(args, wind=args.wind)
    tracks = read_tracks_from_args(args.tracks, args)
    result = fit_tracks(
        tracks, specimen, conditions.air, gravity=conditions.gravity, model=args.model,
        lift=args.lift, wind=args.wind, buoyancy=conditions.buoyancy, robust=args.robust,
        noise=args.noise, coverage_factor=args.coverage_factor,
    )  # fmt: skip
    print(format_summary(result))
    if args.json:
        path = Path(args.json)
        text = json.dumps(result.to_dict(), indent=2, allow_nan=False)
        _write_atomic(path, lambda p: p.write_text(text + "\n", encoding="utf-8"))
        print(f"wrote {path}")
    if args.plot:
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
