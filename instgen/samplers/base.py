"""The one interface every surrogate sampler implements.

``Sampler.run`` validates and seeds; a subclass's ``_run`` does the work::

    batch = get_sampler("sa").run(instance, Schedule(sweeps=1000), reads=100, seed=7)

Rules that hold for every sampler:

* options not in the sampler's ``options`` table are an error, never ignored;
* variables are the instance's indices 0..n-1 (labels play no part);
* the seed given to compiled code is an int below 2**31 (:func:`derive_seed`);
* energies are recomputed with :meth:`Instance.energies` and checked against
  any the sampler reports, so a batch's energies are always exact.
"""

from __future__ import annotations

import time
from typing import Any, ClassVar

import numpy as np

from ..errors import InputError
from ..instance import Instance
from ..records import SampleBatch
from ..seeds import derive_seed
from .schedule import Schedule


class Sampler:
    """Base class: subclass, set ``name`` and ``options``, implement ``_run``."""

    name: ClassVar[str] = ""
    #: Allowed options and their defaults.
    options: ClassVar[dict[str, Any]] = {}
    #: Whether the sampler follows a Schedule (False for tabu, descent, exact).
    uses_schedule: ClassVar[bool] = True

    def run(self, instance: Instance, schedule: Schedule | None = None, reads: int = 100,
            seed=None, **options) -> SampleBatch:
        unknown = set(options) - set(self.options)
        if unknown:
            valid = ", ".join(sorted(self.options)) or "none"
            raise InputError(f"sampler {self.name!r} has no option(s) {sorted(unknown)}; valid: {valid}")
        if isinstance(reads, bool) or not isinstance(reads, (int, np.integer)) or reads < 1:
            raise InputError(f"reads must be a positive integer, got {reads!r}")
        if self.uses_schedule and schedule is None:
            raise InputError(f"sampler {self.name!r} needs an explicit Schedule")
        opts = {**self.options, **options}
        int_seed = derive_seed(0 if seed is None else seed, "sampler", self.name)
        t0 = time.perf_counter()
        out = self._run(instance, schedule, int(reads), int_seed, opts)
        seconds = time.perf_counter() - t0
        states, reported, updates, sched = self._unpack(out, schedule)
        states = np.asarray(states, dtype=np.int8).reshape(-1, instance.n)
        energies = instance.energies(states)
        if reported is not None and not np.allclose(reported, energies, rtol=1e-9, atol=1e-9):
            raise RuntimeError(f"sampler {self.name!r} reported energies that do not match its states")
        return SampleBatch(
            sampler=self.name, states=states, energies=energies, schedule=sched, reads=int(reads),
            seed=int_seed, seconds=seconds, spin_updates=int(updates), options=opts,
        )

    @staticmethod
    def _unpack(out, schedule):
        """``_run`` returns states, or a dict with states/energies/spin_updates/schedule."""
        default_sched = schedule.to_dict() if schedule is not None else {}
        if isinstance(out, dict):
            return (out["states"], out.get("energies"), out.get("spin_updates", 0),
                    out.get("schedule", default_sched))
        return out, None, 0, default_sched

    def _run(self, instance: Instance, schedule: Schedule | None, reads: int, seed: int,
             options: dict) -> np.ndarray | dict:
        raise NotImplementedError


def index_bqm(instance: Instance):
    """A dimod SPIN BQM on the variables 0..n-1 (labels play no part).

    Built straight from the instance's arrays, so it is cheap enough to make
    once per sampling call.

    >>> from instgen.instance import Instance
    >>> bqm = index_bqm(Instance(edges=[[0, 1]], J=[1.0], h=[0.5, 0.0]))
    >>> list(bqm.variables), float(bqm.quadratic[0, 1])
    ([0, 1], 1.0)
    """
    import dimod

    return dimod.BinaryQuadraticModel.from_numpy_vectors(
        instance.h, (instance.edges[:, 0], instance.edges[:, 1], instance.J), 0.0, dimod.SPIN)


def index_states(sampleset, n: int) -> np.ndarray:
    """The samples of a dimod SampleSet over variables 0..n-1 as (R, n) int8, columns in index order."""
    out = np.empty((len(sampleset), n), dtype=np.int8)
    out[:, np.asarray(list(sampleset.variables), dtype=np.int64)] = sampleset.record.sample
    return out
