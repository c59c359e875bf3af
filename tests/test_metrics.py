"""Metrics against published values, scipy, and results derived by hand."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats
from scipy.spatial.distance import cdist

from instgen import metrics as M
from instgen.errors import InputError


# ----------------------------------------------------------------- TTS
def test_tts_worked_values():
    # Definition and worked value from Ronnow et al., Science 345, 420 (2014):
    # R99 = ln(0.01)/ln(0.5) = 6.644 at p = 0.5.
    assert M.repetitions(0.5) == pytest.approx(6.644, abs=5e-4)
    # Same formula (Ronnow et al., Science 345, 420 (2014)), p = 0.01 -> 458.2 (derived).
    assert M.tts(0.01, 1.0) == pytest.approx(458.2, abs=0.05)
    assert M.tts(0.5, 1000) == pytest.approx(6643.9, abs=0.1)


def test_tts_edges():
    assert M.repetitions(1.0) == 1.0          # at least one run is always needed
    assert M.repetitions(0.995) == 1.0        # p >= q: one run suffices
    assert math.isinf(M.repetitions(0.0))
    assert M.repetitions(np.array([0.0, 0.5, 1.0])).tolist()[1:] == pytest.approx([6.6439, 1.0], abs=1e-4)
    with pytest.raises(InputError):
        M.repetitions(1.5)


def test_no_success_is_a_flagged_lower_bound():
    est = M.tts_estimate(0, 100, 10.0)
    assert est.kind == "lower bound" and math.isinf(est.high)
    # The bound uses the one-sided 95% upper limit on p after 0 of 100, 1 - 0.05^(1/100),
    # close to the "rule of three" 3/n (common practice).
    p_up = 1 - 0.05 ** (1 / 100)
    assert p_up == pytest.approx(3 / 100, rel=0.02)
    assert est.value == pytest.approx(10 * math.log(0.01) / math.log(1 - p_up))


def test_all_successes_give_one_run_with_a_finite_interval():
    est = M.tts_estimate(100, 100, 50.0, seed=1)
    assert est.value == 50.0 and est.kind == "value"
    assert est.low == 50.0 and 50.0 < est.high < 200.0


def test_bootstrap_interval_covers_the_truth():
    # A frequentist check: over many simulated experiments the 95% interval
    # should contain the true TTS in roughly 95% of them.
    rng = np.random.default_rng(3)
    p_true, reads = 0.2, 100
    truth = M.tts(p_true, 1.0)
    hits = 0
    for i in range(200):
        k = int(rng.binomial(reads, p_true))
        est = M.tts_estimate(k, reads, 1.0, seed=i, draws=1000)
        hits += est.low <= truth <= est.high
    assert 0.88 <= hits / 200 <= 0.995


def test_optimal_tts_flags_the_grid_edges():
    middle = M.optimal_tts([10, 100, 1000], [2, 60, 95], [100, 100, 100], seed=1)
    assert middle.best == 1 and middle.kind == "value" and not middle.edge
    assert middle.value == pytest.approx(100 * M.repetitions(0.6))
    assert middle.low <= middle.value <= middle.high
    top = M.optimal_tts([10, 100], [0, 20], [100, 100], seed=1)
    assert top.best == 1 and top.edge and top.kind == "upper bound"
    bottom = M.optimal_tts([10, 100], [100, 100], [100, 100], seed=1)
    assert bottom.best == 0 and bottom.kind == "upper bound" and bottom.value == 10.0
    single = M.optimal_tts([100], [50], [100], seed=1)
    assert single.kind == "upper bound"
    none = M.optimal_tts([10, 100], [0, 0], [50, 50], seed=1)
    assert none.kind == "lower bound" and none.best == 0 and math.isinf(none.high)


def test_optimal_tts_is_seeded():
    a = M.optimal_tts([10, 100, 1000], [5, 30, 80], [100, 100, 100], seed=9)
    b = M.optimal_tts([10, 100, 1000], [5, 30, 80], [100, 100, 100], seed=9)
    assert (a.low, a.high) == (b.low, b.high)


# ---------------------------------------------------- success probability
@pytest.mark.parametrize("method,scipy_name", [("wilson", "wilson"), ("clopper-pearson", "exact")])
@pytest.mark.parametrize("k,n", [(0, 20), (3, 20), (10, 20), (20, 20), (57, 256)])
def test_binomial_interval_matches_scipy(method, scipy_name, k, n):
    # Reference: scipy.stats.binomtest(...).proportion_ci.
    ref = stats.binomtest(k, n).proportion_ci(confidence_level=0.95, method=scipy_name)
    assert M.binomial_interval(k, n, 0.95, method) == pytest.approx((ref.low, ref.high), abs=1e-9)


@settings(max_examples=60, deadline=None)
@given(st.integers(1, 500).flatmap(lambda n: st.tuples(st.integers(0, n), st.just(n))))
def test_binomial_interval_contains_the_estimate(kn):
    k, n = kn
    lo, hi = M.binomial_interval(k, n)
    assert 0.0 <= lo <= k / n <= hi <= 1.0


def test_success_probability_counts_reads_at_the_target():
    est = M.success_probability([-4.0, -4.0 + 1e-12, -2.0, 0.0], -4.0)
    assert est.value == 0.5
    with pytest.raises(InputError):
        M.binomial_interval(3, 2)


# ------------------------------------------------------------- energies
def test_residual_energy_interval_is_the_t_interval():
    e = np.array([-10.0, -9.0, -8.0, -10.0, -7.0])
    est = M.residual_energy(e, -10.0, 5)
    x = (e + 10.0) / 5
    ref = stats.t.interval(0.95, x.size - 1, loc=x.mean(), scale=stats.sem(x))  # reference: scipy
    assert est.value == pytest.approx(x.mean()) and est.ci == pytest.approx(ref)


def test_anneal_gain_interval_is_welchs():
    a = np.array([-5.0, -6.0, -4.0, -5.5])
    b = np.array([-8.0, -7.5, -8.5])
    est = M.anneal_gain(a, b, 4, 2.0)
    ref = stats.ttest_ind(a, b, equal_var=False).confidence_interval(0.95)  # reference: scipy Welch test
    assert est.value == pytest.approx((a.mean() - b.mean()) / 8)
    assert est.ci == pytest.approx((ref.low / 8, ref.high / 8))


@settings(max_examples=30, deadline=None)
@given(st.floats(0.01, 100.0))
def test_anneal_gain_cannot_be_inflated_by_scaling(c):
    # Derived: energies scale with the couplings, and so does the coupling scale.
    a, b = np.array([-3.0, -2.0, -4.0]), np.array([-6.0, -5.0, -7.0])
    plain = M.anneal_gain(a, b, 10, 1.0)
    scaled = M.anneal_gain(c * a, c * b, 10, c)
    assert scaled.value == pytest.approx(plain.value) and scaled.ci == pytest.approx(plain.ci)


# ------------------------------------------------------------ landscape
def test_hamming_distances_match_scipy():
    rng = np.random.default_rng(1)
    s = 2 * rng.integers(0, 2, (20, 15)) - 1
    g = 2 * rng.integers(0, 2, (4, 15)) - 1
    ref = np.rint(cdist(s, g, metric="hamming") * 15).min(axis=1)  # reference: scipy
    assert M.hamming_to_nearest(s, g).tolist() == ref.astype(int).tolist()
    both = np.minimum(ref, np.rint(cdist(s, -g, metric="hamming") * 15).min(axis=1))
    assert M.hamming_to_nearest(s, g, symmetric=True).tolist() == both.astype(int).tolist()


def test_ferromagnetic_chain_excited_states():
    # Derived by hand: an open ferromagnetic chain of 6 spins has ground states
    # all-up and all-down (E0 = -5); its lowest excited states have one domain
    # wall (E = -3), after k spins, at distance min(k, 6 - k) from the nearest
    # ground state: 1, 2, 3, 2, 1, mean 1.8.
    n = 6
    states = []
    for k in range(1, n):
        s = np.array([1] * k + [-1] * (n - k))
        states += [s, -s]
    states += [np.ones(n), -np.ones(n)]
    states = np.array(states, dtype=np.int8)
    energies = np.array([-float(np.sum(s[:-1] * s[1:])) for s in states])
    ground = states[-2:]
    d, e1 = M.excited_distances(states, energies, -5.0, ground, symmetric=True)
    assert e1 == -3.0 and sorted(d.tolist()) == [1, 1, 1, 1, 2, 2, 2, 2, 3, 3]
    assert d.mean() == pytest.approx(1.8)
    assert M.ground_state_count(states, energies, -5.0, symmetric=True) == 2
    assert M.ground_state_count(states[-1:], energies[-1:], -5.0, symmetric=True) == 2
    assert M.ground_state_count(states[-1:], energies[-1:], -5.0, symmetric=False) == 1
