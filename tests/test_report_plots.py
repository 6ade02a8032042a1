"""Tests of fitdrag.report.plots: figures from plain arrays."""

from __future__ import annotations

import numpy as np
import pytest

from fitdrag.report.plots import ThrowCurves, plot_fit, plot_residuals, plot_trajectory


def _curves(n=50, reject=(3,)):
    t = np.linspace(0, 0.5, n)
    used = np.ones(n, bool)
    used[list(reject)] = False
    r = np.full(n, 1e-3)
    return ThrowCurves("a.csv", t, t, -t * t, used, r, -r, t, t, -t * t)


def test_plot_fit_draws_all_panels():
    """regression: trajectory + two residual panels; residuals in mm; rejected points drawn."""
    fig = plot_fit([_curves(), _curves(reject=())], title="synthetic")
    assert len(fig.axes) == 3
    ax_t, ax_x, ax_y = fig.axes
    assert ax_t.get_xlabel() == "x [m]" and ax_y.get_xlabel() == "time [s]"
    ys = np.concatenate([ln.get_ydata() for ln in ax_x.lines if len(ln.get_ydata()) > 2])
    assert np.allclose(ys, 1.0)  # 1e-3 m shown as 1 mm
    labels = [t.get_text() for t in ax_t.get_legend().get_texts()]
    assert "rejected" in labels and "fitted flight" in labels


def test_plots_accept_axes():
    """regression: given axes are drawn on and their figure returned."""
    from matplotlib.figure import Figure

    fig = Figure()
    a, b, c = fig.subplots(3)
    assert plot_trajectory(_curves(), a) is fig
    assert plot_residuals(_curves(), b, c) is fig
    assert len(a.lines) == 3  # observed, fitted, rejected


def test_curves_validation():
    """regression: mismatched arrays and wrong inputs are clear errors."""
    t = np.arange(5.0)
    with pytest.raises(ValueError, match=r"^x: 4 value\(s\) for 5 samples"):
        ThrowCurves("a", t, t[:4], t, np.ones(5, bool), t, t, t, t, t)
    with pytest.raises(ValueError, match=r"^fit_y: expected 5 values like fit_t, got 3"):
        ThrowCurves("a", t, t, t, np.ones(5, bool), t, t, t, t, t[:3])
    with pytest.raises(ValueError, match=r"^curves: expected ThrowCurves"):
        plot_fit([1, 2])
    c = _curves()
    assert ThrowCurves.from_dict(c.to_dict()).label == "a.csv"
