"""instgen graph: describe a graph spec, or list the families."""

from ..graphs import build_graph, list_families
from ._common import add_json, print_json

NAME = "graph"
ORDER = 90
HELP = "describe a graph (n, m, degrees, planar, bipartite) or list graph families"
DESCRIPTION = """Describe the graph named by SPEC, e.g.

  instgen graph chimera:4
  instgen graph "chimera:6;dead-nodes=5;fault-seed=3"
  instgen graph --list
"""


def add_arguments(p):
    p.add_argument("spec", nargs="?", help="graph spec, e.g. chimera:4, pegasus:6, square:32,periodic")
    p.add_argument("--list", action="store_true", help="list the graph families and their arguments")
    add_json(p)


def run(args):
    if args.list or not args.spec:
        fams = list_families()
        if args.json:
            print_json([{"usage": f.usage, "description": f.description} for f in fams])
        else:
            width = max(len(f.usage) for f in fams)
            for f in fams:
                print(f"{f.usage:<{width}}  {f.description}")
            print("\nFaults: append ';dead-nodes=K' (count, fraction or [labels]), ';dead-edges=K', ';fault-seed=S'.")
        return 0
    summary = build_graph(args.spec).summary()
    if args.json:
        print_json(summary)
        return 0
    print(f"graph      {summary['spec']}")
    print(f"spins      {summary['n']}")
    print(f"couplers   {summary['m']}")
    print("degrees    " + ", ".join(f"{d}: {c}" for d, c in summary["degree_histogram"].items()) + "  (degree: nodes)")
    print(f"planar     {'unknown (too large to test)' if summary['planar'] is None else ('yes' if summary['planar'] else 'no')}")
    print(f"bipartite  {'yes' if summary['bipartite'] else 'no'}")
    print(f"components {summary['connected_components']}")
    return 0
