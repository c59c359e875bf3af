"""instgen profile: how an instance's energy falls along a path-integral anneal."""

from __future__ import annotations

import math
from pathlib import Path

from ..errors import InputError
from ..io import load_instance
from ._common import add_json, add_seed, positive_int, print_json

NAME = "profile"
ORDER = 40
HELP = "anneal profile on the path-integral surrogate: energy, changes and frozen spins along the anneal"
DESCRIPTION = """Anneal an instance on the path-integral surrogate (pimc), read every replica's
state at K evenly spaced points of the anneal and show, per point, the mean and
lowest energy, the residual energy above the ground state, how many spins changed
since the previous point and how many are frozen until the end.  A two-piece line
fitted to energy against s estimates where progress stops, with its uncertainty.

  instgen profile winners/01-3fa9c2d1e04b.json
  instgen profile chip.json --points 30 --reads 64 --sweeps 2000 --seed 4 --out previews/

Writes NAME-profile.csv, NAME-profile.json and NAME-profile.png next to the file
(or into --out)."""


def add_arguments(p):
    p.add_argument("file", help="instance file")
    p.add_argument("--points", type=positive_int, default=20, metavar="K", help="sample points along the anneal "
                   "(default 20, at least 6)")
    p.add_argument("--reads", type=positive_int, default=48, metavar="R", help="replicas (default 48)")
    p.add_argument("--sweeps", type=positive_int, default=1000, metavar="S",
                   help="anneal length in sweeps (default 1000; rounded up to fit the points)")
    add_seed(p, default=0)
    p.add_argument("--transverse", type=float, default=2.0, metavar="X",
                   help="transverse field at s = 0, as beta x Gamma (default 2)")
    p.add_argument("--scale", type=float, help="coupling scale, for an instance that carries no alphabet")
    p.add_argument("--out", metavar="DIR", help="folder for the CSV, JSON and PNG (default: the file's folder)")
    add_json(p)


def _num(x, spec=".4g") -> str:
    return "-" if x is None or (isinstance(x, float) and math.isnan(x)) else format(x, spec)


def run(args):
    from ..report.profile import anneal_profile, write_profile

    if not math.isfinite(args.transverse) or args.transverse <= 0:
        raise InputError(f"--transverse must be a positive number, got {args.transverse}")
    path = Path(args.file)
    inst = load_instance(path)
    out = Path(args.out) if args.out else path.parent
    if out.exists() and not out.is_dir():  # refused before the anneal, not after it
        raise InputError(f"{out} is a file, not a folder to write the profile into")
    prof = anneal_profile(inst, points=args.points, reads=args.reads, sweeps=args.sweeps, seed=args.seed,
                          transverse=args.transverse, scale=args.scale)
    files = write_profile(prof, out, f"{path.stem}-profile")
    if args.json:
        print_json({**prof.to_dict(), "files": {k: str(v) for k, v in files.items()}})
        return 0
    st, ref, fit = prof.settings, prof.reference, prof.fit
    print(f"instance   {path}: {inst.n} spins, {inst.m} couplers" + (f" on {inst.graph}" if inst.graph else ""))
    print(f"anneal     path-integral surrogate, {st['reads']} replicas, {st['sweeps']} sweeps, transverse field "
          f"{st['transverse']:g} -> 0, beta {st['temperature_beta']:.4g} ({st['beta_range_source']}); "
          f"seed {st['seed']}")
    print(f"reference  {ref['energy']:.10g}: {ref['text']}\n")
    print(f"{'s':>6} {'sweeps':>7} {'mean E':>10} {'lowest E':>10} {'residual':>10} {'changed':>8} {'frozen':>7}")
    for r in prof.rows():
        print(f"{r['s']:>6.3f} {r['sweeps_done']:>7} {r['mean_energy']:>10.4g} {r['min_energy']:>10.4g} "
              f"{r['residual_mean']:>10.4g} {_num(r['median_hamming_to_previous'], '.0f'):>8} "
              f"{100 * r['frozen_fraction']:>6.0f}%")
    print("\n(changed: median spins changed since the previous point; frozen: spins that never change again)")
    print(f"\nprogress stops near s = {fit.s_break:.3f} +- {fit.se:.3f} (95% interval {fit.ci[0]:.3f} .. "
          f"{fit.ci[1]:.3f}; {fit.method}); slope {fit.slope_before:.4g} before, {fit.slope_after:.4g} after; "
          f"R^2 {_num(fit.r2, '.3f')}")
    late = prof.late()
    print(f"late in the anneal (s >= {late['s']:.2f}): mean energy still falls by {late['energy_drop']:.4g} "
          f"({late['energy_drop_per_spin']:.3g} per spin); up to {late['most_changed']:.0f} spins change between "
          f"points; {100 * late['frozen']:.0f}% of spins already frozen")
    if fit.poor:
        print("POOR FIT: the break point is not reliable:")
        for note in fit.notes:
            print(f"  - {note}")
    for c in prof.cautions:
        print(f"caution: {c}")
    print("\nwrote " + ", ".join(str(p) for p in files.values()))
    return 0
