"""The keys a job file may hold, and the checking of one value.

:data:`SECTIONS` lists every section's keys with their kind (text, date, number with a unit,
standard uncertainty, path, ...), unit, plausible range and a hint for the fix;
:func:`parse_table` checks one table of the TOML file against it (converting strings with a
unit to SI with :func:`fitdrag.units.parse_quantity`), and :class:`Where` names the place of
an error: ``job.toml, line 12: [specimen] mass: ...`` (tomllib gives no line numbers for a
valid file, so :func:`key_lines` finds them).  Every error is a ``ValueError`` naming the
file, the line, the key, the value and the fix.  The sections are assembled into a
:class:`fitdrag.run.job.Job` by :func:`fitdrag.run.job_file.load_job`.
"""

from __future__ import annotations

import datetime as _dt
import math
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from fitdrag.errors import InputError
from fitdrag.run.job import Measured
from fitdrag.uncertainty.decision import RULES
from fitdrag.units import parse_quantity, unit_of_text, unit_symbol, unit_word

CSV_OPTIONS = (
    "t_col",
    "x_col",
    "y_col",
    "frame_col",
    "sigma_col",
    "units",
    "scale",
    "origin",
    "y_down",
    "delimiter",
    "comment",
)

#: Options of a footage throw, passed to :func:`fitdrag.video.tracking.track_footage` (the
#: frame rate is [camera] fps).  ``scale`` and ``origin`` serve both kinds of throw.
FOOTAGE_OPTIONS = (
    "start",
    "stop",
    "scale",
    "origin",
    "rotation",
    "reference",
    "markers",
    "marker_dictionary",
    "marker_layout",
    "marker_frame",
    "lens",
    "scale_uncertainty",
)

#: The calibrations of a footage throw: exactly one is required.
FOOTAGE_CALIBRATIONS = ("scale", "reference", "markers")


# ---------------------------------------------------------------------------------------------
# line numbers (tomllib gives none for valid files)
# ---------------------------------------------------------------------------------------------

_HEADER_RE = re.compile(r"^\s*(\[\[?)\s*([A-Za-z0-9_.\-\"' ]+?)\s*\]\]?\s*(#.*)?$")
_KEY_RE = re.compile(r"^\s*(\"[^\"]*\"|'[^']*'|[A-Za-z0-9_\-]+(?:\s*\.\s*[A-Za-z0-9_\-]+)*)\s*=")


def key_lines(text: str) -> tuple[dict[tuple, int], dict[tuple, int]]:
    """Map (section, index, key) -> line and (section, index) -> header line (1-based)."""
    keys: dict[tuple, int] = {}
    headers: dict[tuple, int] = {}
    counts: dict[str, int] = {}
    section, index = "", None
    in_multiline = None
    for n, line in enumerate(text.splitlines(), start=1):
        if in_multiline:
            if line.count(in_multiline) % 2 == 1:
                in_multiline = None
            continue
        m = _HEADER_RE.match(line)
        if m and not _KEY_RE.match(line):
            name = m.group(2).strip().strip("\"'")
            if m.group(1) == "[[":
                index = counts.get(name, 0)
                counts[name] = index + 1
            else:
                index = None
            section = name
            headers.setdefault((section, index), n)
            continue
        k = _KEY_RE.match(line)
        if k:
            key = k.group(1).strip().strip("\"'")
            keys.setdefault((section, index, key), n)
            rest = line[k.end() :]
            for q in ('"""', "'''"):
                if rest.count(q) % 2 == 1:
                    in_multiline = q
    return keys, headers


class Where:
    """Formats error locations: ``job.toml, line 12: [specimen] mass: ...``."""

    def __init__(self, path: Path, text: str):
        self.path = path
        self.keys, self.headers = key_lines(text)

    def section_name(self, section: str, index: int | None) -> str:
        return f"[[{section}]] #{index + 1}" if index is not None else f"[{section}]"

    def key(self, section: str, index: int | None, key: str) -> str:
        n = self.keys.get((section, index, key))
        loc = f"{self.path.name}, line {n}" if n else self.path.name
        return f"{loc}: {self.section_name(section, index)} {key}"

    def section(self, section: str, index: int | None = None) -> str:
        n = self.headers.get((section, index))
        loc = f"{self.path.name}, line {n}" if n else self.path.name
        return f"{loc}: {self.section_name(section, index)}"


# ---------------------------------------------------------------------------------------------
# key tables
# ---------------------------------------------------------------------------------------------


#: Characters refused in text values: C0 and C1 control characters (except line feed and
#: tab), DEL, and the bidirectional marks, embeddings, overrides and isolates of Unicode
#: (UAX #9: U+061C, U+200E, U+200F, U+202A to U+202E, U+2066 to U+2069).
HIDDEN_TEXT = re.compile(
    "[\x00-\x08\x0b-\x1f\x7f-\x9f\u061c\u200e\u200f\u202a-\u202e\u2066-\u2069]"
)
#: Longest text value of a job file (characters).
MAX_TEXT_CHARS = 2000


@dataclass(frozen=True)
class Key:
    kind: str  # str, date, bool, lift, int, path, qty, unc, choice, point
    unit: str = "dimensionless"
    lo: float | None = None  # plausible range for numbers (inclusive)
    hi: float | None = None
    hint: str = ""
    choices: tuple = ()
    lo_open: bool = False


def _q(unit, lo=None, hi=None, hint="", lo_open=True):
    return Key("qty", unit, lo, hi, hint, lo_open=lo_open)


def _u(unit, hi=None, hint=""):
    return Key("unc", unit, 0.0, hi, hint)


_READOUT = Key(
    "qty", "s", 0.0, 1.0,
    'give the rolling-shutter readout time (first to last row) in s, e.g. "1.2 ms", or 0 '
    "for a global shutter",
)  # fmt: skip

_MARKERS = _q(
    "m", 0.0, 10.0, 'give the side of the markers\' black square in metres (e.g. 0.05) or "50 mm"'
)

SECTIONS: dict[str, dict[str, Key]] = {
    "laboratory": {
        "name": Key("str"),
        "address": Key("str"),
        "accreditation": Key("str"),
    },
    "test": {
        "customer": Key("str"),
        "customer_address": Key("str"),
        "order": Key("str"),
        "operator": Key("str"),
        "approved_by": Key("str"),
        "date": Key("date"),
        "location": Key("str"),
        "notes": Key("str"),
        "check_standard": Key("str"),
    },
    "specimen": {
        "id": Key("str"),
        "large_uncertainty_confirmed": Key("bool"),
        "description": Key("str"),
        "mass": _q("kg", 0.0, 100.0, 'give the specimen mass in kg (e.g. 0.0027) or "2.7 g"'),
        "mass_uncertainty": _u("kg"),
        "diameter": _q("m", 0.0, 5.0, 'give the diameter in metres (e.g. 0.040) or "40 mm"'),
        "diameter_uncertainty": _u("m"),
        "area": _q("m**2", 0.0, 20.0, 'give the frontal area in m² or e.g. "12.6 cm^2"'),
        "area_uncertainty": _u("m**2"),
        "volume": _q("m**3", 0.0, 50.0, 'give the volume in m³ or e.g. "33.5 cm^3"'),
        "volume_uncertainty": _u("m**3"),
        "length": _q("m", 0.0, 10.0, "give the Reynolds reference length in metres"),
        "added_mass_coefficient": Key("qty", "dimensionless", 0.0, 5.0, "0.5 for a sphere"),
        "added_mass_coefficient_uncertainty": _u("dimensionless"),
    },
    "air": {
        "temperature": _q(
            "degC",
            -40.0,
            60.0,
            'give the air temperature in °C (e.g. 21.0) or "294.2 K"',
            lo_open=False,
        ),
        "temperature_uncertainty": _u("delta_degC", 20.0),
        "pressure": _q(
            "Pa",
            30_000.0,
            120_000.0,
            'give the absolute pressure in Pa (e.g. 100800) or "1008 hPa"',
        ),
        "pressure_uncertainty": _u("Pa", 20_000.0),
        "relative_humidity": Key(
            "qty", "percent", 0.0, 100.0, "give the relative humidity in % (0 to 100)"
        ),
        "relative_humidity_uncertainty": _u("percent", 100.0),
        "density": _q("kg/m**3", 0.3, 1.6, "give the air density in kg/m³ (about 1.2)"),
        "density_uncertainty": _u("kg/m**3", 1.0),
        "viscosity": _q("Pa*s", 1e-6, 1e-4, "give the dynamic viscosity in Pa s (about 1.8e-5)"),
        "viscosity_uncertainty": _u("Pa*s", 1e-4),
        "air_speed_uncertainty": _u(
            "m/s",
            5.0,
            "give the standard uncertainty of the air's speed along the flight in m/s (e.g. "
            '0.05, from an anemometer near the flight path) or "5 cm/s"',
        ),
    },
    "site": {
        "gravity": _q("m/s**2", 9.7, 9.9, "give the local acceleration of free fall in m/s²"),
        "gravity_uncertainty": _u("m/s**2", 0.1),
        "latitude": Key("qty", "deg", -90.0, 90.0, "give the latitude in degrees"),
        "height": Key("qty", "m", -500.0, 9000.0, "give the height above sea level in m"),
    },
    "camera": {
        "fps": _q("Hz", 0.0, 1e7, "give the camera frame rate in frames per second (Hz)"),
        "fps_uncertainty": _u("Hz"),
        "scale_relative_uncertainty": _u(
            "dimensionless",
            0.2,
            "give the relative standard uncertainty of the length scale as a fraction "
            '(0.002 for 0.2 %) or "0.2 %"',
        ),
        "roll_uncertainty": _u(
            "deg", 10.0, "give the standard uncertainty of the horizontal in degrees"
        ),
        "distance": _q(
            "m",
            0.0,
            1000.0,
            'give the camera\'s distance to the flight plane in metres (e.g. 3.0) or "300 cm"',
        ),
        "distance_uncertainty": _u("m", 100.0),
        "out_of_plane_uncertainty": _u(
            "deg",
            10.0,
            "give the standard uncertainty of the flight's angle to the image plane in degrees",
        ),
        "readout_time": _READOUT,
        "readout_time_uncertainty": _u("s", 0.1),
    },
    "throws": {
        "track": Key("path"),
        "footage": Key("path"),
        "label": Key("str"),
        "t_col": Key("str"),
        "x_col": Key("str"),
        "y_col": Key("str"),
        "frame_col": Key("str"),
        "sigma_col": Key("str"),
        "units": Key("choice", choices=("m", "mm", "cm", "px")),
        "scale": _q("m/px", 0.0, 1.0, "give the image scale in metres per pixel"),
        "origin": Key("point"),
        "y_down": Key("bool"),
        "delimiter": Key("str"),
        "comment": Key("str"),
        # footage throws
        "start": Key("int", lo=0, hi=10**9),
        "stop": Key("int", lo=1, hi=10**9),
        "rotation": Key(
            "qty", "deg", -180.0, 180.0, "give the camera roll in degrees", lo_open=False
        ),
        "reference": Key("reference"),
        "markers": _MARKERS,
        "marker_dictionary": Key("dictionary"),
        "marker_layout": Key("path"),
        "marker_frame": Key("int", lo=0, hi=10**9),
        "lens": Key("path"),
        "scale_uncertainty": _u(
            "dimensionless",
            0.5,
            "give the relative standard uncertainty of the known length as a fraction "
            '(0.001 for 0.1 %) or "0.1 %"',
        ),
    },
    # one camera's footage of a throw measured in 3-D: [[throws.views]]
    "throws.views": {
        "footage": Key("path"),
        "track": Key("path"),
        "label": Key("str"),
        "lens": Key("path"),
        "markers": _MARKERS,
        "marker_dictionary": Key("dictionary"),
        "marker_layout": Key("path"),
        "marker_frame": Key("int", lo=0, hi=10**9),
        "scale_uncertainty": _u(
            "dimensionless",
            0.5,
            "give the relative standard uncertainty of the marker side as a fraction "
            '(0.001 for 0.1 %) or "0.1 %"',
        ),
        "start": Key("int", lo=0, hi=10**9),
        "stop": Key("int", lo=1, hi=10**9),
        "readout_time": _READOUT,
        "readout_time_uncertainty": _u("s", 0.1),
        "time_offset": Key(
            "qty",
            "s",
            -60.0,
            60.0,
            "give this view's frame 0 time minus the first view's in s (e.g. \"0.4 ms\"), or "
            "leave it out to have it estimated",
            lo_open=False,
        ),  # fmt: skip
        "time_offset_uncertainty": _u("s", 1.0),
    },
    "specification": {
        "drag_coefficient": Key("qty", "dimensionless", 0.0, 100.0, "the stated Cd"),
        "tolerance": Key("qty", "dimensionless", 0.0, 100.0, "the ± tolerance", lo_open=True),
        "lower": Key("qty", "dimensionless", 0.0, 100.0, "the lower limit of Cd"),
        "upper": Key("qty", "dimensionless", 0.0, 100.0, "the upper limit of Cd"),
        "decision_rule": Key("choice", choices=RULES),
        "reference": Key("str"),
    },
    "fit": {
        "model": Key("str"),
        "robust": Key("bool"),
        "noise": Key("choice", choices=("auto", "white", "ar1")),
        "lift": Key("lift"),
        "wind": Key("qty", "m/s", -50.0, 50.0, "give the wind along +x in m/s"),
    },
    "uncertainty": {
        "monte_carlo": Key("int", lo=0, hi=10_000_000),
        "adaptive": Key("bool"),
        "seed": Key("int", lo=0, hi=2**63 - 1),
    },
    "output": {
        "directory": Key("dir"),
        "number_prefix": Key("str"),
        "records": Key("outpath"),
    },
}

REQUIRED = {
    "laboratory": ("name",),
    "test": ("customer", "operator", "date"),
    "specimen": ("id", "description", "mass", "mass_uncertainty"),
    "air": (),
    "camera": ("fps", "fps_uncertainty"),
}

REQUIRED_SECTIONS = ("laboratory", "test", "specimen", "air", "camera", "throws")


def fail(msg: str) -> None:
    raise InputError(msg)


def check_value(where: Where, sec: str, idx, key: str, spec: Key, raw: Any, folder: Path):
    loc = where.key(sec, idx, key)
    kind = spec.kind
    if kind == "str":
        if not isinstance(raw, str):
            fail(f'{loc}: expected text in quotes, got {raw!r}; write {key} = "...".')
        bad = HIDDEN_TEXT.search(raw)
        if bad:
            ch = bad.group()
            fail(
                f"{loc}: holds the control or direction character U+{ord(ch):04X} at position "
                f"{bad.start() + 1} (terminal escape codes and right-to-left overrides make the "
                f"text shown differ from the text stored); write the text without it."
            )
        if len(raw) > MAX_TEXT_CHARS:
            fail(f"{loc}: {len(raw)} characters, more than {MAX_TEXT_CHARS}; shorten it.")
        return raw.strip()
    if kind == "date":
        if isinstance(raw, _dt.datetime):
            return raw.date()
        if isinstance(raw, _dt.date):
            return raw
        if isinstance(raw, str):
            try:
                return _dt.date.fromisoformat(raw.strip())
            except ValueError:
                pass
        fail(f"{loc}: expected a date, got {raw!r}; write e.g. {key} = 2026-03-04.")
    if kind == "bool":
        if not isinstance(raw, bool):
            fail(f"{loc}: expected true or false, got {raw!r}.")
        return raw
    if kind == "lift":
        if not (isinstance(raw, bool) or raw == "auto"):
            fail(
                f'{loc}: expected true, false or "auto", got {raw!r}; "auto" (the default) tests '
                f"whether the data need a lift coefficient."
            )
        return raw
    if kind == "int":
        if isinstance(raw, bool) or not isinstance(raw, int):
            fail(f"{loc}: expected a whole number, got {raw!r}.")
        if (spec.lo is not None and raw < spec.lo) or (spec.hi is not None and raw > spec.hi):
            fail(f"{loc}: {raw} is outside {spec.lo:g} to {spec.hi:g}.")
        return raw
    if kind == "choice":
        if raw not in spec.choices:
            fail(
                f"{loc}: unknown value {raw!r}; use one of "
                f"{', '.join(repr(c) for c in spec.choices)}."
            )
        return raw
    if kind in ("path", "dir", "outpath"):
        if not isinstance(raw, str) or not raw.strip():
            fail(f"{loc}: expected a file path in quotes, got {raw!r}.")
        p = Path(raw).expanduser()
        return p if p.is_absolute() else (folder / p)
    if kind in ("point", "reference"):
        n = 2 if kind == "point" else 5
        vals = _number_list(raw, n)
        if vals is None:
            if kind == "point":
                fail(
                    f"{loc}: expected two numbers, got {raw!r}; write e.g. {key} = [0.0, 0.0] "
                    f'or {key} = "0.0,0.0".'
                )
            fail(
                f"{loc}: expected X1,Y1,X2,Y2,METRES (two image points in px, y down, and "
                f"their distance apart in m), got {raw!r}; write e.g. "
                f'{key} = "102.5,640,1180,655.5,1.000".'
            )
        if kind == "reference" and not vals[4] > 0:
            fail(
                f"{loc}: the distance between the two points must be > 0 m, got {vals[4]:g}; "
                f"give the measured distance in metres as the fifth number."
            )
        return tuple(vals)
    if kind == "dictionary":
        from fitdrag.video.markers import marker_dictionaries

        name = raw.strip().upper() if isinstance(raw, str) else ""
        if name and not name.startswith("DICT_"):
            name = "DICT_" + name
        names = marker_dictionaries()
        if name not in names:
            fail(
                f"{loc}: unknown ArUco dictionary {raw!r}; use one of {', '.join(names)} "
                f'(e.g. "DICT_4X4_50").'
            )
        return name
    # quantities
    unit = spec.unit
    show = unit_symbol(unit)
    if isinstance(raw, bool) or not isinstance(raw, int | float | str):
        fail(f"{loc}: expected a number in {show or 'plain numbers'}, got {raw!r}.")
    if isinstance(raw, str):
        try:
            v = parse_quantity(raw, unit, delta=(unit == "delta_degC"))
        except ValueError as exc:
            fail(
                f"{loc}: {exc} in {raw!r}; give a number in {show or 'plain numbers'} or a "
                f"string with a unit of {unit_word(unit)}."
            )
    else:
        v = float(raw)
    if not math.isfinite(v):
        fail(f"{loc}: must be finite, got {raw!r}.")
    unit_txt = f" {show}" if show else ""
    if kind == "unc":
        if v < 0:
            fail(
                f"{loc}: a standard uncertainty must be >= 0, got {raw!r}; give the standard "
                f"uncertainty (one standard deviation) as a positive number, or 0."
            )
        if spec.hi is not None and v > spec.hi:
            fail(
                f"{loc}: {v:g}{unit_txt} is implausibly large (limit {spec.hi:g}{unit_txt}); "
                f"check the unit. {spec.hint}".rstrip()
            )
        return v
    lo_bad = spec.lo is not None and (v <= spec.lo if spec.lo_open else v < spec.lo)
    hi_bad = spec.hi is not None and v > spec.hi
    if lo_bad or hi_bad:
        rng = f"{'>' if spec.lo_open else '>='} {spec.lo:g}{unit_txt} and <= {spec.hi:g}{unit_txt}"
        fail(
            f"{loc}: {v:g}{unit_txt} is outside the plausible range ({rng}); {spec.hint or 'check the unit'}."
        )
    return v


def _number_list(raw: Any, n: int) -> list[float] | None:
    """``n`` finite numbers from a TOML array or a text "a,b,..."; None if not that."""
    if isinstance(raw, str):
        try:
            vals = [float(v) for v in raw.replace(";", ",").split(",")]
        except ValueError:
            return None
    elif isinstance(raw, list) and all(
        isinstance(v, int | float) and not isinstance(v, bool) for v in raw
    ):
        vals = [float(v) for v in raw]
    else:
        return None
    if len(vals) != n or not all(math.isfinite(v) for v in vals):
        return None
    return vals


def parse_table(where, sec, idx, table, folder) -> dict:
    keys = SECTIONS[sec]
    out = {}
    for key, raw in table.items():
        if key not in keys:
            if isinstance(raw, dict):
                loc = where.section(f"{sec}.{key}", None)
                fail(
                    f"{loc}: unknown sub-table in {where.section_name(sec, idx)}; valid keys are "
                    f"{', '.join(sorted(keys))}."
                )
            fail(
                f"{where.key(sec, idx, key)}: unknown key; valid keys in "
                f"{where.section_name(sec, idx)} are {', '.join(sorted(keys))}."
            )
        out[key] = check_value(where, sec, idx, key, keys[key], raw, folder)
    for key, raw in table.items():
        # "every *_uncertainty is in the same unit as its value": a bare number beside a value
        # written with a unit ("24.00 g") is in that unit (0.02 means 0.02 g, not 0.02 kg)
        ukey = f"{key}_uncertainty"
        utext = unit_of_text(raw) if isinstance(raw, str) else ""
        if not utext or ukey not in table or keys.get(ukey) is None:
            continue
        uraw = table[ukey]
        bare = isinstance(uraw, int | float) and not isinstance(uraw, bool)
        if isinstance(uraw, str) and not unit_of_text(uraw):
            try:
                uraw, bare = float(uraw), True
            except ValueError:
                bare = False
        if bare:
            out[ukey] = check_value(where, sec, idx, ukey, keys[ukey], f"{uraw!r} {utext}", folder)
    return out


def missing(where: Where, sec: str, idx, key: str, fix: str) -> None:
    fail(f"{where.section(sec, idx)} {key}: missing; {fix}")


def measured(where, sec, d: dict, key: str, unit: str, fix: str, required=True):
    if key not in d:
        if required:
            missing(where, sec, None, key, fix)
        return None
    ukey = f"{key}_uncertainty"
    if ukey not in d:
        missing(
            where,
            sec,
            None,
            ukey,
            f"give the standard uncertainty of {key} in {unit_symbol(unit) or 'plain numbers'}"
            f" (write 0 if you take {key} as exact).",
        )
    u = d[ukey]
    return Measured(d[key], u, "°C" if unit in ("degC", "delta_degC") else unit_symbol(unit))
