"""What each sampler does with its schedule and options, checked against facts outside the code."""

import itertools

import dimod
import numpy as np
import pytest

from instgen.errors import InputError, ResourceError
from instgen.instance import Instance
from instgen.make import make_instance
from instgen.samplers import Schedule, get_sampler
from instgen.samplers.pimc import field_arrays


@pytest.fixture(scope="module")
def c2():
    return make_instance("chimera:2", "pm1", seed=5)


# ------------------------------------------------------------------ sa
def test_sa_follows_the_given_temperatures(c2):
    # Common practice: at infinite temperature (beta -> 0) every state is equally
    # likely, so the mean energy of a zero-field instance is 0 (E[s_i s_j] = 0).
    hot = get_sampler("sa").run(c2, Schedule(sweeps=20, beta_range=(1e-9, 1e-9)), reads=400, seed=1)
    assert abs(hot.energies.mean()) < 4 * hot.energies.std() / np.sqrt(400)
    # ...while a cold schedule on the same instance goes far below that.
    cold = get_sampler("sa").run(c2, Schedule(sweeps=500, beta_range=(0.1, 5.0)), reads=20, seed=1)
    assert cold.energies.mean() < hot.energies.mean() - 0.5 * c2.m


def test_sa_records_schedule_and_work(c2):
    sched = Schedule(sweeps=30, beta_range=(0.2, 3.0), interpolation="linear")
    batch = get_sampler("sa").run(c2, sched, reads=7, seed=2)
    assert batch.schedule["beta_range"] == [0.2, 3.0] and batch.schedule["interpolation"] == "linear"
    assert batch.spin_updates == 7 * 30 * c2.n


def test_sa_options_are_checked(c2):
    with pytest.raises(InputError, match="order"):
        get_sampler("sa").run(c2, Schedule(sweeps=5), reads=2, seed=1, order="backwards")
    a = get_sampler("sa").run(c2, Schedule(sweeps=50), reads=5, seed=3, order="random", rule="gibbs")
    assert a.options["order"] == "random"


# ---------------------------------------------------------------- pimc / rotor
def test_field_arrays_follow_the_schedule_shapes():
    plain_p, plain_t = field_arrays(Schedule(sweeps=10, beta_range=(0.1, 4.0)), 3.0)
    assert plain_p[-1] == pytest.approx(4.0) and plain_t[-1] == pytest.approx(0.0)
    assert np.all(np.diff(plain_t) < 0) and np.all(np.diff(plain_p) > 0)
    p, t = field_arrays(Schedule(sweeps=20, shape="pause", s_pause=0.5, pause_fraction=0.5), 2.0)
    held = np.isclose(t, 2.0 * 0.5)
    assert held.sum() >= 10  # the transverse field holds at s = 0.5 for half the sweeps
    p, t = field_arrays(Schedule(sweeps=20, shape="quench", s_quench=0.4, quench_sweeps=3), 2.0)
    assert np.allclose(t[-3:], 0.0) and np.all(t[:-3] >= 2.0 * 0.6 - 1e-12)


@pytest.mark.parametrize("name", ["pimc", "rotor"])
def test_quantum_surrogates_refuse_an_all_zero_transverse_field(name, c2):
    with pytest.raises(InputError, match="zero at every sweep"):
        get_sampler(name).run(c2, Schedule(sweeps=10), reads=2, seed=1, transverse=0.0)
    with pytest.raises(InputError, match="zero at every sweep"):
        get_sampler(name).run(c2, Schedule(sweeps=1), reads=2, seed=1)


def test_pimc_stores_both_field_arrays(c2):
    batch = get_sampler("pimc").run(c2, Schedule(sweeps=25, shape="quench", s_quench=0.5, quench_sweeps=5),
                                    reads=3, seed=4, transverse=1.5)
    d = batch.schedule
    assert len(d["problem_field"]) == len(d["transverse_field"]) == 25
    assert d["transverse_field"][0] == pytest.approx(1.5 * (1 - 0.5 / 20))
    assert batch.spin_updates == 3 * 25 * c2.n


# ------------------------------------------------------------------ tabu
def test_tabu_budget_comes_from_option_then_schedule(c2):
    t = get_sampler("tabu")
    assert t.run(c2, Schedule(sweeps=40), reads=2, seed=1).schedule["sweeps"] == 40
    assert t.run(c2, Schedule(sweeps=40), reads=2, seed=1, sweeps=7).schedule["sweeps"] == 7
    with pytest.raises(InputError, match="tenure"):
        t.run(c2, reads=2, seed=1, tenure=c2.n)


# ------------------------------------------------------------------ descent
def test_descent_ends_in_single_flip_local_minima():
    # Definition of steepest descent (common practice): it stops only where no
    # single spin flip lowers the energy.
    inst = make_instance("chimera:2", "gaussian", "gaussian:0.3", seed=8)
    batch = get_sampler("descent").run(inst, reads=30, seed=2)
    for s in batch.states:
        flipped = np.repeat(s[None, :], inst.n, axis=0)
        flipped[np.arange(inst.n), np.arange(inst.n)] *= -1
        assert np.all(inst.energies(flipped) >= inst.energy(s) - 1e-12)


def test_descent_restarts_keep_the_best():
    inst = make_instance("chimera:2", "gaussian", seed=9)
    one = get_sampler("descent").run(inst, reads=40, seed=3, restarts=1)
    many = get_sampler("descent").run(inst, reads=40, seed=3, restarts=20)
    assert many.energies.mean() < one.energies.mean()
    assert many.schedule["restarts"] == 20


# ------------------------------------------------------------------ exact
def test_exact_spectrum_matches_dimod_exact_solver():
    inst = make_instance("chimera:1", "gaussian", "gaussian", seed=12)
    ours = get_sampler("exact").run(inst, reads=2 ** inst.n)
    theirs = np.sort(dimod.ExactSolver().sample(inst.to_bqm()).record.energy)  # reference: dimod
    assert np.allclose(ours.energies, theirs, atol=1e-9)
    assert np.unique(ours.states, axis=0).shape[0] == 2 ** inst.n


def test_exact_triangle_has_six_ground_states():
    # Textbook fact: the antiferromagnetic triangle has 6 of its 8 states at E = -1.
    tri = Instance(edges=[[0, 1], [0, 2], [1, 2]], J=[1.0, 1.0, 1.0])
    batch = get_sampler("exact").run(tri, reads=8)
    assert int(np.sum(batch.energies == -1.0)) == 6
    brute = [tri.energy(s) for s in itertools.product([-1, 1], repeat=3)]
    assert sorted(brute) == batch.energies.tolist()


def test_exact_refuses_large_instances_with_an_estimate():
    inst = make_instance("chimera:2", "pm1", seed=1)  # 32 spins
    with pytest.raises(ResourceError, match=r"2\^32 = 4\.29e\+09 states"):
        get_sampler("exact").run(inst, reads=1)
