"""instgen info: what an instance file holds."""

import numpy as np

from ..io import load_instance
from ._common import add_json, print_json

NAME = "info"
ORDER = 25
HELP = "show what an instance file holds (size, alphabet, energy scale, planted or not)"


def add_arguments(p):
    p.add_argument("file", help="instance file")
    add_json(p)


def distinct_values(J) -> tuple[np.ndarray, np.ndarray]:
    """Distinct coupling values and their counts; values closer than 1e-9 of max |J| are one value,
    so float noise in a file (0.9999999999999998 beside 1, -5.55e-17 beside 0) is not counted apart."""
    J = np.asarray(J, dtype=np.float64)
    scale = float(np.abs(J).max()) if J.size else 0.0
    if scale == 0:
        return np.unique(J + 0.0, return_counts=True)
    return np.unique(np.round(J / scale, 9) * scale + 0.0, return_counts=True)


def describe(inst) -> dict:
    """A summary of an instance as plain data."""
    values, counts = distinct_values(inst.J)
    meta = inst.metadata
    cert = meta.get("certificate")
    out = {
        "graph": inst.graph,
        "n": inst.n,
        "m": inst.m,
        "rules": meta.get("rules"),
        "distinct_couplings": int(values.size),
        "coupling_min": float(inst.J.min()) if inst.m else 0.0,
        "coupling_max": float(inst.J.max()) if inst.m else 0.0,
        "has_fields": inst.has_fields,
        "energy_scale": inst.scale,
        "sum_abs_couplings": float(np.abs(inst.J).sum() + np.abs(inst.h).sum()),
        "planted": inst.planted is not None,
        "planted_energy": inst.planted_energy,
        "construction": meta.get("construction"),
        "certificate": None if cert is None else {k: cert.get(k) for k in ("energy", "method", "status")},
        "provenance": meta.get("provenance", {}),
    }
    if values.size <= 12:
        out["coupling_counts"] = {f"{v:g}": int(c) for v, c in zip(values, counts)}
    return out


def run(args):
    inst = load_instance(args.file)
    d = describe(inst)
    if args.json:
        print_json(d)
        return 0
    print(f"file        {args.file}")
    print(f"graph       {d['graph'] or '(none given)'}")
    print(f"spins       {d['n']}")
    print(f"couplers    {d['m']}  (coupling values {d['coupling_min']:g} .. {d['coupling_max']:g}, {d['distinct_couplings']} distinct)")
    if "coupling_counts" in d:
        print("            " + ", ".join(f"{v}: {c}" for v, c in d["coupling_counts"].items()))
    if d["rules"]:
        r = d["rules"]
        print(f"alphabet    coupling {r.get('couplings')}, field {r.get('fields')}"
              + (f", range {r['coupling_range']:g}" if r.get("coupling_range") else "")
              + (f", precision {r['precision']:g}" if r.get("precision") else ""))
    print(f"fields      {'yes' if d['has_fields'] else 'none'}")
    print(f"scale       max |J|,|h| = {d['energy_scale']:g}; sum |J|+|h| = {d['sum_abs_couplings']:g}")
    if d["planted"]:
        kind = (d["construction"] or {}).get("family", "planted")
        print(f"planted     yes ({kind}); planted energy {d['planted_energy']:g}")
    else:
        print("planted     no")
    if d["certificate"]:
        c = d["certificate"]
        note = "" if c["status"] in ("planted", "proven") else "  (not a proven optimum)"
        print(f"optimum     {c['energy']:g} by {c['method']} ({c['status']}){note}")
    else:
        print("optimum     unknown (run `instgen certify` to find and prove it)")
    return 0
