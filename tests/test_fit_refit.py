"""Tests of fitdrag.fit.refit: re-solving a finished fit with changed inputs.

Labels: closed-form/independent, regression.  Truth from tests/reference.py (scipy DOP853),
noise synthetic from a fixed seed.
"""

from __future__ import annotations

import functools
import math
import re

import numpy as np
import pytest
import reference as ref

from fitdrag import Air, Sphere, Track, fit_tracks
from fitdrag.fit.refit import Refit, RefitSession, refit

SC = ref.Scenario(added_mass_coefficient=0.0, buoyancy=False, n=200)


@functools.cache
def fitted():
    xy = SC.truth() + np.random.default_rng(8).normal(0.0, SC.sigma, (SC.n, 2))
    track = Track(SC.t, xy[:, 0], xy[:, 1])
    sphere = Sphere(SC.mass, SC.diameter, added_mass_coefficient=0.0)
    fit = fit_tracks(track, sphere, Air(ref.RHO, ref.MU), buoyancy=False, robust=False)
    assert fit.success
    return fit, track


def test_refit_at_unchanged_inputs_returns_the_fit():
    """regression: with nothing changed the re-fit returns the fit's own optimum."""
    fit, _track = fitted()
    out = refit(fit)
    assert isinstance(out, Refit) and out.success
    assert out.cd == pytest.approx(fit.cd, rel=1e-9)
    np.testing.assert_allclose(out.values, fit.values, rtol=1e-8, atol=1e-12)


def test_refit_scales_cd_with_mass_and_density():
    """closed-form/independent: without buoyancy and added mass the data fix the drag
    constant ρ C_d A / (2 m), so C_d ∝ m / ρ exactly: 1 % more mass gives 1 % more C_d, 1 %
    denser air 1 % less."""
    fit, _track = fitted()
    heavier = Sphere(SC.mass * 1.01, SC.diameter, added_mass_coefficient=0.0)
    assert refit(fit, specimen=heavier).cd == pytest.approx(fit.cd * 1.01, rel=1e-7)
    denser = Air(ref.RHO * 1.01, ref.MU)
    assert refit(fit, air=denser).cd == pytest.approx(fit.cd / 1.01, rel=1e-7)


def test_refit_refuses_tracks_of_other_lengths():
    """regression: replacement tracks must match the original throws sample for sample."""
    fit, track = fitted()
    short = Track(track.t[:-1], track.x[:-1], track.y[:-1])
    msg = ("tracks: refit needs tracks with the same number of throws and samples as the "
           "original fit; run fit_tracks for new data.")  # fmt: skip
    with pytest.raises(ValueError, match="^" + re.escape(msg) + "$"):
        refit(fit, tracks=[short])


def test_refit_with_another_correlation_equals_a_full_fit():
    """closed-form/independent: a sphere-scaled fit re-solved with another correlation's
    curve (model=...) reaches the optimum a full fit with that model reaches (Cd within u/2,
    the full fit re-estimating its noise weights), starting from the scale that gives the same
    Cd; a law of other parameters is refused."""
    xy = SC.truth() + np.random.default_rng(8).normal(0.0, SC.sigma, (SC.n, 2))
    track = Track(SC.t, xy[:, 0], xy[:, 1])
    sphere = Sphere(SC.mass, SC.diameter, added_mass_coefficient=0.0)
    air = Air(ref.RHO, ref.MU)
    kw = dict(buoyancy=False, robust=False, noise="white")
    fit = fit_tracks(track, sphere, air, model="sphere-scaled", **kw)
    other = "sphere-scaled:clift-gauvin"
    full = fit_tracks(track, sphere, air, model=other, **kw)
    out = refit(fit, model=other)
    assert out.success
    # the re-fit states Cd at the fit's median Re; the full fit at its own (the same flight)
    assert abs(out.cd - full.cd) < 0.5 * fit.u_cd
    assert out.values[0] == pytest.approx(full.parameter("scale")[0], rel=2e-4)
    with pytest.raises(ValueError, match=r"^model: 'power-law' has parameters \('cd_ref', "
                       r"'exponent'\)"):  # fmt: skip
        refit(fit, model="power-law")


def test_refit_with_a_fixed_lift_coefficient():
    """closed-form/independent: a flight with backspin C_L = 0.03 (scipy DOP853) fitted
    without lift, re-solved with C_L held at 0.03, gives the Cd of the fit with lift within
    u/2; a fit with a fitted lift refuses a fixed one."""
    s = ref.flight(SC.t, SC.launch, SC.body, ref.RHO, SC.cd, lift=0.03, buoyancy=False)
    xy = s[:, :2] + np.random.default_rng(9).normal(0.0, 1e-4, (SC.n, 2))
    track = Track(SC.t, xy[:, 0], xy[:, 1])
    sphere = Sphere(SC.mass, SC.diameter, added_mass_coefficient=0.0)
    kw = dict(buoyancy=False, robust=False, noise="white")
    plain = fit_tracks(track, sphere, Air(ref.RHO, ref.MU), **kw)
    lifted = fit_tracks(track, sphere, Air(ref.RHO, ref.MU), lift=True, **kw)
    assert plain.success and lifted.success
    held = refit(plain, lift_coefficient=lifted.parameter("lift_coefficient")[0])
    assert held.success and abs(held.cd - lifted.cd) < 0.5 * lifted.u_cd
    assert abs(plain.cd - lifted.cd) > 5 * lifted.u_cd
    with pytest.raises(ValueError, match=r"^lift_coefficient: the fit has a fitted lift"):
        refit(lifted, lift_coefficient=0.01)


def _moved_inputs(fit, track):
    """Changed inputs of a typical budget trial: 2 % heavier specimen, thinner air, stronger
    gravity, positions scaled by 1 + 1e-3 and turned by 0.2°, times by 1 + 2e-4."""
    a = math.radians(0.2)
    dx, dy = track.x - track.x[0], track.y - track.y[0]
    x = (track.x[0] + math.cos(a) * dx - math.sin(a) * dy) * 1.001
    y = (track.y[0] + math.sin(a) * dx + math.cos(a) * dy) * 1.001
    t = track.t * 1.0002
    return {
        "specimen": Sphere(SC.mass * 1.02, SC.diameter, added_mass_coefficient=0.0),
        "air": Air(ref.RHO * 0.995, ref.MU),
        "gravity": 9.812,
    }, Track(t, x, y)


def test_fixed_jacobian_session_equals_a_full_refit():
    """closed-form/independent: the fixed-Jacobian re-solve (chord steps, then one exact
    Gauss–Newton step) returns the optimum of a full re-fit (Gauss–Newton with the exact
    Jacobian at every step, fitdrag.fit.refit.refit) to 1e-3 of u(Cd) for changed specimen,
    air, gravity, sample times and positions — an effect of tens of u(Cd) — and the fit's own
    optimum when nothing changes; without the exact last step it still agrees to 0.05 u(Cd)
    for these small changes (the chord's fixed point is off by a second-order amount)."""
    fit, track = fitted()
    kw, moved = _moved_inputs(fit, track)
    full = refit(fit, tracks=[moved], **kw)
    assert full.success and abs(full.cd - fit.cd) > 3 * fit.u_cd
    session = RefitSession(fit)
    fast = session.solve(times=[moved.t], positions=[(moved.x, moved.y)], **kw)
    assert fast is not None and fast.success
    assert abs(fast.cd - full.cd) < 1e-3 * fit.u_cd
    same = session.solve()
    assert same.cd == pytest.approx(fit.cd, abs=1e-6 * fit.u_cd)
    chord = RefitSession(fit, exact_step=False).solve(
        times=[moved.t], positions=[(moved.x, moved.y)], **kw
    )
    assert abs(chord.cd - full.cd) < 0.05 * fit.u_cd


def test_fixed_jacobian_session_gives_up_rather_than_guess():
    """regression: a chord iteration allowed a single step cannot meet its tolerance after a
    change of several u(Cd), and says so (None) so that the caller re-fits in full."""
    fit, track = fitted()
    kw, moved = _moved_inputs(fit, track)
    session = RefitSession(fit)
    assert session.solve(times=[moved.t], positions=[(moved.x, moved.y)], max_iter=1,
                         **kw) is None  # fmt: skip


def test_chord_matrices_are_the_pseudo_inverse_and_the_unit_noise_uncertainties():
    """closed-form/independent: for a full-rank J the chord step's matrix is the
    Moore-Penrose pseudo-inverse (numpy.linalg.pinv) and the scale sqrt(diag((J^T J)^-1))
    (the parameters' standard uncertainties at unit noise)."""
    import numpy as np

    from fitdrag.fit.refit import chord_matrices

    jac = np.random.default_rng(3).normal(size=(40, 5))
    step, scale = chord_matrices(jac)
    np.testing.assert_allclose(step, np.linalg.pinv(jac), rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(scale, np.sqrt(np.diag(np.linalg.inv(jac.T @ jac))), rtol=1e-10)
