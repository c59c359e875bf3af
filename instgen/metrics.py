"""Hardness metrics as pure functions over arrays (no sampling, no I/O).

Everything here takes energies, states and counts and returns numbers, so the
same code serves the ``instgen score`` command, the breeding fitness and the
tests.  Conventions:

* a read *succeeds* when its energy is within ``tol`` of the target energy;
* intervals are two-sided at ``confidence`` (0.95 by default);
* time-to-solution follows Ronnow et al., Science 345, 420 (2014):
  TTS_q = t * ln(1 - q) / ln(1 - p), with q = 0.99.  At least one run is
  always needed, so the number of repetitions is never below 1 (p >= q gives
  TTS = t).  At p = 0 nothing bounds TTS from above; the figure given is the
  lower bound that follows from the one-sided upper confidence limit on p
  from the reads of *one* measurement (``bound_trials``), and it is flagged
  as a lower bound: pooling more unsuccessful reads never raises it.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from .errors import InputError
from .seeds import as_generator

Q99 = 0.99
INTERVAL_METHODS = ("wilson", "clopper-pearson")
BOOTSTRAP_METHODS = ("jeffreys", "reads")


@dataclasses.dataclass(frozen=True)
class Estimate:
    """A figure with its interval; ``kind`` is "value", "lower bound" or "upper bound"."""

    value: float
    low: float
    high: float
    kind: str = "value"

    @property
    def ci(self) -> tuple[float, float]:
        return (self.low, self.high)


def _check_confidence(confidence: float) -> float:
    if not 0.0 < confidence < 1.0:
        raise InputError(f"confidence must lie strictly between 0 and 1, got {confidence}")
    return float(confidence)


def _check_counts(successes: int, trials: int) -> tuple[int, int]:
    if trials < 1 or not 0 <= successes <= trials:
        raise InputError(f"need 0 <= successes <= trials and trials >= 1, got {successes} of {trials}")
    return int(successes), int(trials)


# ------------------------------------------------------------- probabilities
def binomial_interval(successes: int, trials: int, confidence: float = 0.95,
                      method: str = "wilson") -> tuple[float, float]:
    """Confidence interval for a success probability.

    ``method`` is ``"wilson"`` (score interval) or ``"clopper-pearson"``
    (exact, conservative).

    >>> [round(x, 4) for x in binomial_interval(5, 10)]
    [0.2366, 0.7634]
    """
    from scipy import stats

    k, n = _check_counts(successes, trials)
    alpha = 1.0 - _check_confidence(confidence)
    if method == "wilson":
        z = float(stats.norm.ppf(1.0 - alpha / 2.0))
        p = k / n
        centre = (p + z * z / (2 * n)) / (1 + z * z / n)
        half = z / (1 + z * z / n) * math.sqrt(p * (1 - p) / n + z * z / (4 * n * n))
        lo = 0.0 if k == 0 else max(0.0, centre - half)
        hi = 1.0 if k == n else min(1.0, centre + half)
        return (lo, hi)
    if method == "clopper-pearson":
        lo = 0.0 if k == 0 else float(stats.beta.ppf(alpha / 2, k, n - k + 1))
        hi = 1.0 if k == n else float(stats.beta.ppf(1 - alpha / 2, k + 1, n - k))
        return (lo, hi)
    raise InputError(f"unknown interval method {method!r}; choose one of: {', '.join(INTERVAL_METHODS)}")


def successes(energies, target: float, tol: float = 1e-9) -> np.ndarray:
    """Boolean array: which reads reached ``target`` (within ``tol``)."""
    return np.asarray(energies, dtype=np.float64) <= target + tol


def success_probability(energies, target: float, *, tol: float = 1e-9, confidence: float = 0.95,
                        method: str = "wilson") -> Estimate:
    """Fraction of reads at or below ``target`` with its binomial interval.

    >>> success_probability([-4.0, -4.0, -2.0, 0.0], -4.0).value
    0.5
    """
    hit = successes(energies, target, tol)
    if hit.size == 0:
        raise InputError("no reads to estimate a success probability from")
    k = int(hit.sum())
    lo, hi = binomial_interval(k, hit.size, confidence, method)
    return Estimate(k / hit.size, lo, hi)


# -------------------------------------------------------------- time to solution
def repetitions(p, q: float = Q99):
    """Runs needed to succeed at least once with probability q: ln(1-q)/ln(1-p), at least 1.

    Works on floats and arrays; p = 0 gives inf.

    >>> round(float(repetitions(0.5)), 3)    # Ronnow et al. (2014) definition
    6.644
    """
    if not 0.0 < q < 1.0:
        raise InputError(f"the target probability q must lie strictly between 0 and 1, got {q}")
    p = np.asarray(p, dtype=np.float64)
    if np.any((p < 0) | (p > 1)):
        raise InputError("success probabilities must lie in [0, 1]")
    with np.errstate(divide="ignore", invalid="ignore"):
        r = np.where(p >= q, 1.0, np.log1p(-q) / np.log1p(-np.minimum(p, q)))
        r = np.where(p <= 0, np.inf, np.maximum(r, 1.0))
    return float(r) if r.ndim == 0 else r


def tts(p, effort: float, q: float = Q99):
    """Time-to-solution: effort per run times :func:`repetitions`.

    >>> round(tts(0.01, 1.0), 1)
    458.2
    """
    return effort * repetitions(p, q)


def _draw_p(k: np.ndarray, n: np.ndarray, draws: int, rng, method: str) -> np.ndarray:
    """(draws, len(k)) bootstrap replicates of success probabilities."""
    if method == "jeffreys":
        return rng.beta(k + 0.5, n - k + 0.5, size=(draws, k.size))
    if method == "reads":
        return rng.binomial(n, k / n, size=(draws, k.size)) / n
    raise InputError(f"unknown bootstrap method {method!r}; choose one of: {', '.join(BOOTSTRAP_METHODS)}")


def tts_estimate(successes: int, trials: int, effort: float, *, q: float = Q99, confidence: float = 0.95,
                 draws: int = 2000, seed=0, bootstrap: str = "jeffreys") -> Estimate:
    """TTS_q at one effort (sweep count) with a bootstrap interval.

    The bootstrap draws success probabilities from the Jeffreys posterior
    Beta(k + 1/2, R - k + 1/2) (``bootstrap="jeffreys"``, which does not
    collapse when all or no reads succeed) or by resampling reads
    (``"reads"``).  With no successes the value is a lower bound (see the
    module docstring) and the interval is (bound, inf).

    >>> round(tts_estimate(50, 100, 1.0).value, 3)
    6.644
    """
    est = optimal_tts([effort], [successes], [trials], q=q, confidence=confidence, draws=draws,
                      seed=seed, bootstrap=bootstrap)
    kind = est.kind if est.kind == "lower bound" else "value"
    return Estimate(est.value, est.low, est.high, kind)


@dataclasses.dataclass(frozen=True)
class OptimalTTS(Estimate):
    """TTS at the best effort of a grid.

    ``best`` indexes the grid; ``edge`` says the best sits at the smallest or
    largest effort tried; ``per_effort`` holds each grid point's estimate;
    ``best_ci`` is the interval of the best effort itself (the efforts at
    which the bootstrap replicates reach their minimum).
    """

    best: int = 0
    edge: bool = False
    per_effort: tuple = ()
    best_ci: tuple = ()


def zero_success_bound(effort: float, trials: int, confidence: float = 0.95, q: float = Q99) -> float:
    """Lower bound on TTS_q at one effort where none of ``trials`` reads succeeded.

    From the one-sided upper confidence limit on p, 1 - (1 - confidence)^(1/trials).

    >>> round(zero_success_bound(1.0, 100), 1)
    153.7
    """
    alpha = 1.0 - _check_confidence(confidence)
    return float(effort * repetitions(1.0 - alpha ** (1.0 / int(trials)), q))


def optimal_tts(efforts, successes, trials, *, q: float = Q99, confidence: float = 0.95, draws: int = 2000,
                seed=0, bootstrap: str = "jeffreys", bound_trials=None, floor: float | None = None) -> OptimalTTS:
    """Minimum over a grid of efforts (sweep counts) of TTS_q, with a bootstrap interval.

    The interval bootstraps every grid point together and takes the minimum
    in each replicate (``draws=0`` skips it: the interval is then the value
    itself, for ranking inside a search).  ``kind`` is:

    * ``"lower bound"`` when no read succeeded anywhere (the value is the
      smallest of the per-point lower bounds, each from at most
      ``bound_trials`` reads, so that pooling more unsuccessful reads never
      raises it);
    * ``"upper bound"`` when the minimum sits at either end of a grid of more
      than one point, or the grid has one point: the true optimum over all
      anneal lengths can only be lower (Albash & Lidar, PRX 8, 031016 (2018)).
      A minimum at ``floor`` (the least effort there is, e.g. one sweep) is
      not an edge: nothing shorter can be run;
    * ``"value"`` otherwise.

    >>> est = optimal_tts([10, 100, 1000], [1, 60, 99], [100, 100, 100], seed=1)
    >>> est.best, est.kind
    (1, 'value')
    """
    t = np.asarray(efforts, dtype=np.float64).reshape(-1)
    k = np.asarray(successes, dtype=np.int64).reshape(-1)
    n = np.asarray(trials, dtype=np.int64).reshape(-1)
    if not (t.size == k.size == n.size) or t.size == 0:
        raise InputError("efforts, successes and trials must be non-empty and of equal length")
    if np.any(t <= 0) or not np.all(np.isfinite(t)):
        raise InputError("efforts (sweep counts) must be positive numbers")
    for ki, ni in zip(k, n):
        _check_counts(int(ki), int(ni))
    alpha = 1.0 - _check_confidence(confidence)
    bound_n = n if bound_trials is None else np.minimum(n, int(bound_trials))
    p_hat = k / n
    point = t * repetitions(p_hat, q)
    lo_q, hi_q = alpha / 2.0, 1.0 - alpha / 2.0
    reps = None
    if draws:
        reps = t * repetitions(_draw_p(k, n, int(draws), as_generator(seed), bootstrap), q)
    per = []
    for i in range(t.size):
        if k[i] == 0:
            bound = zero_success_bound(t[i], int(bound_n[i]), confidence, q)
            per.append(Estimate(bound, bound, math.inf, "lower bound"))
        elif reps is None:
            per.append(Estimate(float(point[i]), float(point[i]), float(point[i])))
        else:
            lo, hi = np.quantile(reps[:, i], [lo_q, hi_q])
            per.append(Estimate(float(point[i]), float(min(lo, point[i])), float(max(hi, point[i]))))
    if np.all(k == 0):
        best = int(np.argmin([e.value for e in per]))
        b = per[best]
        return OptimalTTS(b.value, b.low, math.inf, "lower bound", best, False, tuple(per), ())
    best = int(np.argmin(point))
    value = float(point[best])
    if reps is None:
        lo = hi = value
        best_ci = (float(t[best]), float(t[best]))
    else:
        lo, hi = np.quantile(np.min(reps, axis=1), [lo_q, hi_q])
        where = t[np.argmin(reps, axis=1)]
        best_ci = (float(np.quantile(where, lo_q, method="lower")), float(np.quantile(where, hi_q, method="higher")))
    at_floor = floor is not None and best == 0 and t[0] <= floor
    edge = t.size == 1 or best == t.size - 1 or (best == 0 and not at_floor)
    return OptimalTTS(value, float(min(lo, value)), float(max(hi, value)),
                      "upper bound" if edge else "value", best, edge, tuple(per), best_ci)


# ------------------------------------------------------------------ energies
def _mean_interval(x: np.ndarray, confidence: float) -> Estimate:
    from scipy import stats

    x = np.asarray(x, dtype=np.float64)
    if x.size == 0:
        raise InputError("no values to average")
    mean = float(x.mean())
    if x.size < 2:
        return Estimate(mean, -math.inf, math.inf)
    t = float(stats.t.ppf(0.5 + _check_confidence(confidence) / 2, x.size - 1))
    half = t * float(x.std(ddof=1)) / math.sqrt(x.size)
    return Estimate(mean, mean - half, mean + half)


def residual_energy(energies, reference: float, n: int, *, confidence: float = 0.95) -> Estimate:
    """Mean residual energy per spin, (mean E - E0) / n, with a t interval.

    >>> residual_energy([-10.0, -8.0], -10.0, 4).value
    0.25
    """
    if n < 1:
        raise InputError("the number of spins must be positive")
    return _mean_interval((np.asarray(energies, dtype=np.float64) - reference) / n, confidence)


def anneal_gain(short_energies, long_energies, n: int, scale: float, *, confidence: float = 0.95) -> Estimate:
    """(mean E after a short anneal - mean E after a long one) / (n * scale).

    Normalised per spin and by the coupling scale, so multiplying every
    coupling (and the scale with it) by a constant leaves it unchanged.  The
    interval is Welch's for a difference of means.

    >>> anneal_gain([-6.0, -6.0], [-8.0, -8.0], 4, 0.5).value
    1.0
    """
    from scipy import stats

    if n < 1 or not scale > 0:
        raise InputError("anneal gain needs a positive number of spins and a positive coupling scale")
    a = np.asarray(short_energies, dtype=np.float64)
    b = np.asarray(long_energies, dtype=np.float64)
    if a.size == 0 or b.size == 0:
        raise InputError("anneal gain needs reads at both sweep counts")
    norm = n * scale
    diff = (a.mean() - b.mean()) / norm
    if a.size < 2 or b.size < 2:
        return Estimate(float(diff), -math.inf, math.inf)
    va, vb = a.var(ddof=1) / a.size, b.var(ddof=1) / b.size
    se = math.sqrt(va + vb)
    if se == 0:
        return Estimate(float(diff), float(diff), float(diff))
    dof = (va + vb) ** 2 / ((va ** 2 / (a.size - 1) if va else 0) + (vb ** 2 / (b.size - 1) if vb else 0))
    half = float(stats.t.ppf(0.5 + _check_confidence(confidence) / 2, dof)) * se / norm
    return Estimate(float(diff), float(diff - half), float(diff + half))


# ---------------------------------------------------------------- landscape
def distinct_states(states, energies, low: float, high: float) -> tuple[np.ndarray, np.ndarray]:
    """Distinct rows of ``states`` whose energy lies in [low, high], sorted by energy."""
    s = np.asarray(states, dtype=np.int8)
    e = np.asarray(energies, dtype=np.float64)
    pick = (e >= low) & (e <= high)
    if not np.any(pick):
        return np.zeros((0, s.shape[1]), dtype=np.int8), np.zeros(0)
    uniq, first = np.unique(s[pick], axis=0, return_index=True)
    ue = e[pick][first]
    order = np.lexsort((np.arange(ue.size), ue))
    return uniq[order], ue[order]


def ground_state_count(states, energies, reference: float, *, tol: float = 1e-9, symmetric: bool = False,
                       known=None) -> int:
    """Distinct ground states seen: a lower bound on the degeneracy.

    ``known`` adds ground states known by other means (planted, certified).
    With ``symmetric`` (no fields) each state's global flip is a ground
    state too and is counted.

    >>> ground_state_count([[1, -1], [1, -1], [-1, 1]], [-1.0, -1.0, -1.0], -1.0, symmetric=True)
    2
    """
    found, _ = distinct_states(states, energies, -math.inf, reference + tol)
    rows = [found] + ([np.atleast_2d(np.asarray(known, dtype=np.int8))] if known is not None and len(known) else [])
    allg = np.concatenate(rows) if rows else found
    if symmetric:
        allg = np.concatenate([allg, -allg])
    return int(np.unique(allg, axis=0).shape[0]) if allg.size else 0


def hamming_to_nearest(states, targets, *, symmetric: bool = False) -> np.ndarray:
    """For each state, the Hamming distance to the nearest target state.

    With ``symmetric`` a target's global flip counts as a target too.

    >>> hamming_to_nearest([[1, 1, 1]], [[1, -1, -1]]).tolist()
    [2]
    >>> hamming_to_nearest([[1, 1, 1]], [[1, -1, -1]], symmetric=True).tolist()
    [1]
    """
    s = np.atleast_2d(np.asarray(states, dtype=np.int32))
    g = np.atleast_2d(np.asarray(targets, dtype=np.int32))
    if g.size == 0:
        raise InputError("no target states to measure distances to")
    n = s.shape[1]
    d = (n - s @ g.T) // 2
    if symmetric:
        d = np.minimum(d, n - d)
    return d.min(axis=1).astype(np.int64)


def excited_distances(states, energies, reference: float, ground_states, *, tol: float = 1e-9,
                      symmetric: bool = False) -> tuple[np.ndarray, float]:
    """Distances from the lowest excited states found to the nearest ground state.

    The lowest excited states are the distinct states at the lowest energy
    found above ``reference + tol``.  Returns (distances, that energy); empty
    distances and nan when every read was a ground state.  Large distances
    mean a deceptive landscape: the next-best states sit far from the optimum.

    >>> d, e1 = excited_distances([[1, 1, 1, 1], [1, -1, -1, -1]], [-2.0, 0.0], -2.0, [[1, 1, 1, 1]])
    >>> d.tolist(), e1
    ([3], 0.0)
    """
    e = np.asarray(energies, dtype=np.float64)
    above = e[e > reference + tol]
    if above.size == 0:
        return np.zeros(0, dtype=np.int64), math.nan
    e1 = float(above.min())
    level, _ = distinct_states(states, e, e1 - tol, e1 + tol)
    return hamming_to_nearest(level, ground_states, symmetric=symmetric), e1
