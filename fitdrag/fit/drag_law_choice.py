"""The uncertainty of choosing one published drag curve: a budget line for Re-dependent fits.

A ``sphere-scaled`` fit states Cd = s · C_sphere(Re) at the flight's median Reynolds number,
C_sphere from one published smooth-sphere correlation.  The correlations valid over the
flight's Reynolds numbers (:func:`fitdrag.physics.sphere_drag.correlations_for_flight`)
differ by up to ~20 % in C_d at Re 10⁴–10⁵; the fitted scale absorbs their level, but not
their shape over the flight, so the measured Cd moves with the choice.  :func:`drag_law_choice`
re-fits with every valid correlation and takes the spread as a rectangular distribution about
the chosen one (half-width the largest departure, u = a/√3, JCGM 100:2008 4.3.7), an additive
correction of estimate 0 (the budget's ``drag_law`` input, sensitivity 1).  Correlations
outside their stated range over the flight are left out with the reason.

A constant Cd chooses no curve (no line); a power law is fitted to the flight itself, with
no published curve assumed (no line: its exponent's uncertainty is in the statistical part).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field

from fitdrag.errors import ConvergenceError
from fitdrag.physics.registry import get_drag_model
from fitdrag.physics.sphere_drag import (
    DEFAULT_CORRELATION,
    correlations_for_flight,
    get_correlation,
)
from fitdrag.uncertainty.gum import InputQuantity

__all__ = ["DragLawChoice", "correlation_of", "drag_law_choice"]


def correlation_of(model: str) -> str | None:
    """The smooth-sphere correlation a drag model scales (None for other laws)."""
    name = get_drag_model(model).name
    if name == "sphere-scaled":
        return DEFAULT_CORRELATION
    if name.startswith("sphere-scaled:"):
        return name.split(":", 1)[1]
    return None


@dataclass(frozen=True)
class DragLawChoice:
    """The drag law chosen, the alternatives and the spread of Cd among them.

    Attributes
    ----------
    model : str
        The fitted drag model.
    correlation : str or None
        The smooth-sphere correlation it scales (None: no published curve is assumed).
    reynolds_range : (float, float)
        The flight's smallest and largest Reynolds number. [-]
    cd : float
        Cd with the chosen law. [-]
    alternatives : Mapping
        Cd with each correlation valid over the flight, the chosen one included. [-]
    excluded : Mapping
        Each correlation left out, with the reason.
    half_width : float
        Largest departure of an alternative's Cd from the chosen one. [-]
    note : str
        Why there is no line, for a law that is not a scaled correlation.
    """

    model: str
    correlation: str | None
    reynolds_range: tuple[float, float]
    cd: float
    alternatives: Mapping[str, float] = field(default_factory=dict)
    excluded: Mapping[str, str] = field(default_factory=dict)
    half_width: float = 0.0
    note: str = ""

    @property
    def standard_uncertainty(self) -> float:
        """u of the choice: the half-width of a rectangular distribution over √3. [-]"""
        return self.half_width / math.sqrt(3.0)

    @property
    def stated_range(self) -> tuple[float, float] | None:
        """The chosen correlation's range of validity as used (capped below the drag
        crisis); None without a correlation. [-]"""
        if self.correlation is None:
            return None
        return get_correlation(self.correlation).model_range

    def input_quantity(self) -> InputQuantity | None:
        """The budget line (additive correction, estimate 0, sensitivity 1), or None."""
        if self.correlation is None or not self.half_width > 0:
            return None
        return InputQuantity(
            "drag_law", 0.0, self.standard_uncertainty, "", distribution="rectangular",
            sensitivity=1.0,
            description=f"choice of drag curve ({len(self.alternatives)} correlations)",
        )  # fmt: skip

    def to_dict(self) -> dict:
        return {
            "model": self.model,
            "correlation": self.correlation,
            "correlation_range_of_validity": (
                None if self.stated_range is None else list(self.stated_range)
            ),
            "flight_reynolds_range": list(self.reynolds_range),
            "drag_coefficient_by_correlation": dict(self.alternatives),
            "excluded": dict(self.excluded),
            "half_width": self.half_width,
            "standard_uncertainty": self.standard_uncertainty,
            "note": self.note,
        }


def drag_law_choice(model: str, reynolds_range: tuple[float, float], cd: float,
                    cd_with: Callable[[str], float]) -> DragLawChoice:  # fmt: skip
    """The spread of Cd over the published correlations valid for the flight.

    Parameters
    ----------
    model : str
        The fitted drag model's name.
    reynolds_range : (float, float)
        The flight's smallest and largest Reynolds number. [-]
    cd : float
        Cd of the fit with that model. [-]
    cd_with : callable
        ``cd_with(model_name) -> Cd`` re-fits with another ``sphere-scaled:<correlation>``
        law (raising ConvergenceError or RuntimeError when it does not converge). [-]

    Returns
    -------
    DragLawChoice
    """
    name = get_drag_model(model).name
    chosen = correlation_of(name)
    lo, hi = float(reynolds_range[0]), float(reynolds_range[1])
    if chosen is None:
        note = (
            "a constant drag coefficient: no drag curve is assumed"
            if name == "constant"
            else f"the {name} law is fitted to the flight itself; no published drag curve is "
            f"assumed"
        )
        return DragLawChoice(name, None, (lo, hi), float(cd), note=note)
    valid, excluded = correlations_for_flight(lo, hi)
    values = {chosen: float(cd)}
    for other in valid:
        if other == chosen:
            continue
        try:
            values[other] = float(cd_with(f"sphere-scaled:{other}"))
        except (ConvergenceError, RuntimeError) as exc:
            excluded[other] = f"the re-fit with it did not converge ({exc})"
    half = max(abs(v - cd) for v in values.values())
    return DragLawChoice(name, chosen, (lo, hi), float(cd), values, excluded, float(half))
