"""The Wishart planted ensemble (Hamze et al., PRE 101, 052102 (2020)), checked with
dimod's ExactSolver and numpy linear algebra."""

import dimod
import numpy as np
import pytest

from instgen.certify import certify
from instgen.errors import CertificationError, InputError
from instgen.planted import plant
from instgen.planted.wishart import plant_wishart, psd_proof


def ground(inst):
    return dimod.ExactSolver().sample(inst.to_bqm()).first.energy


@pytest.mark.parametrize("alpha,disorder", [(0.25, "gaussian"), (0.5, "gaussian"), (1.0, "gaussian"),
                                            (2.0, "gaussian"), (0.5, "binary"), (1.5, "binary")])
def test_planted_state_is_a_ground_state(alpha, disorder):
    # Hamze et al. 2020: t is a ground state of J = W W^T / N (our sign convention)
    inst = plant_wishart("complete:12", alpha, seed=int(alpha * 10), disorder=disorder)
    e_planted = inst.energy(inst.planted)
    assert ground(inst) == pytest.approx(e_planted, abs=1e-9)  # dimod's ExactSolver
    assert e_planted == pytest.approx(inst.metadata["construction"]["planted_energy"], rel=1e-12)


def test_couplings_have_the_wishart_structure():
    # W = P Z has M columns and W^T t = 0 (paper), so J + diag(d) = W W^T / N has rank <= M and t in its kernel
    N, alpha = 20, 0.3
    inst = plant_wishart(f"complete:{N}", alpha, seed=4)
    M = inst.metadata["construction"]["columns"]
    assert M == round(alpha * N)
    Q = np.zeros((N, N))
    Q[inst.edges[:, 0], inst.edges[:, 1]] = inst.J
    Q = Q + Q.T
    t = inst.planted.astype(float)
    Q[np.diag_indices(N)] = -t * (Q @ t)
    assert np.linalg.matrix_rank(Q, tol=1e-9) <= M
    assert np.allclose(Q @ t, 0, atol=1e-12)
    # E0 = -tr(W W^T) / (2N) = -tr(Q) / 2 (derived from the construction)
    assert inst.energy(inst.planted) == pytest.approx(-np.trace(Q) / 2, rel=1e-12)


def test_proof_rejects_a_state_that_is_not_ground():
    inst = plant_wishart("complete:10", 0.6, seed=2)
    wrong = inst.planted.copy()
    wrong[0] *= -1
    fake = inst.replace(planted=wrong)
    assert ground(inst) < fake.energy(wrong) - 1e-9  # ExactSolver: the flipped state is not ground
    with pytest.raises(CertificationError):
        psd_proof(fake)


def test_range_rescaling_keeps_the_proof():
    inst = plant_wishart("complete:10", 0.8, seed=5, coupling_range=1.0)
    assert np.abs(inst.J).max() == pytest.approx(1.0)
    assert ground(inst) == pytest.approx(inst.energy(inst.planted), abs=1e-9)


def test_same_seed_same_instance():
    a, b = (plant_wishart("complete:16", 0.5, seed=9) for _ in range(2))
    assert np.array_equal(a.J, b.J) and np.array_equal(a.planted, b.planted)
    assert not np.array_equal(a.J, plant_wishart("complete:16", 0.5, seed=10).J)


def test_dense_graph_required_and_knobs_checked():
    with pytest.raises(InputError, match="complete graph"):
        plant_wishart("chimera:1", 0.5, seed=1)
    with pytest.raises(InputError, match="alpha"):
        plant_wishart("complete:8", 0, seed=1)
    with pytest.raises(InputError, match="disorder"):
        plant_wishart("complete:8", 0.5, seed=1, disorder="uniform")


def test_complete_graph_instance_comes_out_certified():
    inst = plant("complete:64", "wishart", seed=3, alpha=0.75)
    cert = inst.metadata["certificate"]
    assert cert["status"] == "planted" and cert["details"]["slack"] < 1e-9
    assert certify(inst).method == "planted"
