"""Exact ground-state solvers behind :func:`instgen.certify.certify`.

Three ways to prove a ground-state energy, each refusing up front (with
:class:`~instgen.errors.ResourceError` and an estimate) what it cannot finish:

* :func:`enumerate_ground`: every state, in Gray-code order, vectorised over
  a block of low spins; counts the ground states.  n <= 30.
* :func:`tree_ground`: variable elimination along a good order
  (dwave-samplers' tree-decomposition solver); cost grows as n 2^width.
* :func:`mip_ground`: mixed-integer programming with HiGHS (scipy's ``milp``),
  proven only when the lower bound meets the best state found.

All take an :class:`~instgen.instance.Instance` and return a dict with
``energy``, ``state`` (int8), ``count`` (number of ground states or None) and
``details``.  :func:`components` splits an instance into independent parts,
which the certifier solves one by one.
"""

from __future__ import annotations

import itertools

import numpy as np

from .errors import InputError, ResourceError
from .instance import Instance

MAX_SPINS = 30
#: Spins enumerated together as one vector (2^LOW_BITS energies in memory).
LOW_BITS = 18
#: Measured enumeration speed on a 2 GHz laptop core (states per second), for estimates.
STATES_PER_SECOND = 1e8
#: Tree decomposition cost model, fitted on Chimera (2 GHz core): seconds and bytes per n * 2^width.
TREE_SECONDS_PER_CELL = 1.3e-7
TREE_BYTES_PER_CELL = 16.0
TREE_MAX_WIDTH = 25  # the solver's own hard limit


def tolerance(instance: Instance) -> float:
    """Energies closer than this are treated as equal (rounding, not physics)."""
    return 1e-9 * max(1.0, float(np.abs(instance.J).sum() + np.abs(instance.h).sum()))


def duration(seconds: float) -> str:
    """'3.2 hours' style text for an estimate."""
    for unit, size in (("years", 3.15e7), ("days", 86400.0), ("hours", 3600.0), ("minutes", 60.0)):
        if seconds >= size:
            return f"{seconds / size:.3g} {unit}"
    return f"{seconds:.3g} seconds"


# ------------------------------------------------------------------ components
def components(instance: Instance) -> list[np.ndarray]:
    """Spin index arrays of the connected parts of the graph of non-zero couplings.

    >>> inst = Instance(edges=[[0, 1], [2, 3]], J=[1.0, 0.0], n=4)
    >>> [c.tolist() for c in components(inst)]
    [[0, 1], [2], [3]]
    """
    import scipy.sparse as sp
    from scipy.sparse.csgraph import connected_components

    active = instance.J != 0
    e = instance.edges[active]
    A = sp.coo_matrix((np.ones(len(e)), (e[:, 0], e[:, 1])), shape=(instance.n, instance.n))
    k, lab = connected_components(A, directed=False)
    order = np.argsort(lab, kind="stable")
    parts = np.split(order, np.cumsum(np.bincount(lab, minlength=k))[:-1])
    return sorted(parts, key=lambda p: int(p[0]))


def sub_instance(instance: Instance, idx: np.ndarray) -> Instance:
    """The instance restricted to spins ``idx`` (non-zero couplings among them only)."""
    pos = np.full(instance.n, -1, dtype=np.int64)
    pos[idx] = np.arange(len(idx))
    e = instance.edges
    keep = (pos[e[:, 0]] >= 0) & (pos[e[:, 1]] >= 0) & (instance.J != 0)
    edges = np.sort(pos[e[keep]], axis=1)
    return Instance(edges=edges, J=instance.J[keep], h=instance.h[idx], n=len(idx),
                    labels=[instance.labels[i] for i in idx], graph=instance.graph)


# ---------------------------------------------------------------- enumeration
def enumeration_seconds(n: int) -> float:
    return 2.0 ** n / STATES_PER_SECOND


def _states(k: int) -> np.ndarray:
    """(2^k, k) float: row x has spin i = -1 when bit i of x is set."""
    x = np.arange(1 << k, dtype=np.int64)[:, None]
    return (1 - 2 * ((x >> np.arange(k)) & 1)).astype(np.float64)


def enumerate_ground(instance: Instance, max_spins: int = MAX_SPINS) -> dict:
    """Lowest energy, one ground state and the number of ground states, by enumeration.

    The last n - 18 spins run through a Gray code (one spin flips per step);
    for each of their states the first 18 are scored at once as a vector, so
    the cost is about 2^n / 1e8 seconds (half that without fields, where
    s and -s tie and only one of each pair is scored).

    Examples
    --------
    >>> tri = Instance(edges=[[0, 1], [0, 2], [1, 2]], J=[1.0, 1.0, 1.0])
    >>> r = enumerate_ground(tri)
    >>> r["energy"], r["count"]
    (-1.0, 6)
    """
    n = instance.n
    if n > max_spins:
        raise ResourceError(f"enumerating {n} spins means 2^{n} = {2.0 ** n:.3g} states, about "
                            f"{duration(enumeration_seconds(n))} here; enumeration stops at {max_spins} spins")
    if n == 0:
        return {"energy": 0.0, "state": np.zeros(0, np.int8), "count": 1, "details": {"states": 1}}
    k = min(n, LOW_BITS)
    H = n - k
    Jd = np.zeros((n, n))
    e = instance.edges
    Jd[e[:, 0], e[:, 1]] = instance.J
    Jd = Jd + Jd.T
    h = instance.h
    S = _states(k)
    V = S @ h[:k] + 0.5 * np.einsum("ri,ri->r", S @ Jd[:k, :k], S)
    C = Jd[k:, :k] @ S.T  # (H, 2^k): field of the low spins on each high spin
    sH = np.ones(H)
    V += C.sum(axis=0)
    JH, hH = Jd[k:, k:], h[k:]
    EH = float(hH.sum() + 0.5 * JH.sum())
    tol = tolerance(instance)
    best, count, best_high, best_low = np.inf, 0, sH.copy(), 0
    # without fields s and -s tie: keep the last spin at +1 and count every state twice
    mirror = H > 0 and not instance.has_fields
    for t in range(1 << (H - mirror)):
        if t:
            b = (t & -t).bit_length() - 1
            old = sH[b]
            V -= (2 * old) * C[b]
            EH -= 2 * old * (hH[b] + JH[b] @ sH)
            sH[b] = -old
        low = float(V.min())
        m = low + EH
        if m < best - tol:
            best, count = m, int(np.count_nonzero(V <= low + tol))
            best_high, best_low = sH.copy(), int(np.argmin(V))
        elif m <= best + tol:
            count += int(np.count_nonzero(V <= best - EH + tol))
    state = np.concatenate([S[best_low], best_high]).astype(np.int8)
    return {"energy": instance.energy(state), "state": state, "count": count * (1 + mirror),
            "details": {"states": 2 ** n, "counting": "states within rounding of the minimum, "
                        "a state and its global flip counted separately"}}


# -------------------------------------------------------- tree decomposition
def _family_orders(instance: Instance) -> list[list[int]]:
    """Elimination orders known to be good for the instance's graph family, as spin indices."""
    import dwave.graphs as dg

    from .graphs import _chimera_args, parse_spec

    try:
        family, args, _ = parse_spec(instance.graph)
        if family == "chimera":
            orders = [dg.chimera_elimination_order(*_chimera_args(args))]
        elif family == "pegasus":
            orders = [dg.pegasus_elimination_order(int(args[0]))]
        elif family == "zephyr":
            orders = [dg.zephyr_elimination_order(int(args[0]), int(args[1]) if len(args) > 1 else 4)]
        else:
            orders = []
    except (InputError, ValueError, TypeError, IndexError):
        orders = []
    index = {lab: k for k, lab in enumerate(instance.labels)}
    out = [[index[x] for x in order if x in index] for order in orders]
    coords = None
    if instance.graph.startswith(("square:", "cubic:")):
        from .graphs import build_graph

        try:
            topo = build_graph(instance.graph)
            coords = {lab: c for lab, c in zip(topo.labels, topo.coords.tolist())}
        except Exception:  # noqa: BLE001 - a file graph that moved: no family order
            coords = None
    if coords is not None and all(lab in coords for lab in instance.labels):
        c = np.asarray([coords[lab] for lab in instance.labels])
        for axis in range(c.shape[1]):  # sweep along each axis in turn (np.lexsort: last key first)
            others = [c[:, d] for d in range(c.shape[1]) if d != axis]
            out.append(np.lexsort(others[::-1] + [c[:, axis]]).tolist())
    return [o for o in out if len(o) == instance.n]


def _adjacency(instance: Instance) -> list[set]:
    adj = [set() for _ in range(instance.n)]
    for i, j in instance.edges[instance.J != 0].tolist():
        adj[i].add(j)
        adj[j].add(i)
    return adj


def order_width(adj: list[set], order, cap: int) -> int:
    """Width of an elimination order; stops early (returning a value > cap) once it exceeds ``cap``."""
    adj = [set(a) for a in adj]
    width = 0
    for v in order:
        nb = adj[v]
        if len(nb) > cap:
            return len(nb)
        width = max(width, len(nb))
        for u in nb:
            adj[u].discard(v)
            adj[u].update(w for w in nb if w != u)
        adj[v] = set()
    return width


def min_degree_order(adj: list[set], cap: int):
    """Greedy minimum-degree elimination order and its width, or (None, lower estimate) above ``cap``."""
    import heapq

    adj = [set(a) for a in adj]
    heap = [(len(a), v) for v, a in enumerate(adj)]
    heapq.heapify(heap)
    done = [False] * len(adj)
    order, width = [], 0
    while heap:
        d, v = heapq.heappop(heap)
        if done[v] or d != len(adj[v]):
            continue
        if d > cap:
            return None, d
        width = max(width, d)
        nb = adj[v]
        for u in nb:
            adj[u].discard(v)
            adj[u].update(w for w in nb if w != u)
            heapq.heappush(heap, (len(adj[u]), u))
        done[v] = True
        adj[v] = set()
        order.append(v)
    return order, width


def tree_plan(instance: Instance, memory_limit: float = 4e9) -> dict:
    """Width, elimination order and cost estimate for :func:`tree_ground`.

    Candidate orders: those known for the graph family (Chimera, Pegasus,
    Zephyr, lattice sweeps), index order, and a greedy minimum-degree order.
    Each is abandoned as soon as its width passes the solver's limit, so
    wide graphs are refused in well under a second.

    >>> tree_plan(Instance(edges=[[0, 1], [1, 2], [0, 2]], J=[1.0, 1.0, 1.0]))["width"]
    2
    """
    n = instance.n
    adj = _adjacency(instance)
    cap = TREE_MAX_WIDTH
    best = (cap + 1, None, "")
    for cand, how in [(o, "graph-family order") for o in _family_orders(instance)] + [(range(n), "index order")]:
        w = order_width(adj, cand, cap)
        if w < best[0]:
            best = (w, list(cand), how)
    order, w = min_degree_order(adj, min(cap, best[0] - 1))
    if order is not None:
        best = (w, order, "minimum-degree order")
    width, order, how = best
    if order is None:
        how = "every order tried"
    cells = max(n, 1) * 2.0 ** width
    seconds, memory = cells * TREE_SECONDS_PER_CELL, cells * TREE_BYTES_PER_CELL
    ok = order is not None and memory <= memory_limit
    return {"width": width, "order": order, "order_from": how, "seconds": seconds, "bytes": memory, "feasible": ok}


def tree_ground(instance: Instance, plan: dict | None = None, count_limit: int = 64,
                memory_limit: float = 4e9) -> dict:
    """Ground state by tree decomposition, counting ground states up to ``count_limit``.

    Raises ResourceError when the width or the memory estimate is too large.

    >>> ring = Instance(edges=[[0, 1], [1, 2], [2, 3], [0, 3]], J=[1.0, 1.0, 1.0, 1.0])
    >>> tree_ground(ring)["energy"]
    -4.0
    """
    import dimod
    from dwave.samplers import TreeDecompositionSolver

    plan = plan or tree_plan(instance, memory_limit)
    if not plan["feasible"]:
        above = ">= " if plan["order"] is None else ""
        raise ResourceError(f"tree decomposition needs width {above}{plan['width']} here ({plan['order_from']}): "
                            f"about {plan['bytes'] / 1e9:.3g} GB and {duration(plan['seconds'])}; the limit is "
                            f"width {TREE_MAX_WIDTH} and {memory_limit / 1e9:.3g} GB")
    n = instance.n
    if n < 2 or not np.any(instance.J):
        return enumerate_ground(instance) if n <= MAX_SPINS else _fields_only(instance)
    bqm = dimod.BinaryQuadraticModel.from_numpy_vectors(
        instance.h, (instance.edges[:, 0], instance.edges[:, 1], instance.J), 0.0, dimod.SPIN)
    ss = TreeDecompositionSolver().sample(bqm, num_reads=count_limit, elimination_order=plan["order"])
    states = np.empty((len(ss), n), dtype=np.int8)
    states[:, np.asarray(list(ss.variables), dtype=np.int64)] = ss.record.sample
    energies = instance.energies(states)
    best = float(energies.min())
    hits = int(np.count_nonzero(energies <= best + tolerance(instance)))
    return {"energy": best, "state": states[int(np.argmin(energies))], "count": hits if hits < len(ss) else None,
            "details": {"width": plan["width"], "order_from": plan["order_from"],
                        **({} if hits < len(ss) else {"ground_states_at_least": hits})}}


def _fields_only(instance: Instance) -> dict:
    state = np.where(instance.h > 0, -1, 1).astype(np.int8)
    return {"energy": instance.energy(state), "state": state,
            "count": int(2 ** int(np.sum(instance.h == 0))), "details": {}}


# ------------------------------------------------------------------------ MIP
def _short_cycles(n: int, edges: np.ndarray, limit: int) -> list[list[int]]:
    """Edge-index lists of triangles and 4-cycles (at most ``limit`` of them)."""
    eid = {(int(i), int(j)): k for k, (i, j) in enumerate(edges.tolist())}
    adj = [set() for _ in range(n)]
    for i, j in edges.tolist():
        adj[i].add(j)
        adj[j].add(i)

    def key(a, b):
        return eid[(a, b) if a < b else (b, a)]

    out = []
    for a, b in eid:
        for c in adj[a] & adj[b]:
            if c > b:
                out.append([key(a, b), key(b, c), key(a, c)])
    for a in range(n):
        for c in range(a + 1, n):
            common = sorted(adj[a] & adj[c])
            for b, d in itertools.combinations(common, 2):
                out.append([key(a, b), key(b, c), key(c, d), key(a, d)])
                if len(out) >= limit:
                    return out
    return out


def mip_ground(instance: Instance, time_limit: float = 60.0, incumbent: np.ndarray | None = None,
               cycle_limit: int = 20000) -> dict:
    """Minimise the energy as a mixed-integer program (HiGHS through scipy's milp).

    Spins are binaries x (s = 2x - 1) and every coupling gets z = x_i XOR x_j
    (s_i s_j = 1 - 2z) bounded by the two linear constraints that matter for
    its sign; triangles and 4-cycles add odd-cycle inequalities.  The result is
    ``proven`` only when HiGHS's lower bound reaches the best state found
    (its own or ``incumbent``); with integer couplings and fields a bound within
    1 of it is enough, since energies are then integers.

    >>> tri = Instance(edges=[[0, 1], [0, 2], [1, 2]], J=[1.0, 1.0, 1.0])
    >>> r = mip_ground(tri, time_limit=10)
    >>> r["energy"], r["details"]["proven"]
    (-1.0, True)
    """
    import scipy.sparse as sp
    from scipy.optimize import Bounds, LinearConstraint, milp

    n, J, h = instance.n, instance.J, instance.h
    keep = J != 0
    E, J = instance.edges[keep], J[keep]
    m = len(E)
    i, j, z = E[:, 0], E[:, 1], n + np.arange(m)
    rows, cols, vals, lo, hi = [], [], [], [], []

    def add(idx_cols, coefs, l, u):
        r = len(lo)
        rows.extend([r] * len(idx_cols))
        cols.extend(idx_cols)
        vals.extend(coefs)
        lo.append(l)
        hi.append(u)

    for k in range(m):
        if J[k] > 0:   # antiferromagnetic: z wants to be 1, so bound it above
            add([z[k], i[k], j[k]], [1, -1, -1], -np.inf, 0)
            add([z[k], i[k], j[k]], [1, 1, 1], -np.inf, 2)
        else:          # ferromagnetic: z wants to be 0, so bound it below
            add([z[k], i[k], j[k]], [1, -1, 1], 0, np.inf)
            add([z[k], i[k], j[k]], [1, 1, -1], 0, np.inf)
    cycles = _short_cycles(n, E, cycle_limit) if m else []
    for cyc in cycles:
        L = len(cyc)
        for r in range(1, L + 1, 2):
            for F in itertools.combinations(range(L), r):
                add([z[c] for c in cyc], [1 if q in F else -1 for q in range(L)], -np.inf, r - 1)
    c = np.concatenate([2 * h, -2 * J])
    const = float(-h.sum() + J.sum())
    A = sp.csr_matrix((vals, (rows, cols)), shape=(len(lo), n + m))
    ub = np.ones(n + m)
    if not np.any(h) and n:
        ub[0] = 0  # without fields s and -s tie: fix one spin
    res = milp(c, constraints=LinearConstraint(A, lo, hi) if len(lo) else None,
               integrality=np.r_[np.ones(n), np.zeros(m)], bounds=Bounds(np.zeros(n + m), ub),
               options={"time_limit": max(float(time_limit), 0.1), "mip_rel_gap": 0.0, "disp": False})
    best_state, best = None, np.inf
    if res.x is not None:
        best_state = np.where(res.x[:n] > 0.5, 1, -1).astype(np.int8)
        best = instance.energy(best_state)
    if incumbent is not None:
        e_inc = instance.energy(incumbent)
        if e_inc < best:
            best, best_state = e_inc, np.asarray(incumbent, dtype=np.int8)
    bound = getattr(res, "mip_dual_bound", None)
    bound = -np.inf if bound is None or not np.isfinite(bound) else float(bound) + const
    if res.status == 0 and res.x is not None:
        bound = max(bound, float(res.fun) + const)
    integral = bool(np.all(J == np.round(J)) and np.all(h == np.round(h)))
    tol = tolerance(instance)
    proven = best_state is not None and (bound >= best - tol or (integral and bound > best - 1 + 1e-6))
    return {"energy": float(best), "state": best_state, "count": None,
            "details": {"proven": bool(proven), "lower_bound": bound, "gap": float(best - bound),
                        "solver_status": res.message, "cycle_inequalities": len(cycles),
                        "integral_energies": integral}}
