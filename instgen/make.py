"""Random instances on a graph with a coupling alphabet."""

from __future__ import annotations

import numpy as np

from .couplings import CouplingRules
from .graphs import Topology, build_graph
from .instance import Instance
from .seeds import as_generator, derive_seed


def topology(graph) -> Topology:
    """A :class:`Topology` from a spec string (or the Topology itself)."""
    return graph if isinstance(graph, Topology) else build_graph(graph)


def rules_of(couplings="pm1", fields="none", **limits) -> CouplingRules:
    """A :class:`CouplingRules` from specs (or the rules themselves)."""
    return couplings if isinstance(couplings, CouplingRules) else CouplingRules.make(couplings, fields, **limits)


def make_instance(graph, couplings="pm1", fields="none", seed=None, **limits) -> Instance:
    """A random instance: every coupling (and field) drawn from its alphabet.

    Parameters
    ----------
    graph : str or Topology
        A graph spec such as ``"chimera:4"``.
    couplings, fields : str or CouplingRules
        Alphabet specs (see :mod:`instgen.couplings`).
    seed : int, optional
    **limits
        ``coupling_range``, ``field_range``, ``precision``.

    >>> inst = make_instance("chimera:1", "pm1", seed=1)
    >>> inst.n, inst.m, set(inst.J.tolist()) <= {-1.0, 1.0}
    (8, 16, True)
    """
    topo = topology(graph)
    rules = rules_of(couplings, fields, **limits)
    int_seed = derive_seed(seed, "make") if not isinstance(seed, np.random.Generator) else None
    rng = as_generator(seed if int_seed is None else int_seed)
    J = rules.sample_couplings(topo.m, rng)
    h = rules.sample_fields(topo.n, rng)
    meta = {"kind": "random", "rules": rules.to_dict()}
    if isinstance(seed, (int, np.integer)):
        meta["seed"] = int(seed)
    return Instance(edges=topo.edges, J=J, h=h, labels=topo.labels, graph=topo.spec, metadata=meta)
