"""The measurement pipeline behind ``fitdrag run`` and ``fitdrag demo``.

The steps, each a function usable on its own (:func:`measure` does everything but the
certificate and the record; :func:`issue` does those):

1. :func:`fitdrag.run.job_file.load_job` — read and validate the job file (nothing is written
   if it is wrong);
2. read every throw's track (:func:`read_throws`: a track CSV, or footage tracked and
   calibrated by :func:`fitdrag.video.tracking.track_footage`), fit them together
   (:func:`fitdrag.fit.fitting.fit_tracks`);
3. the GUM uncertainty budget with sensitivities from re-fits
   (:func:`fitdrag.uncertainty.gum.budget_from_model` over :class:`fitdrag.fit.budget_model.DragRefitModel`),
   and optionally the Monte Carlo check (:func:`fitdrag.uncertainty.monte_carlo.monte_carlo`);
4. the conformity decision (:func:`fitdrag.uncertainty.decision.decide`), and what the
   certificate will say (:class:`fitdrag.report.content.CertificateContent`, built once);
5. in one records transaction: allocate the certificate number, render the PDF, PNG and
   JSON to temporary files, store the record, then give the files their final names.

:func:`measure` and :func:`issue` raise :class:`fitdrag.errors.ConvergenceError` when the fit
or a re-fit does not converge; :attr:`Measurement.decision` (and the issued record's
``decision``) give the conformity decision, for the caller to act on (the command line maps
it to its exit code).
"""

from __future__ import annotations

import dataclasses
import json
import math
import os
import re
import warnings
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from fitdrag._files import temporary_path
from fitdrag.errors import ConvergenceError, InputError, InputFileNotFoundError
from fitdrag.report.content import (
    CameraSettings,
    CertificateContent,
    Conditions,
    Conformity,
    Estimate,
    FitFacts,
    FootageRecord,
    Issue,
    ItemTested,
    Method,
    MonteCarloCheck,
    Result,
)
from fitdrag.run.flight_physics import decide_lift, planar_flight_physics, still_air_warning
from fitdrag.run.job import Job

if TYPE_CHECKING:  # annotations only
    from fitdrag.fit.results import FitResult
    from fitdrag.tracks.track import Track
    from fitdrag.uncertainty.decision import Verdict
    from fitdrag.uncertainty.gum import Budget
    from fitdrag.uncertainty.monte_carlo import GumCheck, MonteCarloResult


@dataclass(frozen=True, eq=False)
class Measurement:
    """Everything ``fitdrag run`` computes before issuing: fit, budget, checks, decision.

    Attributes
    ----------
    job : Job
        The job measured.
    tracks : list of Track
        The tracks of its throws, in order.
    fit : FitResult
        The fit of all throws together.
    budget : Budget
        The GUM uncertainty budget of Cd.
    monte_carlo : MonteCarloResult or None
        The Monte Carlo run, if asked for.
    gum_check : GumCheck or None
        Its comparison with the GUM interval.
    verdict : Verdict or None
        The conformity decision, if the job states a specification.
    hashes : Mapping
        SHA-256 of the job file and of every input file, by path.
    content : CertificateContent
        What the certificate will say (number and date are filled in by :func:`issue`).
    curves : sequence of ThrowCurves, optional
        The certificate's plots of the flight and residuals (default: from ``fit``).
    """

    job: Job
    tracks: list[Track]
    fit: FitResult
    budget: Budget
    monte_carlo: MonteCarloResult | None
    gum_check: GumCheck | None
    verdict: Verdict | None
    hashes: Mapping[str, str]
    content: CertificateContent
    curves: Any = None

    @property
    def decision(self) -> str | None:
        """The conformity decision ("pass", "conditional pass", ...), or None without a
        specification."""
        return None if self.verdict is None else self.verdict.decision

    @property
    def report(self) -> dict:
        """The JSON-ready result, as stored in the record (before the number is known)."""
        return self.content.to_dict()


def read_throws(job: Job, *, progress: bool = False) -> tuple[list, dict]:
    """Tracks of every throw, and the SHA-256 of the job file and of every input file.

    A track throw is read with :func:`fitdrag.tracks.read_track`; a footage throw is
    tracked and calibrated with :func:`fitdrag.video.tracking.track_footage` at the frame
    rate of ``[camera] fps`` (its track's ``meta`` holds ``source``, ``sha256`` and the
    calibration's ``scale_relative_uncertainty``).  The footage (see
    :func:`fitdrag.video.tracking.footage_sha256`), and its lens and marker-layout files,
    are hashed too.  ``progress`` shows a progress bar while long footage is tracked.

    Raises
    ------
    ValueError, FileNotFoundError
        A file that cannot be read or tracked; a footage throw's message starts with the
        job file, the line and the throw.
    """
    from fitdrag.tracks.track import file_sha256

    hashes = {str(job.path): file_sha256(job.path)}
    tracks = []
    for i in range(len(job.throws)):
        tr, h = read_throw(job, i, progress=progress)
        tracks.append(tr)
        hashes.update(h)
    return tracks, hashes


def read_throw(job: Job, i: int, *, progress: bool = False, where: str | None = None) -> tuple:
    """The track of throw ``i`` (0-based) of ``job`` and the SHA-256 of its input files, by
    path (see :func:`read_throws`, which reads them all); ``where`` replaces the job file and
    line at the start of a footage throw's error message."""
    from fitdrag.tracks.csv_file import read_track
    from fitdrag.tracks.track import Track, file_sha256

    hashes = {}
    fps = job.camera.fps.value
    th = job.throws[i]
    opts = th.options
    if th.kind == "footage":
        from fitdrag.video.tracking import footage_sha256, track_footage

        try:
            ft = track_footage(th.path, fps=fps, progress=progress, **opts)
        except InputError as exc:
            loc = f"{job.path.name}, line {th.line}" if th.line else job.path.name
            loc = f"{loc}: [[throws]] #{i + 1}" if where is None else where
            msg = f"{loc} footage: {_job_wording(str(exc))}"
            if isinstance(exc, FileNotFoundError):
                raise InputFileNotFoundError(msg) from None
            raise InputError(msg) from None
        digest = footage_sha256(th.path)
        tr = ft.track
        meta = {**tr.meta, "source": str(th.path), "sha256": digest}
        hashes[str(th.path)] = digest
        for extra in (th.marker_layout, th.lens):
            if extra is not None:
                hashes[str(extra)] = file_sha256(extra)
        return Track(tr.t, tr.x, tr.y, tr.sigma, tr.frame, meta), hashes
    with warnings.catch_warnings():
        # the camera's frame rate is offered for files without a time column only
        warnings.filterwarnings("ignore", message=r".*the frame rate .* is not used")
        tr = read_track(th.path, fps=fps, **opts)
    check_track_header(job, i, th, tr)
    hashes[str(th.path)] = file_sha256(th.path)
    behind = footage_behind(th.path, tr)
    if behind is not None:
        from fitdrag.video.tracking import footage_sha256

        hashes[str(behind)] = footage_sha256(behind)
    return tr, hashes


def footage_behind(track_path, track) -> Path | None:
    """The footage a track file's header names (``# footage: NAME``, relative to the track's
    folder), when it is there: its SHA-256 joins the input hashes."""
    name = (track.meta.get("header") or {}).get("footage")
    if not name:
        return None
    p = Path(name)
    p = p if p.is_absolute() else Path(track_path).parent / p
    return p.resolve() if p.exists() else None


def check_track_header(job: Job, i: int, th, track) -> None:
    """Refuse a track file whose header states a frame rate or an image scale that the job
    contradicts: the certificate would state the job's value for data taken at another.

    The frame rate conflicts when the header's ``fps`` lies more than 3 standard
    uncertainties (``[camera] fps_uncertainty``) from ``[camera] fps`` (or differs at all
    when that is 0); the scale when the throw's ``scale`` differs from the header's
    ``scale_m_per_px`` by more than 1e-6 of it (common practice, no source).
    """
    head = track.meta.get("header") or {}
    loc = f"{job.path.name}, line {th.line}" if th.line else job.path.name
    where = f"{loc}: [[throws]] #{i + 1} track: {Path(th.path).name}'s header says"

    def number(key):
        try:
            v = float(head[key])
        except (KeyError, TypeError, ValueError):
            return None
        return v if math.isfinite(v) else None

    fps = job.camera.fps
    h = number("fps")
    if h is not None and abs(h - fps.value) > max(3.0 * fps.uncertainty, 1e-9 * fps.value):
        raise InputError(
            f"{where} fps: {head['fps']} (the frame rate of the footage it was tracked from), "
            f"but [camera] fps is {fps.value:g} Hz (standard uncertainty {fps.uncertainty:g} Hz); "
            f"they must agree: correct [camera] fps, or use the track file of this footage."
        )
    h = number("scale_m_per_px")
    stated = th.options.get("scale")
    if h is not None and stated is not None and abs(stated - h) > 1e-6 * abs(h):
        raise InputError(
            f"{where} scale_m_per_px: {head['scale_m_per_px']}, but the throw's scale is "
            f"{stated:g} m/px; they must agree: remove scale (the header's calibration "
            f"applies) or correct it."
        )


# command-line spellings in track_footage's messages -> the job file's keys
_OPTION_KEYS = re.compile(
    r"--(scale-uncertainty|marker-dictionary|marker-layout|marker-frame|markers|reference|"
    r"origin|rotation|scale|lens|start|stop)\b"
)


def _job_wording(message: str) -> str:
    """A footage message with the job file's key names (``marker_frame``) for the command
    line's options (``--marker-frame``)."""
    return _OPTION_KEYS.sub(lambda m: m.group(1).replace("-", "_"), message)


def length_scale_uncertainty(job: Job, tracks) -> tuple[float, str]:
    """Relative standard uncertainty of the length scale for the budget, and its source.

    ``[camera] scale_relative_uncertainty``, when the job states it, applies to every throw
    (for footage throws it overrides their calibrations).  Otherwise (every throw is
    footage: the job file requires the key with track CSVs) it is the largest of the
    footage calibrations' ``scale_relative_uncertainty``: the budget has one length-scale
    input shared by all throws, and the largest is the cautious choice.

    Returns
    -------
    (float, str)
        The relative standard uncertainty [1] and a few words on where it comes from.
    """
    stated = job.camera.scale_relative_uncertainty
    if stated is not None:
        return float(stated), "stated in the job file ([camera] scale_relative_uncertainty)"
    vals = [
        float(tr.meta["scale_relative_uncertainty"])
        for th, tr in zip(job.throws, tracks, strict=True)
        if th.kind == "footage" and "scale_relative_uncertainty" in tr.meta
    ]
    if len(vals) != len(job.throws):
        raise InputError(
            f"{job.path.name}: [camera] scale_relative_uncertainty: missing; give the relative "
            f"standard uncertainty of the tracks' length scale (e.g. 0.002)."
        )
    how = "footage calibration" if len(vals) == 1 else "largest of the footage calibrations"
    return max(vals), how


def roll_uncertainty(job: Job, tracks) -> tuple[float, str]:
    """Standard uncertainty of the camera's horizontal for the budget [deg], and its source.

    ``[camera] roll_uncertainty``, when stated, applies to every throw; otherwise the
    largest of the footage calibrations' ``roll_uncertainty_deg`` (0 when no throw brings
    one: CSV tracks carry no information about the level of their frame).
    """
    stated = job.camera.roll_uncertainty
    if stated is not None:
        return float(stated), "stated in the job file ([camera] roll_uncertainty)"
    vals = [float(tr.meta["roll_uncertainty_deg"]) for tr in tracks
            if "roll_uncertainty_deg" in tr.meta]  # fmt: skip
    if not vals:
        return 0.0, "not stated (no camera-roll input in the budget)"
    return max(vals), "footage calibration" if len(vals) == 1 else "largest of the calibrations"


def _air_density_uncertainty(job: Job) -> float:
    """u(ρ) from u(T), u(p), u(RH) through the CIPM-2007 formula (GUM eq. (10))."""
    from fitdrag.physics.air import moist_air_density
    from fitdrag.uncertainty.gum import InputQuantity, budget_from_model

    a = job.air
    if a.density is not None:
        return a.density.uncertainty
    qs = [
        InputQuantity(k, m.value, m.uncertainty)
        for k, m in (
            ("temperature", a.temperature),
            ("pressure", a.pressure),
            ("relative_humidity", a.relative_humidity),
        )
    ]

    def rho(v):
        return float(moist_air_density(v["temperature"], v["pressure"], v["relative_humidity"]))

    return budget_from_model(rho, qs).combined_standard_uncertainty


#: Above this ratio of a perspective line's nonlinearity indicator (half the second
#: difference of its re-fits) to its contribution, the linear GUM line is flagged and the
#: Monte Carlo method of JCGM 101:2008 recommended (JCGM 101 5.8: the GUM framework needs a
#: model that is not significantly nonlinear over the inputs' spread). [1]
NONLINEARITY_LIMIT = 0.1


def planar_geometry_text(job: Job) -> str:
    """The certificate's sentence on how the camera saw the track files ("" for none)."""
    c = job.camera
    labels = [th.label for th in job.throws if th.kind == "track"]
    if not labels or c.distance is None or c.out_of_plane_uncertainty is None:
        return ""
    from fitdrag.report.numbers import format_sig, format_with_uncertainty

    z, uz = format_with_uncertainty(c.distance.value, c.distance.uncertainty, 2)
    which = "the track file" if len(labels) == 1 else f"each of the {len(labels)} track files"
    return (
        f"Planar tracks ({', '.join(labels)}): positions on the calibration plane, seen by a "
        f"camera {z} m from it (standard uncertainty {uz} m), its optical axis taken through "
        f"the middle of each track. The flight's angle to the image plane is taken as 0° "
        f"with the stated standard uncertainty {format_sig(c.out_of_plane_uncertainty, 2)}° "
        f"for {which} (independent throws, independent angles), propagated through the "
        f"perspective model: the track is mapped by central projection onto the flight plane "
        f"turned by the angle about the vertical through its first point and re-fitted "
        f"(Hartley and Zisserman 2004, sec. 6.1, 8.1)."
    )


def _perspective_inputs(model, inputs) -> list:
    """The inputs with the camera distance's sensitivity set (see
    :func:`fitdrag.fit.budget_model.distance_sensitivity`): at zero angle it is zero to first
    order, and its effect is the cross term with the out-of-plane angles."""
    from fitdrag.fit.budget_model import distance_sensitivity

    names = [q.name for q in inputs]
    if "camera_distance" not in names:
        return list(inputs)
    u_angles = {q.name: q.standard_uncertainty for q in inputs
                if q.name.startswith("out_of_plane_angle")}  # fmt: skip
    qz = inputs[names.index("camera_distance")]
    try:
        c = distance_sensitivity(model, qz.standard_uncertainty, u_angles)
    except (RuntimeError, ValueError) as exc:
        raise ConvergenceError(f"uncertainty budget: camera_distance: {exc}") from exc
    qz = dataclasses.replace(
        qz,
        sensitivity=c,
        description=qz.description + "; acts with the out-of-plane angle: second-order term "
        "of JCGM 100 5.1.2 by re-fit at the angle's standard uncertainty",
    )
    return [qz if q.name == "camera_distance" else q for q in inputs]


def perspective_nonlinear_lines(budget) -> list[str]:
    """Names of the out-of-plane lines whose nonlinearity indicator exceeds
    :data:`NONLINEARITY_LIMIT` of their contribution."""
    return [
        ln.name
        for ln in budget.lines
        if ln.name.startswith("out_of_plane_angle")
        and ln.standard_uncertainty > 0
        and not ln.nonlinearity <= NONLINEARITY_LIMIT * abs(ln.contribution)
    ]


def drag_model_text(dm) -> str:
    """The certificate's naming of a drag law: name, description and source."""
    return f"{dm.name}: {dm.description}" + (f" ({dm.reference})" if dm.reference else "")


def model_equation_text(lift: bool, where: str = "") -> str:
    """The certificate's statement of the equation of motion (``where``: e.g. " in three
    dimensions")."""
    return (
        "(m + C_a ρ V) dv/dt = (m − ρ V) g − ½ ρ C_d A |v − w| (v − w)"
        + (" + lift" if lift else "")
        + f": Newton's second law{where} for the specimen of mass m, volume V and frontal area "
        "A in air of density ρ, with gravity g less buoyancy, the added mass of the displaced "
        "air (coefficient C_a) and quadratic drag (w: wind)"
        + ("; a constant lift coefficient is fitted too" if lift else "")
        + "."
    )


def _method(fit_dict: dict, fit_result, budget, mc, geometry: str = "") -> Method:
    """The method in words, from the fit's summary, the fit, the budget and the Monte Carlo
    run."""
    from fitdrag.physics.registry import get_drag_model

    dm = get_drag_model(fit_result.model)
    eq = model_equation_text(bool(fit_result.lift))
    f = fit_dict.get("fit", {})
    resid = fit_dict.get("residuals", {})
    noise = resid.get("noise_model", "white")
    from fitdrag.report.content import noise_words

    fit_method = (
        "weighted nonlinear least squares (Levenberg–Marquardt) of the modelled flight to the "
        "measured positions; "
        f"{'outliers rejected by a robust stage' if f.get('robust') else 'no outlier rejection'}"
        f"; {noise_words(noise)}; all throws share C_d, each has its own launch state."
    )
    unc = (
        "JCGM 100:2008 (GUM): law of propagation of uncertainty with sensitivity coefficients "
        "from re-fits, Welch–Satterthwaite effective degrees of freedom, coverage factor from "
        f"the t-distribution at p = {100 * budget.coverage_probability:.2f} %"
    )
    if geometry:
        unc += (
            "; the out-of-plane angle of each track file enters as its own input (estimate 0°, "
            "sensitivity by re-fit over ± its standard uncertainty) and the camera distance "
            "by the second-order term of GUM 5.1.2 (it acts only with the angle)"
        )
        nonlin = perspective_nonlinear_lines(budget)
        if nonlin:
            unc += (
                f"; the perspective line(s) {', '.join(nonlin)} are nonlinear over ± u, so the "
                f"linear interval is approximate"
                + ("" if mc is not None else " (run the Monte Carlo method of JCGM 101:2008)")
            )
    if mc is not None:
        unc += f"; checked by the Monte Carlo method of JCGM 101:2008 ({mc.trials} re-fits)"
    return Method(
        model_equation=eq,
        drag_model=dm.name,
        drag_model_text=drag_model_text(dm),
        integrator=f.get("integrator", ""),
        fit_method=fit_method,
        uncertainty_method=unc + ".",
        geometry=geometry,
    )


def measure(
    job: Job,
    *,
    monte_carlo: int | None = None,
    adaptive: bool | None = None,
    seed: int | None = None,
    workers: int | None = None,
    progress: bool = False,
    tracks: tuple[list, dict] | None = None,
) -> Measurement:
    """Fit, budget, Monte Carlo check and conformity decision for a loaded job.

    Parameters
    ----------
    job : Job
        The job (:func:`fitdrag.run.job_file.load_job`).
    monte_carlo : int, optional
        Monte Carlo trials (0: no check); default ``[uncertainty] monte_carlo``.
    adaptive : bool, optional
        Stop the Monte Carlo run early once stable; default ``[uncertainty] adaptive``.
    seed : int, optional
        Seed of the Monte Carlo run; default ``[uncertainty] seed``.
    workers : int, optional
        Processes of the Monte Carlo run (default: up to 2).
    progress : bool
        Show progress bars.
    tracks : (list of Track, dict), optional
        The throws' tracks and input hashes as :func:`read_throws` returns them, when they
        were read already (e.g. footage tracked by separate tasks: :mod:`fitdrag.run.lot`);
        jobs measured in 3-D read their own.

    Returns
    -------
    Measurement
        With the decision in :attr:`Measurement.decision`.

    Raises
    ------
    ConvergenceError
        When the fit or a re-fit of the budget does not converge.
    InputError
        A negative number of Monte Carlo trials.
    """
    from fitdrag.fit.budget_model import DragRefitModel
    from fitdrag.fit.fitting import fit_tracks

    if job.measured_in_3d:
        from fitdrag.run.measure_views import measure_in_3d

        return measure_in_3d(job, monte_carlo=monte_carlo, adaptive=adaptive, seed=seed,
                             workers=workers, progress=progress)  # fmt: skip
    n_mc = _monte_carlo_trials(job, monte_carlo)
    still_air_warning(job)
    tracks, hashes = read_throws(job, progress=progress) if tracks is None else tracks
    specimen = job.make_specimen()
    air = job.make_air()
    fopts = job.fit_options()
    lift, lift_check = decide_lift(job, tracks, specimen, air, fopts)
    fopts["lift"] = lift
    fit = fit_tracks(tracks, specimen, air, gravity=job.gravity(), **fopts)
    if not fit.success:
        from fitdrag.fit.diagnose import likely_cause

        cause = likely_cause(tracks)
        raise ConvergenceError(f"the fit did not converge: {fit.message}"
                               + (f"; most likely cause: {cause}" if cause else ""))  # fmt: skip

    u_scale, u_scale_source = length_scale_uncertainty(job, tracks)
    u_roll, u_roll_source = roll_uncertainty(job, tracks)
    inputs = job.input_quantities(scale_relative_uncertainty=u_scale, roll_uncertainty=u_roll)
    physics = planar_flight_physics(job, fit, lift_check)
    inputs += physics.inputs()
    nominal = {q.name: q.value for q in inputs}
    model = DragRefitModel(fit, tracks, nominal, length=job.specimen.length,
                           viscosity=air.viscosity)  # fmt: skip
    inputs = _perspective_inputs(model, inputs)
    stat = (fit.u_cd, fit.dof if fit.dof > 0 else math.inf)
    budget, mc, check = budget_and_checks(
        job, model, inputs, stat, n_mc, adaptive=adaptive, seed=seed, workers=workers,
        progress=progress,
    )  # fmt: skip
    nonlinear = perspective_nonlinear_lines(budget)
    if nonlinear and not n_mc:
        warnings.warn(
            f"uncertainty budget: the out-of-plane line(s) {', '.join(nonlinear)} are "
            f"nonlinear over ± their standard uncertainty; the GUM interval is approximate. "
            f"Set [uncertainty] monte_carlo = 10000 (JCGM 101:2008) for this job.",
            stacklevel=2,
        )
    fit_dict = fit.to_dict()
    content = certificate_content(
        job, float(fit.cd), budget, mc, check, air=air, wind=fopts.get("wind", 0.0),
        statistical_u=float(fit.u_cd),
        camera=CameraSettings(
            fps=job.camera.fps.estimate(),
            scale_relative_uncertainty=u_scale,
            scale_relative_uncertainty_source=u_scale_source,
            roll_uncertainty_deg=u_roll,
            roll_uncertainty_source=u_roll_source,
            distance=None if job.camera.distance is None else job.camera.distance.estimate(),
            out_of_plane_uncertainty_deg=job.camera.out_of_plane_uncertainty,
        ),
        footage=_footage_records(job, tracks),
        method=dataclasses.replace(_method(fit_dict, fit, budget, mc, planar_geometry_text(job)),
                                   flight_physics=physics.text()),
        fit_facts=FitFacts.from_summary(fit_dict),
        fit_summary=fit_dict,
        hashes=hashes,
        physics=physics,
    )  # fmt: skip
    verdict = content.conformity.verdict if content.conformity is not None else None
    return Measurement(job, tracks, fit, budget, mc, check, verdict, hashes, content)


def _monte_carlo_trials(job: Job, monte_carlo: int | None) -> int:
    n_mc = job.uncertainty.monte_carlo if monte_carlo is None else monte_carlo
    if n_mc < 0:
        raise InputError(
            f"monte_carlo trials: must be >= 0, got {n_mc}; give 0 (no Monte Carlo check) or a "
            f"number of trials such as 10000."
        )
    return n_mc


def budget_and_checks(job: Job, model, inputs, stat, n_mc: int, *, adaptive=None, seed=None,
                      workers=None, progress=False):  # fmt: skip
    """The GUM budget of ``model`` over ``inputs`` plus the statistical part ``stat``
    (u, dof), and the Monte Carlo run and its check when ``n_mc`` > 0:
    (budget, mc or None, check or None)."""
    from fitdrag.uncertainty.gum import P_K2, budget_from_model
    from fitdrag.uncertainty.monte_carlo import compare_with_gum, default_workers
    from fitdrag.uncertainty.monte_carlo import monte_carlo as run_mc

    unc = job.uncertainty
    try:
        budget = budget_from_model(
            model, inputs, statistical=stat, coverage_probability=P_K2, progress=progress
        )
    except RuntimeError as exc:
        raise ConvergenceError(f"uncertainty budget: {exc}") from exc
    mc = check = None
    if n_mc:
        try:
            mc = run_mc(
                model, inputs, statistical=stat, trials=n_mc,
                seed=unc.seed if seed is None else seed,
                workers=default_workers() if workers is None else workers,
                adaptive=unc.adaptive if adaptive is None else adaptive,
                progress=progress,
                # adaptive runs go on until the check below can tell (agree or differ)
                until=lambda so_far: compare_with_gum(budget, so_far).status != "inconclusive",
            )  # fmt: skip
        except RuntimeError as exc:
            raise ConvergenceError(f"Monte Carlo: {exc}") from exc
        check = compare_with_gum(budget, mc)
    return budget, mc, check


def certificate_content(job: Job, cd: float, budget, mc, check, *, air, wind, statistical_u,
                        camera, footage, method, fit_facts, fit_summary, hashes,
                        physics=None) -> CertificateContent:  # fmt: skip
    """What the certificate says, and the conformity decision (in ``conformity``);
    ``physics`` is the measurement's :class:`fitdrag.run.flight_physics.FlightPhysics`."""
    from fitdrag._version import __version__
    from fitdrag.report.numbers import formatter_for
    from fitdrag.uncertainty.decision import decide

    uc = budget.combined_standard_uncertainty
    big_u = budget.expanded_uncertainty
    verdict = None
    if job.specification is not None:
        verdict = decide(
            cd, big_u, job.specification, job.decision_rule,
            coverage_factor=budget.coverage_factor,
            coverage_probability=budget.coverage_probability,
            standard_uncertainty=uc,
            result_label=f"specimen {job.specimen.id}",
        )  # fmt: skip
    sp = job.specimen
    a = job.air

    def est(m):
        return None if m is None else m.estimate()

    return CertificateContent(
        software_version=__version__,
        laboratory=job.laboratory,
        test=job.test,
        specimen=ItemTested(
            id=sp.id,
            description=sp.description,
            shape=sp.shape,
            mass=sp.mass.estimate(),
            added_mass_coefficient=sp.added_mass_coefficient.estimate(),
            diameter=est(sp.diameter),
            area=est(sp.area),
            volume=est(sp.volume),
            length=sp.length,
            shown_units=dict(sp.shown_units),
        ),  # fmt: skip
        conditions=Conditions(
            temperature=est(a.temperature),
            pressure=est(a.pressure),
            relative_humidity=est(a.relative_humidity),
            air_density=Estimate(air.density, _air_density_uncertainty(job)),
            air_density_source=(
                "stated" if a.density is not None else "CIPM-2007 formula (Picard et al. 2008)"
            ),
            air_viscosity=air.viscosity,
            air_viscosity_source=(
                f"stated, standard uncertainty {a.viscosity.uncertainty:.2g} Pa s"
                if a.viscosity is not None
                else "Sutherland's law at the air temperature"
            ),
            gravity=job.site.gravity.estimate(),
            gravity_source=job.site.gravity_source,
            wind=wind,
            air_speed_uncertainty=a.air_speed_uncertainty,
            shown_units=dict(a.shown_units),
        ),
        camera=camera,
        footage=footage,
        method=method,
        result=Result(
            drag_coefficient=cd,
            statistical_standard_uncertainty=statistical_u,
            combined_standard_uncertainty=uc,
            effective_degrees_of_freedom=budget.effective_dof,
            coverage_factor=budget.coverage_factor,
            coverage_probability=budget.coverage_probability,
            expanded_uncertainty=big_u,
            model_value_at_inputs=budget.value,
        ),
        fit=fit_facts,
        budget=budget,
        monte_carlo=None if mc is None else MonteCarloCheck(mc, check),
        conformity=(
            None
            if verdict is None
            else Conformity(verdict, verdict.statement(formatter_for(big_u)))
        ),
        fit_summary=fit_summary,
        input_hashes=dict(hashes),
        job_path=str(job.path),
        flight_physics={} if physics is None else physics.to_dict(),
    )


def _footage_records(job: Job, tracks) -> tuple[FootageRecord, ...]:
    """Per footage throw: the file, its SHA-256 and how it was tracked and calibrated."""
    out = []
    for i, (th, tr) in enumerate(zip(job.throws, tracks, strict=True)):
        if th.kind != "footage":
            continue
        meta = {k: v for k, v in tr.meta.items()
                if k != "source" and isinstance(v, str | int | float | bool)}  # fmt: skip
        out.append(FootageRecord(throw=i + 1, label=th.label, path=str(th.path), tracking=meta))
    return tuple(out)


# ---------------------------------------------------------------------------------------------
# issuing
# ---------------------------------------------------------------------------------------------


def _render_files(meas: Measurement, finals: Mapping[str, Path], issue_: Issue):
    """Render the certificate (PDF, page-1 PNG) and the JSON of ``meas`` to temporary files
    beside ``finals``; returns ``{kind: temporary path}`` (nothing left behind on failure)."""
    from fitdrag.report.certificate import render_certificate
    from fitdrag.report.plots import curves_from_fit

    curves = meas.curves if meas.curves is not None else curves_from_fit(meas.fit)
    tmps = {k: temporary_path(f) for k, f in finals.items()}
    issued = dataclasses.replace(
        meas.content,
        issue=issue_,
        outputs={k: str(Path(f).resolve()) for k, f in finals.items()},
    )
    try:
        pages = render_certificate(
            issued, tmps["certificate_pdf"], tmps["certificate_png"], curves=curves
        )
        issued = dataclasses.replace(issued, issue=dataclasses.replace(issued.issue, pages=pages))
        text = json.dumps(issued.to_dict(), indent=2, allow_nan=False, default=str)
        tmps["result_json"].write_text(text + "\n", encoding="utf-8")
    except BaseException:
        for t in tmps.values():
            t.unlink(missing_ok=True)
        raise
    return tmps


def check_edited(job: Job) -> None:
    """Refuse to certify a job that still holds the template's invented laboratory, customer
    or specimen (``fitdrag new-job`` without edits), naming each such value."""
    from fitdrag.run.job_template import placeholders_left

    left = placeholders_left(job)
    if left:
        raise InputError(
            f"{job.path.name}: still holds the template's invented value(s) {'; '.join(left)}; "
            f"replace them with your laboratory's, customer's and specimen's before a "
            f"certificate or draft is made."
        )


def check_drawable(job: Job, extra: Mapping[str, str | None] | None = None) -> None:
    """Refuse text the certificate's font cannot draw (it would show empty boxes, not the
    text stored), naming the key, the characters and the font."""
    from fitdrag.report.fonts import certificate_font, font_gaps

    texts = {}
    for sec, obj in (("laboratory", job.laboratory), ("test", job.test),
                     ("specimen", job.specimen)):  # fmt: skip
        for f in dataclasses.fields(obj):
            v = getattr(obj, f.name)
            if isinstance(v, str):
                texts[f"[{sec}] {f.name}"] = v
    from fitdrag.run.job_keys import HIDDEN_TEXT

    for k, v in (extra or {}).items():
        bad = HIDDEN_TEXT.search(v or "")
        if bad:
            raise InputError(
                f"{k}: holds the control or direction character U+{ord(bad.group()):04X}; "
                f"write the text without it."
            )
        if v:
            texts[k] = v
    gaps = font_gaps(texts)
    if gaps:
        name, chars = next(iter(gaps.items()))
        more = f" (and in {', '.join(list(gaps)[1:])})" if len(gaps) > 1 else ""
        raise InputError(
            f"{job.path.name}: {name}: the certificate's font {certificate_font()[0]} cannot "
            f"draw {', '.join(chars[:5])}{' ...' if len(chars) > 5 else ''}{more}; the "
            f"certificate would show empty boxes instead: write the text in characters it can "
            f"draw (e.g. a Latin transliteration)."
        )


def approver(job: Job, approved_by: str | None = None) -> str:
    """Who authorises the release: ``approved_by`` (a reviewer releasing a draft), else the
    job's ``[test] approved_by``; neither is an error."""
    name = (approved_by or job.test.approved_by or "").strip()
    if not name:
        raise InputError(
            f"{job.path.name}: [test] approved_by: missing; a certificate is released by "
            f"a named person: name them in the job, or run with --draft and have the reviewer "
            f"release the draft with 'fitdrag release DRAFT.json --approved-by NAME'."
        )
    return name


def issued_paths(outdir: Path, number: str, what: str) -> dict[str, Path]:
    """The files of an issued ``what`` (``"certificate"``, ``"lot_report"``) numbered
    ``number`` in ``outdir``: ``{what}_pdf``, ``{what}_png`` and ``result_json``.  An issued
    file is never overwritten: one already there is an error."""
    finals = {
        f"{what}_pdf": outdir / f"{number}.pdf",
        f"{what}_png": outdir / f"{number}.png",
        "result_json": outdir / f"{number}.json",
    }
    for f in finals.values():
        if f.exists():
            raise InputError(
                f"{f}: already exists; an issued {what.replace('_', ' ')} file is never "
                f"overwritten. Is another records database numbering into this folder? Use the "
                f"laboratory's one database (FITDRAG_RECORDS), or another [output] directory."
            )
    return finals


def issue(meas: Measurement, *, records_path=None, replaces=None, reason=None, approved_by=None,
          draft_sha256=None, force=False):  # fmt: skip
    """Number, render and record the certificate of a measurement (one transaction).

    The records database is ``records_path``, else the job's ``[output] records``, else the
    laboratory's (:func:`fitdrag.run.records.lab_records`).  Refused: a job without
    ``approved_by`` (unless ``approved_by`` is given: a released draft), and an identical
    re-run (the same job text and input files as a certificate on record) unless it
    ``replaces`` a certificate, with a ``reason``.  Issued certificate files are never
    overwritten (``force`` is kept for the callers' other files).

    Returns
    -------
    (Record, RecordsLocation)
        The record (its ``decision`` is the conformity decision) and where the records
        database is, and why there.
    """
    from fitdrag.run.records import PendingFile, Records, lab_records

    del force  # issued certificate files are never overwritten
    job = meas.job
    check_edited(job)
    check_drawable(job, {"--approved-by": approved_by, "--reason": reason})
    name = approver(job, approved_by)
    where = lab_records(records_path, job.output.records)
    outdir = Path(job.output_directory)
    outdir.mkdir(parents=True, exist_ok=True)
    where.path.parent.mkdir(parents=True, exist_ok=True)
    db = Records(where.path)
    db.finish_interrupted(outdir)  # files of a run killed after its commit; other leftovers go
    if replaces is None:
        same = db.find_inputs(meas.hashes, job.text)
        if same:
            first = same[-1]
            raise InputError(
                f"{job.path.name}: the same job and input files (SHA-256) were certified as "
                f"{first.number} on {first.issued_at}; an identical re-run is not issued again. "
                f"To correct that certificate, run with --replaces {first.number} --reason "
                f'"...".'
            )
    content = meas.content

    def render(number, when, record_hash):
        finals = issued_paths(outdir, number, "certificate")
        stamp = Issue(
            number, when.isoformat(timespec="seconds"), replaces, record_hash=record_hash,
            records_id=db.id, reason=reason if replaces else None, approved_by=name,
        )  # fmt: skip
        tmps = _render_files(meas, finals, stamp)
        return {k: PendingFile(tmps[k], finals[k]) for k in finals}

    res = content.result
    rec = db.issue(
        render,
        result=content.to_dict(),  # stored as measured: number and outputs are in their columns
        input_hashes=meas.hashes,
        job_text=job.text,
        job_path=str(job.path),
        replaces=replaces,
        reason=reason,
        approved_by=name,
        draft_sha256=draft_sha256,
        prefix=job.number_prefix,
        summary={
            "customer": job.test.customer,
            "specimen_id": job.specimen.id,
            "drag_coefficient": res.drag_coefficient,
            "expanded_uncertainty": res.expanded_uncertainty,
            "coverage_factor": res.coverage_factor,
            "decision": meas.decision,
            "software_version": content.software_version,
        },
    )
    return rec, where


#: Keys of a draft's JSON section ``draft``: how it was measured, for its release.
DRAFT_FORMAT = "fitdrag draft 1"


def write_draft(meas: Measurement, *, options: Mapping[str, Any] | None = None,
                force: bool = False) -> dict[str, Path]:  # fmt: skip
    """A draft for review: PDF and PNG marked DRAFT on every page, and the JSON; no number,
    no record.  ``options`` (Monte Carlo trials, seed, ...) are kept in the JSON for the
    release to measure again the same way.  Returns ``{kind: path}``.
    """
    from datetime import datetime

    from fitdrag.run.records import clean_leftovers

    job = meas.job
    check_edited(job)
    check_drawable(job)
    outdir = Path(job.output_directory)
    outdir.mkdir(parents=True, exist_ok=True)
    clean_leftovers(outdir)
    when = datetime.now().astimezone()
    stem = f"DRAFT-{job.path.stem}-{when.strftime('%Y%m%dT%H%M%S')}"
    finals = {
        "certificate_pdf": outdir / f"{stem}.pdf",
        "certificate_png": outdir / f"{stem}.png",
        "result_json": outdir / f"{stem}.json",
    }
    for f in finals.values():
        if f.exists() and not force:
            raise InputError(f"{f}: already exists; pass --force to overwrite the draft.")
    stamp = Issue("DRAFT", when.isoformat(timespec="seconds"), draft=True)
    tmps = _render_files(meas, finals, stamp)
    # the JSON gets the section the release reads
    data = json.loads(tmps["result_json"].read_text(encoding="utf-8"))
    data["draft"] = {
        "format": DRAFT_FORMAT,
        "job_path": str(Path(job.path).resolve()),
        "input_sha256": {str(Path(k).resolve()): v for k, v in meas.hashes.items()},
        "options": dict(options or {}),
    }
    tmps["result_json"].write_text(json.dumps(data, indent=2, allow_nan=False) + "\n",
                                   encoding="utf-8")  # fmt: skip
    for k, f in finals.items():
        os.replace(tmps[k], f)
    return finals


#: Largest draft JSON file read by :func:`read_draft`. [byte]
DRAFT_MAX_BYTES = 50_000_000


@dataclass(frozen=True)
class Draft:
    """A draft read back for release: its file, SHA-256, job, inputs and reported result."""

    path: Path
    sha256: str
    job_path: Path
    input_sha256: Mapping[str, str]
    options: Mapping[str, Any]
    reported: Mapping[str, str]
    decision: str | None


def read_draft(path) -> Draft:
    """Read a draft's JSON (written by :func:`write_draft`) and check its inputs are unchanged.

    Raises
    ------
    InputError
        Not a draft; an input file changed since the draft (its SHA-256 differs) or is gone.
    """
    from fitdrag.run.records import sha256_file
    from fitdrag.tracks.track import file_sha256

    p = Path(path)
    if not p.is_file():
        raise InputFileNotFoundError(f"{p}: no such draft; give the DRAFT-....json that "
                                     f"'fitdrag run JOB --draft' wrote.")  # fmt: skip
    if p.stat().st_size > DRAFT_MAX_BYTES:
        raise InputError(f"{p}: larger than {DRAFT_MAX_BYTES} bytes: not a draft's JSON.")
    try:
        data = json.loads(p.read_text(encoding="utf-8"))
        d = data["draft"]
        if d.get("format") != DRAFT_FORMAT or not data["certificate"].get("draft"):
            raise KeyError("format")
        job_path = Path(d["job_path"])
        hashes = {str(k): str(v) for k, v in d["input_sha256"].items()}
        reported = data["result"]["reported"]
        decision = (data.get("conformity") or {}).get("decision")
    except (ValueError, KeyError, TypeError, AttributeError):
        raise InputError(
            f"{p}: not a draft written by 'fitdrag run JOB --draft' (no readable 'draft' "
            f"section); release the draft's .json file."
        ) from None
    for fp, digest in hashes.items():
        f = Path(fp)
        if not f.exists():
            raise InputFileNotFoundError(
                f"{p}: input {f} is gone since the draft; restore it or make a new draft."
            )
        if f.is_dir():
            from fitdrag.video.tracking import footage_sha256

            now = footage_sha256(f)
        else:
            now = file_sha256(f)
        if now != digest:
            raise InputError(
                f"{p}: input {f} changed since the draft (SHA-256 {now[:16]}... instead of "
                f"{digest[:16]}...); the draft is not released: make a new draft and review it."
            )
    return Draft(p, sha256_file(p), job_path, hashes, dict(d.get("options") or {}),
                 dict(reported), decision)  # fmt: skip


def check_release(draft: Draft, meas: Measurement) -> None:
    """Refuse a release whose measurement, made again from the same inputs, differs from the
    draft the reviewer saw (input hashes, reported Cd and U, decision)."""
    if sorted(meas.hashes.values()) != sorted(draft.input_sha256.values()):
        raise InputError(f"{draft.path}: the release's input files differ from the draft's; "
                         f"make a new draft.")  # fmt: skip
    now = meas.content.to_dict()["result"]["reported"]
    for k, v in draft.reported.items():
        if now.get(k) != v:
            raise InputError(
                f"{draft.path}: measured again, {k} is {now.get(k)} where the draft says {v}; "
                f"the draft is not released: make a new draft and review it."
            )
    if meas.decision != draft.decision:
        raise InputError(f"{draft.path}: measured again, the decision is {meas.decision} "
                         f"where the draft says {draft.decision}; make a new draft.")  # fmt: skip


def summary(meas: Measurement) -> str:
    """A few lines on the result: Cd ± U, the largest contributions, the checks, the decision."""
    from fitdrag.report.numbers import format_probability, format_sig

    cd_s, u_s = meas.content.result.reported
    b = meas.budget
    nu = "inf" if math.isinf(b.effective_dof) else format_sig(b.effective_dof, 2)
    lines = [
        f"drag coefficient Cd = {cd_s} ± {u_s} (k = {b.coverage_factor:.2f}, "
        f"p = {100 * b.coverage_probability:.2f} %, nu_eff = {nu})",
        f"  combined standard uncertainty {format_sig(b.combined_standard_uncertainty, 2)}; "
        f"statistical part {format_sig(meas.fit.u_cd, 2)}",
        "  largest contributions: "
        + ", ".join(
            f"{ln.name} {100 * ln.share:.0f} %"
            for ln in sorted(b.lines, key=lambda x: -x.share)[:4]
        ),
    ]
    lift = (meas.content.flight_physics or {}).get("lift") or {}
    if lift.get("tested"):
        t = lift["test"]
        p = t["f_test"]["p_value"]
        ptxt = "" if p is None else ("F-test p < 1e-6" if p < 1e-6 else f"F-test p = {p:.2g}")
        ptxt += f"{', ' if ptxt else ''}false-alarm rate {100 * t['false_alarm_rate']:g} %"
        if lift["fitted"]:
            cl = lift["lift_coefficient"]
            lines.append(f"  spin: lift detected ({ptxt}); fitted C_L = {cl['value']:.3g} ± "
                         f"{cl['standard_uncertainty']:.2g}")  # fmt: skip
        elif t["largest_lift_coefficient_allowed"] is not None:
            lines.append(f"  spin: no lift detected ({ptxt}); |C_L| <= "
                         f"{t['largest_lift_coefficient_allowed']:.2g} allowed, its effect in "
                         f"the budget")  # fmt: skip
    facts = meas.content.fit
    if not facts.identifiable:
        lines.append(f"  WARNING: {facts.identifiability_message}")
    if meas.monte_carlo is not None:
        mc, ch = meas.monte_carlo, meas.gum_check
        fmt = "{:.6g}".format
        lines.append(
            f"  Monte Carlo ({mc.trials} re-fits, {mc.elapsed:.1f} s on {mc.workers} process(es)): "
            f"{100 * mc.coverage_probability:.0f} % interval [{fmt(mc.interval[0])}, "
            f"{fmt(mc.interval[1])}], GUM [{fmt(ch.gum_interval[0])}, {fmt(ch.gum_interval[1])}]"
            f": {ch.status} (tolerance {ch.tolerance:.1g})"
        )
    if meas.verdict is not None:
        v = meas.verdict
        lines.append(
            f"  decision: {v.decision.upper()} ({v.rule} acceptance; probability of conformity "
            f"{format_probability(v.probability_of_conformity)})"
        )
    else:
        lines.append("  no [specification]: no conformity decision")
    return "\n".join(lines)
