"""The report's plots (matplotlib, drawn off-screen; no pyplot, no global state).

Each ``*_figure`` function takes plain data (records read from a run folder
or a library) and returns a :class:`matplotlib.figure.Figure`;
:func:`save_figure` writes it as a PNG atomically and :func:`png_bytes` gives
the bytes for embedding.  One look throughout: the Okabe-Ito colour-blind-safe
palette, labelled axes with units, bounds drawn as open triangles pointing the
way the true value may lie.
"""

from __future__ import annotations

import io
import math
from pathlib import Path

import numpy as np

from ..io import atomic_write

#: Okabe & Ito's colour-blind-safe palette.
PALETTE = {"black": "#000000", "orange": "#E69F00", "sky": "#56B4E9", "green": "#009E73",
           "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "purple": "#CC79A7"}
CYCLE = [PALETTE[k] for k in ("blue", "orange", "green", "vermillion", "purple", "sky", "black", "yellow")]
STYLE = {"font.size": 10, "axes.titlesize": 11, "axes.labelsize": 10, "legend.fontsize": 8.5,
         "axes.spines.top": False, "axes.spines.right": False, "axes.grid": True, "grid.color": "#dddddd",
         "grid.linewidth": 0.6, "axes.prop_cycle": None, "figure.dpi": 100, "savefig.dpi": 110}
#: Marker for a figure that is a bound, by Score kind.
BOUND_MARKER = {"value": "o", "lower bound": "^", "upper bound": "v"}

FITNESS_LABELS = {
    "tts": ("TTS99 at the best sweep count (sweeps)", True),
    "anneal-gain": ("anneal gain (energy per spin / coupling scale)", False),
    "residual": ("residual energy (per spin / coupling scale)", False),
    "success": ("1 - success probability", False),
    "composite": ("composite fitness (weighted sum; higher = harder)", False),
}


def _style():
    import matplotlib as mpl
    from cycler import cycler

    return mpl.rc_context({**{k: v for k, v in STYLE.items() if v is not None}, "axes.prop_cycle": cycler(color=CYCLE)})


def _figure(w: float, h: float):
    from matplotlib.figure import Figure

    return Figure(figsize=(w, h), layout="constrained")


def png_bytes(fig) -> bytes:
    """The figure as PNG bytes."""
    buf = io.BytesIO()
    with _style():
        fig.savefig(buf, format="png")
    return buf.getvalue()


def save_figure(fig, path) -> Path:
    """Write the figure to ``path`` as a PNG (atomically); returns the path."""
    return atomic_write(Path(path), png_bytes(fig))


def fitness_label(metric: str) -> tuple[str, bool]:
    """(axis label, log scale?) for a run's fitness metric; TTS fitness is stored as log10."""
    return FITNESS_LABELS.get(metric, (f"fitness '{metric}' (higher = harder)", False))


def plain_log(ax, which: str = "y", ticks=None):
    """Log scale with plain numbers (5, 20, 100) instead of powers of ten; optional fixed ticks."""
    from matplotlib.ticker import FuncFormatter, NullFormatter

    axis = ax.yaxis if which == "y" else ax.xaxis
    (ax.set_yscale if which == "y" else ax.set_xscale)("log")
    if ticks is not None:
        (ax.set_yticks if which == "y" else ax.set_xticks)(list(ticks))
    axis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
    lo, hi = (ax.get_ylim() if which == "y" else ax.get_xlim())
    if ticks is None and 0 < lo < hi < 30 * lo:  # less than a decade and a half: label 2s and 5s too
        axis.set_minor_formatter(FuncFormatter(
            lambda v, _: f"{v:g}" if round(v / 10 ** math.floor(math.log10(v)), 6) in (2, 5) else ""))
    else:
        axis.set_minor_formatter(NullFormatter())


def _finite(v):
    return v is not None and isinstance(v, (int, float)) and math.isfinite(v)


# ------------------------------------------------------------------ run plots
def fitness_figure(records: list[dict], metric: str, sampler: str = ""):
    """Fitness by generation: search best, median and quartile band; confirmed best and confirmations."""
    label, log = fitness_label(metric)
    conv = (lambda v: 10.0 ** v) if metric == "tts" else (lambda v: v)
    with _style():
        fig = _figure(7.5, 4.2)
        ax = fig.add_subplot()
        g = np.array([r["generation"] for r in records], dtype=float)
        col = lambda key: np.array([conv(r[key]) if _finite(r.get(key)) else np.nan for r in records])
        ax.fill_between(g, col("q25"), col("q75"), color=PALETTE["sky"], alpha=0.35, lw=0,
                        label="search: middle half of the population")
        ax.plot(g, col("median"), color=PALETTE["blue"], lw=1.4, ls="--", label="search: median")
        ax.plot(g, col("best"), color=PALETTE["blue"], lw=2.0, marker="o", ms=3.5, label="search: best")
        ax.step(g, col("best_confirmed"), where="post", color=PALETTE["vermillion"], lw=2.2,
                label="confirmed on fresh seeds: best so far")
        if records and _finite(records[0].get("median")):
            ax.axhline(conv(records[0]["median"]), color=PALETTE["black"], lw=1.0, ls=":",
                       label="first generation's median (the unbred start)")
        cx = [gi for gi, r in zip(g, records) for v in r.get("confirmed_this_generation") or [] if _finite(v)]
        cy = [conv(v) for r in records for v in r.get("confirmed_this_generation") or [] if _finite(v)]
        if cx:
            ax.scatter(cx, cy, marker="D", s=22, facecolor="white", edgecolor=PALETTE["vermillion"], zorder=3,
                       label="confirmed this generation")
        if log:
            plain_log(ax)
        ax.set_xlabel("generation")
        ax.set_ylabel(label)
        ax.set_title(f"Fitness by generation ({metric}{' on ' + sampler if sampler else ''}; higher = harder)")
        if len(g) and g.max() <= 20:
            ax.set_xticks(g)
        ax.legend(loc="best", frameon=False)
    return fig


def baseline_figure(summary: dict):
    """Winners against the baselines: one panel per (metric, solver), CIs as bars, the verdicts in the title."""
    rows = summary.get("comparison") or []
    panels = list(dict.fromkeys((r["metric"], r["solver"]) for r in rows))
    n = max(len(panels), 1)
    cols = min(n, 3)
    start = (summary.get("start") or {}).get("instances") or []
    groups = [("random\n(baseline)", summary["baseline"]["instances"], PALETTE["black"])]
    if start:
        groups.append(("unbred\nstart", start, PALETTE["sky"]))
    groups.append(("winners", summary["winners"], PALETTE["orange"]))
    with _style():
        fig = _figure(max(6.5, 3.9 * cols), 4.0 * math.ceil(n / cols))
        for i, (metric, solver) in enumerate(panels):
            ax = fig.add_subplot(math.ceil(n / cols), cols, i + 1)
            units = ""
            for x, (label, entries, colour) in enumerate(groups):
                scores = [s for e in entries for s in e["scores"] if s["metric"] == metric and s["solver"] == solver]
                units = units or next((s.get("units", "") for s in scores), "")
                xs = x + np.linspace(-0.18, 0.18, len(scores)) if len(scores) > 1 else np.full(len(scores), x)
                for xi, s in zip(xs, scores):
                    if not _finite(s["value"]):
                        continue
                    ci = s.get("ci")
                    if ci and all(_finite(c) for c in ci):
                        ax.plot([xi, xi], ci, color=colour, lw=1, alpha=0.6)
                    mk = BOUND_MARKER.get(s.get("kind", "value"), "o")
                    ax.scatter([xi], [s["value"]], marker=mk, s=30, zorder=3,
                               facecolor=colour if mk == "o" else "white", edgecolor=colour)
                vals = [s["value"] for s in scores if _finite(s["value"])]
                if vals:
                    med = float(np.median(vals))
                    ax.plot([x - 0.3, x + 0.3], [med, med], color=colour, lw=2.2)
            ax.set_xticks(range(len(groups)), [g[0] for g in groups])
            ax.set_xlim(-0.6, len(groups) - 0.4)
            if metric == "tts":
                plain_log(ax)
            words = []
            for r in rows:
                if (r["metric"], r["solver"]) == (metric, solver):
                    ratio = f"{r['ratio']:.2g}x" if _finite(r.get("ratio")) else "no ratio"
                    words.append(f"vs {'random' if r['against'] == 'random' else 'start'}: {ratio}, {r['verdict']}")
            label = "TTS99" if metric == "tts" else metric
            ax.set_title(f"{label} on {solver}\n" + "\n".join(words), fontsize=8)
            ax.set_ylabel(f"{label} ({units})" if units else label)
            ax.grid(axis="x", visible=False)
        if not panels:
            fig.add_subplot().text(0.5, 0.5, "no comparison in summary.json", ha="center")
        fig.suptitle("Winners against random instances of the same graph and alphabet"
                     + (" and the unbred start" if start else ""), fontsize=10)
    return fig


def sweeps_figure(curves: list[dict], solver: str):
    """TTS99 and residual energy against sweeps per winner, the optimum marked with a star.

    Each curve is a dict with ``label``, ``sweeps``, ``tts``, ``tts_ci`` (pairs),
    ``tts_kind`` (per sweep count), ``best_sweeps``, ``best_kind`` (the optimum's
    Score kind), ``residual`` and ``residual_ci`` (per spin; may be empty).
    """
    measured = any(c.get("residual") for c in curves)
    with _style():
        fig = _figure(11 if measured else 6.5, 4.3)
        a, b = fig.subplots(1, 2) if measured else (fig.subplots(1, 1), None)
        grid = sorted({x for c in curves for x in c["sweeps"]})
        for i, c in enumerate(curves):
            colour = CYCLE[i % len(CYCLE)]
            x = np.asarray(c["sweeps"], dtype=float)
            y = np.asarray(c["tts"], dtype=float)
            a.plot(x, y, color=colour, lw=1.5, label=c["label"])
            for xi, yi, ci, kind in zip(x, y, c["tts_ci"], c["tts_kind"]):
                if ci and _finite(ci[0]):
                    hi = ci[1] if _finite(ci[1]) else yi * 3
                    a.plot([xi, xi], [ci[0], hi], color=colour, lw=1, alpha=0.6)
                mk = BOUND_MARKER.get(kind, "o")
                a.scatter([xi], [yi], marker=mk, s=26, zorder=3, edgecolor=colour,
                          facecolor=colour if mk == "o" else "white")
            if c.get("best_sweeps") in list(c["sweeps"]):
                k = list(c["sweeps"]).index(c["best_sweeps"])
                bound = c.get("best_kind", "value") != "value"  # optimum at the grid's edge: only a bound
                a.scatter([x[k]], [y[k]], marker="*", s=180, facecolor="white" if bound else colour,
                          edgecolor=colour if bound else "black", lw=1.2 if bound else 0.6, zorder=4)
            if b is not None and c.get("residual"):
                r = np.asarray(c["residual"], dtype=float)
                b.plot(x, r, color=colour, lw=1.5, marker="o", ms=4, label=c["label"])
                lo = [max(ci[0], 0.0) for ci in c["residual_ci"]]  # no energy lies below the reference
                hi = [ci[1] for ci in c["residual_ci"]]
                b.fill_between(x, lo, hi, color=colour, alpha=0.15, lw=0)
        for ax in (a, b):
            if ax is not None:
                plain_log(ax, "x", grid)
                ax.set_xlabel("anneal length (sweeps)")
        plain_log(a)
        a.set_ylabel("TTS99 (sweeps)")
        a.set_title(f"Time-to-solution on {solver}\n(star: optimum; open star or triangle: only a bound)")
        a.legend(frameon=False, loc="best")
        if b is not None:
            b.set_ylabel("residual energy per spin / coupling scale")
            b.set_title(f"Residual energy above the reference on {solver}")
    return fig


def profile_figure(profile):
    """An anneal profile: energy with the two-piece fit, residual energy, changes and frozen spins."""
    fit = profile.fit
    s = profile.s
    with _style():
        fig = _figure(10, 6.6)
        (ea, ra), (ha, fa) = fig.subplots(2, 2, sharex=True)
        ea.fill_between(s, profile.mean_energy - 1.96 * profile.sem_energy,
                        profile.mean_energy + 1.96 * profile.sem_energy, color=PALETTE["sky"], alpha=0.4, lw=0)
        ea.plot(s, profile.mean_energy, color=PALETTE["blue"], marker="o", ms=3.5, lw=1.6, label="mean energy")
        ea.plot(s, profile.min_energy, color=PALETTE["green"], lw=1.2, ls=":", label="lowest replica")
        fine = np.linspace(s[0], s[-1], 200)
        ea.plot(fine, fit.predict(fine), color=PALETTE["vermillion"], lw=1.4, ls="--", label="two-piece fit")
        lo, hi = (max(fit.ci[0], s[0]), min(fit.ci[1], s[-1])) if all(map(math.isfinite, fit.ci)) else (s[0], s[-1])
        ea.axvspan(lo, hi, color=PALETTE["vermillion"], alpha=0.12, lw=0)
        ea.axvline(fit.s_break, color=PALETTE["vermillion"], lw=1.2,
                   label=f"break s = {fit.s_break:.3f} ± {fit.se:.3f}" + (" (POOR FIT)" if fit.poor else ""))
        ref_label = {"proven": "ground state (proven)", "planted": "ground state (planted)"}.get(
            profile.reference["status"], "lowest known energy (not proven)")
        ea.axhline(profile.reference["energy"], color=PALETTE["black"], lw=1, ls="-.", label=ref_label)
        ea.set_ylabel("energy (coupling units)")
        ea.set_title("Energy along the anneal")
        ea.legend(frameon=False, loc="upper right")
        per = profile.residual_mean / profile.instance["n"]
        pos = per > 0
        ra.plot(s[pos], per[pos], color=PALETTE["blue"], marker="o", ms=3.5, lw=1.6,
                label="mean over replicas")
        if np.any(~pos):
            ra.scatter(s[~pos], np.full(int(np.sum(~pos)), 0.03), marker="v", s=30, color=PALETTE["green"],
                       transform=ra.get_xaxis_transform(), clip_on=False, label="every replica at the reference")
        if np.any(pos):  # a log axis needs something above zero to show
            plain_log(ra)
        ra.set_ylabel("residual energy per spin (coupling units)")
        ra.set_title("Energy above the reference, per spin")
        ra.legend(frameon=False, loc="upper right")
        ha.plot(s[1:], profile.hamming_median[1:], color=PALETTE["orange"], marker="o", ms=3.5, lw=1.6)
        ha.set_ylabel("spins changed since previous point (median)")
        ha.set_title("How much replicas still change")
        fa.plot(s, 100 * profile.frozen, color=PALETTE["purple"], marker="o", ms=3.5, lw=1.6)
        fa.set_ylim(-3, 103)
        fa.set_ylabel("spins frozen until the end (%)")
        fa.set_title("Spins that never change again")
        for ax in (ha, fa):
            ax.set_xlabel("anneal fraction s (0 = start, 1 = end)")
        st = profile.settings
        fig.suptitle(f"Anneal profile on the path-integral surrogate: {st['reads']} replicas, {st['sweeps']} sweeps, "
                     f"transverse field \u03b2\u0393 = {st['transverse']:g} at s = 0, "
                     f"\u03b2 = {st['temperature_beta']:.3g}",
                     fontsize=10)
    return fig


# --------------------------------------------------------------- library plot
def library_figure(points: list[dict]):
    """Hardness against size for a library: one panel per metric, colour by solver.

    Each point is a dict with ``metric``, ``solver``, ``n``, ``value``, ``ci``,
    ``kind``, ``units`` and ``certified``.  Filled markers: planted or proven optimum;
    open: not proven; triangles: bounds.
    """
    metrics = sorted({p["metric"] for p in points}, key=lambda m: -sum(p["metric"] == m for p in points))[:4]
    solvers = sorted({p["solver"] for p in points})
    colour = {s: CYCLE[i % len(CYCLE)] for i, s in enumerate(solvers)}
    cols = min(max(len(metrics), 1), 2)
    with _style():
        fig = _figure(5.2 * cols, 4.2 * math.ceil(max(len(metrics), 1) / cols))
        for i, metric in enumerate(metrics):
            ax = fig.add_subplot(math.ceil(len(metrics) / cols), cols, i + 1)
            mine = [p for p in points if p["metric"] == metric and _finite(p["value"])]
            groups = {}
            for p in mine:
                groups.setdefault((p["n"], p["solver"]), []).append(p)
            for (n, solver), group in groups.items():  # spread each size's points a little, solvers side by side
                j = solvers.index(solver)
                for k, p in enumerate(group):
                    p["_x"] = n * (1 + 0.04 * (j - (len(solvers) - 1) / 2)
                                   + 0.025 * (k - (len(group) - 1) / 2) / max(len(group), 1))
            for p in mine:
                x = p.pop("_x")
                c = colour[p["solver"]]
                ci = p.get("ci")
                if ci and all(_finite(v) for v in ci):
                    ax.plot([x, x], ci, color=c, lw=1, alpha=0.5)
                mk = BOUND_MARKER.get(p.get("kind", "value"), "o")
                ax.scatter([x], [p["value"]], marker=mk, s=30, zorder=3, edgecolor=c,
                           facecolor=c if (p["certified"] and mk == "o") else "white")
            for s in solvers:
                ax.scatter([], [], color=colour[s], label=s)
            ax.scatter([], [], facecolor="white", edgecolor="grey", label="optimum not proven")
            ax.scatter([], [], marker="^", facecolor="white", edgecolor="grey", label="bound, not a value")
            ns = sorted({p["n"] for p in mine})
            if ns and ns[-1] > 4 * ns[0]:
                plain_log(ax, "x", ns if len(ns) <= 8 else None)
            elif 0 < len(ns) <= 8:
                ax.set_xticks(ns)
                if len(ns) == 1:
                    ax.set_xlim(ns[0] * 0.9, ns[0] * 1.1)
            if metric == "tts":
                plain_log(ax)
            units = next((p["units"] for p in mine if p.get("units")), "")
            ax.set_xlabel("size (spins)")
            ax.set_ylabel(f"{metric} ({units})" if units else metric)
            ax.set_title(f"{metric} against size ({len(mine)} measurements)")
            ax.legend(frameon=False, loc="best")
        if not metrics:
            fig.add_subplot().text(0.5, 0.5, "no measurements in this library", ha="center")
        fig.suptitle("Library: hardness against size (latest measurement per entry and solver)", fontsize=10)
    return fig
