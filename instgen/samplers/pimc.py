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
    #: Keep each replica's state after every ``record_every``-th sweep (0: none);
    #: set by :func:`anneal_snapshots`, never an option, so scores are unchanged.
    record_every = 0

    def _run(self, instance, schedule, reads, seed, options):
        from dwave.samplers import PathIntegralAnnealingSampler

        problem, driver = field_arrays(schedule, options["transverse"])
        ss = PathIntegralAnnealingSampler().sample(
            index_bqm(instance), num_reads=reads, seed=seed, beta_schedule_type="custom",
            Hp_field=problem, Hd_field=driver, num_sweeps_per_beta=1,
            schedule_sample_interval=self.record_every or None)
        if self.record_every:
            self.snapshots = _snapshot_array(ss, instance.n)
        states = index_states(ss, instance.n)
        energies = np.empty(len(ss))
        energies[:] = ss.record.energy
        return {"states": states, "energies": energies,
                "spin_updates": reads * schedule.sweeps * instance.n,
                "schedule": {**schedule.to_dict(), "kind": "path integral, fixed temperature",
                             "temperature_beta": schedule.beta_range[1],
                             "transverse": float(options["transverse"]),
                             "problem_field": problem.tolist(), "transverse_field": driver.tolist()}}


def _snapshot_array(sampleset, n: int) -> np.ndarray:
    """The sampler's mid-anneal states as (reads, points, n) int8, columns in index order."""
    stats = np.asarray(sampleset.info["statistics"], dtype=np.int8)
    out = np.empty_like(stats)
    out[:, :, np.asarray(list(sampleset.variables), dtype=np.int64)] = stats
    return out


def anneal_snapshots(instance, schedule, every: int, reads: int = 100, seed=None, **options):
    """Anneal as :class:`PathIntegral` does and keep every replica's state along the way.

    The states are read (projected onto one imaginary-time slice, like the final
    states) after sweeps 0, ``every``, 2 * ``every``, ... of the schedule; reading
    them does not change the anneal, so the final states equal those of
    ``PathIntegral().run`` with the same arguments.

    Parameters
    ----------
    instance : Instance
    schedule : Schedule
    every : int
        Sweeps between recorded states (at least 1, at most ``schedule.sweeps``).
    reads : int
    seed : int, optional
    **options
        Sampler options (``transverse``).

    Returns
    -------
    batch : SampleBatch
        The final states, exactly as :meth:`Sampler.run` returns them.
    snapshots : (reads, points, n) int8 array
        State of each replica at each recorded sweep.
    sweeps : (points,) int array
        Index (0-based) of the sweep after which each state was read.

    Examples
    --------
    >>> from instgen.make import make_instance
    >>> from instgen.samplers import Schedule
    >>> inst = make_instance("chimera:1", "pm1", seed=3)
    >>> batch, snaps, at = anneal_snapshots(inst, Schedule(sweeps=21), every=10, reads=3, seed=1)
    >>> snaps.shape, at.tolist()
    ((3, 3, 8), [0, 10, 20])
    """
    if isinstance(every, bool) or not isinstance(every, (int, np.integer)) or not 1 <= every <= schedule.sweeps:
        raise InputError(f"every must be a whole number from 1 to the schedule's {schedule.sweeps} sweeps, "
                         f"got {every!r}")
    sampler = PathIntegral()
    sampler.record_every = int(every)
    batch = sampler.run(instance, schedule, reads=reads, seed=seed, **options)
    return batch, sampler.snapshots, np.arange(0, schedule.sweeps, int(every))
