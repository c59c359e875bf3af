"""The scoring API: references, schedules, seeds, and each metric end to end."""

import math

import dimod
import numpy as np
import pytest

from instgen.errors import InputError
from instgen.instance import Instance, random_gauge
from instgen.make import make_instance
from instgen.records import Certificate
from instgen.scoring import METRICS, measure, measure_many, measure_perturbed


def planted_chimera(seed=3):
    """A ferromagnet on chimera:2 hidden by a random gauge: its planted state is a ground state.

    Derived: every coupling of a ferromagnet is satisfied by all-up, and a gauge
    transformation preserves energies (derived; common practice).
    """
    topo = make_instance("chimera:2", "pm1", seed=0)
    ferro = Instance(edges=topo.edges, J=-np.ones(topo.m), labels=topo.labels, graph=topo.graph,
                     planted=np.ones(topo.n), metadata={"rules": {"couplings": "pm1", "fields": "none"}})
    return ferro.gauge(random_gauge(topo.n, seed))


def certified(inst):
    """The instance with a certificate from dimod's ExactSolver (an outside reference)."""
    best = dimod.ExactSolver().sample(inst.to_bqm()).first
    state = np.array([best.sample[lab] for lab in inst.labels], dtype=np.int8)
    cert = Certificate(float(best.energy), state, "dimod ExactSolver", "proven")
    return inst.replace(metadata={**inst.metadata, "certificate": cert.to_dict()})


@pytest.fixture(scope="module")
def c2():
    return make_instance("chimera:2", "pm1", seed=5)


def test_metric_registry_lists_the_metrics():
    assert {"tts", "success", "residual", "anneal-gain", "ground-states", "deception"} <= set(METRICS.names())
    with pytest.raises(InputError, match="choose one of"):
        measure(make_instance("chimera:1", seed=1), "hardness")


# ---------------------------------------------------------------- reference
def test_reference_from_planted_state():
    inst = planted_chimera()
    s = measure(inst, "success", sweeps=200, reads=20, seed=1)
    assert s.reference == pytest.approx(-inst.m) and s.reference_status == "planted"
    assert not any("not a proven optimum" in n for n in s.notes)
    assert s.value > 0.5  # an easy ferromagnet: SA finds its ground state


def test_reference_found_is_flagged_not_proven(c2):
    s = measure(c2, "success", sweeps=100, reads=20, seed=1)
    assert s.reference_status == "not proven"
    assert any("not a proven optimum" in n for n in s.notes)


def test_wrong_certificate_is_reported_and_replaced():
    inst = planted_chimera()
    bad = Certificate(-inst.m + 4.0, np.ones(inst.n), "made up", "proven").to_dict()
    s = measure(inst.replace(metadata={**inst.metadata, "certificate": bad}), "success", sweeps=200, reads=20, seed=1)
    assert s.reference == pytest.approx(-inst.m) and s.reference_status == "not proven"
    assert any("is not a ground state" in n for n in s.notes)


def test_success_at_infinite_temperature_matches_counting():
    # Uniformly random states hit a ground state with probability
    # (number of ground states) / 2^n. The antiferromagnetic triangle has 6 of 8
    # (textbook fact); the certificate comes from dimod's ExactSolver.
    tri = certified(Instance(edges=[[0, 1], [0, 2], [1, 2]], J=[1.0, 1.0, 1.0]))
    s = measure(tri, "success", sweeps=1, reads=2000, seed=4, beta_range=(1e-9, 1e-9))
    assert s.reference_status == "proven"
    assert abs(s.value - 0.75) < 4 * math.sqrt(0.75 * 0.25 / 2000)
    assert s.ci[0] < s.value < s.ci[1]


# ------------------------------------------------------------ schedule/seed
def test_beta_range_comes_from_the_alphabet_not_the_instance(c2):
    louder = c2.with_couplings(c2.J * 3.0)  # same rules, couplings three times larger
    a = measure(c2, "residual", sweeps=50, reads=5, seed=1)
    b = measure(louder, "residual", sweeps=50, reads=5, seed=1)
    assert a.schedule["beta_range"] == b.schedule["beta_range"] == [0.1, 5.0]
    bare = c2.replace(metadata={})
    with pytest.raises(InputError, match="no coupling alphabet"):
        measure(bare, "residual", sweeps=50, reads=5)
    assert measure(bare, "residual", sweeps=50, reads=5, scale=2.0).schedule["beta_range"] == [0.05, 2.5]


def test_same_seed_same_score_and_runs_are_shared(c2):
    a = measure_many(c2, ["tts", "success"], ["sa"], sweeps=[20, 200], reads=30, seed=8)
    b = measure_many(c2, ["tts", "success"], ["sa"], sweeps=[20, 200], reads=30, seed=8)

    def timeless(score):  # wall-clock times differ between runs; everything else must not
        d = score.to_dict()
        d["extra"].pop("tts_seconds", None)
        for row in d["extra"].get("per_sweeps", []):
            row.pop("seconds")
        return d

    assert [timeless(s) for s in a] == [timeless(s) for s in b]
    tts, success = a
    row = tts.extra["per_sweeps"][-1]
    assert row["sweeps"] == 200 and row["p"] == success.value  # same samples behind both
    assert success.seeds == [row["seed"]]
    other = measure(c2, "tts", sweeps=[20, 200], reads=30, seed=9)
    assert other.seeds != tts.seeds


def test_tts_bound_flags_and_notes(c2):
    s = measure(c2, "tts", sweeps=[1, 10], reads=20, seed=2)
    assert s.kind == "upper bound" and s.extra["best_sweeps"] == 10
    assert any("upper bound" in n for n in s.notes)
    assert s.ci[0] <= s.value <= s.ci[1] and s.units == "sweeps"
    easy = measure(planted_chimera(), "tts", sweeps=[100, 1000], reads=20, seed=2)
    assert easy.extra["best_sweeps"] == 100 and easy.kind == "upper bound"  # easy: best at the shortest
    assert any("fewer sweeps" in n for n in easy.notes)
    hard = measure(planted_chimera(), "tts", sweeps=[1], reads=10, seed=2, beta_range=(1e-9, 1e-9))
    assert hard.kind == "lower bound" and math.isinf(hard.ci[1])


def test_several_solvers_side_by_side(c2):
    scores = measure_many(c2, ["tts"], ["sa", "tabu", "descent"], sweeps=[10, 100], reads=16, seed=3)
    assert [s.solver for s in scores] == ["sa", "tabu", "descent"]
    assert scores[2].units == "descents"
    assert len({s.reference for s in scores}) == 1  # one reference across the call


def test_bad_requests_are_input_errors(c2):
    with pytest.raises(InputError, match="two sweep counts"):
        measure(c2, "anneal-gain", sweeps=[100], reads=5)
    with pytest.raises(InputError, match="sweeps"):
        measure(c2, "tts", sweeps=[0, 10], reads=5)
    with pytest.raises(InputError, match="reads"):
        measure(c2, "tts", reads=0)
    with pytest.raises(InputError, match="lists the lowest states"):
        measure(make_instance("chimera:1", seed=1), "tts", sampler="exact")
    with pytest.raises(InputError, match="no option"):
        measure(c2, "success", sweeps=10, reads=5, temperature=3)
    with pytest.raises(InputError, match="effort comes from the sweep counts"):
        measure_many(c2, ["tts"], ["tabu"], sweeps=[10, 100], reads=5, options={"tabu": {"sweeps": 7}})
    with pytest.raises(InputError, match="effort comes from the sweep counts"):
        measure(c2, "tts", sampler="descent", sweeps=[10, 100], reads=5, restarts=3)


# ------------------------------------------------------------------ metrics
def test_anneal_gain_is_unchanged_when_couplings_and_alphabet_scale_together(c2):
    # Derived: Metropolis acceptance depends on beta * dE only, and the default
    # beta range scales as 1/scale, so doubling J and the alphabet replays the
    # same anneal; the anneal gain divides by n * scale.
    twice = Instance(edges=c2.edges, J=2 * c2.J, labels=c2.labels,
                     metadata={"rules": {"couplings": "levels:-2,2", "fields": "none"}})
    a = measure(c2, "anneal-gain", sweeps=[10, 300], reads=30, seed=6)
    b = measure(twice, "anneal-gain", sweeps=[10, 300], reads=30, seed=6)
    assert b.value == pytest.approx(a.value, abs=1e-12) and a.value > 0
    assert b.extra["short_mean"] == pytest.approx(2 * a.extra["short_mean"])


def test_residual_per_spin_and_coupling_scale(c2):
    s = measure(certified(make_instance("chimera:1", "gaussian", seed=3)), "residual", sweeps=5, reads=50, seed=1)
    assert s.value >= 0 and s.units == "energy per spin / coupling scale" and s.ci[0] <= s.value <= s.ci[1]
    # (mean E - E0) / (n * scale): doubling every coupling and the scale leaves it unchanged
    inst = certified(make_instance("chimera:1", "int:2", seed=3))
    a = measure(inst, "residual", sweeps=5, reads=50, seed=1)
    assert a.value == pytest.approx(a.extra["per_spin"] / 2.0)


def test_ground_states_and_deception_on_a_chain():
    # Derived by hand (see test_metrics): an open ferromagnetic chain of 6 spins
    # has 2 ground states and its one-wall excited states lie at mean distance 1.8.
    chain = Instance(edges=[[i, i + 1] for i in range(5)], J=-np.ones(5))
    g = measure(chain, "ground-states", sampler="exact", reads=64, scale=1.0)
    assert g.value == 2.0 and g.kind == "lower bound"
    d = measure(chain, "deception", sampler="exact", reads=64, scale=1.0)
    assert d.value == pytest.approx(1.8) and d.extra["excited_energy"] == -3.0


def test_deception_without_excited_states_is_nan():
    chain = Instance(edges=[[i, i + 1] for i in range(5)], J=-np.ones(5))
    s = measure(chain, "deception", sampler="exact", reads=2, scale=1.0)  # only the two ground states
    assert math.isnan(s.value) and any("every read reached" in n for n in s.notes)


# ---------------------------------------------------------------- perturbed
def test_perturbed_copies_score_on_the_original():
    inst = planted_chimera()
    quiet = measure_perturbed(inst, "success", 0.0, copies=3, sweeps=200, reads=20, seed=2)
    loud = measure_perturbed(inst, "success", 3.0, copies=3, sweeps=200, reads=20, seed=2)
    assert quiet.reference_status == "planted" and len(loud.extra["values"]) == 3
    assert loud.value < quiet.value  # strong control errors move the ground state away
    assert loud.ci == (min(loud.extra["values"]), max(loud.extra["values"]))
    again = measure_perturbed(inst, "success", 3.0, copies=3, sweeps=200, reads=20, seed=2)
    assert again.to_dict() == loud.to_dict()
    with pytest.raises(InputError, match="sigma"):
        measure_perturbed(inst, "success", -1.0)


# -------------------------------------------------------- TTS at its optimum
# TTS99 is quotable only at the optimal anneal length; an optimum at the edge of the
# sweep counts tried is a bound (Ronnow et al., Science 345, 420 (2014); Albash & Lidar,
# PRX 8, 031016 (2018)).
from instgen.scoring import Pinning, next_step  # noqa: E402


def test_next_step_extends_where_the_optimum_may_lie():
    pin = Pinning(successes=5)
    assert next_step([10, 100], [0, 0], [64, 64], pin, 64) == ("extend", 316, 64)  # never solved: longer
    assert next_step([10, 100], [2, 60], [64, 64], pin, 64) == ("extend", 316, 64)  # best at the long end
    assert next_step([10, 100], [60, 64], [64, 64], pin, 64) == ("extend", 3, 64)  # best at the short end
    assert next_step([1, 10, 100], [60, 64, 64], [64, 64, 64], pin, 64)[0] is None  # nothing shorter than 1
    assert next_step([10, 100, 1000], [0, 3, 40], [64, 64, 64], pin, 64) == ("extend", 3162, 64)
    # interior but resting on too few successes: double the reads there
    assert next_step([10, 100, 1000], [0, 3, 1], [64, 64, 64], pin, 64) == ("more", 100, 64)
    stop = next_step([10, 100], [0, 0], [64, 64], Pinning(max_sweeps=100), 64)
    assert stop[0] is None and "most allowed" in stop[1]


def test_pinned_tts_is_an_interior_minimum_and_a_value():
    # the gauged ferromagnet is solved by long anneals almost always, so TTS99 = t there
    # and is larger at long t: the optimum is interior once short anneals are tried
    inst = planted_chimera()
    fixed = measure(inst, "tts", sweeps=[200, 400], reads=64, seed=3)
    assert fixed.kind == "upper bound"  # best at the short edge of the grid given
    s = measure_many(inst, ["tts"], ["sa"], sweeps=[200, 400], reads=64, seed=3, pin=Pinning())[0]
    assert s.kind == "value" and s.extra["pin"]["pinned"]
    rows = s.extra["per_sweeps"]
    counts = [r["sweeps"] for r in rows]
    assert counts[0] < 200 and s.extra["best_sweeps"] not in (counts[0], counts[-1]) or counts[0] == 1
    assert s.value == min(r["tts"] for r in rows if r["successes"])
    assert s.value <= fixed.value
    best = next(r for r in rows if r["sweeps"] == s.extra["best_sweeps"])
    assert best["successes"] >= Pinning().successes
    lo, hi = s.extra["best_sweeps_ci"]
    assert lo <= s.extra["best_sweeps"] <= hi
    again = measure_many(inst, ["tts"], ["sa"], sweeps=[200, 400], reads=64, seed=3, pin=Pinning())[0]
    assert (again.value, again.ci, again.seeds) == (s.value, s.ci, s.seeds)  # same seed, same figure
    assert [(r["sweeps"], r["successes"], r["reads"]) for r in again.extra["per_sweeps"]] == [
        (r["sweeps"], r["successes"], r["reads"]) for r in rows]


def test_a_spent_budget_leaves_a_bound_that_names_the_budget():
    inst = planted_chimera()
    s = measure_many(inst, ["tts"], ["sa"], sweeps=[200, 400], reads=64, seed=3, pin=Pinning(budget=1e6))[0]
    assert s.kind == "upper bound" and not s.extra["pin"]["pinned"]
    assert "budget of 1e+06 spin updates" in s.extra["pin"]["reason"]
    assert any("not pinned" in n for n in s.notes)


def test_never_solved_up_to_the_longest_anneal_is_a_lower_bound():
    inst = planted_chimera()
    # no read can reach an energy below the ground state: never solved
    s = measure_many(inst, ["tts"], ["sa"], sweeps=[5, 10], reads=16, seed=1, reference=inst.planted_energy - 4,
                     pin=Pinning(max_sweeps=40))[0]
    assert s.kind == "lower bound" and [r["sweeps"] for r in s.extra["per_sweeps"]] == [5, 10, 32, 40]
    assert all(r["reads"] == 16 for r in s.extra["per_sweeps"])
    assert "most allowed" in s.extra["pin"]["reason"]


def test_cold_ends_are_tried_and_the_best_pair_recorded():
    inst = planted_chimera()
    s = measure_many(inst, ["tts"], ["sa"], sweeps=[20, 200], reads=32, seed=2,
                     pin=Pinning(cold_ends=(1.0, 5.0)))[0]
    tried = s.extra["cold_ends"]
    assert [c["cold_end"] for c in tried] == [1.0, 5.0]
    assert s.extra["best_cold_end"] in (1.0, 5.0)
    assert s.schedule["beta_range"][1] == pytest.approx(s.extra["best_cold_end"])  # scale 1: beta = value
    assert s.value == min(c["tts"] for c in tried if c["kind"] == "value")
