"""Tests of fitdrag.fit.results: the result objects, C_d at stated Reynolds numbers with its
propagated uncertainty, and the JSON summary.

Labels: closed-form/independent, published-value, regression.  Noise is synthetic, from
fixed seeds; truth from tests/reference.py (scipy DOP853).
"""

from __future__ import annotations

import functools
import math

import numpy as np
import pytest
import reference as ref

from fitdrag import Air, Sphere, Track, fit_tracks
from fitdrag.fit.results import COVERAGE_PROBABILITY, ThrowResult, cd_and_gradient
from fitdrag.physics.registry import get_drag_model
from fitdrag.physics.simulate import Launch


@functools.cache
def fitted(model: str = "constant"):
    sc = ref.Scenario(n=200)
    xy = sc.truth() + np.random.default_rng(21).normal(0.0, sc.sigma, (sc.n, 2))
    return fit_tracks(Track(sc.t, xy[:, 0], xy[:, 1]), Sphere(sc.mass, sc.diameter),
                      Air(ref.RHO, ref.MU), model=model)  # fmt: skip


def test_power_law_value_and_gradient_closed_form():
    """closed-form/independent: C_d = C_ref (Re/Re_ref)^n has ∂C_d/∂C_ref = (Re/Re_ref)^n and
    ∂C_d/∂n = C_d ln(Re/Re_ref); the launch-state entries of the gradient are zero."""
    dm = get_drag_model("power-law")
    theta = np.array([0.45, -0.2, 0.0, 1.0, 7.0, 4.0])
    cd, g = cd_and_gradient(dm, theta, (3.0e4,), 4.5e4)
    ratio = 4.5e4 / 3.0e4
    assert cd == pytest.approx(0.45 * ratio**-0.2, rel=1e-12)
    assert g[0] == pytest.approx(ratio**-0.2, rel=1e-12)
    assert g[1] == pytest.approx(cd * math.log(ratio), rel=1e-12)
    assert np.all(g[2:] == 0.0)


def test_cd_at_propagates_the_covariance():
    """closed-form/independent: for a constant C_d the value and uncertainty at any Re are the
    fitted C_d and u(C_d); for the power law at its own reference Re they are C_ref and
    u(C_ref) (gradient (1, 0): JCGM 100:2008 eq. 13 reduces to one variance)."""
    r = fitted()
    cd, u = r.cd_at([1e3, 3e4])
    np.testing.assert_allclose(cd, r.cd, rtol=1e-12)
    np.testing.assert_allclose(u, r.u_cd, rtol=1e-12)
    p = fitted("power-law")
    assert p.success, p.message
    cd, u = p.cd_at(p.constants[0])
    assert cd[0] == pytest.approx(p.parameter("cd_ref")[0], rel=1e-12)
    assert u[0] == pytest.approx(p.parameter("cd_ref")[1], rel=1e-9)
    with pytest.raises(ValueError, match=r"^re: Reynolds numbers must be finite and > 0"):
        r.cd_at([-1.0])


def test_summary_states_k_p_and_expanded_uncertainty():
    """published-value: the stated coverage probability is that of k = 2 for a normal
    distribution, erf(2/√2) = 0.9545 (JCGM 100:2008 Table G.1); U = k u."""
    r = fitted()
    d = r.to_dict()["drag_coefficient"]
    assert COVERAGE_PROBABILITY == pytest.approx(math.erf(2.0 / math.sqrt(2.0)), rel=1e-15)
    assert d["coverage_probability"] == pytest.approx(0.9545, abs=5e-5)
    assert d["coverage_factor"] == r.coverage_factor
    assert d["expanded_uncertainty"] == pytest.approx(r.coverage_factor * r.u_cd, rel=1e-12)
    assert d["degrees_of_freedom"] == r.dof


def test_throw_result_rms_and_rejected_frames():
    """closed-form/independent: the RMS runs over the kept samples of both axes; rejected
    frames are reported by their labels."""
    z = np.zeros(4)
    th = ThrowResult(
        source="t", t=np.arange(4) / 100.0, labels=np.array([10, 11, 12, 13]),
        used=np.array([True, False, True, True]),
        residual_x=np.array([3.0, 100.0, 0.0, 0.0]), residual_y=np.array([0.0, 100.0, 4.0, 0.0]),
        fitted_x=z, fitted_y=z, launch=Launch(0.0, 0.0, 1.0, 1.0),
        launch_covariance=np.eye(4), speed=math.sqrt(2.0), speed_uncertainty=0.0,
        angle=45.0, angle_uncertainty=0.0, rejection_reasons={11: "x"}, sigma=(1.0, 1.0),
        reynolds_range=(1.0, 2.0),
    )  # fmt: skip
    assert th.residual_rms == pytest.approx(math.sqrt((9.0 + 16.0) / 6.0))
    assert th.rejected == [11]
