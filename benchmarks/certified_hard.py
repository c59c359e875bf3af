"""Certified and hard: bred planted instances against plain planted and random ones, in one run.

Run with ``.venv/bin/python -m benchmarks.certified_hard`` (``--quick`` for a
scaled-down pass, ``--out DIR`` for the folder, ``--search-cpu SECONDS`` for the
breeding budget).  Everything happens in this one run, with the same settings
for every row:

1. **Breed** ``presets/certified-hard.toml`` on chimera:8 for a budget of CPU
   time (default one CPU-hour, counted over the search process and its
   workers, so a busy machine buys the same search, only later).  The search
   scores with ``packed-sa``; it is stopped between generations and resumed
   (which equals one go) until the budget is spent.  Started again with the
   same ``--out``, an interrupted benchmark continues: the search from its
   checkpoint and budget ledger, the rows from the figures already measured.
2. **Rows**, ``PER_ROW`` instances each: plain frustrated loops (Hen et al.
   2015; weights 1, range-limited at |J| <= 3) at several densities; loops and
   frustrated Chimera cells drawn at random (the search's unbred starting
   point; square-lattice tile planting does not apply to Chimera); the best
   distinct bred instances; random ±1 instances.
3. **Measure** every instance with the reference samplers, ``sa`` and
   ``pimc``, same grid, reads and beta range (0.1, 5) for every row:
   TTS99 at the best sweep count of the grid.  Planted rows are measured
   against their planted energy (a proof); random rows against the lowest
   energy any run found, including long extra anneals: NOT a proven optimum.

The table (``table.md``) gives per row and solver the median TTS99 and its
spread (quartiles, and min..max), and how many figures are bounds.  CPU model,
wall time and CPU time are recorded with it, and ``results.json`` keeps every
figure.
"""

from __future__ import annotations

import argparse
import concurrent.futures as cf
import json
import multiprocessing as mp
import resource
import time
from pathlib import Path

import numpy as np

from benchmarks._machine import cpu_model

GRAPH = "chimera:8"
BETA = (0.1, 5.0)
#: A hotter start for the long anneals: beta 0.1 / 3 suits couplings of size 3 (int:3), so hardness that
#: only came from a start too cold for the bred instances' larger couplings would show up here.
HOT = (0.1 / 3, 5.0)
DENSITIES = (0.2, 0.35, 0.5, 0.8)
PRESET = Path(__file__).resolve().parent.parent / "presets" / "certified-hard.toml"
FULL = {"graph": GRAPH, "per_row": 5, "search_cpu": 3600.0, "step": 3,
        "solvers": {"sa": ([1000, 4000, 16000, 64000], 32), "pimc": ([100, 400, 1600], 12)},
        "long_anneal": (100_000, 128), "long": ("packed-sa", [16000, 64000, 256000], 128)}
QUICK = {"graph": GRAPH, "per_row": 3, "search_cpu": 600.0, "step": 2,
         "solvers": {"sa": ([1000, 4000, 16000], 16), "pimc": ([100, 400], 8)},
         "long_anneal": (50_000, 128), "long": ("packed-sa", [16000, 64000], 64)}
#: A seconds-long pass on a small graph that exercises every step (for checking the script itself).
SMOKE = {"graph": "chimera:2", "per_row": 2, "search_cpu": 10.0, "step": 1,
         "solvers": {"sa": ([100, 400], 8), "pimc": ([20, 40], 4)}, "long_anneal": (1000, 16),
         "long": ("packed-sa", [400, 1600], 16)}
#: Rows also measured with long anneals, where the reference grid may see no success at all.
LONG_ROWS = ("bred (this run)", "random ±1")


def _cpu() -> float:
    me, kids = resource.getrusage(resource.RUSAGE_SELF), resource.getrusage(resource.RUSAGE_CHILDREN)
    return me.ru_utime + me.ru_stime + kids.ru_utime + kids.ru_stime


# --------------------------------------------------------------------- search
def _search(out: str, budget: float, step: int, seed: int, graph: str) -> dict:
    """Breed until ``budget`` CPU seconds (this process and its workers) are spent; runs in its own process."""
    from instgen.evolve.engine import Breeder
    from instgen.preset import load_preset, override

    base = load_preset(PRESET)
    ledger = Path(out) / "budget.json"  # CPU and wall time spent so far, so a killed benchmark continues
    spent = json.loads(ledger.read_text()) if ledger.exists() else {"cpu": 0.0, "wall": 0.0, "generations": 0}
    t0, c0 = time.perf_counter(), _cpu()
    done, resume, result = spent["generations"], spent["generations"] > 0, None
    while spent["cpu"] + _cpu() - c0 < budget:
        done += step
        cfg = override(base, [f"search.generations={done}", "search.time_budget=1e9", f"run.seed={seed}",
                              f'run.out="{out}"', f'graph.spec="{graph}"'])
        result = Breeder(cfg, out).run(resume=resume)
        resume = True
        ledger.write_text(json.dumps({"cpu": spent["cpu"] + _cpu() - c0, "wall": spent["wall"] + time.perf_counter()
                                      - t0, "generations": result["generations"]}))
        if result["stopped"] and not result["stopped"].startswith("reached"):
            break
    total = json.loads(ledger.read_text())
    doc = json.loads((Path(out) / "checkpoint.json").read_text()) if result is None else None
    return {"wall": total["wall"], "cpu": total["cpu"], "generations": total["generations"],
            "evaluations": result["evaluations"] if result else doc["evaluations"],
            "stopped": result["stopped"] if result else "budget already spent"}


def bred_instances(out: str, count: int) -> list:
    """The ``count`` best distinct winners of the search in ``out``, with their proofs checked."""
    from instgen.certify import attach_certificate, certify
    from instgen.evolve.checkpoint import load_checkpoint
    from instgen.evolve.engine import Breeder, Famous
    from instgen.preset import load_preset

    br = Breeder(load_preset(Path(out) / "preset.toml"), out)
    hall = [Famous.from_dict(d, br.var) for d in load_checkpoint(Path(out))["hall"]][:count]
    insts = []
    for fam in hall:
        J, h, planted, _ = fam.genome.couplings()
        inst = br.ctx.instance(J, h, planted)
        inst = inst.replace(metadata={**inst.metadata, "construction": fam.genome.construction()})
        insts.append(attach_certificate(inst, certify(inst, method="planted")))
    return insts


# ----------------------------------------------------------------------- rows
def row_instance(row: str, k: int, graph: str = GRAPH):
    """Instance k of a non-bred row (seeded: the same every run)."""
    from instgen.make import make_instance
    from instgen.planted import plant

    seed = 1000 + k
    if row == "random ±1":
        return make_instance(graph, "pm1", seed=seed)
    if row.startswith("loops"):
        return plant(graph, "loops", seed=seed, density=float(row.split()[-1]), cap=3.0, weights=(1.0,))
    if row == "cells+loops, unbred":
        return plant(graph, "terms", seed=seed, density=0.4, kinds={"loop": 1.0, "cell": 1.0}, cap=3.0,
                     weights=(1.0, 2.0, 3.0))
    raise ValueError(row)


def _long(inst, plan: dict, seed: int, reference: float | None, beta=BETA):
    """The supplementary long-anneal TTS99 (packed-sa: the Metropolis dynamics of sa, 64 replicas per word)."""
    from instgen.scoring import measure_many

    name, grid, reads = plan["long"]
    return measure_many(inst, ["tts"], [name], sweeps=grid, reads=reads, seed=seed + 1, reference=reference,
                        beta_range=beta)[0]


def measure_instance(inst, plan: dict, seed: int, long: bool = False) -> dict:
    """TTS99 of one instance under every reference solver (and its reference energy and how it is known).

    With ``long``, the supplementary long anneals run first, so that for a random
    instance the lowest energy they find is part of the reference of every figure.
    """
    from instgen.samplers import Schedule, get_sampler
    from instgen.scoring import measure_many

    t0, c0 = time.perf_counter(), time.process_time()
    reference, status = inst.planted_energy, "planted"
    if inst.planted is None:  # random row: the lowest energy of long extra anneals (not a proof)
        sweeps, reads = plan["long_anneal"]
        batch = get_sampler("packed-sa").run(inst, Schedule(sweeps=sweeps, beta_range=BETA), reads=reads,
                                             seed=seed)
        reference, status = float(batch.energies.min()), "lowest found"
    extra = {}
    if long:
        for key, beta in (("long", BETA), ("long_hot", HOT)):
            s = _long(inst, plan, seed, reference, beta)
            extra[key] = s.to_dict()
            reference = min(reference, s.reference)
    scores = {}
    for name, (grid, reads) in plan["solvers"].items():
        s = measure_many(inst, ["tts"], [name], sweeps=grid, reads=reads, seed=seed, reference=reference,
                         beta_range=BETA)[0]
        scores[name] = s.to_dict()
        if s.reference < reference:
            reference = s.reference  # a solver went lower than the long anneals: rows measured later use it
    J = np.asarray(inst.J)
    for key, beta in (("long", BETA), ("long_hot", HOT)):
        if long and extra[key]["reference"] > reference:  # another run went lower still: measure again
            extra[key] = _long(inst, plan, seed, reference, beta).to_dict()
    return {"reference": reference, "reference_status": status, "scores": scores, **extra,
            "max_abs_J": float(np.abs(J).max()), "whole_numbers": bool(np.all(J == np.round(J))),
            "wall": time.perf_counter() - t0, "cpu": time.process_time() - c0}


def _job(args):
    row, k, plan, inst_dict, cache = args
    from instgen.io import instance_from_dict

    path = Path(cache) / f"{row.replace(' ', '_').replace('±', 'pm').replace(',', '')}-{k}.json"
    long = row in LONG_ROWS
    if path.exists():  # measured by an earlier, interrupted run of this benchmark
        cached = json.loads(path.read_text())
        if not long or "long_hot" in cached:
            return row, k, cached
    inst = instance_from_dict(inst_dict) if inst_dict is not None else row_instance(row, k, plan["graph"])
    result = measure_instance(inst, plan, seed=7919 * (k + 1), long=long)
    path.write_text(json.dumps(result, default=str))
    return row, k, result


# ---------------------------------------------------------------------- table
def _fmt(v) -> str:
    return "-" if v is None else f"{v:.3g}"


def _figures(per, solver):
    """(values, kinds) of one solver's TTS99 over a row; ``long`` and ``long_hot`` pick the long anneals."""
    if solver.startswith("long"):
        got = [r[solver] for r in per if solver in r]
    else:
        got = [r["scores"][solver] for r in per]
    return np.array([g["value"] for g in got], dtype=np.float64), [g["kind"] for g in got]


def table(results: dict, solvers, names=None) -> str:
    names = names or solvers
    lines = ["| row | n | " + " | ".join(f"{s} median TTS99 | {s} quartiles | {s} min..max | {s} bounds"
                                         for s in names) + " |",
             "|---|---|" + "---|---|---|---|" * len(solvers)]
    for row, per in results.items():
        cells = [row, str(len(per))]
        for s in solvers:
            vals, kinds = _figures(per, s)
            if not vals.size:
                cells += ["-"] * 4
                continue
            lower = sum(k == "lower bound" for k in kinds)
            upper = sum(k == "upper bound" for k in kinds)
            q1, med, q3 = np.quantile(vals, [0.25, 0.5, 0.75])
            cells += [(">= " if lower > len(vals) / 2 else "") + _fmt(med), f"{_fmt(q1)}..{_fmt(q3)}",
                      f"{_fmt(vals.min())}..{_fmt(vals.max())}", f"{lower} lower, {upper} upper"]
        lines.append("| " + " | ".join(cells) + " |")
    return "\n".join(lines)


def main(argv=None):
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--quick", action="store_true", help="scaled-down pass (fewer instances, reads, search)")
    p.add_argument("--smoke", action="store_true", help="seconds-long pass on chimera:2 (checks the script)")
    p.add_argument("--out", default="outputs/benchmarks/certified-hard", help="folder for the run and the table")
    p.add_argument("--search-cpu", type=float, help="breeding budget in CPU seconds")
    p.add_argument("--seed", type=int, default=11, help="search seed")
    p.add_argument("--measure-workers", type=int, default=2, help="processes measuring rows beside the search")
    args = p.parse_args(argv)
    plan = dict(SMOKE if args.smoke else QUICK if args.quick else FULL)
    budget = args.search_cpu or plan["search_cpu"]
    out = Path(args.out)
    cache = out / "measured"
    cache.mkdir(parents=True, exist_ok=True)
    t0, c0 = time.perf_counter(), _cpu()
    rows = [f"loops {d:g}" for d in DENSITIES] + ["cells+loops, unbred", "random ±1"]
    results: dict = {r: [] for r in rows[:-1] + ["bred (this run)", "random ±1"]}
    ctx = mp.get_context("spawn")
    with cf.ProcessPoolExecutor(max_workers=1, mp_context=ctx) as search_pool, \
            cf.ProcessPoolExecutor(max_workers=args.measure_workers, mp_context=ctx) as measure_pool:
        search = search_pool.submit(_search, str(out / "run"), budget, plan["step"], args.seed, plan["graph"])
        jobs = [measure_pool.submit(_job, (row, k, plan, None, str(cache)))
                for row in rows for k in range(plan["per_row"])]
        for fut in cf.as_completed(jobs):
            row, k, r = fut.result()
            results[row].append(r)
            print(f"measured {row} #{k}: " + ", ".join(
                f"{s} {v['value']:.3g} ({v['kind']})" for s, v in r["scores"].items()), flush=True)
        info = search.result()
    print(f"search: {info}", flush=True)
    from instgen.io import instance_to_dict

    bred = bred_instances(str(out / "run"), plan["per_row"])
    with cf.ProcessPoolExecutor(max_workers=2, mp_context=ctx) as pool:
        for row, k, r in pool.map(_job, [("bred (this run)", k, plan, instance_to_dict(inst), str(cache))
                                         for k, inst in enumerate(bred)]):
            results[row].append(r)
    solvers = list(plan["solvers"])
    doc = {"cpu_model": cpu_model(), "graph": plan["graph"], "beta_range": BETA, "plan": plan, "search": info,
           "wall_seconds": time.perf_counter() - t0, "cpu_seconds": _cpu() - c0, "rows": results}
    (out / "results.json").write_text(json.dumps(doc, indent=1, default=str))
    text = _report(doc, solvers)
    (out / "table.md").write_text(text)
    print(text)


def _median(rows, row, solver):
    vals, kinds = _figures(rows.get(row, []), solver)
    if not vals.size:
        return None, ""
    lower = sum(k == "lower bound" for k in kinds) > len(vals) / 2
    return float(np.median(vals)), (">= " if lower else "")


def _report(doc: dict, solvers) -> str:
    rows = doc["rows"]
    plan = doc["plan"]
    med = {r: _median(rows, r, "sa") for r in rows}
    loops = max((r for r in med if r.startswith("loops ") and med[r][0] is not None), key=lambda r: med[r][0])
    (bred, bb), (rnd, rb) = med["bred (this run)"], med["random ±1"]
    (lbred, lbb), (lrnd, lrb) = _median(rows, "bred (this run)", "long"), _median(rows, "random ±1", "long")
    (hbred, hbb), (hrnd, hrb) = (_median(rows, "bred (this run)", "long_hot"),
                                 _median(rows, "random ±1", "long_hot"))
    js = rows["bred (this run)"]
    grids = "; ".join(f"{s}: sweeps {g}, {r} reads" for s, (g, r) in plan["solvers"].items())
    name, lgrid, lreads = plan["long"]
    met = bred >= rnd and not rb
    long_met = lbred is not None and lrnd is not None and lbred >= lrnd and not lrb
    return "\n".join([
        f"# Certified and hard on {doc['graph']}", "",
        f"CPU: {doc['cpu_model']}; this invocation {doc['wall_seconds']:.0f} s wall, {doc['cpu_seconds']:.0f} s CPU; "
        f"search {doc['search']['cpu']:.0f} s CPU ({doc['search']['wall']:.0f} s wall, "
        f"{doc['search']['generations']} generations, {doc['search']['evaluations']} evaluations).",
        f"Every row: beta {doc['beta_range'][0]}..{doc['beta_range'][1]} (geometric), {grids}; TTS99 in sweeps "
        "at the best sweep count of the grid.",
        "Planted rows against their planted energy (proof); random ±1 against the lowest energy found "
        "(long extra anneals and every run): NOT certified, a lower state would make them harder.",
        "'lower' bounds: no read succeeded at any sweep count (the figure is the smallest per-count bound, a weak "
        "one); 'upper' bounds: the best sweep count is at the edge of the grid. Bred instances come from one "
        "search and are relatives.", "",
        "## Reference samplers (same settings for every row)", "",
        table(rows, solvers), "",
        f"## Long anneals for the bred and random rows ({name}: the Metropolis dynamics of sa, 64 replicas per "
        f"word; sweeps {lgrid}, {lreads} reads; random references include these runs)", "",
        table({r: rows[r] for r in LONG_ROWS}, ["long", "long_hot"],
              [f"{name} beta {BETA[0]:g}..{BETA[1]:g}", f"{name} beta {HOT[0]:.3g}..{HOT[1]:g}"]), "",
        f"sa medians: bred {bb}{bred:.3g}, random ±1 {rb}{rnd:.3g} (ratio {bred / rnd:.2f}), hardest plain loop "
        f"density {loops} {med[loops][1]}{med[loops][0]:.3g} (ratio {bred / med[loops][0]:.2f}).",
        f"long-anneal medians: bred {lbb}{_fmt(lbred)}, random ±1 {lrb}{_fmt(lrnd)}; with the hotter start: "
        f"bred {hbb}{_fmt(hbred)}, random ±1 {hrb}{_fmt(hrnd)}.",
        f"target (bred median >= random median under sa, reference grid): {'MET' if met else 'NOT met'}; "
        f"under the long anneals: {'MET' if long_met else 'NOT met'}.",
        f"bred couplings: max |J| {max(x['max_abs_J'] for x in js):g}, whole numbers: "
        f"{all(x['whole_numbers'] for x in js)}.",
    ])


if __name__ == "__main__":
    main()
