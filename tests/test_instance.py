import dimod
import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from instgen.errors import InputError
from instgen.instance import Instance, random_gauge
from instgen.make import make_instance


def _states(rng, r, n):
    return (2 * rng.integers(0, 2, size=(r, n)) - 1).astype(np.int8)


@pytest.mark.parametrize("spec,alphabet,fields", [
    ("chimera:2", "pm1", "none"),
    ("square:5,periodic", "gaussian", "gaussian:0.5"),
    ("complete:12", "int:3", "pm1"),
])
def test_energies_match_dimod(spec, alphabet, fields, rng):
    # Reference: dimod's BinaryQuadraticModel.energies (general reference library).
    inst = make_instance(spec, alphabet, fields, seed=3)
    states = _states(rng, 50, inst.n)
    ours = inst.energies(states)
    bqm = inst.to_bqm()
    theirs = bqm.energies((states, list(inst.labels)))
    np.testing.assert_allclose(ours, theirs, rtol=0, atol=1e-9)


def test_qubo_round_trip_keeps_energies_with_offset(rng):
    # dimod's BINARY form with its offset must give the same energies at x = (s+1)/2.
    inst = make_instance("chimera:2", "gaussian", "gaussian", seed=5)
    qubo = inst.to_bqm("BINARY")
    states = _states(rng, 30, inst.n)
    xs = ((states + 1) // 2).astype(np.int8)
    np.testing.assert_allclose(qubo.energies((xs, list(inst.labels))), inst.energies(states), atol=1e-9)
    back = Instance.from_bqm(qubo, graph=inst.graph)
    np.testing.assert_allclose(back.energies(states), inst.energies(states), atol=1e-9)


def test_from_bqm_keeps_ising_offset():
    bqm = dimod.BinaryQuadraticModel({"a": 1.0}, {("a", "b"): -2.0}, 3.5, dimod.SPIN)
    inst = Instance.from_bqm(bqm)
    assert inst.metadata["offset"] == 3.5
    assert inst.labels == ("a", "b")
    assert inst.energy([1, 1]) + 3.5 == bqm.energy({"a": 1, "b": 1})


def test_energy_formula_by_hand():
    # E = sum h s + sum J s s, dimod's Ising convention (common practice).
    inst = Instance(edges=[[0, 1], [1, 2], [0, 2]], J=[1.0, 1.0, 1.0], h=[0.5, 0, 0])
    # Antiferromagnetic triangle: frustrated; best is 2 bonds satisfied, E = -1 - 0.5.
    best = min(inst.energy(s) for s in np.array(np.meshgrid(*[[-1, 1]] * 3)).T.reshape(-1, 3))
    assert best == -1.5


@settings(max_examples=60, deadline=None)
@given(seed=st.integers(0, 2**31 - 1))
def test_gauge_invariance(seed):
    # E'(s*g) = E(s) for any gauge g (spin-reversal symmetry; derived, common practice).
    rng = np.random.default_rng(seed)
    inst = make_instance("chimera:1", "gaussian", "gaussian", seed=seed % 1000)
    g = random_gauge(inst.n, rng)
    s = _states(rng, 8, inst.n)
    gauged = inst.gauge(g)
    np.testing.assert_allclose(gauged.energies(s * g), inst.energies(s), atol=1e-9)
    np.testing.assert_array_equal(inst.gauge_states(s * g, g), s)


def test_gauge_keeps_cycle_products():
    # Products of couplings around a cycle are gauge invariant (frustration; [derived]).
    inst = make_instance("square:4", "gaussian", seed=1)
    g = random_gauge(inst.n, 9)
    gauged = inst.gauge(g)
    G = nx.Graph()
    for k, (i, j) in enumerate(inst.edges.tolist()):
        G.add_edge(i, j, k=k)
    for cycle in nx.cycle_basis(G):
        ks = [G[a][b]["k"] for a, b in zip(cycle, cycle[1:] + cycle[:1])]
        assert np.sign(np.prod(inst.J[ks])) == np.sign(np.prod(gauged.J[ks]))


def test_planted_state_follows_gauge():
    inst = Instance(edges=[[0, 1]], J=[-1.0], planted=[1, 1])
    g = np.array([1, -1])
    gauged = inst.gauge(g)
    assert gauged.planted.tolist() == [1, -1]
    assert gauged.planted_energy == inst.planted_energy == -1.0


def test_to_networkx_carries_couplings():
    inst = make_instance("chimera:1", "int:2", seed=2)
    G = inst.to_networkx()
    assert G.number_of_nodes() == inst.n and G.number_of_edges() == inst.m
    i, j = inst.edges[0]
    assert G[inst.labels[i]][inst.labels[j]]["J"] == inst.J[0]


@pytest.mark.parametrize("kwargs,match", [
    (dict(edges=[[0, 0]], J=[1.0]), "self-loop"),
    (dict(edges=[[1, 0]], J=[1.0]), "i < j"),
    (dict(edges=[[0, 1], [0, 1]], J=[1.0, 1.0]), "duplicate"),
    (dict(edges=[[0, 5]], J=[1.0], n=3), "outside"),
    (dict(edges=[[0, 1]], J=[1.0, 2.0]), "J has 2"),
    (dict(edges=[[0, 1]], J=[np.nan]), "finite"),
    (dict(edges=[[0, 1]], J=[1.0], h=[0, np.inf]), "finite"),
    (dict(edges=[[0, 1]], J=[1.0], labels=["a", "a"]), "collide"),
    (dict(edges=[[0, 1]], J=[1.0], planted=[1, 0]), "planted"),
])
def test_bad_instances_are_refused(kwargs, match):
    with pytest.raises(InputError, match=match):
        Instance(**kwargs)


def test_energies_of_many_states_on_2048_spins_are_vectorised(rng):
    # Correctness on the size the foundation's speed figure is measured on (speed itself: benchmarks/).
    inst = make_instance("chimera:16", "pm1", seed=1)
    states = _states(rng, 300, inst.n)
    e = inst.energies(states)
    k = 17
    manual = sum(inst.J[q] * states[k, i] * states[k, j] for q, (i, j) in enumerate(inst.edges.tolist()))
    assert e[k] == pytest.approx(manual, abs=1e-9)
