"""Where evaluations run: a swappable ``map`` over plain tasks.

Every executor takes the run's :class:`~instgen.fitness.Context` once
(``start``), then maps tasks — dicts of plain numpy arrays and numbers — to
:class:`~instgen.fitness.Measurement` results, in task order.  Results never
depend on which worker ran a task, because each task carries its own seed;
serial, process-pool and cluster runs therefore agree bit for bit.

* ``serial``: in this process (the reference).
* ``pool``: a process pool on this machine (default: all cores).
* ``cluster``: a Dask cluster (:mod:`instgen.evolve.cluster`).
"""

from __future__ import annotations

import concurrent.futures as cf
import multiprocessing as mp
import os

from ..errors import ConfigError
from ..fitness import Context, Measurement, measure

_CTX: Context | None = None


def evaluate(ctx: Context, task: dict) -> Measurement:
    """Measure one task (the function every executor runs)."""
    return measure(ctx, task["J"], task["h"], task["seed"], task["reads"], task.get("planted"))


def _init_worker(ctx):
    global _CTX
    _CTX = ctx
    _warm(ctx)


def _warm(ctx):
    """Compile and load the sampler once per worker, not per task."""
    import numpy as np

    measure(ctx, np.zeros(len(ctx.edges)), np.zeros(ctx.n), 0, 1) if ctx.user is None else None


def _evaluate_in_worker(task):
    return evaluate(_CTX, task)


class SerialExecutor:
    """Evaluate in this process, one task after another."""

    name = "serial"
    workers = 1

    def start(self, ctx: Context):
        self.ctx = ctx

    def map(self, tasks: list[dict]) -> list[Measurement]:
        return [evaluate(self.ctx, t) for t in tasks]

    def close(self):
        pass


class PoolExecutor:
    """Evaluate in a pool of worker processes on this machine."""

    name = "pool"

    def __init__(self, workers: int = 0):
        self.workers = workers or os.cpu_count() or 1
        self._pool = None

    def start(self, ctx: Context):
        if ctx.user is not None and getattr(ctx.user, "__name__", "<lambda>") == "<lambda>":
            raise ConfigError("a fitness function run in worker processes must be a named, importable function; "
                              "use workers=1 for a lambda")
        self._pool = cf.ProcessPoolExecutor(max_workers=self.workers, mp_context=mp.get_context("spawn"),
                                            initializer=_init_worker, initargs=(ctx,))

    def map(self, tasks: list[dict]) -> list[Measurement]:
        chunk = max(1, len(tasks) // (4 * self.workers))
        return list(self._pool.map(_evaluate_in_worker, tasks, chunksize=chunk))

    def close(self):
        if self._pool is not None:
            self._pool.shutdown(cancel_futures=True)
            self._pool = None


def make_executor(workers: int = 0, cluster: str | None = None, notify=None):
    """The executor for ``workers`` (1: serial, 0: all cores) or a Dask ``cluster`` address.

    ``notify`` receives the cluster's one-line notices (a lost worker whose tasks ran again;
    default: stderr).
    """
    if cluster:
        from .cluster import DaskExecutor

        return DaskExecutor(cluster, notify=notify)
    if workers == 1 or (workers == 0 and (os.cpu_count() or 1) == 1):
        return SerialExecutor()
    return PoolExecutor(workers)
