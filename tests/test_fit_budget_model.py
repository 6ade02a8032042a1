"""Tests of fitdrag.fit.budget_model: the drag coefficient's measurement model (re-fits) on a
synthetic track from an independent integration (tests/reference.py, scipy DOP853)."""

from __future__ import annotations

import numpy as np
import pytest

from fitdrag.fit.budget_model import DragRefitModel
from fitdrag.physics.registry import get_drag_model
from fitdrag.uncertainty.gum import InputQuantity, budget_from_model
from fitdrag.uncertainty.monte_carlo import monte_carlo

# ---------------------------------------------------------------------------------------------
# The drag measurement model (re-fits) on a synthetic track from an independent integration
# ---------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def heavy_fit():
    """A fit without buoyancy and added mass, where Cd = 2 m k / (ρ A) holds exactly for the
    fitted drag constant k, so ∂Cd/∂m = Cd/m, ∂Cd/∂ρ = −Cd/ρ, ∂Cd/∂d = −2 Cd/d."""
    import reference as ref

    from fitdrag import Air, Sphere, Track, fit_tracks

    sc = ref.Scenario(added_mass_coefficient=0.0, buoyancy=False, n=200)
    xy = sc.truth() + np.random.default_rng(8).normal(0.0, sc.sigma, (sc.n, 2))
    track = Track(sc.t, xy[:, 0], xy[:, 1])
    sp = Sphere(sc.mass, sc.diameter, added_mass_coefficient=0.0)
    air = Air(ref.RHO, ref.MU)
    fit = fit_tracks(track, sp, air, buoyancy=False, robust=False)
    assert fit.success
    return fit, track, sc


def test_drag_model_sensitivities_closed_form(heavy_fit):
    """closed-form/independent: without buoyancy and added mass the data fix
    k = ρ Cd A / (2 m), so Cd ∝ m / (ρ d²): sensitivities Cd/m, −Cd/ρ, −2Cd/d (the last to
    O((u/d)²) from the central difference); data from scipy DOP853 (tests/reference.py)."""
    fit, track, sc = heavy_fit
    nominal = {"mass": sc.mass, "diameter": sc.diameter, "air_density": 1.225}
    model = DragRefitModel(fit, [track], nominal, viscosity=1.789e-5)
    assert model(nominal) == pytest.approx(fit.cd, rel=1e-8)
    inputs = [
        InputQuantity("mass", sc.mass, 1e-5, "kg"),
        InputQuantity("diameter", sc.diameter, 5e-5, "m"),
        InputQuantity("air_density", 1.225, 0.005, "kg/m³"),
    ]
    b = budget_from_model(model, inputs, statistical=(fit.u_cd, fit.dof))
    cd = fit.cd
    assert b.line("mass").sensitivity == pytest.approx(cd / sc.mass, rel=1e-6)
    assert b.line("air_density").sensitivity == pytest.approx(
        -cd / 1.225 * (1 + (0.005 / 1.225) ** 2),
        rel=1e-6,  # central difference of 1/ρ
    )
    assert b.line("diameter").sensitivity == pytest.approx(-2 * cd / sc.diameter, rel=1e-5)
    assert b.value == pytest.approx(cd, rel=1e-8)
    assert abs(cd - sc.cd) < 3 * b.combined_standard_uncertainty


def test_drag_model_time_and_length_scale(heavy_fit):
    """closed-form/independent: scaling all lengths by s and gravity by s leaves the motion
    self-similar, with the drag constant k → k/s, hence Cd → Cd/s; a frame rate f instead of
    f0 scales times by f0/f, and with gravity scaled by (f/f0)² Cd is unchanged."""
    fit, track, sc = heavy_fit
    nominal = {"mass": sc.mass, "diameter": sc.diameter, "air_density": 1.225,
               "frame_rate": sc.fps, "length_scale": 1.0, "gravity": 9.80665}  # fmt: skip
    model = DragRefitModel(fit, [track], nominal, viscosity=1.789e-5)
    s = 1.003
    assert model(dict(length_scale=s, gravity=9.80665 * s)) == pytest.approx(fit.cd / s, rel=1e-7)
    f = sc.fps * 1.002
    assert model(dict(frame_rate=f, gravity=9.80665 * (f / sc.fps) ** 2)) == pytest.approx(
        fit.cd, rel=1e-7
    )
    with pytest.raises(ValueError, match=r"nominal: unknown input name\(s\) \['colour'\]"):
        DragRefitModel(fit, [track], {"colour": 1.0})


def test_drag_model_monte_carlo_in_pool(heavy_fit):
    """regression: the re-fit model is picklable and runs in 2 worker processes; its Monte
    Carlo standard deviation matches the GUM u_c of this near-linear model within 15 %
    (200 trials: sampling error of a standard deviation ≈ 1/√(2·200) = 5 %)."""
    fit, track, sc = heavy_fit
    nominal = {"mass": sc.mass, "diameter": sc.diameter, "air_density": 1.225}
    model = DragRefitModel(fit, [track], nominal, viscosity=1.789e-5)
    inputs = [
        InputQuantity("mass", sc.mass, 2e-5, "kg"),
        InputQuantity("diameter", sc.diameter, 1e-4, "m"),
        InputQuantity("air_density", 1.225, 0.01, "kg/m³"),
    ]
    stat = (fit.u_cd, fit.dof)
    b = budget_from_model(model, inputs, statistical=stat)
    mc = monte_carlo(model, inputs, statistical=stat, trials=200, seed=1, workers=2)
    assert mc.failures == 0 and mc.workers == 2
    assert mc.standard_uncertainty == pytest.approx(b.combined_standard_uncertainty, rel=0.15)


def test_drag_model_roll_is_a_rotated_refit(heavy_fit):
    """closed-form/independent: the 'roll' input turns the track about its first sample; Cd
    from the re-fit equals a fresh fit of the track rotated by hand (rotation matrix), and a
    tilted horizontal moves Cd (a part of gravity appears as horizontal deceleration)."""
    import math

    from fitdrag import Track, fit_tracks

    fit, track, sc = heavy_fit
    nominal = {"mass": sc.mass, "diameter": sc.diameter, "air_density": 1.225}
    model = DragRefitModel(fit, [track], nominal, viscosity=1.789e-5)
    a = math.radians(0.5)
    dx, dy = track.x - track.x[0], track.y - track.y[0]
    turned = Track(track.t, track.x[0] + math.cos(a) * dx - math.sin(a) * dy,
                   track.y[0] + math.sin(a) * dx + math.cos(a) * dy)  # fmt: skip
    fresh = fit_tracks(turned, fit.specimen, fit.conditions.air, buoyancy=False, robust=False)
    # the re-fit keeps the original noise weights, the fresh fit re-estimates them: the two
    # agree far inside the statistical uncertainty
    assert abs(model({"roll": 0.5}) - fresh.cd) < 0.05 * fit.u_cd
    assert abs(model({"roll": 0.5}) - fit.cd) > 5 * fit.u_cd


def test_out_of_plane_lines_have_sensitivities_by_refit(heavy_fit):
    """closed-form/independent: the out-of-plane angle re-fits the track mapped to the
    tilted flight plane (fitdrag.geometry.planar; a fresh fit of that track by hand gives the
    same Cd); a flight towards the camera appears to decelerate less (apparent acceleration
    2 v_x v_z / Z), so the true Cd is larger: ∂Cd/∂θ > 0, and about twice as large from half
    the distance.  At θ = 0 the distance does nothing to first order; its line is the GUM
    5.1.2 cross term, by re-fit at θ = u(θ): non-zero and negative (farther: smaller
    effect of the same angle)."""
    from fitdrag import Track, fit_tracks
    from fitdrag.fit.budget_model import distance_sensitivity
    from fitdrag.geometry.planar import PlanarGeometry, flight_plane_track

    fit, track, sc = heavy_fit
    nominal = {"mass": sc.mass, "diameter": sc.diameter, "air_density": 1.225,
               "camera_distance": 3.0, "out_of_plane_angle": 0.0}  # fmt: skip
    model = DragRefitModel(fit, [track], nominal, viscosity=1.789e-5)
    assert model({}) == pytest.approx(fit.cd, rel=1e-9)
    assert model({"camera_distance": 5.0}) == pytest.approx(fit.cd, rel=1e-9)
    x, y, _ = flight_plane_track(track.x, track.y, PlanarGeometry(3.0, 0.3))
    fresh = fit_tracks(Track(track.t, x, y), fit.specimen, fit.conditions.air, buoyancy=False,
                       robust=False)  # fmt: skip
    # the re-fit keeps the original noise weights, the fresh fit re-estimates them: they agree
    # well inside u(Cd), against an effect of the angle of tens of u(Cd)
    assert abs(model({"out_of_plane_angle": 0.3}) - fresh.cd) < 0.5 * fit.u_cd
    assert abs(model({"out_of_plane_angle": 0.3}) - fit.cd) > 10 * fit.u_cd
    inputs = [
        InputQuantity("camera_distance", 3.0, 0.05, "m"),
        InputQuantity("out_of_plane_angle", 0.0, 0.3, "°"),
    ]
    c_z = distance_sensitivity(model, 0.05, {"out_of_plane_angle": 0.3})
    inputs[0] = InputQuantity("camera_distance", 3.0, 0.05, "m", sensitivity=c_z)
    b = budget_from_model(model, inputs, statistical=(fit.u_cd, fit.dof))
    c_theta = b.line("out_of_plane_angle").sensitivity
    assert c_theta > 0 and b.line("camera_distance").sensitivity == c_z < 0
    near = DragRefitModel(fit, [track], dict(nominal, camera_distance=1.5), viscosity=1.789e-5)
    c_near = (near({"out_of_plane_angle": 0.3}) - near({"out_of_plane_angle": -0.3})) / 0.6
    assert c_near == pytest.approx(2 * c_theta, rel=0.1)
    # the cross term: c_Z ≈ ∂²Cd/∂θ∂Z · u(θ), with ∂Cd/∂θ ∝ 1/Z: −c_θ u(θ) / Z
    assert c_z == pytest.approx(-c_theta * 0.3 / 3.0, rel=0.1)
    with pytest.raises(ValueError, match=r"^nominal: out_of_plane_angle needs camera_distance"):
        DragRefitModel(fit, [track], {"mass": sc.mass, "diameter": sc.diameter,
                                      "out_of_plane_angle": 0.0})  # fmt: skip
    with pytest.raises(ValueError, match=r"^nominal: out_of_plane_angle_2 names throw 2, but "
                       r"there are 1 tracks"):  # fmt: skip
        DragRefitModel(fit, [track], dict(nominal, out_of_plane_angle_2=0.0))


# ---------------------------------------------------------------------------------------------
# the flight's physics: air movement, an undetected lift, the viscosity, the drag-law choice
# ---------------------------------------------------------------------------------------------


def _fine_track(seed=3, **kw):
    """A synthetic 40 mm, 2.7 g ball (tests/reference.py Scenario) with 10 µm noise, flown by
    scipy's DOP853 (tests/reference.py) with the keywords given (wind, lift)."""
    import reference as ref

    from fitdrag import Track

    sc = ref.Scenario(n=200)
    s = ref.flight(sc.t, sc.launch, sc.body, ref.RHO, sc.cd, **kw)
    xy = s[:, :2] + np.random.default_rng(seed).normal(0.0, 1e-5, (sc.n, 2))
    return sc, Track(sc.t, xy[:, 0], xy[:, 1])


def _chord(xy):
    d = xy[-1] - xy[0]
    return d / np.hypot(*d)


def test_air_speed_is_a_wind_along_the_flight():
    """closed-form/independent: a flight through air moving at 0.3 m/s along the flight
    (scipy DOP853, tests/reference.py with a wind vector along the flight's own chord, found
    by iterating the integration) fitted as if in still air reads Cd far from the truth 0.47;
    the model re-fitted with air_speed = 0.3 m/s (the change of frame x' = x − w ê t) gives the
    truth back within 2e-4, and −0.3 m/s moves it the other way."""
    import reference as ref

    from fitdrag import Air, Sphere, fit_tracks

    sc = ref.Scenario(n=200)
    w = 0.3
    e = _chord(ref.flight(sc.t, sc.launch, sc.body, ref.RHO, sc.cd)[:, :2])
    for _ in range(4):  # the chord of the flight in moving air, self-consistently
        e = _chord(ref.flight(sc.t, sc.launch, sc.body, ref.RHO, sc.cd, wind=tuple(w * e))[:, :2])
    _sc, track = _fine_track(wind=tuple(w * e))
    fit = fit_tracks(track, Sphere(sc.mass, sc.diameter), Air(ref.RHO, ref.MU), robust=False,
                     noise="white")  # fmt: skip
    assert fit.success and abs(fit.cd - sc.cd) > 0.01  # still air misreads the moving air
    model = DragRefitModel(fit, [track], {"air_speed": 0.0})
    assert model({"air_speed": 0.0}) == pytest.approx(fit.cd, rel=1e-8)
    assert model({"air_speed": w}) == pytest.approx(sc.cd, abs=2e-4)
    assert (model({"air_speed": -w}) - fit.cd) * (fit.cd - sc.cd) > 0
    assert np.allclose(model.directions[0], e, atol=1e-3)


def test_lift_coefficient_is_held_in_the_refit():
    """closed-form/independent: a flight with backspin C_L = 0.02 (scipy DOP853) fitted
    without lift reads Cd away from the truth; re-fitted with C_L held at 0.02 it gives the
    truth 0.47 back within 2e-4.  A fit with lift takes no lift_coefficient input."""
    import reference as ref

    from fitdrag import Air, Sphere, fit_tracks

    sc, track = _fine_track(lift=0.02)
    sp, air = Sphere(sc.mass, sc.diameter), Air(ref.RHO, ref.MU)
    fit = fit_tracks(track, sp, air, robust=False, noise="white")
    assert fit.success and abs(fit.cd - sc.cd) > 1e-3
    model = DragRefitModel(fit, [track], {"lift_coefficient": 0.0})
    assert model({"lift_coefficient": 0.02}) == pytest.approx(sc.cd, abs=2e-4)
    lifted = fit_tracks(track, sp, air, robust=False, noise="white", lift=True)
    with pytest.raises(ValueError, match=r"^nominal: lift_coefficient is an input only of a fit "
                       r"without lift"):  # fmt: skip
        DragRefitModel(lifted, [track], {"lift_coefficient": 0.0})


def test_viscosity_and_drag_law_inputs():
    """closed-form/independent: with a Reynolds-dependent law the re-fit at another stated
    viscosity equals a full fit with that viscosity (fit_tracks, within u(Cd)/2, while the
    change itself is over 5 u(Cd)); a constant Cd does not
    depend on it; the drag-law input adds to Cd without a re-fit; air_viscosity needs
    air_density."""
    import reference as ref

    from fitdrag import Air, Sphere, fit_tracks

    sc, track = _fine_track()
    sp = Sphere(sc.mass, sc.diameter)
    fit = fit_tracks(track, sp, Air(ref.RHO, ref.MU), model="sphere-scaled", robust=False,
                     noise="white")  # fmt: skip
    nominal = {"air_density": ref.RHO, "air_viscosity": ref.MU, "drag_law": 0.0}
    model = DragRefitModel(fit, [track], nominal, viscosity=ref.MU)
    mu2 = ref.MU * 1.05
    full = fit_tracks(track, sp, Air(ref.RHO, mu2), model="sphere-scaled", robust=False,
                      noise="white")  # fmt: skip
    re_med = fit.diagnostics["reynolds_median"]
    # the re-fit states Cd at the original median Re: compare the fitted scale's Cd there
    expected = full.parameter("scale")[0] * float(
        get_drag_model("sphere-scaled").cd([re_med], [1.0])[0]
    )
    # the same within a fraction of u(Cd) (the full fit re-estimates its noise weights)
    assert abs(model({"air_viscosity": mu2}) - expected) < 0.5 * fit.u_cd
    assert abs(model({"air_viscosity": mu2}) - fit.cd) > 5 * fit.u_cd
    assert model({"drag_law": 0.01}) == pytest.approx(fit.cd + 0.01, rel=1e-10)
    const = fit_tracks(track, sp, Air(ref.RHO, ref.MU), robust=False, noise="white")
    m2 = DragRefitModel(const, [track], nominal, viscosity=ref.MU)
    assert m2({"air_viscosity": mu2}) == pytest.approx(const.cd, rel=1e-9)
    with pytest.raises(ValueError, match=r"^nominal: air_viscosity needs air_density"):
        DragRefitModel(const, [track], {"air_viscosity": ref.MU})


def test_fixed_jacobian_trials_equal_full_refits(heavy_fit):
    """closed-form/independent: on 40 random trials over every kind of input (specimen, air,
    frame rate, length scale, roll, gravity, the out-of-plane angle at 0.3° — tens of u(Cd)
    — and air speed), the default re-solve (fixed Jacobian, flights without sensitivities,
    one exact last step) gives the Cd of a full re-fit (DragRefitModel.full: Gauss–Newton
    with the exact Jacobian at every step) to 1e-3 u(Cd).  The model pickles without its
    prepared problem, which each process builds on first use."""
    import pickle

    fit, track, sc = heavy_fit
    nominal = {"mass": sc.mass, "diameter": sc.diameter, "air_density": 1.225,
               "frame_rate": 400.0, "length_scale": 1.0, "roll": 0.0, "gravity": 9.80665,
               "camera_distance": 3.0, "out_of_plane_angle": 0.0, "air_speed": 0.0}  # fmt: skip
    spread = {"mass": 2e-5, "diameter": 1e-4, "air_density": 0.01, "frame_rate": 0.05,
              "length_scale": 1e-3, "roll": 0.1, "gravity": 5e-4, "camera_distance": 0.05,
              "out_of_plane_angle": 0.3, "air_speed": 0.02}  # fmt: skip
    model = DragRefitModel(fit, [track], nominal, viscosity=1.789e-5)
    rng = np.random.default_rng(4)
    worst = 0.0
    for _ in range(40):
        v = {k: nominal[k] + spread[k] * rng.normal() for k in spread}
        worst = max(worst, abs(model(v) - model.full(v)))
    assert worst < 1e-3 * fit.u_cd
    assert "_session" in model.__dict__
    copy = pickle.loads(pickle.dumps(model))
    assert "_session" not in copy.__dict__
    v = {"out_of_plane_angle": 0.3}
    assert copy(v) == pytest.approx(model(v), abs=1e-9)
