"""The Ising instance: the one value every stage of instgen passes on.

Energy convention (dimod's Ising convention)::

    E(s) = sum_i h_i s_i + sum_{(i,j) in edges} J_ij s_i s_j,   s_i in {-1, +1}

so J > 0 is antiferromagnetic.  Spins are indexed 0..n-1; ``labels`` maps an
index to the label the graph gave that node (for example a Chimera linear
index), and every conversion to dimod or networkx uses those labels.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Hashable, Sequence
from functools import cached_property
from typing import Any

import numpy as np

from .errors import InputError

_KEEP = object()


def _as_label(label):
    """Labels are kept JSON-friendly: ints, strings, or tuples of those."""
    if isinstance(label, (np.integer,)):
        return int(label)
    if isinstance(label, list):
        return tuple(_as_label(x) for x in label)
    return label


@dataclasses.dataclass(frozen=True, eq=False)
class Instance:
    """An Ising problem on a graph with n spins and m couplings.

    Parameters
    ----------
    edges : (m, 2) int array
        Spin index pairs with i < j, no duplicates, no self-loops.
    J : (m,) float array
        Coupling of each edge.
    h : (n,) float array, optional
        Fields (zeros when omitted).
    n : int, optional
        Number of spins (defaults to ``len(h)`` or ``len(labels)``).
    labels : sequence, optional
        Label of each spin (defaults to ``range(n)``).
    graph : str
        The graph spec the instance was built on (``"chimera:4"``), or ``""``.
    planted : (n,) ±1 array, optional
        A state known to be a ground state by construction.
    metadata : dict
        Free JSON-serialisable information (alphabet, construction, provenance).

    Examples
    --------
    >>> inst = Instance(edges=[[0, 1], [1, 2]], J=[1.0, -1.0], h=[0.0, 0.5, 0.0])
    >>> inst.energies([[1, -1, -1], [1, 1, 1]]).tolist()
    [-0.5, 0.5]
    """

    edges: np.ndarray
    J: np.ndarray
    h: np.ndarray | None = None
    n: int | None = None
    labels: Sequence[Hashable] | None = None
    graph: str = ""
    planted: np.ndarray | None = None
    metadata: dict[str, Any] = dataclasses.field(default_factory=dict)

    def __post_init__(self):
        edges = np.asarray(self.edges)
        if edges.size == 0:
            edges = edges.reshape(0, 2)
        if edges.ndim != 2 or edges.shape[1] != 2:
            raise InputError(f"edges must be an (m, 2) array, got shape {edges.shape}")
        if edges.size and not np.issubdtype(edges.dtype, np.integer):
            if not np.all(np.equal(np.mod(edges, 1), 0)):
                raise InputError("edges must hold integer spin indices")
        if edges.size and (edges.min() < 0 or edges.max() > np.iinfo(np.int32).max):
            raise InputError("an edge refers to a negative spin index or one beyond 2**31 - 1")
        edges = edges.astype(np.int32)
        try:
            J = np.asarray(self.J, dtype=np.float64).reshape(-1)
            h = None if self.h is None else np.asarray(self.h, dtype=np.float64).reshape(-1)
        except (TypeError, ValueError, OverflowError):
            raise InputError("couplings and fields must be numbers that fit a float") from None
        if J.shape[0] != edges.shape[0]:
            raise InputError(f"J has {J.shape[0]} values but there are {edges.shape[0]} edges")
        n = self.n
        if n is None:
            if self.h is not None:
                n = len(self.h)
            elif self.labels is not None:
                n = len(self.labels)
            else:
                n = int(edges.max()) + 1 if edges.size else 0
        n = int(n)
        if n < 0:
            raise InputError(f"n must be non-negative, got {n}")
        h = np.zeros(n) if h is None else h
        if h.shape[0] != n:
            raise InputError(f"h has {h.shape[0]} values but the instance has {n} spins")
        if not np.all(np.isfinite(J)) or not np.all(np.isfinite(h)):
            raise InputError("couplings and fields must be finite numbers (found NaN or infinity)")
        with np.errstate(over="ignore"):
            total = np.abs(J).sum() + np.abs(h).sum()
        if not np.isfinite(total):
            raise InputError("couplings and fields are so large that energies would overflow "
                             "(the sum of |J| and |h| is not a finite number)")
        if edges.size:
            if edges.min() < 0 or edges.max() >= n:
                raise InputError(f"an edge refers to a spin outside 0..{n - 1}")
            if np.any(edges[:, 0] == edges[:, 1]):
                raise InputError("self-loops are not allowed (an edge joins a spin to itself)")
            if np.any(edges[:, 0] > edges[:, 1]):
                raise InputError("each edge must be written with i < j")
            keys = edges[:, 0].astype(np.int64) * n + edges[:, 1]
            if np.unique(keys).size != keys.size:
                raise InputError("duplicate edges are not allowed")
        labels = list(range(n)) if self.labels is None else [_as_label(x) for x in self.labels]
        if len(labels) != n:
            raise InputError(f"{len(labels)} labels given for {n} spins")
        try:
            distinct = len(set(labels))
        except TypeError as exc:
            raise InputError(f"labels must be hashable: {exc}") from None
        if distinct != n:
            raise InputError("labels collide: two spins share a label")
        planted = self.planted
        if planted is not None:
            planted = np.asarray(planted)
            if planted.shape != (n,) or not np.all(np.abs(planted) == 1):
                raise InputError(f"the planted state must be {n} values of -1 or +1")
            planted = planted.astype(np.int8)
        for name, arr in (("edges", edges), ("J", J), ("h", h)):
            arr.setflags(write=False)
            object.__setattr__(self, name, arr)
        if planted is not None:
            planted.setflags(write=False)
        object.__setattr__(self, "planted", planted)
        object.__setattr__(self, "n", n)
        object.__setattr__(self, "labels", tuple(labels))
        object.__setattr__(self, "metadata", dict(self.metadata or {}))

    # ------------------------------------------------------------------ basics
    @property
    def m(self) -> int:
        """Number of couplings (edges)."""
        return int(self.edges.shape[0])

    @property
    def has_fields(self) -> bool:
        return bool(np.any(self.h != 0))

    def __repr__(self) -> str:
        planted = ", planted" if self.planted is not None else ""
        graph = f" on {self.graph}" if self.graph else ""
        return f"<Instance n={self.n} m={self.m}{graph}{planted}>"

    def replace(self, **changes) -> Instance:
        """A copy with some attributes changed (validated again)."""
        return dataclasses.replace(self, **changes)

    def with_couplings(self, J, h=None, planted=_KEEP, **metadata) -> Instance:
        """Same graph and labels, new couplings (and fields); metadata updated.

        ``planted`` keeps the current planted state unless given (None drops it).
        """
        meta = {**self.metadata, **metadata}
        return Instance(
            edges=self.edges, J=J, h=self.h if h is None else h, n=self.n, labels=self.labels,
            graph=self.graph, planted=self.planted if planted is _KEEP else planted, metadata=meta,
        )

    @cached_property
    def _ends(self) -> tuple[np.ndarray, np.ndarray]:
        """Contiguous int64 copies of the edge ends, for compiled code."""
        return (np.ascontiguousarray(self.edges[:, 0], dtype=np.int64),
                np.ascontiguousarray(self.edges[:, 1], dtype=np.int64))

    @cached_property
    def adjacency(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Symmetric CSR adjacency ``(indptr, indices, weights)``, built once.

        ``weights[k]`` is the coupling between spin ``i`` and ``indices[k]`` for
        ``indptr[i] <= k < indptr[i+1]``; neighbours are sorted by index.
        """
        i, j = self.edges[:, 0], self.edges[:, 1]
        rows = np.concatenate([i, j])
        cols = np.concatenate([j, i])
        w = np.concatenate([self.J, self.J])
        order = np.lexsort((cols, rows))
        rows, cols, w = rows[order], cols[order], w[order]
        indptr = np.zeros(self.n + 1, dtype=np.int64)
        np.add.at(indptr, rows + 1, 1)
        indptr = np.cumsum(indptr)
        return indptr, cols.astype(np.int32), w.astype(np.float64)

    # ---------------------------------------------------------------- energies
    def energies(self, states) -> np.ndarray:
        """Energies of an (R, n) array of ±1 states (or one state of length n).

        Compiled (numba) and summed in index order: fields first, then edges in
        the order of ``edges``; returns float64 of shape (R,) (or a 0-d array for
        a single state).
        """
        s = np.asarray(states)
        single = s.ndim == 1
        s = np.atleast_2d(s)
        if s.shape[1] != self.n:
            raise InputError(f"states have {s.shape[1]} spins, the instance has {self.n}")
        if not np.all(np.abs(s) == 1):
            raise InputError("states must hold only -1 and +1")
        from ._energy import energies

        out = energies(s, self._ends[0], self._ends[1], self.J, self.h)
        return out[0] if single else out

    def energy(self, state) -> float:
        """Energy of one ±1 state."""
        return float(self.energies(np.asarray(state).reshape(1, -1))[0])

    @property
    def planted_energy(self) -> float | None:
        """Energy of the planted state, or None when nothing is planted."""
        return None if self.planted is None else self.energy(self.planted)

    @property
    def scale(self) -> float:
        """Largest absolute coupling or field (the instance's energy scale)."""
        vals = np.concatenate([np.abs(self.J), np.abs(self.h)])
        return float(vals.max()) if vals.size else 0.0

    # ------------------------------------------------------------------- gauge
    def gauge(self, g) -> Instance:
        """The spin-reversal transform by a ±1 vector ``g``.

        h_i -> g_i h_i and J_ij -> g_i g_j J_ij, so that the new instance gives
        state ``s * g`` the energy the old one gave ``s``.  A planted state is
        carried along (``planted * g``).
        """
        g = self._check_gauge(g)
        J = self.J * g[self.edges[:, 0]] * g[self.edges[:, 1]]
        planted = None if self.planted is None else self.planted * g
        return self.with_couplings(J, self.h * g, planted=planted)

    def gauge_states(self, states, g) -> np.ndarray:
        """Map states of the gauged instance back to this one (s -> s * g)."""
        g = self._check_gauge(g)
        return (np.asarray(states) * g).astype(np.int8)

    def _check_gauge(self, g) -> np.ndarray:
        g = np.asarray(g)
        if g.shape != (self.n,) or not np.all(np.abs(g) == 1):
            raise InputError(f"a gauge must be {self.n} values of -1 or +1")
        return g.astype(np.int8)

    # ----------------------------------------------------------------- interop
    def to_bqm(self, vartype: str = "SPIN"):
        """A :class:`dimod.BinaryQuadraticModel` with this instance's labels.

        ``vartype="BINARY"`` gives the QUBO form with x = (s + 1) / 2; its offset
        keeps every energy equal to the Ising one.
        """
        import dimod

        bqm = dimod.BinaryQuadraticModel.from_ising(
            {lab: float(v) for lab, v in zip(self.labels, self.h)},
            {(self.labels[i], self.labels[j]): float(v) for (i, j), v in zip(self.edges.tolist(), self.J)},
        )
        if vartype.upper() == "BINARY":
            bqm = bqm.change_vartype(dimod.BINARY, inplace=False)
        elif vartype.upper() != "SPIN":
            raise InputError(f"vartype must be SPIN or BINARY, got {vartype!r}")
        return bqm

    @classmethod
    def from_bqm(cls, bqm, graph: str = "", **kwargs) -> Instance:
        """Build an instance from a dimod BQM (SPIN or BINARY; converted to Ising).

        The offset of the Ising form is kept in ``metadata["offset"]`` when it is
        non-zero, since an Instance's own energies carry no constant.
        """
        import dimod

        spin = bqm.change_vartype(dimod.SPIN, inplace=False) if bqm.vartype is dimod.BINARY else bqm
        labels = list(spin.variables)
        try:
            labels = sorted(labels)
        except TypeError:
            pass
        index = {lab: k for k, lab in enumerate(labels)}
        pairs, J = [], []
        for (u, v), bias in spin.quadratic.items():
            i, j = sorted((index[u], index[v]))
            pairs.append((i, j))
            J.append(bias)
        order = np.lexsort(([p[1] for p in pairs], [p[0] for p in pairs])) if pairs else []
        edges = np.array(pairs, dtype=np.int32).reshape(-1, 2)[order]
        J = np.asarray(J, dtype=np.float64)[order]
        h = np.array([spin.linear[lab] for lab in labels], dtype=np.float64)
        meta = dict(kwargs.pop("metadata", {}) or {})
        if spin.offset:
            meta["offset"] = float(spin.offset)
        return cls(edges=edges, J=J, h=h, labels=labels, graph=graph, metadata=meta, **kwargs)

    def to_networkx(self):
        """A networkx Graph on the labels with ``J`` on edges and ``h`` on nodes."""
        import networkx as nx

        G = nx.Graph(graph=self.graph)
        for lab, v in zip(self.labels, self.h):
            G.add_node(lab, h=float(v))
        for (i, j), v in zip(self.edges.tolist(), self.J):
            G.add_edge(self.labels[i], self.labels[j], J=float(v))
        return G


def random_gauge(n: int, seed=None) -> np.ndarray:
    """A uniformly random ±1 vector of length n (int8)."""
    from .seeds import as_generator

    rng = as_generator(seed)
    return (2 * rng.integers(0, 2, size=n) - 1).astype(np.int8)
