"""The work a run announces before it starts is the work it then does."""

import json

import numpy as np

from instgen.evolve.cost import Plan, work_plan
from instgen.evolve.engine import breed
from instgen.fitness import Context, measure
from instgen.make import make_instance, topology
from instgen.testing.cli import run_cli

from test_engine import tiny


def test_one_evaluation_costs_what_the_plan_counts():
    # A spin update is one proposal to one spin: reads x sweeps x spins per sweep count (common practice
    # for counting Monte Carlo work; the samplers report it in SampleBatch.spin_updates).
    cfg = tiny()
    topo = topology(cfg["graph"]["spec"])
    ctx = Context.from_config(cfg, topo)
    inst = make_instance(topo, "pm1", seed=3)
    m = measure(ctx, inst.J, inst.h, seed=1, reads=cfg["fitness"]["reads"])
    plan = work_plan(cfg, calibrate=False)
    per_eval = cfg["fitness"]["reads"] * sum(ctx.sweep_counts()) * topo.n
    assert m.spin_updates == per_eval
    pop, gens = 6, 3
    new = gens * pop  # every member is measured each generation, survivors again (pooled)
    assert plan.evaluations == new + gens * min(cfg["search"]["confirm_top"], pop)
    assert plan.search_updates == new * per_eval + gens * min(cfg["search"]["confirm_top"], pop) * \
        cfg["fitness"]["confirm_reads"] * sum(ctx.sweep_counts()) * topo.n


def test_a_run_does_no_more_evaluations_than_announced(tmp_path):
    cfg = tiny()
    plan = work_plan(cfg, calibrate=False)
    breed(cfg, out=tmp_path / "run")
    last = json.loads((tmp_path / "run" / "log.jsonl").read_text().splitlines()[-1])
    mandatory = 3 * 6  # every member is measured each generation; confirmations pick only the unconfirmed
    assert mandatory <= last["evaluations"] <= plan.evaluations


def test_the_plan_line_comes_first_and_names_its_rate(tmp_path, capsys):
    preset = tmp_path / "p.toml"
    preset.write_text('[run]\nseed = 1\n[graph]\nspec = "chimera:1"\n[fitness]\nsampler = "sa"\nsweeps = [5, 50]\n'
                      'reads = 16\nconfirm_reads = 32\n[search]\npopulation = 6\ngenerations = 2\nelites = 1\n'
                      'workers = 1\n[library]\nbaseline = 0\n')
    code, _, err = run_cli(["breed", preset, "--out", tmp_path / "run", "--no-report"], capsys)
    assert code == 0, err
    first, second = err.splitlines()[:2]
    assert first.startswith("planned work: 2 generations on 8 spins") and "spin updates/s measured here" in first
    assert second.startswith("after the search: at most")
    assert Plan(n=8, generations=1, evaluations=1, search_updates=1e6, final_updates=0, certify_seconds=0,
                rate=1e6, workers=1).search_seconds == 1.0
    assert np.isfinite(work_plan(tiny()).search_seconds)
