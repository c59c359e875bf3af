"""instgen plant: an instance with a planted ground state."""

from ..errors import InputError
from ..io import save_instance
from ..planted import PLANTED, families, plant
from ._common import add_json, add_seed, number, print_json

NAME = "plant"
ORDER = 22
HELP = "make an instance with a planted ground state (frustrated loops, Wishart, tiles)"
DESCRIPTION = """Make an instance whose ground state is known by construction, hidden by a
random gauge, and write it with a checked 'planted' certificate, e.g.

  instgen plant chimera:8 --method loops --density 0.3 --seed 1 --out loops.json
  instgen plant pegasus:4 --method loops --density 0.5 --cap 3 --min-length 6 --out range3.json
  instgen plant complete:64 --method wishart --alpha 0.75 --seed 2 --out dense.json
  instgen plant square:32 --method tiles --mix 0.2,0.5,0.3 --seed 3 --out tiles.json
  instgen plant --list
"""

#: command-line flag -> knob name, per knob
FLAGS = {
    "density": "density", "min_length": "min-length", "max_length": "max-length", "cap": "cap",
    "weights": "loop-weights", "alpha": "alpha", "disorder": "disorder", "coupling_range": "coupling-range",
    "mix": "mix", "kinds": "kinds", "patch_size": "patch-size",
}


def _floats(text):
    return [number(x) for x in text.split(",") if x.strip()]


def add_arguments(p):
    p.add_argument("graph", nargs="?", help="graph spec, e.g. chimera:8, pegasus:4, square:32, complete:64")
    p.add_argument("--method", default="loops", metavar="FAMILY",
                   help=f"planted family: {', '.join(PLANTED.names())} (default loops)")
    p.add_argument("--list", action="store_true", help="list the planted families and their options")
    g = p.add_argument_group("loops")
    g.add_argument("--density", type=float, metavar="A", help="loops per spin (default 0.3)")
    g.add_argument("--min-length", type=int, dest="min_length", metavar="L", help="shortest loop (default 4)")
    g.add_argument("--max-length", type=int, dest="max_length", metavar="L", help="longest loop (default none)")
    g.add_argument("--cap", type=number, metavar="R", help="largest |J| an edge may accumulate (default none)")
    g.add_argument("--loop-weights", type=_floats, dest="weights", metavar="W1,W2",
                   help="weights a loop draws from (default 1)")
    g = p.add_argument_group("wishart")
    g.add_argument("--alpha", type=float, metavar="A", help="columns per spin, M/N (default 0.5)")
    g.add_argument("--disorder", metavar="KIND", help="gaussian or binary entries (default gaussian)")
    g.add_argument("--coupling-range", type=number, dest="coupling_range", metavar="R",
                   help="rescale so that max |J| = R")
    g = p.add_argument_group("tiles")
    g.add_argument("--mix", metavar="P1,P2,P3",
                   help="weights of the tile classes: c1,c2,c3 on square, f2,f4,f6 on cubic lattices")
    g = p.add_argument_group("terms")
    g.add_argument("--kinds", metavar="K1,K2", help="term kinds, e.g. loop,ball or loop:2,cell:1")
    g.add_argument("--patch-size", type=int, dest="patch_size", metavar="K", help="spins per patch")
    add_seed(p)
    p.add_argument("--no-certificate", action="store_true", help="skip checking the construction's proof")
    p.add_argument("-o", "--out", metavar="FILE", help="instance file to write")
    add_json(p)


def _show(value):
    if isinstance(value, (tuple, list)):
        return ",".join(f"{v:.3g}" for v in value)
    return "none" if value is None else f"{value:g}" if isinstance(value, float) else str(value)


def _list(as_json):
    rows = [{"name": f.name, "description": f.description,
             "options": {f"--{FLAGS.get(k, k)}": _show(v) for k, v in f.knobs().items() if k in FLAGS}}
            for f in families()]
    if as_json:
        print_json(rows)
        return 0
    for r in rows:
        print(f"{r['name']:<9} {r['description']}")
        print(" " * 10 + "  ".join(f"{k} (default {v})" for k, v in r["options"].items()))
    return 0


def run(args):
    if args.list:
        return _list(args.json)
    if not args.graph or not args.out:
        raise InputError("give a graph spec and --out FILE (or --list to see the families)")
    family = PLANTED.get(args.method)
    valid = family.knobs()
    knobs = {k: getattr(args, k) for k in FLAGS if getattr(args, k) is not None}
    wrong = [k for k in knobs if k not in valid]
    if wrong:
        raise InputError(f"--{FLAGS[wrong[0]]} does not apply to {args.method}; its options are "
                         + ", ".join(f"--{FLAGS[k]}" for k in valid if k in FLAGS))
    inst = plant(args.graph, args.method, seed=args.seed, certify=not args.no_certificate, **knobs)
    path = save_instance(inst, args.out, provenance={"seed": args.seed})
    con = inst.metadata["construction"]
    cert = inst.metadata.get("certificate")
    summary = {"file": str(path), "family": args.method, "graph": inst.graph, "n": inst.n, "m": inst.m,
               "planted_energy": con["planted_energy"], "certificate": cert["status"] if cert else None,
               "construction": {k: v for k, v in con.items() if k not in ("loops", "tiles")}}
    if args.json:
        print_json(summary)
        return 0
    print(f"wrote {path}: {args.method} on {inst.graph}, {inst.n} spins, {inst.m} couplers")
    print(f"planted energy {con['planted_energy']:.12g} "
          + ("(proof checked: status planted)" if cert else "(proof not checked: --no-certificate)"))
    return 0
