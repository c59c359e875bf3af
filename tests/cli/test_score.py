"""instgen score from the command line: output, JSON, several solvers, refusals."""

import json
import math
import subprocess
import sys

import numpy as np
import pytest

from instgen.instance import Instance, random_gauge
from instgen.io import save_instance
from instgen.make import make_instance
from instgen.testing.cli import run_cli


run = run_cli


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("score")
    rand = save_instance(make_instance("chimera:2", "pm1", seed=1), d / "c2.json")
    # A gauged ferromagnet: its planted all-up state (in the original gauge) is a
    # ground state, since a gauge transformation keeps every energy (derived; common practice).
    topo = make_instance("chimera:2", "pm1", seed=0)
    ferro = Instance(edges=topo.edges, J=-np.ones(topo.m), labels=topo.labels, graph=topo.graph,
                     planted=np.ones(topo.n), metadata={"rules": {"couplings": "pm1", "fields": "none"}})
    planted = save_instance(ferro.gauge(random_gauge(topo.n, 2)), d / "planted.json")
    return {"random": str(rand), "planted": str(planted), "dir": d}


def test_tts_output_says_what_was_measured(files, capsys):
    code, out, err = run(["score", files["random"], "--metric", "tts", "--sweeps", "10,100", "--reads", "32",
                          "--seed", "1"], capsys)
    assert code == 0 and err == ""
    assert "TTS99" in out and "CI" in out and "sampler seeds" in out
    assert "geometric beta 0.1 .. 5" in out and "seed       1" in out
    assert "not a proven optimum" in out  # nothing planted, nothing certified


def test_tts_is_pinned_at_its_optimum_by_default(files, capsys):
    # TTS99 is quoted at the optimal anneal length, not at the edge of a grid (Albash & Lidar,
    # PRX 8, 031016 (2018)); the gauged ferromagnet's optimum lies below the 200 sweeps given
    code, out, _ = run(["score", files["planted"], "--metric", "tts", "--sweeps", "200,400", "--reads", "32",
                        "--json"], capsys)
    s = json.loads(out)["scores"][0]
    assert code == 0 and s["kind"] == "value" and s["extra"]["pin"]["pinned"]
    assert s["extra"]["best_sweeps"] < 200 and len(s["extra"]["best_sweeps_ci"]) == 2
    code, out, _ = run(["score", files["planted"], "--metric", "tts", "--sweeps", "200,400", "--reads", "32",
                        "--fixed-grid", "--json"], capsys)
    s = json.loads(out)["scores"][0]
    assert code == 0 and s["kind"] == "upper bound" and "pin" not in s["extra"]
    assert [r["sweeps"] for r in s["extra"]["per_sweeps"]] == [200, 400]
    code, out, _ = run(["score", files["planted"], "--metric", "tts", "--sweeps", "200,400", "--reads", "32",
                        "--budget", "1e5"], capsys)
    assert code == 0 and "NOT pinned" in out and "budget of 1e+05 spin updates" in out


def test_planted_reference_is_not_flagged(files, capsys):
    code, out, _ = run(["score", files["planted"], "--metric", "success", "--sweeps", "200", "--reads", "16"], capsys)
    assert code == 0 and "planted state; planted" in out and "not a proven optimum" not in out


def test_json_and_side_by_side_solvers(files, capsys):
    code, out, _ = run(["score", files["random"], "--metric", "tts,anneal-gain", "--solvers", "sa,tabu,pimc",
                        "--sweeps", "5,50", "--reads", "16", "--json"], capsys)
    d = json.loads(out)
    assert code == 0 and d["n"] == 32
    assert [(s["solver"], s["metric"]) for s in d["scores"]] == [
        ("sa", "tts"), ("sa", "anneal-gain"), ("tabu", "tts"), ("tabu", "anneal-gain"), ("pimc", "tts"), ("pimc", "anneal-gain")]
    pimc = d["scores"][4]
    assert pimc["schedule"]["transverse"] == 2.0 and "transverse_field" not in pimc["schedule"]
    for s in d["scores"]:
        assert s["value"] is None or math.isfinite(s["value"])


def test_options_schedule_shape_and_perturbation(files, capsys):
    code, out, _ = run(["score", files["planted"], "--metric", "success", "--sampler", "pimc", "--sweeps", "40",
                        "--reads", "8", "--quench", "0.5", "--option", "pimc.transverse=3"], capsys)
    assert code == 0 and "transverse field 3 -> 0 along a quench from s=0.5" in out
    code, out, _ = run(["score", files["planted"], "--metric", "success", "--sweeps", "100", "--reads", "8",
                        "--perturb", "0.1", "--copies", "2"], capsys)
    assert code == 0 and "[range" in out and "control errors" in out


@pytest.mark.parametrize("argv,needle", [
    (["score", "{dir}/missing.json"], "no such file"),
    (["score", "{random}", "--metric", "hardness"], "unknown metric"),
    (["score", "{random}", "--metric", "gap"], "now called 'anneal-gain'"),  # retired name says its new one
    (["score", "{random}", "--sampler", "magic"], "unknown sampler"),
    (["score", "{random}", "--metric", "anneal-gain", "--sweeps", "100"], "two sweep counts"),
    (["score", "{random}", "--metric", "tts", "--sampler", "exact"], "lists the lowest states"),
    (["score", "{random}", "--option", "tabu.tenure=3"], "not being run"),
    (["score", "{random}", "--option", "sa.heat=3", "--sweeps", "5", "--reads", "2"], "no option"),
    (["score", "{random}", "--confidence", "1.5"], "confidence"),
    (["score", "{random}", "--sweeps", "0,10"], "positive"),
    (["score", "{random}", "--beta-range", "1"], "two numbers"),
    (["score", "{random}", "--sampler", "pimc", "--option", "pimc.transverse=0", "--sweeps", "5"], "zero at every"),
    (["score", "{random}", "--budget", "-1", "--reads", "2"], "pinning budget"),
    (["score", "{random}", "--budget", "nan", "--reads", "2"], "pinning budget"),
    (["score", "{random}", "--cold-ends", "0", "--reads", "2"], "cold ends are positive"),
    (["score", "{random}", "--cold-ends", "x"], "expected numbers"),
    (["score", "{random}", "--max-sweeps", "0"], "positive"),
])
def test_bad_input_is_one_line_and_exit_2(files, capsys, argv, needle):
    argv = [a.format(**{k: v for k, v in files.items()}) for a in argv]
    code, out, err = run(argv, capsys)
    assert code == 2
    assert needle in err and len(err.strip().splitlines()) == 1 and "Traceback" not in err


@pytest.mark.slow
def test_entry_point_runs(files):
    # The installed console script path, in a fresh process.
    r = subprocess.run([sys.executable, "-m", "instgen", "score", files["random"], "--metric", "residual",
                        "--sweeps", "20", "--reads", "8"], capture_output=True, text=True, timeout=120)
    assert r.returncode == 0 and "residual" in r.stdout and r.stderr == ""


@pytest.mark.slow
def test_done_criterion_chimera4_tts_under_three_solvers(tmp_path, capsys):
    # The acceptance run, with fewer reads to keep CI time down.
    f = tmp_path / "c4.json"
    assert run(["make", "chimera:4", "--couplings", "pm1", "--seed", "1", "--out", str(f)], capsys)[0] == 0
    code, out, _ = run(["score", str(f), "--metric", "tts", "--solvers", "sa,pimc,tabu", "--sweeps", "10,100,1000",
                        "--reads", "24", "--seed", "1", "--budget", "2e7", "--json"], capsys)
    d = json.loads(out)
    assert code == 0 and [s["solver"] for s in d["scores"]] == ["sa", "pimc", "tabu"]
    for s in d["scores"]:
        assert s["metric"] == "tts" and s["ci"] is not None and s["units"] == "sweeps"
        assert s["ci"][0] <= s["value"] and (s["ci"][1] is None or s["value"] <= s["ci"][1])
