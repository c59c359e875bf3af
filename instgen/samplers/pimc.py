"""Path-integral annealing (simulated quantum annealing) from dwave-samplers.

The sampler keeps the temperature fixed at the cold end of the schedule's
``beta_range`` and anneals two explicit field arrays along the schedule's path
s(t) (:meth:`Schedule.s_path`, shapes ``plain``, ``pause`` and ``quench``)::

    problem field     beta_cold * s          (weight of the Ising energy)
    transverse field  transverse * (1 - s)   (beta times the driver strength)

``transverse`` is the dimensionless product beta * Gamma at s = 0 (about the
number of world-line breaks per spin at the start).  Because beta_cold already
carries the coupling alphabet's scale, the pair of arrays does not change when
all couplings and the alphabet are scaled together.  A schedule whose
transverse field is zero at every sweep is refused: it would be plain
annealing at fixed temperature, not a quantum surrogate.  Both arrays are
stored in the returned schedule.

>>> from instgen.make import make_instance
>>> from instgen.samplers import get_sampler, Schedule
>>> inst = make_instance("chimera:1", "pm1", seed=3)
>>> batch = get_sampler("pimc").run(inst, Schedule(sweeps=50), reads=2, seed=1)
>>> len(batch.schedule["transverse_field"])
50
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import InputError
from .base import Sampler, index_bqm, index_states


def field_arrays(schedule, transverse: float) -> tuple[np.ndarray, np.ndarray]:
    """The (problem field, transverse field) arrays, one value per sweep.

    Shared with the rotor sampler.  Raises InputError when the transverse
    field would be zero at every sweep.

    >>> from instgen.samplers import Schedule
    >>> p, t = field_arrays(Schedule(sweeps=4, beta_range=(0.1, 5.0)), 2.0)
    >>> p.tolist(), t.tolist()
    ([1.25, 2.5, 3.75, 5.0], [1.5, 1.0, 0.5, 0.0])
    """
    if isinstance(transverse, bool) or not isinstance(transverse, (int, float)) \
            or not math.isfinite(transverse) or transverse < 0:
        raise InputError(f"option transverse must be a non-negative number, got {transverse!r}")
    s = schedule.s_path()
    problem = schedule.beta_range[1] * s
    driver = float(transverse) * (1.0 - s)
    if not np.any(driver > 0):
        why = "transverse is 0" if transverse == 0 else "the schedule's path stays at s = 1"
        raise InputError(f"the transverse field is zero at every sweep ({why}); give transverse > 0 "
                         "and a schedule with more than one sweep")
    return problem, driver


class PathIntegral(Sampler):
    """Continuous-time path-integral Monte Carlo annealing.

    Options
    -------
    transverse : float
        beta * Gamma at s = 0 (default 2.0).
    """

    name = "pimc"
    options = {"transverse": 2.0}

    def _run(self, instance, schedule, reads, seed, options):
        from dwave.samplers import PathIntegralAnnealingSampler

        problem, driver = field_arrays(schedule, options["transverse"])
        ss = PathIntegralAnnealingSampler().sample(
            index_bqm(instance), num_reads=reads, seed=seed, beta_schedule_type="custom",
            Hp_field=problem, Hd_field=driver, num_sweeps_per_beta=1)
        states = index_states(ss, instance.n)
        energies = np.empty(len(ss))
        energies[:] = ss.record.energy
        return {"states": states, "energies": energies,
                "spin_updates": reads * schedule.sweeps * instance.n,
                "schedule": {**schedule.to_dict(), "kind": "path integral, fixed temperature",
                             "temperature_beta": schedule.beta_range[1],
                             "transverse": float(options["transverse"]),
                             "problem_field": problem.tolist(), "transverse_field": driver.tolist()}}
