"""Tile planting on square and cubic lattices.

After Perera et al., PRE 101, 023316 (2020) (2D) and Hamze et al., PRE 97,
043303 (2018) (3D): the lattice is cut into edge-disjoint tiles, each tile gets
frustrated couplings that have the all +1 state as one of the tile's ground
states, and the planted state is the common local ground state hidden by a
random gauge.  The hardness knob is the mix of tile classes.

Tiles.  On the square lattice the tiles are the plaquettes whose lower-left
corner (x, y) has x + y even (a checkerboard): with periodic boundaries and
even sides every edge lies in exactly one; with open boundaries some border
edges lie in none and get J = 0.  On the cubic lattice the tiles are the unit
cubes whose corner has all coordinates even or all odd: every edge lies in
exactly one of them (periodic, even side).

Tile classes (planted gauge, ours; the papers' exact coupling tables were not
at hand, so these follow the same principle rather than copy them):

* square, ``c1``: couplings (+1, -1, -1, -1), four cheapest ways to break the
  plaquette (most degenerate);
* square, ``c2``: (+1, -1, -2, -2), two ways;
* square, ``c3``: (+1, -2, -2, -2), one way (the tile's ground state is unique
  up to a global flip).
  The antiferromagnetic bond and the strong bonds land on random sides.
* cubic, ``f2``/``f4``/``f6``: ±1 couplings on the cube's 12 edges with 2, 4
  or 6 frustrated faces and the all +1 state among the cube's ground states,
  drawn uniformly from all such sign patterns (found by enumeration).

Every tile is checked by enumerating its 2^4 or 2^8 states, so the proof is
local and exact: E(s) = sum over tiles >= sum of tile minima = E(planted).
"""

from __future__ import annotations

import functools
import itertools

import numpy as np

from ..errors import CertificationError, FormatError, InputError
from ..seeds import as_generator
from . import PlantedFamily, construction_of, planted_gauge_couplings

CLASSES_2D = {"c1": (1.0, -1.0, -1.0, -1.0), "c2": (1.0, -1.0, -2.0, -2.0), "c3": (1.0, -2.0, -2.0, -2.0)}
CLASSES_3D = ("f2", "f4", "f6")

#: Cube corners as offsets, and its 12 edges as pairs of corner numbers.
_CORNERS = list(itertools.product((0, 1), repeat=3))
_CUBE_EDGES = [(a, b) for a, b in itertools.combinations(range(8), 2)
               if sum(x != y for x, y in zip(_CORNERS[a], _CORNERS[b])) == 1]
_CUBE_FACES = [[k for k, (a, b) in enumerate(_CUBE_EDGES)
                if _CORNERS[a][axis] == side and _CORNERS[b][axis] == side]
               for axis in range(3) for side in (0, 1)]


def _all_states(k: int) -> np.ndarray:
    return 1 - 2 * ((np.arange(1 << k)[:, None] >> np.arange(k)) & 1)


def ground_state_ok(pairs, values, k: int) -> bool:
    """True when all +1 is a ground state of the k-spin Ising term sum values * s_a s_b.

    >>> ground_state_ok([(0, 1), (1, 2), (0, 2)], [-1.0, -1.0, 1.0], 3)
    True
    >>> ground_state_ok([(0, 1), (1, 2), (0, 2)], [-1.0, 1.0, 2.0], 3)
    False
    """
    S = _all_states(k)
    p = np.asarray(pairs, dtype=np.int64).reshape(-1, 2)
    E = (S[:, p[:, 0]] * S[:, p[:, 1]]) @ np.asarray(values, dtype=np.float64)
    return bool(E[0] <= E.min() + 1e-12)  # row 0 is all +1


@functools.lru_cache(maxsize=1)
def cube_patterns() -> dict:
    """Sign patterns (12,) of ±1 cube tiles with all +1 a ground state, by class name."""
    signs = 1 - 2 * ((np.arange(1 << 12)[:, None] >> np.arange(12)) & 1)  # (4096, 12)
    S = _all_states(8)
    a = np.array([e[0] for e in _CUBE_EDGES])
    b = np.array([e[1] for e in _CUBE_EDGES])
    E = (S[:, a] * S[:, b]) @ signs.T  # (256, 4096)
    ok = E[0] <= E.min(axis=0)
    # a 4-edge face is frustrated when the product of its couplings is negative (odd count of +1 bonds)
    frustrated = np.stack([np.prod(signs[:, f], axis=1) < 0 for f in _CUBE_FACES], axis=1).sum(axis=1)
    return {f"f{k}": signs[ok & (frustrated == k)].astype(np.float64) for k in (2, 4, 6)}


def _edge_index(topo):
    return {(int(i), int(j)): k for k, (i, j) in enumerate(topo.edges.tolist())}


def _lattice(topo):
    if topo.family not in ("square", "cubic"):
        raise InputError(f"tile planting works on square and cubic lattices, not {topo.family} "
                         "(try square:32 or cubic:8; use loops on other graphs)")
    args = topo.params.get("args", [])
    periodic = "periodic" in args
    if topo.coords is None:
        raise InputError("the lattice has no coordinates")
    coords = np.asarray(topo.coords, dtype=np.int64)
    shape = tuple(int(x) for x in coords.max(axis=0) + 1)
    if periodic and any(s % 2 for s in shape):
        raise InputError(f"periodic tile planting needs even sides, got {'x'.join(map(str, shape))}")
    index = {tuple(c): k for k, c in enumerate(coords.tolist())}
    return shape, periodic, index


def _parse_mix(mix, names):
    if isinstance(mix, str):
        try:
            mix = [float(x) for x in mix.split(",")]
        except ValueError:
            raise InputError(f"the tile mix must be numbers separated by commas, got {mix!r}") from None
    if isinstance(mix, dict):
        unknown = set(mix) - set(names)
        if unknown:
            raise InputError(f"unknown tile class(es) {sorted(unknown)}; valid: {', '.join(names)}")
        mix = [mix.get(k, 0.0) for k in names]
    p = np.asarray(mix, dtype=np.float64).reshape(-1)
    if p.size != len(names) or not np.all(np.isfinite(p)) or np.any(p < 0) or p.sum() <= 0:
        raise InputError(f"the tile mix needs {len(names)} non-negative weights for classes "
                         f"{', '.join(names)} (not all zero), got {list(np.atleast_1d(mix))}")
    return p / p.sum()


def _square_tiles(shape, periodic, index):
    L0, L1 = shape
    for x in range(L0 if periodic else L0 - 1):
        for y in range(L1 if periodic else L1 - 1):
            if (x + y) % 2:
                continue
            yield [index.get(((x + dx) % L0, (y + dy) % L1)) for dx, dy in ((0, 0), (1, 0), (1, 1), (0, 1))]


def _cubic_tiles(shape, periodic, index):
    L = shape[0]
    for c in itertools.product(range(L if periodic else L - 1), repeat=3):
        if len({v % 2 for v in c}) != 1:
            continue
        yield [index.get(tuple((c[d] + o[d]) % L for d in range(3))) for o in _CORNERS]


def plant_tiles(graph, mix=(1 / 3, 1 / 3, 1 / 3), seed=None):
    """A tile-planted instance on a square or cubic lattice.

    Parameters
    ----------
    graph : str or Topology
        ``square:L[xW][,periodic]`` or ``cubic:L[,periodic]`` (even sides when periodic).
    mix : sequence, dict or "p1,p2,p3"
        Weights of the tile classes: ``c1, c2, c3`` on square lattices,
        ``f2, f4, f6`` on cubic ones (see the module docstring).
    seed : int, optional

    Examples
    --------
    >>> inst = plant_tiles("square:6,periodic", mix=(1, 0, 0), seed=3)
    >>> inst.energy(inst.planted) == -2 * 18   # 18 checkerboard plaquettes at -2 each
    True
    """
    from ..instance import Instance, random_gauge
    from ..make import topology

    topo = topology(graph)
    shape, periodic, index = _lattice(topo)
    names = list(CLASSES_2D) if topo.family == "square" else list(CLASSES_3D)
    p = _parse_mix(mix, names)
    rng = as_generator(seed)
    eidx = _edge_index(topo)
    J = np.zeros(topo.m)
    tiles, skipped = [], 0
    corners = _square_tiles(shape, periodic, index) if topo.family == "square" else _cubic_tiles(shape, periodic, index)
    pairs = [(k, (k + 1) % 4) for k in range(4)] if topo.family == "square" else _CUBE_EDGES
    patterns = cube_patterns() if topo.family == "cubic" else None
    for spins in corners:
        ids = None
        if None not in spins:
            ids = [eidx.get(tuple(sorted((spins[a], spins[b])))) for a, b in pairs]
        if ids is None or None in ids:
            skipped += 1  # a dead node or edge: leave the tile out
            continue
        cls = names[int(rng.choice(len(names), p=p))]
        if patterns is None:
            vals = np.asarray(CLASSES_2D[cls])[rng.permutation(4)]  # bonds on random sides
        else:
            choices = patterns[cls]
            vals = choices[int(rng.integers(len(choices)))]
        J[ids] += vals
        tiles.append({"class": cls, "edges": ids, "J": [float(v) for v in vals]})
    gauge = random_gauge(topo.n, rng)
    g = gauge.astype(np.float64)
    J = J * g[topo.edges[:, 0]] * g[topo.edges[:, 1]]
    energy = float(sum(sum(t["J"]) for t in tiles))
    con = {"family": "tiles", "lattice": topo.family, "periodic": periodic, "mix": dict(zip(names, p.tolist())),
           "tile_count": len(tiles), "skipped_tiles": skipped,
           "uncovered_edges": int(topo.m - len(pairs) * len(tiles)),
           "planted_energy": energy, "seed": int(seed) if isinstance(seed, (int, np.integer)) else None,
           "tiles": tiles}
    return Instance(edges=topo.edges, J=J, n=topo.n, labels=topo.labels, graph=topo.spec, planted=gauge,
                    metadata={"kind": "planted", "construction": con})


def tiles_of(instance) -> list[dict]:
    """The tile list stored in a tile-planted instance's metadata."""
    con = construction_of(instance, "tiles")
    tiles = con.get("tiles")
    if not isinstance(tiles, list) or not all(isinstance(t, dict) and isinstance(t.get("edges"), list)
                                              and isinstance(t.get("J"), list) and len(t["edges"]) == len(t["J"])
                                              for t in tiles):
        raise FormatError("the tile construction must hold a list of tiles with matching 'edges' and 'J'")
    return tiles


def verify(instance) -> dict:
    """Check a tile instance's proof; details for a Certificate, or CertificationError.

    Every stored tile is enumerated (2^k states for its k spins) to confirm the
    all +1 state is one of its ground states in the planted gauge; the tiles
    must rebuild the couplings exactly and the planted energy must equal the
    sum of the tile minima.
    """
    tiles = tiles_of(instance)
    if instance.has_fields:
        raise CertificationError("the instance has fields, which the tile construction does not account for")
    acc = np.zeros(instance.m)
    bound = 0.0
    for t in tiles:
        ids = np.asarray(t["edges"], dtype=np.int64)
        vals = np.asarray(t["J"], dtype=np.float64)
        if ids.size == 0 or ids.min() < 0 or ids.max() >= instance.m or len(set(ids.tolist())) != ids.size:
            raise CertificationError("a stored tile refers to edges that are not in the instance")
        ends = instance.edges[ids]
        spins, local = np.unique(ends, return_inverse=True)
        if spins.size > 16:
            raise CertificationError("a stored tile has more than 16 spins; too large to check by enumeration")
        if not ground_state_ok(local.reshape(-1, 2), vals, spins.size):
            raise CertificationError(f"a tile of class {t.get('class')!r} does not have the planted state "
                                     "as a ground state")
        acc[ids] += vals
        bound += float(vals.sum())
    tol = 1e-9 * max(1.0, instance.scale)
    if not np.allclose(acc, planted_gauge_couplings(instance), rtol=0, atol=tol):
        raise CertificationError("the stored tiles do not rebuild the couplings")
    energy = instance.energy(instance.planted)
    if abs(energy - bound) > tol * max(1, instance.m):
        raise CertificationError(f"the planted state's energy {energy:g} differs from the tile bound {bound:g}")
    return {
        "family": "tiles", "tiles": len(tiles), "bound": bound,
        "proof": ("the couplings are a sum of tiles, each checked by enumeration to have the planted state "
                  "among its ground states, so E(s) >= sum of tile minima = E(planted)"),
    }


def rules(instance):
    """The coupling rules of a tile construction: the bond magnitudes of the tile classes it draws."""
    from ..couplings import CouplingRules

    construction = instance.metadata["construction"]
    used = [name for name, p in (construction.get("mix") or {}).items() if p > 0]
    if construction.get("lattice") == "square":
        mags = {abs(v) for name in used for v in CLASSES_2D[name]}
    else:
        mags = {1.0}  # cube tiles have bonds of +-1 only
    return CouplingRules.of_weights(sorted(mags) or [1.0])


FAMILY = PlantedFamily("tiles", plant_tiles, verify,
                       "frustrated tiles on square/cubic lattices; mix = weights of the tile classes "
                       "(after Perera et al. 2020, Hamze et al. 2018)", rules)
