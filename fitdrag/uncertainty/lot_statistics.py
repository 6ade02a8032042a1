"""Statistics of a lot: many specimens, each measured with its own uncertainty budget.

Generic (knows nothing of drag): each specimen brings a value y_i, the part of its standard
uncertainty that is its own (independent of the other specimens: its mass, its size, its
throws' noise and geometry), and the signed contributions c_ij u(x_j) of the inputs x_j that
every specimen shares (the air, gravity, the length scale, the frame rate).  The model is
the random-effects model of inter-laboratory and meta-analysis practice,

    y_i = μ + b_i + e_i + Σ_j c_ij δ_j,

with the lot's spread b_i ~ N(0, τ²) (what the manufacturer makes), the independent
measurement error e_i ~ N(0, v_i), and the shared errors δ_j ~ N(0, u(x_j)²), the same for
every specimen.  The shared errors do not change the differences between specimens, so τ is
estimated from the y_i and the v_i alone:

* :func:`paule_mandel_tau2` — Paule and Mandel (1982): τ² solves Q(τ²) = n − 1, where
  Q(τ²) = Σ w_i (y_i − μ̂)², w_i = 1/(v_i + τ²), μ̂ = Σ w_i y_i / Σ w_i [1];
* :func:`dersimonian_laird_tau2` — DerSimonian and Laird (1986), the moment estimator in
  closed form [2];
* :func:`q_profile_interval` — the Q-profile confidence interval of τ² (Viechtbauer 2007):
  the τ² at which Q(τ²) equals the χ²(n − 1) quantiles [3].

The lot mean μ̂ (weights w_i) has the standard uncertainty u(μ̂)² = 1/Σ w_i +
Σ_j (Σ_i w_i c_ij u(x_j) / Σ_i w_i)²: the first term shrinks with the number of specimens,
the second (the shared inputs, fully correlated between specimens: JCGM 100:2008 eq. (13)
with r = 1) does not.

The statistical tolerance interval of the lot (:func:`tolerance_interval`) is that of
ISO 16269-6:2014 for a normal population with unknown mean and variance [4]: x̄ ± k s over
the n measured values, k two-sided from the exact integral of Odeh (1978) [5] as
ISO 16269-6 tabulates it (:func:`two_sided_tolerance_factor`), one-sided from the noncentral
t-distribution (:func:`one_sided_tolerance_factor`).  The sample standard deviation s holds
the measurement's independent errors as well as the lot's spread, so the interval is wider
than the spread alone would give (cautious).

References
----------
1. Paule, R. C. and Mandel, J. (1982), Consensus values and weighting factors, *Journal of
   Research of the National Bureau of Standards* 87(5), 377–385, eq. (9)–(11).
2. DerSimonian, R. and Laird, N. (1986), Meta-analysis in clinical trials, *Controlled
   Clinical Trials* 7, 177–188, eq. (3)–(4).
3. Viechtbauer, W. (2007), Confidence intervals for the amount of heterogeneity in
   meta-analysis, *Statistics in Medicine* 26, 37–52, sec. 3.6 (the Q-profile method).
4. ISO 16269-6:2014, *Statistical interpretation of data — Part 6: Determination of
   statistical tolerance intervals*, clause 5 (normal population, unknown mean and
   variance), Tables C.1–C.4 (two-sided factors), D.1–D.4 (one-sided factors).
5. Odeh, R. E. (1978), Tables of two-sided tolerance factors for a normal distribution,
   *Communications in Statistics — Simulation and Computation* 7(2), 183–201; the integral
   as written by Krishnamoorthy, K. and Mathew, T. (2009), *Statistical Tolerance Regions*,
   Wiley, eq. (2.3.3).
6. JCGM 100:2008 (GUM), eq. (13) (correlated input quantities), 6.2.1 (U = k u_c).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np

from fitdrag.errors import InputError

__all__ = [
    "METHODS",
    "LotStatistics",
    "LotVerdict",
    "RandomEffects",
    "SpecimenValue",
    "ToleranceInterval",
    "decide_lot",
    "dersimonian_laird_tau2",
    "fraction_outside",
    "lot_statistics",
    "one_sided_tolerance_factor",
    "paule_mandel_tau2",
    "q_profile_interval",
    "random_effects",
    "tolerance_interval",
    "two_sided_tolerance_factor",
]

#: Estimators of the between-specimen variance, by name.
METHODS = ("paule-mandel", "dersimonian-laird")

_METHOD_TEXT = {
    "paule-mandel": "Paule–Mandel estimate (Paule and Mandel, J. Res. NBS 87, 1982)",
    "dersimonian-laird": "DerSimonian–Laird moment estimate (Controlled Clin. Trials 7, 1986)",
}


def _arrays(values, variances) -> tuple[np.ndarray, np.ndarray]:
    y = np.asarray(values, dtype=float)
    v = np.asarray(variances, dtype=float)
    if y.ndim != 1 or y.shape != v.shape:
        raise InputError(
            f"values, variances: expected two lists of equal length, got {y.shape} and {v.shape}."
        )
    if y.size < 2:
        raise InputError(
            f"values: a lot needs at least 2 specimens for its spread, got {y.size}; add specimens."
        )
    if not (np.all(np.isfinite(y)) and np.all(np.isfinite(v))):
        raise InputError("values, variances: must be finite numbers.")
    if np.any(v < 0):
        raise InputError(f"variances: must be >= 0, got {v.min():g}.")
    return y, v


def _q(y: np.ndarray, v: np.ndarray, tau2: float) -> tuple[float, float, np.ndarray]:
    """Generalised Q statistic, weighted mean and weights at ``tau2``."""
    s = v + tau2
    if np.any(s <= 0):
        return math.inf, float(np.mean(y)), np.ones_like(y)
    w = 1.0 / s
    mu = float(np.sum(w * y) / np.sum(w))
    return float(np.sum(w * (y - mu) ** 2)), mu, w


def _solve_q(y: np.ndarray, v: np.ndarray, target: float) -> float:
    """τ² >= 0 at which Q(τ²) = target (Q falls monotonically with τ²); 0 if Q(0) <= target."""
    from scipy.optimize import brentq

    if np.any(v <= 0):
        q0 = _q(y, v, 1e-300)[0] if np.all(v > 0) else math.inf
    else:
        q0 = _q(y, v, 0.0)[0]
    if q0 <= target:
        return 0.0
    hi = max(float(np.var(y, ddof=1)), float(np.max(v)), 1e-30)
    while _q(y, v, hi)[0] > target:
        hi *= 4.0
    lo = 0.0 if np.all(v > 0) else hi * 1e-12
    return float(brentq(lambda t: _q(y, v, t)[0] - target, lo, hi, xtol=1e-16 * hi + 1e-300,
                        rtol=1e-13))  # fmt: skip


def paule_mandel_tau2(values: Sequence[float], variances: Sequence[float]) -> float:
    """Between-specimen variance τ² by Paule and Mandel (1982), eq. (9)–(11).

    τ² solves Σ (y_i − μ̂)² / (v_i + τ²) = n − 1 with μ̂ the weighted mean at τ²; τ² = 0 when
    the values scatter less than their variances explain.

    Parameters
    ----------
    values : sequence of float
        The specimens' values y_i. [unit]
    variances : sequence of float
        Their independent measurement variances v_i. [unit²]

    Returns
    -------
    float
        τ². [unit²]
    """
    y, v = _arrays(values, variances)
    return _solve_q(y, v, y.size - 1.0)


def dersimonian_laird_tau2(values: Sequence[float], variances: Sequence[float]) -> float:
    """Between-specimen variance τ² by DerSimonian and Laird (1986), eq. (3)–(4).

    τ² = max(0, (Q − (n − 1)) / (Σ w − Σ w² / Σ w)), w_i = 1/v_i, Q at τ² = 0.

    Parameters
    ----------
    values : sequence of float
        The specimens' values y_i. [unit]
    variances : sequence of float
        Their independent measurement variances v_i (all > 0). [unit²]

    Returns
    -------
    float
        τ². [unit²]
    """
    y, v = _arrays(values, variances)
    if np.any(v <= 0):
        raise InputError(
            "variances: the DerSimonian–Laird estimate needs every variance > 0; use "
            "method 'paule-mandel'."
        )
    q, _, w = _q(y, v, 0.0)
    denom = float(np.sum(w) - np.sum(w**2) / np.sum(w))
    return max(0.0, (q - (y.size - 1.0)) / denom)


def q_profile_interval(values: Sequence[float], variances: Sequence[float],
                       confidence: float = 0.95) -> tuple[float, float]:  # fmt: skip
    """Confidence interval of τ² by the Q-profile method (Viechtbauer 2007, sec. 3.6).

    The bounds are the τ² at which Q(τ²) equals the upper and lower (1 ∓ confidence)/2
    quantiles of χ²(n − 1) (0 where Q(0) is already below them).

    Returns
    -------
    (float, float)
        Lower and upper bound of τ². [unit²]
    """
    from scipy import stats

    y, v = _arrays(values, variances)
    if not 0.0 < confidence < 1.0:
        raise InputError(f"confidence: must be between 0 and 1, got {confidence!r}.")
    nu = y.size - 1.0
    a = 0.5 * (1.0 - confidence)
    lo = _solve_q(y, v, float(stats.chi2.ppf(1.0 - a, nu)))
    hi = _solve_q(y, v, float(stats.chi2.ppf(a, nu)))
    return lo, hi


@dataclass(frozen=True)
class RandomEffects:
    """The random-effects estimate of a lot (without the shared inputs).

    Attributes
    ----------
    mean : float
        Weighted mean μ̂, weights 1/(v_i + τ²). [unit]
    u_mean : float
        Its standard uncertainty from the independent parts alone, (Σ w_i)^-1/2. [unit]
    tau : float
        Between-specimen standard deviation τ. [unit]
    u_tau : float
        Standard uncertainty of τ: half the width of its 68.27 % Q-profile interval. [unit]
    tau_interval : (float, float)
        95 % Q-profile confidence interval of τ. [unit]
    q : float
        Cochran's Q at τ² = 0. [-]
    weights : tuple of float
        Normalised weights of the specimens in the mean. [-]
    method : str
        The estimator of τ² (one of :data:`METHODS`).
    """

    mean: float
    u_mean: float
    tau: float
    u_tau: float
    tau_interval: tuple[float, float]
    q: float
    weights: tuple[float, ...]
    method: str

    @property
    def method_text(self) -> str:
        return _METHOD_TEXT[self.method]


def random_effects(values: Sequence[float], variances: Sequence[float],
                   method: str = "paule-mandel") -> RandomEffects:  # fmt: skip
    """Random-effects estimate of the lot: mean, between-specimen SD and its uncertainty.

    Parameters
    ----------
    values : sequence of float
        The specimens' values. [unit]
    variances : sequence of float
        Their independent measurement variances. [unit²]
    method : str
        ``"paule-mandel"`` (default) or ``"dersimonian-laird"``.
    """
    if method not in METHODS:
        raise InputError(
            f"method: unknown estimator {method!r}; use one of {', '.join(map(repr, METHODS))}."
        )
    y, v = _arrays(values, variances)
    tau2 = paule_mandel_tau2(y, v) if method == "paule-mandel" else dersimonian_laird_tau2(y, v)
    q0 = _q(y, v, 0.0)[0] if np.all(v > 0) else math.inf
    _, mu, w = _q(y, v, tau2 if tau2 > 0 or np.all(v > 0) else 1e-300)
    lo1, hi1 = q_profile_interval(y, v, math.erf(1.0 / math.sqrt(2.0)))
    lo95, hi95 = q_profile_interval(y, v, 0.95)
    return RandomEffects(
        mean=mu,
        u_mean=float(1.0 / math.sqrt(np.sum(w))),
        tau=math.sqrt(tau2),
        u_tau=0.5 * (math.sqrt(hi1) - math.sqrt(lo1)),
        tau_interval=(math.sqrt(lo95), math.sqrt(hi95)),
        q=q0,
        weights=tuple(float(x) for x in w / np.sum(w)),
        method=method,
    )


# ---------------------------------------------------------------------------------------------
# tolerance intervals (ISO 16269-6)
# ---------------------------------------------------------------------------------------------


def _check_pc(n: int, coverage: float, confidence: float) -> None:
    if isinstance(n, bool) or int(n) != n or n < 2:
        raise InputError(f"n: a tolerance interval needs at least 2 values, got {n!r}.")
    for name, x in (("coverage", coverage), ("confidence", confidence)):
        if not 0.0 < float(x) < 1.0:
            raise InputError(f"{name}: must be between 0 and 1, got {x!r}; e.g. 0.95.")


def two_sided_tolerance_factor(n: int, coverage: float = 0.95, confidence: float = 0.95) -> float:
    """Exact two-sided normal tolerance factor k (ISO 16269-6:2014, Tables C.1–C.4).

    k solves (Odeh 1978; Krishnamoorthy and Mathew 2009, eq. (2.3.3))

        γ = √(2n/π) ∫₀^∞ P(χ²_ν > ν r(z)² / k²) exp(−n z²/2) dz,  ν = n − 1,

    where r(z) is the root of Φ(z + r) − Φ(z − r) = p, i.e. r² is the p-quantile of the
    noncentral χ² with 1 degree of freedom and noncentrality z².

    Parameters
    ----------
    n : int
        Number of values (>= 2). [-]
    coverage : float
        Proportion p of the population the interval is to cover. [-]
    confidence : float
        Confidence level γ. [-]

    Returns
    -------
    float
        k: the interval is x̄ ± k s. [-]
    """
    from scipy import optimize, stats

    _check_pc(n, coverage, confidence)
    n = int(n)
    nu = n - 1.0
    p, g = float(coverage), float(confidence)
    # Gauss–Legendre nodes over [0, 10/√n] (the weight exp(−n z²/2) is below 1e-21 beyond):
    # r(z)² at each node once, then γ(k) is a weighted sum
    zmax = 10.0 / math.sqrt(n)
    x, wq = np.polynomial.legendre.leggauss(_NODES)
    z = 0.5 * zmax * (x + 1.0)
    wz = 0.5 * zmax * wq * np.exp(-0.5 * n * z * z) * math.sqrt(2.0 * n / math.pi)
    r2 = stats.ncx2.ppf(p, 1, z * z)

    def conf(k: float) -> float:
        return float(np.sum(wz * stats.chi2.sf(nu * r2 / (k * k), nu)))

    return float(optimize.brentq(lambda k: conf(k) - g, 1e-3, 1e5, xtol=1e-12, rtol=1e-12))


#: Quadrature nodes of :func:`two_sided_tolerance_factor`.
_NODES = 96


def one_sided_tolerance_factor(n: int, coverage: float = 0.95, confidence: float = 0.95) -> float:
    """Exact one-sided normal tolerance factor (ISO 16269-6:2014, Tables D.1–D.4).

    k = t'_γ(ν, z_p √n) / √n, the γ-quantile of the noncentral t-distribution with ν = n − 1
    degrees of freedom and noncentrality z_p √n (Krishnamoorthy and Mathew 2009, eq. (2.2.3)).

    Returns
    -------
    float
        k: the bound is x̄ − k s (lower) or x̄ + k s (upper). [-]
    """
    from scipy import stats

    _check_pc(n, coverage, confidence)
    n = int(n)
    delta = float(stats.norm.ppf(coverage)) * math.sqrt(n)
    return float(stats.nct.ppf(confidence, n - 1, delta) / math.sqrt(n))


@dataclass(frozen=True)
class ToleranceInterval:
    """A statistical tolerance interval (ISO 16269-6).

    Attributes
    ----------
    low, high : float
        The bounds (−inf or +inf for a one-sided interval). [unit]
    coverage : float
        Proportion of the population covered. [-]
    confidence : float
        Confidence level. [-]
    k : float
        The tolerance factor. [-]
    sides : int
        1 or 2.
    mean, standard_deviation : float
        Sample mean and standard deviation it is built on. [unit]
    n : int
        Number of values.
    """

    low: float
    high: float
    coverage: float
    confidence: float
    k: float
    sides: int
    mean: float
    standard_deviation: float
    n: int

    @property
    def method_text(self) -> str:
        kind = "two-sided" if self.sides == 2 else "one-sided"
        return (
            f"{kind} statistical tolerance interval for a normal population with unknown mean "
            f"and variance (ISO 16269-6:2014, clause 5): x̄ ± k s over the {self.n} specimens' "
            f"values, k = {self.k:.4f} for a proportion {100 * self.coverage:g} % at "
            f"{100 * self.confidence:g} % confidence"
            + (" (exact factor, Odeh 1978)" if self.sides == 2 else " (noncentral t)")
        )


def tolerance_interval(values: Sequence[float], coverage: float = 0.95,
                       confidence: float = 0.95, sides: str = "both") -> ToleranceInterval:  # fmt: skip
    """Statistical tolerance interval of normal values (ISO 16269-6:2014, clause 5).

    Parameters
    ----------
    values : sequence of float
        The sample. [unit]
    coverage, confidence : float
        Proportion covered and confidence level. [-]
    sides : str
        ``"both"``, ``"lower"`` (a lower bound only) or ``"upper"``.
    """
    x = np.asarray(values, dtype=float)
    if sides not in ("both", "lower", "upper"):
        raise InputError(f"sides: unknown value {sides!r}; use 'both', 'lower' or 'upper'.")
    _check_pc(x.size, coverage, confidence)
    m, s = float(np.mean(x)), float(np.std(x, ddof=1))
    if sides == "both":
        k = two_sided_tolerance_factor(x.size, coverage, confidence)
        return ToleranceInterval(m - k * s, m + k * s, coverage, confidence, k, 2, m, s, x.size)
    k = one_sided_tolerance_factor(x.size, coverage, confidence)
    lo, hi = (m - k * s, math.inf) if sides == "lower" else (-math.inf, m + k * s)
    return ToleranceInterval(lo, hi, coverage, confidence, k, 1, m, s, x.size)


def fraction_outside(mean: float, sd: float, lower: float | None, upper: float | None) -> float:
    """Fraction of a normal population N(mean, sd²) outside [lower, upper].

    Φ((T_L − μ)/σ) + Φ((μ − T_U)/σ) (a missing limit contributes nothing); with σ = 0, 1 if
    the mean lies outside the limits, else 0.  [-]
    """
    from scipy import stats

    out = 0.0
    if sd < 0 or not math.isfinite(sd):
        raise InputError(f"sd: must be finite and >= 0, got {sd!r}.")
    for lim, sign in ((lower, -1.0), (upper, 1.0)):
        if lim is None:
            continue
        if sd == 0:
            out += 1.0 if sign * (mean - lim) > 0 else 0.0
        else:
            out += float(stats.norm.cdf(sign * (mean - lim) / sd))
    return min(out, 1.0)


# ---------------------------------------------------------------------------------------------
# the lot
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class SpecimenValue:
    """One specimen's result, its uncertainty split into own and shared parts.

    Attributes
    ----------
    id : str
        The specimen.
    value : float
        Its measured value. [unit]
    independent_uncertainty : float
        Standard uncertainty from inputs of its own (independent of the other specimens).
        [unit]
    shared : mapping of str to float
        Signed contribution c_j u(x_j) of each input shared by the lot. [unit]
    expanded_uncertainty : float
        Its expanded uncertainty U from its full budget. [unit]
    coverage_factor : float
        k of U. [-]
    """

    id: str
    value: float
    independent_uncertainty: float
    shared: Mapping[str, float] = field(default_factory=dict)
    expanded_uncertainty: float = math.nan
    coverage_factor: float = 2.0

    @property
    def standard_uncertainty(self) -> float:
        """Combined standard uncertainty (own and shared parts). [unit]"""
        return math.sqrt(self.independent_uncertainty**2 + sum(c * c for c in self.shared.values()))


@dataclass(frozen=True)
class LotStatistics:
    """What the lot's measurements say about the lot.

    Attributes
    ----------
    n : int
        Number of specimens.
    random_effects : RandomEffects
        Mean and between-specimen spread.
    mean : float
        Lot mean (random-effects weighted). [unit]
    u_mean_independent, u_mean_shared, u_mean : float
        Standard uncertainty of the mean: the part that shrinks with the number of specimens,
        the shared inputs' part (fully correlated), combined. [unit]
    shared_contributions : mapping of str to float
        Each shared input's contribution to u(mean). [unit]
    coverage_factor : float
        k for the expanded uncertainty of the mean (normal, p = 95.45 %). [-]
    tolerance : ToleranceInterval
        The lot's statistical tolerance interval.
    fraction_outside : float or None
        Estimated fraction of the lot outside the specification (normal random-effects
        model, plug-in estimate), None without a specification. [-]
    """

    n: int
    random_effects: RandomEffects
    mean: float
    u_mean_independent: float
    u_mean_shared: float
    u_mean: float
    shared_contributions: Mapping[str, float]
    coverage_factor: float
    tolerance: ToleranceInterval
    fraction_outside: float | None

    @property
    def standard_deviation(self) -> float:
        """Between-specimen standard deviation τ. [unit]"""
        return self.random_effects.tau

    @property
    def expanded_uncertainty(self) -> float:
        """U of the lot mean. [unit]"""
        return self.coverage_factor * self.u_mean

    @property
    def shared_expanded_uncertainty(self) -> float:
        """k times the shared inputs' part of u(mean): the guard band of a lot decision. [unit]"""
        return self.coverage_factor * self.u_mean_shared


def lot_statistics(specimens: Sequence[SpecimenValue], *, lower: float | None = None,
                   upper: float | None = None, coverage: float = 0.95,
                   confidence: float = 0.95, method: str = "paule-mandel") -> LotStatistics:  # fmt: skip
    """Lot mean with its uncertainty, between-specimen spread, tolerance interval, fraction
    outside [lower, upper].

    The tolerance interval is two-sided with a two-sided specification (or none), one-sided
    towards the single limit otherwise.
    """
    if len(specimens) < 2:
        raise InputError(
            f"specimens: a lot needs at least 2 specimens, got {len(specimens)}; add specimens."
        )
    ids = [s.id for s in specimens]
    if len(set(ids)) != len(ids):
        dup = sorted({i for i in ids if ids.count(i) > 1})
        raise InputError(f"specimens: id {dup[0]!r} appears more than once; give unique ids.")
    y = [s.value for s in specimens]
    v = [s.independent_uncertainty**2 for s in specimens]
    re = random_effects(y, v, method)
    w = np.asarray(re.weights)
    names = sorted({k for s in specimens for k in s.shared})
    shared = {k: float(sum(wi * s.shared.get(k, 0.0) for wi, s in zip(w, specimens)))
              for k in names}  # fmt: skip
    # u of the weighted mean from the independent parts at the weights used
    u_ind = float(math.sqrt(sum(wi**2 * (vi + re.tau**2) for wi, vi in zip(w, v))))
    u_sh = math.sqrt(sum(c * c for c in shared.values()))
    k = 2.0
    sides = "both"
    if lower is not None and upper is None:
        sides = "lower"
    elif upper is not None and lower is None:
        sides = "upper"
    ti = tolerance_interval(y, coverage, confidence, sides)
    frac = None
    if lower is not None or upper is not None:
        frac = fraction_outside(re.mean, re.tau, lower, upper)
    return LotStatistics(
        n=len(specimens),
        random_effects=re,
        mean=re.mean,
        u_mean_independent=u_ind,
        u_mean_shared=u_sh,
        u_mean=math.sqrt(u_ind**2 + u_sh**2),
        shared_contributions=shared,
        coverage_factor=k,
        tolerance=ti,
        fraction_outside=frac,
    )


# ---------------------------------------------------------------------------------------------
# the lot decision
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class LotVerdict:
    """The lot's conformity decision.

    Attributes
    ----------
    decision : str
        One of :data:`fitdrag.uncertainty.decision.DECISIONS`.
    rule : str
        ``"simple"`` or ``"guarded"``.
    guard_band : float
        w: the expanded uncertainty of the shared inputs (0 under simple acceptance). [unit]
    acceptance_limits : (float or None, float or None)
        The limits the tolerance interval is held against. [unit]
    """

    decision: str
    rule: str
    guard_band: float
    acceptance_limits: tuple[float | None, float | None]

    @property
    def rule_text(self) -> str:
        if self.rule == "simple":
            return (
                "simple acceptance applied to the lot (ILAC-G8:09/2019, 4.2.1, with the lot's "
                "tolerance interval in place of a single measured value): pass if the "
                "tolerance interval lies within the specification limits, fail otherwise"
            )
        return (
            "guarded acceptance applied to the lot (ILAC-G8:09/2019, 4.2.2 and 4.2.3, with the "
            "lot's tolerance interval in place of a single measured value; guard band w = the "
            "expanded uncertainty of the inputs shared by all specimens, which the spread "
            "between specimens does not show): pass if the tolerance interval lies inside the "
            "limits by at least w, conditional pass if inside but closer than w, conditional "
            "fail if it reaches beyond a limit by at most w, fail otherwise"
        )


def decide_lot(interval: ToleranceInterval, lower: float | None, upper: float | None,
               rule: str = "simple", guard_band: float = 0.0) -> LotVerdict:  # fmt: skip
    """The lot decision: the tolerance interval against the specification limits.

    The interval's bounds take the place of the measured value in the rules of ILAC-G8:09/2019
    (4.2.1 simple acceptance; 4.2.2–4.2.3 guarded acceptance, four outcomes); a bound on a
    limit counts as inside (common practice, no source).  This use of a tolerance interval
    for a lot is fitdrag's construction from those two documents (ISO 16269-6 and ILAC-G8),
    not a rule either states.

    Parameters
    ----------
    interval : ToleranceInterval
        The lot's tolerance interval.
    lower, upper : float or None
        Specification limits. [unit]
    rule : str
        ``"simple"`` or ``"guarded"``.
    guard_band : float
        w, used by the guarded rule (>= 0). [unit]
    """
    from fitdrag.uncertainty.decision import (
        CONDITIONAL_FAIL,
        CONDITIONAL_PASS,
        FAIL,
        PASS,
        RULES,
    )

    if rule not in RULES:
        raise InputError(f"rule: unknown decision rule {rule!r}; use one of {', '.join(RULES)}.")
    if lower is None and upper is None:
        raise InputError("lower, upper: a lot decision needs at least one specification limit.")
    w = 0.0 if rule == "simple" else float(guard_band)
    if not (math.isfinite(w) and w >= 0):
        raise InputError(f"guard_band: must be finite and >= 0, got {guard_band!r}.")

    def inside(shift: float) -> bool:
        ok = True
        if lower is not None:
            ok &= interval.low >= lower + shift
        if upper is not None:
            ok &= interval.high <= upper - shift
        return bool(ok)

    if rule == "simple":
        decision = PASS if inside(0.0) else FAIL
    elif inside(w):
        decision = PASS
    elif inside(0.0):
        decision = CONDITIONAL_PASS
    elif inside(-w):
        decision = CONDITIONAL_FAIL
    else:
        decision = FAIL
    acc = (None if lower is None else lower + w, None if upper is None else upper - w)
    return LotVerdict(decision, rule, w, acc)
