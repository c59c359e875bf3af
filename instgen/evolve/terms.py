"""The term genome: planted instances whose every child keeps its proof.

A :class:`TermGenome` is a list of local terms, frustrated loops and small
frustrated patches (:mod:`instgen.planted.terms`), in one planted gauge.  Each
term alone has the planted state as a ground state, with a known minimum, so
any sum of terms does too and E0 = sum of the terms' minima is a certificate
for every candidate the search ever makes.

Operators change which terms exist (``add-term``, ``remove-term``), where they
lie (``move-term``: a loop is re-routed through one of its spins, a patch moves
to a site next to it), their couplings (``reweight-term``: another weight for a
loop, fresh couplings for a patch), where their frustration sits
(``shift-term``: re-gauge the term by another of its own ground states, which
for a loop moves its antiferromagnetic edge), and mix the terms of two parents
(``mix-terms``).  Every child respects the cap on accumulated |J| per edge (the
coupling range; a term that would break it is not added), and term couplings
are drawn from the alphabet's positive values, so accumulated couplings stay
on the alphabet's precision grid.  The loop genome
(:mod:`instgen.evolve.loops`) is this genome restricted to loops.

Preset::

    [planting]
    method = "terms"
    terms = { loop = 1.0, cell = 1.0 }   # kinds a new term is drawn from, by weight
    density = 0.3                        # terms per spin at the start
"""

from __future__ import annotations

import numpy as np

from ..couplings import common_step, snap
from ..errors import ConfigError, InstgenError
from ..planted.loops import Loop, LoopGraph, fit_loop, fits, random_loop
from ..planted.terms import (SHAPES, Patch, Sites, applicable_shapes, draw_patch, local_pairs, parse_kinds,
                             patch_states, term_couplings, terms_bound)
from .genome import array_key
from .operators import Operator, Variation, register

_ATTEMPTS = 50
_TRIES = 5
_TOL = 1e-9


class TermSetting:
    """Per-run term parameters, derived once from the preset and kept on the Variation.

    Parameters
    ----------
    var : Variation
        Its ``extra`` holds ``planting`` (the preset's [planting] table) and
        ``topology``.
    kinds : dict, optional
        Term kinds and weights; default: ``[planting] terms``, else loops and
        the patch shapes that fit the graph.
    """

    key = "terms"

    def __init__(self, var: Variation, kinds: dict | None = None):
        planting = var.extra["planting"]
        rules = var.rules
        alpha = rules.couplings
        weights = sorted({abs(v) for v in alpha.values if v != 0}) if alpha.discrete else [alpha.scale]
        if rules.precision is not None:  # continuous alphabets: the weight on the precision grid
            weights = sorted({max(1, round(w / rules.precision)) * rules.precision for w in weights})
        cap = planting.get("cap") or rules.coupling_range or (alpha.max_abs if alpha.discrete else None)
        if cap is not None and min(weights) > cap:
            raise ConfigError(f"[planting] cap {cap:g} is below the smallest coupling weight {min(weights):g}")
        if rules.fields.kind != "none":
            raise ConfigError("[planting] planted terms carry no fields; set [couplings] fields = \"none\"")
        topo = var.extra["topology"]
        self.weights = [w for w in weights if cap is None or w <= cap]
        self.cap = cap
        #: the grid every sum of terms lies on: couplings are snapped to it (no float noise such as 1e-16)
        self.step = rules.precision or common_step(self.weights)
        self.min_length = int(planting.get("min_length", 4))
        self.density = float(planting.get("density", 0.3))
        self.patch_size = int(planting.get("patch_size") or 8)
        if kinds is None:
            given = planting.get("terms")
            kinds = given if given else {k: 1.0 for k in ["loop"] + [s for s in applicable_shapes(topo)
                                                                     if s != "ball"]}
        try:
            self.kinds = parse_kinds(kinds)
            self.sites = {k: Sites.of(topo, k, self.patch_size) for k in self.kinds if k != "loop"}
        except InstgenError as exc:
            raise ConfigError(f"[planting] terms: {exc}") from None
        self.graph = LoopGraph.of(topo)
        self.n, self.m, self.edges = topo.n, topo.m, topo.edges
        self._pairs: dict = {}

    @classmethod
    def of(cls, var: Variation):
        """The run's setting, made on first use and cached on ``var``."""
        if cls.key not in var.extra:
            var.extra[cls.key] = cls(var)
        return var.extra[cls.key]

    def pick_kind(self, rng) -> str:
        names = list(self.kinds)
        p = np.array([self.kinds[k] for k in names])
        return names[int(rng.choice(len(names), p=p / p.sum()))]

    def weight(self, rng) -> float:
        return self.weights[int(rng.integers(len(self.weights)))]

    def draw(self, rng, acc, kind: str | None = None, near: int | None = None, weight: float | None = None,
             site=None):
        """A random term that fits under the cap given the accumulated couplings, or None.

        ``kind`` defaults to one drawn by weight; ``near`` asks for a loop through,
        or a patch site holding, that spin; ``site`` (spins, edges) fixes a patch's site.
        """
        kind = kind or self.pick_kind(rng)
        for _ in range(_ATTEMPTS):
            if kind == "loop":
                w = weight if weight is not None else self.weight(rng)
                term = random_loop(self.graph, rng, self.min_length, weight=w, start=near)
                if weight is None:  # a weight left to chance may shrink to fit
                    term = fit_loop(acc, term, self.cap, self.weights, rng)
                    if term is None:
                        continue
            else:
                spins, edges = site or self.sites[kind].pick(rng, near)
                term = draw_patch(kind, spins, edges, self.edges, rng, self.weights,
                                  pairs=self.site_pairs(spins, edges))
            if fits(acc, term, self.cap):
                return term
        return None

    def site_pairs(self, spins, edges) -> np.ndarray:
        """The edges' ends as positions in ``spins`` (cached per site)."""
        key = (tuple(spins), tuple(edges))
        if key not in self._pairs:
            if len(self._pairs) > 100_000:
                self._pairs.clear()
            self._pairs[key] = local_pairs(spins, edges, self.edges)
        return self._pairs[key]

    def pairs(self, patch: Patch) -> np.ndarray:
        return self.site_pairs(patch.spins, patch.edges)


def _term_to_list(t) -> list:
    return ["loop", t.to_list()] if isinstance(t, Loop) else ["patch", t.to_list()]


def _term_from_list(item):
    from ..errors import FormatError

    if not isinstance(item, list) or len(item) != 2 or item[0] not in ("loop", "patch"):
        raise FormatError(f"a term must be [\"loop\" or \"patch\", data], got {str(item)[:80]}")
    return Loop.from_list(item[1]) if item[0] == "loop" else Patch.from_list(item[1])


class TermGenome:
    """A list of terms (loops and patches) plus its planted state (the gauge that hides it)."""

    kind = "terms"
    setting_class = TermSetting

    def __init__(self, terms, gauge, setting: TermSetting):
        self.terms = tuple(terms)
        self.gauge = np.asarray(gauge, dtype=np.int8)
        self.setting = setting
        J = term_couplings(self.terms, setting.m)
        if setting.step is not None:
            J = snap(J, setting.step)
        if setting.cap is not None and np.any(np.abs(J) > setting.cap + _TOL):
            from ..errors import InputError

            raise InputError(f"the terms accumulate |J| = {np.abs(J).max():g} on an edge, above the cap "
                             f"{setting.cap:g}")
        g = self.gauge.astype(np.float64)
        self._J = J * g[setting.edges[:, 0]] * g[setting.edges[:, 1]] + 0.0

    def couplings(self):
        """(J, h, planted state, planted energy)."""
        return self._J, np.zeros(self.setting.n), self.gauge, terms_bound(self.terms)

    def key(self) -> str:
        return array_key(self._J, self.gauge)

    @property
    def loops(self) -> list:
        return [t for t in self.terms if isinstance(t, Loop)]

    @property
    def patches(self) -> list:
        return [t for t in self.terms if isinstance(t, Patch)]

    def construction(self) -> dict:
        """The ``metadata["construction"]`` of the instance (family ``terms``, checked by its verifier)."""
        s = self.setting
        loops, patches = self.loops, self.patches
        return {"family": "terms", "cap": s.cap, "kinds": dict(s.kinds), "loop_count": len(loops),
                "patch_count": len(patches), "density": len(self.terms) / s.n, "min_length": s.min_length,
                "patch_size": s.patch_size, "weights": list(s.weights), "planted_energy": terms_bound(self.terms),
                "loops": [t.to_list() for t in loops], "patches": [t.to_list() for t in patches], "bred": True}

    def with_terms(self, terms):
        return type(self)(terms, self.gauge, self.setting)

    def to_dict(self) -> dict:
        return {"kind": self.kind, "terms": [_term_to_list(t) for t in self.terms], "gauge": self.gauge.tolist()}

    @classmethod
    def from_dict(cls, d: dict, var: Variation):
        return cls([_term_from_list(x) for x in d["terms"]], d["gauge"], cls.setting_class.of(var))

    @classmethod
    def random(cls, var: Variation, rng):
        """round(density * n) terms drawn one by one under the cap, behind a random gauge."""
        s = cls.setting_class.of(var)
        count = max(1, int(round(s.density * s.n)))
        acc = np.zeros(s.m)
        terms = []
        for _ in range(count):
            t = s.draw(rng, acc)
            if t is None:
                continue
            acc[t.index] += t.values()
            terms.append(t)
        if not terms:
            raise ConfigError("no term fits under the cap on this graph; raise the cap, lower min_length or "
                              "choose other term kinds")
        gauge = (2 * rng.integers(0, 2, size=s.n) - 1).astype(np.int8)
        return cls(terms, gauge, s)


def _rest(terms, k, m):
    return term_couplings(terms[:k] + terms[k + 1:], m)


def _regauge(term, rng, setting):
    """The term re-gauged by another of its own ground states (None when it has only one)."""
    if isinstance(term, Loop):
        if term.length < 2:
            return None
        others = [k for k in range(term.length) if k != term.frustrated]
        return Loop(term.spins, term.edges, others[int(rng.integers(len(others)))], term.weight)
    pairs = setting.pairs(term)
    S = patch_states(len(term.spins))
    v = term.values()
    E = (S[:, pairs[:, 0]] * S[:, pairs[:, 1]]) @ v
    ground = np.flatnonzero(E <= E[0] + _TOL)
    ground = ground[ground != 0]
    if ground.size == 0:
        return None
    g = S[ground[int(rng.integers(ground.size))]].astype(np.float64)
    return Patch(term.shape, term.spins, term.edges, v * g[pairs[:, 0]] * g[pairs[:, 1]] + 0.0)


def within_cap(terms, s: TermSetting) -> bool:
    """True when the terms' accumulated |J| is at most the cap on every edge."""
    return s.cap is None or bool(np.all(np.abs(term_couplings(terms, s.m)) <= s.cap + _TOL))


class TermMutation(Operator):
    """Base for mutations of a term list: ``_do(terms, rng, setting) -> terms``.

    Taking a term away can break the cap too (terms of opposite sign may have
    cancelled on an edge), so a result over the cap is drawn again, up to
    :data:`_TRIES` times, before the parent's terms are kept unchanged.
    """

    genome = "terms"

    def __call__(self, g, rng, var: Variation):
        s = type(g).setting_class.of(var)
        for _ in range(_TRIES):
            terms = self._do(list(g.terms), rng, s)
            if terms and within_cap(terms, s):
                return g.with_terms(terms)
        return g.with_terms(g.terms)

    def _do(self, terms, rng, s: TermSetting):
        raise NotImplementedError


@register
class AddTerm(TermMutation):
    """Add one random term (kind drawn by weight) that fits under the cap."""

    name = "add-term"

    def _do(self, terms, rng, s):
        t = s.draw(rng, term_couplings(terms, s.m))
        return terms + [t] if t is not None else terms


@register
class RemoveTerm(TermMutation):
    """Remove one term (never the last)."""

    name = "remove-term"

    def _do(self, terms, rng, s):
        if len(terms) > 1:
            del terms[int(rng.integers(len(terms)))]
        return terms


@register
class MoveTerm(TermMutation):
    """Move one term: a loop is re-routed through one of its spins (same weight); a patch gets fresh
    couplings on a site of its shape next to one of its spins."""

    name = "move-term"

    def _do(self, terms, rng, s):
        k = int(rng.integers(len(terms)))
        old = terms.pop(k)
        acc = term_couplings(terms, s.m)
        v = old.spins[int(rng.integers(len(old.spins)))]
        if isinstance(old, Loop):
            new = s.draw(rng, acc, kind="loop", near=v, weight=old.weight)
        else:
            nbrs = s.graph.neighbours[s.graph.indptr[v]:s.graph.indptr[v + 1]]
            near = int(nbrs[int(rng.integers(nbrs.size))]) if nbrs.size else v
            new = s.draw(rng, acc, kind=old.shape, near=near)
        terms.insert(k, new if new is not None else old)
        return terms


@register
class ReweightTerm(TermMutation):
    """Give one term new couplings in place: another allowed weight for a loop, a fresh draw for a patch."""

    name = "reweight-term"

    def _do(self, terms, rng, s):
        k = int(rng.integers(len(terms)))
        old = terms[k]
        rest = _rest(terms, k, s.m)
        if isinstance(old, Loop):
            others = [w for w in s.weights if w != old.weight]
            if not others:
                return terms
            new = Loop(old.spins, old.edges, old.frustrated, others[int(rng.integers(len(others)))])
            new = new if fits(rest, new, s.cap) else None
        else:
            new = s.draw(rng, rest, kind=old.shape, site=(old.spins, old.edges))
        if new is not None:
            terms[k] = new
        return terms


@register
class ShiftTerm(TermMutation):
    """Move where one term's frustration sits: re-gauge it by another of its own ground states
    (for a loop, the antiferromagnetic edge moves; magnitudes and the term's minimum stay)."""

    name = "shift-term"

    def _do(self, terms, rng, s):
        k = int(rng.integers(len(terms)))
        new = _regauge(terms[k], rng, s)
        if new is not None and fits(_rest(terms, k, s.m), new, s.cap):
            terms[k] = new
        return terms


@register
class MixTerms(Operator):
    """Children take each parent term with probability 1/2 (skipping terms that break the cap)."""

    name = "mix-terms"
    genome = "terms"
    crossover = True

    def __call__(self, a, b, rng, var: Variation):
        s = type(a).setting_class.of(var)
        pool = list(a.terms) + list(b.terms)
        children = []
        for parent in (a, b):
            order = rng.permutation(len(pool))
            take = rng.random(len(pool)) < 0.5
            acc = np.zeros(s.m)
            chosen = []
            for i in order:
                if take[i] and fits(acc, pool[i], s.cap):
                    acc[pool[i].index] += pool[i].values()
                    chosen.append(pool[i])
            children.append(parent.with_terms(chosen or list(parent.terms)))
        return tuple(children)


TERM_OPERATORS = {"add-term": 1.0, "remove-term": 1.0, "move-term": 1.0, "reweight-term": 0.5,
                  "shift-term": 1.0, "mix-terms": 0.5}

__all__ = ["TermSetting", "TermGenome", "TERM_OPERATORS", "SHAPES"]
