from fractions import Fraction

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


# ---------------------------------------------------------------- fractions and the precision grid
# The reference for every grid value is Python's fractions module: float(Fraction(k, 3)) is the float
# nearest to k/3 (IEEE 754 round-to-nearest, Python docs "fractions" and "Floating Point Arithmetic").
THIRDS = {float(Fraction(k, 3)) for k in range(-3, 4) if k}


def test_levels_and_precision_may_be_written_as_fractions():
    rules = CouplingRules.make("levels:-1,-2/3,-1/3,1/3,2/3,1", "none", coupling_range="1", precision="1/3")
    assert set(rules.couplings.values) == THIRDS and rules.precision == float(Fraction(1, 3))
    assert rules.couplings.spec == "levels:-1,-2/3,-1/3,1/3,2/3,1"
    assert CouplingRules.from_dict(rules.to_dict()) == rules


@pytest.mark.parametrize("levels", ["-1,-0.6667,-0.3333,0.3333,0.6667,1", "-1,-0.667,-0.333,0.333,0.667,1",
                                    "-1,-0.6666666666666666,-0.3333333333333333,0.3333333333333333,"
                                    "0.6666666666666666,1"])
def test_decimals_near_the_grid_mean_the_grid_values(levels):
    for precision in ("1/3", 1 / 3, "0.3333333333333333"):
        rules = CouplingRules.make(f"levels:{levels}", "none", coupling_range=1.0, precision=precision)
        assert set(rules.couplings.values) == THIRDS
        assert set(rules.sample_couplings(500, seed=1).tolist()) == THIRDS


def test_decimals_far_from_the_grid_are_refused_naming_the_value():
    with pytest.raises(InputError) as err:
        CouplingRules.make("levels:-1,-0.33,0.33,1", "none", precision="1/3")
    text = str(err.value)
    assert "\n" not in text and "0.33" in text and "1/3" in text and "fractions" in text


@pytest.mark.parametrize("text", ["1/0", "one", "1/3/3", "inf", "nan", ""])
def test_bad_numbers_are_one_clear_input_error(text):
    with pytest.raises(InputError):
        CouplingRules.make("pm1", "none", precision=text or " ")


def test_snapped_values_carry_no_float_noise():
    # sums of thirds as a loop construction makes them; float arithmetic leaves noise behind
    noisy = np.array([1 / 3 + 1 / 3 + 1 / 3 - 1 / 3 - 1 / 3 - 1 / 3, 2 / 3 - 1 / 3 - 1 / 3, 0.1 * 3 * (10 / 3),
                      (1 / 3) * 3 - 1e-16, -(2 / 3 + 1 / 3)])
    assert not set(noisy.tolist()) <= THIRDS | {0.0}  # (the premise: these are noisy)
    rules = CouplingRules.make("levels:-1,-2/3,-1/3,1/3,2/3,1", "none", coupling_range=1, precision="1/3")
    clean = rules.legalise(noisy)
    assert clean.tolist() == [0.0, 0.0, 1.0, 1.0, -1.0]
    assert not np.signbit(clean[clean == 0]).any()  # no negative zeros
    # a decimal step: multiples of 0.01 are the floats Python reads for "0.07" etc.
    d = CouplingRules.make("gaussian", "none", precision=0.01).legalise([0.07 + 1e-9, 0.29 - 1e-9, -0.57])
    assert d.tolist() == [float("0.07"), float("0.29"), float("-0.57")]


def test_mutated_children_stay_on_the_exact_grid():
    from instgen.evolve.operators import OPERATORS, Variation

    rules = CouplingRules.make("levels:-1,-2/3,-1/3,1/3,2/3,1", "none", coupling_range=1, precision="1/3")
    var = Variation(rules, 8, np.array([[i, i + 1] for i in range(7)]), 0.5)
    from instgen.evolve.genome import FreeGenome

    g = FreeGenome(rules.sample_couplings(7, seed=3), np.zeros(8))
    rng = np.random.default_rng(5)
    for name in ("creep", "resample", "sign-flip"):
        for _ in range(50):
            g = OPERATORS.get(name)()(g, rng, var)
            assert set(g.J.tolist()) <= THIRDS | {0.0}  # creep may land on the grid's zero
