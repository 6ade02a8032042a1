"""Units at the edges: one unit registry and one parser for "number unit" text.

Command-line options and job-file values both go through :func:`parse_quantity`, so
``21degC``, ``"21 degC"``, ``2.7g`` and ``1008 hPa`` mean the same everywhere.  Inside the
package every value is SI; conversion happens only here.  The conversions are pint's.

References
----------
1. BIPM, *The International System of Units (SI)*, 9th ed., 2019 (the SI units and prefixes).
2. pint, the Python units library (unit definitions and conversions).
"""

from __future__ import annotations

import functools
import re

from fitdrag.errors import InputError

__all__ = ["parse_quantity", "unit_of_text", "unit_registry", "unit_symbol", "unit_word"]

_NUM_UNIT_RE = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")

_CELSIUS_NAMES = {"degc", "°c", "celsius", "degree_celsius", "degrees_celsius", "deg_c"}

# what a unit measures, for messages
_UNIT_WORDS = {
    "kg": "mass",
    "m": "length",
    "m**2": "area",
    "m**3": "volume",
    "degC": "temperature",
    "delta_degC": "temperature difference",
    "Pa": "pressure",
    "percent": "relative humidity (%)",
    "kg/m**3": "density",
    "Pa*s": "dynamic viscosity",
    "m/s**2": "acceleration",
    "Hz": "frequency",
    "s": "time",
    "m/s": "speed",
    "deg": "angle",
    "dimensionless": "a pure number",
    "m/px": "image scale",
}

# how a unit is printed
_SYMBOLS = {
    "kg": "kg",
    "m": "m",
    "m**2": "m²",
    "m**3": "m³",
    "degC": "°C",
    "delta_degC": "K",
    "Pa": "Pa",
    "percent": "%",
    "kg/m**3": "kg/m³",
    "Pa*s": "Pa s",
    "m/s**2": "m/s²",
    "Hz": "Hz",
    "s": "s",
    "m/s": "m/s",
    "deg": "°",
    "dimensionless": "",
    "m/px": "m/px",
}


@functools.cache
def unit_registry():
    """The one pint unit registry of the package (created on first use)."""
    import pint

    return pint.UnitRegistry()


def unit_word(unit: str) -> str:
    """What ``unit`` measures, in words (``"kg"`` -> ``"mass"``), for messages."""
    return _UNIT_WORDS.get(unit, unit)


def unit_symbol(unit: str) -> str:
    """How ``unit`` is printed (``"m**2"`` -> ``"m²"``)."""
    return _SYMBOLS.get(unit, unit)


def unit_of_text(text: str) -> str:
    """The unit written after the number in ``text`` ("24.00 g" -> "g"; "" for none or for
    text that is not "number unit")."""
    m = _NUM_UNIT_RE.match(text) if isinstance(text, str) else None
    return m.group(2) if m else ""


def parse_quantity(text: str, unit: str, delta: bool = False) -> float:
    """The value of ``text`` ("number" or "number unit") in ``unit``.

    Parameters
    ----------
    text : str
        A number, optionally followed by a unit: ``"2.7 g"``, ``"21degC"``, ``"40mm"``.  A
        bare number is taken to be in ``unit`` already.
    unit : str
        The SI (or stated) unit to convert to, in pint's spelling (``"kg"``, ``"degC"``).
    delta : bool
        ``text`` is a temperature difference: degrees Celsius convert as kelvin steps.

    Returns
    -------
    float
        The value in ``unit``.

    Raises
    ------
    ValueError
        With a short reason (no number, unknown unit, wrong kind of unit); the caller adds
        which input it was.
    """
    m = _NUM_UNIT_RE.match(text)
    if not m:
        raise InputError('expected a number followed by a unit, e.g. "2.7 g"')
    num, utext = float(m.group(1)), m.group(2)
    if not utext:
        return num
    import pint

    if delta and utext.lower() in _CELSIUS_NAMES:
        utext = "delta_degC"
    try:
        return float(unit_registry().Quantity(num, utext).to(unit).magnitude)
    except pint.errors.UndefinedUnitError:
        raise InputError(f"unknown unit {utext!r}") from None
    except pint.errors.DimensionalityError:
        raise InputError(f"unit {utext!r} is not a unit of {unit_word(unit)}") from None
    except pint.errors.PintError as exc:
        raise InputError(f"cannot convert {text!r} to {unit} ({exc})") from None
