"""fast-sa against sources outside the project.

* energies: dimod's BinaryQuadraticModel.energies;
* ground states: dimod.ExactSolver (a brute force);
* dynamics: the dwave-samplers reference annealer (SimulatedAnnealingSampler
  with beta_schedule_type="custom" and the same betas), compared with scipy's
  two-sample tests on final energies and Fisher's exact test on success
  probabilities.  Every statistical check uses fixed seeds (so it is
  deterministic) and rejects at significance ALPHA = 1e-3.
"""

import os
import shutil
import stat
import subprocess
import sys
import textwrap
from pathlib import Path

import dimod
import numpy as np
import pytest
from dwave.samplers import SimulatedAnnealingSampler
from scipy import stats

from instgen.errors import InputError
from instgen.instance import Instance
from instgen.make import make_instance
from instgen.samplers import Schedule, get_sampler
from instgen.samplers import _lanes, fast_sa
from instgen.samplers.base import index_bqm, index_states
from instgen.samplers.fast_sa import FastAnnealing
from instgen.testing import check_sampler

ALPHA = 1e-3


def reference(inst, schedule, reads, seed, order="sequential"):
    """Final energies from dwave-samplers' annealer on the same explicit betas.

    Energies are recomputed from its states with the same function as ours, so
    equal states give bit-equal energies (otherwise rounding differences would
    split ties and fool a rank test).
    """
    ss = SimulatedAnnealingSampler().sample(
        index_bqm(inst), num_reads=reads, seed=seed, beta_schedule_type="custom",
        beta_schedule=schedule.betas(), randomize_order=(order == "random"))
    states = index_states(ss, inst.n)
    assert np.allclose(inst.energies(states), ss.record.energy, atol=1e-9)
    return inst.energies(states)


def same_distribution_p(a, b, discrete):
    """p-value that two samples of final energies come from one distribution.

    Discrete energies: chi-square test of homogeneity (scipy.stats.chi2_contingency)
    on the energy levels, tails pooled so every expected count is at least 5.
    Continuous energies: two-sample Kolmogorov-Smirnov (scipy.stats.ks_2samp).
    """
    if not discrete:
        return stats.ks_2samp(a, b).pvalue
    levels = np.unique(np.round(np.concatenate([a, b]), 6))
    table = np.array([[np.sum(np.isclose(x, v)) for v in levels] for x in (a, b)], dtype=float)
    # pool small categories into their neighbour until every expected count is >= 5
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


# ------------------------------------------------------------- basic contract
def test_energies_equal_dimod_energies_of_returned_states():
    inst = make_instance("chimera:2", "gaussian", "gaussian:0.5", seed=3)
    for order in ("sequential", "random"):
        batch = get_sampler("fast-sa").run(inst, Schedule(sweeps=30), reads=70, seed=1, order=order)
        bqm = inst.to_bqm()
        theirs = bqm.energies((batch.states, list(inst.labels)))  # reference: dimod
        assert np.allclose(batch.energies, theirs, rtol=0, atol=1e-9)
        assert batch.states.shape == (70, inst.n) and batch.spin_updates == 70 * 30 * inst.n


def test_same_seed_same_result_other_seed_other_result():
    inst = make_instance("chimera:2", "gaussian", seed=4)
    s = FastAnnealing()
    for order in ("sequential", "random"):
        a = s.run(inst, Schedule(sweeps=20), reads=40, seed=9, order=order)
        b = s.run(inst, Schedule(sweeps=20), reads=40, seed=9, order=order)
        c = s.run(inst, Schedule(sweeps=20), reads=40, seed=10, order=order)
        assert np.array_equal(a.states, b.states) and a.seed == b.seed
        assert not np.array_equal(a.states, c.states)
        assert a.seed < 2**31


def test_reads_are_prefixes_of_longer_runs():
    # Read r of a candidate has its own random stream, so asking for more reads
    # leaves the first ones unchanged (in both orders).
    inst = make_instance("chimera:2", "pm1", seed=5)
    for order in ("sequential", "random"):
        few = FastAnnealing().run(inst, Schedule(sweeps=15), reads=5, seed=2, order=order)
        many = FastAnnealing().run(inst, Schedule(sweeps=15), reads=130, seed=2, order=order)
        assert np.array_equal(few.states, many.states[:5])


def test_run_many_equals_separate_calls():
    base = make_instance("chimera:2", "gaussian", "gaussian:0.3", seed=6)
    rng = np.random.default_rng(0)
    kids = [base.with_couplings(rng.normal(size=base.m), rng.normal(size=base.n)) for _ in range(3)]
    s = FastAnnealing()
    sched = Schedule(sweeps=25, beta_range=(0.2, 4.0))
    for order in ("sequential", "random"):
        together = s.run_many(kids, sched, reads=66, seeds=[3, 4, 5], order=order)
        for kid, seed, batch in zip(kids, [3, 4, 5], together):
            alone = s.run(kid, sched, reads=66, seed=seed, order=order)
            assert np.array_equal(batch.states, alone.states)
            assert np.allclose(batch.energies, kid.energies(batch.states), rtol=0, atol=1e-9)
            assert batch.seed == alone.seed and batch.schedule == alone.schedule
            assert batch.spin_updates == alone.spin_updates


def test_run_many_refuses_bad_requests():
    a = make_instance("chimera:1", "pm1", seed=1)
    b = make_instance("chimera:2", "pm1", seed=1)
    s = FastAnnealing()
    with pytest.raises(InputError, match="share one graph"):
        s.run_many([a, b], Schedule(sweeps=5), reads=2, seeds=[1, 2])
    with pytest.raises(InputError, match="one per candidate"):
        s.run_many([a, a], Schedule(sweeps=5), reads=2, seeds=[1, 2, 3])
    with pytest.raises(InputError, match="reads"):
        s.run_many([a], Schedule(sweeps=5), reads=0, seeds=[1])
    with pytest.raises(InputError, match="Schedule"):
        s.run_many([a], None, reads=2, seeds=[1])
    with pytest.raises(InputError, match="no option"):
        s.run_many([a], Schedule(sweeps=5), reads=2, seeds=[1], colour="red")
    with pytest.raises(InputError, match="order"):
        s.run(a, Schedule(sweeps=5), reads=2, seed=1, order="backwards")
    with pytest.raises(InputError, match="Instance"):
        s.run_many([], Schedule(sweeps=5), reads=2)
    with pytest.raises(InputError, match="no spins"):
        s.run(Instance(edges=np.zeros((0, 2)), J=[], h=[]), Schedule(sweeps=5), reads=2, seed=1)


def test_infinite_temperature_gives_zero_mean_energy():
    # Common practice: at beta -> 0 every state is equally likely, so for a
    # zero-field instance E[s_i s_j] = 0 and the mean energy is 0.
    inst = make_instance("chimera:2", "pm1", seed=5)
    hot = FastAnnealing().run(inst, Schedule(sweeps=20, beta_range=(1e-9, 1e-9)), reads=640, seed=1)
    assert abs(hot.energies.mean()) < 4 * hot.energies.std() / np.sqrt(640)


def test_compiled_once_with_one_signature_per_kernel():
    # Read-only instance arrays, other graphs and both orders must not trigger
    # new compilations: each kernel keeps exactly one compiled signature.
    fast_sa.warm_up()
    for spec, coup in (("chimera:1", "pm1"), ("square:3", "gaussian")):
        inst = make_instance(spec, coup, "pm1", seed=1)
        FastAnnealing().run(inst, Schedule(sweeps=3), reads=3, seed=1)
        FastAnnealing().run_many([inst, inst], Schedule(sweeps=3), reads=3, seeds=1, order="random")
    for kernel in (_lanes.anneal_lanes, _lanes.anneal_random_order, _lanes.batch_energies):
        assert len(kernel.signatures) == 1, kernel.__name__


def test_random_order_table_matches_plain_exponentials(monkeypatch):
    # With integer couplings random order reads acceptance from a table; with
    # the table switched off it evaluates exp.  The probabilities agree to the
    # last bit or so, so the runs must agree state for state.
    inst = make_instance("chimera:2", "int:2", "pm1", seed=8)
    sched = Schedule(sweeps=40, beta_range=(0.05, 2.5))
    with_table = FastAnnealing().run(inst, sched, reads=20, seed=3, order="random")
    monkeypatch.setattr(fast_sa, "common_step", lambda J, h: 0.0)
    plain = FastAnnealing().run(inst, sched, reads=20, seed=3, order="random")
    assert np.array_equal(with_table.states, plain.states)


def test_exp_polynomial_matches_math_exp():
    # The vectorised single-precision exp(-x) used in sequential order, against
    # numpy's double-precision exp: within a few float32 rounding steps (2^-24 = 6e-8).
    import numba

    f = numba.njit(lambda x: _lanes.exp_neg32(np.float32(x)))
    xs = np.concatenate([np.linspace(0, _lanes.X_MAX_LANES, 20001), [1e-30, 0.5 * np.log(2)]]).astype(np.float32)
    got = np.array([f(x) for x in xs])
    assert np.max(np.abs(got / np.exp(-xs.astype(np.float64)) - 1)) < 2e-7
    assert f(0.0) == 1.0  # downhill and level moves keep probability exactly one


def test_passes_the_conformance_kit():
    # The kit compares lowest energies with dimod.ExactSolver.
    check_sampler("fast-sa")
    check_sampler("fast-sa", options={"order": "random"})


# ------------------------------------------------- against the reference annealer
STAT_CASES = [
    # (graph, couplings, fields, sweeps, beta_range, order)
    ("chimera:2", "gaussian", "gaussian:0.3", 10, (0.1, 3.0), "sequential"),
    ("chimera:2", "gaussian", "none", 100, (0.1, 5.0), "sequential"),
    ("chimera:3", "pm1", "none", 20, (0.1, 3.0), "sequential"),
    ("square:4", "int:2", "pm1", 30, (0.05, 2.0), "sequential"),
    ("chimera:2", "pm1", "pm1", 15, (0.1, 3.0), "random"),
    ("chimera:2", "gaussian", "none", 20, (0.1, 3.0), "random"),
]


@pytest.mark.parametrize("graph,couplings,fields,sweeps,beta_range,order", STAT_CASES)
def test_final_energies_match_the_reference_annealer(graph, couplings, fields, sweeps, beta_range, order):
    # Reference: dwave-samplers SimulatedAnnealingSampler at the same betas;
    # scipy two-sample test at ALPHA.  Short schedules leave broad distributions,
    # which is where a wrong update rule, order or start would show.
    inst = make_instance(graph, couplings, fields, seed=21)
    sched = Schedule(sweeps=sweeps, beta_range=beta_range)
    reads = 1500
    ours = FastAnnealing().run(inst, sched, reads=reads, seed=5, order=order).energies
    theirs = reference(inst, sched, reads, seed=5, order=order)
    p = same_distribution_p(ours, theirs, discrete=couplings != "gaussian")
    assert p > ALPHA, f"final energies differ from the reference annealer (p = {p:.2g})"


def test_the_two_sample_check_can_fail():
    # The same comparison detects real differences of the kind a bug would make:
    # the reference visiting spins in random order while we go in sequence, or
    # the reference ending at half our final beta.
    inst = make_instance("chimera:2", "gaussian", seed=21)
    sched = Schedule(sweeps=10, beta_range=(0.1, 3.0))
    ours = FastAnnealing().run(inst, sched, reads=1500, seed=5).energies
    other_order = reference(inst, sched, 1500, seed=5, order="random")
    assert same_distribution_p(ours, other_order, discrete=False) < ALPHA
    warmer = reference(inst, Schedule(sweeps=10, beta_range=(0.1, 1.5)), 1500, seed=5)
    assert same_distribution_p(ours, warmer, discrete=False) < ALPHA
    # and the chi-square version, on integer couplings
    inst = make_instance("square:4", "int:2", "pm1", seed=21)
    sched = Schedule(sweeps=30, beta_range=(0.05, 2.0))
    ours = FastAnnealing().run(inst, sched, reads=1500, seed=5).energies
    warmer = reference(inst, Schedule(sweeps=30, beta_range=(0.05, 1.0)), 1500, seed=5)
    assert same_distribution_p(ours, warmer, discrete=True) < ALPHA


@pytest.mark.parametrize("order", ["sequential", "random"])
def test_success_probability_matches_the_reference(order):
    # Ground state from dimod.ExactSolver (16 spins); success = reaching it.
    # Fisher's exact test (scipy) on the 2x2 table of successes, at ALPHA.
    inst = make_instance("square:4", "gaussian", "gaussian:0.2", seed=30)
    e0 = ground_energy(inst)
    sched = Schedule(sweeps=8, beta_range=(0.2, 3.0))
    reads = 3000
    ours = FastAnnealing().run(inst, sched, reads=reads, seed=1, order=order).energies
    theirs = reference(inst, sched, reads, seed=1, order=order)
    a, b = int(np.sum(ours <= e0 + 1e-9)), int(np.sum(theirs <= e0 + 1e-9))
    assert 0.05 * reads < b < 0.95 * reads  # a schedule where success is neither certain nor hopeless
    p = stats.fisher_exact([[a, reads - a], [b, reads - b]]).pvalue
    assert p > ALPHA, f"success {a}/{reads} here, {b}/{reads} for the reference (p = {p:.2g})"


@pytest.mark.parametrize("name,order", [("fast-sa", "sequential"), ("fast-sa", "random"),
                                        ("packed-sa", "sequential"), ("packed-sa", "random")])
def test_agrees_with_the_sa_adapter(name, order):
    # The project's own "sa" surrogate wraps the same reference annealer; the
    # fast samplers must be interchangeable with it at the same schedule.
    inst = make_instance("chimera:2", "pm1", "pm1", seed=17)
    sched = Schedule(sweeps=12, beta_range=(0.1, 3.0))
    ours = get_sampler(name).run(inst, sched, reads=1280, seed=3, order=order).energies
    theirs = get_sampler("sa").run(inst, sched, reads=1280, seed=3, order=order).energies
    p = same_distribution_p(ours, theirs, discrete=True)
    assert p > ALPHA, f"{name} and sa disagree (p = {p:.2g})"


def test_couplings_beyond_single_precision_range_anneal_like_scaled_ones():
    # Sequential order works in float32; couplings of 1e45 (past float32's 3.4e38)
    # with betas 1e-45 times smaller describe the same dynamics (beta * dE is what
    # counts), so the states must be those of the unit-scale problem.
    inst = make_instance("chimera:1", "gaussian", "gaussian:0.5", seed=2)
    big = inst.with_couplings(inst.J * 2.0 ** 150, inst.h * 2.0 ** 150)
    # linear betas scale exactly by a power of two (geometric ones go through logarithms)
    sched = Schedule(sweeps=50, beta_range=(0.1, 3.0), interpolation="linear")
    scaled = Schedule(sweeps=50, beta_range=(0.1 * 2.0 ** -150, 3.0 * 2.0 ** -150), interpolation="linear")
    assert np.array_equal(scaled.betas() * 2.0 ** 150, sched.betas())
    small = FastAnnealing().run(inst, sched, reads=64, seed=4)
    out = FastAnnealing().run(big, scaled, reads=64, seed=4)
    assert np.isfinite(out.energies).all()
    assert np.array_equal(out.states, small.states)


def test_long_schedule_finds_the_exact_ground_state():
    inst = make_instance("chimera:1", "gaussian", "gaussian:0.5", seed=2)
    batch = FastAnnealing().run(inst, Schedule(sweeps=300), reads=64, seed=1)
    assert batch.min_energy == pytest.approx(ground_energy(inst), abs=1e-9)


# ------------------------------------------------------------ disk cache
@pytest.mark.slow
def test_compiled_kernels_are_cached_for_a_read_only_checkout(tmp_path):
    # A copy of the package where no __pycache__ can be written (a read-only
    # checkout): the first process compiles and stores the kernels in the user
    # cache directory (numba's fallback), a second process only loads them.
    # chmod alone does not stop root, so a plain file also blocks __pycache__.
    src = Path(fast_sa.__file__).resolve().parents[1]
    pkg = tmp_path / "tree" / "instgen"
    shutil.copytree(src, pkg, ignore=shutil.ignore_patterns("__pycache__"))
    for d in [pkg, *[p for p in pkg.rglob("*") if p.is_dir()]]:
        (d / "__pycache__").write_text("not a directory")
    for p in [pkg, *pkg.rglob("*")]:
        p.chmod(p.stat().st_mode & ~(stat.S_IWUSR | stat.S_IWGRP | stat.S_IWOTH))
    script = textwrap.dedent("""
        import instgen.samplers._lanes as L, instgen.samplers._packed_kernels as P
        from instgen.samplers import fast_sa, packed_sa
        assert fast_sa.__file__.startswith(%r)
        fast_sa.warm_up(); packed_sa.warm_up()
        ks = [L.anneal_lanes, L.anneal_random_order, L.batch_energies, P.anneal_packed]
        print(sum(sum(k.stats.cache_hits.values()) for k in ks), sum(sum(k.stats.cache_misses.values()) for k in ks))
    """ % str(pkg))
    cache = tmp_path / "user-cache"
    env = {**os.environ, "PYTHONPATH": str(tmp_path / "tree"), "XDG_CACHE_HOME": str(cache)}
    env.pop("NUMBA_CACHE_DIR", None)
    try:
        runs = [subprocess.run([sys.executable, "-c", script], env=env, capture_output=True, text=True,
                               timeout=900, cwd=tmp_path) for _ in range(2)]
    finally:
        for p in [pkg, *pkg.rglob("*")]:
            p.chmod(p.stat().st_mode | stat.S_IWUSR)
    for r in runs:
        assert r.returncode == 0, r.stderr[-2000:]
    first, second = (tuple(int(x) for x in r.stdout.split()[-2:]) for r in runs)
    assert first[1] >= 4, first  # nothing cached yet: every kernel compiled
    assert second[1] == 0 and second[0] >= 4, second  # every kernel loaded, none compiled
    assert any(cache.rglob("*.nbi"))  # the cache went to the user cache directory
