"""Tile planting on square and cubic lattices (after Perera et al., PRE 101, 023316 (2020)
and Hamze et al., PRE 97, 043303 (2018)), checked with dimod's ExactSolver, dwave-samplers'
tree-decomposition solver and hand-derived lattice facts."""

import dimod
import numpy as np
import pytest
from dwave.samplers import TreeDecompositionSolver

from instgen.certify import certify
from instgen.errors import CertificationError, InputError
from instgen.planted import plant
from instgen.planted.tiles import cube_patterns, plant_tiles, tiles_of


@pytest.mark.parametrize("spec", ["square:4,periodic", "square:4", "square:3x5", "cubic:2"])
@pytest.mark.parametrize("mix", [(1, 0, 0), (0, 1, 0), (0, 0, 1), (0.3, 0.3, 0.4)])
def test_planted_energy_is_ground_on_small_lattices(spec, mix):
    inst = plant_tiles(spec, mix=mix, seed=int(10 * mix[0]) + len(spec))
    e = dimod.ExactSolver().sample(inst.to_bqm()).first.energy  # reference
    assert e == pytest.approx(inst.energy(inst.planted), abs=1e-9)


@pytest.mark.parametrize("spec", ["square:8,periodic", "cubic:4"])
def test_planted_energy_is_ground_on_larger_lattices(spec):
    inst = plant_tiles(spec, mix=(0.5, 0.3, 0.2), seed=2)
    e = TreeDecompositionSolver().sample(inst.to_bqm()).first.energy  # dwave-samplers as the reference
    assert e == pytest.approx(inst.energy(inst.planted), abs=1e-9)


def test_periodic_tiles_cover_every_edge_once():
    # checkerboard plaquettes on an even periodic L x L lattice: L^2/2 tiles, 4 edges each, 2 L^2 edges
    inst = plant_tiles("square:6,periodic", seed=1)
    tiles = tiles_of(inst)
    assert len(tiles) == 18
    edges = np.concatenate([t["edges"] for t in tiles])
    assert np.array_equal(np.sort(edges), np.arange(inst.m))
    # cubes with all-even or all-odd corners on an even periodic L^3 lattice: L^3/4 cubes, 12 edges each
    inst = plant_tiles("cubic:4,periodic", seed=1)
    tiles = tiles_of(inst)
    assert len(tiles) == 16
    assert np.array_equal(np.sort(np.concatenate([t["edges"] for t in tiles])), np.arange(inst.m))


def test_every_square_tile_is_frustrated_in_the_final_gauge():
    # frustration, prod(-J) < 0 around a plaquette, is gauge invariant (derived; common practice)
    inst = plant_tiles("square:8,periodic", seed=5)
    for t in tiles_of(inst):
        assert np.prod(-inst.J[t["edges"]]) < 0


def test_fully_frustrated_cube_classes():
    # derived by hand: a +-1 cube with all 6 faces frustrated needs >= 3 broken edges; all +1 is a ground
    # state only when exactly 3 antiferromagnetic edges, one per direction, cover the 6 faces: 2^3 = 8 ways
    f6 = cube_patterns()["f6"]
    assert len(f6) == 8 and np.all((f6 > 0).sum(axis=1) == 3)
    # a single antiferromagnetic edge frustrates the two faces it lies on: 12 such patterns in f2
    assert np.sum((cube_patterns()["f2"] > 0).sum(axis=1) == 1) == 12


def test_mix_controls_the_classes():
    only1 = plant_tiles("square:8,periodic", mix=(1, 0, 0), seed=3)
    assert set(np.abs(only1.J)) == {1.0}
    only3 = plant_tiles("square:8,periodic", mix={"c3": 1}, seed=3)
    assert sorted(np.abs(only3.J)).count(2.0) == 3 * 32
    assert plant_tiles("square:8,periodic", mix="0,1,0", seed=3).metadata["construction"]["mix"]["c2"] == 1.0


def test_open_square_32_comes_out_certified():
    inst = plant("square:32", "tiles", seed=1)
    con = inst.metadata["construction"]
    assert inst.metadata["certificate"]["status"] == "planted"
    # open 32 x 32: 31 x 31 plaquettes, checkerboard half rounded up
    assert con["tile_count"] == (31 * 31 + 1) // 2
    assert con["uncovered_edges"] == inst.m - 4 * con["tile_count"]


def test_bad_requests_and_tampering():
    with pytest.raises(InputError, match="square and cubic"):
        plant_tiles("chimera:2", seed=1)
    with pytest.raises(InputError, match="even sides"):
        plant_tiles("square:5,periodic", seed=1)
    with pytest.raises(InputError, match="tile mix"):
        plant_tiles("square:4", mix=(1, -1, 0), seed=1)
    with pytest.raises(InputError, match="unknown tile class"):
        plant_tiles("square:4", mix={"f2": 1}, seed=1)
    inst = plant_tiles("square:4,periodic", seed=1)
    J = inst.J.copy()
    J[0] = -3 * J[0]
    with pytest.raises(CertificationError):
        certify(inst.with_couplings(J), "planted")


def test_same_seed_same_instance():
    a, b = (plant_tiles("cubic:4,periodic", seed=8) for _ in range(2))
    assert np.array_equal(a.J, b.J) and np.array_equal(a.planted, b.planted)
