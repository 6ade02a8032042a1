"""The check standard's control chart, from the records database.

A laboratory measures a check standard (a reference specimen) with ``fitdrag run`` every day;
each certificate is a record with the specimen's id and Cd.  :func:`chart_from_records`
charts one specimen's results over time (oldest first; replaced certificates left out, their
replacements kept) with :func:`fitdrag.uncertainty.control_chart.control_chart`, the centre
line and σ from its first results or as stated.  :func:`check_standard_warning` is what
``fitdrag run`` says when the job names a check standard (``[test] check_standard``) whose
latest result is out of control.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

from fitdrag.errors import InputError

__all__ = ["DEFAULT_BASELINE", "StandardChart", "chart_from_records", "check_standard_warning",
           "write_chart"]  # fmt: skip

#: Results the centre line and σ are estimated from unless stated.
DEFAULT_BASELINE = 10


@dataclass(frozen=True)
class StandardChart:
    """A check standard's chart and the records behind its points.

    Attributes
    ----------
    specimen_id : str
        The check standard.
    chart : ControlChart
        The chart.
    numbers, dates : tuple of str
        Certificate number and date of issue of each point.
    """

    specimen_id: str
    chart: object
    numbers: tuple[str, ...]
    dates: tuple[str, ...]

    def report_lines(self) -> list[str]:
        """One line per out-of-control point."""
        ch = self.chart
        out = []
        for i in ch.out_of_control:
            out.append(f"  point {i + 1} {self.numbers[i]} {self.dates[i][:10]} Cd = "
                       f"{ch.values[i]:.4g}: tests {', '.join(ch.rules_at(i))}")  # fmt: skip
        return out

    def legend(self) -> list[str]:
        """One line per test that signalled: its code and what it means."""
        used = sorted({s.rule for s in self.chart.signals}, key=lambda r: (r == "ewma", r))
        return [f"  test {r}: {_rule_text(r)}" for r in used]


def _rule_text(rule: str) -> str:
    from fitdrag.uncertainty.control_chart import RULES

    return RULES[rule]


def chart_from_records(records_path: str | os.PathLike, specimen_id: str, *,
                       baseline: int | None = None, centre: float | None = None,
                       sigma: float | None = None, lam: float = 0.2,
                       L: float = 3.0) -> StandardChart:  # fmt: skip
    """The control chart of ``specimen_id``'s results in the records database.

    The centre line and σ are ``centre`` and ``sigma`` when both are given, else estimated
    from the first ``baseline`` results (default :data:`DEFAULT_BASELINE`, or all results
    when fewer).
    """
    from fitdrag.run.records import Records
    from fitdrag.uncertainty.control_chart import ChartLimits, control_chart, limits_from_baseline

    recs = [r for r in Records(Path(records_path), create=False).list()
            if r.kind == "certificate" and r.specimen_id == specimen_id and r.replaced_by is None
            and r.drag_coefficient is not None]  # fmt: skip
    if not recs:
        raise InputError(
            f"specimen {specimen_id!r}: no results on record in {str(records_path)!r}; see "
            f"'fitdrag records list' for the specimen ids."
        )
    recs.sort(key=lambda r: (r.issued_at, r.number))
    values = [float(r.drag_coefficient) for r in recs]
    if (centre is None) != (sigma is None):
        raise InputError("--centre, --sigma: give both (stated limits) or neither (estimated).")
    if centre is not None:
        limits = ChartLimits(float(centre), float(sigma), "stated")
    else:
        n = baseline if baseline is not None else min(DEFAULT_BASELINE, len(values))
        limits = limits_from_baseline(values, n)
    chart = control_chart(values, limits, lam=lam, L=L)
    return StandardChart(specimen_id, chart, tuple(r.number for r in recs),
                         tuple(r.issued_at for r in recs))  # fmt: skip


def write_chart(sc: StandardChart, path: str | os.PathLike, *, force: bool = False) -> Path:
    """Draw the chart to a PNG file (atomically; no overwrite unless ``force``)."""
    import matplotlib

    matplotlib.use("Agg", force=False)
    from fitdrag._files import temporary_path
    from fitdrag.report.control_chart_plot import plot_control_chart

    path = Path(path)
    if path.exists() and not force:
        raise InputError(f"{path}: already exists; choose another name or pass --force.")
    lim = sc.chart.limits
    fig = plot_control_chart(
        sc.chart, [d[:10] for d in sc.dates],
        title=f"Check standard {sc.specimen_id}: centre {lim.centre:.4g}, σ {lim.sigma:.2g} "
        f"({lim.source})",
    )  # fmt: skip
    tmp = temporary_path(path)
    try:
        fig.savefig(tmp, format="png", dpi=120, facecolor="white")
        os.replace(tmp, path)
    finally:
        Path(tmp).unlink(missing_ok=True)
    return path


def check_standard_warning(job, records_path: str | os.PathLike) -> str | None:
    """A warning when the job's check standard (``[test] check_standard``) is out of control
    at its latest result in the records database, or a note when no chart can be drawn (no
    results, or too few to set limits); None when it is in control or the job names none."""
    sid = job.test.check_standard
    if not sid:
        return None
    try:
        sc = chart_from_records(records_path, sid)
    except (InputError, FileNotFoundError) as exc:
        return f"check standard {sid!r}: no control chart ({exc})"
    if not sc.chart.latest_out_of_control:
        return None
    i = len(sc.chart.values) - 1
    rules = "; ".join(f"test {r}: {_rule_text(r)}" for r in sc.chart.rules_at(i))
    return (
        f"check standard {sid!r} is out of control at its latest result {sc.numbers[i]} "
        f"(Cd = {sc.chart.values[i]:.4g}; {rules}); investigate the set-up before relying on "
        f"this result ('fitdrag records chart {sid}')."
    )
