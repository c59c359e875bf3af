"""Genomes: what the evolutionary search changes.

A genome is plain data (numpy arrays and numbers): it turns into couplings
``(J, h)`` and, for planted genomes, a planted state whose energy is known.
Nothing here is a DEAP class, so genomes cross process boundaries and go into
checkpoints as JSON.

* :class:`FreeGenome`: every coupling and field is free (within the rules).
* :class:`LoopGenome` (in :mod:`instgen.evolve.loops`): a set of frustrated
  loops in a fixed planted gauge; every child keeps the planted state as a
  ground state.
"""

from __future__ import annotations

import dataclasses
import hashlib

import numpy as np


def array_key(*arrays) -> str:
    """A content hash of arrays (order and dtype matter)."""
    h = hashlib.blake2b(digest_size=12)
    for a in arrays:
        a = np.ascontiguousarray(a)
        h.update(str(a.dtype).encode())
        h.update(a.tobytes())
    return h.hexdigest()


@dataclasses.dataclass(eq=False)
class FreeGenome:
    """Couplings J (m,) and fields h (n,), free within the coupling rules."""

    J: np.ndarray
    h: np.ndarray
    kind = "free"

    def couplings(self):
        """(J, h, planted state or None, planted energy or None)."""
        return self.J, self.h, None, None

    def key(self) -> str:
        return array_key(self.J, self.h)

    def copy(self) -> FreeGenome:
        return FreeGenome(self.J.copy(), self.h.copy())

    def to_dict(self) -> dict:
        return {"kind": self.kind, "J": self.J.tolist(), "h": self.h.tolist()}

    @classmethod
    def from_dict(cls, d: dict) -> FreeGenome:
        return cls(np.asarray(d["J"], dtype=np.float64), np.asarray(d["h"], dtype=np.float64))


def genome_from_dict(d: dict, var=None):
    """Rebuild a genome from its checkpoint dict (``var``: the run's Variation, for loop genomes)."""
    if d.get("kind") == "free":
        return FreeGenome.from_dict(d)
    if d.get("kind") == "loops":
        from .loops import LoopGenome

        return LoopGenome.from_dict(d, var)
    from ..errors import FormatError

    raise FormatError(f"unknown genome kind {d.get('kind')!r} in checkpoint")


class GaugeCanon:
    """Canonical gauge for couplings on one graph, so gauge-equivalent instances share a key.

    A breadth-first spanning forest is fixed once per graph.  For given (J, h),
    the gauge that makes every tree edge's coupling non-negative is unique up to
    one global flip per connected component; the flip is fixed by making the
    first non-zero field of the component positive (or, without fields, left as
    is).  Two instances have the same canonical couplings exactly when one is a
    spin-reversal transform of the other (zero couplings on tree edges aside).
    """

    def __init__(self, n: int, edges: np.ndarray):
        import networkx as nx

        G = nx.Graph()
        G.add_nodes_from(range(n))
        for k, (i, j) in enumerate(edges.tolist()):
            G.add_edge(i, j, k=k)
        order, parent_edge, comp = [], [], np.zeros(n, dtype=np.int64)
        for c, nodes in enumerate(nx.connected_components(G)):
            root = min(nodes)
            comp[list(nodes)] = c
            order.append((root, -1, -1))
            for u, v in nx.bfs_edges(G, root):
                order.append((v, u, G[u][v]["k"]))
        self.order = order
        self.comp = comp
        self.edges = edges
        self.n = n

    def gauge(self, J, h) -> np.ndarray:
        g = np.ones(self.n, dtype=np.int8)
        for v, u, k in self.order:
            if u >= 0:
                g[v] = g[u] * (-1 if J[k] < 0 else 1)
        gh = g * h
        for c in np.unique(self.comp):
            members = np.flatnonzero(self.comp == c)
            nz = members[gh[members] != 0]
            if nz.size and gh[nz[0]] < 0:
                g[members] *= -1
        return g

    def key(self, J, h) -> str:
        g = self.gauge(J, h)
        Jc = J * g[self.edges[:, 0]] * g[self.edges[:, 1]]
        return array_key(Jc + 0.0, g * h + 0.0)  # + 0.0 folds -0.0 into 0.0
