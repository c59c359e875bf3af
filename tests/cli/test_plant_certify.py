"""`instgen plant` and `instgen certify` end to end; energies checked with dimod's ExactSolver."""

import json

import dimod
import pytest

from instgen.io import load_instance
from instgen.testing.cli import run_cli


run = run_cli


@pytest.mark.parametrize("argv", [
    ["chimera:2", "--method", "loops", "--density", "0.4", "--cap", "2", "--min-length", "6"],
    ["complete:10", "--method", "wishart", "--alpha", "0.7", "--disorder", "binary"],
    ["square:4,periodic", "--method", "tiles", "--mix", "0.2,0.5,0.3"],
])
def test_plant_writes_a_certified_instance(tmp_path, capsys, argv):
    f = tmp_path / "p.json"
    code, out, err = run(["plant", *argv, "--seed", 3, "--out", f], capsys)
    assert code == 0 and "proof checked" in out, err
    inst = load_instance(f)
    cert = inst.metadata["certificate"]
    assert cert["status"] == "planted" and inst.planted is not None
    if inst.n <= 16:  # dimod's ExactSolver confirms the planted energy is the ground energy
        assert dimod.ExactSolver().sample(inst.to_bqm()).first.energy == pytest.approx(cert["energy"], abs=1e-9)
    code, out, _ = run(["certify", f], capsys)
    assert code == 0 and "status         planted" in out


def test_certify_proves_a_free_instance_and_writes_it(tmp_path, capsys):
    f = tmp_path / "c.json"
    assert run(["make", "chimera:1,2", "--couplings", "pm1", "--fields", "int:1", "--seed", 2, "--out", f], capsys)[0] == 0
    code, out, _ = run(["certify", f, "--json"], capsys)
    d = json.loads(out)
    e_ref = dimod.ExactSolver().sample(load_instance(f).to_bqm()).first.energy  # reference
    assert code == 0 and d["status"] == "proven" and d["energy"] == pytest.approx(e_ref) and not d["written"]
    assert "certificate" not in load_instance(f).metadata
    code, out, _ = run(["certify", f, "--method", "tree", "--write"], capsys)
    assert code == 0 and "certificate written" in out and "not proven" not in out
    assert load_instance(f).metadata["certificate"]["energy"] == pytest.approx(e_ref)


def test_a_result_without_proof_says_not_proven(tmp_path, capsys):
    f = tmp_path / "u.json"
    run(["make", "chimera:2", "--seed", 1, "--out", f], capsys)
    code, out, _ = run(["certify", f, "--method", "anneal", "--time-limit", 1, "--seed", 1, "--write"], capsys)
    assert code == 0 and "status         not proven" in out
    assert any(line.startswith("not proven") for line in out.splitlines())
    assert load_instance(f).metadata["certificate"]["details"]["warning"].startswith("not proven")


@pytest.mark.parametrize("argv,needle", [
    (["plant", "square:8", "--method", "tiles", "--density", "0.3", "--out", "{tmp}/y.json"], "--density"),
    (["plant", "chimera:2", "--method", "wishart", "--out", "{tmp}/y.json"], "complete graph"),
    (["plant", "chimera:2", "--method", "nope", "--out", "{tmp}/y.json"], "unknown planted family"),
    (["plant", "chimera:1", "--density", "9", "--cap", "1", "--out", "{tmp}/y.json"], "cap"),
    (["certify", "{tmp}/missing.json"], "no such file"),
    (["certify", "{tmp}/x.json", "--method", "exact"], "2^72"),
    (["certify", "{tmp}/x.json", "--time-limit", "-1"], "time_limit"),
    (["certify", "{tmp}/x.json", "--method", "guess"], "invalid choice"),
])
def test_bad_input_is_one_line_and_the_file_is_untouched(tmp_path, capsys, argv, needle):
    x = tmp_path / "x.json"
    run(["make", "chimera:3", "--seed", 1, "--out", x], capsys)
    before = x.read_bytes()
    code, out, err = run([a.replace("{tmp}", str(tmp_path)) for a in argv], capsys)
    assert code == 2 and err.count("\n") == 1 and needle in err and "Traceback" not in err
    assert x.read_bytes() == before and not (tmp_path / "y.json").exists()


def test_plant_list(capsys):
    code, out, _ = run(["plant", "--list", "--json"], capsys)
    names = {r["name"]: r for r in json.loads(out)}
    assert code == 0 and set(names) >= {"loops", "wishart", "tiles"}
    assert "--density" in names["loops"]["options"] and "--mix" in names["tiles"]["options"]


@pytest.mark.parametrize("argv,alphabet,limit", [
    (["chimera:2", "--method", "loops", "--density", "0.5", "--cap", "3", "--loop-weights", "1,2,3"], "int:3", 3),
    (["chimera:2", "--method", "terms", "--kinds", "loop,cell", "--loop-weights", "1/3,2/3,1", "--cap", "1"],
     "levels:-1,-2/3,-1/3,1/3,2/3,1", 1),
    (["square:4,periodic", "--method", "tiles", "--mix", "0.2,0.5,0.3"], "int:2", None),
    (["complete:10", "--method", "wishart", "--alpha", "0.7", "--coupling-range", "1"], "gaussian", 1),
])
def test_planted_files_carry_their_alphabet_and_profile_without_a_scale(tmp_path, capsys, argv, alphabet, limit):
    f = tmp_path / "p.json"
    assert run(["plant", *argv, "--seed", 5, "--out", f], capsys)[0] == 0
    inst = load_instance(f)
    rules = inst.metadata["rules"]
    assert rules["couplings"].startswith(alphabet) and rules["coupling_range"] == limit
    # the alphabet bounds every coupling where the construction caps them (its range)
    if limit is not None:
        assert abs(inst.J).max() <= limit
    # the proof survives (planted energy = the energy dimod computes for the planted state)
    bqm = dimod.BinaryQuadraticModel.from_ising(dict(enumerate(inst.h)),
                                                {tuple(map(int, e)): j for e, j in zip(inst.edges, inst.J)})
    assert bqm.energy(dict(enumerate(inst.planted.tolist()))) == pytest.approx(inst.planted_energy)
    assert inst.metadata["certificate"]["status"] == "planted"
    code, out, err = run(["profile", f, "--points", 6, "--reads", 8, "--sweeps", 60, "--seed", 1,
                          "--out", tmp_path, "--json"], capsys)
    assert code == 0, err
    assert "coupling alphabet" in json.loads(out)["settings"]["beta_range_source"]


def test_wishart_alphabet_spread_matches_its_couplings(tmp_path, capsys):
    # the recorded gaussian sigma = sqrt(M)/N against the spread numpy measures on a large instance
    import numpy as np

    f = tmp_path / "w.json"
    assert run(["plant", "complete:120", "--method", "wishart", "--alpha", "0.5", "--seed", 2, "--out", f],
               capsys)[0] == 0
    inst = load_instance(f)
    sigma = float(inst.metadata["rules"]["couplings"].partition(":")[2])
    assert sigma == pytest.approx(np.sqrt(60) / 120, rel=1e-5)
    assert np.std(inst.J) == pytest.approx(sigma, rel=0.1)
