"""Tests of fitdrag.fit.lift_check: does the flight need a lift force?

Labels: closed-form/independent (flights from tests/reference.py, scipy DOP853, with and
without a lift coefficient), regression.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import reference as ref

from fitdrag import Air, Sphere, Track
from fitdrag.fit.lift_check import DEFAULT_FALSE_ALARM_RATE, LiftCheck, check_lift

# a synthetic 24 g, 65 mm foam ball at 9 m/s, 30° up, 500 frames/s, 0.3 mm noise
BALL = ref.Body.sphere(0.024, 0.065)
T = np.arange(200) / 500.0
LAUNCH = (0.0, 1.0, 9.0 * math.cos(math.radians(30)), 9.0 * math.sin(math.radians(30)))
RHO, MU = 1.2, 1.81e-5


def _track(lift: float, seed: int) -> Track:
    s = ref.flight(T, LAUNCH, BALL, RHO, 0.5, lift=lift)
    xy = s[:, :2] + np.random.default_rng(seed).normal(0.0, 3e-4, (T.size, 2))
    return Track(T, xy[:, 0], xy[:, 1])


def _check(lift, seed=1, **kw) -> LiftCheck:
    return check_lift(_track(lift, seed), Sphere(0.024, 0.065), Air(RHO, MU), **kw)


@pytest.mark.parametrize(
    ("cl", "reason"),
    [(0.05, "the F-test rejects a flight without lift at the 1 % false-alarm rate (F(1, 394) = "),
     (0.10, "only the fit with lift follows the track (without lift: the residuals are almost "
            "perfectly correlated")],
)  # fmt: skip
def test_backspin_is_detected_and_measured(cl, reason):
    """closed-form/independent: flights with backspin C_L = 0.05 and 0.10 (scipy DOP853 with a
    lift ½ ρ C_L A |u| across the air speed) need the lift term — by the F-test, or because
    without lift the fit cannot follow the track at all; its fitted C_L is within 3 u of the
    truth."""
    c = _check(cl)
    assert c.needed
    assert abs(c.lift_coefficient - cl) < 3 * c.lift_uncertainty
    assert c.input_quantity() is None  # a fitted lift is not a budget line
    assert c.reason.startswith(reason)
    d = c.to_dict()
    assert d["lift_needed"] and d["largest_lift_coefficient_allowed"] is None


def test_no_spin_gives_the_bound_and_the_budget_line():
    """closed-form/independent: a flight without spin does not need lift (F-test at 1 %); the
    largest lift allowed is |Ĉ_L| + k u; the budget line has estimate 0 and standard
    uncertainty √(Ĉ_L² + u²) (Phillips, Eberhardt & Parry, J. Res. NIST 102, 1997)."""
    c = _check(0.0)
    assert not c.needed and c.false_alarm_rate == DEFAULT_FALSE_ALARM_RATE == 0.01
    assert c.p_value >= 0.01 and c.df1 == 1 and c.df2 == 2 * T.size - 6
    assert abs(c.lift_coefficient) < 3 * c.lift_uncertainty
    assert c.largest_lift == pytest.approx(
        abs(c.lift_coefficient) + c.coverage_factor * c.lift_uncertainty
    )
    q = c.input_quantity()
    assert q.name == "lift_coefficient" and q.value == 0.0
    assert q.standard_uncertainty == pytest.approx(math.hypot(c.lift_coefficient,
                                                              c.lift_uncertainty))  # fmt: skip
    assert c.reason.startswith("the F-test does not reject a flight without lift at the 1 %")


def test_false_alarm_rate_is_the_level():
    """regression: a stricter false-alarm rate can only turn a detection into none (p fixed);
    a rate outside (0, 0.5) is refused with the fix."""
    c = _check(0.0, seed=4)
    assert not _check(0.0, seed=4, alpha=min(c.p_value / 2, 0.4)).needed
    with pytest.raises(ValueError, match=r"^alpha: the false-alarm rate must be between 0 and "
                       r"0\.5, got 0\.7; 0\.01 is usual\.$"):  # fmt: skip
        _check(0.0, alpha=0.7)


@pytest.mark.parametrize("cl", [0.0, 0.05])
def test_lift_test_of_a_3d_measurement(cl):
    """closed-form/independent: two cameras see a throw (tests/views_reference.py:
    simulate_3d, checked against scipy DOP853 in tests/test_physics_flight3d.py) with backspin
    C_L = 0.05 about the board's normal — detected, C_L within 3 u of the truth, the fit with
    lift kept — or without spin — not detected, and the first-order sensitivity s =
    cov(Cd, C_L)/u²(C_L) predicts the difference of the fits without and with lift,
    Cd₀ − Cd₁ = −s Ĉ_L (exact for a linear model; here within u(Cd)/4)."""
    import views_reference as vref

    from fitdrag.fit.image_fit import fit_views
    from fitdrag.fit.lift_check import check_lift_views

    rng = np.random.default_rng(11)
    th = vref.launch(1.0)
    views = [vref.observe(vref.camera_at(y), th, rng=rng, sigma=0.1, diameter_sigma=0.1,
                          time_offset="true", name=f"cam {i}", lift=cl)
             for i, y in enumerate((-20.0, 20.0))]  # fmt: skip
    check, fits, s = check_lift_views([views], vref.BALL, vref.AIR, noise="white")
    (r,) = fits
    assert check.needed == (cl > 0) and r.success
    assert abs(check.lift_coefficient - cl) < 3 * check.lift_uncertainty
    assert bool(r.options["lift"]) == (cl > 0)
    if cl == 0:
        lifted = fit_views(views, vref.BALL, vref.AIR, lift=True, noise="white")
        assert abs((r.cd - lifted.cd) + s * check.lift_coefficient) < 0.25 * r.u_cd
        assert check.input_quantity().standard_uncertainty == pytest.approx(
            math.hypot(check.lift_coefficient, check.lift_uncertainty)
        )
    else:
        assert s == 0.0 and abs(r.cd - vref.CD) < 3 * r.u_cd
