"""Benchmark: fitdrag's fit against a plain reference fit on the same synthetic tracks.

In one run, each synthetic track (400 points; a few different specimens and flights, truth
from the independent scipy DOP853 integration in tests/reference.py, white noise from a
fixed seed) is fitted

* by fitdrag: ``fitdrag.fit_tracks`` with its defaults (robust stage, automatic noise
  model, compiled RK5(4) integrator with analytic sensitivities) -- and, for information,
  with ``robust=False, noise="white"`` (one plain stage), and
* by a plain reference: lmfit ``leastsq`` (MINPACK Levenberg–Marquardt, finite-difference
  Jacobian) over ``scipy.integrate.solve_ivp`` RK45 with the same physics (the equation of
  motion with buoyancy and added mass of tests/reference.py) and the same start (Cd = 0.5
  and the launch state from a quadratic through the first max(8, n/5) samples, the start
  rule stated in fitdrag.fit.fitting's docstring).

It prints the median seconds per fit of each, their ratio, and the Cd difference in units
of fitdrag's standard uncertainty.  Target (issue 3): fitdrag ≥ 10× faster at the same
answer.  Timings are wall-clock on whatever machine runs this; nothing is asserted.

Usage::

    python benchmarks/bench_fit.py [--repeats 5] [--blas-threads N]
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path


def _args():
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--repeats", type=int, default=5, help="timed fits per track and method")
    p.add_argument("--seed", type=int, default=20240601, help="noise seed")
    p.add_argument("--rtol", type=float, default=1e-9, help="reference solve_ivp rtol")
    p.add_argument("--blas-threads", type=int, default=None,
                   help="set OPENBLAS/OMP/MKL thread counts before numpy loads")  # fmt: skip
    return p.parse_args()


ARGS = _args() if __name__ == "__main__" else None
if ARGS is not None and ARGS.blas_threads is not None:
    for var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ[var] = str(ARGS.blas_threads)

import lmfit  # noqa: E402
import numpy as np  # noqa: E402
from scipy.integrate import solve_ivp  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))
import reference as ref  # noqa: E402

import fitdrag  # noqa: E402

# Synthetic flights of an invented test lab (all 400 frames).
FLIGHTS = {
    "40 mm 2.7 g ball, 8 m/s, 400 Hz": ref.Scenario(),
    "40 mm 2.7 g ball, 12 m/s, 600 Hz": ref.Scenario(launch=(0.0, 1.0, 11.0, 5.0), fps=600.0),
    "100 mm 2 g foam sphere, 5 m/s, 300 Hz": ref.Scenario(
        mass=0.002, diameter=0.100, cd=0.50, launch=(0.0, 1.5, 4.0, 3.0), fps=300.0
    ),
    "67 mm 58 g ball, 20 m/s, 800 Hz": ref.Scenario(
        mass=0.058, diameter=0.067, cd=0.55, launch=(0.0, 1.0, 18.0, 8.0), fps=800.0
    ),
}


def start_guess(t, x, y):
    """Cd = 0.5 and a quadratic through the first max(8, n/5) samples (drag-free)."""
    m = min(len(t), max(8, len(t) // 5))
    tau = t[:m] - t[0]
    cx = np.polyfit(tau, x[:m], 2)
    cy = np.polyfit(tau, y[:m], 2)
    return {"cd": 0.5, "x0": cx[2], "y0": cy[2], "vx0": cx[1], "vy0": cy[1]}


def reference_fit(t, x, y, body, rho, rtol):
    """lmfit leastsq over solve_ivp RK45 with a finite-difference Jacobian."""
    g = start_guess(t, x, y)
    params = lmfit.Parameters()
    params.add("cd", value=g["cd"], min=0.0, max=50.0)
    for k in ("x0", "y0", "vx0", "vy0"):
        params.add(k, value=g[k])

    def residual(p):
        s0 = [p["x0"].value, p["y0"].value, p["vx0"].value, p["vy0"].value]
        cd = p["cd"].value
        sol = solve_ivp(lambda _t, s: ref.rhs(s, body, rho, cd), (t[0], t[-1]), s0,
                        method="RK45", t_eval=t, rtol=rtol, atol=rtol)  # fmt: skip
        if not sol.success or sol.y.shape[1] != t.size:
            return np.full(2 * t.size, 1e6)
        return np.concatenate((x - sol.y[0], y - sol.y[1]))

    # epsfcn: finite-difference step √1e-10 ≈ 1e-5 relative, well above the integration error
    out = lmfit.minimize(residual, params, method="leastsq", epsfcn=1e-10)
    return out


def timed(fn, repeats):
    times = []
    result = None
    for _ in range(repeats):
        t0 = time.perf_counter()
        result = fn()
        times.append(time.perf_counter() - t0)
    return float(np.median(times)), result


def main(args) -> None:
    rng = np.random.default_rng(args.seed)
    air = fitdrag.Air(ref.RHO, ref.MU)
    print("fitdrag fit benchmark (synthetic tracks, 400 points each, white noise)")
    print(f"  BLAS threads: OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS')!r}; "
          f"reference solve_ivp RK45 rtol = atol = {args.rtol:g}; repeats {args.repeats}")  # fmt: skip
    # warm-up (loads the numba cache), not timed
    sc0 = next(iter(FLIGHTS.values()))
    xy0 = sc0.truth()
    fitdrag.fit_tracks(fitdrag.Track(sc0.t, xy0[:, 0], xy0[:, 1] + 1e-4 * np.sin(sc0.t * 99)),
                       fitdrag.Sphere(sc0.mass, sc0.diameter), air)  # fmt: skip
    rows = []
    for name, sc in FLIGHTS.items():
        xy = sc.truth()
        x = xy[:, 0] + rng.normal(0.0, sc.sigma, sc.n)
        y = xy[:, 1] + rng.normal(0.0, sc.sigma, sc.n)
        track = fitdrag.Track(sc.t, x, y)
        sp = fitdrag.Sphere(sc.mass, sc.diameter)
        t_fd, r = timed(lambda track=track, sp=sp: fitdrag.fit_tracks(track, sp, air),
                        args.repeats)  # fmt: skip
        t_plain, _ = timed(lambda track=track, sp=sp: fitdrag.fit_tracks(
            track, sp, air, robust=False, noise="white"), args.repeats)  # fmt: skip
        t_ref, o = timed(lambda sc=sc, x=x, y=y: reference_fit(sc.t, x, y, sc.body, ref.RHO,
                                                               args.rtol),
                         max(1, args.repeats // 2))  # fmt: skip
        cd_ref = o.params["cd"].value
        u_ref = o.params["cd"].stderr
        rows.append((name, t_fd, t_plain, t_ref, r.cd, r.u_cd, cd_ref, u_ref, sc.cd, r.success,
                     o.success, o.nfev, r.diagnostics["function_evaluations"]))  # fmt: skip

    print()
    hdr = (f"{'flight':40s} {'fitdrag s':>10s} {'plain s':>8s} {'ref s':>8s} {'ratio':>7s} {'Cd fitdrag':>11s} "
           f"{'u':>8s} {'Cd ref':>11s} {'u ref':>8s} {'dCd/u':>7s} {'(Cd-true)/u':>11s} "
           f"{'nfev':>9s}")  # fmt: skip
    print(hdr)
    for name, t_fd, t_plain, t_ref, cd, u, cd_ref, u_ref, true, ok, ok_ref, nf_ref, nf_fd in rows:
        print(f"{name:40s} {t_fd:10.4f} {t_plain:8.4f} {t_ref:8.3f} {t_ref / t_fd:7.1f} {cd:11.6f} {u:8.2e} "
              f"{cd_ref:11.6f} {u_ref:8.2e} {(cd - cd_ref) / u:+7.3f} {(cd - true) / u:+11.2f} "
              f"{nf_fd:4d}/{nf_ref:<4d}" + ("" if ok and ok_ref else "  NOT CONVERGED"))  # fmt: skip
    med_fd = float(np.median([r[1] for r in rows]))
    med_plain = float(np.median([r[2] for r in rows]))
    med_ref = float(np.median([r[3] for r in rows]))
    worst = max(abs(r[4] - r[6]) / r[5] for r in rows)
    print()
    print(f"median seconds per fit: fitdrag {med_fd:.4f} s, reference {med_ref:.3f} s")
    print(f"ratio (reference / fitdrag): {med_ref / med_fd:.1f}x   (target >= 10x)")
    print(f"fitdrag with robust=False, noise='white' (one plain stage): {med_plain:.4f} s, "
          f"ratio {med_ref / med_plain:.1f}x")  # fmt: skip
    print(f"largest |Cd fitdrag - Cd reference| / u(Cd): {worst:.3f}")
    print("(nfev: fitdrag's evaluations over all its stages / the reference's residual calls)")


if __name__ == "__main__":
    main(ARGS)
