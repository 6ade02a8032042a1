"""Option groups shared by several commands: specimen, air and gravity.

Values are plain SI numbers; a unit (``2.7g``, ``40mm``, ``21degC``, ``"21 degC"``,
``1013hPa``) is accepted and converted by :func:`fitdrag.units.parse_quantity`, the parser
the job files use too.  Conversion happens here, at the edge.  The library is imported only
when a command runs, so building the parser stays fast.
"""

from __future__ import annotations

import argparse
import math
from typing import TYPE_CHECKING

from fitdrag.errors import InputError
from fitdrag.units import parse_quantity, unit_symbol, unit_word

if TYPE_CHECKING:  # pragma: no cover - annotations only
    from fitdrag.physics.air import Air
    from fitdrag.physics.forces import Conditions
    from fitdrag.physics.specimen import Body, Sphere

#: Standard acceleration of free fall [m/s²] for the help text; the value used is
#: fitdrag.physics.air.STANDARD_GRAVITY (a test checks that the two agree).
_STANDARD_GRAVITY_TEXT = "9.80665"

# a valid value of each unit, plain and with a unit, for the error messages
_EXAMPLES = {
    "kg": "0.0027 or 2.7g",
    "m": "0.040 or 40mm",
    "m**2": "0.00126 or 12.6cm**2",
    "m**3": "3.4e-5 or 34cm**3",
    "degC": "21 or 21degC",
    "Pa": "100800 or 1008hPa",
    "kg/m**3": "1.19 or 1.19kg/m**3",
    "Pa*s": "1.81e-5 or 18.1uPa*s",
    "m/s**2": "9.81 or 981cm/s**2",
    "m/s": "8 or 28.8km/h",
    "s": "0.0012 or 1.2ms",
}


def quantity(unit: str):
    """argparse type: a number in ``unit``, or a number with a unit, converted to ``unit``.

    ``unit`` is pint's spelling (``"kg"``, ``"degC"``).  A bad value is an argparse error,
    which names the option; the message adds the value, what went wrong and an example.
    """
    symbol = unit_symbol(unit)
    example = _EXAMPLES.get(unit, "a number")

    def parse(text: str) -> float:
        try:
            return parse_quantity(text, unit)
        except ValueError as exc:
            raise argparse.ArgumentTypeError(
                f"{text!r}: {exc}; give a number in {symbol} or a number with a unit of "
                f"{unit_word(unit)}, e.g. {example}"
            ) from None

    parse.__name__ = f"quantity in {unit}"
    return parse


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
    g.add_argument("--temperature", type=quantity("degC"), metavar="C",
                   help="air temperature [°C] (or e.g. 21degC, 294.15K)")  # fmt: skip
    g.add_argument("--pressure", type=quantity("Pa"), metavar="PA",
                   help="air pressure [Pa] (default 101325)")  # fmt: skip
    g.add_argument("--humidity", type=float, metavar="PCT",
                   help="relative humidity [%%] (default 50)")  # fmt: skip
    g.add_argument("--gravity", type=quantity("m/s**2"), metavar="M/S2",
                   help=f"acceleration of free fall [m/s²] (default {_STANDARD_GRAVITY_TEXT})")  # fmt: skip
    g.add_argument("--latitude", type=float, metavar="DEG",
                   help="latitude for local gravity (WGS84 normal gravity) [deg]")  # fmt: skip
    g.add_argument("--height", type=quantity("m"), default=0.0, metavar="M",
                   help="height above the ellipsoid for local gravity [m]")  # fmt: skip


def specimen_from_args(args) -> Sphere | Body:
    from fitdrag.physics.specimen import Body, Sphere

    if args.diameter is not None:
        if args.area is not None or args.volume is not None:
            raise InputError(
                "specimen: give either --diameter (a sphere) or --area and --volume, not both."
            )
        return Sphere(args.mass, args.diameter, args.added_mass_coefficient)
    if args.area is None or args.volume is None:
        raise InputError(
            "specimen: no size given; pass --diameter M for a sphere, or --area M2 and "
            "--volume M3 for another shape."
        )
    return Body(args.mass, args.area, args.volume, args.length, args.added_mass_coefficient)


def air_from_args(args) -> Air:
    from fitdrag.physics.air import Air

    conditions_given = any(v is not None for v in (args.temperature, args.pressure, args.humidity))
    if args.air_density is not None:
        if conditions_given:
            raise InputError(
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
    from fitdrag.physics.air import STANDARD_GRAVITY, local_gravity

    if args.latitude is not None:
        if args.gravity is not None:
            raise InputError("gravity: give either --gravity or --latitude, not both.")
        return float(local_gravity(args.latitude, args.height))
    g = STANDARD_GRAVITY if args.gravity is None else args.gravity
    if not math.isfinite(g) or g <= 0:
        raise InputError(f"--gravity: must be > 0 m/s², got {g!r}; omit it for 9.80665.")
    return g


def conditions_from_args(args, wind: float = 0.0) -> Conditions:
    from fitdrag.physics.forces import Conditions

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
