"""What a Dask cluster buys a breeding run: measured on 2 local workers, estimated for 64 and 512.

Run with ``.venv/bin/python -m benchmarks.cluster`` (about four minutes on a
2-core laptop; the machine should be otherwise idle).  Everything is measured
in this one run:

1. **Speed-up of a generation** (the quench-study preset on chimera:8, the
   way a lab scales it up; about a tenth of a second per candidate; then, as 1b,
   a campaign-sized generation of 48 candidates on chimera:12): one generation's work (every
   candidate measured, the best two confirmed with more reads) done serially
   and on ``local:2`` (and, for comparison, on the process pool of 2 that
   needs no dask), alternating, on the same candidates and seeds (and checked
   to give the same energies).  Alternating keeps drifting load on a
   shared machine from favouring either side.  The cluster's first generation
   is its timing pass (one candidate per task) and is shown apart.
2. **Overhead per task**: candidates too small to matter (8 spins, one read,
   one sweep), sent one per task; the wall time per task beyond the work.
3. **A paper estimate** for 64 and 512 workers, for every preset in
   ``presets/``: task times and the serial part of a generation (selection,
   variation, bookkeeping, checkpoint) measured serially here (two generations;
   single candidates for presets whose generation is too long to run here), put into
   ``T(W) = serial + 2 * latency + overhead * tasks + ceil(P/W) * t_search + ceil(C/W) * t_confirm``
   (P candidates measured per generation, C confirmed).  Amdahl's bound with the
   measured serial fraction is printed beside it.  The work after the search
   (certification, final re-measurement, random baseline, filing) runs once per
   run in the client; it is measured for the demo preset.
"""

from __future__ import annotations

import math
import os
import statistics
import tempfile
import time
from pathlib import Path

import numpy as np

from instgen.errors import InstgenError
from instgen.evolve.cluster import DaskExecutor
from instgen.evolve.engine import Breeder
from instgen.evolve.executors import PoolExecutor, SerialExecutor, evaluate
from instgen.evolve.finish import finish
from instgen.preset import load_preset, override, validate

from .samplers import cpu_model

PRESETS = sorted((Path(__file__).parents[1] / "presets").glob("*.toml"))
WORKERS = (2, 64, 512)
#: Journey D scales the quench study up to a bigger graph: that generation is timed on 2 workers.
SPEEDUP_PRESET, SPEEDUP_GRAPH = "quench-study", "chimera:8"
#: ...and a campaign-sized generation, the kind a cluster is for: the same preset, larger graph and population.
CAMPAIGN_GRAPH, CAMPAIGN_POPULATION = "chimera:12", 48
#: Presets whose generation would take longer than this (serially) are profiled on single candidates.
PROFILE_SECONDS = 15.0


class TimedSerial(SerialExecutor):
    """The serial executor, keeping the wall time of every task and of every map."""

    def __init__(self):
        self.tasks, self.maps = [], []

    def map(self, tasks):
        t0 = time.perf_counter()
        out = []
        for task in tasks:
            t = time.perf_counter()
            out.append(evaluate(self.ctx, task))
            self.tasks.append((task["reads"], time.perf_counter() - t))
        self.maps.append(time.perf_counter() - t0)
        return out


def _run(cfg, folder, executor, marks=None):
    """Breed; returns the breeder, its result and the wall time up to each generation's end.

    The first figure includes starting the executor.  ``marks`` collects how many
    maps a :class:`TimedSerial` had made at each generation's end.
    """
    stamps = []

    def note(record):
        stamps.append(time.perf_counter())
        if marks is not None:
            marks.append(len(executor.maps))

    breeder = Breeder(cfg, folder, executor=executor, progress=note)
    t0 = time.perf_counter()
    result = breeder.run()
    return breeder, result, [b - a for a, b in zip([t0] + stamps, stamps)]


def _generation_tasks(cfg, ctx, seed: int) -> tuple[list[dict], list[dict]]:
    """One generation's work for ``cfg``: every candidate measured, then the top ones confirmed."""
    rng = np.random.default_rng(seed)
    m, s, f = len(ctx.edges), cfg["search"], cfg["fitness"]

    def task(k, reads):
        return {"J": rng.choice([-1.0, 1.0], m), "h": np.zeros(ctx.n), "planted": None, "seed": 1000 * seed + k,
                "reads": reads}

    return ([task(k, f["reads"]) for k in range(s["population"])],
            [task(k, f["confirm_reads"]) for k in range(s["confirm_top"])])


def _timed(executor, work) -> tuple[float, list]:
    t0 = time.perf_counter()
    results = [m for tasks in work for m in executor.map(tasks)]
    return time.perf_counter() - t0, [{k: e.tolist() for k, e in m.energies.items()} for m in results]


def speedup(tmp: Path, repeats: int = 5, graph: str = SPEEDUP_GRAPH, population: int | None = None,
            label: str = "1.") -> None:
    changes = ["search.workers=1", f'graph.spec="{graph}"'] + ([f"search.population={population}"] if population else [])
    cfg = override(load_preset(_preset(SPEEDUP_PRESET)), changes)
    ctx = Breeder(cfg, tmp / f"speed-{graph}").ctx
    f, sr = cfg["fitness"], cfg["search"]
    serial, pool, cluster = SerialExecutor(), PoolExecutor(2), DaskExecutor("local:2")
    serial.start(ctx)
    pool.start(ctx)
    t0 = time.perf_counter()
    cluster.start(ctx)
    started = time.perf_counter() - t0
    first, _ = _timed(cluster, _generation_tasks(cfg, ctx, 0))  # the timing pass: one candidate per task
    _timed(pool, _generation_tasks(cfg, ctx, 0))  # start the pool's processes
    rows = []
    try:
        for r in range(1, repeats + 1):
            work = _generation_tasks(cfg, ctx, r)
            a, expected = _timed(serial, work)
            k = len(cluster.timings)
            b, got = _timed(cluster, work)
            busy = sum(x for _, x in cluster.timings[k:])  # the workers' own seconds on these tasks
            c, pooled = _timed(pool, work)
            assert got == expected == pooled, "the executors' measurements differ"
            rows.append((a, b, c, busy))
    finally:
        cluster.close()
        pool.close()
    tasks = cluster.timings[cfg["search"]["population"]:]
    print(f"\n{label} One generation of presets/{SPEEDUP_PRESET}.toml ({cfg['graph']['spec']}, {f['sampler']}, "
          f"{sr['population']} candidates x {f['reads']} reads, {sr['confirm_top']} confirmed x {f['confirm_reads']} reads)")
    print(f"   starting local:2 took {started:.1f} s; its first generation (one candidate per task, timed) {first:.2f} s")
    print(f"   {'repeat':>6} {'serial s':>9} {'local:2 s':>10} {'speed-up':>9} {'pool:2 s':>9} {'speed-up':>9}"
          f" {'worker s':>9} {'slower':>7} {'dask s':>7}")
    for r, (a, b, c, busy) in enumerate(rows, 1):
        print(f"   {r:>6} {a:9.2f} {b:10.2f} {a / b:8.2f}x {c:9.2f} {a / c:8.2f}x {busy:9.2f} {busy / a:6.2f}x"
              f" {b - busy / 2:7.2f}")
    print(f"   median speed-up on 2 workers: local:2 {statistics.median(a / b for a, b, _, _ in rows):.2f}x, "
          f"process pool of 2 (no dask, for comparison) {statistics.median(a / c for a, _, c, _ in rows):.2f}x; "
          "the three alternate on the same candidates and give the same energies")
    print("   worker s: the workers' own seconds on the generation's tasks; slower: that over the serial seconds "
          "(the same work\n   takes longer with both cores busy: shared caches, clock, the host); dask s: "
          "wall time beyond half the\n   worker seconds (sending, waiting on the slower worker, fetching results)")
    print(f"   median: both cores busy make the work {statistics.median(busy / a for a, _, _, busy in rows):.2f}x "
          f"slower; dask adds {statistics.median(b - busy / 2 for _, b, _, busy in rows):.2f} s per generation")
    print(f"   cluster tasks after the timing pass: {len(tasks)}, {min(n for n, _ in tasks)}-"
          f"{max(n for n, _ in tasks)} candidates each, worker seconds per task median "
          f"{statistics.median(x for _, x in tasks):.2f} (min {min(x for _, x in tasks):.2f})")


def overhead(tmp: Path, n: int = 200) -> dict:
    cfg = validate({"graph": {"spec": "chimera:1"}, "fitness": {"sweeps": [1], "reads": 1}, "search": {"workers": 1}})
    ctx = Breeder(cfg, tmp / "o").ctx
    tasks = _generation_tasks(override(cfg, [f"search.population={n}"]), ctx, 7)[0]
    ex = DaskExecutor("local:2", task_seconds=0.0)  # one candidate per task, always
    ex.start(ctx)
    try:
        ex.map(tasks[:20])
        futures = ex.client.map(abs, range(-n, 0), pure=False)  # dask alone: a task that does nothing
        t0 = time.perf_counter()
        ex.client.gather(futures)
        bare = (time.perf_counter() - t0) / n
        t0 = time.perf_counter()
        ex.map(tasks)
        wall = time.perf_counter() - t0
        work = sum(x for _, x in ex.timings[-n:])
        lat = []
        for k in range(10):
            t0 = time.perf_counter()
            ex.map(tasks[k:k + 1])
            lat.append(time.perf_counter() - t0)
    finally:
        ex.close()
    per_task = max(wall - work / 2, 0.0) / n
    latency = statistics.median(lat)
    print(f"\n2. Overhead on local:2: {n} candidates of 8 spins, one per task, took {wall:.2f} s for {work:.2f} s of "
          f"work: {per_task * 1e3:.1f} ms per task beyond the work (dask alone, empty tasks: {bare * 1e3:.1f} ms); "
          f"a one-task round trip {latency * 1e3:.0f} ms")
    return {"per_task": per_task, "latency": latency}


def _preset(name: str) -> Path:
    return next(p for p in PRESETS if p.stem == name)


def _one(ctx, task) -> float:
    t0 = time.perf_counter()
    evaluate(ctx, task)
    return time.perf_counter() - t0


def profile_preset(path: Path, tmp: Path) -> dict:
    """Serial task times and the client's own seconds per generation, for one preset.

    Two generations are bred serially when that is quick; otherwise one search
    and one confirmation candidate are timed and the client's part is left out
    (``serial`` None: small beside such tasks, but not measured).
    """
    generations = load_preset(path)["search"]["generations"]
    cfg = override(load_preset(path), ["search.generations=2", "search.workers=1",
                                       f'library.path="{tmp / "lib"}"'])
    s, f = cfg["search"], cfg["fitness"]
    row = {"name": path.stem, "P": s["population"], "C": s["confirm_top"], "generations": generations,
           "graph": cfg["graph"]["spec"], "after": None}
    ctx = Breeder(cfg, tmp / f"{path.stem}-probe").ctx
    search, confirm = _generation_tasks(cfg, ctx, 99)
    _one(ctx, {**search[0], "reads": 1})  # warm-up (compiles the sampler where it needs it)
    t_search = _one(ctx, search[0])
    if t_search * (s["population"] + s["confirm_top"] * f["confirm_reads"] / f["reads"]) > PROFILE_SECONDS:
        return {**row, "t_search": t_search, "t_confirm": _one(ctx, confirm[0]), "serial": None}
    ex, marks = TimedSerial(), []
    breeder, result, gens = _run(cfg, tmp / path.stem, ex, marks)
    if path.stem == "demo":  # the work after the search, once per run, in the client
        t0 = time.perf_counter()
        finish(breeder, result)
        row["after"] = time.perf_counter() - t0
    searched = [t for r, t in ex.tasks if r == f["reads"]]
    confirmed = [t for r, t in ex.tasks if r != f["reads"]] or searched
    # Generation 2's wall time between progress calls, minus its maps, is the client's own work.
    serial_part = gens[1] - sum(ex.maps[marks[0]:marks[1]])
    return {**row, "t_search": statistics.median(searched), "t_confirm": statistics.median(confirmed),
            "serial": max(serial_part, 0.0)}


def model(p: dict, workers: int, over: dict, task_seconds: float = 0.5) -> float:
    """Seconds per generation on ``workers`` workers (see the module docstring)."""
    tasks = min(p["P"], max(workers, math.ceil(p["P"] * p["t_search"] / task_seconds))) + p["C"]
    return ((p["serial"] or 0.0) + 2 * over["latency"] + over["per_task"] * tasks
            + math.ceil(p["P"] / workers) * p["t_search"] + math.ceil(p["C"] / workers) * p["t_confirm"])


def estimate(tmp: Path, over: dict):
    print("\n3. Paper estimate per generation, from task times measured serially here")
    print(f"   {'preset':<18} {'graph':<12} {'P':>3} {'C':>2} {'t_search':>8} {'t_conf':>7} {'serial':>7}"
          + "".join(f" {f'S({w})':>7}" for w in WORKERS) + f" {'Amdahl512':>9} {'limit':>6}")
    rows = []
    for path in PRESETS:
        try:
            p = profile_preset(path, tmp)
        except InstgenError as exc:
            print(f"   {path.stem:<18} could not be bred here: {exc}")
            continue
        serial = p["serial"] or 0.0
        t1 = p["P"] * p["t_search"] + p["C"] * p["t_confirm"] + serial
        f = serial / t1
        amdahl = f"{1 / (f + (1 - f) / 512):8.0f}x" if p["serial"] is not None else f"{'-':>9}"
        limit = t1 / (serial + p["t_search"] + p["t_confirm"])
        shown = f"{p['serial']:7.3f}" if p["serial"] is not None else f"{'-':>7}"
        print(f"   {p['name']:<18} {p['graph']:<12} {p['P']:>3} {p['C']:>2} {p['t_search']:8.3f} "
              f"{p['t_confirm']:7.3f} {shown}" + "".join(f" {t1 / model(p, w, over):6.1f}x" for w in WORKERS)
              + f" {amdahl} {limit:5.1f}x")
        rows.append((p, t1))
    print("   P: candidates measured per generation (whole population, elites re-measured); C: confirmations;")
    print("   t_*: seconds per candidate; serial: the client's own seconds per generation; S(W): modelled")
    print("   speed-up on W workers; Amdahl512: the bound from the serial fraction alone; limit: one")
    print("   candidate per task, so no generation is faster than serial + t_search + t_confirm.")
    print(f"   '-': a generation would take over {PROFILE_SECONDS:g} s here, so single candidates were timed and the")
    print("   client's own part was not measured (left out of S).")
    for p, t1 in rows:
        if p["after"] is not None:
            _whole_run(p, t1, over)
    p = next((p for p, _ in rows if p["name"] == SPEEDUP_PRESET and p["serial"] is not None), None)
    if p is not None:
        grown = {**p, "P": 512, "serial": p["serial"] / p["P"] * 512}
        t512 = grown["P"] * grown["t_search"] + grown["C"] * grown["t_confirm"] + grown["serial"]
        print(f"   {SPEEDUP_PRESET} grown to population 512 (client's part scaled per candidate): "
              f"S(64) {t512 / model(grown, 64, over):.0f}x, S(512) {t512 / model(grown, 512, over):.0f}x; "
              f"client's part {grown['serial']:.2f} s and scheduler {over['per_task'] * (512 + grown['C']):.2f} s "
              f"per generation vs {grown['t_search'] + grown['t_confirm']:.2f} s of tasks on the critical path")


def _whole_run(p: dict, t1: float, over: dict):
    """A whole run: the search, then the work after it (measured here), which runs in the client."""
    after = p["after"]
    print(f"   {p['name']}, whole run of {p['generations']} generations (if no stopping rule fires first): "
          f"serially ~{p['generations'] * t1:.0f} s of search, then {after:.0f} s after it (certify, re-measure, "
          "random baseline, file; measured here)")
    for w in WORKERS[1:]:
        search = p["generations"] * model(p, w, over)
        print(f"     on {w} workers: search ~{search:.0f} s, then the same {after:.0f} s in the client "
              f"= {after / (search + after):.0%} of the run; whole-run speed-up "
              f"{(p['generations'] * t1 + after) / (search + after):.1f}x")


def main():
    print(f"instgen cluster benchmark on {cpu_model()}, {os.cpu_count()} cores, "
          f"load average {os.getloadavg()[0]:.1f} at start")
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        speedup(tmp)
        speedup(tmp, repeats=3, graph=CAMPAIGN_GRAPH, population=CAMPAIGN_POPULATION, label="1b.")
        over = overhead(tmp)
        estimate(tmp, over)
    print(f"\nload average {os.getloadavg()[0]:.1f} at the end")


if __name__ == "__main__":
    main()
