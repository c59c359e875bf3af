"""What a breeding run will cost, said before it starts.

The work of a run is counted in spin updates (one Metropolis proposal to one
spin), the unit every sampler reports, from the preset alone:

* the search: each generation measures every member of the population with
  ``[fitness] reads`` at every sweep count the fitness needs, on the breeding
  sampler and each further search solver (survivors are measured again and
  their measurements pooled), and confirms up to ``confirm_top`` with
  ``confirm_reads``;
* the figures after the search: each winner and each baseline instance is
  measured once per reporting solver; pinned TTS99 figures spend at most
  ``pin_budget`` each, other metrics ``confirm_reads`` at the grid;
* certification: at most ``[library] time_limit`` seconds per instance whose
  optimum the run needs and is not planted.

Seconds come from timing the breeding sampler on one random instance of the
run's graph (after a warm-up, so a compiled sampler's compilation is not
counted), divided by the workers.  Both are estimates: the search may stop
early (``stall``, ``target``, ``time_budget``), pinning usually stops well under
its budget, and a machine under other load is slower.

>>> from instgen.preset import load_preset
>>> plan = work_plan(load_preset("presets/demo.toml"), calibrate=False)
>>> plan.search_updates > 0 and plan.search_seconds is None
True
"""

from __future__ import annotations

import dataclasses
import math
import os
import time


@dataclasses.dataclass
class Plan:
    """Work of a run in spin updates, and seconds where a rate was measured."""

    n: int
    generations: int
    evaluations: int
    search_updates: float
    final_updates: float
    certify_seconds: float
    rate: float | None = None   # spin updates per second of one worker, measured
    workers: int = 1

    time_budget: float | None = None   # [search] time_budget, seconds
    pinned: bool = False               # the final figures are pinned TTS99 (a budget each, seldom all spent)

    @property
    def search_seconds(self) -> float | None:
        """Seconds of the search at the measured rate, or its time budget when that is sooner."""
        if self.rate is None:
            return self.time_budget
        t = self.search_updates / (self.rate * self.workers)
        return t if self.time_budget is None else min(t, self.time_budget)

    def text(self) -> str:
        """Two lines for the start of a run: the search, then what comes after it."""
        search = (f"planned work: {self.generations} generations on {self.n} spins, about {self.evaluations} "
                  f"evaluations, {self.search_updates:.2g} spin updates")
        if self.rate is not None:
            search += (f", about {_duration(self.search_seconds)} at the {self.rate:.2g} spin updates/s measured "
                       f"here with {self.workers} worker{'s' if self.workers != 1 else ''}")
        elif self.time_budget is not None:
            search += f", at most {_duration(self.time_budget)} ([search] time_budget)"
        if self.time_budget is not None and self.rate is not None and self.search_seconds == self.time_budget:
            search += " (its time budget)"
        after = f"after the search: at most {self.final_updates:.2g} spin updates for the final figures"
        if self.rate is not None:
            after += (f" (up to {_duration(self.final_updates / (self.rate * self.workers))}"
                      + ("; pinning usually stops far sooner)" if self.pinned else ")"))
        if self.certify_seconds:
            after += f" and up to {_duration(self.certify_seconds)} of certification"
        return search + "; a stall or target can end it sooner.\n" + after + "."


def work_plan(cfg: dict, calibrate: bool = True) -> Plan:
    """The work a validated preset asks for; ``calibrate`` times its sampler here."""
    from ..fitness import Context
    from ..make import topology

    topo = topology(cfg["graph"]["spec"])
    ctx = Context.from_config(cfg, topo)
    f, s, lib = cfg["fitness"], cfg["search"], cfg["library"]
    n, gens, pop = topo.n, int(s["generations"]), int(s["population"])
    per_read = sum(ctx.sweep_counts()) * n * (1 + len(ctx.solvers))
    new = gens * pop
    confirms = gens * min(int(s["confirm_top"]), pop)
    search = new * f["reads"] * per_read + confirms * f["confirm_reads"] * per_read
    solvers = 1 + len([x for x in dict.fromkeys(f["solvers"]) if x != f["sampler"]])
    instances = int(s["winners"]) + 2 * int(lib["baseline"])   # winners, random baseline, unbred start
    if f["metric"] == "tts":
        final = instances * solvers * float(f["pin_budget"])
    else:
        final = instances * solvers * f["confirm_reads"] * sum(ctx.sweep_counts()) * n
    proving = f["reference"] in ("certified", "confirm-certified", "auto") and cfg["planting"]["method"] == "none"
    cert = (int(s["winners"]) + (int(lib["baseline"]) if proving else 0)) * float(lib["time_limit"]) \
        if lib["certify"] != "none" and cfg["planting"]["method"] == "none" else 0.0
    workers = int(s["workers"]) or (os.cpu_count() or 1)
    rate = _rate(ctx, topo, cfg) if calibrate and ctx.user is None else None
    return Plan(n=n, generations=gens, evaluations=new + confirms, search_updates=float(search),
                final_updates=float(final), certify_seconds=cert, rate=rate, workers=workers,
                time_budget=s["time_budget"], pinned=f["metric"] == "tts")


def _rate(ctx, topo, cfg) -> float | None:
    """Spin updates per second of the breeding sampler on one random instance of the graph."""
    from ..couplings import CouplingRules
    from ..make import make_instance
    from ..samplers import get_sampler

    inst = make_instance(topo, CouplingRules.from_dict(ctx.rules), seed=0)
    sampler = get_sampler(ctx.sampler)
    sweeps = min(ctx.sweep_counts() or (10,))
    reads = min(int(cfg["fitness"]["reads"]), 64)
    sampler.run(inst, ctx.schedule(sweeps), reads=reads, seed=1)  # warm-up: compiles a compiled sampler
    t0 = time.perf_counter()
    batch = sampler.run(inst, ctx.schedule(sweeps), reads=reads, seed=2)
    seconds = time.perf_counter() - t0
    return batch.spin_updates / seconds if seconds > 0 and batch.spin_updates else None


def _duration(seconds: float) -> str:
    if not math.isfinite(seconds):
        return "forever"
    if seconds < 90:
        return f"{seconds:.0f} s"
    if seconds < 5400:
        return f"{seconds / 60:.0f} min"
    if seconds < 48 * 3600:
        return f"{seconds / 3600:.1f} h"
    return f"{seconds / 86400:.1f} days"


__all__ = ["Plan", "work_plan"]
