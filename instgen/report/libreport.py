"""The HTML page for a library folder (see :mod:`instgen.report.html`)."""

from __future__ import annotations

import collections
from pathlib import Path

from . import plots
from .html import (BOUND_NOTE, PLOTS_DIR, esc, figure, footer_text, num_cell, page, score_cell, score_head,
                   status_cell, table, text_cell)


def latest_scores(entry) -> dict:
    """{(metric, solver): Score} with the most recently filed measurement of each."""
    out = {}
    for s in entry.scores:
        out[s.metric, s.solver] = s
    return out


def library_points(entries) -> list[dict]:
    """One point per (entry, metric, solver) for :func:`plots.library_figure`."""
    pts = []
    for e in entries:
        for (metric, solver), s in latest_scores(e).items():
            pts.append({"metric": metric, "solver": solver, "n": e.n, "value": s.value,
                        "ci": list(s.ci) if s.ci else None, "kind": s.kind, "units": s.units,
                        "certified": e.certified})
    return pts


def library_cautions(entries) -> list[str]:
    """Plain warnings about a library's contents."""
    out = []
    unproven = [e for e in entries if not e.certified]
    if unproven:
        out.append(f"{len(unproven)} of {len(entries)} entries have an optimum that is not proven (best found only, or none); "
                   "figures for them are measured against an energy that may not be the ground state.")
    bounds = sum(1 for e in entries for s in latest_scores(e).values() if s.kind != "value")
    if bounds:
        out.append(f"{bounds} measurement(s) are bounds, not values (no success at any sweep count, or the best "
                   "sweep count at the edge of the grid); they are drawn as open triangles.")
    solvers = sorted({s.solver for e in entries for s in e.scores})
    if solvers:
        out.append("Hardness was measured on " + ", ".join(solvers) + " only; other solvers may find these "
                   "instances easier or harder.")
    per = collections.Counter(len({s.solver for s in e.scores}) for e in entries)
    if solvers and per.get(1, 0):
        out.append(f"{per[1]} entries were measured on a single solver, so their hardness may be an artefact "
                   "of that one method.")
    bare = sum(1 for e in entries if not e.scores)
    if bare:
        out.append(f"{bare} entries have no measurement at all and do not appear in the plot.")
    if not entries:
        out.append("The library is empty.")
    return out


def library_page(folder: Path) -> str:
    """The library report as one HTML string (the plot also goes to ``FOLDER/plots/``)."""
    from ..io import atomic_write
    from ..library import Library

    with Library.open(folder) as lib:
        entries = lib.list(sort="n")
    pairs = sorted({k for e in entries for k in latest_scores(e)})
    sections = []
    pts = library_points(entries)
    if pts:
        png = plots.png_bytes(plots.library_figure(pts))
        atomic_write(folder / PLOTS_DIR / "hardness-vs-size.png", png)
        sections.append("<h2>Hardness against size</h2>" + figure(
            png, "library hardness against size",
            "Latest measurement of each entry per solver. Filled markers: planted or proven optimum; open markers: "
            "optimum not proven; triangles: bounds; bars: confidence intervals."))
    # Two tables, so that each fits a 1280-pixel page: what each entry is, then what was measured on it.
    head = ["id", "graph", "spins", "couplers", "alphabet", "ground-state energy", "how it is known", "tags",
            "added"]
    rows = []
    for e in entries:
        c = e.certificate
        rows.append([text_cell(e.id), text_cell(e.graph), num_cell(e.n), num_cell(e.m), text_cell(e.couplings or "–"),
                     num_cell(None if c is None else c.energy, 10),
                     status_cell(None if c is None else {"status": c.status, "method": c.method}),
                     text_cell(", ".join(e.tags)), text_cell(e.added[:10])])
    sections.append("<h2>Entries</h2>" + table(head, rows, "entries"))
    if pairs:
        head = ["id"] + [score_head(m, s, [latest_scores(e).get((m, s)) and latest_scores(e)[m, s].to_dict()
                                           for e in entries]) for m, s in pairs]
        rows = [[text_cell(e.id)] + [score_cell(latest_scores(e)[p].to_dict() if p in latest_scores(e) else None)
                                     for p in pairs] for e in entries]
        sections.append("<h2>Hardness of each entry</h2>" + table(head, rows, "hardness") + BOUND_NOTE)
    graphs = sorted({e.graph for e in entries})
    sizes = sorted({e.n for e in entries})
    certified = sum(e.certified for e in entries)
    span = "" if not sizes else f", {sizes[0]} spins" if len(sizes) == 1 else f", {sizes[0]} to {sizes[-1]} spins"
    lead = (f"{len(entries)} entries on {esc(', '.join(graphs) or 'no graph')}{span}; {certified} with a "
            f"planted or proven optimum.")
    name = folder.resolve().name
    title = "Benchmark library" + (f" “{name}”" if name not in ("library", "") else "")
    return page(title, lead, library_cautions(entries), sections, footer_text(folder))
