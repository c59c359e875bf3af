"""Tabu search (dwave-samplers) as a non-annealing reference solver.

Each read is one tabu search from a random state with no restarts and no
clock limit, so the same seed always gives the same states.  Its effort is
counted in sweeps like the annealers': one sweep is n candidate flips
evaluated, and a read gets ``sweeps`` of them (``sweeps`` option, else the
sweeps of the schedule given, else 100).

>>> from instgen.make import make_instance
>>> from instgen.samplers import get_sampler
>>> inst = make_instance("chimera:1", "pm1", seed=3)
>>> batch = get_sampler("tabu").run(inst, reads=3, seed=1, sweeps=20)
>>> batch.states.shape, batch.schedule["sweeps"]
((3, 8), 20)
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from .base import Sampler, index_bqm, index_states

DEFAULT_SWEEPS = 100


def effort(options: dict, schedule, key: str, default: int) -> int:
    """The option ``key`` if set, else the schedule's sweeps, else ``default``."""
    value = options.get(key)
    if value is None:
        return schedule.sweeps if schedule is not None else default
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 1:
        raise InputError(f"option {key} must be a positive whole number, got {value!r}")
    return int(value)


class Tabu(Sampler):
    """Single-start tabu search with a fixed budget of evaluated flips.

    Options
    -------
    sweeps : int, optional
        Budget per read, in units of n evaluated flips.
    tenure : int, optional
        Length of the tabu list (default min(20, n // 4)).
    """

    name = "tabu"
    options = {"sweeps": None, "tenure": None}
    uses_schedule = False
    #: The option that overrides the effort taken from the schedule.
    effort_option = "sweeps"

    def _run(self, instance, schedule, reads, seed, options):
        from dwave.samplers import TabuSampler

        sweeps = effort(options, schedule, "sweeps", DEFAULT_SWEEPS)
        tenure = options["tenure"]
        if tenure is not None and (isinstance(tenure, bool) or not isinstance(tenure, (int, np.integer))
                                   or not 0 <= tenure < instance.n):
            raise InputError(f"option tenure must be a whole number from 0 to {instance.n - 1}, got {tenure!r}")
        ss = TabuSampler().sample(
            index_bqm(instance), num_reads=reads, seed=seed, tenure=None if tenure is None else int(tenure),
            timeout=None, num_restarts=0, coefficient_z_first=sweeps, coefficient_z_restart=sweeps,
            lower_bound_z=0)
        return {"states": index_states(ss, instance.n),
                "spin_updates": reads * sweeps * instance.n,
                "schedule": {"kind": "tabu search, no restarts", "sweeps": sweeps,
                             "tenure": min(20, instance.n // 4) if tenure is None else int(tenure)}}
