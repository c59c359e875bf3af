"""Exports read back by their reference readers give the instance's energies."""

import json

import dimod
import networkx as nx
import numpy as np
import pytest
import scipy.io
from libcases import exact_certificate, with_certificate

from instgen.errors import InputError
from instgen.export import FORMATS, check_export, export_instance
from instgen.instance import Instance, random_gauge
from instgen.io import load_instance
from instgen.make import make_instance
from instgen.records import Certificate


@pytest.fixture(scope="module")
def inst():
    """Gaussian couplings and fields on pegasus:2, whose labels are not 0..n-1, with a best-found state."""
    base = make_instance("pegasus:2", "gaussian", "gaussian", seed=11)
    state = random_gauge(base.n, seed=1)
    cert = Certificate(energy=base.energy(state), state=state, method="a random state", status="not proven")
    return with_certificate(base, cert)


@pytest.fixture(scope="module")
def states(inst):
    return np.array([random_gauge(inst.n, seed=s) for s in range(20)])


def header(path, prefix):
    out = {}
    for line in open(path):
        if line.startswith(prefix):
            key, _, value = line[len(prefix):].partition(": ")
            out[key.strip()] = out.get(key.strip(), "") + value.strip()
    return out


def test_dimod_reads_its_own_file(inst, states, tmp_path):
    path, ground = export_instance(inst, tmp_path / "x", "dimod")
    with open(path, "rb") as fh:
        bqm = dimod.BinaryQuadraticModel.from_file(fh)
    assert bqm.vartype is dimod.SPIN and set(bqm.variables) == set(inst.labels)
    samples = [dict(zip(inst.labels, s.tolist())) for s in states]
    np.testing.assert_allclose(bqm.energies(samples), inst.energies(states), atol=1e-9)
    ss = dimod.SampleSet.from_serializable(json.loads(ground.read_text()))
    assert ss.first.energy == pytest.approx(inst.metadata["certificate"]["energy"], abs=1e-9)
    assert ss.info["status"] == "not proven"


def test_scipy_reads_the_coupling_matrix(inst, states, tmp_path):
    (path,) = export_instance(inst, tmp_path / "x", "ising-mtx")
    M = scipy.io.mmread(path).toarray()
    assert np.allclose(np.tril(M, -1), 0)  # upper triangle only, as the header states
    d = np.diag(M)
    U = M - np.diag(d)
    energies = states @ d + np.einsum("ri,ij,rj->r", states, U, states)
    np.testing.assert_allclose(energies, inst.energies(states), atol=1e-9)
    assert json.loads(header(path, "%")["labels"]) == list(inst.labels)


def test_scipy_reads_the_qubo_matrix_and_dimod_agrees_on_the_offset(inst, states, tmp_path):
    (path,) = export_instance(inst, tmp_path / "x", "qubo-mtx")
    Q = scipy.io.mmread(path).toarray()
    offset = float(header(path, "%")["offset"])
    x = (states + 1) // 2  # x = (s + 1)/2, as the header states
    e_qubo = np.einsum("ri,ij,rj->r", x, Q, x)
    np.testing.assert_allclose(e_qubo + offset, inst.energies(states), atol=1e-9)
    # dimod's own SPIN -> BINARY conversion gives the same matrix and offset
    binary = inst.to_bqm("BINARY")
    assert binary.offset == pytest.approx(offset, abs=1e-9)
    index = {lab: k for k, lab in enumerate(inst.labels)}
    for v, bias in binary.linear.items():
        assert Q[index[v], index[v]] == pytest.approx(bias, abs=1e-9)
    for (u, v), bias in binary.quadratic.items():
        i, j = sorted((index[u], index[v]))
        assert Q[i, j] == pytest.approx(bias, abs=1e-9)


def test_edge_list_text(inst, states, tmp_path):
    (path,) = export_instance(inst, tmp_path / "x", "edgelist")
    head = header(path, "# ")
    assert (int(head["n"]), int(head["m"])) == (inst.n, inst.m)
    J, h = {}, np.zeros(inst.n)
    for line in open(path):
        parts = line.split()
        if line.startswith("#"):
            continue
        if len(parts) == 3:
            J[int(parts[0]), int(parts[1])] = float(parts[2])
        else:
            h[int(parts[0])] = float(parts[1])
    assert len(J) == inst.m and all(i < j for i, j in J)
    energies = states @ h + sum(v * states[:, i] * states[:, j] for (i, j), v in J.items())
    np.testing.assert_allclose(energies, inst.energies(states), atol=1e-9)


def test_npz_and_json(inst, states, tmp_path):
    (path,) = export_instance(inst, tmp_path / "x", "npz")
    with np.load(path, allow_pickle=False) as z:
        e, J, h = z["edges"], z["J"], z["h"]
        assert json.loads(str(z["labels_json"])) == list(inst.labels)
        energies = states @ h + np.sum(J * states[:, e[:, 0]] * states[:, e[:, 1]], axis=1)
    np.testing.assert_allclose(energies, inst.energies(states), atol=1e-9)
    (path,) = export_instance(inst, tmp_path / "x", "json")
    np.testing.assert_array_equal(load_instance(path).energies(states), inst.energies(states))


@pytest.mark.parametrize("fmt", FORMATS.names())
def test_check_export_recomputes_the_optimum(inst, tmp_path, fmt):
    files = export_instance(inst, tmp_path / "x", fmt)
    r = check_export(files[0], fmt)
    cert_energy = inst.metadata["certificate"]["energy"]
    assert r.agrees and r.status == "not proven"
    assert r.ising_energy == pytest.approx(cert_energy, abs=1e-9)
    if fmt == "qubo-mtx":  # E_qubo(x*) = E_ising(s*) - offset
        assert r.energy == pytest.approx(cert_energy - float(inst.J.sum() - inst.h.sum()), abs=1e-9)


def test_check_export_notices_an_edited_file(inst, tmp_path):
    (path,) = export_instance(inst, tmp_path / "x", "edgelist")
    lines = path.read_text().splitlines()
    k = next(i for i, line in enumerate(lines) if not line.startswith("#"))
    i, j, v = lines[k].split()
    lines[k] = f"{i} {j} {float(v) + 0.5!r}"
    path.write_text("\n".join(lines) + "\n")
    assert not check_export(path, "edgelist").agrees


def test_check_export_needs_an_optimum(tmp_path):
    bare = make_instance("chimera:1", seed=1)
    for fmt in FORMATS.names():
        files = export_instance(bare, tmp_path / fmt, fmt)
        with pytest.raises(InputError):
            check_export(files[0], fmt)


def antiferromagnet(G: nx.Graph) -> Instance:
    G = nx.convert_node_labels_to_integers(G)
    edges = sorted(tuple(sorted(e)) for e in G.edges)
    inst = Instance(edges=edges, J=np.ones(len(edges)), n=G.number_of_nodes())
    return with_certificate(inst, exact_certificate(inst))


# max-cut values of named graphs (Petersen 12, K5 6, K6 9, odd cycle n-1, bipartite m): textbook values, from memory;
# unit antiferromagnet: E0 = m - 2 * maxcut
@pytest.mark.parametrize("G,maxcut", [
    (nx.petersen_graph(), 12), (nx.cycle_graph(7), 6), (nx.cycle_graph(9), 8),
    (nx.complete_graph(5), 6), (nx.complete_graph(6), 9), (nx.icosahedral_graph(), 20),
], ids=["petersen", "C7", "C9", "K5", "K6", "icosahedral"])
def test_qubo_export_gives_the_textbook_optimum(G, maxcut, tmp_path):
    inst = antiferromagnet(G)
    (path,) = export_instance(inst, tmp_path / "x", "qubo-mtx")
    Q = scipy.io.mmread(path).toarray()
    head = header(path, "%")
    offset = float(head["offset"])
    n, m = G.number_of_nodes(), G.number_of_edges()
    X = ((np.arange(2 ** n)[:, None] >> np.arange(n)) & 1).astype(float)  # every x in {0,1}^n
    best = np.einsum("ri,ij,rj->r", X, Q, X).min()
    assert best + offset == pytest.approx(m - 2 * maxcut)
    assert float(head["optimum energy (QUBO)"]) == pytest.approx(best)
    x = np.array([int(c) for c in head["optimum x"]], dtype=float)
    assert x @ Q @ x == pytest.approx(best)
    r = check_export(path, "qubo-mtx")
    assert r.agrees and r.status == "proven" and r.ising_energy == pytest.approx(m - 2 * maxcut)


def test_journey_c_student_reads_a_complete_graph_qubo(tmp_path):
    # a solver author's check: read the matrix with scipy, the optimum x from the header,
    # and compare x^T Q x with the optimum stated in the solver's (QUBO) convention
    base = make_instance("complete:12", "gaussian", seed=5)
    inst = with_certificate(base, exact_certificate(base))
    (path,) = export_instance(inst, tmp_path / "c12", "qubo-mtx")
    Q = scipy.io.mmread(path).tocsr()
    head = header(path, "%")
    x = np.array([int(c) for c in head["optimum x"]], dtype=float)
    e_qubo = float(x @ (Q @ x))
    assert e_qubo == pytest.approx(float(head["optimum energy (QUBO)"]), abs=1e-9)
    assert e_qubo == pytest.approx(inst.metadata["certificate"]["energy"] - float(head["offset"]), abs=1e-9)
