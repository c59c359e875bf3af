"""Frustrated-loop planting (Hen et al., PRA 92, 042325 (2015)).

A loop is a simple cycle of the graph.  In the planted gauge (planted state all
+1) a loop of weight w puts -w (ferromagnetic) on every edge but one, and +w on
that one *frustrated* edge.  Every state breaks an odd number of a loop's
edges, so a loop's energy is at least -w (L - 2), which the all +1 state
reaches.  The instance is the sum of its loops, hence

    E(s) >= sum_j -w_j (L_j - 2) = E(planted)

for every state s: the planted state is a ground state and E0 is a proof.  The
final gauge hides it.  A cap R on the accumulated |J| of each edge gives the
range-limited variant (a loop that would break the cap is drawn again).

The API is built for repeated, cheap use by the breeding engine::

    graph = LoopGraph.of(topology)                # once per run
    loops = LoopSet.of(loops_of(inst), graph.m, cap=3)
    loop = random_loop(graph, rng, min_length=6)  # a new loop
    loops.add(loop)                               # False (and unchanged) if it breaks the cap
    loops.replace(k, loop); loops.remove(k)       # O(L) each, cap kept
    J = loops.couplings(gauge=g, edges=graph.edges)
    inst = loop_instance(topology, loops.loops, g, cap=3)

:func:`loop_couplings` does the same from a plain list, and :func:`loops_of`
recovers the loop list of a planted instance.
"""

from __future__ import annotations

import dataclasses
import functools

import numba as nb
import numpy as np

from ..errors import CertificationError, FormatError, InputError, ResourceError
from ..couplings import MAX_MAGNITUDE
from ..seeds import as_generator
from . import PlantedFamily, construction_of

_TOL = 1e-9


class TermArrays:
    """What loops and patches share: their couplings and edge indices as read-only arrays, built once.

    A term defines ``edges`` and ``_couplings()`` (the values on ``edges`` in the planted gauge).
    """

    def values(self) -> np.ndarray:
        """Couplings of ``edges`` in the planted gauge (read-only)."""
        return self._values

    @functools.cached_property
    def _values(self) -> np.ndarray:
        v = np.asarray(self._couplings(), dtype=np.float64)
        v.setflags(write=False)
        return v

    @functools.cached_property
    def index(self) -> np.ndarray:
        """``edges`` as a read-only int64 array, for indexing coupling arrays."""
        idx = np.asarray(self.edges, dtype=np.int64)
        idx.setflags(write=False)
        return idx


@dataclasses.dataclass(frozen=True, eq=False)
class Loop(TermArrays):
    """One frustrated loop, in the planted gauge.

    ``spins[k]`` and ``spins[(k + 1) % L]`` are joined by edge ``edges[k]`` (an
    index into the topology's edge array); ``frustrated`` is the position in
    ``edges`` of the one antiferromagnetic edge; ``weight`` is w > 0.

    >>> loop = Loop(spins=(0, 1, 2), edges=(0, 2, 1), frustrated=1, weight=1.0)
    >>> loop.length, loop.bound, loop.values().tolist()
    (3, -1.0, [-1.0, 1.0, -1.0])
    """

    spins: tuple
    edges: tuple
    frustrated: int
    weight: float = 1.0

    def __post_init__(self):
        object.__setattr__(self, "spins", tuple(int(x) for x in self.spins))
        object.__setattr__(self, "edges", tuple(int(x) for x in self.edges))
        object.__setattr__(self, "frustrated", int(self.frustrated))
        object.__setattr__(self, "weight", float(self.weight))

    @property
    def length(self) -> int:
        return len(self.spins)

    @property
    def bound(self) -> float:
        """The loop's ground-state energy, -w (L - 2)."""
        return -self.weight * (self.length - 2)

    def _couplings(self) -> np.ndarray:
        """-w, and +w on the frustrated edge."""
        v = np.full(self.length, -self.weight)
        v[self.frustrated] = self.weight
        return v

    def to_list(self) -> list:
        """``[spins, edges, frustrated, weight]``, JSON-friendly."""
        return [list(self.spins), list(self.edges), self.frustrated, self.weight]

    @classmethod
    def from_list(cls, item) -> Loop:
        try:
            spins, edges, frustrated, weight = item
            return cls(spins, edges, frustrated, weight)
        except (TypeError, ValueError):
            raise FormatError(f"a loop must be [spins, edges, frustrated, weight], got {str(item)[:80]}") from None


class LoopSet:
    """A mutable set of loops with its accumulated planted-gauge couplings and the cap kept.

    Adding, removing and replacing a loop cost O(L); a change that would push
    any |J| above ``cap`` is refused (the set is left unchanged).

    >>> sq = Loop((0, 1, 2, 3), (0, 2, 3, 1), frustrated=0)
    >>> ls = LoopSet.of([sq], m=4, cap=1)
    >>> ls.add(sq), len(ls), ls.bound
    (False, 1, -2.0)
    """

    def __init__(self, m: int, cap: float | None = None):
        self.m, self.cap = int(m), cap
        self.loops: list[Loop] = []
        self.acc = np.zeros(self.m)

    @classmethod
    def of(cls, loops, m: int, cap: float | None = None) -> LoopSet:
        """A set holding ``loops``; InputError if together they break the cap."""
        out = cls(m, cap)
        out.acc = loop_couplings(loops, m, cap=cap)
        out.loops = list(loops)
        return out

    def __len__(self) -> int:
        return len(self.loops)

    @property
    def bound(self) -> float:
        """The planted energy, -sum w (L - 2)."""
        return planted_bound(self.loops)

    def fits(self, loop: Loop | None, without: int | None = None) -> bool:
        """Would the cap hold with ``loop`` added (and loop number ``without`` taken out)?

        Taking a loop out can break the cap too: its couplings may have offset
        another loop's on a shared edge, so the old loop's edges are checked as well.
        """
        if self.cap is None:
            return True
        if without is None:
            return fits(self.acc, loop, self.cap)
        acc = self.acc.copy()
        old = self.loops[without]
        acc[old.index] -= old.values()
        if np.any(np.abs(acc[old.index]) > self.cap + _TOL):
            return False
        return loop is None or fits(acc, loop, self.cap)

    def add(self, loop: Loop) -> bool:
        if not self.fits(loop):
            return False
        self.acc[loop.index] += loop.values()
        self.loops.append(loop)
        return True

    def remove(self, k: int) -> Loop | None:
        """Take loop ``k`` out and return it; None (and no change) if that would break the cap."""
        if not self.fits(None, without=k):
            return None
        loop = self.loops.pop(k)
        self.acc[loop.index] -= loop.values()
        return loop

    def replace(self, k: int, loop: Loop) -> bool:
        if not self.fits(loop, without=k):
            return False
        old = self.loops[k]
        self.acc[old.index] -= old.values()
        self.acc[loop.index] += loop.values()
        self.loops[k] = loop
        return True

    def couplings(self, gauge=None, edges=None) -> np.ndarray:
        """J of the set, gauged like :func:`loop_couplings`."""
        if gauge is None:
            return self.acc.copy()
        if edges is None:
            raise InputError("LoopSet.couplings needs the edge array to apply a gauge")
        g = np.asarray(gauge, dtype=np.float64)
        e = np.asarray(edges, dtype=np.int64).reshape(-1, 2)
        return self.acc * g[e[:, 0]] * g[e[:, 1]]

    def copy(self) -> LoopSet:
        out = LoopSet(self.m, self.cap)
        out.loops, out.acc = list(self.loops), self.acc.copy()
        return out


@dataclasses.dataclass(frozen=True, eq=False)
class LoopGraph:
    """A graph prepared for random walks: CSR neighbours with the edge index of each step."""

    n: int
    edges: np.ndarray
    indptr: np.ndarray
    neighbours: np.ndarray
    edge_ids: np.ndarray
    reverse: np.ndarray

    @property
    def m(self) -> int:
        return int(self.edges.shape[0])

    @functools.cached_property
    def starts(self) -> np.ndarray:
        """Spins with at least two neighbours (where a walk can start)."""
        return np.flatnonzero(np.diff(self.indptr) >= 2).astype(np.int64)

    @classmethod
    def of(cls, graph) -> LoopGraph:
        """From a LoopGraph, Topology, Instance, spec string, or ``(n, edges)`` pair.

        >>> LoopGraph.of("chimera:1").m
        16
        """
        if isinstance(graph, LoopGraph):
            return graph
        if isinstance(graph, tuple) and len(graph) == 2:
            n, edges = int(graph[0]), np.asarray(graph[1], dtype=np.int32).reshape(-1, 2)
        else:
            if isinstance(graph, str):
                from ..make import topology

                graph = topology(graph)
            n, edges = int(graph.n), np.asarray(graph.edges, dtype=np.int32)
        rows = np.concatenate([edges[:, 0], edges[:, 1]])
        cols = np.concatenate([edges[:, 1], edges[:, 0]])
        ids = np.concatenate([np.arange(len(edges)), np.arange(len(edges))])
        order = np.lexsort((cols, rows))
        indptr = np.zeros(n + 1, dtype=np.int64)
        np.add.at(indptr, rows + 1, 1)
        rows, cols, ids = rows[order], cols[order], ids[order]
        # reverse[k]: the slot of the same edge seen from the other end
        half = np.argsort(ids * 2 + (rows > cols), kind="stable")
        reverse = np.empty(len(ids), dtype=np.int64)
        reverse[half[0::2]] = half[1::2]
        reverse[half[1::2]] = half[0::2]
        return cls(n, edges, np.cumsum(indptr), cols.astype(np.int64), ids.astype(np.int64), reverse)


def random_loop(graph, rng=None, min_length: int = 4, max_length: int | None = None,
                weight: float = 1.0, max_steps: int | None = None, start: int | None = None) -> Loop:
    """A random simple cycle from a loop-erased, non-backtracking random walk.

    The walk starts at a random spin (or ``start``) and never steps straight
    back along the edge it came in on.  When it reaches a spin already on its
    path, the piece between the two visits is a cycle: it is kept when its
    length lies in [min_length, max_length], otherwise it is erased from the
    path and the walk goes on; the part walked before the cycle is dropped.
    The frustrated edge is chosen uniformly on the cycle.

    Parameters
    ----------
    graph : LoopGraph, Topology, Instance or spec
        Pass a :class:`LoopGraph` when calling repeatedly.
    rng : seed or Generator
    min_length, max_length : int
        Allowed cycle lengths (max_length None: no limit).
    weight : float
        The loop's weight w > 0.
    max_steps : int, optional
        Give up (InputError) after this many steps (default 50 n + 1000).

    Examples
    --------
    >>> loop = random_loop("square:4", rng=3, min_length=4)
    >>> loop.length >= 4, float(loop.values().sum()) == -(loop.length - 2)
    (True, True)
    """
    g = LoopGraph.of(graph)
    rng = as_generator(rng)
    if min_length < 3:
        raise InputError(f"min_length must be at least 3 (a loop needs three spins), got {min_length}")
    if max_length is not None and max_length < min_length:
        raise InputError(f"max_length {max_length} is below min_length {min_length}")
    if not (np.isfinite(weight) and weight > 0):
        raise InputError(f"a loop weight must be a positive number, got {weight}")
    if start is None:
        starts = g.starts
        if starts.size == 0:
            raise InputError("the graph has no cycles (every spin has fewer than two neighbours)")
    else:
        starts = np.array([int(start)], dtype=np.int64)
    budget = max_steps if max_steps is not None else 50 * g.n + 1000
    spins, slots = _walk(g.indptr, g.neighbours, g.reverse, starts, int(min_length),
                         -1 if max_length is None else int(max_length), int(budget),
                         int(rng.integers(1, 2 ** 63)))
    if spins.size == 0:
        raise InputError(f"no cycle of length {min_length}..{max_length or 'any'} found in {budget} steps of a "
                         "random walk; the graph may have none that long")
    return Loop(spins.tolist(), g.edge_ids[slots].tolist(), int(rng.integers(spins.size)), weight)


@nb.njit(cache=True)
def _walk(indptr, nbr, rev, starts, min_length, max_length, budget, seed):
    """The loop-erased, non-backtracking walk of :func:`random_loop`, compiled.

    Returns the cycle's spins and the CSR slots of its edges (the edge from
    spins[k] to spins[k + 1], the last one closing the cycle), or two empty
    arrays when ``budget`` steps found none.  Random numbers: a 64-bit
    xorshift-multiply generator seeded from ``seed``.
    """
    n = indptr.shape[0] - 1
    pos = np.full(n, -1, np.int64)
    path = np.empty(n + 1, np.int64)
    slots = np.empty(n + 1, np.int64)
    x = np.uint64(seed) | np.uint64(1)
    steps = 0
    while steps < budget:
        x ^= x >> np.uint64(12)
        x ^= x << np.uint64(25)
        x ^= x >> np.uint64(27)
        v0 = starts[np.int64((x * np.uint64(0x2545F4914F6CDD1D)) >> np.uint64(11)) % starts.shape[0]]
        size = 1
        path[0] = v0
        pos[v0] = 0
        while steps < budget:
            steps += 1
            x ^= x >> np.uint64(12)
            x ^= x << np.uint64(25)
            x ^= x >> np.uint64(27)
            r = np.float64((x * np.uint64(0x2545F4914F6CDD1D)) >> np.uint64(11)) * (2.0 ** -53)
            v = path[size - 1]
            lo, hi = indptr[v], indptr[v + 1]
            back = rev[slots[size - 2]] if size > 1 else -1
            choices = hi - lo - (1 if back >= 0 else 0)
            if choices <= 0:
                break  # dead end: start again
            k = lo + np.int64(r * choices)
            if 0 <= back <= k:
                k += 1
            u = nbr[k]
            p = pos[u]
            if p >= 0:
                length = size - p
                if length >= min_length and (max_length < 0 or length <= max_length):
                    out_spins = path[p:size].copy()
                    out_slots = np.empty(length, np.int64)
                    out_slots[:length - 1] = slots[p:size - 1]
                    out_slots[length - 1] = k
                    for i in range(size):
                        pos[path[i]] = -1
                    return out_spins, out_slots
                for i in range(p + 1, size):
                    pos[path[i]] = -1
                size = p + 1
            else:
                pos[u] = size
                path[size] = u
                slots[size - 1] = k
                size += 1
        for i in range(size):
            pos[path[i]] = -1
    return np.empty(0, np.int64), np.empty(0, np.int64)


def planted_bound(loops) -> float:
    """E0 = -sum_j w_j (L_j - 2) (Hen et al. 2015): the planted state's energy.

    >>> planted_bound([Loop((0, 1, 2, 3), (0, 1, 2, 3), 0)])
    -2.0
    """
    return float(sum(loop.bound for loop in loops))


def accumulate(loops, m: int) -> np.ndarray:
    """The summed planted-gauge couplings of ``loops`` on ``m`` edges (no cap, no gauge)."""
    if not loops:
        return np.zeros(m)
    idx = np.concatenate([loop.index for loop in loops])
    val = np.concatenate([loop.values() for loop in loops])
    if idx.size and (idx.min() < 0 or idx.max() >= m):
        raise InputError(f"a loop refers to an edge outside 0..{m - 1}")
    return np.bincount(idx, weights=val, minlength=m)


def fits(accumulated: np.ndarray, loop: Loop, cap: float | None) -> bool:
    """True when adding ``loop`` to ``accumulated`` keeps every |J| <= cap."""
    if cap is None:
        return True
    after = accumulated[loop.index] + loop.values()
    return bool(np.all(np.abs(after) <= cap + _TOL))


def fit_loop(accumulated: np.ndarray, loop: Loop, cap: float | None, weights, rng) -> Loop | None:
    """``loop`` if it fits under the cap; else the same cycle re-dressed to fit, or None.

    Near saturation most drawn cycles cross an edge already at the cap.  Rather
    than drawing a new cycle, this keeps it and draws the frustrated edge
    uniformly from the positions where some weight in ``weights`` fits (an edge
    at -cap can still take the frustrated +w), then the weight uniformly from
    those that fit there: with the frustrated edge at f, every |J| stays within
    the cap exactly when w <= cap - acc_f and w <= cap + acc_e on the other
    edges.  The planted state stays a ground state whatever the choice.

    >>> sq = Loop((0, 1, 2, 3), (0, 1, 2, 3), frustrated=0, weight=1.0)
    >>> out = fit_loop(np.array([0.0, -1.0, 0.0, 0.0]), sq, 1.0, [0.5, 1.0], np.random.default_rng(0))
    >>> out.frustrated, out.weight   # the edge at -1 can only be the frustrated one
    (1, 1.0)
    >>> fit_loop(np.array([-1.0, -1.0, 0.0, 0.0]), sq, 1.0, [0.5], np.random.default_rng(0)) is None
    True
    """
    if cap is None or fits(accumulated, loop, cap):
        return loop
    acc = accumulated[loop.index]
    ferro, frustrated = cap + acc, cap - acc  # room for -w, and for +w, on each edge
    order = np.argsort(ferro, kind="stable")
    others = np.where(np.arange(loop.length) == order[0], ferro[order[1]], ferro[order[0]])
    bound = np.minimum(frustrated, others)  # largest w with the frustrated edge at each position
    w = np.asarray(weights, dtype=np.float64).reshape(-1)
    places = np.flatnonzero(bound >= w.min() - _TOL)
    if places.size == 0:
        return None
    f = int(places[rng.integers(places.size)])
    ok = w[w <= bound[f] + _TOL]
    return dataclasses.replace(loop, frustrated=f, weight=float(ok[rng.integers(ok.size)]))


def loop_couplings(loops, m: int, cap: float | None = None, gauge=None, edges=None) -> np.ndarray:
    """Couplings J (m,) of a loop set: accumulated in the planted gauge, then gauged.

    Parameters
    ----------
    loops : sequence of Loop
    m : int
        Number of edges of the topology.
    cap : float, optional
        Largest |J| allowed on an edge; a loop set that breaks it is an InputError.
    gauge : (n,) ±1 array, optional
        The planted state; J_ij is multiplied by g_i g_j (needs ``edges``).
    edges : (m, 2) array, optional

    Examples
    --------
    >>> tri = Loop((0, 1, 2), (0, 2, 1), frustrated=0)
    >>> loop_couplings([tri], 3).tolist()
    [1.0, -1.0, -1.0]
    >>> loop_couplings([tri], 3, gauge=[1, -1, 1], edges=[[0, 1], [0, 2], [1, 2]]).tolist()
    [-1.0, -1.0, 1.0]
    """
    J = accumulate(loops, m)
    if cap is not None and np.any(np.abs(J) > cap + _TOL):
        worst = float(np.abs(J).max())
        raise InputError(f"the loops accumulate |J| = {worst:g} on an edge, above the cap {cap:g}")
    if gauge is not None:
        if edges is None:
            raise InputError("loop_couplings needs the edge array to apply a gauge")
        g = np.asarray(gauge, dtype=np.float64)
        e = np.asarray(edges, dtype=np.int64).reshape(-1, 2)
        J = J * g[e[:, 0]] * g[e[:, 1]]
    return J


def check_loop(loop: Loop, edges: np.ndarray) -> None:
    """Raise InputError unless ``loop`` is a simple cycle of the graph with a valid frustrated edge."""
    L = loop.length
    if L < 3 or len(loop.edges) != L:
        raise InputError(f"a loop needs at least 3 spins and one edge per spin, got {L} and {len(loop.edges)}")
    if len(set(loop.spins)) != L or len(set(loop.edges)) != L:
        raise InputError("a loop visits a spin or an edge twice (not a simple cycle)")
    if not 0 <= loop.frustrated < L:
        raise InputError(f"the frustrated edge position {loop.frustrated} is outside 0..{L - 1}")
    if not (np.isfinite(loop.weight) and loop.weight > 0):
        raise InputError(f"a loop weight must be positive, got {loop.weight}")
    e = np.asarray(loop.edges)
    if e.min() < 0 or e.max() >= len(edges):
        raise InputError("a loop refers to an edge that is not in the graph")
    s = np.asarray(loop.spins)
    ends = np.sort(np.stack([s, np.roll(s, -1)], axis=1), axis=1)
    if not np.array_equal(ends, np.asarray(edges)[e]):
        raise InputError("a loop's edges do not join its consecutive spins")


def loop_instance(graph, loops, gauge, cap: float | None = None, **construction):
    """An Instance of a loop set on ``graph`` with planted state ``gauge``.

    Every edge of the graph is kept (edges no loop uses get J = 0), so loop
    edge indices stay valid.  ``construction`` items are added to
    ``metadata["construction"]`` beside the family, the loop list and E0.

    >>> g = LoopGraph.of("square:3")
    >>> inst = loop_instance("square:3", [random_loop(g, 1)], gauge=[1] * 9)
    >>> inst.planted_energy == inst.metadata["construction"]["planted_energy"]
    True
    """
    from ..instance import Instance
    from ..make import topology

    topo = topology(graph) if isinstance(graph, str) else graph
    g = np.asarray(gauge, dtype=np.int8)
    J = loop_couplings(loops, topo.m, cap=cap, gauge=g, edges=topo.edges)
    con = {"family": "loops", **construction, "cap": cap, "loop_count": len(loops),
           "planted_energy": planted_bound(loops), "loops": [loop.to_list() for loop in loops]}
    return Instance(edges=topo.edges, J=J, n=topo.n, labels=getattr(topo, "labels", None),
                    graph=getattr(topo, "spec", getattr(topo, "graph", "")), planted=g,
                    metadata={"kind": "planted", "construction": con})


#: Most loops one instance may hold (refused up front beyond it: hours of random walks).
MAX_LOOPS = 10_000_000


def plant_loops(graph, density: float = 0.3, seed=None, *, min_length: int = 4, max_length: int | None = None,
                cap: float | None = None, weights=(1.0,), max_redraws: int = 200):
    """A frustrated-loop instance with ``round(density * n)`` loops.

    Parameters
    ----------
    graph : str or Topology
    density : float
        Loops per spin (> 0).
    seed : int, optional
    min_length, max_length : int
        Allowed loop lengths (see :func:`random_loop`).
    cap : float, optional
        Range limit R: no edge may accumulate |J| > R.  A loop that would break
        it is drawn again, up to ``max_redraws`` times per loop.
    weights : sequence of float
        Loop weights, each loop drawing one uniformly (default: all 1).

    Examples
    --------
    >>> inst = plant_loops("chimera:2", density=0.3, seed=4, cap=2)
    >>> loops = loops_of(inst)
    >>> inst.energy(inst.planted) == planted_bound(loops), inst.scale <= 2
    (True, True)
    """
    from ..instance import random_gauge
    from ..make import topology

    if not (isinstance(density, (int, float)) and np.isfinite(density) and density > 0):
        raise InputError(f"loop density must be a positive number of loops per spin, got {density!r}")
    w = np.asarray(weights, dtype=np.float64).reshape(-1)
    if w.size == 0 or not np.all(np.isfinite(w)) or np.any(w <= 0) or np.any(w > MAX_MAGNITUDE):
        raise InputError(f"loop weights must be positive numbers no larger than {MAX_MAGNITUDE:g}, "
                         f"got {weights!r}")
    if cap is not None and not (np.isfinite(cap) and cap >= w.min()):
        raise InputError(f"the cap must be at least the smallest loop weight ({w.min():g}), got {cap!r}")
    topo = topology(graph)
    lg = LoopGraph.of(topo)
    rng = as_generator(seed)
    if density * topo.n > MAX_LOOPS:
        raise ResourceError(f"density {density:g} on {topo.n:,} spins means {density * topo.n:.3g} loops; "
                            f"instgen plants at most {MAX_LOOPS:,} loops per instance")
    count = max(1, int(round(density * topo.n)))
    loops = LoopSet(topo.m, cap)
    for _ in range(count):
        for _attempt in range(max_redraws):
            loop = fit_loop(loops.acc, random_loop(lg, rng, min_length, max_length,
                                                     weight=float(w[rng.integers(w.size)])), cap, w, rng)
            if loop is not None and loops.add(loop):
                break
        else:
            raise InputError(f"only {len(loops)} of {count} loops fit under the cap {cap:g} on {topo.spec}; "
                             "lower the density, raise the cap, or shorten the loops")
    gauge = random_gauge(topo.n, rng)
    return loop_instance(topo, loops.loops, gauge, cap=cap, density=float(density), min_length=int(min_length),
                         max_length=max_length, weights=w.tolist(),
                         seed=int(seed) if isinstance(seed, (int, np.integer)) else None)


def loops_of(instance) -> list[Loop]:
    """The loop list stored in a loop-planted instance's metadata."""
    con = construction_of(instance, "loops")
    items = con.get("loops")
    if not isinstance(items, list):
        raise FormatError("the loop construction has no 'loops' list")
    return [Loop.from_list(item) for item in items]


def verify(instance) -> dict:
    """Check a loop instance's proof; details for a Certificate, or CertificationError.

    Checks that every stored loop is a simple cycle of the instance's graph, that
    the loops rebuild the couplings exactly (under the planted gauge), that there
    are no fields, and that the planted energy equals -sum w (L - 2).
    """
    loops = loops_of(instance)
    try:
        for loop in loops:
            check_loop(loop, instance.edges)
    except InputError as exc:
        raise CertificationError(f"stored loop is not valid: {exc}") from None
    if instance.has_fields:
        raise CertificationError("the instance has fields, which the loop construction does not account for")
    J = loop_couplings(loops, instance.m, gauge=instance.planted, edges=instance.edges)
    tol = _TOL * max(1.0, instance.scale)
    if not np.allclose(J, instance.J, rtol=0, atol=tol):
        bad = int(np.sum(~np.isclose(J, instance.J, rtol=0, atol=tol)))
        raise CertificationError(f"the stored loops do not rebuild the couplings ({bad} edges differ)")
    bound = planted_bound(loops)
    energy = instance.energy(instance.planted)
    if abs(energy - bound) > tol * max(1, instance.m):
        raise CertificationError(f"the planted state's energy {energy:g} differs from the loop bound {bound:g}")
    return {
        "family": "loops", "loops": len(loops), "bound": bound,
        "proof": ("the couplings are a sum of frustrated loops, each with exactly one antiferromagnetic edge "
                  "in the planted gauge; every state breaks at least one edge of every loop, so "
                  "E(s) >= -sum w (L - 2), which the planted state reaches"),
    }


def rules(instance):
    """The coupling rules of a loop construction: its loop weights, capped at its cap."""
    from ..couplings import CouplingRules

    construction = instance.metadata["construction"]
    return CouplingRules.of_weights(construction.get("weights") or [1.0], construction.get("cap"))


FAMILY = PlantedFamily("loops", plant_loops, verify,
                       "frustrated loops on any graph; density = loops per spin (Hen et al. 2015)", rules)
