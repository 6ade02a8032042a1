"""The control chart of a check standard as a figure: results with the centre line and the
1σ, 2σ and 3σ lines (Shewhart), the EWMA with its limits, out-of-control points marked.

Draws a :class:`fitdrag.uncertainty.control_chart.ControlChart`; computes nothing.
"""

from __future__ import annotations

from collections.abc import Sequence

__all__ = ["plot_control_chart"]


def plot_control_chart(chart, labels: Sequence[str] | None = None, *, title: str = "",
                       fig=None):  # fmt: skip
    """Two panels: the results (Shewhart) and the EWMA, sharing the x axis.

    Parameters
    ----------
    chart : ControlChart
        The chart.
    labels : sequence of str, optional
        One label per point (e.g. certificate numbers or dates) for the x axis.
    title : str
        Figure title.
    fig : matplotlib Figure, optional
        Where to draw (default: a new figure).

    Returns
    -------
    Figure
    """
    import numpy as np

    if fig is None:
        from matplotlib.figure import Figure

        fig = Figure(figsize=(8.0, 5.2))
    ax1, ax2 = fig.subplots(2, 1, sharex=True)
    x = np.arange(1, len(chart.values) + 1)
    y = np.asarray(chart.values)
    mu, s = chart.limits.centre, chart.limits.sigma
    ax1.plot(x, y, "o-", ms=3.5, lw=0.8, color="0.2", label="result")
    ax1.axhline(mu, color="tab:blue", lw=1.0, label="centre line")
    for k, ls in ((3, "-"), (2, "--"), (1, ":")):
        for sign in (-1, 1):
            ax1.axhline(mu + sign * k * s, color="tab:red" if k == 3 else "0.55", lw=0.8, ls=ls,
                        label=(f"±{k}σ" if sign > 0 else None))  # fmt: skip
    bad = list(chart.out_of_control)
    if bad:
        ax1.plot(x[bad], y[bad], "s", ms=7, mfc="none", mec="tab:red", mew=1.4,
                 label="out of control")  # fmt: skip
    ax1.set_ylabel("Cd", fontsize=8)
    ax1.legend(fontsize=6.5, ncol=3, loc="best")
    z = np.asarray(chart.ewma)
    hw = np.asarray(chart.ewma_halfwidth)
    ax2.plot(x, z, "o-", ms=3, lw=0.8, color="tab:purple", label=f"EWMA (λ = {chart.lam:g})")
    ax2.plot(x, mu + hw, color="tab:red", lw=0.8, label=f"EWMA limits (L = {chart.L:g})")
    ax2.plot(x, mu - hw, color="tab:red", lw=0.8)
    ax2.axhline(mu, color="tab:blue", lw=1.0)
    ewma_bad = [s.index for s in chart.signals if s.rule == "ewma"]
    if ewma_bad:
        ax2.plot(x[ewma_bad], z[ewma_bad], "s", ms=7, mfc="none", mec="tab:red", mew=1.4)
    ax2.set_ylabel("EWMA of Cd", fontsize=8)
    ax2.legend(fontsize=6.5, loc="best")
    if labels is not None:
        ax2.set_xticks(x)
        ax2.set_xticklabels(list(labels), rotation=60, ha="right", fontsize=6)
    ax2.set_xlabel("result (oldest first)", fontsize=8)
    for ax in (ax1, ax2):
        ax.tick_params(labelsize=7)
        ax.grid(True, lw=0.3, alpha=0.5)
    if title:
        fig.suptitle(title, fontsize=9)
    fig.subplots_adjust(bottom=0.2, hspace=0.12)
    return fig
