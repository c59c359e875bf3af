"""Genomes: what the evolutionary search changes.

A genome is plain data (numpy arrays and numbers): it turns into couplings
``(J, h)`` and, for planted genomes, a planted state whose energy is known.
Nothing here is a DEAP class, so genomes cross process boundaries and go into
checkpoints as JSON.

* :class:`FreeGenome`: every coupling and field is free (within the rules).
* :class:`LoopGenome` (in :mod:`instgen.evolve.loops`): a set of frustrated
  loops in a fixed planted gauge; every child keeps the planted state as a
  ground state.
* :class:`TermGenome` (in :mod:`instgen.evolve.terms`): loops and small
  frustrated patches, each with the planted state as a ground state.
"""

from __future__ import annotations

import dataclasses
import hashlib

import numpy as np


def array_key(*arrays) -> str:
    """A content hash of arrays (order and dtype matter)."""
    h = hashlib.blake2b(digest_size=12)
    for a in arrays:
        a = np.ascontiguousarray(a)
        h.update(str(a.dtype).encode())
        h.update(a.tobytes())
    return h.hexdigest()


@dataclasses.dataclass(eq=False)
class FreeGenome:
    """Couplings J (m,) and fields h (n,), free within the coupling rules."""

    J: np.ndarray
    h: np.ndarray
    kind = "free"

    def couplings(self):
        """(J, h, planted state or None, planted energy or None)."""
        return self.J, self.h, None, None

    def key(self) -> str:
        return array_key(self.J, self.h)

    def copy(self) -> FreeGenome:
        return FreeGenome(self.J.copy(), self.h.copy())

    def to_dict(self) -> dict:
        return {"kind": self.kind, "J": self.J.tolist(), "h": self.h.tolist()}

    @classmethod
    def from_dict(cls, d: dict) -> FreeGenome:
        return cls(np.asarray(d["J"], dtype=np.float64), np.asarray(d["h"], dtype=np.float64))


#: Planted genomes by [planting] method (each keeps its proof under every operator).
PLANTED_GENOMES = {"loops": ("instgen.evolve.loops", "LoopGenome"), "terms": ("instgen.evolve.terms", "TermGenome")}


def planted_genome(kind: str):
    """The genome class bred for planting method ``kind`` (``loops`` or ``terms``)."""
    import importlib

    module, name = PLANTED_GENOMES[kind]
    return getattr(importlib.import_module(module), name)


def genome_from_dict(d: dict, var=None):
    """Rebuild a genome from its checkpoint dict (``var``: the run's Variation, for planted genomes)."""
    if d.get("kind") == "free":
        return FreeGenome.from_dict(d)
    if d.get("kind") in PLANTED_GENOMES:
        return planted_genome(d["kind"]).from_dict(d, var)
    from ..errors import FormatError

    raise FormatError(f"unknown genome kind {d.get('kind')!r} in checkpoint")

