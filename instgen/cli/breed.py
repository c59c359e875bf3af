"""instgen breed: run the evolutionary search for a preset."""

from __future__ import annotations

import sys

from ..preset import load_preset, override, with_output
from ._common import add_json, nonneg_int, number, positive_int, print_json

NAME = "breed"
ORDER = 10
HELP = "breed hard instances for a preset (presets/*.toml)"
DESCRIPTION = """Breed instances that are hard in the way the preset says, confirm the best
on fresh seeds, certify their ground states and write a run folder:

  instgen breed presets/demo.toml
  instgen breed presets/quench-study.toml --graph "chimera:6;dead-nodes=5;fault-seed=3" \\
      --couplings levels:-1,-2/3,-1/3,1/3,2/3,1 --precision 1/3
  instgen breed presets/demo.toml --out outputs/demo --resume      # continue a killed run

Any preset value can be overridden with --set table.key=value (TOML syntax).

What each candidate is measured against, [fitness] reference:
  planted            the planted energy (a proof; planted presets)
  certified          prove every candidate's optimum before measuring it (small graphs only)
  best-found         the lowest energy any read reached (cheap, no proof)
  confirm-certified  search against the best found, but prove a candidate's optimum before
                     it is confirmed, so no winner rests on an excited state taken for the ground
  auto               planted when there is one, else best found
Samplers for [fitness] sampler and solvers: see `instgen score --help`.
"""


def add_arguments(p):
    p.add_argument("preset", help="preset file (TOML)")
    p.add_argument("--out", metavar="DIR",
                   help="run folder (default: the preset's [run] out); a [library] path inside the preset's "
                        "own output folder moves along, to the same place inside DIR")
    p.add_argument("--seed", type=nonneg_int, help="run seed (overrides [run] seed)")
    p.add_argument("--graph", metavar="SPEC", help="graph spec (overrides [graph] spec)")
    p.add_argument("--couplings", metavar="ALPHABET", help="coupling alphabet (overrides [couplings] alphabet)")
    p.add_argument("--fields", metavar="ALPHABET", help="field alphabet or none")
    p.add_argument("--range", type=number, dest="coupling_range", metavar="R", help="coupling range |J| <= R")
    p.add_argument("--precision", type=number, metavar="STEP",
                   help="coupling precision (step), a number or a fraction such as 1/3; levels within 0.5%% of a "
                        "step from its multiples are snapped to them")
    p.add_argument("--generations", type=positive_int, metavar="N", help="stop after N generations")
    p.add_argument("--population", type=positive_int, metavar="N", help="population size")
    p.add_argument("--workers", type=nonneg_int, metavar="N", help="worker processes (1: serial; 0: all cores)")
    p.add_argument("--cluster", metavar="ADDRESS",
                   help="run evaluations on a Dask cluster: tcp://HOST:8786, or local:N for N local workers")
    p.add_argument("--library", metavar="DIR", help="file the winners into this library (overrides [library] path)")
    p.add_argument("--set", action="append", default=[], metavar="TABLE.KEY=VALUE",
                   help="override any preset value, e.g. --set search.elites=4 (repeatable)")
    p.add_argument("--resume", action="store_true", help="continue the run in --out from its last checkpoint")
    p.add_argument("--quiet", action="store_true", help="print nothing but errors")
    p.add_argument("--no-report", action="store_true", help="do not write report.html at the end")
    add_json(p)


def resolve(args) -> dict:
    """The preset with the command line's overrides applied."""
    cfg = load_preset(args.preset)
    if args.out is not None:  # before the flags, so that --library and --set library.path win
        cfg = with_output(cfg, args.out)
    sets = list(args.set)
    flags = {"run.seed": args.seed, "graph.spec": args.graph, "couplings.alphabet": args.couplings,
             "couplings.fields": args.fields, "couplings.range": args.coupling_range,
             "couplings.precision": args.precision, "search.generations": args.generations,
             "search.population": args.population, "search.workers": args.workers, "library.path": args.library}
    for key, val in flags.items():
        if val is not None:
            sets.append(f"{key}={_toml(val)}")
    return override(cfg, sets) if sets else cfg


def _toml(v):
    import json

    return json.dumps(v) if isinstance(v, str) else repr(v)


def run(args):
    from ..evolve.engine import breed
    from ..evolve.executors import make_executor
    from ..report.progress import Progress
    from ..report.summary import print_summary

    cfg = resolve(args)
    quiet = (lambda line: None) if args.quiet else None  # --quiet: errors only
    executor = make_executor(cfg["search"]["workers"], cluster=args.cluster, notify=quiet)
    show = Progress(cfg, quiet=args.quiet or args.json, stream=sys.stderr)
    quiet = args.quiet or args.json

    def say(text):
        if not quiet:
            print(f"after the search: {text} ...", file=sys.stderr, flush=True)

    if not (quiet or args.resume):
        from ..evolve.cost import work_plan

        print(work_plan(cfg).text(), file=sys.stderr, flush=True)
    with show:
        summary = breed(cfg, out=cfg["run"]["out"], executor=executor, resume=args.resume, progress=show.update,
                        say=say)
    if not args.no_report:
        from ..report.html import write_report

        if not (args.quiet or args.json):
            print("writing the report (measures residual energies and an anneal profile afresh) ...",
                  file=sys.stderr)
        summary["report"] = str(write_report(cfg["run"]["out"]))
    if args.json:
        print_json(summary)
    elif not args.quiet:
        print_summary(summary)
        if summary.get("report"):
            print(f"report: {summary['report']}  (open it in a browser)")
    return 0
