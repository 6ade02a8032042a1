"""``fitdrag compare-models``: which drag model (and whether lift) do the throws support?"""

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

NAME = "compare-models"

EXAMPLE = """\
Examples:
  fitdrag compare-models throw1.csv throw2.csv --mass 2.7g --diameter 40mm \\
      --temperature 21 --pressure 100800 --humidity 45 --json comparison.json
  fitdrag compare-models throw1.csv --mass 0.0027 --diameter 0.040 --air-density 1.19 \\
      --models constant,power-law --lift --plot cd_vs_re.png

Exit codes: 0 compared, 1 a bug (with a traceback), 2 bad arguments or input, 3 no
candidate model converged.
"""


def _models(text: str) -> list[str]:
    names = [s.strip() for s in text.split(",") if s.strip()]
    if not names:
        raise argparse.ArgumentTypeError("give at least one model name, e.g. constant,power-law")
    return names


def register(sub) -> argparse.ArgumentParser:
    p = sub.add_parser(
        NAME,
        help="fit candidate drag models to the same throws and compare them",
        description="Fit each candidate drag model (constant Cd, scaled smooth-sphere curve, "
        "power law in the Reynolds number; optionally each with a lift coefficient) to the "
        "same throws and points, print a comparison table (parameters with uncertainties, "
        "residual RMS, reduced chi-square, AIC, BIC, nested F-tests) and a recommendation.",
        epilog=EXAMPLE,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    add_track_fit_inputs(p)
    c = p.add_argument_group("comparison")
    c.add_argument("--models", type=_models, default=None, metavar="LIST",
                   help="comma-separated drag models to compare (default "
                   "constant,sphere-scaled,power-law; e.g. sphere-scaled:clift-gauvin)")  # fmt: skip
    c.add_argument("--lift", action="store_true",
                   help="also fit every model with a constant lift coefficient")  # fmt: skip
    c.add_argument("--wind", type=quantity("m/s"), default=0.0, metavar="M/S",
                   help="known constant horizontal wind along +x [m/s] (default still air)")  # fmt: skip
    c.add_argument("--robust", action=argparse.BooleanOptionalAction, default=True,
                   help="robust loss and rejection of gross outliers (default on)")  # fmt: skip
    c.add_argument("--noise", choices=("auto", "white", "ar1"), default="auto",
                   help="noise model: auto detects serially correlated residuals (default)")  # fmt: skip
    c.add_argument("--alpha", type=float, default=0.01, metavar="P",
                   help="level of the nested F-tests (default 0.01)")  # fmt: skip
    o = p.add_argument_group("output")
    o.add_argument("--json", metavar="OUT.json", help="write the comparison as JSON")
    o.add_argument("--plot", metavar="OUT.png",
                   help="write the Cd-vs-Re plot of the recommended model")  # fmt: skip
    o.add_argument("--force", action="store_true", help="overwrite existing output files")
    return p


def _write_atomic(path: Path, write) -> None:
    from fitdrag._files import write_atomic

    write_atomic(path, write, force=True)  # existence was checked before the work began


def run(args) -> int:
    from fitdrag.fit.compare import DEFAULT_CANDIDATES, compare_models

    for opt in ("json", "plot"):
        path = getattr(args, opt)
        if path and Path(path).exists() and not args.force:
            raise OutputExistsError(f"--{opt}: {path} exists; pass --force to overwrite it.")
    specimen = specimen_from_args(args)
    conditions = conditions_from_args(args, wind=args.wind)
    tracks = read_tracks_from_args(args.tracks, args)
    comparison = compare_models(
        tracks, specimen, conditions.air,
        models=args.models or DEFAULT_CANDIDATES, lift="both" if args.lift else False,
        gravity=conditions.gravity, wind=args.wind, buoyancy=conditions.buoyancy,
        robust=args.robust, noise=args.noise, alpha=args.alpha,
    )  # fmt: skip
    print(comparison.table())
    print()
    print(comparison.recommendation)
    if args.json:
        path = Path(args.json)
        text = json.dumps(comparison.to_dict(), indent=2, allow_nan=False)
        _write_atomic(path, lambda p: p.write_text(text + "\n", encoding="utf-8"))
        print(f"wrote {path}")
    if comparison.recommended is None:
        print("fitdrag compare-models: no candidate model converged.", file=sys.stderr)
        return 3
    if args.plot:
        from fitdrag.report.cd_plot import plot_cd_vs_re

        best = comparison.candidate(comparison.recommended).fit
        path = Path(args.plot)
        fig = plot_cd_vs_re(best)
        _write_atomic(path, lambda p: fig.savefig(p, dpi=120, format="png"))
        print(f"wrote {path}")
    return 0
