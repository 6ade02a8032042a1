"""Benchmark: fitdrag's compiled simulator against scipy's solve_ivp on the same flight.

The flight: a 40 mm, 2.7 g sphere (C_d 0.47, buoyancy and added mass ½ on) launched at
15 m/s, 30°, sampled at 400 points over 1 s in air of 1.2 kg/m³.  Printed, in one run:

* the first call of fitdrag's simulator (numba compile or cache load) — the warm-up;
* the median per-call time of fitdrag ``simulate`` with and without sensitivities, and of the
  prepared ``FlightModel.run`` (the fit's hot path, no validation);
* the median per-call time of ``solve_ivp`` (DOP853, rtol = atol = 1e-12; and RK45 at its
  default tolerances) on the same equation, written out here in plain Python;
* what a plain solve_ivp fit pays per Jacobian: RK45 runs for the positions plus forward
  differences in the 5 parameters (x0, y0, vx0, vy0, C_d), 6 runs;
* the ratios and the max position difference of each against DOP853 at 1e-12;
* the 3-D simulator (``fitdrag.physics.flight3d``) on the same flight turned 1° out of the
  board plane, with a lift about a tilted spin axis and a 3-D wind, at the same 400 sample
  times and at 800 times of two interleaved cameras with a rolling shutter: ``simulate_3d``
  and ``FlightModel3D.run`` with sensitivities (7 parameters), positions only, next to the
  planar simulator and a 3-D solve_ivp (DOP853 at 1e-12, RK45 at its defaults).

Run:  python benchmarks/bench_simulate.py [--repeats 7]
"""

from __future__ import annotations

import argparse
import math
import statistics
import time

import numpy as np
from scipy.integrate import solve_ivp

from fitdrag.physics.air import STANDARD_GRAVITY, Air
from fitdrag.physics.flight3d import FlightModel3D, Launch3D, simulate_3d
from fitdrag.physics.forces import Conditions
from fitdrag.physics.simulate import FlightModel, Launch, simulate
from fitdrag.physics.specimen import Sphere

MASS, DIAMETER, CD, SPEED, ANGLE, RHO = 0.0027, 0.040, 0.47, 15.0, 30.0, 1.2
N_SAMPLES, DURATION = 400, 1.0


def _per_call(fn, repeats: int, min_batch_time: float = 0.2) -> float:
    """Median over ``repeats`` batches of the time per call [s]; each batch runs long enough
    (≥ min_batch_time) for perf_counter's resolution not to matter."""
    n = 1
    while True:
        t0 = time.perf_counter()
        for _ in range(n):
            fn()
        dt = time.perf_counter() - t0
        if dt >= min_batch_time or n >= 1 << 20:
            break
        n *= 2
    samples = [dt / n]
    for _ in range(repeats - 1):
        t0 = time.perf_counter()
        for _ in range(n):
            fn()
        samples.append((time.perf_counter() - t0) / n)
    return statistics.median(samples)


def _scipy_rhs(specimen, rho, g, cd):
    m_eff = specimen.mass + specimen.added_mass_coefficient * rho * specimen.volume
    g_net = g * (specimen.mass - rho * specimen.volume) / m_eff
    k = rho * specimen.area / (2.0 * m_eff)

    def rhs(_, s):
        vx, vy = s[2], s[3]
        q = math.hypot(vx, vy)
        return [vx, vy, -k * cd * q * vx, -g_net - k * cd * q * vy]

    return rhs


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=7, help="batches per timing (median)")
    args = ap.parse_args(argv)

    specimen = Sphere(MASS, DIAMETER)
    conditions = Conditions(Air(RHO))
    launch = Launch.from_speed_angle(SPEED, ANGLE)
    t = np.linspace(0.0, DURATION, N_SAMPLES)
    s0 = launch.as_array()

    # warm-up: numba compile (or cache load) of both integrator variants
    t0 = time.perf_counter()
    simulate(t, launch, specimen, conditions, drag_params=CD, sensitivities=True)
    first_call = time.perf_counter() - t0
    simulate(t, launch, specimen, conditions, drag_params=CD)

    rhs = _scipy_rhs(specimen, RHO, STANDARD_GRAVITY, CD)
    span = (t[0], t[-1])

    def run_dop853():
        return solve_ivp(rhs, span, s0, method="DOP853", t_eval=t, rtol=1e-12, atol=1e-12)

    def run_rk45(state=s0, rhs_=rhs):
        return solve_ivp(rhs_, span, state, method="RK45", t_eval=t)

    def run_rk45_fd_jacobian():
        base = run_rk45()
        cols = []
        for j in range(4):
            s = s0.copy()
            h = 1e-7 * max(1.0, abs(s[j]))
            s[j] += h
            cols.append((run_rk45(s).y[:2] - base.y[:2]) / h)
        h = 1e-7
        cols.append(
            (run_rk45(s0, _scipy_rhs(specimen, RHO, STANDARD_GRAVITY, CD + h)).y[:2] - base.y[:2])
            / h
        )
        return base, cols

    fm = FlightModel(t, specimen, conditions)
    theta = np.array([*s0, CD])

    timings = {
        "fitdrag simulate, with sensitivities (5 params)": _per_call(
            lambda: simulate(t, launch, specimen, conditions, drag_params=CD, sensitivities=True),
            args.repeats,
        ),
        "fitdrag simulate, positions only": _per_call(
            lambda: simulate(t, launch, specimen, conditions, drag_params=CD), args.repeats
        ),
        "fitdrag FlightModel.run, with sensitivities": _per_call(
            lambda: fm.run(theta, True), args.repeats
        ),
        "scipy solve_ivp DOP853 rtol=atol=1e-12": _per_call(run_dop853, args.repeats),
        "scipy solve_ivp RK45 default tolerances": _per_call(run_rk45, args.repeats),
        "scipy RK45 + forward-difference Jacobian (6 runs)": _per_call(
            run_rk45_fd_jacobian, args.repeats
        ),
    }

    ref = run_dop853()
    f_sens = simulate(t, launch, specimen, conditions, drag_params=CD, sensitivities=True)
    f_plain = simulate(t, launch, specimen, conditions, drag_params=CD)
    rk45 = run_rk45()

    def max_diff(x, y):
        return max(np.max(np.abs(x - ref.y[0])), np.max(np.abs(y - ref.y[1])))

    diffs = {
        "fitdrag simulate, with sensitivities (5 params)": max_diff(f_sens.x, f_sens.y),
        "fitdrag simulate, positions only": max_diff(f_plain.x, f_plain.y),
        "fitdrag FlightModel.run, with sensitivities": max_diff(*fm.run(theta, True)[1].T),
        "scipy solve_ivp DOP853 rtol=atol=1e-12": 0.0,
        "scipy solve_ivp RK45 default tolerances": max_diff(rk45.y[0], rk45.y[1]),
        "scipy RK45 + forward-difference Jacobian (6 runs)": max_diff(rk45.y[0], rk45.y[1]),
    }

    print(f"flight: {DIAMETER * 1e3:.0f} mm, {MASS * 1e3:.1f} g sphere, C_d {CD}, "
          f"{SPEED} m/s at {ANGLE}°, {N_SAMPLES} samples over {DURATION} s, "
          f"air {RHO} kg/m³, buoyancy and added mass on")  # fmt: skip
    print(f"fitdrag first call in this process (numba compile or cache load): {first_call:.2f} s")
    print(f"fitdrag steps taken: {f_sens.steps} (with sensitivities), {f_plain.steps} (without); "
          f"DOP853 right-hand-side evaluations: {ref.nfev}")  # fmt: skip
    print(f"median of {args.repeats} batches, time per call:")
    width = max(len(k) for k in timings)
    print(f"  {'method':<{width}}  {'per call':>11}  {'max |Δpos| vs DOP853':>21}")
    for name, dt in timings.items():
        print(f"  {name:<{width}}  {dt * 1e6:9.1f} µs  {diffs[name]:19.2e} m")
    ours = timings["fitdrag simulate, with sensitivities (5 params)"]
    ours_plain = timings["fitdrag simulate, positions only"]
    ours_run = timings["fitdrag FlightModel.run, with sensitivities"]
    dop = timings["scipy solve_ivp DOP853 rtol=atol=1e-12"]
    rk = timings["scipy solve_ivp RK45 default tolerances"]
    rk_jac = timings["scipy RK45 + forward-difference Jacobian (6 runs)"]
    print("ratios:")
    print(f"  DOP853 1e-12 / fitdrag with sensitivities     : {dop / ours:8.1f}x")
    print(f"  DOP853 1e-12 / fitdrag positions only         : {dop / ours_plain:8.1f}x")
    print(f"  RK45 default / fitdrag with sensitivities     : {rk / ours:8.1f}x")
    print(f"  RK45 default / fitdrag positions only         : {rk / ours_plain:8.1f}x")
    print(f"  RK45 + FD Jacobian / FlightModel.run with sens: {rk_jac / ours_run:8.1f}x")
    print(f"  fitdrag with / without sensitivities          : {ours / ours_plain:8.2f}x")
    _bench_3d(args, specimen, t, ours_run)
    return 0


CL_3D, WIND_3D, AXIS_3D, OUT_OF_PLANE = 0.1, (0.5, 0.0, -0.3), (0.2, 0.1, 1.0), 1.0


def _scipy_rhs_3d(specimen, rho, mu, g, cd):
    m_eff = specimen.mass + specimen.added_mass_coefficient * rho * specimen.volume
    g_net = g * (specimen.mass - rho * specimen.volume) / m_eff
    k = rho * specimen.area / (2.0 * m_eff)
    w = np.array(WIND_3D)
    s_hat = np.array(AXIS_3D) / np.linalg.norm(AXIS_3D)

    def rhs(_, s):
        u = s[3:] - w
        q = math.sqrt(u @ u)
        a = -k * q * (cd * u - CL_3D * np.cross(s_hat, u))
        a[1] -= g_net
        return np.concatenate((s[3:], a))

    return rhs


def _bench_3d(args, specimen, t, planar_run) -> None:
    """The 3-D simulator next to the planar one and a 3-D solve_ivp (see the module doc)."""
    conditions = Conditions(Air(RHO))
    launch = Launch3D.from_speed_angles(SPEED, ANGLE, OUT_OF_PLANE)
    s0 = launch.as_array()
    kw = {"drag_params": CD, "lift_coefficient": CL_3D, "wind": WIND_3D, "spin_axis": AXIS_3D}
    t0 = time.perf_counter()
    simulate_3d(t, launch, specimen, conditions, sensitivities=True, **kw)
    first_call = time.perf_counter() - t0
    # two cameras at 400 frames/s, the second 0.7 ms behind, rows read out over 1 ms
    frames = np.arange(N_SAMPLES) / N_SAMPLES * DURATION
    rows = np.random.default_rng(3).uniform(0.0, 1e-3, (2, N_SAMPLES))
    t_two = np.sort(np.r_[frames + rows[0], frames + 7e-4 + rows[1]])
    fm = FlightModel3D(t, specimen, conditions, fit_lift=True, wind=WIND_3D, spin_axis=AXIS_3D)
    fm_two = FlightModel3D(t_two, specimen, conditions, fit_lift=True, wind=WIND_3D,
                           spin_axis=AXIS_3D, t0=0.0)  # fmt: skip
    theta = np.array([*s0, CD, CL_3D])
    rhs = _scipy_rhs_3d(specimen, RHO, conditions.air.viscosity, STANDARD_GRAVITY, CD)

    def dop853(times, t_start):
        return solve_ivp(rhs, (t_start, times[-1]), s0, method="DOP853", t_eval=times,
                         rtol=1e-12, atol=1e-12)  # fmt: skip

    def rk45():
        return solve_ivp(rhs, (t[0], t[-1]), s0, method="RK45", t_eval=t)

    rows_out = {
        "simulate_3d, with sensitivities (8 params)": (
            lambda: simulate_3d(t, launch, specimen, conditions, sensitivities=True,
                                fit_lift=True, **kw),  # fmt: skip
            lambda: simulate_3d(t, launch, specimen, conditions, sensitivities=True,
                                fit_lift=True, **kw).position,  # fmt: skip
            t,
        ),
        "simulate_3d, positions only": (
            lambda: simulate_3d(t, launch, specimen, conditions, **kw),
            lambda: simulate_3d(t, launch, specimen, conditions, **kw).position,
            t,
        ),
        "FlightModel3D.run, with sensitivities": (
            lambda: fm.run(theta, True), lambda: fm.run(theta, True)[1], t,
        ),
        "FlightModel3D.run, 2 cameras, 800 row times": (
            lambda: fm_two.run(theta, True), lambda: fm_two.run(theta, True)[1], t_two,
        ),
        "scipy solve_ivp DOP853 3-D rtol=atol=1e-12": (
            lambda: dop853(t, t[0]), lambda: dop853(t, t[0]).y[:3].T, t,
        ),
        "scipy solve_ivp RK45 3-D default tolerances": (rk45, lambda: rk45().y[:3].T, t),
    }  # fmt: skip
    refs = {id(t): dop853(t, t[0]).y[:3].T, id(t_two): dop853(t_two, 0.0).y[:3].T}
    print()
    print(f"3-D: the same flight {OUT_OF_PLANE}° out of the board plane, C_L {CL_3D} about "
          f"spin axis {AXIS_3D}, wind {WIND_3D} m/s")  # fmt: skip
    print(f"fitdrag 3-D first call in this process (numba compile or cache load): "
          f"{first_call:.2f} s")  # fmt: skip
    width = max(len(k) for k in rows_out)
    print(f"  {'method':<{width}}  {'per call':>11}  {'max |Δpos| vs DOP853':>21}")
    timings = {}
    for name, (fn, positions, times) in rows_out.items():
        timings[name] = _per_call(fn, args.repeats)
        diff = float(np.max(np.abs(positions() - refs[id(times)])))
        print(f"  {name:<{width}}  {timings[name] * 1e6:9.1f} µs  {diff:19.2e} m")
    ours = timings["FlightModel3D.run, with sensitivities"]
    print("ratios:")
    print(f"  3-D / planar FlightModel.run with sensitivities  : {ours / planar_run:8.2f}x")
    print(f"  DOP853 3-D 1e-12 / FlightModel3D.run with sens.  : "
          f"{timings['scipy solve_ivp DOP853 3-D rtol=atol=1e-12'] / ours:8.1f}x")  # fmt: skip
    print(f"  RK45 3-D default / FlightModel3D.run with sens.  : "
          f"{timings['scipy solve_ivp RK45 3-D default tolerances'] / ours:8.1f}x")  # fmt: skip


if __name__ == "__main__":
    raise SystemExit(main())
