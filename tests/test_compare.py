"""Comparing the winners with a baseline: the verdict follows the interval and nothing else."""

import numpy as np
import pytest

from instgen.compare import compare_figures, ratio_interval, verdict


def _scores(values, kind="value"):
    return [{"value": float(v), "kind": kind} for v in values]


@pytest.mark.parametrize("ci,harder,expected", [
    ((1.3, 4.0), "higher", "harder"),        # interval above 1
    ((0.0186, 0.559), "higher", "easier"),   # interval below 1: clearly easier, never "does not exclude 1"
    ((0.6, 1.7), "higher", "not distinguishable"),  # interval across 1
    ((0.0186, 0.559), "lower", "harder"),    # success probability: lower is harder
    ((1.3, 4.0), "lower", "easier"),
    ((1.3, float("inf")), "higher", "harder"),
    (None, "higher", "not distinguishable"),
])
def test_verdict_on_intervals_above_below_and_across_one(ci, harder, expected):
    assert verdict(ci, harder) == expected


def test_rows_say_easier_when_the_winners_are_clearly_easier():
    # two log-normal groups a factor 30 apart: the ratio of medians is about 1/30 and its bootstrap
    # interval excludes 1 (Efron & Tibshirani, An Introduction to the Bootstrap, 1993)
    rng = np.random.default_rng(1)
    winners = _scores(rng.lognormal(2.0, 0.3, 12))
    base = _scores(rng.lognormal(2.0 + np.log(30), 0.3, 12))
    row = compare_figures(winners, base, "higher", seed=2)
    assert row["verdict"] == "easier" and row["ratio_ci"][1] < 1
    assert "easier" in row["sentence"] and "interval" in row["sentence"]


def test_no_ratio_of_two_bounds():
    # never solved on either side: the figures are lower bounds, and no ratio of them is printed
    winners = _scores([100, 200, 300], "lower bound")
    base = _scores([100, 200, 300], "lower bound")
    row = compare_figures(winners, base, "higher", seed=1)
    assert row["ratio"] is None and row["verdict"] == "not distinguishable"
    assert row["sentence"].startswith("no ratio (every figure of one group is a bound)")


def test_a_verdict_holds_whatever_the_bounds_hide():
    # winners never solved (lower bounds) far above solved random instances: harder, whatever their true values
    base = _scores([100, 120, 140])
    row = compare_figures(_scores([1e6, 2e6, 3e6], "lower bound"), base, "higher", seed=1)
    assert row["verdict"] == "harder" and row["ratio"] is None
    # one winner an upper bound (optimum beyond the longest anneal): counted as 0 for "harder", which still holds
    solved = [2.8e6, 5.1e6, 2.6e6, 3.3e6, 4.0e6, 2.9e6, 3.7e6, 4.4e6, 3.1e6, 2.7e6, 3.9e6]
    random = [2.9e5, 1.6e5, 1.5e5, 7.7e5, 2.2e5, 3.1e5, 1.8e5, 2.5e5]
    winners = _scores(solved) + _scores([2.2e7], "upper bound")
    row = compare_figures(winners, _scores(random), "higher", seed=1)
    assert row["verdict"] == "harder"
    assert row["ratio"] == pytest.approx(np.median(solved + [2.2e7]) / np.median(random))
    assert "allowing for 1 figure(s) that are bounds" in row["sentence"]
    # with four instances, one of them a bound, the same claim is out of reach
    few = compare_figures(_scores(solved[:3]) + _scores([2.2e7], "upper bound"), _scores(random[:4]), "higher",
                          seed=1)
    assert few["verdict"] == "not distinguishable"
    # lower bounds below the baseline cannot make the winners "easier": their true values may be higher
    low = compare_figures(_scores([1, 2, 3], "lower bound") + _scores([2]), base, "higher", seed=1)
    assert low["verdict"] == "not distinguishable"


def test_ratio_interval_contains_the_known_ratio():
    # log-normal groups shifted by ln 10: the ratio of medians is 10
    rng = np.random.default_rng(4)
    base = rng.lognormal(3.0, 0.3, 40)
    lo, hi = ratio_interval(rng.lognormal(3.0 + np.log(10), 0.3, 40), base, seed=1)
    assert lo < 10 < hi and lo > 1
