"""Breeding on a Dask cluster equals breeding in one process, bit for bit, through faults.

The reference for every result here is the serial executor (the same run in
this process); the fault checks lean on dask's own scheduler event log to show
that a worker really died while it held one of our tasks.
"""

import json
import os
import signal
import socket
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

from instgen.cli import main
from instgen.errors import ClusterError, InputError
from instgen.evolve.checkpoint import load_checkpoint
from instgen.evolve.cluster import DaskExecutor, local_cluster, parse_address
from instgen.evolve.engine import Breeder
from instgen.evolve.executors import SerialExecutor, make_executor
from instgen.preset import validate

TIMING = ("seconds", "evaluations_per_second", "elapsed")

# chimera:2 with a 400-sweep anneal: about 0.1 s per candidate on one core, long
# enough that a worker can be caught in the middle of a task of several candidates.
RAW = {
    "run": {"seed": 31},
    "graph": {"spec": "chimera:2"},
    "fitness": {"sampler": "sa", "sweeps": [10, 400], "reads": 48, "confirm_reads": 48, "reference": "best-found"},
    "search": {"population": 6, "generations": 2, "elites": 1, "confirm_top": 2, "winners": 4, "workers": 1},
    "library": {"baseline": 0},
}


def tiny():
    return validate(json.loads(json.dumps(RAW)))


def outcome(result: dict, folder: Path) -> dict:
    """What must not depend on where evaluations ran: winners, history, population."""
    history = [json.loads(x) for x in (folder / "log.jsonl").read_text().splitlines()]
    state = load_checkpoint(folder)
    population = [{k: v for k, v in ind.items() if k != "measurement"}
                  | {"energies": (ind["measurement"] or {}).get("energies")} for ind in state["population"]]
    return {"hall": json.dumps(result["winners"], sort_keys=True),
            "history": [{k: v for k, v in r.items() if k not in TIMING} for r in history],
            "population": json.dumps(population, sort_keys=True), "rng": state["rng"],
            "evaluations": result["evaluations"]}


@pytest.fixture(scope="module")
def serial(tmp_path_factory):
    """The reference: the tiny run in this process."""
    folder = tmp_path_factory.mktemp("serial")
    return outcome(Breeder(tiny(), folder, executor=SerialExecutor()).run(), folder)


@pytest.fixture(scope="session")
def dask_cluster():
    cluster = local_cluster(2)
    yield cluster
    cluster.close()


@pytest.fixture
def client(dask_cluster):
    """A client on the shared cluster, once both workers are up (a test may have killed one)."""
    import distributed

    with distributed.Client(dask_cluster.scheduler_address, set_as_default=False) as c:
        c.wait_for_workers(2, timeout=60)
        yield c


# Run on each worker with client.run; a lambda travels by value, so workers need not import this file.
_contexts_held = lambda: sorted(__import__("instgen.evolve.cluster", fromlist=["_CONTEXTS"])._CONTEXTS)  # noqa: E731


@pytest.mark.slow
def test_cluster_run_equals_serial_and_context_lives_on_workers_only_during_the_run(serial, client, tmp_path):
    ex = DaskExecutor(client.scheduler.address, task_seconds=10)  # batches: as large as keeps both workers busy
    held = []
    result = Breeder(tiny(), tmp_path, executor=ex,
                     progress=lambda rec: held.append(client.run(_contexts_held))).run()
    assert outcome(result, tmp_path) == serial
    # The context was installed on every worker (dask's client.run asks each one), and removed at close.
    assert held and all(len(snap) == 2 and all(ex.token in v for v in snap.values()) for snap in held)
    assert all(ex.token not in v for v in client.run(_contexts_held).values())
    # After the first timing, candidates travelled three to a task (6 per generation, 2 workers).
    assert ex.per_read is not None and [n for n, _ in ex.timings][:6] == [1] * 6 and max(n for n, _ in ex.timings) == 3


def _kill_worker_mid_task(client, token, report):
    """From a thread: once generation 2 is being scored, SIGKILL a worker that is running one of our tasks."""
    pids = client.run(os.getpid)
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        for worker, keys in client.processing().items():
            ours = [k for k in keys if str(k).startswith(f"instgen-score-{token}-") and int(str(k).split("-")[3]) >= 3]
            if ours:
                os.kill(pids[worker], signal.SIGKILL)
                report.update(worker=worker, key=str(ours[0]))
                return
        time.sleep(0.005)


@pytest.mark.slow
def test_worker_killed_mid_generation_costs_a_retry_not_the_run(serial, client, tmp_path):
    notices = []
    ex = DaskExecutor(client.scheduler.address, task_seconds=10, notify=notices.append)
    report = {}
    killer = threading.Thread(target=_kill_worker_mid_task, args=(client, ex.token, report), daemon=True)
    killer.start()
    result = Breeder(tiny(), tmp_path, executor=ex).run()
    killer.join(timeout=5)
    assert report, "the test never caught a worker running a task"
    assert outcome(result, tmp_path) == serial
    # dask's scheduler log: the worker left unexpectedly while it was processing our task.
    removals = [msg for _, msg in client.get_events("all")
                if isinstance(msg, dict) and msg.get("action") == "remove-worker" and msg["worker"] == report["worker"]]
    assert removals and not removals[-1]["expected"]
    assert any(str(k).startswith(f"instgen-score-{ex.token}-") for k in removals[-1]["processing-tasks"])
    # and the user was told, in one line naming the worker dask removed
    assert len(notices) == 1 and "\n" not in notices[0] and report["worker"] in notices[0]
    assert "scored again" in notices[0] and ex.lost[0]["worker"] == report["worker"]


@pytest.mark.slow
def test_a_run_without_lost_workers_says_nothing(serial, client, tmp_path):
    notices = []
    ex = DaskExecutor(client.scheduler.address, task_seconds=10, notify=notices.append)
    Breeder(tiny(), tmp_path, executor=ex).run()
    assert notices == [] and ex.lost == []


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _dask(*args):
    """Start dask's own command line (as a user would), quietly."""
    return subprocess.Popen([str(Path(sys.executable).with_name("dask")), *args], stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL)


def _until(ready, procs, timeout=90):
    deadline = time.monotonic() + timeout
    while not ready():
        assert all(p.poll() is None for p in procs) and time.monotonic() < deadline, "dask did not start"
        time.sleep(0.2)


@pytest.mark.slow
def test_lost_scheduler_stops_with_a_resumable_checkpoint(serial, tmp_path):
    import distributed

    port = _free_port()
    address = f"tcp://127.0.0.1:{port}"

    def listening():
        with socket.socket() as s:
            return s.connect_ex(("127.0.0.1", port)) == 0

    # The worker keeps trying until the scheduler is up, so both start at once.
    scheduler = _dask("scheduler", "--host", "127.0.0.1", "--port", str(port), "--no-dashboard")
    worker = _dask("worker", address, "--nthreads", "1", "--no-dashboard", "--host", "127.0.0.1")
    try:
        _until(listening, [scheduler, worker])
        with distributed.Client(address, set_as_default=False) as c:
            _until(lambda: c.scheduler_info()["workers"], [scheduler, worker])

        def lose_scheduler(record):  # after the first generation: the machine running the scheduler goes down
            scheduler.kill()
            scheduler.wait()

        ex = DaskExecutor(address, connect_timeout=3)
        t0 = time.monotonic()
        with pytest.raises(ClusterError) as err:
            Breeder(tiny(), tmp_path, executor=ex, progress=lose_scheduler).run()
        message = str(err.value)
        assert time.monotonic() - t0 < 60
        assert "\n" not in message and address in message
        assert str(tmp_path) in message and "--resume" in message and "after 1 generation" in message
        assert load_checkpoint(tmp_path)["generation"] == 1
        # Resume without a cluster: the finished run equals the uninterrupted serial one.
        result = Breeder(tiny(), tmp_path, executor=SerialExecutor()).run(resume=True)
        assert outcome(result, tmp_path) == serial
    finally:
        for proc in (worker, scheduler):
            if proc.poll() is None:
                proc.kill()
                proc.wait()


@pytest.mark.slow
def test_local_cluster_listens_on_loopback_only_and_equals_serial(serial, tmp_path):
    ex = make_executor(1, cluster="local:2")
    seen = {}

    def look(record):
        seen.update(scheduler=ex.address, workers=list(ex.client.scheduler_info()["workers"]), n=ex.workers)

    result = Breeder(tiny(), tmp_path, executor=ex, progress=look).run()
    assert outcome(result, tmp_path) == serial
    assert seen["n"] == 2 and seen["scheduler"].startswith("tcp://127.0.0.1:")
    assert all(w.startswith("tcp://127.0.0.1:") for w in seen["workers"])
    assert ex.client is None and ex.cluster is None  # closed with the run


def test_unreachable_scheduler_is_one_clear_line_quickly(tmp_path):
    ctx = Breeder(tiny(), tmp_path).ctx
    t0 = time.monotonic()
    with pytest.raises(ClusterError, match="nothing is listening at tcp://127.0.0.1:1"):
        DaskExecutor("tcp://127.0.0.1:1").start(ctx)
    assert time.monotonic() - t0 < 3


def test_cli_bad_cluster_address_exits_2_with_one_line(tmp_path, capsys):
    preset = Path(__file__).parents[2] / "presets" / "demo.toml"
    code = main(["breed", str(preset), "--out", str(tmp_path / "run"), "--cluster", "tcp://127.0.0.1:1", "--quiet"])
    err = capsys.readouterr().err
    assert code == 2
    assert err.count("\n") == 1 and err.startswith("instgen breed: ") and "tcp://127.0.0.1:1" in err


@pytest.mark.parametrize("text", ["local:0", "local:two", "127.0.0.1:8786", "http://host:8786", "tcp://"])
def test_malformed_addresses_are_refused_before_any_work(text):
    with pytest.raises(InputError, match="--cluster"):
        make_executor(1, cluster=text)


def test_addresses_follow_dask_defaults():
    # dask's scheduler listens on 8786 unless told otherwise (`dask scheduler --help`).
    assert parse_address("tcp://node7") == ("remote", "tcp://node7:8786")
    assert parse_address("tcp://[::1]:9000") == ("remote", "tcp://[::1]:9000")
    assert parse_address(" local:3 ") == ("local", 3)
