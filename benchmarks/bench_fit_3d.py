"""Benchmark: fitdrag's 3-D fit (``fit_views``) against a notebook baseline on the same views.

Synthetic observations of the invented lab's throw (tests/views_reference.py: a 65 mm, 24 g
foam ball at about 9 m/s, cameras 3 m away, f = 900 px, 1280 x 800 px, 500 frames/s, 200
frames, global shutter, no lens distortion; the exact outline of the sphere from
``Camera.sphere_outline`` plus seeded Gaussian noise of 0.05 px, stated to the fit as a
tracker states it).  Two set-ups:

* one camera with apparent diameters (the outline a tracker fits to the sphere's image, its
  depth diameter; the diameter scale fitted), and
* two cameras 40° apart, the second camera's frame 0 1.3 ms after the first's and that
  offset fitted (no diameters).

Each is fitted

* by fitdrag: :func:`fitdrag.fit.image_fit.fit_views` with its defaults (compiled 3-D
  Dormand–Prince integrator with forward sensitivities, closed-form projection Jacobians,
  noise levels estimated, AR(1) test), and
* by the notebook baseline written here: ``scipy.integrate.solve_ivp`` (RK45, rtol = atol =
  1e-9) of the 3-D flight with the same physics (gravity less buoyancy and quadratic drag
  with the added mass ½ ρ V in the inertia: Timmerman and van der Weele, Am. J. Phys. 67,
  538 (1999); Lamb, *Hydrodynamics*, §92), projected through the same cameras by OpenCV
  (``cv2.Rodrigues`` of the camera's rotation, ``cv2.projectPoints`` with its K and
  distortion), residuals in pixels divided by the stated noise, solved by ``lmfit.minimize``
  (``least_squares``, finite-difference Jacobian).  The baseline projects the centre of the
  sphere's image outline, whose normalised image coordinates are X Z / (Z² − ρ²) for a
  centre at (X, Y, Z) in the camera frame (the cone of tangent rays; Hartley and Zisserman,
  *Multiple View Geometry*, 2nd ed., 2004, sec. 8.3), by projecting the point
  (X, Y, (Z² − ρ²)/Z); its diameter is the depth diameter s 2 f ρ / sqrt(Z² − ρ²) (same
  source).  It starts from Cd = 0.5 and the launch state (and time offset) of fitdrag's own
  rough start (:mod:`fitdrag.fit.image_start`), computed inside the timed baseline.

It prints the median seconds per fit of each, their ratio, and the Cd difference in units
of fitdrag's standard uncertainty; then the median time of a budget's re-fit of each set-up
(full, :func:`fitdrag.fit.image_refit.refit_views`, and with the fit's Jacobian held,
:class:`fitdrag.fit.image_refit.ViewRefitSession`) over random budget-sized changes and
their largest Cd difference; then the cost of one evaluation of fitdrag's problem
(residuals and Jacobian) and of one baseline residual evaluation against the floor of one
call of the compiled 3-D integrator.  Timings are wall-clock on whatever machine runs this;
nothing is asserted.

Usage::

    python benchmarks/bench_fit_3d.py [--repeats 5] [--refits 30] [--profile]
"""

from __future__ import annotations

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import math  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from dataclasses import replace  # noqa: E402
from pathlib import Path  # noqa: E402

import cv2  # noqa: E402
import lmfit  # noqa: E402
import numpy as np  # noqa: E402
from scipy.integrate import solve_ivp  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))
import views_reference as ref  # noqa: E402
from bench_fit import per_call_us  # noqa: E402

from fitdrag.fit.image_fit import fit_views  # noqa: E402
from fitdrag.fit.image_refit import ViewRefitSession, rebuild_problem, refit_views  # noqa: E402
from fitdrag.fit.image_start import launch_from_track, start_track  # noqa: E402

SIGMA = 0.05  # centroid and diameter noise [px]
OFFSET = 1.3e-3  # second camera's frame 0 after the first's [s]
RTOL = 1e-9  # baseline solve_ivp tolerance


def setups(seed: int):
    """{label: views} for the two set-ups (seeded noise)."""
    rng = np.random.default_rng(seed)
    throw = ref.launch(1.5, speed=9.0, elevation=32.0, z0=0.02)
    one = ref.observe(ref.camera_at(0.0), throw, sigma=SIGMA, diameter_sigma=SIGMA, rng=rng,
                      name="camera 1", outline="depth")  # fmt: skip
    one = replace(one, sigma=SIGMA, diameter_sigma=SIGMA)
    two = []
    for i, yaw in enumerate((-20.0, 20.0)):
        v = ref.observe(ref.camera_at(yaw), throw, offset=OFFSET if i else 0.0, sigma=SIGMA,
                        diameter_sigma=SIGMA, rng=rng, name=f"camera {i + 1}")  # fmt: skip
        two.append(replace(v, sigma=SIGMA, diameter=None, diameter_sigma=None))
    return {"one camera + diameters": [one], "two cameras, offset fitted": two}


# ----------------------------------------------------------------------- notebook baseline


def _flight_constants(specimen, air, g=9.80665):
    """(k, g_net): a = −g_net ŷ − k |v| v with k = ρ A Cd / (2 m_eff) per unit Cd and
    g_net = g (m − ρ V) / m_eff, m_eff = m + ½ ρ V (buoyancy and added mass of a sphere)."""
    rho = air.density
    m_eff = specimen.mass + 0.5 * rho * specimen.volume
    return rho * specimen.area / (2.0 * m_eff), g * (specimen.mass - rho * specimen.volume) / m_eff


def notebook_fit(views, specimen, air):
    """The baseline: lmfit least_squares over solve_ivp RK45 and cv2.projectPoints."""
    radius = 0.5 * specimen.length
    k1, g_net = _flight_constants(specimen, air)
    use_d = len(views) == 1
    given = [0.0] + [None] * (len(views) - 1)
    t_start, pts, off_start = start_track(views, radius, [use_d] * len(views), given)
    fps = views[0].fps
    t_ref = min([0.0] + [s - 1.5 / fps for s in off_start[1:]])
    s0 = launch_from_track(t_start, pts, t_ref)
    cams = []
    for v in views:
        c = v.camera
        rvec, _ = cv2.Rodrigues(np.asarray(c.rotation, float))
        kmat = np.array([[c.fx, 0.0, c.cx], [0.0, c.fy, c.cy], [0.0, 0.0, 1.0]])
        dist = np.zeros(5) if not c.distortion else np.asarray(c.distortion, float)
        rot, _ = cv2.Rodrigues(rvec)
        cams.append((rot, np.asarray(c.translation, float), kmat, dist))

    params = lmfit.Parameters()
    params.add("cd", value=0.5, min=0.0, max=50.0)
    for name, val in zip(("x0", "y0", "z0", "vx0", "vy0", "vz0"), s0):
        params.add(name, value=float(val))
    for i in range(1, len(views)):
        params.add(f"dt{i}", value=off_start[i], min=off_start[i] - 1.5 / fps,
                   max=off_start[i] + 1.5 / fps)  # fmt: skip
    if use_d:
        params.add("scale", value=1.0, min=0.5, max=2.0)
    n_all = sum(len(v) for v in views)

    def rhs(_t, s, cd):
        vel = s[3:]
        a = -k1 * cd * math.sqrt(vel @ vel) * vel
        a[1] -= g_net
        return np.concatenate((vel, a))

    def residual(p):
        cd = p["cd"].value
        state = [p[n].value for n in ("x0", "y0", "z0", "vx0", "vy0", "vz0")]
        times = [v.frame_times + (p[f"dt{i}"].value if i else 0.0) for i, v in enumerate(views)]
        allt = np.concatenate(times)
        t_eval, inverse = np.unique(allt, return_inverse=True)  # sorted, ties merged
        sol = solve_ivp(rhs, (t_ref, t_eval[-1]), state, method="RK45", t_eval=t_eval,
                        rtol=RTOL, atol=RTOL, args=(cd,))  # fmt: skip
        if not sol.success or sol.y.shape[1] != t_eval.size:
            return np.full(3 * n_all, 1e6)
        pos = sol.y[:3].T[inverse]
        out, start = [], 0
        for v, (rot, tvec, kmat, dist), t in zip(views, cams, times):
            pc = pos[start : start + t.size] @ rot.T + tvec
            start += t.size
            z = pc[:, 2]
            q = z * z - radius * radius
            shifted = np.column_stack((pc[:, 0], pc[:, 1], q / z))  # outline centre's ray
            pix, _ = cv2.projectPoints(shifted, np.zeros(3), np.zeros(3), kmat, dist)
            pix = pix.reshape(-1, 2)
            out += [(v.u - pix[:, 0]) / v.sigma, (v.v - pix[:, 1]) / v.sigma]
            if use_d:
                d = p["scale"].value * 2.0 * math.sqrt(kmat[0, 0] * kmat[1, 1]) * radius
                d = d / np.sqrt(q)
                out.append((v.diameter - d) / v.diameter_sigma)
        return np.concatenate(out)

    out = lmfit.minimize(residual, params, method="least_squares", diff_step=1e-6)
    out.residual_function = residual
    return out


# ----------------------------------------------------------------------- measuring


def timed(fn, repeats):
    times, result = [], None
    for _ in range(repeats):
        t0 = time.perf_counter()
        result = fn()
        times.append(time.perf_counter() - t0)
    return float(np.median(times)), result


def evaluation_costs(views, result, baseline):
    """Median µs of one evaluation of fitdrag's problem (with Jacobian), of the baseline's
    residuals, and of one bare call of the compiled 3-D integrator (the floor)."""
    from fitdrag.physics import flight3d as F

    problem = rebuild_problem(result, views)
    theta = np.asarray(result.values, float)

    def full():
        problem.forget()
        problem.evaluate(theta)

    times = problem.observation_times(theta)
    allt = np.sort(np.concatenate(times))
    fm = problem.flight_model(allt)
    st = problem.sim_theta(theta)
    s0 = np.array(st[:6])
    p = np.concatenate((st[6 : 6 + fm.n_fit], fm.constants))
    n = allt.size
    pos, vel = np.empty((n, 3)), np.empty((n, 3))
    sens = np.empty((n, 6, fm.n_params))
    kernel = F._compiled_integrator_3d()
    address = fm.model.callback.address

    def floor(n_par):
        return lambda: kernel(address, fm.t0, fm.t, s0, p, fm.n_fit, 0.0, False, fm.k,
                              fm.g_net, fm.wind, fm.spin_axis, fm.re_fac, n_par, fm.rtol,
                              fm.atol, fm.max_steps, pos, vel, sens, F._dp.A, F._dp.E,
                              F._dp.P)  # fmt: skip

    return {
        "fitdrag evaluation, residuals + Jacobian": per_call_us(full),
        "compiled 3-D integrator with sensitivities (floor)": per_call_us(floor(fm.n_params)),
        "compiled 3-D integrator, positions only": per_call_us(floor(0)),
        "baseline residuals (solve_ivp + projectPoints)": per_call_us(
            lambda: baseline.residual_function(baseline.params), 10
        ),
    }


def refit_costs(views, result, trials: int, seed: int):
    """Median seconds of a full re-fit (:func:`refit_views`) and of a fixed-Jacobian re-solve
    (:class:`ViewRefitSession`) on ``trials`` random budget-sized changes (air density 0.5 %,
    mass 0.3 %, camera positions 0.01 %, new centroid noise), and their largest
    |Cd difference| / u(Cd)."""
    rng = np.random.default_rng(seed)
    session = ViewRefitSession(result, views)
    t_full, t_fast, worst, fell = [], [], 0.0, 0
    for _ in range(trials):
        air = replace(ref.AIR, density=ref.AIR.density * (1.0 + 0.005 * rng.normal()))
        sp = replace(ref.BALL, mass=ref.BALL.mass * (1.0 + 0.003 * rng.normal()))
        moved = []
        for v in views:
            cam = v.camera
            cam = cam.with_pose(cam.rotation, cam.translation * (1.0 + 1e-4 * rng.normal()))
            moved.append(replace(v, camera=cam, u=v.u + SIGMA * rng.normal(size=len(v)),
                                 v=v.v + SIGMA * rng.normal(size=len(v))))  # fmt: skip
        t0 = time.perf_counter()
        full = refit_views(result, moved, specimen=sp, air=air)
        t1 = time.perf_counter()
        fast = session.solve(moved, specimen=sp, air=air)
        t2 = time.perf_counter()
        t_full.append(t1 - t0)
        t_fast.append(t2 - t1)
        if fast is None:
            fell += 1
        else:
            worst = max(worst, abs(fast.cd - full.cd) / result.u_cd)
    return float(np.median(t_full)), float(np.median(t_fast)), worst, fell


def main() -> None:
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--repeats", type=int, default=5, help="timed fits per set-up (fitdrag)")
    p.add_argument("--seed", type=int, default=15, help="noise seed")
    p.add_argument("--refits", type=int, default=30, help="random changes for the re-fits")
    p.add_argument("--profile", action="store_true", help="cProfile fitdrag's fits")
    args = p.parse_args()
    print("fitdrag 3-D fit benchmark (synthetic views, 200 frames at 500 frames/s, noise "
          f"{SIGMA} px stated); baseline: lmfit least_squares over solve_ivp RK45 "
          f"(rtol = atol = {RTOL:g}) and cv2.projectPoints")  # fmt: skip
    cases = setups(args.seed)
    for views in cases.values():  # warm-up (numba's cache, imports), not timed
        fit_views(views, ref.BALL, ref.AIR)
    if args.profile:
        import cProfile
        import pstats

        for label, views in cases.items():
            prof = cProfile.Profile()
            prof.enable()
            for _ in range(args.repeats):
                fit_views(views, ref.BALL, ref.AIR)
            prof.disable()
            print(f"\nprofile of {args.repeats} fits, {label}:")
            pstats.Stats(prof).sort_stats("tottime").print_stats(18)
        return
    rows = []
    for label, views in cases.items():
        t_fd, r = timed(lambda views=views: fit_views(views, ref.BALL, ref.AIR), args.repeats)
        t_nb, o = timed(lambda views=views: notebook_fit(views, ref.BALL, ref.AIR),
                        max(1, args.repeats // 2))  # fmt: skip
        rows.append((label, views, t_fd, t_nb, r, o))
    print()
    print(f"{'set-up':28s} {'fitdrag s':>10s} {'baseline s':>10s} {'ratio':>6s} "
          f"{'Cd fitdrag':>11s} {'u':>8s} {'Cd baseline':>11s} {'dCd/u':>7s} "
          f"{'(Cd-true)/u':>11s} {'noise':>6s} {'evals':>9s}")  # fmt: skip
    for label, _v, t_fd, t_nb, r, o in rows:
        cd_nb = o.params["cd"].value
        ok = r.success and o.success
        print(f"{label:28s} {t_fd:10.4f} {t_nb:10.3f} {t_nb / t_fd:6.1f} {r.cd:11.6f} "
              f"{r.u_cd:8.2e} {cd_nb:11.6f} {(r.cd - cd_nb) / r.u_cd:+7.3f} "
              f"{(r.cd - ref.CD) / r.u_cd:+11.2f} {r.noise_model:>6s} "
              f"{r.iterations:4d}/{o.nfev:<4d}" + ("" if ok else "  NOT CONVERGED"))  # fmt: skip
    print("(evals: fitdrag's evaluations with Jacobian / the baseline's residual calls, "
          "finite differences included)")  # fmt: skip
    print()
    print(f"re-fits of the budget (median of {args.refits} random budget-sized changes):")
    for label, views, _t, _n, r, _o in rows:
        full, fast, worst, fell = refit_costs(views, r, args.refits, args.seed)
        print(f"  {label:28s} full re-fit {1e3 * full:6.2f} ms, fixed-Jacobian re-solve "
              f"{1e3 * fast:6.2f} ms ({full / fast:.1f}x); largest |dCd|/u {worst:.1e}"
              + (f"; {fell} fell back to the full re-fit" if fell else ""))  # fmt: skip
    for label, views, _t, _n, r, o in rows:
        costs = evaluation_costs(views, r, o)
        floor = costs["compiled 3-D integrator with sensitivities (floor)"]
        n_obs = sum(len(v) for v in views)
        print()
        print(f"cost of one evaluation, {label} ({n_obs} observations, median µs):")
        for name, us in costs.items():
            print(f"  {name:52s} {us:9.1f} µs   {us / floor:6.2f}x the floor")


if __name__ == "__main__":
    main()
