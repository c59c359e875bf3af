import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from instgen.couplings import CouplingRules
from instgen.evolve.genome import FreeGenome
from instgen.evolve.operators import OPERATORS, Variation, Variator, default_operators
from instgen.graphs import build_graph

TOPO = build_graph("chimera:2")


def _var(rules, rate=0.1):
    return Variation(rules, TOPO.n, TOPO.edges, rate)


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 10_000), alphabet=st.sampled_from(["pm1", "int:3", "gaussian", "uniform:-1,1"]))
def test_every_child_respects_range_and_precision(seed, alphabet):
    # Hardware limits: |J| <= range and J on the precision grid (common practice for processor couplers).
    limit = 3.0 if alphabet == "int:3" else 1.0
    prec = 1.0 if alphabet in ("pm1", "int:3") else 0.25
    rules = CouplingRules.make(alphabet, "none", coupling_range=limit, precision=prec)
    rng = np.random.default_rng(seed)
    weights = {name: 1.0 for name in OPERATORS.names() if OPERATORS.get(name).genome == "free"
               and not OPERATORS.get(name).needs_fields}
    var = Variator(weights, 0.7, _var(rules))
    a = FreeGenome(rules.sample_couplings(TOPO.m, rng), np.zeros(TOPO.n))
    b = FreeGenome(rules.sample_couplings(TOPO.m, rng), np.zeros(TOPO.n))
    for _ in range(5):
        a, b = var.children(a, b, rng)
        for g in (a, b):
            assert rules.allows(g.J)
            if alphabet in ("pm1", "int:3"):
                assert set(np.abs(g.J).tolist()) <= set(np.abs(rules.couplings.values).tolist()) | {0.0}


def test_mutations_change_something_and_keep_parent():
    rules = CouplingRules.make("pm1")
    rng = np.random.default_rng(1)
    parent = FreeGenome(rules.sample_couplings(TOPO.m, rng), np.zeros(TOPO.n))
    before = parent.J.copy()
    for name in ("resample", "sign-flip"):
        child = OPERATORS.get(name)()(parent, rng, _var(rules, rate=0.2))
        assert np.array_equal(parent.J, before)
        if name == "sign-flip":
            assert np.any(child.J != parent.J)


def test_block_crossover_swaps_a_connected_region():
    import networkx as nx

    rules = CouplingRules.make("pm1")
    a = FreeGenome(np.ones(TOPO.m), np.zeros(TOPO.n))
    b = FreeGenome(-np.ones(TOPO.m), np.zeros(TOPO.n))
    ca, _ = OPERATORS.get("block")()(a, b, np.random.default_rng(3), _var(rules))
    swapped = TOPO.edges[ca.J < 0]
    assert 0 < len(swapped) < TOPO.m
    G = nx.Graph(swapped.tolist())
    assert nx.is_connected(G)  # a region, not scattered couplings


def test_default_operators_fit_the_alphabet():
    assert "creep" in default_operators("free", CouplingRules.make("gaussian"))
    assert "creep" not in default_operators("free", CouplingRules.make("pm1"))
    assert "field-resample" in default_operators("free", CouplingRules.make("pm1", "pm1"))
