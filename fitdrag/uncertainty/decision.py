"""Conformity decisions: is the measured drag coefficient within the stated specification?

Two decision rules of ILAC-G8:09/2019 are offered:

``"simple"`` — simple acceptance (ILAC-G8 §4.2.1): the acceptance limits are the tolerance
limits; **pass** when the measured value lies within them, **fail** otherwise.  The specific
risk of a false acceptance reaches 50 % for a value at a limit.

``"guarded"`` — guarded acceptance with the guard band w = U, the expanded uncertainty
(ILAC-G8 §4.2.2, non-binary statement of §4.2.3):

* **pass** — the measured value lies inside the tolerance limits by at least w;
* **conditional pass** — inside the tolerance limits, but closer to a limit than w;
* **conditional fail** — outside the tolerance limits, by no more than w;
* **fail** — outside the tolerance limits by more than w.

A specification is two-sided (a stated value with a ± tolerance, or a lower and an upper
limit) or one-sided (only a lower or only an upper limit).  A measured value exactly on a
limit counts as inside that limit (ILAC-G8 leaves the boundary open; "within the limits" read
inclusively — common practice, no source).

The probability of conformity is computed under a normal model for the measurand, centred on
the measured value with the combined standard uncertainty as standard deviation [3].

The statement produced by :meth:`Verdict.statement` names the specification, the result it
covers and the decision rule applied, as ISO/IEC 17025:2017 §7.8.6.2 asks.

References
----------
1. ILAC-G8:09/2019, *Guidelines on Decision Rules and Statements of Conformity*, §4.2.1
   (simple acceptance), §4.2.2 (guarded acceptance, w = U), §4.2.3 (pass, conditional pass,
   conditional fail, fail).
2. ISO/IEC 17025:2017, *General requirements for the competence of testing and calibration
   laboratories*, §7.8.6 (reporting statements of conformity).
3. JCGM 106:2012, *Evaluation of measurement data — The role of measurement uncertainty in
   conformity assessment*, clause 7 (conformance probability for a normal PDF:
   p_c = Φ((T_U − y)/u) − Φ((T_L − y)/u)).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

from fitdrag.errors import InputError

RULES = ("simple", "guarded")

PASS = "pass"
CONDITIONAL_PASS = "conditional pass"
CONDITIONAL_FAIL = "conditional fail"
FAIL = "fail"
DECISIONS = (PASS, CONDITIONAL_PASS, CONDITIONAL_FAIL, FAIL)

_RULE_TEXT = {
    "simple": (
        "simple acceptance (ILAC-G8:09/2019, 4.2.1): the acceptance limits equal the "
        "tolerance limits; pass if the measured value lies within them, fail otherwise"
    ),
    "guarded": (
        "guarded acceptance with guard band w = U (ILAC-G8:09/2019, 4.2.2 and 4.2.3): pass if "
        "the measured value lies inside the tolerance limits by at least w, conditional pass "
        "if inside but closer than w to a limit, conditional fail if outside by at most w, "
        "fail if outside by more than w"
    ),
}


def _num(name: str, value, hint: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name}: expected a number, got {value!r}; {hint}") from None
    if not math.isfinite(v):
        raise InputError(f"{name}: must be finite, got {value!r}; {hint}")
    return v


@dataclass(frozen=True)
class Specification:
    """Stated requirement on the measured quantity.

    Parameters
    ----------
    lower : float or None
        Lower tolerance limit T_L (None: no lower limit). [unit]
    upper : float or None
        Upper tolerance limit T_U (None: no upper limit). [unit]
    nominal : float, optional
        Stated (nominal) value, when the specification is written as nominal ± tolerance.
        [unit]
    quantity : str
        Name of the quantity, for the statement.
    reference : str
        Where the specification comes from (customer document, standard, clause).
    """

    lower: float | None
    upper: float | None
    nominal: float | None = None
    quantity: str = "drag coefficient"
    reference: str = ""

    def __post_init__(self) -> None:
        hint = "give the limits as numbers in the unit of the result."
        lo = None if self.lower is None else _num("lower", self.lower, hint)
        hi = None if self.upper is None else _num("upper", self.upper, hint)
        if lo is None and hi is None:
            raise InputError(
                "specification: neither a lower nor an upper limit was given; give a tolerance "
                "(±) around the stated value, or lower and/or upper."
            )
        if lo is not None and hi is not None and not lo < hi:
            raise InputError(
                f"specification: lower limit {lo!r} must be below upper limit {hi!r}; swap them "
                f"or correct the tolerance."
            )
        nom = None if self.nominal is None else _num("nominal", self.nominal, hint)
        if nom is not None and ((lo is not None and nom < lo) or (hi is not None and nom > hi)):
            raise InputError(
                f"specification: stated value {nom!r} lies outside its own limits "
                f"[{lo!r}, {hi!r}]; correct the stated value or the limits."
            )
        object.__setattr__(self, "lower", lo)
        object.__setattr__(self, "upper", hi)
        object.__setattr__(self, "nominal", nom)

    @classmethod
    def from_tolerance(
        cls,
        nominal: float,
        tolerance: float,
        *,
        quantity: str = "drag coefficient",
        reference: str = "",
    ) -> Specification:
        """Two-sided specification ``nominal ± tolerance`` (tolerance > 0). [unit]"""
        nom = _num("nominal", nominal, "give the stated value as a number.")
        tol = _num("tolerance", tolerance, "give the ± tolerance as a positive number.")
        if tol <= 0:
            raise InputError(
                f"tolerance: must be > 0, got {tolerance!r}; give the half-width of the "
                f"tolerance interval (the ± value)."
            )
        return cls(nom - tol, nom + tol, nominal=nom, quantity=quantity, reference=reference)

    @property
    def two_sided(self) -> bool:
        return self.lower is not None and self.upper is not None

    @property
    def tolerance(self) -> float | None:
        """Half-width of a symmetric nominal ± tolerance specification, else None. [unit]"""
        if self.nominal is None or not self.two_sided:
            return None
        a, b = self.nominal - self.lower, self.upper - self.nominal
        return a if math.isclose(a, b, rel_tol=1e-9, abs_tol=1e-15) else None

    def describe(self, fmt: Callable[[float], str] = "{:.6g}".format) -> str:
        """Plain-words description, e.g. "0.47 ± 0.03 (0.44 ≤ drag coefficient ≤ 0.5)"."""
        q = self.quantity
        if self.two_sided:
            rng = f"{fmt(self.lower)} ≤ {q} ≤ {fmt(self.upper)}"
            tol = self.tolerance
            if tol is not None:
                s = f"stated value {fmt(self.nominal)} ± {fmt(tol)}, i.e. {rng}"
            elif self.nominal is not None:
                s = f"stated value {fmt(self.nominal)}, limits {rng}"
            else:
                s = f"limits {rng}"
        elif self.lower is not None:
            s = f"one-sided lower limit: {q} ≥ {fmt(self.lower)}"
        else:
            s = f"one-sided upper limit: {q} ≤ {fmt(self.upper)}"
        if self.reference:
            s += f" ({self.reference})"
        return s

    def to_dict(self) -> dict:
        return {
            "quantity": self.quantity,
            "nominal": self.nominal,
            "tolerance": self.tolerance,
            "lower": self.lower,
            "upper": self.upper,
            "reference": self.reference,
        }


def probability_of_conformity(
    value: float, standard_uncertainty: float, lower: float | None, upper: float | None
) -> float:
    """Probability that the measurand lies within [lower, upper] under a normal model [3].

    p_c = Φ((T_U − y)/u) − Φ((T_L − y)/u), with a missing limit taken as ±∞.

    Parameters
    ----------
    value : float
        Measured value y. [unit]
    standard_uncertainty : float
        Standard uncertainty u of y (>= 0). [unit]
    lower, upper : float or None
        Tolerance limits T_L, T_U. [unit]

    Returns
    -------
    float
        p_c. [-]
    """
    y = float(value)
    u = float(standard_uncertainty)
    if not (u >= 0 and math.isfinite(u)):
        raise InputError(f"standard_uncertainty: must be finite and >= 0, got {u!r}.")
    if u == 0:
        ok = (lower is None or y >= lower) and (upper is None or y <= upper)
        return 1.0 if ok else 0.0

    def phi(z: float) -> float:
        return 0.5 * math.erfc(-z / math.sqrt(2.0))

    p_hi = 1.0 if upper is None else phi((upper - y) / u)
    p_lo = 0.0 if lower is None else phi((lower - y) / u)
    return max(0.0, p_hi - p_lo)


@dataclass(frozen=True)
class Verdict:
    """A conformity decision and everything its statement needs.

    Attributes
    ----------
    decision : str
        "pass", "fail" (simple) or also "conditional pass", "conditional fail" (guarded).
    rule : str
        "simple" or "guarded".
    specification : Specification
    value : float
        Measured value y. [unit]
    expanded_uncertainty : float
        U. [unit]
    coverage_factor : float
        k. [-]
    coverage_probability : float
        p of U. [-]
    standard_uncertainty : float
        u_c, used for the probability of conformity. [unit]
    guard_band : float
        w (0 for simple acceptance). [unit]
    acceptance_lower, acceptance_upper : float or None
        Acceptance limits A_L = T_L + w, A_U = T_U − w. [unit]
    probability_of_conformity : float
        Under the normal model. [-]
    result_label : str
        What the result is (e.g. "drag coefficient of specimen BALL-07, certificate ...").
    """

    decision: str
    rule: str
    specification: Specification
    value: float
    expanded_uncertainty: float
    coverage_factor: float
    coverage_probability: float
    standard_uncertainty: float
    guard_band: float
    acceptance_lower: float | None
    acceptance_upper: float | None
    probability_of_conformity: float
    result_label: str = ""

    @property
    def conforms(self) -> bool:
        """True for pass and conditional pass."""
        return self.decision in (PASS, CONDITIONAL_PASS)

    @property
    def rule_text(self) -> str:
        return _RULE_TEXT[self.rule]

    def statement(self, fmt: Callable[[float], str] = "{:.6g}".format) -> str:
        """Conformity statement naming the specification, the result and the decision rule
        (ISO/IEC 17025:2017 §7.8.6.2); ``fmt`` formats the numbers."""
        label = f" ({self.result_label})" if self.result_label else ""
        return (
            f"Specification: {self.specification.describe(fmt)}. "
            f"Result covered: {self.specification.quantity} = {fmt(self.value)}{label}, "
            f"expanded uncertainty U = {fmt(self.expanded_uncertainty)} "
            f"(k = {self.coverage_factor:.2f}, coverage probability about "
            f"{100 * self.coverage_probability:.0f} %). "
            f"Decision rule: {self.rule_text}. "
            f"Decision: {self.decision.upper()}. "
            f"Probability of conformity under a normal model: "
            f"{_percent_not_certain(self.probability_of_conformity)}."
        )

    def to_dict(self) -> dict:
        return {
            "decision": self.decision,
            "conforms": self.conforms,
            "rule": self.rule,
            "rule_text": self.rule_text,
            "specification": self.specification.to_dict(),
            "value": self.value,
            "expanded_uncertainty": self.expanded_uncertainty,
            "coverage_factor": self.coverage_factor,
            "coverage_probability": self.coverage_probability,
            "standard_uncertainty": self.standard_uncertainty,
            "guard_band": self.guard_band,
            "acceptance_limits": {"lower": self.acceptance_lower, "upper": self.acceptance_upper},
            "probability_of_conformity": self.probability_of_conformity,
            "result_label": self.result_label,
            "statement": self.statement(),
        }


def decide(
    value: float,
    expanded_uncertainty: float,
    specification: Specification,
    rule: str = "simple",
    *,
    coverage_factor: float = 2.0,
    coverage_probability: float = 0.9545,
    standard_uncertainty: float | None = None,
    result_label: str = "",
) -> Verdict:
    """Decide conformity of a measured value with a specification [1].

    Parameters
    ----------
    value : float
        Measured value y. [unit]
    expanded_uncertainty : float
        Expanded uncertainty U >= 0; the guard band of the guarded rule. [unit]
    specification : Specification
        Tolerance limits.
    rule : str
        "simple" or "guarded".
    coverage_factor : float
        k of U, for the statement and (when ``standard_uncertainty`` is not given) u = U/k.
        [-]
    coverage_probability : float
        p of U, for the statement. [-]
    standard_uncertainty : float, optional
        u_c for the probability of conformity; default U/k. [unit]
    result_label : str
        Names the result the statement covers.

    Returns
    -------
    Verdict
    """
    if rule not in RULES:
        raise InputError(
            f"decision_rule: unknown rule {rule!r}; use one of {', '.join(map(repr, RULES))}."
        )
    if not isinstance(specification, Specification):
        raise InputError(f"specification: expected a Specification, got {specification!r}.")
    y = _num("value", value, "the measured value must be a finite number.")
    big_u = _num("expanded_uncertainty", expanded_uncertainty, "give U as a number >= 0.")
    if big_u < 0:
        raise InputError(f"expanded_uncertainty: must be >= 0, got {expanded_uncertainty!r}.")
    k = _num("coverage_factor", coverage_factor, "give k > 0.")
    if k <= 0:
        raise InputError(f"coverage_factor: must be > 0, got {coverage_factor!r}.")
    u = big_u / k if standard_uncertainty is None else float(standard_uncertainty)
    lo, hi = specification.lower, specification.upper
    w = big_u if rule == "guarded" else 0.0
    a_lo = None if lo is None else lo + w
    a_hi = None if hi is None else hi - w

    inside = (lo is None or y >= lo) and (hi is None or y <= hi)
    if rule == "simple":
        decision = PASS if inside else FAIL
    else:
        in_acceptance = (a_lo is None or y >= a_lo) and (a_hi is None or y <= a_hi)
        near = (lo is None or y >= lo - w) and (hi is None or y <= hi + w)
        if inside and in_acceptance:
            decision = PASS
        elif inside:
            decision = CONDITIONAL_PASS
        elif near:
            decision = CONDITIONAL_FAIL
        else:
            decision = FAIL
    return Verdict(
        decision=decision,
        rule=rule,
        specification=specification,
        value=y,
        expanded_uncertainty=big_u,
        coverage_factor=k,
        coverage_probability=float(coverage_probability),
        standard_uncertainty=u,
        guard_band=w,
        acceptance_lower=a_lo,
        acceptance_upper=a_hi,
        probability_of_conformity=probability_of_conformity(y, u, lo, hi),
        result_label=result_label,
    )


def _percent_not_certain(p: float) -> str:
    """A probability to 0.1 %, never rounded to a certainty ("> 99.9 %", "< 0.1 %")."""
    if p > 0.999:
        return "> 99.9 %"
    if p < 0.001:
        return "< 0.1 %"
    return f"{100 * p:.1f} %"
