"""Job files: one TOML file describes a whole measurement, from specimen to certificate.

A job file has the sections ``[laboratory]``, ``[test]``, ``[specimen]``, ``[air]``,
``[camera]``, one ``[[throws]]`` table per throw, and optionally ``[site]`` (gravity),
``[specification]`` (the stated drag coefficient and the decision rule), ``[fit]`` (fit
options), ``[uncertainty]`` (Monte Carlo check) and ``[output]``.  ``fitdrag new-job PATH``
writes a commented template; :data:`TEMPLATE` is its text.

Values are SI numbers in the unit each key documents (temperature in °C, relative humidity
in %), or strings with a unit, e.g. ``mass = "2.7 g"``, ``pressure = "1008 hPa"``; the string
is converted with pint.  An unknown key, a value of the wrong type or dimension, a number
outside its plausible range (often a unit slip: 1013 for a pressure in Pa), a negative
uncertainty or a missing input file is a ``ValueError`` naming the file, the line, the key,
the value and the fix.  Paths resolve relative to the job file's folder.

Every input that carries an uncertainty has a ``*_uncertainty`` key holding its standard
uncertainty in the same unit (for ``temperature``, a temperature difference in K or °C).
They are required: write 0 for an input you take as exact, so that nothing leaves the
uncertainty budget by omission.

A ``[[throws]]`` table holds either ``track = "file.csv"`` (with the CSV import options
:data:`CSV_OPTIONS`) or ``footage = "file.avi"`` (a video file or a folder of numbered
frames) with the options :data:`FOOTAGE_OPTIONS` of
:func:`fitdrag.video.tracking.track_footage`: ``start``, ``stop`` (frames), exactly one
calibration of ``scale`` [m/px], ``reference`` ("X1,Y1,X2,Y2,METRES": two image points [px]
and their distance [m]) or ``markers`` (the ArUco markers' side [m]); ``origin`` ("X,Y" [px],
y down) and ``rotation`` [deg] with scale or reference; ``marker_dictionary``,
``marker_layout`` (a file) and ``marker_frame`` with markers; ``lens`` (a lens file) and
``scale_uncertainty`` (relative standard uncertainty of the known length [1]).  The frame
rate of footage is ``[camera] fps``.
"""

from __future__ import annotations

import datetime as _dt
import math
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from fitdrag.uncertainty.decision import RULES, Specification
from fitdrag.uncertainty.gum import InputQuantity
from fitdrag.units import parse_quantity, unit_symbol, unit_word

#: Gravity assumed when a job gives no [site]: standard gravity, with a rectangular
#: distribution covering normal gravity from the equator to the poles at sea level
#: (9.780 to 9.832 m/s², WGS84 normal gravity formula). [m/s²]
UNKNOWN_SITE_GRAVITY_HALF_WIDTH = 0.026

#: Standard uncertainty given to normal gravity computed from latitude and height, for the
#: local gravity anomaly, which the normal-gravity formula ignores (typical anomalies are
#: tens of mGal; 1 mGal = 1e-5 m/s²; from memory). [m/s²]
NORMAL_GRAVITY_UNCERTAINTY = 5e-4

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


def _key_lines(text: str) -> tuple[dict[tuple, int], dict[tuple, int]]:
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


class _Where:
    """Formats error locations: ``job.toml, line 12: [specimen] mass: ...``."""

    def __init__(self, path: Path, text: str):
        self.path = path
        self.keys, self.headers = _key_lines(text)

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


@dataclass(frozen=True)
class _Key:
    kind: str  # str, date, bool, int, path, qty, unc, choice, point
    unit: str = "dimensionless"
    lo: float | None = None  # plausible range for numbers (inclusive)
    hi: float | None = None
    hint: str = ""
    choices: tuple = ()
    lo_open: bool = False


def _q(unit, lo=None, hi=None, hint="", lo_open=True):
    return _Key("qty", unit, lo, hi, hint, lo_open=lo_open)


def _u(unit, hi=None, hint=""):
    return _Key("unc", unit, 0.0, hi, hint)


_SECTIONS: dict[str, dict[str, _Key]] = {
    "laboratory": {
        "name": _Key("str"),
        "address": _Key("str"),
        "accreditation": _Key("str"),
    },
    "test": {
        "customer": _Key("str"),
        "customer_address": _Key("str"),
        "order": _Key("str"),
        "operator": _Key("str"),
        "approved_by": _Key("str"),
        "date": _Key("date"),
        "location": _Key("str"),
        "notes": _Key("str"),
    },
    "specimen": {
        "id": _Key("str"),
        "description": _Key("str"),
        "mass": _q("kg", 0.0, 100.0, 'give the specimen mass in kg (e.g. 0.0027) or "2.7 g"'),
        "mass_uncertainty": _u("kg"),
        "diameter": _q("m", 0.0, 5.0, 'give the diameter in metres (e.g. 0.040) or "40 mm"'),
        "diameter_uncertainty": _u("m"),
        "area": _q("m**2", 0.0, 20.0, 'give the frontal area in m² or e.g. "12.6 cm^2"'),
        "area_uncertainty": _u("m**2"),
        "volume": _q("m**3", 0.0, 50.0, 'give the volume in m³ or e.g. "33.5 cm^3"'),
        "volume_uncertainty": _u("m**3"),
        "length": _q("m", 0.0, 10.0, "give the Reynolds reference length in metres"),
        "added_mass_coefficient": _Key("qty", "dimensionless", 0.0, 5.0, "0.5 for a sphere"),
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
        "relative_humidity": _Key(
            "qty", "percent", 0.0, 100.0, "give the relative humidity in % (0 to 100)"
        ),
        "relative_humidity_uncertainty": _u("percent", 100.0),
        "density": _q("kg/m**3", 0.3, 1.6, "give the air density in kg/m³ (about 1.2)"),
        "density_uncertainty": _u("kg/m**3", 1.0),
        "viscosity": _q("Pa*s", 1e-6, 1e-4, "give the dynamic viscosity in Pa s (about 1.8e-5)"),
    },
    "site": {
        "gravity": _q("m/s**2", 9.7, 9.9, "give the local acceleration of free fall in m/s²"),
        "gravity_uncertainty": _u("m/s**2", 0.1),
        "latitude": _Key("qty", "deg", -90.0, 90.0, "give the latitude in degrees"),
        "height": _Key("qty", "m", -500.0, 9000.0, "give the height above sea level in m"),
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
    },
    "throws": {
        "track": _Key("path"),
        "footage": _Key("path"),
        "label": _Key("str"),
        "t_col": _Key("str"),
        "x_col": _Key("str"),
        "y_col": _Key("str"),
        "frame_col": _Key("str"),
        "sigma_col": _Key("str"),
        "units": _Key("choice", choices=("m", "mm", "cm", "px")),
        "scale": _q("m/px", 0.0, 1.0, "give the image scale in metres per pixel"),
        "origin": _Key("point"),
        "y_down": _Key("bool"),
        "delimiter": _Key("str"),
        "comment": _Key("str"),
        # footage throws
        "start": _Key("int", lo=0, hi=10**9),
        "stop": _Key("int", lo=1, hi=10**9),
        "rotation": _Key(
            "qty", "deg", -180.0, 180.0, "give the camera roll in degrees", lo_open=False
        ),
        "reference": _Key("reference"),
        "markers": _q(
            "m",
            0.0,
            10.0,
            'give the side of the markers\' black square in metres (e.g. 0.05) or "50 mm"',
        ),
        "marker_dictionary": _Key("dictionary"),
        "marker_layout": _Key("path"),
        "marker_frame": _Key("int", lo=0, hi=10**9),
        "lens": _Key("path"),
        "scale_uncertainty": _u(
            "dimensionless",
            0.5,
            "give the relative standard uncertainty of the known length as a fraction "
            '(0.001 for 0.1 %) or "0.1 %"',
        ),
    },
    "specification": {
        "drag_coefficient": _Key("qty", "dimensionless", 0.0, 100.0, "the stated Cd"),
        "tolerance": _Key("qty", "dimensionless", 0.0, 100.0, "the ± tolerance", lo_open=True),
        "lower": _Key("qty", "dimensionless", 0.0, 100.0, "the lower limit of Cd"),
        "upper": _Key("qty", "dimensionless", 0.0, 100.0, "the upper limit of Cd"),
        "decision_rule": _Key("choice", choices=RULES),
        "reference": _Key("str"),
    },
    "fit": {
        "model": _Key("str"),
        "robust": _Key("bool"),
        "noise": _Key("choice", choices=("auto", "white", "ar1")),
        "lift": _Key("bool"),
        "wind": _Key("qty", "m/s", -50.0, 50.0, "give the wind along +x in m/s"),
    },
    "uncertainty": {
        "monte_carlo": _Key("int", lo=0, hi=10_000_000),
        "adaptive": _Key("bool"),
        "seed": _Key("int", lo=0, hi=2**63 - 1),
    },
    "output": {
        "directory": _Key("dir"),
        "number_prefix": _Key("str"),
        "records": _Key("outpath"),
    },
}

_REQUIRED = {
    "laboratory": ("name",),
    "test": ("customer", "operator", "date"),
    "specimen": ("id", "description", "mass", "mass_uncertainty"),
    "air": (),
    "camera": ("fps", "fps_uncertainty"),
}

_REQUIRED_SECTIONS = ("laboratory", "test", "specimen", "air", "camera", "throws")


# ---------------------------------------------------------------------------------------------
# the job
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Measured:
    """A value with its standard uncertainty, both in SI (temperature in °C, humidity in %)."""

    value: float
    uncertainty: float
    unit: str

    def input(self, name: str, description: str = "", **kw) -> InputQuantity:
        return InputQuantity(
            name, self.value, self.uncertainty, self.unit, description=description, **kw
        )


@dataclass(frozen=True)
class ThrowSpec:
    """One throw: a track CSV (``kind == "track"``) or footage, with its import options."""

    kind: str
    path: Path
    label: str
    options: Mapping[str, Any]
    line: int | None = None


@dataclass(frozen=True)
class Job:
    """A parsed, validated job file (all values SI; temperature °C, humidity %)."""

    path: Path
    text: str
    laboratory: Mapping[str, Any]
    test: Mapping[str, Any]
    specimen: Mapping[str, Any]
    air: Mapping[str, Any]
    site: Mapping[str, Any]
    camera: Mapping[str, Any]
    throws: tuple[ThrowSpec, ...]
    specification: Specification | None
    decision_rule: str | None
    fit: Mapping[str, Any]
    uncertainty: Mapping[str, Any]
    output: Mapping[str, Any]
    notes: tuple[str, ...] = field(default=())

    @property
    def folder(self) -> Path:
        return self.path.parent

    @property
    def shape(self) -> str:
        return "sphere" if "diameter" in self.specimen else "body"

    @property
    def output_directory(self) -> Path:
        return self.output["directory"]

    @property
    def number_prefix(self) -> str:
        return self.output.get("number_prefix", "FD")

    @property
    def records_path(self) -> Path:
        from fitdrag.run.records import DEFAULT_FILENAME

        return self.output.get("records") or self.output_directory / DEFAULT_FILENAME

    # -- objects for the fit --------------------------------------------------------------

    def make_specimen(self, values: Mapping[str, float] | None = None):
        """Sphere or Body from the job, with any value overridden by ``values``."""
        from fitdrag.physics.specimen import Body, Sphere

        v = self.nominal_values()
        v.update(values or {})
        ca = v.get("added_mass_coefficient", 0.5)
        if self.shape == "sphere":
            return Sphere(v["mass"], v["diameter"], added_mass_coefficient=ca)
        return Body(
            v["mass"],
            v["area"],
            v["volume"],
            length=self.specimen.get("length"),
            added_mass_coefficient=ca,
        )

    def make_air(self, values: Mapping[str, float] | None = None):
        """Air from the job, with any value overridden by ``values``."""
        from fitdrag.physics.air import Air, air_viscosity

        v = self.nominal_values()
        v.update(values or {})
        if "air_density" in v:
            visc = self.air.get("viscosity")
            if visc is None:
                visc = (
                    float(air_viscosity(self.air["temperature"].value))
                    if ("temperature" in self.air)
                    else None
                )
            kw = {"viscosity": visc} if visc is not None else {}
            return Air(v["air_density"], **kw)
        return Air.from_conditions(v["temperature"], v["pressure"], v["relative_humidity"])

    def gravity(self) -> float:
        return self.site["gravity"].value

    def fit_options(self) -> dict:
        return dict(self.fit)

    # -- budget inputs ------------------------------------------------------------------------

    def input_quantities(self, scale_relative_uncertainty: float | None = None,
                         roll_uncertainty: float | None = None) -> list:  # fmt: skip
        """The uncertainty budget's inputs (everything but the fit's statistical part).

        ``scale_relative_uncertainty`` [1] and ``roll_uncertainty`` [deg] override [camera]
        (e.g. from a footage calibration).  The camera roll (an error in the horizontal) is
        an input only when its uncertainty is known and > 0.
        """
        s = self.specimen
        q = [s["mass"].input("mass", "specimen mass")]
        if self.shape == "sphere":
            q.append(s["diameter"].input("diameter", "specimen diameter"))
        else:
            q.append(s["area"].input("area", "frontal area"))
            q.append(s["volume"].input("volume", "specimen volume (buoyancy, added mass)"))
        ca = s["added_mass_coefficient"]
        if ca.uncertainty > 0:
            q.append(ca.input("added_mass_coefficient", "added-mass coefficient"))
        a = self.air
        if "density" in a:
            q.append(a["density"].input("air_density", "air density"))
        else:
            q.append(a["temperature"].input("temperature", "air temperature (density, viscosity)"))
            q.append(a["pressure"].input("pressure", "air pressure (density)"))
            q.append(a["relative_humidity"].input("relative_humidity", "humidity (density)"))
        c = self.camera
        q.append(c["fps"].input("frame_rate", "camera frame rate (time base)"))
        rel = (
            c.get("scale_relative_uncertainty")
            if scale_relative_uncertainty is None
            else (scale_relative_uncertainty)
        )
        q.append(
            InputQuantity(
                "length_scale", 1.0, float(rel or 0.0), "", description="length scale (relative)"
            )  # fmt: skip
        )
        roll = c.get("roll_uncertainty") if roll_uncertainty is None else roll_uncertainty
        if roll:
            q.append(
                InputQuantity(
                    "roll",
                    0.0,
                    float(roll),
                    "°",
                    description="camera roll (error of the horizontal)",
                )  # fmt: skip
            )
        g = self.site["gravity"]
        q.append(
            g.input(
                "gravity",
                self.site["gravity_source"],
                distribution=self.site.get("gravity_distribution", "normal"),
            )
        )
        return q

    def nominal_values(self) -> dict[str, float]:
        """Input estimates by budget name."""
        out = {}
        for qq in self.input_quantities():
            out[qq.name] = qq.value
        out.setdefault("added_mass_coefficient", self.specimen["added_mass_coefficient"].value)
        return out


def _fail(msg: str) -> None:
    raise ValueError(msg)


def _check_value(where: _Where, sec: str, idx, key: str, spec: _Key, raw: Any, folder: Path):
    loc = where.key(sec, idx, key)
    kind = spec.kind
    if kind == "str":
        if not isinstance(raw, str):
            _fail(f'{loc}: expected text in quotes, got {raw!r}; write {key} = "...".')
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
        _fail(f"{loc}: expected a date, got {raw!r}; write e.g. {key} = 2026-03-04.")
    if kind == "bool":
        if not isinstance(raw, bool):
            _fail(f"{loc}: expected true or false, got {raw!r}.")
        return raw
    if kind == "int":
        if isinstance(raw, bool) or not isinstance(raw, int):
            _fail(f"{loc}: expected a whole number, got {raw!r}.")
        if (spec.lo is not None and raw < spec.lo) or (spec.hi is not None and raw > spec.hi):
            _fail(f"{loc}: {raw} is outside {spec.lo:g} to {spec.hi:g}.")
        return raw
    if kind == "choice":
        if raw not in spec.choices:
            _fail(
                f"{loc}: unknown value {raw!r}; use one of "
                f"{', '.join(repr(c) for c in spec.choices)}."
            )
        return raw
    if kind in ("path", "dir", "outpath"):
        if not isinstance(raw, str) or not raw.strip():
            _fail(f"{loc}: expected a file path in quotes, got {raw!r}.")
        p = Path(raw).expanduser()
        return p if p.is_absolute() else (folder / p)
    if kind in ("point", "reference"):
        n = 2 if kind == "point" else 5
        vals = _number_list(raw, n)
        if vals is None:
            if kind == "point":
                _fail(
                    f"{loc}: expected two numbers, got {raw!r}; write e.g. {key} = [0.0, 0.0] "
                    f'or {key} = "0.0,0.0".'
                )
            _fail(
                f"{loc}: expected X1,Y1,X2,Y2,METRES (two image points in px, y down, and "
                f"their distance apart in m), got {raw!r}; write e.g. "
                f'{key} = "102.5,640,1180,655.5,1.000".'
            )
        if kind == "reference" and not vals[4] > 0:
            _fail(
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
            _fail(
                f"{loc}: unknown ArUco dictionary {raw!r}; use one of {', '.join(names)} "
                f'(e.g. "DICT_4X4_50").'
            )
        return name
    # quantities
    unit = spec.unit
    show = unit_symbol(unit)
    if isinstance(raw, bool) or not isinstance(raw, int | float | str):
        _fail(f"{loc}: expected a number in {show or 'plain numbers'}, got {raw!r}.")
    if isinstance(raw, str):
        try:
            v = parse_quantity(raw, unit, delta=(unit == "delta_degC"))
        except ValueError as exc:
            _fail(
                f"{loc}: {exc} in {raw!r}; give a number in {show or 'plain numbers'} or a "
                f"string with a unit of {unit_word(unit)}."
            )
    else:
        v = float(raw)
    if not math.isfinite(v):
        _fail(f"{loc}: must be finite, got {raw!r}.")
    unit_txt = f" {show}" if show else ""
    if kind == "unc":
        if v < 0:
            _fail(
                f"{loc}: a standard uncertainty must be >= 0, got {raw!r}; give the standard "
                f"uncertainty (one standard deviation) as a positive number, or 0."
            )
        if spec.hi is not None and v > spec.hi:
            _fail(
                f"{loc}: {v:g}{unit_txt} is implausibly large (limit {spec.hi:g}{unit_txt}); "
                f"check the unit. {spec.hint}".rstrip()
            )
        return v
    lo_bad = spec.lo is not None and (v <= spec.lo if spec.lo_open else v < spec.lo)
    hi_bad = spec.hi is not None and v > spec.hi
    if lo_bad or hi_bad:
        rng = f"{'>' if spec.lo_open else '>='} {spec.lo:g}{unit_txt} and <= {spec.hi:g}{unit_txt}"
        _fail(
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


def _parse_table(where, sec, idx, table, folder) -> dict:
    keys = _SECTIONS[sec]
    out = {}
    for key, raw in table.items():
        if key not in keys:
            if isinstance(raw, dict):
                loc = where.section(f"{sec}.{key}", None)
                _fail(
                    f"{loc}: unknown sub-table in {where.section_name(sec, idx)}; valid keys are "
                    f"{', '.join(sorted(keys))}."
                )
            _fail(
                f"{where.key(sec, idx, key)}: unknown key; valid keys in "
                f"{where.section_name(sec, idx)} are {', '.join(sorted(keys))}."
            )
        out[key] = _check_value(where, sec, idx, key, keys[key], raw, folder)
    return out


def _missing(where: _Where, sec: str, idx, key: str, fix: str) -> None:
    _fail(f"{where.section(sec, idx)} {key}: missing; {fix}")


def _measured(where, sec, d: dict, key: str, unit: str, fix: str, required=True):
    if key not in d:
        if required:
            _missing(where, sec, None, key, fix)
        return None
    ukey = f"{key}_uncertainty"
    if ukey not in d:
        _missing(
            where,
            sec,
            None,
            ukey,
            f"give the standard uncertainty of {key} in {unit_symbol(unit) or 'plain numbers'}"
            f" (write 0 if you take {key} as exact).",
        )
    u = d[ukey]
    return Measured(d[key], u, "°C" if unit in ("degC", "delta_degC") else unit_symbol(unit))


def load_job(path: str | Path, *, check_files: bool = True) -> Job:
    """Read and validate a job file.

    Parameters
    ----------
    path : str or Path
        The TOML job file.
    check_files : bool
        Check that every track/footage file exists (default True).

    Returns
    -------
    Job

    Raises
    ------
    FileNotFoundError
        The job file, or a track or footage file it names, does not exist.
    ValueError
        Anything wrong in the file, with its line and the fix.
    """
    path = Path(path)
    if path.is_dir():
        raise ValueError(f"{path}: is a folder; give the path of a job file (.toml).")
    if not path.exists():
        raise FileNotFoundError(
            f"{path}: no such job file; create one with 'fitdrag new-job {path}'."
        )
    raw_bytes = path.read_bytes()
    try:
        text = raw_bytes.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ValueError(
            f"{path.name}: not UTF-8 text ({exc}); save the job file as UTF-8."
        ) from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ValueError(f"{path.name}: not valid TOML: {exc}.") from None
    path = path.resolve()
    folder = path.parent
    where = _Where(path, text)

    for sec, value in data.items():
        if sec not in _SECTIONS:
            valid = ", ".join("[[throws]]" if s == "throws" else f"[{s}]" for s in _SECTIONS)
            if isinstance(value, dict | list):
                _fail(f"{where.section(sec)}: unknown section; valid sections are {valid}.")
            n = where.keys.get(("", None, sec))
            loc = f"{path.name}, line {n}" if n else path.name
            _fail(f"{loc}: {sec}: unknown key outside any section; valid sections are {valid}.")
        if sec == "throws":
            if not isinstance(value, list):
                _fail(f"{where.section(sec)}: write each throw as a [[throws]] table.")
        elif not isinstance(value, dict):
            n = where.keys.get(("", None, sec))
            loc = f"{path.name}, line {n}" if n else path.name
            _fail(f"{loc}: {sec}: expected a [{sec}] section, got a value.")
    for sec in _REQUIRED_SECTIONS:
        if sec not in data:
            name = "[[throws]]" if sec == "throws" else f"[{sec}]"
            _fail(f"{path.name}: section {name} is missing; see 'fitdrag new-job' for a template.")

    parsed = {}
    for sec in _SECTIONS:
        if sec == "throws":
            continue
        parsed[sec] = _parse_table(where, sec, None, data.get(sec, {}), folder)
        for key in _REQUIRED.get(sec, ()):
            if key not in parsed[sec] and sec in data:
                _missing(where, sec, None, key, _REQUIRED_HINT.get((sec, key), "it is required."))

    specimen = _specimen(where, parsed["specimen"])
    air = _air(where, parsed["air"])
    site = _site(where, parsed["site"])
    camera = _camera(where, parsed["camera"])
    throws = _throws(where, data["throws"], folder, check_files)
    if any(t.kind == "track" for t in throws) and "scale_relative_uncertainty" not in camera:
        _missing(
            where,
            "camera",
            None,
            "scale_relative_uncertainty",
            "give the relative standard uncertainty of the track's length scale (e.g. 0.002), "
            "or 0 if the track's positions are exact.",
        )
    spec, rule = _specification(where, parsed["specification"], "specification" in data)
    fit = parsed["fit"]
    if "model" in fit:
        from fitdrag.physics.registry import drag_model_names

        names = drag_model_names()
        if fit["model"] not in names:
            _fail(
                f"{where.key('fit', None, 'model')}: unknown drag model {fit['model']!r}; use "
                f"one of {', '.join(names)}."
            )
    output = dict(parsed["output"])
    output.setdefault("directory", folder)
    if "number_prefix" in output:
        from fitdrag.run.records import check_prefix

        try:
            check_prefix(output["number_prefix"])
        except ValueError as exc:
            _fail(f"{where.key('output', None, 'number_prefix')}: {exc}")
    return Job(
        path=path,
        text=text,
        laboratory=parsed["laboratory"],
        test=parsed["test"],
        specimen=specimen,
        air=air,
        site=site,
        camera=camera,
        throws=throws,
        specification=spec,
        decision_rule=rule,
        fit=fit,
        uncertainty=parsed["uncertainty"],
        output=output,
    )


_REQUIRED_HINT = {
    ("laboratory", "name"): "give the laboratory's name as it should appear on the certificate.",
    ("test", "customer"): "name the customer the certificate is issued to.",
    ("test", "operator"): "name the person who performed the test.",
    ("test", "date"): "give the date of the test, e.g. date = 2026-03-04.",
    ("specimen", "id"): "give the specimen's identification (label, serial number).",
    ("specimen", "description"): "describe the specimen (what it is, its condition).",
    ("specimen", "mass"): "give the specimen mass in kg, e.g. mass = 0.0027.",
    ("specimen", "mass_uncertainty"): "give the standard uncertainty of the mass in kg "
    "(write 0 if you take it as exact).",
    ("camera", "fps"): "give the camera frame rate in Hz, e.g. fps = 500.",
    ("camera", "fps_uncertainty"): "give the standard uncertainty of the frame rate in Hz "
    "(write 0 if you take it as exact).",
}


def _specimen(where, d):
    sec = "specimen"
    out: dict[str, Any] = {"id": d["id"], "description": d["description"]}
    out["mass"] = _measured(where, sec, d, "mass", "kg", "")
    if out["mass"].uncertainty >= out["mass"].value:
        _fail(
            f"{where.key(sec, None, 'mass_uncertainty')}: {out['mass'].uncertainty:g} kg is not "
            f"smaller than the mass {out['mass'].value:g} kg; check the units."
        )
    has_d = "diameter" in d
    has_av = "area" in d or "volume" in d
    if has_d and has_av:
        _fail(
            f"{where.key(sec, None, 'diameter')}: give either diameter (a sphere) or area and "
            f"volume (any shape), not both."
        )
    if has_d:
        out["diameter"] = _measured(where, sec, d, "diameter", "m", "")
        if "length" in d:
            _fail(
                f"{where.key(sec, None, 'length')}: a sphere's reference length is its "
                f"diameter; remove length or describe the specimen by area and volume."
            )
    elif has_av:
        for key, unit in (("area", "m**2"), ("volume", "m**3")):
            out[key] = _measured(
                where,
                sec,
                d,
                key,
                unit,
                f"give the specimen's {key} in {unit_symbol(unit)} (with {key}_uncertainty).",
            )
        if "length" in d:
            out["length"] = d["length"]
    else:
        _missing(
            where,
            sec,
            None,
            "diameter",
            "give the diameter in m for a sphere, or area [m²] and volume [m³] for any shape.",
        )
    for key in list(d):
        base = key.removesuffix("_uncertainty")
        if key.endswith("_uncertainty") and base not in d:
            _fail(f"{where.key(sec, None, key)}: given without {base}; add {base} or remove it.")
    ca = d.get("added_mass_coefficient", 0.5)
    out["added_mass_coefficient"] = Measured(
        ca, d.get("added_mass_coefficient_uncertainty", 0.0), ""
    )
    return out


def _air(where, d):
    sec = "air"
    thermo = [k for k in ("temperature", "pressure", "relative_humidity") if k in d]
    if "density" in d:
        if len(thermo) == 3:
            _fail(
                f"{where.key(sec, None, 'density')}: give either density or temperature, "
                f"pressure and relative_humidity, not both (the density is computed from them)."
            )
        out = {"density": _measured(where, sec, d, "density", "kg/m**3", "")}
        if "temperature" in d:
            out["temperature"] = Measured(d["temperature"], d.get("temperature_uncertainty", 0.0),
                                          "°C")  # fmt: skip
        if "viscosity" in d:
            out["viscosity"] = d["viscosity"]
        for k in ("pressure", "relative_humidity"):
            if k in d:
                out[k] = Measured(
                    d[k], d.get(f"{k}_uncertainty", 0.0), unit_symbol(_SECTIONS[sec][k].unit)
                )
        return out
    if not thermo:
        _missing(
            where,
            sec,
            None,
            "temperature",
            "give temperature [°C], pressure [Pa] and relative_humidity [%] (each with "
            "*_uncertainty), or density [kg/m³] with density_uncertainty.",
        )
    for k in ("temperature", "pressure", "relative_humidity"):
        if k not in d:
            _missing(where, sec, None, k, f"give {k} with {k}_uncertainty, or give density.")
    if "viscosity" in d:
        _fail(
            f"{where.key(sec, None, 'viscosity')}: with temperature given, the viscosity is "
            f"computed (Sutherland); remove viscosity or give density instead."
        )
    return {
        "temperature": _measured(where, sec, d, "temperature", "delta_degC", ""),
        "pressure": _measured(where, sec, d, "pressure", "Pa", ""),
        "relative_humidity": _measured(where, sec, d, "relative_humidity", "percent", ""),
    }


def _site(where, d):
    sec = "site"
    if "gravity" in d:
        if "latitude" in d or "height" in d:
            _fail(
                f"{where.key(sec, None, 'gravity')}: give either gravity or latitude and "
                f"height, not both."
            )
        g = _measured(where, sec, d, "gravity", "m/s**2", "")
        return {"gravity": g, "gravity_source": "local gravity (stated)"}
    if "gravity_uncertainty" in d:
        _fail(f"{where.key(sec, None, 'gravity_uncertainty')}: given without gravity.")
    if "latitude" in d:
        from fitdrag.physics.air import local_gravity

        h = d.get("height", 0.0)
        g = float(local_gravity(d["latitude"], h))
        return {
            "gravity": Measured(g, NORMAL_GRAVITY_UNCERTAINTY, "m/s²"),
            "gravity_source": f"normal gravity at latitude {d['latitude']:g}°, height {h:g} m",
        }
    if "height" in d:
        _fail(f"{where.key(sec, None, 'height')}: given without latitude.")
    from fitdrag.physics.air import STANDARD_GRAVITY

    return {
        "gravity": Measured(
            STANDARD_GRAVITY, UNKNOWN_SITE_GRAVITY_HALF_WIDTH / math.sqrt(3.0), "m/s²"
        ),
        "gravity_distribution": "rectangular",
        "gravity_source": "standard gravity; site gravity not stated (rectangular ±0.026 m/s²)",
    }


def _camera(where, d):
    out = {"fps": _measured(where, "camera", d, "fps", "Hz", "")}
    if out["fps"].uncertainty >= out["fps"].value:
        _fail(
            f"{where.key('camera', None, 'fps_uncertainty')}: {out['fps'].uncertainty:g} Hz is "
            f"not smaller than the frame rate; check the value."
        )
    if "scale_relative_uncertainty" in d:
        out["scale_relative_uncertainty"] = d["scale_relative_uncertainty"]
    if "roll_uncertainty" in d:
        out["roll_uncertainty"] = d["roll_uncertainty"]
    return out


def _throws(where, items, folder, check_files):
    out = []
    if not items:
        _fail(f'{where.path.name}: no [[throws]]; add at least one [[throws]] with track = "...".')
    for i, t in enumerate(items):
        if not isinstance(t, dict):
            _fail(f"{where.section('throws', i)}: expected a table.")
        if "fps" in t:
            _fail(
                f"{where.key('throws', i, 'fps')}: unknown key; every throw's frame rate is "
                f"[camera] fps (with fps_uncertainty); remove fps here."
            )
        d = _parse_table(where, "throws", i, t, folder)
        has_t, has_f = "track" in d, "footage" in d
        if has_t == has_f:
            _fail(
                f'{where.section("throws", i)}: give exactly one of track = "file.csv" or '
                f'footage = "file.avi".'
            )
        kind = "track" if has_t else "footage"
        p = d.pop(kind)
        line = where.keys.get(("throws", i, kind))
        if check_files:
            if not p.exists():
                raise FileNotFoundError(
                    f"{where.key('throws', i, kind)}: no such file {str(p)!r}; paths are "
                    f"relative to the job file's folder {str(folder)!r}."
                )
            if kind == "track" and p.is_dir():
                _fail(f"{where.key('throws', i, kind)}: {str(p)!r} is a folder, not a CSV file.")
        label = d.pop("label", None) or p.name
        if kind == "footage":
            extra = sorted(k for k in d if k in CSV_OPTIONS and k not in FOOTAGE_OPTIONS)
            if extra:
                _fail(
                    f"{where.key('throws', i, extra[0])}: is a track CSV option; footage "
                    f"throws do not take it."
                )
            _footage_options(where, i, d, folder, check_files)
        else:
            extra = sorted(k for k in d if k in FOOTAGE_OPTIONS and k not in CSV_OPTIONS)
            if extra:
                _fail(
                    f"{where.key('throws', i, extra[0])}: is a footage option; track CSV "
                    f'throws do not take it (use it with footage = "file.avi").'
                )
        out.append(ThrowSpec(kind=kind, path=p, label=label, options=d, line=line))
    return tuple(out)


def _footage_options(where, i, d, folder, check_files) -> None:
    """Check a footage throw's calibration options (exactly one calibration, and only the
    options that go with it) and that its lens and layout files exist."""
    sec = "throws"
    given = [k for k in FOOTAGE_CALIBRATIONS if k in d]
    if not given:
        _fail(
            f"{where.key(sec, i, 'footage')}: no calibration; give exactly one of "
            f'scale = M_PER_PX (with origin = "X,Y" in px), '
            f'reference = "X1,Y1,X2,Y2,METRES" or markers = SIDE_M (the ArUco markers\' '
            f"side in m)."
        )
    if len(given) > 1:
        first, second = sorted(given, key=lambda k: where.keys.get((sec, i, k)) or 0)[:2]
        _fail(
            f"{where.key(sec, i, second)}: {first} is given too; give exactly one of scale, "
            f"reference or markers."
        )
    how = given[0]
    if how == "markers":
        for k in ("origin", "rotation"):
            if k in d:
                _fail(
                    f"{where.key(sec, i, k)}: applies to scale and reference only; with markers "
                    f"the markers set the origin and the horizontal (give a marker_layout for a "
                    f"world frame of your own)."
                )
    else:
        for k in ("marker_dictionary", "marker_layout", "marker_frame"):
            if k in d:
                _fail(
                    f"{where.key(sec, i, k)}: applies to markers only; remove it or calibrate "
                    f"with markers = SIDE_M."
                )
    if "stop" in d and d["stop"] <= d.get("start", 0):
        _fail(
            f"{where.key(sec, i, 'stop')}: {d['stop']} is not after start {d.get('start', 0)}; "
            f"stop is the first frame not read, so it must be larger than start."
        )
    if check_files:
        for k in ("marker_layout", "lens"):
            if k in d and not d[k].is_file():
                raise FileNotFoundError(
                    f"{where.key(sec, i, k)}: no such file {str(d[k])!r}; paths are relative "
                    f"to the job file's folder {str(folder)!r}."
                )


def _specification(where, d, present):
    sec = "specification"
    if not present:
        return None, None
    if "decision_rule" not in d:
        _missing(where, sec, None, "decision_rule", 'write decision_rule = "simple" or "guarded".')
    tol = "tolerance" in d
    lim = "lower" in d or "upper" in d
    if tol and lim:
        _fail(
            f"{where.key(sec, None, 'tolerance')}: give either tolerance (±, around "
            f"drag_coefficient) or lower/upper limits, not both."
        )
    try:
        if tol:
            if "drag_coefficient" not in d:
                _missing(where, sec, None, "drag_coefficient", "a tolerance needs the stated Cd.")
            spec = Specification.from_tolerance(
                d["drag_coefficient"], d["tolerance"], reference=d.get("reference", "")
            )
        elif lim:
            spec = Specification(
                d.get("lower"),
                d.get("upper"),
                nominal=d.get("drag_coefficient"),
                reference=d.get("reference", ""),
            )
        else:
            _missing(
                where,
                sec,
                None,
                "tolerance",
                "give tolerance (±) with drag_coefficient, or lower and/or upper limits.",
            )
    except ValueError as exc:
        if str(exc).startswith(where.path.name):
            raise
        _fail(f"{where.section(sec)}: {exc}")
    return spec, d["decision_rule"]


# ---------------------------------------------------------------------------------------------
# template
# ---------------------------------------------------------------------------------------------

TEMPLATE = """\
# fitdrag job file: one measurement, from specimen to certificate.
# Run it with:  fitdrag run THIS_FILE.toml
#
# The values below describe an invented, synthetic scenario (laboratory, customer and
# specimen are fictitious); replace every one of them with your own.
#
# Numbers are SI in the unit named in each comment (temperature in degrees Celsius,
# humidity in percent).  You may also write a string with a unit: mass = "2.7 g",
# pressure = "1008 hPa", diameter = "40 mm".  Every *_uncertainty is a STANDARD
# uncertainty (one standard deviation) in the same unit as its value; write 0 for an
# input you take as exact.  Paths are relative to this file's folder.

[laboratory]
name = "Example Flight Test Laboratory (synthetic)"
address = "1 Sample Road, Testville"
# accreditation = "accreditation body, number and scope, if this test is covered"

[test]
customer = "Fictitious Sports Goods Ltd"
customer_address = "99 Imaginary Lane, Nowhere"
order = "PO-0000"                 # customer's order or request reference
operator = "A. Tester"
approved_by = "B. Reviewer"
date = 2026-01-15                 # date of the test
notes = "Three throws by hand in still air, indoor hall."

[specimen]
id = "SYN-BALL-001"
description = "Training ball, 40 mm, smooth plastic shell (synthetic example)"
mass = 0.0027                     # kg
mass_uncertainty = 0.00001        # kg
diameter = 0.040                  # m  (for a sphere; otherwise give area and volume)
diameter_uncertainty = 0.00005    # m
# area = 0.00126                  # m^2, frontal area (non-spherical specimens)
# area_uncertainty = 0.00001      # m^2
# volume = 3.35e-5                # m^3
# volume_uncertainty = 3e-7       # m^3
# added_mass_coefficient = 0.5    # -, 0.5 for a sphere
# added_mass_coefficient_uncertainty = 0.0

[air]
temperature = 21.0                # degrees C
temperature_uncertainty = 0.3     # K
pressure = 100800                 # Pa (absolute)
pressure_uncertainty = 50         # Pa
relative_humidity = 45            # %
relative_humidity_uncertainty = 3 # %
# or, instead of the three above:
# density = 1.19                  # kg/m^3
# density_uncertainty = 0.005     # kg/m^3

[site]
# local acceleration of free fall; either gravity (+ gravity_uncertainty) or
# latitude [deg] and height [m] above sea level.  Without [site], standard gravity is
# used with an uncertainty covering the whole Earth.
latitude = 47.0                   # degrees
height = 400                      # m

[camera]
fps = 500                         # Hz, camera frame rate
fps_uncertainty = 0.05            # Hz
scale_relative_uncertainty = 0.002   # -, relative standard uncertainty of the track's
                                     #    length scale (calibration target); required
                                     #    with track CSVs.  Footage throws bring their
                                     #    own from their calibration; given here, this
                                     #    value is used for them instead.
# roll_uncertainty = 0.05         # deg, standard uncertainty of the horizontal (camera
                                  #    level); footage throws bring their own from the
                                  #    marker calibration; given here, it is used instead

# One [[throws]] table per throw; all throws share the drag coefficient.
[[throws]]
track = "throw1.csv"              # a track CSV: columns t [s], x, y [m] (world, y up)
# label = "throw 1"
# units = "m"                     # m, mm, cm or px (px needs scale = metres per pixel)
# y_down = false                  # true if the file's y axis points down (image rows)
# t_col = "t"
# x_col = "x"
# y_col = "y"

# [[throws]]
# track = "throw2.csv"

# A throw may be footage instead: it is tracked and calibrated as 'fitdrag track' does,
# at the frame rate of [camera].  Give exactly one of markers, scale or reference.
# [[throws]]
# footage = "throw3.avi"          # video file, or folder of numbered frames
# markers = 0.050                 # m, side of the ArUco markers' black square ("50 mm")
# marker_dictionary = "DICT_4X4_50"
# marker_layout = "wall.csv"      # id,x_m,y_m of each marker's lower-left corner [m]
# marker_frame = 0                # frame to find the markers in (default: start)
# scale = 0.00125                 # m/px, instead of markers: size of one pixel
# origin = "12,790"               # px (x right, y down): image point of the world origin
# rotation = 0.0                  # degrees, counter-clockwise on screen: true horizontal
# reference = "102.5,640,1180,655.5,1.000"   # instead: two image points [px], distance [m]
# scale_uncertainty = 0.001       # -, relative standard uncertainty of the known length
# lens = "lens.json"              # lens model from 'fitdrag calibrate-lens'
# start = 0                       # first frame to track
# stop = 400                      # frame to stop before (default: the end)

[specification]
drag_coefficient = 0.47           # stated Cd
tolerance = 0.03                  # +/- around the stated value (or give lower / upper)
decision_rule = "guarded"         # "simple" or "guarded" (guard band = U)
reference = "customer specification (synthetic example)"

[fit]
model = "constant"                # drag model
robust = true                     # reject gross outliers
noise = "auto"                    # "auto", "white" or "ar1"

[uncertainty]
monte_carlo = 0                   # trials of the Monte Carlo check (0 = off; e.g. 10000)
seed = 1

[output]
directory = "certificates"        # where the certificate, PNG, JSON and records go
number_prefix = "FD"              # certificate numbers look like FD-2026-000001
"""


def write_template(path: str | Path, *, force: bool = False) -> Path:
    """Write :data:`TEMPLATE` to ``path`` (no overwrite unless ``force``)."""
    from fitdrag.run.records import atomic_write_text

    path = Path(path)
    if path.exists() and not force:
        raise ValueError(f"{path}: already exists; choose another name or pass --force.")
    if not path.parent.is_dir():
        raise FileNotFoundError(f"{path.parent}: no such folder; create it first.")
    atomic_write_text(path, TEMPLATE)
    return path
