"""Surrogate samplers behind one interface (:class:`Sampler`), one module each.

>>> sorted(SAMPLERS.names())[:2]
['descent', 'exact']
"""

from ..registry import Registry
from .base import Sampler
from .schedule import Schedule, default_beta_range

SAMPLERS = Registry("sampler")
SAMPLERS.register("sa", "instgen.samplers.sa:SimulatedAnnealing")
SAMPLERS.register("pimc", "instgen.samplers.pimc:PathIntegral")
SAMPLERS.register("rotor", "instgen.samplers.rotor:RotorAnnealing")
SAMPLERS.register("tabu", "instgen.samplers.tabu:Tabu")
SAMPLERS.register("descent", "instgen.samplers.descent:RestartDescent")
SAMPLERS.register("exact", "instgen.samplers.exact:BruteForce")
SAMPLERS.register("fast-sa", "instgen.samplers.fast_sa:FastAnnealing")
SAMPLERS.register("packed-sa", "instgen.samplers.packed_sa:PackedAnnealing")


def get_sampler(name: str) -> Sampler:
    """An instance of the sampler registered as ``name``."""
    return SAMPLERS.get(name)()


__all__ = ["SAMPLERS", "Sampler", "Schedule", "default_beta_range", "get_sampler"]
