"""Does the budget cover the flight's physics?  Spin, room air and the drag law (issue 14).

Independent flights, integrated here by scipy's solve_ivp (DOP853, rtol = atol = 1e-12)
from this script's own force model, written out below from the equation of motion with
buoyancy and added mass (Timmerman & van der Weele, Am. J. Phys. 67, 1999, eq. 1; added mass
½ ρV, Lamb 1932 §92): gravity, buoyancy, quadratic drag with C_d (constant or a published
curve), a lift ½ ρ C_L A |u| turned +90° from the air speed u = v − w (backspin lifts a ball
moving in +x), and a constant wind vector w.  None of fitdrag's simulator is used to make
them.

A synthetic 24 g, 65 mm foam ball (true Cd 0.50 unless stated), launched at 9 m/s, 30° up,
1 m above the floor, filmed at 500 frames/s for 200 frames, positions with 0.3 mm white
noise, is measured as ``fitdrag run`` measures a track file (``measure`` of
fitdrag.run.pipeline on a job file written here; the flight is exactly in the image plane,
so ``out_of_plane_uncertainty = 0``; air density stated).  Cases:

* ``still``      — no spin, still air, job ``air_speed_uncertainty = 0``: U with the lift test
                   (default job) against U of today's budget (``lift = false``, no new lines);
* ``backspin``   — C_L = 0.05 and 0.10, default job (lift test on), air_speed_uncertainty 0;
* ``draft``      — an undeclared 0.1 m/s draft (head and tail wind, horizontal), declared only
                   as ``air_speed_uncertainty = 0.1``;
* ``curve``      — Cd following the Clift & Gauvin curve (as printed in Clift, Grace & Weber
                   1978) times 1.05, fitted with ``sphere-scaled`` (Morrison 2013): the
                   drag-law line must cover the difference (truth: the curve at the fit's
                   median Re);
* false alarms   — how often the lift test calls lift present in flights without spin
                   (stated false-alarm rate 1 %).

Printed per case and seed: Cd, U, the truth, |Cd − truth|/U (target <= 1), and the lift test's
decision; for ``still`` the U before and after (target: after <= 1.10 × before).

Usage::

    python -P benchmarks/bench_physics_budget.py [--seeds 3] [--false-alarm-runs 300]
"""

from __future__ import annotations

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import math  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
import warnings  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
from scipy.integrate import solve_ivp  # noqa: E402

from fitdrag.fit.lift_check import check_lift  # noqa: E402
from fitdrag.physics.air import Air  # noqa: E402
from fitdrag.physics.specimen import Sphere  # noqa: E402
from fitdrag.run.job_file import load_job  # noqa: E402
from fitdrag.run.pipeline import measure  # noqa: E402
from fitdrag.tracks.track import Track  # noqa: E402

MASS, DIAMETER = 0.024, 0.065  # [kg], [m]
RHO, MU, G = 1.19, 1.81e-5, 9.81  # [kg/m³], [Pa s], [m/s²]
SPEED, ANGLE, Y0 = 9.0, 30.0, 1.0  # [m/s], [deg], [m]
FPS, FRAMES, NOISE = 500.0, 200, 3e-4  # [Hz], [-], [m]
CD = 0.50


def clift_gauvin_1978(re):
    """C_d of a smooth sphere, Clift & Gauvin (1970) as printed in Clift, Grace & Weber,
    Bubbles, Drops, and Particles (1978), ch. 5 — written out here from the paper's form."""
    return 24.0 / re * (1.0 + 0.15 * re**0.687) + 0.42 / (1.0 + 4.25e4 * re**-1.16)


def flight(cd_of_re, *, lift=0.0, wind=(0.0, 0.0)):
    """Positions (n, 2) [m] at the frame times: this script's own force model by solve_ivp."""
    vol = math.pi * DIAMETER**3 / 6.0
    area = math.pi * DIAMETER**2 / 4.0
    m_eff = MASS + 0.5 * RHO * vol
    weight = (MASS - RHO * vol) * G
    wx, wy = wind

    def rhs(_t, s):
        ux, uy = s[2] - wx, s[3] - wy
        q = math.hypot(ux, uy)
        f = 0.5 * RHO * area * q
        cd = cd_of_re(RHO * q * DIAMETER / MU)
        # drag along −u; lift along u turned by +90°: (−u_y, u_x)
        ax = (-f * cd * ux - f * lift * uy) / m_eff
        ay = (-weight - f * cd * uy + f * lift * ux) / m_eff
        return [s[2], s[3], ax, ay]

    a = math.radians(ANGLE)
    t = np.arange(FRAMES) / FPS
    sol = solve_ivp(rhs, (0.0, t[-1]), [0.0, Y0, SPEED * math.cos(a), SPEED * math.sin(a)],
                    method="DOP853", t_eval=t, rtol=1e-12, atol=1e-12)  # fmt: skip
    assert sol.success, sol.message
    return t, np.column_stack((sol.y[0], sol.y[1]))


def noisy(t, xy, seed):
    rng = np.random.default_rng(seed)
    return t, xy + rng.normal(0.0, NOISE, xy.shape)


JOB = """\
[laboratory]
name = "Benchmark laboratory (synthetic)"
[test]
customer = "nobody (synthetic)"
operator = "benchmark"
date = 2026-01-01
[specimen]
id = "FOAM-65"
description = "foam ball 65 mm (synthetic)"
mass = 0.024
mass_uncertainty = 2e-5
diameter = 0.065
diameter_uncertainty = 8e-5
[air]
density = {rho}
density_uncertainty = 0.003
viscosity = {mu}
viscosity_uncertainty = 0.0
air_speed_uncertainty = {u_air}
[site]
gravity = {g}
gravity_uncertainty = 0.0005
[camera]
fps = {fps}
fps_uncertainty = 0.005
scale_relative_uncertainty = 0.001
distance = 3.0
distance_uncertainty = 0.03
out_of_plane_uncertainty = 0.0
[[throws]]
track = "throw.csv"
[fit]
model = "{model}"
{lift}
[output]
directory = "certificates"
"""


def run_job(folder: Path, t, xy, *, u_air=0.0, lift=None, model="constant"):
    """Measure one track through a job file, as ``fitdrag run`` does (no certificate)."""
    rows = "".join(
        f"{a!r},{b!r},{c!r}\n" for a, b, c in zip(t.tolist(), xy[:, 0].tolist(), xy[:, 1].tolist())
    )
    (folder / "throw.csv").write_text("t,x,y\n" + rows)
    lift_line = "" if lift is None else f"lift = {str(lift).lower()}"
    (folder / "job.toml").write_text(JOB.format(rho=RHO, mu=MU, g=G, fps=FPS, u_air=u_air,
                                                model=model, lift=lift_line))  # fmt: skip
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the still-air warning of air_speed_uncertainty = 0
        return measure(load_job(folder / "job.toml"))


def row(label, meas, truth):
    cd, big_u = meas.fit.cd, meas.budget.expanded_uncertainty
    lift = meas.content.flight_physics["lift"]
    decision = ("lift fitted" if lift["fitted"] else "no lift") if lift["tested"] else "not tested"
    ratio = abs(cd - truth) / big_u
    print(f"  {label:<34} Cd {cd:.5f}  U {big_u:.5f}  truth {truth:.5f}  "
          f"|Cd-truth|/U {ratio:5.2f}  {'ok ' if ratio <= 1 else 'OUT'}  {decision}")  # fmt: skip
    return ratio


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seeds", type=int, default=3, help="noise seeds per case")
    ap.add_argument("--false-alarm-runs", type=int, default=300,
                    help="flights without spin for the lift test's false-alarm count")  # fmt: skip
    args = ap.parse_args()
    seeds = range(1, args.seeds + 1)
    t0 = time.perf_counter()
    worst = 0.0
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        print("24 g / 65 mm ball, 9 m/s at 30°, 500 frames/s x 200, 0.3 mm noise, "
              "true Cd 0.50 (independent solve_ivp flights)")  # fmt: skip

        print("\nstill air, no spin: U of the default job against today's budget")
        t, xy = flight(lambda re: CD)
        growth = []
        for s in seeds:
            tn, xn = noisy(t, xy, s)
            before = run_job(folder, tn, xn, lift=False)
            after = run_job(folder, tn, xn)
            ub, ua = before.budget.expanded_uncertainty, after.budget.expanded_uncertainty
            growth.append(ua / ub)
            worst = max(worst, row(f"seed {s} default job", after, CD))
            print(f"    U before {ub:.5f} (lift = false, no new lines)  after {ua:.5f}  "
                  f"ratio {ua / ub:.3f}")  # fmt: skip
        print(f"  U after / U before: max {max(growth):.3f} (target <= 1.10)")

        for cl in (0.05, 0.10):
            print(f"\nbackspin C_L = {cl:.2f}, default job (air_speed_uncertainty = 0)")
            t, xy = flight(lambda re: CD, lift=cl)
            for s in seeds:
                m = run_job(folder, *noisy(t, xy, s))
                worst = max(worst, row(f"seed {s}", m, CD))
                if m.fit.lift:
                    c, u = m.fit.parameter("lift_coefficient")
                    print(f"    fitted C_L = {c:.4f} ± {u:.4f} (truth {cl:.2f})")
                print(f"    today (lift = false): Cd {_today(folder, t, xy, s)}")

        for w in (0.1, -0.1):
            print(f"\nundeclared draft {w:+.1f} m/s (horizontal), declared only as "
                  f"air_speed_uncertainty = 0.1")  # fmt: skip
            t, xy = flight(lambda re: CD, wind=(w, 0.0))
            for s in seeds:
                m = run_job(folder, *noisy(t, xy, s), u_air=0.1)
                worst = max(worst, row(f"seed {s}", m, CD))
                line = m.budget.line("air_speed")
                print(f"    air_speed line: sensitivity {line.sensitivity:.4f} per m/s, "
                      f"contribution {abs(line.contribution):.5f}")  # fmt: skip

        print("\nCd on the Clift-Gauvin (1978) curve x 1.05, fitted with sphere-scaled "
              "(Morrison 2013), air_speed_uncertainty 0")  # fmt: skip
        t, xy = flight(lambda re: 1.05 * clift_gauvin_1978(re))
        for s in seeds:
            m = run_job(folder, *noisy(t, xy, s), model="sphere-scaled")
            truth = 1.05 * clift_gauvin_1978(m.fit.diagnostics["reynolds_median"])
            worst = max(worst, row(f"seed {s}", m, truth))
            d = m.content.flight_physics["drag_law"]
            print(f"    drag-law line: half-width {d['half_width']:.5f} over "
                  f"{len(d['drag_coefficient_by_correlation'])} correlations; without it "
                  f"U would be {_without(m, 'drag_law'):.5f}")  # fmt: skip

    print(f"\nworst |Cd - truth|/U over the cases: {worst:.2f} (target <= 1)")
    n = args.false_alarm_runs
    if n:
        t, xy = flight(lambda re: CD)
        hits = 0
        for s in range(2000, 2000 + n):
            tn, xn = noisy(t, xy, s)
            c = check_lift(Track(tn, xn[:, 0], xn[:, 1]), Sphere(MASS, DIAMETER),
                           Air(RHO, viscosity=MU), gravity=G)  # fmt: skip
            hits += c.needed
        from scipy import stats

        lo = stats.beta.ppf(0.025, hits, n - hits + 1) if hits else 0.0
        hi = stats.beta.ppf(0.975, hits + 1, n - hits)
        print(f"lift test on {n} flights without spin: lift called present {hits} times "
              f"({100 * hits / n:.1f} %, Clopper-Pearson 95 % interval {100 * lo:.1f}-"
              f"{100 * hi:.1f} %; stated false-alarm rate 1 %)")  # fmt: skip
    print(f"done in {time.perf_counter() - t0:.0f} s")


def _today(folder, t, xy, seed) -> str:
    from fitdrag.errors import ConvergenceError

    try:
        m = run_job(folder, *noisy(t, xy, seed), lift=False)
    except ConvergenceError as exc:
        return f"refused ({str(exc)[:70]}...)"
    return f"{m.fit.cd:.5f} (|Cd-truth|/U {abs(m.fit.cd - CD) / m.budget.expanded_uncertainty:.1f})"


def _without(meas, name) -> float:
    b = meas.budget
    rest = sum(ln.contribution**2 for ln in b.lines if ln.name != name)
    return b.coverage_factor * math.sqrt(rest)


if __name__ == "__main__":
    main()
