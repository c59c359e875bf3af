"""Small run and library folders for the report tests, built with the real functions.

The winners and the random baseline are real instances measured with
:func:`instgen.scoring.measure_many`; their certificates come from exhaustive
enumeration (the ``exact`` sampler), and ``comparison`` and ``cautions`` are
made by :mod:`instgen.evolve.finish`, so the summary has the structure that
``instgen breed`` writes.  Only the generation log is invented (a plausible
climb), since producing one means running the search.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from instgen.io import atomic_write, save_instance
from instgen.make import make_instance
from instgen.records import Certificate
from instgen.samplers import Schedule, get_sampler
from instgen.scoring import measure_many

GRAPH = "chimera:1"
SWEEPS = [5, 20, 80]
SOLVERS = ["sa", "tabu"]


def certified(inst, status="proven"):
    """The instance with an exhaustive-enumeration certificate attached (status as given)."""
    batch = get_sampler("exact").run(inst, None, reads=1, seed=0)
    k = int(np.argmin(batch.energies))
    cert = Certificate(energy=float(batch.energies[k]), state=batch.states[k], method="exhaustive enumeration",
                       status=status, seconds=0.01, ground_states=None)
    return inst.replace(metadata={**inst.metadata, "certificate": cert.to_dict()}), cert


def _entry(inst, cert, scores, file=None):
    return {"file": file, "n": inst.n, "m": inst.m,
            "certificate": {"energy": cert.energy, "method": cert.method, "status": cert.status,
                            "seconds": cert.seconds, "ground_states": cert.ground_states},
            "scores": [s.to_dict() for s in scores]}


def make_run(folder: Path, winners: int = 3, baseline: int = 2, generations: int = 5, metric: str = "tts") -> dict:
    """Write summary.json, log.jsonl and winners/ into ``folder``; returns the summary.

    ``metric`` is the run's fitness metric (the winners are scored with it alone).
    """
    from instgen.evolve.finish import SUMMARY_VERSION, cautions, compare

    folder = Path(folder)
    rows = []
    for rank in range(1, winners + 1):
        inst = make_instance(GRAPH, "pm1", seed=100 + rank)
        inst, cert = certified(inst, status="not proven" if rank == winners else "proven")
        scores = measure_many(inst, [metric], SOLVERS, sweeps=SWEEPS, reads=40, seed=rank)
        inst = inst.replace(metadata={**inst.metadata, "scores": [s.to_dict() for s in scores]})
        name = f"{rank:02d}-w{rank}.json"
        save_instance(inst, folder / "winners" / name)
        e = _entry(inst, cert, scores, name)
        e.update(rank=rank, key=f"key{rank}", generation=rank, search_fitness=2.0 - 0.1 * rank,
                 confirmed_fitness=1.9 - 0.1 * rank)
        rows.append(e)
    base = []
    for k in range(baseline):
        inst, cert = certified(make_instance(GRAPH, "pm1", seed=500 + k))
        base.append(_entry(inst, cert, measure_many(inst, [metric], SOLVERS, sweeps=SWEEPS, reads=40,
                                                    seed=50 + k)))
    summary = {
        "format": "instgen-run-summary", "format_version": SUMMARY_VERSION,
        "run": {"name": "test-chip", "id": "0123456789ab", "seed": 7, "graph": GRAPH, "n": 8, "m": 16,
                "rules": make_instance(GRAPH, "pm1", seed=1).metadata["rules"], "metric": metric, "sampler": "sa",
                "solvers": SOLVERS, "sweeps": SWEEPS, "beta_range": [0.1, 5.0], "preset_hash": "abc",
                "folder": str(folder)},
        "stopped": "generation limit", "generations": generations, "evaluations": 40 * generations,
        "elapsed": 12.5, "winners": rows,
        "baseline": {"count": baseline, "instances": base,
                     "certified": sum(e["certificate"]["status"] in ("planted", "proven") for e in base)},
    }
    summary["comparison"] = compare(summary)
    summary["cautions"] = cautions(summary)
    atomic_write(folder / "summary.json", json.dumps(summary, indent=1))
    log = []
    for g in range(generations):
        best = 1.2 + 0.15 * g
        log.append({"generation": g + 1, "best": best, "median": best - 0.3, "q25": best - 0.45, "q75": best - 0.15,
                    "best_confirmed": None if g == 0 else best - 0.1,
                    "confirmed_this_generation": [] if g == 0 else [best - 0.1, best - 0.25],
                    "winners_kept": min(g * 2, 6), "evaluations": 40 * (g + 1), "seconds": 2.5,
                    "evaluations_per_second": 16.0, "elapsed": 2.5 * (g + 1)})
    atomic_write(folder / "log.jsonl", "".join(json.dumps(r) + "\n" for r in log))
    return summary


def make_library(folder: Path) -> list[str]:
    """A library of five measured instances on two sizes, three without a proven optimum; returns their ids."""
    from instgen.library import Library

    ids = []
    with Library.open(folder, create=True) as lib:
        for k, (graph, status) in enumerate([("chimera:1", "proven"), ("chimera:1", "proven"),
                                             ("chimera:2", "not proven"), ("chimera:2", "not proven"),
                                             ("chimera:2", "not proven")]):
            inst = make_instance(graph, "pm1", seed=900 + k)
            if status == "proven":
                inst, _ = certified(inst)
            else:  # best of a long simulated anneal: not a proof
                batch = get_sampler("sa").run(inst, Schedule(sweeps=500), reads=50, seed=k)
                j = int(np.argmin(batch.energies))
                cert = Certificate(float(batch.energies[j]), batch.states[j], "best of 50 anneals", "not proven")
                inst = inst.replace(metadata={**inst.metadata, "certificate": cert.to_dict()})
            scores = measure_many(inst, ["tts"], SOLVERS, sweeps=SWEEPS, reads=30, seed=k)
            inst = inst.replace(metadata={**inst.metadata, "scores": [s.to_dict() for s in scores]})
            ids.append(lib.add(inst, tags=["regression"]).id)
    return ids
