"""One self-contained HTML report for a run folder or a library folder.

:func:`write_report` looks at the folder: a **run folder** (``summary.json``
and ``log.jsonl`` written by ``instgen breed``) gives a report of the run's
settings, the winners and their certificates, comparison with the random
baseline, fitness by generation, TTS and residual energy against sweeps and
anneal profiles of the best winners; a **library folder** (``index.sqlite``)
gives its entries and hardness against size.  The cautions (not proven
optima, bounds instead of values, which solvers the hardness was measured on,
poor fits) come first, in a box of their own.

Plots are written as PNG files under ``FOLDER/plots/`` and embedded in the
page as base64, so ``report.html`` can be mailed or archived on its own.
Every number in a table carries its exact value in a ``data-value``
attribute; the text shows it to four significant figures.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import json
import math
from pathlib import Path

from ..errors import FormatError, InputError
from ..io import atomic_write

REPORT_NAME = "report.html"
PLOTS_DIR = "plots"
SUMMARY_FORMAT = "instgen-run-summary"
#: Winners drawn in the TTS / residual plot (the rest are in the tables).
CURVES_SHOWN = 4


# ----------------------------------------------------------------- reading
def folder_kind(folder) -> str:
    """``"run"`` or ``"library"``; raises InputError for anything else."""
    folder = Path(folder)
    if not folder.is_dir():
        raise InputError(f"{folder} is not a folder; give a run folder (from instgen breed) or a library folder")
    if (folder / "summary.json").is_file():
        return "run"
    if (folder / "index.sqlite").is_file():
        return "library"
    if (folder / "log.jsonl").is_file():
        raise InputError(f"{folder} holds a run that has not finished (log.jsonl but no summary.json yet); let it "
                         "finish, or continue it with `instgen breed PRESET --out FOLDER --resume`")
    raise InputError(f"{folder} is neither a run folder (no summary.json) nor a library (no index.sqlite)")


def _load_json(path: Path):
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError) as exc:
        raise FormatError(f"cannot read {path}: {exc}") from None
    except json.JSONDecodeError as exc:
        raise FormatError(f"{path} is not valid JSON (line {exc.lineno}: {exc.msg}); "
                          "was the run interrupted while writing it?") from None


def load_run(folder) -> tuple[dict, list[dict]]:
    """(summary, generation records) of a run folder, checked."""
    folder = Path(folder)
    summary = _load_json(folder / "summary.json")
    if not isinstance(summary, dict) or summary.get("format") != SUMMARY_FORMAT:
        raise FormatError(f"{folder / 'summary.json'} is not an instgen run summary")
    from ..evolve.finish import SUMMARY_VERSION

    if summary.get("format_version", 0) > SUMMARY_VERSION:
        raise FormatError(f"{folder / 'summary.json'} has format version {summary.get('format_version')}, newer "
                          f"than this instgen reads ({SUMMARY_VERSION}); upgrade instgen")
    for key in ("run", "winners", "baseline", "comparison", "cautions"):
        if key not in summary:
            raise FormatError(f"{folder / 'summary.json'} has no {key!r} section")
    _check_summary(summary, folder / "summary.json")
    records = []
    log = folder / "log.jsonl"
    if log.is_file():
        for i, line in enumerate(log.read_text(encoding="utf-8").splitlines(), 1):
            if line.strip():
                try:
                    records.append(json.loads(line))
                except json.JSONDecodeError:
                    raise FormatError(f"{log} line {i} is not valid JSON") from None
    return summary, records


_NUMBER = (int, float)
#: What the run page reads from a summary, with the types it needs.
_SUMMARY_SHAPE = {"run": dict, "winners": list, "baseline": dict, "comparison": list, "cautions": list,
                  "generations": int, "evaluations": int, "elapsed": _NUMBER}
_RUN_SHAPE = {"name": str, "graph": str, "n": int, "m": int, "metric": str, "sampler": str, "solvers": list,
              "sweeps": list}
_ENTRY_SHAPE = {"n": int, "m": int, "certificate": dict, "scores": list}


def _check_summary(summary: dict, where) -> None:
    """Refuse a summary (hand-edited, foreign, damaged) that lacks what the page reads, naming the part."""
    def check(d, shape, at):
        for key, kind in shape.items():
            if not isinstance(d, dict) or not isinstance(d.get(key), kind) or isinstance(d.get(key), bool):
                raise FormatError(f"{where} is damaged or not from this instgen: {at}{key} is missing "
                                  "or of the wrong kind")

    check(summary, _SUMMARY_SHAPE, "")
    check(summary["run"], _RUN_SHAPE, "run.")
    check(summary["baseline"], {"instances": list}, "baseline.")
    for part, entries in (("winners", summary["winners"]), ("baseline.instances", summary["baseline"]["instances"])):
        for k, e in enumerate(entries):
            check(e, {**_ENTRY_SHAPE, **({"rank": int, "file": str} if part == "winners" else {})}, f"{part}[{k}].")
            check(e["certificate"], {"energy": _NUMBER, "status": str}, f"{part}[{k}].certificate.")
            for j, sc in enumerate(e["scores"]):
                check(sc, {"metric": str}, f"{part}[{k}].scores[{j}].")


# -------------------------------------------------------------- formatting
def esc(text) -> str:
    return html.escape(str(text), quote=True)


def fmt(v, digits: int = 4) -> str:
    """A number as shown in the tables (``digits`` significant figures)."""
    if v is None:
        return "–"  # records write infinities and NaN as null
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        return esc(v)
    if math.isinf(v):
        return "never reached" if v > 0 else "−∞"
    if math.isnan(v):
        return "not defined"
    return f"{v:.{digits}g}"


def num_cell(v, digits: int = 4) -> str:
    """A number in a table cell: shown to ``digits`` figures, exact value in ``data-value``."""
    exact = f' data-value="{esc(repr(float(v)))}"' if isinstance(v, (int, float)) and not isinstance(v, bool) else ""
    return f'<td class="num"{exact}>{fmt(v, digits)}</td>'


def score_cell(s: dict | None) -> str:
    """A score: value and interval; a bound is marked with >= or <= (units go in the column head)."""
    if s is None:
        return "<td>–</td>"
    kind = s.get("kind", "value")
    sign = {"lower bound": "≥ ", "upper bound": "≤ "}.get(kind, "")
    ci = s.get("ci")
    end = lambda v, inf: inf if v is None or (isinstance(v, float) and math.isinf(v)) else fmt(v, 3)
    interval = f' <span class="ci">[{end(ci[0], "−∞")}, {end(ci[1], "∞")}]</span>' if ci else ""
    tip = f' title="{esc(kind)}: the true value may lie beyond it"' if sign else ""
    value = s.get("value")
    exact = f' data-value="{esc(repr(float(value)))}"' if isinstance(value, (int, float)) else ""
    extra = s.get("extra") or {}
    at = ""
    if s.get("metric") == "tts" and extra.get("best_sweeps") and kind != "lower bound":
        lo, hi = extra.get("best_sweeps_ci") or (None, None)
        span = f" [{fmt(lo)}, {fmt(hi)}]" if lo is not None and lo != hi else ""
        at = f' <span class="ci">at {fmt(extra["best_sweeps"])}{span}</span>'
    return f'<td class="num"{exact} data-kind="{esc(kind)}"{tip}>{sign}{fmt(value)}{interval}{at}</td>'


def score_head(metric: str, solver: str, scores) -> str:
    """Column head for a score column, with the units of its scores."""
    units = next((s.get("units") for s in scores if s and s.get("units")), "")
    return f"{metric} on {solver}" + (f" ({units})" if units else "")


BOUND_NOTE = ('<p class="note">Scores: value [95% interval]; time-to-solution TTS99 is given at its optimal '
              "sweep count, found by extending the sweep counts and adding reads until the minimum is interior "
              "(\u201cat N [interval]\u201d: the optimal sweep count and its bootstrap interval). ≤ marks an upper "
              "bound and ≥ a lower bound (the budget ran out with the optimum at the edge of the counts tried, or no "
              "read reached the ground state): the true value may lie beyond it.</p>")


def table(head: list[str], rows: list[list[str]], cls: str = "") -> str:
    """An HTML table (scrolling sideways when wide); ``rows`` hold ready-made ``<td>`` strings."""
    h = "".join(f"<th>{esc(x)}</th>" for x in head)
    body = "".join("<tr>" + "".join(r) + "</tr>" for r in rows)
    return f'<div class="wide"><table class="{cls}"><thead><tr>{h}</tr></thead><tbody>{body}</tbody></table></div>'


def text_cell(v) -> str:
    return f"<td>{esc(v)}</td>"


def figure(png: bytes, alt: str, caption: str) -> str:
    data = base64.b64encode(png).decode("ascii")
    return (f'<figure><img alt="{esc(alt)}" src="data:image/png;base64,{data}">'
            f"<figcaption>{caption}</figcaption></figure>")


def status_cell(cert: dict | None) -> str:
    if not cert:
        return '<td class="warn">no optimum known</td>'
    status = cert.get("status", "not proven")
    if status in ("planted", "proven"):
        return f'<td class="ok">{esc(status)} <span class="unit">({esc(cert.get("method", ""))})</span></td>'
    return (f'<td class="warn">not proven: best found <span class="unit">({esc(cert.get("method", ""))})'
            "</span></td>")


CSS = """
:root { --ink: #1b2430; --muted: #5b6470; --line: #d9dee4; --accent: #0072B2; --warn: #D55E00; }
body { font: 15px/1.5 system-ui, -apple-system, "Segoe UI", sans-serif; color: var(--ink); margin: 0;
       background: #f6f7f9; }
main { max-width: 1180px; margin: 0 auto; padding: 24px 32px 48px; background: #fff; }
h1 { font-size: 1.6em; margin: 0 0 4px; } h2 { font-size: 1.2em; margin: 32px 0 8px;
  border-bottom: 2px solid var(--accent); padding-bottom: 3px; }
p.lead { color: var(--muted); margin-top: 0; }
section.cautions { border-left: 6px solid var(--warn); background: #fff3e8; padding: 8px 18px; margin: 16px 0; }
section.cautions h2 { border: none; margin: 6px 0; color: var(--warn); }
section.cautions li { margin: 4px 0; }
table { border-collapse: collapse; margin: 8px 0 16px; font-size: 0.92em; }
th, td { border-bottom: 1px solid var(--line); padding: 4px 10px; text-align: left; vertical-align: top; }
th { background: #eef2f6; font-weight: 600; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
td.ok { color: #006e52; } td.warn { color: var(--warn); font-weight: 600; }
span.ci, span.unit { color: var(--muted); font-size: 0.9em; }
div.wide { overflow-x: auto; } p.note { color: var(--muted); font-size: 0.88em; margin-top: -8px; }
figure { margin: 12px 0 20px; } figure img { max-width: 100%; border: 1px solid var(--line); }
figcaption { color: var(--muted); font-size: 0.9em; max-width: 900px; }
p.broken { color: var(--warn); font-weight: 600; }
footer { color: var(--muted); font-size: 0.85em; margin-top: 32px; }
"""

SCRIPT = """
window.addEventListener("load", function () {
  var imgs = document.images, shown = 0;
  for (var i = 0; i < imgs.length; i++) {
    if (imgs[i].complete && imgs[i].naturalWidth > 0) { shown++; continue; }
    var p = document.createElement("p"); p.className = "broken";
    p.textContent = "This plot could not be shown: " + imgs[i].alt; imgs[i].after(p);
  }
  document.body.setAttribute("data-images-shown", shown + "/" + imgs.length);
  var tables = document.getElementsByTagName("table"), widest = 0;
  for (var k = 0; k < tables.length; k++) { widest = Math.max(widest, tables[k].scrollWidth); }
  var main = document.querySelector("main"), css = getComputedStyle(main);
  var column = main.clientWidth - parseFloat(css.paddingLeft) - parseFloat(css.paddingRight);
  document.body.setAttribute("data-widest-table", widest + "/" + Math.floor(column));
});
"""


def page(title: str, lead: str, cautions: list[str], sections: list[str], footer: str) -> str:
    """The whole document."""
    items = "".join(f"<li>{esc(c)}</li>" for c in cautions)
    box = (f'<section class="cautions" id="cautions"><h2>Read this first</h2><ul>{items}</ul></section>'
           if cautions else "")
    return (f'<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8">'
            f'<meta name="viewport" content="width=device-width, initial-scale=1">'
            f"<title>{esc(title)}</title><style>{CSS}</style></head>"
            f'<body><main><h1>{esc(title)}</h1><p class="lead">{lead}</p>{box}{"".join(sections)}'
            f"<footer>{footer}</footer></main><script>{SCRIPT}</script></body></html>\n")


def shown_path(path, folder) -> str:
    """A path as a report shows it: relative to the report's folder, never the user's absolute path.

    >>> shown_path("/home/ada/runs/demo/library", "/home/ada/runs/demo")
    'library'
    >>> shown_path("/srv/shared/lib", "/home/ada/runs/demo")
    '…/lib'
    """
    p, f = Path(path), Path(folder)
    try:
        return str(p.resolve().relative_to(f.resolve())) or "."
    except (ValueError, OSError):
        return str(p) if not p.is_absolute() else f"…/{p.name}"


def footer_text(folder: Path) -> str:
    from .. import __version__

    when = _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    return (f"Written by instgen {esc(__version__)} on {when} from the folder {esc(Path(folder).resolve().name)}. "
            f"Plots are also saved as PNG files in {esc(PLOTS_DIR)}/ beside this page.")


# ----------------------------------------------------------------- entry point
def write_report(folder, out=None, *, reads: int = 64, profiles: int = 1, profile_reads: int = 32,
                 profile_sweeps: int = 500, measure: bool = True, seed: int = 0) -> Path:
    """Write the HTML report for a run folder or a library folder; returns its path.

    Parameters
    ----------
    folder : path
        A run folder (``summary.json`` + ``log.jsonl``) or a library folder.
    out : path, optional
        Where to write the page (default ``FOLDER/report.html``).
    reads : int
        Reads per sweep count for the fresh residual-energy measurement of the
        winners (a run's summary stores residual energy at one sweep count only).
    profiles : int
        Anneal profiles to draw, best winners first (0 for none).
    profile_reads, profile_sweeps : int
        Size of each anneal profile.
    measure : bool
        False skips every fresh measurement (no residual curves, no profiles).
    seed : int
        Seed of the fresh measurements (same seed, same report).

    Examples
    --------
    >>> write_report("outputs/demo")  # doctest: +SKIP
    PosixPath('outputs/demo/report.html')
    """
    folder = Path(folder)
    kind = folder_kind(folder)
    for name, v, low in (("reads", reads, 2), ("profiles", profiles, 0), ("profile_reads", profile_reads, 2),
                         ("profile_sweeps", profile_sweeps, 20)):
        if isinstance(v, bool) or not isinstance(v, int) or v < low:
            raise InputError(f"{name} must be a whole number of at least {low}, got {v!r}")
    if kind == "run":
        from .runreport import run_page

        doc = run_page(folder, reads=reads, profiles=profiles if measure else 0, profile_reads=profile_reads,
                       profile_sweeps=profile_sweeps, measure=measure, seed=seed)
    else:
        from .libreport import library_page

        doc = library_page(folder)
    target = Path(out) if out is not None else folder / REPORT_NAME
    if target.is_dir():
        target = target / REPORT_NAME
    return atomic_write(target, doc)
