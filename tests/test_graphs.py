import networkx as nx
import pytest

from instgen.errors import InputError, ResourceError
from instgen.graphs import build_graph, estimate_size


def chimera_counts(m, n, t):
    # Chimera C(m,n,t): 2tmn nodes; t^2 mn + t(m-1)n + tm(n-1) edges (Bunyk et al., IEEE Trans. Appl.
    # Supercond. 24, 1700110 (2014); from memory).
    return 2 * t * m * n, t * t * m * n + t * (m - 1) * n + t * m * (n - 1)


@pytest.mark.parametrize("spec,args", [("chimera:4", (4, 4, 4)), ("chimera:16", (16, 16, 4)),
                                       ("chimera:3,5,2", (3, 5, 2))])
def test_chimera_counts(spec, args):
    t = build_graph(spec)
    assert (t.n, t.m) == chimera_counts(*args)
    assert t.degrees().max() <= args[2] + 2  # degree <= t + 2 (published)


def test_chimera_16_published_counts():
    # C(16,16,4): 2048 nodes, 6016 edges (the formula above; from memory).
    t = build_graph("chimera:16")
    assert (t.n, t.m) == (2048, 6016)


@pytest.mark.parametrize("m,nodes,edges", [(6, 680, 4484), (16, 5640, 40484)])
def test_pegasus_counts(m, nodes, edges):
    # Pegasus fabric-only: P(6) 680 nodes / 4484 edges; P(16) 5640 / 40484 (Boothby et al., arXiv:2003.00133).
    t = build_graph(f"pegasus:{m}")
    assert (t.n, t.m) == (nodes, edges)
    assert t.degrees().max() <= 15
    assert t.n == 24 * m * (m - 1) - 8 * (m - 1)


@pytest.mark.parametrize("m,tt", [(6, 4), (3, 2), (2, 4)])
def test_zephyr_counts(m, tt):
    # Zephyr Z(m,t): 4tm(2m+1) nodes; 2t((8t+8)m^2 - 2m - 3) edges for m > 1; degree <= 4t+4 (published with the Zephyr
    # family, Boothby, King & Raymond 2021 technical report; from memory).
    t = build_graph(f"zephyr:{m},{tt}")
    assert t.n == 4 * tt * m * (2 * m + 1)
    assert t.m == 2 * tt * ((8 * tt + 8) * m * m - 2 * m - 3)
    assert t.degrees().max() <= 4 * tt + 4


def test_hardware_graphs_match_dwave_graphs():
    import dwave.graphs as dg

    for spec, G in [("chimera:3", dg.chimera_graph(3)), ("pegasus:3", dg.pegasus_graph(3)),
                    ("zephyr:2", dg.zephyr_graph(2))]:
        t = build_graph(spec)
        assert nx.is_isomorphic(t.to_networkx(), G) if t.n < 100 else (t.n, t.m) == (len(G), G.number_of_edges())
        assert set(t.labels) == set(G.nodes)


@pytest.mark.parametrize("spec,n,m", [
    ("square:32", 1024, 2 * 32 * 31),          # open L x L: 2L(L-1) edges (formula)
    ("square:8,periodic", 64, 128),            # torus: 2 L^2 edges
    ("square:4x6", 24, 4 * 5 + 3 * 6),         # L x W open: L(W-1) + (L-1)W
    ("cubic:5", 125, 3 * 25 * 4),              # open L^3: 3 L^2 (L-1)
    ("cubic:4,periodic", 64, 3 * 64),          # periodic: 3 L^3
    ("kings:5", 25, 2 * 5 * 4 + 2 * 16),       # square edges + 2 (L-1)^2 diagonals
    ("triangular:5", 25, 2 * 5 * 4 + 16),      # square edges + (L-1)^2 diagonals
    ("complete:64", 64, 64 * 63 // 2),
])
def test_lattice_counts(spec, n, m):
    t = build_graph(spec)
    assert (t.n, t.m) == (n, m)


def test_square_matches_networkx_grid():
    # networkx's grid_2d_graph as the reference lattice.
    t = build_graph("square:6x4,periodic")
    assert nx.is_isomorphic(t.to_networkx(), nx.grid_2d_graph(6, 4, periodic=True))


def test_heavy_hex_degrees_and_bipartite():
    # Heavy-hex: every hexagonal-lattice edge carries one extra degree-2 node; degree 2 or 3 (published definition).
    t = build_graph("heavy-hex:3,3")
    hexa = nx.hexagonal_lattice_graph(3, 3)
    assert t.n == hexa.number_of_nodes() + hexa.number_of_edges()
    assert t.m == 2 * hexa.number_of_edges()
    assert set(t.degrees().tolist()) <= {1, 2, 3}
    assert t.summary()["bipartite"]


def test_regular_and_gnp_are_reproducible():
    a, b = build_graph("regular:30,3,7"), build_graph("regular:30,3,7")
    assert (a.edges == b.edges).all() and set(a.degrees().tolist()) == {3}
    assert build_graph("gnp:40,0.1").m == build_graph("gnp:40,0.1").m


def test_faults_remove_nodes_and_edges():
    full = build_graph("chimera:6")
    t = build_graph("chimera:6;dead-nodes=5;fault-seed=3")
    assert t.n == full.n - 5
    again = build_graph(t.spec)
    assert again.labels == t.labels
    t2 = build_graph("chimera:2;dead-nodes=[0,5];dead-edges=0.1")
    assert 0 not in t2.labels and 5 not in t2.labels
    assert t2.m < build_graph("chimera:2;dead-nodes=[0,5]").m


def test_summary_planarity_and_bipartite():
    s = build_graph("square:5").summary()
    assert s["planar"] and s["bipartite"]
    s = build_graph("complete:5").summary()
    assert not s["planar"] and not s["bipartite"]


def test_edge_list_file(tmp_path):
    p = tmp_path / "ring.txt"
    p.write_text("# a ring\n0 1\n1 2\n2 0\n")
    t = build_graph(f"file:{p}")
    assert (t.n, t.m) == (3, 3)


@pytest.mark.parametrize("spec,err", [
    ("", InputError), ("hexagon:3", InputError), ("chimera:x", InputError), ("chimera:0", InputError),
    ("square:3;dead-nodes=99", InputError), ("chimera:2;colour=red", InputError), ("gnp:10,2", InputError),
    ("regular:5,3", InputError), ("file:/nonexistent/edges.txt", InputError),
    ("chimera:3000", ResourceError), ("complete:100000", ResourceError),
])
def test_bad_specs(spec, err):
    with pytest.raises(err):
        build_graph(spec)


def test_size_guard_estimates_before_building():
    n, m = estimate_size("chimera:3000")
    assert n == 2 * 4 * 3000 * 3000
