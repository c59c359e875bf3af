"""The breeding fitness is a view over the scoring metrics: same energies, same figures."""

import math

import numpy as np
import pytest

from instgen import scoring
from instgen.fitness import Context, Measurement, figure, pool, value
from instgen.make import make_instance, topology
from instgen.metrics import tts
from instgen.preset import validate
from instgen.samplers import SAMPLERS, Sampler, Schedule, get_sampler

SWEEPS = (5, 20, 80)


def _ctx(metric="tts", **fitness):
    raw = {"graph": {"spec": "chimera:2"},
           "fitness": {"metric": metric, "sampler": "sa", "sweeps": list(SWEEPS), "short_sweeps": 5,
                       "long_sweeps": 80, "reads": 40, **fitness}}
    if metric == "composite":
        raw["fitness"]["weights"] = {"tts": 1.0, "anneal-gain": 2.0, "success": 0.5, "residual": 1.0}
    cfg = validate(raw)
    return Context.from_config(cfg, topology(cfg["graph"]["spec"]))


@pytest.fixture(scope="module")
def recorded():
    """Final states of real anneals of one instance at every sweep count (the raw energies both paths see)."""
    inst = make_instance("chimera:2", "pm1", seed=3)
    sa = get_sampler("sa")
    states = {c: sa.run(inst, Schedule(sweeps=c, beta_range=(0.1, 5.0)), reads=40, seed=c).states for c in SWEEPS}
    return inst, states


class Replay(Sampler):
    """Returns recorded states for the sweep count asked: the scoring path fed the same raw energies."""

    name = "replay"
    states: dict = {}

    def _run(self, instance, schedule, reads, seed, options):
        return self.states[schedule.sweeps][:reads]


@pytest.mark.parametrize("metric", scoring.FITNESS_METRICS)
@pytest.mark.parametrize("solved", [True, False])
def test_fitness_and_score_give_the_same_figure_from_the_same_energies(monkeypatch, recorded, metric, solved):
    inst, states = recorded
    Replay.states = states
    monkeypatch.setitem(SAMPLERS._items, "replay", Replay)
    energies = {c: inst.energies(s) for c, s in states.items()}
    lowest = min(float(e.min()) for e in energies.values())
    reference = lowest if solved else lowest - 4.0  # an energy no read reaches: never solved
    ctx = _ctx(metric)
    m = Measurement(energies=energies, reads=40, tol=scoring.energy_tolerance(inst))
    fit = figure(metric, ctx, m, reference)
    counts = list(ctx.counts_of(metric))
    via_score = scoring.measure_many(inst, [metric], ["replay"], sweeps=counts, reads=40, reference=reference,
                                     beta_range=ctx.beta_range)[0]
    assert fit.value == via_score.value
    assert fit.kind == via_score.kind
    if metric == "tts":
        assert fit.extra["best_sweeps"] == via_score.extra["best_sweeps"]
        assert fit.kind == ("lower bound" if not solved else fit.kind)
    # the fitness ranks that figure: higher = harder
    key, details = value(ctx, m, reference)
    assert details["figure"] == via_score.value
    if metric == "tts" and solved:
        assert key == pytest.approx(math.log10(via_score.value))
    if metric == "success":
        assert key == pytest.approx(1.0 - via_score.value)
    if metric in ("anneal-gain", "residual"):
        assert key == via_score.value


def test_search_tts_follows_the_published_definition():
    # TTS99 = t ln(0.01) / ln(1 - p) at the best sweep count (Ronnow et al., Science 345, 420 (2014))
    ctx = _ctx(sweeps=[10, 100])
    m = Measurement(energies={10: np.array([-1.0, 0, 0, 0]), 100: np.array([-1.0, -1.0, 0, 0])}, reads=4)
    key, d = value(ctx, m, -1.0)
    assert d["sweeps"] == 10 and d["figure"] == pytest.approx(10 * np.log(0.01) / np.log(0.75))
    assert key == pytest.approx(math.log10(tts(0.25, 10)))


def test_unsolved_short_anneals_do_not_cap_a_rarely_solved_candidate():
    # a sweep count with no success gives only a bound and is not the minimum (Ronnow et al. 2014)
    ctx = _ctx(sweeps=[10, 100])
    hard = Measurement(energies={10: np.zeros(8), 100: np.array([-1.0] + [0.0] * 7)}, reads=8)
    never = Measurement(energies={10: np.zeros(8), 100: np.zeros(8)}, reads=8)
    kh, dh = value(ctx, hard, -1.0)
    kn, dn = value(ctx, never, -1.0)
    assert dh["sweeps"] == 100 and dh["kind"] == "upper bound" and dh["figure"] == pytest.approx(tts(1 / 8, 100))
    assert dn["kind"] == "lower bound"
    assert kn > kh  # never solved ranks above rarely solved at the same resolution


def test_a_never_solved_figure_does_not_grow_when_reads_are_pooled():
    ctx = _ctx(sweeps=[10, 100])
    once = Measurement(energies={10: np.zeros(16), 100: np.zeros(16)}, reads=16)
    five = pool([once] * 5)
    assert five.energies[100].size == 80 and five.reads == 16
    k1, d1 = value(ctx, once, -1.0)
    k5, d5 = value(ctx, five, -1.0)
    assert d1["figure"] == d5["figure"] and k1 == k5
    # the bound itself: one-sided 95% limit on p from 16 reads, 1 - 0.05^(1/16) (Clopper & Pearson, Biometrika 26,
    # 404 (1934), the k = 0 case), at the shortest count tried
    assert d1["figure"] == pytest.approx(tts(1 - 0.05 ** (1 / 16), 10))


def test_never_solved_candidates_rank_by_residual_energy():
    ctx = _ctx(sweeps=[10, 100])
    closer = Measurement(energies={10: np.zeros(8), 100: np.full(8, -2.0)}, reads=8)
    farther = Measurement(energies={10: np.zeros(8), 100: np.zeros(8)}, reads=8)
    assert value(ctx, farther, -4.0)[0] > value(ctx, closer, -4.0)[0]
    assert value(ctx, farther, -4.0)[0] - value(ctx, closer, -4.0)[0] < 0.01  # a tie-break only


def test_least_over_solvers_uses_the_same_figures():
    ctx = _ctx(search_solvers=["tabu"])
    e = {c: np.array([-1.0, 0, 0, 0]) for c in SWEEPS}
    easy = {c: np.array([-1.0, -1.0, -1.0, 0]) for c in SWEEPS}
    m = Measurement(energies=e, by_solver={"tabu": easy}, reads=4)
    key, d = value(ctx, m, -1.0)
    assert d["solver"] == "tabu" and d["figure"] == pytest.approx(tts(0.75, 5))


@pytest.mark.parametrize("fitness", [{"metric": "gap"}, {"metric": "composite", "weights": {"gap": 1.0}}])
def test_retired_metric_name_says_its_new_name(fitness):
    # "gap" reads as the spectral gap to a physicist; the figure is the anneal gain now.
    with pytest.raises(Exception, match="now called 'anneal-gain'"):
        validate({"graph": {"spec": "chimera:2"}, "fitness": {"sampler": "sa", **fitness}})
