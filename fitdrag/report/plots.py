"""Plots of a fit from plain arrays: trajectory with the fitted flight, residuals vs time.

These functions take :class:`ThrowCurves` (plain arrays, one per throw) so that they can draw
a fit from any source — a live :class:`fitdrag.fit.results.FitResult` (through
:func:`curves_from_fit`) or stored arrays.  Each takes an optional matplotlib ``ax`` (or
``fig``) and returns the figure; matplotlib is imported only inside the functions.

Usage::

    from fitdrag.report.plots import curves_from_fit, plot_fit
    fig = plot_fit(curves_from_fit(result))          # trajectory + x and y residuals
    fig.savefig("fit.png")

Positions are plotted in metres, residuals in millimetres, times in seconds.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fitdrag.errors import InputError

_REJECT_COLOUR = "tab:red"


@dataclass(frozen=True, eq=False)
class ThrowCurves:
    """What the plots need of one throw.

    Parameters
    ----------
    label : str
        Name of the throw (file name).
    t : array_like
        Sample times. [s]
    x, y : array_like
        Observed positions, world frame, y up. [m]
    used : array_like of bool
        Samples kept in the fit (False: rejected).
    residual_x, residual_y : array_like
        Observed minus fitted positions at the samples. [m]
    fit_t, fit_x, fit_y : array_like
        The fitted flight on a dense time grid. [s], [m], [m]
    """

    label: str
    t: np.ndarray
    x: np.ndarray
    y: np.ndarray
    used: np.ndarray
    residual_x: np.ndarray
    residual_y: np.ndarray
    fit_t: np.ndarray
    fit_x: np.ndarray
    fit_y: np.ndarray

    def __post_init__(self) -> None:
        n = len(np.asarray(self.t))
        for name in ("t", "x", "y", "residual_x", "residual_y"):
            arr = np.asarray(getattr(self, name), dtype=float)
            if arr.shape != (n,):
                raise InputError(
                    f"{name}: {arr.size} value(s) for {n} samples; give one per sample."
                )
            object.__setattr__(self, name, arr)
        used = np.asarray(self.used, dtype=bool)
        if used.shape != (n,):
            raise InputError(f"used: {used.size} flag(s) for {n} samples; give one per sample.")
        object.__setattr__(self, "used", used)
        m = len(np.asarray(self.fit_t))
        for name in ("fit_t", "fit_x", "fit_y"):
            arr = np.asarray(getattr(self, name), dtype=float)
            if arr.shape != (m,):
                raise InputError(f"{name}: expected {m} values like fit_t, got {arr.size}.")
            object.__setattr__(self, name, arr)

    def to_dict(self) -> dict:
        return {k: (v.tolist() if isinstance(v, np.ndarray) else v) for k, v in vars(self).items()}

    @classmethod
    def from_dict(cls, d: dict) -> ThrowCurves:
        return cls(**d)


def curves_from_fit(result, n: int = 400) -> list[ThrowCurves]:
    """One :class:`ThrowCurves` per throw of a :class:`fitdrag.fit.results.FitResult`.

    The dense fitted flight is the result's own simulation on ``n`` times per throw.
    """
    out = []
    for i, th in enumerate(result.throws):
        tt = np.linspace(th.t[0], th.t[-1], int(n))
        fl = result.flight(i, tt)
        out.append(
            ThrowCurves(
                label=str(th.source),
                t=th.t,
                x=th.fitted_x + th.residual_x,
                y=th.fitted_y + th.residual_y,
                used=th.used,
                residual_x=th.residual_x,
                residual_y=th.residual_y,
                fit_t=tt,
                fit_x=np.asarray(fl.x),
                fit_y=np.asarray(fl.y),
            )
        )
    return out


def curves_from_views(result, views, *, label: str = "", n: int = 400) -> list[ThrowCurves]:
    """One :class:`ThrowCurves` per camera of a 3-D fit (:func:`fitdrag.fit.image_fit.
    fit_views`): world x and y of the fitted flight, and each observation carried to the
    fitted depth (:func:`fitdrag.fit.view_curves.view_flights`); residuals in metres at the
    specimen."""
    from fitdrag.fit.view_curves import view_flights

    out = []
    for f in view_flights(result, views, n):
        res = f.observed - f.fitted
        out.append(
            ThrowCurves(
                label=f"{label} / {f.name}" if label else f.name,
                t=f.t,
                x=f.observed[:, 0],
                y=f.observed[:, 1],
                used=np.ones(f.t.size, bool),
                residual_x=res[:, 0],
                residual_y=res[:, 1],
                fit_t=f.dense_t,
                fit_x=f.dense[:, 0],
                fit_y=f.dense[:, 1],
            )
        )
    return out


def _new_figure(size):
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure

    return Figure(figsize=size, layout="constrained")


def _as_curves(curves) -> list[ThrowCurves]:
    if isinstance(curves, ThrowCurves):
        return [curves]
    if hasattr(curves, "throws") and hasattr(curves, "flight"):
        return curves_from_fit(curves)
    curves = list(curves)
    if not curves or not all(isinstance(c, ThrowCurves) for c in curves):
        raise InputError(
            "curves: expected ThrowCurves (one per throw) or a FitResult; build them with "
            "curves_from_fit(result)."
        )
    return curves


def plot_trajectory(curves, ax=None, *, fontsize: float = 8.0):
    """Observed points, rejected points (red crosses) and the fitted flight, y against x.

    Parameters
    ----------
    curves : ThrowCurves, sequence of ThrowCurves, or FitResult
    ax : matplotlib Axes, optional
        Axes to draw on; a new figure when omitted.

    Returns
    -------
    matplotlib.figure.Figure
    """
    curves = _as_curves(curves)
    if ax is None:
        ax = _new_figure((6.0, 4.0)).add_subplot()
    multi = len(curves) > 1
    for i, c in enumerate(curves):
        pts = ax.plot(c.x[c.used], c.y[c.used], ".", ms=2.5,
                      label=c.label if multi else "observed")  # fmt: skip
        colour = pts[0].get_color()
        ax.plot(c.fit_x, c.fit_y, "-", lw=0.9, color="k" if not multi else colour,
                label="fitted flight" if i == 0 else None)  # fmt: skip
        if (~c.used).any():
            ax.plot(c.x[~c.used], c.y[~c.used], "x", ms=5, color=_REJECT_COLOUR,
                    label="rejected" if i == 0 else None)  # fmt: skip
    ax.set_xlabel("x [m]", fontsize=fontsize)
    ax.set_ylabel("y [m]", fontsize=fontsize)
    ax.set_aspect("equal", adjustable="datalim")
    ax.tick_params(labelsize=fontsize - 1)
    ax.grid(alpha=0.3)
    ax.legend(loc="best", fontsize=fontsize - 1)
    return ax.figure


def plot_residuals(curves, ax_x=None, ax_y=None, *, fontsize: float = 8.0):
    """Residuals (observed − fitted) of x and of y against time, in mm; rejected in red.

    Parameters
    ----------
    curves : ThrowCurves, sequence of ThrowCurves, or FitResult
    ax_x, ax_y : matplotlib Axes, optional
        Axes for the x and y residuals; a new figure with two panels when omitted.

    Returns
    -------
    matplotlib.figure.Figure
    """
    curves = _as_curves(curves)
    if ax_x is None or ax_y is None:
        fig = _new_figure((6.0, 4.0))
        ax_x, ax_y = fig.subplots(2, 1, sharex=True)
    for i, c in enumerate(curves):
        for ax, r in ((ax_x, c.residual_x), (ax_y, c.residual_y)):
            ax.plot(c.t[c.used], 1e3 * r[c.used], ".", ms=2.5,
                    label=c.label if len(curves) > 1 else None)  # fmt: skip
            if (~c.used).any():
                ax.plot(c.t[~c.used], 1e3 * r[~c.used], "x", ms=5, color=_REJECT_COLOUR,
                        label="rejected" if i == 0 else None)  # fmt: skip
    for ax, name in ((ax_x, "x"), (ax_y, "y")):
        ax.axhline(0.0, color="k", lw=0.6)
        ax.set_ylabel(f"{name} residual [mm]", fontsize=fontsize)
        ax.tick_params(labelsize=fontsize - 1)
        ax.grid(alpha=0.3)
    ax_y.set_xlabel("time [s]", fontsize=fontsize)
    return ax_y.figure


def plot_fit(curves, fig=None, *, title: str | None = None, fontsize: float = 8.0):
    """Trajectory with the fitted flight above, x and y residuals against time below.

    Parameters
    ----------
    curves : ThrowCurves, sequence of ThrowCurves, or FitResult
    fig : matplotlib Figure, optional
        Figure to draw into (three axes are added); a new one when omitted.
    title : str, optional
        Figure title.

    Returns
    -------
    matplotlib.figure.Figure
    """
    curves = _as_curves(curves)
    if fig is None:
        fig = _new_figure((7.0, 7.0))
    grid = fig.add_gridspec(3, 1, height_ratios=(2.0, 1.0, 1.0))
    ax_tr = fig.add_subplot(grid[0])
    ax_rx = fig.add_subplot(grid[1])
    ax_ry = fig.add_subplot(grid[2], sharex=ax_rx)
    plot_trajectory(curves, ax_tr, fontsize=fontsize)
    plot_residuals(curves, ax_rx, ax_ry, fontsize=fontsize)
    if title:
        fig.suptitle(title, fontsize=fontsize + 1)
    return fig
