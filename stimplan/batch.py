"""Running a batch of independent computations, serially or in parallel with dask.

A batch is a list of :class:`Task` objects; a task may depend on earlier ones
and then receives their results as positional arguments. The same batch runs

* serially (``scheduler="serial"``),
* on local threads with dask (``"threads"``, the default when there is more
  than one task): NumPy, ``scipy.fft`` and the numba kernels release the GIL,
* or on an existing ``dask.distributed`` cluster (``scheduler="tcp://host:port"``
  or a ``distributed.Client``).

Every task is a pure function of its inputs and its own seed, so the results
do not depend on the scheduler. In a parallel batch each task runs with one
FFT thread and single-threaded kernels (no nested thread pools).

References
----------
.. [1] M. Rocklin, "Dask: parallel computation with blocked algorithms and
   task scheduling", *Proc. 14th Python in Science Conf.* (2015).
"""

from __future__ import annotations

import os
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

from .errors import ConfigError

__all__ = ["Task", "run_batch", "parallel_workers", "SCHEDULERS"]

SCHEDULERS = ("serial", "threads", "sync")


@dataclass(frozen=True)
class Task:
    """One computation of a batch.

    Parameters
    ----------
    fn : callable
        Called as ``fn(*dep_results, workers=w)``; ``w`` is the number of FFT
        threads the task may use (-1: all cores, 1: one).
    deps : tuple of int
        Indices of earlier tasks whose results ``fn`` receives.
    label : str
    after : tuple of int
        Indices of earlier tasks this one should start after, though it does
        not need their results: an order for the local threads only (dask's
        local scheduler runs a finished task's dependents before other ready
        tasks, so a long independent task can start late). Ignored by the
        serial and distributed schedulers.
    """

    fn: Callable[..., Any]
    deps: tuple[int, ...] = field(default=())
    label: str = ""
    after: tuple[int, ...] = field(default=())


def parallel_workers() -> int:
    """Worker threads of a local parallel batch (the number of usable cores)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


def _check(tasks: Sequence[Task]) -> None:
    for i, t in enumerate(tasks):
        for name in ("deps", "after"):
            for d in getattr(t, name):
                if not (0 <= d < i):
                    raise ConfigError(
                        f"tasks[{i}].{name}", d, f"indices of earlier tasks, in [0, {i})"
                    )


def run_batch(
    tasks: Sequence[Task],
    *,
    scheduler: Any = None,
    num_workers: int | None = None,
    on_done: Callable[[int], None] | None = None,
) -> list[Any]:
    """Run a batch and return the results in task order.

    Parameters
    ----------
    tasks : sequence of Task
    scheduler : None, str or distributed.Client
        ``None``: ``"threads"`` for more than one task, else ``"serial"``;
        ``"serial"``, ``"threads"``, ``"sync"`` (dask's single-threaded
        scheduler), an address of a ``dask.distributed`` scheduler, or a
        ``distributed.Client``.
    num_workers : int, optional
        Threads of the local ``"threads"`` scheduler (default: the cores).
    on_done : callable, optional
        Called with the index of each finished task (from the thread that
        ran it).

    Returns
    -------
    list
    """
    _check(tasks)
    if scheduler is None:
        scheduler = "threads" if len(tasks) > 1 else "serial"
    if scheduler == "serial":
        results: list[Any] = []
        for i, t in enumerate(tasks):
            results.append(t.fn(*[results[d] for d in t.deps], workers=-1))
            if on_done:
                on_done(i)
        return results
    import dask

    local = scheduler in ("threads", "sync")

    def wrap(i: int, fn: Callable[..., Any], n_deps: int) -> Callable[..., Any]:
        cb = on_done if local else None  # a callback cannot travel to remote workers

        def run(*args: Any) -> Any:
            out = fn(*args[:n_deps], workers=1)  # the rest only ordered the start
            if cb:
                cb(i)
            return out

        run.__name__ = f"stimplan-task-{i}"
        return run

    nodes: list[Any] = []
    for i, t in enumerate(tasks):
        before = [nodes[a] for a in t.after] if local else []
        node = dask.delayed(wrap(i, t.fn, len(t.deps)), pure=False)
        nodes.append(node(*[nodes[d] for d in t.deps], *before))
    if local:
        n = num_workers or parallel_workers()
        return list(dask.compute(*nodes, scheduler=scheduler, num_workers=n))
    if isinstance(scheduler, str):
        try:
            from distributed import Client
        except ImportError as exc:
            raise ConfigError(
                "scheduler", scheduler, "a local scheduler, or install 'distributed'", str(exc)
            ) from None
        try:
            client = Client(scheduler, timeout="10s")
        except OSError as exc:
            raise ConfigError(
                "scheduler", scheduler, "the address of a running dask scheduler", str(exc)
            ) from None
        with client:
            return _remote(client, nodes, on_done)
    if hasattr(scheduler, "compute") and hasattr(scheduler, "gather"):
        return _remote(scheduler, nodes, on_done)
    raise ConfigError("scheduler", scheduler, "'serial', 'threads', 'sync', an address or a Client")


def _remote(client: Any, nodes: list[Any], on_done: Callable[[int], None] | None) -> list[Any]:
    futures = client.compute(nodes)
    results = client.gather(futures)
    if on_done:
        for i in range(len(nodes)):
            on_done(i)
    return list(results)
