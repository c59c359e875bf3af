"""Graphs from spec strings, with fault masks.

A spec is ``family:arguments`` optionally followed by fault settings after
semicolons::

    chimera:4                     Chimera C(4,4,4), 128 spins
    chimera:6;dead-nodes=5;fault-seed=3
    pegasus:6                     Pegasus P(6), fabric only (680 spins)
    square:32x16,periodic         32 x 16 square lattice on a torus
    file:my_edges.txt             an edge list, one "u v" per line

``instgen graph --list`` prints the families.  Fault settings:

* ``dead-nodes=K`` removes K nodes (``=0.01`` removes that fraction, ``=[3,17]``
  removes those labels), chosen with ``fault-seed``;
* ``dead-edges=...`` does the same for edges (``=[[0,4],[1,5]]`` for a list).

Spins are indexed 0..n-1 in sorted label order; labels are kept for export.
"""

from __future__ import annotations

import dataclasses
import json
import math
from collections import Counter
from pathlib import Path

import networkx as nx
import numpy as np

from .errors import InputError, ResourceError
from .registry import Registry
from .seeds import as_generator

#: Largest graph instgen will build on this class of machine (refused up front).
MAX_NODES = 2_000_000
MAX_EDGES = 30_000_000


@dataclasses.dataclass(frozen=True, eq=False)
class Topology:
    """A graph ready for instances: ``n`` spins, ``edges`` (m, 2) int32 with i < j."""

    spec: str
    family: str
    n: int
    edges: np.ndarray
    labels: tuple
    coords: np.ndarray | None = None
    params: dict = dataclasses.field(default_factory=dict)

    @property
    def m(self) -> int:
        return int(self.edges.shape[0])

    def to_networkx(self) -> nx.Graph:
        G = nx.Graph(spec=self.spec)
        G.add_nodes_from(self.labels)
        G.add_edges_from((self.labels[i], self.labels[j]) for i, j in self.edges.tolist())
        return G

    def index_graph(self) -> nx.Graph:
        """The graph on spin indices 0..n-1."""
        G = nx.Graph()
        G.add_nodes_from(range(self.n))
        G.add_edges_from(self.edges.tolist())
        return G

    def degrees(self) -> np.ndarray:
        return np.bincount(self.edges.ravel(), minlength=self.n)

    def summary(self) -> dict:
        """n, m, degree histogram, planarity and bipartiteness."""
        G = self.index_graph()
        hist = Counter(self.degrees().tolist())
        return {
            "spec": self.spec,
            "family": self.family,
            "n": self.n,
            "m": self.m,
            "degree_histogram": {int(k): int(v) for k, v in sorted(hist.items())},
            "max_degree": int(max(hist) if hist else 0),
            "bipartite": bool(nx.is_bipartite(G)),
            "planar": bool(nx.check_planarity(G)[0]) if self.m <= 200_000 else None,
            "connected_components": nx.number_connected_components(G) if self.n else 0,
        }


@dataclasses.dataclass(frozen=True)
class Family:
    """A graph family: how to parse its arguments, estimate its size, build it."""

    name: str
    usage: str
    description: str
    build: callable  # (args: list[str]) -> (nx.Graph with int or tuple labels, coords dict|None)
    estimate: callable  # (args) -> (n, m) upper estimates, checked before building


GRAPHS = Registry("graph family")


def _ints(args, family, lo, hi, names):
    if not lo <= len(args) <= hi:
        raise InputError(f"{family} takes {names}; see `instgen graph --list`")
    out = []
    for a in args:
        try:
            v = int(a)
        except ValueError:
            raise InputError(f"{family}: {a!r} is not a whole number ({names})") from None
        if v < 1:
            raise InputError(f"{family}: sizes must be at least 1, got {v}")
        out.append(v)
    return out


def _family(name, usage, description, estimate):
    def deco(fn):
        GRAPHS.register(name, Family(name, usage, description, fn, estimate))
        return fn
    return deco


# --------------------------------------------------------------- hardware families
def _chimera_args(a):
    v = _ints(a, "chimera", 1, 3, "M[,N[,T]]")
    m = v[0]
    n = v[1] if len(v) > 1 else m
    t = v[2] if len(v) > 2 else 4
    return m, n, t


@_family("chimera", "chimera:M[,N[,T]]", "Chimera C(M,N,T): M x N cells of K_{T,T} (T=4 default)",
         lambda a: (lambda m, n, t: (2 * t * m * n, t * t * m * n + t * (m - 1) * n + t * m * (n - 1)))(*_chimera_args(a)))
def _chimera(args):
    import dwave.graphs as dg

    m, n, t = _chimera_args(args)
    return dg.chimera_graph(m, n, t), None


@_family("pegasus", "pegasus:M", "Pegasus P(M), fabric-only nodes (degree <= 15)",
         lambda a: (24 * _ints(a, "pegasus", 1, 1, "M")[0] ** 2, 15 * 12 * _ints(a, "pegasus", 1, 1, "M")[0] ** 2))
def _pegasus(args):
    import dwave.graphs as dg

    (m,) = _ints(args, "pegasus", 1, 1, "M")
    if m < 2:
        raise InputError("pegasus needs M >= 2")
    return dg.pegasus_graph(m, fabric_only=True), None


def _zephyr_args(a):
    v = _ints(a, "zephyr", 1, 2, "M[,T]")
    return v[0], (v[1] if len(v) > 1 else 4)


@_family("zephyr", "zephyr:M[,T]", "Zephyr Z(M,T) (T=4 default, degree <= 4T+4)",
         lambda a: (lambda m, t: (4 * t * m * (2 * m + 1), 4 * t * m * (2 * m + 1) * (2 * t + 2)))(*_zephyr_args(a)))
def _zephyr(args):
    import dwave.graphs as dg

    m, t = _zephyr_args(args)
    return dg.zephyr_graph(m, t), None


# ------------------------------------------------------------------- lattices
def _lattice_args(args, family, dims):
    periodic = False
    rest = []
    for a in args:
        if a == "periodic":
            periodic = True
        else:
            rest.append(a)
    if len(rest) != 1:
        raise InputError(f"{family} takes L" + ("[xW]" if dims == 2 else "") + "[,periodic]")
    parts = rest[0].split("x")
    sizes = _ints(parts, family, 1, dims, "side lengths")
    while len(sizes) < dims:
        sizes.append(sizes[0])
    if periodic and min(sizes) < 3:
        raise InputError(f"{family}: a periodic lattice needs every side >= 3")
    return sizes, periodic


def _grid(sizes, periodic, diagonals=()):
    """Lattice on row-major integer labels with integer coordinates."""
    shape = tuple(sizes)
    coords = np.array(list(np.ndindex(*shape)), dtype=np.int32)
    index = {tuple(c): k for k, c in enumerate(coords.tolist())}
    steps = [tuple(int(d == k) for d in range(len(shape))) for k in range(len(shape))] + list(diagonals)
    G = nx.Graph()
    G.add_nodes_from(range(len(coords)))
    for k, c in enumerate(coords.tolist()):
        for step in steps:
            nb = [c[d] + step[d] for d in range(len(shape))]
            if periodic:
                nb = [x % shape[d] for d, x in enumerate(nb)]
            elif any(not 0 <= x < shape[d] for d, x in enumerate(nb)):
                continue
            j = index[tuple(nb)]
            if j != k:
                G.add_edge(k, j)
    return G, coords


@_family("square", "square:L[xW][,periodic]", "2D square lattice (open or periodic)",
         lambda a: (lambda s, p: (s[0] * s[1], 2 * s[0] * s[1]))(*_lattice_args(a, "square", 2)))
def _square(args):
    sizes, periodic = _lattice_args(args, "square", 2)
    return _grid(sizes, periodic)


@_family("cubic", "cubic:L[,periodic]", "3D simple cubic lattice L x L x L",
         lambda a: (lambda s, p: (s[0] ** 3, 3 * s[0] ** 3))(*_lattice_args(a[:1] + a[1:], "cubic", 1)))
def _cubic(args):
    sizes, periodic = _lattice_args(args, "cubic", 1)
    return _grid([sizes[0]] * 3, periodic)


@_family("kings", "kings:L", "King's graph: L x L square lattice with both diagonals",
         lambda a: (_ints(a, "kings", 1, 1, "L")[0] ** 2, 4 * _ints(a, "kings", 1, 1, "L")[0] ** 2))
def _kings(args):
    (L,) = _ints(args, "kings", 1, 1, "L")
    return _grid([L, L], False, diagonals=[(1, 1), (1, -1)])


@_family("triangular", "triangular:L", "Triangular lattice: L x L square lattice with one diagonal",
         lambda a: (_ints(a, "triangular", 1, 1, "L")[0] ** 2, 3 * _ints(a, "triangular", 1, 1, "L")[0] ** 2))
def _triangular(args):
    (L,) = _ints(args, "triangular", 1, 1, "L")
    return _grid([L, L], False, diagonals=[(1, 1)])


@_family("heavy-hex", "heavy-hex:R,C", "Heavy-hex lattice: a hexagonal lattice of R x C hexagons "
         "with one extra node on every edge (degree 2 and 3)",
         lambda a: (lambda r, c: (5 * (r + 1) * (c + 1), 6 * (r + 1) * (c + 1)))(*_ints(a, "heavy-hex", 2, 2, "R,C")))
def _heavy_hex(args):
    r, c = _ints(args, "heavy-hex", 2, 2, "R,C")
    hexa = nx.hexagonal_lattice_graph(r, c)
    base = sorted(hexa.nodes)
    index = {v: k for k, v in enumerate(base)}
    G = nx.Graph()
    G.add_nodes_from(range(len(base)))
    coords = [list(v) for v in base]
    nxt = len(base)
    for u, v in sorted((min(e), max(e)) for e in hexa.edges):
        G.add_edge(index[u], nxt)
        G.add_edge(nxt, index[v])
        coords.append([(u[0] + v[0]) / 2, (u[1] + v[1]) / 2])
        nxt += 1
    return G, np.asarray(coords, dtype=np.float64)


# ---------------------------------------------------------------- random and dense
def _seed_arg(args, k, family):
    if len(args) > k:
        try:
            return int(args[k])
        except ValueError:
            raise InputError(f"{family}: the graph seed must be a whole number, got {args[k]!r}") from None
    return 0


@_family("regular", "regular:N,D[,SEED]", "Random D-regular graph on N nodes (graph seed 0 by default)",
         lambda a: (lambda v: (v[0], v[0] * v[1] // 2))(_ints(a[:2], "regular", 2, 2, "N,D")))
def _regular(args):
    n, d = _ints(args[:2], "regular", 2, 2, "N,D")
    if d >= n or (n * d) % 2:
        raise InputError(f"regular: need D < N and N*D even, got N={n}, D={d}")
    return nx.random_regular_graph(d, n, seed=_seed_arg(args, 2, "regular")), None


def _gnp_args(args):
    if len(args) not in (2, 3):
        raise InputError("gnp takes N,P[,SEED]")
    (n,) = _ints(args[:1], "gnp", 1, 1, "N")
    try:
        p = float(args[1])
    except ValueError:
        raise InputError(f"gnp: P must be a probability, got {args[1]!r}") from None
    if not 0 < p <= 1:
        raise InputError(f"gnp: P must lie in (0, 1], got {p}")
    return n, p


@_family("gnp", "gnp:N,P[,SEED]", "Erdos-Renyi random graph G(N, P) (graph seed 0 by default)",
         lambda a: (lambda n, p: (n, int(p * n * (n - 1) / 2) + 1))(*_gnp_args(a)))
def _gnp(args):
    n, p = _gnp_args(args)
    return nx.gnp_random_graph(n, p, seed=_seed_arg(args, 2, "gnp")), None


@_family("complete", "complete:N", "Complete graph K_N (dense problems)",
         lambda a: (lambda n: (n, n * (n - 1) // 2))(_ints(a, "complete", 1, 1, "N")[0]))
def _complete(args):
    (n,) = _ints(args, "complete", 1, 1, "N")
    return nx.complete_graph(n), None


def _file_estimate(args):
    return 0, 0


@_family("file", "file:PATH", "Edge list file: one 'u v' pair per line, '#' comments; "
         "whole-number labels are read as numbers", _file_estimate)
def _file(args):
    path = Path(",".join(args))
    try:
        text = path.read_text()
    except OSError as exc:
        raise InputError(f"cannot read edge list {path}: {exc.strerror or exc}") from None
    G = nx.Graph()
    for lineno, line in enumerate(text.splitlines(), 1):
        line = line.split("#", 1)[0].strip()
        if not line:
            continue
        parts = line.split()
        if len(parts) < 2:
            raise InputError(f"{path}:{lineno}: expected 'u v', got {line!r}")
        u, v = (int(x) if x.lstrip("-").isdigit() else x for x in parts[:2])
        if u == v:
            raise InputError(f"{path}:{lineno}: self-loop on {u!r}")
        G.add_edge(u, v)
    if G.number_of_nodes() == 0:
        raise InputError(f"edge list {path} has no edges")
    return G, None


# ---------------------------------------------------------------------- faults
@dataclasses.dataclass(frozen=True)
class Faults:
    """Dead nodes and edges: a count, a fraction, or explicit labels."""

    dead_nodes: float | list = 0
    dead_edges: float | list = 0
    seed: int = 0

    def is_empty(self) -> bool:
        return not self.dead_nodes and not self.dead_edges

    def to_suffix(self) -> str:
        parts = []
        for key, val in (("dead-nodes", self.dead_nodes), ("dead-edges", self.dead_edges)):
            if val:
                parts.append(f"{key}={json.dumps(val, separators=(',', ':'))}")
        if parts and self.seed:
            parts.append(f"fault-seed={self.seed}")
        return "".join(";" + p for p in parts)


def _parse_amount(key, text):
    text = text.strip()
    if text.startswith("["):
        try:
            val = json.loads(text)
        except json.JSONDecodeError:
            raise InputError(f"{key}: cannot read the list {text!r}") from None
        if not isinstance(val, list):
            raise InputError(f"{key}: expected a list, got {text!r}")
        if key == "dead-edges":
            if any(not isinstance(v, list) or len(v) != 2 for v in val):
                raise InputError(f"{key}: each dead edge is a pair of node labels [u, v], got {text!r}")
            return [tuple(_fault_label(x, key) for x in v) for v in val]
        return [_fault_label(v, key) for v in val]
    try:
        val = float(text)
    except ValueError:
        raise InputError(f"{key} must be a count, a fraction below 1, or a [list], got {text!r}") from None
    if val < 0 or not math.isfinite(val) or (val >= 1 and val != int(val)):
        raise InputError(f"{key} must be a whole count or a fraction in [0, 1), got {text!r}")
    return int(val) if val >= 1 else val


def _fault_label(v, key):
    """A node label from a fault list: whole numbers and strings, lists of them as tuples."""
    if isinstance(v, list):
        return tuple(_fault_label(x, key) for x in v)
    if isinstance(v, (int, str)) and not isinstance(v, bool):
        return v
    raise InputError(f"{key}: node labels are whole numbers, strings or lists of them, got {v!r}")


def parse_spec(spec: str) -> tuple[str, list[str], Faults]:
    """Split ``family:a,b;key=value`` into (family, args, Faults)."""
    if not isinstance(spec, str) or not spec.strip():
        raise InputError("the graph spec is empty; try e.g. chimera:4 (see `instgen graph --list`)")
    head, *opts = [p.strip() for p in spec.split(";")]
    family, _, argtext = head.partition(":")
    family = family.strip().lower()
    GRAPHS.get(family)  # unknown family -> error listing the valid ones
    args = [a.strip() for a in argtext.split(",")] if argtext.strip() else []
    if family == "file":
        args = [argtext.strip()]
    if family != "file" and not args:
        raise InputError(f"{family} needs arguments: {GRAPHS.get(family).usage}")
    fault_kw = {}
    for opt in opts:
        if not opt:
            continue
        key, eq, val = opt.partition("=")
        key = key.strip()
        if not eq:
            raise InputError(f"graph option {opt!r} must look like key=value")
        if key == "dead-nodes":
            fault_kw["dead_nodes"] = _parse_amount(key, val)
        elif key == "dead-edges":
            fault_kw["dead_edges"] = _parse_amount(key, val)
        elif key == "fault-seed":
            try:
                fault_kw["seed"] = int(val)
            except ValueError:
                raise InputError(f"fault-seed must be a whole number, got {val!r}") from None
        else:
            raise InputError(f"unknown graph option {key!r}; valid: dead-nodes, dead-edges, fault-seed")
    return family, args, Faults(**fault_kw)


def _pick(items, amount, rng, what):
    if isinstance(amount, list):
        return amount
    k = int(round(amount * len(items))) if isinstance(amount, float) else int(amount)
    if k > len(items):
        raise InputError(f"cannot remove {k} {what}: the graph has only {len(items)}")
    if k == 0:
        return []
    pick = rng.choice(len(items), size=k, replace=False)
    return [items[i] for i in sorted(pick)]


def apply_faults(G: nx.Graph, faults: Faults) -> nx.Graph:
    """A copy of G without the dead nodes and edges."""
    if faults.is_empty():
        return G
    rng = as_generator(faults.seed)
    G = G.copy()
    nodes = sorted(G.nodes, key=_sort_key)
    dead = _pick(nodes, faults.dead_nodes, rng, "nodes")
    missing = [v for v in dead if v not in G]
    if missing:
        raise InputError(f"dead-nodes names node(s) not in the graph: {missing[:5]}")
    G.remove_nodes_from(dead)
    edges = sorted((tuple(sorted(e, key=_sort_key)) for e in G.edges), key=lambda e: (_sort_key(e[0]), _sort_key(e[1])))
    dead_e = _pick(edges, faults.dead_edges, rng, "edges")
    for e in dead_e:
        if not G.has_edge(*e):
            raise InputError(f"dead-edges names an edge not in the graph: {list(e)}")
    G.remove_edges_from(dead_e)
    return G


def _sort_key(label):
    return (0, label, "") if isinstance(label, (int, np.integer)) else (1, 0, str(label))


def estimate_size(spec: str) -> tuple[int, int]:
    """Upper estimates of (nodes, edges) for ``spec`` without building it."""
    family, args, _ = parse_spec(spec)
    return GRAPHS.get(family).estimate(args)


def check_size(spec: str) -> tuple[int, int]:
    """Parse ``spec`` and refuse it up front (ResourceError) when it is too large to build.

    Returns the estimates (nodes, edges).

    >>> check_size("chimera:4000")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    instgen.errors.ResourceError: chimera:4000 would have about 128,000,000 nodes and ...
    """
    n_est, m_est = estimate_size(spec)
    if n_est > MAX_NODES or m_est > MAX_EDGES:
        raise ResourceError(
            f"{spec} would have about {n_est:,} nodes and {m_est:,} edges; instgen builds graphs of at most "
            f"{MAX_NODES:,} nodes and {MAX_EDGES:,} edges"
        )
    return n_est, m_est


def build_graph(spec: str) -> Topology:
    """Build the graph named by ``spec`` (see the module docstring).

    >>> build_graph("chimera:2").n
    32
    """
    family, args, faults = parse_spec(spec)
    fam = GRAPHS.get(family)
    check_size(spec)
    G, coords = fam.build(args)
    labels_before = list(G.nodes)
    G = apply_faults(G, faults)
    labels = sorted(G.nodes, key=_sort_key)
    if not labels:
        raise InputError(f"{spec} has no nodes left")
    index = {lab: k for k, lab in enumerate(labels)}
    edges = np.array(sorted(tuple(sorted((index[u], index[v]))) for u, v in G.edges), dtype=np.int32).reshape(-1, 2)
    if coords is not None:
        pos = {lab: k for k, lab in enumerate(labels_before)} if not isinstance(coords, dict) else None
        coords = np.asarray([coords[pos[lab]] for lab in labels])
    canonical = f"{family}:{','.join(args)}" if family != "file" else f"file:{args[0]}"
    return Topology(spec=canonical + faults.to_suffix(), family=family, n=len(labels), edges=edges,
                    labels=tuple(labels), coords=coords, params={"args": args})


def list_families() -> list[Family]:
    return [GRAPHS.get(name) for name in GRAPHS.names()]
