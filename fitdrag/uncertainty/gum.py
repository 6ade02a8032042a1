"""The GUM uncertainty framework (JCGM 100:2008): input quantities, the law of propagation
of uncertainty, Welch–Satterthwaite effective degrees of freedom, the coverage factor and the
uncertainty budget.

Generic machinery that knows nothing of files or of drag: a *measurement model* is any
callable ``fn(values) -> y`` taking a ``{name: value}`` mapping of the input quantities and
returning the output estimate.  :func:`budget_from_model` linearises it (law of propagation
of uncertainty for uncorrelated inputs); its Monte Carlo cross-check (JCGM 101) is
:mod:`fitdrag.uncertainty.monte_carlo`.  :func:`coverage_factor` is the one coverage-factor
rule of fitdrag (the fit's statistical k uses it too).

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
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from fitdrag.errors import ConvergenceError, InputError

#: Coverage probability of k = 2 for a normal distribution: erf(2/√2) = 0.9545 (GUM Table G.1).
P_K2 = math.erf(2.0 / math.sqrt(2.0))

#: Distributions an input may be sampled from in the Monte Carlo method (JCGM 101 6.4).
DISTRIBUTIONS = ("normal", "rectangular", "triangular", "arcsine", "t")

_KINDS = ("A", "B")


def _finite(name: str, what: str, value: Any) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name}: {what} must be a number, got {value!r}.") from None
    if not math.isfinite(v):
        raise InputError(f"{name}: {what} must be finite, got {value!r}.")
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
            raise InputError(f"name: expected a non-empty string, got {self.name!r}.")
        n = self.name
        object.__setattr__(self, "value", _finite(n, "value", self.value))
        u = _finite(n, "standard_uncertainty", self.standard_uncertainty)
        if u < 0:
            raise InputError(
                f"{n}: standard_uncertainty must be >= 0, got {u!r}; give the standard "
                f"uncertainty as a positive number (or 0 if the value is exact)."
            )
        object.__setattr__(self, "standard_uncertainty", u)
        try:
            dof = float(self.dof)
        except (TypeError, ValueError):
            raise InputError(f"{n}: dof must be a number or inf, got {self.dof!r}.") from None
        if math.isnan(dof) or dof <= 0:
            raise InputError(f"{n}: dof (degrees of freedom) must be > 0 or inf, got {self.dof!r}.")
        object.__setattr__(self, "dof", dof)
        if self.kind not in _KINDS:
            raise InputError(
                f"{n}: kind must be 'A' (statistical) or 'B' (other), got {self.kind!r}."
            )
        dist = self.distribution
        if dist is None:
            dist = "t" if (self.kind == "A" and math.isfinite(dof)) else "normal"
        if dist not in DISTRIBUTIONS:
            raise InputError(
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
                raise InputError(f"{n}: step must be > 0, got {self.step!r}.")
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


def statistical_input(statistical: Any, unit: str) -> InputQuantity | None:
    """The additive statistical component as an InputQuantity with sensitivity 1 (or None)."""
    if statistical is None:
        return None
    if isinstance(statistical, InputQuantity):
        q = statistical
    else:
        try:
            u, dof = statistical
        except (TypeError, ValueError):
            raise InputError(
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


def check_inputs(inputs: Sequence[InputQuantity]) -> list[InputQuantity]:
    """The inputs as a list, each an InputQuantity and each name given once."""
    inputs = list(inputs)
    names = [q.name for q in inputs]
    for q in inputs:
        if not isinstance(q, InputQuantity):
            raise InputError(f"inputs: expected InputQuantity objects, got {q!r}.")
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise InputError(f"inputs: duplicate input name(s) {dup}; give each input once.")
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
        raise InputError(
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
    # scipy.special's quantile functions (what scipy.stats' norm.ppf and t.ppf evaluate,
    # without their per-call overhead)
    from scipy import special

    p = float(coverage_probability)
    if not 0.0 < p < 1.0:
        raise InputError(
            f"coverage_probability: must be between 0 and 1, got {coverage_probability!r}; "
            f"use e.g. 0.9545 for k = 2."
        )
    nu = float(dof)
    if math.isnan(nu) or nu <= 0:
        raise InputError(f"dof: must be > 0 or inf, got {dof!r}.")
    q = 0.5 * (1.0 + p)
    if math.isinf(nu):
        return float(special.ndtri(q))
    if truncate:
        nu = max(1.0, math.floor(nu))
    return float(special.stdtrit(nu, q))


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
        raise ConvergenceError(f"model evaluation failed at {what}: {exc}") from exc
    if not math.isfinite(y):
        raise ConvergenceError(f"model evaluation at {what} returned a non-finite value {y!r}.")
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
    inputs = check_inputs(inputs)
    stat = statistical_input(statistical, unit)
    if stat is not None and stat.name in {q.name for q in inputs}:
        raise InputError(f"statistical: its name {stat.name!r} is also an input's name.")
    if not (step_fraction > 0 and math.isfinite(step_fraction)):
        raise InputError(f"step_fraction: must be a finite number > 0, got {step_fraction!r}.")
    base = {q.name: q.value for q in inputs}
    y0 = _evaluate(fn, dict(base), "the input estimates")
    todo = [q for q in inputs if q.sensitivity is None]
    bar = progress_bar(2 * len(todo), progress, "sensitivities")
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


def progress_bar(total: int, enabled: bool, desc: str):
    """A tqdm bar on stderr when ``enabled``, else an object that does nothing."""
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
