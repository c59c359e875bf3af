"""Speed of the fast surrogate kernels against the reference annealer, in one run.

Run with ``.venv/bin/python -m benchmarks.kernel`` (``--quick`` for a shorter pass,
``--graphs chimera:8`` and ``--sweeps 1000`` to narrow it down).

For each graph (chimera:3, chimera:8, chimera:16, pegasus:6) and schedule length
(10 and 1,000 sweeps) it times, interleaved and repeated in the same process:

* ``ref``: dwave-samplers' SimulatedAnnealingSampler with the same explicit beta
  schedule (``beta_schedule_type="custom"``), on a prebuilt BQM, one call per
  candidate (BQM building is not counted, which flatters the reference);
* ``fast-sa``: :meth:`FastAnnealing.run_many`, all candidates in one call,
  Gaussian couplings and ±1 couplings;
* ``packed-sa``: :meth:`PackedAnnealing.run_many` on ±1 couplings, with
  independent random bits per replica (the default) and with shared ones.

A candidate is scored with 64 reads.  ``ns/upd`` is CPU time (of this process,
so time spent waiting for a core on a shared machine is not counted) per
attempted single-spin update (reads x sweeps x spins); ``cand/s`` is candidates
scored per CPU second.  Each figure is the best of the repeats (the least
disturbed); the median of the per-round ratios is shown beside it.
Ratios compare with the reference on the same couplings (Gaussian for the
Gaussian row, ±1 for the ±1 rows).
"""

from __future__ import annotations

import argparse
import statistics
import time

import numpy as np

from benchmarks._machine import cpu_model

from instgen.make import make_instance
from instgen.samplers import Schedule
from instgen.samplers.base import index_bqm
from instgen.samplers.fast_sa import FastAnnealing
from instgen.samplers.fast_sa import warm_up as warm_fast
from instgen.samplers.packed_sa import PackedAnnealing
from instgen.samplers.packed_sa import warm_up as warm_packed

GRAPHS = ("chimera:3", "chimera:8", "chimera:16", "pegasus:6")
SWEEPS = (10, 1000)
READS = 64
#: Aim for this many spin updates per timed call of our kernels (sets the candidate count).
TARGET_UPDATES = 5e7
MIN_SECONDS = 0.15


def _timed(fn) -> float:
    """CPU seconds per call of ``fn``, repeating it until MIN_SECONDS have passed.

    CPU time of this process, not wall time: on a shared machine the time spent
    waiting for a core would otherwise land on whichever job happened to be
    running.  (Contention for caches and a shared physical core still shows.)
    """
    calls, t0 = 0, time.process_time()
    while True:
        fn()
        calls += 1
        dt = time.process_time() - t0
        if dt >= MIN_SECONDS:
            return dt / calls


def plan(graph: str, sweeps: int, quick: bool):
    inst = {c: make_instance(graph, c, seed=11) for c in ("gaussian", "pm1")}
    n = inst["pm1"].n
    per_candidate = READS * sweeps * n
    count = int(np.clip(round(TARGET_UPDATES / (4 if quick else 1) / per_candidate), 1, 64))
    kids = {c: [x.with_couplings(x.J * g) for g in np.where(np.arange(count) % 2 == 0, 1.0, -1.0)]
            for c, x in inst.items()}
    sched = Schedule(sweeps=sweeps)
    betas = sched.betas()
    from dwave.samplers import SimulatedAnnealingSampler

    ref = SimulatedAnnealingSampler()
    ref_reads = READS if not (quick and per_candidate > 2e7) else 16
    bqm = {c: index_bqm(x) for c, x in inst.items()}
    fast, packed = FastAnnealing(), PackedAnnealing()
    seeds = list(range(count))
    jobs = {
        ("ref", "gaussian"): (lambda: ref.sample(bqm["gaussian"], num_reads=ref_reads, seed=1,
                                                 beta_schedule_type="custom", beta_schedule=betas), 1, ref_reads),
        ("ref", "pm1"): (lambda: ref.sample(bqm["pm1"], num_reads=ref_reads, seed=1,
                                            beta_schedule_type="custom", beta_schedule=betas), 1, ref_reads),
        ("fast-sa", "gaussian"): (lambda: fast.run_many(kids["gaussian"], sched, READS, seeds), count, READS),
        ("fast-sa", "pm1"): (lambda: fast.run_many(kids["pm1"], sched, READS, seeds), count, READS),
        ("packed-sa", "pm1"): (lambda: packed.run_many(kids["pm1"], sched, READS, seeds), count, READS),
        ("packed-sa shared", "pm1"): (lambda: packed.run_many(kids["pm1"], sched, READS, seeds,
                                                              randomness="shared"), count, READS),
    }
    return n, count, jobs


def bench(graph: str, sweeps: int, repeats: int, quick: bool) -> list[tuple]:
    n, count, jobs = plan(graph, sweeps, quick)
    samples = {k: [] for k in jobs}
    for _ in range(repeats):
        for key, (fn, cands, reads) in jobs.items():  # interleaved: every job once per round
            sec = _timed(fn)
            samples[key].append((sec / (cands * reads * sweeps * n) * 1e9, cands / sec * reads / READS))
    rows = []
    for key, vals in samples.items():
        ns = [v[0] for v in vals]
        ref_ns = [v[0] for v in samples[("ref", key[1])]]
        best_ratio = min(ref_ns) / min(ns)
        med_ratio = statistics.median(r / m for r, m in zip(ref_ns, ns))
        rows.append((graph, n, sweeps, key[0], key[1], min(ns), max(v[1] for v in vals), best_ratio, med_ratio,
                     count if key[0] != "ref" else 1))
    return rows


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="fewer repeats and shorter reference runs")
    ap.add_argument("--graphs", nargs="*", default=list(GRAPHS))
    ap.add_argument("--sweeps", nargs="*", type=int, default=list(SWEEPS))
    ap.add_argument("--repeats", type=int, default=None)
    args = ap.parse_args(argv)
    repeats = args.repeats or (2 if args.quick else 5)
    t0 = time.perf_counter()
    warm_fast()
    warm_packed()
    print(f"CPU: {cpu_model()}; single thread; CPU time; {READS} reads per candidate; "
          f"best of {repeats} interleaved repeats")
    print(f"kernels loaded in {time.perf_counter() - t0:.1f} s (includes compiling if the disk cache was empty)\n")
    head = (f"{'graph':<11}{'spins':>6}{'sweeps':>7}  {'sampler':<17}{'couplings':<10}{'ns/upd':>8}"
            f"{'cand/s':>11}{'x ref':>8}{'median':>8}{'cands/call':>11}")
    print(head)
    print("-" * len(head))
    results = []
    for graph in args.graphs:
        for sweeps in args.sweeps:
            for row in bench(graph, sweeps, repeats, args.quick):
                results.append(row)
                g, n, sw, name, coup, ns, cps, ratio, med, cands = row
                print(f"{g:<11}{n:>6}{sw:>7}  {name:<17}{coup:<10}{ns:>8.2f}{cps:>11.1f}{ratio:>8.1f}"
                      f"{med:>8.1f}{cands:>11}")
            print()
    for g, n, sw, name, coup, ns, cps, ratio, med, cands in results:
        if n == 512 and sw == 1000 and name != "ref":
            # The issue's multi-spin target is for replicas sharing random numbers; independent bits
            # per replica (packed-sa's default) cost more and have no target of their own.
            target = {"gaussian": 8, "pm1": 30 if name == "packed-sa shared" else None}[coup]
            verdict = "" if target is None else (f"target {target}x: " + ("met" if ratio >= target else "MISSED"))
            print(f"512 spins, 1000 sweeps, {name} on {coup}: {ratio:.1f}x the reference "
                  f"(median {med:.1f}x) {verdict}")


if __name__ == "__main__":
    main()
