"""instgen library: file instances, find them, check them, hand them on."""

from __future__ import annotations

import argparse
import json
from pathlib import Path

from ..errors import InputError
from ..export import FORMATS
from ..io import load_instance
from ..library import ENV_VAR, Library, default_location, make_suite, verify_suite
from ..library.entry import known
from ..library.store import INDEX_NAME, SORT_KEYS
from ._common import add_json, positive_int, print_json

NAME = "library"
ORDER = 60
HELP = "the benchmark library: add, list, show, rm, verify, export, suite, check-suite"
DESCRIPTION = f"""The benchmark library: a folder with an SQLite index and one file per instance.

  instgen library add bred/*.json --tag lab-chip
  instgen library list --certified --graph chimera:4
  instgen library list --metric tts --min 1e4 --sort value --reverse
  instgen library show 3f2a9c1b
  instgen library export 3f2a9c1b --format qubo-mtx --out out/
  instgen library suite --count 12 --out suite/
  instgen library check-suite suite/

The folder is --library DIR, else ${ENV_VAR}, else ./library; `add` creates it.
IDs are the first characters of an entry's fingerprint (any unique prefix of 4+).
The same instance in another gauge or spin order is recognised and merged.
verify and check-suite exit 1 when they find problems; bad input exits 2.
"""


def _common() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(add_help=False)
    p.add_argument("--library", metavar="DIR", type=Path, default=None,
                   help=f"library folder (default: ${ENV_VAR}, else ./library)")
    return p


def _filters(p, sort=True):
    g = p.add_argument_group("filters")
    g.add_argument("--graph", metavar="SPEC", help="graph spec (chimera:4) or family (chimera)")
    g.add_argument("--min-n", type=int, metavar="N", help="at least N spins")
    g.add_argument("--max-n", type=int, metavar="N", help="at most N spins")
    cert = g.add_mutually_exclusive_group()
    cert.add_argument("--certified", action="store_const", const=True, dest="certified",
                      help="only entries with a planted or proven ground state")
    cert.add_argument("--not-proven", action="store_const", const=False, dest="certified",
                      help="only entries whose optimum is not proven")
    g.add_argument("--tag", action="append", default=[], metavar="TAG", help="only entries with this tag (repeatable)")
    g.add_argument("--metric", metavar="NAME", help="hardness metric to filter or sort on")
    g.add_argument("--solver", metavar="NAME", help="only measurements by this solver")
    g.add_argument("--min", type=float, dest="min_value", metavar="V", help="metric value at least V")
    g.add_argument("--max", type=float, dest="max_value", metavar="V", help="metric value at most V")
    if sort:
        g.add_argument("--sort", choices=SORT_KEYS, default="added", help="sort key (value = the metric)")
        g.add_argument("--reverse", action="store_true", help="largest first")


def _filter_args(args) -> dict:
    out = {k: getattr(args, k) for k in ("graph", "min_n", "max_n", "certified", "metric", "solver",
                                          "min_value", "max_value")}
    out["tags"] = args.tag
    return {k: v for k, v in out.items() if v not in (None, [])}


def _formats(values) -> list[str]:
    out = [f.strip() for v in values for f in v.split(",") if f.strip()]
    for f in out:
        FORMATS.get(f)
    return out or ["json"]


def add_arguments(p):
    common = _common()
    sub = p.add_subparsers(dest="action", metavar="ACTION", parser_class=type(p))
    p.set_defaults(_library_help=p.print_help)
    fmt_help = "export format, repeatable or comma-separated: " + "; ".join(
        f"{f.name} ({f.summary})" for f in map(FORMATS.get, FORMATS.names()))

    a = sub.add_parser("add", parents=[common], help="file instance files (creates the library if needed)")
    a.add_argument("files", nargs="+", metavar="FILE", help="instance files")
    a.add_argument("--tag", action="append", default=[], metavar="TAG", help="tag to attach (repeatable)")
    add_json(a)
    a.set_defaults(_action=_add)

    ls = sub.add_parser("list", parents=[common], help="list entries, with filters")
    _filters(ls)
    add_json(ls)
    ls.set_defaults(_action=_list)

    sh = sub.add_parser("show", parents=[common], help="everything the library knows about one entry")
    sh.add_argument("id", metavar="ID")
    add_json(sh)
    sh.set_defaults(_action=_show)

    rm = sub.add_parser("rm", parents=[common], help="remove entries")
    rm.add_argument("ids", nargs="+", metavar="ID")
    rm.set_defaults(_action=_rm)

    v = sub.add_parser("verify", parents=[common], help="check files, checksums and stored optima (exit 1 on problems)")
    v.add_argument("--tidy", action="store_true", help="also delete files that belong to no entry")
    add_json(v)
    v.set_defaults(_action=_verify)

    ex = sub.add_parser("export", parents=[common], help="write entries for other tools")
    ex.add_argument("ids", nargs="*", metavar="ID", help="entries to export (or select with filters / --all)")
    ex.add_argument("--all", action="store_true", help="every entry matching the filters")
    ex.add_argument("--format", action="append", default=[], metavar="F", help=fmt_help)
    ex.add_argument("-o", "--out", required=True, type=Path, metavar="DIR", help="folder to write into")
    ex.add_argument("--overwrite", action="store_true", help="replace files that already exist")
    _filters(ex, sort=False)
    ex.set_defaults(_action=_export)

    su = sub.add_parser("suite", parents=[common], help="pick K entries stratified by size and hardness")
    su.add_argument("--count", type=positive_int, required=True, metavar="K", help="number of instances")
    su.add_argument("-o", "--out", required=True, type=Path, metavar="DIR", help="new or empty folder to write")
    su.add_argument("--size-groups", type=positive_int, default=4, metavar="G", help="size groups (default 4)")
    su.add_argument("--format", action="append", default=[], metavar="F", help=fmt_help + " (json always)")
    su.add_argument("--include-not-proven", action="store_true", help="allow entries whose optimum is not proven")
    _filters(su, sort=False)
    su.set_defaults(_action=_suite)

    cs = sub.add_parser("check-suite", help="re-check a suite folder (no library needed; exit 1 on problems)")
    cs.add_argument("dir", type=Path, metavar="DIR")
    add_json(cs)
    cs.set_defaults(_action=_check_suite)


def run(args):
    if not getattr(args, "_action", None):
        args._library_help()
        return 2
    return args._action(args)


def _open(args, create=False) -> Library:
    return Library.open(args.library if args.library is not None else default_location(), create=create)


# ----------------------------------------------------------------- actions
def _add(args):
    instances = [(f, load_instance(f)) for f in args.files]  # all read before anything is written
    root = args.library if args.library is not None else default_location()
    fresh = not (root / INDEX_NAME).exists()
    results = []
    with _open(args, create=True) as lib:
        if fresh and not args.json:
            print(f"created a new library at {root}")
        for f, inst in instances:
            r = lib.add(inst, tags=args.tag, provenance={"source_file": str(f)})
            results.append({"file": str(f), "id": r.id, "fingerprint": r.fingerprint, "new": r.new,
                            "merged": r.changes})
            if not args.json:
                if r.new:
                    print(f"{r.id}  added      {f}")
                else:
                    merged = "; merged " + ", ".join(r.changes) if r.changes else "; nothing new"
                    print(f"{r.id}  duplicate  {f} (same instance up to gauge and spin order{merged})")
    if args.json:
        print_json(results)
    return 0


def _list(args):
    with _open(args) as lib:
        entries = lib.list(sort=args.sort, reverse=args.reverse, **_filter_args(args))
    if args.json:
        print_json([e.to_dict() for e in entries])
        return 0
    if not entries:
        print("no entries match")
        return 0
    metric = args.metric
    col = (f"{metric}[{args.solver}]" if args.solver else metric) if metric else "SCORES"
    rows = [("ID", "GRAPH", "N", "M", "FIELDS", "OPTIMUM", col, "TAGS")]
    for e in entries:
        s = e.latest(metric, args.solver) if metric else None
        if not metric:
            figure = str(len(e.scores))
        elif not known(s):
            figure = "unknown" if s else "-"
        else:
            figure = f"{s.value:.4g}" + (f" ({s.kind})" if s.kind != "value" else "")
        rows.append((e.id, e.graph or "-", str(e.n), str(e.m), "yes" if e.has_fields else "no",
                     e.optimum_text, figure, ",".join(e.tags) or "-"))
    widths = [max(len(r[k]) for r in rows) for k in range(len(rows[0]))]
    for r in rows:
        print("  ".join(x.ljust(w) for x, w in zip(r, widths)).rstrip())
    unc = sum(not e.certified for e in entries)
    line = f"{len(entries)} entr{'y' if len(entries) == 1 else 'ies'}"
    if unc:
        line += (f"; {unc} not proven: their optimum is the best state found (or unknown), "
                 "not a proven ground state")
    print(line)
    return 0


def _show(args):
    with _open(args) as lib:
        e = lib.get(args.id)
    if args.json:
        print_json(e.to_dict(state=True))
        return 0
    c = e.certificate
    print(f"id            {e.id}")
    print(f"fingerprint   {e.fingerprint}")
    print(f"file          {e.path}")
    print(f"graph         {e.graph or '(none given)'}  n={e.n}  m={e.m}")
    print(f"alphabet      coupling {e.couplings or 'unknown'}, field {e.fields or ('yes' if e.has_fields else 'none')}")
    print(f"optimum       {e.optimum_text}")
    if c is not None:
        count = "unknown" if c.ground_states is None else str(c.ground_states)
        print(f"certificate   method {c.method}, {c.seconds:.3g} s, ground states: {count}")
        if not e.certified:
            print("              not a proven optimum: a lower energy may exist")
    print(f"tags          {', '.join(e.tags) or '-'}")
    print(f"added         {e.added}  (created {e.created or 'unknown'}; filed {e.sightings} time(s))")
    prov = {k: v for k, v in e.provenance.items() if k != "created"}
    print("provenance    " + (json.dumps(prov, sort_keys=True, default=str) if prov else "-"))
    print(f"measurements  {len(e.scores)}")
    for s in e.scores:
        ci = f" [{_num(s.ci[0])}, {_num(s.ci[1])}]" if s.ci else ""
        bound = "" if s.kind == "value" else f" ({s.kind})"
        print(f"  {s.metric} = {_num(s.value)}{bound}{ci} {s.units}".rstrip()
              + f"  solver {s.solver or '?'}, reads {s.reads}, seeds {len(s.seeds)}")
        if s.schedule:
            print(f"      schedule {json.dumps(s.schedule, sort_keys=True, default=str)}")
        for note in s.notes:
            print(f"      note: {note}")
    return 0


def _num(x) -> str:
    """A figure for people: unbounded interval ends and unknown values said in words."""
    if x is None:
        return "unbounded"
    return "unknown" if x != x else f"{x:.6g}"


def _rm(args):
    with _open(args) as lib:
        fps = [lib.resolve(i) for i in args.ids]  # every id checked before anything is removed
        for fp in fps:
            lib.remove(fp)
            print(f"removed {fp[:12]}")
    return 0


def _report(report, what, as_json) -> int:
    if as_json:
        print_json({"ok": report.ok, "checked": report.checked, "problems": report.problems, "notes": report.notes})
    else:
        for p in report.problems:
            print(f"PROBLEM  {p}")
        for n in report.notes:
            print(f"note     {n}")
        verdict = "OK" if report.ok else f"{len(report.problems)} problem(s)"
        print(f"checked {report.checked} {what}: {verdict}")
    return 0 if report.ok else 1


def _verify(args):
    with _open(args) as lib:
        report = lib.verify(tidy=args.tidy)
    return _report(report, "entries", args.json)


def _export(args):
    formats = _formats(args.format)
    filters = _filter_args(args)
    with _open(args) as lib:
        if args.ids:
            ids = args.ids
        elif args.all or filters:
            ids = [e.fingerprint for e in lib.list(**filters)]
        else:
            raise InputError("name the entries to export (IDs), or select them with filters or --all")
        written = lib.export(ids, formats, args.out, overwrite=args.overwrite)
    for p in written:
        print(p)
    print(f"wrote {len(written)} file(s) for {len(ids)} entr{'y' if len(ids) == 1 else 'ies'} into {args.out}")
    return 0


def _suite(args):
    formats = _formats(args.format)
    with _open(args) as lib:
        result = make_suite(lib, args.count, args.out, size_groups=args.size_groups, formats=formats,
                            include_not_proven=args.include_not_proven, **_filter_args(args))
    print((result.directory / "summary.txt").read_text(), end="")
    print(f"wrote {len(result.files)} files into {result.directory}")
    return 0


def _check_suite(args):
    return _report(verify_suite(args.dir), "suite instances", args.json)
