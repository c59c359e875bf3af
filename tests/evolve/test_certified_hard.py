"""Certified and hard: every bred child keeps its proof, inside the coupling rules.

External references used below:
* exact ground energies from dwave-samplers' tree-decomposition solver (with
  dwave-graphs' Chimera elimination order, or index order on small lattices
  and cliques) and dimod.ExactSolver for single patches;
* the frustrated-loop bound E0 = -sum_j w_j (L_j - 2) (Hen et al., PRA 92,
  042325 (2015)), re-derived from the loop list;
* processor rules: |J| <= range and J on the precision grid (common practice).
"""

import dimod
import dwave.graphs as dg
import numpy as np
import pytest
from dwave.samplers import TreeDecompositionSolver

from instgen.certify import certify
from instgen.couplings import CouplingRules
from instgen.errors import CertificationError, ConfigError
from instgen.evolve.engine import Breeder
from instgen.evolve.loops import LoopGenome
from instgen.evolve.operators import Variation, Variator
from instgen.evolve.terms import TERM_OPERATORS, TermGenome
from instgen.fitness import Context, measure, value
from instgen.graphs import build_graph
from instgen.instance import Instance
from instgen.planted import terms as pt
from instgen.preset import load_preset, validate


def _var(spec, alphabet, cap, precision, kinds, density=0.4):
    topo = build_graph(spec)
    rules = CouplingRules.make(alphabet, "none", coupling_range=cap, precision=precision)
    planting = {"method": "terms", "density": density, "min_length": 4, "cap": None, "terms": kinds,
                "patch_size": 6}
    return topo, rules, Variation(rules, topo.n, topo.edges, 0.05, extra={"planting": planting, "topology": topo})


def _exact_chimera(inst: Instance, m: int) -> float:
    """Ground energy by dwave-samplers' exact tree-decomposition solver (labels are Chimera's linear indices)."""
    ss = TreeDecompositionSolver().sample(inst.to_bqm(), elimination_order=dg.chimera_elimination_order(m))
    return float(ss.first.energy)


def _exact_in_index_order(inst: Instance) -> float:
    """Ground energy by the exact tree-decomposition solver, eliminating spins in index order (small lattices)."""
    ss = TreeDecompositionSolver().sample(inst.to_bqm(), elimination_order=list(inst.labels))
    return float(ss.first.energy)


def _check_child(g, topo, rules, exact):
    J, h, planted, e0 = g.couplings()
    # the coupling rules hold for every child (common practice: range and precision of processor couplers)
    assert rules.allows(J)
    assert not np.any(h)
    inst = Instance(edges=topo.edges, J=J, n=topo.n, labels=topo.labels, graph=topo.spec, planted=planted,
                    metadata={"construction": g.construction()})
    assert inst.energy(planted) == pytest.approx(e0)
    # exact ground energy from an outside solver equals the planted energy
    assert exact(inst) == pytest.approx(e0)
    # and our own certificate check accepts the construction
    assert pt.verify(inst)["bound"] == pytest.approx(e0)


def _churn(var, genome_cls, applications, seed, check):
    """Apply random operators (crossover and mutation) ``applications`` times, checking every child."""
    rng = np.random.default_rng(seed)
    variator = Variator(dict(TERM_OPERATORS), 0.5, var)
    pop = [genome_cls.random(var, rng) for _ in range(4)]
    done = 0
    while done < applications:
        i, j = rng.choice(len(pop), size=2, replace=False)
        for k, child in zip((i, j), variator.children(pop[i], pop[j], rng)):
            check(child)
            pop[k] = child
            done += 1
    return pop


@pytest.mark.slow
@pytest.mark.parametrize("alphabet,cap,precision,applications", [
    ("int:3", 3, 1, 1500), ("pm1", 1, 1, 300), ("levels:-1,-0.5,0.5,1", 1, 0.5, 300),
    ("uniform:-1,1", 1, 0.3, 100)])
def test_thousands_of_children_on_chimera2_keep_the_planted_ground_state(alphabet, cap, precision, applications):
    topo, rules, var = _var("chimera:2", alphabet, cap, precision, {"loop": 1, "cell": 1, "ball": 1})
    _churn(var, TermGenome, applications, seed=len(alphabet),
           check=lambda g: _check_child(g, topo, rules, lambda inst: _exact_chimera(inst, 2)))


@pytest.mark.slow
def test_children_on_chimera3_keep_the_planted_ground_state():
    topo, rules, var = _var("chimera:3", "int:3", 3, 1, {"loop": 2, "cell": 1, "ball": 1}, density=0.5)
    _churn(var, TermGenome, 200, seed=3,
           check=lambda g: _check_child(g, topo, rules, lambda inst: _exact_chimera(inst, 3)))


@pytest.mark.slow
@pytest.mark.parametrize("spec,kinds", [("square:4", {"tile": 1, "loop": 1}), ("complete:7", {"clique": 1})])
def test_tiles_and_cliques_keep_the_planted_ground_state(spec, kinds):
    topo, rules, var = _var(spec, "int:2", 2, 1, kinds, density=0.5)
    _churn(var, TermGenome, 150, seed=5, check=lambda g: _check_child(g, topo, rules, _exact_in_index_order))


def test_loop_genome_meets_the_published_loop_bound():
    # Hen et al. 2015: E0 = -sum w (L - 2); the exact ground energy must equal it
    topo, rules, var = _var("chimera:2", "int:2", 2, 1, None)
    var.extra["planting"]["method"] = "loops"
    rng = np.random.default_rng(7)
    for _ in range(5):
        g = LoopGenome.random(var, rng)
        bound = -sum(loop.weight * (loop.length - 2) for loop in g.loops)
        J, _, planted, e0 = g.couplings()
        assert e0 == pytest.approx(bound)
        inst = Instance(edges=topo.edges, J=J, n=topo.n, labels=topo.labels, planted=planted)
        assert _exact_chimera(inst, 2) == pytest.approx(bound)
        assert g.construction()["family"] == "loops"


def test_each_patch_has_the_planted_state_as_a_ground_state_by_exact_solver():
    topo = build_graph("chimera:2")
    sites = pt.Sites.of(topo, "cell")
    rng = np.random.default_rng(11)
    for k in range(len(sites.spins)):
        for _ in range(5):
            p = pt.draw_patch("cell", sites.spins[k], sites.edges[k], topo.edges, rng, weights=(1.0, 2.0, 3.0))
            bqm = dimod.BinaryQuadraticModel.from_ising({}, {tuple(topo.edges[e]): v for e, v in
                                                            zip(p.edges, p.values())})
            ground = dimod.ExactSolver().sample(bqm).first.energy
            assert ground == pytest.approx(p.bound)  # all +1 reaches the patch's minimum


def test_a_patch_without_the_planted_ground_state_is_refused():
    topo = build_graph("chimera:1")
    sites = pt.Sites.of(topo, "cell")
    good = pt.draw_patch("cell", sites.spins[0], sites.edges[0], topo.edges, 1)
    bad = pt.Patch("cell", good.spins, good.edges, [1.0] * len(good.edges))  # all antiferromagnetic on K4,4
    planted = np.ones(topo.n, dtype=np.int8)
    for patch, ok in ((good, True), (bad, False)):
        J = pt.term_couplings([patch], topo.m)
        inst = Instance(edges=topo.edges, J=J, n=topo.n, planted=planted, graph=topo.spec,
                        metadata={"construction": {"family": "terms", "loops": [], "patches": [patch.to_list()]}})
        if ok:
            assert certify(inst, method="planted").status == "planted"
        else:
            with pytest.raises(CertificationError, match="ground states"):
                certify(inst, method="planted")


def test_plant_terms_is_seeded_and_certified():
    a = pt.plant_terms("chimera:2", density=0.4, seed=3, kinds={"loop": 1, "cell": 1}, cap=2, weights=(1, 2))
    b = pt.plant_terms("chimera:2", density=0.4, seed=3, kinds={"loop": 1, "cell": 1}, cap=2, weights=(1, 2))
    c = pt.plant_terms("chimera:2", density=0.4, seed=4, kinds={"loop": 1, "cell": 1}, cap=2, weights=(1, 2))
    assert np.array_equal(a.J, b.J) and not np.array_equal(a.J, c.J)
    assert np.abs(a.J).max() <= 2
    assert _exact_chimera(a, 2) == pytest.approx(a.planted_energy)


def _tiny(**changes):
    raw = {
        "run": {"seed": 3},
        "graph": {"spec": "chimera:1"},
        "couplings": {"alphabet": "int:2", "range": 2},
        "planting": {"method": "terms", "density": 0.5, "terms": {"loop": 1, "cell": 1}},
        "fitness": {"sampler": "fast-sa", "sweeps": [2, 8], "reads": 16, "confirm_reads": 16,
                    "reference": "planted", "beta_range": [0.1, 5.0]},
        "search": {"population": 4, "generations": 2, "elites": 1, "workers": 1, "winners": 2},
        "library": {"baseline": 0},
    }
    for key, val in changes.items():
        table, name = key.split("__")
        raw.setdefault(table, {})[name] = val
    return validate(raw)


def test_fitness_is_the_least_over_search_solvers_with_fixed_seeds():
    cfg = _tiny(fitness__search_solvers=["tabu", "sa"])
    ctx = Context.from_config(cfg, build_graph("chimera:1"))
    assert ctx.solvers == ("tabu", "sa")
    inst = pt.plant_terms("chimera:1", density=0.6, seed=2, kinds="loop,cell", cap=2, weights=(1, 2))
    m1 = measure(ctx, inst.J, inst.h, seed=9, reads=16)
    m2 = measure(ctx, inst.J, inst.h, seed=9, reads=16)
    assert all(np.array_equal(m1.by_solver[s][k], m2.by_solver[s][k]) for s in m1.by_solver for k in m1.by_solver[s])
    v, d = value(ctx, m1, inst.planted_energy)
    singles = {}
    for name in ("fast-sa", "tabu", "sa"):
        one = Context.from_config(_tiny(fitness__sampler=name), build_graph("chimera:1"))
        part = m1 if name == "fast-sa" else type(m1)(energies=m1.by_solver[name])
        singles[name] = value(one, part, inst.planted_energy)[0]
    assert v == pytest.approx(min(singles.values()))
    assert d["per_solver"] == pytest.approx(singles)
    assert d["solver"] == min(singles, key=lambda k: (singles[k], k))


@pytest.mark.parametrize("changes,message", [
    ({"fitness__search_solvers": ["nope"]}, "unknown sampler 'nope'"),
    ({"fitness__search_solvers": ["exact"]}, "lists states"),
    ({"planting__terms": {"loop": 1, "star": 1}}, "unknown term kind 'star'"),
    ({"planting__terms": {"loop": -1}}, "must be a number >= 0"),
    ({"planting__method": "loops"}, "applies to method"),
    ({"planting__patch_size": 40}, "patch_size"),
])
def test_bad_settings_are_one_clear_config_error(changes, message):
    with pytest.raises(ConfigError, match=message):
        _tiny(**changes)


def test_a_shape_the_graph_lacks_is_refused_when_the_preset_is_read():
    with pytest.raises(ConfigError, match="no tile sites; patch shapes that fit it: cell, ball"):
        _tiny(planting__terms={"tile": 1})


def test_the_preset_validates():
    cfg = load_preset("presets/certified-hard.toml")
    assert cfg["planting"]["method"] == "terms" and cfg["couplings"]["range"] == 3


def test_terms_run_is_reproducible_and_resumable(tmp_path):
    a = Breeder(_tiny(search__generations=3), tmp_path / "a").run()
    b = Breeder(_tiny(search__generations=3), tmp_path / "b").run()
    Breeder(_tiny(search__generations=1), tmp_path / "c").run()
    c = Breeder(_tiny(search__generations=3), tmp_path / "c").run(resume=True)
    key = [(f["key"], f["confirmed"]) for f in a["winners"]]
    assert key == [(f["key"], f["confirmed"]) for f in b["winners"]]
    assert key == [(f["key"], f["confirmed"]) for f in c["winners"]]


@pytest.mark.slow
def test_breed_reports_planted_energy_certificate_and_baseline(tmp_path, capsys):
    from instgen.evolve.engine import breed
    from instgen.report.summary import print_summary

    cfg = _tiny(library__baseline=2, fitness__solvers=["sa"], fitness__search_solvers=["tabu"])
    summary = breed(cfg, tmp_path / "run")
    assert summary["winners"]
    for e in summary["winners"]:
        assert e["certificate"]["method"] == "planted" and e["certificate"]["status"] == "planted"
        assert e["planted_energy"] == pytest.approx(e["certificate"]["energy"])
        solvers = {s["solver"] for s in e["scores"] if s["metric"] == "tts"}
        assert solvers == {"fast-sa", "sa"}
        assert all(s["reference"] == pytest.approx(e["planted_energy"]) for s in e["scores"])
    assert len(summary["baseline"]["instances"]) == 2
    print_summary(summary)
    out = capsys.readouterr().out
    assert "planted energies" in out and "random baseline" in out
    assert "fitness: tts on fast-sa, tabu (the least over these)" in out
    assert "baseline reference energ" in out


def test_term_kinds_read_from_text_and_tables():
    assert pt.parse_kinds("loop:2,cell") == {"loop": 2.0, "cell": 1.0}
    assert pt.parse_kinds({"loop": 1, "ball": 0}) == {"loop": 1.0}  # weight 0 leaves a kind out
    with pytest.raises(pt.InputError, match="must be a number"):
        pt.parse_kinds("loop:x")


