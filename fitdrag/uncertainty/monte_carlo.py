"""The Monte Carlo method of JCGM 101:2008: propagation of the input distributions through a
measurement model, the probabilistically symmetric coverage interval, the adaptive
procedure, and the validation of a GUM budget against it.

Generic: the model is any callable ``fn({name: value}) -> y`` (see
:mod:`fitdrag.uncertainty.gum` for the input quantities and the budget); with several
worker processes it is evaluated in a process pool.

References
----------
1. JCGM 101:2008, *Propagation of distributions using a Monte Carlo method*: 6.4 sampling
   from probability distributions (6.4.2 rectangular, 6.4.4 triangular, 6.4.6 arc sine,
   6.4.7 Gaussian, 6.4.9 scaled and shifted t); 7.7 probabilistically symmetric coverage
   interval; 7.9 adaptive Monte Carlo procedure; 8.2 validation of the GUM uncertainty
   framework.
"""

from __future__ import annotations

import math
import os
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from fitdrag.errors import ConvergenceError, InputError
from fitdrag.uncertainty.gum import (
    Budget,
    InputQuantity,
    check_inputs,
    progress_bar,
    statistical_input,
)


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
        raise InputError(f"coverage_probability: must be between 0 and 1, got {p!r}.")
    q = int(math.floor(p * m + 0.5))
    if m < 2 or q >= m:
        raise InputError(
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


#: Student t quantile for the endpoints' batch-means standard errors (h = 10 batches, the
#: default of interval_standard_error, so 9 degrees of freedom) at 1 − 0.05/4: two-sided
#: 97.5 % for each endpoint, so that both together hold at 95 % (Bonferroni). [-]
_ENDPOINT_T = 2.6850


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
        return self.collect(self.submit(rows))

    def submit(self, rows: np.ndarray):
        """Start evaluating ``rows`` (in the pool: as a few big chunks per worker); a handle
        for :meth:`collect`.  In-process evaluation happens at :meth:`collect`."""
        if self.vectorized or self.pool is None:
            return ("here", rows)
        # big chunks (about eight per worker and batch) keep the per-chunk cost of the pool
        # small; the next batch is submitted before this one is collected, so no worker
        # idles at a batch's end
        chunk = max(10, -(-rows.shape[0] // (8 * self.workers)))
        futures = {self.pool.submit(_eval_block, rows[s : s + chunk]): s
                   for s in range(0, rows.shape[0], chunk)}  # fmt: skip
        return ("pool", rows.shape[0], futures)

    def collect(self, handle) -> np.ndarray:
        """The model values of a :meth:`submit` handle, in the order of its rows."""
        if handle[0] == "here":
            return self._here(handle[1])
        _kind, n, futures = handle
        out = np.empty(n)
        from concurrent.futures import as_completed

        for fut in as_completed(futures):
            s = futures[fut]
            res = fut.result()
            out[s : s + res.size] = res
            self.bar.update(res.size)
        return out

    def cancel(self, handle) -> None:
        """Drop a submitted batch that is no longer needed."""
        if handle is not None and handle[0] == "pool":
            for fut in handle[2]:
                fut.cancel()

    def _here(self, rows: np.ndarray) -> np.ndarray:
        if self.vectorized:
            cols = {n: rows[:, j] for j, n in enumerate(self.names)}
            y = np.asarray(self.fn(cols), dtype=float)
            if y.shape != (rows.shape[0],):
                raise InputError(
                    f"fn: a vectorized model must return one value per trial, got shape "
                    f"{y.shape} for {rows.shape[0]} trials."
                )
            self.bar.update(rows.shape[0])
            return y
        out = np.empty(rows.shape[0])
        chunk = 50
        for s in range(0, rows.shape[0], chunk):
            out[s : s + chunk] = _eval_rows(self.fn, self.names, rows[s : s + chunk])
            self.bar.update(min(chunk, rows.shape[0] - s))
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
    until: Callable[[MonteCarloResult], bool] | None = None,
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
    until : callable, optional
        Adaptive only: a further condition for stopping, ``until(result so far) -> bool``,
        asked once the results are stable (JCGM 101 7.9.4); e.g. that the check against the
        GUM interval is conclusive (:func:`compare_with_gum`).  The run goes on, batch by
        batch up to ``trials``, while it returns False.

    Returns
    -------
    MonteCarloResult
    """
    inputs = check_inputs(inputs)
    stat = statistical_input(statistical, unit)
    trials = int(trials)
    p = float(coverage_probability)
    if not 0.0 < p < 1.0:
        raise InputError(f"coverage_probability: must be between 0 and 1, got {p!r}.")
    j_min = math.ceil(1.0 / (1.0 - p))
    if trials < j_min:
        raise InputError(
            f"trials: {trials} is too few for a {p:.4g} coverage interval; use at least "
            f"{j_min} (JCGM 101 7.2.2 recommends M >= 10^4)."
        )
    if batch_size is None:
        batch_size = max(math.ceil(100.0 / (1.0 - p)), trials // 10)
    batch_size = int(min(batch_size, trials))
    if adaptive and batch_size < j_min:
        raise InputError(f"batch_size: {batch_size} is below 1/(1 - p) = {j_min}.")
    rng = np.random.default_rng(seed)
    names = [q.name for q in inputs]
    t0 = time.perf_counter()
    bar = progress_bar(trials, progress, "Monte Carlo")
    ev = _Evaluator(fn, names, workers, vectorized, bar)
    chunks: list[np.ndarray] = []
    failures = 0
    converged: bool | None = None
    batch_stats: list[tuple[float, float, float, float]] = []

    def result(values, done_converged) -> MonteCarloResult:
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
            converged=done_converged,
            tolerance=numerical_tolerance(u, n_dig),
            elapsed=time.perf_counter() - t0,
            workers=ev.workers,
            values=values if keep_values else None,
        )

    def draw(done):
        m = min(batch_size if adaptive else trials, trials - done)
        if m <= 0:
            return None
        rows, extra = _draw(inputs, stat, rng, m)
        return m, extra, ev.submit(rows)

    done = 0
    pending = None
    try:
        current = draw(0)
        while current is not None:
            m, extra, handle = current
            # the next batch is drawn (in the same order as without look-ahead, so the
            # values do not depend on it) and started before this one is collected
            pending = draw(done + m) if adaptive else None
            y = ev.collect(handle) + extra
            good = np.isfinite(y)
            failures += int(m - good.sum())
            y = y[good]
            chunks.append(y)
            done += m
            current, pending = pending, None
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
                if np.all(2.0 * s <= delta) and (until is None or until(result(all_y, True))):
                    converged = True
                    ev.cancel(current)
                    current = None
                    break
        if adaptive and converged is None:
            converged = False
    finally:
        ev.cancel(pending)
        ev.close()
        bar.close()
    values = np.concatenate(chunks) if chunks else np.empty(0)
    if values.size < j_min:
        raise ConvergenceError(
            f"Monte Carlo: only {values.size} of {done} model evaluations succeeded "
            f"({failures} failed); too few for a coverage interval."
        )
    return result(values, converged)


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

    The GUM interval is taken at the Monte Carlo run's coverage probability.  "agree" when
    both endpoint differences are within the numerical tolerance δ (JCGM 101 8.2); "differ"
    only when an endpoint difference exceeds δ by more than the Monte Carlo's own endpoint
    noise explains — its batch-means standard error times the Student t quantile with h − 1
    degrees of freedom (h batches, JCGM 101 7.9.4) at a joint 95 % for the two endpoints
    (Bonferroni: 98.75 % each); otherwise "inconclusive" (more trials are needed to tell).
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
    elif d_lo > delta + _ENDPOINT_T * s_lo or d_hi > delta + _ENDPOINT_T * s_hi:
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
