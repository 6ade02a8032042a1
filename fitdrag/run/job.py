"""A job: one measurement, from specimen to certificate, as frozen dataclasses.

:func:`fitdrag.run.job_file.load_job` reads and validates a job file (TOML) into a
:class:`Job`, one dataclass per section: the laboratory and the test
(:class:`fitdrag.report.content.Laboratory`, :class:`fitdrag.report.content.TestDetails`),
:class:`SpecimenSection`, :class:`AirSection`, :class:`SiteSection`, :class:`CameraSection`,
one :class:`Throw` per ``[[throws]]`` table, the specification
(:class:`fitdrag.uncertainty.decision.Specification`), :class:`FitSection`,
:class:`UncertaintySection` and :class:`OutputSection`.  Values are SI numbers (temperature
in °C, relative humidity in %); a value with an uncertainty is a :class:`Measured`.

The job builds the objects of the fit (:meth:`Job.make_specimen`, :meth:`Job.make_air`,
:meth:`Job.gravity`, :meth:`Job.fit_options`) and the inputs of the uncertainty budget
(:meth:`Job.input_quantities`).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field, fields
from pathlib import Path
from typing import Any

from fitdrag.report.content import Estimate, Laboratory, TestDetails
from fitdrag.uncertainty.decision import Specification
from fitdrag.uncertainty.gum import InputQuantity

__all__ = [
    "AirSection",
    "CameraSection",
    "FitSection",
    "Job",
    "Measured",
    "OutputSection",
    "SiteSection",
    "SpecimenSection",
    "Throw",
    "UncertaintySection",
    "ViewSource",
]


@dataclass(frozen=True)
class Measured:
    """A value with its standard uncertainty, both in SI (temperature in °C, humidity in %).

    Attributes
    ----------
    value : float
        The value. [unit]
    uncertainty : float
        Its standard uncertainty. [unit; for a temperature, a temperature difference]
    unit : str
        The unit's symbol ("" for a pure number).
    """

    value: float
    uncertainty: float
    unit: str

    def input(self, name: str, description: str = "", **kw) -> InputQuantity:
        """The value as an input quantity of the uncertainty budget."""
        return InputQuantity(
            name, self.value, self.uncertainty, self.unit, description=description, **kw
        )

    def estimate(self) -> Estimate:
        """Value and standard uncertainty, as the certificate states them."""
        return Estimate(self.value, self.uncertainty)


@dataclass(frozen=True)
class SpecimenSection:
    """``[specimen]``: a sphere (by diameter) or a body (by area and volume).

    Attributes
    ----------
    id, description : str
        Identification and description of the specimen.
    mass : Measured
        Mass. [kg]
    added_mass_coefficient : Measured
        Added-mass coefficient (0.5 for a sphere unless stated). [-]
    diameter : Measured or None
        Diameter of a sphere. [m]
    area, volume : Measured or None
        Frontal area [m²] and volume [m³] of a body.
    length : float or None
        Reference length of a body for the Reynolds number. [m]
    """

    id: str
    description: str
    mass: Measured
    added_mass_coefficient: Measured
    diameter: Measured | None = None
    area: Measured | None = None
    volume: Measured | None = None
    length: float | None = None
    #: The units the job wrote mass, diameter, area or volume in ("g", "mm"), by key: the
    #: certificate shows them so.
    shown_units: tuple[tuple[str, str], ...] = ()

    @property
    def shape(self) -> str:
        """``"sphere"`` (given by diameter) or ``"body"`` (given by area and volume)."""
        return "sphere" if self.diameter is not None else "body"


@dataclass(frozen=True)
class AirSection:
    """``[air]``: temperature [°C], pressure [Pa] and relative humidity [%], or the density.

    Attributes
    ----------
    temperature : Measured or None
        Air temperature. [°C]
    pressure : Measured or None
        Absolute pressure. [Pa]
    relative_humidity : Measured or None
        Relative humidity. [%]
    density : Measured or None
        Air density, when stated instead of computed. [kg/m³]
    viscosity : Measured or None
        Dynamic viscosity with its standard uncertainty, when stated (with density
        only). [Pa s]
    air_speed_uncertainty : float or None
        Standard uncertainty of the still-air assumption: the air's speed along the flight
        (estimate 0, or the stated wind). [m/s]
    """

    temperature: Measured | None = None
    pressure: Measured | None = None
    relative_humidity: Measured | None = None
    density: Measured | None = None
    viscosity: Measured | None = None
    air_speed_uncertainty: float | None = None
    #: The unit the job wrote the pressure in ("hPa"): the certificate shows it so.
    shown_units: tuple[tuple[str, str], ...] = ()


@dataclass(frozen=True)
class SiteSection:
    """``[site]``: the local acceleration of free fall and where it comes from.

    Attributes
    ----------
    gravity : Measured
        Acceleration of free fall. [m/s²]
    gravity_source : str
        Where it comes from, in words.
    gravity_distribution : str
        Distribution of its uncertainty in the budget ("normal" or "rectangular").
    """

    gravity: Measured
    gravity_source: str
    gravity_distribution: str = "normal"


@dataclass(frozen=True)
class CameraSection:
    """``[camera]``: frame rate and the uncertainties of the image geometry.

    Attributes
    ----------
    fps : Measured
        Frame rate. [Hz]
    scale_relative_uncertainty : float or None
        Relative standard uncertainty of the length scale, when stated. [1]
    roll_uncertainty : float or None
        Standard uncertainty of the camera's horizontal, when stated. [deg]
    distance : Measured or None
        Distance of the camera from the calibration plane of a planar track (required with
        track CSV throws). [m]
    out_of_plane_uncertainty : float or None
        Standard uncertainty of each track CSV throw's angle to the image plane (its
        estimate is 0; required with track CSV throws). [deg]
    readout_time : Measured or None
        Rolling-shutter readout time (first to last row) with its standard uncertainty, from
        the camera's data sheet; None = global shutter.  Used by footage measured in 3-D
        (the views' own ``readout_time`` overrides it). [s]
    """

    fps: Measured
    scale_relative_uncertainty: float | None = None
    roll_uncertainty: float | None = None
    distance: Measured | None = None
    out_of_plane_uncertainty: float | None = None
    readout_time: Measured | None = None


@dataclass(frozen=True)
class ViewSource:
    """One camera's footage of a throw measured in 3-D: a ``[[throws.views]]`` table, or a
    footage throw with a ``lens`` (its only view).

    Attributes
    ----------
    footage : Path or None
        Video file or folder of numbered frames (None for a track file).
    lens : Path
        Lens file of ``fitdrag calibrate-lens`` (the camera's intrinsics; for a track file,
        the uncertainty of its focal length).
    markers : float or None
        Side of the ArUco markers' black square (footage). [m]
    marker_layout : Path or None
        Each marker's position on the board (the world frame: board plane z = 0; footage).
    label : str
        Name of the view.
    line : int or None
        Line of the job file that names the footage.
    readout_time : Measured or None
        Rolling-shutter readout time and its standard uncertainty (None = global shutter). [s]
    time_offset : Measured or None
        Time of this view's frame 0 minus the first view's, with its standard uncertainty;
        None = estimated by the fit (views after the first). [s]
    scale_uncertainty : float or None
        Relative standard uncertainty of the marker side. [1]
    start, stop, marker_dictionary, marker_frame :
        As for footage throws.
    track : Path or None
        A track file written by ``fitdrag track`` with a camera (its header states the
        camera's intrinsics, pose, pose covariance and readout), instead of footage.
    """

    footage: Path | None
    lens: Path
    markers: float | None
    marker_layout: Path | None
    label: str
    line: int | None = None
    track: Path | None = None
    readout_time: Measured | None = None
    time_offset: Measured | None = None
    scale_uncertainty: float | None = None
    start: int | None = None
    stop: int | None = None
    marker_dictionary: str | None = None
    marker_frame: int | None = None

    @property
    def tracking_options(self) -> dict[str, Any]:
        """Keyword arguments of :func:`fitdrag.video.tracking.track_footage` (without fps)."""
        out: dict[str, Any] = {"markers": self.markers, "marker_layout": self.marker_layout,
                               "lens": self.lens}  # fmt: skip
        for name in ("scale_uncertainty", "start", "stop", "marker_dictionary", "marker_frame"):
            if getattr(self, name) is not None:
                out[name] = getattr(self, name)
        return out


@dataclass(frozen=True)
class Throw:
    """One ``[[throws]]`` table: a track CSV (``kind == "track"``), footage, or several
    cameras' footage of one throw (``kind == "views"``, one :class:`ViewSource` each).

    The options are those given in the job file (None: not given): the CSV import options
    of :func:`fitdrag.tracks.read_track` for a track, the options of
    :func:`fitdrag.video.tracking.track_footage` for footage (``scale`` and ``origin`` serve
    both).  :attr:`options` gives the given ones as keyword arguments.

    Attributes
    ----------
    kind : str
        ``"track"``, ``"footage"`` or ``"views"``.
    path : Path
        The track CSV, the footage (file or folder of frames), or the first view's footage.
    label : str
        Label of the throw.
    line : int or None
        Line of the job file that names the file.
    """

    kind: str
    path: Path
    label: str
    line: int | None = None
    # track CSV options
    t_col: str | None = None
    x_col: str | None = None
    y_col: str | None = None
    frame_col: str | None = None
    sigma_col: str | None = None
    units: str | None = None
    y_down: bool | None = None
    delimiter: str | None = None
    comment: str | None = None
    # both: image scale [m/px] and origin [px]
    scale: float | None = None
    origin: tuple[float, float] | None = None
    # footage options
    start: int | None = None
    stop: int | None = None
    rotation: float | None = None  # [deg]
    reference: tuple[float, float, float, float, float] | None = None  # px, px, px, px, m
    markers: float | None = None  # side of the markers' black square [m]
    marker_dictionary: str | None = None
    marker_layout: Path | None = None
    marker_frame: int | None = None
    lens: Path | None = None
    scale_uncertainty: float | None = None  # [1]
    # several cameras (kind "views")
    views: tuple[ViewSource, ...] = ()

    @property
    def measured_in_3d(self) -> bool:
        """Whether the throw is measured in 3-D through camera models (views, or footage
        with a lens)."""
        return self.kind == "views" or (self.kind == "footage" and self.lens is not None)

    def view_sources(self, camera: CameraSection) -> tuple[ViewSource, ...]:
        """The cameras' footage of a throw measured in 3-D (a footage throw with a lens is
        its own single view, with ``[camera] readout_time``)."""
        if self.kind == "views":
            return self.views
        if not self.measured_in_3d:
            return ()
        return (
            ViewSource(
                footage=self.path, lens=self.lens, markers=self.markers,
                marker_layout=self.marker_layout, label=self.label, line=self.line,
                readout_time=camera.readout_time, scale_uncertainty=self.scale_uncertainty,
                start=self.start, stop=self.stop, marker_dictionary=self.marker_dictionary,
                marker_frame=self.marker_frame,
            ),
        )  # fmt: skip

    @property
    def options(self) -> dict[str, Any]:
        """The import or tracking options given in the job file, by keyword."""
        skip = ("kind", "path", "label", "line", "views")
        return {
            f.name: getattr(self, f.name)
            for f in fields(self)
            if f.name not in skip and getattr(self, f.name) is not None
        }


@dataclass(frozen=True)
class FitSection:
    """``[fit]``: options of :func:`fitdrag.fit.fitting.fit_tracks` (None: not given).

    ``lift``: True or False fits with or without a lift coefficient; ``"auto"`` (also when
    not given) tests whether the data need one (:func:`fitdrag.fit.lift_check.check_lift`).
    """

    model: str | None = None
    robust: bool | None = None
    noise: str | None = None
    lift: bool | str | None = None
    wind: float | None = None  # along +x [m/s]

    @property
    def lift_test(self) -> bool:
        """Whether the lift coefficient is to be tested for (``lift = "auto"`` or not given)."""
        return self.lift is None or self.lift == "auto"

    def options(self) -> dict[str, Any]:
        """The given options, by keyword (``lift`` only when stated true or false)."""
        return {f.name: getattr(self, f.name) for f in fields(self)
                if getattr(self, f.name) is not None
                and not (f.name == "lift" and self.lift_test)}  # fmt: skip


@dataclass(frozen=True)
class UncertaintySection:
    """``[uncertainty]``: the Monte Carlo check (0 trials: none)."""

    monte_carlo: int = 0
    adaptive: bool = False
    seed: int | None = None


@dataclass(frozen=True)
class OutputSection:
    """``[output]``: where the certificate goes and how it is numbered."""

    directory: Path
    number_prefix: str = "FD"
    records: Path | None = None


@dataclass(frozen=True)
class Job:
    """A parsed, validated job file (all values SI; temperature °C, humidity %)."""

    path: Path
    text: str
    laboratory: Laboratory
    test: TestDetails
    specimen: SpecimenSection
    air: AirSection
    site: SiteSection
    camera: CameraSection
    throws: tuple[Throw, ...]
    specification: Specification | None
    decision_rule: str | None
    fit: FitSection
    uncertainty: UncertaintySection
    output: OutputSection
    notes: tuple[str, ...] = field(default=())

    @property
    def folder(self) -> Path:
        return self.path.parent

    @property
    def shape(self) -> str:
        return self.specimen.shape

    @property
    def output_directory(self) -> Path:
        return self.output.directory

    @property
    def number_prefix(self) -> str:
        return self.output.number_prefix

    @property
    def records_path(self) -> Path:
        """The records database: the job's ``[output] records``, else the laboratory's
        (:func:`fitdrag.run.records.lab_records`)."""
        from fitdrag.run.records import lab_records

        return lab_records(None, self.output.records).path

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
            length=self.specimen.length,
            added_mass_coefficient=ca,
        )

    def make_air(self, values: Mapping[str, float] | None = None):
        """Air from the job, with any value overridden by ``values``."""
        from fitdrag.physics.air import Air, air_viscosity

        v = self.nominal_values()
        v.update(values or {})
        if "air_density" in v:
            visc = v.get("air_viscosity")
            if visc is None and self.air.viscosity is not None:
                visc = self.air.viscosity.value
            if visc is None and self.air.temperature is not None:
                visc = float(air_viscosity(self.air.temperature.value))
            kw = {"viscosity": visc} if visc is not None else {}
            return Air(v["air_density"], **kw)
        return Air.from_conditions(v["temperature"], v["pressure"], v["relative_humidity"])

    def gravity(self) -> float:
        """Local acceleration of free fall. [m/s²]"""
        return self.site.gravity.value

    @property
    def measured_in_3d(self) -> bool:
        """Whether the throws are measured in 3-D through camera models (a job measures
        every throw the same way)."""
        return any(th.measured_in_3d for th in self.throws)

    def fit_options(self) -> dict:
        """Keyword options of the fit from ``[fit]``."""
        return self.fit.options()

    # -- budget inputs ------------------------------------------------------------------------

    def input_quantities(self, scale_relative_uncertainty: float | None = None,
                         roll_uncertainty: float | None = None) -> list:  # fmt: skip
        """The uncertainty budget's inputs (everything but the fit's statistical part).

        ``scale_relative_uncertainty`` [1] and ``roll_uncertainty`` [deg] override [camera]
        (e.g. from a footage calibration).  The camera roll (an error in the horizontal) is
        an input only when its uncertainty is known and > 0.
        """
        s = self.specimen
        q = [s.mass.input("mass", "specimen mass")]
        if self.shape == "sphere":
            q.append(s.diameter.input("diameter", "specimen diameter"))
        else:
            q.append(s.area.input("area", "frontal area"))
            q.append(s.volume.input("volume", "specimen volume (buoyancy, added mass)"))
        ca = s.added_mass_coefficient
        if ca.uncertainty > 0:
            q.append(ca.input("added_mass_coefficient", "added-mass coefficient"))
        a = self.air
        if a.density is not None:
            q.append(a.density.input("air_density", "air density"))
            if a.viscosity is not None and a.viscosity.uncertainty > 0:
                q.append(a.viscosity.input("air_viscosity", "air viscosity (Reynolds number)"))
        else:
            q.append(a.temperature.input("temperature", "air temperature (density, viscosity)"))
            q.append(a.pressure.input("pressure", "air pressure (density)"))
            q.append(a.relative_humidity.input("relative_humidity", "humidity (density)"))
        c = self.camera
        q.append(c.fps.input("frame_rate", "camera frame rate (time base)"))
        rel = (
            c.scale_relative_uncertainty
            if scale_relative_uncertainty is None
            else scale_relative_uncertainty
        )
        q.append(
            InputQuantity(
                "length_scale", 1.0, float(rel or 0.0), "", description="length scale (relative)"
            )  # fmt: skip
        )
        roll = c.roll_uncertainty if roll_uncertainty is None else roll_uncertainty
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
        q.extend(self.planar_inputs())
        if a.air_speed_uncertainty:
            q.append(
                InputQuantity(
                    "air_speed",
                    0.0,
                    float(a.air_speed_uncertainty),
                    "m/s",
                    description="air speed along the flight (air movement)",
                )  # fmt: skip
            )
        g = self.site.gravity
        q.append(
            g.input(
                "gravity", self.site.gravity_source, distribution=self.site.gravity_distribution
            )  # fmt: skip
        )
        return q

    def planar_inputs(self) -> list:
        """The perspective inputs of the track CSV throws: ``camera_distance`` [m] and one
        out-of-plane angle [°] (estimate 0) per track throw — ``out_of_plane_angle`` when the
        job is that one throw, else ``out_of_plane_angle_<k>`` for throw k — each throw's
        flight having its own, independent angle.  Empty without track throws."""
        c = self.camera
        planar = [k for k, th in enumerate(self.throws, start=1) if th.kind == "track"]
        if not planar or c.distance is None or c.out_of_plane_uncertainty is None:
            return []
        q = [
            c.distance.input(
                "camera_distance",
                "camera distance to the calibration plane (perspective of the track files)",
            )
        ]
        single = len(self.throws) == 1
        for k in planar:
            q.append(
                InputQuantity(
                    "out_of_plane_angle" if single else f"out_of_plane_angle_{k}",
                    0.0,
                    float(c.out_of_plane_uncertainty),
                    "°",
                    description=(
                        "flight's angle to the image plane"
                        + ("" if single else f" (throw {k})")
                        + " through the perspective model"
                    ),
                )
            )
        return q

    def nominal_values(self) -> dict[str, float]:
        """Input estimates by budget name."""
        out = {}
        for qq in self.input_quantities():
            out[qq.name] = qq.value
        out.setdefault("added_mass_coefficient", self.specimen.added_mass_coefficient.value)
        return out
