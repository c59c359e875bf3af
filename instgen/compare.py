"""Comparing two groups of instances on one figure: ratio of medians, its interval, a verdict.

A bred set is compared with a baseline measured the same way in the same run
(random instances of the same graph and alphabet, or the unbred start of the
search).  The ratio is median(bred) / median(baseline), with a percentile
bootstrap interval that resamples the instances of each group (Efron &
Tibshirani, *An Introduction to the Bootstrap*, 1993).  The verdict follows the
interval and nothing else:

* **harder** when the whole interval lies on the harder side of 1,
* **easier** when it lies on the easier side,
* **not distinguishable** when it contains 1 (or cannot be formed).

Figures that are bounds are not values, and a verdict must hold whatever
their true values are: each claim is tested with the bounds set to their worst
case for it.  For "the winners' median is larger", a winner figure that is an
upper bound counts as 0 and a baseline figure that is a lower bound as
infinite; for "smaller", the other way round.  The interval printed spans both
tests (its low end from the first, its high end from the second), so a verdict
read from it is safe from the bounds; with no bounds it is the plain bootstrap
interval.
"""

from __future__ import annotations

import math

import numpy as np

from .seeds import as_generator

HARDER, EASIER, SAME = "harder", "easier", "not distinguishable"


def ratio_interval(group, baseline, seed, draws: int = 2000, confidence: float = 0.95):
    """Percentile bootstrap interval of median(group) / median(baseline), resampling instances.

    None when either group has fewer than two finite values or a resampled
    baseline median can be zero.

    >>> lo, hi = ratio_interval([10.0, 11.0, 12.0, 13.0], [1.0, 1.1, 1.2, 1.3], seed=1)
    >>> 7 < lo < hi < 14
    True
    """
    w = [v for v in group if isinstance(v, (int, float)) and math.isfinite(v)]
    b = [v for v in baseline if isinstance(v, (int, float)) and math.isfinite(v)]
    if any(v == 0 for v in b):
        return None
    return _bootstrap_ratio(w, b, seed, draws, confidence, nan_as=math.nan)


def verdict(ci, harder: str = "higher") -> str:
    """harder / easier / not distinguishable, from the interval of a ratio.

    ``harder`` says which direction of the metric means harder.

    >>> verdict((1.2, 3.0)), verdict((0.02, 0.56)), verdict((0.5, 2.0))
    ('harder', 'easier', 'not distinguishable')
    >>> verdict((0.02, 0.56), harder="lower")
    'harder'
    """
    if ci is None:
        return SAME
    lo, hi = ci
    if lo > 1:
        return HARDER if harder == "higher" else EASIER
    if hi < 1:
        return EASIER if harder == "higher" else HARDER
    return SAME


def _bootstrap_ratio(group, baseline, seed, draws: int, confidence: float, nan_as: float):
    """Percentile bootstrap of median(group) / median(baseline) for values that may be 0 or infinite."""
    w = np.asarray(group, dtype=float)
    b = np.asarray(baseline, dtype=float)
    if w.size < 2 or b.size < 2:
        return None
    rng = as_generator(seed)
    rw = np.median(w[rng.integers(0, w.size, (draws, w.size))], axis=1)
    rb = np.median(b[rng.integers(0, b.size, (draws, b.size))], axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        r = rw / rb
    r = np.where(np.isnan(r), nan_as, r)
    # order statistics, not interpolation: the replicates may be 0 or infinite
    lo = np.quantile(r, (1 - confidence) / 2, method="lower")
    hi = np.quantile(r, (1 + confidence) / 2, method="higher")
    return float(lo), float(hi)


def _worst(scores, kind: str, to: float):
    """Values with the figures of one kind (a bound) replaced by ``to``, the worst case for a claim."""
    return [float(to) if s["kind"] == kind else float(s["value"]) for s in scores]


def compare_figures(group: list[dict], baseline: list[dict], harder: str, seed, *, confidence: float = 0.95,
                    draws: int = 2000) -> dict:
    """One comparison row from two lists of score dicts (``value`` and ``kind`` each).

    Returns the medians, the ratio of the figures as given, an interval that
    allows for any bounds among them, the verdict and a sentence.
    """
    gv = [s["value"] for s in group]
    bv = [s["value"] for s in baseline]
    gm = float(np.median(gv)) if gv else None
    bm = float(np.median(bv)) if bv else None
    bounds = sum(s["kind"] != "value" for s in group) + sum(s["kind"] != "value" for s in baseline)
    row = {"group_median": gm, "baseline_median": bm, "group": len(gv), "baseline": len(bv),
           "group_bounds": sum(s["kind"] != "value" for s in group),
           "baseline_bounds": sum(s["kind"] != "value" for s in baseline)}
    ratio = None
    all_bounds = (gv and row["group_bounds"] == len(gv)) or (bv and row["baseline_bounds"] == len(bv))
    if not all_bounds and gm is not None and bm not in (None, 0) and math.isfinite(gm) and math.isfinite(bm):
        ratio = gm / bm
    # "larger" is tested with the winners' upper bounds at 0 and the baseline's lower bounds at infinity (true
    # values could be anywhere beyond them); "smaller" with the winners' lower bounds at infinity and the
    # baseline's upper bounds at 0.  A bound on the other side is taken at its value, the worst case for the claim.
    big = _bootstrap_ratio(_worst(group, "upper bound", 0.0), _worst(baseline, "lower bound", math.inf),
                           seed, draws, confidence, nan_as=0.0)
    small = _bootstrap_ratio(_worst(group, "lower bound", math.inf), _worst(baseline, "upper bound", 0.0),
                             seed, draws, confidence, nan_as=math.inf)
    ci = None if big is None or small is None else (big[0], small[1])
    if ci is not None and ratio is not None and not bounds:
        ci = (min(ci[0], ratio), max(ci[1], ratio))
    row.update(ratio=ratio, ratio_kind="value" if not bounds else "allows for bounds",
               ratio_ci=list(ci) if ci else None, verdict=verdict(ci, harder))
    shown = (f"ratio {ratio:.3g}" if ratio is not None else
             "no ratio (every figure of one group is a bound)" if all_bounds else "no ratio")
    if ci is None:
        row["sentence"] = f"{shown}, too few instances for an interval: {row['verdict']}"
    else:
        hi = "inf" if math.isinf(ci[1]) else f"{ci[1]:.3g}"
        allow = f", allowing for {bounds} figure(s) that are bounds" if bounds else ""
        row["sentence"] = f"{shown} (95% interval {ci[0]:.3g} to {hi}{allow}): {row['verdict']}"
    return row
