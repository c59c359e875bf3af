"""Ground-state certification: how the lowest energy of an instance is known.

``certify(instance, method)`` returns a :class:`~instgen.records.Certificate`
whose ``status`` says plainly how far to trust it:

* ``planted``: the instance's construction proves its planted state is a
  ground state, and the proof was re-checked (method ``planted``);
* ``proven``: an exact method closed the problem (``exact`` enumeration,
  ``tree`` decomposition, or ``mip`` when HiGHS's bound meets the best state);
* ``not proven``: the best energy many long anneals found (``anneal``, or a
  ``mip`` run that ran out of time).  It is not proven to be the ground state.

``method="auto"`` tries, in order of cost, the first that can prove the answer
within ``time_limit``: planted, exact (small parts), tree, exact (up to 30
spins), mip, and reports in ``details["chosen_by"]`` which one it used and why
the others were passed over.  Exact methods work on each connected part of the
graph of non-zero couplings separately and add up.

>>> from instgen.make import make_instance
>>> cert = certify(make_instance("chimera:1", "pm1", seed=1))
>>> cert.status, cert.method
('proven', 'exact')
"""

from __future__ import annotations

import time

import numpy as np

from . import exact
from .errors import CertificationError, InputError, ResourceError
from .instance import Instance
from .records import Certificate
from .registry import Registry
from .seeds import derive_seed

#: name -> function(instance, context) -> Certificate (filled in at the end of this module)
METHODS = Registry("certification method")
CHOICES = ("auto", "planted", "exact", "tree", "mip", "anneal")

NOT_PROVEN = ("not proven: this is the lowest energy found, not a proof that no state is lower; "
              "success probabilities measured against it may be overstated")

#: Parts up to this many spins are always enumerated (milliseconds).
SMALL = 20
#: ``auto`` tries mixed-integer programming only when the largest part is at most this big;
#: beyond it HiGHS rarely closes the gap in minutes, and the time is better spent annealing.
MIP_MAX = 200


def certify(instance: Instance, method: str = "auto", time_limit: float = 60.0, seed=None,
            memory_limit: float = 4e9, count_limit: int = 64) -> Certificate:
    """How the ground-state energy of ``instance`` is known (see the module docstring).

    Parameters
    ----------
    instance : Instance
    method : str
        ``auto``, ``planted``, ``exact``, ``tree``, ``mip`` or ``anneal``.
    time_limit : float
        Seconds for the whole call.  ``mip`` and ``anneal`` stop at it;
        ``exact`` and ``tree`` are refused up front (ResourceError) when their
        estimate is above it, since they cannot be interrupted.
    seed : int, optional
        Seeds the anneals.  The same seed gives the same result whenever the
        anneals settle (most reads agree on the best energy for three rounds)
        before the time runs out; a run cut short by ``time_limit`` depends on
        the machine's speed, and ``details["sweeps"]`` records what was done.
    memory_limit : float
        Bytes the tree decomposition may use.
    count_limit : int
        The tree method counts ground states up to this many.

    Examples
    --------
    >>> from instgen.planted import plant
    >>> certify(plant("chimera:2", "loops", seed=1, density=0.4, certify=False)).status
    'planted'
    """
    if method not in CHOICES:
        raise InputError(f"unknown certification method {method!r}; choose one of: {', '.join(CHOICES)}")
    if not (isinstance(time_limit, (int, float)) and np.isfinite(time_limit) and time_limit > 0):
        raise InputError(f"time_limit must be a positive number of seconds, got {time_limit!r}")
    if not (isinstance(memory_limit, (int, float)) and np.isfinite(memory_limit) and memory_limit > 0):
        raise InputError(f"memory_limit must be a positive number of bytes, got {memory_limit!r}")
    t0 = time.perf_counter()
    ctx = {"t0": t0, "limit": float(time_limit), "seed": seed, "memory": memory_limit, "count": count_limit}
    cert = _auto(instance, ctx) if method == "auto" else METHODS.get(method)(instance, ctx)
    cert.seconds = time.perf_counter() - t0
    _check(instance, cert)
    return cert


def _left(ctx) -> float:
    return ctx["limit"] - (time.perf_counter() - ctx["t0"])


def _check(instance, cert):
    """The certificate's state must have the certificate's energy."""
    e = instance.energy(cert.state)
    if abs(e - cert.energy) > exact.tolerance(instance):
        raise RuntimeError(f"certificate energy {cert.energy} does not match its state ({e})")
    cert.energy = float(e)
    if cert.status == "not proven":
        cert.details.setdefault("warning", NOT_PROVEN)


# --------------------------------------------------------------------- planted
def _planted(instance, ctx) -> Certificate:
    from .planted import PLANTED

    if instance.planted is None:
        raise CertificationError("the instance has no planted state")
    con = instance.metadata.get("construction")
    family = con.get("family") if isinstance(con, dict) else None
    if family is None or family not in PLANTED:
        raise CertificationError("the instance has a planted state but no known construction in its metadata, "
                                 "so nothing proves it is a ground state")
    details = PLANTED.get(family).verify(instance)
    return Certificate(energy=instance.energy(instance.planted), state=np.asarray(instance.planted), method="planted",
                       status="planted", details=details)


# ------------------------------------------------------------- exact, by parts
def _by_parts(instance, name, jobs) -> Certificate:
    """Combine per-part results: ``jobs`` is a list of (spin indices, callable -> result dict)."""
    state = np.ones(instance.n, dtype=np.int8)
    energy, count, details = 0.0, 1, {"parts": len(jobs), "largest_part": max((len(i) for i, _ in jobs), default=0)}
    for idx, solve in jobs:
        r = solve()
        state[idx] = r["state"]
        energy += r["energy"]
        count = None if count is None or r["count"] is None else count * r["count"]
        for key, val in r["details"].items():
            if key in ("width", "states"):
                details[key] = max(details.get(key, 0), val)
            elif key == "ground_states_at_least":
                details[key] = details.get(key, 1) * val
            else:
                details.setdefault(key, val)
    return Certificate(energy=energy, state=state, method=name, status="proven", ground_states=count, details=details)


def _parts(instance):
    return [(idx, exact.sub_instance(instance, idx)) for idx in exact.components(instance)]


def _exact(instance, ctx) -> Certificate:
    parts = _parts(instance)
    big = max((len(i) for i, _ in parts), default=0)
    if big > exact.MAX_SPINS:
        raise ResourceError(f"exact enumeration of a {big}-spin part means 2^{big} states, about "
                            f"{exact.duration(exact.enumeration_seconds(big))}; it stops at {exact.MAX_SPINS} spins")
    est = sum(exact.enumeration_seconds(len(i)) for i, _ in parts)
    if est > _left(ctx):
        raise ResourceError(f"exact enumeration would take about {exact.duration(est)}, "
                            f"more than the time limit of {ctx['limit']:g} s")
    return _by_parts(instance, "exact", [(i, lambda s=sub: exact.enumerate_ground(s)) for i, sub in parts])


def _tree_plans(instance, ctx):
    return [(idx, sub, exact.tree_plan(sub, ctx["memory"]) if len(idx) > SMALL else None)
            for idx, sub in _parts(instance)]


def _tree(instance, ctx, plans=None) -> Certificate:
    plans = plans or _tree_plans(instance, ctx)
    worst = max((p for _, _, p in plans if p), key=lambda p: p["width"], default=None)
    if worst is not None and not worst["feasible"]:
        above = ">= " if worst["order"] is None else ""
        raise ResourceError(f"tree decomposition needs width {above}{worst['width']}: about {worst['bytes'] / 1e9:.3g} GB "
                            f"and {exact.duration(worst['seconds'])}; the limits are width {exact.TREE_MAX_WIDTH} "
                            f"and {ctx['memory'] / 1e9:.3g} GB")
    est = sum(p["seconds"] for _, _, p in plans if p)
    if est > _left(ctx):
        raise ResourceError(f"tree decomposition would take about {exact.duration(est)}, "
                            f"more than the time limit of {ctx['limit']:g} s")

    def job(sub, plan):
        if plan is None:
            return exact.enumerate_ground(sub)
        return exact.tree_ground(sub, plan, count_limit=ctx["count"], memory_limit=ctx["memory"])

    return _by_parts(instance, "tree", [(i, lambda s=sub, p=plan: job(s, p)) for i, sub, plan in plans])


# ----------------------------------------------------------- mip and anneal
def _mip(instance, ctx) -> Certificate:
    share = min(0.2 * max(_left(ctx), 0.0), 10.0)
    warm = _anneal(instance, {**ctx, "limit": share, "t0": time.perf_counter()}, rounds=2)
    state = np.asarray(warm.state, dtype=np.int8).copy()
    energy, proven, bounds, gaps = 0.0, True, 0.0, []
    parts = _parts(instance)
    for k, (idx, sub) in enumerate(parts):
        budget = max(_left(ctx), 0.1) / (len(parts) - k)
        if sub.n <= SMALL:
            r = exact.enumerate_ground(sub)
            r["details"] = {"proven": True, "lower_bound": r["energy"]}
        else:
            r = exact.mip_ground(sub, budget, incumbent=state[idx])
        state[idx] = r["state"]
        energy += r["energy"]
        bounds += r["details"]["lower_bound"]
        proven = proven and r["details"]["proven"]
        if not r["details"]["proven"]:
            gaps.append(r["details"]["gap"])
    details = {"lower_bound": bounds, "gap": energy - bounds, "parts": len(parts),
               "warm_start": {"energy": warm.energy, "reads": warm.details.get("reads")}}
    if proven:
        details["proof"] = "HiGHS's lower bound met the best state found"
    return Certificate(energy=energy, state=state, method="mip", status="proven" if proven else "not proven",
                       details=details)


def _sa_runner():
    """The compiled `fast-sa` annealer (the same dynamics as `sa`, about ten times faster, so
    more sweeps fit in the time limit); `sa`, then dwave-samplers directly, if it is missing."""
    from .samplers import Schedule, get_sampler

    sampler = None
    for name in ("fast-sa", "sa"):
        try:
            sampler = get_sampler(name)
            break
        except ImportError:
            continue

    def run(instance, sweeps, beta_range, reads, seed):
        sched = Schedule(sweeps=sweeps, beta_range=beta_range)
        if sampler is not None:
            batch = sampler.run(instance, sched, reads=reads, seed=seed)
            return batch.states, batch.energies
        import dimod
        from dwave.samplers import SimulatedAnnealingSampler

        bqm = dimod.BinaryQuadraticModel.from_numpy_vectors(
            instance.h, (instance.edges[:, 0], instance.edges[:, 1], instance.J), 0.0, dimod.SPIN)
        ss = SimulatedAnnealingSampler().sample(bqm, num_reads=reads, seed=seed, beta_schedule_type="custom",
                                                beta_schedule=sched.betas(), num_sweeps_per_beta=1)
        states = np.ones((len(ss), instance.n), dtype=np.int8)
        states[:, np.asarray(list(ss.variables), dtype=np.int64)] = ss.record.sample
        return states, instance.energies(states)

    return run, (sampler.name if sampler is not None else "dwave-samplers simulated annealing")


def _anneal(instance, ctx, rounds: int | None = None) -> Certificate:
    """Best energy from rounds of simulated annealing with doubling sweeps (not proven)."""
    coef = np.abs(np.concatenate([instance.J, instance.h]))
    coef = coef[coef > 0]
    if coef.size == 0:
        state = np.ones(instance.n, dtype=np.int8)
        return Certificate(energy=0.0, state=state, method="anneal", status="proven",
                           ground_states=2 ** instance.n if instance.n <= 62 else None,
                           details={"proof": "every coupling and field is zero"})
    beta_range = (0.1 / float(coef.max()), 10.0 / float(np.median(coef)))
    run, engine = _sa_runner()
    reads, sweeps, used_sweeps, total = 32, 256, [], 0
    best_e, best_s, hits = np.inf, None, 0
    if instance.planted is not None:
        best_e, best_s = instance.energy(instance.planted), np.asarray(instance.planted, dtype=np.int8)
    base = 0 if ctx["seed"] is None else ctx["seed"]
    k, steady = 0, 0
    while True:
        t = time.perf_counter()
        states, energies = run(instance, sweeps, beta_range, reads, derive_seed(base, "certify-anneal", k))
        took = time.perf_counter() - t
        total += reads
        used_sweeps.append(sweeps)
        i = int(np.argmin(energies))
        tol = exact.tolerance(instance)
        if energies[i] < best_e - tol:
            best_e, best_s, steady = float(energies[i]), states[i], 0
        else:
            steady += 1
        hits = int(np.count_nonzero(energies <= best_e + tol))
        k += 1
        settled = steady >= 3 and 2 * hits >= reads and sweeps >= 4096  # most reads agree, rounds agree
        if (rounds is not None and k >= rounds) or settled or 2.2 * took > _left(ctx) or sweeps >= 1 << 20:
            break
        sweeps *= 2
    details = {"sampler": engine, "reads": total, "sweeps": used_sweeps, "beta_range": list(beta_range),
               "last_round_hits": hits, "last_round_reads": reads}
    return Certificate(energy=best_e, state=best_s, method="anneal", status="not proven", details=details)


for _name, _fn in (("planted", _planted), ("exact", _exact), ("tree", _tree), ("mip", _mip), ("anneal", _anneal)):
    METHODS.register(_name, _fn)


# ------------------------------------------------------------------------ auto
def _auto(instance, ctx) -> Certificate:
    passed = []
    if instance.planted is not None:
        try:
            cert = _planted(instance, ctx)
            cert.details["chosen_by"] = "auto: the construction proves the planted state"
            return cert
        except CertificationError as exc:
            passed.append(f"planted: {exc}")
    parts = exact.components(instance)
    big = max((len(p) for p in parts), default=0)
    tries = []
    if big <= SMALL:
        tries.append(("exact", lambda: _exact(instance, ctx)))
    else:
        try:
            plans = _tree_plans(instance, ctx)
            tries.append(("tree", lambda: _tree(instance, ctx, plans)))
        except ResourceError as exc:  # pragma: no cover - tree_plan itself does not refuse
            passed.append(f"tree: {exc}")
        if big <= exact.MAX_SPINS:
            tries.append(("exact", lambda: _exact(instance, ctx)))
    for name, attempt in tries:
        try:
            cert = attempt()
            cert.details["chosen_by"] = "auto: cheapest exact method that fits"
            if passed:
                cert.details["passed_over"] = passed
            return cert
        except ResourceError as exc:
            passed.append(f"{name}: {exc}")
    if big <= MIP_MAX:
        cert = _mip(instance, ctx)
        cert.details["chosen_by"] = ("auto: mixed-integer programming closed the gap" if cert.status == "proven"
                                     else "auto: no method proved the answer within the time limit")
    else:
        passed.append(f"mip: a {big}-spin part is beyond what HiGHS closes in minutes (limit {MIP_MAX} for auto)")
        cert = _anneal(instance, ctx)
        cert.details["chosen_by"] = "auto: no exact method fits, so the best of many anneals (not a proof)"
    cert.details["passed_over"] = passed
    return cert


# ------------------------------------------------------------------- metadata
def attach_certificate(instance: Instance, cert: Certificate) -> Instance:
    """A copy of ``instance`` with ``cert.to_dict()`` in ``metadata["certificate"]``.

    A not-proven certificate carries ``details["warning"]`` saying so.

    >>> from instgen.make import make_instance
    >>> inst = make_instance("chimera:1", seed=2)
    >>> attach_certificate(inst, certify(inst)).metadata["certificate"]["status"]
    'proven'
    """
    if cert.state is None or len(cert.state) != instance.n:
        raise InputError(f"the certificate's state does not have {instance.n} spins")
    if abs(instance.energy(cert.state) - cert.energy) > exact.tolerance(instance):
        raise InputError("the certificate's energy does not match this instance (was it made for another one?)")
    if cert.status not in Certificate.STATUSES:
        raise InputError(f"certificate status must be one of {', '.join(Certificate.STATUSES)}")
    if cert.status == "not proven":
        cert.details.setdefault("warning", NOT_PROVEN)
    return instance.replace(metadata={**instance.metadata, "certificate": cert.to_dict()})


def certificate_of(instance: Instance) -> Certificate | None:
    """The certificate stored in ``metadata["certificate"]``, or None."""
    from .errors import FormatError

    d = instance.metadata.get("certificate")
    if d is None:
        return None
    try:
        cert = Certificate.from_dict(d)
    except (TypeError, ValueError, KeyError):
        raise FormatError("metadata['certificate'] is damaged: it does not hold a certificate") from None
    if cert.status not in Certificate.STATUSES or len(cert.state) != instance.n:
        raise FormatError("metadata['certificate'] does not match the instance")
    return cert
