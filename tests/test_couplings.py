import numpy as np
import pytest

from instgen.couplings import Alphabet, CouplingRules
from instgen.errors import InputError
from instgen.make import make_instance


@pytest.mark.parametrize("spec,values", [
    ("pm1", {-1.0, 1.0}),
    ("int:3", {-3.0, -2.0, -1.0, 1.0, 2.0, 3.0}),
    ("levels:-1,-0.5,0.5,1", {-1.0, -0.5, 0.5, 1.0}),
])
def test_discrete_alphabets_draw_only_their_values(spec, values):
    a = Alphabet.parse(spec)
    drawn = set(a.sample(2000, seed=1).tolist())
    assert drawn == values


def test_gaussian_and_uniform_statistics():
    g = Alphabet.parse("gaussian:2").sample(20000, seed=1)
    assert abs(g.std() - 2.0) < 0.05 and abs(g.mean()) < 0.05
    u = Alphabet.parse("uniform:-0.5,1.5").sample(20000, seed=1)
    assert u.min() >= -0.5 and u.max() <= 1.5 and abs(u.mean() - 0.5) < 0.02


def test_range_and_precision_are_applied():
    # A chip with couplers in [-1, 1] in steps of 1/3 (journey A, invented scenario).
    rules = CouplingRules.make("uniform:-1,1", "none", coupling_range=1.0, precision=1 / 3)
    J = rules.sample_couplings(5000, seed=2)
    assert np.abs(J).max() <= 1.0 + 1e-12
    assert np.allclose(np.round(J * 3), J * 3)
    assert rules.allows(J)
    g = CouplingRules.make("gaussian:3", coupling_range=1.0).sample_couplings(1000, seed=1)
    assert np.abs(g).max() <= 1.0


@pytest.mark.parametrize("kwargs", [
    dict(couplings="int:3", coupling_range=1.0),            # alphabet reaches 3, range 1
    dict(couplings="levels:0.25,0.5", precision=1 / 3),      # values not on the grid
    dict(couplings="pm1", coupling_range=-1.0),
    dict(couplings="pm1", precision=float("nan")),
    dict(couplings="bogus"),
    dict(couplings="int:0"),
    dict(couplings="uniform:1,1"),
    dict(couplings="gaussian:-1"),
    dict(couplings="none"),
    dict(couplings="levels:0"),
])
def test_rules_that_cannot_hold_are_refused(kwargs):
    with pytest.raises(InputError):
        CouplingRules.make(**kwargs)


def test_rules_round_trip_and_scale():
    rules = CouplingRules.make("int:3", "pm1", coupling_range=3, precision=1)
    assert CouplingRules.from_dict(rules.to_dict()) == rules
    assert rules.scale == 3


def test_make_instance_is_reproducible_and_records_rules():
    a = make_instance("chimera:2", "gaussian", "gaussian:0.1", seed=4)
    b = make_instance("chimera:2", "gaussian", "gaussian:0.1", seed=4)
    assert np.array_equal(a.J, b.J) and np.array_equal(a.h, b.h)
    assert a.metadata["rules"]["couplings"] == "gaussian:1"
    c = make_instance("chimera:2", "gaussian", seed=5)
    assert not np.array_equal(a.J, c.J)
