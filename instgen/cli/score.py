"""instgen score: hardness metrics of one instance under one or more solvers."""

from __future__ import annotations

import json
import math

from ..errors import InputError
from ..io import load_instance
from ..samplers.schedule import INTERPOLATIONS, SHAPES
from ..samplers import SAMPLERS, SUMMARIES
from ..scoring import COMBINE, METRICS, Pinning, measure_many, measure_perturbed
from ._common import add_json, add_seed, int_list, positive_int, print_json

NAME = "score"
ORDER = 30
HELP = "measure how hard an instance is (TTS99, success probability, anneal gain, ...) with error bars"
DESCRIPTION = """Measure hardness metrics of an instance file under surrogate samplers, with explicit
schedules, confidence intervals and the seeds used, e.g.

  instgen score c4.json --metric tts --sampler sa --sweeps 10,100,1000 --reads 256 --seed 1
  instgen score c4.json --metric tts,anneal-gain --solvers sa,pimc,tabu --reads 128
  instgen score c4.json --metric success --perturb 0.05 --copies 8

metrics:
""" + "\n".join(f"  {n:<14} {METRICS.get(n).summary}" for n in METRICS.names()) + """

samplers (--sampler, --solvers):
""" + "\n".join(f"  {n:<14} {SUMMARIES[n]}" for n in SAMPLERS.names()) + """

TTS99 is pinned at its optimal number of sweeps: starting from --sweeps, the
sweep counts are extended (down to 1, up to --max-sweeps) and reads added
until the minimum is interior and rests on --min-successes successes, within
--budget spin updates per solver.  What is left a bound says why and what the
next step would cost.  --fixed-grid keeps to the sweep counts given.

The reference energy is the instance's certificate, else its planted state,
else the lowest energy found in this run (then it is not a proven optimum and
the output says so)."""


def _pair(text):
    import argparse

    try:
        vals = [float(x) for x in text.split(",")]
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected two numbers separated by a comma, got {text!r}") from None
    if len(vals) != 2:
        raise argparse.ArgumentTypeError(f"expected two numbers separated by a comma, got {text!r}")
    return tuple(vals)


def _names(text):
    return [x.strip() for x in text.split(",") if x.strip()]


def add_arguments(p):
    p.add_argument("file", help="instance file")
    p.add_argument("--metric", type=_names, default=["tts"], metavar="NAMES",
                   help="comma-separated metrics (default tts)")
    p.add_argument("--sampler", default="sa", help="solver to measure with (default sa)")
    p.add_argument("--solvers", type=_names, metavar="NAMES", help="several solvers side by side, e.g. sa,pimc,tabu")
    p.add_argument("--sweeps", type=int_list, metavar="LIST",
                   help="sweep counts, e.g. 10,100,1000 (default: each metric's own)")
    p.add_argument("--reads", type=positive_int, default=100, help="reads per sweep count (default 100)")
    add_seed(p, default=0)
    p.add_argument("--beta-range", type=_pair, metavar="HOT,COLD", help="inverse temperatures (default: from the "
                   "coupling alphabet stored with the instance)")
    p.add_argument("--scale", type=float, help="coupling scale, for an instance that carries no alphabet")
    p.add_argument("--interpolation", choices=INTERPOLATIONS, help="beta interpolation (default geometric)")
    p.add_argument("--shape", choices=SHAPES, help="anneal path for pimc/rotor (default plain)")
    p.add_argument("--pause", type=_pair, metavar="S,FRACTION", help="pause at s for a fraction of the sweeps")
    p.add_argument("--quench", type=float, metavar="S", help="quench from s to the end in one sweep")
    p.add_argument("--option", action="append", default=[], metavar="SOLVER.KEY=VALUE",
                   help="a solver option, e.g. pimc.transverse=4 (repeatable)")
    p.add_argument("--perturb", type=float, metavar="SIGMA",
                   help="score copies with Gaussian control errors of SIGMA x coupling scale on J and h")
    p.add_argument("--copies", type=positive_int, default=8, help="perturbed copies (default 8)")
    p.add_argument("--combine", choices=list(COMBINE), default="median", help="how copies combine (default median)")
    p.add_argument("--confidence", type=float, default=0.95, help="confidence level of intervals (default 0.95)")
    g = p.add_argument_group("time-to-solution at its optimum")
    g.add_argument("--fixed-grid", action="store_true",
                   help="TTS99 at the best of the sweep counts given, without pinning the optimum (may be a bound)")
    g.add_argument("--budget", type=float, default=Pinning.budget, metavar="UPDATES",
                   help=f"spin updates each solver may spend pinning TTS99 (default {Pinning.budget:.0e})")
    g.add_argument("--max-sweeps", type=positive_int, default=Pinning.max_sweeps, metavar="N",
                   help=f"longest anneal tried while pinning (default {Pinning.max_sweeps:,})")
    g.add_argument("--min-successes", type=positive_int, default=Pinning.successes, metavar="K",
                   help=f"successes the optimum must rest on (default {Pinning.successes})")
    g.add_argument("--cold-ends", type=_floats, metavar="LIST",
                   help="also try these cold ends, as beta_cold x coupling scale (e.g. 2,5,10), and report TTS99 "
                        "at the best (sweeps, beta_cold) pair")
    add_json(p)


def _floats(text):
    import argparse

    try:
        vals = [float(x) for x in text.split(",") if x.strip()]
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected numbers separated by commas, got {text!r}") from None
    if not vals:
        raise argparse.ArgumentTypeError(f"expected numbers separated by commas, got {text!r}")
    return vals


def _options(items, solvers) -> dict:
    out: dict = {}
    for item in items:
        key, eq, text = item.partition("=")
        solver, dot, name = key.partition(".")
        if not eq or not dot or not name:
            raise InputError(f"--option takes SOLVER.KEY=VALUE, got {item!r}")
        if solver not in solvers:
            raise InputError(f"--option {item!r} names solver {solver!r}, which is not being run")
        try:
            value = json.loads(text)
        except json.JSONDecodeError:
            value = text
        out.setdefault(solver, {})[name] = value
    return out


def _schedule(args) -> dict:
    d = {}
    if args.interpolation:
        d["interpolation"] = args.interpolation
    if args.shape:
        d["shape"] = args.shape
    if args.pause:
        d["shape"] = d.get("shape", "pause")
        d["s_pause"], d["pause_fraction"] = args.pause
    if args.quench is not None:
        d["shape"] = d.get("shape", "quench")
        d["s_quench"] = args.quench
    return d


def compute(args):
    """Run the measurement the arguments ask for; returns (instance, scores)."""
    inst = load_instance(args.file)
    solvers = args.solvers or [args.sampler]
    options = _options(args.option, solvers)
    common = dict(sweeps=args.sweeps, reads=args.reads, seed=args.seed, beta_range=args.beta_range,
                  scale=args.scale, schedule=_schedule(args) or None, confidence=args.confidence)
    if args.perturb is None:
        pin = None if args.fixed_grid else Pinning(budget=args.budget, max_sweeps=args.max_sweeps,
                                                   successes=args.min_successes,
                                                   cold_ends=tuple(args.cold_ends or ()))
        return inst, measure_many(inst, args.metric, solvers, options=options, pin=pin, **common)
    return inst, [measure_perturbed(inst, m, args.perturb, args.copies, sampler=s, combine=args.combine,
                                    **options.get(s, {}), **common)
                  for s in solvers for m in args.metric]


def _finite(obj):
    """JSON-safe: non-finite numbers become null (an unbounded interval end)."""
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    if isinstance(obj, dict):
        return {k: _finite(v) for k, v in obj.items()}
    if isinstance(obj, list):
        return [_finite(v) for v in obj]
    return obj


def _num(x) -> str:
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "n/a"
    if isinstance(x, float) and math.isinf(x):
        return "inf"
    return f"{x:.4g}"


def _value(s) -> str:
    sign = {"lower bound": ">= ", "upper bound": "<= "}.get(s.kind, "")
    return f"{sign}{_num(s.value)} {s.units}".rstrip()


def describe_schedule(d: dict) -> str:
    """One line saying what schedule a solver followed."""
    kind = d.get("kind", "")
    sweeps = d.get("sweeps")
    sweeps = ",".join(str(x) for x in sweeps) if isinstance(sweeps, list) else sweeps
    restarts = d.get("restarts")
    restarts = ",".join(str(x) for x in restarts) if isinstance(restarts, list) else restarts
    if "temperature_beta" in d:
        shape = d.get("shape", "plain")
        if shape == "pause":
            shape += f" at s={d['s_pause']:g} for {d['pause_fraction']:.0%}"
        elif shape == "quench":
            shape += f" from s={d['s_quench']:g} ({d['quench_sweeps']} sweeps)"
        return (f"{kind}: beta {d['temperature_beta']:.4g}, transverse field {d['transverse']:g} -> 0 along a "
                f"{shape} path, problem field 0 -> beta; sweeps {sweeps}")
    if "beta_range" in d and "interpolation" in d:
        b0, b1 = d["beta_range"]
        return f"{d['interpolation']} beta {b0:.4g} .. {b1:.4g} over {sweeps} sweeps"
    if "restarts" in d:
        return f"{kind}: {restarts} descents per read"
    if kind.startswith("tabu"):
        return (f"{kind}: a budget of {sweeps} sweeps per read (one sweep = n candidate flips evaluated), "
                f"tenure {d.get('tenure')}")
    return kind or json.dumps(d)


def _print(path, inst, scores):
    print(f"instance   {path}: {inst.n} spins, {inst.m} couplers" + (f" on {inst.graph}" if inst.graph else ""))
    first = scores[0]
    print(f"reference  {_num(first.reference)} ({first.extra.get('reference_source')}; {first.reference_status})")
    if first.reference_status not in ("planted", "proven"):
        print("           not a proven optimum: success and TTS are measured against it as it stands")
    print(f"schedule   beta range from the {first.extra.get('beta_range_source', 'caller')}")
    print(f"seed       {first.extra.get('seed')}; {first.reads} reads per sweep count"
          + (", more where pinning TTS99 needs them" if any(x.extra.get("pin") for x in scores) else ""))
    shown = set()
    for note in first.notes:
        if note.startswith(("the reference", "a sampler found", "the certificate")):
            print(f"  note: {note}")
            shown.add(note)
    solver = None
    for s in scores:
        if s.solver != solver:
            solver = s.solver
            print(f"\n{solver}: {describe_schedule(s.schedule or {})}")
        conf = f"{first.extra.get('confidence', 0.95):.0%}"
        label_ci = "range" if s.extra.get("ci_is_range") else f"{conf} CI"
        ci = "" if s.ci is None else f"  [{label_ci} {_num(s.ci[0])} .. {_num(s.ci[1])}]"
        where = ""
        if "best_sweeps" in s.extra and s.kind != "lower bound":
            lo, hi = s.extra.get("best_sweeps_ci", (None, None))
            where = f"  at {s.extra['best_sweeps']:,} {s.units}" + (
                f" [{label_ci} {lo:,} .. {hi:,}]" if lo is not None else "")
        label = "TTS99" if s.metric == "tts" else s.metric
        print(f"  {label:<14} {_value(s)}{ci}{where}")
        for row in s.extra.get("per_sweeps", []):
            bound = {"lower bound": ">= ", "upper bound": "<= "}.get(row["kind"], "")
            print(f"      {row['sweeps']:>8} {s.units}: {row['successes']:,} of {row['reads']:,} reads, "
                  f"p = {row['p']:.4g} [{_num(row['p_ci'][0])} .. "
                  f"{_num(row['p_ci'][1])}], TTS99 {bound}{_num(row['tts'])}")
        pin = s.extra.get("pin")
        if pin:
            b0, b1 = s.extra.get("beta_range_scaled", pin["beta_range"])
            print(f"      {'pinned' if pin['pinned'] else 'NOT pinned'}: {pin['spent']:.3g} of {pin['budget']:.3g} "
                  f"spin updates, beta x scale {b0:.3g} .. {b1:.3g}"
                  + ("" if pin["pinned"] else f"; {pin['reason']}"))
        for c in s.extra.get("cold_ends", []):
            print(f"      cold end beta x scale {c['cold_end']:g}: TTS99 "
                  f"{ {'lower bound': '>= ', 'upper bound': '<= '}.get(c['kind'], '')}{_num(c['tts'])} at "
                  f"{c['best_sweeps']:,} {s.units}")
        if "tts_seconds" in s.extra:
            print(f"      TTS99 in seconds: {_num(s.extra['tts_seconds'])} (wall clock on this machine, overhead included)")
        print(f"      sampler seeds {', '.join(str(x) for x in s.seeds[:8])}" + (" ..." if len(s.seeds) > 8 else ""))
        for note in s.notes:
            if note not in shown:
                print(f"      note: {note}")


def run(args):
    if not 0 < args.confidence < 1:
        raise InputError(f"--confidence must lie strictly between 0 and 1, got {args.confidence}")
    inst, scores = compute(args)
    if args.json:
        print_json({"file": args.file, "n": inst.n, "m": inst.m, "graph": inst.graph,
                    "scores": [_finite(s.to_dict()) for s in scores]})
        return 0
    _print(args.file, inst, scores)
    return 0
