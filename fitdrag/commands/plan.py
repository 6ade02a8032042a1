"""``fitdrag plan``: predict u(Cd) of a planned test before filming."""

from __future__ import annotations

import argparse
import json
import math
from pathlib import Path

from fitdrag.commands._options import (
    add_air_options,
    add_specimen_options,
    conditions_from_args,
    quantity,
    specimen_from_args,
)
from fitdrag.errors import InputError, OutputExistsError

NAME = "plan"

EXAMPLE = """\
Example (a synthetic 40 mm, 2.7 g ball at 8 m/s, 30°, filmed at 500 frames/s for 200
frames with 0.3 px tracking noise at 0.8 mm per pixel; how to reach u(Cd) = 0.0001?):
  fitdrag plan --mass 2.7g --diameter 40mm --cd 0.47 --speed 8 --angle 30 \\
      --fps 500 --frames 200 --pixel-noise 0.3 --scale 0.0008 --throws 3 \\
      --target 0.0001 --json plan.json

Example (one camera vs two cameras measuring in 3-D, a synthetic 65 mm, 24 g foam ball at
9 m/s, cameras 3 m away with a 900 px focal length; how far out of the board plane may the
flight go with one camera, for U(Cd) = 2 x 0.005?):
  fitdrag plan --mass 24g --diameter 65mm --cd 0.5 --speed 9 --angle 30 \\
      --fps 500 --frames 200 --pixel-noise 0.3 --distance 3m --focal-length 900 \\
      --diameter-noise 0.3 --pair-angle 20deg --target 0.005

Exit codes: 0 planned, 1 a bug (with a traceback), 2 bad arguments or input.
"""


def register(sub) -> argparse.ArgumentParser:
    p = sub.add_parser(
        NAME,
        help="predict the drag-coefficient uncertainty of a planned test",
        description="From the specimen, the expected launch, the camera (frame rate, frames "
        "in view) and the tracking noise, predict the standard uncertainty of Cd that a fit "
        "of N throws can reach (the Cramér-Rao bound from the Fisher information of the "
        "flight model), and how many throws or what frame rate reach a target.",
        epilog=EXAMPLE,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    add_specimen_options(p)
    add_air_options(p)
    g = p.add_argument_group("planned flight")
    g.add_argument("--cd", type=float, required=True, help="expected drag coefficient [-]")
    g.add_argument("--lift-coefficient", type=float, default=0.0, metavar="CL",
                   help="expected lift coefficient [-], positive lifts a ball moving in +x")  # fmt: skip
    g.add_argument("--fit-lift", action="store_true",
                   help="plan for a fit that also fits the lift coefficient")  # fmt: skip
    g.add_argument("--wind", type=quantity("m/s"), default=0.0, metavar="M/S",
                   help="constant horizontal wind along +x [m/s]")  # fmt: skip
    g.add_argument("--speed", type=quantity("m/s"), required=True, metavar="M/S",
                   help="expected launch speed [m/s]")  # fmt: skip
    g.add_argument("--angle", type=float, required=True, metavar="DEG",
                   help="expected launch angle above the horizontal [deg]")  # fmt: skip
    g.add_argument("--x0", type=quantity("m"), default=0.0, metavar="M", help="launch x [m]")
    g.add_argument("--y0", type=quantity("m"), default=0.0, metavar="M", help="launch y [m]")
    c = p.add_argument_group("camera and tracking noise")
    c.add_argument("--fps", type=float, required=True, metavar="HZ", help="frame rate [Hz]")
    c.add_argument("--frames", type=int, required=True, metavar="N",
                   help="frames in view per throw, from the launch on")  # fmt: skip
    n = c.add_mutually_exclusive_group(required=True)
    n.add_argument("--noise", type=quantity("m"), metavar="M",
                   help="position noise per coordinate [m]")  # fmt: skip
    n.add_argument("--pixel-noise", type=float, metavar="PX",
                   help="position noise in pixels (needs --scale)")  # fmt: skip
    c.add_argument("--scale", type=quantity("m"), metavar="M_PER_PX",
                   help="image scale [m per pixel], with --pixel-noise")  # fmt: skip
    v = p.add_argument_group(
        "cameras measuring in 3-D (with --distance: one camera vs two cameras, and the "
        "out-of-plane angle one camera measuring in the plane tolerates)"
    )
    v.add_argument("--distance", type=quantity("m"), metavar="M",
                   help="camera distance to the middle of the flight [m], e.g. 3m")  # fmt: skip
    f = v.add_mutually_exclusive_group()
    f.add_argument("--focal-length", type=float, metavar="PX", help="focal length [px]")
    f.add_argument("--field-of-view", type=quantity("deg"), metavar="DEG",
                   help="horizontal field of view [deg], instead of --focal-length")  # fmt: skip
    v.add_argument("--image-size", default="1280x800", metavar="WxH",
                   help="image width x height [px] (default 1280x800)")  # fmt: skip
    v.add_argument("--camera-angle", type=quantity("deg"), default=0.0, metavar="DEG",
                   help="angle of the single camera's line of sight to the board normal "
                   "[deg] (default 0, square-on)")  # fmt: skip
    v.add_argument("--pair-angle", type=quantity("deg"), default=20.0, metavar="DEG",
                   help="the two cameras look at ±DEG to the board normal [deg] (default 20, "
                   "40 deg apart)")  # fmt: skip
    v.add_argument(
        "--diameter-noise",
        type=float,
        metavar="PX",
        help="noise of the tracked apparent diameter [px] (default: --pixel-noise)",
    )
    v.add_argument("--readout-time", type=quantity("s"), default=0.0, metavar="S",
                   help="rolling-shutter readout time [s], e.g. 1ms (default 0, global "
                   "shutter)")  # fmt: skip
    c.add_argument("--noise-correlation", type=float, default=0.0, metavar="PHI",
                   help="lag-1 correlation of successive frames' position errors "
                   "(AR(1) noise; default 0, white)")  # fmt: skip
    t = p.add_argument_group("plan")
    t.add_argument("--throws", type=int, default=1, metavar="N",
                   help="number of throws sharing Cd (default 1)")  # fmt: skip
    t.add_argument("--target", type=float, metavar="U",
                   help="target standard uncertainty of Cd; the plan says how many throws "
                   "or what frame rate reach it")  # fmt: skip
    o = p.add_argument_group("output")
    o.add_argument("--json", metavar="OUT.json", help="write the plan as JSON")
    o.add_argument("--force", action="store_true", help="overwrite an existing output file")
    return p


def noise_from_args(args) -> float:
    """Position noise [m] from --noise, or --pixel-noise times --scale."""
    if args.noise is not None:
        if args.scale is not None:
            raise InputError("--scale: only used with --pixel-noise; drop it or use --pixel-noise.")
        return args.noise
    if args.scale is None:
        raise InputError(
            "--pixel-noise: needs --scale M_PER_PX (metres per pixel) to give the noise in metres."
        )
    for name, v in (("--pixel-noise", args.pixel_noise), ("--scale", args.scale)):
        if not math.isfinite(v) or v <= 0:
            raise InputError(f"{name}: must be > 0, got {v!r}.")
    return args.pixel_noise * args.scale


_CAMERA_ONLY = ("focal_length", "field_of_view", "diameter_noise")


def _image_size(text: str) -> tuple[int, int]:
    parts = text.lower().replace(" ", "").split("x")
    try:
        w, h = (int(p) for p in parts)
    except ValueError:
        w = h = 0
    if len(parts) != 2 or w < 16 or h < 16:
        raise InputError(
            f"--image-size: expected WIDTHxHEIGHT in whole pixels (at least 16 each), got "
            f"{text!r}; e.g. 1280x800."
        )
    return w, h


def run_cameras(args, out) -> int:
    """The 3-D plan: one camera vs two cameras (``--distance`` given)."""
    from fitdrag.fit.plan_views import focal_length_from_field_of_view, plan_views

    if args.pixel_noise is None:
        raise InputError(
            "--noise: with --distance the noise is in the image; give --pixel-noise PX instead."
        )
    if args.scale is not None:
        raise InputError(
            "--scale: not used with --distance (the scale follows from the distance and the "
            "focal length); drop it."
        )
    if args.focal_length is None and args.field_of_view is None:
        raise InputError(
            "--distance: needs the lens, --focal-length PX or --field-of-view DEG; e.g. "
            "--focal-length 900."
        )
    if args.fit_lift or args.lift_coefficient or args.wind:
        raise InputError(
            "--fit-lift, --lift-coefficient, --wind: the 3-D plan (--distance) covers drag "
            "only; drop them, or plan in the plane without --distance."
        )
    size = _image_size(args.image_size)
    if args.focal_length is not None:
        focal = args.focal_length
    else:
        focal = focal_length_from_field_of_view(args.field_of_view, size[0])
    diameter_noise = args.pixel_noise if args.diameter_noise is None else args.diameter_noise
    plan = plan_views(
        specimen_from_args(args), conditions_from_args(args), speed=args.speed,
        elevation=args.angle, fps=args.fps, frames=args.frames, distance=args.distance,
        focal_length=focal, pixel_noise=args.pixel_noise, diameter_noise=diameter_noise,
        camera_angle=args.camera_angle, pair_angle=args.pair_angle, image_size=size,
        readout_time=args.readout_time, throws=args.throws, drag_params=(args.cd,),
        ar1=args.noise_correlation, target=args.target,
    )  # fmt: skip
    print(plan.message)
    if out is not None:
        from fitdrag._files import write_text_atomic

        text = json.dumps(plan.to_dict(), indent=2, allow_nan=False)
        write_text_atomic(out, text + "\n", force=True)  # existence checked up front
        print(f"wrote {out}")
    return 0


def run(args) -> int:
    from fitdrag.fit.plan import plan_test
    from fitdrag.physics.simulate import Launch

    out = Path(args.json) if args.json else None
    if out is not None and out.exists() and not args.force:
        raise OutputExistsError(f"--json: {out} exists; pass --force to overwrite it.")
    if args.speed < 0:
        raise InputError(f"--speed: must be >= 0 m/s, got {args.speed!r}.")
    if args.cd < 0:
        raise InputError(f"--cd: must be >= 0, got {args.cd!r}.")
    if args.distance is not None:
        return run_cameras(args, out)
    for name in _CAMERA_ONLY:
        if getattr(args, name) is not None:
            flag = "--" + name.replace("_", "-")
            raise InputError(f"{flag}: only used with --distance (the 3-D plan); add --distance M.")
    noise = noise_from_args(args)
    specimen = specimen_from_args(args)
    conditions = conditions_from_args(args, wind=args.wind)
    launch = Launch.from_speed_angle(args.speed, args.angle, args.x0, args.y0)
    plan = plan_test(
        specimen, conditions, launch, fps=args.fps, frames=args.frames, noise=noise,
        throws=args.throws, drag_params=(args.cd,), lift_coefficient=args.lift_coefficient,
        fit_lift=args.fit_lift, ar1=args.noise_correlation, target=args.target,
    )  # fmt: skip
    print(plan.message[0].upper() + plan.message[1:])
    if out is not None:
        text = json.dumps(plan.to_dict(), indent=2, allow_nan=False)
        from fitdrag._files import write_text_atomic

        write_text_atomic(out, text + "\n", force=True)  # existence checked up front
        print(f"wrote {out}")
    return 0
