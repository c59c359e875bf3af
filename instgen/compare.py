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

Figures that are bounds are not values: a ratio is formed only when every
figure of both groups is a value, or when the bounds all point the same way
as the claim (bred figures that are lower bounds on a "higher is harder"
metric make the ratio itself a lower bound, which can support "harder" but
never "easier").  Otherwise there is no ratio, and the row says why.
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
    w = np.array([v for v in group if isinstance(v, (int, float)) and math.isfinite(v)], dtype=float)
    b = np.array([v for v in baseline if isinstance(v, (int, float)) and math.isfinite(v)], dtype=float)
    if w.size < 2 or b.size < 2 or np.any(b == 0):
        return None
    rng = as_generator(seed)
    rw = np.median(w[rng.integers(0, w.size, (draws, w.size))], axis=1)
    rb = np.median(b[rng.integers(0, b.size, (draws, b.size))], axis=1)
    lo, hi = np.quantile(rw / rb, [(1 - confidence) / 2, (1 + confidence) / 2])
    return float(lo), float(hi)


def verdict(ci, harder: str = "higher", kind: str = "value") -> str:
    """harder / easier / not distinguishable, from the interval of a ratio.

    ``harder`` says which direction of the metric means harder; ``kind`` is the
    ratio's own kind ("lower bound" can only support a claim that the ratio is
    large, "upper bound" only that it is small).

    >>> verdict((1.2, 3.0)), verdict((0.02, 0.56)), verdict((0.5, 2.0))
    ('harder', 'easier', 'not distinguishable')
    >>> verdict((0.02, 0.56), harder="lower")
    'harder'
    >>> verdict((0.02, 0.56), kind="lower bound")
    'not distinguishable'
    """
    if ci is None:
        return SAME
    lo, hi = ci
    big = lo > 1 and kind in ("value", "lower bound")
    small = hi < 1 and kind in ("value", "upper bound")
    if big:
        return HARDER if harder == "higher" else EASIER
    if small:
        return EASIER if harder == "higher" else HARDER
    return SAME


def _ratio_kind(group_kinds, base_kinds) -> str | None:
    """The kind of median(group) / median(baseline) given the kinds of their figures (None: not formed)."""
    g, b = set(group_kinds), set(base_kinds)
    if g <= {"value"} and b <= {"value"}:
        return "value"
    # a larger numerator or a smaller denominator can only make the ratio larger
    if g <= {"value", "lower bound"} and b <= {"value", "upper bound"}:
        return "lower bound"
    if g <= {"value", "upper bound"} and b <= {"value", "lower bound"}:
        return "upper bound"
    return None


def compare_figures(group: list[dict], baseline: list[dict], harder: str, seed, *, confidence: float = 0.95) -> dict:
    """One comparison row from two lists of score dicts (``value`` and ``kind`` each).

    Returns medians, ratio, its kind and interval, the verdict and a sentence.
    """
    gv = [s["value"] for s in group]
    bv = [s["value"] for s in baseline]
    gm = float(np.median(gv)) if gv else None
    bm = float(np.median(bv)) if bv else None
    row = {"group_median": gm, "baseline_median": bm, "group": len(gv), "baseline": len(bv),
           "group_bounds": sum(s["kind"] != "value" for s in group),
           "baseline_bounds": sum(s["kind"] != "value" for s in baseline)}
    kind = _ratio_kind([s["kind"] for s in group], [s["kind"] for s in baseline])
    ratio = None
    if kind and gm is not None and bm not in (None, 0) and math.isfinite(gm) and math.isfinite(bm):
        ratio = gm / bm
    ci = ratio_interval(gv, bv, seed, confidence=confidence) if ratio is not None else None
    if ci is not None:
        ci = (min(ci[0], ratio), max(ci[1], ratio))
    row.update(ratio=ratio, ratio_kind=kind if ratio is not None else None,
               ratio_ci=list(ci) if ci else None, verdict=verdict(ci, harder, kind or "value"))
    if ratio is None:
        why = ("the figures include bounds pointing both ways" if kind is None else
               "one group has no finite median")
        row["sentence"] = f"no ratio ({why}): {row['verdict']}"
    elif ci is None:
        row["sentence"] = (f"ratio {'>= ' if kind == 'lower bound' else '<= ' if kind == 'upper bound' else ''}"
                           f"{ratio:.3g}, too few instances for an interval: not distinguishable")
    else:
        sign = {"lower bound": ">= ", "upper bound": "<= "}.get(kind, "")
        row["sentence"] = (f"ratio {sign}{ratio:.3g} (95% interval {ci[0]:.3g} to {ci[1]:.3g}): {row['verdict']}")
    return row
