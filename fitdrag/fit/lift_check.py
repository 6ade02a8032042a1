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

from fitdrag.errors import InputError
from fitdrag.physics.air import STANDARD_GRAVITY, Air
from fitdrag.tracks.track import Track
from fitdrag.uncertainty.gum import InputQuantity

__all__ = ["DEFAULT_FALSE_ALARM_RATE", "LiftCheck", "check_lift"]

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
