"""Tests of fitdrag.fit.drag_law_choice: the budget line for choosing one published drag curve.

Labels: closed-form/independent (a flight on the Clift & Gauvin curve from tests/reference
style integration by scipy; full fits with each correlation), regression.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from fitdrag import Air, Sphere, Track, fit_tracks
from fitdrag.errors import ConvergenceError
from fitdrag.fit.drag_law_choice import correlation_of, drag_law_choice
from fitdrag.fit.refit import refit
from fitdrag.physics.sphere_drag import sphere_correlation_names

RHO, MU, G = 1.2, 1.81e-5, 9.80665
MASS, D = 0.024, 0.065


def _curve_track(seed=2):
    """A 24 g, 65 mm ball whose C_d follows 1.05 × the Clift & Gauvin curve as printed in
    Clift, Grace & Weber (1978), written out here; scipy DOP853 of the equation of motion with
    buoyancy and added mass (Timmerman & van der Weele, Am. J. Phys. 67, 1999)."""
    vol, area = math.pi * D**3 / 6, math.pi * D**2 / 4
    m_eff = MASS + 0.5 * RHO * vol

    def cd(re):
        return 1.05 * (24 / re * (1 + 0.15 * re**0.687) + 0.42 / (1 + 4.25e4 * re**-1.16))

    def rhs(_t, s):
        q = math.hypot(s[2], s[3])
        f = 0.5 * RHO * area * q * cd(RHO * q * D / MU)
        return [s[2], s[3], -f * s[2] / m_eff, (-(MASS - RHO * vol) * G - f * s[3]) / m_eff]

    t = np.arange(200) / 500.0
    a = math.radians(30)
    sol = solve_ivp(rhs, (0, t[-1]), [0, 1, 9 * math.cos(a), 9 * math.sin(a)], method="DOP853",
                    t_eval=t, rtol=1e-12, atol=1e-12)  # fmt: skip
    xy = sol.y[:2].T + np.random.default_rng(seed).normal(0, 3e-4, (t.size, 2))
    return Track(t, xy[:, 0], xy[:, 1])


def test_scaled_fit_gets_the_spread_of_the_valid_correlations():
    """closed-form/independent: a sphere-scaled fit of a flight at Re 3–4e4 has every
    correlation valid; each alternative's Cd is what a full fit with that correlation gives
    (within u/2); the line is rectangular with half-width the largest departure, u = a/√3,
    sensitivity 1 (JCGM 100:2008 4.3.7)."""
    track = _curve_track()
    sp, air = Sphere(MASS, D), Air(RHO, MU)
    fit = fit_tracks(track, sp, air, model="sphere-scaled", robust=False, noise="white")
    d = fit.diagnostics
    choice = drag_law_choice(fit.model, (d["reynolds_min"], d["reynolds_max"]), fit.cd,
                             lambda m: refit(fit, model=m).cd)  # fmt: skip
    assert choice.correlation == "morrison" and choice.excluded == {}
    assert list(choice.alternatives) == sphere_correlation_names()
    for name in ("clift-gauvin", "barati"):
        full = fit_tracks(track, sp, air, model=f"sphere-scaled:{name}", robust=False,
                          noise="white")  # fmt: skip
        assert abs(choice.alternatives[name] - full.cd) < 0.5 * fit.u_cd
    half = max(abs(v - fit.cd) for v in choice.alternatives.values())
    assert choice.half_width == pytest.approx(half) and half > 0
    q = choice.input_quantity()
    assert (q.name, q.value, q.distribution, q.sensitivity) == ("drag_law", 0.0,
                                                                "rectangular", 1.0)  # fmt: skip
    assert q.standard_uncertainty == pytest.approx(half / math.sqrt(3))
    assert choice.stated_range == (0.0, 2.0e5)
    assert choice.to_dict()["drag_coefficient_by_correlation"]["morrison"] == fit.cd


def test_laws_without_a_curve_and_left_out_correlations():
    """regression: a constant or power-law fit has no line and says why; a correlation outside
    its range over the flight, or whose re-fit fails, is left out with the reason."""
    c = drag_law_choice("constant", (1e4, 2e4), 0.5, lambda m: 1 / 0)
    assert c.correlation is None and c.input_quantity() is None
    assert c.note == "a constant drag coefficient: no drag curve is assumed"
    p = drag_law_choice("power-law", (1e4, 2e4), 0.5, lambda m: 1 / 0)
    assert p.input_quantity() is None and "fitted to the flight itself" in p.note
    assert correlation_of("sphere-scaled:cheng") == "cheng" and correlation_of("constant") is None

    def cd_with(model):
        if model.endswith("barati"):
            raise ConvergenceError("no")
        return 0.5 + (0.01 if model.endswith("cheng") else 0.0)

    low = drag_law_choice("sphere-scaled", (1e-3, 5.0), 0.5, cd_with)
    assert "khan-richardson" not in low.alternatives
    assert low.excluded["khan-richardson"].startswith("the flight's Re 0.001–5 leaves its range")
    assert low.excluded["barati"] == "the re-fit with it did not converge (no)"
    assert low.half_width == pytest.approx(0.01)
