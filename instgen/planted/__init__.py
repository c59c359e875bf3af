"""Planted instances: couplings built so that a chosen state is a ground state.

Every family builds its couplings in the *planted gauge*, where the planted
state is all +1, as a sum of small terms that each have the all +1 state as one
of their own ground states.  The sum then has it as a ground state too, and the
planted energy is a proof, not an estimate.  A random gauge (spin-reversal
transform) hides the planted state before the instance is handed out.

Families (``instgen plant --help`` lists them with their knobs):

* ``loops``: frustrated loops on any graph (Hen et al., PRA 92, 042325 (2015));
* ``wishart``: the Wishart planted ensemble on complete graphs (Hamze et al.,
  PRE 101, 052102 (2020));
* ``tiles``: edge-disjoint frustrated tiles on square and cubic lattices (after
  Perera et al., PRE 101, 023316 (2020) and Hamze et al., PRE 97, 043303 (2018));
* ``terms``: sums of frustrated loops and small frustrated patches (cells,
  tiles, cliques, balls), the certificate-preserving genome of breeding.

Each family module defines ``FAMILY``, a :class:`PlantedFamily` with its build
function, its proof checker and a one-line description; the :data:`PLANTED`
registry maps names to them, so presets, the Python API and the command line
share one list.

>>> inst = plant("chimera:2", "loops", seed=1, density=0.5)
>>> inst.metadata["certificate"]["status"], inst.energy(inst.planted) == inst.metadata["construction"]["planted_energy"]
('planted', True)
"""

from __future__ import annotations

import dataclasses
import inspect
from typing import Callable

import numpy as np

from ..errors import InputError
from ..registry import Registry

PLANTED = Registry("planted family")
PLANTED.register("loops", "instgen.planted.loops:FAMILY")
PLANTED.register("wishart", "instgen.planted.wishart:FAMILY")
PLANTED.register("tiles", "instgen.planted.tiles:FAMILY")
PLANTED.register("terms", "instgen.planted.terms:FAMILY")


@dataclasses.dataclass(frozen=True)
class PlantedFamily:
    """One planted family: how to build it and how to check its proof.

    ``build(graph, seed=None, **knobs) -> Instance`` makes an instance whose
    ``metadata["construction"]`` holds ``family``, the knobs, ``planted_energy``
    and whatever the proof needs.  ``verify(instance) -> dict`` re-derives the
    proof from that metadata and returns plain-language details, or raises
    :class:`~instgen.errors.CertificationError` when the instance no longer
    carries a valid proof.  ``rules(instance) -> CouplingRules`` says which
    coupling alphabet the construction's values come from (the instance's
    ``metadata["rules"]``, from which scoring and profiles take their schedules).
    """

    name: str
    build: Callable
    verify: Callable
    description: str
    rules: Callable | None = None

    def knobs(self) -> dict:
        """The family's keyword knobs and their defaults."""
        sig = inspect.signature(self.build)
        return {k: p.default for k, p in sig.parameters.items()
                if p.kind is p.KEYWORD_ONLY or (p.default is not p.empty and k != "seed")}


def plant(graph, method: str = "loops", seed=None, certify: bool = True, **knobs):
    """A planted instance of family ``method`` on ``graph``.

    Parameters
    ----------
    graph : str or Topology
        A graph spec such as ``"chimera:8"``.
    method : str
        A name in :data:`PLANTED` (``loops``, ``wishart``, ``tiles``).
    seed : int, optional
        Same seed, same instance.
    certify : bool
        Check the construction's proof and store a ``planted`` certificate in
        ``metadata["certificate"]`` (cheap: linear in the number of couplings,
        cubic in n for ``wishart``).
    **knobs
        The family's knobs (see :meth:`PlantedFamily.knobs`); an unknown knob is
        an :class:`~instgen.errors.InputError` naming the valid ones.

    Examples
    --------
    >>> inst = plant("square:8", "tiles", seed=2, mix=(0.5, 0.5, 0.0))
    >>> inst.metadata["construction"]["family"], inst.planted is not None
    ('tiles', True)
    """
    family = PLANTED.get(method)
    valid = family.knobs()
    unknown = sorted(set(knobs) - set(valid))
    if unknown:
        raise InputError(f"planted family {method!r} has no knob(s) {', '.join(unknown)}; "
                         f"valid: {', '.join(sorted(valid)) or 'none'}")
    inst = family.build(graph, seed=seed, **knobs)
    if family.rules is not None and "rules" not in inst.metadata:
        inst = with_rules(inst, family.rules(inst))
    if certify:
        from ..certify import attach_certificate, certify as _certify

        inst = attach_certificate(inst, _certify(inst, method="planted"))
    return inst


def with_rules(instance, rules):
    """``instance`` with ``metadata["rules"]`` set to ``rules``, its couplings snapped to the rules' grid
    (the precision, else the common step of a discrete alphabet's values), so sums of terms such as
    1/3 + 1/3 + 1/3 are stored as 1.0 and not 0.9999999999999998."""
    from ..couplings import common_step, snap

    step = rules.precision or (common_step(rules.couplings.values) if rules.couplings.discrete else None)
    J = instance.J if step is None else snap(instance.J, step)
    return instance.replace(J=J, metadata={**instance.metadata, "rules": rules.to_dict()})


def families() -> list[PlantedFamily]:
    """Every registered planted family, by name."""
    return [PLANTED.get(name) for name in PLANTED.names()]


def planted_gauge_couplings(instance) -> np.ndarray:
    """The couplings seen in the planted gauge, where the planted state is all +1.

    >>> from instgen.instance import Instance
    >>> inst = Instance(edges=[[0, 1]], J=[1.0], planted=[1, -1])
    >>> planted_gauge_couplings(inst).tolist()
    [-1.0]
    """
    g = instance.planted.astype(np.float64)
    return instance.J * g[instance.edges[:, 0]] * g[instance.edges[:, 1]]


def construction_of(instance, family: str) -> dict:
    """``metadata["construction"]`` of ``instance``, checked to belong to ``family``."""
    from ..errors import CertificationError

    con = instance.metadata.get("construction")
    if not isinstance(con, dict) or con.get("family") != family:
        raise CertificationError(f"the instance carries no {family!r} construction in its metadata")
    if instance.planted is None:
        raise CertificationError("the instance has a construction but no planted state")
    return con


__all__ = ["PLANTED", "PlantedFamily", "plant", "with_rules", "families", "planted_gauge_couplings", "construction_of"]
