"""Tests of fitdrag.run.tasks: tasks in this process and on a dask.distributed cluster
(a LocalCluster on the loopback address), failures isolated, results identical."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from fitdrag.run.lot import measure_lot
from fitdrag.run.lot_file import load_lot
from fitdrag.run.lot_scene import LotScene, write_footage_lot, write_lot
from fitdrag.run.tasks import Need, Task, run_tasks

SAMPLES = Path(__file__).resolve().parents[1] / "sample_tracks"


def _square(x):
    return x * x


def _add(a, b):
    return a + b


def _fail(x):
    raise ValueError(f"file {x}.csv: unreadable")


TASKS = [
    Task("a", _square, (3,), "specimen A"),
    Task("b", _fail, ("b1",), "specimen B, file b1.csv"),
    Task("c", _add, (Need("a"), 1), "specimen A, fit"),
    Task("d", _add, (Need("b"), 1), "specimen B, fit"),
]


def _check_outcomes(out):
    assert out["a"].value == 9 and out["c"].value == 10
    assert not out["b"].ok and str(out["b"].error) == "file b1.csv: unreadable"
    assert out["b"].failed_task == "specimen B, file b1.csv"
    # the task that needs a failed one fails with its error, naming the task that raised
    assert not out["d"].ok and out["d"].failed_task == "specimen B, file b1.csv"
    assert out["d"].label == "specimen B, fit"


def test_in_process_failures_are_isolated():
    """regression: a failing task is reported with its label; those that need it fail with
    its error; the others finish."""
    _check_outcomes(run_tasks(TASKS, workers=0))


def test_bad_task_lists():
    """regression: the exact messages for tasks out of order and a negative worker count."""
    with pytest.raises(ValueError) as e:
        run_tasks([TASKS[2], TASKS[0]], workers=0)
    assert str(e.value) == (
        "tasks: 'c' needs 'a', which is not an earlier task; list the tasks in an order where "
        "each comes after those it needs."
    )
    with pytest.raises(ValueError) as e:
        run_tasks(TASKS, workers=-1)
    assert str(e.value) == "workers: must be >= 0, got -1; 0 runs the tasks in this process."


@pytest.fixture(scope="module")
def cluster():
    from distributed import LocalCluster

    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                      dashboard_address=None) as c:  # fmt: skip
        yield c


def test_on_a_local_cluster(cluster, tmp_path):
    """closed-form/independent: on a 2-worker dask.distributed cluster at the loopback
    address the tasks give the same outcomes as in this process; a lot's specimens (tracks
    and footage, each footage file a task) are the same as measured here: bit for bit from
    track files, to 1e-12 from footage."""
    addr = cluster.scheduler_address
    assert addr.startswith("tcp://127.0.0.1:")
    _check_outcomes(run_tasks(TASKS, scheduler=addr))

    made = write_lot(tmp_path, LotScene(specimens=3, throws=2, frames=80))
    lot = load_lot(made.lot_file)
    here = measure_lot(lot, workers=0)
    there = measure_lot(lot, scheduler=addr)
    assert [r.drag_coefficient for r in there.specimens] == [
        r.drag_coefficient for r in here.specimens
    ]
    assert [r.expanded_uncertainty for r in there.specimens] == [
        r.expanded_uncertainty for r in here.specimens
    ]
    assert there.statistics.mean == here.statistics.mean
    assert there.statistics.tolerance.low == here.statistics.tolerance.low

    p = write_footage_lot(tmp_path, SAMPLES / "foam_ball_clip.toml",
                          SAMPLES / "foam_ball_clip.avi", specimens=2, throws=1)  # fmt: skip
    flot = load_lot(p)
    here = measure_lot(flot, workers=0)
    there = measure_lot(flot, scheduler=addr)
    # the tracker's compiled ball fit (fastmath) may be compiled afresh in a worker and loaded
    # from the on-disk cache here, which can order its sums differently: equal to 1e-12
    np.testing.assert_allclose([r.drag_coefficient for r in there.specimens],
                               [r.drag_coefficient for r in here.specimens], rtol=1e-12)  # fmt: skip


def test_no_scheduler_at_the_address():
    """regression: an address where no scheduler answers is bad input with the fix."""
    with pytest.raises(ValueError) as e:
        run_tasks(TASKS, scheduler="tcp://127.0.0.1:9")
    msg = str(e.value)
    assert msg.startswith("--scheduler: no Dask scheduler answers at 'tcp://127.0.0.1:9' (")
    assert msg.endswith(
        "); give the address the scheduler printed (e.g. tcp://10.0.0.5:8786), or leave the "
        "option out to run on this machine."
    )
