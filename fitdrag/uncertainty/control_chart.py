"""Control charts of a check standard: is the measuring set-up still where it was?

A check standard (a reference specimen measured again and again) gives a series of results
x_1, x_2, ...  Its chart has a centre line μ₀ and a process standard deviation σ, either
stated or estimated from its first results (:func:`limits_from_baseline`: the mean, and the
average moving range divided by d₂ = 1.128: the chart for individual values of
ISO 7870-2:2023).  :func:`control_chart` then applies

* the Shewhart tests for special causes (Nelson 1984, as ISO 7870-2 lists them in an annex
  — the annex from memory) — numbered as there:

  1. one point beyond 3σ from the centre line;
  2. nine points in a row on one side of the centre line;
  3. six points in a row steadily increasing or decreasing;
  5. two of three points in a row beyond 2σ on the same side;
  6. four of five points in a row beyond 1σ on the same side;

* the EWMA chart (ISO 7870-6:2016; Roberts 1959): z_i = λ x_i + (1 − λ) z_{i−1}, z_0 = μ₀,
  out of control when |z_i − μ₀| > L σ √(λ/(2 − λ) [1 − (1 − λ)^{2i}]), by default λ = 0.2 and
  L = 3 (a common choice, no source; ISO 7870-6 tabulates the run lengths of others).

A point is out of control when any test signals at it.

References
----------
1. ISO 7870-2:2023, *Control charts — Part 2: Shewhart control charts* (charts for
   individual values and moving ranges; control-chart constants, d₂ = 1.128 for subgroups
   of 2 = 2/√π; tests for special causes).
2. Nelson, L. S. (1984), The Shewhart control chart — tests for special causes, *Journal of
   Quality Technology* 16(4), 237–239.
3. ISO 7870-6:2016, *Control charts — Part 6: EWMA control charts*.
4. Roberts, S. W. (1959), Control chart tests based on geometric moving averages,
   *Technometrics* 1(3), 239–250.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from fitdrag.errors import InputError

__all__ = ["D2", "RULES", "ChartLimits", "ControlChart", "Signal", "control_chart",
           "limits_from_baseline"]  # fmt: skip

#: d₂ for moving ranges of two (ISO 7870-2:2023, control-chart constants; 2/√π to 4
#: digits). [-]
D2 = 1.128

#: The tests applied, by code, in words.
RULES = {
    "1": "beyond 3 sigma",
    "2": "9 in a row on one side",
    "3": "6 in a row steadily rising or falling",
    "5": "2 of 3 beyond 2 sigma on one side",
    "6": "4 of 5 beyond 1 sigma on one side",
    "ewma": "EWMA beyond its limit",
}


@dataclass(frozen=True)
class ChartLimits:
    """Centre line and process standard deviation of a chart.

    Attributes
    ----------
    centre : float
        μ₀. [unit]
    sigma : float
        σ. [unit]
    source : str
        Where they come from, in words.
    baseline : int
        Number of first results they were estimated from (0: stated).
    """

    centre: float
    sigma: float
    source: str
    baseline: int = 0

    def __post_init__(self) -> None:
        if not math.isfinite(self.centre):
            raise InputError(f"centre: must be finite, got {self.centre!r}.")
        if not (math.isfinite(self.sigma) and self.sigma > 0):
            raise InputError(
                f"sigma: must be > 0, got {self.sigma!r}; give the check standard's standard "
                f"deviation, or estimate it from more results."
            )


def limits_from_baseline(values: Sequence[float], n: int) -> ChartLimits:
    """Centre line and σ from the first ``n`` results: mean and average moving range / d₂
    (ISO 7870-2:2023, chart for individual values).

    Parameters
    ----------
    values : sequence of float
        The results, oldest first. [unit]
    n : int
        How many of the first results to use (>= 2, at most len(values)).
    """
    x = np.asarray(values, dtype=float)
    if isinstance(n, bool) or int(n) != n or n < 2:
        raise InputError(f"baseline: needs at least 2 results, got {n!r}; e.g. --baseline 10.")
    if x.size < n:
        raise InputError(
            f"baseline: {n} results asked for, but only {x.size} on record; give a smaller "
            f"--baseline or state --centre and --sigma."
        )
    b = x[: int(n)]
    mr = float(np.mean(np.abs(np.diff(b))))
    if mr == 0:
        raise InputError(
            f"baseline: the first {n} results are all equal ({float(b[0])!r}); no spread to set "
            f"limits from: state --centre and --sigma."
        )
    return ChartLimits(float(np.mean(b)), mr / D2,
                       f"mean and average moving range / d2 of the first {n} results", int(n))  # fmt: skip


@dataclass(frozen=True)
class Signal:
    """An out-of-control point: its index (0-based), value and the test that flagged it."""

    index: int
    value: float
    rule: str

    @property
    def text(self) -> str:
        return RULES[self.rule]


@dataclass(frozen=True)
class ControlChart:
    """A chart's points, limits, EWMA and signals.

    Attributes
    ----------
    values : tuple of float
        The results. [unit]
    limits : ChartLimits
        Centre line and σ.
    ewma : tuple of float
        z_i. [unit]
    ewma_halfwidth : tuple of float
        L σ √(λ/(2 − λ) [1 − (1 − λ)^{2i}]) at each point. [unit]
    lam, L : float
        The EWMA's weight and limit width. [-]
    signals : tuple of Signal
        Every test that signalled, by point.
    """

    values: tuple[float, ...]
    limits: ChartLimits
    ewma: tuple[float, ...]
    ewma_halfwidth: tuple[float, ...]
    lam: float
    L: float
    signals: tuple[Signal, ...]

    @property
    def out_of_control(self) -> tuple[int, ...]:
        """Indices of the points at which any test signalled, in order."""
        return tuple(sorted({s.index for s in self.signals}))

    @property
    def latest_out_of_control(self) -> bool:
        """Whether the last point is out of control."""
        return bool(self.values) and (len(self.values) - 1) in self.out_of_control

    def rules_at(self, index: int) -> tuple[str, ...]:
        return tuple(s.rule for s in self.signals if s.index == index)


def _runs(flags: np.ndarray, length: int, need: int) -> np.ndarray:
    """Indices i where at least ``need`` of the ``length`` points ending at i are flagged."""
    out = np.zeros(flags.size, dtype=bool)
    for i in range(length - 1, flags.size):
        out[i] = int(np.sum(flags[i - length + 1 : i + 1])) >= need
    return out


def control_chart(values: Sequence[float], limits: ChartLimits, *, lam: float = 0.2,
                  L: float = 3.0) -> ControlChart:  # fmt: skip
    """Apply the Shewhart tests 1, 2, 3, 5, 6 and the EWMA chart to the results.

    Parameters
    ----------
    values : sequence of float
        The results, oldest first. [unit]
    limits : ChartLimits
        Centre line and σ.
    lam : float
        EWMA weight λ, 0 < λ <= 1. [-]
    L : float
        EWMA limit width in σ of z. [-]
    """
    if not 0.0 < lam <= 1.0:
        raise InputError(f"lambda: the EWMA weight must be in (0, 1], got {lam!r}; e.g. 0.2.")
    if not (math.isfinite(L) and L > 0):
        raise InputError(f"L: the EWMA limit width must be > 0, got {L!r}; e.g. 3.")
    x = np.asarray(values, dtype=float)
    if x.ndim != 1 or not np.all(np.isfinite(x)):
        raise InputError("values: must be a list of finite numbers.")
    mu, s = limits.centre, limits.sigma
    d = (x - mu) / s
    sig: list[Signal] = []

    def add(mask: np.ndarray, rule: str) -> None:
        sig.extend(Signal(int(i), float(x[i]), rule) for i in np.flatnonzero(mask))

    add(np.abs(d) > 3.0, "1")
    add(_runs(d > 0, 9, 9) | _runs(d < 0, 9, 9), "2")
    up = np.diff(x) > 0
    down = np.diff(x) < 0
    rise = np.zeros(x.size, dtype=bool)
    rise[1:] = _runs(up, 5, 5) | _runs(down, 5, 5)  # six points: five steps
    add(rise, "3")
    add(_runs(d > 2, 3, 2) & (d > 2) | _runs(d < -2, 3, 2) & (d < -2), "5")
    add(_runs(d > 1, 5, 4) & (d > 1) | _runs(d < -1, 5, 4) & (d < -1), "6")
    z = np.empty_like(x)
    prev = mu
    for i, xi in enumerate(x):
        prev = lam * xi + (1.0 - lam) * prev
        z[i] = prev
    i1 = np.arange(1, x.size + 1)
    hw = L * s * np.sqrt(lam / (2.0 - lam) * (1.0 - (1.0 - lam) ** (2 * i1)))
    add(np.abs(z - mu) > hw, "ewma")
    sig.sort(key=lambda q: (q.index, q.rule))
    return ControlChart(tuple(map(float, x)), limits, tuple(map(float, z)),
                        tuple(map(float, hw)), float(lam), float(L), tuple(sig))  # fmt: skip
