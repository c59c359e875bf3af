"""Random restarts of steepest descent (dwave-samplers) as a reference solver.

Each read keeps the best of ``restarts`` descents, each from a fresh random
state and ending in a local minimum (no single flip lowers the energy).  The
number of descents per read is the ``restarts`` option, else the sweeps of the
schedule given (one descent per sweep of effort), else 1.  ``spin_updates``
counts the flips the descents actually made.

>>> from instgen.make import make_instance
>>> from instgen.samplers import get_sampler
>>> inst = make_instance("chimera:1", "pm1", seed=3)
>>> get_sampler("descent").run(inst, reads=5, seed=1, restarts=4).states.shape
(5, 8)
"""

from __future__ import annotations

import numpy as np

from ..seeds import derive_seed
from .base import Sampler, index_bqm, index_states
from .tabu import effort

#: Largest number of states held at once (reads x restarts x n), to bound memory.
_CHUNK_CELLS = 1 << 24


class RestartDescent(Sampler):
    """Best of several steepest descents per read.

    Options
    -------
    restarts : int, optional
        Descents per read.
    """

    name = "descent"
    options = {"restarts": None}
    uses_schedule = False
    #: What a "sweep" of effort means for this solver in time-to-solution figures.
    effort_unit = "descents"
    #: The option that overrides the effort taken from the schedule.
    effort_option = "restarts"

    def _run(self, instance, schedule, reads, seed, options):
        from dwave.samplers import SteepestDescentSolver

        restarts = effort(options, schedule, "restarts", 1)
        n = instance.n
        bqm = index_bqm(instance)
        per_chunk = max(1, _CHUNK_CELLS // max(1, restarts * n))
        states = np.empty((reads, n), dtype=np.int8)
        flips = 0
        for chunk, start in enumerate(range(0, reads, per_chunk)):
            rows = min(per_chunk, reads - start)
            ss = SteepestDescentSolver().sample(bqm, num_reads=rows * restarts,
                                                seed=derive_seed(seed, "chunk", chunk))
            found = index_states(ss, n).reshape(rows, restarts, n)
            energies = np.asarray(ss.record.energy, dtype=np.float64).reshape(rows, restarts)
            best = np.argmin(energies, axis=1)
            states[start:start + rows] = found[np.arange(rows), best]
            flips += int(np.sum(ss.record.num_steps))
        return {"states": states, "spin_updates": flips,
                "schedule": {"kind": "steepest descent from random states", "restarts": restarts}}
