"""The flight's physics in a measurement: the spin (lift) test, and the budget lines and
certificate statements of the air's movement and of the choice of drag law.

* **Spin.**  Unless the job states ``[fit] lift = true`` or ``false``, the throws are tested
  for a lift force (:func:`fitdrag.fit.lift_check.check_lift`, F-test at a 1 % false-alarm
  rate; in 3-D :func:`~fitdrag.fit.lift_check.check_lift_views`, its Wald form): when the
  data need it, the fit includes a constant lift coefficient and the certificate says so;
  when not, the certificate states the largest lift coefficient the data allow, and the
  budget carries its effect on Cd (the ``lift_coefficient`` line: by re-fits in the plane,
  to first order in 3-D).  A planar fit sees backspin and topspin only; side spin turns the
  flight out of the plane (3-D; the 3-D test takes the spin axis normal to the board).
* **Air movement.**  ``[air] air_speed_uncertainty`` is the standard uncertainty of the still
  air (or stated wind) the fit assumes, along the flight; the budget propagates it by
  re-fitting with that wind along the flight (the ``air_speed`` line).  Stated as 0, the air
  is taken as exactly still, with a warning.
* **Drag law.**  For a scaled smooth-sphere law, the spread of Cd over the published
  correlations valid at the flight's Reynolds numbers is the ``drag_law`` line
  (:func:`fitdrag.fit.drag_law_choice.drag_law_choice`); the certificate names the
  correlation, its range of validity and any left out.
"""

from __future__ import annotations

import dataclasses
import math
import warnings
from dataclasses import dataclass

from fitdrag.errors import ConvergenceError
from fitdrag.run.job import Job

__all__ = ["FlightPhysics", "decide_lift", "flight_physics_3d", "planar_flight_physics",
           "still_air_warning"]  # fmt: skip


@dataclass(frozen=True)
class FlightPhysics:
    """What a measurement did about spin, air movement and the drag law.

    Attributes
    ----------
    lift_check : LiftCheck or None
        The lift test (None when the job stated ``lift`` or the throws were measured in 3-D).
    lift_fitted : bool
        Whether the fit includes a lift coefficient.
    lift_coefficient : (float, float) or None
        The fitted C_L and its standard uncertainty, when fitted. [-]
    air_speed_uncertainty : float
        Stated standard uncertainty of the air's speed along the flight. [m/s]
    wind : float
        Stated known wind along +x. [m/s]
    drag_law : DragLawChoice
        The drag law and the spread over the published correlations.
    measured_in_3d : bool
        A 3-D measurement (lift test in Wald form; wind along the fitted 3-D flight).
    lift_sensitivity : float or None
        ∂Cd/∂C_L to first order, for a lift line without re-fits (3-D); None: by re-fit. [-]
    """

    lift_check: object
    lift_fitted: bool
    lift_coefficient: tuple[float, float] | None
    air_speed_uncertainty: float
    wind: float
    drag_law: object
    measured_in_3d: bool = False
    lift_sensitivity: float | None = None

    def inputs(self) -> list:
        """The budget lines of the undetected lift and of the drag-law choice (the air-speed
        line is one of :meth:`fitdrag.run.job.Job.input_quantities`)."""
        out = []
        if self.lift_check is not None and not self.lift_fitted:
            q = self.lift_check.input_quantity()
            if q is not None and self.lift_sensitivity is not None:
                q = dataclasses.replace(q, sensitivity=self.lift_sensitivity)
            if q is not None:
                out.append(q)
        q = self.drag_law.input_quantity()
        if q is not None:
            out.append(q)
        return out

    def spin_text(self) -> str:
        from fitdrag.report.numbers import format_sig, format_with_uncertainty

        lc = self.lift_check
        head = ("Spin (about the board's normal)" if self.measured_in_3d
                else "Spin (in the plane; side spin needs 3-D)")  # fmt: skip
        fitted = ""
        if self.lift_fitted:
            v, u = format_with_uncertainty(*self.lift_coefficient)
            fitted = f"C_L = {v} (standard uncertainty {u}) fitted with Cd"
        if lc is None:
            if self.lift_fitted:
                return f"{head}: not tested; {fitted}, as the job states."
            return f"{head}: not tested (the job states no lift); fitted without lift."
        test = (
            f"F-test, false-alarm rate {100 * lc.false_alarm_rate:g} %, "
            + ("p < 1e-6" if lc.p_value < 1e-6 else f"p = {lc.p_value:.2g}")
            if math.isfinite(lc.p_value)
            else lc.reason
        )
        if self.lift_fitted:
            return f"{head}: lift detected ({test}); {fitted}."
        if not math.isfinite(lc.largest_lift):
            return f"{head}: no lift detected ({test}); not bounded, not in the budget."
        return (
            f"{head}: no lift detected ({test}); the data allow |C_L| ≤ "
            f"{format_sig(lc.largest_lift, 2)}, whose effect on Cd is in the budget."
        )

    def air_text(self) -> str:
        from fitdrag.report.numbers import format_sig

        base = ("still air" if not self.wind
                else f"wind {format_sig(self.wind, 3)} m/s along +x")  # fmt: skip
        if not self.air_speed_uncertainty > 0:
            return f"Air: {base}, stated as exact (air speed uncertainty 0; no budget line)."
        along = "the fitted flight" if self.measured_in_3d else "each flight"
        return (
            f"Air: {base} assumed; air speed along the flight u = "
            f"{format_sig(self.air_speed_uncertainty, 2)} m/s (stated), propagated by re-fits "
            f"with that wind along {along}."
        )

    def drag_law_text(self) -> str:
        from fitdrag.physics.sphere_drag import get_correlation
        from fitdrag.report.numbers import format_sig

        d = self.drag_law
        if d.correlation is None:
            return f"Drag law: {d.note}."
        c = get_correlation(d.correlation)
        a, b = d.stated_range
        lo, hi = d.reynolds_range
        text = (
            f"Drag law: s × C_sphere(Re) by the {c.name} correlation, valid Re "
            f"{format_sig(a, 2)} to {format_sig(b, 2)} as used (flight Re {format_sig(lo, 3)} "
            f"to {format_sig(hi, 3)})"
        )
        if len(d.alternatives) > 1:
            text += (
                f"; the {len(d.alternatives)} correlations valid there give Cd within ± "
                f"{format_sig(d.half_width, 2)} (the drag-law line)"
            )
        text += "."
        for name, why in d.excluded.items():
            text += f" Left out: {name} ({why})."
        return text

    def text(self) -> str:
        """The certificate's paragraph on spin and on the drag law (the air movement is in its
        conditions, :meth:`air_text` in the JSON)."""
        parts = [self.spin_text()]
        if self.drag_law.model != "constant":
            parts.append(self.drag_law_text())
        return " ".join(parts)

    def to_dict(self) -> dict:
        lc = self.lift_check
        cl = None
        if self.lift_coefficient is not None:
            cl = {"value": self.lift_coefficient[0],
                  "standard_uncertainty": self.lift_coefficient[1]}  # fmt: skip
        return {
            "lift": {
                "tested": lc is not None,
                "fitted": self.lift_fitted,
                "lift_coefficient": cl,
                **({} if lc is None else {"test": lc.to_dict()}),
            },
            "air_movement": {
                "wind_along_x": self.wind,
                "air_speed_standard_uncertainty": self.air_speed_uncertainty,
                "statement": self.air_text(),
            },
            "drag_law": self.drag_law.to_dict(),
        }


def still_air_warning(job: Job) -> None:
    """Warn when the job takes the air as exactly still (``air_speed_uncertainty = 0``)."""
    u = job.air.air_speed_uncertainty
    if u is not None and not u > 0:
        warnings.warn(
            f"{job.path.name}: [air] air_speed_uncertainty = 0: the air is taken as exactly "
            f"still and no air-movement line enters the budget; a 0.1 m/s draft moves Cd of a "
            f"ball at 9 m/s by about 2 %. State the measured air speed's standard uncertainty.",
            stacklevel=3,
        )


def decide_lift(job: Job, tracks, specimen, air, fit_options: dict):
    """(lift, LiftCheck or None): the job's stated ``lift``, or the lift test's decision."""
    if not job.fit.lift_test:
        return bool(job.fit.lift), None
    from fitdrag.fit.lift_check import check_lift

    kw = {k: fit_options[k] for k in ("model", "wind", "robust", "noise") if k in fit_options}
    check = check_lift(tracks, specimen, air, gravity=job.gravity(), **kw)
    return check.needed, check


def planar_flight_physics(job: Job, fit, lift_check) -> FlightPhysics:
    """The flight physics of a planar measurement (the drag-law spread by re-fits)."""
    from fitdrag.fit.drag_law_choice import drag_law_choice
    from fitdrag.fit.refit import refit

    def cd_with(model: str) -> float:
        r = refit(fit, model=model)
        if not r.success:
            raise ConvergenceError(f"re-fit with {model} did not converge")
        return r.cd

    d = fit.diagnostics
    choice = drag_law_choice(fit.model, (d["reynolds_min"], d["reynolds_max"]), fit.cd, cd_with)
    return FlightPhysics(
        lift_check=lift_check,
        lift_fitted=bool(fit.lift),
        lift_coefficient=fit.parameter("lift_coefficient") if fit.lift else None,
        air_speed_uncertainty=float(job.air.air_speed_uncertainty or 0.0),
        wind=float(job.fit_options().get("wind", 0.0)),
        drag_law=choice,
    )


def flight_physics_3d(job: Job, model, fit) -> FlightPhysics:
    """The flight physics of a 3-D measurement: ``model`` is its ViewRefitModel (the
    drag-law spread by re-fits of every throw), ``fit`` its combined fit."""
    from fitdrag.fit.drag_law_choice import drag_law_choice

    lo = min(t.result.reynolds_range[0] for t in fit.throws)
    hi = max(t.result.reynolds_range[1] for t in fit.throws)
    choice = drag_law_choice(fit.model, (lo, hi), float(fit.cd), model.cd_with_model)
    first = fit.throws[0].result
    lifted = bool(first.options.get("lift", False))
    return FlightPhysics(
        lift_check=fit.lift_check,
        lift_fitted=lifted,
        lift_coefficient=first.parameter("lift_coefficient") if lifted else None,
        air_speed_uncertainty=float(job.air.air_speed_uncertainty or 0.0),
        wind=float(job.fit_options().get("wind", 0.0)),
        drag_law=choice,
        measured_in_3d=True,
        lift_sensitivity=fit.lift_sensitivity,
    )
