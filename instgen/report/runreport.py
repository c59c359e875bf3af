"""The HTML page for a run folder (see :mod:`instgen.report.html`).

Everything shown comes from ``summary.json``, ``log.jsonl`` and the
``winners/`` files, except two things measured afresh while the report
is written, and captioned as such: residual energy at every sweep count of the
grid (the run stores it at one count) and the anneal profiles of the best
winners.  Their seeds derive from the report's ``seed``.
"""

from __future__ import annotations

import math
from pathlib import Path

from ..errors import InstgenError
from ..seeds import derive_seed
from . import plots
from .html import (BOUND_NOTE, CURVES_SHOWN, PLOTS_DIR, esc, figure, fmt, footer_text, load_run, num_cell, page,
                   score_cell, score_head, shown_path, status_cell, table, text_cell)


def _save(fig, folder: Path, name: str) -> bytes:
    png = plots.png_bytes(fig)
    from ..io import atomic_write

    atomic_write(folder / PLOTS_DIR / name, png)
    return png


def _score(entry: dict, metric: str, solver: str) -> dict | None:
    return next((s for s in entry["scores"] if s["metric"] == metric and s["solver"] == solver), None)


def _load_winner(folder: Path, entry: dict):
    from ..io import load_instance

    if not entry.get("file"):
        return None
    path = folder / "winners" / entry["file"]
    return load_instance(path) if path.is_file() else None


def _curve(folder, entry, run, reads, measure, seed, notes):
    """TTS per sweep count (stored, else measured) and residual energy per count (measured)."""
    from ..scoring import measure_many

    solver = run["sampler"]
    tts = _score(entry, "tts", solver)
    inst = _load_winner(folder, entry) if (measure or tts is None) else None
    sched = (tts or (entry["scores"][0] if entry["scores"] else {})).get("schedule") or {}
    options = {solver: {"transverse": sched["transverse"]}} if solver == "pimc" and "transverse" in sched else None
    common = dict(reads=reads, beta_range=run["beta_range"], options=options,
                  schedule={"interpolation": sched.get("interpolation", "geometric")})
    if tts is None or not tts.get("extra", {}).get("per_sweeps"):
        if inst is None or not measure:
            return None
        tts = measure_many(inst, ["tts"], [solver], sweeps=run["sweeps"],
                           seed=derive_seed(seed, "report-tts", entry.get("key", entry["file"])), **common)[0].to_dict()
        notes.append(f"winner {entry['rank']}: its TTS per sweep count was not stored, so it was measured afresh "
                     f"for this report ({reads} reads per sweep count).")
    rows = tts["extra"]["per_sweeps"]
    c = {"label": f"#{entry['rank']} {entry['file']}", "sweeps": [r["sweeps"] for r in rows],
         "tts": [math.nan if r["tts"] is None else r["tts"] for r in rows], "tts_ci": [r.get("tts_ci") for r in rows],
         "tts_kind": [r.get("kind", "value") for r in rows], "best_sweeps": tts["extra"].get("best_sweeps"),
         "best_kind": tts.get("kind", "value"),
         "residual": [], "residual_ci": []}
    if measure and inst is not None:
        for k in c["sweeps"]:
            s = measure_many(inst, ["residual"], [solver], sweeps=[k],
                             seed=derive_seed(seed, "report-residual", entry.get("key", entry["file"]), k), **common)[0]
            c["residual"].append(s.value)
            c["residual_ci"].append(list(s.ci) if s.ci else [s.value, s.value])
    return c


def _winners_table(summary: dict) -> str:
    run = summary["run"]
    metrics = sorted({s["metric"] for e in summary["winners"] for s in e["scores"]})
    pairs = [(m, s) for m in metrics for s in run["solvers"]]
    head = ["#", "file", "spins", "couplers", "ground-state energy", "how it is known", "certify time (s)",
            "ground states found", "found in generation"]
    planted = any(e.get("construction") for e in summary["winners"])
    head += ["planted family"] if planted else []
    head += [score_head(m, s, [_score(e, m, s) for e in summary["winners"]]) for m, s in pairs]
    rows = []
    for e in summary["winners"]:
        c = e["certificate"]
        gen = e.get("generation")
        rows.append([num_cell(e["rank"]), text_cell(e["file"]), num_cell(e["n"]), num_cell(e["m"]),
                     num_cell(c["energy"], 10), status_cell(c), num_cell(c.get("seconds"), 3),
                     num_cell(c.get("ground_states")), num_cell(gen)]
                    + ([text_cell(e.get("construction") or "–")] if planted else [])
                    + [score_cell(_score(e, m, s)) for m, s in pairs])
    return table(head, rows, "winners")


def _baseline_table(summary: dict) -> str:
    run = summary["run"]
    base = summary["baseline"]["instances"]
    metrics = sorted({s["metric"] for e in base for s in e["scores"]})
    pairs = [(m, s) for m in metrics for s in run["solvers"]]
    head = ["#", "spins", "couplers", "ground-state energy", "how it is known"] + [
        score_head(m, s, [_score(e, m, s) for e in base]) for m, s in pairs]
    rows = [[num_cell(i), num_cell(e["n"]), num_cell(e["m"]), num_cell(e["certificate"]["energy"], 10),
             status_cell(e["certificate"])] + [score_cell(_score(e, m, s)) for m, s in pairs]
            for i, e in enumerate(base, 1)]
    return table(head, rows, "baseline")


def _stall_words(prog: dict) -> str:
    if prog.get("stalled"):
        return (f"The search stalled: the confirmed best has not improved since generation "
                f"{prog['first_confirmed_generation']}, its first confirmation.")
    if prog.get("last_improvement_generation") is not None:
        return f"The confirmed best last improved in generation {prog['last_improvement_generation']}."
    return ""


def _comparison_table(summary: dict) -> str:
    rows = []
    for r in summary["comparison"]:
        ci = r.get("ratio_ci")
        sign = {"lower bound": "≥ ", "upper bound": "≤ "}.get(r.get("ratio_kind"), "")
        rows.append([text_cell(r["metric"]), text_cell(r["solver"]),
                     text_cell("random, same graph and alphabet" if r["against"] == "random" else "unbred start"),
                     num_cell(r["winners_median"]), num_cell(r["baseline_median"]),
                     text_cell("–" if r["ratio"] is None else f"{sign}{fmt(r['ratio'], 3)}"),
                     text_cell("–" if ci is None else f"{fmt(ci[0], 3)} to {fmt(ci[1], 3)}"),
                     text_cell(r["verdict"]), num_cell(r["winners"]), num_cell(r["baseline"])])
    return table(["metric", "solver", "against", "winners median", "baseline median", "ratio (winners / baseline)",
                  "ratio, 95% interval", "winners are", "winners", "baseline instances"], rows, "comparison") + (
        '<p class="note">The interval resamples the instances of each group (bootstrap of the ratio of medians); '
        "with few instances it is wide. The verdict follows the interval: harder or easier only when it excludes "
        "1. Where some figures are bounds, each end of the interval is computed with those bounds at their worst "
        "case for that end (an upper bound as 0, a lower bound as infinite), so the verdict holds whatever the "
        "bounds hide; no ratio is given when every figure of a group is a bound.</p>")


SETTING_NAMES = {"name": "run name", "id": "run id", "seed": "run seed", "graph": "graph", "n": "spins",
                 "m": "couplers", "metric": "fitness metric", "sampler": "search sampler",
                 "solvers": "solvers measured on", "sweeps": "sweep counts",
                 "beta_range": "inverse temperature range (hot, cold)", "preset_hash": "preset checksum",
                 "folder": "run folder", "search_solvers": "further search solvers (fitness is the least over all)"}


def _settings_table(summary: dict) -> str:
    run = dict(summary["run"])
    rules = run.pop("rules", {}) or {}
    show = lambda v: "–" if v is None else ", ".join(map(str, v)) if isinstance(v, list) else v
    empty = lambda v: v is None or v == [] or v == ""  # a setting that is not set is not shown
    if run.get("folder"):
        run["folder"] = Path(run["folder"]).name  # the user's own paths stay out of a page that travels
    rows = [[text_cell(SETTING_NAMES.get(k, k.replace("_", " "))), text_cell(show(v))] for k, v in run.items()
            if not empty(v)]
    rows += [[text_cell(f"coupling rules: {k.replace('_', ' ')}"), text_cell(show(v))] for k, v in rules.items()
             if not empty(v)]
    rows += [[text_cell("stopped because"), text_cell(summary.get("stopped"))],
             [text_cell("generations"), num_cell(summary.get("generations"))],
             [text_cell("evaluations"), num_cell(summary.get("evaluations"))],
             [text_cell("search time (s)"), num_cell(summary.get("elapsed"), 4)],
             [text_cell("random baseline instances"), num_cell(summary["baseline"]["count"])]]
    pin = (summary.get("measuring") or {}).get("pinning")
    if pin:
        rows += [[text_cell("pinning TTS99: budget per figure (spin updates)"), num_cell(pin["budget"])],
                 [text_cell("pinning TTS99: longest anneal (sweeps)"), num_cell(pin["max_sweeps"])],
                 [text_cell("pinning TTS99: successes at the optimum"), num_cell(pin["successes"])]]
    return table(["setting", "value"], rows, "settings")


def _profile_section(folder, summary, profiles, reads, sweeps, seed, notes) -> str:
    from .profile import anneal_profile, write_profile

    parts = []
    for e in summary["winners"][:profiles]:
        inst = _load_winner(folder, e)
        if inst is None:
            notes.append(f"winner {e['rank']}: its file {e['file']} is missing from winners/, so it has no "
                         "anneal profile.")
            continue
        try:
            prof = anneal_profile(inst, points=20, reads=reads, sweeps=sweeps, seed=derive_seed(seed, "report",
                                  "profile", e["rank"]), beta_range=summary["run"]["beta_range"])
        except InstgenError as exc:
            notes.append(f"winner {e['rank']}: no anneal profile ({exc}).")
            continue
        stem = f"profile-{e['rank']:02d}"
        paths = write_profile(prof, folder / PLOTS_DIR, stem)
        fit = prof.fit
        verdict = ("<strong>poor fit</strong>: " + esc("; ".join(fit.notes))) if fit.poor else "the fit is good"
        late = prof.late()
        caption = (f"Anneal profile of winner #{e['rank']} ({esc(e['file'])}), measured for this report on the "
                   f"path-integral surrogate. From s = {late['s']:.2f} to the end the mean energy still falls by "
                   f"{late['energy_drop']:.3g} ({late['energy_drop_per_spin']:.3g} per spin), replicas change up "
                   f"to {late['most_changed']:.0f} spins between points (median), and "
                   f"{100 * late['frozen']:.0f}% of spins are already frozen. Energy stops falling at its early "
                   f"rate near s = "
                   f"{fit.s_break:.3f} ± {fit.se:.3f} (95% interval {fit.ci[0]:.3f} to {fit.ci[1]:.3f}, "
                   f"{esc(fit.method)}); {verdict}. Reference: {esc(prof.reference['text'])}. "
                   f"Data: {esc(paths['csv'].name)}, {esc(paths['json'].name)}.")
        parts.append(figure(paths["png"].read_bytes(), f"anneal profile of winner {e['rank']}", caption))
        notes += [f"winner {e['rank']} profile: {c}" for c in prof.cautions if "surrogate" not in c]
    return "".join(parts)


def run_page(folder: Path, *, reads: int, profiles: int, profile_reads: int, profile_sweeps: int, measure: bool,
             seed: int) -> str:
    """The run report as one HTML string (plots also written to ``FOLDER/plots/``)."""
    summary, records = load_run(folder)
    run = summary["run"]
    notes: list[str] = []
    sections = []
    winners = summary["winners"]
    lead = (f"{len(winners)} winner(s) bred on <b>{esc(run['graph'])}</b> ({run['n']} spins, {run['m']} couplers, "
            f"alphabet {esc((run.get('rules') or {}).get('couplings', '?'))}) for <b>{esc(run['metric'])}</b> "
            f"on the {esc(run['sampler'])} surrogate. Stopped after {summary['generations']} generations "
            f"({esc(summary['stopped'])}), {summary['evaluations']} evaluations in {fmt(summary['elapsed'], 3)} s. "
            f"Winners are re-measured on fresh seeds against their certified energy.")
    if summary["comparison"]:
        start = summary.get("start") or {}
        sections.append("<h2>What breeding added</h2>" + _comparison_table(summary))
        sections.append(figure(_save(plots.baseline_figure(summary), folder, "baseline.png"),
                               "winners against the baselines",
                               f"Each dot is one instance measured in this run; bars are confidence intervals, "
                               f"the thick line the median, open triangles bounds rather than values. Random "
                               f"instances: {summary['baseline']['count']} of the same graph and alphabet"
                               + (f"; unbred start: {start['count']} drawn as the search's first generation."
                                  if start.get("instances") else
                                  " (for a free search these are also its unbred start).")))
    if records:
        sections.append("<h2>Fitness by generation</h2>" + figure(
            _save(plots.fitness_figure(records, run["metric"], run["sampler"]), folder, "fitness.png"),
            "fitness by generation",
            "Search fitness (blue) is measured with few reads and pooled over generations, so it is noisy and "
            "optimistic; confirmed fitness (red-orange steps and diamonds) is measured again on fresh seeds and "
            "decides the winners. The dotted line is the first generation's median: the unbred start. "
            + _stall_words(summary.get("search_progress") or {})))
    else:
        notes.append("log.jsonl is missing or empty, so there is no fitness-by-generation plot.")
    sections.append("<h2>Winners and their certificates</h2>" + (_winners_table(summary) + BOUND_NOTE if winners else
                                                                  "<p>No candidate was confirmed.</p>"))
    curves = []
    for e in winners[:CURVES_SHOWN]:
        try:
            c = _curve(folder, e, run, reads, measure, seed, notes)
        except InstgenError as exc:
            notes.append(f"winner {e['rank']}: no sweep curve ({exc}).")
            continue
        if c:
            curves.append(c)
    if curves:
        shown = f"the best {len(curves)} of {len(winners)} winners" if len(winners) > len(curves) else "every winner"
        resid = (f"Residual energy: measured afresh for this report, {reads} reads per sweep count, against each "
                 "winner's ground-state energy as the table gives it (proven or not)" if measure else "Residual energy: not measured (measure=False)")
        sections.append("<h2>Time-to-solution and residual energy against anneal length</h2>" + figure(
            _save(plots.sweeps_figure(curves, run["sampler"]), folder, "sweeps.png"), "TTS and residual energy",
            f"On {esc(run['sampler'])}, {shown}. TTS99 per sweep count from the run's final measurement; the star "
            f"marks the optimum (a bound when it sits at the edge of the grid). {esc(resid)}."))
    if profiles and winners:
        sections.append("<h2>Anneal profiles</h2>" + _profile_section(folder, summary, profiles, profile_reads,
                                                                      profile_sweeps, seed, notes))
    if summary["baseline"]["instances"]:
        sections.append("<h2>Random baseline instances</h2>" + _baseline_table(summary) + BOUND_NOTE)
    sections.append("<h2>Run settings</h2>" + _settings_table(summary))
    if summary.get("library"):
        lib = summary["library"]
        sections.append(f"<p>Winners filed into the library {esc(shown_path(lib['path'], folder))} ({lib['filed']} filed, "
                        f"{lib['new']} new).</p>")
    cautions = list(summary["cautions"]) + notes
    title = f"Breeding run “{run['name']}”"
    return page(title, lead, cautions, sections, footer_text(folder))
