"""Option groups shared by several commands: specimen, air and gravity.

Values are plain SI numbers; a unit suffix (``2.7g``, ``40mm``, ``20degC``, ``1013hPa``) is
accepted and converted with the pint units library.  Conversion happens here, at the edge.
"""

from __future__ import annotations

import argparse
import functools
import math
import re

from fitdrag.physics.air import STANDARD_GRAVITY, Air, local_gravity
from fitdrag.physics.forces import Conditions
from fitdrag.physics.specimen import Body, Sphere

_NUMBER = re.compile(r"^\s*[-+]?(\d+(\.\d*)?|\.\d+)([eE][-+]?\d+)?\s*$")


@functools.lru_cache(maxsize=1)
def _units():
    import pint

    return pint.UnitRegistry()


def quantity(si_unit: str):
    """argparse type: a number in ``si_unit``, or a number with a unit suffix converted to it."""

    def parse(text: str) -> float:
        if _NUMBER.match(text):
            return float(text)
        ureg = _units()
        try:
            q = ureg.Quantity(text.strip())
            value = q.to(si_unit).magnitude
        except Exception as exc:  # pint raises many types
            raise argparse.ArgumentTypeError(
                f"{text!r} is not a number in {si_unit} nor a quantity convertible to {si_unit} "
                f"({exc.__class__.__name__}); write e.g. 0.0027 or 2.7g"
            ) from None
        return float(value)

    parse.__name__ = f"quantity in {si_unit}"
    return parse


def celsius(text: str) -> float:
    """argparse type: a temperature in °C (a plain number), or with a unit (``293.15K``)."""
    if _NUMBER.match(text):
        return float(text)
    ureg = _units()
    try:
        return float(ureg.Quantity(text.strip()).to("degC").magnitude)
    except Exception:
        raise argparse.ArgumentTypeError(
            f"{text!r} is not a temperature; write it in °C, e.g. 21.5"
        ) from None


def add_specimen_options(parser: argparse.ArgumentParser, required: bool = True) -> None:
    g = parser.add_argument_group("specimen (a sphere from --diameter, or --area and --volume)")
    g.add_argument("--mass", type=quantity("kg"), required=required, metavar="KG",
                   help="specimen mass [kg] (or with unit, e.g. 2.7g)")  # fmt: skip
    g.add_argument("--diameter", type=quantity("m"), metavar="M",
                   help="sphere diameter [m] (or e.g. 40mm)")  # fmt: skip
    g.add_argument("--area", type=quantity("m**2"), metavar="M2",
                   help="frontal area of a non-spherical specimen [m²]")  # fmt: skip
    g.add_argument("--volume", type=quantity("m**3"), metavar="M3",
                   help="volume of a non-spherical specimen [m³]")  # fmt: skip
    g.add_argument("--length", type=quantity("m"), metavar="M",
                   help="Reynolds reference length of a non-spherical specimen [m] "
                   "(default: diameter of the circle of the same area)")  # fmt: skip
    g.add_argument("--added-mass-coefficient", type=float, default=0.5, metavar="CA",
                   help="added mass as a fraction of the displaced air's mass [-] "
                   "(default 0.5, a sphere; 0 neglects it)")  # fmt: skip
    g.add_argument("--no-buoyancy", action="store_true",
                   help="neglect the buoyancy of the displaced air (not advised for light specimens)")  # fmt: skip


def add_air_options(parser: argparse.ArgumentParser) -> None:
    g = parser.add_argument_group(
        "air and gravity (density directly, or from temperature, pressure and humidity)"
    )
    g.add_argument("--air-density", type=quantity("kg/m**3"), metavar="KG/M3",
                   help="air density [kg/m³]")  # fmt: skip
    g.add_argument("--air-viscosity", type=quantity("Pa*s"), metavar="PA_S",
                   help="air dynamic viscosity [Pa s] (default: Sutherland's law at "
                   "--temperature, or at 20 °C)")  # fmt: skip
    g.add_argument("--temperature", type=celsius, metavar="C", help="air temperature [°C]")
    g.add_argument("--pressure", type=quantity("Pa"), metavar="PA",
                   help="air pressure [Pa] (default 101325)")  # fmt: skip
    g.add_argument("--humidity", type=float, metavar="PCT",
                   help="relative humidity [%%] (default 50)")  # fmt: skip
    g.add_argument("--gravity", type=quantity("m/s**2"), metavar="M/S2",
                   help=f"acceleration of free fall [m/s²] (default {STANDARD_GRAVITY})")  # fmt: skip
    g.add_argument("--latitude", type=float, metavar="DEG",
                   help="latitude for local gravity (WGS84 normal gravity) [deg]")  # fmt: skip
    g.add_argument("--height", type=quantity("m"), default=0.0, metavar="M",
                   help="height above the ellipsoid for local gravity [m]")  # fmt: skip


def specimen_from_args(args) -> Sphere | Body:
    if args.diameter is not None:
        if args.area is not None or args.volume is not None:
            raise ValueError(
                "specimen: give either --diameter (a sphere) or --area and --volume, not both."
            )
        return Sphere(args.mass, args.diameter, args.added_mass_coefficient)
    if args.area is None or args.volume is None:
        raise ValueError(
            "specimen: no size given; pass --diameter M for a sphere, or --area M2 and "
            "--volume M3 for another shape."
        )
    return Body(args.mass, args.area, args.volume, args.length, args.added_mass_coefficient)


def air_from_args(args) -> Air:
    conditions_given = any(v is not None for v in (args.temperature, args.pressure, args.humidity))
    if args.air_density is not None:
        if conditions_given:
            raise ValueError(
                "air: give either --air-density or --temperature/--pressure/--humidity, not both."
            )
        if args.air_viscosity is not None:
            return Air(args.air_density, args.air_viscosity)
        return Air(args.air_density)
    air = Air.from_conditions(
        temperature=20.0 if args.temperature is None else args.temperature,
        pressure=101325.0 if args.pressure is None else args.pressure,
        relative_humidity=50.0 if args.humidity is None else args.humidity,
    )
    if args.air_viscosity is not None:
        air = Air(air.density, args.air_viscosity, air.temperature, air.pressure,
                  air.relative_humidity)  # fmt: skip
    return air


def gravity_from_args(args) -> float:
    if args.latitude is not None:
        if args.gravity is not None:
            raise ValueError("gravity: give either --gravity or --latitude, not both.")
        return float(local_gravity(args.latitude, args.height))
    g = STANDARD_GRAVITY if args.gravity is None else args.gravity
    if not math.isfinite(g) or g <= 0:
        raise ValueError(f"--gravity: must be > 0 m/s², got {g!r}; omit it for 9.80665.")
    return g


def conditions_from_args(args, wind: float = 0.0) -> Conditions:
    return Conditions(
        air=air_from_args(args),
        gravity=gravity_from_args(args),
        wind=wind,
        buoyancy=not args.no_buoyancy,
    )


def add_track_fit_inputs(parser: argparse.ArgumentParser) -> None:
    """The inputs of every command that fits tracks: the files, specimen, air and import."""
    from fitdrag.commands._import_options import add_import_options

    parser.add_argument("tracks", nargs="+", metavar="TRACK.csv", help="track files (CSV)")
    add_specimen_options(parser)
    add_air_options(parser)
    add_import_options(parser)
