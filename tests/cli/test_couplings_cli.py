"""Coupling levels as a newcomer types them: fractions, short decimals, and clean files.

Grid values are checked against Python's fractions module: float(Fraction(k, 3)) is
the float nearest to k/3 (Python docs, "fractions").
"""

import json
import shlex
from fractions import Fraction
from pathlib import Path

import numpy as np

from instgen.cli.breed import DESCRIPTION, add_arguments, resolve
from instgen.instance import Instance
from instgen.io import save_instance
from instgen.make import rules_of
from instgen.testing.cli import run_cli

ROOT = Path(__file__).resolve().parents[2]
THIRDS = {float(Fraction(k, 3)) for k in range(-3, 4) if k}


run = run_cli


def test_the_breed_help_example_is_accepted_as_typed(monkeypatch):
    import argparse

    monkeypatch.chdir(ROOT)  # the example names presets/ relative to a clone
    text = DESCRIPTION.replace("\\\n", " ")
    line = next(x for x in text.splitlines() if "--precision" in x)
    argv = shlex.split(line.strip())[2:]  # drop "instgen breed"
    parser = argparse.ArgumentParser()
    add_arguments(parser)
    cfg = resolve(parser.parse_args(argv))
    c = cfg["couplings"]
    rules = rules_of(c["alphabet"], c["fields"], coupling_range=c["range"], precision=c["precision"])
    assert set(rules.couplings.values) == THIRDS and rules.precision == 1 / 3


def test_make_with_four_digit_levels_writes_exact_thirds_and_info_counts_six(tmp_path, capsys):
    f = tmp_path / "chip.json"
    code, _, err = run(["make", "chimera:2", "--couplings", "levels:-1,-0.6667,-0.3333,0.3333,0.6667,1",
                        "--precision", "1/3", "--range", "1", "--seed", "3", "--out", f], capsys)
    assert code == 0, err
    # the file's own text, read by Python's json: exactly the six thirds, no 0.9999999999999998
    assert set(json.loads(f.read_text())["J"]) == THIRDS
    code, out, _ = run(["info", f, "--json"], capsys)
    assert code == 0 and json.loads(out)["distinct_couplings"] == 6


def test_make_refuses_levels_off_the_grid_in_one_line(tmp_path, capsys):
    code, out, err = run(["make", "chimera:1", "--couplings", "levels:-1,-0.33,0.33,1", "--precision", "1/3",
                          "--out", tmp_path / "x.json"], capsys)
    assert code == 2 and err.count("\n") == 1 and "0.33" in err and not (tmp_path / "x.json").exists()


def test_info_counts_values_that_differ_only_by_float_noise_once(tmp_path, capsys):
    # an older file, written before couplings were snapped: 1 and 0.9999999999999998 are one level
    J = [1.0, 0.9999999999999998, 2 / 3, 0.6666666666666667, -5.551115123125783e-17, 0.0, -1 / 3, -1 / 3 + 1e-16]
    edges = [[0, k] for k in range(1, 9)]
    save_instance(Instance(edges=edges, J=J), tmp_path / "old.json")
    code, out, _ = run(["info", tmp_path / "old.json", "--json"], capsys)
    d = json.loads(out)
    assert code == 0 and d["distinct_couplings"] == 4
    assert {float(Fraction(v).limit_denominator(3)) for v in d["coupling_counts"]} == {1.0, 2 / 3, 0.0, -1 / 3}


def test_bred_planted_terms_on_a_thirds_chip_are_exact_thirds():
    # the quench-study preset's alphabet and planting (terms of weights 1/3, 2/3, 1 summed per edge)
    from instgen.evolve.engine import Breeder
    from instgen.evolve.genome import planted_genome
    from instgen.preset import load_preset, override

    cfg = override(load_preset(ROOT / "presets" / "quench-study.toml"), ['graph.spec="chimera:2"'])
    b = Breeder(cfg, "unused")
    rng = np.random.default_rng(1)
    seen = set()
    for _ in range(5):
        g = planted_genome("terms").random(b.var, rng)
        seen |= set(g.couplings()[0].tolist())
        child = b.variator.children(g, planted_genome("terms").random(b.var, rng), rng)[0]
        seen |= set(child.couplings()[0].tolist())
    assert seen <= THIRDS | {0.0} and len(seen & THIRDS) >= 4
