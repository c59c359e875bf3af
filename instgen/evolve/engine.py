"""The breeding loop: honest selection under noisy fitness.

One generation:

1. **Measure.** New children are measured with *common random numbers*: every
   child of generation g uses the same sampler seed, derived from (run seed, g),
   so differences between children are differences between instances, not
   between seeds.  Elites carried over are measured again on *fresh* seeds
   (derived from run seed, g and the genome's hash) and their measurements are
   pooled, so a lucky first score regresses towards the truth.
2. **Confirm.** The best ``confirm_top`` candidates not yet confirmed are measured
   once more with ``confirm_reads`` reads on seeds no search measurement used.
   Only that independent figure decides who becomes a winner, and the run
   reports search and confirmed fitness side by side.
3. **Select and vary.** Elites survive; the rest of the population is bred by
   tournament selection, crossover and mutation (:mod:`.operators`).
   Children identical to, or gauge-equivalent with, a member are redrawn; when
   the population collapses onto few instances, fresh random immigrants come in.
4. **Checkpoint** atomically (:mod:`.checkpoint`): a killed run resumes exactly.

Every evaluation seed comes from (run seed, generation, genome hash), never
from worker order; all other randomness comes from one Generator whose state
is checkpointed.  So 10 generations in one go equal 5 + resume + 5, and
serial, pool and cluster runs agree bit for bit.
"""

from __future__ import annotations

import dataclasses
import json
import math
import time
from pathlib import Path

import numpy as np

from ..errors import ClusterError, ConfigError, FormatError, WriteError
from ..fitness import Context, Measurement, pool, value
from ..io import atomic_write
from ..make import rules_of, topology
from ..preset import preset_hash, to_toml
from ..seeds import derive_seed
from .checkpoint import FILENAME as CHECKPOINT, load_checkpoint, save_checkpoint
from .executors import SerialExecutor, make_executor
from ..library.fingerprint import fingerprint
from .genome import PLANTED_GENOMES, FreeGenome, genome_from_dict, planted_genome
from .operators import Variation, Variator, default_operators

#: Keys that may change between a run and its resume (they decide when to stop).
RESUMABLE_KEYS = {("search", "generations"), ("search", "time_budget"), ("search", "stall"), ("search", "target"),
                  ("search", "workers"), ("run", "out"), ("library", "path")}


@dataclasses.dataclass
class Individual:
    genome: object
    key: str
    canon: str
    born: int
    parents: list
    measurement: Measurement | None = None
    fitness: float | None = None
    details: dict = dataclasses.field(default_factory=dict)
    measured: int = 0

    def to_dict(self) -> dict:
        return {"genome": self.genome.to_dict(), "key": self.key, "canon": self.canon, "born": self.born,
                "parents": self.parents, "fitness": self.fitness, "details": self.details, "measured": self.measured,
                "measurement": None if self.measurement is None else self.measurement.to_dict()}

    @classmethod
    def from_dict(cls, d: dict, var=None) -> Individual:
        m = d.get("measurement")
        return cls(genome_from_dict(d["genome"], var), d["key"], d["canon"], d["born"], d["parents"],
                   None if m is None else Measurement.from_dict(m), d["fitness"], d["details"], d["measured"])


@dataclasses.dataclass
class Famous:
    """A winner: confirmed on fresh seeds."""

    genome: object
    key: str
    canon: str
    generation: int
    parents: list
    search_fitness: float
    confirmed: float
    details: dict

    def to_dict(self) -> dict:
        return {"genome": self.genome.to_dict(), "key": self.key, "canon": self.canon, "generation": self.generation,
                "parents": self.parents, "search_fitness": self.search_fitness, "confirmed": self.confirmed,
                "details": self.details}

    @classmethod
    def from_dict(cls, d: dict, var=None) -> Famous:
        return cls(genome_from_dict(d["genome"], var), d["key"], d["canon"], d["generation"], d["parents"],
                   d["search_fitness"], d["confirmed"], d["details"])


def _settings(cfg: dict) -> dict:
    """The settings a resumed run must share with its start (all but :data:`RESUMABLE_KEYS`), as JSON data."""
    trimmed = {t: {k: v for k, v in vals.items() if (t, k) not in RESUMABLE_KEYS} for t, vals in cfg.items()}
    return json.loads(json.dumps(trimmed, sort_keys=True, default=str))


def _resume_hash(cfg: dict) -> str:
    return preset_hash(_settings(cfg))


def _differences(started: dict, now: dict) -> list[str]:
    """``[table] key`` settings that differ between two :func:`_settings`, with both values."""
    out = []
    for table in sorted(set(started) | set(now)):
        a, b = started.get(table) or {}, now.get(table) or {}
        for key in sorted(set(a) | set(b)):
            if a.get(key) != b.get(key):
                out.append(f"[{table}] {key} was {_shown(a.get(key))}, now {_shown(b.get(key))}")
    return out


def _shown(value) -> str:
    text = "unset" if value is None else json.dumps(value)
    return text if len(text) <= 60 else text[:57] + "..."


class Breeder:
    """Runs the evolutionary search for one resolved preset.

    Parameters
    ----------
    cfg : dict
        A validated preset (:func:`instgen.preset.load_preset`).
    out : path
        The run folder (log, checkpoints, winners, summary).
    executor : executor, optional
        Where evaluations run (default: from ``search.workers``).
    fitness : callable, optional
        A user fitness ``f(instance, context) -> float`` given from Python.
    progress : callable, optional
        Called with each generation's log record.
    """

    def __init__(self, cfg: dict, out, executor=None, fitness=None, progress=None):
        self.cfg = cfg
        self.out = Path(out)
        self.topology = topology(cfg["graph"]["spec"])
        c = cfg["couplings"]
        self.rules = rules_of(c["alphabet"], c["fields"], coupling_range=c["range"], field_range=c["field_range"],
                              precision=c["precision"])
        self.ctx = Context.from_config(cfg, self.topology, user=fitness)
        self.planting = cfg["planting"]["method"]
        self.kind = self.planting if self.planting in PLANTED_GENOMES else "free"
        if self.planting != "none" and self.planting not in PLANTED_GENOMES:
            raise ConfigError(f"[planting] method {self.planting!r} cannot be bred yet; breeding supports "
                              "none (free couplings), loops (planted frustrated loops) and terms (loops and "
                              "small frustrated patches)")
        s = cfg["search"]
        weights = s["operators"] or default_operators(self.kind, self.rules)
        self.var = Variation(self.rules, self.topology.n, self.topology.edges, s["mutation_rate"],
                             extra={"planting": cfg["planting"], "topology": self.topology})
        self.variator = Variator(weights, s["crossover_rate"], self.var)
        self.executor = executor or make_executor(s["workers"])
        self.progress = progress
        self.seed = cfg["run"]["seed"]
        self.rng = np.random.default_rng(derive_seed(self.seed, "engine"))
        self.population: list[Individual] = []
        self.hall: list[Famous] = []
        self.confirmed_keys: set[str] = set()
        self.history: list[dict] = []
        self.generation = 0
        self.evaluations = 0
        self.elapsed = 0.0
        self.best_since = 0

    # ------------------------------------------------------------- genomes
    def _reference(self, genome, stage: str = "search") -> float | None:
        """The energy a candidate is measured against (None: the best energy found).

        ``confirm-certified`` searches against the best energy found (cheap) but
        confirms against a proven optimum, so the winners' figures do not
        rest on an excited state that the sampler mistook for the ground state.
        """
        ref_mode = self.cfg["fitness"]["reference"]
        planted_energy = genome.couplings()[3]
        if ref_mode in ("auto", "planted") and planted_energy is not None:
            return planted_energy
        if ref_mode == "planted":
            raise ConfigError("[fitness] reference = \"planted\" needs a planted method in [planting]")
        if ref_mode == "certified":
            return self._certified_energy(genome)
        if ref_mode == "confirm-certified" and stage == "confirm":
            return self._certified_energy(genome, strict=False)
        return None

    def _certified_energy(self, genome, strict: bool = True) -> float:
        from ..certify import certify

        J, h, _, _ = genome.couplings()
        cert = certify(self.ctx.instance(J, h), method="auto", time_limit=self.cfg["library"]["time_limit"],
                       seed=derive_seed(self.seed, "certify", genome.key()))
        if not cert.certified and strict:
            raise ConfigError("[fitness] reference = \"certified\" but a candidate could not be certified in "
                              f"{self.cfg['library']['time_limit']} s; use reference = \"best-found\" or a smaller graph")
        return cert.energy

    def new_genome(self, rng) -> object:
        """A genome drawn the way the first generation is drawn (random, or planted as the preset says)."""
        if self.kind != "free":
            return planted_genome(self.kind).random(self.var, rng)
        J = self.rules.sample_couplings(self.topology.m, rng)
        h = self.rules.sample_fields(self.topology.n, rng)
        return FreeGenome(J, h)

    def _new_random(self) -> object:
        return self.new_genome(self.rng)

    def _individual(self, genome, parents=()) -> Individual:
        J, h, _, _ = genome.couplings()
        canon = fingerprint(self.ctx.instance(J, h))  # the library's gauge- and order-invariant identity
        return Individual(genome, genome.key(), canon, self.generation + 1, list(parents))

    # ---------------------------------------------------------- measuring
    def _task(self, ind_genome, seed: int, reads: int) -> dict:
        J, h, planted, _ = ind_genome.couplings()
        return {"J": np.asarray(J, dtype=np.float64), "h": np.asarray(h, dtype=np.float64), "planted": planted,
                "seed": int(seed), "reads": int(reads)}

    def _measure_population(self):
        g = self.generation
        reads = self.cfg["fitness"]["reads"]
        crn = derive_seed(self.seed, "search", g)
        tasks = []
        for ind in self.population:
            seed = crn if ind.measurement is None else derive_seed(self.seed, "rescore", g, ind.key)
            tasks.append(self._task(ind.genome, seed, reads))
        results = self.executor.map(tasks)
        self.evaluations += len(tasks)
        for ind, m in zip(self.population, results):
            ind.measurement = m if ind.measurement is None else pool([ind.measurement, m])
            ind.measured += 1
            ind.fitness, ind.details = value(self.ctx, ind.measurement, self._reference(ind.genome))
        self.population.sort(key=lambda i: (-i.fitness, i.key))

    def _confirm(self) -> list[Famous]:
        top = self.cfg["search"]["confirm_top"]
        picks = [i for i in self.population if i.key not in self.confirmed_keys][:top]
        if not picks:
            return []
        reads = self.cfg["fitness"]["confirm_reads"]
        tasks = [self._task(i.genome, derive_seed(self.seed, "confirm", i.key), reads) for i in picks]
        results = self.executor.map(tasks)
        self.evaluations += len(tasks)
        entered = []
        for ind, m in zip(picks, results):
            self.confirmed_keys.add(ind.key)
            conf, details = value(self.ctx, m, self._reference(ind.genome, stage="confirm"))
            fam = Famous(ind.genome, ind.key, ind.canon, self.generation + 1, ind.parents, ind.fitness, conf,
                         _slim(details))
            if any(f.canon == fam.canon for f in self.hall):
                continue
            self.hall.append(fam)
            entered.append(fam)
        self.hall.sort(key=lambda f: (-f.confirmed, f.key))
        del self.hall[self.cfg["search"]["winners"]:]
        return entered

    # ----------------------------------------------------------- breeding
    def _tournament(self) -> Individual:
        k = min(self.cfg["search"]["tournament"], len(self.population))
        picks = self.rng.choice(len(self.population), size=k, replace=False)
        return self.population[int(min(picks))]  # population is sorted best first

    def _next_population(self):
        s = self.cfg["search"]
        elites = self.population[: s["elites"]]
        nxt = list(elites)
        seen = {i.canon for i in nxt}
        slots = s["population"] - len(nxt)
        immigrants = round(s["immigrants"] * slots) if self._collapsed() else 0
        self.generation += 1
        for _ in range(immigrants):
            ind = self._individual(self._new_random(), parents=["immigrant"])
            if ind.canon not in seen:
                seen.add(ind.canon)
                nxt.append(ind)
        tries = 0
        while len(nxt) < s["population"]:
            a, b = self._tournament(), self._tournament()
            for child in self.variator.children(a.genome, b.genome, self.rng):
                ind = self._individual(child, parents=[a.key, b.key])
                if ind.canon in seen:
                    tries += 1
                    if tries > 20 * s["population"]:
                        ind = self._individual(self._new_random(), parents=["immigrant"])
                    else:
                        continue
                if len(nxt) < s["population"]:
                    seen.add(ind.canon)
                    nxt.append(ind)
        self.population = nxt

    def _collapsed(self) -> bool:
        """True when most of the population sits within a few couplings of the best."""
        if len(self.population) < 3:
            return False
        best = self.population[0].genome.couplings()[0]
        diffs = [np.mean(i.genome.couplings()[0] != best) for i in self.population[1:]]
        return float(np.median(diffs)) < 0.01

    # ------------------------------------------------------------ the run
    def _state(self) -> dict:
        return {
            "resume_hash": _resume_hash(self.cfg), "settings": _settings(self.cfg),
            "generation": self.generation, "evaluations": self.evaluations,
            "elapsed": self.elapsed, "best_since": self.best_since,
            "rng": self.rng.bit_generator.state, "population": [i.to_dict() for i in self.population],
            "hall": [f.to_dict() for f in self.hall], "confirmed_keys": sorted(self.confirmed_keys),
            "history": self.history,
        }

    def _restore(self, doc: dict):
        if doc.get("resume_hash") != _resume_hash(self.cfg):
            raise ConfigError(self._mismatch(doc))
        try:
            self._restore_state(doc)
        except (KeyError, TypeError, ValueError, AttributeError, IndexError) as exc:
            raise FormatError(f"the checkpoint in {self.out} is damaged ({type(exc).__name__}: {exc}); "
                              "start the run again with another --out") from None

    def _mismatch(self, doc: dict) -> str:
        """One line naming the settings that differ from the ones the run started with.

        Checkpoints store those settings; older ones (hash only) are compared with the run
        folder's own preset.toml, the resolved settings written when the run started.
        """
        started = doc.get("settings")
        if not isinstance(started, dict):
            try:
                from ..preset import load_preset

                started = _settings(load_preset(self.out / "preset.toml"))
            except (ConfigError, OSError):
                started = None
        keys = ", ".join(f"{t}.{k}" for t, k in sorted(RESUMABLE_KEYS) if t == "search")
        own = self.out / "preset.toml"
        if isinstance(started, dict) and (diffs := _differences(started, _settings(self.cfg))):
            shown = "; ".join(diffs[:4]) + (f"; and {len(diffs) - 4} more" if len(diffs) > 4 else "")
            what = f"this run folder was started with different settings: {shown}"
        else:
            what = "this run folder was started with different settings"
        return (f"{what}; resume with the same preset and flags, or with the run folder's own settings: "
                f"`instgen breed {own} --out {self.out} --resume` (only {keys} and where files go may change)")

    def _restore_state(self, doc: dict):
        self.generation, self.evaluations = doc["generation"], doc["evaluations"]
        self.elapsed, self.best_since = doc["elapsed"], doc["best_since"]
        self.rng.bit_generator.state = doc["rng"]
        self.population = [Individual.from_dict(d, self.var) for d in doc["population"]]
        self.hall = [Famous.from_dict(d, self.var) for d in doc["hall"]]
        self.confirmed_keys = set(doc["confirmed_keys"])
        self.history = doc["history"]

    def _stop_reason(self) -> str | None:
        s = self.cfg["search"]
        if self.generation >= s["generations"]:
            return f"reached {s['generations']} generations"
        if s["time_budget"] and self.elapsed >= s["time_budget"]:
            return f"used the time budget of {s['time_budget']:g} s"
        if s["target"] is not None and self.hall and self._target_met():
            return f"reached the target {s['target']:g}"
        if s["stall"] and self.generation - self.best_since >= s["stall"]:
            return f"no confirmed improvement for {s['stall']} generations"
        return None

    def _target_met(self) -> bool:
        best = self.hall[0].confirmed
        if self.ctx.metric == "tts":
            return 10 ** best >= self.cfg["search"]["target"]
        return best >= self.cfg["search"]["target"]

    def run(self, resume: bool = False) -> dict:
        """Breed until a stopping rule fires; returns the run's summary record.

        A new run refuses a folder that already holds a run's checkpoint, so
        forgetting ``resume`` never overwrites a run.
        """
        if resume:
            self._restore(load_checkpoint(self.out))
            # the log may hold the generation in flight (or half a line) when the run was killed:
            # the checkpoint's history is the record, so the log restarts from it
            atomic_write(self.out / "log.jsonl", "".join(json.dumps(r) + "\n" for r in self.history))
        else:
            if (self.out / CHECKPOINT).exists():
                raise ConfigError(f"{self.out} already holds a run (it has a checkpoint); continue it with --resume, "
                                  "or give another --out: a new run there would overwrite it")
            self.out.mkdir(parents=True, exist_ok=True)
            atomic_write(self.out / "preset.toml", to_toml(self.cfg))
            atomic_write(self.out / "log.jsonl", "")
            self.population = []
            while len(self.population) < self.cfg["search"]["population"]:
                ind = self._individual(self._new_random(), parents=[])
                if all(ind.canon != o.canon for o in self.population):
                    self.population.append(ind)
        self.executor.start(self.ctx)
        reason = self._stop_reason() if resume else None
        try:
            while reason is None:
                t0 = time.perf_counter()
                self._measure_population()
                best_before = self.hall[0].confirmed if self.hall else -math.inf
                entered = self._confirm()
                if self.hall and self.hall[0].confirmed > best_before:
                    self.best_since = self.generation
                self.elapsed += time.perf_counter() - t0
                record = self._record(entered, time.perf_counter() - t0)
                self.history.append(record)
                self._log(record)
                if self.progress:
                    self.progress(record)
                self._next_population()
                save_checkpoint(self.out, self._state())
                reason = self._stop_reason()
        except ClusterError as exc:  # the checkpoint of the last finished generation stays as it was
            raise ClusterError(_stopped(exc, self.out, self.generation)) from None
        finally:
            self.executor.close()
        return {"stopped": reason, "generations": self.generation, "evaluations": self.evaluations,
                "elapsed": self.elapsed, "winners": [f.to_dict() for f in self.hall]}

    def _log(self, record: dict) -> None:
        """Append a generation's record to log.jsonl (a full disk stops the run with the checkpoint intact)."""
        try:
            with open(self.out / "log.jsonl", "a") as fh:
                fh.write(json.dumps(record) + "\n")
        except OSError as exc:
            raise WriteError(f"cannot write {self.out / 'log.jsonl'}: {exc.strerror or exc}; the checkpoint of the "
                             "last finished generation is intact: make room and continue with --resume") from None

    def _record(self, entered, seconds) -> dict:
        fit = np.array([i.fitness for i in self.population])
        evals = len(self.population) + len(entered)
        return {
            "generation": self.generation + 1, "best": float(fit.max()), "median": float(np.median(fit)),
            "q25": float(np.quantile(fit, 0.25)), "q75": float(np.quantile(fit, 0.75)),
            "best_confirmed": self.hall[0].confirmed if self.hall else None,
            "confirmed_this_generation": [f.confirmed for f in entered],
            "winners_kept": len(self.hall), "evaluations": self.evaluations, "seconds": seconds,
            "evaluations_per_second": evals / seconds if seconds > 0 else None, "elapsed": self.elapsed,
        }


def _stopped(exc: ClusterError, out: Path, finished: int) -> str:
    """What a run lost to its cluster says: what happened, where the checkpoint is, how to go on."""
    if finished == 0:
        return f"{exc}; the run stopped before its first generation finished; start it again"
    return (f"{exc}; the run stopped, and its checkpoint after {finished} generation(s) is intact in {out}: "
            f"continue with `instgen breed PRESET --out {out} --resume` (with another --cluster, or none)")


def _slim(details: dict) -> dict:
    """Details without the per-sweep grid rows' bulk, for the winners."""
    return json.loads(json.dumps(details, default=float))


def breed(cfg: dict, out=None, fitness=None, executor=None, resume: bool = False, progress=None, say=None) -> dict:
    """Breed instances for a validated preset; the notebook entry point.

    Returns the summary (see :func:`instgen.evolve.finish.finish`) after the
    search and the final certification/measurement of the winners.
    ``progress`` gets each generation's log record, ``say`` one line per step
    of the work after the search.
    """
    from ..preset import with_output
    from .finish import finish

    if out is not None:  # out replaces [run] out; a [library] path inside that folder moves along
        cfg = with_output(cfg, out)
    out = Path(cfg["run"]["out"])
    if cfg["library"]["path"]:  # the winners are filed at the end: a wrong folder is named before the run
        from ..library import Library

        Library.check_location(cfg["library"]["path"])
    breeder = Breeder(cfg, out, executor=executor, fitness=fitness, progress=progress)
    result = breeder.run(resume=resume)
    return finish(breeder, result, say=say)


__all__ = ["Breeder", "breed", "SerialExecutor"]
