"""Every surrogate sampler passes the conformance kit (instgen.testing).

The kit's ground-state check compares with dimod's ExactSolver (an independent
brute force); the tests below also show the kit can fail.
"""

import numpy as np
import pytest

from instgen.samplers import Sampler
from instgen.testing import check_sampler, small_instances

SAMPLER_NAMES = ["sa", "pimc", "rotor", "tabu", "descent", "exact"]


@pytest.mark.parametrize("name", SAMPLER_NAMES)
def test_sampler_passes_conformance_kit(name):
    # Source of truth for the minimum: dimod.ExactSolver, inside check_sampler.
    check_sampler(name)


class _RandomGuess(Sampler):
    """Returns uniformly random states: cannot reach the ground state reliably."""

    name = "random-guess"

    def _run(self, instance, schedule, reads, seed, options):
        rng = np.random.default_rng(seed)
        return (2 * rng.integers(0, 2, size=(reads, instance.n)) - 1).astype(np.int8)


class _IgnoresSeed(Sampler):
    """Reaches the minimum by brute force but shuffles rows with fresh entropy."""

    name = "ignores-seed"
    uses_schedule = False

    def _run(self, instance, schedule, reads, seed, options):
        from instgen.samplers.exact import BruteForce

        states = BruteForce()._run(instance, None, max(reads, 4), 0, {})["states"]
        return np.random.default_rng().permutation(states)[:reads]


def test_kit_rejects_a_sampler_that_misses_the_minimum():
    with pytest.raises(AssertionError, match="ExactSolver"):
        check_sampler(_RandomGuess(), reads=1, instances=small_instances()[2:3])


def test_kit_rejects_a_sampler_that_ignores_its_seed():
    with pytest.raises(AssertionError, match="same seed"):
        check_sampler(_IgnoresSeed(), reads=16, instances=small_instances()[1:2])


def test_integer_instances_for_integer_only_samplers():
    insts = small_instances(integers_only=True)
    assert all(np.all(i.J == np.round(i.J)) and np.all(i.h == np.round(i.h)) for i in insts)
    check_sampler("sa", instances=insts, sweeps=300)
