"""Frustrated-loop planting, checked against Hen et al. (PRA 92, 042325 (2015)),
dimod's ExactSolver and networkx."""

import dimod
import networkx as nx
import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from instgen.certify import certify
from instgen.errors import CertificationError, InputError
from instgen.io import dumps_instance, loads_instance
from instgen.make import topology
from instgen.planted import plant
from instgen.planted.loops import (Loop, LoopGraph, fit_loop, loop_couplings, loop_instance, loops_of,
                                   planted_bound, plant_loops, random_loop, verify)
from instgen.planted.terms import plant_terms


def exact_ground(inst):
    return dimod.ExactSolver().sample(inst.to_bqm()).first.energy


@pytest.mark.parametrize("spec,density,cap", [("square:4", 0.3, None), ("square:4,periodic", 0.5, 2),
                                              ("chimera:1", 1.0, None), ("chimera:1,2,2", 0.8, 3),
                                              ("gnp:14,0.4,3", 0.6, None)])
def test_planted_energy_is_the_ground_energy(spec, density, cap):
    inst = plant_loops(spec, density, seed=7, cap=cap)
    loops = loops_of(inst)
    # Hen et al. 2015: with unit weights E0 = -sum_j (L_j - 2)
    assert inst.energy(inst.planted) == -sum(loop.length - 2 for loop in loops)
    # the planted energy is the ground energy (dimod's ExactSolver as the reference)
    assert exact_ground(inst) == pytest.approx(inst.energy(inst.planted), abs=1e-9)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 10_000), density=st.floats(0.1, 1.5), min_length=st.integers(3, 6),
       weights=st.sampled_from([(1.0,), (1.0, 2.0), (0.5, 1.5)]))
def test_any_loop_set_keeps_the_planted_state_a_ground_state(seed, density, min_length, weights):
    # a 12-spin graph with cycles of many lengths; ExactSolver is the reference
    inst = plant_loops("gnp:12,0.45,5", density, seed=seed, min_length=min_length, weights=weights)
    assert inst.energy(inst.planted) == pytest.approx(planted_bound(loops_of(inst)))
    assert exact_ground(inst) == pytest.approx(inst.energy(inst.planted), abs=1e-9)


def test_loops_are_simple_cycles_of_the_graph():
    topo = topology("pegasus:2")
    G = topo.index_graph()
    lg = LoopGraph.of(topo)
    rng = np.random.default_rng(0)
    for _ in range(200):
        loop = random_loop(lg, rng, min_length=5, max_length=12)
        assert 5 <= loop.length <= 12
        cyc = nx.Graph([tuple(topo.edges[e]) for e in loop.edges])
        # a simple cycle: connected, every vertex of degree 2 (networkx)
        assert nx.is_connected(cyc) and all(d == 2 for _, d in cyc.degree())
        assert set(cyc.nodes) == set(loop.spins)
        assert all(G.has_edge(a, b) for a, b in zip(loop.spins, loop.spins[1:] + loop.spins[:1]))


def test_a_single_loop_is_frustrated_in_every_gauge():
    # product of couplings around a cycle is gauge invariant (derived; common practice);
    # a frustrated cycle has prod(-J) < 0
    topo = topology("chimera:2")
    for seed in range(5):
        inst = plant_loops(topo, density=1 / topo.n, seed=seed)
        (loop,) = loops_of(inst)
        assert np.prod(-inst.J[list(loop.edges)]) < 0
        assert np.count_nonzero(inst.J) == loop.length


def test_cap_limits_accumulated_couplings():
    # range-limited planting (King, Lanting, Harris, arXiv:1502.02098): |J| <= R on every edge
    for cap, density in ((1, 0.2), (2, 0.5), (3, 0.8)):
        inst = plant_loops("chimera:3", density, seed=cap, cap=cap)
        assert np.abs(inst.J).max() <= cap
        verify(inst)
    with pytest.raises(InputError, match="cap"):
        plant_loops("chimera:1", 5.0, seed=1, cap=1, max_redraws=20)


def test_same_seed_same_instance_and_gauge_hides_the_state():
    a = plant_loops("chimera:2", 0.4, seed=11)
    b = plant_loops("chimera:2", 0.4, seed=11)
    c = plant_loops("chimera:2", 0.4, seed=12)
    assert np.array_equal(a.J, b.J) and np.array_equal(a.planted, b.planted)
    assert not np.array_equal(a.J, c.J)
    assert 0 < np.count_nonzero(a.planted == 1) < a.n


def test_loop_couplings_api():
    tri = Loop((0, 1, 2), (0, 2, 1), frustrated=0, weight=2.0)
    edges = np.array([[0, 1], [0, 2], [1, 2]])
    assert loop_couplings([tri, tri], 3).tolist() == [4.0, -4.0, -4.0]
    with pytest.raises(InputError, match="cap"):
        loop_couplings([tri, tri], 3, cap=3)
    J = loop_couplings([tri], 3, gauge=[-1, 1, 1], edges=edges)
    assert J.tolist() == [-2.0, 2.0, -2.0]
    inst = loop_instance(topology("complete:3"), [tri], [-1, 1, 1])
    assert inst.energy(inst.planted) == planted_bound([tri]) == -2.0


def test_loop_list_survives_a_file_round_trip_and_tampering_is_caught():
    inst = plant("chimera:2", "loops", seed=3, density=0.5, cap=2)
    back = loads_instance(dumps_instance(inst))
    assert [x.to_list() for x in loops_of(back)] == [x.to_list() for x in loops_of(inst)]
    assert certify(back, "planted").status == "planted"
    J = back.J.copy()
    J[np.flatnonzero(J)[0]] *= -1
    with pytest.raises(CertificationError, match="rebuild"):
        certify(back.with_couplings(J), "planted")


def test_bad_requests_are_input_errors():
    with pytest.raises(InputError, match="density"):
        plant_loops("chimera:1", -1, seed=1)
    with pytest.raises(InputError, match="min_length"):
        random_loop("chimera:1", 1, min_length=2)
    with pytest.raises(InputError, match="no cycle"):  # square:2 has only one 4-cycle
        random_loop("square:2", 1, min_length=6, max_steps=500)
    with pytest.raises(InputError, match="no knob"):
        plant("chimera:1", "loops", seed=1, alpha=0.3)


def test_done_criterion_graphs_come_out_certified():
    for spec in ("chimera:8", "pegasus:4"):
        inst = plant(spec, "loops", seed=1, density=0.3)
        cert = inst.metadata["certificate"]
        assert cert["status"] == "planted" and cert["energy"] == inst.metadata["construction"]["planted_energy"]


def test_loop_set_edits_keep_the_cap_and_the_proof():
    # many random add / remove / replace edits on a small graph; every result checked with ExactSolver
    from instgen.planted.loops import LoopSet

    topo = topology("chimera:1,2")
    lg = LoopGraph.of(topo)
    rng = np.random.default_rng(4)
    ls = LoopSet(topo.m, cap=2)
    for step in range(60):
        loop = random_loop(lg, rng, min_length=4, weight=float(rng.choice([1.0, 2.0])))
        r = rng.random()
        if r < 0.5 or not len(ls):
            ls.add(loop)
        elif r < 0.75:
            ls.remove(int(rng.integers(len(ls))))
        else:
            ls.replace(int(rng.integers(len(ls))), loop)
        assert np.abs(ls.acc).max(initial=0) <= 2
        assert np.allclose(ls.acc, loop_couplings(ls.loops, topo.m))
        if step % 20 == 19 and len(ls):
            g = (2 * rng.integers(0, 2, topo.n) - 1)
            inst = loop_instance(topo, ls.loops, g, cap=2)
            assert np.array_equal(inst.J, ls.couplings(gauge=g, edges=topo.edges))
            assert exact_ground(inst) == pytest.approx(ls.bound)  # dimod's ExactSolver


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 10_000), weights=st.sampled_from([(1.0,), (1 / 3, 2 / 3, 1.0), (0.5, 1.5)]))
def test_a_refitted_loop_stays_under_the_cap_and_stays_a_frustrated_loop(seed, weights):
    # Fill chimera:1 close to a cap of 1, then re-dress fresh cycles to fit: every result
    # must keep |J| <= cap, its cycle, one frustrated edge and a weight from the list,
    # and the planted state must stay a ground state (dimod's ExactSolver as the reference).
    rng = np.random.default_rng(seed)
    g = LoopGraph.of(topology("chimera:1"))
    acc, placed = np.zeros(g.edges.shape[0]), []
    for _ in range(40):
        drawn = random_loop(g, rng, 4, weight=float(rng.choice(weights)))
        loop = fit_loop(acc, drawn, 1.0, weights, rng)
        if loop is None:
            continue
        assert loop.spins == drawn.spins and loop.edges == drawn.edges and loop.weight in weights
        acc[list(loop.edges)] += loop.values()
        assert np.all(np.abs(acc) <= 1.0 + 1e-9)
        placed.append(loop)
    inst = loop_instance("chimera:1", placed, np.ones(8, dtype=np.int8), cap=1.0)
    assert exact_ground(inst) == pytest.approx(planted_bound(placed), abs=1e-9)


def test_planting_under_a_saturated_cap_stops_and_records_what_it_placed():
    # 20 loops per spin cannot fit under |J| <= 1/3 on two Chimera cells (16 spins): planting
    # stops early instead of redrawing for every remaining term, and says how many it placed;
    # the planted state is still a ground state (dimod's ExactSolver as the reference).
    inst = plant_terms("chimera:1,2", density=20, seed=3, kinds="loop", cap=1 / 3, weights=(1 / 3,))
    con = inst.metadata["construction"]
    assert inst.n == 16 and 0 < con["loop_count"] < 20 * 16
    assert np.all(np.abs(inst.J) <= 1 / 3 + 1e-9)
    assert exact_ground(inst) == pytest.approx(inst.energy(inst.planted), abs=1e-9)
