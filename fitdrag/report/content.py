"""What a certificate says: frozen dataclasses built once by the pipeline, read by the certificate.

:class:`CertificateContent` holds everything a certificate and its JSON result show: the
laboratory and the test (:class:`Laboratory`, :class:`TestDetails`), the item tested and the
conditions (:class:`ItemTested`, :class:`Conditions`, :class:`CameraSettings`), the footage
throws (:class:`FootageRecord`), the method (:class:`Method`), the result (:class:`Result`),
facts of the fit (:class:`FitFacts`), the uncertainty budget (the budget stage's own
:class:`~fitdrag.uncertainty.gum.Budget`), the Monte Carlo check (:class:`MonteCarloCheck`),
the conformity decision (:class:`Conformity`), the input files' SHA-256 and, once issued, the
certificate's number and date (:class:`Issue`) and the output files.

:meth:`CertificateContent.to_dict` gives the JSON-ready dictionary written beside the
certificate and stored in the records (its keys and their order are part of the file
format).  Issuing fills in the number, the date and the outputs with ``dataclasses.replace``.

Values are SI (temperature in °C, relative humidity in %); each value that carries an
uncertainty is an :class:`Estimate` (value and standard uncertainty in the same unit).
"""

from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from fitdrag.report.numbers import format_with_uncertainty

if TYPE_CHECKING:  # annotations only
    from fitdrag.uncertainty.decision import Verdict
    from fitdrag.uncertainty.gum import Budget
    from fitdrag.uncertainty.monte_carlo import GumCheck, MonteCarloResult

__all__ = [
    "CameraSettings",
    "CertificateContent",
    "Conditions",
    "Conformity",
    "Estimate",
    "FitFacts",
    "FootageRecord",
    "Issue",
    "ItemTested",
    "Laboratory",
    "Method",
    "MonteCarloCheck",
    "Result",
    "TestDetails",
]


def _json_dof(nu: float) -> float | str:
    """Degrees of freedom for JSON: ``"inf"`` for infinity (JSON has no infinity)."""
    return "inf" if math.isinf(nu) else nu


@dataclass(frozen=True)
class Estimate:
    """A value and its standard uncertainty, in the same unit.

    Attributes
    ----------
    value : float
        The estimate. [its quantity's unit]
    standard_uncertainty : float
        Its standard uncertainty. [the same unit; a temperature difference for a temperature]
    """

    value: float
    standard_uncertainty: float

    def to_dict(self) -> dict:
        return {"value": self.value, "standard_uncertainty": self.standard_uncertainty}


# ---------------------------------------------------------------------------------------------
# laboratory and test (the job file's [laboratory] and [test] sections)
# ---------------------------------------------------------------------------------------------


def _given(obj, names: tuple[str, ...]) -> dict:
    """The fields of ``obj`` that are not None (dates as ISO text), in the order of
    ``obj.key_order`` (the job file's), then of ``names``."""
    keys = [k for k in obj.key_order if k in names]
    keys += [k for k in names if k not in keys]
    out = {}
    for k in keys:
        v = getattr(obj, k)
        if v is not None:
            out[k] = v.isoformat() if isinstance(v, _dt.date) else v
    return out


@dataclass(frozen=True)
class Laboratory:
    """The issuing laboratory, as the certificate names it.

    ``key_order`` is the order in which the job file gave the keys (the JSON keeps it).
    """

    name: str
    address: str | None = None
    accreditation: str | None = None
    key_order: tuple[str, ...] = field(default=(), repr=False, compare=False)

    def to_dict(self) -> dict:
        return _given(self, ("name", "address", "accreditation"))


@dataclass(frozen=True)
class TestDetails:
    """The customer, their order and the test: who, when and where.

    ``order`` is the customer's order or request reference; ``key_order`` is the order in
    which the job file gave the keys (the JSON keeps it).
    """

    __test__ = False  # not a pytest test class

    customer: str
    operator: str
    date: _dt.date
    customer_address: str | None = None
    order: str | None = None
    approved_by: str | None = None
    location: str | None = None
    notes: str | None = None
    key_order: tuple[str, ...] = field(default=(), repr=False, compare=False)
    check_standard: str | None = None  # id of the set-up's check standard (not printed)

    def to_dict(self) -> dict:
        return _given(self, ("customer", "customer_address", "order", "operator",
                             "approved_by", "date", "location", "notes"))  # fmt: skip


# ---------------------------------------------------------------------------------------------
# item tested, conditions, camera, footage
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ItemTested:
    """The specimen: identification, description and the inputs of the fit.

    Attributes
    ----------
    id, description : str
        Identification and description.
    shape : str
        ``"sphere"`` (given by diameter) or ``"body"`` (given by area and volume).
    mass : Estimate
        Mass. [kg]
    added_mass_coefficient : Estimate
        Added-mass coefficient. [-]
    diameter : Estimate or None
        Diameter of a sphere. [m]
    area, volume : Estimate or None
        Frontal area [m²] and volume [m³] of a body.
    length : float or None
        Reference length of a body for the Reynolds number. [m]
    shown_units : mapping
        The unit the job gave for mass, diameter, area or volume (e.g. ``{"mass": "g"}``):
        the certificate shows the value in it.
    """

    id: str
    description: str
    shape: str
    mass: Estimate
    added_mass_coefficient: Estimate
    diameter: Estimate | None = None
    area: Estimate | None = None
    volume: Estimate | None = None
    length: float | None = None
    shown_units: Mapping[str, str] = field(default_factory=dict)

    def to_dict(self) -> dict:
        d: dict[str, Any] = {"id": self.id, "description": self.description,
                             "shape": self.shape, "mass": self.mass.to_dict()}  # fmt: skip
        for k in ("diameter", "area", "volume"):
            v = getattr(self, k)
            if v is not None:
                d[k] = v.to_dict()
        if self.length is not None:
            d["length"] = self.length
        d["added_mass_coefficient"] = self.added_mass_coefficient.to_dict()
        return d


@dataclass(frozen=True)
class Conditions:
    """The air and the site during the test.

    Attributes
    ----------
    air_density : Estimate
        Air density. [kg/m³]
    air_density_source : str
        Where it comes from (stated, or the formula it was computed with).
    air_viscosity : float
        Dynamic viscosity of the air. [Pa s]
    air_viscosity_source : str
        Where it comes from.
    gravity : Estimate
        Local acceleration of free fall. [m/s²]
    gravity_source : str
        Where it comes from.
    wind : float
        Wind along +x. [m/s]
    air_speed_uncertainty : float or None
        Stated standard uncertainty of the air's speed along the flight (the still air or
        stated wind the fit assumes). [m/s]
    temperature : Estimate or None
        Air temperature. [°C]
    pressure : Estimate or None
        Absolute air pressure. [Pa]
    relative_humidity : Estimate or None
        Relative humidity. [%]
    """

    air_density: Estimate
    air_viscosity: float | None
    gravity: Estimate
    air_density_source: str = ""
    air_viscosity_source: str = ""
    gravity_source: str = ""
    wind: float = 0.0
    temperature: Estimate | None = None
    pressure: Estimate | None = None
    relative_humidity: Estimate | None = None
    air_speed_uncertainty: float | None = None
    #: The unit the job gave the pressure in (``{"pressure": "hPa"}``), for the certificate.
    shown_units: Mapping[str, str] = field(default_factory=dict)

    def to_dict(self) -> dict:
        d: dict[str, Any] = {}
        for k in ("temperature", "pressure", "relative_humidity"):
            v = getattr(self, k)
            if v is not None:
                d[k] = v.to_dict()
        d["air_density"] = dict(self.air_density.to_dict(), source=self.air_density_source)
        d["air_viscosity"] = {"value": self.air_viscosity, "source": self.air_viscosity_source}
        d["gravity"] = dict(self.gravity.to_dict(), source=self.gravity_source)
        d["wind"] = self.wind
        d["air_speed_uncertainty"] = self.air_speed_uncertainty
        return d


@dataclass(frozen=True)
class CameraSettings:
    """Frame rate and the uncertainties of the camera's geometry used in the budget.

    Attributes
    ----------
    fps : Estimate
        Camera frame rate. [Hz]
    scale_relative_uncertainty : float or None
        Relative standard uncertainty of the length scale. [1]
    scale_relative_uncertainty_source : str
        Where it comes from.
    roll_uncertainty_deg : float
        Standard uncertainty of the camera's horizontal. [deg]
    roll_uncertainty_source : str
        Where it comes from.
    distance : Estimate or None
        Camera's distance to the calibration plane of the track files (planar tracks). [m]
    out_of_plane_uncertainty_deg : float or None
        Stated standard uncertainty of the flight's angle to the image plane (planar
        tracks; its estimate is 0). [deg]
    """

    fps: Estimate | None
    scale_relative_uncertainty: float | None = None
    scale_relative_uncertainty_source: str = ""
    roll_uncertainty_deg: float = 0.0
    roll_uncertainty_source: str = ""
    distance: Estimate | None = None
    out_of_plane_uncertainty_deg: float | None = None

    def to_dict(self) -> dict:
        return {
            "fps": None if self.fps is None else self.fps.to_dict(),
            "scale_relative_uncertainty": self.scale_relative_uncertainty,
            "scale_relative_uncertainty_source": self.scale_relative_uncertainty_source,
            "roll_uncertainty_deg": self.roll_uncertainty_deg,
            "roll_uncertainty_source": self.roll_uncertainty_source,
            "distance": None if self.distance is None else self.distance.to_dict(),
            "out_of_plane_uncertainty_deg": self.out_of_plane_uncertainty_deg,
        }


@dataclass(frozen=True)
class FootageRecord:
    """A footage throw: the file and how it was tracked and calibrated.

    Attributes
    ----------
    throw : int
        Number of the throw in the job (1-based).
    label : str
        Its label.
    path : str
        The footage file or folder.
    tracking : Mapping
        The tracking's own record of the footage (frame range, calibration method, scale,
        SHA-256, ...: the plain values of the track's metadata), written as they are.
    """

    throw: int
    label: str
    path: str
    tracking: Mapping[str, str | int | float | bool] = field(default_factory=dict)

    def to_dict(self) -> dict:
        return {"throw": self.throw, "label": self.label, "path": self.path, **self.tracking}


# ---------------------------------------------------------------------------------------------
# method, fit, result
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Method:
    """How the result was obtained, in words (``geometry``: how the camera saw the flight;
    ``flight_physics``: what was done about spin, air movement and the choice of drag law;
    "" when nothing is to be said)."""

    model_equation: str
    integrator: str
    fit_method: str
    uncertainty_method: str
    drag_model: str = ""
    drag_model_text: str = ""
    geometry: str = ""
    flight_physics: str = ""

    def to_dict(self) -> dict:
        return {
            "model_equation": self.model_equation,
            "drag_model": self.drag_model,
            "drag_model_text": self.drag_model_text,
            "integrator": self.integrator,
            "fit_method": self.fit_method,
            "uncertainty_method": self.uncertainty_method,
            "geometry": self.geometry,
            "flight_physics": self.flight_physics,
        }


@dataclass(frozen=True)
class FitFacts:
    """What the certificate states about the fit (from the fit's JSON summary).

    Attributes
    ----------
    throws : int
        Throws analysed.
    drag_model : str
        Name of the drag model fitted ("" if not known).
    reynolds_number : (float, float, float) or None
        Smallest, largest and median Reynolds number of the flight. [-]
    launch_speed : Estimate or None
        Launch speed of the first throw. [m/s]
    launch_angle : Estimate or None
        Launch angle of the first throw above horizontal. [deg]
    terminal_speed : Estimate or None
        Terminal speed derived from the fit. [m/s]
    points_used, points_total : int or None
        Track points used by the fit, and in all.
    rejected : tuple
        Labels of the points rejected as outliers.
    rejection_reasons : Mapping
        Reason of each rejection, by label (as text).
    residual_rms, residual_rms_x, residual_rms_y : float or None
        Root mean square of the position residuals (both axes, x, y). [m]
    noise_model : str
        Noise model of the residuals.
    lag1_autocorrelation : float or None
        Lag-1 autocorrelation of the residuals. [-]
    identifiable : bool
        Whether the drag is identifiable from these tracks.
    identifiability_message : str
        Why not, if not.
    """

    throws: int
    drag_model: str = ""
    reynolds_number: tuple[float, float, float] | None = None
    launch_speed: Estimate | None = None
    launch_angle: Estimate | None = None
    terminal_speed: Estimate | None = None
    points_used: int | None = None
    points_total: int | None = None
    rejected: tuple = ()
    rejection_reasons: Mapping[str, str] = field(default_factory=dict)
    residual_rms: float | None = None
    residual_rms_x: float | None = None
    residual_rms_y: float | None = None
    noise_model: str = ""
    lag1_autocorrelation: float | None = None
    identifiable: bool = True
    identifiability_message: str = ""

    @classmethod
    def from_summary(cls, fit: Mapping[str, Any]) -> FitFacts:
        """The facts from a fit's JSON summary (``FitResult.to_dict()``)."""

        def est(d):
            if not d or d.get("value") is None:
                return None
            return Estimate(d["value"], d.get("standard_uncertainty"))

        re = fit.get("reynolds_number") or {}
        la = fit.get("launch") or {}
        pts = fit.get("points") or {}
        res = fit.get("residuals") or {}
        ident = fit.get("identifiability") or {}
        return cls(
            throws=len(fit.get("throws", [])),
            drag_model=(fit.get("drag_model") or {}).get("name", ""),
            reynolds_number=(re.get("min"), re.get("max"), re.get("median")) if re else None,
            launch_speed=est(la.get("speed")),
            launch_angle=est(la.get("angle")),
            terminal_speed=est(fit.get("terminal_speed")),
            points_used=pts.get("used"),
            points_total=pts.get("total"),
            rejected=tuple(pts.get("rejected", ())),
            rejection_reasons=dict(pts.get("rejection_reasons", {})),
            residual_rms=res.get("rms"),
            residual_rms_x=res.get("rms_x"),
            residual_rms_y=res.get("rms_y"),
            noise_model=res.get("noise_model", ""),
            lag1_autocorrelation=res.get("lag1_autocorrelation"),
            identifiable=ident.get("identifiable", True),
            identifiability_message=ident.get("message") or "",
        )


@dataclass(frozen=True)
class Result:
    """The measurement result: Cd with its combined and expanded uncertainty.

    Attributes
    ----------
    drag_coefficient : float
        The fitted Cd. [-]
    combined_standard_uncertainty : float
        u_c of Cd. [-]
    coverage_factor : float
        k. [-]
    coverage_probability : float
        p of the expanded uncertainty. [-]
    expanded_uncertainty : float
        U = k u_c. [-]
    effective_degrees_of_freedom : float
        ν_eff (may be infinite). [-]
    statistical_standard_uncertainty : float or None
        The fit's own standard uncertainty of Cd. [-]
    model_value_at_inputs : float or None
        Cd computed by the budget's model at the input estimates. [-]
    """

    drag_coefficient: float
    combined_standard_uncertainty: float
    coverage_factor: float
    coverage_probability: float
    expanded_uncertainty: float
    effective_degrees_of_freedom: float = math.inf
    statistical_standard_uncertainty: float | None = None
    model_value_at_inputs: float | None = None

    @property
    def reported(self) -> tuple[str, str]:
        """Cd and U as printed: U to two significant digits, Cd to the same place."""
        return format_with_uncertainty(self.drag_coefficient, self.expanded_uncertainty)

    def to_dict(self) -> dict:
        cd, big_u = self.drag_coefficient, self.expanded_uncertainty
        cd_s, u_s = self.reported
        return {
            "drag_coefficient": cd,
            "statistical_standard_uncertainty": self.statistical_standard_uncertainty,
            "combined_standard_uncertainty": self.combined_standard_uncertainty,
            "effective_degrees_of_freedom": _json_dof(self.effective_degrees_of_freedom),
            "coverage_factor": self.coverage_factor,
            "coverage_probability": self.coverage_probability,
            "expanded_uncertainty": big_u,
            "relative_expanded_uncertainty": big_u / cd if cd else None,
            "model_value_at_inputs": self.model_value_at_inputs,
            "reported": {"drag_coefficient": cd_s, "expanded_uncertainty": u_s},
        }


# ---------------------------------------------------------------------------------------------
# checks and decision
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class MonteCarloCheck:
    """The Monte Carlo run (JCGM 101) and its comparison with the GUM interval."""

    result: MonteCarloResult
    comparison: GumCheck

    def to_dict(self) -> dict:
        d = dict(self.result.to_dict())
        c = self.comparison
        d.update(
            gum_interval=list(c.gum_interval), d_low=c.d_low, d_high=c.d_high,
            agrees=c.agrees, numerical_tolerance=c.tolerance, status=c.status,
        )  # fmt: skip
        return d


@dataclass(frozen=True)
class Conformity:
    """The conformity decision and the statement of conformity printed on the certificate."""

    verdict: Verdict
    statement: str

    def to_dict(self) -> dict:
        d = self.verdict.to_dict()
        d["statement"] = self.statement
        return d


# ---------------------------------------------------------------------------------------------
# the whole content
# ---------------------------------------------------------------------------------------------


def noise_words(model: str | None) -> str:
    """The fit's noise model in the trade's words, for the certificate (the JSON keeps the
    internal name)."""
    if model == "ar1":
        return ("position errors correlated from frame to frame, allowed for by a first-order "
                "autoregressive model")  # fmt: skip
    return "position errors independent from frame to frame"


@dataclass(frozen=True)
class Issue:
    """The certificate's number and time of issue (and the one it replaces)."""

    number: str
    issued_at: str
    replaces: str | None = None
    pages: int | None = None
    #: The record's hash in the records database (SHA-256, hex), printed on the certificate.
    record_hash: str | None = None
    #: The identifier of the records database that holds the record.
    records_id: str | None = None
    #: Why this certificate replaces ``replaces``.
    reason: str | None = None
    #: Who reviewed and authorised the release, and when (a released draft).
    approved_by: str | None = None
    #: True for a draft: no number, not for release ("DRAFT" on every page).
    draft: bool = False

    def to_dict(self) -> dict:
        d: dict[str, Any] = {"number": self.number, "issued_at": self.issued_at,
                             "replaces": self.replaces}  # fmt: skip
        if self.pages is not None:
            d["pages"] = self.pages
        for k in ("record_hash", "records_id", "reason", "approved_by"):
            if getattr(self, k) is not None:
                d[k] = getattr(self, k)
        if self.draft:
            d["draft"] = True
        return d


@dataclass(frozen=True)
class CertificateContent:
    """Everything a certificate shows, and its JSON result.

    Attributes
    ----------
    software_version : str
        fitdrag version that made it.
    laboratory, test : Laboratory, TestDetails
        Who issues it, for whom, and the test.
    specimen : ItemTested
        The item tested.
    conditions : Conditions
        Air and site.
    camera : CameraSettings
        Frame rate and camera-geometry uncertainties.
    method : Method
        How the result was obtained.
    result : Result
        Cd and its uncertainty.
    fit : FitFacts
        Facts of the fit printed on the certificate.
    budget : Budget
        The uncertainty budget.
    input_hashes : Mapping
        SHA-256 of every input file, by path (the job file first).
    job_path : str
        The job file.
    footage : tuple of FootageRecord
        The footage throws.
    monte_carlo : MonteCarloCheck or None
        The Monte Carlo check, if run.
    conformity : Conformity or None
        The decision, if a specification was stated.
    fit_summary : Mapping
        The fit's own JSON summary (``FitResult.to_dict()``), written as it is.
    issue : Issue or None
        Number and date, once issued.
    outputs : Mapping
        The files written, by kind, once issued.
    flight_physics : Mapping
        The lift test, the air movement and the drag-law choice as JSON-ready data.
    """

    software_version: str
    laboratory: Laboratory
    test: TestDetails
    specimen: ItemTested
    conditions: Conditions
    camera: CameraSettings
    method: Method
    result: Result
    fit: FitFacts
    budget: Budget
    input_hashes: Mapping[str, str]
    job_path: str = ""
    footage: tuple[FootageRecord, ...] = ()
    monte_carlo: MonteCarloCheck | None = None
    conformity: Conformity | None = None
    fit_summary: Mapping[str, Any] = field(default_factory=dict)
    issue: Issue | None = None
    outputs: Mapping[str, str] = field(default_factory=dict)
    flight_physics: Mapping[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict:
        """The JSON-ready result (the file beside the certificate; the stored record)."""
        return {
            "success": True,
            "software_version": self.software_version,
            "certificate": {} if self.issue is None else self.issue.to_dict(),
            "job": {"path": self.job_path, "sha256": self.input_hashes.get(self.job_path)},
            "laboratory": self.laboratory.to_dict(),
            "test": self.test.to_dict(),
            "specimen": self.specimen.to_dict(),
            "conditions": self.conditions.to_dict(),
            "camera": self.camera.to_dict(),
            "footage": [f.to_dict() for f in self.footage],
            "method": self.method.to_dict(),
            "flight_physics": dict(self.flight_physics),
            "result": self.result.to_dict(),
            "uncertainty_budget": self.budget.to_dict(),
            "monte_carlo": None if self.monte_carlo is None else self.monte_carlo.to_dict(),
            "conformity": None if self.conformity is None else self.conformity.to_dict(),
            "fit": dict(self.fit_summary),
            "inputs": {"sha256": dict(self.input_hashes)},
            "outputs": dict(self.outputs),
        }
