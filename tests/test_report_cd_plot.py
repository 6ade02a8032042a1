"""Tests of fitdrag.report.cd_plot: the Cd-vs-Re figure of a fit and its band.

Throw: the independent scipy integration of tests/reference.py plus seeded noise
(synthetic 40 mm, 2.7 g training ball).
"""

from __future__ import annotations

import numpy as np
import pytest
import reference as ref

from fitdrag import Air, Sphere, Track, fit_tracks
from fitdrag.fit.compare import drag_coefficient_at
from fitdrag.report.cd_plot import cd_curve, plot_cd_vs_re


@pytest.fixture(scope="module")
def fit():
    sc = ref.Scenario()
    rng = np.random.default_rng(3)
    xy = sc.truth()
    tr = Track(
        sc.t, xy[:, 0] + rng.normal(0, sc.sigma, sc.n), xy[:, 1] + rng.normal(0, sc.sigma, sc.n)
    )
    return fit_tracks(tr, Sphere(0.0027, 0.040), Air(ref.RHO, ref.MU), model="power-law")


def test_curve_spans_the_flight_and_matches_the_fit(fit):
    """closed-form/independent: the curve covers the flight's Re range widened by 1.25 and
    equals drag_coefficient_at (C_ref (Re/Re_ref)^n) point by point."""
    re, cd, u = cd_curve(fit, n=50)
    d = fit.diagnostics
    assert re[0] == pytest.approx(d["reynolds_min"] / 1.25)
    assert re[-1] == pytest.approx(d["reynolds_max"] * 1.25)
    c, n = fit.parameter("cd_ref")[0], fit.parameter("exponent")[0]
    np.testing.assert_allclose(cd, c * (re / fit.constants[0]) ** n, rtol=1e-12)
    np.testing.assert_allclose(u, drag_coefficient_at(fit, re)[1], rtol=1e-12)
    with pytest.raises(ValueError, match=r"^extend: must be >= 1, got 0\.5"):
        cd_curve(fit, extend=0.5)


def test_band_is_k_times_u(fit, tmp_path):
    """closed-form/independent: the drawn band's half-width at each Re is k u(Cd)."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots()
    assert plot_cd_vs_re(fit, ax, coverage_factor=2.0, n=40) is fig
    band = [c for c in ax.collections if c.get_label().startswith("C_d ± 2 u")][0]
    verts = band.get_paths()[0].vertices
    re, cd, u = cd_curve(fit, n=40)
    lower = np.interp(re, verts[1:41, 0], verts[1:41, 1])  # the path runs along Cd − k u first
    np.testing.assert_allclose(lower, cd - 2 * u, rtol=1e-9)
    upper = np.interp(re, verts[42:82, 0][::-1], verts[42:82, 1][::-1])  # then back along Cd + k u
    np.testing.assert_allclose(upper, cd + 2 * u, rtol=1e-9)
    fig.savefig(tmp_path / "cd.png")
    assert (tmp_path / "cd.png").read_bytes()[:4] == b"\x89PNG"
    plt.close(fig)
