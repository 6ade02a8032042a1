"""Benchmark: fitdrag's fit against the notebook baseline on the same synthetic tracks.

In one run, each synthetic track (400 points; a few different specimens and flights, truth
from the independent scipy DOP853 integration in tests/reference.py, noise from a fixed
seed) is fitted

* by fitdrag: ``fitdrag.fit_tracks`` with its defaults (robust stage, automatic noise
  model, compiled RK5(4) integrator with analytic sensitivities) -- and, for information,
  with ``robust=False, noise="white"`` (one plain stage), and
* by the notebook baseline, the fit a practitioner writes in a notebook: lmfit ``leastsq``
  (MINPACK Levenberg–Marquardt, finite-difference Jacobian) over
  ``scipy.integrate.solve_ivp`` RK45 with the same physics (the equation of motion with
  buoyancy and added mass of tests/reference.py) and the same start (Cd = 0.5 and the
  launch state from a quadratic through the first max(8, n/5) samples, the start rule
  stated in fitdrag.fit.fitting's docstring).

Two sets of tracks: white noise, and AR(1) noise with φ = 0.8 (fitdrag detects it and
prewhitens; the baseline fits as it would any track).  It prints the median seconds per fit
of each, their ratio, and the Cd difference in units of fitdrag's standard uncertainty;
then the cost of one evaluation of the fit's problem (residuals and Jacobian, and residuals
only) against the floor of one call of the compiled integrator; then the first fit in a
fresh process with numba's disk cache warm (median over ``--cold-runs`` processes; the
number of functions numba compiled in it, from numba's compiler-pass events; and the same
first fit taken apart: importing the fit path, numba's own start-up, the cache loads, the
rest), and in a process with an empty cache (a fresh install).  Targets (issue 15): ≥ 10× the
baseline on white noise (aim 50×) and ≥ 5× on AR(1) tracks, |ΔCd| ≤ 0.25 u on white noise.
Timings are wall-clock on whatever machine runs this; nothing is asserted.

Usage::

    python benchmarks/bench_fit.py [--repeats 5] [--rounds 3] [--blas-threads N] [--cold-runs 5]
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time
from pathlib import Path


def _args():
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--repeats", type=int, default=5,
                   help="fits per method in a block (the baseline: half as many)")  # fmt: skip
    p.add_argument("--rounds", type=int, default=3,
                   help="rounds per track, each a block of every method in turn")  # fmt: skip
    p.add_argument("--seed", type=int, default=20240601, help="noise seed")
    p.add_argument("--rtol", type=float, default=1e-9, help="reference solve_ivp rtol")
    p.add_argument("--cold-runs", type=int, default=5,
                   help="fresh processes timed for the first fit (median)")  # fmt: skip
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
    """The notebook baseline: lmfit leastsq over solve_ivp RK45 with a finite-difference
    Jacobian."""
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


def _tracks(args):
    """(label, scenario, x, y, noise) for every flight, white then AR(1) φ = 0.8."""
    rng = np.random.default_rng(args.seed)
    out = []
    for noise in ("white", "ar1"):
        for name, sc in FLIGHTS.items():
            xy = sc.truth()
            if noise == "white":
                ex = rng.normal(0.0, sc.sigma, sc.n)
                ey = rng.normal(0.0, sc.sigma, sc.n)
            else:
                ex = ref.ar1_noise(rng, sc.n, sc.sigma, 0.8)
                ey = ref.ar1_noise(rng, sc.n, sc.sigma, 0.8)
            out.append((name, sc, xy[:, 0] + ex, xy[:, 1] + ey, noise))
    return out


def evaluation_costs(repeats: int = 2000):
    """Median µs of one problem evaluation (with sensitivities, residuals only) and of one
    bare call of the compiled integrator (the floor), on the first flight at its optimum."""
    from fitdrag.physics import simulate as S

    sc = next(iter(FLIGHTS.values()))
    xy = sc.truth() + np.random.default_rng(1).normal(0.0, sc.sigma, (sc.n, 2))
    r = fitdrag.fit_tracks(fitdrag.Track(sc.t, xy[:, 0], xy[:, 1]),
                           fitdrag.Sphere(sc.mass, sc.diameter), fitdrag.Air(ref.RHO, ref.MU))  # fmt: skip
    problem, theta = r._state["problem"], r.values

    def full():
        problem.forget()
        problem.evaluate(theta)

    fm = problem.models[0]
    tt = problem.throw_theta(theta, 0)
    n = fm.t.size
    pos, vel, sens = np.empty((n, 2)), np.empty((n, 2)), np.empty((n, 2, 5))
    s0, p = tt[:4].copy(), np.array(tt[4:])
    kernel = S._compiled_integrator()
    address = fm.model.callback.address

    def floor(n_par):
        return lambda: kernel(address, fm.t, s0, p, 1, 0.0, False, fm.k, fm.g_net, 0.0,
                              fm.re_fac, n_par, fm.rtol, fm.atol, fm.max_steps, pos, vel,
                              sens, S._A, S._B, S._C, S._E, S._P)  # fmt: skip

    out = {}
    for label, fn in (("evaluation, residuals + Jacobian", full),
                      ("evaluation, residuals only", lambda: problem.residuals(theta)),
                      ("compiled integrator with sensitivities (floor)", floor(5)),
                      ("compiled integrator, positions only (floor)", floor(0))):  # fmt: skip
        out[label] = per_call_us(fn, repeats)
    return out


def per_call_us(fn, repeats: int = 200) -> float:
    """Median µs of one call of ``fn`` over 5 batches of ``repeats // 5`` calls (after one
    call not timed); also used by bench_fit_3d.py."""
    fn()
    times = []
    for _ in range(5):
        t0 = time.perf_counter()
        for _ in range(repeats // 5):
            fn()
        times.append((time.perf_counter() - t0) / (repeats // 5))
    return 1e6 * float(np.median(times))


_COLD = """
import sys, time
t0 = time.perf_counter()
import numpy as np
import fitdrag
t1 = time.perf_counter()
data = np.load(sys.argv[2])  # the first flight of FLIGHTS with white noise, written by main
track = fitdrag.Track(data["t"], data["x"], data["y"])
sphere = fitdrag.Sphere(float(data["mass"]), float(data["diameter"]))
air = fitdrag.Air(float(data["rho"]), float(data["mu"]))
t2 = time.perf_counter()
from numba.core import event  # imports numba

compiled = set()


class _Passes(event.Listener):  # numba broadcasts each compiler pass, never a cache load
    def on_start(self, ev):
        compiled.add(ev.data["qualname"])

    def on_end(self, ev):
        pass


event.register("numba:run_pass", _Passes())
parts = []
if sys.argv[1] == "parts":  # the first fit's start-up taken apart, step by step
    parts.append(time.perf_counter())
    import fitdrag.fit.fitting  # fitdrag's fit and physics modules
    parts.append(time.perf_counter())
    from numba.core.registry import cpu_target
    cpu_target.target_context.refresh()  # numba's own start-up, as its first cache load does
    parts.append(time.perf_counter())
    from fitdrag.physics.registry import get_drag_model
    from fitdrag.physics.simulate import _compiled_integrator
    _compiled_integrator(), get_drag_model("constant").callback  # numba's disk cache
    parts.append(time.perf_counter())
first = fitdrag.fit_tracks(track, sphere, air)
t3 = time.perf_counter()
n_compiled = len(compiled)
fitdrag.fit_tracks(track, sphere, air)
t4 = time.perf_counter()
assert first.success, "the cold-fit track did not fit"
steps = np.diff([t2, *parts, t3]).tolist()
print(t1 - t0, t3 - t2, t4 - t3, n_compiled, *steps)
"""


def _cold_track(folder) -> str:
    """The first flight of FLIGHTS with white noise (truth from tests/reference.py), saved for
    the fresh processes; the path."""
    sc = next(iter(FLIGHTS.values()))
    xy = sc.truth() + np.random.default_rng(1).normal(0.0, sc.sigma, (sc.n, 2))
    path = os.path.join(folder, "cold_track.npz")
    np.savez(path, t=sc.t, x=xy[:, 0], y=xy[:, 1], mass=sc.mass, diameter=sc.diameter,
             rho=ref.RHO, mu=ref.MU)  # fmt: skip
    return path


def _fresh_process(mode: str, track: str, env=None) -> list[float]:
    out = subprocess.run([sys.executable, "-c", _COLD, mode, track], capture_output=True,
                         text=True, check=True, env=env)  # fmt: skip
    return [float(v) for v in out.stdout.split()]


def cold_first_fit(runs: int) -> dict[str, float]:
    """The first fit in fresh Python processes: medians over ``runs`` processes with numba's
    disk cache warm (whole, and taken apart in other processes), and one process with an
    empty cache (NUMBA_CACHE_DIR set to a new temporary folder: a fresh install)."""
    import tempfile

    with tempfile.TemporaryDirectory() as folder:
        track = _cold_track(folder)
        whole = np.array([_fresh_process("whole", track) for _ in range(runs)])
        parts = np.array([_fresh_process("parts", track) for _ in range(runs)])
        with tempfile.TemporaryDirectory() as cache:
            empty = _fresh_process("whole", track, {**os.environ, "NUMBA_CACHE_DIR": cache})
    med, med_parts = np.median(whole, axis=0), np.median(parts, axis=0)
    return {
        "import": med[0], "first": med[1], "second": med[2], "compiled": whole[:, 3].max(),
        "firsts": whole[:, 1], "numba_import": med_parts[4], "fit_import": med_parts[5],
        "numba_start": med_parts[6], "cache_loads": med_parts[7], "rest": med_parts[8],
        "parts_first": med_parts[1],
        "empty_first": empty[1],
        "empty_compiled": empty[3],
    }  # fmt: skip


def main(args) -> None:
    air = fitdrag.Air(ref.RHO, ref.MU)
    print("fitdrag fit benchmark (synthetic tracks, 400 points each; white and AR(1) noise)")
    print(f"  BLAS threads: OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS')!r}; "
          f"notebook baseline: lmfit leastsq over solve_ivp RK45, rtol = atol = {args.rtol:g}; "
          f"{args.rounds} rounds of {args.repeats} fits per method")  # fmt: skip
    # warm-up (loads the numba cache), not timed
    sc0 = next(iter(FLIGHTS.values()))
    xy0 = sc0.truth()
    fitdrag.fit_tracks(fitdrag.Track(sc0.t, xy0[:, 0], xy0[:, 1] + 1e-4 * np.sin(sc0.t * 99)),
                       fitdrag.Sphere(sc0.mass, sc0.diameter), air)  # fmt: skip
    rows = []
    for name, sc, x, y, noise in _tracks(args):
        track = fitdrag.Track(sc.t, x, y)
        sp = fitdrag.Sphere(sc.mass, sc.diameter)
        # in rounds, each timing a block of fits of every method in turn (a slow spell of a
        # shared machine falls on all three alike; within a block the fits run back to back,
        # as timeit would run them), and the median of each method over all its fits
        times = [[], [], []]
        for _ in range(args.rounds):
            for acc, fn, count in (
                (times[0], lambda track=track, sp=sp: fitdrag.fit_tracks(track, sp, air),
                 args.repeats),
                (times[1], lambda track=track, sp=sp: fitdrag.fit_tracks(
                    track, sp, air, robust=False, noise="white"), args.repeats),
                (times[2], lambda sc=sc, x=x, y=y: reference_fit(sc.t, x, y, sc.body, ref.RHO,
                                                                 args.rtol),
                 max(1, args.repeats // 2)),
            ):  # fmt: skip
                for _ in range(count):
                    t0 = time.perf_counter()
                    out = fn()
                    acc.append(time.perf_counter() - t0)
                if acc is times[0]:
                    r = out
                elif acc is times[2]:
                    o = out
        t_fd, t_plain, t_ref = (float(np.median(v)) for v in times)
        rows.append((name, noise, t_fd, t_plain, t_ref, r, o))

    for noise, target in (("white", 10.0), ("ar1", 5.0)):
        sel = [row for row in rows if row[1] == noise]
        print()
        print("white noise" if noise == "white" else "AR(1) noise, phi = 0.8 (fitdrag's noise "
              "model: " + ", ".join(sorted({row[5].noise["model"] for row in sel})) + ")")  # fmt: skip
        print(f"{'flight':40s} {'fitdrag s':>10s} {'plain s':>8s} {'baseline s':>10s} "
              f"{'ratio':>6s} {'Cd fitdrag':>11s} {'u':>8s} {'Cd baseline':>11s} {'dCd/u':>7s} "
              f"{'(Cd-true)/u':>11s} {'nfev':>9s}")  # fmt: skip
        for name, _n, t_fd, t_plain, t_ref, r, o in sel:
            cd_ref = o.params["cd"].value
            ok = r.success and o.success
            print(f"{name:40s} {t_fd:10.4f} {t_plain:8.4f} {t_ref:10.4f} {t_ref / t_fd:6.1f} "
                  f"{r.cd:11.6f} {r.u_cd:8.2e} {cd_ref:11.6f} {(r.cd - cd_ref) / r.u_cd:+7.3f} "
                  f"{(r.cd - FLIGHTS[name].cd) / r.u_cd:+11.2f} "
                  f"{r.diagnostics['function_evaluations']:4d}/{o.nfev:<4d}"
                  + ("" if ok else "  NOT CONVERGED"))  # fmt: skip
        med_fd = float(np.median([row[2] for row in sel]))
        med_plain = float(np.median([row[3] for row in sel]))
        med_ref = float(np.median([row[4] for row in sel]))
        ratios = [row[4] / row[2] for row in sel]
        worst = max(abs(row[5].cd - row[6].params["cd"].value) / row[5].u_cd for row in sel)
        print(f"median seconds per fit: fitdrag {med_fd:.4f} s, notebook baseline {med_ref:.4f} s")
        print(f"ratio (baseline / fitdrag): median of the medians {med_ref / med_fd:.1f}x, per "
              f"flight {min(ratios):.1f}x to {max(ratios):.1f}x   (target >= {target:g}x)")  # fmt: skip
        print(f"fitdrag with robust=False, noise='white' (one plain stage): {med_plain:.4f} s, "
              f"ratio {med_ref / med_plain:.1f}x")  # fmt: skip
        print(f"largest |Cd fitdrag - Cd baseline| / u(Cd): {worst:.3f}"
              + ("   (target <= 0.25)" if noise == "white" else
                 "   (the baseline ignores the correlation; its Cd is less efficient)"))  # fmt: skip
    print("(nfev: fitdrag's integrations with sensitivities over all its stages / the "
          "baseline's residual calls)")  # fmt: skip

    print()
    costs = evaluation_costs()
    floor_j = costs["compiled integrator with sensitivities (floor)"]
    floor_r = costs["compiled integrator, positions only (floor)"]
    print("cost of one evaluation (400-point throw, median µs) against the compiled kernel:")
    for label, us in costs.items():
        base = floor_r if "only" in label else floor_j
        print(f"  {label:50s} {us:8.1f} µs   {us / base:5.2f}x its floor")
    c = cold_first_fit(args.cold_runs)
    print()
    print(f"fresh process, numba's disk cache warm (median of {args.cold_runs} processes): "
          f"import numpy and fitdrag {c['import']:.2f} s; first fit {c['first']:.2f} s (each: "
          f"{', '.join(f'{v:.2f}' for v in c['firsts'])}); second fit {c['second']:.4f} s; "
          f"functions numba compiled in the first fit: {c['compiled']:.0f}")  # fmt: skip
    print(f"  the first fit taken apart (medians, other processes): importing numba "
          f"{c['numba_import']:.2f} s; fitdrag's fit and physics modules {c['fit_import']:.2f} "
          f"s; numba's own start-up (its target's first initialisation, which imports "
          f"scipy.linalg) "
          f"{c['numba_start']:.2f} s; loading fitdrag's integrator and drag-law callback from "
          f"the cache {c['cache_loads']:.3f} s; the rest of the fit (with the imports on its "
          f"way, e.g. scipy.optimize) {c['rest']:.2f} s; that first fit {c['parts_first']:.2f} "
          f"s")  # fmt: skip
    print(f"fresh install (NUMBA_CACHE_DIR: a new empty folder): first fit "
          f"{c['empty_first']:.1f} s, compiling {c['empty_compiled']:.0f} functions (numba "
          f"then keeps them; later processes load them)")  # fmt: skip


if __name__ == "__main__":
    main(ARGS)
