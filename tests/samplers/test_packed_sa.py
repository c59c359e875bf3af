"""packed-sa against sources outside the project.

* energies: dimod's BinaryQuadraticModel.energies; ground states: dimod.ExactSolver;
* dynamics: the dwave-samplers reference annealer at the same betas, compared
  with a chi-square test of homogeneity on the (integer) final energies and
  Fisher's exact test on success probabilities (scipy);
* independence of the 64 replicas in a word: the binomial dispersion test
  (common practice: under independence the per-word success counts are
  Binomial(64, p), so their variance is 64 p (1 - p)).
Fixed seeds throughout; every statistical check rejects at ALPHA = 1e-3.
"""

import dimod
import numpy as np
import pytest
from dwave.samplers import SimulatedAnnealingSampler
from scipy import stats

from instgen.errors import InputError
from instgen.instance import Instance
from instgen.make import make_instance
from instgen.samplers import Schedule, get_sampler
from instgen.samplers import _packed_kernels, packed_sa
from instgen.samplers.base import index_bqm, index_states
from instgen.samplers.fast_sa import betas_of, stack
from instgen.samplers.packed_sa import PackedAnnealing, packed_arrays
from instgen.testing import check_sampler, small_instances

ALPHA = 1e-3


def reference(inst, schedule, reads, seed, order="sequential"):
    """Final energies from dwave-samplers' annealer on the same explicit betas,
    recomputed from its states with Instance.energies."""
    ss = SimulatedAnnealingSampler().sample(
        index_bqm(inst), num_reads=reads, seed=seed, beta_schedule_type="custom",
        beta_schedule=schedule.betas(), randomize_order=(order == "random"))
    states = index_states(ss, inst.n)
    assert np.allclose(inst.energies(states), ss.record.energy, atol=1e-9)
    return inst.energies(states)


def same_distribution_p(a, b, discrete=True):
    """p-value of the chi-square test of homogeneity (scipy.stats.chi2_contingency)
    on the energy levels of two samples, tails pooled until every expected count is >= 5."""
    levels = np.unique(np.round(np.concatenate([a, b]), 6))
    table = np.array([[np.sum(np.isclose(x, v)) for v in levels] for x in (a, b)], dtype=float)
    while table.shape[1] > 1:
        expected = table.sum(0)[None, :] * table.sum(1)[:, None] / table.sum()
        k = int(np.argmin(expected.min(0)))
        if expected[:, k].min() >= 5:
            break
        j = k - 1 if k == table.shape[1] - 1 else k + 1
        table[:, j] += table[:, k]
        table = np.delete(table, k, axis=1)
    if table.shape[1] < 2:
        return 1.0
    return stats.chi2_contingency(table).pvalue


def ground_energy(inst):
    return float(dimod.ExactSolver().sample(inst.to_bqm()).first.energy)  # reference: brute force


def dispersion_p(successes, per_word=64):
    """Two-sided p-value of the binomial dispersion test on per-word success counts."""
    x = np.asarray(successes, dtype=float)
    p = x.mean() / per_word
    chi = np.sum((x - per_word * p) ** 2) / (per_word * p * (1 - p))
    dof = x.size - 1
    return 2 * min(stats.chi2.sf(chi, dof), stats.chi2.cdf(chi, dof))


# ------------------------------------------------------------- basic contract
@pytest.mark.parametrize("randomness", ["independent", "shared"])
def test_energies_equal_dimod_energies_of_returned_states(randomness):
    inst = make_instance("chimera:2", "int:3", "int:2", seed=3)
    for order in ("sequential", "random"):
        batch = get_sampler("packed-sa").run(inst, Schedule(sweeps=30, beta_range=(0.03, 1.5)), reads=100,
                                             seed=1, order=order, randomness=randomness)
        theirs = inst.to_bqm().energies((batch.states, list(inst.labels)))  # reference: dimod
        assert np.array_equal(batch.energies, theirs)
        assert batch.states.shape == (100, inst.n) and batch.spin_updates == 100 * 30 * inst.n


def test_same_seed_same_result_other_seed_other_result():
    inst = make_instance("chimera:2", "pm1", "pm1", seed=4)
    s = PackedAnnealing()
    for opts in ({}, {"randomness": "shared"}, {"order": "random"}):
        a = s.run(inst, Schedule(sweeps=20), reads=64, seed=9, **opts)
        b = s.run(inst, Schedule(sweeps=20), reads=64, seed=9, **opts)
        c = s.run(inst, Schedule(sweeps=20), reads=64, seed=10, **opts)
        assert np.array_equal(a.states, b.states) and a.seed == b.seed < 2**31
        assert not np.array_equal(a.states, c.states)


def test_run_many_equals_separate_calls():
    # Candidates of mixed kinds in one call: unit weights, larger integers,
    # with and without fields (the kernel picks one counting path per call).
    base = make_instance("chimera:2", "pm1", seed=6)
    rng = np.random.default_rng(1)
    kids = [base,
            base.with_couplings(rng.integers(-3, 4, size=base.m).astype(float)),
            base.with_couplings(-base.J, rng.integers(-1, 2, size=base.n).astype(float))]
    s = PackedAnnealing()
    sched = Schedule(sweeps=25, beta_range=(0.05, 3.0))
    for opts in ({}, {"randomness": "shared"}, {"order": "random"}):
        together = s.run_many(kids, sched, reads=130, seeds=[3, 4, 5], **opts)
        for kid, seed, batch in zip(kids, [3, 4, 5], together):
            alone = s.run(kid, sched, reads=130, seed=seed, **opts)
            assert np.array_equal(batch.states, alone.states)
            assert np.array_equal(batch.energies, kid.energies(batch.states))
            assert batch.seed == alone.seed and batch.schedule == alone.schedule


def test_unit_weight_path_equals_general_adder():
    # The register fast path for ±1 couplings and the general weighted adder
    # count the same unsatisfied couplings, so the runs agree bit for bit.
    inst = make_instance("pegasus:2", "pm1", "pm1", seed=2)
    lay, J, h = stack([inst])
    a = packed_arrays(lay, J, h)
    assert a["unit"]
    betas = betas_of(Schedule(sweeps=20))  # read-only, as the sampler passes it
    outs = []
    for unit in (True, False):
        for shared in (False, True):
            out = np.empty((1, 70, inst.n), np.int8)
            _packed_kernels.anneal_packed(lay.uindptr, lay.uindices, a["cpos"], a["wt"], a["hpos"], a["hw"],
                                          a["W"], a["planes"], unit, betas, 70, np.array([7]), False, shared, out)
            outs.append(out)
    assert np.array_equal(outs[0], outs[2]) and np.array_equal(outs[1], outs[3])


def test_refuses_values_it_cannot_pack():
    s = PackedAnnealing()
    tri = Instance(edges=[[0, 1], [1, 2]], J=[1.0, -1.0], h=[0.5, 0.0, 0.0])
    with pytest.raises(InputError, match="whole-number.*use fast-sa"):
        s.run(tri, Schedule(sweeps=5), reads=2, seed=1)
    glass = make_instance("chimera:1", "gaussian", seed=1)
    with pytest.raises(InputError, match="whole-number.*use fast-sa"):
        s.run(glass, Schedule(sweeps=5), reads=2, seed=1)
    star = Instance(edges=[[0, k] for k in range(1, 4)], J=[100.0, -100.0, 90.0])
    with pytest.raises(InputError, match="up to 255.*use fast-sa"):
        s.run(star, Schedule(sweeps=5), reads=2, seed=1)
    with pytest.raises(InputError, match="randomness"):
        s.run(make_instance("chimera:1", "pm1", seed=1), Schedule(sweeps=5), reads=2, seed=1, randomness="some")
    with pytest.raises(InputError, match="share one graph"):
        s.run_many([make_instance("chimera:1", "pm1", seed=1), make_instance("square:3", "pm1", seed=1)],
                   Schedule(sweeps=5), reads=2, seeds=[1, 2])


def test_suits_says_which_alphabets_give_whole_numbers():
    from instgen.couplings import CouplingRules

    yes = [("pm1", "none"), ("int:3", "pm1"), ("levels:-2,1,3", "int:2")]
    no = [("gaussian", "none"), ("levels:0.5,1", "none"), ("pm1", "uniform:-1,1"), ("pm1", "levels:0.5")]
    assert all(packed_sa.suits(CouplingRules.make(c, f)) for c, f in yes)
    assert not any(packed_sa.suits(CouplingRules.make(c, f)) for c, f in no)
    # and what it promises holds: an instance drawn under int:3 / pm1 is accepted
    PackedAnnealing().run(make_instance("chimera:1", "int:3", "pm1", seed=1), Schedule(sweeps=2), reads=1, seed=1)


def test_compiled_once_with_one_signature():
    packed_sa.warm_up()
    for spec, coup in (("chimera:1", "pm1"), ("square:3", "int:3")):
        inst = make_instance(spec, coup, "pm1", seed=1)
        PackedAnnealing().run(inst, Schedule(sweeps=3), reads=3, seed=1)
        PackedAnnealing().run_many([inst, inst], Schedule(sweeps=3), reads=65, seeds=1, order="random",
                                   randomness="shared")
    assert len(_packed_kernels.anneal_packed.signatures) == 1


@pytest.mark.parametrize("randomness", ["independent", "shared"])
def test_passes_the_conformance_kit(randomness):
    # The kit compares lowest energies with dimod.ExactSolver; its instances
    # with whole-number values only (the others are refused, as checked above).
    kit = small_instances()
    check_sampler("packed-sa", instances=[kit[1], kit[3]], options={"randomness": randomness})


# ------------------------------------------------- against the reference annealer
STAT_CASES = [
    # (graph, couplings, fields, sweeps, beta_range, order, randomness)
    ("chimera:3", "pm1", "none", 20, (0.1, 3.0), "sequential", "independent"),
    ("chimera:2", "pm1", "pm1", 15, (0.1, 3.0), "sequential", "shared"),
    ("square:4", "int:3", "int:2", 30, (0.03, 1.0), "sequential", "independent"),
    ("pegasus:2", "pm1", "none", 20, (0.1, 3.0), "sequential", "independent"),
    ("chimera:2", "pm1", "none", 15, (0.1, 3.0), "random", "independent"),
    ("square:4", "int:2", "pm1", 20, (0.05, 2.0), "random", "shared"),
]


@pytest.mark.parametrize("graph,couplings,fields,sweeps,beta_range,order,randomness", STAT_CASES)
def test_final_energies_match_the_reference_annealer(graph, couplings, fields, sweeps, beta_range, order,
                                                     randomness):
    # Reference: dwave-samplers SimulatedAnnealingSampler at the same betas.
    # For "shared" only lane 0 of each word is used: words have independent
    # streams, so those reads are independent as the test requires.
    inst = make_instance(graph, couplings, fields, seed=21)
    sched = Schedule(sweeps=sweeps, beta_range=beta_range)
    reads = 1500
    if randomness == "shared":
        batch = PackedAnnealing().run(inst, sched, reads=64 * reads, seed=5, order=order, randomness=randomness)
        ours = batch.energies[::64]
    else:
        ours = PackedAnnealing().run(inst, sched, reads=reads, seed=5, order=order).energies
    theirs = reference(inst, sched, reads, seed=5, order=order)
    p = same_distribution_p(ours, theirs, discrete=True)
    assert p > ALPHA, f"final energies differ from the reference annealer (p = {p:.2g})"


@pytest.mark.parametrize("randomness", ["independent", "shared"])
def test_success_probability_matches_the_reference(randomness):
    # Ground state from dimod.ExactSolver (16 spins); Fisher's exact test at ALPHA.
    inst = make_instance("square:4", "int:2", "pm1", seed=30)
    e0 = ground_energy(inst)
    sched = Schedule(sweeps=6, beta_range=(0.1, 2.0))
    reads = 3000
    batch = PackedAnnealing().run(inst, sched, reads=64 * reads if randomness == "shared" else reads, seed=1,
                                  randomness=randomness)
    ours = batch.energies[::64] if randomness == "shared" else batch.energies  # independent reads only
    theirs = reference(inst, sched, reads, seed=1)
    a, b = int(np.sum(ours <= e0 + 1e-9)), int(np.sum(theirs <= e0 + 1e-9))
    assert 0.05 * reads < b < 0.95 * reads
    p = stats.fisher_exact([[a, reads - a], [b, reads - b]]).pvalue
    assert p > ALPHA, f"success {a}/{reads} here, {b}/{reads} for the reference (p = {p:.2g})"


def test_shared_randomness_keeps_every_lane_exact():
    # Each replica's own dynamics is exact Metropolis whatever its place in the
    # word: lane 0 of even words and lane 45 of odd words (independent samples)
    # both match the reference annealer.
    inst = make_instance("chimera:2", "pm1", "pm1", seed=8)
    sched = Schedule(sweeps=12, beta_range=(0.1, 3.0))
    e = PackedAnnealing().run(inst, sched, reads=64 * 3000, seed=2, randomness="shared").energies.reshape(3000, 64)
    theirs = reference(inst, sched, 1500, seed=2)
    for lane_sample in (e[0::2, 0], e[1::2, 45]):
        assert same_distribution_p(lane_sample, theirs, discrete=True) > ALPHA


def test_replicas_in_a_word_are_independent_by_default_and_not_when_shared():
    # Binomial dispersion test on ground-state hits per 64-replica word: the
    # default (own random bits per replica) passes; shared random numbers make
    # the replicas of a word correlated, which the same test detects here
    # (the effective sample size is smaller than the read count).
    inst = make_instance("square:4", "int:2", "pm1", seed=30)
    e0 = ground_energy(inst)
    sched = Schedule(sweeps=8, beta_range=(0.1, 3.0))
    hits = {}
    for randomness in ("independent", "shared"):
        e = PackedAnnealing().run(inst, sched, reads=64 * 400, seed=1, randomness=randomness).energies
        hits[randomness] = (e <= e0 + 1e-9).reshape(400, 64).sum(1)
    assert dispersion_p(hits["independent"]) > ALPHA
    assert dispersion_p(hits["shared"]) < ALPHA
    assert np.var(hits["shared"]) > np.var(hits["independent"])


def test_long_schedule_finds_the_exact_ground_state():
    inst = make_instance("square:4", "int:3", "int:2", seed=2)
    for randomness in ("independent", "shared"):
        batch = PackedAnnealing().run(inst, Schedule(sweeps=300, beta_range=(0.03, 2.0)), reads=64, seed=1,
                                      randomness=randomness)
        assert batch.min_energy == pytest.approx(ground_energy(inst), abs=1e-9)
