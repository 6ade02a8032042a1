"""Does the flight need a lift force?  A test at a stated false-alarm rate, and the largest
lift the data allow when it does not.

A spinning specimen feels a lift force across its path (backspin lifts a forward-moving ball);
fitted without it, Cd absorbs part of it: a 24 g, 65 mm ball at 9 m/s with C_L = 0.05 reads
Cd about 3 % high, far outside the statistical uncertainty.  :func:`check_lift` fits the
throws with and without a constant lift coefficient on the same points and noise model
(:func:`fitdrag.fit.compare.compare_models`) and applies the extra-sum-of-squares F-test of
the nested pair [1] at level ``alpha`` — the false-alarm rate: the probability of calling
lift present in a flight without it, under the fit's noise model.  The lift term is needed
when the test rejects "no lift" (p < alpha), or when only the fit with lift follows the
track.

When the lift is not needed, Cd comes from the fit without it, and the lift the data still
allow is an uncorrected influence: its estimate ĉ ± u(ĉ) from the fit with lift gives the
budget line ``lift_coefficient`` (estimate 0, standard uncertainty √(ĉ² + u²(ĉ)), the usual
treatment of an uncorrected bias [2]; from memory), whose effect on Cd the budget finds by
re-fitting with the lift coefficient held at ± that value; the certificate states the largest
lift coefficient allowed, |ĉ| + k u(ĉ) at the fit's coverage factor.  In a planar fit the lift
is the in-plane component (backspin or topspin); side spin turns the flight out of the plane
and belongs with the 3-D fit.

References
----------
1. G. A. F. Seber and C. J. Wild, *Nonlinear Regression*, Wiley 1989, §5.3 (the
   extra-sum-of-squares F-test for nested nonlinear models).
2. S. D. Phillips, K. R. Eberhardt and B. Parry, "Guidelines for expressing the uncertainty
   of measurement results containing uncorrected bias", J. Res. NIST 102 (1997) 577–585.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from fitdrag.errors import InputError
from fitdrag.physics.air import STANDARD_GRAVITY, Air
from fitdrag.tracks.track import Track
from fitdrag.uncertainty.gum import InputQuantity

__all__ = ["DEFAULT_FALSE_ALARM_RATE", "LiftCheck", "check_lift", "check_lift_views"]

#: Level of the lift test: the probability of calling lift present in a flight without it. [1]
DEFAULT_FALSE_ALARM_RATE = 0.01


@dataclass(frozen=True)
class LiftCheck:
    """Outcome of :func:`check_lift`.

    Attributes
    ----------
    needed : bool
        Whether the fit needs the lift term.
    false_alarm_rate : float
        The test's level alpha. [1]
    reason : str
        Why, in words.
    lift_coefficient, lift_uncertainty : float
        C_L and its standard uncertainty from the fit with lift (NaN when that fit did not
        converge). [-]
    coverage_factor : float
        k of the fit with lift (for the largest lift allowed). [-]
    f_statistic, p_value : float
        The F-test (NaN when one of the two fits did not converge).
    df1, df2 : int
        Its degrees of freedom (0 without a test).
    """

    needed: bool
    false_alarm_rate: float
    reason: str
    lift_coefficient: float = math.nan
    lift_uncertainty: float = math.nan
    coverage_factor: float = 2.0
    f_statistic: float = math.nan
    p_value: float = math.nan
    df1: int = 0
    df2: int = 0

    @property
    def largest_lift(self) -> float:
        """|ĉ| + k u(ĉ): the largest lift coefficient the data allow (NaN without a fit with
        lift). [-]"""
        return abs(self.lift_coefficient) + self.coverage_factor * self.lift_uncertainty

    @property
    def line_uncertainty(self) -> float:
        """√(ĉ² + u²(ĉ)): the standard uncertainty of the uncorrected lift. [-]"""
        return math.hypot(self.lift_coefficient, self.lift_uncertainty)

    def input_quantity(self) -> InputQuantity | None:
        """The budget line of an undetected lift (None when lift is fitted or not bounded)."""
        u = self.line_uncertainty
        if self.needed or not (math.isfinite(u) and u > 0):
            return None
        return InputQuantity(
            "lift_coefficient", 0.0, u, "",
            description="lift coefficient (spin not detected)",
        )  # fmt: skip

    def to_dict(self) -> dict:
        def f(v):
            return float(v) if math.isfinite(v) else None

        return {
            "lift_needed": self.needed,
            "false_alarm_rate": self.false_alarm_rate,
            "reason": self.reason,
            "lift_coefficient": f(self.lift_coefficient),
            "lift_coefficient_standard_uncertainty": f(self.lift_uncertainty),
            "largest_lift_coefficient_allowed": None if self.needed else f(self.largest_lift),
            "f_test": {
                "f_statistic": f(self.f_statistic),
                "df1": self.df1,
                "df2": self.df2,
                "p_value": f(self.p_value),
            },  # fmt: skip
        }


def check_lift(
    tracks: Track | Sequence[Track],
    specimen,
    air: Air,
    *,
    model: str = "constant",
    gravity: float = STANDARD_GRAVITY,
    wind: float = 0.0,
    buoyancy: bool = True,
    robust: bool = True,
    noise: str = "auto",
    alpha: float = DEFAULT_FALSE_ALARM_RATE,
) -> LiftCheck:
    """Test whether the throws need a constant lift coefficient (see the module notes).

    Parameters
    ----------
    tracks : Track or sequence of Track
        The throws.
    specimen : Sphere or Body
        The specimen (mass [kg], size [m]).
    air : Air
        Air density [kg/m³] and viscosity [Pa s].
    model : str
        Drag model of both fits.
    gravity : float
        Acceleration of free fall. [m/s²]
    wind : float
        Known horizontal wind along +x. [m/s]
    buoyancy, robust : bool
        As for :func:`fitdrag.fit.fitting.fit_tracks`.
    noise : {"auto", "white", "ar1"}
        Noise option of the fit with lift, whose noise model both fits then use.
    alpha : float
        False-alarm rate (level of the F-test), between 0 and 0.5. [1]

    Returns
    -------
    LiftCheck
    """
    from fitdrag.fit.compare import compare_models

    if not (isinstance(alpha, int | float) and 0.0 < alpha < 0.5):
        raise InputError(
            f"alpha: the false-alarm rate must be between 0 and 0.5, got {alpha!r}; 0.01 is usual."
        )
    cmp = compare_models(
        tracks, specimen, air, models=(model,), lift="both", gravity=gravity, wind=wind,
        buoyancy=buoyancy, robust=robust, noise=noise, alpha=alpha,
    )  # fmt: skip
    without = next(c for c in cmp.candidates if not c.lift)
    with_lift = next(c for c in cmp.candidates if c.lift)
    cl = ucl = math.nan
    k = 2.0
    if with_lift.ok:
        cl, ucl = with_lift.fit.parameter("lift_coefficient")
        k = float(with_lift.fit.coverage_factor)
    test = cmp.test(without.label, with_lift.label)
    kw = {"lift_coefficient": cl, "lift_uncertainty": ucl, "coverage_factor": k}
    if test is not None:
        kw.update(f_statistic=test.f_statistic, p_value=test.p_value, df1=test.df1, df2=test.df2)
        needed = test.p_value < alpha
        p = "p < 1e-6" if test.p_value < 1e-6 else f"p = {test.p_value:.2g}"
        word = "rejects" if needed else "does not reject"
        reason = (
            f"the F-test {word} a flight without lift at the {100 * alpha:g} % false-alarm "
            f"rate (F({test.df1}, {test.df2}) = {test.f_statistic:.3g}, {p})"
        )
        return LiftCheck(needed, alpha, reason, **kw)
    if with_lift.ok and not without.ok:
        return LiftCheck(True, alpha, "only the fit with lift follows the track (without lift: "
                         f"{without.note or 'no convergence'})", **kw)  # fmt: skip
    if without.ok:
        return LiftCheck(False, alpha, "the fit with lift did not converge (" +
                         (with_lift.note or "no convergence") + "); lift not bounded", **kw)  # fmt: skip
    return LiftCheck(False, alpha, "neither fit converged", **kw)


def check_lift_views(throws, specimen, air, *, alpha: float = DEFAULT_FALSE_ALARM_RATE,
                     **fit_options):  # fmt: skip
    """The lift test of a 3-D measurement: each throw fitted without and with a lift
    coefficient about the spin axis (:func:`fitdrag.fit.image_fit.fit_views`, default axis
    +z, the board's normal: backspin or topspin of a flight along the board).

    The F-test is taken in its Wald form, F = (Ĉ_L / u(Ĉ_L))² against F(1, ν) with ν the fit
    with lift's degrees of freedom (for one parameter the two agree to first order; Seber
    and Wild 1989, §5.3), so that each throw needs one more fit only.  The lift is needed
    when any throw's test rejects C_L = 0 at ``alpha``, or when only the fit with lift
    follows a throw.  When it is not, the effect of the lift the data allow on Cd is taken to
    first order from the fit with lift: holding C_L at c instead of Ĉ_L moves Cd by
    ``s (c − Ĉ_L)`` with ``s = cov(Cd, C_L) / u²(C_L)`` (the regression of the estimates,
    Seber and Wild 1989, §2.1), the budget's sensitivity to the lift coefficient.

    Parameters
    ----------
    throws : sequence of sequence of CameraView
        The views of each throw.
    specimen : Sphere or Body
        The specimen (mass [kg], size [m]).
    air : Air
        Air density [kg/m³] and viscosity [Pa s].
    alpha : float
        False-alarm rate of each throw's test. [1]
    **fit_options
        Further options of :func:`~fitdrag.fit.image_fit.fit_views` (gravity [m/s²], model,
        wind [m/s], noise, spin_axis).

    Returns
    -------
    (LiftCheck, list of ViewFitResult, float)
        The decision (with the throw of the largest allowed lift), the fit of each throw
        with or without lift as decided, and the weighted-mean sensitivity ∂Cd/∂C_L of the
        fits without lift (0 when lift is fitted). [-]
    """
    from scipy import stats

    from fitdrag.fit.image_fit import fit_views

    if not (isinstance(alpha, int | float) and 0.0 < alpha < 0.5):
        raise InputError(
            f"alpha: the false-alarm rate must be between 0 and 0.5, got {alpha!r}; 0.01 is usual."
        )
    plain, lifted, tests = [], [], []
    for views in throws:
        r0 = fit_views(views, specimen, air, lift=False, **fit_options)
        start = r0.as_initial() if r0.success else None
        r1 = fit_views(views, specimen, air, lift=True, initial=start, **fit_options)
        plain.append(r0)
        lifted.append(r1)
        if r1.success:
            c, u = r1.parameter("lift_coefficient")
            f = (c / u) ** 2 if u > 0 else math.inf
            tests.append((c, u, f, float(stats.f.sf(f, 1, max(r1.dof, 1))), r1))
        else:
            tests.append(None)
    n = len(throws)
    kept = [t for t in tests if t is not None]
    k = 2.0
    if kept:
        worst = max(kept, key=lambda t: abs(t[0]) + t[4].coverage_factor * t[1])
        c, u, f, p, r1 = worst
        k = float(r1.coverage_factor)
        p_min = min(t[3] for t in kept)
        f_max = max(t[2] for t in kept)
        dof = int(min(t[4].dof for t in kept))
    else:
        c = u = f_max = p_min = math.nan
        dof = 0
    kw = {"lift_coefficient": c, "lift_uncertainty": u, "coverage_factor": k,
          "f_statistic": f_max, "p_value": p_min, "df1": 1 if kept else 0, "df2": dof}  # fmt: skip
    lone = [i for i in range(n) if lifted[i].success and not plain[i].success]
    rejects = [t is not None and t[3] < alpha for t in tests]
    which = "the throw" if n == 1 else f"each of the {n} throws"
    if lone:
        check = LiftCheck(True, alpha, f"only the fit with lift follows throw {lone[0] + 1}",
                          **kw)  # fmt: skip
    elif any(rejects):
        pt = "p < 1e-6" if p_min < 1e-6 else f"p = {p_min:.2g}"
        check = LiftCheck(True, alpha, f"the F-test (Wald form) on {which} rejects a flight "
                          f"without lift at the {100 * alpha:g} % false-alarm rate ({pt})",
                          **kw)  # fmt: skip
    elif kept:
        pt = "p < 1e-6" if p_min < 1e-6 else f"p = {p_min:.2g}"
        check = LiftCheck(False, alpha, f"the F-test (Wald form) on {which} does not reject a "
                          f"flight without lift at the {100 * alpha:g} % false-alarm rate "
                          f"(smallest {pt})", **kw)  # fmt: skip
    else:
        check = LiftCheck(False, alpha, "the fits with lift did not converge; lift not bounded",
                          **kw)  # fmt: skip
    if check.needed:
        return check, lifted, 0.0
    sens = []
    for r1 in lifted:
        if not r1.success:
            sens.append(0.0)
            continue
        i = r1.parameter_names.index("lift_coefficient")
        cov = np.asarray(r1.covariance, float)
        # Cd is proportional to the law's first parameter at the stated Re (constant, scaled
        # sphere; the power law's C_ref at its reference Re)
        g0 = r1.cd / r1.values[0] if r1.values[0] else 0.0
        sens.append(float(g0 * cov[0, i] / cov[i, i]) if cov[i, i] > 0 else 0.0)
    u_stat = np.array([r.u_cd for r in plain], float)
    w = u_stat**-2 / np.sum(u_stat**-2) if np.all(u_stat > 0) else np.full(n, 1.0 / n)
    return check, plain, float(w @ np.asarray(sens))
