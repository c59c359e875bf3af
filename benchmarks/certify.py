"""Largest Chimera graph each certification method proves within 60 s.

Run with ``.venv/bin/python -m benchmarks.certify`` (a few minutes).  For every
method the ladder of Chimera sizes C(M, N) is climbed until the method refuses,
runs out of time, or fails to prove; the last size it proved is reported.  The
free instances have ±1 couplings (seed 1); ``planted`` gets frustrated loops at
density 0.3 on the same graphs.  ``anneal`` never proves anything by design and
is listed for its speed only.
"""

from __future__ import annotations

import argparse
import platform
import time

from instgen.certify import certify
from instgen.errors import InstgenError
from instgen.make import make_instance
from instgen.planted import plant

LADDER = [(1, 1), (1, 2), (1, 3), (2, 2), (2, 3), (3, 3), (3, 4), (4, 4), (4, 5), (5, 5), (5, 6), (6, 6),
          (8, 8), (12, 12), (16, 16)]
METHODS = ("planted", "exact", "tree", "mip", "auto")


def cpu_model() -> str:
    try:
        for line in open("/proc/cpuinfo"):
            if line.startswith("model name"):
                return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or "unknown"


def instance(method: str, m: int, n: int):
    spec = f"chimera:{m},{n}"
    if method == "planted":
        return plant(spec, "loops", seed=1, density=0.3, certify=False)
    return make_instance(spec, "pm1", seed=1)


def climb(method: str, limit: float) -> list[dict]:
    rows = []
    for m, n in LADDER:
        inst = instance(method, m, n)
        t0 = time.perf_counter()
        try:
            cert = certify(inst, method, time_limit=limit, seed=1)
            status, used, note = cert.status, cert.method, ""
        except InstgenError as exc:
            status, used, note = "refused", method, str(exc)
        seconds = time.perf_counter() - t0
        ok = status in ("planted", "proven") and seconds <= limit
        rows.append({"graph": f"chimera:{m},{n}", "n": inst.n, "status": status, "method": used,
                     "seconds": seconds, "ok": ok, "note": note})
        print(f"  {method:<8} chimera:{m},{n:<3} n={inst.n:<5} {status:<10} {used:<8} {seconds:7.2f} s"
              + (f"  ({note[:90]})" if note else ""), flush=True)
        if not ok:
            break
    return rows


def main(argv=None):
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--limit", type=float, default=60.0, help="seconds per certification (default 60)")
    p.add_argument("--methods", default=",".join(METHODS), help="comma-separated methods")
    args = p.parse_args(argv)
    print(f"CPU: {cpu_model()}; limit {args.limit:g} s per instance")
    best = {}
    for method in args.methods.split(","):
        rows = climb(method, args.limit)
        good = [r for r in rows if r["ok"]]
        best[method] = good[-1] if good else None
    print("\nlargest Chimera certified within the limit:")
    for method, r in best.items():
        print(f"  {method:<8} " + (f"{r['graph']:<14} {r['n']:>5} spins  {r['seconds']:6.2f} s  (via {r['method']})"
                                   if r else "none"))
    print("  anneal   never (its results are not proven by design)")


if __name__ == "__main__":
    main()
