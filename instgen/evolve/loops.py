"""The loop genome: frustrated-loop instances whose every child keeps its proof.

A :class:`LoopGenome` is a set of frustrated loops (:mod:`instgen.planted.loops`)
in a planted gauge.  Each loop alone has the planted state as a ground state,
so any sum of loops does too, and E0 = -sum_j w_j (L_j - 2) is a certificate
for every candidate the search ever makes.  Operators add, remove, re-route and
re-weight loops and mix the loop sets of two parents; every child respects the
cap on accumulated |J| per edge (the coupling range), and loop weights are
drawn from the alphabet's positive values, so couplings stay on the alphabet's
grid.
"""

from __future__ import annotations

import numpy as np

from ..errors import ConfigError
from ..planted.loops import Loop, LoopGraph, accumulate, fits, loop_couplings, planted_bound, random_loop
from .genome import array_key
from .operators import Operator, Variation, register

_ATTEMPTS = 50


class LoopSetting:
    """Per-run loop parameters, derived once from the preset and kept on the Variation."""

    def __init__(self, var: Variation):
        planting = var.extra["planting"]
        rules = var.rules
        alpha = rules.couplings
        if alpha.discrete:
            weights = sorted({abs(v) for v in alpha.values if v != 0})
        else:
            weights = [alpha.scale]
        cap = planting.get("cap") or rules.coupling_range or (alpha.max_abs if alpha.discrete else None)
        if cap is not None and min(weights) > cap:
            raise ConfigError(f"[planting] cap {cap:g} is below the smallest loop weight {min(weights):g}")
        if rules.fields.kind != "none":
            raise ConfigError("[planting] loops are planted without fields; set [couplings] fields = \"none\"")
        self.weights = [w for w in weights if cap is None or w <= cap]
        self.cap = cap
        self.min_length = int(planting.get("min_length", 4))
        self.density = float(planting.get("density", 0.3))
        topo = var.extra["topology"]
        self.graph = LoopGraph.of(topo)
        self.n, self.m, self.edges = topo.n, topo.m, topo.edges

    @classmethod
    def of(cls, var: Variation) -> LoopSetting:
        if "loops" not in var.extra:
            var.extra["loops"] = cls(var)
        return var.extra["loops"]

    def draw(self, rng, acc, start=None, weight=None) -> Loop | None:
        """A random loop that fits under the cap given the accumulated couplings, or None."""
        for _ in range(_ATTEMPTS):
            w = weight if weight is not None else self.weights[int(rng.integers(len(self.weights)))]
            loop = random_loop(self.graph, rng, self.min_length, weight=w, start=start)
            if fits(acc, loop, self.cap):
                return loop
        return None


class LoopGenome:
    """A loop set plus its planted state (the gauge that hides it)."""

    kind = "loops"

    def __init__(self, loops, gauge, setting: LoopSetting):
        self.loops = tuple(loops)
        self.gauge = np.asarray(gauge, dtype=np.int8)
        self.setting = setting
        self._J = loop_couplings(self.loops, setting.m, cap=setting.cap, gauge=self.gauge, edges=setting.edges)

    def couplings(self):
        return self._J, np.zeros(self.setting.n), self.gauge, planted_bound(self.loops)

    def key(self) -> str:
        return array_key(self._J, self.gauge)

    def construction(self) -> dict:
        s = self.setting
        return {"family": "loops", "cap": s.cap, "loop_count": len(self.loops), "density": len(self.loops) / s.n,
                "min_length": s.min_length, "weights": list(s.weights), "planted_energy": planted_bound(self.loops),
                "loops": [loop.to_list() for loop in self.loops], "bred": True}

    def with_loops(self, loops) -> LoopGenome:
        return LoopGenome(loops, self.gauge, self.setting)

    def to_dict(self) -> dict:
        return {"kind": self.kind, "loops": [loop.to_list() for loop in self.loops], "gauge": self.gauge.tolist()}

    @classmethod
    def from_dict(cls, d: dict, var: Variation) -> LoopGenome:
        return cls([Loop.from_list(x) for x in d["loops"]], d["gauge"], LoopSetting.of(var))

    @classmethod
    def random(cls, var: Variation, rng) -> LoopGenome:
        """round(density * n) loops drawn one by one under the cap, behind a random gauge."""
        s = LoopSetting.of(var)
        count = max(1, int(round(s.density * s.n)))
        acc = np.zeros(s.m)
        loops = []
        for _ in range(count):
            loop = s.draw(rng, acc)
            if loop is None:
                break
            acc[list(loop.edges)] += loop.values()
            loops.append(loop)
        if not loops:
            raise ConfigError("no loop fits under the cap on this graph; raise the cap or lower min_length")
        gauge = (2 * rng.integers(0, 2, size=s.n) - 1).astype(np.int8)
        return cls(loops, gauge, s)


class LoopMutation(Operator):
    genome = "loops"

    def __call__(self, g: LoopGenome, rng, var: Variation) -> LoopGenome:
        loops = self._do(list(g.loops), rng, LoopSetting.of(var))
        return g.with_loops(loops) if loops else g.with_loops(g.loops)

    def _do(self, loops, rng, s: LoopSetting):
        raise NotImplementedError


@register
class AddLoop(LoopMutation):
    """Add one random loop that fits under the cap."""

    name = "add-loop"

    def _do(self, loops, rng, s):
        loop = s.draw(rng, accumulate(loops, s.m))
        return loops + [loop] if loop is not None else loops


@register
class RemoveLoop(LoopMutation):
    """Remove one loop (never the last)."""

    name = "remove-loop"

    def _do(self, loops, rng, s):
        if len(loops) > 1:
            del loops[int(rng.integers(len(loops)))]
        return loops


@register
class RerouteLoop(LoopMutation):
    """Replace one loop by a new random loop through one of its spins, same weight."""

    name = "reroute-loop"

    def _do(self, loops, rng, s):
        k = int(rng.integers(len(loops)))
        old = loops.pop(k)
        start = old.spins[int(rng.integers(old.length))]
        new = s.draw(rng, accumulate(loops, s.m), start=start, weight=old.weight)
        loops.insert(k, new if new is not None else old)
        return loops


@register
class ReweightLoop(LoopMutation):
    """Give one loop another allowed weight, if the cap allows it."""

    name = "reweight-loop"

    def _do(self, loops, rng, s):
        if len(s.weights) < 2:
            return loops
        k = int(rng.integers(len(loops)))
        old = loops[k]
        others = [w for w in s.weights if w != old.weight]
        new = Loop(old.spins, old.edges, old.frustrated, others[int(rng.integers(len(others)))])
        rest = accumulate(loops[:k] + loops[k + 1:], s.m)
        if fits(rest, new, s.cap):
            loops[k] = new
        return loops


@register
class MixLoops(Operator):
    """Children take each parent loop with probability 1/2 (skipping loops that break the cap)."""

    name = "mix-loops"
    genome = "loops"
    crossover = True

    def __call__(self, a: LoopGenome, b: LoopGenome, rng, var: Variation):
        s = LoopSetting.of(var)
        pool = list(a.loops) + list(b.loops)
        children = []
        for parent in (a, b):
            order = rng.permutation(len(pool))
            take = rng.random(len(pool)) < 0.5
            acc = np.zeros(s.m)
            chosen = []
            for i in order:
                if take[i] and fits(acc, pool[i], s.cap):
                    acc[list(pool[i].edges)] += pool[i].values()
                    chosen.append(pool[i])
            children.append(parent.with_loops(chosen or list(parent.loops)))
        return tuple(children)
