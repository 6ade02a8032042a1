"""Figure: the fitted drag coefficient against the Reynolds number, with its band.

Takes a :class:`fitdrag.fit.results.FitResult`; the curve and its standard uncertainty come from
:func:`fitdrag.fit.compare.drag_coefficient_at` (first-order propagation of the fitted drag
parameters' covariance, JCGM 100:2008 eq. 13).  matplotlib is imported lazily and the Agg
backend is used when no axes are given.
"""

from __future__ import annotations

import numpy as np

from fitdrag.errors import InputError


def cd_curve(result, *, n: int = 200, extend: float = 1.25):
    """Reynolds numbers, C_d and u(C_d) for the plot: the flight's Re range widened by ``extend``.

    Parameters
    ----------
    result : FitResult
        The fit.
    n : int
        Number of points on the curve.
    extend : float
        Factor by which the Re range is widened at each end (≥ 1). [-]

    Returns
    -------
    (ndarray, ndarray, ndarray)
        Reynolds numbers [-], C_d [-] and its standard uncertainty [-].
    """
    from fitdrag.fit.compare import drag_coefficient_at

    if not extend >= 1.0:
        raise InputError(f"extend: must be >= 1, got {extend!r}; 1 keeps the flight's range.")
    lo = result.diagnostics["reynolds_min"] / extend
    hi = result.diagnostics["reynolds_max"] * extend
    if not hi > lo > 0:
        raise InputError(
            f"result: the fit's Reynolds range {lo!r}–{hi!r} is empty; the plot needs a "
            f"moving specimen."
        )
    re = np.geomspace(lo, hi, int(n))
    cd, u = drag_coefficient_at(result, re)
    return re, cd, u


def plot_cd_vs_re(result, ax=None, *, coverage_factor: float | None = None,
                  reference: str | None = "morrison", n: int = 200):  # fmt: skip
    """C_d(Re) of a fit with its expanded-uncertainty band over the flight's Reynolds range.

    Parameters
    ----------
    result : FitResult
        The fit to show (any drag model; a constant C_d gives a flat band).
    ax : matplotlib.axes.Axes, optional
        Axes to draw into; a new figure when omitted.
    coverage_factor : float, optional
        k of the band C_d ± k u(C_d); default the fit's coverage factor.
    reference : str or None
        Smooth-sphere correlation drawn for comparison (see
        :func:`fitdrag.physics.drag_laws.sphere_correlation_names`); None draws none.
    n : int
        Number of points on the curve.

    Returns
    -------
    matplotlib.figure.Figure
    """
    import matplotlib

    if ax is None:
        matplotlib.use("Agg", force=False)
        import matplotlib.pyplot as plt

        fig, ax = plt.subplots(figsize=(6.4, 4.2), layout="constrained")
    else:
        fig = ax.figure
    k = result.coverage_factor if coverage_factor is None else float(coverage_factor)
    re, cd, u = cd_curve(result, n=n)
    d = result.diagnostics
    ax.axvspan(d["reynolds_min"], d["reynolds_max"], color="0.92", zorder=0,
               label="Re range of the flight")  # fmt: skip
    ax.fill_between(re, cd - k * u, cd + k * u, color="tab:blue", alpha=0.25, lw=0,
                    label=f"C_d ± {k:.3g} u (statistical)")  # fmt: skip
    ax.plot(re, cd, "-", color="tab:blue", lw=1.5, label=f"fitted: {result.model}")
    re_med = d["reynolds_median"]
    ax.errorbar([re_med], [result.cd], yerr=[k * result.u_cd], fmt="o", color="tab:blue",
                ms=4, capsize=3, label=f"C_d = {result.cd:.4g} at median Re {re_med:.3g}")  # fmt: skip
    if reference:
        from fitdrag.physics.drag_laws import sphere_drag_coefficient

        ax.plot(re, sphere_drag_coefficient(re, reference), "--", color="0.4", lw=1.0,
                label=f"smooth sphere ({reference})")  # fmt: skip
    ax.set_xscale("log")
    ax.set_xlabel("Reynolds number Re [-]")
    ax.set_ylabel("drag coefficient C_d [-]")
    ax.set_title("Drag coefficient against Reynolds number")
    ax.grid(True, which="both", alpha=0.3)
    ax.legend(fontsize="small", loc="best")
    return fig
