"""Test instances with ground states known independently of instgen's own code."""

import itertools

import numpy as np

from instgen.instance import Instance, random_gauge
from instgen.make import make_instance
from instgen.records import Certificate


def exact_certificate(inst: Instance) -> Certificate:
    """Ground state by enumerating all 2^n states (n <= 16), counted as dimod.ExactSolver would."""
    assert inst.n <= 16
    states = np.array(list(itertools.product([-1, 1], repeat=inst.n)), dtype=np.int8)
    energies = inst.energies(states)
    k = int(np.argmin(energies))
    count = int(np.sum(np.isclose(energies, energies[k])))
    return Certificate(energy=float(energies[k]), state=states[k], method="enumeration", status="proven",
                       ground_states=count)


def with_certificate(inst: Instance, cert: Certificate, **meta) -> Instance:
    return inst.replace(metadata={**inst.metadata, "certificate": cert.to_dict(), **meta})


def unfrustrated(graph: str, seed: int, fields: bool = False) -> Instance:
    """A gauge-transformed ferromagnet with random magnitudes 1..3.

    Every coupling is satisfied by s = g, so E(g) = -sum|J| - sum|h|, which is a
    lower bound on any energy: a proven ground state (a fact of the trade:
    an instance without frustration reaches the bond-by-bond bound).
    """
    base = make_instance(graph, "int:3", "int:3" if fields else "none", seed=seed)
    g = random_gauge(base.n, seed=seed + 1000)
    J = -np.abs(base.J) * g[base.edges[:, 0]] * g[base.edges[:, 1]]
    h = -np.abs(base.h) * g
    inst = base.with_couplings(J, h)
    bound = -float(np.abs(J).sum() + np.abs(h).sum())
    cert = Certificate(energy=bound, state=g, method="bond bound (unfrustrated)", status="proven")
    return with_certificate(inst, cert)


def small_certified(seed, fields=False, **meta) -> Instance:
    """A certified Gaussian spin glass on chimera:1 (8 spins)."""
    inst = make_instance("chimera:1", "gaussian", "gaussian" if fields else "none", seed=seed)
    return with_certificate(inst, exact_certificate(inst), **meta)


def permuted(inst: Instance, seed: int) -> Instance:
    """The same couplings on the same labels, with the spins listed in another order."""
    rng = np.random.default_rng(seed)
    perm = rng.permutation(inst.n)          # new index k holds old spin perm[k]
    where = np.empty(inst.n, dtype=np.int64)
    where[perm] = np.arange(inst.n)         # old spin i sits at new index where[i]
    e = where[inst.edges]
    e.sort(axis=1)
    meta = dict(inst.metadata)
    if "certificate" in meta:
        c = dict(meta["certificate"])
        c["state"] = [c["state"][i] for i in perm]
        meta["certificate"] = c
    return Instance(edges=e, J=inst.J, h=inst.h[perm], labels=[inst.labels[i] for i in perm],
                    graph=inst.graph, metadata=meta)
