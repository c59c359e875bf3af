"""No code from data: nothing read from a file is unpickled, evaluated or imported.

A library, instance file or run folder from a stranger may name a Python
function anywhere it likes ("package.module:function"); instgen treats it as
text.  The one door to user code is a fitness function the user names in
their own preset (or passes from Python), and it opens only when breeding with
that preset.  The local Dask cluster listens on the loopback address only.

The files below name a real module placed on sys.path that leaves a mark the
moment it is imported, so an import anywhere would show.
"""

from __future__ import annotations

import ast
import json
import sqlite3
import sys
from pathlib import Path

import pytest

from hardcases import good_doc, run, write_doc

PACKAGE = Path(__file__).resolve().parents[2] / "instgen"
NAME = "instgen_hardening_bait"
BAIT = f"{NAME}:boom"


# ------------------------------------------------------------ the source itself
def _calls(tree):
    for node in ast.walk(tree):
        if isinstance(node, ast.Call):
            f = node.func
            name = f.id if isinstance(f, ast.Name) else (
                f"{f.value.id}.{f.attr}" if isinstance(f, ast.Attribute) and isinstance(f.value, ast.Name)
                else f.attr if isinstance(f, ast.Attribute) else "")
            yield name, node


def _sources():
    return sorted(p for p in PACKAGE.rglob("*.py") if "__pycache__" not in p.parts)


FORBIDDEN_CALLS = {"eval", "exec", "compile", "__import__", "pickle.load", "pickle.loads", "marshal.load",
                   "marshal.loads", "yaml.load", "yaml.unsafe_load", "dill.load", "dill.loads",
                   "cloudpickle.load", "cloudpickle.loads", "shelve.open", "jsonpickle.decode", "joblib.load",
                   "torch.load", "pd.read_pickle", "pandas.read_pickle"}
FORBIDDEN_MODULES = {"pickle", "marshal", "shelve", "dill", "cloudpickle", "yaml", "jsonpickle", "joblib"}

#: The only places that import a module by name, each from a fixed table or a name the user typed.
IMPORT_SITES = {
    "cli/__init__.py": "the command modules of instgen.cli itself",
    "registry.py": "'module:attr' strings registered in the code, never from data",
    "fitness.py": "load_user_function: the fitness function the user names in their preset",
    "evolve/genome.py": "PLANTED_GENOMES, a fixed table of instgen's own genome classes",
}


def test_no_unpickling_or_evaluation_anywhere_in_the_package():
    found = []
    for path in _sources():
        tree = ast.parse(path.read_text(), str(path))
        for name, node in _calls(tree):
            if name in FORBIDDEN_CALLS:
                found.append(f"{path.relative_to(PACKAGE)}:{node.lineno} calls {name}")
            if name in ("np.load", "numpy.load", "load") and any(
                    k.arg == "allow_pickle" and not (isinstance(k.value, ast.Constant) and k.value.value is False)
                    for k in node.keywords):
                found.append(f"{path.relative_to(PACKAGE)}:{node.lineno} loads numpy files with pickles allowed")
            if name in ("np.load", "numpy.load") and not any(k.arg == "allow_pickle" for k in node.keywords):
                found.append(f"{path.relative_to(PACKAGE)}:{node.lineno} np.load without allow_pickle=False")
        for node in ast.walk(tree):
            if isinstance(node, (ast.Import, ast.ImportFrom)):
                mods = [a.name for a in node.names] if isinstance(node, ast.Import) else [node.module or ""]
                for m in mods:
                    if m.split(".")[0] in FORBIDDEN_MODULES:
                        found.append(f"{path.relative_to(PACKAGE)}:{node.lineno} imports {m}")
    assert not found, "\n".join(found)


def test_modules_are_imported_by_name_only_in_the_known_places():
    sites = set()
    for path in _sources():
        for name, node in _calls(ast.parse(path.read_text(), str(path))):
            if name in ("importlib.import_module", "import_module"):
                sites.add(str(path.relative_to(PACKAGE)))
    assert sites == set(IMPORT_SITES), f"new dynamic imports to review: {sites - set(IMPORT_SITES)}"


def test_the_scan_would_see_a_violation(tmp_path):
    """The two scans above are only as good as their parser: a planted violation is found."""
    tree = ast.parse("import pickle\nimport numpy as np\nx = pickle.loads(b'')\ny = np.load('f.npy')\n"
                     "eval('1')\nimportlib.import_module(name)\n")
    names = {n for n, _ in _calls(tree)}
    assert {"pickle.loads", "np.load", "eval", "importlib.import_module"} <= names


# ---------------------------------------------------------------- the bait
@pytest.fixture
def bait(tmp_path, monkeypatch):
    """A module that marks its own import; returns a function telling whether it was imported."""
    folder = tmp_path / "bait"
    folder.mkdir()
    mark = tmp_path / "imported"
    (folder / f"{NAME}.py").write_text(
        f"from pathlib import Path\nPath({str(mark)!r}).write_text('imported')\n\n"
        "def boom(instance, context):\n    return 1.0\n")
    monkeypatch.syspath_prepend(str(folder))
    monkeypatch.delitem(sys.modules, NAME, raising=False)
    monkeypatch.chdir(tmp_path)
    return lambda: mark.exists() or NAME in sys.modules


def baited_instance(path):
    """An instance file naming the bait wherever free text is allowed."""
    doc = good_doc()
    doc["planted"] = [1] * doc["n"]
    doc["metadata"] = {
        "construction": {"family": BAIT, "module": BAIT, "loader": BAIT},
        "scores": [{"metric": BAIT, "value": 1.0, "solver": BAIT, "schedule": {"kind": BAIT}, "units": BAIT}],
        "tags": [BAIT], "fitness": BAIT, "sampler": BAIT, "metric": BAIT, "exporter": BAIT,
    }
    doc["provenance"] = {"fitness": BAIT, "tool_version": BAIT, "preset": BAIT}
    return write_doc(path, doc)


def test_a_baited_instance_file_is_only_data(tmp_path, capsys, bait):
    f = baited_instance(tmp_path / "bait.json")
    lib = ["--library", tmp_path / "lib"]
    commands = [
        ["info", f], ["info", f, "--json"],
        ["score", f, "--reads", "4", "--sweeps", "5,10", "--scale", "1"],
        ["certify", f, "--time-limit", "5"],
        ["profile", f, "--reads", "4", "--sweeps", "12", "--points", "6", "--scale", "1", "--out", tmp_path / "p"],
        ["library", "add", f, "--tag", BAIT, *lib],
        ["library", "list", *lib], ["library", "list", "--metric", BAIT, "--json", *lib],
        ["library", "verify", *lib],
        ["library", "export", "--all", "--format", "json,dimod,ising-mtx,qubo-mtx,edgelist,npz",
         "--out", tmp_path / "out", *lib],
        ["library", "suite", "--count", "1", "--out", tmp_path / "suite", "--include-not-proven", *lib],
        ["library", "check-suite", tmp_path / "suite"],
        ["report", tmp_path / "lib", "--out", tmp_path / "lib-report.html"],
    ]
    for argv in commands:
        code, out, err, _ = run(argv, capsys)
        assert code in (0, 1, 2) and "Traceback" not in err, (argv, err)
        assert not bait(), f"{argv[:2]} imported a module named in the file"
    ident = json.loads(run(["library", "list", "--json", *lib], capsys)[1])[0]["id"]
    code, out, _, _ = run(["library", "show", ident, *lib], capsys)
    assert code == 0 and BAIT in out and not bait()  # shown as text, never imported


def test_a_baited_library_index_is_only_data(tmp_path, capsys, bait):
    from hardcases import make_library

    root = make_library(tmp_path / "lib", count=2)
    con = sqlite3.connect(root / "index.sqlite")
    con.execute("UPDATE entries SET graph = ?, couplings = ?, fields = ?, cert_status = 'unverified', cert_energy = 0,"
                " cert_state = '', cert_method = ?, cert_details = ?, construction = ?, rules = ?",
                (BAIT, BAIT, BAIT, BAIT, json.dumps({"solver": BAIT}), json.dumps({"family": BAIT}),
                 json.dumps({"couplings": BAIT})))
    con.commit()
    con.close()
    for argv in (["list"], ["list", "--graph", BAIT], ["verify"], ["export", "--all", "--out", tmp_path / "o"]):
        code, out, err, _ = run(["library", *argv, "--library", root], capsys)
        assert "Traceback" not in err and not bait(), argv


def test_a_baited_run_folder_is_only_data(tmp_path, capsys, bait):
    """A run folder (preset, checkpoint, summary) naming a fitness function: reporting on it or resuming
    from it with an ordinary preset never imports that function."""
    run_dir = tmp_path / "run"
    run_dir.mkdir()
    (run_dir / "preset.toml").write_text(f'[fitness]\nmetric = "{BAIT}"\n')
    (run_dir / "summary.json").write_text(json.dumps({
        "format": "instgen-run-summary", "format_version": 1, "run": {"metric": BAIT, "sampler": BAIT,
                                                                        "solvers": [BAIT], "name": BAIT},
        "winners": [], "baseline": {"count": 0, "instances": [], "certified": 0}, "comparison": [],
        "cautions": [BAIT]}))
    (run_dir / "log.jsonl").write_text(json.dumps({"generation": 0, "best": 1.0, "metric": BAIT}) + "\n")
    (run_dir / "checkpoint.json").write_text(json.dumps({
        "format": "instgen-checkpoint", "format_version": 1, "resume_hash": BAIT,
        "population": [{"genome": {"kind": BAIT}}], "hall": []}))
    preset = tmp_path / "own.toml"
    preset.write_text('[graph]\nspec = "chimera:1"\n[search]\npopulation = 4\nelites = 1\nworkers = 1\n')
    for argv in (["report", run_dir, "--no-measure", "--out", tmp_path / "r.html"],
                 ["breed", preset, "--out", run_dir, "--resume", "--no-report", "--quiet"]):
        code, out, err, _ = run(argv, capsys)
        assert "Traceback" not in err and not bait(), (argv, err)


def test_a_fitness_function_runs_only_because_the_user_named_it(tmp_path, bait):
    """Reading and checking a preset that names a function imports nothing; breeding with it does."""
    from instgen.evolve.engine import Breeder
    from instgen.preset import load_preset

    preset = tmp_path / "mine.toml"
    preset.write_text(f'[graph]\nspec = "chimera:1"\n[fitness]\nmetric = "{BAIT}"\n'
                      '[search]\npopulation = 4\nelites = 1\nworkers = 1\n')
    cfg = load_preset(preset)
    assert cfg["fitness"]["metric"] == BAIT and not bait()
    Breeder(cfg, tmp_path / "run")  # the user breeds with their own preset: now the function is loaded
    assert bait()


# ------------------------------------------------------------ the local cluster
def test_the_local_dask_cluster_listens_on_loopback_only(monkeypatch):
    import instgen.evolve.cluster as cluster
    from instgen.fitness import Context
    from instgen.make import topology
    from instgen.preset import validate

    seen = {}

    class Stop(Exception):
        pass

    def recorder(**kwargs):
        seen.update(kwargs)
        raise Stop

    monkeypatch.setattr(cluster.distributed, "LocalCluster", recorder)
    ctx = Context.from_config(validate({"graph": {"spec": "chimera:1"}}), topology("chimera:1"))
    with pytest.raises(Stop):
        cluster.DaskExecutor("local:2").start(ctx)
    assert seen["host"] == "127.0.0.1"
    addresses = {k: v for k, v in seen.items() if "address" in k}
    addresses.update({f"scheduler_kwargs.{k}": v for k, v in seen.get("scheduler_kwargs", {}).items()
                      if "address" in k or k == "host"})
    assert addresses, "no listening addresses were given at all"
    for key, value in addresses.items():
        assert value is None or str(value).startswith(("127.0.0.1", "tcp://127.0.0.1")), (key, value)
