"""Checkpoints: the whole state of a run after a generation, in our own JSON.

Written atomically after every generation, so a killed run loses at most the
generation in flight.  Holds genomes, pooled measurements, fitnesses, the hall
of fame, the history and the random generator's state; ``--resume`` continues
exactly where the run stopped.  No pickle: everything is plain JSON.
"""

from __future__ import annotations

import json
from pathlib import Path

from ..errors import FormatError
from ..io import atomic_write

FORMAT_NAME = "instgen-checkpoint"
FORMAT_VERSION = 1
FILENAME = "checkpoint.json"


def save_checkpoint(folder, state: dict) -> Path:
    doc = {"format": FORMAT_NAME, "format_version": FORMAT_VERSION, **state}
    return atomic_write(Path(folder) / FILENAME, json.dumps(doc, separators=(",", ":")))


def load_checkpoint(folder) -> dict:
    path = Path(folder) / FILENAME
    try:
        doc = json.loads(path.read_text())
    except FileNotFoundError:
        raise FormatError(f"{path}: no checkpoint to resume from (was the run started with this --out?)") from None
    except OSError as exc:
        raise FormatError(f"{path}: cannot read the checkpoint ({exc.strerror or exc})") from None
    except (json.JSONDecodeError, UnicodeDecodeError, RecursionError):
        raise FormatError(f"{path} is damaged (not valid JSON); start the run again with another --out") from None
    if not isinstance(doc, dict) or doc.get("format") != FORMAT_NAME:
        raise FormatError(f"{path} is not an instgen checkpoint")
    if doc.get("format_version") != FORMAT_VERSION:
        raise FormatError(f"{path} is checkpoint format {doc.get('format_version')}; this instgen reads {FORMAT_VERSION}")
    return doc
