"""Uncertainty budget (GUM) and its Monte Carlo cross-check (JCGM 101).

Generic machinery that knows nothing of files or of drag: a *measurement model* is any
callable ``fn(values) -> y`` taking a ``{name: value}`` mapping of the input quantities and
returning the output estimate (for fitdrag, a re-fit of the drag coefficient with the inputs
changed).  :func:`budget_from_model` linearises it (law of propagation of uncertainty for
uncorrelated inputs) and :func:`monte_carlo` propagates the input distributions through it.

Conventions
-----------
* Inputs are uncorrelated (JCGM 100:2008 eq. (10)).
* A *statistical* component (the fit's own standard uncertainty, with its degrees of freedom)
  may be given separately: it enters additively with sensitivity coefficient 1 and is not
  passed to ``fn`` (the re-fit of the same data reproduces the same statistical error).
* Sensitivity coefficients ``c_i = ∂y/∂x_i`` are exact when the input carries one, otherwise
  central differences of ``fn`` with step ``h_i = u(x_i)`` (``step_fraction = 1``).  Why the
  step equals the standard uncertainty rather than a tiny number: ``fn`` is usually an
  iterative fit whose result is only converged to some tolerance ε, so the difference quotient
  carries an error of order ε/h that a tiny step would blow up; a step of ``u(x_i)`` measures
  the slope over the range the input actually spans, which is what the linearisation of
  JCGM 100:2008 5.1.2 needs, and the truncation error of the central difference, of order
  ``h² f'''/6``, is a second-order effect in the uncertainty.  The half-sum
  ``|f(x+h) + f(x-h) - 2 f(x)| / 2`` is reported as a nonlinearity indicator per input.

References
----------
1. JCGM 100:2008, *Evaluation of measurement data — Guide to the expression of uncertainty
   in measurement* (GUM): eq. (10) law of propagation of uncertainty; 5.1.3 sensitivity
   coefficients; 6.2.1 expanded uncertainty U = k u_c; Annex G, eq. (G.2b)
   Welch–Satterthwaite formula; G.3–G.4 coverage factor from the t-distribution, G.4.1 NOTE 1
   truncation of ν_eff; Table G.1 (k = 2 ↔ p = 95.45 % for a normal distribution).
2. JCGM 101:2008, *Propagation of distributions using a Monte Carlo method*: 6.4 sampling
   from probability distributions (6.4.2 rectangular, 6.4.4 triangular, 6.4.6 arc sine,
   6.4.7 Gaussian, 6.4.9 scaled and shifted t); 7.7 probabilistically symmetric coverage
   interval; 7.9 adaptive Monte Carlo procedure; 8.2 validation of the GUM uncertainty
   framework.
"""

from __future__ import annotations

import math
import os
import time
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

#: Coverage probability of k = 2 for a normal distribution: erf(2/√2) = 0.9545 (GUM Table G.1).
P_K2 = math.erf(2.0 / math.sqrt(2.0))

#: Distributions an input may be sampled from in the Monte Carlo method (JCGM 101 6.4).
DISTRIBUTIONS = ("normal", "rectangular", "triangular", "arcsine", "t")

_KINDS = ("A", "B")


def _finite(name: str, what: str, value: Any) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{name}: {what} must be a number, got {value!r}.") from None
    if not math.isfinite(v):
        raise ValueError(f"{name}: {what} must be finite, got {value!r}.")
    return v


@dataclass(frozen=True)
class InputQuantity:
    """One input quantity of a measurement model, with its standard uncertainty.

    Parameters
    ----------
    name : str
        Key under which ``fn`` receives the value; also the budget line's label.
    value : float
        Best estimate x_i. [unit]
    standard_uncertainty : float
        Standard uncertainty u(x_i) >= 0. [unit]
    unit : str
        Unit of ``value`` and ``standard_uncertainty`` as printed in the budget.
    dof : float
        Degrees of freedom of u(x_i); ``math.inf`` when known exactly (JCGM 100 G.4.2). [-]
    kind : str
        Evaluation type: "A" (statistical) or "B" (other means) (JCGM 100 4.2, 4.3).
    distribution : str, optional
        Distribution sampled in the Monte Carlo method: "normal", "rectangular",
        "triangular", "arcsine" or "t" (scaled and shifted t with ``dof`` degrees of
        freedom, JCGM 101 6.4.9).  Default: "t" for a Type A input with finite ``dof``,
        else "normal".  In every case the distribution's standard deviation is
        ``standard_uncertainty`` except for "t", whose *scale* is (JCGM 101 6.4.9.7).
    sensitivity : float, optional
        Exact sensitivity coefficient ∂y/∂x_i if known; otherwise it is computed. [unit_y/unit]
    step : float, optional
        Step of the central difference, overriding the default ``u(x_i)``. [unit]
    description : str
        Free text for the budget table (e.g. "balance calibration certificate").
    """

    name: str
    value: float
    standard_uncertainty: float
    unit: str = ""
    dof: float = math.inf
    kind: str = "B"
    distribution: str | None = None
    sensitivity: float | None = None
    step: float | None = None
    description: str = ""

    def __post_init__(self) -> None:
        if not isinstance(self.name, str) or not self.name:
            raise ValueError(f"name: expected a non-empty string, got {self.name!r}.")
        n = self.name
        object.__setattr__(self, "value", _finite(n, "value", self.value))
        u = _finite(n, "standard_uncertainty", self.standard_uncertainty)
        if u < 0:
            raise ValueError(
                f"{n}: standard_uncertainty must be >= 0, got {u!r}; give the standard "
                f"uncertainty as a positive number (or 0 if the value is exact)."
            )
        object.__setattr__(self, "standard_uncertainty", u)
        try:
            dof = float(self.dof)
        except (TypeError, ValueError):
            raise ValueError(f"{n}: dof must be a number or inf, got {self.dof!r}.") from None
        if math.isnan(dof) or dof <= 0:
            raise ValueError(f"{n}: dof (degrees of freedom) must be > 0 or inf, got {self.dof!r}.")
        object.__setattr__(self, "dof", dof)
        if self.kind not in _KINDS:
            raise ValueError(
                f"{n}: kind must be 'A' (statistical) or 'B' (other), got {self.kind!r}."
            )
        dist = self.distribution
        if dist is None:
            dist = "t" if (self.kind == "A" and math.isfinite(dof)) else "normal"
        if dist not in DISTRIBUTIONS:
            raise ValueError(
                f"{n}: distribution must be one of {', '.join(DISTRIBUTIONS)}, got {dist!r}."
            )
        if dist == "t" and not math.isfinite(dof):
            dist = "normal"
        object.__setattr__(self, "distribution", dist)
        if self.sensitivity is not None:
            object.__setattr__(self, "sensitivity", _finite(n, "sensitivity", self.sensitivity))
        if self.step is not None:
            s = _finite(n, "step", self.step)
            if s <= 0:
                raise ValueError(f"{n}: step must be > 0, got {self.step!r}.")
            object.__setattr__(self, "step", s)

    def sample(self, rng: np.random.Generator, size: int) -> np.ndarray:
        """Draw ``size`` values from the input's distribution (JCGM 101 6.4). [unit]"""
        x, u = self.value, self.standard_uncertainty
        if u == 0.0:
            return np.full(size, x)
        d = self.distribution
        if d == "normal":  # JCGM 101 6.4.7
            return x + u * rng.standard_normal(size)
        if d == "rectangular":  # JCGM 101 6.4.2: half-width a = √3 u
            a = math.sqrt(3.0) * u
            return x + rng.uniform(-a, a, size)
        if d == "triangular":  # JCGM 101 6.4.4: symmetric, half-width a = √6 u
            a = math.sqrt(6.0) * u
            return x + a * (rng.random(size) - rng.random(size))
        if d == "arcsine":  # JCGM 101 6.4.6: x + a sin(2πR), a = √2 u
            a = math.sqrt(2.0) * u
            return x + a * np.sin(2.0 * math.pi * rng.random(size))
        # JCGM 101 6.4.9.7: x + scale * t_ν
        return x + u * rng.standard_t(self.dof, size)


def _statistical_input(statistical: Any, unit: str) -> InputQuantity | None:
    if statistical is None:
        return None
    if isinstance(statistical, InputQuantity):
        q = statistical
    else:
        try:
            u, dof = statistical
        except (TypeError, ValueError):
            raise ValueError(
                f"statistical: expected (standard_uncertainty, dof) or an InputQuantity, got "
                f"{statistical!r}."
            ) from None
        q = InputQuantity(
            "statistical",
            0.0,
            u,
            unit=unit,
            dof=dof,
            kind="A",
            sensitivity=1.0,
            description="statistical (fit)",
        )
    if q.sensitivity is None:
        q = InputQuantity(
            q.name,
            q.value,
            q.standard_uncertainty,
            q.unit,
            q.dof,
            q.kind,
            q.distribution,
            1.0,
            q.step,
            q.description,
        )
    return q


def _check_inputs(inputs: Sequence[InputQuantity]) -> list[InputQuantity]:
    inputs = list(inputs)
    names = [q.name for q in inputs]
    for q in inputs:
        if not isinstance(q, InputQuantity):
            raise ValueError(f"inputs: expected InputQuantity objects, got {q!r}.")
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise ValueError(f"inputs: duplicate input name(s) {dup}; give each input once.")
    return inputs


def welch_satterthwaite(contributions: Sequence[float], dofs: Sequence[float]) -> float:
    """Effective degrees of freedom of a combined uncertainty (GUM eq. (G.2b)).

    ν_eff = u_c⁴ / Σ (u_i⁴ / ν_i), with u_i = |c_i| u(x_i) the contributions and
    u_c² = Σ u_i².  Terms with ν_i = ∞ add nothing to the denominator; ν_eff = ∞ when every
    term does (or when u_c = 0).

    Parameters
    ----------
    contributions : sequence of float
        Uncertainty contributions u_i = c_i u(x_i) (signs are ignored). [unit_y]
    dofs : sequence of float
        Degrees of freedom ν_i of each contribution. [-]

    Returns
    -------
    float
        ν_eff. [-]
    """
    c = np.abs(np.asarray(contributions, dtype=float))
    nu = np.asarray(dofs, dtype=float)
    if c.shape != nu.shape:
        raise ValueError(
            f"contributions and dofs: lengths differ ({c.size} and {nu.size}); give one dof "
            f"per contribution."
        )
    uc2 = float(np.sum(c**2))
    finite = np.isfinite(nu) & (c > 0)
    denom = float(np.sum(c[finite] ** 4 / nu[finite]))
    if uc2 == 0.0 or denom == 0.0:
        return math.inf
    return uc2**2 / denom


def coverage_factor(
    dof: float, coverage_probability: float = P_K2, *, truncate: bool = True
) -> float:
    """Coverage factor k = t_p(ν) from the t-distribution (GUM G.3, G.4).

    Parameters
    ----------
    dof : float
        Degrees of freedom (effective), ``math.inf`` for a normal distribution. [-]
    coverage_probability : float
        Coverage probability p, 0 < p < 1; default 0.9545, for which k(∞) = 2 exactly
        (GUM Table G.1). [-]
    truncate : bool
        Truncate a fractional ν to the next lower integer before looking up t (GUM G.4.1
        NOTE 1, the choice of the worked examples); ``False`` uses the fractional ν.

    Returns
    -------
    float
        k. [-]
    """
    from scipy import stats

    p = float(coverage_probability)
    if not 0.0 < p < 1.0:
        raise ValueError(
            f"coverage_probability: must be between 0 and 1, got {coverage_probability!r}; "
            f"use e.g. 0.9545 for k = 2."
        )
    nu = float(dof)
    if math.isnan(nu) or nu <= 0:
        raise ValueError(f"dof: must be > 0 or inf, got {dof!r}.")
    q = 0.5 * (1.0 + p)
    if math.isinf(nu):
        return float(stats.norm.ppf(q))
    if truncate:
        nu = max(1.0, math.floor(nu))
    return float(stats.t.ppf(q, nu))


@dataclass(frozen=True)
class BudgetLine:
    """One line of an uncertainty budget.

    ``contribution`` is the signed c_i u(x_i) [unit_y]; ``share`` its fraction of u_c²;
    ``nonlinearity`` half the second difference |f(x+h)+f(x-h)-2f(x)|/2 at the step used
    (0 for exact sensitivities) [unit_y].
    """

    name: str
    value: float
    standard_uncertainty: float
    unit: str
    sensitivity: float
    contribution: float
    share: float
    dof: float
    kind: str
    distribution: str
    description: str = ""
    step: float | None = None
    nonlinearity: float = 0.0

    def to_dict(self) -> dict:
        return {
            "name": self.name,
            "description": self.description,
            "value": self.value,
            "standard_uncertainty": self.standard_uncertainty,
            "unit": self.unit,
            "sensitivity_coefficient": self.sensitivity,
            "contribution": self.contribution,
            "share": self.share,
            "degrees_of_freedom": _json_dof(self.dof),
            "kind": self.kind,
            "distribution": self.distribution,
            "step": self.step,
            "nonlinearity": self.nonlinearity,
        }


def _json_dof(nu: float) -> float | str:
    return "inf" if math.isinf(nu) else nu


@dataclass(frozen=True)
class Budget:
    """Result of the GUM uncertainty framework for one output quantity.

    Attributes
    ----------
    value : float
        Output estimate y = f(x) (plus the statistical term's value, normally 0). [unit]
    lines : tuple of BudgetLine
        One per input, the statistical component first if given.
    combined_standard_uncertainty : float
        u_c(y) (GUM eq. (10)). [unit]
    effective_dof : float
        ν_eff (GUM eq. (G.2b)). [-]
    coverage_probability : float
        p of the expanded uncertainty. [-]
    coverage_factor : float
        k = t_p(ν_eff). [-]
    expanded_uncertainty : float
        U = k u_c (GUM 6.2.1). [unit]
    unit : str
        Unit of y.
    """

    value: float
    lines: tuple[BudgetLine, ...]
    combined_standard_uncertainty: float
    effective_dof: float
    coverage_probability: float
    coverage_factor: float
    expanded_uncertainty: float
    unit: str = ""
    truncate_dof: bool = True

    @property
    def relative_uncertainty(self) -> float:
        """u_c / |y| (inf when y = 0). [-]"""
        return self.combined_standard_uncertainty / abs(self.value) if self.value else math.inf

    def line(self, name: str) -> BudgetLine:
        for ln in self.lines:
            if ln.name == name:
                return ln
        raise KeyError(f"no budget line named {name!r}; lines are {[x.name for x in self.lines]}")

    def interval(self, coverage_probability: float | None = None) -> tuple[float, float]:
        """Coverage interval y ± t_p(ν_eff) u_c at ``coverage_probability`` (default: the
        budget's own p). [unit]"""
        if coverage_probability is None:
            k = self.coverage_factor
        else:
            k = coverage_factor(
                self.effective_dof, coverage_probability, truncate=self.truncate_dof
            )
        half = k * self.combined_standard_uncertainty
        return (self.value - half, self.value + half)

    def to_dict(self) -> dict:
        return {
            "value": self.value,
            "unit": self.unit,
            "combined_standard_uncertainty": self.combined_standard_uncertainty,
            "effective_degrees_of_freedom": _json_dof(self.effective_dof),
            "coverage_probability": self.coverage_probability,
            "coverage_factor": self.coverage_factor,
            "expanded_uncertainty": self.expanded_uncertainty,
            "relative_uncertainty": self.relative_uncertainty,
            "lines": [ln.to_dict() for ln in self.lines],
        }


def budget_from_contributions(
    value: float,
    lines: Sequence[tuple[InputQuantity, float]],
    *,
    coverage_probability: float = P_K2,
    truncate_dof: bool = True,
    unit: str = "",
    nonlinearity: Mapping[str, float] | None = None,
    steps: Mapping[str, float] | None = None,
) -> Budget:
    """Combine inputs with known sensitivity coefficients into a :class:`Budget`.

    Parameters
    ----------
    value : float
        Output estimate y. [unit]
    lines : sequence of (InputQuantity, float)
        Each input with its sensitivity coefficient c_i. [unit/unit_i]
    coverage_probability : float
        p of the expanded uncertainty; default 0.9545 (k = 2 at ν = ∞). [-]
    truncate_dof : bool
        See :func:`coverage_factor`.
    unit : str
        Unit of y.
    """
    nonlinearity = dict(nonlinearity or {})
    steps = dict(steps or {})
    contrib = [c * q.standard_uncertainty for q, c in lines]
    uc2 = float(sum(x * x for x in contrib))
    uc = math.sqrt(uc2)
    nu = welch_satterthwaite(contrib, [q.dof for q, _ in lines])
    k = coverage_factor(nu, coverage_probability, truncate=truncate_dof)
    out = []
    for (q, c), ci in zip(lines, contrib):
        out.append(
            BudgetLine(
                name=q.name,
                value=q.value,
                standard_uncertainty=q.standard_uncertainty,
                unit=q.unit,
                sensitivity=float(c),
                contribution=float(ci),
                share=(ci * ci / uc2) if uc2 > 0 else 0.0,
                dof=q.dof,
                kind=q.kind,
                distribution=q.distribution,
                description=q.description,
                step=steps.get(q.name),
                nonlinearity=float(nonlinearity.get(q.name, 0.0)),
            )
        )
    return Budget(
        value=float(value),
        lines=tuple(out),
        combined_standard_uncertainty=uc,
        effective_dof=nu,
        coverage_probability=float(coverage_probability),
        coverage_factor=k,
        expanded_uncertainty=k * uc,
        unit=unit,
        truncate_dof=truncate_dof,
    )


def _evaluate(fn: Callable, values: dict, what: str) -> float:
    try:
        y = float(fn(values))
    except Exception as exc:  # the model (a fit) may fail in many ways
        raise RuntimeError(f"model evaluation failed at {what}: {exc}") from exc
    if not math.isfinite(y):
        raise RuntimeError(f"model evaluation at {what} returned a non-finite value {y!r}.")
    return y


def _default_step(q: InputQuantity, step_fraction: float) -> float:
    if q.step is not None:
        return q.step
    if q.standard_uncertainty > 0:
        return step_fraction * q.standard_uncertainty
    return 1e-3 * abs(q.value) if q.value != 0 else 1e-6


def budget_from_model(
    fn: Callable[[dict[str, float]], float],
    inputs: Sequence[InputQuantity],
    statistical: Any = None,
    *,
    coverage_probability: float = P_K2,
    truncate_dof: bool = True,
    step_fraction: float = 1.0,
    unit: str = "",
    progress: bool = False,
) -> Budget:
    """Uncertainty budget of ``y = fn(x)`` by the law of propagation of uncertainty.

    Parameters
    ----------
    fn : callable
        Measurement model: ``fn({name: value}) -> float``; called once at the estimates and
        twice per input without an exact sensitivity.
    inputs : sequence of InputQuantity
        The input quantities (uncorrelated).
    statistical : (float, float) or InputQuantity, optional
        Additive statistical component (u, ν) of the output, e.g. the fit's own standard
        uncertainty and its degrees of freedom; sensitivity 1, not passed to ``fn``. [unit]
    coverage_probability : float
        p of the expanded uncertainty; default 0.9545 (k = 2 for ν_eff = ∞). [-]
    truncate_dof : bool
        Truncate ν_eff before looking up k (GUM G.4.1 NOTE 1).
    step_fraction : float
        Central-difference step as a fraction of u(x_i) (default 1; see the module notes).
    unit : str
        Unit of y.
    progress : bool
        Show a progress bar over the model evaluations (tqdm, on stderr).

    Returns
    -------
    Budget

    Raises
    ------
    RuntimeError
        When ``fn`` fails or returns a non-finite value at the estimates or a stepped point.
    """
    inputs = _check_inputs(inputs)
    stat = _statistical_input(statistical, unit)
    if stat is not None and stat.name in {q.name for q in inputs}:
        raise ValueError(f"statistical: its name {stat.name!r} is also an input's name.")
    if not (step_fraction > 0 and math.isfinite(step_fraction)):
        raise ValueError(f"step_fraction: must be a finite number > 0, got {step_fraction!r}.")
    base = {q.name: q.value for q in inputs}
    y0 = _evaluate(fn, dict(base), "the input estimates")
    todo = [q for q in inputs if q.sensitivity is None]
    bar = _progress_bar(2 * len(todo), progress, "sensitivities")
    lines: list[tuple[InputQuantity, float]] = []
    nonlin: dict[str, float] = {}
    steps: dict[str, float] = {}
    if stat is not None:
        lines.append((stat, stat.sensitivity))
    try:
        for q in inputs:
            if q.sensitivity is not None:
                lines.append((q, q.sensitivity))
                continue
            h = _default_step(q, step_fraction)
            steps[q.name] = h
            up = dict(base, **{q.name: q.value + h})
            dn = dict(base, **{q.name: q.value - h})
            yp = _evaluate(fn, up, f"{q.name} = {q.value + h!r}")
            bar.update(1)
            try:
                ym = _evaluate(fn, dn, f"{q.name} = {q.value - h!r}")
            except RuntimeError:
                # outside the model's domain below the estimate: one-sided difference
                c = (yp - y0) / h
                nonlin[q.name] = float("nan")
            else:
                c = (yp - ym) / (2.0 * h)
                nonlin[q.name] = 0.5 * abs(yp + ym - 2.0 * y0)
            bar.update(1)
            lines.append((q, c))
    finally:
        bar.close()
    value = y0 + (stat.value if stat is not None else 0.0)
    return budget_from_contributions(
        value,
        lines,
        coverage_probability=coverage_probability,
        truncate_dof=truncate_dof,
        unit=unit,
        nonlinearity=nonlin,
        steps=steps,
    )


# ---------------------------------------------------------------------------------------------
# Monte Carlo method (JCGM 101:2008)
# ---------------------------------------------------------------------------------------------


def symmetric_interval(values: np.ndarray, coverage_probability: float) -> tuple[float, float]:
    """Probabilistically symmetric coverage interval from model values (JCGM 101 7.7).

    With the M values sorted, q = pM rounded to an integer (+1/2 rule), r = (M − q)/2 when
    M − q is even, else (M − q + 1)/2; the interval is [ỹ_r, ỹ_{r+q}] (1-based indices).

    Parameters
    ----------
    values : array_like
        Model values. [unit]
    coverage_probability : float
        p. [-]
    """
    y = np.sort(np.asarray(values, dtype=float))
    m = y.size
    p = float(coverage_probability)
    if not 0.0 < p < 1.0:
        raise ValueError(f"coverage_probability: must be between 0 and 1, got {p!r}.")
    q = int(math.floor(p * m + 0.5))
    if m < 2 or q >= m:
        raise ValueError(
            f"values: {m} model value(s) are too few for a {p:.4g} coverage interval; "
            f"use at least {math.ceil(1.0 / (1.0 - p))} trials."
        )
    r = (m - q) // 2 if (m - q) % 2 == 0 else (m - q + 1) // 2
    r = max(r, 1)
    return float(y[r - 1]), float(y[r + q - 1])


def numerical_tolerance(u: float, n_dig: int = 2) -> float:
    """Numerical tolerance δ of a standard uncertainty (JCGM 101 7.9.2).

    u written as c × 10^l with c an ``n_dig``-digit integer; δ = ½ × 10^l. [unit]
    """
    if not (u > 0 and math.isfinite(u)):
        return 0.0
    ell = math.floor(math.log10(u)) - (int(n_dig) - 1)
    return 0.5 * 10.0**ell


@dataclass(frozen=True)
class MonteCarloResult:
    """Result of the Monte Carlo method (JCGM 101).

    Attributes
    ----------
    trials : int
        Number of model values M used (failed evaluations excluded).
    failures : int
        Evaluations that raised or returned a non-finite value (excluded).
    mean : float
        Average of the model values, the estimate y (JCGM 101 7.6). [unit]
    standard_uncertainty : float
        Standard deviation of the model values, u(y) (JCGM 101 7.6). [unit]
    coverage_probability : float
        p of ``interval``. [-]
    interval : tuple of float
        Probabilistically symmetric coverage interval (JCGM 101 7.7). [unit]
    adaptive : bool
        Whether the adaptive procedure (JCGM 101 7.9) was used.
    converged : bool or None
        Adaptive only: whether the stabilisation criterion was met before the trial cap.
    tolerance : float
        Numerical tolerance δ of u(y) (JCGM 101 7.9.2). [unit]
    elapsed : float
        Wall-clock time. [s]
    workers : int
        Processes used.
    """

    trials: int
    failures: int
    mean: float
    standard_uncertainty: float
    coverage_probability: float
    interval: tuple[float, float]
    adaptive: bool = False
    converged: bool | None = None
    tolerance: float = 0.0
    elapsed: float = 0.0
    workers: int = 1
    interval_standard_error: tuple[float, float] = (math.nan, math.nan)
    values: np.ndarray | None = field(default=None, repr=False, compare=False)

    def to_dict(self) -> dict:
        return {
            "trials": self.trials,
            "failures": self.failures,
            "mean": self.mean,
            "standard_uncertainty": self.standard_uncertainty,
            "coverage_probability": self.coverage_probability,
            "interval": list(self.interval),
            "interval_standard_error": [_nan_none(x) for x in self.interval_standard_error],
            "adaptive": self.adaptive,
            "converged": self.converged,
            "numerical_tolerance": self.tolerance,
            "elapsed_seconds": self.elapsed,
            "workers": self.workers,
        }


def _nan_none(x: float) -> float | None:
    return None if not math.isfinite(x) else float(x)


def interval_standard_error(
    values: np.ndarray, coverage_probability: float, batches: int = 10
) -> tuple[float, float]:
    """Standard errors of the coverage-interval endpoints from ``batches`` sub-samples.

    The model values are independent, so consecutive blocks are independent batches; the
    standard deviation of the batch endpoints divided by √h estimates the standard error of
    the endpoints of all values together (the batch-means argument of JCGM 101 7.9.4).
    NaN when there are too few values per batch. [unit]
    """
    y = np.asarray(values, dtype=float)
    m = y.size // int(batches)
    if m < math.ceil(1.0 / (1.0 - coverage_probability)) or batches < 2:
        return (math.nan, math.nan)
    ends = np.array(
        [symmetric_interval(y[i * m : (i + 1) * m], coverage_probability) for i in range(batches)]
    )
    s = ends.std(axis=0, ddof=1) / math.sqrt(batches)
    return (float(s[0]), float(s[1]))


def _progress_bar(total: int, enabled: bool, desc: str):
    if enabled:
        from tqdm.auto import tqdm

        return tqdm(total=total, desc=desc, unit="fit", leave=False, dynamic_ncols=True)

    class _Null:
        def update(self, n: int = 1) -> None:
            pass

        def close(self) -> None:
            pass

    return _Null()


# worker-side state for the process pool (set by the initializer)
_WORKER_FN: Callable | None = None
_WORKER_NAMES: tuple[str, ...] = ()


def _init_worker(fn: Callable, names: tuple[str, ...]) -> None:
    global _WORKER_FN, _WORKER_NAMES
    _WORKER_FN = fn
    _WORKER_NAMES = names


def _eval_rows(fn: Callable, names: Sequence[str], block: np.ndarray) -> np.ndarray:
    out = np.empty(block.shape[0])
    for i, row in enumerate(block):
        try:
            out[i] = float(fn(dict(zip(names, row.tolist()))))
        except Exception:  # a failed re-fit is counted, not fatal
            out[i] = np.nan
    return out


def _eval_block(block: np.ndarray) -> np.ndarray:
    return _eval_rows(_WORKER_FN, _WORKER_NAMES, block)


class _Evaluator:
    """Evaluates blocks of input rows, serially or in a process pool."""

    def __init__(self, fn, names, workers, vectorized, bar):
        self.fn, self.names, self.vectorized, self.bar = fn, tuple(names), vectorized, bar
        self.workers = 1 if vectorized else max(1, int(workers))
        self.pool = None
        if self.workers > 1:
            from concurrent.futures import ProcessPoolExecutor

            self.pool = ProcessPoolExecutor(
                max_workers=self.workers, initializer=_init_worker, initargs=(fn, self.names)
            )

    def __call__(self, rows: np.ndarray) -> np.ndarray:
        if self.vectorized:
            cols = {n: rows[:, j] for j, n in enumerate(self.names)}
            y = np.asarray(self.fn(cols), dtype=float)
            if y.shape != (rows.shape[0],):
                raise ValueError(
                    f"fn: a vectorized model must return one value per trial, got shape "
                    f"{y.shape} for {rows.shape[0]} trials."
                )
            self.bar.update(rows.shape[0])
            return y
        if self.pool is None:
            out = np.empty(rows.shape[0])
            chunk = 50
            for s in range(0, rows.shape[0], chunk):
                out[s : s + chunk] = _eval_rows(self.fn, self.names, rows[s : s + chunk])
                self.bar.update(min(chunk, rows.shape[0] - s))
            return out
        chunk = max(10, min(250, rows.shape[0] // (8 * self.workers) or 10))
        starts = list(range(0, rows.shape[0], chunk))
        futures = {self.pool.submit(_eval_block, rows[s : s + chunk]): s for s in starts}
        out = np.empty(rows.shape[0])
        from concurrent.futures import as_completed

        for fut in as_completed(futures):
            s = futures[fut]
            res = fut.result()
            out[s : s + res.size] = res
            self.bar.update(res.size)
        return out

    def close(self) -> None:
        if self.pool is not None:
            self.pool.shutdown(wait=True, cancel_futures=True)
            self.pool = None


def _draw(inputs, stat, rng, size) -> tuple[np.ndarray, np.ndarray]:
    rows = np.empty((size, len(inputs)))
    for j, q in enumerate(inputs):
        rows[:, j] = q.sample(rng, size)
    extra = stat.sample(rng, size) * stat.sensitivity if stat is not None else np.zeros(size)
    return rows, extra


def monte_carlo(
    fn: Callable,
    inputs: Sequence[InputQuantity],
    statistical: Any = None,
    *,
    trials: int = 10_000,
    coverage_probability: float = 0.95,
    seed: int | None = None,
    workers: int = 1,
    adaptive: bool = False,
    batch_size: int | None = None,
    n_dig: int = 2,
    vectorized: bool = False,
    progress: bool = False,
    keep_values: bool = False,
    unit: str = "",
) -> MonteCarloResult:
    """Propagate the input distributions through ``fn`` by the Monte Carlo method (JCGM 101).

    Parameters
    ----------
    fn : callable
        Measurement model ``fn({name: value}) -> float``.  With ``workers > 1`` it must be
        picklable (a module-level function or an instance of a module-level class).
    inputs : sequence of InputQuantity
        Inputs, sampled independently from their ``distribution``.
    statistical : (float, float) or InputQuantity, optional
        Additive statistical component (u, ν), sampled as a scaled and shifted t with ν
        degrees of freedom (normal if ν = ∞) and added to each model value. [unit]
    trials : int
        Number of trials M; with ``adaptive=True`` the cap on the number of trials.
    coverage_probability : float
        p of the coverage interval (default 0.95). [-]
    seed : int, optional
        Seed of the random generator (numpy PCG64); results do not depend on ``workers``.
    workers : int
        Processes evaluating ``fn`` (a ``ProcessPoolExecutor``); 1 evaluates in-process.
    adaptive : bool
        Use the adaptive procedure of JCGM 101 7.9: batches of ``batch_size`` trials until
        twice the standard deviations of the batch means of y, u(y) and both interval
        endpoints are all within the numerical tolerance δ of u(y) given to ``n_dig``
        significant digits (7.9.4), or until ``trials`` are used.
    batch_size : int, optional
        Trials per batch; default max(100/(1 − p), trials/10).  JCGM 101 7.9.4 suggests
        max(100/(1 − p), 10⁴); smaller batches keep re-fitting affordable.
    n_dig : int
        Significant digits of u(y) that must be stable (JCGM 101 7.9.2). [-]
    vectorized : bool
        ``fn`` takes ``{name: array}`` and returns an array (fast for closed-form models).
    progress : bool
        Show a progress bar (tqdm, on stderr).
    keep_values : bool
        Keep the model values in the result (``values``).

    Returns
    -------
    MonteCarloResult
    """
    inputs = _check_inputs(inputs)
    stat = _statistical_input(statistical, unit)
    trials = int(trials)
    p = float(coverage_probability)
    if not 0.0 < p < 1.0:
        raise ValueError(f"coverage_probability: must be between 0 and 1, got {p!r}.")
    j_min = math.ceil(1.0 / (1.0 - p))
    if trials < j_min:
        raise ValueError(
            f"trials: {trials} is too few for a {p:.4g} coverage interval; use at least "
            f"{j_min} (JCGM 101 7.2.2 recommends M >= 10^4)."
        )
    if batch_size is None:
        batch_size = max(math.ceil(100.0 / (1.0 - p)), trials // 10)
    batch_size = int(min(batch_size, trials))
    if adaptive and batch_size < j_min:
        raise ValueError(f"batch_size: {batch_size} is below 1/(1 - p) = {j_min}.")
    rng = np.random.default_rng(seed)
    names = [q.name for q in inputs]
    t0 = time.perf_counter()
    bar = _progress_bar(trials, progress, "Monte Carlo")
    ev = _Evaluator(fn, names, workers, vectorized, bar)
    chunks: list[np.ndarray] = []
    failures = 0
    converged: bool | None = None
    batch_stats: list[tuple[float, float, float, float]] = []
    try:
        done = 0
        while done < trials:
            m = batch_size if adaptive else trials
            m = min(m, trials - done)
            rows, extra = _draw(inputs, stat, rng, m)
            y = ev(rows) + extra
            good = np.isfinite(y)
            failures += int(m - good.sum())
            y = y[good]
            chunks.append(y)
            done += m
            if not adaptive:
                break
            if y.size >= j_min:
                lo, hi = symmetric_interval(y, p)
                batch_stats.append((float(y.mean()), float(y.std(ddof=1)), lo, hi))
            if len(batch_stats) >= 2:
                arr = np.array(batch_stats)
                h = arr.shape[0]
                s = arr.std(axis=0, ddof=1) / math.sqrt(h)
                all_y = np.concatenate(chunks)
                delta = numerical_tolerance(float(all_y.std(ddof=1)), n_dig)
                if np.all(2.0 * s <= delta):
                    converged = True
                    break
        if adaptive and converged is None:
            converged = False
    finally:
        ev.close()
        bar.close()
    values = np.concatenate(chunks) if chunks else np.empty(0)
    if values.size < j_min:
        raise RuntimeError(
            f"Monte Carlo: only {values.size} of {done} model evaluations succeeded "
            f"({failures} failed); too few for a coverage interval."
        )
    u = float(values.std(ddof=1))
    return MonteCarloResult(
        trials=int(values.size),
        failures=failures,
        mean=float(values.mean()),
        standard_uncertainty=u,
        coverage_probability=p,
        interval=symmetric_interval(values, p),
        interval_standard_error=interval_standard_error(values, p),
        adaptive=adaptive,
        converged=converged,
        tolerance=numerical_tolerance(u, n_dig),
        elapsed=time.perf_counter() - t0,
        workers=ev.workers,
        values=values if keep_values else None,
    )


@dataclass(frozen=True)
class GumCheck:
    """Comparison of the GUM interval with the Monte Carlo one (JCGM 101 8.2).

    ``d_low = |y − U_p − y_low|`` and ``d_high = |y + U_p − y_high|`` [unit], the tolerance
    δ from u_c to ``n_dig`` digits [unit].  ``status``:

    * ``"agree"`` — both d <= δ (the GUM result is validated, JCGM 101 8.2);
    * ``"differ"`` — some d exceeds δ by more than twice the Monte Carlo endpoint's own
      standard error (a real difference);
    * ``"inconclusive"`` — some d > δ, but within the Monte Carlo's own numerical noise:
      more trials are needed to decide (JCGM 101 requires the Monte Carlo results to be
      stable to δ, 7.9, before the comparison means anything).
    """

    gum_interval: tuple[float, float]
    mc_interval: tuple[float, float]
    d_low: float
    d_high: float
    tolerance: float
    agrees: bool
    coverage_probability: float
    status: str = "agree"
    n_dig: int = 2

    def to_dict(self) -> dict:
        return {
            "coverage_probability": self.coverage_probability,
            "gum_interval": list(self.gum_interval),
            "monte_carlo_interval": list(self.mc_interval),
            "d_low": self.d_low,
            "d_high": self.d_high,
            "numerical_tolerance": self.tolerance,
            "n_dig": self.n_dig,
            "agrees": self.agrees,
            "status": self.status,
        }


def compare_with_gum(budget: Budget, mc: MonteCarloResult, n_dig: int = 2) -> GumCheck:
    """Validate the GUM uncertainty framework against the Monte Carlo method (JCGM 101 8.2).

    The GUM interval is taken at the Monte Carlo run's coverage probability.
    """
    p = mc.coverage_probability
    g_lo, g_hi = budget.interval(p)
    m_lo, m_hi = mc.interval
    d_lo = abs(g_lo - m_lo)
    d_hi = abs(g_hi - m_hi)
    delta = numerical_tolerance(budget.combined_standard_uncertainty, n_dig)
    s_lo, s_hi = (0.0 if not math.isfinite(x) else x for x in mc.interval_standard_error)
    agrees = bool(d_lo <= delta and d_hi <= delta)
    if agrees:
        status = "agree"
    elif d_lo > delta + 2.0 * s_lo or d_hi > delta + 2.0 * s_hi:
        status = "differ"
    else:
        status = "inconclusive"
    return GumCheck(
        gum_interval=(g_lo, g_hi),
        mc_interval=(m_lo, m_hi),
        d_low=d_lo,
        d_high=d_hi,
        tolerance=delta,
        agrees=agrees,
        coverage_probability=p,
        status=status,
        n_dig=int(n_dig),
    )


def default_workers(limit: int = 2) -> int:
    """Processes to use for Monte Carlo: the usable CPUs, at most ``limit``."""
    try:
        n = len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not Linux
        n = os.cpu_count() or 1
    return max(1, min(int(limit), n))


# ---------------------------------------------------------------------------------------------
# The drag coefficient's measurement model: a re-fit with changed inputs
# ---------------------------------------------------------------------------------------------

#: Input names understood by :class:`DragRefitModel` and their units.
DRAG_INPUTS = {
    "mass": "kg",
    "diameter": "m",
    "area": "m²",
    "volume": "m³",
    "added_mass_coefficient": "",
    "temperature": "°C",
    "pressure": "Pa",
    "relative_humidity": "%",
    "air_density": "kg/m³",
    "frame_rate": "Hz",
    "length_scale": "",
    "roll": "°",
    "gravity": "m/s²",
}


class DragRefitModel:
    """Cd as a function of the inputs, by re-solving a finished fit (a picklable callable).

    ``model(values) -> Cd`` rebuilds the specimen, the air, the gravity and the tracks from
    ``values`` (missing names take their nominal values) and re-solves the fit from its
    optimum with :func:`fitdrag.fit.fitting.refit` (same rejected frames and noise model).

    * ``mass`` [kg], ``diameter`` [m] (sphere) or ``area`` [m²] and ``volume`` [m³] (body),
      ``added_mass_coefficient`` [-]: the specimen;
    * ``temperature`` [°C], ``pressure`` [Pa], ``relative_humidity`` [%]: the air through the
      CIPM-2007 density and Sutherland viscosity; or ``air_density`` [kg/m³] directly;
    * ``frame_rate`` [Hz]: the camera's true frame rate; sample times were computed with the
      nominal one, so they scale as t · f_nominal / f;
    * ``length_scale`` [-]: a factor (nominal 1) on every position and position uncertainty;
    * ``roll`` [°]: an error in the camera's (or calibration's) horizontal, nominal 0: every
      track is turned by this angle about its first sample;
    * ``gravity`` [m/s²].

    Parameters
    ----------
    result : FitResult
        The converged fit at the nominal inputs.
    tracks : sequence of Track
        The tracks that fit used.
    nominal : mapping
        Nominal value of every input name used (see :data:`DRAG_INPUTS`).
    length : float, optional
        Reynolds reference length of a body (kept fixed). [m]
    viscosity : float, optional
        Air viscosity to use with ``air_density`` (kept fixed). [Pa s]
    """

    def __init__(self, result, tracks, nominal, *, length=None, viscosity=None):
        unknown = sorted(set(nominal) - set(DRAG_INPUTS))
        if unknown:
            raise ValueError(
                f"nominal: unknown input name(s) {unknown}; use names from "
                f"{', '.join(DRAG_INPUTS)}."
            )
        if "diameter" in nominal and ("area" in nominal or "volume" in nominal):
            raise ValueError("nominal: give diameter (sphere) or area and volume (body), not both.")
        self.result = result
        self.tracks = list(tracks)
        self.nominal = dict(nominal)
        self.length = length
        self.viscosity = viscosity

    def specimen(self, v):
        from fitdrag.physics.specimen import Body, Sphere

        ca = v.get("added_mass_coefficient", self.result.specimen.added_mass_coefficient)
        if "diameter" in v:
            return Sphere(v["mass"], v["diameter"], added_mass_coefficient=ca)
        return Body(v["mass"], v["area"], v["volume"], length=self.length,
                    added_mass_coefficient=ca)  # fmt: skip

    def air(self, v):
        from fitdrag.physics.air import Air

        if "air_density" in v:
            kw = {} if self.viscosity is None else {"viscosity": self.viscosity}
            return Air(v["air_density"], **kw)
        if "temperature" in v:
            return Air.from_conditions(v["temperature"], v["pressure"], v["relative_humidity"])
        return None

    def transformed_tracks(self, v):
        from fitdrag.tracks.track import Track

        f0 = self.nominal.get("frame_rate")
        time_factor = 1.0 if f0 is None else f0 / v.get("frame_rate", f0)
        s = v.get("length_scale", 1.0)
        roll = math.radians(v.get("roll", 0.0))
        if time_factor == 1.0 and s == 1.0 and roll == 0.0:
            return None
        c, sn = math.cos(roll), math.sin(roll)
        out = []
        for tr in self.tracks:
            sig = None if tr.sigma is None else tr.sigma * s
            dx, dy = tr.x - tr.x[0], tr.y - tr.y[0]
            x = (tr.x[0] + c * dx - sn * dy) * s
            y = (tr.y[0] + sn * dx + c * dy) * s
            out.append(Track(tr.t * time_factor, x, y, sig, tr.frame, dict(tr.meta)))
        return out

    def __call__(self, values) -> float:
        from fitdrag.fit.fitting import refit

        v = dict(self.nominal)
        v.update(values)
        r = refit(
            self.result,
            tracks=self.transformed_tracks(v),
            specimen=self.specimen(v),
            air=self.air(v),
            gravity=v.get("gravity"),
        )
        if not r.success:
            raise RuntimeError("the re-fit did not converge")
        return float(r.cd)
