"""Tests of fitdrag.report.control_chart_plot: the figure shows what the chart holds."""

from __future__ import annotations

import numpy as np

from fitdrag.report.control_chart_plot import plot_control_chart
from fitdrag.uncertainty.control_chart import ChartLimits, control_chart


def test_plot_draws_points_limits_and_flags():
    """regression: two panels; the results and the EWMA are plotted as given; the 3-sigma
    lines sit at centre ± 3 sigma; the out-of-control point is marked."""
    x = [0.0, 0.5, -0.5, 3.5, 0.2]
    ch = control_chart(x, ChartLimits(0.0, 1.0, "stated"))
    fig = plot_control_chart(ch, [f"d{i}" for i in range(5)], title="t")
    ax1, ax2 = fig.axes
    np.testing.assert_array_equal(ax1.lines[0].get_ydata(), x)
    levels = {
        round(float(ln.get_ydata()[0]), 9) for ln in ax1.lines[1:] if len(ln.get_ydata()) == 2
    }
    assert {-3.0, 3.0, 0.0} <= levels
    marked = [ln for ln in ax1.lines if ln.get_marker() == "s"]
    assert list(marked[0].get_ydata()) == [3.5]
    np.testing.assert_allclose(ax2.lines[0].get_ydata(), ch.ewma)
    assert [t.get_text() for t in ax2.get_xticklabels()] == [f"d{i}" for i in range(5)]
