"""The measurement pipeline behind ``fitdrag run`` and ``fitdrag demo``.

The steps, each a function usable on its own (:func:`measure` does everything but the
certificate and the record; :func:`issue` does those):

1. :func:`fitdrag.run.jobs.load_job` — read and validate the job file (nothing is written if it
   is wrong);
2. read every throw's track (:func:`read_throws`: a track CSV, or footage tracked and
   calibrated by :func:`fitdrag.video.tracking.track_footage`), fit them together
   (:func:`fitdrag.fit.fitting.fit_tracks`);
3. the GUM uncertainty budget with sensitivities from re-fits
   (:func:`fitdrag.uncertainty.gum.budget_from_model` over :class:`fitdrag.fit.budget_model.DragRefitModel`),
   and optionally the Monte Carlo check (:func:`fitdrag.uncertainty.monte_carlo.monte_carlo`);
4. the conformity decision (:func:`fitdrag.uncertainty.decision.decide`);
5. in one records transaction: allocate the certificate number, render the PDF, PNG and
   JSON to temporary files, store the record, then give the files their final names.
"""

from __future__ import annotations

import json
import math
import re
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Any


@dataclass(frozen=True, eq=False)
class Measurement:
    """Everything ``fitdrag run`` computes before issuing: fit, budget, checks, decision."""

    job: Any
    tracks: list
    fit: Any
    budget: Any
    monte_carlo: Any
    gum_check: Any
    verdict: Any
    hashes: dict
    report: dict


class FitFailed(RuntimeError):
    """The fit, or a re-fit of the budget, did not converge."""


def read_throws(job, *, progress: bool = False) -> tuple[list, dict]:
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
    from fitdrag.tracks.csv_file import read_track
    from fitdrag.tracks.track import Track, file_sha256

    hashes = {str(job.path): file_sha256(job.path)}
    tracks = []
    fps = job.camera["fps"].value
    for i, th in enumerate(job.throws):
        opts = dict(th.options)
        if th.kind == "footage":
            from fitdrag.video.tracking import footage_sha256, track_footage

            try:
                ft = track_footage(th.path, fps=fps, progress=progress, **opts)
            except (ValueError, FileNotFoundError) as exc:
                loc = f"{job.path.name}, line {th.line}" if th.line else job.path.name
                msg = f"{loc}: [[throws]] #{i + 1} footage: {_job_wording(str(exc))}"
                if isinstance(exc, FileNotFoundError):
                    raise FileNotFoundError(msg) from None
                raise ValueError(msg) from None
            digest = footage_sha256(th.path)
            tr = ft.track
            meta = {**tr.meta, "source": str(th.path), "sha256": digest}
            tracks.append(Track(tr.t, tr.x, tr.y, tr.sigma, tr.frame, meta))
            hashes[str(th.path)] = digest
            for key in ("marker_layout", "lens"):
                if opts.get(key) is not None:
                    hashes[str(opts[key])] = file_sha256(opts[key])
            continue
        with warnings.catch_warnings():
            # the camera's frame rate is offered for files without a time column only
            warnings.filterwarnings("ignore", message=r".*the frame rate .* is not used")
            tr = read_track(th.path, fps=fps, **opts)
        tracks.append(tr)
        hashes[str(th.path)] = file_sha256(th.path)
    return tracks, hashes


# command-line spellings in track_footage's messages -> the job file's keys
_OPTION_KEYS = re.compile(
    r"--(scale-uncertainty|marker-dictionary|marker-layout|marker-frame|markers|reference|"
    r"origin|rotation|scale|lens|start|stop)\b"
)


def _job_wording(message: str) -> str:
    """A footage message with the job file's key names (``marker_frame``) for the command
    line's options (``--marker-frame``)."""
    return _OPTION_KEYS.sub(lambda m: m.group(1).replace("-", "_"), message)


def length_scale_uncertainty(job, tracks) -> tuple[float, str]:
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
    stated = job.camera.get("scale_relative_uncertainty")
    if stated is not None:
        return float(stated), "stated in the job file ([camera] scale_relative_uncertainty)"
    vals = [
        float(tr.meta["scale_relative_uncertainty"])
        for th, tr in zip(job.throws, tracks, strict=True)
        if th.kind == "footage" and "scale_relative_uncertainty" in tr.meta
    ]
    if len(vals) != len(job.throws):
        raise ValueError(
            f"{job.path.name}: [camera] scale_relative_uncertainty: missing; give the relative "
            f"standard uncertainty of the tracks' length scale (e.g. 0.002)."
        )
    how = "footage calibration" if len(vals) == 1 else "largest of the footage calibrations"
    return max(vals), how


def roll_uncertainty(job, tracks) -> tuple[float, str]:
    """Standard uncertainty of the camera's horizontal for the budget [deg], and its source.

    ``[camera] roll_uncertainty``, when stated, applies to every throw; otherwise the
    largest of the footage calibrations' ``roll_uncertainty_deg`` (0 when no throw brings
    one: CSV tracks carry no information about the level of their frame).
    """
    stated = job.camera.get("roll_uncertainty")
    if stated is not None:
        return float(stated), "stated in the job file ([camera] roll_uncertainty)"
    vals = [float(tr.meta["roll_uncertainty_deg"]) for tr in tracks
            if "roll_uncertainty_deg" in tr.meta]  # fmt: skip
    if not vals:
        return 0.0, "not stated (no camera-roll input in the budget)"
    return max(vals), "footage calibration" if len(vals) == 1 else "largest of the calibrations"


def _vu(m) -> dict:
    return {"value": m.value, "standard_uncertainty": m.uncertainty}


def _air_density_uncertainty(job) -> float:
    """u(ρ) from u(T), u(p), u(RH) through the CIPM-2007 formula (GUM eq. (10))."""
    from fitdrag.physics.air import moist_air_density
    from fitdrag.uncertainty.gum import InputQuantity, budget_from_model

    a = job.air
    if "density" in a:
        return a["density"].uncertainty
    qs = [
        InputQuantity(k, a[k].value, a[k].uncertainty)
        for k in ("temperature", "pressure", "relative_humidity")
    ]

    def rho(v):
        return float(moist_air_density(v["temperature"], v["pressure"], v["relative_humidity"]))

    return budget_from_model(rho, qs).combined_standard_uncertainty


def _method(fit_dict: dict, fit_result, budget, mc) -> dict:
    from fitdrag.physics.registry import get_drag_model

    dm = get_drag_model(fit_result.model)
    eq = (
        "(m + C_a ρ V) dv/dt = (m − ρ V) g − ½ ρ C_d A |v − w| (v − w)"
        + (" + lift" if fit_result.lift else "")
        + ": Newton's second law for the specimen of mass m, volume V and frontal area A in "
        "air of density ρ, with gravity g less buoyancy, the added mass of the displaced air "
        "(coefficient C_a) and quadratic drag (w: wind)"
        + ("; a constant lift coefficient is fitted too" if fit_result.lift else "")
        + "."
    )
    f = fit_dict.get("fit", {})
    resid = fit_dict.get("residuals", {})
    noise = resid.get("noise_model", "white")
    fit_method = (
        f"{f.get('method', 'weighted nonlinear least squares')}; "
        f"{'robust stage with outlier rejection' if f.get('robust') else 'no robust stage'}; "
        f"noise model {noise}; all throws share C_d, each has its own launch state."
    )
    unc = (
        "JCGM 100:2008 (GUM): law of propagation of uncertainty with sensitivity coefficients "
        "from re-fits, Welch–Satterthwaite effective degrees of freedom, coverage factor from "
        f"the t-distribution at p = {100 * budget.coverage_probability:.2f} %"
    )
    if mc is not None:
        unc += f"; checked by the Monte Carlo method of JCGM 101:2008 ({mc.trials} re-fits)"
    return {
        "model_equation": eq,
        "drag_model": dm.name,
        "drag_model_text": f"{dm.name}: {dm.description}"
        + (f" ({dm.reference})" if dm.reference else ""),  # fmt: skip
        "integrator": f.get("integrator", ""),
        "fit_method": fit_method,
        "uncertainty_method": unc + ".",
    }


def measure(
    job,
    *,
    monte_carlo: int | None = None,
    adaptive: bool | None = None,
    seed: int | None = None,
    workers: int | None = None,
    progress: bool = False,
) -> Measurement:
    """Fit, budget, Monte Carlo check and conformity decision for a loaded job.

    Raises
    ------
    FitFailed
        When the fit or a re-fit of the budget does not converge.
    """
    from fitdrag._version import __version__
    from fitdrag.fit.budget_model import DragRefitModel
    from fitdrag.fit.fitting import fit_tracks
    from fitdrag.report.certificate import format_with_uncertainty, formatter_for
    from fitdrag.uncertainty.decision import decide
    from fitdrag.uncertainty.gum import P_K2, budget_from_model
    from fitdrag.uncertainty.monte_carlo import compare_with_gum, default_workers
    from fitdrag.uncertainty.monte_carlo import monte_carlo as run_mc

    tracks, hashes = read_throws(job, progress=progress)
    specimen = job.make_specimen()
    air = job.make_air()
    fopts = job.fit_options()
    fit = fit_tracks(tracks, specimen, air, gravity=job.gravity(), **fopts)
    if not fit.success:
        raise FitFailed(f"the fit did not converge: {fit.message}")

    u_scale, u_scale_source = length_scale_uncertainty(job, tracks)
    u_roll, u_roll_source = roll_uncertainty(job, tracks)
    inputs = job.input_quantities(scale_relative_uncertainty=u_scale, roll_uncertainty=u_roll)
    nominal = {q.name: q.value for q in inputs}
    model = DragRefitModel(
        fit, tracks, nominal, length=job.specimen.get("length"), viscosity=air.viscosity
    )
    stat = (fit.u_cd, fit.dof if fit.dof > 0 else math.inf)
    try:
        budget = budget_from_model(
            model, inputs, statistical=stat, coverage_probability=P_K2, progress=progress
        )
    except RuntimeError as exc:
        raise FitFailed(f"uncertainty budget: {exc}") from exc

    n_mc = job.uncertainty.get("monte_carlo", 0) if monte_carlo is None else monte_carlo
    if n_mc < 0:
        raise ValueError(f"--monte-carlo: must be >= 0 trials, got {n_mc}.")
    mc = check = None
    if n_mc:
        try:
            mc = run_mc(
                model, inputs, statistical=stat, trials=n_mc,
                seed=job.uncertainty.get("seed") if seed is None else seed,
                workers=default_workers() if workers is None else workers,
                adaptive=job.uncertainty.get("adaptive", False) if adaptive is None else adaptive,
                progress=progress,
            )  # fmt: skip
        except RuntimeError as exc:
            raise FitFailed(f"Monte Carlo: {exc}") from exc
        check = compare_with_gum(budget, mc)

    cd = float(fit.cd)
    uc = budget.combined_standard_uncertainty
    big_u = budget.expanded_uncertainty
    verdict = None
    if job.specification is not None:
        verdict = decide(
            cd, big_u, job.specification, job.decision_rule,
            coverage_factor=budget.coverage_factor,
            coverage_probability=budget.coverage_probability,
            standard_uncertainty=uc,
            result_label=f"specimen {job.specimen['id']}",
        )  # fmt: skip

    fit_dict = fit.to_dict()
    cd_s, u_s = format_with_uncertainty(cd, big_u)
    sp = job.specimen
    specimen_d = {"id": sp["id"], "description": sp["description"], "shape": job.shape,
                  "mass": _vu(sp["mass"])}  # fmt: skip
    for k in ("diameter", "area", "volume"):
        if k in sp:
            specimen_d[k] = _vu(sp[k])
    if "length" in sp:
        specimen_d["length"] = sp["length"]
    specimen_d["added_mass_coefficient"] = _vu(sp["added_mass_coefficient"])
    a = job.air
    conditions = {k: _vu(a[k]) for k in ("temperature", "pressure", "relative_humidity") if k in a}
    conditions["air_density"] = {
        "value": air.density,
        "standard_uncertainty": _air_density_uncertainty(job),
        "source": "stated" if "density" in a else "CIPM-2007 formula (Picard et al. 2008)",
    }
    conditions["air_viscosity"] = {
        "value": air.viscosity,
        "source": "stated" if "viscosity" in a else "Sutherland's law at the air temperature",
    }
    conditions["gravity"] = dict(_vu(job.site["gravity"]), source=job.site["gravity_source"])
    conditions["wind"] = fopts.get("wind", 0.0)
    conf = None
    if verdict is not None:
        conf = verdict.to_dict()
        conf["statement"] = verdict.statement(formatter_for(big_u))
    mc_d = None
    if mc is not None:
        mc_d = dict(mc.to_dict())
        mc_d.update(
            gum_interval=list(check.gum_interval), d_low=check.d_low, d_high=check.d_high,
            agrees=check.agrees, numerical_tolerance=check.tolerance, status=check.status,
        )  # fmt: skip
    test = {k: (v.isoformat() if hasattr(v, "isoformat") else v) for k, v in job.test.items()}
    report = {
        "success": True,
        "software_version": __version__,
        "certificate": {},
        "job": {"path": str(job.path), "sha256": hashes[str(job.path)]},
        "laboratory": dict(job.laboratory),
        "test": test,
        "specimen": specimen_d,
        "conditions": conditions,
        "camera": {
            "fps": _vu(job.camera["fps"]),
            "scale_relative_uncertainty": u_scale,
            "scale_relative_uncertainty_source": u_scale_source,
            "roll_uncertainty_deg": u_roll,
            "roll_uncertainty_source": u_roll_source,
        },
        "footage": _footage_report(job, tracks),
        "method": _method(fit_dict, fit, budget, mc),
        "result": {
            "drag_coefficient": cd,
            "statistical_standard_uncertainty": float(fit.u_cd),
            "combined_standard_uncertainty": uc,
            "effective_degrees_of_freedom": (
                "inf" if math.isinf(budget.effective_dof) else budget.effective_dof
            ),
            "coverage_factor": budget.coverage_factor,
            "coverage_probability": budget.coverage_probability,
            "expanded_uncertainty": big_u,
            "relative_expanded_uncertainty": big_u / cd if cd else None,
            "model_value_at_inputs": budget.value,
            "reported": {"drag_coefficient": cd_s, "expanded_uncertainty": u_s},
        },
        "uncertainty_budget": budget.to_dict(),
        "monte_carlo": mc_d,
        "conformity": conf,
        "fit": fit_dict,
        "inputs": {"sha256": dict(hashes)},
        "outputs": {},
    }
    return Measurement(job, tracks, fit, budget, mc, check, verdict, hashes, report)


def _footage_report(job, tracks) -> list[dict]:
    """Per footage throw: the file, its SHA-256 and how it was tracked and calibrated."""
    out = []
    for i, (th, tr) in enumerate(zip(job.throws, tracks, strict=True)):
        if th.kind != "footage":
            continue
        d = {"throw": i + 1, "label": th.label, "path": str(th.path)}
        for k, v in tr.meta.items():
            if k != "source" and isinstance(v, str | int | float | bool):
                d[k] = v
        out.append(d)
    return out


# ---------------------------------------------------------------------------------------------
# issuing
# ---------------------------------------------------------------------------------------------


def issue(meas: Measurement, *, records_path=None, replaces=None, force=False):
    """Number, render and record the certificate of a measurement (one transaction)."""
    from fitdrag.report.certificate import render_certificate
    from fitdrag.report.plots import curves_from_fit
    from fitdrag.run.records import PendingFile, Records, temporary_path

    job = meas.job
    outdir = Path(job.output_directory)
    outdir.mkdir(parents=True, exist_ok=True)
    db = Records(Path(records_path) if records_path else job.records_path)
    curves = curves_from_fit(meas.fit)
    report = meas.report

    def render(number, when):
        finals = {
            "certificate_pdf": outdir / f"{number}.pdf",
            "certificate_png": outdir / f"{number}.png",
            "result_json": outdir / f"{number}.json",
        }
        for f in finals.values():
            if f.exists() and not force:
                raise ValueError(
                    f"{f}: already exists (left by an earlier, interrupted run?); move it away "
                    f"or pass --force."
                )
        tmps = {k: temporary_path(f) for k, f in finals.items()}
        report["certificate"] = {
            "number": number,
            "issued_at": when.isoformat(timespec="seconds"),
            "replaces": replaces,
        }
        report["outputs"] = {k: str(f.resolve()) for k, f in finals.items()}
        try:
            pages = render_certificate(
                report, tmps["certificate_pdf"], tmps["certificate_png"], curves=curves
            )
            report["certificate"]["pages"] = pages
            text = json.dumps(report, indent=2, allow_nan=False, default=str)
            tmps["result_json"].write_text(text + "\n", encoding="utf-8")
        except BaseException:
            for t in tmps.values():
                t.unlink(missing_ok=True)
            raise
        return {k: PendingFile(tmps[k], finals[k]) for k in finals}

    conf = report.get("conformity") or {}
    rec = db.issue(
        render,
        result=report,
        input_hashes=meas.hashes,
        job_text=job.text,
        job_path=str(job.path),
        replaces=replaces,
        prefix=job.number_prefix,
        summary={
            "customer": job.test.get("customer"),
            "specimen_id": job.specimen["id"],
            "drag_coefficient": report["result"]["drag_coefficient"],
            "expanded_uncertainty": report["result"]["expanded_uncertainty"],
            "coverage_factor": report["result"]["coverage_factor"],
            "decision": conf.get("decision"),
            "software_version": report["software_version"],
        },
    )
    return rec, db.path


def summary(meas: Measurement) -> str:
    from fitdrag.report.certificate import format_sig

    r = meas.report["result"]
    b = meas.budget
    cd_s = r["reported"]["drag_coefficient"]
    u_s = r["reported"]["expanded_uncertainty"]
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
    ident = meas.report["fit"].get("identifiability", {})
    if not ident.get("identifiable", True):
        lines.append(f"  WARNING: {ident.get('message')}")
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
            f"{100 * v.probability_of_conformity:.1f} %)"
        )
    else:
        lines.append("  no [specification]: no conformity decision")
    return "\n".join(lines)
