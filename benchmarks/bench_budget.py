"""Benchmark of the uncertainty budget: re-fit cost, GUM budget, Monte Carlo of N re-fits.

Synthetic scenario (invented): a 40 mm, 2.7 g ball, Cd 0.47, thrown at about 8 m/s, filmed
at 400 frames per second for 400 frames, 0.5 mm position noise; inputs with the
uncertainties of the job template.  Prints the median time of one re-fit, the time of the
GUM budget, the wall time of the Monte Carlo run on the given number of processes, and the
GUM and Monte Carlo results side by side.

Target (issue 5): 10 000 Monte Carlo trials in under a minute on 2 cores.

Usage:  python benchmarks/bench_budget.py [--trials 10000] [--workers 2] [--points 400]
"""

from __future__ import annotations

import argparse
import os
import resource
import statistics
import time

import numpy as np


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--trials", type=int, default=10_000)
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--points", type=int, default=400)
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args()

    from fitdrag import Air, Sphere, Track, fit_tracks
    from fitdrag.fit.budget_model import DragRefitModel
    from fitdrag.physics.forces import Conditions
    from fitdrag.physics.simulate import Launch, simulate
    from fitdrag.uncertainty.gum import InputQuantity, budget_from_model
    from fitdrag.uncertainty.monte_carlo import compare_with_gum, monte_carlo

    fps, n = 400.0, args.points
    t = np.arange(n) / fps
    sp = Sphere(0.0027, 0.040)
    air = Air.from_conditions(21.0, 100800.0, 45.0)
    fl = simulate(t, Launch(0.0, 1.0, 7.0, 4.0), sp, Conditions(air=air), drag_params=(0.47,))
    rng = np.random.default_rng(args.seed)
    track = Track(t, fl.x + rng.normal(0, 5e-4, n), fl.y + rng.normal(0, 5e-4, n))

    t0 = time.perf_counter()
    fit = fit_tracks(track, sp, air)
    t_fit = time.perf_counter() - t0
    inputs = [
        InputQuantity("mass", 0.0027, 1e-5, "kg"),
        InputQuantity("diameter", 0.040, 5e-5, "m"),
        InputQuantity("temperature", 21.0, 0.3, "°C"),
        InputQuantity("pressure", 100800.0, 50.0, "Pa"),
        InputQuantity("relative_humidity", 45.0, 3.0, "%"),
        InputQuantity("frame_rate", fps, 0.05, "Hz"),
        InputQuantity("length_scale", 1.0, 0.002, ""),
        InputQuantity("gravity", 9.80665, 5e-4, "m/s²"),
    ]
    nominal = {q.name: q.value for q in inputs}
    model = DragRefitModel(fit, [track], nominal)
    stat = (fit.u_cd, fit.dof)

    samples = [{q.name: float(q.sample(rng, 1)[0]) for q in inputs} for _ in range(200)]
    model(samples[0])
    times, cpu = [], []
    for v in samples:
        s, c = time.perf_counter(), time.process_time()
        model(v)
        times.append(time.perf_counter() - s)
        cpu.append(time.process_time() - c)
    t_refit = statistics.median(times)
    c_refit = statistics.median(cpu)

    t0 = time.perf_counter()
    budget = budget_from_model(model, inputs, statistical=stat)
    t_budget = time.perf_counter() - t0

    ru0 = resource.getrusage(resource.RUSAGE_CHILDREN)
    ru_self0 = resource.getrusage(resource.RUSAGE_SELF)
    mc = monte_carlo(
        model, inputs, statistical=stat, trials=args.trials, seed=args.seed,
        workers=args.workers, progress=False,
    )  # fmt: skip
    ru1 = resource.getrusage(resource.RUSAGE_CHILDREN)
    ru_self1 = resource.getrusage(resource.RUSAGE_SELF)
    cpu_mc = (ru1.ru_utime + ru1.ru_stime - ru0.ru_utime - ru0.ru_stime) + (
        ru_self1.ru_utime + ru_self1.ru_stime - ru_self0.ru_utime - ru_self0.ru_stime
    )
    check = compare_with_gum(budget, mc)
    check1 = compare_with_gum(budget, mc, n_dig=1)

    print(f"track: {n} points at {fps:g} fps; first full fit {t_fit:.2f} s (incl. compile/cache)")
    print(f"machine: {os.cpu_count()} CPUs, load average {os.getloadavg()[0]:.1f} at start")
    print(
        f"re-fit (refit from the optimum): median {1e3 * t_refit:.2f} ms wall, "
        f"{1e3 * c_refit:.2f} ms CPU, over {len(times)}"
    )
    print(f"GUM budget ({2 * len(inputs) + 1} re-fits): {t_budget:.2f} s")
    print(
        f"Monte Carlo: {mc.trials} trials ({mc.failures} failed) on {mc.workers} process(es): "
        f"{mc.elapsed:.1f} s wall, {mc.trials / mc.elapsed:.0f} trials/s"
    )
    per = cpu_mc / mc.trials
    print(
        f"  CPU time of all processes: {cpu_mc:.1f} s ({1e3 * per:.2f} ms per trial, incl. "
        f"worker start-up); on {args.workers} idle cores 10 000 trials would take about "
        f"{10_000 * per / args.workers:.1f} s"
    )
    if args.trials != 10_000:
        print(f"  extrapolated to 10 000 trials: {mc.elapsed * 10_000 / args.trials:.1f} s")
    print(
        f"  target 10 000 trials < 60 s: {'met' if mc.elapsed * 10_000 / args.trials < 60 else 'NOT met'}"
    )
    print(f"Cd {fit.cd:.6f}; GUM u_c {budget.combined_standard_uncertainty:.6f}, "
          f"k {budget.coverage_factor:.3f}, U {budget.expanded_uncertainty:.6f}")  # fmt: skip
    print(f"Monte Carlo u {mc.standard_uncertainty:.6f} "
          f"(ratio MC/GUM {mc.standard_uncertainty / budget.combined_standard_uncertainty:.3f})")  # fmt: skip
    lo, hi = mc.interval
    glo, ghi = check.gum_interval
    print(f"95 % intervals: MC [{lo:.6f}, {hi:.6f}]  GUM [{glo:.6f}, {ghi:.6f}]")
    print(f"  endpoint standard errors of MC: {mc.interval_standard_error[0]:.2g}, "
          f"{mc.interval_standard_error[1]:.2g}")  # fmt: skip
    print(f"  JCGM 101 8.2 check, n_dig=2: d_low {check.d_low:.2g}, d_high {check.d_high:.2g}, "
          f"delta {check.tolerance:.2g} -> {check.status}")  # fmt: skip
    print(f"  JCGM 101 8.2 check, n_dig=1: delta {check1.tolerance:.2g} -> {check1.status}")


if __name__ == "__main__":
    main()
