"""Tests of fitdrag.run.flight_physics: the lift test, air movement and drag law in a job.

Labels: closed-form/independent (jobs on flights from tests/reference.py, scipy DOP853, with
backspin or an undeclared draft; the truth is the integration's Cd), regression (texts,
warnings, the job's stated lift).
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
import reference as ref

from fitdrag.fit.drag_law_choice import DragLawChoice
from fitdrag.fit.lift_check import LiftCheck
from fitdrag.run.flight_physics import FlightPhysics, decide_lift, still_air_warning
from fitdrag.run.job_file import load_job
from fitdrag.run.job_template import TEMPLATE
from fitdrag.run.pipeline import measure

BALL = ref.Body.sphere(0.024, 0.065)  # a synthetic 24 g, 65 mm foam ball
RHO, MU, G = 1.19, 1.81e-5, 9.80665


def _job(folder, *, lift=0.0, wind=0.0, air_speed_u=0.0, fit_lift='"auto"', seed=1):
    """A job on one track of the ball at 9 m/s, 30° up, 500 frames/s, 0.3 mm noise, flown by
    scipy DOP853 (tests/reference.py) with the given backspin and horizontal wind."""
    t = np.arange(200) / 500.0
    a = math.radians(30)
    s = ref.flight(t, (0.0, 1.0, 9 * math.cos(a), 9 * math.sin(a)), BALL, RHO, 0.5,
                   lift=lift, wind=wind)  # fmt: skip
    xy = s[:, :2] + np.random.default_rng(seed).normal(0.0, 3e-4, (t.size, 2))
    rows = "".join(f"{a!r},{b!r},{c!r}\n" for a, b, c in zip(t.tolist(), xy[:, 0].tolist(),
                                                             xy[:, 1].tolist()))  # fmt: skip
    (folder / "throw1.csv").write_text("t,x,y\n" + rows)
    edits = {
        "mass = 0.0027 ": "mass = 0.024 ", "mass_uncertainty = 0.00001 ": "mass_uncertainty = 2e-5 ",
        "diameter = 0.040 ": "diameter = 0.065 ",
        "diameter_uncertainty = 0.00005 ": "diameter_uncertainty = 8e-5 ",
        "temperature = 21.0 ": "# ", "temperature_uncertainty = 0.3 ": "# ",
        "pressure = 100800 ": "# ", "pressure_uncertainty = 50 ": "# ",
        "relative_humidity = 45 ": "# ", "relative_humidity_uncertainty = 3 ": "# ",
        "# density = 1.19 ": f"density = {RHO} ", "# density_uncertainty = 0.005 ":
        "density_uncertainty = 0.003 ", "# viscosity = 1.81e-5 ": f"viscosity = {MU} ",
        "# viscosity_uncertainty = 1e-7 ": "viscosity_uncertainty = 0 ",
        "air_speed_uncertainty = 0.05 ": f"air_speed_uncertainty = {air_speed_u} ",
        "latitude = 47.0 ": f"gravity = {G}\ngravity_uncertainty = 0.0005\n# ",
        "height = 400 ": "# ", "out_of_plane_uncertainty = 0.5 ": "out_of_plane_uncertainty = 0 ",
        'lift = "auto" ': f"lift = {fit_lift} ",
    }  # fmt: skip
    text = TEMPLATE
    for old, new in edits.items():
        assert old in text, old
        text = text.replace(old, new, 1)
    (folder / "job.toml").write_text(text)
    return load_job(folder / "job.toml")


def _measure(job):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return measure(job)


@pytest.mark.parametrize("cl", [0.05, 0.10])
def test_backspin_is_fitted_by_the_default_job(tmp_path, cl):
    """closed-form/independent: with backspin C_L = 0.05 or 0.10 the default job (lift
    "auto") fits the lift and |Cd − 0.50| <= U; the certificate and JSON say so.  (Without the
    test the same job reads Cd 3 % high or is refused.)"""
    m = _measure(_job(tmp_path, lift=cl))
    assert m.fit.lift
    assert abs(m.fit.cd - 0.5) <= m.budget.expanded_uncertainty
    fp = m.content.flight_physics
    assert fp["lift"]["tested"] and fp["lift"]["fitted"]
    assert fp["lift"]["lift_coefficient"]["value"] == pytest.approx(cl, abs=0.003)
    assert m.content.method.flight_physics.startswith(
        "Spin (in the plane; side spin needs 3-D): lift detected ("
    )
    assert "lift_coefficient" not in [ln.name for ln in m.budget.lines]


def test_undeclared_draft_is_covered_by_the_air_speed_line(tmp_path):
    """closed-form/independent: a flight through a 0.1 m/s head wind (DOP853) measured as if in
    still air, with only air_speed_uncertainty = 0.1 m/s declared, gives |Cd − 0.50| <= U;
    the air-speed line's sensitivity is close to the closed form 2 Cd / v for
    Cd_eff ≈ Cd (1 − w/v)² (within 30 %: v falls along the flight)."""
    m = _measure(_job(tmp_path, wind=-0.1, air_speed_u=0.1))
    assert abs(m.fit.cd - 0.5) <= m.budget.expanded_uncertainty
    assert abs(m.fit.cd - 0.5) > 0.005  # the draft does move Cd
    line = m.budget.line("air_speed")
    assert abs(line.sensitivity) == pytest.approx(2 * 0.5 / 8.0, rel=0.3)
    assert m.content.conditions.air_speed_uncertainty == 0.1


def test_the_jobs_stated_lift_is_not_tested(tmp_path):
    """regression: lift = false in the job skips the test (no lift line, the certificate says
    it was not tested); the still-air warning names the key."""
    job = _job(tmp_path, fit_lift="false")
    assert decide_lift(job, [], None, None, {}) == (False, None)
    with pytest.warns(UserWarning, match=r"job\.toml: \[air\] air_speed_uncertainty = 0: the air "
                      r"is taken as exactly still and no air-movement line enters the budget"):  # fmt: skip
        m = measure(job)
    assert "lift_coefficient" not in [ln.name for ln in m.budget.lines]
    assert m.content.method.flight_physics.startswith(
        "Spin (in the plane; side spin needs 3-D): not tested (the job states no lift)"
    )
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        still_air_warning(_job(tmp_path, air_speed_u=0.02))  # no warning


def test_texts():
    """regression: what the certificate says about spin, air and the drag law."""
    lc = LiftCheck(False, 0.01, "reason", lift_coefficient=0.0002, lift_uncertainty=0.0004,
                   coverage_factor=2.0, f_statistic=0.3, p_value=0.6, df1=1, df2=394)  # fmt: skip
    law = DragLawChoice("sphere-scaled", "morrison", (3.4e4, 3.9e4), 0.5,
                        {"morrison": 0.5, "cheng": 0.5003}, {"x": "why"}, 0.0003)  # fmt: skip
    fp = FlightPhysics(lc, False, None, 0.02, 0.0, law)
    assert fp.spin_text() == ("Spin (in the plane; side spin needs 3-D): no lift detected "
                              "(F-test, false-alarm rate 1 %, p = 0.6); the data allow |C_L| ≤ "
                              "0.0010, whose effect on Cd is in the budget.")  # fmt: skip
    assert fp.air_text() == ("Air: still air assumed; air speed along the flight u = 0.020 m/s "
                             "(stated), propagated by re-fits with that wind along each "
                             "flight.")  # fmt: skip
    assert fp.drag_law_text() == ("Drag law: s × C_sphere(Re) by the morrison correlation, "
                                  "valid Re 0 to 200000 as used (flight Re 34000 to 39000); the "
                                  "2 correlations valid there give Cd within ± 0.00030 (the "
                                  "drag-law line). Left out: x (why).")  # fmt: skip
    assert [q.name for q in fp.inputs()] == ["lift_coefficient", "drag_law"]
    lifted = FlightPhysics(None, True, (0.05, 0.0006), 0.0, 1.5, law, measured_in_3d=True)
    assert lifted.spin_text() == ("Spin (about the board's normal): not tested; C_L = 0.05000 (standard uncertainty "
                                  "0.00060) fitted with Cd, as the job states.")  # fmt: skip
    assert lifted.air_text() == ("Air: wind 1.50 m/s along +x, stated as exact (air speed "
                                 "uncertainty 0; no budget line).")  # fmt: skip
    assert lifted.inputs()[0].name == "drag_law"
