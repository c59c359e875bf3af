"""Surrogate samplers behind one interface (:class:`Sampler`), one module each.

>>> sorted(SAMPLERS.names())[:2]
['descent', 'exact']
"""

from ..registry import Registry
from .base import Sampler
from .schedule import Schedule, default_beta_range

SAMPLERS = Registry("sampler")
#: What each sampler does, in one line (shown by ``--help``; importing a sampler may compile it).
SUMMARIES = {}


def _register(name: str, where: str, summary: str) -> None:
    SAMPLERS.register(name, where)
    SUMMARIES[name] = summary


_register("sa", "instgen.samplers.sa:SimulatedAnnealing",
          "simulated annealing of dwave-samplers (the reference annealer)")
_register("pimc", "instgen.samplers.pimc:PathIntegral",
          "path-integral Monte Carlo of a transverse-field anneal (plain, paused or quenched schedules)")
_register("rotor", "instgen.samplers.rotor:RotorAnnealing",
          "spin-vector annealing: each spin a planar rotor with an angle, read out as up or down at the end")
_register("tabu", "instgen.samplers.tabu:Tabu", "tabu search of dwave-samplers (a local search, no schedule)")
_register("descent", "instgen.samplers.descent:RestartDescent",
          "steepest descent (dwave-samplers) to a local minimum, from random restarts")
_register("exact", "instgen.samplers.exact:BruteForce", "every state enumerated, lowest energies first (n <= 24; ground truth, no randomness)")
_register("fast-sa", "instgen.samplers.fast_sa:FastAnnealing",
          "the same simulated annealing as sa, compiled with numba and run on many replicas at once")
_register("packed-sa", "instgen.samplers.packed_sa:PackedAnnealing",
          "the same annealing for whole-number couplings, 64 replicas packed in the bits of one machine word")


def get_sampler(name: str) -> Sampler:
    """An instance of the sampler registered as ``name``."""
    return SAMPLERS.get(name)()


__all__ = ["SAMPLERS", "SUMMARIES", "Sampler", "Schedule", "default_beta_range", "get_sampler"]
