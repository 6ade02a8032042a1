"""Run time of ``fitdrag demo``: wall and CPU time of each step, on a fresh directory.

    python -P benchmarks/bench_demo.py [--runs 1] [--keep DIR]

Each run renders the footage afresh (``force``) in a temporary directory (or ``--keep DIR``)
and prints, per step, the wall time and the CPU time of this process and of its finished
child processes (the Monte Carlo workers), then the whole run's.  On a machine shared with
other work the wall time grows while the CPU time does not: compare the CPU time with the
number of free cores.  Nothing is asserted.
"""

from __future__ import annotations

import argparse
import resource
import tempfile
import time
from pathlib import Path


def _cpu() -> float:
    own = resource.getrusage(resource.RUSAGE_SELF)
    kids = resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + kids.ru_utime + kids.ru_stime


def main(argv=None) -> int:
    from fitdrag.run.demo import MONTE_CARLO_TRIALS, run_demo
    from fitdrag.uncertainty.monte_carlo import default_workers

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=1, help="number of fresh runs (default 1)")
    ap.add_argument("--keep", metavar="DIR", help="run in DIR (kept) instead of a temp folder")
    args = ap.parse_args(argv)
    print(f"fitdrag demo: {MONTE_CARLO_TRIALS} Monte Carlo trials on {default_workers()} "
          f"process(es)")  # fmt: skip
    for k in range(args.runs):
        with tempfile.TemporaryDirectory(prefix="fitdrag-bench-demo-") as tmp:
            d = Path(args.keep) if args.keep else Path(tmp) / "demo"
            marks: list[tuple[str, float, float]] = []

            def log(line: str, marks=marks) -> None:
                if line.startswith("["):
                    marks.append((line.split("]", 1)[1].strip()[:60], time.perf_counter(), _cpu()))

            t0, c0 = time.perf_counter(), _cpu()
            res = run_demo(d, force=True, progress=True, log=log)
            marks.append(("end", time.perf_counter(), _cpu()))
            print(f"run {k + 1}:")
            for (what, t, c), (_, t2, c2) in zip(marks, marks[1:]):
                print(f"  {what:<60} wall {t2 - t:6.1f} s   CPU {c2 - c:6.1f} s")
            print(f"  {'whole run':<60} wall {time.perf_counter() - t0:6.1f} s   CPU "
                  f"{_cpu() - c0:6.1f} s")  # fmt: skip
            print(f"  Cd = {res.drag_coefficient:.4f} ± {res.expanded_uncertainty:.4f} "
                  f"(truth {res.true_cd:g})")  # fmt: skip
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
