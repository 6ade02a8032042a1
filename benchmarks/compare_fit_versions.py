"""Does a change of the fit move its answers?  The fit of this checkout against that of an
earlier revision, on the same synthetic tracks.

Each of ``--seeds`` seeds gives, for each flight of ``bench_fit.FLIGHTS`` (truth from the
independent scipy DOP853 integration of tests/reference.py), one track with white noise and
one with AR(1) noise (φ = 0.8); every third seed also moves three frames by 20 σ along x
(outliers).  Both versions fit every track with ``fit_tracks`` defaults, each in its own
process (the earlier one from a temporary ``git worktree`` of ``--against``, put first on the
module path).  Printed: the largest and median |ΔCd| in units of the earlier u(Cd), the
largest relative change of u(Cd), whether the noise model chosen and the success flag agree
on every track, and the RMS of (Cd − truth)/u for each version.  Nothing is asserted.

Usage::

    python benchmarks/compare_fit_versions.py --against d2b991e [--seeds 15]
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]

# Run in a child process with the version to test first on sys.path; prints one JSON list of
# (Cd, u(Cd), (Cd - truth)/u, AR(1) chosen, success) per track.
_CHILD = """
import json, sys
root, bench, tests, seeds = sys.argv[1], sys.argv[2], sys.argv[3], int(sys.argv[4])
sys.path[:0] = [root, bench, tests]
import numpy as np
import fitdrag
import reference as ref
from bench_fit import FLIGHTS

assert fitdrag.__file__.startswith(root), fitdrag.__file__
air = fitdrag.Air(ref.RHO, ref.MU)
out = []
for seed in range(seeds):
    rng = np.random.default_rng(1000 + seed)
    for noise in ("white", "ar1"):
        for sc in FLIGHTS.values():
            xy = sc.truth()
            if noise == "white":
                ex, ey = rng.normal(0, sc.sigma, sc.n), rng.normal(0, sc.sigma, sc.n)
            else:
                ex = ref.ar1_noise(rng, sc.n, sc.sigma, 0.8)
                ey = ref.ar1_noise(rng, sc.n, sc.sigma, 0.8)
            if seed % 3 == 2:
                k = rng.choice(sc.n, 3, replace=False)
                ex[k] += 20 * sc.sigma
            r = fitdrag.fit_tracks(fitdrag.Track(sc.t, xy[:, 0] + ex, xy[:, 1] + ey),
                                   fitdrag.Sphere(sc.mass, sc.diameter), air)
            out.append((r.cd, r.u_cd, (r.cd - sc.cd) / r.u_cd, r.noise["model"] == "ar1",
                        bool(r.success)))
print(json.dumps(out))
"""


def _results(root: Path, seeds: int) -> np.ndarray:
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    out = subprocess.run(
        [sys.executable, "-c", _CHILD, str(root), str(ROOT / "benchmarks"), str(ROOT / "tests"),
         str(seeds)],
        capture_output=True, text=True, check=True, env=env, cwd=str(root),
    )  # fmt: skip
    return np.array(json.loads(out.stdout.splitlines()[-1]), float)


def main() -> None:
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--against", required=True, help="the earlier git revision")
    p.add_argument("--seeds", type=int, default=15, help="seeds (8 tracks each)")
    args = p.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        old_root = Path(tmp) / "earlier"
        subprocess.run(["git", "-C", str(ROOT), "worktree", "add", "--detach", "-q",
                        str(old_root), args.against], check=True)  # fmt: skip
        try:
            old = _results(old_root, args.seeds)
        finally:
            subprocess.run(["git", "-C", str(ROOT), "worktree", "remove", "--force",
                            str(old_root)], check=True)  # fmt: skip
    new = _results(ROOT, args.seeds)
    d = np.abs(new[:, 0] - old[:, 0]) / old[:, 1]
    du = np.abs(new[:, 1] / old[:, 1] - 1.0)
    print(f"fit of this checkout against {args.against}: {len(d)} synthetic tracks "
          f"({args.seeds} seeds x 4 flights x white/AR(1); every third seed with outliers)")  # fmt: skip
    print(f"  |dCd| / u(Cd): largest {d.max():.2g}, median {np.median(d):.2g}")
    print(f"  u(Cd): largest relative change {100 * du.max():.2g} %")
    print(f"  noise model the same on every track: {np.array_equal(old[:, 3], new[:, 3])}; "
          f"success the same: {np.array_equal(old[:, 4], new[:, 4])} "
          f"(earlier {int(old[:, 4].sum())}/{len(d)}, now {int(new[:, 4].sum())}/{len(d)})")  # fmt: skip
    print(f"  RMS (Cd - truth)/u: earlier {np.sqrt(np.mean(old[:, 2] ** 2)):.3f}, "
          f"now {np.sqrt(np.mean(new[:, 2] ** 2)):.3f}")  # fmt: skip


if __name__ == "__main__":
    main()
