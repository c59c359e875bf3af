"""Nanoseconds per spin update for every surrogate sampler, on one 512-spin instance.

Run with ``.venv/bin/python -m benchmarks.samplers``.  All samplers run in the
same process on the same chimera:8 instance with ±1 couplings; each figure is
the best of a few repeats (the machine may be shared), and the table gives
ratios to ``sa`` measured in the same run.  What a "spin update" is differs:
an attempted single-spin flip for sa and rotor, a world-line update for pimc,
a candidate flip evaluated for tabu, a flip made for descent.  A second table
compares one scoring call with the bare sampler calls inside it.
"""

from __future__ import annotations

import time

from benchmarks._machine import cpu_model
from instgen.make import make_instance
from instgen.samplers import SAMPLERS, Schedule, default_beta_range
from instgen.scoring import measure

#: (sweeps, reads) per sampler, sized so each run takes around a second.
PLAN = {
    "sa": (1000, 32), "fast-sa": (1000, 32), "packed-sa": (1000, 64), "rotor": (300, 32),
    "pimc": (100, 8), "tabu": (500, 16), "descent": (50, 16),
}
REPEATS = 3


def time_sampler(name, inst, sweeps, reads):
    sampler = SAMPLERS.get(name)()
    sched = Schedule(sweeps=sweeps, beta_range=default_beta_range(1.0))
    sampler.run(inst, Schedule(sweeps=5, beta_range=sched.beta_range), reads=2, seed=0)  # warm-up / compile
    best = None
    for k in range(REPEATS):
        b = sampler.run(inst, sched, reads=reads, seed=k)
        ns = b.seconds / max(1, b.spin_updates) * 1e9
        best = ns if best is None else min(best, ns)
    return best, b.spin_updates


def main():
    inst = make_instance("chimera:8", "pm1", seed=1)
    print(f"CPU: {cpu_model()}")
    print(f"instance: {inst.n} spins, {inst.m} couplings on {inst.graph} (pm1); best of {REPEATS} runs\n")
    rows = []
    for name in SAMPLERS.names():
        if name == "exact":
            rows.append((name, None, None, "brute force stops at 24 spins"))
            continue
        sweeps, reads = PLAN.get(name, (200, 16))
        try:
            ns, updates = time_sampler(name, inst, sweeps, reads)
        except Exception as exc:  # a sampler still being written must not stop the table
            rows.append((name, None, None, f"not available: {type(exc).__name__}: {exc}"[:70]))
            continue
        rows.append((name, ns, updates, f"{sweeps} sweeps x {reads} reads"))
    ref = next(r[1] for r in rows if r[0] == "sa")
    print(f"{'sampler':<10} {'ns/update':>10} {'vs sa':>8} {'updates':>12}  run")
    for name, ns, updates, what in rows:
        if ns is None:
            print(f"{name:<10} {'-':>10} {'-':>8} {'-':>12}  {what}")
        else:
            print(f"{name:<10} {ns:>10.1f} {ns / ref:>7.2f}x {updates:>12,d}  {what}")

    print("\nscoring overhead: measure(tts over 10,100 sweeps, 32 reads) vs the two bare sa calls")
    sa = SAMPLERS.get("sa")()
    bare = scored = float("inf")
    for k in range(7):
        t = time.perf_counter()
        for s in (10, 100):
            sa.run(inst, Schedule(sweeps=s), reads=32, seed=k)
        bare = min(bare, time.perf_counter() - t)
        t = time.perf_counter()
        measure(inst, "tts", sweeps=[10, 100], reads=32, seed=k)
        scored = min(scored, time.perf_counter() - t)
    print(f"bare sampler calls {bare * 1e3:.1f} ms, measure {scored * 1e3:.1f} ms, ratio {scored / bare:.2f}")


if __name__ == "__main__":
    main()
