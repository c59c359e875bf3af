"""Does the engine's honesty pay?  Engine vs naive DEAP loop vs random search, same CPU budget.

On chimera:4 with ±1 couplings, each method gets the same serial CPU budget
and the same fitness (TTS99 at the best sweep count, in sweeps, against the best
energy found):

* ``engine``: instgen's breeder (common random numbers, pooled elites,
  confirmation on fresh seeds);
* ``naive``: a textbook DEAP loop (creator classes, tournament selection,
  uniform crossover, bit-flip mutation) whose fitness uses one fixed sampler seed;
* ``random``: random instances of the same graph and alphabet, best kept.

Afterwards every method's top winners are certified exactly and measured again
on fresh seeds with many reads against the certified energy.  Printed, as ratios
to the median random instance measured the same way in the same run: the
fresh-seed hardness of each method's best, and how far each method's reported
fitness overstates its fresh-seed figure.

    python -m benchmarks.engine              # 600 CPU-seconds per method (about 35 minutes)
    python -m benchmarks.engine --budget 120 # a quicker look
"""

from __future__ import annotations

import argparse
import math
import random
import time

import numpy as np

from instgen.certify import certify
from instgen.fitness import Context, measure, value
from instgen.graphs import build_graph
from instgen.make import make_instance
from instgen.preset import validate
from instgen.scoring import measure as score
from instgen.seeds import derive_seed


def settings(args):
    return validate({
        "run": {"seed": args.seed},
        "graph": {"spec": args.graph},
        "couplings": {"alphabet": "pm1"},
        "fitness": {"metric": "tts", "sampler": args.sampler, "sweeps": args.sweeps, "reads": args.reads,
                    "confirm_reads": 4 * args.reads, "reference": args.reference},
        "search": {"population": 16, "generations": 10**6, "elites": 3, "workers": 1, "time_budget": args.budget,
                   "confirm_top": 2, "winners": args.top, "mutation_rate": 0.03},
        "library": {"count": 0, "baseline": 0},
    })


def run_engine(cfg, out):
    from instgen.evolve.engine import Breeder

    br = Breeder(cfg, out)
    br.run()
    return [(f.genome.J, f.confirmed) for f in br.hall]


def run_random(cfg, ctx, budget, top):
    t0, k, found = time.perf_counter(), 0, []
    while time.perf_counter() - t0 < budget:
        inst = make_instance(cfg["graph"]["spec"], "pm1", seed=derive_seed(cfg["run"]["seed"], "rand", k))
        m = measure(ctx, inst.J, inst.h, derive_seed(cfg["run"]["seed"], "rand-m", k), cfg["fitness"]["reads"])
        found.append((inst.J, value(ctx, m, None)[0]))
        k += 1
    found.sort(key=lambda x: -x[1])
    return found[:top]


def run_naive(cfg, ctx, budget, top):
    from deap import algorithms, base, creator, tools

    random.seed(cfg["run"]["seed"])
    if not hasattr(creator, "HardFit"):
        creator.create("HardFit", base.Fitness, weights=(1.0,))
        creator.create("Couplings", list, fitness=creator.HardFit)
    m = len(ctx.edges)
    tb = base.Toolbox()
    tb.register("bit", random.choice, [-1.0, 1.0])
    tb.register("individual", tools.initRepeat, creator.Couplings, tb.bit, m)
    tb.register("population", tools.initRepeat, list, tb.individual)
    fixed_seed = 12345  # the naive part: one sampler seed for every evaluation

    def evaluate(ind):
        meas = measure(ctx, np.asarray(ind), np.zeros(ctx.n), fixed_seed, cfg["fitness"]["reads"])
        return (value(ctx, meas, None)[0],)

    def flip(ind, indpb):
        for i in range(len(ind)):
            if random.random() < indpb:
                ind[i] = -ind[i]
        return (ind,)

    tb.register("evaluate", evaluate)
    tb.register("mate", tools.cxUniform, indpb=0.5)
    tb.register("mutate", flip, indpb=0.03)
    tb.register("select", tools.selTournament, tournsize=3)
    pop = tb.population(n=16)
    hof = tools.HallOfFame(top)
    t0 = time.perf_counter()
    for ind in pop:
        ind.fitness.values = tb.evaluate(ind)
    hof.update(pop)
    while time.perf_counter() - t0 < budget:
        offspring = algorithms.varAnd(tb.select(pop, len(pop)), tb, cxpb=0.5, mutpb=1.0)
        for ind in offspring:
            if not ind.fitness.valid:
                ind.fitness.values = tb.evaluate(ind)
        pop[:] = offspring
        hof.update(pop)
    return [(np.asarray(ind), ind.fitness.values[0]) for ind in hof]


def fresh(cfg, topo, J, k, reads):
    """TTS99 on fresh seeds against the certified energy."""
    from instgen.instance import Instance

    inst = Instance(edges=topo.edges, J=J, n=topo.n, graph=topo.spec, metadata={"rules": {"couplings": "pm1",
                    "fields": "none", "coupling_range": None, "field_range": None, "precision": None}})
    cert = certify(inst, method="auto", time_limit=120)
    s = score(inst, "tts", sampler=cfg["fitness"]["sampler"], sweeps=cfg["fitness"]["sweeps"], reads=reads,
              seed=derive_seed(cfg["run"]["seed"], "fresh", k), reference=cert.energy)
    return s.value, cert.status


def main(argv=None):
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--budget", type=float, default=600.0, help="seconds per method (wall clock, one process each)")
    p.add_argument("--graph", default="chimera:4")
    p.add_argument("--sampler", default="sa")
    p.add_argument("--sweeps", type=lambda s: [int(x) for x in s.split(",")], default=[10, 30, 100, 300, 1000, 3000])
    p.add_argument("--reads", type=int, default=32)
    p.add_argument("--fresh-reads", type=int, default=400)
    p.add_argument("--top", type=int, default=3)
    p.add_argument("--baseline", type=int, default=10)
    p.add_argument("--seed", type=int, default=1)
    p.add_argument("--reference", default="confirm-certified",
                   help="the engine's reference energy: confirm-certified (default) or best-found")
    p.add_argument("--out", default="outputs/bench-engine")
    args = p.parse_args(argv)
    cfg = settings(args)
    topo = build_graph(args.graph)
    ctx = Context.from_config(cfg, topo)
    print(f"graph {args.graph}, sampler {args.sampler}, sweeps {args.sweeps}, reads {args.reads}, "
          f"budget {args.budget:g} CPU-s per method")
    found = {}
    for name, fn in (("engine", lambda: run_engine(cfg, args.out)),
                     ("naive", lambda: run_naive(cfg, ctx, args.budget, args.top)),
                     ("random", lambda: run_random(cfg, ctx, args.budget, args.top))):
        t0 = time.perf_counter()
        found[name] = fn()[: args.top]
        print(f"  {name:<7} searched for {time.perf_counter() - t0:.0f} CPU-s")
    base = []
    for k in range(args.baseline):
        J = make_instance(args.graph, "pm1", seed=derive_seed(args.seed, "baseline", k)).J
        base.append(fresh(cfg, topo, J, 10_000 + k, args.fresh_reads)[0])
    median = float(np.median(base))
    print(f"\nmedian random instance: TTS99 {median:.3g} sweeps (fresh seeds, certified optimum, "
          f"{args.baseline} instances)\n")
    print(f"{'method':<8} {'reported':>10} {'fresh':>10} {'fresh / random median':>22} {'reported / fresh':>17}")
    for name, winners in found.items():
        for i, (J, reported) in enumerate(winners):
            tts_fresh, status = fresh(cfg, topo, np.asarray(J), derive_seed(args.seed, name, i), args.fresh_reads)
            rep = 10 ** reported
            print(f"{name:<8} {rep:>10.3g} {tts_fresh:>10.3g} {tts_fresh / median:>22.2f} "
                  f"{rep / tts_fresh if tts_fresh and math.isfinite(tts_fresh) else float('nan'):>17.2f}"
                  + ("" if status != "not proven" else "  (optimum not proven)"))


if __name__ == "__main__":
    main()
