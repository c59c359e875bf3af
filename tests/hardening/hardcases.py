"""Shared helpers for the hardening tests: run a command, prove that nothing on disk changed.

A refusal is judged the way a user meets it: exit code 2, exactly one line on
stderr that names the problem, no traceback, no warning printed beside it, and
every file and folder under the watched root exactly as it was (bytes,
modification times and the listing itself).
"""

from __future__ import annotations

import hashlib
import json
import shutil
import warnings
from pathlib import Path

from instgen.cli import main
from instgen.io import dumps_instance
from instgen.library import Library
from instgen.make import make_instance

#: Warning kinds Python prints on stderr for a command-line user (the others are hidden by default).
SHOWN = (RuntimeWarning, UserWarning, SyntaxWarning, BytesWarning, FutureWarning)

#: SQLite's side files: they come and go with every connection, holding nothing once it closes.
SIDE_FILES = ("-wal", "-shm", "-journal")


def snapshot(root) -> dict:
    """Every path under ``root``: files with SHA-256 and mtime, folders as themselves."""
    root = Path(root)
    out = {}
    for p in sorted(root.rglob("*")):
        key = str(p.relative_to(root))
        if p.is_dir():
            out[key] = "folder"
        elif p.name.endswith(SIDE_FILES):
            continue
        else:
            out[key] = (hashlib.sha256(p.read_bytes()).hexdigest(), p.stat().st_mtime_ns)
    return out


def run(argv, capsys):
    """Run the command line in this process; returns (exit code, stdout, stderr, shown warnings)."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            code = main([str(a) for a in argv])
        except SystemExit as exc:  # argparse's own refusals
            code = exc.code
    out = capsys.readouterr()
    shown = [w for w in caught if issubclass(w.category, SHOWN)]
    return code, out.out, out.err, shown


def refused(argv, capsys, root, needle: str) -> str:
    """Assert the command is refused cleanly and changes nothing under ``root``; returns the line."""
    before = snapshot(root)
    code, out, err, shown = run(argv, capsys)
    assert code == 2, f"exit {code}\nstdout: {out}\nstderr: {err}"
    assert err.endswith("\n") and err.count("\n") == 1, f"not one line on stderr:\n{err}"
    assert "Traceback" not in err
    assert needle.lower() in err.lower(), f"{needle!r} not in: {err}"
    assert not shown, f"warnings printed beside the error: {[str(w.message) for w in shown]}"
    assert snapshot(root) == before, "files changed on disk"
    return err


def good_doc(graph="chimera:1", seed=1) -> dict:
    """A valid instance file's document (made and written by instgen itself)."""
    return json.loads(dumps_instance(make_instance(graph, "pm1", seed=seed)))


def write_doc(path, doc) -> Path:
    path = Path(path)
    path.write_text(json.dumps(doc))
    return path


def make_library(root, count: int = 3, graph: str = "chimera:1") -> Path:
    """A library of ``count`` random instances, filed through the Python API."""
    root = Path(root)
    with Library.open(root, create=True) as lib:
        for k in range(count):
            lib.add(make_instance(graph, "gaussian", seed=100 + k))
    return root


def copy_tree(src, dst) -> Path:
    shutil.copytree(src, dst)
    return Path(dst)


__all__ = ["snapshot", "run", "refused", "good_doc", "write_doc", "make_library", "copy_tree"]
