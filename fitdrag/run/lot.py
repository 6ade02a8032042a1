"""Measuring a lot: every specimen through the one-specimen pipeline, then the lot's
statistics, decision, report and record.

:func:`measure_lot` builds the tasks — one per footage throw (tracking it,
:func:`fitdrag.run.pipeline.read_throw`) and one per specimen (its fit, budget and decision,
:func:`fitdrag.run.pipeline.measure`, given the tracks) — and runs them with
:func:`fitdrag.run.tasks.run_tasks` (local processes, a Dask cluster, or this process).
Each specimen's budget is then split into the part of its own and the contributions of the
inputs every specimen shares (:data:`SHARED_INPUTS`), and
:func:`fitdrag.uncertainty.lot_statistics.lot_statistics` gives the lot mean, the spread
between specimens, the tolerance interval and the fraction outside the specification;
:func:`fitdrag.uncertainty.lot_statistics.decide_lot` the lot's decision.  :func:`issue_lot`
renders the lot report (PDF, PNG of page 1, JSON) and stores one record.
"""

from __future__ import annotations

import dataclasses
import json
import math
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from fitdrag._files import temporary_path
from fitdrag.errors import ConvergenceError, InputError
from fitdrag.run.lot_file import Lot

__all__ = ["SHARED_INPUTS", "LotMeasurement", "SpecimenResult", "issue_lot", "measure_lot",
           "lot_summary"]  # fmt: skip

#: Budget inputs that every specimen of a lot shares when their value and uncertainty are
#: the same in every specimen's job: the air, the site's gravity, the camera's frame rate,
#: length scale, level and distance.  Their errors move every specimen's Cd together (fully
#: correlated, JCGM 100:2008 eq. (13) with r = 1).  Every other line (mass, size, each
#: throw's flight plane, the air's movement during each throw, the fit's statistics) is the
#: specimen's own.
SHARED_INPUTS = ("temperature", "pressure", "relative_humidity", "air_density", "air_viscosity",
                 "gravity", "frame_rate", "length_scale", "roll", "camera_distance")  # fmt: skip


@dataclass(frozen=True)
class SpecimenResult:
    """One specimen's measurement, as the lot needs it (small and picklable).

    Attributes
    ----------
    id : str
        The specimen.
    drag_coefficient : float
        Its Cd. [-]
    combined_standard_uncertainty, expanded_uncertainty : float
        u_c and U of its full budget. [-]
    coverage_factor : float
        k. [-]
    statistical_uncertainty : float
        The fit's own part. [-]
    budget : Budget
        The budget.
    decision : str or None
        The specimen's own conformity decision.
    throws : tuple of str
        Labels of its throws.
    hashes : mapping
        SHA-256 of its input files, by path.
    """

    id: str
    drag_coefficient: float
    combined_standard_uncertainty: float
    expanded_uncertainty: float
    coverage_factor: float
    statistical_uncertainty: float
    budget: Any
    decision: str | None
    throws: tuple[str, ...]
    hashes: Mapping[str, str]

    def line_contributions(self) -> dict[str, tuple[float, float, float]]:
        """Each budget line's (value, standard uncertainty, signed contribution)."""
        return {ln.name: (ln.value, ln.standard_uncertainty, ln.contribution)
                for ln in self.budget.lines}  # fmt: skip


@dataclass(frozen=True)
class SpecimenFailure:
    """A specimen whose measurement failed: the task that raised and the message."""

    id: str
    task: str
    message: str
    exit_code: int


@dataclass(frozen=True, eq=False)
class LotMeasurement:
    """Everything ``fitdrag lot`` computes before issuing.

    Attributes
    ----------
    lot : Lot
        The lot file.
    specimens : tuple of SpecimenResult
        The measured specimens, in the lot file's order.
    failures : tuple of SpecimenFailure
        Specimens that could not be measured.
    shared : tuple of str
        The budget lines taken as shared by all specimens.
    statistics : LotStatistics or None
        The lot statistics (None when a specimen failed).
    verdict : LotVerdict or None
        The lot decision (None without a specification or statistics).
    """

    lot: Lot
    specimens: tuple[SpecimenResult, ...]
    failures: tuple[SpecimenFailure, ...]
    shared: tuple[str, ...]
    statistics: Any
    verdict: Any

    @property
    def decision(self) -> str | None:
        return None if self.verdict is None else self.verdict.decision

    def to_dict(self) -> dict:
        """The lot report's JSON (without the issue's number and outputs)."""
        from fitdrag._version import __version__

        lot = self.lot
        st = self.statistics
        spec = lot.specification
        out: dict[str, Any] = {
            "software_version": __version__,
            "lot": {
                "id": lot.id,
                "description": lot.description,
                "lot_file": str(lot.path),
                "base_job": str(lot.base_job),
                "laboratory": lot.first_job.laboratory.name,
                "customer": lot.first_job.test.customer,
            },
            "specimens": [
                {
                    "id": s.id,
                    "drag_coefficient": s.drag_coefficient,
                    "expanded_uncertainty": s.expanded_uncertainty,
                    "coverage_factor": s.coverage_factor,
                    "combined_standard_uncertainty": s.combined_standard_uncertainty,
                    "independent_standard_uncertainty": _own_u(s, self.shared),
                    "statistical_standard_uncertainty": s.statistical_uncertainty,
                    "decision": s.decision,
                    "throws": list(s.throws),
                    "budget": s.budget.to_dict(),
                }
                for s in self.specimens
            ],
            "failures": [dataclasses.asdict(f) for f in self.failures],
            "specification": None if spec is None else spec.to_dict(),
        }
        if st is not None:
            re = st.random_effects
            ti = st.tolerance
            out["summary"] = {
                "n": st.n,
                "mean": st.mean,
                "standard_uncertainty_of_mean": st.u_mean,
                "standard_uncertainty_of_mean_independent": st.u_mean_independent,
                "standard_uncertainty_of_mean_shared": st.u_mean_shared,
                "shared_inputs": dict(st.shared_contributions),
                "coverage_factor": st.coverage_factor,
                "expanded_uncertainty_of_mean": st.expanded_uncertainty,
                "standard_deviation": st.standard_deviation,
                "standard_deviation_uncertainty": re.u_tau,
                "standard_deviation_interval_95": list(re.tau_interval),
                "spread_method": re.method,
                "tolerance_interval": [_finite(ti.low), _finite(ti.high)],
                "tolerance_interval_coverage": ti.coverage,
                "tolerance_interval_confidence": ti.confidence,
                "tolerance_factor": ti.k,
                "tolerance_interval_sides": ti.sides,
                "fraction_outside_specification": st.fraction_outside,
                "decision": self.decision,
                "decision_rule": None if self.verdict is None else self.verdict.rule,
                "guard_band": None if self.verdict is None else self.verdict.guard_band,
            }
            out["methods"] = lot_methods(self)
            out["statement"] = lot_statement(self)
        return out


def _finite(x: float) -> float | None:
    return x if math.isfinite(x) else None


def _own_u(s: SpecimenResult, shared: tuple[str, ...]) -> float:
    u2 = s.combined_standard_uncertainty**2
    u2 -= sum(c * c for n, (_, _, c) in s.line_contributions().items() if n in shared)
    return math.sqrt(max(u2, 0.0))


# ---------------------------------------------------------------------------------------------
# tasks (module level: Dask pickles them by reference)
# ---------------------------------------------------------------------------------------------


def track_throw_task(sid: str, job, i: int):
    """Task: the track of throw ``i`` of specimen ``sid`` and its input hashes."""
    from fitdrag.run.pipeline import read_throw

    th = job.throws[i]
    try:
        return read_throw(job, i, where=f"specimen {sid}, throw {i + 1} ({th.path.name}):")
    except FileNotFoundError:
        raise
    except InputError:
        raise
    except Exception as exc:  # name the specimen and the file in whatever went wrong
        raise type(exc)(f"specimen {sid}, throw {i + 1} ({th.path.name}): {exc}") from exc


def measure_specimen_task(sid: str, job, *tracked) -> SpecimenResult:
    """Task: fit, budget and decision of one specimen from its throws' tracks (None: read
    them here)."""
    from fitdrag.run.pipeline import measure
    from fitdrag.tracks.track import file_sha256

    given = None
    if tracked and all(t is not None for t in tracked):
        hashes = {str(job.path): file_sha256(job.path)}
        for _, h in tracked:
            hashes.update(h)
        given = ([t for t, _ in tracked], hashes)
    try:
        meas = measure(job, monte_carlo=0, tracks=given)
    except ConvergenceError as exc:
        raise ConvergenceError(f"specimen {sid}: {exc}") from None
    except InputError as exc:
        msg = str(exc)
        raise type(exc)(msg if sid in msg else f"specimen {sid}: {msg}") from None
    res = meas.content.result
    return SpecimenResult(
        id=sid,
        drag_coefficient=float(res.drag_coefficient),
        combined_standard_uncertainty=float(res.combined_standard_uncertainty),
        expanded_uncertainty=float(res.expanded_uncertainty),
        coverage_factor=float(res.coverage_factor),
        statistical_uncertainty=float(res.statistical_standard_uncertainty),
        budget=meas.budget,
        decision=meas.decision,
        throws=tuple(th.label for th in job.throws),
        hashes=dict(meas.hashes),
    )


def lot_tasks(lot: Lot) -> list:
    """The tasks of a lot: one per footage throw measured in the plane, one per specimen."""
    from fitdrag.run.tasks import Need, Task

    tasks = []
    for sp in lot.specimens:
        job = sp.job
        needs = []
        if not job.measured_in_3d:
            for i, th in enumerate(job.throws):
                if th.kind == "footage":
                    key = f"track-{sp.id}-{i + 1}"
                    tasks.append(Task(key, track_throw_task, (sp.id, job, i),
                                      f"specimen {sp.id}, file {th.path.name}"))  # fmt: skip
                    needs.append(Need(key))
        if needs and len(needs) != len(job.throws):
            # mixed track and footage throws: the specimen task reads them all itself
            needs = []
        files = ", ".join(th.path.name for th in job.throws)
        tasks.append(Task(f"fit-{sp.id}", measure_specimen_task, (sp.id, job, *needs),
                          f"specimen {sp.id}, files {files}"))  # fmt: skip
    return tasks


# ---------------------------------------------------------------------------------------------
# the lot
# ---------------------------------------------------------------------------------------------


def shared_lines(results) -> tuple[str, ...]:
    """The budget lines of :data:`SHARED_INPUTS` whose value and standard uncertainty are the
    same for every specimen (taken as shared)."""
    out = []
    for name in SHARED_INPUTS:
        vals = [r.line_contributions().get(name) for r in results]
        if any(v is None for v in vals):
            continue
        if len({(v[0], v[1]) for v in vals}) == 1 and vals[0][1] > 0:
            out.append(name)
    return tuple(out)


def measure_lot(lot: Lot, *, scheduler: str | None = None, workers: int | None = None,
                progress: bool = False) -> LotMeasurement:  # fmt: skip
    """Measure every specimen (as tasks) and the lot's statistics and decision.

    Parameters
    ----------
    lot : Lot
        The lot (:func:`fitdrag.run.lot_file.load_lot`).
    scheduler : str, optional
        Address of a running ``dask.distributed`` scheduler.
    workers : int, optional
        Local processes (default: the CPUs available); 0 = in this process, without Dask.
    progress : bool
        Show a progress bar.

    Returns
    -------
    LotMeasurement
        With ``failures`` for the specimens that could not be measured (then no statistics).
    """
    from fitdrag.errors import EXIT_BAD_INPUT, EXIT_BUG, EXIT_NO_CONVERGENCE
    from fitdrag.run.tasks import run_tasks
    from fitdrag.uncertainty.lot_statistics import SpecimenValue, decide_lot, lot_statistics

    outcomes = run_tasks(lot_tasks(lot), scheduler=scheduler, workers=workers,
                         progress=progress, description=f"lot {lot.id}")  # fmt: skip
    results, failures = [], []
    for sp in lot.specimens:
        o = outcomes[f"fit-{sp.id}"]
        if o.ok:
            results.append(o.value)
            continue
        code = (EXIT_NO_CONVERGENCE if isinstance(o.error, ConvergenceError)
                else EXIT_BAD_INPUT if isinstance(o.error, ValueError | OSError)
                else EXIT_BUG)  # fmt: skip
        failures.append(SpecimenFailure(sp.id, o.failed_task, str(o.error), code))
    shared = shared_lines(results) if results else ()
    st = verdict = None
    if not failures:
        spec = lot.specification
        values = []
        for r in results:
            contrib = r.line_contributions()
            values.append(SpecimenValue(
                r.id, r.drag_coefficient, _own_u(r, shared),
                {n: contrib[n][2] for n in shared},
                r.expanded_uncertainty, r.coverage_factor,
            ))  # fmt: skip
        lower = None if spec is None else spec.lower
        upper = None if spec is None else spec.upper
        st = lot_statistics(values, lower=lower, upper=upper, coverage=lot.coverage,
                            confidence=lot.confidence, method=lot.spread_method)  # fmt: skip
        if spec is not None:
            verdict = decide_lot(st.tolerance, lower, upper, lot.decision_rule or "simple",
                                 st.shared_expanded_uncertainty)  # fmt: skip
    return LotMeasurement(lot, tuple(results), tuple(failures), shared, st, verdict)


def lot_methods(m: LotMeasurement) -> dict[str, str]:
    """Each statistic's method and source, in words (the report names them)."""
    st = m.statistics
    shared = ", ".join(m.shared) or "none"
    return {
        "specimens": (
            "each specimen measured as by 'fitdrag run' (fit of all its throws, GUM budget "
            "JCGM 100:2008 with sensitivities from re-fits, coverage factor from the "
            "t-distribution)"
        ),
        "shared_inputs": (
            f"inputs shared by every specimen, taken as fully correlated (JCGM 100:2008 eq. "
            f"(13), r = 1): {shared}; their part of the mean's uncertainty does not shrink "
            f"with the number of specimens"
        ),
        "spread": (
            f"between-specimen standard deviation: {st.random_effects.method_text}, from each "
            f"specimen's Cd and the part of its uncertainty of its own; uncertainty of the "
            f"spread from the Q-profile interval (Viechtbauer, Stat. Med. 26, 2007)"
        ),
        "mean": (
            "lot mean weighted by 1/(u_own² + τ²) (random-effects model); expanded "
            "uncertainty k = 2 (normal approximation)"
        ),
        "tolerance_interval": st.tolerance.method_text,
        "fraction_outside": (
            "estimated fraction of the lot outside the specification: normal tails beyond the "
            "limits at the lot mean and the between-specimen standard deviation (plug-in "
            "estimate)"
        ),
        "decision": "" if m.verdict is None else m.verdict.rule_text,
    }


def lot_statement(m: LotMeasurement) -> str:
    """The lot statement: the decision, what it covers and the rule."""
    from fitdrag.report.numbers import format_sig, formatter_for

    st = m.statistics
    ti = st.tolerance
    fmt = formatter_for(st.expanded_uncertainty)
    lo = "−∞" if not math.isfinite(ti.low) else fmt(ti.low)
    hi = "+∞" if not math.isfinite(ti.high) else fmt(ti.high)
    head = (
        f"Lot {m.lot.id}: {st.n} specimens measured. The interval [{lo}, {hi}] contains at "
        f"least {100 * ti.coverage:g} % of the lot's drag coefficients with "
        f"{100 * ti.confidence:g} % confidence (ISO 16269-6:2014)."
    )
    if m.verdict is None:
        return head + " No specification stated: no lot decision."
    spec = m.lot.specification
    frac = st.fraction_outside
    return (
        f"{head} Against the specification {spec.describe(fmt)}, the lot decision is "
        f"{m.verdict.decision.upper()} under {m.verdict.rule} acceptance (guard band "
        f"{format_sig(m.verdict.guard_band, 2)}). Estimated fraction of the lot outside the "
        f"specification: {format_sig(100 * frac, 2)} %."
    )


def lot_summary(m: LotMeasurement) -> str:
    """A few lines for the console."""
    from fitdrag.report.numbers import format_sig, format_with_uncertainty

    lines = []
    for r in m.specimens:
        cd, u = format_with_uncertainty(r.drag_coefficient, r.expanded_uncertainty)
        lines.append(f"  {r.id:<16} Cd = {cd} ± {u} (k = {r.coverage_factor:.2f})"
                     + (f"  {r.decision}" if r.decision else ""))  # fmt: skip
    for f in m.failures:
        lines.append(f"  {f.id:<16} FAILED in {f.task}: {f.message}")
    st = m.statistics
    if st is not None:
        mean, um = format_with_uncertainty(st.mean, st.expanded_uncertainty)
        lines.append(
            f"lot {m.lot.id}: mean Cd = {mean} ± {um} (k = 2; shared inputs "
            f"{format_sig(st.u_mean_shared, 2)}, own {format_sig(st.u_mean_independent, 2)})"
        )
        re = st.random_effects
        lines.append(
            f"  between-specimen SD {format_sig(re.tau, 2)} (standard uncertainty "
            f"{format_sig(re.u_tau, 2)}; {re.method})"
        )
        ti = st.tolerance
        lines.append(
            f"  tolerance interval [{ti.low:.4g}, {ti.high:.4g}] ({100 * ti.coverage:g} % of "
            f"the lot, {100 * ti.confidence:g} % confidence, k = {ti.k:.3f})"
        )
        if st.fraction_outside is not None:
            lines.append(f"  estimated fraction outside the specification "
                         f"{format_sig(100 * st.fraction_outside, 2)} %")  # fmt: skip
        if m.verdict is not None:
            lines.append(f"  lot decision: {m.verdict.decision.upper()} ({m.verdict.rule} "
                         f"acceptance)")  # fmt: skip
    return "\n".join(lines)


# ---------------------------------------------------------------------------------------------
# issuing
# ---------------------------------------------------------------------------------------------


def issue_lot(m: LotMeasurement, *, records_path=None, force: bool = False):
    """Render the lot report (PDF, PNG of page 1, JSON) and store one record.

    The records database is ``records_path``, else the base job's (its ``[output] records``
    or the laboratory's, :func:`fitdrag.run.records.lab_records`); the base job must name
    who approves the report (``[test] approved_by``), as for a certificate issued at once.
    An issued report file is never overwritten (``force`` is kept for the callers' other
    files).

    Returns
    -------
    (Record, Path)
    """
    from fitdrag.report.lot_report import render_lot_report
    from fitdrag.run.pipeline import approver, issued_paths
    from fitdrag.run.records import PendingFile, Records, lab_records
    from fitdrag.tracks.track import file_sha256

    del force  # issued report files are never overwritten

    if m.statistics is None:
        raise InputError(
            f"lot {m.lot.id}: {len(m.failures)} specimen(s) failed; no lot report is issued "
            f"for an incomplete lot. Fix them and run the lot again."
        )
    lot = m.lot
    outdir = Path(lot.output_directory)
    outdir.mkdir(parents=True, exist_ok=True)
    name = approver(lot.first_job)
    where = lab_records(records_path, lot.first_job.output.records)
    where.path.parent.mkdir(parents=True, exist_ok=True)
    db = Records(where.path)
    data = m.to_dict()
    hashes = {str(lot.path): file_sha256(lot.path)}
    for r in m.specimens:
        hashes.update(r.hashes)

    def render(number, when, record_hash):
        finals = issued_paths(outdir, number, "lot_report")
        tmps = {k: temporary_path(f) for k, f in finals.items()}
        issued = {**data, "issue": {"number": number,
                                    "issued_at": when.isoformat(timespec="seconds"),
                                    "approved_by": name, "record_hash": record_hash,
                                    "records_id": db.id},
                  "outputs": {k: str(f.resolve()) for k, f in finals.items()}}  # fmt: skip
        try:
            render_lot_report(issued, tmps["lot_report_pdf"], tmps["lot_report_png"])
            text = json.dumps(issued, indent=2, allow_nan=False, default=str)
            tmps["result_json"].write_text(text + "\n", encoding="utf-8")
        except BaseException:
            for t in tmps.values():
                t.unlink(missing_ok=True)
            raise
        return {k: PendingFile(tmps[k], finals[k]) for k in finals}

    st = m.statistics
    rec = db.issue(
        render,
        result=json.loads(json.dumps(data, allow_nan=False, default=str)),
        input_hashes=hashes,
        job_text=f"# lot file {lot.path}\n{lot.text}\n# base job {lot.base_job}\n{lot.base_text}",
        job_path=str(lot.path),
        approved_by=name,
        prefix=lot.number_prefix,
        summary={
            "customer": lot.first_job.test.customer,
            "specimen_id": f"lot {lot.id}",
            "drag_coefficient": st.mean,
            "expanded_uncertainty": st.expanded_uncertainty,
            "coverage_factor": st.coverage_factor,
            "decision": m.decision,
            "software_version": data["software_version"],
        },
    )
    return rec, where.path
