"""After the search: certify the winners, measure it honestly, compare with two baselines.

For each winner (up to ``[search] winners``):

1. build the instance, with its rules, construction and provenance;
2. certify its ground state (``[library] certify``; planted instances are
   checked against their construction) — an unproven optimum stays marked
   ``not proven`` everywhere it appears;
3. measure the run's metric again on fresh seeds, against the certified energy,
   under the search sampler and every extra solver in ``[fitness] solvers``
   (TTS99 pinned at its optimal sweep count);
4. write it to ``winners/`` with its certificate and scores.

The same measurement is made on ``[library] baseline`` instances of two kinds,
so the summary can say what breeding added, measured in the same run:

* **random**: random couplings of the same graph and alphabet;
* **start**: unbred instances drawn the way the search draws its first
  generation (for planted runs, planted instances of the same family and
  density; for free runs this is the random baseline itself).

Each comparison is a ratio of medians with a bootstrap interval and a verdict
that follows the interval (:mod:`instgen.compare`).
"""

from __future__ import annotations

import json
import math
import uuid
from pathlib import Path

import numpy as np

from ..compare import EASIER, HARDER, compare_figures
from ..io import atomic_write, save_instance
from ..make import make_instance
from ..preset import preset_hash
from ..scoring import METRICS, Pinning, measure_many
from ..seeds import derive_seed

SUMMARY_VERSION = 1


def _final_metrics(ctx) -> list[str]:
    if ctx.user is not None:
        return ["tts"]
    return ctx.metric_names()


def pinning(cfg) -> Pinning:
    """How the figures that leave the search pin TTS99 at its optimum (the [fitness] pin_* keys)."""
    f = cfg["fitness"]
    return Pinning(budget=float(f["pin_budget"]), max_sweeps=int(f["pin_max_sweeps"]),
                   successes=int(f["pin_successes"]), cold_ends=tuple(float(c) for c in f["cold_ends"]))


#: Metrics whose figures are measured against the ground-state energy (the anneal gain is not).
USES_REFERENCE = ("tts", "success", "residual")


def _certify(inst, cfg, time_limit=None):
    from ..certify import attach_certificate, certify

    cert = certify(inst, method=cfg["library"]["certify"], time_limit=time_limit or cfg["library"]["time_limit"],
                   seed=derive_seed(cfg["run"]["seed"], "certify"))
    return attach_certificate(inst, cert), cert


def _needs_reference(ctx) -> bool:
    return any(m in USES_REFERENCE for m in _final_metrics(ctx))


def _no_certificate():
    from ..records import Certificate

    return Certificate(math.nan, np.zeros(0, dtype=np.int8), "none", "not proven",
                       details={"why": "not needed: the run's metric does not use the ground-state energy"})


def _measure(inst, cfg, ctx, seed):
    """The run's metrics on fresh seeds under every solver; TTS99 pinned at its optimum."""
    solvers = list(dict.fromkeys([ctx.sampler] + list(cfg["fitness"]["solvers"])))
    scores = []
    for metric in _final_metrics(ctx):
        counts = METRICS.get(metric).counts_for(ctx.sweeps, ctx.short_sweeps, ctx.long_sweeps)
        scores += measure_many(inst, [metric], solvers, sweeps=list(counts),
                               reads=cfg["fitness"]["confirm_reads"], seed=seed, beta_range=ctx.beta_range,
                               schedule={"interpolation": ctx.interpolation},
                               pin=pinning(cfg) if metric == "tts" else None)
    return scores


def _entry(inst, cert, scores, path=None) -> dict:
    con = inst.metadata.get("construction")
    return {
        "file": None if path is None else path.name,
        "n": inst.n, "m": inst.m,
        "planted_energy": inst.planted_energy if inst.planted is not None else None,
        "construction": con.get("family") if isinstance(con, dict) else None,
        "certificate": {"energy": cert.energy, "method": cert.method, "status": cert.status,
                        "seconds": cert.seconds, "ground_states": cert.ground_states},
        "scores": [s.to_dict() for s in scores],
    }


def finish(breeder, result: dict, say=None) -> dict:
    """Certify, re-measure and write the winners; returns the run summary (also in summary.json).

    ``say`` (a callable taking one line) hears what each phase is doing.
    """
    say = say or (lambda text: None)
    cfg, ctx, out = breeder.cfg, breeder.ctx, breeder.out
    run_id = uuid.uuid5(uuid.NAMESPACE_OID, f"{preset_hash(cfg)}:{out.resolve()}").hex[:12]
    hall_dir = out / "winners"
    hall_dir.mkdir(parents=True, exist_ok=True)
    winners = []
    construction = breeder.var.extra.get("construction")
    chosen = breeder.hall[: cfg["search"]["winners"]]
    for rank, fam in enumerate(chosen, 1):
        say(f"winner {rank} of {len(chosen)}: certifying and measuring on fresh seeds")
        J, h, planted, _ = fam.genome.couplings()
        inst = ctx.instance(J, h, planted)
        meta = {"rules": ctx.rules, "tags": list(cfg["library"]["tags"]),
                "provenance": {"run_id": run_id, "preset_hash": preset_hash(cfg), "preset": cfg["run"]["name"],
                               "generation": fam.generation, "parents": fam.parents, "seed": cfg["run"]["seed"],
                               "genome": fam.key},
                "search": {"search_fitness": fam.search_fitness, "confirmed_fitness": fam.confirmed,
                           "metric": ctx.metric}}
        if hasattr(fam.genome, "construction"):
            meta["construction"] = fam.genome.construction()
        elif construction:
            meta["construction"] = construction
        inst = inst.replace(metadata={**inst.metadata, **meta})
        inst, cert = _certify(inst, cfg)
        scores = _measure(inst, cfg, ctx, derive_seed(cfg["run"]["seed"], "final", fam.key))
        inst = inst.replace(metadata={**inst.metadata, "scores": [s.to_dict() for s in scores]})
        path = save_instance(inst, hall_dir / f"{rank:02d}-{fam.canon[:12]}.json")
        entry = _entry(inst, cert, scores, path)
        entry.update(rank=rank, key=fam.key, generation=fam.generation, search_fitness=fam.search_fitness,
                     confirmed_fitness=fam.confirmed)
        winners.append(entry)
    baseline = _baseline(breeder, say)
    start = _start(breeder, say)
    summary = {
        "format": "instgen-run-summary", "format_version": SUMMARY_VERSION,
        "run": {"name": cfg["run"]["name"], "id": run_id, "seed": cfg["run"]["seed"], "graph": ctx.graph,
                "n": ctx.n, "m": len(ctx.edges), "rules": ctx.rules, "metric": ctx.metric,
                "sampler": ctx.sampler, "solvers": list(dict.fromkeys([ctx.sampler] + cfg["fitness"]["solvers"])),
                "search_solvers": list(ctx.solvers),
                "sweeps": list(ctx.sweeps), "beta_range": list(ctx.beta_range), "preset_hash": preset_hash(cfg),
                "folder": str(out)},
        "stopped": result["stopped"], "generations": result["generations"], "evaluations": result["evaluations"],
        "elapsed": result["elapsed"], "winners": winners, "baseline": baseline, "start": start,
        "search_progress": stall(breeder.history),
        "asked": {"winners": cfg["search"]["winners"], "confirmed": len(breeder.confirmed_keys),
                  "kept": len(breeder.hall)},
        "never_solved_on_confirmation": sum(f.details.get("kind") == "lower bound" for f in breeder.hall),
    }
    summary["measuring"] = {"pinning": pinning(cfg).to_dict(), **measuring_cost(summary)}
    summary["comparison"] = compare(summary, seed=derive_seed(cfg["run"]["seed"], "comparison"))
    summary["cautions"] = cautions(summary)
    if cfg["library"]["path"] and winners:
        say(f"filing {len(winners)} winners into the library {cfg['library']['path']}")
        summary["library"] = _file_into_library(cfg, hall_dir, winners)
    atomic_write(out / "summary.json", json.dumps(summary, indent=1, default=_json_default))
    return summary


def _json_default(o):
    if isinstance(o, (np.floating, np.integer)):
        return o.item()
    return str(o)


def _baseline(breeder, say) -> dict:
    """Random instances of the same graph and alphabet, certified only when the metric needs an optimum."""
    cfg, ctx = breeder.cfg, breeder.ctx
    count = cfg["library"]["baseline"]
    entries = []
    needed = _needs_reference(ctx)
    limit = min(cfg["library"]["time_limit"], BASELINE_CERTIFY_SECONDS)
    for k in range(count):
        say(f"random baseline {k + 1} of {count}: " + ("certifying and measuring" if needed else "measuring"))
        inst = make_instance(breeder.topology, breeder.rules, seed=derive_seed(cfg["run"]["seed"], "baseline", k))
        inst, cert = _certify(inst, cfg, limit) if needed else (inst, _no_certificate())
        scores = _measure(inst, cfg, ctx, derive_seed(cfg["run"]["seed"], "baseline-measure", k))
        entries.append(_entry(inst, cert, scores))
    return {"count": count, "instances": entries, "kind": "random", "certify_seconds": limit if needed else 0,
            "certified": sum(e["certificate"]["status"] in ("planted", "proven") for e in entries)}


#: Random baselines are certified within this many seconds each (or the preset's time limit, if lower).
BASELINE_CERTIFY_SECONDS = 20.0


def _start(breeder, say) -> dict:
    """Unbred instances drawn as the search draws its first generation (planted runs); free runs reuse random."""
    cfg, ctx = breeder.cfg, breeder.ctx
    count = cfg["library"]["baseline"]
    if breeder.kind == "free" or not count:
        return {"count": 0, "instances": [], "same_as": "baseline" if breeder.kind == "free" else None}
    rng = np.random.default_rng(derive_seed(cfg["run"]["seed"], "start-baseline"))
    entries = []
    for k in range(count):
        say(f"unbred start {k + 1} of {count}: measuring")
        genome = breeder.new_genome(rng)
        J, h, planted, _ = genome.couplings()
        inst = ctx.instance(J, h, planted)
        meta = {"rules": ctx.rules}
        if hasattr(genome, "construction"):
            meta["construction"] = genome.construction()
        inst = inst.replace(metadata={**inst.metadata, **meta})
        inst, cert = _certify(inst, cfg)
        scores = _measure(inst, cfg, ctx, derive_seed(cfg["run"]["seed"], "start-measure", k))
        entries.append(_entry(inst, cert, scores))
    return {"count": count, "instances": entries, "kind": "start",
            "certified": sum(e["certificate"]["status"] in ("planted", "proven") for e in entries)}


def stall(history: list[dict]) -> dict:
    """Did the search improve on its start?  The first generation's median against the confirmed best.

    Generations are numbered from 1 (the unbred start), as on screen and in log.jsonl.
    """
    if not history:
        return {"stalled": None}
    start_median = history[0]["median"]
    confirmed = [r.get("best_confirmed") for r in history]
    first = next((i for i, v in enumerate(confirmed) if v is not None), None)
    last_gain = first
    for i in range(1 if first is None else first + 1, len(confirmed)):
        if confirmed[i] is not None and confirmed[i - 1] is not None and confirmed[i] > confirmed[i - 1]:
            last_gain = i
    best = confirmed[-1]
    stalled = first is not None and last_gain == first and len(history) > 2
    number = (lambda i: None if i is None else int(history[i].get("generation", i + 1)))
    return {"start_median": start_median, "best_confirmed": best, "first_confirmed_generation": number(first),
            "last_improvement_generation": number(last_gain), "stalled": stalled, "generations": len(history)}


def _scores_of(entries, metric, solver):
    out = []
    for e in entries:
        for s in e["scores"]:
            if s["metric"] == metric and s["solver"] == solver:
                out.append(s)
    return out


def compare(summary: dict, seed: int = 0) -> list[dict]:
    """The winners against each baseline, per metric and solver: ratio of medians, interval, verdict."""
    from ..scoring import METRICS

    rows = []
    winners = summary["winners"]
    groups = [("random", summary["baseline"]["instances"])]
    start = summary.get("start") or {}
    if start.get("instances"):
        groups.append(("start", start["instances"]))
    metrics = sorted({s["metric"] for e in winners for s in e["scores"]})
    for metric in metrics:
        harder = METRICS.get(metric).harder if metric in METRICS.names() else "higher"
        for solver in summary["run"]["solvers"]:
            for against, base in groups:
                w, b = _scores_of(winners, metric, solver), _scores_of(base, metric, solver)
                row = compare_figures(w, b, harder, derive_seed(seed, "compare", metric, solver, against))
                row.update(metric=metric, solver=solver, against=against, harder=harder,
                           winners_median=row["group_median"], winners=row["group"])
                rows.append(row)
    return rows


def comparison_words(row: dict) -> str:
    """What a comparison row means, in the words a reader needs."""
    other = "random instances of the same graph and alphabet" if row["against"] == "random" else \
        "the unbred start of the search"
    text = f"{row['metric']} on {row['solver']}, winners against {other}: {row['sentence']}"
    if row["against"] == "start" and row["verdict"] != HARDER:
        text += (" — breeding made them easier" if row["verdict"] == EASIER else
                 " — breeding added nothing measurable")
    return text


def cautions(summary: dict) -> list[str]:
    """Plain-language warnings a reader needs before trusting the figures."""
    out = []
    uses_reference = any(s["metric"] in USES_REFERENCE for e in summary["winners"] for s in e["scores"])
    unproven = [e["file"] for e in summary["winners"] if e["certificate"]["status"] == "not proven"]
    if unproven and uses_reference:
        out.append(f"{len(unproven)} of {len(summary['winners'])} winners have an optimum that is not proven (best energy found "
                   "only); their success probabilities and TTS are measured against an energy that may not be the "
                   "ground state.")
    base = summary["baseline"]
    if base["count"] and base["certified"] < base["count"] and uses_reference:
        out.append(f"{base['count'] - base['certified']} of {base['count']} random baseline instances have no proven "
                   "optimum; their figures are measured against the best energy found.")
    groups = [("winner", summary["winners"]), ("random baseline", base["instances"]),
              ("unbred start", (summary.get("start") or {}).get("instances", []))]
    for group, entries in groups:
        bounds = [s for e in entries for s in e["scores"] if s["kind"] != "value"]
        if bounds:
            out.append(f"{len(bounds)} of {sum(len(e['scores']) for e in entries)} {group} figures are bounds, not "
                       "values: " + "; ".join(sorted({_why_bound(s) for s in bounds})) + ".")
    for row in summary.get("comparison", []):
        if row["verdict"] != HARDER:
            out.append(comparison_words(row) + ".")
    blind = summary.get("never_solved_on_confirmation") or 0
    if blind:
        out.append(f"{blind} of {(summary.get('asked') or {}).get('kept', len(summary['winners']))} winners were never solved by their "
                   "confirmation reads on the search grid, so the search could rank them only by residual energy: "
                   "longer anneals in [fitness] sweeps or more confirm_reads would let it see further.")
    prog = summary.get("search_progress") or {}
    if prog.get("stalled"):
        out.append(f"The search stalled: the confirmed best has not improved since generation "
                   f"{prog['first_confirmed_generation']}, its first confirmation.")
    out.append("Hardness was measured on " + ", ".join(summary["run"]["solvers"]) + " only; other solvers may "
               "find these instances easier or harder.")
    if not summary["winners"]:
        out.append("There are no winners: no candidate was confirmed on fresh seeds.")
    asked = summary.get("asked") or {}
    if asked.get("winners") and 0 < len(summary["winners"]) < asked["winners"]:
        out.append(f"[search] winners asked for {asked['winners']}, but there are {len(summary['winners'])}: only "
                   f"{asked['confirmed']} candidates were confirmed ([search] confirm_top per generation times the "
                   "generations run), and gauge-equivalent ones count once.")
    return out


def _why_bound(score: dict) -> str:
    pin = (score.get("extra") or {}).get("pin")
    if pin and pin.get("reason") and not pin.get("pinned"):
        return f"{score['solver']} {score['metric']}: {pin['reason']}"
    return f"{score['solver']} {score['metric']}: measured on a fixed grid ({score['kind']})"


def measuring_cost(summary: dict) -> dict:
    """What pinning the figures after the search cost: spin updates and sampler seconds, by group."""
    out = {}
    for group, entries in (("winners", summary["winners"]), ("baseline", summary["baseline"]["instances"])):
        pins = [s["extra"]["pin"] for e in entries for s in e["scores"] if (s.get("extra") or {}).get("pin")]
        out[group] = {"figures": len(pins), "pinned": sum(bool(p.get("pinned")) for p in pins),
                      "spin_updates": float(sum(p["spent"] for p in pins)),
                      "seconds": float(sum(p.get("seconds", 0.0) for p in pins))}
    return out


def _file_into_library(cfg, hall_dir: Path, winners) -> dict:
    from ..io import load_instance
    from ..library import Library

    lib = Library.open(cfg["library"]["path"], create=True)
    added = 0
    for e in winners:
        res = lib.add(load_instance(hall_dir / e["file"]), tags=cfg["library"]["tags"])
        added += bool(getattr(res, "new", True))
    return {"path": cfg["library"]["path"], "filed": len(winners), "new": added}
