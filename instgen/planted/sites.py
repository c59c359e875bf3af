"""Where small planted patches may lie on a graph: cells, tiles, cliques and balls.

A *site* is a set of a few spins and the edges of the graph among them.  The
shapes:

``cell``    a unit cell of a Chimera graph (K_{T,T}; spins grouped by their
            Chimera label, so fault-masked graphs keep their cells);
``tile``    a plaquette of a square lattice or a unit cube of a cubic one
            (open or periodic), as in tile planting;
``clique``  a triangle or a 4-clique, on graphs that have them;
``ball``    the ``size`` spins nearest a centre spin, breadth first with ties
            broken at random; on any graph, grown on demand.

>>> from instgen.make import topology
>>> cells = Sites.of(topology("chimera:2"), "cell")
>>> len(cells.spins), len(cells.edges[0])
(4, 16)
"""

from __future__ import annotations

import dataclasses
import itertools

import numpy as np

from ..errors import InputError

SHAPES = ("cell", "tile", "clique", "ball")


@dataclasses.dataclass(frozen=True, eq=False)
class Sites:
    """The sites of one shape on one graph.

    ``spins[k]`` and ``edges[k]`` are site k's spins (sorted) and the edge
    indices among them; ``at[v]`` lists the sites holding spin v.  Balls have
    no fixed list: :meth:`ball` grows one of ``size`` spins on demand.
    """

    shape: str
    spins: list
    edges: list
    at: list
    size: int
    n: int
    adjacency: list = dataclasses.field(repr=False)
    edge_index: dict = dataclasses.field(repr=False)

    @classmethod
    def of(cls, topology, shape: str, size: int = 8) -> Sites:
        """The sites of ``shape`` on ``topology`` (InputError when the graph has none)."""
        if shape not in SHAPES:
            raise InputError(f"unknown patch shape {shape!r}; choose from: {', '.join(SHAPES)}")
        eidx = {(int(i), int(j)): k for k, (i, j) in enumerate(topology.edges.tolist())}
        adj = [[] for _ in range(topology.n)]
        for i, j in topology.edges.tolist():
            adj[i].append(j)
            adj[j].append(i)
        spins, edges = [], []
        for g in (_GROUPS[shape](topology) if shape != "ball" else []):
            g = tuple(sorted(set(int(v) for v in g)))
            ids = tuple(eidx[p] for p in itertools.combinations(g, 2) if p in eidx)
            if len(g) >= 2 and ids:
                spins.append(g)
                edges.append(ids)
        if shape != "ball" and not spins:
            raise InputError(f"the graph {topology.spec} has no {shape} sites; "
                             f"patch shapes that fit it: {', '.join(applicable_shapes(topology))}")
        at = [[] for _ in range(topology.n)]
        for k, g in enumerate(spins):
            for v in g:
                at[v].append(k)
        return cls(shape, spins, edges, at, int(size), int(topology.n), adj, eidx)

    def pick(self, rng, near: int | None = None) -> tuple[tuple, tuple]:
        """A random site: (spins, edge indices); one holding spin ``near`` when given and there is one."""
        if self.shape == "ball":
            return self.ball(int(rng.integers(self.n)) if near is None else int(near), rng)
        choices = self.at[near] if near is not None and self.at[near] else range(len(self.spins))
        k = int(choices[int(rng.integers(len(choices)))])
        return self.spins[k], self.edges[k]

    def ball(self, centre: int, rng) -> tuple[tuple, tuple]:
        """About ``size`` spins nearest ``centre`` (ties broken at random) and the edges among them."""
        seen, frontier, inside = [centre], [centre], {centre}
        while frontier and len(seen) < self.size:
            nxt = []
            for v in frontier:
                for u in rng.permutation(self.adjacency[v]).tolist():
                    if u not in inside and len(seen) < self.size:
                        inside.add(u)
                        seen.append(u)
                        nxt.append(u)
            frontier = nxt
        g = tuple(sorted(seen))
        return g, tuple(self.edge_index[p] for p in itertools.combinations(g, 2) if p in self.edge_index)


def _cells(topology):
    if topology.family != "chimera":
        return []
    args = topology.params.get("args", [])
    t = int(args[2]) if len(args) > 2 else 4
    groups: dict = {}
    for k, label in enumerate(topology.labels):
        groups.setdefault(int(label) // (2 * t), []).append(k)
    return list(groups.values())


def _tiles(topology):
    if topology.family not in ("square", "cubic") or topology.coords is None:
        return []
    coords = np.asarray(topology.coords, dtype=np.int64)
    shape = coords.max(axis=0) + 1
    periodic = "periodic" in topology.params.get("args", [])
    index = {tuple(c): k for k, c in enumerate(coords.tolist())}
    corners = list(itertools.product((0, 1), repeat=coords.shape[1]))
    out = []
    for c in coords.tolist():
        pts = [tuple((c[d] + o[d]) % shape[d] if periodic else c[d] + o[d] for d in range(len(c))) for o in corners]
        if all(p in index for p in pts):
            out.append([index[p] for p in pts])
    return out


def _cliques(topology, limit: int = 200_000):
    import networkx as nx

    out = []
    for c in nx.enumerate_all_cliques(topology.index_graph()):
        if len(c) > 4:
            break
        if len(c) >= 3:
            out.append(c)
            if len(out) >= limit:
                break
    return out


_GROUPS = {"cell": _cells, "tile": _tiles, "clique": _cliques}


def check_shapes(topology, kinds) -> None:
    """InputError naming the shapes that fit, when a requested patch shape has no site on ``topology``."""
    for shape in kinds:
        if shape in _GROUPS and not _GROUPS[shape](topology):
            raise InputError(f"the graph {topology.spec} has no {shape} sites; patch shapes that fit it: "
                             f"{', '.join(applicable_shapes(topology))}")


def applicable_shapes(topology) -> list[str]:
    """The patch shapes that have sites on ``topology`` (``ball`` always does).

    >>> from instgen.make import topology
    >>> applicable_shapes(topology("square:4"))
    ['tile', 'ball']
    """
    return [s for s in SHAPES if s == "ball" or _GROUPS[s](topology)]
