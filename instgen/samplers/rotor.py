"""The rotor (spin-vector) annealer from dwave-samplers, on explicit field arrays.

Each spin is a planar rotor at angle theta; the anneal follows the same two
arrays as :mod:`instgen.samplers.pimc` (problem field beta_cold * s,
transverse field ``transverse`` * (1 - s) along :meth:`Schedule.s_path`), and
the final angles are read out as spins with probability cos^2(theta/2) of +1.
The sampler's own energies are those of the rotors, not of the read-out
spins, so energies are always recomputed from the states.

>>> from instgen.make import make_instance
>>> from instgen.samplers import get_sampler, Schedule
>>> inst = make_instance("chimera:1", "pm1", seed=3)
>>> get_sampler("rotor").run(inst, Schedule(sweeps=50), reads=2, seed=1).states.shape
(2, 8)
"""

from __future__ import annotations

from .base import Sampler, index_bqm, index_states
from .pimc import field_arrays
from .sa import ORDERS, _choice

#: Our names for the angle proposals -> dwave-samplers' names.
PROPOSALS = {"uniform": "MetropolisUniform", "field-scaled": "MetropolisTF"}


class RotorAnnealing(Sampler):
    """Spin-vector Monte Carlo annealing.

    Options
    -------
    transverse : float
        beta * Gamma at s = 0 (default 2.0).
    proposal : {"uniform", "field-scaled"}
        New angles drawn uniformly, or within a window that shrinks as the
        transverse field falls.
    order : {"sequential", "random"}
        Spin visiting order within a sweep.
    """

    name = "rotor"
    options = {"transverse": 2.0, "proposal": "uniform", "order": "sequential"}

    def _run(self, instance, schedule, reads, seed, options):
        from dwave.samplers import RotorModelAnnealingSampler

        problem, driver = field_arrays(schedule, options["transverse"])
        proposal = _choice(options, "proposal", PROPOSALS)
        order = _choice(options, "order", ORDERS)
        ss = RotorModelAnnealingSampler().sample(
            index_bqm(instance), num_reads=reads, seed=seed, beta_schedule_type="custom",
            Hp_field=problem, Hd_field=driver, num_sweeps_per_beta=1,
            proposal_acceptance_criteria=proposal, randomize_order=order)
        return {"states": index_states(ss, instance.n),
                "spin_updates": reads * schedule.sweeps * instance.n,
                "schedule": {**schedule.to_dict(), "kind": "rotor model, fixed temperature",
                             "temperature_beta": schedule.beta_range[1],
                             "transverse": float(options["transverse"]),
                             "problem_field": problem.tolist(), "transverse_field": driver.tolist()}}
