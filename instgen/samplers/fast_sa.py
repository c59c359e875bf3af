"""Fast simulated annealing: the same Metropolis dynamics as ``sa``, compiled.

``fast-sa`` follows an explicit :class:`Schedule` exactly as the ``sa``
adapter does (beta of sweep t is ``schedule.betas()[t]``, one sweep is one
proposed flip per spin, Metropolis acceptance min(1, exp(-beta dE)), random
initial states), so its final-energy distribution is the reference's; it is
only faster:

* the graph is laid out once (a symmetric CSR adjacency, cached per graph) and
  every read of a candidate runs inside one compiled call;
* in sequential order 64 replicas advance together in one vectorised loop,
  each with its own random numbers (replicas are independent), in single
  precision: couplings, local fields and acceptance probabilities are float32
  (about 1e-7 relative; fields are recomputed from scratch every 64 sweeps so
  rounding cannot drift) and uniforms lie on a 2^-31 grid, so acceptance
  probabilities below about 5e-10 count as zero.  Couplings are scaled by a
  power of two into float32's range (and the betas by its inverse), and the
  energies handed back are recomputed in double precision from the states;
* in random order each replica runs on its own, with acceptance probabilities
  from a table built once per sweep when all couplings and fields are whole
  multiples of one step (pm1, int:K, levels on a grid);
* :meth:`FastAnnealing.run_many` scores several candidates on one graph in one
  call, which is what the breeding loop wants;
* kernels are compiled once and cached on disk (numba ``cache=True``), so a new
  process loads them instead of compiling; :func:`warm_up` pays that load up
  front (for example in a worker initialiser).

Random order works in double precision: acceptance probabilities exact to about
1e-14 relative, uniforms on a 2^-52 grid.

>>> from instgen.make import make_instance
>>> from instgen.samplers import get_sampler, Schedule
>>> inst = make_instance("chimera:1", "gaussian", seed=3)
>>> batch = get_sampler("fast-sa").run(inst, Schedule(sweeps=100), reads=4, seed=1)
>>> batch.states.shape, batch.spin_updates
((4, 8), 3200)
"""

from __future__ import annotations

import dataclasses
import functools
import time
from collections import OrderedDict
from collections.abc import Sequence

import numpy as np

from ..errors import InputError
from ..instance import Instance
from ..records import SampleBatch
from ..seeds import derive_seed
from . import _lanes
from .base import Sampler
from .schedule import Schedule

ORDERS = ("sequential", "random")
#: Random order tabulates acceptance when the table has at most max(MAX_TABLE, n) entries
#: (it is rebuilt every sweep, so it must stay small next to the n proposals of a sweep).
MAX_TABLE = 64
_LAYOUTS: OrderedDict = OrderedDict()
_LAYOUT_CACHE_SIZE = 8


# ----------------------------------------------------------------- shared set-up
@dataclasses.dataclass(frozen=True)
class Layout:
    """A graph laid out for the kernels: CSR rows with neighbours sorted by index.

    ``perm[k]`` is the edge behind CSR slot k, so ``J[perm]`` are the CSR weights
    (the order :attr:`Instance.adjacency` uses).  ``uindptr`` and ``uindices`` are
    unsigned copies for kernels that index with them.
    """

    n: int
    edges: np.ndarray
    indptr: np.ndarray
    indices: np.ndarray
    perm: np.ndarray
    ei: np.ndarray
    ej: np.ndarray
    uindptr: np.ndarray
    uindices: np.ndarray


def layout(instance: Instance) -> Layout:
    """The cached :class:`Layout` of an instance's graph (couplings play no part)."""
    key = (instance.n, instance.edges.tobytes())
    hit = _LAYOUTS.get(key)
    if hit is not None:
        _LAYOUTS.move_to_end(key)
        return hit
    e = instance.edges.astype(np.int64)
    m = e.shape[0]
    rows = np.concatenate([e[:, 0], e[:, 1]])
    cols = np.concatenate([e[:, 1], e[:, 0]])
    eid = np.concatenate([np.arange(m), np.arange(m)])
    order = np.lexsort((cols, rows))
    indptr = np.zeros(instance.n + 1, dtype=np.int64)
    np.cumsum(np.bincount(rows, minlength=instance.n), out=indptr[1:])
    indices = cols[order].copy()
    lay = Layout(instance.n, instance.edges.copy(), indptr, indices, eid[order].copy(),
                 e[:, 0].copy(), e[:, 1].copy(), indptr.astype(np.uint64), indices.astype(np.uint32))
    _LAYOUTS[key] = lay
    if len(_LAYOUTS) > _LAYOUT_CACHE_SIZE:
        _LAYOUTS.popitem(last=False)
    return lay


def stack(instances: Sequence[Instance]) -> tuple[Layout, np.ndarray, np.ndarray]:
    """Layout of the common graph and the (C, m) couplings and (C, n) fields.

    Raises InputError unless every instance has the same spins and edges.
    """
    if isinstance(instances, Instance):
        instances = [instances]
    instances = list(instances)
    if not instances or not all(isinstance(x, Instance) for x in instances):
        raise InputError("give a non-empty list of Instance objects (candidates on one graph)")
    first = instances[0]
    if first.n == 0:
        raise InputError("there is nothing to anneal: the instance has no spins")
    for k, inst in enumerate(instances[1:], start=1):
        if inst.n != first.n or not np.array_equal(inst.edges, first.edges):
            raise InputError(f"all candidates must share one graph: candidate {k} has different spins or edges "
                             "from candidate 0; score it in a separate call")
    lay = layout(first)
    J = np.array([x.J for x in instances], dtype=np.float64).reshape(len(instances), first.m)
    h = np.array([x.h for x in instances], dtype=np.float64).reshape(len(instances), first.n)
    return lay, J, h


@functools.lru_cache(maxsize=64)
def _betas(schedule: Schedule) -> np.ndarray:
    b = np.ascontiguousarray(schedule.betas(), dtype=np.float64)
    b.setflags(write=False)
    return b


def betas_of(schedule: Schedule) -> np.ndarray:
    """``schedule.betas()`` as a float64 array, computed once per schedule."""
    return _betas(schedule)


def schedule_record(schedule: Schedule) -> dict:
    """The schedule dict stored with every batch (the same keys as the ``sa`` adapter)."""
    return {**schedule.to_dict(), "kind": "inverse temperature per sweep"}


def check_request(sampler: Sampler, schedule, reads, options: dict) -> dict:
    """The checks :meth:`Sampler.run` makes, for the many-candidate entry points."""
    unknown = set(options) - set(sampler.options)
    if unknown:
        valid = ", ".join(sorted(sampler.options)) or "none"
        raise InputError(f"sampler {sampler.name!r} has no option(s) {sorted(unknown)}; valid: {valid}")
    if isinstance(reads, bool) or not isinstance(reads, (int, np.integer)) or reads < 1:
        raise InputError(f"reads must be a positive integer, got {reads!r}")
    if not isinstance(schedule, Schedule):
        raise InputError(f"sampler {sampler.name!r} needs an explicit Schedule")
    return {**sampler.options, **options}


def candidate_seeds(seeds, count: int, name: str) -> list[int]:
    """Per-candidate kernel seeds, derived exactly as :meth:`Sampler.run` derives its seed."""
    if seeds is None or isinstance(seeds, (int, np.integer, np.random.SeedSequence, np.random.Generator)):
        seeds = [seeds] * count
    seeds = list(seeds)
    if len(seeds) != count:
        raise InputError(f"{len(seeds)} seeds given for {count} candidates; give one per candidate")
    return [derive_seed(0 if s is None else s, "sampler", name) for s in seeds]


def to_batches(name, states, energies, schedule, reads, seeds, seconds, options) -> list[SampleBatch]:
    """One :class:`SampleBatch` per candidate; ``seconds`` is shared out evenly."""
    sched = schedule_record(schedule)
    share = seconds / len(seeds)
    updates = int(reads) * schedule.sweeps * states.shape[2]
    return [SampleBatch(sampler=name, states=states[c], energies=energies[c], schedule=dict(sched),
                        reads=int(reads), seed=int(seeds[c]), seconds=share, spin_updates=updates,
                        options=dict(options))
            for c in range(len(seeds))]


def energies_of(lay: Layout, J: np.ndarray, h: np.ndarray, states: np.ndarray) -> np.ndarray:
    """(C, R) energies of (C, R, n) states, computed from scratch in compiled code."""
    out = np.empty(states.shape[:2])
    _lanes.batch_energies(lay.ei, lay.ej, J, h, states, out)
    return out


def common_step(J: np.ndarray, h: np.ndarray) -> float:
    """The step every coupling and field is a whole multiple of, or 0.0 if there is none.

    >>> common_step(np.array([[1.0, -3.0]]), np.array([[0.0, 2.0]]))
    1.0
    """
    vals = np.abs(np.concatenate([J.ravel(), h.ravel()]))
    nz = vals[vals > 0]
    if nz.size == 0:
        return 1.0
    step = float(nz.min())
    ratio = nz / step
    return step if np.allclose(ratio, np.round(ratio), rtol=0, atol=1e-9) else 0.0


def field_bound(lay: Layout, J: np.ndarray, h: np.ndarray) -> np.ndarray:
    """(C, n): sum of |J| over each spin's couplings plus |h| (the largest possible |local field|)."""
    out = np.abs(h).astype(np.float64)
    for c in range(J.shape[0]):
        a = np.abs(J[c])
        out[c] += np.bincount(lay.ei, weights=a, minlength=lay.n) + np.bincount(lay.ej, weights=a, minlength=lay.n)
    return out


# ----------------------------------------------------------------- the sampler
class FastAnnealing(Sampler):
    """Compiled single-spin Metropolis simulated annealing (see the module docstring).

    Options
    -------
    order : {"sequential", "random"}
        Visit spins in index order each sweep (64 replicas per vector loop), or
        make n proposals at uniformly random spins per sweep (one replica at a time).

    Examples
    --------
    >>> from instgen.make import make_instance
    >>> from instgen.samplers import Schedule
    >>> base = make_instance("chimera:2", "gaussian", seed=1)
    >>> kids = [base.with_couplings(base.J * g) for g in (1.0, -1.0, 0.5)]
    >>> batches = FastAnnealing().run_many(kids, Schedule(sweeps=50), reads=8, seeds=[1, 2, 3])
    >>> [b.states.shape for b in batches]
    [(8, 32), (8, 32), (8, 32)]
    """

    name = "fast-sa"
    options = {"order": "sequential"}

    def _run(self, instance, schedule, reads, seed, options):
        lay, J, h = stack([instance])
        states, energies = self._anneal(lay, J, h, schedule, reads, [seed], options)
        return {"states": states[0], "energies": energies[0],
                "spin_updates": reads * schedule.sweeps * instance.n, "schedule": schedule_record(schedule)}

    def run_many(self, instances: Sequence[Instance], schedule: Schedule, reads: int = 100, seeds=None,
                 **options) -> list[SampleBatch]:
        """Anneal several candidates on one graph in one compiled call.

        Parameters
        ----------
        instances : sequence of Instance
            Candidates with the same spins and edges (couplings and fields differ).
        schedule : Schedule
        reads : int
            Reads per candidate.
        seeds : sequence, int or None
            One seed per candidate; a single value gives every candidate the same
            seed (common random numbers).  Candidate c's batch equals
            ``self.run(instances[c], schedule, reads, seeds[c])``.
        **options
            As for :meth:`run`.

        Returns
        -------
        list of SampleBatch
            In candidate order.  Energies are recomputed from the final states in
            compiled code (not tracked), and ``seconds`` is the call's wall time
            shared evenly.

        Examples
        --------
        >>> from instgen.make import make_instance
        >>> from instgen.samplers import Schedule
        >>> inst = make_instance("chimera:1", "pm1", seed=2)
        >>> out = FastAnnealing().run_many([inst, inst], Schedule(sweeps=20), reads=4, seeds=[5, 5])
        >>> bool((out[0].states == out[1].states).all())
        True
        """
        opts = check_request(self, schedule, reads, options)
        lay, J, h = stack(instances)
        seeds = candidate_seeds(seeds, J.shape[0], self.name)
        t0 = time.perf_counter()
        states, energies = self._anneal(lay, J, h, schedule, int(reads), seeds, opts)
        seconds = time.perf_counter() - t0
        return to_batches(self.name, states, energies, schedule, reads, seeds, seconds, opts)

    def _anneal(self, lay, J, h, schedule, reads, seeds, options):
        order = options["order"]
        if order not in ORDERS:
            raise InputError(f"option order must be one of: {', '.join(ORDERS)}; got {order!r}")
        C = J.shape[0]
        weights = np.ascontiguousarray(J[:, lay.perm])
        h = np.ascontiguousarray(h)
        seeds_arr = np.asarray(seeds, dtype=np.int64)
        out = np.empty((C, reads, lay.n), dtype=np.int8)
        betas = betas_of(schedule)
        if order == "sequential":
            # Single precision: scale couplings and fields by a power of two (exact) into
            # float32's range and the betas by its inverse, so beta * dE is unchanged.
            top = max(float(np.abs(weights).max(initial=0.0)), float(np.abs(h).max(initial=0.0)))
            scale = 2.0 ** -np.floor(np.log2(top)) if top > 0 and not 2.0 ** -60 <= top < 2.0 ** 60 else 1.0
            if scale != 1.0:
                betas = betas / scale
                betas.setflags(write=False)
            _lanes.anneal_lanes(lay.indptr, lay.indices, (weights * scale).astype(np.float32),
                                (h * scale).astype(np.float32), betas, reads, seeds_arr, out)
        else:
            step, top = common_step(J, h), 0
            if step > 0:
                top = int(np.ceil(field_bound(lay, J, h).max() / step - 1e-9))
                if top > max(MAX_TABLE, lay.n):
                    step, top = 0.0, 0
            _lanes.anneal_random_order(lay.indptr, lay.indices, weights, h, betas, reads, seeds_arr,
                                       float(step), int(top), out)
        return out, energies_of(lay, J, h, out)


def warm_up() -> None:
    """Load (or, the first time on a machine, compile) every fast-sa kernel now.

    Compiled code is cached on disk next to the package, or in the user's cache
    directory when that is read-only, so this costs well under a second in a new
    process once the cache exists.

    >>> warm_up()
    """
    tri = Instance(edges=[[0, 1], [0, 2], [1, 2]], J=[1.0, -1.0, 1.0], h=[0.5, 0.0, 0.0])
    s = FastAnnealing()
    s.run(tri, Schedule(sweeps=2), reads=1, seed=0)
    s.run(tri, Schedule(sweeps=2), reads=1, seed=0, order="random")
