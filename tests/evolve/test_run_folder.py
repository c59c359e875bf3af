"""A run folder a newcomer can find their way in: winner file names, resuming, --out."""

import json
import sqlite3

import pytest

from instgen.evolve.engine import breed
from instgen.preset import validate
from instgen.testing.cli import run_cli


def tiny(tmp_path, **tables):
    raw = {
        "run": {"seed": 4, "out": str(tmp_path / "run")},
        "graph": {"spec": "chimera:1"},
        "fitness": {"sampler": "sa", "sweeps": [5, 50], "reads": 16, "confirm_reads": 32},
        "search": {"population": 6, "generations": 2, "elites": 1, "workers": 1, "winners": 3},
        "library": {"baseline": 0, "time_limit": 5},
    }
    for table, values in tables.items():
        raw.setdefault(table, {}).update(values)
    return validate(raw)


def test_winner_files_are_named_by_the_library_fingerprint(tmp_path):
    cfg = tiny(tmp_path, library={"path": str(tmp_path / "lib")})
    summary = breed(cfg, tmp_path / "run")
    names = sorted(p.name for p in (tmp_path / "run" / "winners").iterdir())
    assert names and len(names) == len(summary["winners"])
    # The library's own index, read with Python's sqlite3: every entry's fingerprint begins with the short
    # id in one winner file's name (rank, dash, the first 12 hex digits: the id `library list` shows).
    with sqlite3.connect(tmp_path / "lib" / "index.sqlite") as db:
        fingerprints = [row[0] for row in db.execute("SELECT fingerprint FROM entries")]
    ids = sorted(name.split("-", 1)[1].removesuffix(".json") for name in names)
    assert all(len(i) == 12 for i in ids)
    assert ids == sorted(fp[:12] for fp in fingerprints)
    assert [int(name[:2]) for name in names] == list(range(1, len(names) + 1))


# ------------------------------------------------------------------ resuming
PRESET = """[run]
seed = 4
out = "{out}"
[graph]
spec = "chimera:1"
[fitness]
sampler = "sa"
sweeps = [5, 50]
reads = 16
confirm_reads = 32
[search]
population = 6
generations = 1
elites = 1
workers = 1
winners = 2
[library]
baseline = 0
time_limit = 5
"""


run = run_cli


def _started(tmp_path, capsys):
    preset = tmp_path / "p.toml"
    preset.write_text(PRESET.format(out=tmp_path / "default"))
    out = tmp_path / "A" / "run"
    code, _, err = run(["breed", preset, "--out", out, "--graph", "chimera:2", "--quiet", "--no-report"], capsys)
    assert code == 0, err
    return preset, out


def test_resume_with_other_settings_names_them_and_the_run_folders_preset(tmp_path, capsys):
    preset, out = _started(tmp_path, capsys)
    code, _, err = run(["breed", preset, "--out", out, "--resume", "--generations", "2", "--quiet", "--no-report",
                        "--set", "fitness.reads=8"], capsys)
    assert code == 2 and err.count("\n") == 1
    assert '[graph] spec was "chimera:2", now "chimera:1"' in err and "[fitness] reads was 16, now 8" in err
    assert f"{out / 'preset.toml'} --out {out} --resume" in err
    # the run folder's own preset.toml resumes it, and so does the original preset with the same flags
    assert run(["breed", out / "preset.toml", "--out", out, "--resume", "--generations", "2", "--quiet",
                "--no-report"], capsys)[0] == 0
    assert run(["breed", preset, "--out", out, "--graph", "chimera:2", "--resume", "--generations", "3",
                "--quiet", "--no-report"], capsys)[0] == 0
    # (Python's json reads the log: one line per generation, three in all)
    assert len((out / "log.jsonl").read_text().splitlines()) == 3


def test_an_older_checkpoint_without_settings_still_names_the_difference(tmp_path, capsys):
    preset, out = _started(tmp_path, capsys)
    doc = json.loads((out / "checkpoint.json").read_text())
    del doc["settings"]  # as checkpoints were written before they stored their settings
    (out / "checkpoint.json").write_text(json.dumps(doc))
    code, _, err = run(["breed", preset, "--out", out, "--resume", "--generations", "2", "--quiet", "--no-report"],
                       capsys)
    assert code == 2 and '[graph] spec was "chimera:2", now "chimera:1"' in err
    assert run(["breed", preset, "--out", out, "--graph", "chimera:2", "--resume", "--generations", "2", "--quiet",
                "--no-report"], capsys)[0] == 0


# ------------------------------------------------------------------ --out and the library
def _preset_with_library(tmp_path, library):
    text = PRESET.format(out="outputs/chip") + f'path = "{library}"\n'
    (tmp_path / "p.toml").write_text(text)
    return tmp_path / "p.toml"


def _is_library(folder) -> bool:
    # the library's index, opened with Python's sqlite3: it holds the entries table
    with sqlite3.connect(folder / "index.sqlite") as db:
        return db.execute("SELECT count(*) FROM entries").fetchone()[0] >= 1


def test_out_moves_a_library_kept_inside_the_presets_run_folder(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    preset = _preset_with_library(tmp_path, "outputs/chip/library")
    code, _, err = run(["breed", preset, "--out", "A/run", "--quiet", "--no-report"], capsys)
    assert code == 0, err
    assert _is_library(tmp_path / "A" / "run" / "library") and not (tmp_path / "outputs").exists()
    summary = json.loads((tmp_path / "A" / "run" / "summary.json").read_text())
    assert summary["library"]["path"] == "A/run/library"


def test_out_leaves_a_library_outside_the_run_folder_and_an_explicit_library_where_they_are(tmp_path, capsys,
                                                                                            monkeypatch):
    monkeypatch.chdir(tmp_path)
    preset = _preset_with_library(tmp_path, "shared/lib")
    assert run(["breed", preset, "--out", "A/run", "--quiet", "--no-report"], capsys)[0] == 0
    assert _is_library(tmp_path / "shared" / "lib") and not (tmp_path / "A" / "run" / "library").exists()
    preset = _preset_with_library(tmp_path, "outputs/chip/library")
    assert run(["breed", preset, "--out", "B/run", "--library", "outputs/chip/library", "--quiet", "--no-report"],
               capsys)[0] == 0
    assert _is_library(tmp_path / "outputs" / "chip" / "library") and not (tmp_path / "B" / "run" / "library").exists()


def test_breed_help_says_where_the_library_goes_with_out(capsys):
    code, out, _ = run(["breed", "--help"], capsys)
    assert code == 0 and "[library] path inside the preset's" in " ".join(out.split())
