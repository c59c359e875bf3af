"""The fingerprint identifies exactly the gauge class of a labelled instance."""

import itertools

import dimod
import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from libcases import permuted

from instgen.instance import Instance, random_gauge
from instgen.library.fingerprint import canonical_form, carry_state, fingerprint
from instgen.make import make_instance


def on_graph(G: nx.Graph, J, h=None) -> Instance:
    edges = sorted(tuple(sorted(e)) for e in G.edges)
    return Instance(edges=edges, J=J, h=h, n=G.number_of_nodes())


@settings(max_examples=20, deadline=None)
@given(gauge_seed=st.integers(0, 2**32 - 1), fields=st.booleans())
def test_any_gauge_gives_the_same_fingerprint(gauge_seed, fields):
    # gauge invariance of every energy: s_i -> g_i s_i, h_i -> g_i h_i, J_ij -> g_i g_j J_ij leaves each term
    # unchanged (derived; common practice in annealer benchmarking)
    inst = make_instance("chimera:2", "gaussian", "gaussian" if fields else "none", seed=7)
    other = inst.gauge(random_gauge(inst.n, seed=gauge_seed))
    assert fingerprint(other) == fingerprint(inst)


def test_spin_order_does_not_matter_and_states_carry_over():
    inst = make_instance("pegasus:2", "gaussian", "gaussian", seed=3)
    other = permuted(inst.gauge(random_gauge(inst.n, seed=4)), seed=5)
    assert not np.array_equal(other.edges, inst.edges)
    assert fingerprint(other) == fingerprint(inst)
    s = random_gauge(inst.n, seed=6)
    assert other.energy(carry_state(s, inst, other)) == pytest.approx(inst.energy(s), abs=1e-9)


def test_tuple_labels_from_dimod_are_matched_by_label():
    # dwave-graphs gives Chimera nodes as (row, col, shore, k) coordinates
    import dwave.graphs as dg

    G = dg.chimera_graph(1, coordinates=True)
    rng = np.random.default_rng(1)
    bqm = dimod.BinaryQuadraticModel.from_ising({}, {e: rng.normal() for e in G.edges})
    a = Instance.from_bqm(bqm)
    assert isinstance(a.labels[0], tuple)
    b = permuted(a, seed=2)
    assert fingerprint(a) == fingerprint(b)
    # dimod reading its own serialisation gives back the same instance
    c = Instance.from_bqm(dimod.BinaryQuadraticModel.from_file(a.to_bqm().to_file()))
    assert fingerprint(c) == fingerprint(a)


def cycle_signature(G: nx.Graph, signs: dict) -> tuple:
    """Sign of the product of couplings around each cycle of networkx's cycle basis."""
    out = []
    for cycle in sorted(nx.cycle_basis(G), key=sorted):
        prod = 1
        for u, v in zip(cycle, cycle[1:] + cycle[:1]):
            prod *= signs[tuple(sorted((u, v)))]
        out.append(prod)
    return tuple(out)


@pytest.mark.parametrize("G", [nx.complete_graph(4), nx.cycle_graph(5), nx.petersen_graph()],
                         ids=["K4", "C5", "petersen"])
def test_same_fingerprint_exactly_when_every_cycle_product_agrees(G):
    # For +-1 couplings without fields on a connected graph, two instances are gauge
    # equivalent iff the coupling products around all cycles agree (products of couplings
    # around any cycle, the frustration, are gauge invariant; derived, common practice);
    # there are 2^(m - n + 1) classes, one per frustration pattern of a cycle basis.
    edges = sorted(tuple(sorted(e)) for e in G.edges)
    m, n = len(edges), G.number_of_nodes()
    rng = np.random.default_rng(0)
    patterns = list(itertools.product([-1, 1], repeat=m)) if m <= 8 else [
        tuple(rng.choice([-1, 1], size=m)) for _ in range(300)]
    by_fp, by_cycles = {}, {}
    for k, signs in enumerate(patterns):
        fp = fingerprint(on_graph(G, signs))
        by_fp.setdefault(fp, set()).add(k)
        by_cycles.setdefault(cycle_signature(G, dict(zip(edges, signs))), set()).add(k)
    assert sorted(map(sorted, by_fp.values())) == sorted(map(sorted, by_cycles.values()))
    if m <= 8:
        assert len(by_fp) == 2 ** (m - n + 1)


def test_on_a_tree_every_sign_pattern_is_one_instance():
    # a tree has no cycles, so every sign pattern is a gauge of every other [derived]
    G = nx.balanced_tree(2, 2)
    fps = {fingerprint(on_graph(G, signs)) for signs in itertools.product([-1, 1], repeat=G.number_of_edges())}
    assert len(fps) == 1


def test_fields_global_flip_matches_single_flip_does_not():
    inst = make_instance("chimera:1", "gaussian", "gaussian", seed=2)
    # the global flip s -> -s maps (J, h) to (J, -h) [derived]
    assert fingerprint(inst.with_couplings(inst.J, -inst.h)) == fingerprint(inst)
    h = inst.h.copy()
    h[3] = -h[3]
    assert fingerprint(inst.with_couplings(inst.J, h)) != fingerprint(inst)


def test_field_free_pieces_flip_independently():
    # two disjoint triangles: each may be gauged on its own
    G = nx.disjoint_union(nx.cycle_graph(3), nx.cycle_graph(3))
    J = [1.0, -2.0, 0.5, 1.5, -1.0, 3.0]
    a = on_graph(G, J)
    g = np.array([1, -1, 1, -1, -1, 1])
    assert fingerprint(a.gauge(g)) == fingerprint(a)


def test_what_it_does_not_identify():
    inst = make_instance("chimera:1", "gaussian", seed=4)
    J = inst.J.copy()
    J[0] = -J[0]  # chimera:1 is K_{4,4}: every edge lies on a 4-cycle, so frustration changes
    assert fingerprint(inst.with_couplings(J)) != fingerprint(inst)
    assert fingerprint(inst.with_couplings(2 * inst.J)) != fingerprint(inst)
    shifted = inst.replace(labels=[x + 100 for x in inst.labels])  # same couplings, other qubits
    assert fingerprint(shifted) != fingerprint(inst)


def test_zero_couplings_rounding_noise_and_metadata_are_ignored():
    inst = make_instance("chimera:1", "gaussian", seed=4)
    J = inst.J.copy()
    J[2] = 0.0
    without = Instance(edges=np.delete(inst.edges, 2, axis=0), J=np.delete(J, 2), n=inst.n, labels=inst.labels)
    assert fingerprint(inst.with_couplings(J)) == fingerprint(without)
    noisy = inst.with_couplings(inst.J * (1 + 1e-15))
    assert fingerprint(noisy) == fingerprint(inst)
    assert fingerprint(inst.replace(graph="", metadata={"tags": ["x"]})) == fingerprint(inst)


def test_canonical_gauge_is_its_own_fixed_point():
    inst = make_instance("square:4x4", "gaussian", "gaussian", seed=9)
    form = canonical_form(inst)
    canon = inst.gauge(form.gauge)
    assert fingerprint(canon) == form.fingerprint
    np.testing.assert_array_equal(canonical_form(canon).gauge, np.ones(inst.n))
