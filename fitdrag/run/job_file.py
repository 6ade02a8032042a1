"""Job files: one TOML file describes a whole measurement, from specimen to certificate.

This module reads and validates a job file into a :class:`fitdrag.run.job.Job` (one frozen
dataclass per section, parsed once here); the keys and the checking of each value are in
:mod:`fitdrag.run.job_keys`.

A job file has the sections ``[laboratory]``, ``[test]``, ``[specimen]``, ``[air]``,
``[camera]``, one ``[[throws]]`` table per throw, and optionally ``[site]`` (gravity),
``[specification]`` (the stated drag coefficient and the decision rule), ``[fit]`` (fit
options), ``[uncertainty]`` (Monte Carlo check) and ``[output]``.  ``fitdrag new-job PATH``
writes a commented template (:data:`fitdrag.run.job_template.TEMPLATE`).

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
:data:`fitdrag.run.job_keys.CSV_OPTIONS`) or ``footage = "file.avi"`` (a video file or a folder of numbered
frames) with the options :data:`fitdrag.run.job_keys.FOOTAGE_OPTIONS` of
:func:`fitdrag.video.tracking.track_footage`: ``start``, ``stop`` (frames), exactly one
calibration of ``scale`` [m/px], ``reference`` ("X1,Y1,X2,Y2,METRES": two image points [px]
and their distance [m]) or ``markers`` (the ArUco markers' side [m]); ``origin`` ("X,Y" [px],
y down) and ``rotation`` [deg] with scale or reference; ``marker_dictionary``,
``marker_layout`` (a file) and ``marker_frame`` with markers; ``lens`` (a lens file) and
``scale_uncertainty`` (relative standard uncertainty of the known length [1]).  The frame
rate of footage is ``[camera] fps``.
"""

from __future__ import annotations

import dataclasses
import math
import tomllib
from pathlib import Path
from typing import Any

from fitdrag.errors import InputError, InputFileNotFoundError
from fitdrag.report.content import Laboratory, TestDetails
from fitdrag.run.job import (
    AirSection,
    CameraSection,
    FitSection,
    Job,
    Measured,
    OutputSection,
    SiteSection,
    SpecimenSection,
    Throw,
    UncertaintySection,
    ViewSource,
)
from fitdrag.run.job_keys import (
    CSV_OPTIONS,
    FOOTAGE_CALIBRATIONS,
    FOOTAGE_OPTIONS,
    REQUIRED,
    REQUIRED_SECTIONS,
    SECTIONS,
    Where,
    fail,
    measured,
    missing,
    parse_table,
)
from fitdrag.uncertainty.decision import Specification
from fitdrag.units import unit_of_text, unit_symbol

__all__ = [
    "NORMAL_GRAVITY_UNCERTAINTY",
    "UNKNOWN_SITE_GRAVITY_HALF_WIDTH",
    "job_from_data",
    "load_job",
]


#: Gravity assumed when a job gives no [site]: standard gravity, with a rectangular
#: distribution covering normal gravity from the equator to the poles at sea level
#: (9.780 to 9.832 m/s², WGS84 normal gravity formula). [m/s²]
UNKNOWN_SITE_GRAVITY_HALF_WIDTH = 0.026

#: Standard uncertainty given to normal gravity computed from latitude and height, for the
#: local gravity anomaly, which the normal-gravity formula ignores (typical anomalies are
#: tens of mGal; 1 mGal = 1e-5 m/s²; from memory). [m/s²]
NORMAL_GRAVITY_UNCERTAINTY = 5e-4


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
        raise InputError(f"{path}: is a folder; give the path of a job file (.toml).")
    if not path.exists():
        raise InputFileNotFoundError(
            f"{path}: no such job file; create one with 'fitdrag new-job {path}'."
        )
    raw_bytes = path.read_bytes()
    try:
        text = raw_bytes.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(
            f"{path.name}: not UTF-8 text ({exc}); save the job file as UTF-8."
        ) from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{path.name}: not valid TOML: {exc}.") from None
    path = path.resolve()
    return job_from_data(data, text, path, Where(path, text), path.parent, check_files)


def job_from_data(data: dict, text: str, path: Path, where: Where, folder: Path,
                  check_files: bool = True) -> Job:  # fmt: skip
    """A :class:`Job` from a job file's parsed TOML ``data`` (see :func:`load_job`).

    ``where`` names the place of an error (a lot file gives its own, naming the specimen);
    relative paths resolve against ``folder``; ``path`` and ``text`` are kept in the job.
    """
    for sec, value in data.items():
        if sec not in SECTIONS:
            valid = ", ".join("[[throws]]" if s == "throws" else f"[{s}]" for s in SECTIONS
                              if s != "throws.views")  # fmt: skip
            if isinstance(value, dict | list):
                fail(f"{where.section(sec)}: unknown section; valid sections are {valid}.")
            n = where.keys.get(("", None, sec))
            loc = f"{path.name}, line {n}" if n else path.name
            fail(f"{loc}: {sec}: unknown key outside any section; valid sections are {valid}.")
        if sec == "throws":
            if not isinstance(value, list):
                fail(f"{where.section(sec)}: write each throw as a [[throws]] table.")
        elif not isinstance(value, dict):
            n = where.keys.get(("", None, sec))
            loc = f"{path.name}, line {n}" if n else path.name
            fail(f"{loc}: {sec}: expected a [{sec}] section, got a value.")
    for sec in REQUIRED_SECTIONS:
        if sec not in data:
            name = "[[throws]]" if sec == "throws" else f"[{sec}]"
            fail(f"{path.name}: section {name} is missing; see 'fitdrag new-job' for a template.")

    parsed = {}
    for sec in SECTIONS:
        if sec in ("throws", "throws.views"):
            continue
        parsed[sec] = parse_table(where, sec, None, data.get(sec, {}), folder)
        for key in REQUIRED.get(sec, ()):
            if key not in parsed[sec] and sec in data:
                missing(where, sec, None, key, _REQUIRED_HINT.get((sec, key), "it is required."))

    specimen = _specimen(where, parsed["specimen"])
    raw_specimen = data.get("specimen") or {}
    shown = tuple((k, unit_of_text(raw_specimen[k])) for k in ("mass", "diameter", "area", "volume")
                  if isinstance(raw_specimen.get(k), str) and unit_of_text(raw_specimen[k]))  # fmt: skip
    specimen = dataclasses.replace(specimen, shown_units=shown)
    air = _air(where, parsed["air"])
    raw_air = data.get("air") or {}
    if isinstance(raw_air.get("pressure"), str) and unit_of_text(raw_air["pressure"]):
        air = dataclasses.replace(air, shown_units=(("pressure",
                                                     unit_of_text(raw_air["pressure"])),))  # fmt: skip
    site = _site(where, parsed["site"])
    camera = _camera(where, parsed["camera"])
    throws = _throws(where, data["throws"], folder, check_files)
    if any(t.kind == "track" for t in throws) and camera.scale_relative_uncertainty is None:
        missing(
            where,
            "camera",
            None,
            "scale_relative_uncertainty",
            "give the relative standard uncertainty of the track's length scale (e.g. 0.002), "
            "or 0 if the track's positions are exact.",
        )
    if camera.scale_relative_uncertainty is None:
        # no silent exact calibration: each planar footage throw states its length's uncertainty
        for i, th in enumerate(throws):
            if th.kind == "footage" and "scale_uncertainty" not in th.options:
                missing(where, "throws", i, "scale_uncertainty", SCALE_UNCERTAINTY_FIX
                        + " Or state [camera] scale_relative_uncertainty for every throw.")  # fmt: skip
    _planar_statement(where, camera, throws)
    _one_geometry(where, throws)
    spec, rule = _specification(where, parsed["specification"], "specification" in data)
    fit = FitSection(**parsed["fit"])
    if fit.model is not None:
        from fitdrag.physics.registry import drag_model_names

        names = drag_model_names()
        if fit.model not in names:
            fail(
                f"{where.key('fit', None, 'model')}: unknown drag model {fit.model!r}; use "
                f"one of {', '.join(names)}."
            )
    output = dict(parsed["output"])
    output.setdefault("directory", folder)
    if "number_prefix" in output:
        from fitdrag.run.records import check_prefix

        try:
            check_prefix(output["number_prefix"])
        except ValueError as exc:
            fail(f"{where.key('output', None, 'number_prefix')}: {exc}")
    lab, test = parsed["laboratory"], parsed["test"]
    return Job(
        path=path,
        text=text,
        laboratory=Laboratory(**lab, key_order=tuple(lab)),
        test=TestDetails(**test, key_order=tuple(test)),
        specimen=specimen,
        air=air,
        site=site,
        camera=camera,
        throws=throws,
        specification=spec,
        decision_rule=rule,
        fit=fit,
        uncertainty=UncertaintySection(**parsed["uncertainty"]),
        output=OutputSection(**output),
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


#: Density of osmium, the densest element, at 20 °C (CRC Handbook of Chemistry and Physics,
#: 97th ed., 2016, "Physical constants of inorganic compounds": 22.59 g/cm³): a specimen
#: denser than this is a unit slip. [kg/m³]
DENSEST_SOLID = 22_590.0

#: Largest relative standard uncertainty of the specimen's mass, diameter, area or volume taken
#: without confirmation: a larger one is more often a unit slip (an uncertainty in kg beside a
#: mass in g) than a real weighing or gauging (common practice, no source). [1]
PLAUSIBLE_RELATIVE_UNCERTAINTY = 0.10


def _plausible_uncertainty(where, d, m: Measured, key: str) -> None:
    """Refuse u/value above :data:`PLAUSIBLE_RELATIVE_UNCERTAINTY` unless the job confirms it
    with ``[specimen] large_uncertainty_confirmed = true``."""
    if d.get("large_uncertainty_confirmed") or not m.value > 0:
        return
    rel = m.uncertainty / m.value
    if rel > PLAUSIBLE_RELATIVE_UNCERTAINTY:
        fail(
            f"{where.key('specimen', None, key + '_uncertainty')}: {m.uncertainty:.3g} {m.unit} "
            f"is {100 * rel:.0f} % of the {key} {m.value:.4g} {m.unit} (more than "
            f"{100 * PLAUSIBLE_RELATIVE_UNCERTAINTY:.0f} %): a unit slip? A bare number is in "
            f'the unit of its value; write e.g. "0.02 g". If it is right, confirm it with '
            f"large_uncertainty_confirmed = true in [specimen]."
        )


def _specimen(where, d):
    sec = "specimen"
    out: dict[str, Any] = {"id": d["id"], "description": d["description"]}
    out["mass"] = measured(where, sec, d, "mass", "kg", "")
    if out["mass"].uncertainty >= out["mass"].value:
        fail(
            f"{where.key(sec, None, 'mass_uncertainty')}: {out['mass'].uncertainty:g} kg is not "
            f"smaller than the mass {out['mass'].value:g} kg; check the units."
        )
    _plausible_uncertainty(where, d, out["mass"], "mass")
    has_d = "diameter" in d
    has_av = "area" in d or "volume" in d
    if has_d and has_av:
        fail(
            f"{where.key(sec, None, 'diameter')}: give either diameter (a sphere) or area and "
            f"volume (any shape), not both."
        )
    if has_d:
        out["diameter"] = measured(where, sec, d, "diameter", "m", "")
        _plausible_uncertainty(where, d, out["diameter"], "diameter")
        if "length" in d:
            fail(
                f"{where.key(sec, None, 'length')}: a sphere's reference length is its "
                f"diameter; remove length or describe the specimen by area and volume."
            )
    elif has_av:
        for key, unit in (("area", "m**2"), ("volume", "m**3")):
            out[key] = measured(
                where,
                sec,
                d,
                key,
                unit,
                f"give the specimen's {key} in {unit_symbol(unit)} (with {key}_uncertainty).",
            )
        for key in ("area", "volume"):
            _plausible_uncertainty(where, d, out[key], key)
        if "length" in d:
            out["length"] = d["length"]
    else:
        missing(
            where,
            sec,
            None,
            "diameter",
            "give the diameter in m for a sphere, or area [m²] and volume [m³] for any shape.",
        )
    for key in list(d):
        base = key.removesuffix("_uncertainty")
        if key.endswith("_uncertainty") and base not in d:
            fail(f"{where.key(sec, None, key)}: given without {base}; add {base} or remove it.")
    volume = (math.pi / 6.0 * out["diameter"].value ** 3 if "diameter" in out
              else out["volume"].value)  # fmt: skip
    density = out["mass"].value / volume
    if density > DENSEST_SOLID:
        key = "diameter" if "diameter" in out else "volume"
        fail(
            f"{where.key(sec, None, 'mass')}: {out['mass'].value:.4g} kg in a {key} of "
            f"{out[key].value:.4g} {out[key].unit} is {density:.3g} kg/m³, denser than any "
            f"solid (osmium, {DENSEST_SOLID:g} kg/m³): a unit slip? Give the mass in kg "
            f'(e.g. 0.024) or with its unit ("24 g"), and the {key} likewise.'
        )
    if "added_mass_coefficient" in d and "added_mass_coefficient_uncertainty" not in d:
        missing(where, sec, None, "added_mass_coefficient_uncertainty",
                "give the standard uncertainty of the stated added-mass coefficient (write 0 if "
                "you take it as exact), or leave both out for a sphere's 0.5.")  # fmt: skip
    ca = d.get("added_mass_coefficient", 0.5)
    out["added_mass_coefficient"] = Measured(
        ca, d.get("added_mass_coefficient_uncertainty", 0.0), ""
    )
    return SpecimenSection(**out)


#: Why a job states the air's movement, and how.
AIR_SPEED_FIX = (
    "give the standard uncertainty of the air's speed along the flight in m/s (the fit takes "
    "the air as still, or as the stated [fit] wind; a 0.1 m/s draft moves Cd of a ball at "
    "9 m/s by about 2 %), e.g. air_speed_uncertainty = 0.05 from an anemometer near the "
    "flight path; 0 takes the air as exactly still (allowed, with a warning)."
)


def _air(where, d):
    sec = "air"
    if "air_speed_uncertainty" not in d:
        missing(where, sec, None, "air_speed_uncertainty", AIR_SPEED_FIX)
    if "viscosity_uncertainty" in d and "viscosity" not in d:
        fail(
            f"{where.key(sec, None, 'viscosity_uncertainty')}: given without viscosity; add "
            f"viscosity or remove it."
        )
    air = _air_state(where, d)
    return dataclasses.replace(air, air_speed_uncertainty=d["air_speed_uncertainty"])


def _air_state(where, d):
    sec = "air"
    thermo = [k for k in ("temperature", "pressure", "relative_humidity") if k in d]
    if "density" in d:
        if len(thermo) == 3:
            fail(
                f"{where.key(sec, None, 'density')}: give either density or temperature, "
                f"pressure and relative_humidity, not both (the density is computed from them)."
            )
        out = {"density": measured(where, sec, d, "density", "kg/m**3", "")}
        if "temperature" in d:
            out["temperature"] = Measured(d["temperature"], d.get("temperature_uncertainty", 0.0),
                                          "°C")  # fmt: skip
        if "viscosity" in d:
            out["viscosity"] = measured(where, sec, d, "viscosity", "Pa*s", "")
        for k in ("pressure", "relative_humidity"):
            if k in d:
                out[k] = Measured(
                    d[k], d.get(f"{k}_uncertainty", 0.0), unit_symbol(SECTIONS[sec][k].unit)
                )
        return AirSection(**out)
    if not thermo:
        missing(
            where,
            sec,
            None,
            "temperature",
            "give temperature [°C], pressure [Pa] and relative_humidity [%] (each with "
            "*_uncertainty), or density [kg/m³] with density_uncertainty.",
        )
    for k in ("temperature", "pressure", "relative_humidity"):
        if k not in d:
            missing(where, sec, None, k, f"give {k} with {k}_uncertainty, or give density.")
    if "viscosity" in d:
        fail(
            f"{where.key(sec, None, 'viscosity')}: with temperature given, the viscosity is "
            f"computed (Sutherland); remove viscosity or give density instead."
        )
    return AirSection(
        temperature=measured(where, sec, d, "temperature", "delta_degC", ""),
        pressure=measured(where, sec, d, "pressure", "Pa", ""),
        relative_humidity=measured(where, sec, d, "relative_humidity", "percent", ""),
    )


def _site(where, d):
    sec = "site"
    if "gravity" in d:
        if "latitude" in d or "height" in d:
            fail(
                f"{where.key(sec, None, 'gravity')}: give either gravity or latitude and "
                f"height, not both."
            )
        g = measured(where, sec, d, "gravity", "m/s**2", "")
        return SiteSection(gravity=g, gravity_source="local gravity (stated)")
    if "gravity_uncertainty" in d:
        fail(f"{where.key(sec, None, 'gravity_uncertainty')}: given without gravity.")
    if "latitude" in d:
        from fitdrag.physics.air import local_gravity

        h = d.get("height", 0.0)
        g = float(local_gravity(d["latitude"], h))
        return SiteSection(
            gravity=Measured(g, NORMAL_GRAVITY_UNCERTAINTY, "m/s²"),
            gravity_source=f"normal gravity at latitude {d['latitude']:g}°, height {h:g} m",
        )
    if "height" in d:
        fail(f"{where.key(sec, None, 'height')}: given without latitude.")
    from fitdrag.physics.air import STANDARD_GRAVITY

    return SiteSection(
        gravity=Measured(
            STANDARD_GRAVITY, UNKNOWN_SITE_GRAVITY_HALF_WIDTH / math.sqrt(3.0), "m/s²"
        ),
        gravity_distribution="rectangular",
        gravity_source="standard gravity; site gravity not stated (rectangular ±0.026 m/s²)",
    )


def _camera(where, d):
    out = {"fps": measured(where, "camera", d, "fps", "Hz", "")}
    if out["fps"].uncertainty >= out["fps"].value:
        fail(
            f"{where.key('camera', None, 'fps_uncertainty')}: {out['fps'].uncertainty:g} Hz is "
            f"not smaller than the frame rate; check the value."
        )
    if "scale_relative_uncertainty" in d:
        out["scale_relative_uncertainty"] = d["scale_relative_uncertainty"]
    if "roll_uncertainty" in d:
        out["roll_uncertainty"] = d["roll_uncertainty"]
    if "distance" in d:
        out["distance"] = measured(where, "camera", d, "distance", "m", "")
        if out["distance"].uncertainty >= out["distance"].value:
            fail(
                f"{where.key('camera', None, 'distance_uncertainty')}: "
                f"{out['distance'].uncertainty:g} m is not smaller than the distance "
                f"{out['distance'].value:g} m; check the value."
            )
    elif "distance_uncertainty" in d:
        fail(f"{where.key('camera', None, 'distance_uncertainty')}: given without distance.")
    if "out_of_plane_uncertainty" in d:
        out["out_of_plane_uncertainty"] = d["out_of_plane_uncertainty"]
    readout = _readout(where, "camera", None, d)
    if readout is not None:
        out["readout_time"] = readout
    return CameraSection(**out)


def _readout(where, sec, idx, d) -> Measured | None:
    """``readout_time`` with ``readout_time_uncertainty`` (0 if left out with a global
    shutter), or None when neither is given."""
    if "readout_time" not in d:
        if "readout_time_uncertainty" in d:
            fail(
                f"{where.key(sec, idx, 'readout_time_uncertainty')}: given without "
                f"readout_time; give the readout time too (0 for a global shutter)."
            )
        return None
    r = d["readout_time"]
    if "readout_time_uncertainty" not in d:
        if r > 0:
            missing(where, sec, idx, "readout_time_uncertainty",
                    "give the standard uncertainty of the readout time in s (e.g. from the "
                    'camera\'s data sheet: "0.05 ms"), or 0 if it is exact.')  # fmt: skip
        return Measured(r, 0.0, "s")
    return Measured(r, d["readout_time_uncertainty"], "s")


#: Why a track CSV needs the camera's distance and the out-of-plane uncertainty.
PLANAR_WHY = (
    "a track file is a planar measurement, and a flight out of the image plane biases Cd "
    "through perspective (about -30 % at 1° for a light ball 3 m from the camera) without "
    "the fit noticing; "
)

PLANAR_FIX = (
    "give the camera's distance to the flight plane with its standard uncertainty "
    "(distance = 3.0, distance_uncertainty = 0.05, in m) and the standard uncertainty of the "
    "flight's angle to the image plane (out_of_plane_uncertainty = 0.5, in degrees); the "
    "uncertainty budget then carries both."
)


def _planar_statement(where, camera, throws) -> None:
    """Refuse track CSV throws without the camera distance and the out-of-plane uncertainty
    (footage throws take their geometry from their calibration and do not use them)."""
    if not any(t.kind == "track" for t in throws):
        return
    for key, given in (
        ("distance", camera.distance is not None),
        ("out_of_plane_uncertainty", camera.out_of_plane_uncertainty is not None),
    ):
        if not given:
            missing(where, "camera", None, key, PLANAR_WHY + PLANAR_FIX)


def _throws(where, items, folder, check_files):
    out = []
    view_count = 0  # [[throws.views]] tables are numbered over the whole file
    if not items:
        fail(f'{where.path.name}: no [[throws]]; add at least one [[throws]] with track = "...".')
    for i, t in enumerate(items):
        if not isinstance(t, dict):
            fail(f"{where.section('throws', i)}: expected a table.")
        if "fps" in t:
            fail(
                f"{where.key('throws', i, 'fps')}: unknown key; every throw's frame rate is "
                f"[camera] fps (with fps_uncertainty); remove fps here."
            )
        if "views" in t:
            out.append(_views_throw(where, i, t, folder, check_files, view_count))
            view_count += len(t["views"]) if isinstance(t["views"], list) else 0
            continue
        d = parse_table(where, "throws", i, t, folder)
        has_t, has_f = "track" in d, "footage" in d
        if has_t == has_f:
            fail(
                f'{where.section("throws", i)}: give exactly one of track = "file.csv" or '
                f'footage = "file.avi".'
            )
        kind = "track" if has_t else "footage"
        p = d.pop(kind)
        line = where.keys.get(("throws", i, kind))
        if check_files:
            if not p.exists():
                raise InputFileNotFoundError(
                    f"{where.key('throws', i, kind)}: no such file {str(p)!r}; paths are "
                    f"relative to the job file's folder {str(folder)!r}."
                )
            if kind == "track" and p.is_dir():
                fail(f"{where.key('throws', i, kind)}: {str(p)!r} is a folder, not a CSV file.")
        label = d.pop("label", None) or p.name
        if kind == "footage":
            extra = sorted(k for k in d if k in CSV_OPTIONS and k not in FOOTAGE_OPTIONS)
            if extra:
                fail(
                    f"{where.key('throws', i, extra[0])}: is a track CSV option; footage "
                    f"throws do not take it."
                )
            _footage_options(where, i, d, folder, check_files)
        else:
            extra = sorted(k for k in d if k in FOOTAGE_OPTIONS and k not in CSV_OPTIONS)
            if extra:
                fail(
                    f"{where.key('throws', i, extra[0])}: is a footage option; track CSV "
                    f'throws do not take it (use it with footage = "file.avi").'
                )
        out.append(Throw(kind=kind, path=p, label=label, line=line, **d))
    return tuple(out)


#: What a view measured in 3-D needs: the camera's intrinsics and its pose from the board.
VIEW_NEEDS = ("lens", "markers", "marker_layout")


def _views_throw(where, i, t, folder, check_files, first) -> Throw:
    """A ``[[throws]]`` table with ``[[throws.views]]``: one camera's footage each."""
    sec = "throws"
    views = t["views"]
    if not isinstance(views, list) or not views or not all(isinstance(v, dict) for v in views):
        fail(
            f"{where.section(sec, i)}: views must be [[throws.views]] tables, one per camera, "
            f'each with footage = "file.avi", lens, markers and marker_layout.'
        )
    rest = {k: v for k, v in t.items() if k != "views"}
    extra = sorted(k for k in rest if k != "label")
    if extra:
        fail(
            f"{where.key(sec, i, extra[0])}: a throw with [[throws.views]] takes only label; "
            f"give the footage and its calibration in each view."
        )
    label = rest.get("label")
    if label is not None and not isinstance(label, str):
        fail(f"{where.key(sec, i, 'label')}: expected text in quotes, got {label!r}.")
    out = []
    vs = "throws.views"
    for j, raw in enumerate(views):
        gi = first + j
        d = parse_table(where, vs, gi, raw, folder)
        if ("footage" in d) == ("track" in d):
            fail(
                f'{where.section(vs, gi)}: give exactly one of footage = "cam1.avi" or '
                f'track = "cam1.csv" (a track file written by fitdrag track with a camera).'
            )
        kind = "footage" if "footage" in d else "track"
        needs = VIEW_NEEDS + ("scale_uncertainty",) if kind == "footage" else ("lens",)
        for k in needs:
            if k not in d:
                missing(where, vs, gi, k, _VIEW_HINT.get(k, SCALE_UNCERTAINTY_FIX))
        if kind == "track":
            extra = sorted(k for k in d if k in _FOOTAGE_ONLY)
            if extra:
                fail(
                    f"{where.key(vs, gi, extra[0])}: applies to footage; a track file states "
                    f"its camera (pose, readout) in its header, as fitdrag track wrote it."
                )
        if "stop" in d and d["stop"] <= d.get("start", 0):
            fail(
                f"{where.key(vs, gi, 'stop')}: {d['stop']} is not after start "
                f"{d.get('start', 0)}; stop is the first frame not read."
            )
        if check_files:
            for k in (kind, "lens", "marker_layout"):
                if k in d and (not d[k].exists() or (k != "footage" and not d[k].is_file())):
                    raise InputFileNotFoundError(
                        f"{where.key(vs, gi, k)}: no such file {str(d[k])!r}; paths are "
                        f"relative to the job file's folder {str(folder)!r}."
                    )
        offset = None
        if "time_offset" in d:
            if j == 0 and d["time_offset"] != 0:
                fail(
                    f"{where.key(vs, gi, 'time_offset')}: the first view is the time reference "
                    f"(offset 0); give the other views' offsets relative to it."
                )
            if j > 0 and "time_offset_uncertainty" not in d:
                missing(where, vs, gi, "time_offset_uncertainty",
                        "give the standard uncertainty of the stated time offset in s (e.g. "
                        '"0.01 ms"; write 0 if you take it as exact), or leave time_offset out '
                        "to have it estimated.")  # fmt: skip
            offset = Measured(d["time_offset"], d.get("time_offset_uncertainty", 0.0), "s")
        elif "time_offset_uncertainty" in d:
            fail(
                f"{where.key(vs, gi, 'time_offset_uncertainty')}: given without time_offset; "
                f"give the offset too, or leave both out to have it estimated."
            )
        out.append(
            ViewSource(
                footage=d.get("footage"), lens=d["lens"], markers=d.get("markers"),
                marker_layout=d.get("marker_layout"), label=d.get("label") or d[kind].name,
                line=where.keys.get((vs, gi, kind)), track=d.get("track"),
                readout_time=_readout(where, vs, gi, d), time_offset=offset,
                scale_uncertainty=d.get("scale_uncertainty"), start=d.get("start"),
                stop=d.get("stop"), marker_dictionary=d.get("marker_dictionary"),
                marker_frame=d.get("marker_frame"),
            )
        )  # fmt: skip
    return Throw(
        kind="views",
        path=out[0].footage or out[0].track,
        label=(label or "").strip() or out[0].label,
        line=where.headers.get((sec, i)),
        views=tuple(out),
    )


#: Keys of a view that only footage takes (a track file's header states the camera).
_FOOTAGE_ONLY = ("markers", "marker_layout", "marker_dictionary", "marker_frame", "start",
                 "stop", "scale_uncertainty", "readout_time", "readout_time_uncertainty")  # fmt: skip

_VIEW_HINT = {
    "footage": 'give this camera\'s footage, e.g. footage = "cam1.avi".',
    "lens": 'give the camera\'s lens file from fitdrag calibrate-lens, e.g. lens = "cam1.json".',
    "markers": 'give the side of the markers\' black square, e.g. markers = "50 mm".',
    "marker_layout": 'give the marker board\'s layout file, e.g. marker_layout = "board.csv".',
}


def _one_geometry(where, throws) -> None:
    """Refuse a job that mixes throws measured in 3-D with planar ones, and a lens without
    the marker board that gives the camera's pose."""
    for i, th in enumerate(throws):
        if th.kind == "footage" and th.lens is not None:
            for k in ("markers", "marker_layout"):
                if getattr(th, k) is None:
                    fail(
                        f"{where.key('throws', i, 'lens')}: with a lens the throw is measured "
                        f"in 3-D, which needs the camera's pose from the marker board; give "
                        f"markers = SIDE_M and marker_layout = FILE (or leave the lens out to "
                        f"measure in the markers' plane)."
                    )
    kinds = {th.measured_in_3d for th in throws}
    if len(kinds) > 1:
        i = next(k for k, th in enumerate(throws) if not th.measured_in_3d)
        fail(
            f"{where.section('throws', i)}: this throw is measured in the plane, others in 3-D "
            f"(footage with a lens, or [[throws.views]]); measure every throw of a job the same "
            f"way: give each footage its lens, markers and marker_layout, or none a lens."
        )


#: How to give a footage throw's calibration length uncertainty (required: no silent exact
#: marker side, reference distance or scale).
SCALE_UNCERTAINTY_FIX = (
    "give the relative standard uncertainty of the calibration's known length (the "
    "markers' side, the reference distance or the scale), e.g. scale_uncertainty = 0.001 "
    "(write 0 if you take it as exact)."
)


def _footage_options(where, i, d, folder, check_files) -> None:
    """Check a footage throw's calibration options (exactly one calibration, and only the
    options that go with it) and that its lens and layout files exist."""
    sec = "throws"
    given = [k for k in FOOTAGE_CALIBRATIONS if k in d]
    if not given:
        fail(
            f"{where.key(sec, i, 'footage')}: no calibration; give exactly one of "
            f'scale = M_PER_PX (with origin = "X,Y" in px), '
            f'reference = "X1,Y1,X2,Y2,METRES" or markers = SIDE_M (the ArUco markers\' '
            f"side in m)."
        )
    if len(given) > 1:
        first, second = sorted(given, key=lambda k: where.keys.get((sec, i, k)) or 0)[:2]
        fail(
            f"{where.key(sec, i, second)}: {first} is given too; give exactly one of scale, "
            f"reference or markers."
        )
    how = given[0]
    if how == "markers":
        for k in ("origin", "rotation"):
            if k in d:
                fail(
                    f"{where.key(sec, i, k)}: applies to scale and reference only; with markers "
                    f"the markers set the origin and the horizontal (give a marker_layout for a "
                    f"world frame of your own)."
                )
    else:
        for k in ("marker_dictionary", "marker_layout", "marker_frame"):
            if k in d:
                fail(
                    f"{where.key(sec, i, k)}: applies to markers only; remove it or calibrate "
                    f"with markers = SIDE_M."
                )
    if "stop" in d and d["stop"] <= d.get("start", 0):
        fail(
            f"{where.key(sec, i, 'stop')}: {d['stop']} is not after start {d.get('start', 0)}; "
            f"stop is the first frame not read, so it must be larger than start."
        )
    if check_files:
        for k in ("marker_layout", "lens"):
            if k in d and not d[k].is_file():
                raise InputFileNotFoundError(
                    f"{where.key(sec, i, k)}: no such file {str(d[k])!r}; paths are relative "
                    f"to the job file's folder {str(folder)!r}."
                )


def _specification(where, d, present):
    sec = "specification"
    if not present:
        return None, None
    if "decision_rule" not in d:
        missing(where, sec, None, "decision_rule", 'write decision_rule = "simple" or "guarded".')
    tol = "tolerance" in d
    lim = "lower" in d or "upper" in d
    if tol and lim:
        fail(
            f"{where.key(sec, None, 'tolerance')}: give either tolerance (±, around "
            f"drag_coefficient) or lower/upper limits, not both."
        )
    try:
        if tol:
            if "drag_coefficient" not in d:
                missing(where, sec, None, "drag_coefficient", "a tolerance needs the stated Cd.")
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
            missing(
                where,
                sec,
                None,
                "tolerance",
                "give tolerance (±) with drag_coefficient, or lower and/or upper limits.",
            )
    except ValueError as exc:
        if str(exc).startswith(where.path.name):
            raise
        fail(f"{where.section(sec)}: {exc}")
    return spec, d["decision_rule"]
