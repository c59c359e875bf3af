"""Suites: stratified picks, checksum manifest, and re-checking on another machine."""

import csv
import hashlib
import json
import shutil
import subprocess

import numpy as np
import pytest
from libcases import unfrustrated

from instgen.errors import InputError
from instgen.library import Library, make_suite, verify_suite
from instgen.make import make_instance
from instgen.records import Score

SIZES = {"chimera:1": 8, "chimera:2": 32, "chimera:3": 72}


@pytest.fixture(scope="module")
def lib(tmp_path_factory):
    rng = np.random.default_rng(0)
    with Library.open(tmp_path_factory.mktemp("suite") / "lib", create=True) as library:
        for graph in SIZES:
            for seed in range(10):
                inst = unfrustrated(graph, seed=seed)
                scores = [Score("tts", float(10 ** rng.uniform(1, 5)), solver="sa").to_dict(),
                          Score("tts", float(10 ** rng.uniform(1, 5)), solver="pt").to_dict()]
                library.add(inst.replace(metadata={**inst.metadata, "scores": scores}))
        for seed in range(5):  # no certificate: never picked by default; two without measurements
            inst = make_instance("chimera:2", "gaussian", seed=seed)
            scores = [Score("tts", 10.0 ** seed, solver="sa").to_dict()] if seed < 3 else []
            library.add(inst.replace(metadata={**inst.metadata, "scores": scores}))
        yield library


def sha256(path):
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_suite_of_12_is_stratified_and_checkable(lib, tmp_path):
    out = tmp_path / "suite"
    result = make_suite(lib, 12, out, metric="tts", solver="sa", size_groups=4, formats=["json", "qubo-mtx"])
    picks = result.picks
    assert len(picks) == 12 and all(p.entry.certified for p in picks)
    # three sizes, shared evenly
    assert sorted(p.entry.n for p in picks) == sorted(list(SIZES.values()) * 4)
    for n in SIZES.values():
        group = [e.latest("tts", "sa").value for e in lib.list(certified=True) if e.n == n]
        chosen = [p.value for p in picks if p.entry.n == n]
        # the picks span the group's hardness range: quartiles computed by numpy
        assert min(chosen) <= np.percentile(group, 25) and max(chosen) >= np.percentile(group, 75)
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["count"] == 12 and manifest["metric"] == "tts"
    for rel, digest in manifest["files"].items():
        assert sha256(out / rel) == digest  # hashlib's SHA-256 of each file
    with open(out / "table.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == 12 and {"tts[sa]", "tts[pt]", "optimum", "hardness_quantile"} <= set(rows[0])
    assert all(r["optimum_status"] == "proven" for r in rows)
    summary = (out / "summary.txt").read_text()
    assert "12 instances" in summary and "12 planted or proven" in summary and "not proven" not in summary
    assert verify_suite(out).ok
    # on another machine: the folder alone, moved elsewhere, with the library gone
    moved = shutil.copytree(out, tmp_path / "elsewhere" / "suite")
    shutil.rmtree(out)
    report = verify_suite(moved)
    assert report.ok and report.checked == 12 and report.notes == []


@pytest.mark.skipif(shutil.which("sha256sum") is None, reason="coreutils sha256sum not installed")
def test_sha256sum_accepts_the_checksum_file(lib, tmp_path):
    out = tmp_path / "suite"
    make_suite(lib, 3, out)
    r = subprocess.run(["sha256sum", "-c", "sha256sums.txt"], cwd=out, capture_output=True, text=True)
    assert r.returncode == 0, r.stdout + r.stderr


def test_the_pick_is_deterministic_and_marks_the_not_proven(lib, tmp_path):
    a = make_suite(lib, 6, tmp_path / "a", metric="tts")
    b = make_suite(lib, 6, tmp_path / "b", metric="tts")
    assert [p.entry.fingerprint for p in a.picks] == [p.entry.fingerprint for p in b.picks]
    c = make_suite(lib, 33, tmp_path / "c", include_not_proven=True)
    summary = (tmp_path / "c" / "summary.txt").read_text()
    assert "3 not proven" in summary and "2 matching entries have no tts measurement" in summary
    with open(tmp_path / "c" / "table.csv", newline="") as fh:
        assert sum(r["optimum_status"] == "no certificate" for r in csv.DictReader(fh)) == 3


def test_check_suite_catches_tampering_and_missing_files(lib, tmp_path):
    out = tmp_path / "suite"
    result = make_suite(lib, 4, out, formats=["json", "edgelist"])
    inst_files = sorted((out / "instances").glob("*.json"))
    doc = json.loads(inst_files[0].read_text())
    doc["J"][0] = -doc["J"][0]
    inst_files[0].write_text(json.dumps(doc))
    next((out / "instances").glob("*.txt")).unlink()
    report = verify_suite(out)
    text = "\n".join(report.problems)
    assert not report.ok and "does not match its checksum" in text and "is missing" in text
    assert "different instance" in text
    assert result.directory == out


def test_refusals(lib, tmp_path):
    with pytest.raises(InputError, match="at most 30"):
        make_suite(lib, 31, tmp_path / "x")
    assert not (tmp_path / "x").exists() or not any((tmp_path / "x").iterdir())
    busy = tmp_path / "busy"
    busy.mkdir()
    (busy / "keep.txt").write_text("mine")
    with pytest.raises(InputError, match="not empty"):
        make_suite(lib, 2, busy)
    assert [p.name for p in busy.iterdir()] == ["keep.txt"]
    with pytest.raises(InputError, match="no manifest"):
        verify_suite(busy)


def fake_entry(n, value, k):
    from pathlib import Path

    from instgen.library import Entry

    return Entry(fingerprint=f"{n:04x}{k:060x}", graph="g", n=n, m=0, couplings=None, fields=None,
                 has_fields=False, certificate=None, scores=[Score("tts", value)], tags=[], provenance={},
                 construction=None, rules=None, created=None, added="", path=Path("x"), sha256="")


def test_many_sizes_are_grouped_with_their_neighbours_and_shares_follow_availability():
    from instgen.library import pick_stratified

    entries = [fake_entry(n, float(k), k) for n in range(10, 90, 10) for k in range(5)]
    picks, _ = pick_stratified(entries, 8, size_groups=4)
    groups = {}
    for p in picks:
        groups.setdefault(p.size_group, set()).add(p.entry.n)
    assert sorted(map(sorted, groups.values())) == [[10, 20], [30, 40], [50, 60], [70, 80]]
    uneven = [fake_entry(8, 1.0, 0), fake_entry(32, 1.0, 0)] + [fake_entry(72, float(k), k) for k in range(10)]
    picks, _ = pick_stratified(uneven, 6)
    assert sorted(p.entry.n for p in picks) == [8, 32, 72, 72, 72, 72]
    # evenly spaced quantiles of the ten n = 72 values 0..9: the middles of four equal slices
    assert sorted(p.value for p in picks if p.entry.n == 72) == [1.0, 3.0, 6.0, 8.0]
