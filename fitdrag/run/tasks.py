"""Running many independent pieces of work as tasks on Dask (local processes or a cluster).

A :class:`Task` is a picklable function call with a key; an argument may be a :class:`Need`,
the result of another task.  :func:`run_tasks` runs them

* on a ``dask.distributed`` cluster the lab already runs (``scheduler="tcp://host:8786"``:
  the address its scheduler prints), or
* on a local cluster of ``workers`` processes started for the run and closed after it
  (the default; one thread per process, so the numerical libraries do not compete), or
* in this process, one after another, with ``workers=0`` (no Dask at all).

Every task runs to its end: a task that fails is reported with its label (which names the
specimen and the file) and the exception, the tasks that need it are reported as failed
with the same exception, and all others finish.  The results do not depend on where the
tasks ran: each task is a pure function of its arguments.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

from fitdrag.errors import InputError

__all__ = ["Need", "Task", "TaskOutcome", "default_workers", "run_tasks"]


@dataclass(frozen=True)
class Need:
    """Placeholder argument: the result of the task ``key``."""

    key: str


@dataclass(frozen=True)
class Task:
    """One function call to run as a task.

    Attributes
    ----------
    key : str
        Unique name of the task.
    fn : callable
        A module-level function (it is pickled by reference).
    args : tuple
        Its positional arguments; a :class:`Need` is replaced by that task's result.
    label : str
        What the task works on, in words, for messages ("specimen TB-03, file x.avi").
    """

    key: str
    fn: Callable
    args: tuple = ()
    label: str = ""

    @property
    def needs(self) -> tuple[str, ...]:
        return tuple(a.key for a in self.args if isinstance(a, Need))


@dataclass(frozen=True)
class TaskOutcome:
    """The result of a task, or its failure.

    Attributes
    ----------
    key, label : str
        The task.
    value : Any
        Its result (None if it failed).
    error : BaseException or None
        The exception it (or a task it needed) raised.
    failed_task : str
        Label of the task that raised (itself, or one it needed).
    """

    key: str
    label: str
    value: Any = None
    error: BaseException | None = None
    failed_task: str = ""

    @property
    def ok(self) -> bool:
        return self.error is None


def default_workers() -> int:
    """Processes of a local run: the CPUs this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


def _check(tasks: Sequence[Task]) -> None:
    keys = [t.key for t in tasks]
    if len(set(keys)) != len(keys):
        raise InputError("tasks: two tasks share a key; give each task its own key.")
    seen: set[str] = set()
    for t in tasks:
        for k in t.needs:
            if k not in seen:
                raise InputError(
                    f"tasks: {t.key!r} needs {k!r}, which is not an earlier task; list the "
                    f"tasks in an order where each comes after those it needs."
                )
        seen.add(t.key)


def _in_process(tasks: Sequence[Task], bar) -> dict[str, TaskOutcome]:
    out: dict[str, TaskOutcome] = {}
    for t in tasks:
        failed = [out[k] for k in t.needs if not out[k].ok]
        if failed:
            f = failed[0]
            out[t.key] = TaskOutcome(t.key, t.label, None, f.error, f.failed_task)
        else:
            args = [out[a.key].value if isinstance(a, Need) else a for a in t.args]
            try:
                out[t.key] = TaskOutcome(t.key, t.label, t.fn(*args))
            except Exception as exc:  # every task runs; the caller reports the failure
                out[t.key] = TaskOutcome(t.key, t.label, None, exc, t.label)
        bar.update(1)
    return out


def _on_dask(tasks: Sequence[Task], client, bar) -> dict[str, TaskOutcome]:
    from distributed import as_completed

    futures: dict[str, Any] = {}
    for t in tasks:
        args = [futures[a.key] if isinstance(a, Need) else a for a in t.args]
        futures[t.key] = client.submit(t.fn, *args, key=f"fitdrag-{t.key}-{id(t)}", pure=False,
                                       retries=0)  # fmt: skip
    by_future = {f.key: k for k, f in futures.items()}
    errors: dict[str, BaseException] = {}
    for fut in as_completed(list(futures.values())):
        if fut.status == "error":
            errors[by_future[fut.key]] = fut.exception()
        bar.update(1)
    out: dict[str, TaskOutcome] = {}
    for t in tasks:  # in order: a task's needs are decided before it
        failed = [out[k] for k in t.needs if not out[k].ok]
        if failed:
            f = failed[0]
            out[t.key] = TaskOutcome(t.key, t.label, None, f.error, f.failed_task)
        elif t.key in errors:
            out[t.key] = TaskOutcome(t.key, t.label, None, errors[t.key], t.label)
        else:
            out[t.key] = TaskOutcome(t.key, t.label, futures[t.key].result())
    for f in futures.values():
        f.release()
    return out


def run_tasks(tasks: Sequence[Task], *, scheduler: str | None = None,
              workers: int | None = None, progress: bool = False,
              description: str = "tasks") -> dict[str, TaskOutcome]:  # fmt: skip
    """Run every task; the outcome of each, by key.

    Parameters
    ----------
    tasks : sequence of Task
        In an order where each task comes after those it needs.
    scheduler : str, optional
        Address of a running ``dask.distributed`` scheduler (``tcp://host:8786``); None
        starts a local cluster of ``workers`` processes for the run.
    workers : int, optional
        Processes of the local cluster (default :func:`default_workers`, at most the number
        of tasks); 0 runs the tasks in this process without Dask.  Ignored with
        ``scheduler``.
    progress : bool
        Show a progress bar (on standard error).
    description : str
        The progress bar's label.
    """
    from tqdm.auto import tqdm

    _check(tasks)
    if workers is not None and workers < 0:
        raise InputError(f"workers: must be >= 0, got {workers}; 0 runs the tasks in this process.")
    with tqdm(total=len(tasks), desc=description, disable=not progress, unit="task") as bar:
        if scheduler is None and workers == 0:
            return _in_process(tasks, bar)
        from distributed import Client

        if scheduler is not None:
            try:
                client = Client(scheduler, timeout="10s")
            except OSError as exc:
                raise InputError(
                    f"--scheduler: no Dask scheduler answers at {scheduler!r} ({exc}); give the "
                    f"address the scheduler printed (e.g. tcp://10.0.0.5:8786), or leave the "
                    f"option out to run on this machine."
                ) from None
            with client:
                return _on_dask(tasks, client, bar)
        from distributed import LocalCluster

        n = min(default_workers() if workers is None else workers, max(1, len(tasks)))
        import logging

        # a task's failure is reported by run_tasks; the workers' own log of it is noise
        with LocalCluster(n_workers=n, threads_per_worker=1, processes=True,
                          dashboard_address=None, host="127.0.0.1",
                          silence_logs=logging.CRITICAL) as cluster:  # fmt: skip
            with Client(cluster) as client:
                return _on_dask(tasks, client, bar)
