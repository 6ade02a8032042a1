"""The lot targets, measured and printed (synthetic data; nothing asserted in unit tests).

1. A 16-specimen synthetic lot (two throws each; true Cd per specimen drawn with a spread):
   every specimen within its U; the between-specimen SD within its own standard uncertainty
   of the true spread of these 16 specimens; the same results on a 2-worker
   dask.distributed cluster (LocalCluster at 127.0.0.1) as in this process.
2. A check standard shifted by 4 sigma after 20 in-control results: flagged at the first
   point beyond the control limits.

Run:  python benchmarks/lot_targets.py [--specimens 16] [--spread 0.012] [--seed N]
Exit status 0 when every target is met, 1 otherwise.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

import numpy as np


def lot_target(specimens: int, spread: float, seed: int) -> bool:
    from distributed import LocalCluster

    from fitdrag.run.lot import measure_lot
    from fitdrag.run.lot_file import load_lot
    from fitdrag.run.lot_scene import LotScene, write_lot

    ok = True
    with tempfile.TemporaryDirectory() as d:
        made = write_lot(Path(d), LotScene(specimens=specimens, throws=2, cd_spread=spread,
                                           seed=seed))  # fmt: skip
        lot = load_lot(made.lot_file)
        t0 = time.perf_counter()
        here = measure_lot(lot, workers=0)
        t_here = time.perf_counter() - t0
        with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                          dashboard_address=None) as cluster:  # fmt: skip
            t0 = time.perf_counter()
            there = measure_lot(lot, scheduler=cluster.scheduler_address)
            t_there = time.perf_counter() - t0
    print(f"lot of {specimens} specimens x 2 throws, true spread (population) {spread}")
    print(f"{'specimen':<8} {'true Cd':>9} {'Cd':>9} {'U':>8} {'|err|/U':>8}")
    worst = 0.0
    for r in here.specimens:
        ratio = abs(r.drag_coefficient - made.true_cd[r.id]) / r.expanded_uncertainty
        worst = max(worst, ratio)
        print(f"{r.id:<8} {made.true_cd[r.id]:9.5f} {r.drag_coefficient:9.5f} "
              f"{r.expanded_uncertainty:8.5f} {ratio:8.2f}")  # fmt: skip
    within = worst <= 1.0
    ok &= within
    print(f"every specimen within its U: {within} (largest |error|/U = {worst:.2f})")
    st = here.statistics
    true_sd = float(np.std(list(made.true_cd.values()), ddof=1))
    re = st.random_effects
    dev = abs(re.tau - true_sd)
    sd_ok = dev <= re.u_tau
    ok &= sd_ok
    print(f"between-specimen SD {re.tau:.5f} (u {re.u_tau:.5f}, 95 % interval "
          f"{re.tau_interval[0]:.5f} to {re.tau_interval[1]:.5f}); true SD of these specimens "
          f"{true_sd:.5f}; |difference| {dev:.5f} <= u: {sd_ok}")  # fmt: skip
    print(f"lot mean {st.mean:.5f} ± {st.expanded_uncertainty:.5f} (k = 2; shared part "
          f"u {st.u_mean_shared:.5f}, own u {st.u_mean_independent:.5f}); mean of the true Cd "
          f"{np.mean(list(made.true_cd.values())):.5f}")  # fmt: skip
    ti = st.tolerance
    print(f"tolerance interval [{ti.low:.4f}, {ti.high:.4f}] (k = {ti.k:.4f}); decision "
          f"{here.decision}")  # fmt: skip
    same = ([r.drag_coefficient for r in here.specimens]
            == [r.drag_coefficient for r in there.specimens]
            and [r.expanded_uncertainty for r in here.specimens]
            == [r.expanded_uncertainty for r in there.specimens]
            and here.statistics.mean == there.statistics.mean
            and here.statistics.standard_deviation == there.statistics.standard_deviation)  # fmt: skip
    ok &= same
    print(f"2-worker dask.distributed cluster: results identical to this process: {same} "
          f"({t_here:.1f} s here, {t_there:.1f} s on the cluster)")  # fmt: skip
    return ok


def chart_target(seed: int) -> bool:
    from fitdrag.uncertainty.control_chart import control_chart, limits_from_baseline

    rng = np.random.default_rng(seed)
    x = 0.470 + 0.002 * rng.standard_normal(30)
    x[20:] += 0.008
    lim = limits_from_baseline(x, 10)
    ch = control_chart(x, lim)
    beyond = [i for i, v in enumerate(x) if abs(v - lim.centre) > 3 * lim.sigma and i >= 20]
    flagged = set(ch.out_of_control)
    first_after = min(i for i in flagged if i >= 20) if flagged & set(range(20, 30)) else None
    false_alarms = sorted(i + 1 for i in flagged if i < 20)
    ok = bool(beyond) and beyond[0] in flagged and first_after is not None
    ok &= first_after is not None and first_after <= beyond[0]
    print(f"check standard (seed {seed}): +4 sigma shift from point 21, limits from the first 10 "
          f"(centre {lim.centre:.5f}, sigma {lim.sigma:.5f}); first point after the shift beyond "
          f"the 3-sigma limits: {beyond[0] + 1 if beyond else None}; first flagged after the "
          f"shift: {None if first_after is None else first_after + 1} (tests "
          f"{', '.join(ch.rules_at(first_after)) if first_after is not None else '-'}); "
          f"points flagged before the shift (false alarms): {false_alarms or 'none'}; "
          f"target met: {ok}")  # fmt: skip
    return ok


def chart_study(histories: int = 500) -> None:
    """Over many simulated histories: delay from the shift to the first flag, and how often
    an in-control history is flagged before the shift (limits from 10 results)."""
    from fitdrag.uncertainty.control_chart import control_chart, limits_from_baseline

    delays, false_alarm = [], 0
    for seed in range(histories):
        rng = np.random.default_rng(seed)
        x = 0.470 + 0.002 * rng.standard_normal(30)
        x[20:] += 0.008
        ch = control_chart(x, limits_from_baseline(x, 10))
        flagged = ch.out_of_control
        false_alarm += any(i < 20 for i in flagged)
        after = [i for i in flagged if i >= 20]
        delays.append(after[0] - 20 if after else 10)
    d = np.array(delays)
    print(f"over {histories} histories: first flag after the shift at its first point in "
          f"{100 * np.mean(d == 0):.1f} %, within 3 points in {100 * np.mean(d <= 2):.1f} %; "
          f"histories with a flag among the 20 in-control points: "
          f"{100 * false_alarm / histories:.1f} % (limits estimated from only 10 results)")  # fmt: skip


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--specimens", type=int, default=16)
    ap.add_argument("--spread", type=float, default=0.012)
    ap.add_argument("--seed", type=int, default=20261217)
    args = ap.parse_args(argv)
    ok = lot_target(args.specimens, args.spread, args.seed)
    ok &= chart_target(args.seed)
    chart_study()
    print("all targets met" if ok else "TARGET MISSED")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
