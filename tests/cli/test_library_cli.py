"""instgen library from the command line: the journeys, and bad input refused cleanly."""

import hashlib
import json
import shutil
import sqlite3

import numpy as np
import pytest

from instgen.cli import main
from instgen.instance import random_gauge
from instgen.io import save_instance
from instgen.make import make_instance
from instgen.records import Certificate, Score
from instgen.testing.cli import run_cli


run = run_cli


def snapshot(root):
    """Every file under root with its SHA-256 (to prove nothing changed)."""
    return {str(p.relative_to(root)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(root.rglob("*")) if p.is_file()}


def certified(graph, seed, tts):
    """A gauge-transformed ferromagnet: E(g) = -sum|J| is a proven ground state
    (no coupling is frustrated, so every bond reaches its bound; common practice)."""
    base = make_instance(graph, "int:3", seed=seed)
    g = random_gauge(base.n, seed=seed + 500)
    inst = base.with_couplings(-np.abs(base.J) * g[base.edges[:, 0]] * g[base.edges[:, 1]])
    cert = Certificate(energy=-float(np.abs(inst.J).sum()), state=g, method="bond bound", status="proven")
    return inst.replace(metadata={**inst.metadata, "certificate": cert.to_dict(),
                                  "scores": [Score("tts", tts, solver="sa", reads=100).to_dict()]})


@pytest.fixture(scope="module")
def template(tmp_path_factory):
    """Instance files and a library holding them, built once and copied for each test."""
    root = tmp_path_factory.mktemp("template")
    paths = []
    for k in range(14):
        graph = "chimera:4" if k < 10 else "chimera:2"
        paths.append(save_instance(certified(graph, k, 10.0 * (k + 1)), root / f"c{k}.json"))
    paths.append(save_instance(make_instance("chimera:4", "gaussian", seed=1), root / "plain.json"))
    assert main(["library", "add", *map(str, paths), "--tag", "chip", "--library", str(root / "lib")]) == 0
    return root


@pytest.fixture
def files(tmp_path, template):
    for p in template.glob("*.json"):
        shutil.copy(p, tmp_path / p.name)
    return sorted(tmp_path.glob("c*.json"), key=lambda p: int(p.stem[1:])) + [tmp_path / "plain.json"]


@pytest.fixture
def library(tmp_path, template, files, capsys):
    shutil.copytree(template / "lib", tmp_path / "lib")
    capsys.readouterr()
    return tmp_path / "lib"


def test_add_list_show_export_suite_verify(tmp_path, files, library, capsys):
    lib = ["--library", str(library)]
    code, out, _ = run(["library", "add", str(files[0]), *lib], capsys)
    assert code == 0 and "duplicate" in out and len(out.splitlines()) == 1
    code, out, _ = run(["library", "list", "--certified", "--graph", "chimera:4", *lib], capsys)
    assert code == 0 and out.count("chimera:4") == 10 and "(proven)" in out and "not proven" not in out
    code, out, _ = run(["library", "list", *lib], capsys)
    assert "1 not proven" in out and "unknown (no certificate)" in out
    code, out, _ = run(["library", "list", "--metric", "tts", "--min", "95", "--json", *lib], capsys)
    rows = json.loads(out)
    assert sorted(r["scores"][0]["value"] for r in rows) == [100.0, 110.0, 120.0, 130.0, 140.0]
    ident = rows[0]["id"][:6]
    code, out, _ = run(["library", "show", ident, *lib], capsys)
    assert code == 0 and rows[0]["fingerprint"] in out and "tts = " in out
    code, out, _ = run(["library", "export", ident, "--format", "qubo-mtx,edgelist", "--out",
                        str(tmp_path / "out"), *lib], capsys)
    assert code == 0 and len(list((tmp_path / "out").iterdir())) == 2
    code, out, _ = run(["library", "export", "--graph", "chimera:2", "--format", "npz", "--out",
                        str(tmp_path / "small"), *lib], capsys)
    assert code == 0 and len(list((tmp_path / "small").glob("*.npz"))) == 4
    code, out, _ = run(["library", "suite", "--count", "12", "--out", str(tmp_path / "suite"), *lib], capsys)
    assert code == 0 and "12 instances" in out and "12 planted or proven" in out
    code, out, _ = run(["library", "check-suite", str(tmp_path / "suite")], capsys)
    assert code == 0 and "checked 12 suite instances: OK" in out
    code, out, _ = run(["library", "verify", *lib], capsys)
    assert code == 0 and "checked 15 entries: OK" in out
    code, out, _ = run(["library", "rm", ident, *lib], capsys)
    assert code == 0 and out.startswith("removed")
    code, out, _ = run(["library", "list", "--json", *lib], capsys)
    assert len(json.loads(out)) == 14


def test_library_folder_from_environment(tmp_path, files, monkeypatch, capsys):
    monkeypatch.setenv("INSTGEN_LIBRARY", str(tmp_path / "envlib"))
    assert run(["library", "add", str(files[0])], capsys)[0] == 0
    code, out, _ = run(["library", "list", "--json"], capsys)
    assert code == 0 and len(json.loads(out)) == 1 and (tmp_path / "envlib" / "index.sqlite").exists()


def test_verify_reports_a_tampered_file_and_exits_1(library, capsys):
    entry = next((library / "entries").iterdir())
    doc = json.loads(entry.read_text())
    doc["J"][0] = -doc["J"][0]
    entry.write_text(json.dumps(doc))
    code, out, err = run(["library", "verify", "--library", str(library)], capsys)
    assert code == 1 and "PROBLEM" in out and "checksum" in out and err == ""


def one_line_exit_2(argv, capsys, needle):
    code, out, err = run(argv, capsys)
    assert code == 2, (out, err)
    assert err.count("\n") == 1 and needle in err and "Traceback" not in err


def test_missing_library(tmp_path, capsys):
    for action in (["list"], ["show", "abcd1234"], ["verify"], ["rm", "abcd"], ["suite", "--count", "2", "--out",
                                                                                str(tmp_path / "s")]):
        one_line_exit_2(["library", *action, "--library", str(tmp_path / "nowhere")], capsys, "no library")
    assert list(tmp_path.iterdir()) == []


def test_newer_schema(library, capsys):
    con = sqlite3.connect(library / "index.sqlite")
    con.execute("UPDATE meta SET value = '7' WHERE key = 'schema_version'")
    con.commit()
    con.close()
    before = snapshot(library)
    one_line_exit_2(["library", "list", "--library", str(library)], capsys, "newer")
    one_line_exit_2(["library", "add", str(library / "..") + "/c0.json", "--library", str(library)], capsys, "newer")
    assert snapshot(library) == before


@pytest.mark.parametrize("argv,needle", [
    (["show", "nothex"], "not an entry id"),
    (["show", "0000000"], "no entry"),
    (["rm", "{first}", "0000000"], "no entry"),
    (["add", "{tmp}/c1.json", "{tmp}/missing.json"], "no such file"),
    (["add", "{tmp}/broken.json"], "not valid JSON"),
    (["export", "{first}", "--format", "excel", "--out", "{tmp}/o"], "unknown export format"),
    (["export", "--out", "{tmp}/o"], "name the entries"),
    (["suite", "--count", "99", "--out", "{tmp}/s"], "at most 14"),
    (["list", "--min", "3"], "needs a metric"),
    (["check-suite", "{tmp}"], "no manifest"),
])
def test_bad_input_is_one_line_exit_2_and_changes_nothing(tmp_path, library, capsys, argv, needle):
    (tmp_path / "broken.json").write_text('{"format": "instgen-instance", "n": ')
    first = next((library / "entries").iterdir()).name[:10]
    argv = [a.replace("{tmp}", str(tmp_path)).replace("{first}", first) for a in argv]
    before = snapshot(tmp_path)
    extra = [] if argv[0] == "check-suite" else ["--library", str(library)]
    one_line_exit_2(["library", *argv, *extra], capsys, needle)
    assert snapshot(tmp_path) == before


def test_missing_entry_file_and_occupied_export_folder(tmp_path, library, capsys):
    lib = ["--library", str(library)]
    entries = sorted((library / "entries").iterdir())
    out_dir = tmp_path / "out"
    assert run(["library", "export", entries[0].name[:10], "--out", str(out_dir), *lib], capsys)[0] == 0
    before = snapshot(tmp_path)
    one_line_exit_2(["library", "export", entries[0].name[:10], "--out", str(out_dir), *lib], capsys,
                    "already exists")
    assert snapshot(tmp_path) == before
    entries[1].unlink()
    before = snapshot(tmp_path)
    one_line_exit_2(["library", "export", entries[1].name[:10], "--out", str(tmp_path / "o2"), *lib], capsys,
                    "missing")
    assert snapshot(tmp_path) == before
