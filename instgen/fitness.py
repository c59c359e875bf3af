"""Fitness for breeding: what "hard" means for a run.

A fitness turns surrogate samples of one candidate into one number, **higher
meaning harder**.  Three ways to say what you want, in order of preference:

1. a named metric (``tts``, ``anneal-gain``, ``residual``, ``success``): measured with
   explicit schedules, pooled honestly across repeated measurements, and
   understood by the report;
2. ``composite`` with ``weights = {tts = 1.0, anneal-gain = 0.5}``: a weighted sum of
   the named metrics' fitness values;
3. your own function ``package.module:function(instance, context) -> float``
   (or ``instgen.breed(config, fitness=callable)`` from Python).  It runs only
   because you named it; instgen cannot pool or interpret it beyond averaging,
   so prefer a named metric when one fits.

With ``search_solvers = ["tabu", ...]`` in [fitness], every candidate is also
measured under those solvers (same sweep counts and reads, seeds of their own)
and its fitness is the **minimum** over all of them, so the search cannot win
by exploiting one method's blind spot; the details name the solver that found
the candidate easiest.

Each measurement keeps the raw final energies per sweep count, so repeated
measurements of the same candidate pool by concatenation and the value is
recomputed from everything seen (see :func:`pool`).

Named metrics are computed by :func:`instgen.scoring.evaluate`, the same code
that gives ``instgen score``, the run summary, the library and the report
their figures, so the same energies give the same figure everywhere.  The
fitness is that figure's ranking key (:func:`instgen.scoring.rank_key`):

``tts``       log10 of TTS99 in sweeps at the best sweep count of the search
              grid; a never-solved candidate (a lower bound) ranks as if one
              read more than one measurement's reads had succeeded at the
              longest anneal, ties broken by residual energy, so its rank does
              not grow with pooled reads.
``anneal-gain``       (mean E after ``short_sweeps`` - mean E after ``long_sweeps``) / (n * scale).
``residual``  (mean E after ``long_sweeps`` - reference) / (n * scale).
``success``   1 - success probability after ``long_sweeps``.

The search grid is short and fixed, so a candidate's search figure may be a
bound; figures that leave the search are measured again and pinned at the
optimal sweep count (:class:`instgen.scoring.Pinning`).
"""

from __future__ import annotations

import dataclasses
import importlib
import math
from typing import Any

import numpy as np

from . import scoring
from .errors import ConfigError, InputError
from .instance import Instance
from .samplers import SAMPLERS, Schedule, get_sampler
from .scoring import FITNESS_METRICS, METRICS
from .seeds import derive_seed


@dataclasses.dataclass
class Context:
    """Everything a worker needs besides the candidate's couplings (sent once)."""

    n: int
    edges: np.ndarray
    labels: tuple | None
    graph: str
    rules: dict
    metric: str
    weights: dict | None
    sampler: str
    sweeps: tuple[int, ...]
    short_sweeps: int
    long_sweeps: int
    beta_range: tuple[float, float]
    interpolation: str
    scale: float
    noise_sigma: float = 0.0
    noise_copies: int = 0
    user: Any = None  # a callable, when the metric is a user function
    solvers: tuple[str, ...] = ()  # further search solvers; the fitness is the minimum over all of them

    @classmethod
    def from_config(cls, cfg: dict, topology, user=None) -> Context:
        from .couplings import CouplingRules
        from .samplers import default_beta_range

        f = cfg["fitness"]
        c = cfg["couplings"]
        rules = CouplingRules.make(c["alphabet"], c["fields"], c["range"], c["field_range"], c["precision"])
        beta = tuple(f["beta_range"]) if f["beta_range"] else default_beta_range(rules.scale)
        metric = f["metric"]
        if user is None and ":" in metric:
            user = load_user_function(metric)
        return cls(
            n=topology.n, edges=topology.edges, labels=topology.labels, graph=topology.spec,
            rules=rules.to_dict(), metric=metric, weights=f["weights"], sampler=f["sampler"],
            sweeps=tuple(sorted(set(f["sweeps"]))), short_sweeps=f["short_sweeps"], long_sweeps=f["long_sweeps"],
            beta_range=beta, interpolation=f["interpolation"], scale=rules.scale,
            noise_sigma=float(f["noise_sigma"]), noise_copies=int(f["noise_copies"]), user=user,
            solvers=tuple(x for x in dict.fromkeys(f["search_solvers"]) if x != f["sampler"]),
        )

    def schedule(self, sweeps: int) -> Schedule:
        return Schedule(sweeps=int(sweeps), beta_range=self.beta_range, interpolation=self.interpolation)

    def metric_names(self) -> list[str]:
        """The named metrics the fitness is made of."""
        return list(self.weights) if self.metric == "composite" else [self.metric]

    def counts_of(self, name: str) -> tuple[int, ...]:
        """The sweep counts one named metric is measured at in this run."""
        return METRICS.get(name).counts_for(self.sweeps, self.short_sweeps, self.long_sweeps)

    def sweep_counts(self) -> tuple[int, ...]:
        """The sweep counts the fitness needs."""
        if self.user is not None:
            return ()
        return tuple(sorted({c for name in self.metric_names() for c in self.counts_of(name)}))

    def instance(self, J, h, planted=None) -> Instance:
        return Instance(edges=self.edges, J=J, h=h, n=self.n, labels=self.labels, graph=self.graph,
                        planted=planted, metadata={"rules": self.rules})


@dataclasses.dataclass
class Measurement:
    """Raw results of measuring one candidate once (or pooled over several).

    ``reads`` is the reads of one measurement (a never-solved figure is
    bounded from that many, however many are pooled); ``tol`` the energy
    tolerance for reaching the reference (:func:`instgen.scoring.energy_tolerance`).
    """

    energies: dict[int, np.ndarray] = dataclasses.field(default_factory=dict)
    values: list[float] = dataclasses.field(default_factory=list)
    seconds: float = 0.0
    spin_updates: int = 0
    by_solver: dict[str, dict[int, np.ndarray]] = dataclasses.field(default_factory=dict)  # further solvers
    reads: int = 0
    tol: float = 1e-9

    def to_dict(self) -> dict:
        d = {"energies": {str(k): v.tolist() for k, v in self.energies.items()}, "values": list(self.values),
             "seconds": self.seconds, "spin_updates": self.spin_updates, "reads": self.reads, "tol": self.tol}
        if self.by_solver:
            d["by_solver"] = {s: {str(k): v.tolist() for k, v in e.items()} for s, e in self.by_solver.items()}
        return d

    @classmethod
    def from_dict(cls, d: dict) -> Measurement:
        energies = {int(k): np.asarray(v, dtype=np.float64) for k, v in d["energies"].items()}
        return cls(energies, [float(x) for x in d["values"]], float(d["seconds"]), int(d["spin_updates"]),
                   {s: {int(k): np.asarray(v, dtype=np.float64) for k, v in e.items()}
                    for s, e in d.get("by_solver", {}).items()},
                   int(d.get("reads", min((v.size for v in energies.values()), default=0))),
                   float(d.get("tol", 1e-9)))

    @property
    def min_energy(self) -> float:
        every = list(self.energies.values()) + [e for d in self.by_solver.values() for e in d.values()]
        return min((float(e.min()) for e in every if e.size), default=math.inf)


def pool(measurements) -> Measurement:
    """Concatenate measurements of the same candidate."""
    out = Measurement()
    ms = list(measurements)
    for m in ms:
        for k, e in m.energies.items():
            out.energies[k] = np.concatenate([out.energies[k], e]) if k in out.energies else e
        for name, energies in m.by_solver.items():
            mine = out.by_solver.setdefault(name, {})
            for k, e in energies.items():
                mine[k] = np.concatenate([mine[k], e]) if k in mine else e
        out.values.extend(m.values)
        out.seconds += m.seconds
        out.spin_updates += m.spin_updates
    out.reads = min((m.reads for m in ms if m.reads), default=0)
    out.tol = max((m.tol for m in ms), default=1e-9)
    return out


# --------------------------------------------------------------------- measuring
def measure(ctx: Context, J, h, seed: int, reads: int, planted=None) -> Measurement:
    """Run the context's sampler on one candidate at every sweep count the metric needs.

    With ``noise_copies`` > 0, each read is split across perturbed copies of the
    couplings (Gaussian noise ``noise_sigma`` times the scale on J and h, seeded), and
    the states found are scored on the unperturbed instance: hardness that
    survives control errors.  Each further search solver (``ctx.solvers``) is run
    at the same sweep counts and reads, on seeds of its own derived from ``seed``,
    without noise; its energies go to ``Measurement.by_solver``.
    """
    inst = ctx.instance(J, h, planted)
    if ctx.user is not None:
        value = float(ctx.user(inst, UserContext(ctx, seed, reads)))
        if not math.isfinite(value):
            raise InputError(f"the fitness function returned {value}, not a finite number")
        return Measurement(values=[value])
    sampler = get_sampler(ctx.sampler)
    out = Measurement(reads=int(reads), tol=scoring.energy_tolerance(inst))
    copies = max(1, ctx.noise_copies) if ctx.noise_sigma > 0 else 1
    for sweeps in ctx.sweep_counts():
        parts = []
        for c in range(copies):
            target = inst
            if ctx.noise_sigma > 0:
                rng = np.random.default_rng(derive_seed(seed, "noise", c))
                sd = ctx.noise_sigma * ctx.scale
                target = inst.with_couplings(inst.J + rng.normal(0, sd, inst.m), inst.h + rng.normal(0, sd, inst.n))
            r = max(1, reads // copies)
            batch = sampler.run(target, ctx.schedule(sweeps), reads=r, seed=derive_seed(seed, "sweeps", sweeps, c))
            parts.append(inst.energies(batch.states) if target is not inst else batch.energies)
            out.seconds += batch.seconds
            out.spin_updates += batch.spin_updates
        out.energies[sweeps] = np.concatenate(parts)
    for name in ctx.solvers:
        other = get_sampler(name)
        mine = out.by_solver.setdefault(name, {})
        for sweeps in ctx.sweep_counts():
            batch = other.run(inst, ctx.schedule(sweeps), reads=reads, seed=derive_seed(seed, "solver", name, sweeps))
            mine[sweeps] = batch.energies
            out.seconds += batch.seconds
            out.spin_updates += batch.spin_updates
    return out


class UserContext:
    """What a user fitness function receives besides the instance.

    ``seed`` and ``reads`` are this evaluation's; ``run(sweeps, sampler=None,
    reads=None)`` anneals the instance with the run's explicit schedule and
    returns a :class:`~instgen.records.SampleBatch`.
    """

    def __init__(self, ctx: Context, seed: int, reads: int):
        self._ctx = ctx
        self.seed = seed
        self.reads = reads
        self.sweeps = ctx.sweeps
        self.scale = ctx.scale

    def run(self, instance, sweeps: int, sampler: str | None = None, reads: int | None = None):
        s = get_sampler(sampler or self._ctx.sampler)
        return s.run(instance, self._ctx.schedule(sweeps), reads=reads or self.reads,
                     seed=derive_seed(self.seed, "user", sweeps))


# ---------------------------------------------------------------------- values
def figure(name: str, ctx: Context, m: Measurement, reference: float, energies=None, intervals: bool = False):
    """The figure (a :class:`~instgen.records.Score`) of one named metric for a measurement.

    Computed by :func:`instgen.scoring.evaluate`, the one implementation.
    """
    energies = m.energies if energies is None else energies
    mine = {c: energies[c] for c in ctx.counts_of(name)}
    return scoring.evaluate(name, mine, reference=reference, n=ctx.n, scale=ctx.scale, tol=m.tol,
                            bound_reads=m.reads or None, intervals=intervals)


def metric_value(name: str, ctx: Context, m: Measurement, reference: float, energies=None) -> tuple[float, dict]:
    """Fitness value (higher = harder) of one named metric, with the figure it ranks."""
    energies = m.energies if energies is None else energies
    score = figure(name, ctx, m, reference, energies)
    key = scoring.rank_key(score, energies, reference=reference, n=ctx.n, scale=ctx.scale)
    details = {"metric": name, "figure": float(score.value), "kind": score.kind, "units": score.units}
    if name == "tts":
        details["sweeps"] = score.extra["best_sweeps"]
    return key, details


def value(ctx: Context, m: Measurement, reference: float | None) -> tuple[float, dict]:
    """The fitness of a (pooled) measurement against ``reference``.

    ``reference`` None means "best found": the lowest energy in the measurement
    (not a proven optimum).
    """
    if ctx.user is not None:
        return float(np.mean(m.values)), {"values": len(m.values)}
    ref = m.min_energy if reference is None else reference
    if ctx.solvers:
        return _least_over_solvers(ctx, m, ref)
    return _value_of(ctx, m, ref)


def _least_over_solvers(ctx: Context, m: Measurement, ref: float) -> tuple[float, dict]:
    """The fitness under the solver that finds the candidate easiest (hardness is no one method's blind spot)."""
    per = {ctx.sampler: _value_of(ctx, m, ref)}
    for name in ctx.solvers:
        per[name] = _value_of(ctx, m, ref, m.by_solver.get(name, {}))
    easiest = min(per, key=lambda k: (per[k][0], k))
    v, d = per[easiest]
    return v, {**d, "solver": easiest, "per_solver": {k: x[0] for k, x in per.items()}}


def _value_of(ctx: Context, m: Measurement, ref: float, energies=None) -> tuple[float, dict]:
    if ctx.metric == "composite":
        total, details = 0.0, {}
        for name, w in ctx.weights.items():
            v, d = metric_value(name, ctx, m, ref, energies)
            total += w * v
            details[name] = {"value": v, **d}
        return total, {"reference": ref, "parts": details}
    v, d = metric_value(ctx.metric, ctx, m, ref, energies)
    return v, {"reference": ref, **d}


# ------------------------------------------------------------------ user functions
def load_user_function(spec: str):
    """Import ``package.module:function``; only ever called when a user names it."""
    module, _, attr = spec.partition(":")
    if not module or not attr:
        raise ConfigError(f"a fitness function is named as package.module:function, got {spec!r}")
    try:
        fn = getattr(importlib.import_module(module), attr)
    except ImportError as exc:
        raise ConfigError(f"cannot import fitness module {module!r}: {exc}") from None
    except AttributeError:
        raise ConfigError(f"module {module!r} has no function {attr!r}") from None
    if not callable(fn):
        raise ConfigError(f"{spec} is not a function")
    return fn


def _retired(where: str, name) -> None:
    new = METRICS.renamed(name)
    if new:
        raise ConfigError(f"{where}: the metric {name!r} is now called {new!r}")


def check_fitness(f: dict) -> None:
    """Validate the [fitness] table's metric, weights and samplers."""
    metric = f["metric"]
    if metric == "composite":
        w = f["weights"]
        if not w or not isinstance(w, dict):
            raise ConfigError("[fitness] metric 'composite' needs weights, e.g. weights = { tts = 1.0, anneal-gain = 0.5 }")
        for name, weight in w.items():
            if name not in FITNESS_METRICS:
                _retired("[fitness] weights", name)
                raise ConfigError(f"[fitness] weights: unknown metric {name!r}; choose from: {', '.join(FITNESS_METRICS)}")
            if isinstance(weight, bool) or not isinstance(weight, (int, float)) or not math.isfinite(weight):
                raise ConfigError(f"[fitness] weights.{name} must be a finite number")
    elif ":" in metric:
        module, _, attr = metric.partition(":")
        if not module or not attr or not all(p.isidentifier() for p in module.split(".") + [attr]):
            raise ConfigError(f"[fitness] metric {metric!r} is not of the form package.module:function")
    elif metric not in FITNESS_METRICS:
        _retired("[fitness]", metric)
        raise ConfigError(f"[fitness] unknown metric {metric!r}; choose one of: {', '.join(FITNESS_METRICS)}, "
                          "composite, or package.module:function")
    if f["sampler"] not in SAMPLERS:
        raise ConfigError(f"[fitness] unknown sampler {f['sampler']!r}; choose one of: {', '.join(SAMPLERS.names())}")
    for key in ("sampler", "solvers"):
        for name in [f[key]] if key == "sampler" else f.get(key) or []:
            if name in SAMPLERS and getattr(SAMPLERS.get(name), "enumerates", False):
                raise ConfigError(f"[fitness] {key}: {name!r} lists states instead of sampling; it cannot "
                                  "measure hardness")
    for name in f.get("search_solvers") or []:
        if name not in SAMPLERS:
            raise ConfigError(f"[fitness] search_solvers: unknown sampler {name!r}; choose from: "
                              f"{', '.join(SAMPLERS.names())}")
        if getattr(SAMPLERS.get(name), "enumerates", False):
            raise ConfigError(f"[fitness] search_solvers: {name!r} lists states instead of sampling; it cannot "
                              "measure hardness")
    if f.get("search_solvers") and ":" in metric:
        raise ConfigError("[fitness] search_solvers needs a named metric; a fitness function measures "
                          "what it likes itself")

