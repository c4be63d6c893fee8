"""Run chunk tasks in turn, on dask's local schedulers, or on a dask cluster, in task order.

:func:`execute` yields each :class:`~gisrun.workflow.chunks.ChunkOutput` in the order of the
tasks, whoever runs them, so the run's writers see the same stream either way. On a cluster
the tasks go out a few at a time (:func:`in_order`): at most :func:`window` of them are
submitted and not yet taken back, so the workers never run far ahead of the writer, and the
outputs waiting on them, and the tasks not yet sent, stay out of memory. A run of a million
subcatchments has more than a thousand chunks; all of them at once kept every finished
output on the workers until the writer reached it.

dask is an optional extra, imported only when a run asks for it
(:func:`gisrun.workflow.dask_need.require_dask` checks it is there before any work).
"""

from __future__ import annotations

import itertools
from collections import deque
from collections.abc import Callable, Iterable, Iterator, Sequence
from typing import Any, Protocol

from .chunks import ChunkOutput, ChunkTask, process_chunk

__all__ = ["execute", "in_order", "window", "AHEAD_PER_WORKER"]

#: Tasks submitted per worker beyond the one each runs: a worker that finishes finds the next
#: one waiting, while the writer takes the outputs in order.
AHEAD_PER_WORKER = 1

LOCAL_SCHEDULERS = ("synchronous", "threads", "sync", "processes")


class Submitter(Protocol):
    """What :func:`in_order` needs of a dask client."""

    def submit(self, fn: Callable[..., Any], *args: Any, pure: bool = ...) -> Any: ...


def execute(
    tasks: Sequence[ChunkTask],
    *,
    workers: int | None = None,
    scheduler: str | None = None,
    on_done: Callable[[int], None] | None = None,
) -> Iterator[ChunkOutput]:
    """Run chunk tasks and yield their outputs in task order.

    Parameters
    ----------
    tasks : sequence of ChunkTask
    workers : int, optional
        Run on a local dask cluster of this many worker processes.
    scheduler : str, optional
        ``"synchronous"`` or ``"threads"`` (dask's local schedulers), or the
        address of an existing dask scheduler (``tcp://host:8786``).
    on_done : callable, optional
        Called with the number of chunks finished so far.
    """
    if not workers and not scheduler:
        outputs: Iterable[ChunkOutput] = map(process_chunk, tasks)
    elif scheduler in LOCAL_SCHEDULERS and not workers:
        outputs = _local(tasks, scheduler)
    else:
        outputs = _distributed(tasks, workers=workers, address=scheduler)
    for done, out in enumerate(outputs, start=1):
        if on_done:
            on_done(done)
        yield out


def window(workers: int) -> int:
    """Most tasks out at once on ``workers`` workers: one running and the next ready, each."""
    return max(1, int(workers)) * (1 + AHEAD_PER_WORKER)


def in_order(client: Submitter, tasks: Iterable[ChunkTask], most: int
             ) -> Iterator[ChunkOutput]:
    """Submit ``tasks`` to ``client``, at most ``most`` out at a time; yield outputs in order.

    The next task goes out as soon as the oldest output is taken back, before it is yielded,
    so the workers keep busy while the caller writes.
    """
    todo = iter(tasks)
    out: deque[Any] = deque(client.submit(process_chunk, task, pure=False)
                            for task in itertools.islice(todo, max(1, most)))
    while out:
        future = out.popleft()
        result = future.result()
        future.release()
        following = next(todo, None)
        if following is not None:
            out.append(client.submit(process_chunk, following, pure=False))
        yield result


def _local(tasks: Sequence[ChunkTask], scheduler: str) -> Iterator[ChunkOutput]:
    import dask

    for task in tasks:  # one at a time keeps memory flat and the order fixed
        (out,) = dask.compute(dask.delayed(process_chunk)(task), scheduler=scheduler)
        yield out


def _distributed(tasks: Sequence[ChunkTask], *, workers: int | None, address: str | None
                 ) -> Iterator[ChunkOutput]:
    from dask.distributed import Client, LocalCluster

    cluster = None
    if address:
        client = Client(address)
    else:
        cluster = LocalCluster(n_workers=int(workers or 1), threads_per_worker=1,
                               processes=True, dashboard_address=None)
        client = Client(cluster)
    try:
        running = len(client.scheduler_info().get("workers", {})) or int(workers or 1)
        yield from in_order(client, tasks, window(running))
    finally:
        client.close()
        if cluster is not None:
            cluster.close()
