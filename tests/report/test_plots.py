"""The report's plots: drawn from the numbers they claim to show, in a colour-blind-safe palette.

Every figure is also saved under outputs/test-artifacts/report/ for a person to look at.
"""

from __future__ import annotations

import json
from pathlib import Path

import matplotlib.colors as mcolors
import matplotlib.image as mimage
import numpy as np
import pytest

from instgen.make import make_instance
from instgen.report import plots
from instgen.report.profile import anneal_profile

from runcase import make_run

ARTIFACTS = Path(__file__).resolve().parents[2] / "outputs" / "test-artifacts" / "report"

# Okabe & Ito, "Color Universal Design" (2008): the eight colour-blind-safe colours (common practice).
OKABE_ITO = {"#000000", "#e69f00", "#56b4e9", "#009e73", "#f0e442", "#0072b2", "#d55e00", "#cc79a7"}


@pytest.fixture(scope="module")
def run_folder(tmp_path_factory):
    folder = tmp_path_factory.mktemp("run")
    make_run(folder)
    return folder


def _save(fig, name) -> np.ndarray:
    """Save for people to look at; return the decoded image (matplotlib reads it back)."""
    path = plots.save_figure(fig, ARTIFACTS / name)
    img = mimage.imread(path)
    assert img.ndim == 3 and img.shape[0] > 200 and img.shape[1] > 300
    assert img[..., :3].std() > 0.05  # not a blank canvas
    return img


def _colours(fig) -> set[str]:
    out = set()
    for ax in fig.axes:
        for line in ax.get_lines():
            out.add(mcolors.to_hex(line.get_color()))
        for coll in ax.collections:
            for c in list(coll.get_facecolors()) + list(coll.get_edgecolors()):
                if c[3] > 0 and not np.allclose(c[:3], 1.0):  # white fill of open markers is not a colour
                    out.add(mcolors.to_hex(c[:3]))
    return out


def test_fitness_figure_draws_the_log(run_folder):
    records = [json.loads(line) for line in (run_folder / "log.jsonl").read_text().splitlines()]
    fig = plots.fitness_figure(records, "tts", "sa")
    ax = fig.axes[0]
    best = next(line for line in ax.get_lines() if line.get_label() == "search: best")
    # TTS fitness is log10 of TTS99 in sweeps; the plot shows sweeps on a log axis
    assert np.allclose(best.get_ydata(), [10 ** r["best"] for r in records])
    assert np.allclose(best.get_xdata(), [r["generation"] for r in records])
    assert ax.get_yscale() == "log" and "(sweeps)" in ax.get_ylabel() and ax.get_xlabel() == "generation"
    assert _colours(fig) <= OKABE_ITO
    _save(fig, "fitness.png")


def test_baseline_figure_shows_every_instance(run_folder):
    summary = json.loads((run_folder / "summary.json").read_text())
    fig = plots.baseline_figure(summary)
    assert len(fig.axes) == len(summary["comparison"])
    for ax, row in zip(fig.axes, summary["comparison"]):
        shown = sorted(float(y) for coll in ax.collections for y in coll.get_offsets()[:, 1])
        values = sorted(s["value"] for e in summary["winners"] + summary["baseline"]["instances"]
                        for s in e["scores"] if s["metric"] == row["metric"] and s["solver"] == row["solver"]
                        and s["value"] is not None)
        assert np.allclose(shown, values)
        assert row["solver"] in ax.get_title() and "(sweeps)" in ax.get_ylabel()
    assert _colours(fig) <= OKABE_ITO
    _save(fig, "baseline.png")


def test_sweeps_figure_marks_the_optimum(run_folder):
    from instgen.io import load_instance
    from instgen.scoring import measure_many

    summary = json.loads((run_folder / "summary.json").read_text())
    curves = []
    for e in summary["winners"]:
        tts = next(s for s in e["scores"] if s["metric"] == "tts" and s["solver"] == "sa")
        rows = tts["extra"]["per_sweeps"]
        inst = load_instance(run_folder / "winners" / e["file"])
        res = [measure_many(inst, ["residual"], ["sa"], sweeps=[r["sweeps"]], reads=20, seed=1)[0] for r in rows]
        curves.append({"label": e["file"], "sweeps": [r["sweeps"] for r in rows], "tts": [r["tts"] for r in rows],
                       "tts_ci": [r["tts_ci"] for r in rows], "tts_kind": [r["kind"] for r in rows],
                       "best_sweeps": tts["extra"]["best_sweeps"], "best_kind": tts["kind"],
                       "residual": [s.value for s in res], "residual_ci": [list(s.ci) for s in res]})
    fig = plots.sweeps_figure(curves, "sa")
    tts_ax, res_ax = fig.axes
    stars = [c for c in tts_ax.collections if len(c.get_offsets()) == 1 and c.get_sizes()[0] == 180]
    assert len(stars) == len(curves)
    for star, c in zip(stars, curves):
        assert star.get_offsets()[0, 0] == c["best_sweeps"]
        hollow = np.allclose(star.get_facecolors()[0][:3], 1.0)
        assert hollow == (c["best_kind"] != "value")  # an optimum at the grid's edge is drawn as a bound
    lines = [line for line in tts_ax.get_lines() if line.get_label() in {c["label"] for c in curves}]
    for line, c in zip(lines, curves):
        assert np.allclose(line.get_ydata(), c["tts"])
    for line, c in zip(res_ax.get_lines(), curves):
        assert np.allclose(line.get_ydata(), c["residual"])
    assert "sweeps" in tts_ax.get_xlabel() and "TTS99 (sweeps)" == tts_ax.get_ylabel()
    assert "per spin" in res_ax.get_ylabel()
    _save(fig, "sweeps.png")
    single = plots.sweeps_figure([{**c, "residual": []} for c in curves], "sa")
    assert len(single.axes) == 1  # nothing measured: no empty panel


def test_profile_figure_shows_the_break_point():
    prof = anneal_profile(make_instance("chimera:2", "pm1", seed=5), points=12, reads=16, sweeps=220, seed=1,
                          boot=50)
    fig = plots.profile_figure(prof)
    energy_ax = fig.axes[0]
    mean = next(line for line in energy_ax.get_lines() if line.get_label() == "mean energy")
    assert np.allclose(mean.get_ydata(), prof.energies.mean(axis=0))
    brk = next(line for line in energy_ax.get_lines() if line.get_label().startswith("break s ="))
    assert brk.get_xdata()[0] == prof.fit.s_break
    assert all(ax.get_ylabel() for ax in fig.axes)
    assert "anneal fraction s" in fig.axes[-1].get_xlabel()
    assert _colours(fig) <= OKABE_ITO
    _save(fig, "profile.png")


def test_library_figure_points_by_size(tmp_path):
    pts = [{"metric": "tts", "solver": s, "n": n, "value": v, "ci": [v / 2, v * 2], "kind": k, "units": "sweeps",
            "certified": c}
           for s, n, v, k, c in [("sa", 32, 40.0, "value", True), ("sa", 128, 900.0, "upper bound", True),
                                 ("tabu", 32, 25.0, "value", False), ("tabu", 128, 300.0, "lower bound", True)]]
    fig = plots.library_figure(pts)
    ax = fig.axes[0]
    xs = sorted(round(float(x)) for coll in ax.collections for x in coll.get_offsets()[:, 0])
    assert xs[0] >= 31 and xs[-1] <= 133 and len(xs) == 4
    assert ax.get_xlabel() == "size (spins)" and ax.get_yscale() == "log"
    assert _colours(fig) <= OKABE_ITO | {"#808080"}  # grey legend keys for filled/open/triangle
    _save(fig, "library.png")
