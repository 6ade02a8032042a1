"""``fitdrag simulate``: a synthetic track from a specimen and a launch."""

from __future__ import annotations

import argparse
import math

from fitdrag.commands._options import (
    add_air_options,
    add_specimen_options,
    conditions_from_args,
    quantity,
    specimen_from_args,
)
from fitdrag.errors import InputError

NAME = "simulate"

EXAMPLE = """\
Example (a synthetic 40 mm, 2.7 g ball thrown at 8 m/s, 30°, filmed at 500 frames/s):
  fitdrag simulate --mass 2.7g --diameter 40mm --cd 0.47 --speed 8 --angle 30 \\
      --fps 500 --frames 200 --noise 0.0005 --seed 1 -o synthetic_track.csv

Exit codes: 0 track written, 1 a bug (with a traceback), 2 bad arguments or input.
"""


def register(sub) -> argparse.ArgumentParser:
    p = sub.add_parser(
        NAME,
        help="make a synthetic track from a specimen and a launch",
        description="Integrate the equation of motion (gravity, buoyancy, added mass, "
        "quadratic drag, optional lift and wind) and write the sampled positions as a "
        "track CSV (columns t,x,y in SI units, world frame, y up, t from 0). The output is "
        "synthetic: use it for planning and demos, never as a measurement.",
        epilog=EXAMPLE,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    add_specimen_options(p)
    add_air_options(p)
    g = p.add_argument_group("flight")
    g.add_argument("--cd", type=float, required=True, help="drag coefficient [-]")
    g.add_argument("--lift-coefficient", type=float, default=0.0, metavar="CL",
                   help="lift coefficient [-], positive lifts a ball moving in +x (backspin)")  # fmt: skip
    g.add_argument("--wind", type=quantity("m/s"), default=0.0, metavar="M/S",
                   help="constant horizontal wind along +x [m/s]")  # fmt: skip
    g.add_argument("--speed", type=quantity("m/s"), required=True, metavar="M/S",
                   help="launch speed [m/s]")  # fmt: skip
    g.add_argument("--angle", type=float, required=True, metavar="DEG",
                   help="launch angle above the horizontal [deg]")  # fmt: skip
    g.add_argument("--x0", type=quantity("m"), default=0.0, metavar="M",
                   help="launch x [m]")  # fmt: skip
    g.add_argument("--y0", type=quantity("m"), default=0.0, metavar="M",
                   help="launch y [m]")  # fmt: skip
    g.add_argument("--fps", type=float, required=True, metavar="HZ",
                   help="frame rate of the samples [Hz]")  # fmt: skip
    g.add_argument("--frames", type=int, required=True, metavar="N",
                   help="number of samples")  # fmt: skip
    g.add_argument("--noise", type=quantity("m"), default=0.0, metavar="M",
                   help="standard deviation of white Gaussian position noise added to x and y [m]")  # fmt: skip
    g.add_argument("--seed", type=int, default=None, metavar="S",
                   help="random seed for the noise (default: fresh each run)")  # fmt: skip
    o = p.add_argument_group("output")
    o.add_argument("-o", "--output", metavar="CSV",
                   help="write the track here (default: print it to stdout)")  # fmt: skip
    o.add_argument("--force", action="store_true", help="overwrite an existing output file")
    return p


def run(args) -> int:
    import numpy as np

    from fitdrag.physics.simulate import Launch, simulate
    from fitdrag.tracks.csv_file import write_track
    from fitdrag.tracks.track import MIN_POINTS, Track

    if args.fps <= 0 or not math.isfinite(args.fps):
        raise InputError(f"--fps: must be > 0 Hz, got {args.fps!r}; give the frame rate.")
    if args.frames < MIN_POINTS:
        raise InputError(
            f"--frames: need at least {MIN_POINTS} samples (the fewest a track may have), got "
            f"{args.frames}."
        )
    if args.noise < 0:
        raise InputError(f"--noise: must be >= 0 m, got {args.noise!r}.")
    if args.speed < 0:
        raise InputError(f"--speed: must be >= 0 m/s, got {args.speed!r}.")
    for opt, value in (("--cd", args.cd), ("--angle", args.angle), ("--lift-coefficient",
                       args.lift_coefficient)):  # fmt: skip
        if not math.isfinite(value):
            raise InputError(f"{opt}: must be a finite number, got {value!r}.")
    if args.cd < 0:
        raise InputError(f"--cd: must be >= 0, got {args.cd!r}.")
    specimen = specimen_from_args(args)
    conditions = conditions_from_args(args, wind=args.wind)
    t = np.arange(args.frames) / args.fps
    launch = Launch.from_speed_angle(args.speed, args.angle, args.x0, args.y0)
    flight = simulate(t, launch, specimen, conditions, drag_params=args.cd,
                      lift_coefficient=args.lift_coefficient)  # fmt: skip
    if not flight.success:
        raise InputError(f"simulation failed: {flight.message}; check --cd, --speed and --mass.")
    x, y = flight.x, flight.y
    if args.noise > 0:
        rng = np.random.default_rng(args.seed)
        x = x + rng.normal(0.0, args.noise, x.shape)
        y = y + rng.normal(0.0, args.noise, y.shape)
    meta = {
        "synthetic": "yes",
        "true_cd": args.cd,
        "true_speed": args.speed,
        "true_angle": args.angle,
        "noise": args.noise,
        "seed": "none" if args.seed is None else args.seed,
        "air_density": conditions.air.density,
        "air_viscosity": conditions.air.viscosity,
        "gravity": conditions.gravity,
    }
    track = Track(t, x, y, meta=meta)
    if args.output:
        path = write_track(track, args.output, force=args.force)
        print(f"wrote {len(t)} samples to {path} (synthetic; Cd = {args.cd}, "
              f"air density {conditions.air.density:.4f} kg/m³)")  # fmt: skip
    else:
        print("t,x,y")
        for row in zip(t, x, y):
            print(",".join(repr(float(v)) for v in row))
    return 0
