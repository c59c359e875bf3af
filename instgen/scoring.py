"""Scoring an instance: run surrogate samplers with explicit schedules, then metrics.

The one Python API behind ``instgen score`` and the breeding fitness::

    score = measure(instance, "tts", sampler="sa", sweeps=[10, 100, 1000], reads=256, seed=1)

How a measurement is made:

* **Schedule.**  The beta range comes from the ``beta_range`` argument, else
  from ``scale``, else from the coupling alphabet stored with the instance
  (``metadata["rules"]``) through :func:`~instgen.samplers.default_beta_range`;
  never from the instance's own couplings, or a search would learn to break
  the schedule instead of the sampler.
* **Seeds.**  Every (solver, sweep count) run gets
  ``derive_seed(seed, "measure", solver, sweeps)``, so a run's samples do not
  depend on which other metrics or solvers were asked for.
* **Reference energy.**  From the caller (``reference=``), else the
  instance's certificate (``metadata["certificate"]``), else its planted
  state, else the lowest energy found across every run of the call, in which
  case the score's ``reference_status`` is ``"not proven"`` and its notes say
  so.  A sampler finding an energy below a claimed reference is reported
  plainly and the lower energy is used.

Metrics are registered in :data:`METRICS` (names shared with presets and the
command line).  :func:`measure_many` scores several metrics under several
solvers from one set of runs; :func:`measure_perturbed` scores copies with
Gaussian control errors on J and h.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Sequence

import numpy as np

from . import metrics as M
from .errors import InputError, ResourceError
from .exact import duration
from .instance import Instance
from .records import Certificate, SampleBatch, Score
from .registry import Registry
from .samplers import SAMPLERS, Schedule, default_beta_range
from .seeds import as_generator, derive_seed

METRICS = Registry("metric")

#: Requests above these are refused up front by :func:`check_effort`.
MAX_SECONDS = 7 * 86400.0
MAX_BYTES = 8e9
#: An optimistic speed (spin updates per second on one core), so only absurd requests are refused.
UPDATES_PER_SECOND = 1e9
#: The least a single sampler run costs (setting up, scoring its states).
RUN_SECONDS = 1e-3


@dataclasses.dataclass(frozen=True)
class MetricSpec:
    """A named metric: which sweep counts it needs, how it is computed, how it ranks.

    ``counts`` is ``"grid"`` (every sweep count given), ``"one"`` (the largest,
    or the long anneal) or ``"pair"`` (the smallest and the largest, or the
    short and the long anneal).  ``harder`` says which direction means a
    harder instance.  ``rank`` turns a computed :class:`Score` into the
    breeding fitness (higher = harder): a ranking key on top of the same
    figure, never a second formula (see :func:`rank_key`).
    """

    name: str
    summary: str
    counts: str
    default_sweeps: tuple[int, ...]
    harder: str
    compute: Callable
    needs_samples: bool = True
    rank: Callable | None = None

    def counts_for(self, sweeps=None, short: int | None = None, long: int | None = None) -> tuple[int, ...]:
        """The sweep counts this metric is measured at.

        ``sweeps`` is a grid; ``short`` and ``long`` (a preset's
        ``short_sweeps`` and ``long_sweeps``) name the pair and the single
        count when given.

        >>> METRICS.get("anneal-gain").counts_for([10, 100, 1000])
        (10, 1000)
        >>> METRICS.get("residual").counts_for([10, 100], long=5000)
        (5000,)
        """
        if self.counts == "pair" and short is not None and long is not None:
            return _counts(self, [short, long])
        if self.counts == "one" and long is not None:
            return _counts(self, [long])
        return _counts(self, sweeps)


@dataclasses.dataclass
class Reference:
    """The energy measured against, how it is known, and known ground states."""

    energy: float
    status: str
    source: str
    states: np.ndarray | None = None
    notes: list[str] = dataclasses.field(default_factory=list)


@dataclasses.dataclass
class _Run:
    """What a metric's compute function sees for one solver.

    ``energies`` maps each sweep count to the final energies of every read
    there (pooled over batches); ``batches`` keeps the sampler batches where
    they exist (states, seeds, seconds), and is empty when the energies came
    from elsewhere (the breeding fitness).  ``bound_reads`` is the reads of
    one measurement: a never-solved figure is bounded from that many reads.
    """

    instance: Instance | None
    n: int
    has_fields: bool
    solver: str
    unit: str
    counts: tuple[int, ...]
    energies: dict[int, np.ndarray]
    reference: Reference
    scale: float | None
    tol: float
    confidence: float
    seed: int
    notes: list[str]
    batches: dict[int, list[SampleBatch]] = dataclasses.field(default_factory=dict)
    bound_reads: int | None = None
    draws: int = 2000
    floor: int | None = None


# --------------------------------------------------------------------- set-up
def schedule_range(instance: Instance, beta_range=None, scale=None) -> tuple[tuple[float, float], float | None, str]:
    """(beta_range, coupling scale, where they came from) for scoring ``instance``.

    >>> from instgen.make import make_instance
    >>> schedule_range(make_instance("chimera:1", "int:2", seed=1))[:2]
    ((0.05, 2.5), 2.0)
    """
    if scale is not None:
        if isinstance(scale, bool) or not isinstance(scale, (int, float)) or not math.isfinite(scale) or scale <= 0:
            raise InputError(f"scale must be a positive number, got {scale!r}")
        scale, source = float(scale), f"scale {scale:g} given by the caller"
    else:
        rules = instance.metadata.get("rules")
        if rules:
            from .couplings import CouplingRules

            try:
                scale = CouplingRules.from_dict(rules).scale
            except (TypeError, AttributeError):
                raise InputError("the instance's metadata 'rules' is not a table of coupling rules") from None
            source = f"coupling alphabet {rules.get('couplings')} (scale {scale:g})"
    if beta_range is not None:
        try:
            b = Schedule(sweeps=1, beta_range=tuple(beta_range)).beta_range
        except (TypeError, ValueError):
            raise InputError(f"beta_range must be two positive numbers, got {beta_range!r}") from None
        return b, scale, "beta range given by the caller"
    if scale is None:
        raise InputError("the instance carries no coupling alphabet (metadata 'rules'), so there is no default "
                         "schedule; give a coupling scale (scale=, --scale) or a beta range "
                         "(beta_range=, --beta-range)")
    return default_beta_range(scale), scale, source


def _claimed_reference(instance: Instance, reference, tol: float) -> Reference | None:
    if reference is not None:
        if isinstance(reference, bool) or not isinstance(reference, (int, float)) or not math.isfinite(reference):
            raise InputError(f"reference must be a finite energy, got {reference!r}")
        return Reference(float(reference), "not proven", "energy given by the caller",
                         notes=[f"the reference energy {reference:g} was given by the caller and is not checked "
                                "by instgen: it is not a proven optimum"])
    cert = instance.metadata.get("certificate")
    if cert is not None:
        energy = cert.get("energy") if isinstance(cert, dict) else None
        if isinstance(energy, bool) or not isinstance(energy, (int, float)) or not math.isfinite(energy):
            raise InputError("the instance's metadata 'certificate' has no numeric 'energy'")
        status = Certificate.status_of(cert.get("status"))
        ref = Reference(float(energy), status, f"certificate ({cert.get('method', 'unknown method')}, {status})")
        state = cert.get("state")
        if isinstance(state, list) and len(state) == instance.n and all(x in (-1, 1) for x in state):
            s = np.asarray(state, dtype=np.int8)
            if abs(instance.energy(s) - energy) <= tol:
                ref.states = s[None, :]
        if status == "not proven":
            ref.notes.append(f"the certificate's energy {energy:g} is marked not proven: it is no proof of the optimum")
        return ref
    if instance.planted is not None:
        return Reference(instance.planted_energy, "planted", "planted state", states=instance.planted[None, :])
    return None


def resolve_reference(instance: Instance, lowest: float, reference=None, tol: float = 1e-9) -> Reference:
    """The reference energy for a measurement whose lowest energy found is ``lowest``."""
    ref = _claimed_reference(instance, reference, tol)
    if ref is None:
        return Reference(lowest, "not proven", "lowest energy found in this measurement", notes=[
            f"the reference energy {lowest:g} is the lowest any sampler found in this measurement, not a proven "
            "optimum: success and time-to-solution count reads that matched the best of this run, and a lower "
            "state may exist (plant one or run `instgen certify`)"])
    if lowest < ref.energy - tol:
        return Reference(lowest, "not proven", "lowest energy found in this measurement", notes=[
            f"a sampler found energy {lowest:g}, below the reference {ref.energy:g} from the {ref.source}: that "
            f"reference is not a ground state; measured against {lowest:g} instead, which is not a proven "
            "optimum either"])
    return ref


def _counts(spec: MetricSpec, sweeps) -> tuple[int, ...]:
    if sweeps is None:
        vals = list(spec.default_sweeps)
    else:
        vals = [sweeps] if isinstance(sweeps, (int, np.integer)) and not isinstance(sweeps, bool) else list(sweeps)
        if not vals or any(isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < 1 for v in vals):
            raise InputError(f"sweeps must be positive whole numbers, got {sweeps!r}")
    vals = sorted({int(v) for v in vals})
    if spec.counts == "one":
        return (vals[-1],)
    if spec.counts == "pair":
        if len(vals) < 2:
            raise InputError(f"the {spec.name} metric needs two sweep counts (a short and a long anneal), "
                             f"got only {vals[0]}")
        return (vals[0], vals[-1])
    return tuple(vals)


def _recipe(schedule: dict, counts) -> dict:
    """A batch's schedule without per-sweep arrays (rebuilt from the recipe), with every count used."""
    d = {k: v for k, v in schedule.items() if not isinstance(v, list) or k == "beta_range"}
    for key in ("sweeps", "restarts"):  # the effort each solver took from the schedule
        if d.get(key) == counts[0]:
            d[key] = list(counts) if len(counts) > 1 else counts[0]
    return d


def _run_all(target: Instance, scorer: Instance, solvers, counts_by_solver, reads, seed, beta_range,
             schedule, options, keys=()) -> dict:
    batches = {}
    for name in solvers:
        sampler = SAMPLERS.get(name)()
        for c in counts_by_solver[name]:
            sched = Schedule.from_dict({**(schedule or {}), "sweeps": c, "beta_range": beta_range})
            b = sampler.run(target, sched, reads=reads, seed=derive_seed(seed, "measure", name, c, *keys),
                            **options.get(name, {}))
            if target is not scorer:
                b = dataclasses.replace(b, energies=scorer.energies(b.states))
            batches[name, c] = [b]
    return batches


def _prepare(instance, metrics, solvers, sweeps, reads, options, copies=1):
    if not isinstance(instance, Instance):
        raise InputError(f"expected an Instance, got {type(instance).__name__}")
    if isinstance(reads, bool) or not isinstance(reads, (int, np.integer)) or reads < 1:
        raise InputError(f"reads must be a positive whole number, got {reads!r}")
    metrics = [metrics] if isinstance(metrics, str) else list(metrics)
    solvers = [solvers] if isinstance(solvers, str) else list(solvers)
    if not metrics or not solvers:
        raise InputError("give at least one metric and one solver")
    specs = [METRICS.get(m) for m in metrics]
    options = dict(options or {})
    for name in solvers:
        cls = SAMPLERS.get(name)
        if getattr(cls, "enumerates", False):
            bad = [s.name for s in specs if s.needs_samples]
            if bad:
                raise InputError(f"the {name} sampler lists the lowest states instead of sampling, so "
                                 f"{', '.join(bad)} would mean nothing under it; use ground-states or deception")
    for name, opts in options.items():
        fixed = getattr(SAMPLERS.get(name), "effort_option", None)
        if fixed and fixed in (opts or {}):
            raise InputError(f"when scoring, {name}'s effort comes from the sweep counts; give sweeps instead "
                             f"of the option {fixed}")
    unknown = set(options) - set(solvers)
    if unknown:
        raise InputError(f"options given for solver(s) not being run: {', '.join(sorted(unknown))}")
    per_spec = {s.name: _counts(s, sweeps) for s in specs}
    needed = sorted({c for cs in per_spec.values() for c in cs})
    check_effort(instance.n, int(reads), needed, len(solvers), copies)
    return specs, solvers, per_spec, {name: needed for name in solvers}, options


def check_effort(n: int, reads: int, counts, solvers: int = 1, copies: int = 1) -> None:
    """Refuse up front a measurement whose time or memory would be absurd (ResourceError).

    The time is estimated at an optimistic :data:`UPDATES_PER_SECOND` spin
    updates per second plus :data:`RUN_SECONDS` per sampler run; the memory
    as the states kept for every run plus one batch being drawn and its
    schedule.

    >>> check_effort(128, 10**9, [10**6])  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    instgen.errors.ResourceError: the sampler runs would make 1.28e+17 spin updates (1,000,000,000 reads x 128 spins ...
    """
    updates = float(reads) * n * float(sum(counts)) * solvers * copies
    seconds = updates / UPDATES_PER_SECOND + RUN_SECONDS * len(counts) * solvers * copies
    need = float(reads) * n * (8 + len(counts) * solvers * copies) + 8.0 * max(counts)
    if seconds > MAX_SECONDS or need > MAX_BYTES:
        raise ResourceError(
            f"the sampler runs would make {updates:.3g} spin updates ({reads:,} reads x {n:,} spins x "
            f"{sum(counts):,} sweeps x {solvers} solver(s) x {copies} cop{'y' if copies == 1 else 'ies'}), about "
            f"{duration(seconds)} even at {UPDATES_PER_SECOND:.0e} updates per second, and about "
            f"{need / 1e9:.3g} GB; instgen refuses above {duration(MAX_SECONDS)} or {MAX_BYTES / 1e9:g} GB: "
            "use fewer reads or sweeps")


def energy_tolerance(instance: Instance) -> float:
    """Energies within this of the reference count as reaching it (relative to the instance's total coupling)."""
    return 1e-9 * max(1.0, float(np.abs(instance.J).sum() + np.abs(instance.h).sum()))



def _unit(solver: str) -> str:
    return getattr(SAMPLERS.get(solver), "effort_unit", "sweeps")


def _pooled(batches: list[SampleBatch]) -> np.ndarray:
    return batches[0].energies if len(batches) == 1 else np.concatenate([b.energies for b in batches])


def _scores(instance, specs, solvers, per_spec, batches, ref, scale, tol, confidence, seed, keys=(), reads=None,
            floor=None):
    out = []
    for name in solvers:
        unit = _unit(name)
        for spec in specs:
            counts = per_spec[name, spec.name] if (name, spec.name) in per_spec else per_spec[spec.name]
            mine = {c: batches[name, c] for c in counts}
            run = _Run(instance, instance.n, instance.has_fields, name, unit, counts,
                       {c: _pooled(bs) for c, bs in mine.items()}, ref, scale, tol, confidence,
                       derive_seed(seed, "bootstrap", name, spec.name, *keys), list(ref.notes), mine,
                       bound_reads=reads, floor=floor)
            score = spec.compute(run)
            first = mine[counts[0]][0]
            score.solver, score.reads = name, first.reads
            score.schedule = _recipe(first.schedule, counts)
            score.seeds = [b.seed for c in counts for b in mine[c]]
            score.reference, score.reference_status = ref.energy, ref.status
            score.notes = run.notes + score.notes
            score.extra = {"seed": seed, "confidence": confidence, "reference_source": ref.source, **score.extra}
            out.append(score)
    return out


def evaluate(metric: str, energies: dict, *, reference: float, n: int, scale: float | None = None,
             tol: float = 1e-9, has_fields: bool = False, unit: str = "sweeps", bound_reads: int | None = None,
             confidence: float = 0.95, seed=0, intervals: bool = True) -> Score:
    """A named metric from raw final energies: the one implementation every figure comes from.

    ``energies`` maps sweep counts to the final energies of the reads made
    there.  :func:`measure_many` (``instgen score``, the run summary, the
    library and the report) and the breeding fitness both compute their
    figures here, so the same energies give the same number everywhere.
    ``bound_reads`` is the reads of one measurement (a never-solved
    figure rests on that many, however many were pooled); ``intervals=False``
    skips the bootstrap (the interval is then the value itself).

    >>> evaluate("success", {100: np.array([-4.0, -4.0, -2.0, 0.0])}, reference=-4.0, n=4).value
    0.5
    """
    spec = METRICS.get(metric)
    if not spec.needs_samples:
        raise InputError(f"the {metric} metric needs the states as well as the energies; use measure_many")
    counts = spec.counts_for(sorted(int(c) for c in energies))
    ref = Reference(float(reference), "given", "energy given by the caller")
    run = _Run(None, int(n), bool(has_fields), "", unit, counts,
               {c: np.asarray(energies[c], dtype=np.float64) for c in counts}, ref, scale, float(tol),
               confidence, int(seed) if not isinstance(seed, np.random.SeedSequence) else seed, [],
               bound_reads=bound_reads, draws=2000 if intervals else 0)
    score = spec.compute(run)
    score.reference = float(reference)
    return score


def rank_key(score: Score, energies: dict | None = None, *, reference: float | None = None, n: int = 1,
             scale: float | None = None) -> float:
    """The breeding fitness of a computed figure: higher = harder.

    * ``tts``: log10 of TTS99.  A never-solved candidate (a lower bound) ranks
      as if one read in ``bound_reads + 1`` had succeeded at the longest
      anneal, which is above every candidate solved at that resolution and
      does not grow with pooled reads; among never-solved candidates a
      larger residual energy after the longest anneal ranks higher (a term
      below 0.01, so it only breaks ties).
    * ``success``: 1 - p (a lower success probability is harder).
    * ``anneal-gain``, ``residual``: the figure itself.

    >>> rank_key(Score("success", 0.25))
    0.75
    """
    spec = METRICS.get(score.metric)
    return float(spec.rank(score, energies, reference, n, scale)) if spec.rank else float(score.value)


def _rank_tts(score: Score, energies, reference, n, scale) -> float:
    if score.kind != "lower bound":
        return math.log10(score.value)
    rows = score.extra["per_sweeps"]
    top = rows[-1]
    reads = score.extra.get("bound_reads") or top["reads"]
    key = math.log10(M.tts(1.0 / (min(reads, top["reads"]) + 1), top["sweeps"]))
    if energies is not None and reference is not None:
        r = max(0.0, (float(np.mean(energies[top["sweeps"]])) - reference) / (max(n, 1) * (scale or 1.0)))
        key += 0.01 * r / (1.0 + r)
    return key


# ------------------------------------------------------------------- public API
def measure_many(instance: Instance, metrics=("tts",), solvers=("sa",), *, sweeps=None, reads: int = 100,
                 seed=0, reference=None, beta_range=None, scale=None, schedule: dict | None = None,
                 options: dict | None = None, confidence: float = 0.95, pin: Pinning | None = None) -> list[Score]:
    """Several metrics under several solvers, from one set of runs.

    Parameters
    ----------
    instance : Instance
    metrics, solvers : sequence of str
        Names from :data:`METRICS` and the sampler registry.
    sweeps : int or sequence of int, optional
        Sweep counts: a grid metric uses all, a one-count metric the largest,
        the anneal gain the smallest and largest.  Default: each metric's own.
    reads : int
        Reads per (solver, sweep count).
    seed : int
    reference : float, optional
        Energy to measure against (see the module docstring).
    beta_range : (float, float), optional
    scale : float, optional
        Coupling scale, when the instance carries no alphabet.
    schedule : dict, optional
        Further :class:`Schedule` fields (``interpolation``, ``shape``, ...).
    options : dict, optional
        ``{solver: {option: value}}``.
    confidence : float
    pin : Pinning, optional
        Pin time-to-solution at its optimal number of sweeps (see
        :class:`Pinning`): the grid given is only the start.  Without it, TTS99
        is the best of the fixed grid, and a bound when that best sits at an
        edge.

    Returns
    -------
    list of Score, solver by solver, metrics in the order given.

    Examples
    --------
    >>> from instgen.make import make_instance
    >>> inst = make_instance("chimera:1", "pm1", seed=2)
    >>> [s.metric for s in measure_many(inst, ["success", "residual"], ["sa", "tabu"], sweeps=50, reads=10)]
    ['success', 'residual', 'success', 'residual']
    """
    specs, solvers, per_spec, needed, options = _prepare(instance, metrics, solvers, sweeps, reads, options)
    br, scale, source = schedule_range(instance, beta_range, scale)
    tol = energy_tolerance(instance)
    batches = _run_all(instance, instance, solvers, needed, int(reads), seed, br, schedule, options)
    lowest = [min(b.min_energy for bs in batches.values() for b in bs)]
    pinned = {}
    if pin is not None and any(s.name == "tts" for s in specs):
        pinned = _pin_runs(instance, solvers, per_spec["tts"], batches, int(reads), seed, br, scale, schedule,
                           options, confidence, pin, _claimed_reference(instance, reference, tol), tol, lowest)
    ref = resolve_reference(instance, lowest[0], reference, tol)
    out = _scores(instance, specs, solvers, per_spec, batches, ref, scale, tol, confidence, seed, reads=int(reads),
                  floor=1)
    for i, s in enumerate(out):
        if s.metric == "tts" and s.solver in pinned:
            out[i] = _pinned_score(instance, s.solver, pinned[s.solver], ref, scale, tol, confidence, seed,
                                   int(reads), pin)
    for s in out:
        s.extra["beta_range_source"] = source
        s.extra.update(_scaled_range((s.schedule or {}).get("beta_range", br), scale))
    return out


def _scaled_range(br, scale) -> dict:
    """The beta range in the instance's own units (beta x coupling scale)."""
    return {"beta_range_scaled": [br[0] * scale, br[1] * scale]} if scale else {}


def measure(instance: Instance, metric: str, *, sampler: str = "sa", sweeps=None, reads: int = 100, seed=0,
            reference=None, beta_range=None, scale=None, schedule: dict | None = None,
            confidence: float = 0.95, **sampler_options) -> Score:
    """One metric of one instance under one sampler (see :func:`measure_many`).

    Cheap enough to call from a breeding loop: no files, no re-validation of
    the instance, one sampler call per sweep count.

    Examples
    --------
    >>> from instgen.make import make_instance
    >>> inst = make_instance("chimera:2", "pm1", seed=1)
    >>> s = measure(inst, "tts", sweeps=[10, 100], reads=50, seed=3)
    >>> s.metric, s.units, s.reference_status
    ('tts', 'sweeps', 'not proven')
    """
    return measure_many(instance, [metric], [sampler], sweeps=sweeps, reads=reads, seed=seed, reference=reference,
                        beta_range=beta_range, scale=scale, schedule=schedule,
                        options={sampler: sampler_options} if sampler_options else None, confidence=confidence)[0]


COMBINE = {"median": np.median, "mean": np.mean, "min": np.min, "max": np.max}


def measure_perturbed(instance: Instance, metric: str, sigma: float, copies: int = 8, seed=0, *,
                      sampler: str = "sa", sweeps=None, reads: int = 100, combine: str = "median",
                      reference=None, beta_range=None, scale=None, schedule: dict | None = None,
                      confidence: float = 0.95, **sampler_options) -> Score:
    """A metric over ``copies`` copies with Gaussian control errors on J and h.

    Each copy adds independent N(0, (sigma * scale)^2) noise to every coupling
    and field (``scale`` is the coupling alphabet's), the sampler runs on the
    copy, and the states it returns are scored on the *original* instance:
    does the noisy machine still find the intended ground state?  The value
    is ``combine`` (median, mean, min or max) of the copies' values; ``ci`` is
    their range (not a confidence interval); ``extra["values"]`` lists them.

    Examples
    --------
    >>> from instgen.make import make_instance
    >>> inst = make_instance("chimera:1", "pm1", seed=2)
    >>> s = measure_perturbed(inst, "residual", 0.05, copies=3, sweeps=50, reads=10, seed=1)
    >>> len(s.extra["values"]), s.extra["sigma"]
    (3, 0.05)
    """
    if isinstance(sigma, bool) or not isinstance(sigma, (int, float)) or not math.isfinite(sigma) or sigma < 0:
        raise InputError(f"sigma must be a non-negative number, got {sigma!r}")
    if isinstance(copies, bool) or not isinstance(copies, (int, np.integer)) or copies < 1:
        raise InputError(f"copies must be a positive whole number, got {copies!r}")
    if combine not in COMBINE:
        raise InputError(f"unknown combine {combine!r}; choose one of: {', '.join(COMBINE)}")
    opts = {sampler: sampler_options} if sampler_options else None
    specs, solvers, per_spec, needed, options = _prepare(instance, [metric], [sampler], sweeps, reads, opts,
                                                         int(copies))
    br, scale, source = schedule_range(instance, beta_range, scale)
    if scale is None:
        raise InputError("control errors are sized by the coupling scale; give scale= for an instance "
                         "without a coupling alphabet")
    runs = []
    for k in range(int(copies)):
        rng = as_generator(derive_seed(seed, "noise", k))
        sd = sigma * scale
        noisy = instance.with_couplings(instance.J + rng.normal(0.0, sd, instance.m),
                                        instance.h + rng.normal(0.0, sd, instance.n))
        runs.append(_run_all(noisy, instance, solvers, needed, int(reads), seed, br, schedule, options, (k,)))
    tol = energy_tolerance(instance)
    lowest = min(b.min_energy for batches in runs for bs in batches.values() for b in bs)
    ref = resolve_reference(instance, lowest, reference, tol)
    per_copy = [_scores(instance, specs, solvers, per_spec, batches, ref, scale, tol, confidence, seed, (k,))[0]
                for k, batches in enumerate(runs)]
    values = np.array([s.value for s in per_copy], dtype=np.float64)
    finite = values[np.isfinite(values)] if np.any(np.isfinite(values)) else values
    value = float(COMBINE[combine](finite))
    pick = per_copy[int(np.argmin(np.abs(values - value)))] if np.any(np.isfinite(values)) else per_copy[0]
    kinds = sorted({s.kind for s in per_copy})
    notes = list(ref.notes) + [
        f"{combine} over {copies} copies with Gaussian control errors of sigma {sigma:g} x scale {scale:g} on "
        "every coupling and field; states scored on the original instance; the interval is the range over "
        "copies, not a confidence interval"]
    if len(kinds) > 1:
        notes.append("copies differ in kind (" + ", ".join(
            f"{sum(s.kind == k for s in per_copy)} {k}" for k in kinds)
            + "); the figure is only as firm as the weakest")
    notes += [n for n in pick.notes if n not in notes and n not in ref.notes]
    return Score(
        metric=metric, value=value, ci=(float(finite.min()), float(finite.max())), kind=pick.kind,
        solver=sampler, schedule=pick.schedule, reads=pick.reads, seeds=[x for s in per_copy for x in s.seeds],
        reference=ref.energy, reference_status=ref.status, units=pick.units, notes=notes,
        extra={"seed": seed, "confidence": confidence, "ci_is_range": True, "sigma": float(sigma),
               "copies": int(copies), "combine": combine,
               "values": values.tolist(), "spread": float(values.std()) if values.size > 1 else 0.0,
               "reference_source": ref.source, "beta_range_source": source})


# ------------------------------------------------------- TTS at its optimum
@dataclasses.dataclass(frozen=True)
class Pinning:
    """How :func:`measure_many` pins time-to-solution at its optimal number of sweeps.

    TTS99 is meaningful at the optimal anneal length (Ronnow et al., Science
    345, 420 (2014); Albash & Lidar, PRX 8, 031016 (2018)), which no fixed
    grid can promise to contain.  Starting from the grid given, the sweep
    counts are extended geometrically (by ``factor``, down to one sweep and up
    to ``max_sweeps``) until the minimum of TTS99 over sweep counts is
    *interior*: both neighbours of the best count have a higher estimate.  Reads
    are then doubled where needed until the best count rests on at least
    ``successes`` successes and each neighbour either does too or is clearly
    worse (its TTS99 lower confidence limit lies above the best estimate).
    Everything costs spin updates, counted against ``budget`` for each solver
    (and cold end); when the budget or ``max_sweeps`` stops the search, the
    figure says so and names what the next step would have cost.

    ``cold_ends`` optionally lists values of beta_cold x coupling scale to try
    (the hot end stays); the figure is TTS99 at the best (sweeps, beta_cold)
    pair, with every pair's result recorded.
    """

    budget: float = 2e9
    max_sweeps: int = 1_000_000
    successes: int = 10
    factor: float = math.sqrt(10.0)
    cold_ends: tuple = ()
    max_steps: int = 40

    def __post_init__(self):
        for name, lo in (("budget", 1.0), ("max_sweeps", 1), ("successes", 1), ("max_steps", 1)):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or v < lo:
                raise InputError(f"pinning {name} must be a number of at least {lo:g}, got {v!r}")
        if isinstance(self.factor, bool) or not isinstance(self.factor, (int, float)) or not 1.2 <= self.factor <= 10:
            raise InputError(f"pinning factor must lie between 1.2 and 10, got {self.factor!r}")
        for c in self.cold_ends:
            if isinstance(c, bool) or not isinstance(c, (int, float)) or not math.isfinite(c) or c <= 0:
                raise InputError(f"cold ends are positive numbers (beta_cold x coupling scale), got {c!r}")

    def to_dict(self) -> dict:
        return {"budget": float(self.budget), "max_sweeps": int(self.max_sweeps), "successes": int(self.successes),
                "factor": float(self.factor), "cold_ends": [float(c) for c in self.cold_ends]}


def next_step(counts, hits, reads, pin: Pinning, base_reads: int, confidence: float = 0.95):
    """What the bracket does next: ("extend" | "more", sweep count, reads) or (None, reason, 0) when pinned.

    ``counts``, ``hits`` and ``reads`` describe the points measured so far
    (sorted by count).  Pure, so the rule can be read and tested on its own.

    >>> next_step([10, 100, 1000], [0, 0, 0], [64, 64, 64], Pinning(), 64)
    ('extend', 3162, 64)
    >>> next_step([10, 100, 1000], [5, 40, 30], [64, 64, 64], Pinning(successes=5), 64)
    (None, 'pinned', 0)
    """
    t = np.asarray(counts, dtype=np.float64)
    k = np.asarray(hits, dtype=np.int64)
    n = np.asarray(reads, dtype=np.int64)
    top = int(t[-1])
    up = min(int(pin.max_sweeps), max(top + 1, int(round(top * pin.factor))))
    if not k.any():
        if top >= pin.max_sweeps:
            return None, f"no read reached the reference energy at up to {top:,} sweeps (the most allowed)", 0
        return "extend", up, base_reads
    point = t * M.repetitions(k / n)
    b = int(np.argmin(point))
    if b == t.size - 1:
        if top >= pin.max_sweeps:
            return None, f"the optimum lies at or beyond {top:,} sweeps, the most allowed", 0
        return "extend", up, base_reads
    if b == 0 and t[0] > 1:
        return "extend", max(1, min(int(t[0]) - 1, int(round(t[0] / pin.factor)))), base_reads
    if k[b] < pin.successes:
        return "more", int(t[b]), int(n[b])
    for j in (b - 1, b + 1):
        if 0 <= j < t.size and k[j] < pin.successes:
            p_hi = M.binomial_interval(int(k[j]), int(n[j]), confidence)[1]
            if t[j] * M.repetitions(p_hi) < point[b]:
                return "more", int(t[j]), int(n[j])
    return None, "pinned", 0


def _pin_runs(instance, solvers, counts, batches, reads, seed, br, scale, schedule, options, confidence, pin,
              claimed, tol, lowest) -> dict:
    """For each solver, the pinning runs of every cold end: {solver: [(points, info), ...]}.

    ``lowest`` (a one-element list) follows the lowest energy any run finds, so
    that successes are counted against a claimed reference only while nothing
    beats it.
    """
    def target() -> float:
        if claimed is not None and not lowest[0] < claimed.energy - tol:
            return claimed.energy
        return lowest[0]

    out = {}
    for name in solvers:
        variants = []
        for cold in list(pin.cold_ends) or [None]:
            brc = br if cold is None else (br[0], float(cold) / scale if scale else float(cold))
            if cold is None:
                pts = {c: list(batches[name, c]) for c in counts}
            else:
                pts = {c: list(bs) for (_, c), bs in _run_all(instance, instance, [name], {name: counts}, reads,
                                                              derive_seed(seed, "cold", float(cold)), brc,
                                                              schedule, options).items()}
                lowest[0] = min(lowest[0], min(b.min_energy for bs in pts.values() for b in bs))
            info = _bracket(instance, name, pts, reads, derive_seed(seed, "pin", float(cold or 0)), brc, schedule,
                            options, pin, target, tol, confidence, lowest)
            info["beta_range"] = list(brc)
            if cold is not None:
                info["cold_end"] = float(cold)
            variants.append((pts, info))
        out[name] = variants
    return out


def _pinned_score(instance, name, variants, ref, scale, tol, confidence, seed, reads, pin) -> Score:
    """TTS99 at the best (sweeps, beta_cold) pair of a solver's pinning runs, with how it was pinned."""
    tried = []
    for pts, info in variants:
        sc = _scores(instance, [METRICS.get("tts")], [name], {(name, "tts"): tuple(sorted(pts))},
                     {(name, c): bs for c, bs in pts.items()}, ref, scale, tol, confidence, seed, reads=reads,
                     floor=1)[0]
        tried.append((sc, info))
    order = sorted(range(len(tried)), key=lambda i: (tried[i][0].kind != "value", tried[i][0].value, i))
    score, info = tried[order[0]]
    _pin_notes(score, info, pin)
    if len(tried) > 1:
        score.extra["cold_ends"] = [{"cold_end": i.get("cold_end"), "beta_range": i["beta_range"],
                                     "tts": sc.value, "kind": sc.kind, "best_sweeps": sc.extra["best_sweeps"]}
                                    for sc, i in tried]
        score.extra["best_cold_end"] = info.get("cold_end")
        score.notes.append("TTS99 at the best (sweeps, beta_cold) pair of " + ", ".join(
            f"beta_cold x scale {i.get('cold_end'):g}" for _, i in tried) + "; every pair is recorded")
    score.schedule = {**(score.schedule or {}), "beta_range": info["beta_range"]}
    return score


def _bracket(instance, name, pts, reads, seed, br, schedule, options, pin, target, tol, confidence, lowest) -> dict:
    """Extend and deepen ``pts`` (sweep count -> batches) until TTS99's optimum is pinned or the budget is spent."""
    sampler = SAMPLERS.get(name)()
    spent = float(sum(b.spin_updates for bs in pts.values() for b in bs))
    some = next(b for bs in pts.values() for b in bs)
    c0 = next(c for c, bs in pts.items() if some in bs)
    per = (some.spin_updates / (some.reads * c0)) if some.spin_updates else float(instance.n)
    info = {"budget": float(pin.budget), "steps": 0}
    for step in range(int(pin.max_steps)):
        counts = sorted(pts)
        e0 = target()
        hits = [sum(int(np.sum(M.successes(b.energies, e0, tol))) for b in pts[c]) for c in counts]
        n = [sum(b.reads for b in pts[c]) for c in counts]
        action, where, more = next_step(counts, hits, n, pin, reads, confidence)
        if action is None:
            info.update(pinned=where == "pinned", reason=where)
            break
        cost = float(more) * where * per
        if spent + cost > pin.budget:
            info.update(pinned=False, needed=cost, reason=(
                f"the next step ({more:,} reads at {where:,} sweeps, {cost:.3g} spin updates) would pass the "
                f"budget of {pin.budget:.3g} spin updates ({spent:.3g} spent); a budget of at least "
                f"{spent + cost:.3g} allows it"))
            break
        sched = Schedule.from_dict({**(schedule or {}), "sweeps": int(where), "beta_range": tuple(br)})
        b = sampler.run(instance, sched, reads=int(more), seed=derive_seed(seed, name, where, len(pts.get(where, []))),
                        **options.get(name, {}))
        pts.setdefault(where, []).append(b)
        lowest[0] = min(lowest[0], b.min_energy)
        spent += b.spin_updates or more * where * per
        info["steps"] = step + 1
    else:
        info.update(pinned=False, reason=f"stopped after {pin.max_steps} steps without settling the optimum")
    info["spent"] = spent
    info["seconds"] = float(sum(b.seconds for bs in pts.values() for b in bs))
    info.update(pin.to_dict())
    return info


def _pin_notes(score: Score, info: dict, pin: Pinning) -> None:
    """Record how the optimum was pinned, and say plainly when it was not."""
    score.extra["pin"] = {k: v for k, v in info.items()}
    if info.get("pinned"):
        lo, hi = score.extra.get("best_sweeps_ci", [score.extra["best_sweeps"]] * 2)
        score.notes.append(f"pinned at its optimum: {score.extra['best_sweeps']} sweeps (95% interval {lo} to {hi}), "
                           f"resting on at least {pin.successes} successes, for {info['spent']:.3g} spin updates")
    elif score.kind == "value":
        score.notes.append(f"the optimum is interior but not settled ({info['reason']}): the figure is a value with "
                           "a wide interval")
    else:
        score.notes.append(f"not pinned: {info['reason']}")


# ---------------------------------------------------------------- the metrics
def _energies(run: _Run, c: int) -> np.ndarray:
    return run.energies[c]


def _hits(run: _Run, c: int) -> int:
    return int(np.sum(M.successes(_energies(run, c), run.reference.energy, run.tol)))


def _states(run: _Run, c: int) -> np.ndarray:
    bs = run.batches[c]
    return bs[0].states if len(bs) == 1 else np.concatenate([b.states for b in bs])


def _tts(run: _Run) -> Score:
    counts = run.counts
    reads = [int(_energies(run, c).size) for c in counts]
    hits = [_hits(run, c) for c in counts]
    est = M.optimal_tts(counts, hits, reads, confidence=run.confidence, seed=run.seed, draws=run.draws,
                        bound_trials=run.bound_reads, floor=run.floor)
    rows, notes = [], []
    for c, e, r, k in zip(counts, est.per_effort, reads, hits):
        row = {"sweeps": c, "successes": k, "reads": r, "p": k / r,
               "p_ci": list(M.binomial_interval(k, r, run.confidence)), "tts": e.value, "tts_ci": list(e.ci),
               "kind": e.kind}
        if run.batches.get(c):
            bs = run.batches[c]
            row["seed"] = bs[0].seed if len(bs) == 1 else [b.seed for b in bs]
            row["seconds"] = float(sum(b.seconds for b in bs))
        rows.append(row)
    best = counts[est.best]
    u = run.unit
    if est.kind == "lower bound":
        notes.append(f"no read reached the reference energy at any number of {u} tried, so TTS99 is only a lower "
                     f"bound (from {run.bound_reads or min(reads)} reads per count); more {u} are needed to "
                     "measure it")
    elif len(counts) == 1:
        notes.append(f"only one number of {u} was tried, so TTS99 is not optimised over anneal length: it is an "
                     "upper bound on the optimal TTS99")
    elif est.edge:
        side, where = ("shortest", "fewer") if est.best == 0 else ("longest", "more")
        notes.append(f"the best number of {u} is the {side} tried ({best}); the optimal TTS99 may be lower with "
                     f"{where} {u}, so this figure is an upper bound")
    extra = {"q": M.Q99, "best_sweeps": best, "per_sweeps": rows}
    if est.best_ci:
        extra["best_sweeps_ci"] = [int(est.best_ci[0]), int(est.best_ci[1])]
    if run.bound_reads:
        extra["bound_reads"] = int(run.bound_reads)
    bs = run.batches.get(best)
    if bs and rows[est.best]["successes"]:
        per_read = sum(b.seconds for b in bs) / sum(b.reads for b in bs)
        extra["tts_seconds"] = per_read * M.repetitions(rows[est.best]["p"])
        extra["tts_seconds_note"] = "wall-clock time of this machine's surrogate, call overhead included"
    return Score("tts", est.value, est.ci, est.kind, units=u, notes=notes, extra=extra)


def _success(run: _Run) -> Score:
    c = run.counts[0]
    est = M.success_probability(_energies(run, c), run.reference.energy, tol=run.tol, confidence=run.confidence)
    return Score("success", est.value, est.ci, units="probability",
                 extra={"sweeps": c, "successes": _hits(run, c), "method": "wilson"})


def _need_scale(run: _Run, what: str) -> float:
    if not run.scale:
        raise InputError(f"the {what} is normalised by the coupling scale; give scale= (--scale) for an instance "
                         "without a coupling alphabet")
    return run.scale


def _residual(run: _Run) -> Score:
    c = run.counts[0]
    scale = _need_scale(run, "residual energy")
    est = M.residual_energy(_energies(run, c), run.reference.energy, run.n, confidence=run.confidence)
    return Score("residual", est.value / scale, (est.low / scale, est.high / scale),
                 units="energy per spin / coupling scale",
                 extra={"sweeps": c, "per_spin": est.value, "scale": scale})


def _gain(run: _Run) -> Score:
    short, long = run.counts
    scale = _need_scale(run, "anneal gain")
    a, b = _energies(run, short), _energies(run, long)
    est = M.anneal_gain(a, b, run.n, scale, confidence=run.confidence)
    return Score("anneal-gain", est.value, est.ci, units="energy per spin / coupling scale",
                 extra={"short_sweeps": short, "long_sweeps": long, "short_mean": float(a.mean()),
                        "long_mean": float(b.mean()), "scale": scale})


def _ground_set(run: _Run, c: int) -> np.ndarray:
    found, _ = M.distinct_states(_states(run, c), _energies(run, c), -math.inf, run.reference.energy + run.tol)
    known = run.reference.states
    return found if known is None else np.unique(np.concatenate([found, known]), axis=0)


def _ground_states(run: _Run) -> Score:
    c = run.counts[0]
    symmetric = not run.has_fields
    e = _energies(run, c)
    count = M.ground_state_count(_states(run, c), e, run.reference.energy, tol=run.tol, symmetric=symmetric,
                                 known=run.reference.states)
    notes = ["a count of distinct ground states seen, so a lower bound on the degeneracy"]
    if symmetric:
        notes.append("no fields: each ground state's global flip is counted too")
    return Score("ground-states", float(count), None, "lower bound", units="states", notes=notes,
                 extra={"sweeps": c, "found_in_reads": int(np.sum(M.successes(e, run.reference.energy, run.tol)))})


def _deception(run: _Run) -> Score:
    c = run.counts[0]
    ground = _ground_set(run, c)
    n = run.n
    if ground.shape[0] == 0:
        return Score("deception", math.nan, None, units="spins", notes=[
            "no ground state is known (none found, none planted or certified), so no distance can be measured"],
            extra={"sweeps": c})
    d, e1 = M.excited_distances(_states(run, c), _energies(run, c), run.reference.energy, ground, tol=run.tol,
                                symmetric=not run.has_fields)
    if d.size == 0:
        return Score("deception", math.nan, None, units="spins", notes=[
            "every read reached the reference energy, so no excited state was seen to measure from"],
            extra={"sweeps": c})
    return Score("deception", float(d.mean()), (float(d.min()), float(d.max())), units="spins", notes=[
        "mean Hamming distance from the lowest excited states found to the nearest known ground state; the "
        "interval is their range"],
        extra={"sweeps": c, "ci_is_range": True, "excited_energy": e1, "excited_states": int(d.size),
               "fraction": float(d.mean()) / n,
               "ground_states_known": int(ground.shape[0]), "distances": d[:100].tolist()})


for _spec in (
    MetricSpec("tts", "time-to-solution TTS99 at the optimal sweep count (pinned by instgen score; the best of "
               "a fixed grid with --fixed-grid)", "grid", (10, 100, 1000), "higher", _tts, rank=_rank_tts),
    MetricSpec("success", "probability that a read reaches the reference energy", "one", (1000,), "lower",
               _success, rank=lambda score, *_: 1.0 - score.value),
    MetricSpec("residual", "mean energy above the reference, per spin and coupling scale", "one", (1000,),
               "higher", _residual),
    MetricSpec("anneal-gain", "mean energy after a short anneal minus after a long one, per spin and coupling scale",
               "pair", (10, 1000), "higher", _gain),
    MetricSpec("ground-states", "distinct ground states seen (a lower bound on degeneracy)", "one", (1000,),
               "lower", _ground_states, needs_samples=False),
    MetricSpec("deception", "Hamming distance from the lowest excited states to the nearest ground state",
               "one", (1000,), "higher", _deception, needs_samples=False),
):
    METRICS.register(_spec.name, _spec)
METRICS.rename("gap", "anneal-gain")  # "gap" reads as the spectral gap to a physicist

#: The metrics a breeding fitness can name (those computed from final energies alone).
FITNESS_METRICS = tuple(n for n in METRICS.names() if METRICS.get(n).needs_samples)
