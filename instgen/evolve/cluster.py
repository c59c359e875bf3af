"""Breeding on a Dask cluster: the ``cluster`` executor.

``DaskExecutor("tcp://HOST:8786")`` connects to a scheduler the user started
(``dask scheduler`` on one machine, ``dask worker tcp://HOST:8786 --nthreads 1``
on each worker machine; every worker needs the same instgen installed).
``DaskExecutor("local:N")`` starts N worker processes on this machine, bound to
127.0.0.1 only, and stops them when the run ends.

How the work is shipped:

* The run's :class:`~instgen.fitness.Context` (graph arrays, schedule, metric)
  travels once per worker, inside a worker plugin.  The scheduler keeps the
  plugin and hands it to every worker that joins later, so a worker restarted
  after a crash gets the context (and warms its sampler) before it takes a task.
* One Dask task scores a contiguous batch of candidates.  The first ``map``
  sends one candidate per task and times them; later maps cut the candidates
  into batches of about ``task_seconds`` of worker time, as many batches for
  every worker and of about equal cost, so no worker waits idle at the end of a
  map for another's extra batch.  Results come back as small
  :class:`~instgen.fitness.Measurement` records, in task order.
* Each task carries its own seed, so batching and worker order never change a
  result: a cluster run equals the serial run bit for bit.

Faults:

* A worker that dies mid-task costs a rerun of its tasks elsewhere (the
  scheduler reschedules them; ``retries`` covers errors raised in a task).
  The executor follows the scheduler's event stream; when a lost worker held
  tasks of a map, one line goes to ``notify`` (stderr by default).
* A task that kills several workers in turn, a scheduler that goes away or
  stops answering, or a cluster left without workers for ``idle_timeout``
  seconds raises :class:`~instgen.errors.ClusterError`; the breeding loop then
  stops with the last checkpoint intact, and ``--resume`` continues anywhere.
"""

from __future__ import annotations

import asyncio
import collections
import logging
import socket
import time
import uuid
from concurrent.futures import CancelledError

import distributed
from distributed import WorkerPlugin
from distributed.comm.addressing import parse_host_port, unparse_host_port

from .. import __version__
from ..errors import ClusterError, InputError, InstgenError
from ..fitness import Context, Measurement
from .executors import _warm, evaluate

#: Contexts held by this worker process, by run token (filled by the plugin).
_CONTEXTS: dict[str, Context] = {}

DEFAULT_PORT = 8786


def parse_address(address: str) -> tuple[str, object]:
    """Split a ``--cluster`` value into ``("local", N)`` or ``("remote", address)``.

    >>> parse_address("local:2")
    ('local', 2)
    >>> parse_address("tcp://10.0.0.5:8786")
    ('remote', 'tcp://10.0.0.5:8786')
    """
    text = str(address).strip()
    if text.startswith("local:"):
        count = text[len("local:"):]
        if not count.isdigit() or int(count) < 1:
            raise InputError(f"--cluster local:N needs a positive number of workers, got {text!r}")
        return "local", int(count)
    scheme, sep, rest = text.partition("://")
    if sep and scheme == "tcp" and rest:
        try:
            host, port = parse_host_port(rest, default_port=DEFAULT_PORT)
        except ValueError:
            host = ""
        if host:
            return "remote", f"{scheme}://{unparse_host_port(host, port)}"
    raise InputError(f"--cluster must be tcp://HOST:PORT (a running Dask scheduler) or local:N, got {text!r}")


def local_cluster(workers: int) -> distributed.LocalCluster:
    """A Dask cluster of ``workers`` single-threaded processes on this machine, loopback only.

    The scheduler, the workers and their status pages listen on 127.0.0.1
    (random ports); the dashboard is off.  Dask's own log lines are silenced
    (a failure reaches the run as one error).  The caller closes it.
    """
    return distributed.LocalCluster(
        n_workers=workers, threads_per_worker=1, processes=True, host="127.0.0.1", scheduler_port=0,
        dashboard_address=None, worker_dashboard_address=None, silence_logs=logging.CRITICAL,
        scheduler_kwargs={"dashboard_address": "127.0.0.1:0"})


class _ContextPlugin(WorkerPlugin):
    """Holds the run's context on each worker and warms the sampler there."""

    def __init__(self, token: str, ctx: Context):
        self.token = token
        self.ctx = ctx

    async def setup(self, worker):
        _CONTEXTS[self.token] = self.ctx
        # Compile/load off the event loop, so the worker keeps answering heartbeats.
        await asyncio.get_running_loop().run_in_executor(None, _warm, self.ctx)

    def teardown(self, worker):
        _CONTEXTS.pop(self.token, None)


def _score_batch(token: str, tasks: list[dict]) -> tuple[list[Measurement], float]:
    """Run on a worker: measure a batch of candidates; returns results and worker seconds."""
    ctx = _CONTEXTS.get(token)
    if ctx is None:
        raise ClusterError("a worker received a task without the run's settings (its plugin failed to load); "
                           "check that every worker has the same instgen installed")
    t0 = time.perf_counter()
    results = [evaluate(ctx, t) for t in tasks]
    return results, time.perf_counter() - t0


def _worker_facts() -> dict:
    """Run on each worker at start: what it has installed."""
    import os

    return {"instgen": __version__, "pid": os.getpid()}


class DaskExecutor:
    """Evaluate candidates on a Dask cluster.

    Parameters
    ----------
    address : str
        ``tcp://HOST:PORT`` of a running scheduler, or ``local:N`` to start N
        local worker processes (loopback only) owned by this executor.
    retries : int
        Extra attempts for a task that raised an error (a worker that dies is
        handled by the scheduler's own rescheduling).
    task_seconds : float
        Worker time aimed for per task once the first tasks have been timed.
    connect_timeout : float
        Seconds to wait for the scheduler (and for its answers).
    idle_timeout : float
        Seconds a cluster may have no workers before the run stops.
    notify : callable, optional
        Called with one line when work had to be re-run because a worker was
        lost (default: print it on stderr).

    Examples
    --------
    >>> from instgen.evolve.engine import Breeder           # doctest: +SKIP
    >>> Breeder(cfg, "outputs/x", executor=DaskExecutor("local:2")).run()  # doctest: +SKIP
    """

    name = "cluster"

    def __init__(self, address: str, retries: int = 2, task_seconds: float = 0.5, connect_timeout: float = 10.0,
                 idle_timeout: float = 300.0, poll: float = 2.0, notify=None):
        self.kind, where = parse_address(address)
        self.notify = notify or _to_stderr
        self.lost: list[dict] = []  # workers lost while holding our tasks: {"worker", "tasks", "round"}
        self._removals: collections.deque = collections.deque()  # the scheduler's remove-worker events
        self.address = where if self.kind == "remote" else None
        self.local_workers = where if self.kind == "local" else 0
        self.retries = int(retries)
        self.task_seconds = float(task_seconds)
        self.connect_timeout = float(connect_timeout)
        self.idle_timeout = float(idle_timeout)
        self.poll = float(poll)
        self.token = uuid.uuid4().hex[:16]
        self.cluster = None
        self.client = None
        self.per_read: float | None = None  # measured worker seconds per read
        self.timings: list[tuple[int, float]] = []  # (candidates, worker seconds) of every task so far
        self._round = 0
        self._reads, self._seconds = 0, 0.0

    @property
    def workers(self) -> int:
        """Workers connected right now (0 before start)."""
        if self.client is None:
            return 0
        return int(self._identity()["n_workers"])

    # ------------------------------------------------------------ start/close
    def start(self, ctx: Context):
        """Connect (or start the local cluster), check the workers, send them ``ctx``."""
        try:
            if self.kind == "local":
                self.cluster = local_cluster(self.local_workers)
                self.address = self.cluster.scheduler_address
            else:
                _probe(self.address, self.connect_timeout)
            self.client = distributed.Client(self.address, timeout=self.connect_timeout, set_as_default=False)
            self.client.subscribe_topic("all", self._on_event)
            self.client.wait_for_workers(1, timeout=self.idle_timeout)
            self._check_workers()
            try:
                self.client.register_plugin(_ContextPlugin(self.token, ctx), name=self._plugin_name)
            except Exception as exc:
                raise ClusterError(f"the workers at {self.address} could not load the run's settings "
                                   f"({type(exc).__name__}: {exc}); install the same instgen, and any fitness "
                                   "module the preset names, on every worker") from None
        except (OSError, asyncio.TimeoutError) as exc:
            connected = self.client is not None
            self.close()
            if connected:
                raise ClusterError(f"no worker joined the Dask scheduler at {self.address} within "
                                   f"{self.idle_timeout:g} s; start workers with `dask worker {self.address} "
                                   "--nthreads 1`") from None
            raise ClusterError(f"cannot connect to the Dask scheduler at {self.address} within "
                               f"{self.connect_timeout:g} s ({_first_line(exc)})") from None
        except BaseException:
            self.close()
            raise

    @property
    def _plugin_name(self) -> str:
        return f"instgen-context-{self.token}"

    def _check_workers(self):
        facts = self.client.run(_worker_facts)
        odd = sorted({f["instgen"] for f in facts.values()} - {__version__})
        if odd:
            raise ClusterError(f"the workers at {self.address} run instgen {', '.join(odd)}, this machine runs "
                               f"{__version__}; install the same version everywhere so results agree")

    def close(self):
        """Remove the run's context from the workers; stop the local cluster if we started it."""
        client, cluster = self.client, self.cluster
        self.client = self.cluster = None
        if client is not None:
            if client.status == "running":
                try:
                    client.unsubscribe_topic("all")
                except Exception:  # noqa: BLE001 - best effort while closing
                    pass
                try:
                    client.unregister_worker_plugin(self._plugin_name)
                except Exception:  # noqa: BLE001 - best effort while closing
                    pass
            # A client that lost its scheduler logs its failed reconnection as errors with
            # tracebacks; the run has already said what happened in one line.
            quiet = client.status != "running"
            log = logging.getLogger("distributed.client")
            level = log.level
            if quiet:
                log.setLevel(logging.CRITICAL + 1)
            try:
                client.close(timeout=min(self.connect_timeout, 2.0) if quiet else self.connect_timeout)
            except Exception:  # noqa: BLE001
                pass
            finally:
                log.setLevel(level)
        if cluster is not None:
            try:
                cluster.close(timeout=self.connect_timeout)
            except Exception:  # noqa: BLE001
                pass

    # -------------------------------------------------------------------- map
    def map(self, tasks: list[dict]) -> list[Measurement]:
        """Measure ``tasks`` on the cluster; results in task order."""
        if not tasks:
            return []
        if self.client is None:
            raise ClusterError("the cluster executor was not started (or was already closed)")
        self._round += 1
        try:
            if self.client.status != "running":  # the client already saw the connection close
                raise CancelledError()
            batches = self._plan(tasks, self.workers)
            futures = [self.client.submit(_score_batch, self.token, [tasks[i] for i in idx], pure=False,
                                          retries=self.retries, key=f"instgen-score-{self.token}-{self._round}-{k}")
                       for k, idx in enumerate(batches)]
            self._wait(futures)
            parts = self.client.gather(futures)
        except InstgenError:
            raise
        except distributed.KilledWorker as exc:
            raise ClusterError(f"{exc.allowed_failures + 1} workers died in turn while scoring the same candidates "
                               f"(last: {exc.last_worker.address}); check the workers' memory and logs") from None
        except ImportError as exc:
            raise ClusterError(f"a worker could not import what the run needs ({exc}); install the same instgen, "
                               "and any fitness module the preset names, on every worker") from None
        except Exception as exc:
            if not self._lost(exc):
                raise
            why = "connection closed" if isinstance(exc, CancelledError) else _first_line(exc)
            raise ClusterError(f"lost the connection to the Dask scheduler at {self.address} ({why})") from None
        self._report_losses({f.key for f in futures}, len(futures))
        results: list = [None] * len(tasks)
        for idx, (measured, seconds) in zip(batches, parts):
            for i, m in zip(idx, measured):
                results[i] = m
            self.timings.append((len(idx), seconds))
        self._reads += sum(t["reads"] for t in tasks)
        self._seconds += sum(s for _, s in parts)
        if self._reads and self._seconds > 0:
            self.per_read = self._seconds / self._reads
        return results

    def _on_event(self, event):
        """Called (on the client's thread) for each event of the scheduler's ``all`` topic."""
        _, msg = event
        if isinstance(msg, dict) and msg.get("action") == "remove-worker":
            self._removals.append(msg)

    def _report_losses(self, keys: set, total: int):
        """Say in one line when workers were lost holding some of ``keys`` (their tasks ran again).

        Dask's scheduler announces a ``remove-worker`` event naming the tasks the
        worker was running and the finished results that died with it; both are run
        again.  The event comes on the same ordered stream as the news that the
        re-run tasks finished, so it is here once the map's futures are done.
        """
        lost = {}
        while self._removals:
            msg = self._removals.popleft()
            ours = {str(k) for k in (*msg.get("processing-tasks", ()), *msg.get("lost-computed-tasks", ()))}
            ours &= {str(k) for k in keys}
            if ours:
                lost.setdefault(str(msg.get("worker", "?")), set()).update(ours)
        if not lost:
            return
        rerun = len(set().union(*lost.values()))
        for worker, tasks in lost.items():
            self.lost.append({"worker": worker, "tasks": len(tasks), "round": self._round})
        self.notify(f"lost {len(lost)} Dask worker(s) ({', '.join(sorted(lost))}) while scoring; {rerun} of "
                    f"{total} task(s) were scored again on the other workers (results are unchanged)")

    def _plan(self, tasks: list[dict], workers: int) -> list[list[int]]:
        """Contiguous batches of task indices, the same number for every worker, of about equal cost.

        The batch count is a multiple of ``workers`` chosen so a batch costs about
        ``task_seconds`` (never fewer batches than workers, never more than
        tasks); cut points fall where the running cost crosses each equal share,
        so with equal-cost tasks every worker gets the same work and none idles
        at the end of the map waiting for another's extra batch.

        >>> ex = DaskExecutor("local:2", task_seconds=0.5)
        >>> ex.per_read = 0.01
        >>> [len(b) for b in ex._plan([{"reads": 10}] * 20, workers=2)]  # 2 s of work: 4 batches
        [5, 5, 5, 5]
        """
        if self.per_read is None:
            return [[i] for i in range(len(tasks))]
        workers = max(1, workers)
        cost = [t["reads"] * self.per_read for t in tasks]
        total = sum(cost)
        rounds = max(1, round(total / (workers * self.task_seconds))) if self.task_seconds > 0 else len(tasks)
        count = min(len(tasks), workers * rounds)
        batches, current, filled = [], [], 0.0
        for i, c in enumerate(cost):
            # close the batch when this task's midpoint lies past the next equal share
            if current and filled + c / 2 > total * (len(batches) + 1) / count:
                batches.append(current)
                current = []
            current.append(i)
            filled += c
        batches.append(current)
        return batches

    def _identity(self) -> dict:
        try:
            return self.client.sync(self.client.scheduler.identity, n_workers=0,
                                    callback_timeout=self.connect_timeout)
        except (OSError, asyncio.TimeoutError):
            raise ClusterError(f"lost the connection to the Dask scheduler at {self.address} (no answer within "
                               f"{self.connect_timeout:g} s)") from None

    def _wait(self, futures):
        """Wait for ``futures``; give up when the scheduler stops answering or no worker is left."""
        idle_since = None
        while True:
            try:
                with self.client.as_current():
                    distributed.wait(futures, timeout=self.poll)
                return
            except asyncio.TimeoutError:
                pass
            if self._identity()["n_workers"] > 0:
                idle_since = None
                continue
            idle_since = idle_since or time.monotonic()
            if time.monotonic() - idle_since > self.idle_timeout:
                raise ClusterError(f"the Dask scheduler at {self.address} has had no workers for "
                                   f"{self.idle_timeout:g} s")

    def _lost(self, exc: Exception) -> bool:
        """True when ``exc`` means the connection to the scheduler is gone."""
        from distributed.comm import CommClosedError

        return isinstance(exc, (CancelledError, CommClosedError)) or self.client.status != "running"


def _to_stderr(line: str) -> None:
    import sys

    print(f"instgen: {line}", file=sys.stderr, flush=True)


def _first_line(exc: Exception) -> str:
    text = str(exc).strip().splitlines()
    return f"{type(exc).__name__}: {text[0]}" if text else type(exc).__name__


def _probe(address: str, timeout: float):
    """Fail fast, with one clear line, when nothing listens at ``address``."""
    host, port = parse_host_port(address.partition("://")[2], default_port=DEFAULT_PORT)
    try:
        socket.create_connection((host, port), timeout=timeout).close()
    except socket.gaierror:
        raise ClusterError(f"cannot find the host of the Dask scheduler {address} (unknown name)") from None
    except ConnectionRefusedError:
        raise ClusterError(f"nothing is listening at {address}: start a scheduler there with `dask scheduler` "
                           "(and workers with `dask worker ADDRESS --nthreads 1`), or use --cluster local:N") from None
    except OSError as exc:
        raise ClusterError(f"cannot reach the Dask scheduler at {address} "
                           f"({exc.strerror or type(exc).__name__})") from None

