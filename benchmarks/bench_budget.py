"""Benchmark of the uncertainty budget: re-fit cost, GUM budget, Monte Carlo of N re-fits.

Synthetic scenario (invented): a 40 mm, 2.7 g ball, Cd 0.47, thrown at about 8 m/s, filmed
at 400 frames per second for 400 frames, 0.5 mm position noise; inputs with the
uncertainties of the job template.  Prints the median time of one re-fit, the time of the
GUM budget, the wall time of the Monte Carlo run on the given number of processes, and the
GUM and Monte Carlo results side by side.

Then the three-throw sample (sample_tracks/training_ball.toml) as ``fitdrag run`` measures
it: the notebook baseline fit of its first throw (lmfit over solve_ivp, as in
bench_fit.py) timed in the same run; the fixed-Jacobian re-fits checked against full re-fits
on a sample of trials; and the adaptive Monte Carlo procedure of JCGM 101 7.9, up to
``--sample-trials`` trials on ``--workers`` processes, run until its check against the GUM
interval is conclusive (agree or differ), with its wall time in notebook-fit times.

Targets (issue 5, issue 15): 10 000 Monte Carlo trials in under a minute on 2 cores; 10⁵
re-fits of the three-throw sample in ≤ 2 500 notebook-fit times with a conclusive check.

Usage:  python benchmarks/bench_budget.py [--trials 10000] [--workers 2] [--points 400]
        [--sample-trials 100000] [--verify 200]
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
    ap.add_argument(
        "--sample-trials",
        type=int,
        default=100_000,
        help="cap of the adaptive Monte Carlo run of the three-throw sample (0: skip)",
    )
    ap.add_argument(
        "--verify",
        type=int,
        default=200,
        help="trials re-fitted both ways (fixed Jacobian and full)",
    )
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
    if args.sample_trials:
        print()
        three_throw_sample(args)


def three_throw_sample(args) -> None:
    """The three-throw sample: notebook baseline, fixed-Jacobian check, adaptive Monte Carlo."""
    import sys
    from pathlib import Path

    root = Path(__file__).resolve().parents[1]
    sys.path.insert(0, str(root / "tests"))
    sys.path.insert(0, str(root / "benchmarks"))
    import reference as ref
    from bench_fit import reference_fit

    from fitdrag.run import pipeline
    from fitdrag.run.job_file import load_job

    job = load_job(root / "sample_tracks" / "training_ball.toml")
    captured = {}
    real = pipeline.budget_and_checks

    def capture(job, model, inputs, stat, n_mc, **kw):
        # the run's own measurement model and inputs, kept for the check below
        captured.update(model=model, inputs=inputs, stat=stat)
        return real(job, model, inputs, stat, n_mc, **kw)

    pipeline.budget_and_checks = capture
    try:
        t0 = time.perf_counter()
        meas = pipeline.measure(job, monte_carlo=args.sample_trials, adaptive=True,
                                seed=args.seed, workers=args.workers)  # fmt: skip
        t_run = time.perf_counter() - t0
    finally:
        pipeline.budget_and_checks = real
    fit, mc, check, budget = meas.fit, meas.monte_carlo, meas.gum_check, meas.budget
    model, inputs = captured["model"], captured["inputs"]

    # the notebook baseline on the sample's first throw, timed in this run
    tr = meas.tracks[0]
    sp = fit.specimen
    body = ref.Body(sp.mass, sp.area, sp.volume, sp.added_mass_coefficient)
    rho = fit.conditions.air.density
    reference_fit(tr.t, tr.x, tr.y, body, rho, 1e-9)
    nb = []
    for _ in range(3):
        s0 = time.perf_counter()
        reference_fit(tr.t, tr.x, tr.y, body, rho, 1e-9)
        nb.append(time.perf_counter() - s0)
    t_nb = statistics.median(nb)

    # fixed-Jacobian re-fits against full re-fits on a sample of trials
    rng = np.random.default_rng(args.seed + 1)
    rows = [{q.name: float(q.sample(rng, 1)[0]) for q in inputs} for _ in range(args.verify)]
    fast, full, t_fast, t_full = [], [], 0.0, 0.0
    for v in rows:
        s0 = time.process_time()
        fast.append(model(v))
        t_fast += time.process_time() - s0
        s0 = time.process_time()
        full.append(model.full(v))
        t_full += time.process_time() - s0
    diff = np.abs(np.array(fast) - np.array(full))
    u_c = budget.combined_standard_uncertainty

    print(f"three-throw sample ({job.path.name}): Cd {fit.cd:.6f}, u(Cd) statistical "
          f"{fit.u_cd:.2g}, GUM u_c {u_c:.4g} ({len(inputs)} inputs)")  # fmt: skip
    print(f"  notebook baseline fit of throw 1 (lmfit over solve_ivp): {t_nb:.3f} s")
    print(f"  re-fit check on {len(rows)} trials: fixed Jacobian {1e3 * t_fast / len(rows):.2f} "
          f"ms CPU, full re-fit {1e3 * t_full / len(rows):.2f} ms CPU per trial; largest "
          f"|dCd| {diff.max():.2g} = {diff.max() / fit.u_cd:.3f} u(Cd) statistical = "
          f"{diff.max() / check.tolerance:.3f} of the tolerance delta {check.tolerance:.2g}")  # fmt: skip
    print(f"  adaptive Monte Carlo (JCGM 101 7.9, cap {args.sample_trials}): {mc.trials} re-fits "
          f"({mc.failures} failed) in {mc.elapsed:.1f} s on {mc.workers} process(es), "
          f"{1e3 * mc.elapsed / max(mc.trials, 1):.3f} ms per re-fit; stable: {mc.converged}")  # fmt: skip
    per_1e5 = mc.elapsed / max(mc.trials, 1) * 1e5
    print(f"  10^5 re-fits at this rate: {per_1e5:.0f} s = {per_1e5 / t_nb:.0f} notebook-fit "
          f"times (target <= 2500); whole run {t_run:.1f} s")  # fmt: skip
    lo, hi = mc.interval
    glo, ghi = check.gum_interval
    print(f"  95 % intervals: MC [{lo:.6f}, {hi:.6f}] GUM [{glo:.6f}, {ghi:.6f}]; d_low "
          f"{check.d_low:.2g}, d_high {check.d_high:.2g}, delta {check.tolerance:.2g} -> "
          f"{check.status}")  # fmt: skip


if __name__ == "__main__":
    main()
