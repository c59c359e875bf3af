"""The text summary printed at the end of a breeding run."""

from __future__ import annotations

import math
import sys


def _num(v, unit="", digits=3) -> str:
    if v is None:
        return "-"
    if isinstance(v, float) and math.isinf(v):
        return "never reached"
    return f"{v:.{digits}g}{unit}"


def score_text(s: dict, units: bool = True) -> str:
    """One score as a reader would say it: value, interval, and whether it is a bound."""
    units = f" {s['units']}" if s.get("units") and units else ""
    if s["kind"] == "lower bound":
        text = f">= {_num(s['value'])}{units}"
    elif s["kind"] == "upper bound":
        text = f"<= {_num(s['value'])}{units}"
    else:
        text = f"{_num(s['value'])}{units}"
    ci = s.get("ci")
    if ci and all(x is not None for x in ci):
        text += f" [{_num(ci[0], digits=2)}, {_num(ci[1], digits=2)}]"
    extra = s.get("extra") or {}
    if s["metric"] == "tts" and extra.get("best_sweeps") and s["kind"] != "lower bound":
        lo, hi = extra.get("best_sweeps_ci") or (None, None)
        text += f" at {extra['best_sweeps']:,}" + (f" ({lo:,}-{hi:,})" if lo is not None and lo != hi else "")
    return text


def _metric(entries) -> str:
    return next((e["scores"][0]["metric"] for e in entries if e["scores"]), "-")


def _cells(entries, solvers, metric) -> list[list[str]]:
    """Per instance, the score text under every solver ('-' where there is none)."""
    rows = []
    for e in entries:
        row = []
        for solver in solvers:
            sc = next((s for s in e["scores"] if s["solver"] == solver and s["metric"] == metric), None)
            row.append(score_text(sc, units=False) if sc else "-")
        rows.append(row)
    return rows


def _widths(groups, solvers) -> list[int]:
    """Column width per solver, wide enough for the header and every cell of every table."""
    widths = []
    for k, solver in enumerate(solvers):
        cells = [row[k] for entries in groups for row in _cells(entries, solvers, _metric(entries))]
        head = _head(solver, [e for g in groups for e in g])
        widths.append(max([len(head)] + [len(c) for c in cells]))
    return widths


def _head(solver, entries) -> str:
    metric = _metric(entries)
    units = next((s.get("units") for e in entries for s in e["scores"] if s["metric"] == metric and s.get("units")), "")
    label = "TTS99" if metric == "tts" else metric
    return f"{solver} {label}" + (f" ({units})" if units else "")


def _table(w, entries, solvers, heads, widths) -> None:
    """One line per instance: optimum, how it is known, the first metric under every solver."""
    metric = _metric(entries)
    w(f"{'#':>2}  {'file':<26} {'optimum':>10}  {'how known':<22}"
      + "".join(f"  {_head(s, entries):<{wd}}" for s, wd in zip(solvers, widths)).rstrip() + "\n")
    for e, head, cells in zip(entries, heads, _cells(entries, solvers, metric)):
        c = e["certificate"]
        if c["method"] == "none":
            line = f"{head} {'-':>10}  {'not needed':<22}"
        else:
            line = f"{head} {c['energy']:>10.6g}  {c['method'] + ' (' + c['status'] + ')':<22}"
        line += "".join(f"  {text:<{wd}}" for text, wd in zip(cells, widths))
        w(line.rstrip() + "\n")


def print_summary(summary: dict, stream=None) -> None:
    out = stream or sys.stdout
    run = summary["run"]
    w = out.write
    w(f"\nrun {run['name']} on {run['graph']} ({run['n']} spins, {run['m']} couplers, "
      f"alphabet {run['rules']['couplings']}): stopped after {summary['generations']} generations "
      f"({summary['stopped']}), {summary['evaluations']} evaluations in {summary['elapsed']:.0f} s\n")
    searched = run["sampler"] + ("".join(f", {x}" for x in run.get("search_solvers", [])))
    least = " (the least over these)" if run.get("search_solvers") else ""
    w(f"fitness: {run['metric']} on {searched}{least}; figures below re-measured on fresh seeds "
      f"against the certified energy\n")
    m = summary.get("measuring")
    if m and (m["winners"]["figures"] or m["baseline"]["figures"]):
        w(f"TTS99 at the optimal sweep count (value [95% interval] at sweeps [interval]), pinned for each solver "
          f"within {m['pinning']['budget']:.3g} spin updates and {m['pinning']['max_sweeps']:,} sweeps: "
          f"{m['winners']['pinned']} of {m['winners']['figures']} winner and {m['baseline']['pinned']} of "
          f"{m['baseline']['figures']} baseline figures pinned, for "
          f"{m['winners']['spin_updates'] + m['baseline']['spin_updates']:.3g} spin updates "
          f"({m['winners']['seconds'] + m['baseline']['seconds']:.0f} s of sampling)\n")
    w("\n")
    winners = summary["winners"]
    base = summary["baseline"]
    widths = _widths([winners, base["instances"], (summary.get("start") or {}).get("instances", [])],
                     run["solvers"])
    if winners:
        _table(w, winners, run["solvers"], [f"{e['rank']:>2}  {e['file']:<26}" for e in winners], widths)
        planted = [e for e in winners if e.get("planted_energy") is not None]
        if planted:
            w(f"planted energies (the construction's proof, re-checked): "
              + ", ".join(f"#{e['rank']} {e['planted_energy']:.6g}" for e in planted) + "\n")
    else:
        w("no winners were confirmed.\n")
    if base["instances"]:
        w(f"\nrandom baseline ({base['count']} instances of the same graph and alphabet, same run and settings):\n")
        _table(w, base["instances"], run["solvers"], [f"{'r' + str(k):>2}  {'(not kept)':<26}"
                                                      for k in range(1, len(base["instances"]) + 1)], widths)
        if any(e["certificate"]["method"] == "none" for e in base["instances"]):
            w("note: the run's metric does not use the ground-state energy, so no optimum was sought for the baseline.\n")
        elif base["certified"] < base["count"]:
            w(f"note: {base['count'] - base['certified']} of {base['count']} baseline reference energies are "
              "not proven (lowest energy found, not a proof); a lower state would make those instances harder "
              "than shown.\n")
        else:
            w("note: every baseline reference energy is planted or proven.\n")
    start = summary.get("start") or {}
    if start.get("instances"):
        w(f"\nunbred start ({start['count']} instances drawn as the search's first generation is drawn, same "
          "run and settings):\n")
        _table(w, start["instances"], run["solvers"], [f"{'s' + str(k):>2}  {'(not kept)':<26}"
                                                       for k in range(1, len(start["instances"]) + 1)], widths)
    if summary["comparison"]:
        w("\nwhat breeding added (median of the winners / median of the baseline, 95% bootstrap interval over "
          "instances):\n")
        for r in summary["comparison"]:
            other = "random" if r["against"] == "random" else "unbred start"
            w(f"  {r['metric']:<8} {r['solver']:<9} vs {other:<12} winners {_num(r['winners_median'])}, "
              f"baseline {_num(r['baseline_median'])}: {r['sentence']}\n")
        if start.get("same_as") == "baseline":
            w("  (a free search starts from random instances: the random baseline is also its unbred start)\n")
    if summary.get("library"):
        lib = summary["library"]
        w(f"\nfiled {lib['filed']} winners into the library {lib['path']} ({lib['new']} new)\n")
    w(f"\nrun folder: {run['folder']}  (summary.json, log.jsonl, winners/)\n")
    for c in summary["cautions"]:
        w(f"caution: {c}\n")
