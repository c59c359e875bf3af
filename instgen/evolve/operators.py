"""Variation operators: one small class per operator, in a registry.

A preset picks operators and their relative weights::

    [search]
    operators = { resample = 1.0, sign-flip = 0.5, uniform = 0.5, block = 0.5 }

Mutations change a genome; crossovers mix two.  Each generation a child is
made by a crossover (with probability ``crossover_rate``, operator drawn by
weight) and then one mutation (drawn by weight).  A mutation touches each
coupling with probability ``mutation_rate`` and always at least one.

The public ``__call__`` draws from the RNG it is given and legalises the result
(range and precision); subclasses implement ``_do``.
"""

from __future__ import annotations

import dataclasses
from typing import ClassVar

import numpy as np

from ..couplings import CouplingRules
from ..errors import ConfigError
from ..registry import Registry
from .genome import FreeGenome

OPERATORS = Registry("operator")


@dataclasses.dataclass
class Variation:
    """What operators may look at: the rules, the graph and the mutation rate."""

    rules: CouplingRules
    n: int
    edges: np.ndarray
    mutation_rate: float
    adjacency: list | None = None  # neighbour lists on spin indices
    extra: dict = dataclasses.field(default_factory=dict)

    def neighbours(self):
        if self.adjacency is None:
            adj = [[] for _ in range(self.n)]
            for i, j in self.edges.tolist():
                adj[i].append(j)
                adj[j].append(i)
            self.adjacency = adj
        return self.adjacency


class Operator:
    name: ClassVar[str] = ""
    genome: ClassVar[str] = "free"      # which genome kind it applies to
    crossover: ClassVar[bool] = False
    needs_fields: ClassVar[bool] = False


def register(cls):
    OPERATORS.register(cls.name, cls)
    return cls


def _pick(size: int, rate: float, rng) -> np.ndarray:
    """Indices chosen with probability ``rate`` each, at least one."""
    if size == 0:
        return np.zeros(0, dtype=np.int64)
    mask = rng.random(size) < rate
    if not mask.any():
        mask[rng.integers(size)] = True
    return np.flatnonzero(mask)


class FreeMutation(Operator):
    """Base for mutations of a FreeGenome's couplings (or fields)."""

    target: ClassVar[str] = "couplings"

    def __call__(self, g: FreeGenome, rng, var: Variation) -> FreeGenome:
        child = g.copy()
        arr = child.J if self.target == "couplings" else child.h
        idx = _pick(arr.size, var.mutation_rate, rng)
        arr[idx] = self._do(arr[idx], rng, var)
        arr[:] = var.rules.legalise(arr, self.target)
        return child

    def _do(self, values, rng, var):
        raise NotImplementedError


@register
class Resample(FreeMutation):
    """Draw the chosen couplings afresh from the alphabet."""

    name = "resample"

    def _do(self, values, rng, var):
        return var.rules.couplings.sample(values.size, rng)


@register
class SignFlip(FreeMutation):
    """Negate the chosen couplings (changes frustration, keeps magnitudes)."""

    name = "sign-flip"

    def _do(self, values, rng, var):
        return -values


@register
class Creep(FreeMutation):
    """Add Gaussian noise of 0.2 x the coupling scale, then clip and quantise."""

    name = "creep"

    def _do(self, values, rng, var):
        step = 0.2 * var.rules.scale
        if var.rules.precision is not None:
            step = max(step, var.rules.precision)
        return values + rng.normal(0.0, step, values.size)


@register
class FieldResample(FreeMutation):
    """Draw the chosen fields afresh from the field alphabet."""

    name = "field-resample"
    target = "fields"
    needs_fields = True

    def _do(self, values, rng, var):
        return var.rules.fields.sample(values.size, rng)


@register
class UniformCrossover(Operator):
    """Swap each coupling (and field) between the parents with probability 1/2."""

    name = "uniform"
    crossover = True

    def __call__(self, a: FreeGenome, b: FreeGenome, rng, var: Variation):
        ca, cb = a.copy(), b.copy()
        for x, y in ((ca.J, cb.J), (ca.h, cb.h)):
            swap = rng.random(x.size) < 0.5
            x[swap], y[swap] = y[swap].copy(), x[swap].copy()
        return ca, cb


@register
class BlockCrossover(Operator):
    """Swap a connected region of the graph: the couplings inside a ball around a random spin.

    Keeps local structure (frustrated plaquettes, hard cores) of each parent intact.
    """

    name = "block"
    crossover = True

    def __call__(self, a: FreeGenome, b: FreeGenome, rng, var: Variation):
        adj = var.neighbours()
        target = max(2, int(rng.uniform(0.2, 0.6) * var.n))
        start = int(rng.integers(var.n))
        seen, frontier = {start}, [start]
        while frontier and len(seen) < target:
            nxt = []
            for v in frontier:
                for w in adj[v]:
                    if w not in seen:
                        seen.add(w)
                        nxt.append(w)
            frontier = nxt
        region = np.zeros(var.n, dtype=bool)
        region[list(seen)] = True
        inside = region[var.edges[:, 0]] & region[var.edges[:, 1]]
        ca, cb = a.copy(), b.copy()
        ca.J[inside], cb.J[inside] = b.J[inside], a.J[inside]
        ca.h[region], cb.h[region] = b.h[region], a.h[region]
        return ca, cb


def default_operators(genome_kind: str, rules: CouplingRules) -> dict[str, float]:
    """Operator weights used when a preset names none."""
    if genome_kind == "loops":
        return {"add-loop": 1.0, "remove-loop": 1.0, "reroute-loop": 1.0, "reweight-loop": 0.5, "mix-loops": 0.5}
    if genome_kind == "terms":
        from .terms import TERM_OPERATORS

        return dict(TERM_OPERATORS)
    ops = {"resample": 1.0, "uniform": 0.5, "block": 0.5}
    if rules.couplings.kind != "pm1":
        ops["sign-flip"] = 0.5
    if not rules.couplings.discrete:
        ops["creep"] = 1.0
    if rules.fields.kind != "none":
        ops["field-resample"] = 0.5
    return ops


def check_operator_rates(ops, cfg) -> None:
    """Validate a preset's [search] operators table against the registry and genome kind."""
    if ops is None:
        return
    if not isinstance(ops, dict) or not ops:
        raise ConfigError("[search] operators must be a table of name = weight")
    kind = cfg["planting"]["method"] if cfg["planting"]["method"] in ("loops", "terms") else "free"
    if kind != "free":
        _ensure_loop_operators()
    mutations = 0
    for name, weight in ops.items():
        if name not in OPERATORS:
            valid = [n for n in OPERATORS.names() if OPERATORS.get(n).genome == kind]
            raise ConfigError(f"[search] operators: unknown operator {name!r}; for this preset choose from: "
                              f"{', '.join(valid)}")
        op = OPERATORS.get(name)
        if op.genome != kind:
            raise ConfigError(f"[search] operators: {name!r} works on {op.genome} genomes, this preset breeds {kind} genomes")
        if op.needs_fields and cfg["couplings"]["fields"] == "none":
            raise ConfigError(f"[search] operators: {name!r} needs fields, but [couplings] fields = \"none\"")
        if isinstance(weight, bool) or not isinstance(weight, (int, float)) or not weight >= 0:
            raise ConfigError(f"[search] operators: the weight of {name!r} must be a number >= 0")
        if not op.crossover and weight > 0:
            mutations += 1
    if mutations == 0:
        raise ConfigError("[search] operators must include at least one mutation with a positive weight")


def _ensure_loop_operators():
    """Loop and term operators register themselves on import."""
    from . import loops  # noqa: F401  (imports .terms too)


class Variator:
    """Makes children from parents with the chosen operators and rates."""

    def __init__(self, weights: dict[str, float], crossover_rate: float, var: Variation):
        if any(k not in OPERATORS for k in weights):
            _ensure_loop_operators()
        self.var = var
        self.crossover_rate = crossover_rate
        self.mutations = [(OPERATORS.get(k)(), w) for k, w in sorted(weights.items()) if w > 0 and not OPERATORS.get(k).crossover]
        self.crossovers = [(OPERATORS.get(k)(), w) for k, w in sorted(weights.items()) if w > 0 and OPERATORS.get(k).crossover]

    @staticmethod
    def _choose(ops, rng):
        w = np.array([x[1] for x in ops], dtype=float)
        return ops[int(rng.choice(len(ops), p=w / w.sum()))][0]

    def children(self, a, b, rng):
        """Two children of parents a and b: optional crossover, then one mutation each."""
        if self.crossovers and rng.random() < self.crossover_rate:
            a, b = self._choose(self.crossovers, rng)(a, b, rng, self.var)
        return (self._choose(self.mutations, rng)(a, rng, self.var),
                self._choose(self.mutations, rng)(b, rng, self.var))
