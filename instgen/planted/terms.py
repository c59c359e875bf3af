"""Planted sums of local terms: frustrated loops plus small frustrated patches.

Every term is a small Ising problem on a few edges of the graph, written in the
planted gauge (planted state all +1), that has the all +1 state among its own
ground states.  Its minimum is therefore its value at all +1, and for the sum

    E(s) = sum_t E_t(s) >= sum_t min E_t = sum_t E_t(+1) = E(planted)

for every state s: the planted state is a ground state and the planted energy
is a proof, whatever terms are added, removed or moved.  Two kinds of term:

* **loops** (:class:`~instgen.planted.loops.Loop`): a simple cycle with one
  antiferromagnetic edge, minimum -w (L - 2) (Hen et al., PRA 92, 042325 (2015));
* **patches** (:class:`Patch`): couplings on the edges among at most
  :data:`MAX_PATCH_SPINS` spins, drawn at random and then gauged by one of
  their own ground states, so all +1 is a ground state of the patch; the
  proof is an enumeration of the patch's 2^k states.  A patch lies on a
  *site* (:mod:`instgen.planted.sites`): a Chimera unit ``cell``, a lattice
  ``tile`` (plaquette or unit cube, as in Perera et al. 2020 / Hamze et al.
  2018), a small ``clique``, or a ``ball`` of the spins nearest a centre.

A cap R on the accumulated |J| of every edge (the coupling range) makes the
construction range-limited (King et al., arXiv:1502.02098): a term that would
push an edge past R is not added.

>>> inst = plant_terms("chimera:2", density=0.3, seed=1, kinds={"loop": 1, "cell": 1}, cap=3)
>>> verify(inst)["bound"] == inst.energy(inst.planted)
True
"""

from __future__ import annotations

import dataclasses
import functools

import numpy as np

from ..errors import CertificationError, FormatError, InputError, ResourceError
from ..couplings import MAX_MAGNITUDE
from ..seeds import as_generator
from . import PlantedFamily, construction_of, planted_gauge_couplings
from .loops import MAX_LOOPS, Loop, LoopGraph, TermArrays, check_loop, fit_loop, fits, random_loop
from .sites import SHAPES, Sites, applicable_shapes, check_shapes
from .tiles import ground_state_ok

#: Largest patch, in spins (its proof enumerates 2^k states).
MAX_PATCH_SPINS = 16
KINDS = ("loop",) + SHAPES
_TOL = 1e-9


@dataclasses.dataclass(frozen=True, eq=False)
class Patch(TermArrays):
    """A small frustrated term in the planted gauge.

    ``edges`` are edge indices of the graph, ``values`` their couplings with
    all +1 among the patch's ground states; ``spins`` are the spins the edges
    touch, ``shape`` names the kind of site it lies on.

    >>> p = Patch("tile", (0, 1, 2, 3), (0, 1, 2, 3), (1.0, -1.0, -1.0, -1.0))
    >>> p.bound, p.values().tolist()
    (-2.0, [1.0, -1.0, -1.0, -1.0])
    """

    shape: str
    spins: tuple
    edges: tuple
    vals: tuple

    def __post_init__(self):
        object.__setattr__(self, "spins", tuple(int(x) for x in self.spins))
        object.__setattr__(self, "edges", tuple(int(x) for x in self.edges))
        object.__setattr__(self, "vals", tuple(float(x) for x in self.vals))

    @property
    def bound(self) -> float:
        """The patch's ground-state energy: its energy at all +1."""
        return float(sum(self.vals))

    def _couplings(self):
        return self.vals

    def to_list(self) -> list:
        """``[shape, spins, edges, values]``, JSON-friendly."""
        return [self.shape, list(self.spins), list(self.edges), list(self.vals)]

    @classmethod
    def from_list(cls, item) -> Patch:
        try:
            shape, spins, edges, vals = item
            if shape not in SHAPES or len(edges) != len(vals):
                raise ValueError
            return cls(shape, spins, edges, vals)
        except (TypeError, ValueError):
            raise FormatError(f"a patch must be [shape, spins, edges, values] with a shape in {SHAPES}, "
                              f"got {str(item)[:80]}") from None


# -------------------------------------------------------------------- patches
@functools.lru_cache(maxsize=32)
def patch_states(k: int) -> np.ndarray:
    """All 2^(k-1) states of k spins with spin 0 fixed to +1 (a global flip costs nothing); row 0 is all +1."""
    idx = np.arange(1 << (k - 1))[:, None]
    rest = 1 - 2 * ((idx >> np.arange(k - 1)) & 1)
    return np.concatenate([np.ones((idx.shape[0], 1), dtype=np.int64), rest], axis=1).astype(np.int8)


def local_pairs(spins, edges, topology_edges) -> np.ndarray:
    """(E, 2) positions in ``spins`` of the two ends of each edge."""
    pos = {v: k for k, v in enumerate(spins)}
    ends = np.asarray(topology_edges)[list(edges)]
    try:
        return np.array([[pos[int(a)], pos[int(b)]] for a, b in ends], dtype=np.int64).reshape(-1, 2)
    except KeyError:
        raise InputError("a patch edge has an end outside the patch's spins") from None


def draw_patch(shape: str, spins, edges, topology_edges, rng, weights=(1.0,), keep: float = 1.0,
               pairs=None) -> Patch:
    """A random patch on a site: random couplings gauged by one of their ground states.

    Each edge of the site gets ±w (w drawn from ``weights``, sign at random)
    with probability ``keep``, else 0; the patch's 2^k states are enumerated,
    one ground state g is chosen at random, and every coupling J_ab becomes
    g_a g_b J_ab, so all +1 is a ground state of the result.  ``pairs`` (the
    edges' ends as positions in ``spins``, see :func:`local_pairs`) may be
    given to save recomputing them.

    >>> p = draw_patch("tile", (0, 1, 2, 3), (0, 1, 2, 3), [[0, 1], [1, 2], [2, 3], [0, 3]], 1)
    >>> ground_state_ok([[0, 1], [1, 2], [2, 3], [0, 3]], p.values(), 4)
    True
    """
    rng = as_generator(rng)
    spins = tuple(spins)
    k = len(spins)
    if not 2 <= k <= MAX_PATCH_SPINS:
        raise InputError(f"a patch needs 2 to {MAX_PATCH_SPINS} spins, got {k}")
    pairs = local_pairs(spins, edges, topology_edges) if pairs is None else pairs
    w = np.asarray(weights, dtype=np.float64)
    vals = w[rng.integers(w.size, size=len(edges))] * (2 * rng.integers(0, 2, size=len(edges)) - 1)
    vals = vals * (rng.random(len(edges)) < keep)
    S = patch_states(k)
    E = (S[:, pairs[:, 0]] * S[:, pairs[:, 1]]) @ vals
    ground = np.flatnonzero(E <= E.min() + _TOL)
    g = S[ground[int(rng.integers(ground.size))]].astype(np.float64)
    vals = vals * g[pairs[:, 0]] * g[pairs[:, 1]] + 0.0
    return Patch(shape, spins, edges, vals)


def check_patch(patch: Patch, topology_edges) -> None:
    """CertificationError unless all +1 is a ground state of ``patch`` (by enumeration)."""
    k = len(patch.spins)
    if not 2 <= k <= MAX_PATCH_SPINS or len(set(patch.spins)) != k:
        raise CertificationError(f"a patch must have 2 to {MAX_PATCH_SPINS} distinct spins, got {k}")
    e = np.asarray(patch.edges, dtype=np.int64)
    if e.size == 0 or e.min() < 0 or e.max() >= len(topology_edges) or len(set(patch.edges)) != e.size:
        raise CertificationError("a patch refers to edges that are not in the graph, or to one edge twice")
    try:
        pairs = local_pairs(patch.spins, patch.edges, topology_edges)
    except InputError as exc:
        raise CertificationError(str(exc)) from None
    if not np.all(np.isfinite(patch.values())) or not ground_state_ok(pairs, patch.values(), k):
        raise CertificationError(f"a {patch.shape} patch does not have the planted state among its ground states")


def term_couplings(terms, m: int) -> np.ndarray:
    """Summed planted-gauge couplings of loops and patches on ``m`` edges."""
    if not terms:
        return np.zeros(m)
    idx = np.concatenate([t.index for t in terms])
    val = np.concatenate([t.values() for t in terms])
    if idx.size and (idx.min() < 0 or idx.max() >= m):
        raise InputError(f"a term refers to an edge outside 0..{m - 1}")
    return np.bincount(idx, weights=val, minlength=m)


def terms_bound(terms) -> float:
    """E0 = sum of the terms' minima (their values at the planted state)."""
    return float(sum(t.bound for t in terms))


# ------------------------------------------------------------------ the family
def parse_kinds(kinds) -> dict:
    """Term kinds and weights from ``"loop,cell"``, ``"loop:2,cell:1"`` or ``{"loop": 2, "cell": 1}``.

    InputError when a kind is unknown or a weight is not a number >= 0.

    >>> parse_kinds("loop,cell:2")
    {'loop': 1.0, 'cell': 2.0}
    """
    if isinstance(kinds, str):
        parsed = {}
        for item in (x.strip() for x in kinds.split(",")):
            name, _, weight = item.partition(":")
            if not name:
                continue
            try:
                parsed[name.strip()] = float(weight) if weight.strip() else 1.0
            except ValueError:
                raise InputError(f"a term kind's weight must be a number, got {item!r}") from None
        kinds = parsed
    if not isinstance(kinds, dict) or not kinds:
        raise InputError(f"kinds must name term kinds with weights, e.g. {{loop = 1, cell = 1}}; got {kinds!r}")
    bad = [k for k in kinds if k not in KINDS]
    if bad:
        raise InputError(f"unknown term kind {bad[0]!r}; choose from: {', '.join(KINDS)}")
    for k, v in kinds.items():
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not np.isfinite(v) or v < 0:
            raise InputError(f"the weight of term kind {k!r} must be a number >= 0, got {v!r}")
    if sum(kinds.values()) <= 0:
        raise InputError("at least one term kind needs a positive weight")
    return {k: float(v) for k, v in kinds.items() if v > 0}


def terms_instance(topology, loops, patches, gauge, cap=None, **construction):
    """An Instance of a term sum with planted state ``gauge`` (every graph edge kept)."""
    from ..instance import Instance

    J = term_couplings(list(loops) + list(patches), topology.m)
    if cap is not None and np.any(np.abs(J) > cap + _TOL):
        raise InputError(f"the terms accumulate |J| = {np.abs(J).max():g} on an edge, above the cap {cap:g}")
    g = np.asarray(gauge, dtype=np.int8)
    J = J * g[topology.edges[:, 0]] * g[topology.edges[:, 1]] + 0.0
    terms = list(loops) + list(patches)
    con = {"family": "terms", **construction, "cap": cap, "loop_count": len(loops), "patch_count": len(patches),
           "planted_energy": terms_bound(terms), "loops": [t.to_list() for t in loops],
           "patches": [t.to_list() for t in patches]}
    return Instance(edges=topology.edges, J=J, n=topology.n, labels=topology.labels, graph=topology.spec,
                    planted=g, metadata={"kind": "planted", "construction": con})


#: plant_terms stops when this many terms in a row found no room under the cap.
SATURATED = 3


def plant_terms(graph, density: float = 0.3, seed=None, *, kinds="loop,ball", cap: float | None = None,
                weights=(1.0,), min_length: int = 4, patch_size: int = 8, max_redraws: int = 200):
    """A random sum of ``round(density * n)`` terms of the given kinds, under a cap.

    Under a tight cap fewer may fit: planting stops once SATURATED terms in a row
    found no room, and ``metadata["construction"]`` records the counts placed.

    Parameters
    ----------
    graph : str or Topology
    density : float
        Terms per spin.
    seed : int, optional
    kinds : str or dict
        Term kinds and their weights: ``loop`` and the patch shapes ``cell``,
        ``tile``, ``clique``, ``ball`` (``"loop,cell"`` gives equal weights).
    cap : float, optional
        Largest |J| an edge may accumulate (range limit).
    weights : sequence of float
        Magnitudes a loop or a patch coupling draws from.
    min_length : int
        Shortest loop.
    patch_size : int
        Spins in a ``ball`` patch.
    max_redraws : int
        Tries per term to fit under the cap.

    Examples
    --------
    >>> inst = plant_terms("square:6", density=0.2, seed=2, kinds="tile")
    >>> inst.metadata["construction"]["patch_count"] > 0
    True
    """
    from ..instance import random_gauge
    from ..make import topology as _topology

    if not (isinstance(density, (int, float)) and np.isfinite(density) and density > 0):
        raise InputError(f"density must be a positive number of terms per spin, got {density!r}")
    w = np.asarray(weights, dtype=np.float64).reshape(-1)
    if w.size == 0 or not np.all(np.isfinite(w)) or np.any(w <= 0) or np.any(w > MAX_MAGNITUDE):
        raise InputError(f"weights must be positive numbers no larger than {MAX_MAGNITUDE:g}, "
                         f"got {weights!r}")
    if cap is not None and not (np.isfinite(cap) and cap >= w.min()):
        raise InputError(f"the cap must be at least the smallest weight ({w.min():g}), got {cap!r}")
    if not 2 <= int(patch_size) <= MAX_PATCH_SPINS:
        raise InputError(f"patch_size must lie between 2 and {MAX_PATCH_SPINS}, got {patch_size!r}")
    kinds = parse_kinds(kinds)
    topo = _topology(graph)
    if density * topo.n > MAX_LOOPS:
        raise ResourceError(f"density {density:g} on {topo.n:,} spins means {density * topo.n:.3g} terms; "
                            f"instgen plants at most {MAX_LOOPS:,} per instance")
    rng = as_generator(seed)
    sites = {k: Sites.of(topo, k, patch_size) for k in kinds if k != "loop"}
    lg = LoopGraph.of(topo) if "loop" in kinds else None
    names, p = list(kinds), np.array(list(kinds.values()))
    acc = np.zeros(topo.m)
    loops, patches = [], []
    missed = 0  # terms in a row that found no room: the cap is saturated, stop trying
    for _ in range(max(1, int(round(density * topo.n)))):
        if missed >= SATURATED:
            break
        kind = names[int(rng.choice(len(names), p=p / p.sum()))]
        for _attempt in range(max_redraws):
            if kind == "loop":
                term = fit_loop(acc, random_loop(lg, rng, min_length, weight=float(w[rng.integers(w.size)])),
                                cap, w, rng)
                if term is None:
                    continue
            else:
                spins, edges = sites[kind].pick(rng)
                term = draw_patch(kind, spins, edges, topo.edges, rng, w)
            if fits(acc, term, cap):
                break
        else:
            missed += 1
            continue
        missed = 0
        acc[term.index] += term.values()
        (loops if kind == "loop" else patches).append(term)
    gauge = random_gauge(topo.n, rng)
    return terms_instance(topo, loops, patches, gauge, cap=cap, density=float(density), kinds=kinds,
                          weights=w.tolist(), min_length=int(min_length), patch_size=int(patch_size),
                          seed=int(seed) if isinstance(seed, (int, np.integer)) else None)


def terms_of(instance) -> tuple[list[Loop], list[Patch]]:
    """The loops and patches stored in a term instance's metadata."""
    con = construction_of(instance, "terms")
    loops, patches = con.get("loops", []), con.get("patches", [])
    if not isinstance(loops, list) or not isinstance(patches, list):
        raise FormatError("the term construction must hold lists 'loops' and 'patches'")
    return [Loop.from_list(x) for x in loops], [Patch.from_list(x) for x in patches]


def verify(instance) -> dict:
    """Check a term instance's proof; details for a Certificate, or CertificationError.

    Every loop must be a simple cycle with one frustrated edge; every patch is
    enumerated to confirm the planted state is among its ground states; the
    terms must rebuild the couplings exactly (under the planted gauge), there
    must be no fields, and the planted energy must equal the sum of the terms'
    minima.
    """
    loops, patches = terms_of(instance)
    if instance.has_fields:
        raise CertificationError("the instance has fields, which the term construction does not account for")
    try:
        for loop in loops:
            check_loop(loop, instance.edges)
    except InputError as exc:
        raise CertificationError(f"stored loop is not valid: {exc}") from None
    for patch in patches:
        check_patch(patch, instance.edges)
    acc = term_couplings(loops + patches, instance.m)
    tol = _TOL * max(1.0, instance.scale)
    if not np.allclose(acc, planted_gauge_couplings(instance), rtol=0, atol=tol):
        raise CertificationError("the stored terms do not rebuild the couplings")
    bound = terms_bound(loops + patches)
    energy = instance.energy(instance.planted)
    if abs(energy - bound) > tol * max(1, instance.m):
        raise CertificationError(f"the planted state's energy {energy:g} differs from the terms' bound {bound:g}")
    return {
        "family": "terms", "loops": len(loops), "patches": len(patches), "bound": bound,
        "proof": ("the couplings are a sum of frustrated loops (each broken at least once by every state, "
                  "minimum -w (L - 2)) and small patches (each enumerated: the planted state is among its "
                  "ground states), so E(s) >= sum of the terms' minima = E(planted)"),
    }


def rules(instance):
    """The coupling rules of a term construction: its weights, capped at its cap."""
    from ..couplings import CouplingRules

    construction = instance.metadata["construction"]
    return CouplingRules.of_weights(construction.get("weights") or [1.0], construction.get("cap"))


FAMILY = PlantedFamily("terms", plant_terms, verify,
                       "sums of frustrated loops and small frustrated patches (cells, tiles, cliques, balls), "
                       "each with the planted state as a ground state; density = terms per spin", rules)
