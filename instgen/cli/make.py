"""instgen make: a random instance on a graph."""

from ..io import save_instance
from ..make import make_instance
from ._common import add_seed, number

NAME = "make"
ORDER = 20
HELP = "make a random instance on a graph with a coupling alphabet"
DESCRIPTION = """Make a random instance and write it as an instance file, e.g.

  instgen make chimera:4 --couplings pm1 --seed 1 --out x.json
  instgen make "chimera:6;dead-nodes=5" --couplings levels:-1,-2/3,-1/3,1/3,2/3,1 --precision 1/3 --out chip.json
"""


def add_arguments(p):
    p.add_argument("graph", help="graph spec (see `instgen graph --list`)")
    p.add_argument("--couplings", default="pm1", metavar="ALPHABET",
                   help="pm1, int:K, gaussian[:SIGMA], uniform:A,B or levels:V1,V2,... (values may be fractions "
                        "such as 2/3; default pm1)")
    p.add_argument("--fields", default="none", metavar="ALPHABET", help="field alphabet or none (default none)")
    p.add_argument("--range", type=number, dest="coupling_range", metavar="R", help="clip |J| to R")
    p.add_argument("--field-range", type=number, metavar="R", help="clip |h| to R")
    p.add_argument("--precision", type=number, metavar="STEP",
                   help="round couplings and fields to multiples of STEP (a number or a fraction such as 1/3)")
    add_seed(p)
    p.add_argument("-o", "--out", required=True, metavar="FILE", help="instance file to write")


def run(args):
    inst = make_instance(args.graph, args.couplings, args.fields, seed=args.seed,
                         coupling_range=args.coupling_range, field_range=args.field_range,
                         precision=args.precision)
    path = save_instance(inst, args.out, provenance={"seed": args.seed})
    print(f"wrote {path}: {inst.n} spins, {inst.m} couplers on {inst.graph}")
    return 0
