"""instgen report: one self-contained HTML page for a run folder or a library."""

from __future__ import annotations

from ._common import add_seed, positive_int, nonneg_int

NAME = "report"
ORDER = 45
HELP = "write an HTML report (plots embedded) for a run folder or a library folder"
DESCRIPTION = """Write one self-contained HTML file for a breeding run or a benchmark library:

  instgen report outputs/demo              # a run folder: settings, winners, plots, cautions
  instgen report outputs/demo/library      # a library: entries and hardness against size
  instgen report outputs/demo --no-measure # only what the run stored; no fresh measurements

For a run, residual energy at every sweep count and the anneal profiles of the best
winners are measured afresh (the captions say so); --seed fixes them.  Plots are
also saved as PNG files in FOLDER/plots/."""


def add_arguments(p):
    p.add_argument("folder", help="a run folder (summary.json, log.jsonl) or a library folder (index.sqlite)")
    p.add_argument("--out", metavar="FILE", help="where to write the page (default FOLDER/report.html)")
    p.add_argument("--reads", type=positive_int, default=64, metavar="R",
                   help="reads per sweep count for the fresh residual-energy curves (default 64)")
    p.add_argument("--profiles", type=nonneg_int, default=1, metavar="N",
                   help="anneal profiles of the N best winners (default 1; 0 for none)")
    p.add_argument("--profile-reads", type=positive_int, default=32, metavar="R", help="replicas per profile")
    p.add_argument("--profile-sweeps", type=positive_int, default=500, metavar="S", help="sweeps per profile")
    p.add_argument("--no-measure", action="store_true", help="measure nothing afresh; show only stored results")
    add_seed(p, default=0)


def run(args):
    from ..report.html import write_report

    path = write_report(args.folder, args.out, reads=args.reads, profiles=args.profiles,
                        profile_reads=args.profile_reads, profile_sweeps=args.profile_sweeps,
                        measure=not args.no_measure, seed=args.seed)
    print(f"wrote {path}")
    return 0
