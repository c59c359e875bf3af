"""Simulated annealing (dwave-samplers) with an explicit inverse-temperature schedule.

The beta of every sweep comes from :meth:`Schedule.betas`, handed over as a
custom schedule, so the sampler never picks its own temperatures from the
instance it is scoring.  One sweep is one Metropolis update of every spin.

>>> from instgen.make import make_instance
>>> from instgen.samplers import get_sampler, Schedule
>>> inst = make_instance("chimera:1", "pm1", seed=3)
>>> batch = get_sampler("sa").run(inst, Schedule(sweeps=100), reads=4, seed=1)
>>> batch.states.shape, batch.spin_updates
((4, 8), 3200)
"""

from __future__ import annotations

from ..errors import InputError
from .base import Sampler, index_bqm, index_states

#: Our names for the update order and acceptance rule -> dwave-samplers' names.
ORDERS = {"sequential": False, "random": True}
RULES = {"metropolis": "Metropolis", "gibbs": "Gibbs"}


class SimulatedAnnealing(Sampler):
    """Single-spin-flip simulated annealing on the CPU.

    Options
    -------
    order : {"sequential", "random"}
        Visit spins in index order each sweep, or pick n spins at random.
    rule : {"metropolis", "gibbs"}
        Acceptance rule of a proposed flip.
    """

    name = "sa"
    options = {"order": "sequential", "rule": "metropolis"}

    def _run(self, instance, schedule, reads, seed, options):
        from dwave.samplers import SimulatedAnnealingSampler

        order = _choice(options, "order", ORDERS)
        rule = _choice(options, "rule", RULES)
        betas = schedule.betas()
        ss = SimulatedAnnealingSampler().sample(
            index_bqm(instance), num_reads=reads, seed=seed, beta_schedule_type="custom",
            beta_schedule=betas, num_sweeps_per_beta=1, randomize_order=order,
            proposal_acceptance_criteria=rule)
        states = index_states(ss, instance.n)
        return {"states": states, "spin_updates": reads * schedule.sweeps * instance.n,
                "schedule": {**schedule.to_dict(), "kind": "inverse temperature per sweep"}}


def _choice(options: dict, key: str, table: dict):
    value = options[key]
    if value not in table:
        raise InputError(f"option {key} must be one of: {', '.join(table)}; got {value!r}")
    return table[value]
