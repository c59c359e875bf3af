"""The instance file: our own JSON schema, versioned, written atomically.

Layout (``format_version`` 1)::

    {
      "format": "instgen-instance",
      "format_version": 1,
      "graph": "chimera:4",
      "n": 128,
      "labels": [0, 1, ...],            # ints, strings, or lists for tuple labels
      "edges": [[0, 4], ...],           # spin indices, i < j
      "J": [1.0, -1.0, ...],
      "h": [0.0, ...],
      "planted": [1, -1, ...] or null,
      "metadata": {...},                # construction, rules, scores, certificate
      "provenance": {"tool_version": "...", "created": "...", "seed": ...}
    }

Energies use E(s) = sum h_i s_i + sum J_ij s_i s_j.  Numbers are written with
Python's shortest round-trip repr, so values survive a save/load bit for bit.
Loaders validate everything and raise :class:`FormatError` with a message that
says what is wrong; NaN and infinities are rejected.
"""

from __future__ import annotations

import datetime as _dt
import json
import math
import os
import tempfile
from pathlib import Path

import numpy as np

from .errors import FormatError, InputError, InstgenError, WriteError
from .instance import Instance

FORMAT_NAME = "instgen-instance"
FORMAT_VERSION = 1

#: Upgrades from older versions: version -> function(dict) -> dict of version + 1.
MIGRATIONS: dict[int, callable] = {}


def encodable(text: str) -> bool:
    """True when ``text`` can be written as UTF-8 (no lone surrogates from undecodable bytes).

    >>> encodable("chimera:4"), encodable("bad" + chr(0xDCFF))
    (True, False)
    """
    try:
        text.encode("utf-8")
        return True
    except UnicodeEncodeError:
        return False


def atomic_write(path, data: str | bytes) -> Path:
    """Write ``data`` to ``path`` through a temporary file and a rename.

    A crash leaves either the old file or the new one, never half of one.

    Raises
    ------
    WriteError
        When the file cannot be written (disk full, no permission, a folder
        in the way); the temporary file is removed and the old file is kept.
    """
    path = Path(path)
    mode = "wb" if isinstance(data, bytes) else "w"
    try:
        if path.parent and not path.parent.exists():
            path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    except OSError as exc:
        raise WriteError(f"cannot write {path}: {exc.strerror or exc}; nothing was written") from None
    try:
        os.chmod(tmp, 0o666 & ~_umask())  # mkstemp makes 0600; give the usual permissions
        with os.fdopen(fd, mode) as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException as exc:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        if isinstance(exc, OSError) and not isinstance(exc, WriteError):
            raise WriteError(f"cannot write {path}: {exc.strerror or exc}; "
                             "any file that was there is unchanged") from None
        raise
    return path


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def _now() -> str:
    return _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat()


def _label_out(label):
    return list(label) if isinstance(label, tuple) else label


def instance_to_dict(inst: Instance, provenance: dict | None = None) -> dict:
    from . import __version__

    prov = {"tool_version": __version__, "created": _now()}
    prov.update(inst.metadata.get("provenance", {}))
    prov.update(provenance or {})
    meta = {k: v for k, v in inst.metadata.items() if k != "provenance"}
    return {
        "format": FORMAT_NAME,
        "format_version": FORMAT_VERSION,
        "graph": inst.graph,
        "n": inst.n,
        "labels": [_label_out(x) for x in inst.labels],
        "edges": inst.edges.tolist(),
        "J": inst.J.tolist(),
        "h": inst.h.tolist(),
        "planted": None if inst.planted is None else inst.planted.tolist(),
        "metadata": meta,
        "provenance": prov,
    }


def _reject_constant(name):
    raise FormatError(f"the file holds {name}, which is not a finite number")


def _finite_float(text):
    value = float(text)
    if not math.isfinite(value):  # 1e999 reads as infinity: refused like the word Infinity
        _reject_constant(text)
    return value


def _upgrade(doc: dict, where: str) -> dict:
    version = doc.get("format_version")
    if not isinstance(version, int) or isinstance(version, bool):
        raise FormatError(f"{where}: 'format_version' is missing or not a whole number")
    if version > FORMAT_VERSION:
        raise FormatError(f"{where} is format_version {version}, newer than this instgen reads "
                          f"({FORMAT_VERSION}); upgrade instgen to read it")
    while version < FORMAT_VERSION:
        if version not in MIGRATIONS:
            raise FormatError(f"{where}: format_version {version} is not supported")
        doc = MIGRATIONS[version](doc)
        version = doc["format_version"]
    return doc


def instance_from_dict(doc, where: str = "instance") -> Instance:
    """Validate a parsed instance document and build the Instance."""
    if not isinstance(doc, dict):
        raise FormatError(f"{where}: expected a JSON object at the top level")
    if doc.get("format") != FORMAT_NAME:
        raise FormatError(f"{where}: not an instgen instance file (field 'format' is {doc.get('format')!r})")
    doc = _upgrade(doc, where)
    required = ("n", "labels", "edges", "J", "h")
    missing = [k for k in required if k not in doc]
    if missing:
        raise FormatError(f"{where}: missing field(s) {', '.join(missing)}")
    n = doc["n"]
    if not isinstance(n, int) or isinstance(n, bool) or n < 1:
        raise FormatError(f"{where}: 'n' must be a positive whole number (an instance needs at least one spin)")
    for key in ("labels", "edges", "J", "h"):
        if not isinstance(doc[key], list):
            raise FormatError(f"{where}: '{key}' must be a list")
    labels = [tuple(x) if isinstance(x, list) else x for x in doc["labels"]]
    if any(not isinstance(x, (int, str, tuple)) or isinstance(x, bool) for x in labels):
        raise FormatError(f"{where}: labels must be whole numbers, strings or lists")
    if len(labels) != n:
        raise FormatError(f"{where}: {len(labels)} labels for n = {n} spins")
    try:
        edges = np.array(doc["edges"], dtype=np.int64).reshape(-1, 2) if doc["edges"] else np.zeros((0, 2), np.int64)
        if doc["edges"] and any(not isinstance(e, list) or len(e) != 2 for e in doc["edges"]):
            raise ValueError
        if doc["edges"] and not all(isinstance(x, int) and not isinstance(x, bool) for e in doc["edges"] for x in e):
            raise ValueError
    except (ValueError, TypeError, OverflowError):
        raise FormatError(f"{where}: 'edges' must be a list of [i, j] pairs of whole numbers") from None
    for key in ("J", "h"):
        if not all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in doc[key]):
            raise FormatError(f"{where}: '{key}' must hold numbers only")
    planted = doc.get("planted")
    if planted is not None and (not isinstance(planted, list) or any(x not in (-1, 1) or isinstance(x, bool) for x in planted)):
        raise FormatError(f"{where}: 'planted' must be a list of -1/+1 values or null")
    meta = doc.get("metadata", {})
    if not isinstance(meta, dict):
        raise FormatError(f"{where}: 'metadata' must be an object")
    _check_metadata(meta, n, where)
    _check_text([doc.get("graph"), doc["labels"], meta, doc.get("provenance")], where)
    prov = doc.get("provenance", {})
    if not isinstance(prov, dict):
        raise FormatError(f"{where}: 'provenance' must be an object")
    graph = doc.get("graph", "")
    if not isinstance(graph, str):
        raise FormatError(f"{where}: 'graph' must be a string")
    try:
        return Instance(edges=edges, J=doc["J"], h=doc["h"], n=n, labels=labels, graph=graph,
                        planted=planted, metadata={**meta, "provenance": prov})
    except InputError as exc:
        raise FormatError(f"{where}: {exc}") from None


def _check_text(items, where: str) -> None:
    """Every string (and key) must be real Unicode: JSON's escapes can spell a lone surrogate, which
    no file, terminal or database can hold."""
    stack = list(items)
    while stack:
        x = stack.pop()
        if isinstance(x, str):
            if not x.isascii():
                try:
                    x.encode("utf-8")
                except UnicodeEncodeError:
                    raise FormatError(f"{where}: holds text that is not valid Unicode "
                                      f"(a lone surrogate escape in {x!r})") from None
        elif isinstance(x, dict):
            stack.extend(x.keys())
            stack.extend(x.values())
        elif isinstance(x, (list, tuple)):
            stack.extend(x)


def _check_metadata(meta: dict, n: int, where: str) -> None:
    """The metadata keys instgen reads back (see DEVELOPERS.md) must have their documented shapes."""
    from .couplings import CouplingRules
    from .records import Certificate

    def bad(key, what):
        raise FormatError(f"{where}: metadata '{key}' {what}")

    rules = meta.get("rules")
    if rules is not None:
        if not isinstance(rules, dict):
            bad("rules", "must be an object of coupling rules")
        try:
            CouplingRules.from_dict(rules)
        except (InstgenError, TypeError) as exc:
            bad("rules", f"is not a valid set of coupling rules ({exc})")
    cert = meta.get("certificate")
    if cert is not None:
        if not isinstance(cert, dict) or not {"energy", "state", "method", "status"} <= set(cert):
            bad("certificate", "must be an object with energy, state, method and status")
        energy, state = cert["energy"], cert["state"]
        if isinstance(energy, bool) or not isinstance(energy, (int, float)) or not np.isfinite(energy):
            bad("certificate", "must hold a finite energy")
        if (not isinstance(state, list) or len(state) != n
                or any(isinstance(x, bool) or x not in (-1, 1) for x in state)):
            bad("certificate", f"must hold a state of {n} values of -1 or +1")
        if isinstance(cert["status"], str) and cert["status"] in Certificate.LEGACY:
            cert["status"] = Certificate.LEGACY[cert["status"]]
        if cert["status"] not in Certificate.STATUSES or not isinstance(cert["method"], str):
            bad("certificate", f"must have a status among {', '.join(Certificate.STATUSES)} and a method name")
    scores = meta.get("scores")
    if scores is not None and (not isinstance(scores, list)
                               or any(not isinstance(s, dict) or not isinstance(s.get("metric"), str) for s in scores)):
        bad("scores", "must be a list of score records, each naming its metric")
    tags = meta.get("tags")
    if tags is not None and (not isinstance(tags, list) or any(not isinstance(t, str) for t in tags)):
        bad("tags", "must be a list of strings")
    con = meta.get("construction")
    if con is not None and not isinstance(con, dict):
        bad("construction", "must be an object")


def loads_instance(text: str, where: str = "instance") -> Instance:
    try:
        doc = json.loads(text, parse_constant=_reject_constant, parse_float=_finite_float)
    except FormatError as exc:
        raise FormatError(f"{where}: {exc}") from None
    except json.JSONDecodeError as exc:
        raise FormatError(f"{where} is not valid JSON (truncated or damaged?): {exc.msg} at line {exc.lineno}") from None
    except RecursionError:
        raise FormatError(f"{where} is nested too deeply to be an instance file") from None
    return instance_from_dict(doc, where)


def load_instance(path) -> Instance:
    """Read an instance file, validating it.

    Raises
    ------
    FormatError
        When the file is missing, damaged, of a newer version, or inconsistent.
    """
    path = Path(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise FormatError(f"{path}: no such file") from None
    except IsADirectoryError:
        raise FormatError(f"{path} is a folder, not an instance file") from None
    except OSError as exc:
        raise FormatError(f"{path}: cannot read ({exc.strerror})") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise FormatError(f"{path} is not a text (UTF-8) file") from None
    return loads_instance(text, str(path))


def dumps_instance(inst: Instance, provenance: dict | None = None) -> str:
    try:
        return json.dumps(instance_to_dict(inst, provenance), separators=(",", ":"), allow_nan=False) + "\n"
    except (ValueError, TypeError) as exc:  # NaN, infinity or an object JSON cannot hold, in the metadata
        raise InputError(f"the instance's metadata cannot be written as JSON ({exc})") from None


def save_instance(inst: Instance, path, provenance: dict | None = None) -> Path:
    """Write an instance file atomically; returns the path."""
    return atomic_write(path, dumps_instance(inst, provenance))
