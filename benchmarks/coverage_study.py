"""Coverage study: does fitdrag's k = 2 interval for Cd hold the true Cd as often as it says?

For each noise type, ``--replicates`` noisy copies of one synthetic track are fitted with
``fitdrag.fit_tracks`` defaults, and the fraction of replicates whose interval
Cd ± U (U = k u, k = 2 here) contains the true Cd is printed, with its binomial 95 %
confidence interval (Clopper–Pearson), next to the mean reported u(Cd) and the empirical
standard deviation of the fitted Cd over the replicates.

Truth: the independent scipy solve_ivp DOP853 integration of tests/reference.py (invented
lab specimen: 40 mm, 2.7 g training ball, Cd 0.47, 400 frames at 400 Hz, ISA sea-level air).
Noise types (σ = 0.5 mm per coordinate):

* ``white``     independent Gaussian noise;
* ``ar1``       stationary AR(1) noise with φ = 0.8 on each axis (marginal std σ);
* ``outliers``  white noise plus 2 % of the frames moved by 25 σ along x or y (random sign).

Targets (issue 3): 0.93–0.97 for white and outliers, ≥ 0.90 for AR(1).

The replicates run on a process pool (``--workers``, default 2); each replicate's noise
comes from its own child of one fixed SeedSequence, so the result does not depend on the
scheduling.  BLAS is limited to one thread per process (set before numpy loads) so that the
worker processes do not oversubscribe the cores.

(Not named ``coverage.py``: a script of that name in benchmarks/ shadows the ``coverage``
package that numba imports, and breaks every script run from this folder.)

Usage::

    python benchmarks/coverage_study.py [--replicates 200] [--workers 2] [--seed 7]
        [--kinds white,ar1,outliers] [--points 400]
"""

from __future__ import annotations

import os
import sys

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import math  # noqa: E402
import multiprocessing as mp  # noqa: E402
import time  # noqa: E402
import warnings  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
from scipy import stats  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))
import reference as ref  # noqa: E402

import fitdrag  # noqa: E402

PHI = 0.8
OUTLIER_FRACTION = 0.02
OUTLIER_SIZE = 25.0  # in units of sigma
KINDS = ("white", "ar1", "outliers")

_STATE: dict = {}


def _init(scenario: ref.Scenario, truth: np.ndarray) -> None:
    _STATE["sc"] = scenario
    _STATE["truth"] = truth
    _STATE["sphere"] = fitdrag.Sphere(scenario.mass, scenario.diameter)
    _STATE["air"] = fitdrag.Air(ref.RHO, ref.MU)


def make_noise(kind: str, rng: np.random.Generator, n: int, sigma: float):
    """Noise (ex, ey) [m] and the indices of the outlier frames for one replicate."""
    if kind == "ar1":
        return ref.ar1_noise(rng, n, sigma, PHI), ref.ar1_noise(rng, n, sigma, PHI), []
    ex = rng.normal(0.0, sigma, n)
    ey = rng.normal(0.0, sigma, n)
    bad: list[int] = []
    if kind == "outliers":
        m = max(1, round(OUTLIER_FRACTION * n))
        bad = sorted(int(i) for i in rng.choice(n, m, replace=False))
        for i in bad:
            shift = OUTLIER_SIZE * sigma * rng.choice((-1.0, 1.0))
            if rng.random() < 0.5:
                ex[i] += shift
            else:
                ey[i] += shift
    return ex, ey, bad


def one(job):
    kind, seed_seq = job
    sc = _STATE["sc"]
    xy = _STATE["truth"]
    rng = np.random.default_rng(seed_seq)
    ex, ey, bad = make_noise(kind, rng, sc.n, sc.sigma)
    track = fitdrag.Track(sc.t, xy[:, 0] + ex, xy[:, 1] + ey)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        r = fitdrag.fit_tracks(track, _STATE["sphere"], _STATE["air"])
    rejected = set(r.throws[0].rejected)
    return {
        "kind": kind,
        "success": r.success,
        "cd": r.cd,
        "u": r.u_cd,
        "k": r.coverage_factor,
        "model": r.noise["model"],
        "phi": 0.5 * (r.noise["ar1_coefficient_x"] + r.noise["ar1_coefficient_y"]),
        "n_rejected": len(rejected),
        "outliers_found": len(rejected & set(bad)),
        "n_outliers": len(bad),
        "chi2": r.diagnostics["reduced_chi_square"],
    }


def summarise(kind: str, rows: list[dict], true_cd: float) -> dict:
    ok = [r for r in rows if r["success"]]
    cd = np.array([r["cd"] for r in ok])
    u = np.array([r["u"] for r in ok])
    k = np.array([r["k"] for r in ok])
    covered2 = int(np.sum(np.abs(cd - true_cd) <= 2.0 * u))
    covered_k = int(np.sum(np.abs(cd - true_cd) <= k * u))
    n = len(ok)
    ci = stats.binomtest(covered2, n).proportion_ci(0.95, method="exact") if n else None
    models: dict[str, int] = {}
    for r in ok:
        models[r["model"]] = models.get(r["model"], 0) + 1
    z = (cd - true_cd) / u
    out = {
        "kind": kind,
        "n": n,
        "failed": len(rows) - n,
        "coverage": covered2 / n if n else float("nan"),
        "coverage_k": covered_k / n if n else float("nan"),
        "ci": (ci.low, ci.high) if ci else (float("nan"), float("nan")),
        "mean_u": float(np.mean(u)),
        "rms_u": float(np.sqrt(np.mean(u**2))),
        "std_cd": float(np.std(cd, ddof=1)),
        "bias": float(np.mean(cd) - true_cd),
        "std_z": float(np.std(z, ddof=1)),
        "models": models,
        "mean_phi": float(np.mean([r["phi"] for r in ok])),
        "mean_rejected": float(np.mean([r["n_rejected"] for r in ok])),
        "outliers_found": sum(r["outliers_found"] for r in ok),
        "outliers_total": sum(r["n_outliers"] for r in ok),
        "false_rejections": sum(r["n_rejected"] - r["outliers_found"] for r in ok),
        "mean_chi2": float(np.mean([r["chi2"] for r in ok])),
    }
    return out


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--replicates", type=int, default=200, help="replicates per noise type")
    p.add_argument("--workers", type=int, default=2, help="worker processes")
    p.add_argument("--seed", type=int, default=7, help="root seed of the noise")
    p.add_argument("--kinds", default=",".join(KINDS), help="comma-separated noise types")
    p.add_argument("--points", type=int, default=400, help="frames per track (at 400 Hz)")
    args = p.parse_args(argv)
    kinds = [k.strip() for k in args.kinds.split(",") if k.strip()]
    for k in kinds:
        if k not in KINDS:
            p.error(f"--kinds: unknown noise type {k!r}; choose from {', '.join(KINDS)}")
    sc = ref.Scenario(n=args.points)
    truth = sc.truth()
    root = np.random.SeedSequence(args.seed)
    children = root.spawn(len(KINDS))
    jobs = []
    for kind in kinds:
        for s in children[KINDS.index(kind)].spawn(args.replicates):
            jobs.append((kind, s))
    print(f"coverage study: {args.replicates} replicates per noise type, {sc.n} frames at "
          f"{sc.fps:g} Hz, sigma {1e3 * sc.sigma:g} mm, true Cd {sc.cd}, seed {args.seed}, "
          f"{args.workers} workers")  # fmt: skip
    t0 = time.perf_counter()
    _init(sc, truth)
    one(("white", np.random.SeedSequence(0)))  # load the numba cache before forking
    if args.workers > 1:
        ctx = mp.get_context("fork")
        with ctx.Pool(args.workers, initializer=_init, initargs=(sc, truth)) as pool:
            rows = pool.map(one, jobs, chunksize=8)
    else:
        rows = [one(j) for j in jobs]
    elapsed = time.perf_counter() - t0
    print(f"{len(rows)} fits in {elapsed:.0f} s ({elapsed / max(len(rows), 1):.3f} s per fit, "
          f"wall clock)\n")  # fmt: skip
    print(f"{'noise':9s} {'coverage k=2':>12s} {'95% CI':>15s} {'mean u':>9s} {'std Cd':>9s} "
          f"{'u/std':>6s} {'std z':>6s} {'bias/std':>8s}  notes")  # fmt: skip
    results = []
    for kind in kinds:
        s = summarise(kind, [r for r in rows if r["kind"] == kind], sc.cd)
        results.append(s)
        notes = [f"noise models {s['models']}", f"mean phi {s['mean_phi']:.3f}",
                 f"mean chi2_red {s['mean_chi2']:.3f}"]  # fmt: skip
        if kind == "outliers":
            notes.append(f"outliers rejected {s['outliers_found']}/{s['outliers_total']}, "
                         f"false rejections {s['false_rejections']}")  # fmt: skip
        else:
            notes.append(f"mean rejected {s['mean_rejected']:.2f}")
        if s["failed"]:
            notes.append(f"{s['failed']} fits failed")
        print(f"{kind:9s} {s['coverage']:12.3f} {s['ci'][0]:7.3f}-{s['ci'][1]:.3f} "
              f"{s['mean_u']:9.3e} {s['std_cd']:9.3e} {s['mean_u'] / s['std_cd']:6.3f} "
              f"{s['std_z']:6.3f} {s['bias'] / s['std_cd']:+8.3f}  {'; '.join(notes)}")  # fmt: skip
    print()
    targets = {"white": (0.93, 0.97), "outliers": (0.93, 0.97), "ar1": (0.90, 1.0)}
    for s in results:
        lo, hi = targets[s["kind"]]
        verdict = "meets" if lo <= s["coverage"] <= hi else "MISSES"
        rng_txt = f"{lo:.2f}-{hi:.2f}" if hi < 1 else f">= {lo:.2f}"
        print(f"{s['kind']:9s} coverage {s['coverage']:.3f} {verdict} the target {rng_txt}")
    print(
        "\nu/std: mean reported u(Cd) over the empirical std of Cd (1 = honest); std z: std of "
        "(Cd - true)/u (1 = honest)."
    )
    return 0 if all(math.isfinite(s["coverage"]) for s in results) else 1


if __name__ == "__main__":
    sys.exit(main())
