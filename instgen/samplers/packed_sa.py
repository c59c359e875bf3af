"""Multi-spin-coded simulated annealing for whole-number couplings (``packed-sa``).

Sixty-four replicas of the same candidate share each 64-bit machine word: bit l
of word i is replica l's spin i.  A spin update works on all 64 replicas at
once with bitwise operations: which couplings of spin i are unsatisfied is one
XOR per neighbour, and their weighted count (the local field, in bit-sliced
form: one word per binary digit) is built with bitwise adders.  The flip cost
is dE = 2 (W - 2K), where K is that count and W the sum of |J| and |h| at the
spin, so couplings and fields must be whole numbers; anything else is refused
with a pointer to ``fast-sa``.  The schedule, the sweep (one proposal per spin,
sequential or random order), the Metropolis rule and the random initial states
are those of the ``sa`` adapter.

Random numbers, and what sharing them does
------------------------------------------
The replicas in one word are updated together, so they share the order in which
spins are visited (the same for everybody in sequential order anyway; in random
order, one random sequence per word).  How they share the random numbers of the
acceptance test is chosen with the ``randomness`` option:

``"independent"`` (default)
    Every replica gets its own random bits: the 64 uniforms of a spin update are
    compared with their replicas' acceptance probabilities bit by bit, most
    significant first, drawing a fresh 64-bit word per binary digit until every
    replica is decided (each digit decides about half of the rest, so about
    log2(64) + 1 = 7 words when all 64 need luck).  Nothing is shared: the 64
    replicas are independent Metropolis chains, exactly like 64 separate reads.
    This costs about twice the time of ``"shared"``.

``"shared"`` (faster)
    One 64-bit uniform u is drawn per word and spin update, and replica l uses
    u_l = frac(u + l/64).  Each u_l is exactly uniform, so **each replica's own
    dynamics is still exact Metropolis** and its final-energy distribution is
    unchanged.  What changes is the joint behaviour: the 64 replicas are
    correlated (two replicas in the same situation at the same spin make
    related choices), so the reads of one word are not 64 independent samples,
    and a success probability estimated from them has a larger spread than the
    binomial formula says: the effective number of samples is smaller than the
    read count (measured on small test instances: the variance of ground-state
    hits per word was 1.1 to 1.4 times the binomial value, so 64 shared reads
    were worth roughly 45 to 60 independent ones).  Mitigations: replicas start from independent random states;
    the offsets l/64 spread the 64 uniforms evenly instead of repeating one value,
    so two replicas that reach the same state do not move in lock step (with a
    plain shared uniform they would stay identical forever); and different words
    draw from independent streams.  Use ``"independent"`` for success
    probabilities and time-to-solution; ``"shared"`` suits quick screening.

Acceptance probabilities are held as 64-bit fixed-point numbers (error below 2^-64).

>>> from instgen.make import make_instance
>>> from instgen.samplers import get_sampler, Schedule
>>> inst = make_instance("chimera:1", "pm1", seed=3)
>>> batch = get_sampler("packed-sa").run(inst, Schedule(sweeps=100), reads=64, seed=1)
>>> batch.states.shape, batch.spin_updates
((64, 8), 51200)
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from ..instance import Instance
from . import _packed_kernels as _pk
from .fast_sa import ORDERS, FastAnnealing, betas_of, energies_of, field_bound
from .schedule import Schedule

RANDOMNESS = ("independent", "shared")


def packed_arrays(lay, J: np.ndarray, h: np.ndarray) -> dict:
    """The kernel's integer arrays for (C, m) couplings and (C, n) fields.

    Raises InputError when a value is not a whole number or a spin's sum of
    |J| and |h| does not fit the bit planes.
    """
    for what, vals in (("coupling", J), ("field", h)):
        bad = np.flatnonzero(vals.ravel() != np.round(vals.ravel()))
        if bad.size:
            raise InputError(f"packed-sa needs whole-number couplings and fields, but a {what} is "
                             f"{vals.ravel()[bad[0]]:g}; use fast-sa for these values")
    W = field_bound(lay, J, h)
    limit = 2 ** _pk.MAX_PLANES - 1
    if W.max(initial=0) > limit:
        c, i = np.unravel_index(int(np.argmax(W)), W.shape)
        raise InputError(f"packed-sa handles a sum of |J| and |h| up to {limit} per spin, but spin {i} "
                         f"of candidate {c} has {W[c, i]:g}; use fast-sa for this instance")
    Jc = J[:, lay.perm]
    wmax = int(W.max(initial=1))
    planes = max(1, wmax.bit_length())
    unit = bool(np.all(np.abs(Jc) == 1) and np.all(np.abs(h) <= 1) and planes <= _pk.UNIT_PLANES)
    c = np.ascontiguousarray  # one memory layout, so the kernel keeps one compiled signature
    return {
        "cpos": c(np.where(Jc > 0, _pk.ONES, np.uint64(0)), dtype=np.uint64),
        "wt": c(np.abs(Jc), dtype=np.int64),
        "hpos": c(np.where(h > 0, _pk.ONES, np.uint64(0)), dtype=np.uint64),
        "hw": c(np.abs(h), dtype=np.int64),
        "W": c(np.rint(W), dtype=np.int64),
        "planes": planes,
        "unit": unit,
    }


def suits(rules) -> bool:
    """Whether every instance drawn under these coupling rules has whole-number values.

    For choosing a surrogate from an alphabet: ``"packed-sa"`` when this is true,
    ``"fast-sa"`` otherwise.  (A spin whose |J| and |h| add up to more than 255 is
    still refused at run time.)

    >>> from instgen.couplings import CouplingRules
    >>> suits(CouplingRules.make("int:3", "pm1")), suits(CouplingRules.make("gaussian"))
    (True, False)
    """
    for alphabet, kind in ((rules.couplings, "couplings"), (rules.fields, "fields")):
        if not alphabet.discrete:
            return False
        vals = rules.legalise(np.asarray(alphabet.values, dtype=float), kind)
        if not np.array_equal(vals, np.round(vals)):
            return False
    return True


class PackedAnnealing(FastAnnealing):
    """Simulated annealing with 64 replicas per machine word (see the module docstring).

    ``run`` and ``run_many`` are :class:`FastAnnealing`'s; only the compiled anneal
    differs.  Reads are best chosen as multiples of 64 (the rest of the last word
    is discarded).

    Options
    -------
    order : {"sequential", "random"}
        Spins in index order, or n uniformly random picks per sweep (one
        sequence shared by the 64 replicas of a word).
    randomness : {"independent", "shared"}
        Own random bits per replica, or one uniform per word spread by fixed
        offsets (faster; replicas correlated, see the module docstring).

    Examples
    --------
    >>> from instgen.make import make_instance
    >>> from instgen.samplers import Schedule
    >>> base = make_instance("chimera:2", "pm1", seed=1)
    >>> kids = [base.with_couplings(-base.J), base]
    >>> out = PackedAnnealing().run_many(kids, Schedule(sweeps=50), reads=64, seeds=[1, 2])
    >>> [b.states.shape for b in out]
    [(64, 32), (64, 32)]
    """

    name = "packed-sa"
    options = {"order": "sequential", "randomness": "independent"}

    def _anneal(self, lay, J, h, schedule, reads, seeds, options):
        if options["order"] not in ORDERS:
            raise InputError(f"option order must be one of: {', '.join(ORDERS)}; got {options['order']!r}")
        if options["randomness"] not in RANDOMNESS:
            raise InputError(f"option randomness must be one of: {', '.join(RANDOMNESS)}; "
                             f"got {options['randomness']!r}")
        arrs = packed_arrays(lay, J, h)
        out = np.empty((J.shape[0], reads, lay.n), dtype=np.int8)
        _pk.anneal_packed(lay.uindptr, lay.uindices, arrs["cpos"], arrs["wt"], arrs["hpos"], arrs["hw"],
                          arrs["W"], arrs["planes"], arrs["unit"], betas_of(schedule), reads,
                          np.asarray(seeds, dtype=np.int64), options["order"] == "random",
                          options["randomness"] == "shared", out)
        return out, energies_of(lay, J, h, out)


def warm_up() -> None:
    """Load (or compile, the first time on a machine) the packed kernel now.

    >>> warm_up()
    """
    tri = Instance(edges=[[0, 1], [0, 2], [1, 2]], J=[1.0, -1.0, 1.0], h=[1.0, 0.0, 0.0])
    PackedAnnealing().run(tri, Schedule(sweeps=2), reads=1, seed=0)
