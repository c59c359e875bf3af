"""The bad-input catalogue: every malformed preset, instance file, library folder or argument
is refused with one clear line on stderr and exit code 2, without a traceback, and nothing
on disk changes (file bytes, modification times and folder listings compared before and after).

Complements the loader- and validator-level checks in tests/test_io.py,
tests/evolve/test_preset.py and tests/cli/*: those prove the right error type is
raised; these prove what a user sees and that their files are safe.
"""

from __future__ import annotations

import json
import sqlite3
import subprocess
import sys

import pytest

from hardcases import copy_tree, good_doc, make_library, refused, run, snapshot, write_doc

# ------------------------------------------------------------------ presets
#: A small valid preset; each case changes some "table.key" to a TOML literal.
BASE = {
    "run": {"seed": "1"},
    "graph": {"spec": '"chimera:1"'},
    "fitness": {"sweeps": "[5, 50]", "reads": "8", "confirm_reads": "16"},
    "search": {"population": "4", "generations": "1", "elites": "1", "workers": "1"},
    "library": {"baseline": "0"},
}


def preset_text(changes: dict) -> str:
    tables = {t: dict(v) for t, v in BASE.items()}
    for dotted, literal in changes.items():
        table, key = dotted.split(".", 1)
        tables.setdefault(table, {})[key] = literal
    return "".join(f"[{t}]\n" + "".join(f"{k} = {v}\n" for k, v in kv.items()) for t, kv in tables.items())


PRESETS = [
    ("unknown table", {"breeding.population": "4"}, "unknown table [breeding]"),
    ("unknown key", {"fitness.sweep_counts": "[5]"}, "unknown key 'sweep_counts'"),
    ("text for a count", {"search.generations": '"many"'}, "must be a whole number"),
    ("number for a spec", {"graph.spec": "4"}, "must be a string"),
    ("text for a list", {"fitness.sweeps": '"5,50"'}, "must be a list"),
    ("text for a number", {"couplings.range": '"two"'}, "expected a number or a fraction"),
    ("text for a whole number", {"search.population": '"2"'}, "must be a whole number"),
    ("true for a count", {"search.population": "true"}, "must be a whole number"),
    ("negative tournament", {"search.tournament": "-2"}, "tournament"),
    ("empty winners", {"search.winners": "0"}, "winners"),
    ("negative seed", {"run.seed": "-1"}, "seed"),
    ("absurd population", {"search.population": "1000000000"}, "population"),
    ("absurd generations", {"search.generations": "1000000000000"}, "generations"),
    ("absurd reads", {"fitness.reads": "1000000000"}, "reads"),
    ("absurd sweep count", {"fitness.sweeps": "[5, 100000000]"}, "at most 30 sweep counts"),
    ("absurd sparse graph", {"graph.spec": '"chimera:4000"'}, "128,000,000 nodes"),
    ("absurd dense graph", {"graph.spec": '"complete:100000"'}, "4,999,950,000 edges"),
    ("empty graph spec", {"graph.spec": '""'}, "graph spec is empty"),
    ("graph left without nodes", {"graph.spec": '"chimera:1;dead-nodes=8"'}, "no nodes left"),
    ("unknown graph family", {"graph.spec": '"hexagon:3"'}, "unknown graph family"),
    ("malformed dead edges", {"graph.spec": '"chimera:1;dead-edges=[[0]]"'}, "pair of node labels"),
    ("NaN range", {"couplings.range": "nan"}, "finite"),
    ("infinite precision", {"couplings.precision": "inf"}, "finite"),
    ("NaN in the alphabet", {"couplings.alphabet": '"levels:nan,1"'}, "finite"),
    ("infinite alphabet", {"couplings.alphabet": '"gaussian:inf"'}, "finite"),
    ("overflowing alphabet", {"couplings.alphabet": '"uniform:-1e308,1e308"'}, "no larger than"),
    ("alphabet beyond its range", {"couplings.alphabet": '"int:4"', "couplings.range": "2"}, "reaches |4|"),
    ("alphabet off the precision", {"couplings.alphabet": '"levels:0.5,1"', "couplings.precision": "0.3"},
     "not multiples"),
    ("fields beyond the field range", {"couplings.fields": '"int:2"', "couplings.field_range": "1"},
     "fields alphabet"),
    ("infinite beta", {"fitness.beta_range": "[inf, 1.0]"}, "finite"),
    ("NaN target", {"search.target": "nan"}, "finite"),
    ("NaN operator weight", {"search.operators": "{ uniform = nan }"}, "uniform"),
    ("unknown certify method", {"library.certify": '"guess"'}, "certify must be one of"),
    ("empty tag", {"library.tags": '["", "chip"]'}, "non-empty"),
    ("absurd loop density", {"planting.method": '"loops"', "planting.density": "1e308"}, "at most 100"),
    ("enumerating sampler", {"fitness.sampler": '"exact"'}, "lists states"),
    ("empty output folder", {"run.out": '""'}, "must not be empty"),
    ("newer preset", {"run.format_version": "2"}, "newer"),
    ("fitness function without a name", {"fitness.metric": '"os.path:"'}, "not of the form"),
]

RAW_PRESETS = [
    ("truncated TOML", "[run]\nseed = 1\n[search]\npopulation = ", "not valid TOML"),
    ("binary preset", b"\xff\xfe\x00\x01[run]", "not a text file"),
    ("deeply nested", "[fitness]\nweights = " + "[" * 600 + "]" * 600 + "\n", "nested too deeply"),
    ("a value where a table belongs", 'graph = "chimera:1"\n', "must be a table"),
    ("a table name with a line break", '["run\\nnow"]\nseed = 1\n', "unknown table"),
]


def breed(tmp_path, preset, *flags):
    return ["breed", preset, "--out", tmp_path / "run", "--no-report", "--quiet", *flags]


@pytest.fixture
def here(tmp_path, monkeypatch):
    """Commands run inside tmp_path, so a stray write anywhere relative lands in the snapshot."""
    monkeypatch.chdir(tmp_path)
    return tmp_path


@pytest.mark.parametrize("changes,needle", [c[1:] for c in PRESETS], ids=[c[0] for c in PRESETS])
def test_bad_preset_values(here, capsys, changes, needle):
    p = here / "preset.toml"
    p.write_text(preset_text(changes))
    refused(breed(here, p), capsys, here, needle)


@pytest.mark.parametrize("text,needle", [c[1:] for c in RAW_PRESETS], ids=[c[0] for c in RAW_PRESETS])
def test_malformed_preset_files(here, capsys, text, needle):
    p = here / "preset.toml"
    (p.write_bytes if isinstance(text, bytes) else p.write_text)(text)
    refused(breed(here, p), capsys, here, needle)


def test_missing_preset_and_a_folder_for_a_preset(here, capsys):
    refused(breed(here, here / "nope.toml"), capsys, here, "no such preset")
    (here / "folder.toml").mkdir()
    refused(breed(here, here / "folder.toml"), capsys, here, "is a folder")


BREED_FLAGS = [
    ("override nested too deeply", ["--set", "fitness.sweeps=" + "[" * 600 + "]" * 600], "nested too deeply"),
    ("override without a table", ["--set", "population"], "table.key=value"),
    ("zero population", ["--population", "0"], "positive"),
    ("unknown cluster address", ["--cluster", "udp://somewhere"], "--cluster must be"),
    ("absurd graph flag", ["--graph", "zephyr:999"], "nodes"),
    ("NaN coupling flag", ["--couplings", "levels:nan"], "finite"),
    ("resume with nothing to resume", ["--resume"], "no checkpoint"),
    ("library in a folder of other things", ["--library", "{tmp}"], "not an instgen library"),
    ("library path that is a file", ["--library", "{tmp}/preset.toml"], "not an instgen library"),
]


@pytest.mark.parametrize("flags,needle", [c[1:] for c in BREED_FLAGS], ids=[c[0] for c in BREED_FLAGS])
def test_bad_breed_flags(here, capsys, flags, needle):
    p = here / "preset.toml"
    p.write_text(preset_text({}))
    refused(breed(here, p, *[str(f).replace("{tmp}", str(here)) for f in flags]), capsys, here, needle)


def _checkpoint_hash(preset):
    from instgen.evolve.engine import _resume_hash
    from instgen.preset import load_preset

    return _resume_hash(load_preset(preset))


RUN_FOLDERS = [
    ("fresh run over an existing one", lambda p: "{}", [], "already holds a run"),
    ("damaged checkpoint", lambda p: '{"format": "instgen-checkpo', ["--resume"], "damaged"),
    ("checkpoint of a newer format", lambda p: json.dumps({"format": "instgen-checkpoint", "format_version": 9}),
     ["--resume"], "checkpoint format 9"),
    ("checkpoint without its state", lambda p: json.dumps({"format": "instgen-checkpoint", "format_version": 1,
                                                          "resume_hash": _checkpoint_hash(p)}),
     ["--resume"], "damaged"),
    ("checkpoint of other settings", lambda p: json.dumps({"format": "instgen-checkpoint", "format_version": 1,
                                                          "resume_hash": "0" * 16}),
     ["--resume"], "different settings"),
]


@pytest.mark.parametrize("content,flags,needle", [c[1:] for c in RUN_FOLDERS], ids=[c[0] for c in RUN_FOLDERS])
def test_run_folders_are_never_overwritten_or_misread(here, capsys, content, flags, needle):
    p = here / "preset.toml"
    p.write_text(preset_text({}))
    (here / "run").mkdir()
    (here / "run" / "checkpoint.json").write_text(content(p))
    (here / "run" / "log.jsonl").write_text('{"generation": 0}\n')
    refused(breed(here, p, *flags), capsys, here, needle)


# ------------------------------------------------------------ instance files
def _set(key, value):
    return lambda d: {**d, key: value}


def _meta(**meta):
    return lambda d: {**d, "metadata": {**d["metadata"], **meta}}


def _literal(doc, key, token):
    """The file's text with the first value of ``key`` written as ``token`` (JSON has no NaN or infinity)."""
    return json.dumps({**doc, key: ["@"] + doc[key][1:]}).replace('"@"', token, 1)


def _cert(**changes):
    def f(d):
        cert = {"energy": -8.0, "state": [1] * d["n"], "method": "enumeration", "status": "proven",
                "seconds": 0.0, "ground_states": None, "details": {}}
        return {**d, "metadata": {**d["metadata"], "certificate": {**cert, **changes}}}
    return f


INSTANCES = [
    ("truncated", lambda d: json.dumps(d)[:300], "not valid JSON"),
    ("empty file", lambda d: "", "not valid JSON"),
    ("byte order mark", lambda d: "\ufeff" + json.dumps(d), "not valid JSON"),
    ("not UTF-8", lambda d: b"\x89PNG\r\n\x1a\n\x00\x00", "UTF-8"),
    ("nested too deeply", lambda d: "[" * 100_000 + "]" * 100_000, "nested too deeply"),
    ("a number at the top", lambda d: "42", "JSON object"),
    ("format version 0", _set("format_version", 0), "not supported"),
    ("format version as text", _set("format_version", "1"), "whole number"),
    ("missing couplings", lambda d: {k: v for k, v in d.items() if k != "J"}, "missing field"),
    ("no spins", lambda d: {**d, "n": 0, "labels": [], "edges": [], "J": [], "h": []}, "at least one spin"),
    ("n as true", _set("n", True), "positive whole number"),
    ("h too long", lambda d: {**d, "h": d["h"] + [0.0]}, "h has"),
    ("labels too few", lambda d: {**d, "labels": d["labels"][:-1]}, "labels for n"),
    ("planted too short", lambda d: {**d, "planted": [1] * (d["n"] - 1)}, "planted"),
    ("text labels collide", lambda d: {**d, "labels": ["q"] * d["n"]}, "collide"),
    ("tuple labels collide", lambda d: {**d, "labels": [[0, 1]] * d["n"]}, "collide"),
    ("negative spin index", lambda d: {**d, "edges": [[-1, 3]] + d["edges"][1:]}, "negative spin index"),
    ("index that wraps a 32-bit integer", lambda d: {**d, "edges": [[0, 2**32 + 1]] + d["edges"][1:]}, "2**31"),
    ("index beyond any integer type", lambda d: {**d, "edges": [[0, 2**70]] + d["edges"][1:]}, "pairs of whole"),
    ("fractional spin index", lambda d: {**d, "edges": [[0, 1.5]] + d["edges"][1:]}, "pairs of whole"),
    ("NaN coupling", lambda d: _literal(d, "J", "NaN"), "finite"),
    ("infinite field", lambda d: _literal(d, "h", "Infinity"), "finite"),
    ("coupling too large for a float", lambda d: _literal(d, "J", "1e999"), "finite"),
    ("integer coupling beyond a float", lambda d: {**d, "J": [2**1100] + d["J"][1:]}, "fit a float"),
    ("energies that overflow", lambda d: {**d, "J": [1e308] * len(d["J"])}, "overflow"),
    ("true as a coupling", lambda d: {**d, "J": [True] + d["J"][1:]}, "numbers only"),
    ("infinity in the metadata", lambda d: json.dumps({**d, "metadata": {"note": "@"}}).replace('"@"', "1e999"),
     "1e999"),
    ("lone surrogate in a label", lambda d: json.dumps({**d, "labels": ["@"] + d["labels"][1:]})
     .replace('"@"', '"\\ud800"'), "not valid Unicode"),
    ("graph as a number", _set("graph", 7), "'graph' must be a string"),
    ("certificate as text", _meta(certificate="trust me"), "certificate"),
    ("certificate of the wrong length", _cert(state=[1, -1]), "certificate"),
    ("certificate with a made-up status", _cert(status="trust-me"), "certificate"),
    ("certificate energy as text", _cert(energy="low"), "certificate"),
    ("rules naming an unknown alphabet", _meta(rules={"couplings": "triangle", "fields": "none"}), "rules"),
    ("rules with a range as text", _meta(rules={"couplings": "pm1", "fields": "none", "coupling_range": "x"}),
     "rules"),
    ("scores as text", _meta(scores="fast"), "scores"),
    ("score without a metric", _meta(scores=[{"value": 3}]), "scores"),
    ("tags that are not text", _meta(tags=[1, None]), "tags"),
    ("construction as text", _meta(construction="loops"), "construction"),
]


def _write_case(path, make):
    doc = make(good_doc())
    if isinstance(doc, bytes):
        path.write_bytes(doc)
    elif isinstance(doc, str):
        path.write_text(doc)
    else:
        write_doc(path, doc)
    return path


@pytest.mark.parametrize("make,needle", [c[1:] for c in INSTANCES], ids=[c[0] for c in INSTANCES])
def test_bad_instance_files(here, capsys, make, needle):
    f = _write_case(here / "bad.json", make)
    refused(["info", f], capsys, here, needle)


def test_nan_coupling_case_really_holds_nan(tmp_path):
    """Guard for the text-edited cases above: the edit must land in the file (else they test nothing)."""
    cases = dict((c[0], c[1]) for c in INSTANCES)
    for name, token in (("NaN coupling", "NaN"), ("infinite field", "Infinity"),
                        ("coupling too large for a float", "1e999"), ("infinity in the metadata", "1e999"),
                        ("lone surrogate in a label", "\\ud800")):
        assert token in cases[name](good_doc()), name


COMMANDS = [
    ("score", lambda f, d: ["score", f, "--reads", "4", "--sweeps", "5,10", "--scale", "1"]),
    ("certify and write", lambda f, d: ["certify", f, "--write"]),
    ("file into a library", lambda f, d: ["library", "add", f, "--library", d / "lib"]),
    ("anneal profile", lambda f, d: ["profile", f, "--out", d / "profiles"]),
]


@pytest.mark.parametrize("case", ["truncated", "certificate of the wrong length", "no spins",
                                  "infinity in the metadata"])
@pytest.mark.parametrize("argv", [c[1] for c in COMMANDS], ids=[c[0] for c in COMMANDS])
def test_bad_instance_files_under_every_command(here, capsys, case, argv):
    f = _write_case(here / "bad.json", dict((c[0], c[1]) for c in INSTANCES)[case])
    refused(argv(f, here), capsys, here, dict((c[0], c[2]) for c in INSTANCES)[case])


# ------------------------------------------------------------ library folders
@pytest.fixture(scope="module")
def template(tmp_path_factory):
    return make_library(tmp_path_factory.mktemp("template") / "lib", count=3)


@pytest.fixture
def lib(here, template):
    return copy_tree(template, here / "lib")


def _sql(statement):
    def f(root):
        con = sqlite3.connect(root / "index.sqlite")
        con.execute(statement)
        con.commit()
        con.close()
    return f


def _write(name, data):
    return lambda root: (root / name).write_bytes(data)


def _entries(action):
    def f(root):
        for p in sorted((root / "entries").iterdir()):
            action(p)
    return f


def _remove_index(root):
    (root / "index.sqlite").unlink()


def _index_as_folder(root):
    (root / "index.sqlite").unlink()
    (root / "index.sqlite").mkdir()


def _remove_entries_folder(root):
    for p in (root / "entries").iterdir():
        p.unlink()
    (root / "entries").rmdir()


LIBRARIES = [
    ("missing index", _remove_index, ["list"], "has no index.sqlite"),
    ("index of garbage", _write("index.sqlite", b"not a database at all" * 100), ["list"], "damaged"),
    ("empty index", _write("index.sqlite", b""), ["list"], "damaged"),
    ("index is a folder", _index_as_folder, ["list"], "not a file"),
    ("schema version 0", _sql("UPDATE meta SET value = '0' WHERE key = 'schema_version'"), ["list"],
     "cannot upgrade"),
    ("no schema version", _sql("DELETE FROM meta WHERE key = 'schema_version'"), ["list"], "no schema version"),
    ("schema version as text", _sql("UPDATE meta SET value = 'two' WHERE key = 'schema_version'"), ["verify"],
     "no schema version"),
    ("other fingerprint scheme", _sql("UPDATE meta SET value = '9' WHERE key = 'fingerprint_version'"), ["list"],
     "fingerprint version 9"),
    ("entries folder missing", _remove_entries_folder, ["list"], "entries/ folder is missing"),
    ("entry file missing, suite asked", _entries(lambda p: p.unlink()),
     ["suite", "--count", "2", "--out", "{tmp}/suite", "--include-not-proven"], "missing"),
    ("entry file truncated, export asked", _entries(lambda p: p.write_bytes(p.read_bytes()[:40])),
     ["export", "--all", "--out", "{tmp}/out"], "changed since it was filed"),
    ("entry file outside the library", _sql("UPDATE entries SET file = '../../../etc/passwd'"),
     ["export", "--all", "--out", "{tmp}/out"], "not entries/<fingerprint>.json"),
    ("entry file outside, verify asked", _sql("UPDATE entries SET file = '/etc/hostname'"), ["verify"],
     "not entries/<fingerprint>.json"),
    ("certificate energy as text", _sql("UPDATE entries SET cert_status = 'proven', cert_energy = 'low', "
                                        "cert_state = '++'"), ["list"], "damaged"),
    ("provenance not JSON", _sql("UPDATE entries SET provenance = '{oops'"), ["show", "{first}"], "damaged"),
    ("scores table gone", _sql("DROP TABLE scores"), ["list"], "no such table"),
]


@pytest.mark.parametrize("damage,argv,needle", [c[1:] for c in LIBRARIES], ids=[c[0] for c in LIBRARIES])
def test_damaged_library_folders(here, lib, capsys, damage, argv, needle):
    first = sorted((lib / "entries").iterdir())[0].name[:8]
    damage(lib)
    argv = [str(a).replace("{tmp}", str(here)).replace("{first}", first) for a in argv]
    refused(["library", *argv, "--library", lib], capsys, here, needle)


LIBRARY_ARGS = [
    ("library path is a file", ["add", "{tmp}/i.json", "--library", "{tmp}/i.json"], "not an instgen library"),
    ("library inside a file", ["add", "{tmp}/i.json", "--library", "{tmp}/i.json/lib"], "cannot create"),
    ("library in a non-empty folder", ["add", "{tmp}/i.json", "--library", "{tmp}"], "not an instgen library"),
    ("export into a file", ["export", "--all", "--out", "{tmp}/i.json", "--library", "{tmp}/lib"], "cannot write"),
    ("export beneath a file", ["export", "--all", "--out", "{tmp}/i.json/out", "--library", "{tmp}/lib"],
     "cannot write"),
    ("suite into a non-empty folder", ["suite", "--count", "2", "--out", "{tmp}", "--include-not-proven",
                                       "--library", "{tmp}/lib"], "new or empty folder"),
    ("empty tag", ["add", "{tmp}/i.json", "--tag", " ", "--library", "{tmp}/lib"], "non-empty"),
    ("id too short", ["show", "ab", "--library", "{tmp}/lib"], "not an entry id"),
    # an argument of bytes that are not UTF-8 reaches Python as lone surrogates
    ("tag that is not text", ["list", "--tag", "\udcff", "--library", "{tmp}/lib"], "valid text"),
    ("graph filter that is not text", ["list", "--graph", "chimera:\udcff", "--library", "{tmp}/lib"],
     "valid text"),
    ("check-suite on a file", ["check-suite", "{tmp}/i.json"], "cannot be read"),
    ("check-suite with a damaged manifest", ["check-suite", "{tmp}/cs"], "cannot be read"),
    ("export format unknown", ["export", "--all", "--format", "pickle", "--out", "{tmp}/out",
                               "--library", "{tmp}/lib"], "unknown export format"),
]


@pytest.mark.parametrize("argv,needle", [c[1:] for c in LIBRARY_ARGS], ids=[c[0] for c in LIBRARY_ARGS])
def test_bad_library_arguments(here, lib, capsys, argv, needle):
    write_doc(here / "i.json", good_doc(seed=9))
    (here / "cs").mkdir()
    (here / "cs" / "manifest.json").write_text("{")
    argv = [str(a).replace("{tmp}", str(here)) for a in argv]
    refused(["library", *argv], capsys, here, needle)


# ------------------------------------------------------------ other commands
CLI = [
    ("graph size 0", ["graph", "chimera:0"], "at least 1"),
    ("graph label that is a table", ["graph", "chimera:2;dead-edges=[[0,{}]]"], "node labels"),
    ("graph dead nodes too many", ["graph", "chimera:2;dead-nodes=1e400"], "whole count"),
    ("graph option unknown", ["graph", "chimera:2;broken=1"], "unknown graph option"),
    ("graph probability above 1", ["graph", "gnp:10,2"], "(0, 1]"),
    ("graph periodic too small", ["graph", "square:2x2,periodic"], "periodic"),
    ("graph regular impossible", ["graph", "regular:3,10"], "D < N"),
    ("graph edge list missing", ["graph", "file:{tmp}/nowhere.txt"], "cannot read edge list"),
    ("graph of 10^8 spins", ["graph", "chimera:4000"], "128,000,000 nodes"),
    ("make alphabet int:0", ["make", "chimera:1", "--couplings", "int:0", "--out", "{tmp}/x.json"], "int:K"),
    ("make gaussian too wide", ["make", "chimera:1", "--couplings", "gaussian:1e308", "--out", "{tmp}/x.json"],
     "no larger than"),
    ("make NaN range", ["make", "chimera:1", "--range", "nan", "--out", "{tmp}/x.json"], "coupling range"),
    ("make subnormal precision", ["make", "chimera:1", "--precision", "1e-320", "--out", "{tmp}/x.json"],
     "precision"),
    ("make output is a folder", ["make", "chimera:1", "--out", "{tmp}/sub"], "cannot write"),
    ("make output beneath a file", ["make", "chimera:1", "--out", "{tmp}/good.json/x.json"], "cannot write"),
    ("make seed not whole", ["make", "chimera:1", "--seed", "1.5", "--out", "{tmp}/x.json"], "whole number"),
    ("plant absurd density", ["plant", "chimera:2", "--density", "1e308", "--out", "{tmp}/p.json"], "loops"),
    ("plant absurd term density", ["plant", "chimera:2", "--method", "terms", "--density", "1e308", "--out",
                                   "{tmp}/p.json"], "terms"),
    ("plant absurd Wishart", ["plant", "complete:8", "--method", "wishart", "--alpha", "1e308", "--out",
                              "{tmp}/p.json"], "GB"),
    ("plant NaN mix", ["plant", "square:4", "--method", "tiles", "--mix", "nan,1,1", "--out", "{tmp}/p.json"],
     "tile mix"),
    ("plant tiles off lattice", ["plant", "chimera:2", "--method", "tiles", "--out", "{tmp}/p.json"], "lattices"),
    ("plant NaN cap", ["plant", "chimera:2", "--cap", "nan", "--out", "{tmp}/p.json"], "cap"),
    ("plant overflowing loop weights", ["plant", "cubic:2", "--loop-weights", "1e308", "--out", "{tmp}/p.json"],
     "no larger than"),
    ("plant on a tree", ["plant", "complete:2", "--out", "{tmp}/p.json"], "no cycles"),
    ("score absurd reads", ["score", "{tmp}/good.json", "--reads", "1000000000000", "--sweeps", "10"],
     "spin updates"),
    ("score absurd sweeps", ["score", "{tmp}/good.json", "--reads", "10", "--sweeps", "1000000000000"],
     "spin updates"),
    ("score absurd copies", ["score", "{tmp}/good.json", "--perturb", "0.1", "--copies", "1000000000",
                             "--sweeps", "5", "--reads", "4"], "copies"),
    ("score confidence 1", ["score", "{tmp}/good.json", "--confidence", "1"], "confidence"),
    ("score NaN beta", ["score", "{tmp}/good.json", "--beta-range", "nan,1", "--sweeps", "5"], "beta_range"),
    ("score bad option", ["score", "{tmp}/good.json", "--option", "pimc.transverse=-1", "--sampler", "pimc",
                          "--sweeps", "5", "--reads", "4"], "transverse"),
    ("score unknown metric", ["score", "{tmp}/good.json", "--metric", "hardness"], "unknown metric"),
    ("score zero scale", ["score", "{tmp}/good.json", "--scale", "0", "--sweeps", "5"], "scale"),
    ("certify NaN time", ["certify", "{tmp}/good.json", "--time-limit", "nan"], "time_limit"),
    ("certify NaN memory", ["certify", "{tmp}/good.json", "--memory-limit", "nan"], "memory_limit"),
    ("profile too few points", ["profile", "{tmp}/good.json", "--points", "3", "--out", "{tmp}/p"], "at least 6"),
    ("profile infinite field", ["profile", "{tmp}/good.json", "--transverse", "inf", "--out", "{tmp}/p"],
     "transverse"),
    ("profile absurd replicas", ["profile", "{tmp}/good.json", "--reads", "1000000000000", "--out", "{tmp}/p"],
     "spin updates"),
    ("profile into a file", ["profile", "{tmp}/good.json", "--reads", "4", "--sweeps", "60", "--out",
                             "{tmp}/good.json"], "not a folder"),
    ("report of nothing", ["report", "{tmp}/nowhere"], "not a folder"),
    ("report of an empty folder", ["report", "{tmp}/sub"], "neither a run folder"),
    ("report of a file", ["report", "{tmp}/good.json"], "not a folder"),
    ("report of a hollow run summary", ["report", "{tmp}/hollow", "--no-measure"], "run.name is missing"),
    ("unknown command", ["sing"], "invalid choice"),
]


@pytest.mark.parametrize("argv,needle", [c[1:] for c in CLI], ids=[c[0] for c in CLI])
def test_bad_arguments(here, capsys, argv, needle):
    write_doc(here / "good.json", good_doc(graph="chimera:2"))
    (here / "sub").mkdir()
    (here / "hollow").mkdir()
    (here / "hollow" / "summary.json").write_text(json.dumps({
        "format": "instgen-run-summary", "format_version": 1, "run": {}, "winners": [], "baseline": {},
        "comparison": [], "cautions": [], "generations": 1, "evaluations": 1, "elapsed": 1.0}))
    refused([str(a).replace("{tmp}", str(here)) for a in argv], capsys, here, needle)


def test_catalogue_is_large_enough():
    """Issue 10 asks for at least 40 malformed inputs; count them so shrinking the catalogue shows."""
    count = (len(PRESETS) + len(RAW_PRESETS) + 2 + len(BREED_FLAGS) + len(RUN_FOLDERS) + len(INSTANCES)
             + 4 * len(COMMANDS) + len(LIBRARIES) + len(LIBRARY_ARGS) + len(CLI))
    assert count >= 40
    print(f"{count} malformed inputs in the catalogue")


# ------------------------------------------------------------ the real process
@pytest.mark.parametrize("argv,needle", [
    (["info", "{tmp}/cut.json"], "not valid JSON"),
    (["graph", "chimera:4000"], "128,000,000 nodes"),
    (["breed", "{tmp}/preset.toml", "--out", "{tmp}/run"], "unknown key"),
], ids=["truncated file", "absurd graph", "bad preset"])
def test_a_real_process_prints_one_line_and_exits_2(tmp_path, argv, needle):
    """What the shell sees: no warning, log line or traceback beside the message."""
    (tmp_path / "cut.json").write_text(json.dumps(good_doc())[:200])
    (tmp_path / "preset.toml").write_text(preset_text({"search.popsize": "4"}))
    before = snapshot(tmp_path)
    argv = [a.replace("{tmp}", str(tmp_path)) for a in argv]
    r = subprocess.run([sys.executable, "-m", "instgen", *argv], capture_output=True, text=True, cwd=tmp_path,
                       timeout=120)
    assert r.returncode == 2 and r.stdout == ""
    assert r.stderr.count("\n") == 1 and needle in r.stderr, r.stderr
    assert snapshot(tmp_path) == before


def test_a_good_command_passes_the_same_checks(here, capsys):
    """The harness itself: a valid command exits 0, and an edit on disk is noticed."""
    write_doc(here / "good.json", good_doc())
    code, out, err, shown = run(["info", here / "good.json"], capsys)
    assert code == 0 and err == "" and not shown and "spins" in out
    before = snapshot(here)
    (here / "good.json").write_text((here / "good.json").read_text() + " ")
    assert snapshot(here) != before
