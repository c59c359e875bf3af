"""A run folder a newcomer can find their way in: hall-of-fame names, resuming, --out."""

import json
import sqlite3

import pytest

from instgen.evolve.engine import breed
from instgen.preset import validate


def tiny(tmp_path, **tables):
    raw = {
        "run": {"seed": 4, "output": str(tmp_path / "run")},
        "graph": {"spec": "chimera:1"},
        "fitness": {"sampler": "sa", "sweeps": [5, 50], "reads": 16, "confirm_reads": 32},
        "search": {"population": 6, "generations": 2, "elites": 1, "workers": 1},
        "library": {"baseline": 0, "count": 3, "time_limit": 5},
    }
    for table, values in tables.items():
        raw.setdefault(table, {}).update(values)
    return validate(raw)


def test_hall_of_fame_files_are_named_by_the_library_fingerprint(tmp_path):
    cfg = tiny(tmp_path, library={"path": str(tmp_path / "lib")})
    summary = breed(cfg, tmp_path / "run")
    names = sorted(p.name for p in (tmp_path / "run" / "hall_of_fame").iterdir())
    assert names and len(names) == len(summary["winners"])
    # The library's own index, read with Python's sqlite3: every entry's fingerprint begins with the short
    # id in one hall-of-fame file's name (rank, dash, the first 12 hex digits: the id `library list` shows).
    with sqlite3.connect(tmp_path / "lib" / "index.sqlite") as db:
        fingerprints = [row[0] for row in db.execute("SELECT fingerprint FROM entries")]
    ids = sorted(name.split("-", 1)[1].removesuffix(".json") for name in names)
    assert all(len(i) == 12 for i in ids)
    assert ids == sorted(fp[:12] for fp in fingerprints)
    assert [int(name[:2]) for name in names] == list(range(1, len(names) + 1))
