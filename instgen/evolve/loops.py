"""The loop genome: frustrated-loop instances whose every child keeps its proof.

A :class:`LoopGenome` is a set of frustrated loops (:mod:`instgen.planted.loops`)
in a planted gauge: the term genome of :mod:`instgen.evolve.terms` restricted
to loops.  Each loop alone has the planted state as a ground state, so any sum
of loops does too, and E0 = -sum_j w_j (L_j - 2) is a certificate for every
candidate the search ever makes.  Operators add, remove, re-route and
re-weight loops and mix the loop sets of two parents (the term operators under
loop names); every child respects the cap on accumulated |J| per edge (the
coupling range), and loop weights are drawn from the alphabet's positive
values, so couplings stay on the alphabet's grid.
"""

from __future__ import annotations

from ..planted.loops import Loop, planted_bound
from .operators import register
from .terms import AddTerm, MixTerms, MoveTerm, RemoveTerm, ReweightTerm, ShiftTerm, TermGenome, TermSetting


class LoopSetting(TermSetting):
    """Per-run loop parameters, derived once from the preset and kept on the Variation."""

    key = "loops"

    def __init__(self, var):
        super().__init__(var, kinds={"loop": 1.0})


class LoopGenome(TermGenome):
    """A loop set plus its planted state (the gauge that hides it)."""

    kind = "loops"
    setting_class = LoopSetting

    def __init__(self, loops, gauge, setting: LoopSetting):
        super().__init__(loops, gauge, setting)

    @property
    def loops(self) -> tuple:
        return self.terms

    def construction(self) -> dict:
        s = self.setting
        return {"family": "loops", "cap": s.cap, "loop_count": len(self.loops), "density": len(self.loops) / s.n,
                "min_length": s.min_length, "weights": list(s.weights), "planted_energy": planted_bound(self.loops),
                "loops": [loop.to_list() for loop in self.loops], "bred": True}

    def with_loops(self, loops) -> LoopGenome:
        return LoopGenome(loops, self.gauge, self.setting)

    def to_dict(self) -> dict:
        return {"kind": self.kind, "loops": [loop.to_list() for loop in self.loops], "gauge": self.gauge.tolist()}

    @classmethod
    def from_dict(cls, d: dict, var) -> LoopGenome:
        return cls([Loop.from_list(x) for x in d["loops"]], d["gauge"], LoopSetting.of(var))


@register
class AddLoop(AddTerm):
    """Add one random loop that fits under the cap."""

    name = "add-loop"
    genome = "loops"


@register
class RemoveLoop(RemoveTerm):
    """Remove one loop (never the last)."""

    name = "remove-loop"
    genome = "loops"


@register
class RerouteLoop(MoveTerm):
    """Replace one loop by a new random loop through one of its spins, same weight."""

    name = "reroute-loop"
    genome = "loops"


@register
class ReweightLoop(ReweightTerm):
    """Give one loop another allowed weight, if the cap allows it."""

    name = "reweight-loop"
    genome = "loops"


@register
class ShiftLoop(ShiftTerm):
    """Move one loop's antiferromagnetic edge to another of its edges."""

    name = "shift-loop"
    genome = "loops"


@register
class MixLoops(MixTerms):
    """Children take each parent loop with probability 1/2 (skipping loops that break the cap)."""

    name = "mix-loops"
    genome = "loops"
