"""Throughput of a footage lot on a dask.distributed cluster of 1 and of 2 workers.

A synthetic clip (the planar scene of fitdrag.run.planar_footage, rendered once into a
temporary folder) is every throw of a lot of N specimens x T throws
(fitdrag.run.lot_scene.write_footage_lot): each throw is tracked by its own task, each
specimen fitted by its own.  The lot is measured on a LocalCluster (127.0.0.1) of 1 worker
and of 2 workers (one thread each; the clusters are started before the clock starts), and
the throughput (specimens per second) and its ratio are printed.  Target: >= 1.7x on 2
workers.  The ratio needs two otherwise idle cores: on a shared machine it is lower.

Run:  python benchmarks/bench_lot_footage.py [--specimens 4] [--throws 2] [--frames 160]
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

SAMPLES = Path(__file__).resolve().parents[1] / "sample_tracks"


def _warm() -> None:
    import fitdrag.fit.fitting  # noqa: F401
    import fitdrag.run.pipeline  # noqa: F401
    import fitdrag.video.tracking  # noqa: F401


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--specimens", type=int, default=4)
    ap.add_argument("--throws", type=int, default=2)
    ap.add_argument("--frames", type=int, default=160, help="frames of the rendered clip")
    ap.add_argument("--repeats", type=int, default=1, help="runs per cluster size (best kept)")
    args = ap.parse_args(argv)

    from distributed import Client, LocalCluster

    from fitdrag.run.lot import measure_lot
    from fitdrag.run.lot_file import load_lot
    from fitdrag.run.lot_scene import write_footage_lot
    from fitdrag.run.planar_footage import make_planar_footage

    with tempfile.TemporaryDirectory() as d:
        clip = Path(d) / "clip.avi"
        t0 = time.perf_counter()
        make_planar_footage(clip, frames=args.frames)
        print(f"rendered {args.frames} frames of the planar scene in "
              f"{time.perf_counter() - t0:.1f} s ({clip.stat().st_size / 1e6:.1f} MB)")  # fmt: skip
        # the sample clip's job: its air, site, camera and specification; markers 0.1 m
        base = Path(d) / "base.toml"
        base.write_text((SAMPLES / "foam_ball_clip.toml").read_text(encoding="utf-8"),
                        encoding="utf-8")  # fmt: skip
        lot_file = write_footage_lot(Path(d), base, clip, specimens=args.specimens,
                                     throws=args.throws,
                                     throw_options={"markers": 0.1, "scale_uncertainty": 0.001})  # fmt: skip
        lot = load_lot(lot_file)
        n = len(lot.specimens)
        rates, results = {}, {}
        for workers in (1, 2):
            with LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                              host="127.0.0.1", dashboard_address=None) as cluster:  # fmt: skip
                # load the libraries in every worker before the clock starts
                with Client(cluster) as client:
                    client.run(_warm)
                best = float("inf")
                for _ in range(args.repeats):
                    t0 = time.perf_counter()
                    m = measure_lot(lot, scheduler=cluster.scheduler_address)
                    best = min(best, time.perf_counter() - t0)
                rates[workers] = n / best
                results[workers] = [r.drag_coefficient for r in m.specimens]
                print(f"{workers} worker(s): {n} specimens x {args.throws} throws "
                      f"({n * args.throws} tracking tasks, {n} fits) in {best:.1f} s: "
                      f"{rates[workers]:.3f} specimens/s; failures: {len(m.failures)}")  # fmt: skip
        ratio = rates[2] / rates[1]
        print(f"throughput on 2 workers / 1 worker: {ratio:.2f}x (target >= 1.7x); "
              f"CPUs available to this process: {len(os.sched_getaffinity(0))}; "
              f"same Cd on both: {results[1] == results[2]}")  # fmt: skip
    return 0


if __name__ == "__main__":
    sys.exit(main())
