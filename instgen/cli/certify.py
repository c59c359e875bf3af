"""instgen certify: how the ground-state energy of an instance is known."""

from ..certify import CHOICES, attach_certificate, certify
from ..io import load_instance, save_instance
from ._common import add_json, add_seed, print_json

NAME = "certify"
ORDER = 40
HELP = "find and prove the ground-state energy of an instance file"
DESCRIPTION = """Find the ground-state energy of an instance and say how it is known:
planted (the construction proves it), proven (an exact method closed it) or
not proven (only the best found; no proof).  e.g.

  instgen certify c4.json
  instgen certify big.json --method anneal --time-limit 120 --write
  instgen certify c4.json --json

methods: auto (default: the cheapest that can prove it), planted, exact (n <= 30),
tree (small treewidth), mip (HiGHS, proven when the gap closes), anneal (not proven).
"""


def add_arguments(p):
    p.add_argument("file", help="instance file")
    p.add_argument("--method", default="auto", choices=CHOICES, metavar="METHOD",
                   help=f"one of {', '.join(CHOICES)} (default auto)")
    p.add_argument("--time-limit", type=float, default=60.0, metavar="S", help="seconds to spend (default 60)")
    p.add_argument("--memory-limit", type=float, default=4.0, metavar="GB",
                   help="memory the tree method may use (default 4)")
    add_seed(p)
    p.add_argument("--write", action="store_true", help="store the certificate in the file (atomically)")
    add_json(p)


def run(args):
    inst = load_instance(args.file)
    cert = certify(inst, method=args.method, time_limit=args.time_limit, seed=args.seed,
                   memory_limit=args.memory_limit * 1e9)
    if args.write:
        save_instance(attach_certificate(inst, cert), args.file)
    if args.json:
        print_json({"file": args.file, "written": bool(args.write), **cert.to_dict()})
        return 0
    d = cert.details
    count = (f"{cert.ground_states}" if cert.ground_states is not None else
             f"at least {d['ground_states_at_least']}" if "ground_states_at_least" in d else "not counted")
    print(f"energy         {cert.energy:.12g}")
    print(f"status         {cert.status}")
    print(f"method         {cert.method}" + (f"  ({d['chosen_by']})" if "chosen_by" in d else ""))
    print(f"seconds        {cert.seconds:.2f}")
    print(f"ground states  {count}")
    if "lower_bound" in d and cert.status != "proven":
        print(f"lower bound    {d['lower_bound']:.12g}  (optimality gap {d['gap']:.6g})")
    if "proof" in d:
        print(f"why            {d['proof']}")
    for reason in d.get("passed_over", []):
        print(f"passed over    {reason}")
    if cert.status == "not proven":
        print(d["warning"])
    if args.write:
        print(f"certificate written to {args.file}")
    return 0
