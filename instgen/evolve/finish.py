"""After the search: certify the hall of fame, measure it honestly, compare with random.

For each hall-of-fame entry (up to ``[library] count``):

1. build the instance, with its rules, construction and provenance;
2. certify its ground state (``[library] certify``; planted instances are
   checked against their construction) — an unproven optimum stays marked
   ``unverified`` everywhere it appears;
3. measure the run's metric again on fresh seeds, against the certified energy,
   under the search sampler and every extra solver in ``[fitness] solvers``;
4. write it to ``hall_of_fame/`` with its certificate and scores.

The same measurement is made on ``[library] baseline`` random instances of the
same graph and alphabet, so the summary can say how much harder the winners
are than what random couplings give — measured in the same run.
"""

from __future__ import annotations

import json
import math
import uuid
from pathlib import Path

import numpy as np

from ..io import atomic_write, save_instance
from ..make import make_instance
from ..preset import preset_hash
from ..scoring import measure_many
from ..seeds import derive_seed

SUMMARY_VERSION = 1


def _final_metrics(ctx) -> list[str]:
    if ctx.metric == "composite":
        return list(ctx.weights)
    if ctx.user is not None:
        return ["tts"]
    return [ctx.metric]


def _sweeps_for(metric: str, ctx):
    if metric == "tts":
        return list(ctx.sweeps)
    if metric == "gap":
        return [ctx.short_sweeps, ctx.long_sweeps]
    return [ctx.long_sweeps]


def _certify(inst, cfg):
    from ..certify import attach_certificate, certify

    cert = certify(inst, method=cfg["library"]["certify"], time_limit=cfg["library"]["time_limit"],
                   seed=derive_seed(cfg["run"]["seed"], "certify"))
    return attach_certificate(inst, cert), cert


def _measure(inst, cfg, ctx, seed):
    solvers = list(dict.fromkeys([ctx.sampler] + list(cfg["fitness"]["solvers"])))
    scores = []
    for metric in _final_metrics(ctx):
        scores += measure_many(inst, [metric], solvers, sweeps=_sweeps_for(metric, ctx),
                               reads=cfg["fitness"]["confirm_reads"], seed=seed, beta_range=ctx.beta_range,
                               schedule={"interpolation": ctx.interpolation})
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


def _median(values):
    v = [x for x in values if x is not None]
    return float(np.median(v)) if v else None


def finish(breeder, result: dict) -> dict:
    """Certify, re-measure and write the hall of fame; returns the run summary (also in summary.json)."""
    cfg, ctx, out = breeder.cfg, breeder.ctx, breeder.out
    run_id = uuid.uuid5(uuid.NAMESPACE_OID, f"{preset_hash(cfg)}:{out.resolve()}").hex[:12]
    hall_dir = out / "hall_of_fame"
    hall_dir.mkdir(parents=True, exist_ok=True)
    winners = []
    construction = breeder.var.extra.get("construction")
    for rank, fam in enumerate(breeder.hall[: cfg["library"]["count"]], 1):
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
    baseline = _baseline(breeder)
    summary = {
        "format": "instgen-run-summary", "format_version": SUMMARY_VERSION,
        "run": {"name": cfg["run"]["name"], "id": run_id, "seed": cfg["run"]["seed"], "graph": ctx.graph,
                "n": ctx.n, "m": len(ctx.edges), "rules": ctx.rules, "metric": ctx.metric,
                "sampler": ctx.sampler, "solvers": list(dict.fromkeys([ctx.sampler] + cfg["fitness"]["solvers"])),
                "search_solvers": list(ctx.solvers),
                "sweeps": list(ctx.sweeps), "beta_range": list(ctx.beta_range), "preset_hash": preset_hash(cfg),
                "folder": str(out)},
        "stopped": result["stopped"], "generations": result["generations"], "evaluations": result["evaluations"],
        "elapsed": result["elapsed"], "winners": winners, "baseline": baseline,
    }
    summary["comparison"] = compare(summary)
    summary["cautions"] = cautions(summary)
    if cfg["library"]["path"] and winners:
        summary["library"] = _file_into_library(cfg, hall_dir, winners)
    atomic_write(out / "summary.json", json.dumps(summary, indent=1, default=_json_default))
    return summary


def _json_default(o):
    if isinstance(o, (np.floating, np.integer)):
        return o.item()
    return str(o)


def _baseline(breeder) -> dict:
    cfg, ctx = breeder.cfg, breeder.ctx
    count = cfg["library"]["baseline"]
    entries = []
    for k in range(count):
        inst = make_instance(breeder.topology, breeder.rules, seed=derive_seed(cfg["run"]["seed"], "baseline", k))
        inst, cert = _certify(inst, cfg)
        scores = _measure(inst, cfg, ctx, derive_seed(cfg["run"]["seed"], "baseline-measure", k))
        entries.append(_entry(inst, cert, scores))
    return {"count": count, "instances": entries,
            "certified": sum(e["certificate"]["status"] in ("planted", "proven") for e in entries)}


def _values(entries, metric, solver):
    out = []
    for e in entries:
        for s in e["scores"]:
            if s["metric"] == metric and s["solver"] == solver:
                out.append(s["value"])
    return out


def compare(summary: dict) -> list[dict]:
    """Median of winners vs median of the random baseline, per metric and solver."""
    rows = []
    winners, base = summary["winners"], summary["baseline"]["instances"]
    metrics = sorted({s["metric"] for e in winners for s in e["scores"]})
    for metric in metrics:
        for solver in summary["run"]["solvers"]:
            w, b = _values(winners, metric, solver), _values(base, metric, solver)
            wm, bm = _median(w), _median(b)
            ratio = None
            if wm is not None and bm not in (None, 0) and math.isfinite(wm) and math.isfinite(bm):
                ratio = wm / bm
            rows.append({"metric": metric, "solver": solver, "winners_median": wm, "baseline_median": bm,
                         "ratio": ratio, "winners": len(w), "baseline": len(b)})
    return rows


def cautions(summary: dict) -> list[str]:
    """Plain-language warnings a reader needs before trusting the figures."""
    out = []
    unproven = [e["file"] for e in summary["winners"] if e["certificate"]["status"] == "unverified"]
    if unproven:
        out.append(f"{len(unproven)} of {len(summary['winners'])} winners have NO proven optimum (best energy found "
                   "only); their success probabilities and TTS are measured against an energy that may not be the "
                   "ground state.")
    base = summary["baseline"]
    if base["count"] and base["certified"] < base["count"]:
        out.append(f"{base['count'] - base['certified']} of {base['count']} random baseline instances have no proven "
                   "optimum; their figures are measured against the best energy found.")
    bounds = {(e["file"], s["solver"]) for e in summary["winners"] for s in e["scores"] if s["kind"] != "value"}
    if bounds:
        out.append(f"{len(bounds)} winner figure(s) are bounds, not values (no success at any sweep count, or the "
                   "best sweep count at the edge of the grid): widen the sweep grid to pin them down.")
    out.append("Hardness was measured on " + ", ".join(summary["run"]["solvers"]) + " only; other solvers may "
               "find these instances easier or harder.")
    if not summary["winners"]:
        out.append("The hall of fame is empty: no candidate was confirmed on fresh seeds.")
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
