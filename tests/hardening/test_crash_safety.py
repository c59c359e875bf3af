"""kill -9 in the middle of the work that takes long: breeding, filing, exporting.

Each test starts the real command in a child process, kills it with SIGKILL
(no clean-up code runs) while it is working, and then checks what a user would
find: breeding resumes and ends exactly where an uninterrupted run ends;
the library verifies and holds every entry reported as added; an export
folder holds only complete files and the library is untouched.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from hardcases import run, snapshot
from instgen.evolve.checkpoint import load_checkpoint
from instgen.export import check_export
from instgen.io import load_instance, save_instance
from instgen.library import Library
from instgen.make import make_instance
from instgen.planted import plant

PRESET = """
[run]
seed = 5
[graph]
spec = "chimera:1"
[fitness]
sweeps = [5, 100]
reads = 32
confirm_reads = 32
[search]
population = 6
generations = 25
elites = 1
workers = 1
winners = 3
[library]
baseline = 0
"""
GENERATIONS = 25


def spawn(*argv, cwd):
    env = {**os.environ, "PYTHONUNBUFFERED": "1"}
    return subprocess.Popen([sys.executable, "-m", "instgen", *map(str, argv)], cwd=cwd, env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def kill(proc):
    """SIGKILL, and prove the process was still working when it came."""
    assert proc.poll() is None, "the command finished before it could be killed: give it more work"
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait(timeout=30)
    assert proc.returncode == -signal.SIGKILL
    proc.stdout.close()
    proc.stderr.close()


def wait_for(condition, proc, timeout=120.0):
    t0 = time.monotonic()
    while not condition():
        if proc.poll() is not None:
            raise AssertionError(f"the command ended early: {proc.stderr.read()}")
        if time.monotonic() - t0 > timeout:
            raise AssertionError("the command made no progress")
        time.sleep(0.01)


def _generation(folder: Path) -> int:
    try:
        return load_checkpoint(folder)["generation"]
    except Exception:  # not written yet
        return -1


def _without_clocks(path: Path) -> list[dict]:
    rows = [json.loads(line) for line in path.read_text().splitlines()]
    for r in rows:
        for key in ("seconds", "evaluations_per_second", "elapsed"):
            r.pop(key, None)
    return rows


def _winners(folder: Path) -> list:
    s = json.loads((folder / "summary.json").read_text())
    return [(w["key"], w["confirmed_fitness"], w["search_fitness"], w["certificate"]["energy"],
             w["certificate"]["status"], load_instance(folder / "winners" / w["file"]).J.tolist())
            for w in s["winners"]]


@pytest.mark.slow
def test_breeding_killed_after_a_checkpoint_resumes_to_the_same_winners(tmp_path, capsys):
    preset = tmp_path / "tiny.toml"
    preset.write_text(PRESET)
    whole, killed = tmp_path / "whole", tmp_path / "killed"
    proc = spawn("breed", preset, "--out", killed, "--no-report", "--quiet", cwd=tmp_path)
    wait_for(lambda: _generation(killed) >= 2, proc)
    kill(proc)
    left = load_checkpoint(killed)  # what the kill left is a whole checkpoint
    assert 2 <= left["generation"] < GENERATIONS and not (killed / "summary.json").exists()
    with open(killed / "log.jsonl", "a") as fh:  # as if the kill had landed while the log was being written
        fh.write('{"generation": ' + str(left["generation"]) + ', "best": 1.')
    assert run(["breed", preset, "--out", whole, "--no-report", "--quiet"], capsys)[0] == 0
    assert run(["breed", preset, "--out", killed, "--resume", "--no-report", "--quiet"], capsys)[0] == 0
    assert _without_clocks(killed / "log.jsonl") == _without_clocks(whole / "log.jsonl")
    assert len(_without_clocks(killed / "log.jsonl")) == GENERATIONS
    assert _winners(killed) == _winners(whole) and _winners(whole)
    assert sorted(p.name for p in (killed / "winners").iterdir()) == \
        sorted(p.name for p in (whole / "winners").iterdir())


def _instance_files(folder: Path, count: int) -> list[Path]:
    """Planted-loop instances (their optimum is known, so every export format carries one to check)."""
    folder.mkdir()
    return [save_instance(plant("chimera:2", "loops", seed=k, density=0.3), folder / f"i{k:03d}.json")
            for k in range(count)]


def _temporary(p: Path) -> bool:
    """The hidden temporary file of an atomic write, left by a kill between its write and its rename."""
    return p.name.startswith(".") and p.name.endswith(".tmp")


@pytest.mark.slow
def test_library_add_killed_midway_leaves_a_library_that_verifies(tmp_path, capsys):
    files = _instance_files(tmp_path / "files", 80)
    root = tmp_path / "lib"
    proc = spawn("library", "add", *files, "--library", root, cwd=tmp_path)
    reported = []
    while len(reported) < 6:
        line = proc.stdout.readline()
        assert line, proc.stderr.read()
        if line.split()[1:2] == ["added"]:
            reported.append(line.split()[0])
    kill(proc)
    with Library.open(root) as lib:
        report = lib.verify()
        assert report.ok, report.problems
        held = {e.id for e in lib.list()}
        assert set(reported) <= held  # every add that reported back is there
        assert len(held) < len(files)  # and the kill really came mid-way
        for e in lib.list():  # nothing half-written: every file is whole and is its entry's instance
            assert e.instance().n == 32
    for p in (root / "entries").iterdir():  # files of unfinished adds: whole, or an atomic write's temporary
        assert _temporary(p) or load_instance(p).n == 32
    assert run(["library", "add", *files, "--library", root], capsys)[0] == 0  # the same files again
    code, out, _, _ = run(["library", "verify", "--tidy", "--library", root], capsys)
    assert code == 0 and "checked 80 entries: OK" in out
    assert all(not _temporary(p) for p in (root / "entries").iterdir())


@pytest.mark.slow
def test_library_export_killed_midway_leaves_only_complete_files(tmp_path, capsys):
    files = _instance_files(tmp_path / "files", 60)
    root = tmp_path / "lib"
    assert run(["library", "add", *files, "--library", root], capsys)[0] == 0
    before = snapshot(root)
    out = tmp_path / "out"
    formats = "json,dimod,ising-mtx,qubo-mtx,edgelist,npz"
    proc = spawn("library", "export", "--all", "--format", formats, "--out", out, "--library", root, cwd=tmp_path)
    wait_for(lambda: out.is_dir() and sum(not _temporary(p) for p in out.iterdir()) >= 12, proc)
    kill(proc)
    written = [p for p in out.iterdir() if not _temporary(p)]
    assert 12 <= len(written) < 6 * 60 + 60  # mid-way (dimod exports carry a second file)
    endings = {".ground.json": None, ".json": "json", ".bqm": "dimod", ".ising.mtx": "ising-mtx",
               ".qubo.mtx": "qubo-mtx", ".txt": "edgelist", ".npz": "npz"}
    for p in written:
        fmt = endings[next(e for e in endings if p.name.endswith(e))]
        if fmt is None:
            json.loads(p.read_text())  # the dimod optimum beside its BQM: whole JSON
            continue
        check = check_export(p, fmt)  # read back with the tool the format is meant for
        assert check.agrees and check.status == "planted", p.name
    assert snapshot(root) == before  # the library is untouched
    with Library.open(root) as lib:
        assert lib.verify().ok
    code, _, _, _ = run(["library", "export", "--all", "--format", formats, "--out", out, "--overwrite",
                         "--library", root], capsys)
    assert code == 0


# ------------------------------------------------------------------ full disk
def _disk_full(*args, **kwargs):
    raise OSError(28, "No space left on device")


@pytest.mark.parametrize("argv", [
    ["certify", "{tmp}/a.json", "--write"],
    ["make", "chimera:1", "--seed", "3", "--out", "{tmp}/a.json"],
    ["library", "add", "{tmp}/b.json", "--library", "{tmp}/lib"],
    ["library", "export", "--all", "--out", "{tmp}/lib-out", "--library", "{tmp}/lib"],
    ["plant", "chimera:1", "--seed", "2", "--out", "{tmp}/a.json"],
], ids=["certify --write", "make over a file", "library add", "library export", "plant over a file"])
def test_a_full_disk_loses_nothing(tmp_path, capsys, monkeypatch, argv):
    """Every write goes through a temporary file; when the disk is full the old file stays and the
    temporary goes (simulated by failing the flush to disk, as a full disk would)."""
    from hardcases import refused

    home = tmp_path / "home"  # watched; the export's target folder sits beside it and may be left empty
    home.mkdir()
    save_instance(make_instance("chimera:1", "pm1", seed=1), home / "a.json")
    save_instance(make_instance("chimera:1", "pm1", seed=2), home / "b.json")
    with Library.open(home / "lib", create=True) as lib:
        lib.add(make_instance("chimera:1", "pm1", seed=1))
    monkeypatch.chdir(home)
    monkeypatch.setattr(os, "fsync", _disk_full)
    argv = [a.replace("{tmp}/lib-out", str(tmp_path / "lib-out")).replace("{tmp}", str(home)) for a in argv]
    refused(argv, capsys, home, "No space left on device")
    out = tmp_path / "lib-out"
    assert not out.exists() or not any(out.iterdir())


@pytest.mark.slow
@pytest.mark.parametrize("where", ["checkpoint", "log"])
def test_a_disk_that_fills_during_breeding_keeps_the_last_checkpoint(tmp_path, capsys, monkeypatch, where):
    """The disk fills after two generations: the run stops with one line, the checkpoint of the last
    finished generation is whole, and --resume (once there is room) finishes the run."""
    import builtins

    import instgen.evolve.engine as engine

    preset = tmp_path / "tiny.toml"
    preset.write_text(PRESET.replace("generations = 25", "generations = 4"))
    out = tmp_path / "run"
    real_fsync, real_open = os.fsync, builtins.open
    full = {"now": False, "once": True}

    def fsync(fd):
        if full["now"]:
            _disk_full()
        return real_fsync(fd)

    def log_open(path, mode="r", *args, **kwargs):  # the run log is appended to, not replaced
        if full["now"] and str(path).endswith("log.jsonl") and "a" in mode:
            _disk_full()
        return real_open(path, mode, *args, **kwargs)

    def progress(record):
        if record["generation"] == 3 and full["once"]:  # the third generation, numbered from 1
            full["now"], full["once"] = True, False

    monkeypatch.setattr(os, "fsync", fsync) if where == "checkpoint" else monkeypatch.setattr(
        engine, "open", log_open, raising=False)
    real_breed = engine.breed
    monkeypatch.setattr(engine, "breed",
                        lambda cfg, out=None, **kw: real_breed(cfg, out, **{**kw, "progress": progress}))
    code, _, err, _ = run(["breed", preset, "--out", out, "--no-report", "--quiet"], capsys)
    assert code == 2 and err.count("\n") == 1 and "No space left on device" in err
    kept = load_checkpoint(out)["generation"]
    # the disk fills while generation 2 is being saved (or generation 3 logged): what stays is the
    # checkpoint of the last generation that finished whole
    assert kept == {"checkpoint": 2, "log": 3}[where]
    full["now"] = False
    code, _, err, _ = run(["breed", preset, "--out", out, "--resume", "--no-report", "--quiet"], capsys)
    assert code == 0, err
    assert len(_without_clocks(out / "log.jsonl")) == 4 and (out / "summary.json").exists()
