"""Figure of a fit: trajectory with the fitted flight, and residuals against time.

Takes a :class:`fitdrag.fitting.FitResult`; computes nothing but the dense fitted curve.
matplotlib is imported lazily and the Agg backend is used when no figure exists yet.
"""

from __future__ import annotations

import numpy as np


def plot_fit(result, fig=None, *, title: str | None = None):
    """Trajectory (observed points, fitted flight, rejected points) and x/y residuals.

    Parameters
    ----------
    result : FitResult
        The fit to show.
    fig : matplotlib.figure.Figure, optional
        Figure to draw into (three axes are added); a new one when omitted.
    title : str, optional
        Figure title; default states Cd ± U and the model.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    if fig is None:
        matplotlib.use("Agg", force=False)
        import matplotlib.pyplot as plt

        fig = plt.figure(figsize=(8.0, 7.0), layout="constrained")
    grid = fig.add_gridspec(3, 1, height_ratios=(2.2, 1, 1))
    ax_tr = fig.add_subplot(grid[0])
    ax_rx = fig.add_subplot(grid[1])
    ax_ry = fig.add_subplot(grid[2], sharex=ax_rx)
    multi = len(result.throws) > 1
    for i, th in enumerate(result.throws):
        label = f"throw {i + 1}" if multi else "observed"
        tt = np.linspace(th.t[0], th.t[-1], 400)
        fl = result.flight(i, tt)
        obs = ax_tr.plot(
            th.residual_x[th.used] + th.fitted_x[th.used],
            th.residual_y[th.used] + th.fitted_y[th.used],
            ".", ms=3, label=label,
        )  # fmt: skip
        colour = obs[0].get_color()
        ax_tr.plot(fl.x, fl.y, "-", lw=1.0, color="k" if not multi else colour,
                   label="fitted flight" if i == 0 else None)  # fmt: skip
        rej = ~th.used
        for ax, res in ((ax_rx, th.residual_x), (ax_ry, th.residual_y)):
            ax.plot(th.t[th.used], 1e3 * res[th.used], ".", ms=3, color=colour)
            if rej.any():
                ax.plot(th.t[rej], 1e3 * res[rej], "x", ms=6, color="tab:red",
                        label="rejected" if i == 0 else None)  # fmt: skip
        if rej.any():
            ax_tr.plot(th.residual_x[rej] + th.fitted_x[rej], th.residual_y[rej] + th.fitted_y[rej],
                       "x", ms=6, color="tab:red", label="rejected" if i == 0 else None)  # fmt: skip
    ax_tr.set_xlabel("x [m]")
    ax_tr.set_ylabel("y [m]")
    ax_tr.set_aspect("equal", adjustable="datalim")
    ax_tr.legend(loc="best", fontsize="small")
    ax_tr.grid(alpha=0.3)
    for ax, name in ((ax_rx, "x"), (ax_ry, "y")):
        ax.axhline(0.0, color="k", lw=0.6)
        ax.set_ylabel(f"{name} residual [mm]")
        ax.grid(alpha=0.3)
    ax_ry.set_xlabel("time [s]")
    if title is None:
        title = (
            f"Cd = {result.cd:.4g} ± {result.expanded_uncertainty:.2g} (k = "
            f"{result.coverage_factor:.2g}, statistical only), model: {result.model}"
        )
    fig.suptitle(title, fontsize="medium")
    return fig
